"""Datasheet → noise model: where the conventions live.

Each datasheet key becomes one term of DESIGN §4 (see ``datasheet.FIELDS``):

=========================================  ===================================================
datasheet                                  term
=========================================  ===================================================
angle / velocity random walk N             ``white(density=N)``
noise density ND                           ``white(density=ND)`` (two-sided, default) or
                                           ``white(density=ND/√2)`` (``density_is="one-sided"``)
bias instability (floor F or coefficient)  ``flicker(coefficient=F/√(2 ln2/π))``, or with a
                                           correlation time T: ``gauss_markov`` whose Allan
                                           peak equals F (:func:`terms.gauss_markov_from_floor`)
rate / acceleration random walk K          ``random_walk(density=K)``
quantization Q (or step s: Q = s/√12)      ``quantization(coefficient=Q)``
rate ramp R                                ``ramp(slope=R)``
bias repeatability σ                       ``random_constant(sigma=σ)``
=========================================  ===================================================

The floor factor √(2 ln2/π) ≈ 0.6643 is :data:`sensormodel.terms.FLICKER_FLOOR_FACTOR`; the
output-filter rule of a channel (per-sample σ of white noise through the sensor's filter) is
:func:`sensormodel.model.white_sample_std`.

References: IEEE Std 952-1997 Annex C (Allan-variance forms of the terms; the floor factor);
ARW = density for a two-sided density is common practice ("ARW [°/√h] =
60 × density [°/s/√Hz]").
"""

from __future__ import annotations

import datetime
import math
import os
import pathlib

from ._version import __version__
from .datasheet import (
    FIELDS,
    AxisSpec,
    Datasheet,
    density_scale,
    load_datasheet,
    typed_as_density,
)
from .errors import DatasheetError
from .model import Channel, NoiseModel
from .quantities import INSTRUMENT_KIND, SI_LABEL
from .terms import (
    FLICKER_FLOOR_FACTOR,
    Flicker,
    Quantization,
    Ramp,
    RandomConstant,
    RandomWalk,
    Term,
    White,
    gauss_markov_from_floor,
)

__all__ = [
    "QUANTITY",
    "axis_terms",
    "build_model",
]

#: instrument -> (channel quantity, SI unit of the channel), from the tables of
#: :mod:`sensormodel.quantities` (``INSTRUMENT_KIND``, ``SI_LABEL``).
QUANTITY: dict[str, tuple[str, str]] = {
    instrument: (kind, SI_LABEL[kind]) for instrument, kind in INSTRUMENT_KIND.items()
}


class _Column:
    """Reads one datasheet column (``typ`` or ``max``) of an axis: each value with the
    provenance ``meta`` of its term, noting where the other column had to stand in."""

    def __init__(self, ax: AxisSpec, basis: str) -> None:
        self.ax, self.basis = ax, basis
        self.notes: list[str] = []

    def pick(self, key: str) -> tuple[float, dict]:
        ax = self.ax
        value, text, used = ax.values[key].pick(self.basis)
        if used != self.basis:
            self.notes.append(
                f"{ax.channel_id}: {ax.origin.get(key, key)} has no '{self.basis}' value; "
                f"'{used}' ({text}) used"
            )
        meta = {"datasheet": {"field": ax.origin.get(key, key), "text": text, "column": used}}
        return value, meta


def _white_term(ax: AxisSpec, column: _Column) -> White | None:
    """The white term (angle / velocity random walk or noise density), band-limited by a
    stated output bandwidth (DESIGN §3)."""
    values = ax.values
    walk = "angle_random_walk" if ax.instrument == "gyro" else "velocity_random_walk"
    if walk in values:
        n, meta = column.pick(walk)
    elif "noise_density" in values:
        n, meta = column.pick("noise_density")
    else:
        return None
    # density_is applies to a value typed as a density, whichever key holds it; the model's
    # provenance says what was applied
    scale = density_scale(meta["datasheet"]["text"], ax.conventions)
    n *= scale
    meta["datasheet"]["convention"] = (
        ("one-sided" if scale != 1.0 else "two-sided")
        if typed_as_density(meta["datasheet"]["text"])
        else "random-walk coefficient"
    )
    band = values["bandwidth"].pick("typ")[0] if "bandwidth" in values else None
    order = (ax.filter_order or 1) if band is not None else None
    if band is not None:
        # where the band limit came from (the density's own field gives only N)
        meta["datasheet"]["bandwidth_field"] = ax.origin.get("bandwidth", "bandwidth")
        meta["datasheet"]["filter_order_field"] = (
            "datasheet filter_order" if ax.filter_order else "not printed: 1-pole assumed"
        )
    return White(density=n, bandwidth=band, filter_order=order, meta=meta)


def _bias_term(ax: AxisSpec, column: _Column) -> Term | None:
    """Bias instability: flicker, or with a correlation time a Gauss-Markov bias whose Allan
    peak equals the floor (:func:`~sensormodel.terms.gauss_markov_from_floor`)."""
    values = ax.values
    if "bias_instability" not in values:
        if "correlation_time" in values:
            raise DatasheetError(
                "correlation_time without bias_instability",
                "a bias_instability to go with the correlation time (together they make a "
                "Gauss-Markov bias)",
                field=ax.origin["correlation_time"],
            )
        return None
    b, meta = column.pick("bias_instability")
    is_floor = ax.conventions["bias_instability_is"] == "floor"
    floor = b if is_floor else b * FLICKER_FLOOR_FACTOR
    if "correlation_time" not in values:
        return Flicker(coefficient=floor / FLICKER_FLOOR_FACTOR, meta=meta)
    # a correlation time has no "worse" side: always the typical value
    t, t_text, _ = values["correlation_time"].pick("typ")
    if t <= 0:
        raise DatasheetError(
            "correlation_time is zero",
            "a positive time such as '300 s'",
            field=ax.origin["correlation_time"],
        )
    meta["datasheet"]["correlation_time"] = t_text
    return gauss_markov_from_floor(floor, t, meta=meta)


