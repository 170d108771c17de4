"""Columns of a recording: channel ids, the time column, column selection and unit plans.

Owns the naming rules (which column is which channel, which is the time column, how a header
field carries its unit), the ``COLUMN=CHANNEL_ID`` option syntax (:func:`parse_channel_map`),
and the unit plan of each column: the factor that turns its values into SI and the quantity
and unit label they then have. The writers take their output units from the same tables
(:func:`output_unit`), so what is written reads back as written.
"""

from __future__ import annotations

import contextlib
import fnmatch
import math
import re
from collections.abc import Collection, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from ..errors import RecordingError, UnitError
from ..quantities import INSTRUMENT_KIND, SI_LABEL, parse_unit_factor
from ._results import Finding

__all__ = [
    "CHANNEL_IDS",
    "TIME_COLUMN_NAMES",
    "channel_id_for",
    "parse_channel_map",
    "no_unit",
    "split_header",
    "ColumnPlan",
    "UnitPlan",
    "plan_columns",
    "to_si",
    "output_unit",
]

#: The channel ids of DESIGN §10.
CHANNEL_IDS = (
    "gyro.x",
    "gyro.y",
    "gyro.z",
    "accelerometer.x",
    "accelerometer.y",
    "accelerometer.z",
)
#: Column names (case ignored) taken as the time column.
TIME_COLUMN_NAMES = ("time", "t", "timestamp")

# The quantity of a rate and of its increment per sample period.
_RATE_OF = {"angle": "angular_rate", "velocity": "acceleration"}
_INCREMENT_OF = {v: k for k, v in _RATE_OF.items()}
# The kinds an unmapped column's unit is tried as, in this order.
_INFER_KINDS = ("angular_rate", "acceleration", "angle", "velocity")
_KIND_WHAT = {
    "angular_rate": "an angular rate such as 'deg/s'",
    "acceleration": "an acceleration such as 'm/s^2' or 'mg'",
    "angle": "an angle increment such as 'rad' or 'deg'",
    "velocity": "a velocity increment such as 'm/s'",
}
_CHANNEL_MAP_EXAMPLE = "rate_z=gyro.z"


# ---------------------------------------------------------------------------------------------
# Names
# ---------------------------------------------------------------------------------------------


def _normal(name: str) -> str:
    """A column name for the naming rules: lower case, separators (``. - space``) as ``_``."""
    return re.sub(r"[\s.\-/]+", "_", name.strip().lower()).strip("_")


_AXIS = r"_?(?P<axis>[xyz])"
# The spellings of each instrument in real logs (common practice), an axis letter after them.
_GYRO_WORDS = (
    "gyro|gyr|gyroscope|gyroscopes|g|w|omega|rate|ang_?rate|angular_?rate|angular_?velocity|"
    "ang_?vel|gyro_?rate|delta_?angle|delta_?theta|dtheta|d_?ang|del_?ang|dangle|theta"
)
_ACCEL_WORDS = (
    "accelerometer|accelerometers|accel|acc|accl|acceleration|a|xl|lin_?acc|"
    "linear_?acceleration|specific_?force|delta_?velocity|delta_?vel|d_?vel|del_?vel|dv"
)
# Name endings after the axis: the unit they state, or None (raw counts, no unit stated).
_SUFFIX_UNITS: dict[str, str | None] = {
    "raw": None,
    "lsb": None,
    "counts": None,
    "cnt": None,
    "adc": None,
    "dps": "deg/s",
    "mdps": "mdps",
    "degs": "deg/s",
    "deg_s": "deg/s",
    "rads": "rad/s",
    "rad_s": "rad/s",
    "radps": "rad/s",
    "mg": "mg",
    "g": "g",
    "ug": "ug",
    "mps2": "m/s^2",
    "ms2": "m/s^2",
    "m_s2": "m/s^2",
}
_SUFFIX = "(?:_(?P<suffix>" + "|".join(sorted(_SUFFIX_UNITS, key=len, reverse=True)) + "))?"
_PREFIX = r"(?:imu_?)?"
_ALIAS = {
    "gyro": re.compile(rf"^{_PREFIX}(?:{_GYRO_WORDS}){_AXIS}{_SUFFIX}$"),
    "accelerometer": re.compile(rf"^{_PREFIX}(?:{_ACCEL_WORDS}){_AXIS}{_SUFFIX}$"),
}


