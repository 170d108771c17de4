"""Units: the one pint registry and the parser for datasheet typography.

This is the only module that knows about unit strings. Everything past it works in SI floats
and arrays (rad, rad/s, m/s, m/s², s, Hz).

Two choices differ from pint's defaults, on purpose:

* **Angle is a real dimension.** pint treats ``radian`` as dimensionless, so ``deg/s`` would
  convert to ``Hz`` without complaint. Here ``radian = [angle]``, so ``0.1 1/sqrt(h)`` is refused
  where an angle random walk is expected, and ``deg/s`` never becomes ``Hz``.
* **``g`` is standard gravity in acceleration fields.** Datasheets write ``25 µg`` and
  ``60 ug/√Hz`` meaning micro-g (g_n = 9.80665 m/s² exactly, 3rd CGPM 1901; NIST SP 330), never
  micrograms. Where the expected dimension involves length, the tokens ``g``, ``mg``, ``ug``,
  ``µg`` and ``ng`` are read as multiples of g_n; elsewhere they stay grams (and so fail the
  dimension check).

The kinds of quantity a datasheet or recording can carry are kept as data in :data:`KINDS`; the
datasheet field table, the schema, the help texts and the error messages all draw on it.
"""

from __future__ import annotations

import math
import pathlib
import re
from dataclasses import dataclass
from functools import lru_cache

import pint

from .errors import UnitError

__all__ = [
    "dimension_words",
    "UREG",
    "KINDS",
    "Kind",
    "STANDARD_GRAVITY",
    "parse_quantity",
    "parse_unit_factor",
    "convert_from_si",
    "normalize_unit",
    "format_value",
    "DISPLAY_UNITS",
    "INSTRUMENT_KIND",
    "SI_LABEL",
    "display_scale",
    "split_value",
    "kind_of",
]

#: Standard gravity [m/s²], exact by definition (3rd CGPM 1901, CR 70; NIST SP 330).
STANDARD_GRAVITY = 9.80665


def _build_registry() -> pint.UnitRegistry:
    base = pathlib.Path(pint.__file__).parent
    text = base.joinpath("default_en.txt").read_text(encoding="utf-8")
    if "radian = [] = rad" not in text:  # pragma: no cover - guards a pint format change
        raise RuntimeError("pint's default definitions changed: cannot make angle a dimension")
    text = text.replace("radian = [] = rad", "radian = [angle] = rad")
    constants = base.joinpath("constants_en.txt").read_text(encoding="utf-8")
    text = text.replace("@import constants_en.txt", constants)
    reg = pint.UnitRegistry(None)
    reg.load_definitions(text.splitlines())
    reg.define(f"gee = {STANDARD_GRAVITY!r} * meter / second ** 2")
    return reg


#: The project's one unit registry (angle is a base dimension; ``gee`` is standard gravity).
UREG: pint.UnitRegistry = _build_registry()


@dataclass(frozen=True)
class Kind:
    """A kind of physical quantity: its SI unit and how to describe it in messages.

    Attributes
    ----------
    si : str
        The SI unit every value of this kind is converted to (pint syntax).
    what : str
        A description for error messages.
    example : str
        A typical datasheet spelling, for error messages and help.
    acceleration : bool
        Whether ``g``/``mg``/``µg`` mean standard gravity in this kind (dimension has length).
    """

    si: str
    what: str
    example: str
    acceleration: bool = False


