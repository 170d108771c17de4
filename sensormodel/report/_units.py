"""Display units: the kind of a term parameter, readable labels, durations for people.

Values stay in SI everywhere else; these helpers choose the unit a table or a figure shows them
in, from the conventions of :mod:`sensormodel.quantities` (``DISPLAY_UNITS``,
``display_scale``, ``INSTRUMENT_KIND``, ``SI_LABEL``).
"""

from __future__ import annotations

import math

from ..errors import SensorModelError
from ..quantities import (
    DISPLAY_UNITS,
    INSTRUMENT_KIND,
    SI_LABEL,
    convert_from_si,
    display_scale,
    kind_of,
    split_value,
)

__all__ = [
    "DRIFT_DISPLAY",
    "counted",
    "channel_display",
    "display_values",
    "format_duration",
    "model_display",
]

def counted(n: int, noun: str, plural: str | None = None) -> str:
    """``"1 channel"``, ``"2 channels"``: a count with its noun in the right number
    (``plural`` where it is not the noun + s)."""
    return f"{n} {noun if n == 1 else (plural or noun + 's')}"


#: The kinds whose channels are shown in a readable unit (°/h, µg) rather than in SI.
_READABLE = tuple(INSTRUMENT_KIND.values())

#: Drift display units: angle in degrees; velocity and position stay SI (m/s, m).
DRIFT_DISPLAY: dict[str, tuple[str, float]] = {
    "angle": ("°", convert_from_si(1.0, "angle", "deg")),
    "velocity": ("m/s", 1.0),
    "position": ("m", 1.0),
}

#: The SI unit of a term parameter of a gyro or accelerometer channel, as tables print it.
_SI_TYPESET: dict[str, str] = {
    "angle_random_walk": "rad/√s",
    "angular_rate": "rad/s",
    "rate_random_walk": "rad/s/√s",
    "angle": "rad",
    "angular_rate_ramp": "rad/s²",
    "velocity_random_walk": "m/s/√s",
    "acceleration": "m/s²",
    "acceleration_random_walk": "m/s²/√s",
    "velocity": "m/s",
    "acceleration_ramp": "m/s³",
}

#: Units of the per-sample standard deviation shown beside the SI value: (unit, label).
_SAMPLE_STD_UNITS = {"angular_rate": ("deg/s", "°/s"), "acceleration": ("mg", "mg")}

#: Relative units that are a kind whatever the channel's unit.
_FIXED_KIND = {"Hz": "frequency", "s": "time"}


def parameter_kind(relative_unit: str, unit: str) -> str | None:
    """The kind of a term parameter whose unit is ``relative_unit`` with u = the channel unit.

    Parameters
    ----------
    relative_unit : str
        The parameter's unit relative to the channel's (``"u*s**0.5"``, ``"Hz"``, ...), from
        ``Term.units``.
    unit : str
        The channel's unit (``""`` or ``"1"`` for a recording in its own units).

    Returns
    -------
    str or None
        A key of :data:`sensormodel.quantities.KINDS`, or None where the unit has no known kind.
    """
    if relative_unit in _FIXED_KIND:
        return _FIXED_KIND[relative_unit]
    if unit in ("", "1"):
        return None
    try:
        return kind_of(relative_unit.replace("u", f"({unit})"))
    except Exception:  # a unit pint cannot read, or of no known kind: its own unit only
        return None


def si_label(relative_unit: str, unit: str) -> str:
    """The SI unit of a term parameter as tables print it (``rad/√s``, ``m/s²``).

    A gyro's or an accelerometer's channel gets the typeset label of the parameter's kind;
    another unit is written out (``u`` replaced by the channel's unit, or by ``(as recorded)``).
    """
    if unit in ("", "1"):
        return relative_unit.replace("u", "(as recorded)")
    if unit in (SI_LABEL[k] for k in _READABLE):
        kind = parameter_kind(relative_unit, unit)
        if kind in _SI_TYPESET:
            return _SI_TYPESET[kind]
    return relative_unit.replace("u", f"({unit})")


def sample_std_display(unit: str) -> tuple[str, str, str] | None:
    """(kind, unit text, label) of the per-sample standard deviation of a channel stored in
    ``unit`` (°/s for rad/s, mg for m/s^2); None for another unit."""
    kind = next((k for k in _READABLE if SI_LABEL[k] == unit), None)
    return None if kind is None else (kind, *_SAMPLE_STD_UNITS[kind])


def channel_display(quantity: str | None, unit: str = "") -> tuple[str, float]:
    """(label, factor from SI) of a channel's deviations: °/h for angular rates, µg for
    accelerations, the channel's own ``unit`` (factor 1) otherwise.

    Parameters
    ----------
    quantity : str or None
        The channel's kind (``"angular_rate"``, ...), e.g. ``INSTRUMENT_KIND[instrument]``.
    unit : str
        The channel's stored unit, shown as it is where the kind has no readable unit.
    """
    if quantity in _READABLE:
        return display_scale(quantity)
    return unit, 1.0


def model_display(model) -> dict[str, tuple[str, float]]:
    """Display units of a model's figure: °/h for gyros, µg for accelerometers (by channel id)."""
    return {ch.id: display_scale(ch.quantity) for ch in model.channels if ch.quantity in _READABLE}


def format_duration(seconds: float | None) -> str:
    """A duration for people: ``25 ms``, ``0.5 s``, ``45 s``, ``12.5 min``, ``3.2 h``, ``4.1 d``,
    ``2.3 years``; ``none decides it`` for None and ``unbounded`` for infinity.

    Parameters
    ----------
    seconds : float or None
        The duration [s].
    """
    if seconds is None:
        return "none decides it"
    if not math.isfinite(seconds):
        return "unbounded"
    if seconds == 0.0:
        return "0 s"
    if seconds < 1e-3:
        return f"{seconds * 1e6:.3g} µs"
    if seconds < 0.1:
        return f"{seconds * 1e3:.3g} ms"
    if seconds < 120.0:
        return f"{seconds:.3g} s"
    if seconds < 2 * 3600.0:
        return f"{seconds / 60.0:.3g} min"
    if seconds < 72 * 3600.0:
        return f"{seconds / 3600.0:.3g} h"
    if seconds < 2 * 365.25 * 86400.0:
        return f"{seconds / 86400.0:.3g} d"
    return f"{seconds / (365.25 * 86400.0):.3g} years"


def _spec_unit(spec) -> tuple[str, str]:
    """(unit text to convert to, label) for a spec term: the datasheet's printed unit."""
    unit = ""
    if spec.text:
        try:
            unit = split_value(spec.text)[1].strip()
            convert_from_si(1.0, spec.kind, unit)
        except SensorModelError:
            unit = ""
    if not unit:
        unit, label = DISPLAY_UNITS[spec.kind]
        return unit, label
    return unit, unit


def display_values(spec, *values: float) -> tuple[str, list[float]]:
    """SI values of a spec term's compared quantity in the datasheet's unit and convention.

    Returns
    -------
    (str, list of float)
        The unit label and the converted values (each × ``spec.display_scale``).
    """
    unit, label = _spec_unit(spec)
    return label, [convert_from_si(v * spec.display_scale, spec.kind, unit) for v in values]