def channel_alias(name: str) -> tuple[str, str | None] | None:
    """The channel id a column name maps to by the naming rules, and the unit its name ends in.

    The rules (common practice in logger output): an instrument word, then the axis, then
    optionally a unit or ``raw``: ``gyro_x``, ``GyroX``, ``gx``, ``wx``, ``rate_x``,
    ``omega_x``, ``delta_angle_x`` (gyro), ``accel_x``, ``acc_x``, ``ax``, ``dv_x``
    (accelerometer), ``gx_raw``, ``gyro_x_dps``, ``acc_z_mg``. Returns None for any other name.

    Examples
    --------
    >>> channel_alias("GyroX")
    ('gyro.x', None)
    >>> channel_alias("acc_z_mg")
    ('accelerometer.z', 'mg')
    """
    n = _normal(name)
    for instrument, pattern in _ALIAS.items():
        m = pattern.match(n)
        if m is not None:
            suffix = m.group("suffix")
            unit = None if suffix is None else _SUFFIX_UNITS[suffix]
            return f"{instrument}.{m.group('axis')}", unit
    return None


def channel_id_for(name: str) -> str | None:
    """The channel id a column name maps to by the naming rules (DESIGN §10), or None.

    ``gyro.x``, ``gyro_x``, ``GYRO_X``, ``GyroX``, ``gx``, ``wx`` all give ``gyro.x``;
    ``accel_x [g]``'s name ``accel_x``, ``acc_x`` and ``ax`` give ``accelerometer.x``
    (:func:`channel_alias`); ``temp`` gives None.
    """
    hit = channel_alias(name)
    return None if hit is None else hit[0]


# Time columns: a time word, optionally after a qualifier and before a unit (common practice).
_TIME_WORDS = "time|t|ts|timestamp|time_?stamp|stamp|datetime|date_?time|epoch|utc|clock"
_TIME_UNITS = {
    "s": "s",
    "sec": "s",
    "secs": "s",
    "seconds": "s",
    "ms": "ms",
    "msec": "ms",
    "millis": "ms",
    "us": "us",
    "usec": "us",
    "micros": "us",
    "µs": "us",
    "ns": "ns",
    "nsec": "ns",
    "nanos": "ns",
}
_TIME_NAME = re.compile(
    r"^(?:(?:sensor|imu|sample|gps|unix|posix|header|rx|log)_?)?"
    rf"(?:{_TIME_WORDS})"
    "(?:_?(?P<unit>" + "|".join(sorted(_TIME_UNITS, key=len, reverse=True)) + "))?$"
)
#: Time-unit words meaning ISO-8601 text stamps.
ISO_UNITS = ("iso", "iso8601", "iso-8601", "datetime", "text")


def time_name_unit(name: str) -> tuple[bool, str | None]:
    """Whether a column name is a time column's, and the unit its name ends in (or None).

    ``time``, ``t``, ``timestamp``, ``ts`` (no unit); ``time_s``, ``ts_ms``, ``time_us``,
    ``timestamp_ns``, ``t_ms`` (with one).
    """
    m = _TIME_NAME.match(_normal(name))
    if m is None:
        return False, None
    u = m.group("unit")
    return True, None if u is None else _TIME_UNITS[u]


# Names of columns kept as auxiliary (common practice): temperature, status, counters.
_AUX_NAME = re.compile(
    r"^(?:\w*_)?(?:temp|temperature|tmp|die_?temp|status|stat|flags?|errors?|err|counter|"
    r"count|cnt|seq|sequence|seq_?no|frame|frame_?id|index|idx|sample|sample_?(?:no|num|"
    r"count|index|counter)|crc|checksum|valid|mode|sync|pps|voltage|vdd|vcc|supply|id)"
    r"(?:_\w*)?$"
)
# Units of auxiliary quantities: temperature, electric (as written, lower case, no spaces).
_AUX_UNITS = {"degc", "°c", "c", "celsius", "k", "kelvin", "degf", "°f", "v", "mv", "a", "ma"}


