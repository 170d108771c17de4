"""NoiseModel: sensor → channels → terms, and the noise-model JSON file (DESIGN §5).

A :class:`NoiseModel` is immutable. Its channels carry their SI unit (``rad/s`` for gyros,
``m/s^2`` for accelerometers), output rate, output filter and terms (:mod:`sensormodel.terms`).
Files are validated against ``schemas/noise-model.schema.json`` on load and on save; unknown
schema versions are refused.

The model is data: it is built by :func:`sensormodel.build_model` (from a datasheet), by
identification or by hand, and consumed by functions that take it
(:func:`sensormodel.simulate`, :mod:`sensormodel.drift`, :mod:`sensormodel.export`). Its own
theory (Allan deviation, PSD, discretization) comes from :mod:`sensormodel.terms` and
:mod:`sensormodel.linear`, below it. The output-filter rule of a channel (the per-sample
standard deviation of white noise through the sensor's filter, DESIGN §3) lives here with the
channel that carries the filter.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from . import validate
from ._io import read_json, write_json
from ._io import validate as validate_schema
from .errors import AnalysisError, ModelFileError
from .linear import DiscreteModel, StateSpace, discretize, sided_factor, stack
from .quantities import SI_LABEL
from .terms import TERM_TYPES, Term, term_from_dict

__all__ = [
    "SCHEMA_ID",
    "Channel",
    "NoiseModel",
    "noise_model_schema",
    "noise_bandwidth",
    "white_sample_std",
]

#: The schema id written into, and required of, every noise-model file.
SCHEMA_ID = "sensormodel/noise-model/1"


def noise_bandwidth(bandwidth: float, order: int = 1) -> float:
    """Equivalent noise bandwidth of an n-th order Butterworth low-pass [Hz].

    Parameters
    ----------
    bandwidth : float
        The -3 dB frequency f_3dB [Hz].
    order : int
        Filter order n ≥ 1 (a single pole / RC is n = 1).

    Returns
    -------
    float
        ENBW = f_3dB · (π/(2n)) / sin(π/(2n)) [Hz], one-sided (positive frequencies):
        π/2 · f_3dB for n = 1, π/(2√2) · f_3dB ≈ 1.1107 · f_3dB for n = 2.

    References
    ----------
    S. Winder, "Analog and Digital Filter Design", 2nd ed., Newnes, Appendix A, Table A.3
    ("Butterworth noise bandwidth", formula credited to A. B. Carlson).
    """
    if isinstance(bandwidth, bool) or not (math.isfinite(bandwidth) and bandwidth > 0):
        raise AnalysisError(
            f"got {bandwidth!r} Hz", "a positive, finite -3 dB frequency in Hz", field="bandwidth"
        )
    order = validate.whole_number(order, "filter_order")
    x = math.pi / (2 * order)
    return bandwidth * x / math.sin(x)


def white_sample_std(
    density: float,
    sample_rate: float,
    *,
    bandwidth: float | None = None,
    filter_order: int | None = None,
) -> float:
    """Standard deviation of one output sample of white noise of IEEE density ``density``.

    Parameters
    ----------
    density : float
        N [u·√s], two-sided PSD N² (IEEE Std 952 convention).
    sample_rate : float
        Output data rate [Hz].
    bandwidth : float, optional
        -3 dB bandwidth of the sensor's output filter [Hz]. Without it each sample is taken as
        the average over its sample period (ENBW = rate/2).
    filter_order : int, optional
        Butterworth order of that filter (default 1).

    Returns
    -------
    float
        σ = N·√(2·ENBW) [u]; with no bandwidth, σ = N·√rate.

    Notes
    -----
    The one-sided PSD is 2N², and noise through a filter of equivalent noise bandwidth B_e has
    variance (one-sided PSD)·B_e = 2N²B_e (REFERENCES §0/§8; Winder, Table A.3). Sampling does
    not change a variance, so B_e may exceed rate/2 (the excess aliases but still counts).
    """
    sample_rate = validate.rate(sample_rate, "sample_rate")
    if bandwidth is None:
        enbw = sample_rate / 2.0
    else:
        enbw = noise_bandwidth(bandwidth, filter_order or 1)
    return density * math.sqrt(2.0 * enbw)


@dataclass(frozen=True)
class Channel:
    """One sensor axis: its id, SI unit, output rate and noise terms.

    Attributes
    ----------
    id : str
        ``gyro.x`` … ``accelerometer.z`` (DESIGN §10), or another id for recorded channels.
    quantity : str
        ``angular_rate``, ``acceleration`` or ``as_recorded``.
    unit : str
        The SI unit of the channel's output (``rad/s``, ``m/s^2``) or ``1`` (as recorded).
    sample_rate : float
        Output data rate [Hz].
    terms : tuple of Term
        The noise terms; the channel's noise is their sum.
    bandwidth : float, optional
        -3 dB bandwidth of the output filter [Hz].
    filter_order : int, optional
        Butterworth order of that filter.
    """

    id: str
    quantity: str
    unit: str
    sample_rate: float
    terms: tuple[Term, ...] = ()
    bandwidth: float | None = None
    filter_order: int | None = None

    @property
    def instrument(self) -> str:
        """``gyro``, ``accelerometer`` or the part of the id before the dot."""
        return self.id.split(".", 1)[0]

    def term(self, type_: str) -> Term | None:
        """The first term of the given type, or ``None``."""
        for t in self.terms:
            if t.type == type_:
                return t
        return None

    def white_sample_std(self, rate: float | None = None) -> float:
        """Per-sample standard deviation of the white term at ``rate`` [Hz] (default: the
        channel's), following the output-filter rule of :func:`white_sample_std` [unit]."""
        if rate is not None:
            rate = validate.rate(rate)
        white = self.term("white")
        if white is None:
            return 0.0
        return white_sample_std(
            white.density,  # type: ignore[attr-defined]
            self.sample_rate if rate is None else rate,
            bandwidth=self.bandwidth,
            filter_order=self.filter_order,
        )

    # --- theory (linear.py) -----------------------------------------------------------------

    def allan_variance(self, tau: npt.ArrayLike) -> npt.NDArray[np.float64]:
        """Allan variance of the channel's noise, the sum of its terms' exact forms [unit²].

        Parameters
        ----------
        tau : array_like
            Averaging times [s], positive.
        """
        tau = validate.positive_array(tau, "tau")
        total = np.zeros(tau.shape)
        for t in self.terms:
            total = total + t.allan_variance(tau, sample_rate=self.sample_rate)
        return total

    def allan_deviation(self, tau: npt.ArrayLike) -> npt.NDArray[np.float64]:
        """Allan deviation of the channel's noise [unit] (see :meth:`allan_variance`)."""
        return np.sqrt(self.allan_variance(tau))

    def psd(self, f: npt.ArrayLike, *, sided: str = "two-sided") -> npt.NDArray[np.float64]:
        """PSD of the channel's noise, the sum of its terms' PSDs [unit²/Hz].

        ``f`` [Hz] and ``sided`` as in :meth:`sensormodel.terms.Term.psd` (two-sided by
        default, the IEEE Std 952 convention).
        """
        f = validate.positive_array(f, "f")
        factor = sided_factor(sided)
        total = np.zeros(f.shape)
        for t in self.terms:
            total = total + t.psd(f, sample_rate=self.sample_rate)
        return factor * total

    def state_space(self) -> StateSpace:
        """The channel's terms stacked into one :class:`~sensormodel.linear.StateSpace`."""
        return stack(self.terms, sample_rate=self.sample_rate)

    def discretize(self, dt: float, *, quantization: str = "states") -> DiscreteModel:
        """Exact discrete Φ, Qd, H, R, P0 at step ``dt`` [s]
        (:func:`sensormodel.linear.discretize`)."""
        return discretize(self, dt, quantization=quantization)

    def to_dict(self) -> dict[str, Any]:
        """The channel entry of the noise-model JSON."""
        out: dict[str, Any] = {
            "id": self.id,
            "quantity": self.quantity,
            "unit": self.unit,
            "sample_rate": self.sample_rate,
        }
        if self.bandwidth is not None:
            out["bandwidth"] = self.bandwidth
        if self.filter_order is not None:
            out["filter_order"] = self.filter_order
        out["terms"] = [t.to_dict() for t in self.terms]
        return out

    @classmethod
    def from_dict(cls, data: dict[str, Any], *, where: str = "channel") -> Channel:
        """Build a channel from its JSON entry (already schema-validated).

        The unit is fixed by the quantity (a model is all SI): a channel whose ``unit`` is not
        its quantity's SI unit is refused, never relabelled (values in rad/s labelled deg/s
        would be read 57× apart by different commands).
        """
        _check_unit(data, where, None)
        terms = tuple(
            term_from_dict(t, where=f"{where}.terms[{i}]") for i, t in enumerate(data["terms"])
        )
        return cls(
            id=data["id"],
            quantity=data["quantity"],
            unit=data["unit"],
            sample_rate=float(data["sample_rate"]),
            terms=terms,
            bandwidth=data.get("bandwidth"),
            filter_order=data.get("filter_order"),
        )


def _check_unit(data: dict[str, Any], where: str, source: str | None) -> None:
    """Refuse a channel entry whose ``unit`` is not the SI unit of its ``quantity``."""
    si = SI_LABEL.get(str(data.get("quantity")))
    unit = data.get("unit")
    if si is not None and isinstance(unit, str) and unit != si:
        raise ModelFileError(
            f"unit is {unit!r} for a channel of quantity {data['quantity']}",
            f"'{si}': every value of a model is SI and the unit follows the quantity (convert "
            "the values, do not relabel them)",
            source=source,
            field=f"{where}.unit",
        )


@dataclass(frozen=True)
class NoiseModel:
    """A sensor's noise model: channels of summed noise terms, all in SI.

    Build one with :func:`sensormodel.build_model` (from a datasheet) or :meth:`load`; write it
    with :meth:`save`.
    """

    sensor: dict[str, Any]
    channels: tuple[Channel, ...]
    provenance: dict[str, Any] = field(default_factory=dict)
    conventions: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        ids = [c.id for c in self.channels]
        dup = sorted({i for i in ids if ids.count(i) > 1})
        if dup:
            raise ModelFileError(f"duplicate channel ids {dup}", "one entry per channel")

    # -- construction and files ------------------------------------------------------------

    def to_dict(self) -> dict[str, Any]:
        """The JSON document of DESIGN §5."""
        return {
            "schema": SCHEMA_ID,
            "sensor": self.sensor,
            "provenance": self.provenance,
            "conventions": self.conventions,
            "channels": [c.to_dict() for c in self.channels],
        }

    @classmethod
    def from_dict(cls, data: Any, *, source: str | None = None) -> NoiseModel:
        """Validate a JSON document and build the model; refuse unknown schema versions."""
        if not isinstance(data, dict):
            raise ModelFileError("not a JSON object", "a noise-model document", source=source)
        schema = data.get("schema")
        if schema != SCHEMA_ID:
            raise ModelFileError(
                f"schema is {schema!r}",
                f"'{SCHEMA_ID}' (a noise-model file written by this version of sensormodel)",
                source=source,
                field="schema",
            )
        channels_data = data.get("channels")
        if isinstance(channels_data, list):  # before the schema: a clearer sentence than its own
            for i, c in enumerate(channels_data):
                if isinstance(c, dict):
                    _check_unit(c, f"channels[{i}]", source)
        validate_schema(data, "noise-model.schema.json", source=source)
        try:
            channels = tuple(
                Channel.from_dict(c, where=f"channels[{i}]") for i, c in enumerate(data["channels"])
            )
            return cls(
                sensor=data["sensor"],
                channels=channels,
                provenance=data.get("provenance", {}),
                conventions=data.get("conventions", {}),
            )
        except ModelFileError as exc:
            raise exc.located(source=source) from None

    @classmethod
    def load(cls, path: str | os.PathLike[str]) -> NoiseModel:
        """Read and validate a noise-model JSON file."""
        return cls.from_dict(read_json(path), source=str(path))

    def save(self, path: str | os.PathLike[str], *, force: bool = False) -> None:
        """Validate and write the model atomically; refuse to overwrite unless ``force``."""
        write_json(path, self.to_dict(), force=force, schema="noise-model.schema.json")

    # -- access ----------------------------------------------------------------------------

    @property
    def channel_ids(self) -> list[str]:
        """The channel ids in file order."""
        return [c.id for c in self.channels]

    def channel(self, channel_id: str) -> Channel:
        """The channel with this id (``.`` and ``_`` interchangeable, case ignored)."""
        key = channel_id.replace("_", ".").lower()
        for c in self.channels:
            if c.id.replace("_", ".").lower() == key:
                return c
        raise ModelFileError(
            f"no channel '{channel_id}'", f"one of {', '.join(self.channel_ids)}", field="channel"
        )

    def select(self, channel_ids: list[str] | None) -> NoiseModel:
        """A model with only the given channels (all when ``None``)."""
        if not channel_ids:
            return self
        return replace(self, channels=tuple(self.channel(c) for c in channel_ids))

    def with_channel(self, channel: Channel) -> NoiseModel:
        """A model with ``channel`` replacing the channel of the same id (or appended)."""
        chans = [channel if c.id == channel.id else c for c in self.channels]
        if channel.id not in self.channel_ids:
            chans.append(channel)
        return replace(self, channels=tuple(chans))

    # --- theory (linear.py) ---------------------------------------------------------------
    # (Allan deviation, PSD and discretization of the model: see sensormodel.linear)

    def allan_deviation(self, tau: npt.ArrayLike) -> dict[str, npt.NDArray[np.float64]]:
        """Allan deviation each channel's model predicts at ``tau`` [s],
        {channel id: array [unit]} (:meth:`Channel.allan_deviation`)."""
        return {c.id: c.allan_deviation(tau) for c in self.channels}

    def psd(
        self, f: npt.ArrayLike, *, sided: str = "two-sided"
    ) -> dict[str, npt.NDArray[np.float64]]:
        """PSD of each channel's model at ``f`` [Hz], {channel id: array [unit²/Hz]}
        (:meth:`Channel.psd`)."""
        return {c.id: c.psd(f, sided=sided) for c in self.channels}

    def discretize(
        self, dt: float, *, quantization: str = "states"
    ) -> dict[str, DiscreteModel]:
        """Exact discrete model of every channel at step ``dt`` [s],
        {channel id: :class:`~sensormodel.linear.DiscreteModel`}.

        Parameters
        ----------
        dt : float
            Filter step [s].
        quantization : {"states", "r"}
            How quantization is carried (:func:`sensormodel.linear.discretize`).
        """
        return {c.id: c.discretize(dt, quantization=quantization) for c in self.channels}


def _term_schema(cls: type[Term]) -> dict[str, Any]:
    names = cls.parameter_names()
    optional = set(cls.optional_parameters())
    props: dict[str, Any] = {"type": {"const": cls.type}, **cls.parameter_schema()}
    # if/then rather than oneOf: a bad term is then reported at the offending parameter
    # ("-1 is less than the minimum of 0") instead of "not valid under any of the given schemas"
    return {
        "if": {"properties": {"type": {"const": cls.type}}, "required": ["type"]},
        "then": {
            "properties": props,
            "required": ["type", *[n for n in names if n not in optional]],
        },
    }


def noise_model_schema() -> dict[str, Any]:
    """The JSON Schema of noise-model files, generated from :data:`terms.TERM_TYPES`."""
    term_variants = [_term_schema(cls) for cls in TERM_TYPES.values()]
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": SCHEMA_ID,
        "title": "sensormodel noise model",
        "description": "A sensor noise model; all values SI. Generated from sensormodel.terms; "
        "do not edit by hand.",
        "type": "object",
        "required": ["schema", "sensor", "channels"],
        "properties": {
            "schema": {"const": SCHEMA_ID},
            "sensor": {
                "type": "object",
                "properties": {
                    "name": {"type": "string"},
                    "model": {"type": "string"},
                    "axes": {"type": "array", "items": {"type": "string"}},
                },
            },
            "provenance": {"type": "object"},
            "conventions": {"type": "object"},
            "channels": {
                "type": "array",
                "minItems": 1,
                "items": {
                    "type": "object",
                    "required": ["id", "quantity", "unit", "sample_rate", "terms"],
                    "properties": {
                        "id": {"type": "string", "minLength": 1},
                        "quantity": {"enum": ["angular_rate", "acceleration", "as_recorded"]},
                        "unit": {
                            "type": "string",
                            "description": "fixed by the quantity (all values are SI): "
                            "rad/s for angular_rate, m/s^2 for acceleration; a label for "
                            "as_recorded",
                        },
                        "sample_rate": {"type": "number", "exclusiveMinimum": 0},
                        "bandwidth": {"type": "number", "exclusiveMinimum": 0},
                        "filter_order": {"type": "integer", "minimum": 1, "maximum": 8},
                        "terms": {
                            "type": "array",
                            "items": {
                                "type": "object",
                                "required": ["type"],
                                "properties": {"type": {"enum": sorted(TERM_TYPES)}},
                                "allOf": term_variants,
                            },
                        },
                    },
                    "allOf": [
                        {
                            "if": {"properties": {"quantity": {"const": q}}},
                            "then": {"properties": {"unit": {"const": SI_LABEL[q]}}},
                        }
                        for q in ("angular_rate", "acceleration")
                    ],
                    "additionalProperties": False,
                },
            },
        },
        "additionalProperties": False,
    }
