"""What the datasheet limits: the compared quantity of each term with a limit, the terms that
are not verified and why, the model the limits imply, and what is fitted to verify a channel
(private to :mod:`sensormodel.acceptance`)."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from ..convert import axis_terms
from ..datasheet import FIELDS, AxisSpec
from ..errors import AnalysisError
from ..model import Channel
from ..quantities import INSTRUMENT_KIND, SI_LABEL
from ..terms import FLICKER_FLOOR_FACTOR, gauss_markov_peak

__all__ = [
    "SpecLimit",
    "Unverified",
    "spec_limits",
    "limit_channel",
    "limited_share",
    "declared_ranges",
    "UNLIMITED_SHARE_MAX",
    "fit_terms",
    "output_filter",
]


#: The whole-curve check judges a τ only where terms printed without a limit (typ only) make at
#: most this share of the datasheet curve's Allan variance at their typical values (the
#: project's own rule: there the typical value cannot move the curve by more than ~2.5 % in
#: Allan deviation).
UNLIMITED_SHARE_MAX = 0.05


@dataclass(frozen=True)
class SpecLimit:
    """One datasheet term with a limit, as the quantity that is compared.

    Attributes
    ----------
    channel : str
        Channel id, e.g. ``gyro.z``.
    key : str
        Datasheet key, e.g. ``bias_instability``.
    field : str
        Where it is on the datasheet, e.g. ``gyro.z.bias_instability``.
    type : str
        The model term it produces (``white``, ``flicker``, ``gauss_markov``, ``random_walk``,
        ``quantization``, ``ramp``).
    quantity : str
        What is compared: ``density``, ``allan_floor``, ``coefficient`` or ``slope``.
    limit : float
        The limit in SI, as ``quantity`` (see :attr:`unit`).
    unit : str
        SI unit of ``limit``, e.g. ``rad/s*s**0.5``.
    text : str
        The value as printed on the datasheet.
    column : str
        ``max`` or ``typ``.
    kind : str
        The datasheet key's kind of quantity (:data:`sensormodel.quantities.KINDS`).
    display_scale : float
        Factor from the compared SI value to the datasheet's printed convention (√2 for a
        one-sided density, 1/0.6643 for a bias-instability coefficient, √12 for a quantization
        step, else 1).
    """

    channel: str
    key: str
    field: str
    type: str
    quantity: str
    limit: float
    unit: str
    text: str
    column: str
    kind: str
    display_scale: float = 1.0


@dataclass(frozen=True)
class Unverified:
    """A datasheet term that is not verified, and why.

    Attributes
    ----------
    channel, key, field, text : str
        Channel id, datasheet key, its place on the datasheet and the value as printed.
    reason : str
        Reason code: ``single_run`` (bias repeatability: needs several turn-ons) or
        ``no_limit_column`` (the datasheet prints no value in the verified column).
    values : dict
        The numbers and names the reason refers to (``against``, ``column`` for
        ``no_limit_column``); :mod:`sensormodel.report` turns code and values into a sentence.
    """

    channel: str
    key: str
    field: str
    text: str
    reason: str
    values: Mapping[str, Any] = field(default_factory=dict)


_QUANTITY = {
    "white": ("density", "u*s**0.5"),
    "flicker": ("allan_floor", "u"),
    "gauss_markov": ("allan_floor", "u"),
    "random_walk": ("density", "u/s**0.5"),
    "quantization": ("coefficient", "u*s"),
    "ramp": ("slope", "u/s"),
}


def _compared_value(term: Any) -> float:
    """The compared quantity of a model term (SI)."""
    if term.type == "white":
        return term.density
    if term.type == "flicker":
        return term.coefficient * FLICKER_FLOOR_FACTOR
    if term.type == "gauss_markov":
        return term.peak()[1]
    if term.type == "random_walk":
        return term.density
    if term.type == "quantization":
        return term.coefficient
    if term.type == "ramp":
        return term.slope
    raise AnalysisError(f"term type {term.type!r} has no acceptance rule")  # pragma: no cover


def _display_scale(ax: AxisSpec, key: str) -> float:
    conv = ax.conventions
    if key == "noise_density" and conv.get("density_is") == "one-sided":
        return math.sqrt(2.0)
    if key == "bias_instability" and conv.get("bias_instability_is") == "coefficient":
        return 1.0 / FLICKER_FLOOR_FACTOR
    if key == "quantization" and conv.get("quantization_is") == "step":
        return math.sqrt(12.0)
    return 1.0


def spec_limits(
    ax: AxisSpec, *, against: str = "max", include_other: bool = False
) -> tuple[list[SpecLimit], list[Unverified]]:
    """The limits of one channel's datasheet terms, and the terms that are not verified.

    Parameters
    ----------
    ax : AxisSpec
        One channel of a :class:`~sensormodel.datasheet.Datasheet`.
    against : {"max", "typ"}
        Which column is the limit. A term printed without that column is not verified (it is
        listed with the reason).
    include_other : bool
        Return such terms as limits too, at the other column's value (``column`` tells), for
        information (:func:`plan` shows what verifying them would take).

    Returns
    -------
    (list of SpecLimit, list of Unverified)
    """
    if against not in ("max", "typ"):
        raise AnalysisError(f"against = {against!r}", "'max' or 'typ'", field="against")
    terms, _notes = axis_terms(ax, basis=against)
    si_unit = SI_LABEL[INSTRUMENT_KIND[ax.instrument]]
    limits: list[SpecLimit] = []
    skipped: list[Unverified] = []
    for term in terms:
        ds = term.meta.get("datasheet", {})
        origin = ds.get("field", "")
        key = origin.rsplit(".", 1)[-1]
        text = ds.get("text", "")
        if term.type == "random_constant":
            skipped.append(Unverified(ax.channel_id, key, origin, text, "single_run"))
            continue
        if ds.get("column") != against and not include_other:
            values = {"against": against, "column": ds.get("column")}
            skipped.append(Unverified(ax.channel_id, key, origin, text, "no_limit_column", values))
            continue
        quantity, rel = _QUANTITY[term.type]
        limits.append(
            SpecLimit(
                channel=ax.channel_id,
                key=key,
                field=origin,
                type=term.type,
                quantity=quantity,
                limit=_compared_value(term),
                unit=rel.replace("u", f"({si_unit})"),
                text=text,
                column=ds.get("column", against),
                kind=FIELDS[ax.instrument][key].kind,
                display_scale=_display_scale(ax, key),
            )
        )
    return limits, skipped


def limit_channel(ax: AxisSpec, *, rate: float, against: str = "max") -> Any:
    """The channel model the datasheet's limits imply (terms at their ``against`` values, the
    other column where a term has none), at the recording's ``rate``."""
    terms, _ = axis_terms(ax, basis=against)
    quantity = INSTRUMENT_KIND[ax.instrument]
    unit = SI_LABEL[quantity]
    return Channel(
        id=ax.channel_id,
        quantity=quantity,
        unit=unit,
        sample_rate=rate,
        terms=tuple(t for t in terms if t.type != "random_constant"),
    )