def auxiliary_by_rule(name: str, unit: str | None) -> bool:
    """Whether a column is auxiliary by its name or unit (temperature, status, counter)."""
    if unit is not None and re.sub(r"\s+", "", unit).lower() in _AUX_UNITS:
        return True
    n = _normal(name)
    if channel_alias(name) is not None or time_name_unit(name)[0]:
        return False
    return _AUX_NAME.match(n) is not None or "temp" in n.split("_")


def parse_channel_map(pairs: Sequence[str], *, option: str = "--channel") -> dict[str, str]:
    """Read ``COLUMN=CHANNEL_ID`` pairs (the ``--channel`` option) into a mapping.

    Parameters
    ----------
    pairs : sequence of str
        Each ``"COLUMN=CHANNEL_ID"``, e.g. ``"rate_z=gyro.z"``; spaces around either side are
        ignored. A column given twice takes the last channel.
    option : str
        The option's name, used in the message.

    Returns
    -------
    dict of str to str
        Column name → channel id as written (empty for no pairs); :func:`read_recording`
        checks the ids against the file's columns and :data:`CHANNEL_IDS`.

    Raises
    ------
    RecordingError
        A pair without ``=`` or with an empty side, naming the option.

    Examples
    --------
    >>> parse_channel_map(["rate_z = gyro.z", "acc=accelerometer.z"])
    {'rate_z': 'gyro.z', 'acc': 'accelerometer.z'}
    """
    out: dict[str, str] = {}
    for pair in pairs:
        column, sep, channel = pair.partition("=")
        if not sep or not column.strip() or not channel.strip():
            raise RecordingError(
                f"{option} {pair}",
                f"COLUMN=CHANNEL_ID, e.g. {option} {_CHANNEL_MAP_EXAMPLE}",
            )
        out[column.strip()] = channel.strip()
    return out


def no_unit(unit: str | None) -> bool:
    """Whether a unit text means "no unit" (None, empty, ``1`` or ``-``)."""
    return unit is None or unit.strip() in ("", "1", "-")


_HEADER_UNIT = re.compile(
    r"^(?P<name>.*?)\s*(?:\[(?P<b>[^\[\]]*)\]|\((?P<p>[^()]*)\)|\{(?P<c>[^{}]*)\})\s*$"
)


def split_header(text: str) -> tuple[str, str | None]:
    """A header field → (name, unit): the unit in brackets, parentheses or braces at its end.

    ``'gyro_x [deg/s]'``, ``'GyroX(dps)'`` and ``'gyro_x {deg/s}'`` give the name and the
    unit; ``'gyro_x'`` gives ``('gyro_x', None)``; ``'(deg/s)'`` alone is a name.
    """
    s = text.strip()
    m = _HEADER_UNIT.match(s)
    if m is None or not m.group("name").strip():
        return s, None
    unit = next(g for g in (m.group("b"), m.group("p"), m.group("c")) if g is not None).strip()
    return m.group("name").strip(), (None if no_unit(unit) else unit)


def _find_column(key: str, names: Sequence[str], what: str, src: str) -> int:
    """Index of the column called ``key`` (exact, else case-insensitive, else channel rule)."""
    if key in names:
        if names.count(key) > 1:
            raise RecordingError(
                f"the column name '{key}' appears {names.count(key)} times",
                "unique column names",
                source=src,
            )
        return names.index(key)
    low = [n.lower() for n in names]
    if low.count(key.lower()) == 1:
        return low.index(key.lower())
    cid = channel_id_for(key)
    if cid is not None:
        hits = [i for i, n in enumerate(names) if channel_id_for(n) == cid]
        if len(hits) == 1:
            return hits[0]
    raise RecordingError(
        f"unknown column '{key}' in {what}",
        "one of the columns " + ", ".join(f"'{n}'" for n in names),
        source=src,
    )


