"""Datasheet files (TOML): read, validate, apply the stated conventions, return SI values.

A datasheet file holds the noise section of a gyro/accelerometer datasheet as printed::

    [sensor]
    name = "Survey IMU"
    sample_rate = "400 Hz"

    [gyro]
    angle_random_walk = "0.15 °/√h"
    bias_instability = { typ = "0.5 °/h", max = "1 °/h" }

    [gyro.z]                       # a per-axis override
    bias_instability = "0.8 °/h"

The field table :data:`FIELDS` (kept as data, in one place) gives each key its kind of quantity
(and so its SI unit) and the noise term it produces. The JSON Schema
``schemas/datasheet.schema.json`` is generated from it (:func:`datasheet_schema`), and a test
keeps the file in step.

Conventions (DESIGN §3; documented in DEVELOPERS.md):

* ``density_is = "two-sided"`` (default, common practice: ARW [°/√h] = 60 × density [°/s/√Hz])
  or ``"one-sided"`` (the density is √ of a one-sided PSD, D = value/√2). It applies to every
  value typed in a density's unit (per √Hz, :func:`typed_as_density`), whichever key holds it
  (``noise_density``, or an ARW / VRW printed as "9 °/h/√Hz"); a random-walk coefficient typed
  as such ("0.15 °/√h") is defined by its Allan variance and is not touched.
* ``bias_instability_is = "floor"`` (default, common practice: the Allan-deviation minimum) or
  ``"coefficient"`` (the IEEE Std 952 coefficient B; floor = √(2 ln2/π)·B ≈ 0.664·B).
* ``quantization_is = "coefficient"`` (default: the IEEE Std 952 Q, AVAR = 3Q²/τ²) or
  ``"step"`` (the size of one quantum s, Q = s/√12; IEEE Std 952 Annex C, from memory).

Each convention key may stand in ``[sensor]`` (all instruments) or in an instrument table.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import os
import pathlib
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from ._io import validate
from .errors import DatasheetError, ModelFileError, UnitError
from .quantities import KINDS, parse_quantity

__all__ = [
    "FIELDS",
    "INSTRUMENTS",
    "CONVENTIONS",
    "FieldSpec",
    "SpecValue",
    "AxisSpec",
    "Instrument",
    "Datasheet",
    "load_datasheet",
    "parse_datasheet",
    "datasheet_schema",
    "check_keys",
    "typed_as_density",
]


@dataclass(frozen=True)
class FieldSpec:
    """One datasheet key: its kind of quantity (see quantities.KINDS), the noise term it makes
    (None: not a noise term), what it is, and what a value without a term is kept for
    (``use``; empty: read, checked for its unit, listed as not used)."""

    kind: str
    term: str | None
    what: str
    use: str = ""


def _not_noise(instrument: str) -> dict[str, FieldSpec]:
    """The common datasheet keys that are not noise terms (read so that a whole datasheet table
    can be pasted in; listed as not used unless ``use`` says what they serve)."""
    gyro = instrument == "gyro"
    rate = "angular_rate" if gyro else "acceleration"
    return {
        "measurement_range": FieldSpec(
            rate, None, "measurement range (full scale, ±)", "saturation of a recording"
        ),
        "bias_offset": FieldSpec(rate, None, "bias (offset) before calibration"),
        "bias_temperature_sensitivity": FieldSpec(
            f"{rate}_per_temperature",
            None,
            "bias change per degree of temperature",
            "temperature effect in a recording",
        ),
        "scale_factor_error": FieldSpec("dimensionless", None, "scale-factor error"),
        "scale_factor_nonlinearity": FieldSpec("dimensionless", None, "scale-factor nonlinearity"),
        "scale_factor_stability": FieldSpec("dimensionless", None, "scale-factor stability"),
        "scale_factor_repeatability": FieldSpec(
            "dimensionless", None, "scale-factor repeatability"
        ),
        "scale_factor_temperature_sensitivity": FieldSpec(
            "per_temperature", None, "scale-factor change per degree of temperature"
        ),
        "misalignment": FieldSpec("angle", None, "axis misalignment"),
        "cross_axis_sensitivity": FieldSpec("dimensionless", None, "cross-axis sensitivity"),
        **(
            {
                "g_sensitivity": FieldSpec(
                    "rate_per_acceleration", None, "bias change per acceleration (g-sensitivity)"
                ),
                "g_squared_sensitivity": FieldSpec(
                    "rate_per_acceleration_squared", None, "bias change per acceleration squared"
                ),
            }
            if gyro
            else {
                "vibration_rectification": FieldSpec(
                    "acceleration_per_acceleration_squared", None, "vibration rectification"
                ),
            }
        ),
    }


_COMMON = {
    "correlation_time": FieldSpec(
        "time", None, "correlation time of the bias (makes it Gauss-Markov)"
    ),
    "bandwidth": FieldSpec("frequency", None, "output filter -3 dB bandwidth"),
    "sample_rate": FieldSpec("frequency", None, "output data rate"),
}

#: Datasheet key -> FieldSpec, per instrument table.
FIELDS: dict[str, dict[str, FieldSpec]] = {
    "gyro": {
        "angle_random_walk": FieldSpec("angle_random_walk", "white", "angle random walk"),
        "noise_density": FieldSpec("angle_random_walk", "white", "rate noise density"),
        "bias_instability": FieldSpec("angular_rate", "flicker", "bias instability"),
        "rate_random_walk": FieldSpec("rate_random_walk", "random_walk", "rate random walk"),
        "quantization": FieldSpec("angle", "quantization", "angle quantization"),
        "rate_ramp": FieldSpec("angular_rate_ramp", "ramp", "rate ramp"),
        "bias_repeatability": FieldSpec(
            "angular_rate", "random_constant", "bias repeatability (turn-on to turn-on)"
        ),
        **_COMMON,
        **_not_noise("gyro"),
    },
    "accelerometer": {
        "velocity_random_walk": FieldSpec("velocity_random_walk", "white", "velocity random walk"),
        "noise_density": FieldSpec("velocity_random_walk", "white", "acceleration noise density"),
        "bias_instability": FieldSpec("acceleration", "flicker", "bias instability"),
        "acceleration_random_walk": FieldSpec(
            "acceleration_random_walk", "random_walk", "acceleration random walk"
        ),
        "quantization": FieldSpec("velocity", "quantization", "velocity quantization"),
        "rate_ramp": FieldSpec("acceleration_ramp", "ramp", "acceleration ramp"),
        "bias_repeatability": FieldSpec(
            "acceleration", "random_constant", "bias repeatability (turn-on to turn-on)"
        ),
        **_COMMON,
        **_not_noise("accelerometer"),
    },
}

INSTRUMENTS = tuple(FIELDS)

#: Convention key -> (allowed values, default).
CONVENTIONS: dict[str, tuple[tuple[str, ...], str]] = {
    "density_is": (("two-sided", "one-sided"), "two-sided"),
    "bias_instability_is": (("floor", "coefficient"), "floor"),
    "quantization_is": (("coefficient", "step"), "coefficient"),
}

_SENSOR_TEXT_KEYS = ("name", "model", "manufacturer", "part_number", "grade", "description")
_AXES = ("x", "y", "z")
_MAX_FILTER_ORDER = 8


@dataclass(frozen=True)
class SpecValue:
    """A datasheet term: typical and/or maximum value, in SI, with the printed text."""

    typ: float | None
    max: float | None
    typ_text: str | None = None
    max_text: str | None = None

    def pick(self, basis: str) -> tuple[float, str, str]:
        """Return (SI value, printed text, the column used) for ``basis`` "typ" or "max".

        A missing typical value falls back to the maximum (conservative) and the reverse.
        """
        if basis == "max" and self.max is not None:
            return self.max, self.max_text or "", "max"
        if self.typ is not None:
            return self.typ, self.typ_text or "", "typ"
        return self.max, self.max_text or "", "max"  # type: ignore[return-value]


@dataclass(frozen=True)
class AxisSpec:
    """The resolved spec of one axis of one instrument (instrument table + axis override)."""

    instrument: str
    axis: str
    values: dict[str, SpecValue]
    conventions: dict[str, str]
    filter_order: int | None
    #: key -> "gyro.angle_random_walk" or "gyro.z.bias_instability": where each value came from.
    origin: dict[str, str] = field(default_factory=dict)

    @property
    def channel_id(self) -> str:
        """The channel id of DESIGN §10, e.g. ``gyro.x``."""
        return f"{self.instrument}.{self.axis}"


@dataclass(frozen=True)
class Instrument:
    """One instrument table (``gyro`` or ``accelerometer``) resolved per axis."""

    name: str
    axes: dict[str, AxisSpec]


@dataclass(frozen=True)
class Datasheet:
    """A datasheet file in SI. ``instruments`` maps ``gyro``/``accelerometer`` to its axes."""

    source: str
    sensor: dict[str, Any]
    instruments: dict[str, Instrument]
    sha256: str = ""

    def channels(self) -> list[AxisSpec]:
        """Every channel's spec, gyros first, in axis order."""
        return [ax for inst in self.instruments.values() for ax in inst.axes.values()]