def declared_ranges(datasheet: Any) -> dict[str, float]:
    """{channel id: full scale [SI]} of the channels whose datasheet prints a
    ``measurement_range`` (its typical value, or its max where only that is printed): the range
    a recording is checked against for saturation
    (:func:`sensormodel.recording.read_recording` ``ranges``)."""
    return {
        ax.channel_id: float(ax.values["measurement_range"].pick("typ")[0])
        for ax in datasheet.channels()
        if "measurement_range" in ax.values
    }


def limited_share(
    ax: AxisSpec, tau: npt.ArrayLike, *, rate: float, against: str = "max"
) -> npt.NDArray[np.float64]:
    """Share of the datasheet curve's Allan variance at ``tau`` [s] that comes from terms
    printed with an ``against`` value (1 where every term has one).

    :func:`limit_channel` fills a term without that column with its other value (a typ-only
    bias instability at its typ); such a value is not a limit, so the whole-curve check judges
    only the τ where the limited terms make the curve (:data:`UNLIMITED_SHARE_MAX`).
    """
    full = limit_channel(ax, rate=rate, against=against)
    limited = replace(
        full,
        terms=tuple(t for t in full.terms if t.meta.get("datasheet", {}).get("column") == against),
    )
    total = np.asarray(full.allan_variance(tau), dtype=float)
    part = (
        np.asarray(limited.allan_variance(tau), dtype=float)
        if limited.terms
        else np.zeros_like(total)
    )
    return np.divide(part, total, out=np.ones_like(total), where=total > 0)


def _fit_reading(spec_type: str, fitted_types: set[str]) -> tuple[str, str, float]:
    """(identified term, parameter, factor to the compared quantity) of a limited term type."""
    if spec_type == "white":
        return "white", "density", 1.0
    if spec_type == "flicker":
        return "flicker", "coefficient", FLICKER_FLOOR_FACTOR
    if spec_type == "gauss_markov":
        if "gauss_markov" in fitted_types:
            return "gauss_markov", "sigma", gauss_markov_peak()[1]
        return "flicker", "coefficient", FLICKER_FLOOR_FACTOR
    if spec_type == "random_walk":
        return "random_walk", "density", 1.0
    if spec_type == "quantization":
        return "quantization", "coefficient", 1.0
    if spec_type == "ramp":
        return "ramp", "slope", 1.0
    raise AnalysisError(f"term type {spec_type!r} has no acceptance rule")  # pragma: no cover


def fit_terms(ax: AxisSpec) -> tuple[str, ...]:
    """The term types fitted to verify a channel.

    The datasheet's own terms (each term it prints, whatever the column) and white noise. A
    bias printed with a correlation time is a Gauss-Markov term, and then nothing else is
    added: below its correlation time a Gauss-Markov Allan deviation rises like a random
    walk's, so an unprinted random walk would take part of the bias from it. Otherwise a
    flicker bias and a random walk are always fitted (their Allan-deviation slopes, 0 and +½,
    tell them apart), so that a unit with such a term unprinted does not bias the others.
    """
    terms, _ = axis_terms(ax, basis="max")
    wanted = {"white"} | {t.type for t in terms if t.type != "random_constant"}
    if "gauss_markov" not in wanted:
        wanted |= {"flicker", "random_walk"}
    order = ("quantization", "white", "flicker", "gauss_markov", "random_walk", "ramp")
    return tuple(t for t in order if t in wanted)


def output_filter(ax: AxisSpec) -> tuple[float | None, int | None]:
    """The channel's output filter from its datasheet: (bandwidth [Hz], Butterworth order), or
    (None, None) when none is printed. The white term is fitted as band-limited white through
    it (a 1-pole filter where the order is not printed, as in the datasheet model)."""
    if "bandwidth" not in ax.values:
        return None, None
    return float(ax.values["bandwidth"].pick("typ")[0]), int(ax.filter_order or 1)