def _time_column(
    names: Sequence[str], time: str | bool | None, src: str
) -> tuple[int | None, str | None]:
    """Index of the time column and the unit its name ends in: the column ``time`` names, none
    (``time=False``), or the one column named like a time column (:func:`time_name_unit`)."""
    if time is False:
        return None, None
    if isinstance(time, str):
        i = _find_column(time, names, "--time", src)
        return i, time_name_unit(names[i])[1]
    hits = [i for i, n in enumerate(names) if time_name_unit(n.rsplit("/", 1)[-1])[0]]
    if len(hits) > 1:
        listed = ", ".join(f"'{names[i]}'" for i in hits)
        raise RecordingError(
            f"several time columns: {listed}",
            f"one of them named with --time (e.g. --time {names[hits[0]]}; the others are "
            "kept as auxiliary), or --time none",
            source=src,
        )
    if not hits:
        return None, None
    return hits[0], time_name_unit(names[hits[0]].rsplit("/", 1)[-1])[1]


def _globs(
    patterns: str | Sequence[str], names: Sequence[str], among: Sequence[int], option: str, src: str
) -> set[int]:
    """The column indices (of ``among``) that names or globs match; each must match one."""
    if isinstance(patterns, str):
        patterns = [p.strip() for p in patterns.split(",") if p.strip()]
    hit: set[int] = set()
    for pat in patterns:
        hits = [
            i
            for i in among
            if fnmatch.fnmatchcase(names[i].lower(), pat.lower())
            or fnmatch.fnmatchcase(
                names[i].lower().replace("_", "."), pat.lower().replace("_", ".")
            )
        ]
        if not hits:
            raise RecordingError(
                f"no column matches '{pat}' in {option}",
                "a name or glob matching one of the columns "
                + ", ".join(f"'{names[i]}'" for i in among),
                source=src,
            )
        hit.update(hits)
    return hit


def _map_channels(
    channel_map: Mapping[str, str] | None,
    names: Sequence[str],
    time_idx: int | None,
    src: str,
) -> dict[int, str]:
    """Column index → channel id for the columns ``channel_map`` names."""
    mapping: dict[int, str] = {}
    for col, cid in (channel_map or {}).items():
        i = _find_column(col, names, "--channel", src)
        target = channel_id_for(cid)
        if target is None:
            raise RecordingError(
                f"'{cid}' in --channel {col}={cid} is not a channel id",
                "one of " + ", ".join(CHANNEL_IDS),
                source=src,
            )
        if i == time_idx:
            raise RecordingError(
                f"--channel maps the time column '{names[i]}'", "a data column", source=src
            )
        mapping[i] = target
    return mapping


def _select(
    names: Sequence[str],
    units: Sequence[str | None],
    time_idx: int | None,
    columns: str | Sequence[str] | None,
    auxiliary: str | Sequence[str] | None,
    mapped: Sequence[int],
    src: str,
) -> tuple[list[int], list[int]]:
    """The analysed columns and the auxiliary ones (every other column but time).

    Analysed: the columns ``columns`` matches and those ``channel_map`` names; without
    ``columns``, the columns that map to a channel id (by ``channel_map`` or the naming rules),
    or, when none does, every column that is not auxiliary by its name or unit. ``auxiliary``
    marks columns auxiliary whatever their name.
    """
    data_idx = [i for i in range(len(names)) if i != time_idx]
    marked = set() if auxiliary is None else _globs(auxiliary, names, data_idx, "--aux", src)
    if columns is not None:
        chosen = _globs(columns, names, data_idx, "--columns", src) | set(mapped)
    else:
        free = [i for i in data_idx if i not in marked]
        named = {i for i in free if channel_id_for(names[i]) is not None}
        if mapped or named:
            chosen = set(mapped) | named
        else:
            chosen = {i for i in free if not auxiliary_by_rule(names[i], units[i])}
    if not chosen:
        raise RecordingError(
            "no column to analyse",
            "a column named like a channel (gyro_x, ax …), --channel COLUMN=ID or --columns",
            source=src,
        )
    return sorted(chosen), [i for i in data_idx if i not in chosen]