def _suggest(key: str, known: list[str]) -> str:
    """`` (did you mean 'x'?)`` for the nearest known name, or nothing."""
    close = difflib.get_close_matches(key, known, n=1, cutoff=0.5)
    return f" (did you mean '{close[0]}'?)" if close else ""


def check_keys(table: dict[str, Any], known: list[str], where: str, source: str) -> None:
    """Refuse a key of a TOML table that is not in ``known``, suggesting the nearest name.

    The one unknown-key check of every TOML table the library reads (datasheets, spectrum
    files).

    Parameters
    ----------
    table : dict
        The table as read.
    known : list of str
        The keys it may hold.
    where : str
        The table's dotted name (``sensor``, ``gyro.z``, ``spectrum``): the error's field is
        ``<where>.<key>``.
    source : str
        The file, for the error.

    Raises
    ------
    DatasheetError
        ``unknown key '<key>' (did you mean '<name>'?)``, located at the file and field.
    """
    for key in table:
        if key not in known:
            raise DatasheetError(
                f"unknown key '{key}'{_suggest(key, known)}",
                f"one of {', '.join(known)}",
                source=source,
                field=f"{where}.{key}",
            )


def _parse_spec(value: Any, kind: str, where: str, source: str) -> SpecValue:
    if isinstance(value, dict):
        check_keys(value, ["typ", "max"], where, source)
        if not value:
            raise DatasheetError(
                "empty table", '{ typ = "…" } and/or { max = "…" }', source=source, field=where
            )
        typ = value.get("typ")
        mx = value.get("max")
        typ_si = (
            parse_quantity(typ, kind, field=f"{where}.typ", source=source)
            if typ is not None
            else None
        )
        max_si = (
            parse_quantity(mx, kind, field=f"{where}.max", source=source)
            if mx is not None
            else None
        )
        if typ_si is not None and max_si is not None and typ_si > max_si * (1 + 1e-12):
            raise DatasheetError(
                f"typ '{typ}' is larger than max '{mx}'", "typ <= max", source=source, field=where
            )
        return SpecValue(typ_si, max_si, typ, mx)
    si = parse_quantity(value, kind, field=where, source=source)
    return SpecValue(si, None, value, None)