#: Every kind of quantity sensormodel reads, with its SI unit.
KINDS: dict[str, Kind] = {
    "angle": Kind("rad", "an angle", "0.5 urad"),
    "angular_rate": Kind("rad/s", "an angular rate", "10 deg/h"),
    "angle_random_walk": Kind(
        "rad/s**0.5", "an angle random walk (angular rate per root hertz)", "0.15 deg/rt-h"
    ),
    "rate_random_walk": Kind("rad/s**1.5", "a rate random walk", "2 deg/h/rt-h"),
    "angular_rate_ramp": Kind("rad/s**2", "an angular-rate ramp", "0.5 deg/h^2"),
    "velocity": Kind("m/s", "a velocity", "0.1 mm/s", acceleration=True),
    "acceleration": Kind("m/s**2", "an acceleration", "25 ug", acceleration=True),
    "velocity_random_walk": Kind(
        "m/s**1.5",
        "a velocity random walk (acceleration per root hertz)",
        "60 ug/rtHz",
        acceleration=True,
    ),
    "acceleration_random_walk": Kind(
        "m/s**2.5", "an acceleration random walk", "3 ug/s/rt-Hz", acceleration=True
    ),
    "acceleration_ramp": Kind("m/s**3", "an acceleration ramp", "1 ug/h", acceleration=True),
    "time": Kind("s", "a time", "100 s"),
    "angular_rate_per_temperature": Kind(
        "rad/s/K", "an angular rate per degree of temperature", "0.01 deg/s/degC"
    ),
    "acceleration_per_temperature": Kind(
        "m/s**2/K", "an acceleration per degree of temperature", "0.05 mg/degC", acceleration=True
    ),
    "per_temperature": Kind("1/K", "a ratio per degree of temperature", "100 ppm/degC"),
    "rate_per_acceleration": Kind(
        "rad*s/m", "an angular rate per acceleration", "1 deg/h/g", acceleration=True
    ),
    "rate_per_acceleration_squared": Kind(
        "rad*s**3/m**2", "an angular rate per acceleration squared", "0.1 deg/h/g^2",
        acceleration=True,
    ),
    "acceleration_per_acceleration_squared": Kind(
        "s**2/m", "an acceleration per acceleration squared", "50 ug/g^2", acceleration=True
    ),
    "frequency": Kind("Hz", "a frequency", "400 Hz"),
    "dimensionless": Kind("", "a plain ratio", "100 ppm"),
}

_NUMBER = re.compile(
    r"""^\s*
    (?P<mant>[+-]?(?:(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?|nan|inf(?:inity)?))
    (?:\s*(?:[x×·*]|\*)\s*10\s*(?:\^|\*\*)?\s*(?P<exp>[+-]?\d+))?
    \s*(?P<unit>.*?)\s*$""",
    re.VERBOSE | re.IGNORECASE,
)
# What may remain of a normalized unit once its unit names ("g0" included), powers ("**0.5",
# "**(1/2)", "**-3") and a leading "1/" are taken out: "*", "/", parentheses, "%". Anything
# else (a stray number, "=", "+", "#", a control character) would make pint compute something
# silently.
_POWER = re.compile(r"\*\*\s*(?:\(\s*[+-]?\d+(?:\.\d+)?(?:\s*/\s*\d+)?\s*\)|[+-]?\d+(?:\.\d+)?)")
_NAME = re.compile(r"[A-Za-z_][A-Za-z_0-9]*")
_LEADING_ONE = re.compile(r"(?:^|(?<=\())\s*1\s*(?=/)")
_UNIT_REST = re.compile(r"[*/()% ]*")

_SUPERSCRIPTS = str.maketrans("⁰¹²³⁴⁵⁶⁷⁸⁹⁺⁻", "0123456789+-")
_SUPER_RUN = re.compile(r"[⁺⁻]?[⁰¹²³⁴⁵⁶⁷⁸⁹]+")
_TEN_POWER = re.compile(r"(?<=10)([⁺⁻]?[⁰¹²³⁴⁵⁶⁷⁸⁹]+)")
# A root takes one whole unit name ("√h3" is the unknown unit h3, not h**0.53) and is wrapped
# in parentheses so a power after it applies to the root ("√h²" is h, not h**0.25).
_ROOT_PAREN = re.compile(
    r"(?:√|(?<![A-Za-z_])(?:sqrt|root|rt))\s*[-_ ]?\s*\(\s*([A-Za-z_][A-Za-z_0-9]*)\s*\)"
)
_ROOT_WORD = re.compile(r"(?:√|(?<![A-Za-z_])(?:sqrt|root|rt))\s*[-_ ]?\s*([A-Za-z_][A-Za-z_0-9]*)")
_WORD_ALIASES = {
    "dps": "(deg/s)",
    "mdps": "(millideg/s)",
    "udps": "(microdeg/s)",
    "dph": "(deg/hr)",
    "hrs": "hr",
    "secs": "s",
    "deg": "deg",
}
_WORD = re.compile(r"(?<![A-Za-z_])([A-Za-z_]+)(?![A-Za-z_0-9])")
_CELSIUS = re.compile(r"(?:°|º|\bdeg\s*)\s*C\b|\bdegC\b|\bcelsius\b", re.IGNORECASE)
_GEE = re.compile(r"(?<![A-Za-z_])([mun]?)g(?![A-Za-z_0-9])")
_GEE_PREFIX = {"": "gee", "m": "milligee", "u": "microgee", "n": "nanogee"}