# ---------------------------------------------------------------------------------------------
# Unit plans
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ColumnPlan:
    """How one data column becomes one channel."""

    #: The column's position in the file.
    index: int
    #: The column's name in the file.
    name: str
    #: The channel id (or the column name for an unmapped column).
    channel: str
    #: The column's unit as written (file or option), None without one.
    unit: str | None
    #: The kind of the values in the file (``angular_rate``, ``angle``, …) or ``as_recorded``.
    quantity: str
    #: File value × factor = SI value of that kind.
    factor: float
    #: The values are increments per sample period (divided by the period, i.e. × rate).
    per_sample: bool

    @property
    def si_quantity(self) -> str:
        """The kind of the channel's SI data (a rate for increments), or ``as_recorded``."""
        return _RATE_OF.get(self.quantity, self.quantity) if self.per_sample else self.quantity

    @property
    def si_unit(self) -> str:
        """The unit label of the channel's data: SI, or as recorded (``1``, ``1/s``)."""
        quantity = self.si_quantity
        if quantity in SI_LABEL:
            return SI_LABEL[quantity]
        if self.unit is None:
            return "1/s" if self.per_sample else "1"
        return self.unit


@dataclass(frozen=True)
class AuxPlan:
    """How one auxiliary column is kept: its values × ``scale``, in ``unit`` as written."""

    #: The column's position in the file.
    index: int
    #: The column's name in the file.
    name: str
    #: The unit of the kept values as written (a scale's number taken out), None without one.
    unit: str | None
    #: File value × scale = kept value.
    scale: float


@dataclass(frozen=True)
class UnitPlan:
    """The columns to read and how: the result of :func:`plan_columns`.

    Attributes
    ----------
    columns : tuple of ColumnPlan
        The analysed columns, in file order.
    auxiliary : tuple of AuxPlan
        The other columns but time: read and kept, never checked or analysed.
    time_index : int or None
        The time column's position, None without one.
    time_factor : float
        Time column value × factor = seconds (1 for ISO-8601 text).
    time_unit : str or None
        The time column's unit as written; ``"iso8601"`` for text stamps.
    increments : bool
        The samples are increments (as the option or the file states, or as the units say).
    notes : tuple of Finding
        ``note`` findings (a unit option overriding the file's, increments from the units).
    """

    columns: tuple[ColumnPlan, ...]
    time_index: int | None
    time_factor: float
    increments: bool
    notes: tuple[Finding, ...]
    auxiliary: tuple[AuxPlan, ...] = ()
    time_unit: str | None = None

    @property
    def time_iso(self) -> bool:
        """The time column holds ISO-8601 text (loaded apart from the numeric columns)."""
        return self.time_unit == "iso8601"

    @property
    def wanted(self) -> list[int]:
        """The numeric column indices to load: analysed, auxiliary, then the time column."""
        idx = [c.index for c in self.columns] + [a.index for a in self.auxiliary]
        if self.time_index is None or self.time_iso:
            return idx
        return [*idx, self.time_index]


def plan_columns(
    names: Sequence[str],
    header_units: Sequence[str | None],
    *,
    unit: str | Mapping[str, str] | None,
    increments: bool | None,
    file_increments: bool | None,
    columns: str | Sequence[str] | None,
    channel_map: Mapping[str, str] | None,
    src: str,
    auxiliary: str | Sequence[str] | None = None,
    time: str | bool | None = None,
    time_unit: str | None = None,
    text_stamps: Collection[int] = (),
) -> UnitPlan:
    """Find the time column, map and select the data columns, and plan their units.

    Parameters
    ----------
    names, header_units : sequence
        The file's column names and the units it gives (None where it gives none).
    unit, increments, columns, channel_map, auxiliary, time, time_unit
        The reader's options (:func:`read_recording`).
    file_increments : bool or None
        What the file states about increments, None when it says nothing.
    text_stamps : collection of int
        The columns whose first value is an ISO-8601 stamp (a time column among them without a
        unit is read as ISO-8601 text).
    src : str
        The file, for messages.

    Returns
    -------
    UnitPlan
    """
    _check_unique(names, src)
    time_idx, name_unit = _time_column(names, time, src)
    mapping = _map_channels(channel_map, names, time_idx, src)
    units, notes = _column_units(names, header_units, unit, time_idx, src)
    selected, aux = _select(names, units, time_idx, columns, auxiliary, list(mapping), src)
    if isinstance(unit, str):  # one unit for the analysed columns that give none
        units = [unit if i in selected and no_unit(u) else u for i, u in enumerate(units)]
    cids = _channel_ids(names, selected, mapping, src)
    inc = _increments(increments, file_increments, src)
    if increments is None and file_increments is None and _units_say_increments(cids, units):
        inc = True
        notes.append(
            Finding(
                "note",
                None,
                0,
                "the units are angles and velocities: the samples are read as increments per "
                "sample period",
            )
        )
    plans = tuple(_plan_column(i, names[i], cids[i], units[i], inc, src) for i in selected)
    aux_plans = tuple(_aux_plan(i, names[i], units[i], src) for i in aux)
    t_unit, t_factor = None, 1.0
    if time_idx is not None:
        if time_idx in text_stamps and time_unit is None and no_unit(units[time_idx]):
            name_unit = "iso8601"
        t_unit = _time_unit(names[time_idx], units[time_idx], time_unit, name_unit, src)
        t_factor = 1.0 if t_unit == "iso8601" else _time_factor(names[time_idx], t_unit, src)
    return UnitPlan(plans, time_idx, t_factor, inc, tuple(notes), aux_plans, t_unit)