def _conventions(
    table: dict[str, Any], base: dict[str, str], where: str, source: str
) -> dict[str, str]:
    out = dict(base)
    for key, (allowed, _default) in CONVENTIONS.items():
        if key in table:
            val = table[key]
            if val not in allowed:
                raise DatasheetError(
                    f"got {val!r}",
                    " or ".join(f"'{a}'" for a in allowed),
                    source=source,
                    field=f"{where}.{key}",
                )
            out[key] = val
    return out


def _filter_order(table: dict[str, Any], base: int | None, where: str, source: str) -> int | None:
    if "filter_order" not in table:
        return base
    val = table["filter_order"]
    if isinstance(val, bool) or not isinstance(val, int) or not 1 <= val <= _MAX_FILTER_ORDER:
        raise DatasheetError(
            f"got {val!r}",
            f"a whole number from 1 to {_MAX_FILTER_ORDER} (the output filter's Butterworth order)",
            source=source,
            field=f"{where}.filter_order",
        )
    return val


def _axes(value: Any, where: str, source: str) -> tuple[str, ...]:
    if (
        not isinstance(value, list)
        or not value
        or any(a not in _AXES for a in value)
        or len(set(value)) != len(value)
    ):
        raise DatasheetError(
            f"got {value!r}",
            "a list of distinct axes from 'x', 'y', 'z'",
            source=source,
            field=where,
        )
    return tuple(a for a in _AXES if a in value)


def typed_as_density(text: str) -> bool:
    """Whether a printed value is typed in a spectral density's unit (per √Hz: "rtHz", "√Hz",
    "sqrt(Hz)", "Hz^0.5"), the form ``density_is`` applies to. A random-walk coefficient's unit
    (°/√h, m/s/√h) never names hertz."""
    return "hz" in text.lower()