def normalize_unit(text: str, *, acceleration: bool = False) -> str:
    """Rewrite datasheet unit typography into pint syntax.

    Parameters
    ----------
    text : str
        A unit as printed, e.g. ``"°/√h"``, ``"deg/rt-hr"``, ``"mdps/√Hz"``, ``"µg/rtHz"``.
    acceleration : bool
        Read ``g``, ``mg``, ``ug`` and ``ng`` as multiples of standard gravity.

    Returns
    -------
    str
        The same unit in pint syntax, e.g. ``"deg/((hr)**0.5)"``.
    """
    s = text.strip().replace("−", "-").replace("–", "-")
    # a degree Celsius in a unit (°C, degC, deg C) is a temperature difference: /°C is /K
    s = _CELSIUS.sub(" delta_degC ", s)
    s = s.replace("°", " deg ").replace("º", " deg ").replace("µ", "u").replace("μ", "u")
    s = s.replace("^½", "**0.5").replace("½", "**0.5").replace("·", "*").replace("⋅", "*")
    s = _SUPER_RUN.sub(lambda m: "**" + m.group(0).translate(_SUPERSCRIPTS), s)
    s = _ROOT_PAREN.sub(r"((\1)**0.5)", s)
    s = _ROOT_WORD.sub(r"((\1)**0.5)", s)
    s = s.replace("^", "**")
    s = _WORD.sub(lambda m: _WORD_ALIASES.get(m.group(1), m.group(1)), s)
    if acceleration:
        s = _GEE.sub(lambda m: _GEE_PREFIX[m.group(1)], s)
    s = re.sub(r"\s*/\s*", "/", s)
    s = re.sub(r"\s+", " ", s).strip()
    s = re.sub(r"(?<=[A-Za-z_)0-9]) (?=[A-Za-z_(])", "*", s)
    return s


_POWER_WORDS = {0.5: "√{}", 1: "{}", 1.5: "{}^1.5", 2: "{}²", 2.5: "{}^2.5", 3: "{}³"}


def dimension_words(dim: str) -> str:
    """A dimension in words for messages: ``"[mass] * [time] ** 0.5"`` → ``"mass × √time"``,
    ``"[angle] / [time]"`` → ``"angle / time"``, ``""`` → ``"a plain number"``."""
    if dim in ("", "dimensionless"):
        return "a plain number"
    powers = dict(UREG.get_dimensionality(dim))

    def word(name: str, p: float) -> str:
        base = name.strip("[]")
        return _POWER_WORDS.get(abs(p), "{}^" + f"{abs(p):g}").format(base)

    up = " × ".join(word(n, p) for n, p in powers.items() if p > 0)
    down = " / ".join(word(n, p) for n, p in powers.items() if p < 0)
    return f"{up or '1'} / {down}" if down else up


def _dimension_text(unit: pint.Unit | pint.Quantity) -> str:
    return dimension_words(str(unit.dimensionality))


@lru_cache(maxsize=1024)
def _parse_unit_cached(unit_text: str, acceleration: bool) -> tuple[float, str, str]:
    """Return (factor to the base units, pint text, dimensionality) for a unit string."""
    expr = normalize_unit(unit_text, acceleration=acceleration)
    q = UREG.parse_expression(expr) if expr else UREG.Quantity(1.0)
    if not isinstance(q, pint.Quantity):  # a bare number such as "1"
        q = UREG.Quantity(float(q))
    base = q.to_base_units()
    return float(base.magnitude), str(q.units), str(base.dimensionality)