#: Datasheet keys that give a one-parameter term directly.
_DIRECT = {
    "rate_random_walk": RandomWalk,
    "acceleration_random_walk": RandomWalk,
    "rate_ramp": Ramp,
    "bias_repeatability": RandomConstant,
}


def axis_terms(ax: AxisSpec, *, basis: str = "typ") -> tuple[list[Term], list[str]]:
    """The noise terms of one axis, and notes on the choices made.

    Parameters
    ----------
    ax : AxisSpec
        The resolved spec of one channel.
    basis : {"typ", "max"}
        Which datasheet column to use; a missing one falls back to the other (noted).
    """
    column = _Column(ax, basis)
    notes = column.notes
    terms = [t for t in (_white_term(ax, column), _bias_term(ax, column)) if t is not None]
    for key, cls in _DIRECT.items():
        if key in ax.values and key in FIELDS[ax.instrument]:
            v, meta = column.pick(key)
            terms.append(cls(**{cls.parameter_names()[0]: v}, meta=meta))
    if "quantization" in ax.values:
        q, meta = column.pick("quantization")
        if ax.conventions["quantization_is"] == "step":
            q /= math.sqrt(12.0)
        terms.append(Quantization(coefficient=q, meta=meta))
    kept = []
    for term in terms:
        if all(v == 0 for v in term.parameters().values() if v is not None):
            notes.append(f"{ax.channel_id}: {term.meta['datasheet']['field']} is zero; no term")
        else:
            kept.append(term)
    return kept, notes


def _not_used(ax: AxisSpec, earlier: list[str]) -> list[str]:
    """Notes on the datasheet keys of ``ax`` that make no noise term (once per datasheet
    field: an instrument-level key is noted for its first axis only)."""
    out = []
    for key, value in ax.values.items():
        spec = FIELDS[ax.instrument].get(key)
        if spec is None or spec.term is not None or key in _DESCRIBE_THE_UNIT:
            continue
        where = ax.origin.get(key, key)
        use = f"kept for: {spec.use}" if spec.use else "not used"
        note = f"{where} ({value.typ_text or value.max_text}): not a noise term, {use}"
        if note not in earlier and note not in out:
            out.append(note)
    return out


#: Keys that describe the unit's output (rate, filter) or modify a term (correlation time):
#: used, though they make no term of their own.
_DESCRIBE_THE_UNIT = frozenset({"sample_rate", "bandwidth", "correlation_time"})


def build_model(
    datasheet: Datasheet | str | os.PathLike[str], *, worst_case: bool = False
) -> NoiseModel:
    """The noise model of a datasheet (DESIGN §7: ``sensormodel.build_model``).

    Parameters
    ----------
    datasheet : Datasheet or path-like
        A datasheet from :func:`sensormodel.load_datasheet`, or the path of its TOML file.
    worst_case : bool
        Use the datasheet's ``max`` column instead of ``typ`` (missing values fall back).

    Returns
    -------
    NoiseModel
        One channel per instrument axis (``gyro.x`` … ``accelerometer.z``), all values SI.
    """
    ds = datasheet if isinstance(datasheet, Datasheet) else load_datasheet(datasheet)
    basis = "max" if worst_case else "typ"
    channels = []
    notes: list[str] = []
    for ax in ds.channels():
        try:
            terms, ax_notes = axis_terms(ax, basis=basis)
        except DatasheetError as exc:
            raise exc.located(source=ds.source) from None
        notes.extend(ax_notes)
        notes.extend(_not_used(ax, notes))
        quantity, unit = QUANTITY[ax.instrument]
        # the output rate and filter describe the unit, not its noise: always the typical value
        rate, _, _ = ax.values["sample_rate"].pick("typ")
        bw = ax.values["bandwidth"].pick("typ")[0] if "bandwidth" in ax.values else None
        if bw is not None and bw > 0.5 * rate:
            notes.append(
                f"{ax.channel_id}: bandwidth {bw:g} Hz is above the Nyquist frequency "
                f"{0.5 * rate:g} Hz of the {rate:g} Hz output: the white noise above it aliases "
                "into the band (the model keeps it so; check the datasheet)"
            )
        if bw is not None and ax.filter_order is None:
            notes.append(
                f"{ax.channel_id}: bandwidth without filter_order; a 1-pole "
                "(first-order) output filter is assumed"
            )
        channels.append(
            Channel(
                id=ax.channel_id,
                quantity=quantity,
                unit=unit,
                sample_rate=rate,
                bandwidth=bw,
                filter_order=ax.filter_order if bw is not None else None,
                terms=tuple(terms),
            )
        )
    conventions = {
        "psd": "IEEE Std 952 coefficients: white density N has two-sided PSD N^2 and one-sided "
        "PSD 2 N^2; Allan variance N^2/tau",
        "density_is": sorted({ax.conventions["density_is"] for ax in ds.channels()}),
        "bias_instability_is": sorted(
            {ax.conventions["bias_instability_is"] for ax in ds.channels()}
        ),
        "quantization_is": sorted({ax.conventions["quantization_is"] for ax in ds.channels()}),
        "basis": basis,
    }
    provenance = {
        "created_by": f"sensormodel {__version__}",
        "created": datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds"),
        "from": "datasheet",
        "datasheet": {"file": pathlib.Path(ds.source).name, "sha256": ds.sha256},
        "notes": notes,
    }
    return NoiseModel(
        sensor=dict(ds.sensor),
        channels=tuple(channels),
        provenance=provenance,
        conventions=conventions,
    )