def _channel_ids(
    names: Sequence[str], selected: Sequence[int], mapping: Mapping[int, str], src: str
) -> dict[int, str]:
    """The channel id of each analysed column: mapped, by the naming rules, else its name."""
    cids: dict[int, str] = {}
    seen: dict[str, str] = {}
    for i in selected:
        cid = mapping.get(i) or channel_id_for(names[i]) or names[i]
        if cid in seen:
            raise RecordingError(
                f"columns '{seen[cid]}' and '{names[i]}' both map to channel {cid}",
                "one column per channel (--channel, --columns or --aux to choose)",
                source=src,
            )
        seen[cid] = names[i]
        cids[i] = cid
    return cids


def _check_unique(names: Sequence[str], src: str) -> None:
    """Refuse a file that names a column twice (which one would be meant?)."""
    seen: set[str] = set()
    for n in names:
        if n in seen:
            raise RecordingError(
                f"the column name '{n}' appears {list(names).count(n)} times",
                "unique column names",
                source=src,
                field=f"column '{n}'",
            )
        seen.add(n)


def _units_say_increments(cids: Mapping[int, str], units: Sequence[str | None]) -> bool:
    """Whether every instrument column has a unit, each an angle (gyro) or a velocity
    (accelerometer): then the samples can only be increments."""
    inst = {i: c.split(".", 1)[0] for i, c in cids.items() if c in CHANNEL_IDS}
    if not inst or any(no_unit(units[i]) for i in inst):
        return False
    for i, instrument in inst.items():
        try:
            unit_factor(str(units[i]), _INCREMENT_OF[INSTRUMENT_KIND[instrument]])
        except RecordingError:
            return False
    return True


def _increments(option: bool | None, stated: bool | None, src: str) -> bool:
    """Whether samples are increments: the option, which must not contradict the file."""
    if option is None:
        return bool(stated)
    if stated is not None and bool(option) != stated:
        raise RecordingError(
            f"the file says its samples are {'increments' if stated else 'rates'}",
            f"{'--increments' if stated else '--rates'} as the file states",
            source=src,
        )
    return bool(option)


def _time_unit(
    name: str, column_unit: str | None, option: str | None, name_unit: str | None, src: str
) -> str:
    """The time column's unit: the file's (or ``--unit COLUMN=U``), else ``--time``'s, else the
    one its name ends in; ``iso8601`` for text stamps; epoch words mean seconds."""
    for u in (column_unit, option, name_unit):
        if not no_unit(u):
            text = str(u).strip()
            if text.lower() in ISO_UNITS:
                return "iso8601"
            m = re.match(r"^(?:epoch|unix|posix)[\s_]*(?P<rest>.*)$", text, re.IGNORECASE)
            if m is not None:
                return m.group("rest").strip() or "s"
            return text
    raise RecordingError(
        f"the time column '{name}' has no unit",
        f"a unit in the header such as '{name} [ms]', or --time {name}=UNIT (s, ms, us, ns, "
        "iso8601)",
        source=src,
    )


def _time_factor(name: str, unit: str, src: str) -> float:
    """The factor from the time column's unit (may carry a tick's value: '25 us') to seconds."""
    return unit_factor(unit, "time", field=f"column '{name}'", src=src)