def _unit_factor(unit_text: str, kind: str, *, field: str | None, source: str | None) -> float:
    """Factor that takes a value in ``unit_text`` to the SI unit of ``kind``."""
    info = _kind(kind)
    rest = _LEADING_ONE.sub("", _POWER.sub("", _NAME.sub("", normalize_unit(unit_text))))
    if not _UNIT_REST.fullmatch(rest):
        bad = next(c for c in rest if not _UNIT_REST.fullmatch(c))
        raise UnitError(
            f"cannot read the unit '{unit_text}' (unexpected {bad!r})",
            f"{info.what} such as '{info.example}' (unit names, '/', powers and roots only)",
            field=field,
            source=source,
        )
    try:
        factor, pretty, dim = _parse_unit_cached(unit_text, info.acceleration)
    except Exception as exc:  # pint's parser raises many types (AssertionError, TokenError, ...)
        if isinstance(exc, pint.errors.UndefinedUnitError):
            detail = "unknown unit " + ", ".join(f"'{n}'" for n in exc.unit_names)
        else:
            detail = "not a unit expression"
        raise UnitError(
            f"cannot read the unit '{unit_text}' ({detail})",
            f"{info.what} such as '{info.example}'",
            field=field,
            source=source,
        ) from None
    si_factor, _, si_dim = _parse_unit_cached(info.si, False) if info.si else (1.0, "", "")
    if dim != si_dim and not (dim in ("", "dimensionless") and si_dim in ("", "dimensionless")):
        shown = dimension_words(dim)
        hint = ""
        if "[mass]" in dim and not info.acceleration:
            hint = " ('g' is read as grams outside acceleration fields)"
        raise UnitError(
            f"got '{unit_text}' ({shown}){hint}",
            f"{info.what} convertible to '{info.si or '1'}', such as '{info.example}'",
            field=field,
            source=source,
        )
    return factor / si_factor


def _kind(kind: str) -> Kind:
    try:
        return KINDS[kind]
    except KeyError:
        raise ValueError(f"unknown quantity kind {kind!r}; known: {sorted(KINDS)}") from None


def parse_quantity(
    value: object,
    kind: str,
    *,
    field: str | None = None,
    source: str | None = None,
    allow_negative: bool = False,
    allow_zero: bool = True,
) -> float:
    """Parse a datasheet value such as ``"0.15 °/√h"`` into an SI float.

    Parameters
    ----------
    value : str or pint.Quantity
        The value as printed, number first, then the unit. ``×10^-3``, ``x10^-3`` and ``1e-3``
        forms of the number are accepted. A bare number is refused (every value carries its
        unit), except for the ``dimensionless`` kind.
    kind : str
        One of :data:`KINDS`; decides the SI unit of the result and the dimension check.
    field, source : str, optional
        Where the value came from, for the error message.
    allow_negative, allow_zero : bool
        Noise magnitudes are non-negative; a zero is allowed unless ``allow_zero`` is False.

    Returns
    -------
    float
        The value in the SI unit ``KINDS[kind].si``.

    Raises
    ------
    UnitError
        Missing, unknown or wrong-dimension unit; negative, zero or non-finite value.
    """
    info = _kind(kind)
    if isinstance(value, pint.Quantity):
        if "[mass]" in str(value.dimensionality):  # e.g. a plain pint "25 ug" (micrograms)
            raise UnitError(
                f"got the quantity {value:~} ({_dimension_text(value)})",
                f"{info.what} such as '{info.example}'",
                field=field,
                source=source,
            )
        value = f"{float(value.magnitude)!r} {value.units:~}"
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        raise UnitError(
            f"got {type(value).__name__} {value!r}",
            f"a text such as '{info.example}'",
            field=field,
            source=source,
        )
    if isinstance(value, (int, float)):
        if info.si:
            raise UnitError(
                f"got the bare number {value!r} with no unit",
                f"{info.what} with its unit, such as '{info.example}'",
                field=field,
                source=source,
            )
        number, unit_text = float(value), ""
    else:
        text = value.replace("−", "-")
        text = _TEN_POWER.sub(lambda t: "^" + t.group(1).translate(_SUPERSCRIPTS), text)
        m = _NUMBER.match(text)
        if m is None:
            raise UnitError(
                f"cannot read '{value}' as a number followed by a unit",
                f"{info.what} such as '{info.example}'",
                field=field,
                source=source,
            )
        number = float(m.group("mant"))
        if m.group("exp"):
            number *= 10.0 ** int(m.group("exp"))
        unit_text = m.group("unit")
        if not unit_text and info.si:
            raise UnitError(
                f"'{value}' has no unit",
                f"{info.what} with its unit, such as '{info.example}'",
                field=field,
                source=source,
            )
    si = number * _unit_factor(unit_text, kind, field=field, source=source)
    if not math.isfinite(si):
        raise UnitError(f"'{value}' is not finite", "a finite value", field=field, source=source)
    if si < 0 and not allow_negative:
        raise UnitError(
            f"'{value}' is negative", "a non-negative magnitude", field=field, source=source
        )
    if si == 0 and not allow_zero:
        raise UnitError(f"'{value}' is zero", "a positive value", field=field, source=source)
    return si


