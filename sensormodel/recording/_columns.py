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
import re
from collections.abc import Mapping, Sequence
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


def channel_id_for(name: str) -> str | None:
    """The channel id a column name maps to by the naming rule (DESIGN §10), or None.

    ``gyro.x``, ``gyro_x`` and ``GYRO_X`` all give ``gyro.x``; ``acc_z`` gives None.
    """
    n = name.strip().lower().replace("_", ".")
    return n if n in CHANNEL_IDS else None


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


def split_header(text: str) -> tuple[str, str | None]:
    """``'gyro_x [deg/s]'`` → ``('gyro_x', 'deg/s')``; ``'gyro_x'`` → ``('gyro_x', None)``."""
    s = text.strip()
    m = re.match(r"^(?P<name>.*?)\s*\[(?P<unit>[^\[\]]*)\]\s*$", s)
    if m is None:
        return s, None
    unit = m.group("unit").strip()
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


def _time_column(names: Sequence[str], src: str) -> int | None:
    """Index of the time column (by :data:`TIME_COLUMN_NAMES`), None without one."""
    hits = [i for i, n in enumerate(names) if n.rsplit("/", 1)[-1].lower() in TIME_COLUMN_NAMES]
    if len(hits) > 1:
        raise RecordingError(
            "several time columns: " + ", ".join(f"'{names[i]}'" for i in hits),
            "one column named time, t or timestamp",
            source=src,
        )
    return hits[0] if hits else None


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
    time_idx: int | None,
    columns: str | Sequence[str] | None,
    mapped: Sequence[int],
    src: str,
) -> list[int]:
    """Indices of the data columns to read: all but time, or those ``columns`` match."""
    data_idx = [i for i in range(len(names)) if i != time_idx]
    if columns is None:
        chosen = data_idx
    else:
        patterns = (
            [p.strip() for p in columns.split(",")] if isinstance(columns, str) else list(columns)
        )
        hit: set[int] = set(mapped)
        for pat in patterns:
            hits = [
                i
                for i in data_idx
                if fnmatch.fnmatchcase(names[i].lower(), pat.lower())
                or fnmatch.fnmatchcase(
                    names[i].lower().replace("_", "."), pat.lower().replace("_", ".")
                )
            ]
            if not hits:
                raise RecordingError(
                    f"no column matches '{pat}' in --columns",
                    "a name or glob matching one of the columns "
                    + ", ".join(f"'{names[i]}'" for i in data_idx),
                    source=src,
                )
            hit.update(hits)
        chosen = sorted(hit)
    if not chosen:
        raise RecordingError("no data columns", "at least one column besides time", source=src)
    return chosen


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
class UnitPlan:
    """The columns to read and how: the result of :func:`plan_columns`.

    Attributes
    ----------
    columns : tuple of ColumnPlan
        The data columns, in file order.
    time_index : int or None
        The time column's position, None without one.
    time_factor : float
        Time column value × factor = seconds.
    increments : bool
        The samples are increments (as the option or the file states).
    notes : tuple of Finding
        ``note`` findings (a unit option overriding the file's).
    """

    columns: tuple[ColumnPlan, ...]
    time_index: int | None
    time_factor: float
    increments: bool
    notes: tuple[Finding, ...]

    @property
    def wanted(self) -> list[int]:
        """The column indices to load: the data columns, then the time column."""
        idx = [c.index for c in self.columns]
        return idx if self.time_index is None else [*idx, self.time_index]


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
) -> UnitPlan:
    """Find the time column, map and select the data columns, and plan their units.

    Parameters
    ----------
    names, header_units : sequence
        The file's column names and the units it gives (None where it gives none).
    unit, increments, columns, channel_map
        The reader's options (:func:`read_recording`).
    file_increments : bool or None
        What the file states about increments, None when it says nothing.
    src : str
        The file, for messages.

    Returns
    -------
    UnitPlan
    """
    time_idx = _time_column(names, src)
    mapping = _map_channels(channel_map, names, time_idx, src)
    selected = _select(names, time_idx, columns, list(mapping), src)
    units, notes = _column_units(names, header_units, unit, time_idx, src)
    inc = _increments(increments, file_increments, src)
    plans: list[ColumnPlan] = []
    seen: dict[str, str] = {}
    for i in selected:
        cid = mapping.get(i) or channel_id_for(names[i]) or names[i]
        if cid in seen:
            raise RecordingError(
                f"columns '{seen[cid]}' and '{names[i]}' both map to channel {cid}",
                "one column per channel (use --channel or --columns)",
                source=src,
            )
        seen[cid] = names[i]
        plans.append(_plan_column(i, names[i], cid, units[i], inc, src))
    time_factor = 1.0 if time_idx is None else _time_factor(names[time_idx], units[time_idx], src)
    return UnitPlan(tuple(plans), time_idx, time_factor, inc, tuple(notes))