# A per-count ending of a unit ("deg/s/LSB", "mg per count"): the unit is one count's value.
_PER_COUNT = re.compile(
    r"\s*(?:/|\bper\s+)\s*(?:lsb|counts?|cnts?|digits?|bits?|codes?)\s*$", re.IGNORECASE
)
# Units that say "raw counts, no physical unit".
_COUNT_WORDS = {"lsb", "count", "counts", "cnt", "digits", "raw", "adc"}
# A number at the start of a unit (its scale): "8.75 mdps", "0.00875 deg/s", "1e-3 g".
_SCALE = re.compile(
    r"^\s*(?P<num>[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)(?=\s*[A-Za-zµ°%(])"
)


class _ScaleError(RecordingError):
    """A unit's scale (the value of one count) that cannot be used."""


def split_scale(text: str) -> tuple[float | None, str, bool]:
    """A unit that may carry a scale → (the number or None, the unit, whether it ends per count).

    ``"8.75 mdps"`` → ``(8.75, "mdps", False)``; ``"0.00875 deg/s/LSB"`` →
    ``(0.00875, "deg/s", True)``; ``"deg/s"`` → ``(None, "deg/s", False)``.
    """
    t = text.strip()
    per_count = _PER_COUNT.search(t) is not None
    t = _PER_COUNT.sub("", t)
    m = _SCALE.match(t)
    if m is None:
        return None, t, per_count
    return float(m.group("num")), t[m.end() :].strip(), per_count


def unit_factor(text: str, kind: str, *, field: str | None = None, src: str | None = None) -> float:
    """Value in ``text`` × factor = SI value of ``kind``. The unit may carry the value of one
    count: ``"8.75 mdps"``, ``"0.00875 deg/s/LSB"``, ``"3.33 mg"``, ``"25 us"`` (a tick).

    The unit itself is read by :func:`sensormodel.quantities.parse_unit_factor`.

    Raises
    ------
    RecordingError
        A unit that is not of ``kind``, a scale that is zero or not finite, or a per-count
        unit without its number, naming ``src`` and ``field``.
    """
    number, unit, per_count = split_scale(text)
    if number is None and per_count:
        raise _ScaleError(
            f"the unit '{text}' gives no value of one count",
            f"the value of one count with its unit, e.g. '0.00875 {unit or 'deg/s'}/LSB'",
            source=src,
            field=field,
        )
    if number is not None and not (math.isfinite(number) and number != 0.0):
        raise _ScaleError(
            f"the scale in '{text}' is {number:g}",
            "a finite, non-zero value of one count, e.g. '8.75 mdps'",
            source=src,
            field=field,
        )
    try:
        factor = parse_unit_factor(unit, kind, field=field, source=src)
    except UnitError as exc:
        raise RecordingError(exc.problem, exc.expected, source=src, field=field) from None
    return factor if number is None else number * factor


def _aux_plan(index: int, name: str, unit: str | None, src: str) -> AuxPlan:
    """An auxiliary column: kept in its unit, times the scale its unit carries."""
    if no_unit(unit) or str(unit).strip().lower() in _COUNT_WORDS:
        return AuxPlan(index, name, None if no_unit(unit) else unit, 1.0)
    number, rest, _ = split_scale(str(unit))
    if number is None:
        return AuxPlan(index, name, unit, 1.0)
    if not math.isfinite(number) or number == 0.0:
        raise RecordingError(
            f"the scale in '{unit}' is {number:g}",
            "a finite, non-zero value of one count, e.g. '0.1 degC'",
            source=src,
            field=f"column '{name}'",
        )
    return AuxPlan(index, name, rest or None, number)