def parse_unit_factor(
    unit_text: str, kind: str, *, field: str | None = None, source: str | None = None
) -> float:
    """Return the factor that converts values in ``unit_text`` into the SI unit of ``kind``.

    Parameters
    ----------
    unit_text : str
        A unit as printed (``"deg/s"``, ``"mg"``, ``"°/h"``).
    kind : str
        One of :data:`KINDS`.

    Returns
    -------
    float
        Multiply a value in ``unit_text`` by this to get SI.
    """
    return _unit_factor(unit_text, kind, field=field, source=source)


def convert_from_si(value: float, kind: str, unit_text: str) -> float:
    """Express an SI value of ``kind`` in ``unit_text`` (for display and output files only)."""
    return value / _unit_factor(unit_text, kind, field=None, source=None)


def format_value(value: float, unit_text: str = "") -> str:
    """Format a number with four significant figures and its unit, for tables."""
    if value == 0:
        num = "0"
    else:
        num = f"{value:.4g}"
    return f"{num} {unit_text}".strip()


#: A readable display unit per kind: (unit in datasheet typography, pretty label).
DISPLAY_UNITS: dict[str, tuple[str, str]] = {
    "angle": ("urad", "µrad"),
    "angular_rate": ("deg/h", "°/h"),
    "angle_random_walk": ("deg/h^0.5", "°/√h"),
    "rate_random_walk": ("deg/h^1.5", "°/h/√h"),
    "angular_rate_ramp": ("deg/h^2", "°/h²"),
    "velocity": ("mm/s", "mm/s"),
    "acceleration": ("ug", "µg"),
    "velocity_random_walk": ("m/s/h^0.5", "m/s/√h"),
    "acceleration_random_walk": ("m/s/h^1.5", "m/s/h^1.5"),
    "acceleration_ramp": ("ug/h", "µg/h"),
    "time": ("s", "s"),
    "frequency": ("Hz", "Hz"),
    "dimensionless": ("", ""),
    "angular_rate_per_temperature": ("deg/h/K", "°/h/K"),
    "acceleration_per_temperature": ("ug/K", "µg/K"),
    "per_temperature": ("ppm/K", "ppm/K"),
    "rate_per_acceleration": ("deg/h/g", "°/h/g"),
    "rate_per_acceleration_squared": ("deg/h/g^2", "°/h/g²"),
    "acceleration_per_acceleration_squared": ("ug/g^2", "µg/g²"),
}


#: The quantity each instrument measures: datasheet table (and channel-id prefix) → kind.
INSTRUMENT_KIND: dict[str, str] = {"gyro": "angular_rate", "accelerometer": "acceleration"}

#: The SI unit label of a channel's quantity as model files, recordings and curves write it.
SI_LABEL: dict[str, str] = {
    "angular_rate": "rad/s",
    "acceleration": "m/s^2",
    "angle": "rad",
    "velocity": "m/s",
}


def display_scale(kind: str) -> tuple[str, float]:
    """The readable label of a kind and the factor that turns an SI value into it.

    Parameters
    ----------
    kind : str
        A key of :data:`DISPLAY_UNITS` (e.g. ``"angular_rate"`` → ``("°/h", 206264.8…)``).

    Returns
    -------
    (str, float)
        The pretty label and ``convert_from_si(1.0, kind, unit)``.
    """
    unit, label = DISPLAY_UNITS[kind]
    return label, convert_from_si(1.0, kind, unit)


def split_value(text: str) -> tuple[float, str]:
    """Split a datasheet value such as ``"0.15 °/√h"`` into (number, unit text)."""
    t = text.replace("−", "-")
    t = _TEN_POWER.sub(lambda m: "^" + m.group(1).translate(_SUPERSCRIPTS), t)
    m = _NUMBER.match(t)
    if m is None:
        raise UnitError(f"cannot read '{text}' as a number followed by a unit")
    number = float(m.group("mant")) * (10.0 ** int(m.group("exp")) if m.group("exp") else 1.0)
    return number, m.group("unit")


@lru_cache(maxsize=256)
def kind_of(unit_text: str) -> str:
    """The kind (key of :data:`KINDS`) whose SI unit has the dimension of ``unit_text``.

    Parameters
    ----------
    unit_text : str
        An SI unit expression, e.g. ``"(rad/s)*s**0.5"``.
    """
    _, _, dim = _parse_unit_cached(unit_text, False)
    for name, info in KINDS.items():
        if _parse_unit_cached(info.si, False)[2] == dim:
            return name
    raise UnitError(f"no known kind of quantity has the unit '{unit_text}'")