def density_scale(text: str, conventions: Mapping[str, str]) -> float:
    """The factor from a printed white value to the two-sided density N: 1/√2 for a value typed
    as a density under ``density_is = "one-sided"``, else 1."""
    one_sided = conventions.get("density_is") == "one-sided"
    return 1.0 / math.sqrt(2.0) if one_sided and typed_as_density(text) else 1.0


def _check_equivalent(
    values: dict[str, SpecValue],
    conv: dict[str, str],
    instrument: str,
    origin: dict[str, str],
    source: str,
) -> None:
    """Refuse a random-walk coefficient and a density that disagree by more than 1 %."""
    walk = "angle_random_walk" if instrument == "gyro" else "velocity_random_walk"
    if walk not in values or "noise_density" not in values:
        return
    a, b = values[walk], values["noise_density"]
    for col in ("typ", "max"):
        va, vb = getattr(a, col), getattr(b, col)
        if va is None or vb is None:
            continue
        va *= density_scale(getattr(a, col + "_text"), conv)
        vb *= density_scale(getattr(b, col + "_text"), conv)
        if abs(va - vb) > 0.01 * max(va, vb):
            raise DatasheetError(
                f"{walk} ({getattr(a, col + '_text')}) and noise_density "
                f"({getattr(b, col + '_text')}, {conv['density_is']}) disagree by "
                f"{abs(va - vb) / max(va, vb):.1%} ({col})",
                "equivalent values (within 1 %) or only one of the two",
                source=source,
                field=f"{origin[walk]} / {origin['noise_density']}",
            )


@dataclass(frozen=True)
class _Level:
    """What one level of the datasheet (``[sensor]``, an instrument table, an axis override)
    passes down to the next: parsed values with their origin, conventions, filter order."""

    values: dict[str, SpecValue]
    origin: dict[str, str]
    conventions: dict[str, str]
    filter_order: int | None

    def below(
        self, table: dict[str, Any], keys: list[str], instrument: str, where: str, source: str
    ) -> _Level:
        """This level overridden by ``table`` (the keys of ``FIELDS[instrument]`` it sets, its
        conventions and filter order)."""
        conventions = _conventions(table, self.conventions, where, source)
        filter_order = _filter_order(table, self.filter_order, where, source)
        values, origin = dict(self.values), dict(self.origin)
        for key in keys:
            if key in table:
                at = f"{where}.{key}"
                values[key] = _parse_spec(table[key], FIELDS[instrument][key].kind, at, source)
                origin[key] = at
        return _Level(values, origin, conventions, filter_order)


def parse_datasheet(
    data: dict[str, Any], *, source: str = "<datasheet>", sha256: str = ""
) -> Datasheet:
    """Validate a datasheet already read from TOML and convert it to SI.

    Parameters
    ----------
    data : dict
        The TOML document as a dict.
    source : str
        File name for messages.

    Returns
    -------
    Datasheet

    Raises
    ------
    DatasheetError, UnitError
        With the file and the dotted key path of the offending field.
    """
    sensor = _sensor_table(data, source)
    axes = _axes(sensor["axes"], "sensor.axes", source) if "axes" in sensor else _AXES
    base = _Level(
        {},
        {},
        _conventions(sensor, {k: d for k, (_, d) in CONVENTIONS.items()}, "sensor", source),
        _filter_order(sensor, None, "sensor", source),
    )
    for key in ("sample_rate", "bandwidth"):
        if key in sensor:
            base.values[key] = _parse_spec(sensor[key], "frequency", f"sensor.{key}", source)
            base.origin[key] = f"sensor.{key}"
    present = [name for name in INSTRUMENTS if name in data]
    if not present:
        raise DatasheetError(
            "no instrument table", "a [gyro] and/or [accelerometer] table", source=source
        )
    instruments = {name: _instrument(name, data[name], base, axes, source) for name in present}
    sensor_info = {k: sensor[k] for k in _SENSOR_TEXT_KEYS if k in sensor}
    sensor_info["axes"] = list(axes)
    return Datasheet(source=source, sensor=sensor_info, instruments=instruments, sha256=sha256)