def _plan_column(
    index: int, name: str, channel: str, unit: str | None, increments: bool, src: str
) -> ColumnPlan:
    """The plan of one column: a channel's kind from its instrument, else from the unit."""
    field = f"column '{name}'"
    instrument = channel.split(".", 1)[0] if channel in CHANNEL_IDS else None
    if unit is None or no_unit(unit) or unit.strip().lower() in _COUNT_WORDS:
        return ColumnPlan(index, name, channel, None, "as_recorded", 1.0, increments)
    if instrument is not None:
        rate_kind = INSTRUMENT_KIND[instrument]
        kind = _INCREMENT_OF[rate_kind] if increments else rate_kind
        try:
            factor = unit_factor(unit, kind, field=field, src=src)
        except _ScaleError as exc:
            raise RecordingError(
                exc.problem, f"{exc.expected} for channel {channel}", source=src, field=field
            ) from None
        except RecordingError as exc:
            expected = f"{_KIND_WHAT[kind]} for channel {channel}"
            other = rate_kind if increments else _INCREMENT_OF[rate_kind]
            with contextlib.suppress(RecordingError):
                unit_factor(unit, other)
                expected += (
                    " (or --rates if the samples are rates)"
                    if increments
                    else " (or --increments if the samples are increments per sample)"
                )
            raise RecordingError(exc.problem, expected, source=src, field=field) from None
        return ColumnPlan(index, name, channel, unit, kind, factor, increments)
    for kind in _INFER_KINDS:
        try:
            factor = unit_factor(unit, kind)
        except RecordingError:
            continue
        per_sample = increments and kind in _RATE_OF
        return ColumnPlan(index, name, channel, unit, kind, factor, per_sample)
    number, rest, _ = split_scale(unit)
    if number is not None and rest:  # a scaled unit of another quantity, e.g. '0.5 V'
        return ColumnPlan(index, name, channel, rest, "as_recorded", number, False)
    return ColumnPlan(index, name, channel, unit, "as_recorded", 1.0, False)


def _column_units(
    names: Sequence[str],
    header_units: Sequence[str | None],
    unit: str | Mapping[str, str] | None,
    time_idx: int | None,
    src: str,
) -> tuple[list[str | None], list[Finding]]:
    """Each column's unit: the file's, else the one its name ends in (``acc_z_mg``);
    overridden per column by ``unit`` (noted). One unit for all is applied by the caller to
    the analysed columns only."""
    units = list(header_units)
    for i, n in enumerate(names):
        if i != time_idx and no_unit(units[i]):
            alias = channel_alias(n)
            if alias is not None and alias[1] is not None:
                units[i] = alias[1]
    notes: list[Finding] = []
    if unit is None or isinstance(unit, str):
        return units, notes
    for key, u in unit.items():
        i = _find_column(key, names, "--unit", src)
        if not no_unit(units[i]) and units[i] != u:
            notes.append(
                Finding(
                    "note",
                    names[i],
                    0,
                    f"column '{names[i]}' says [{units[i]}] in the file; read as [{u}] as asked",
                )
            )
        units[i] = u
    return units, notes


def to_si(x: np.ndarray, plan: ColumnPlan, rate: float, *, in_place: bool = False) -> np.ndarray:
    """A column's values in SI (float64; ``x`` itself when nothing changes; scaled in place
    when ``in_place`` and ``x`` is float64)."""
    factor = plan.factor * (rate if plan.per_sample else 1.0)
    if factor != 1.0:
        if in_place and x.dtype == np.float64:
            return np.multiply(x, factor, out=x)
        return np.multiply(x, factor, dtype=np.float64)
    if x.dtype != np.float64:
        return x.astype(np.float64)
    return x


def output_unit(
    channel: str, unit: str | None, increments: bool, rate: float, src: str
) -> tuple[str, float]:
    """(unit label, divisor) of one written channel: file value = SI sample / divisor.

    A channel id's unit must suit its instrument (SI when None); another channel's unit is
    tried as the kinds an unmapped column is read as, else written as recorded.
    """
    per_sample = rate if increments else 1.0
    cid = channel_id_for(channel)
    if cid is not None:
        kind = INSTRUMENT_KIND[cid.split(".", 1)[0]]
        kind = _INCREMENT_OF[kind] if increments else kind
        label = unit or SI_LABEL[kind]
        factor = parse_unit_factor(label, kind, field=f"unit of {channel}", source=src)
        return label, per_sample * factor
    if unit is None or no_unit(unit):
        return "", per_sample
    for kind in _INFER_KINDS:
        with contextlib.suppress(UnitError):
            f = parse_unit_factor(unit, kind)
            return unit, (per_sample if kind in _RATE_OF else 1.0) * f
    return unit, 1.0