def _increments(option: bool | None, stated: bool | None, src: str) -> bool:
    """Whether samples are increments: the option, which must not contradict the file."""
    if option is None:
        return bool(stated)
    if stated is not None and bool(option) != stated:
        raise RecordingError(
            f"the file says its samples are {'increments' if stated else 'rates'}",
            f"{'--increments' if stated else 'no --increments'} as the file states",
            source=src,
        )
    return bool(option)


def _time_factor(name: str, unit: str | None, src: str) -> float:
    """The factor from the time column's unit to seconds; the column must have a unit."""
    if unit is None or no_unit(unit):
        raise RecordingError(
            f"the time column '{name}' has no unit",
            f"a unit in the header such as '{name} [s]', or --unit {name}=s",
            source=src,
        )
    try:
        return parse_unit_factor(unit, "time", field=f"column '{name}'", source=src)
    except UnitError as exc:
        raise RecordingError(exc.problem, exc.expected, source=src, field=exc.field) from None


def _plan_column(
    index: int, name: str, channel: str, unit: str | None, increments: bool, src: str
) -> ColumnPlan:
    """The plan of one column: a channel's kind from its instrument, else from the unit."""
    field = f"column '{name}'"
    instrument = channel.split(".", 1)[0] if channel in CHANNEL_IDS else None
    if unit is None or no_unit(unit):
        return ColumnPlan(index, name, channel, None, "as_recorded", 1.0, increments)
    if instrument is not None:
        rate_kind = INSTRUMENT_KIND[instrument]
        kind = _INCREMENT_OF[rate_kind] if increments else rate_kind
        try:
            factor = parse_unit_factor(unit, kind, field=field, source=src)
        except UnitError as exc:
            expected = f"{_KIND_WHAT[kind]} for channel {channel}"
            other = rate_kind if increments else _INCREMENT_OF[rate_kind]
            with contextlib.suppress(UnitError):
                parse_unit_factor(unit, other)
                expected += (
                    " (leave out --increments if the samples are rates)"
                    if increments
                    else " (or --increments if the samples are increments per sample)"
                )
            raise RecordingError(exc.problem, expected, source=src, field=field) from None
        return ColumnPlan(index, name, channel, unit, kind, factor, increments)
    for kind in _INFER_KINDS:
        try:
            factor = parse_unit_factor(unit, kind)
        except UnitError:
            continue
        per_sample = increments and kind in _RATE_OF
        return ColumnPlan(index, name, channel, unit, kind, factor, per_sample)
    return ColumnPlan(index, name, channel, unit, "as_recorded", 1.0, False)


def _column_units(
    names: Sequence[str],
    header_units: Sequence[str | None],
    unit: str | Mapping[str, str] | None,
    time_idx: int | None,
    src: str,
) -> tuple[list[str | None], list[Finding]]:
    """Each column's unit: the file's, filled (one unit) or overridden (per column, noted)."""
    units = list(header_units)
    notes: list[Finding] = []
    if unit is None:
        return units, notes
    if isinstance(unit, str):
        for i in range(len(names)):
            if i != time_idx and no_unit(units[i]):
                units[i] = unit
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