def _sensor_table(data: dict[str, Any], source: str) -> dict[str, Any]:
    """The ``[sensor]`` table, checked (and no unknown top-level table)."""
    for key in data:
        if key not in ("sensor", *INSTRUMENTS):
            raise DatasheetError(
                f"unknown table '[{key}]'{_suggest(key, ['sensor', *INSTRUMENTS])}",
                f"tables {', '.join(['sensor', *INSTRUMENTS])}",
                source=source,
                field=key,
            )
    sensor = data.get("sensor")
    if not isinstance(sensor, dict):
        raise DatasheetError(
            "missing table [sensor]",
            "a [sensor] table with at least sample_rate",
            source=source,
            field="sensor",
        )
    sensor_known = [
        *_SENSOR_TEXT_KEYS,
        "axes",
        "sample_rate",
        "bandwidth",
        "filter_order",
        *CONVENTIONS,
    ]
    check_keys(sensor, sensor_known, "sensor", source)
    for key in _SENSOR_TEXT_KEYS:
        if key in sensor and not isinstance(sensor[key], str):
            raise DatasheetError(
                f"got {sensor[key]!r}", "a text", source=source, field=f"sensor.{key}"
            )
    return sensor


def _instrument(
    name: str, table: Any, base: _Level, axes: tuple[str, ...], source: str
) -> Instrument:
    """One instrument table resolved per axis (the sensor's values below it)."""
    if not isinstance(table, dict):
        raise DatasheetError(f"got {table!r}", "a table", source=source, field=name)
    keys = list(FIELDS[name])
    check_keys(table, [*keys, *CONVENTIONS, "filter_order", "axes", *_AXES], name, source)
    inst_axes = _axes(table["axes"], f"{name}.axes", source) if "axes" in table else axes
    level = base.below(table, keys, name, name, source)
    per_axis = {}
    for axis in inst_axes:
        per_axis[axis] = _axis_spec(name, axis, table, level, source)
        for axis_extra in _AXES:
            if axis_extra in table and axis_extra not in inst_axes:
                raise DatasheetError(
                    f"an override for axis '{axis_extra}', which the sensor does not have",
                    f"overrides only for axes {', '.join(inst_axes)}",
                    source=source,
                    field=f"{name}.{axis_extra}",
                )
        _check_axis(name, axis, table, per_axis[axis], source)
    return Instrument(name, per_axis)


def _axis_spec(
    name: str, axis: str, table: dict[str, Any], level: _Level, source: str
) -> AxisSpec:
    """An axis of an instrument: the instrument's level with the axis override (if any)."""
    if axis in table:
        override = table[axis]
        if not isinstance(override, dict):
            raise DatasheetError(
                f"got {override!r}",
                "a table of per-axis values",
                source=source,
                field=f"{name}.{axis}",
            )
        keys = list(FIELDS[name])
        check_keys(override, [*keys, *CONVENTIONS, "filter_order"], f"{name}.{axis}", source)
        level = level.below(override, keys, name, f"{name}.{axis}", source)
        for key in ("angle_random_walk", "velocity_random_walk", "noise_density"):
            if key in override:
                # an axis override of one replaces the instrument's other form
                other = (
                    {"noise_density"}
                    if key != "noise_density"
                    else {"angle_random_walk", "velocity_random_walk"}
                )
                for o in other:
                    if o in level.values and level.origin.get(o, "").count(".") < 2:
                        level.values.pop(o)
                        level.origin.pop(o)
    return AxisSpec(
        name, axis, dict(level.values), level.conventions, level.filter_order, dict(level.origin)
    )


def _check_axis(
    name: str, axis: str, table: dict[str, Any], spec: AxisSpec, source: str
) -> None:
    """Refuse an axis whose forms disagree, that lacks a positive sample rate (or has a zero
    bandwidth) or that has no noise term."""
    values, origin = spec.values, spec.origin
    _check_equivalent(values, spec.conventions, name, origin, source)
    if "sample_rate" not in values:
        raise DatasheetError(
            "no sample_rate",
            "sample_rate in [sensor] or in the instrument table, e.g. '400 Hz'",
            source=source,
            field=f"{name}.sample_rate",
        )
    for key, what in (("sample_rate", "rate such as '400 Hz'"),
                      ("bandwidth", "-3 dB bandwidth such as '100 Hz'")):  # fmt: skip
        if key in values:
            v = values[key].typ or values[key].max
            if not v or v <= 0:
                raise UnitError(
                    f"{key} is zero", f"a positive {what}", source=source, field=origin[key]
                )
    if not any(FIELDS[name][k].term for k in values if k in FIELDS[name]):
        raise DatasheetError(
            "no noise term",
            "at least one of " + ", ".join(k for k, f in FIELDS[name].items() if f.term),
            source=source,
            field=f"{name}.{axis}" if axis in table else name,
        )


def load_datasheet(path: str | os.PathLike[str]) -> Datasheet:
    """Read a datasheet TOML file, validate it and convert every value to SI.

    Parameters
    ----------
    path : path-like
        The ``.toml`` file.

    Returns
    -------
    Datasheet
        SI values (typ / max per term), per channel, with the conventions applied at
        conversion time (:mod:`sensormodel.convert`).

    Raises
    ------
    DatasheetError, UnitError
        Naming the file and the offending key, e.g.
        ``survey.toml:gyro.angle_random_walk: got '0.1 1/h**0.5' ...``.
    """
    p = pathlib.Path(path)
    try:
        raw = p.read_bytes()
    except FileNotFoundError:
        raise DatasheetError(
            "no such file", "an existing datasheet .toml file", source=str(p)
        ) from None
    except IsADirectoryError:
        raise DatasheetError("is a folder", "a datasheet .toml file", source=str(p)) from None
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise DatasheetError("not UTF-8 text", "a TOML file in UTF-8", source=str(p)) from None
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        line = ""
        if "(at line" in msg:
            line = "line " + msg.split("(at line", 1)[1].split(",")[0].strip()
            msg = msg.split("(at line", 1)[0].strip()
        raise DatasheetError(
            f"not valid TOML ({msg})", "a TOML datasheet", source=str(p), field=line or None
        ) from None
    ds = parse_datasheet(data, source=str(p), sha256=hashlib.sha256(raw).hexdigest())
    try:
        validate(data, "datasheet.schema.json", source=str(p))
    except ModelFileError as exc:  # structure already checked above; the schema is the contract
        raise DatasheetError(
            exc.problem,
            "a datasheet as in schemas/datasheet.schema.json",
            source=str(p),
            field=exc.field,
        ) from None
    return ds


def datasheet_schema() -> dict[str, Any]:
    """The JSON Schema of datasheet files, generated from :data:`FIELDS` and :data:`CONVENTIONS`."""
    ref = {"$ref": "#/$defs/spec"}
    conv = {
        key: {"enum": list(allowed), "default": default}
        for key, (allowed, default) in CONVENTIONS.items()
    }
    order = {"$ref": "#/$defs/filter_order"}
    axes = {"type": "array", "items": {"enum": list(_AXES)}, "minItems": 1, "uniqueItems": True}

    def term_props(name: str) -> dict[str, Any]:
        return {
            key: {
                **ref,
                "description": f"{f.what}: {KINDS[f.kind].what}, e.g. '{KINDS[f.kind].example}'",
            }
            for key, f in FIELDS[name].items()
        }

    defs: dict[str, Any] = {
        "quantity": {"type": "string", "minLength": 1, "description": "a number, then its unit"},
        "spec": {
            "oneOf": [
                {"$ref": "#/$defs/quantity"},
                {
                    "type": "object",
                    "properties": {
                        "typ": {"$ref": "#/$defs/quantity"},
                        "max": {"$ref": "#/$defs/quantity"},
                    },
                    "additionalProperties": False,
                    "minProperties": 1,
                },
            ]
        },
        "filter_order": {"type": "integer", "minimum": 1, "maximum": _MAX_FILTER_ORDER},
    }
    instruments = {}
    for name in INSTRUMENTS:
        defs[f"{name}_axis"] = {
            "type": "object",
            "properties": {**term_props(name), **conv, "filter_order": order},
            "additionalProperties": False,
        }
        instruments[name] = {
            "type": "object",
            "properties": {
                **term_props(name),
                **conv,
                "filter_order": order,
                "axes": axes,
                **{a: {"$ref": f"#/$defs/{name}_axis"} for a in _AXES},
            },
            "additionalProperties": False,
        }
    sensor = {
        "type": "object",
        "properties": {
            **{k: {"type": "string"} for k in _SENSOR_TEXT_KEYS},
            "axes": axes,
            "sample_rate": {**ref, "description": "output data rate, e.g. '400 Hz'"},
            "bandwidth": {**ref, "description": "output filter -3 dB bandwidth, e.g. '100 Hz'"},
            "filter_order": order,
            **conv,
        },
        "additionalProperties": False,
    }
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": "sensormodel/datasheet/1",
        "title": "sensormodel datasheet (TOML)",
        "description": "The noise section of an inertial-sensor datasheet. Generated from "
        "sensormodel.datasheet.FIELDS; do not edit by hand.",
        "type": "object",
        "properties": {"sensor": sensor, **instruments},
        "required": ["sensor"],
        "additionalProperties": False,
        "$defs": defs,
    }
