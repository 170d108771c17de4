"""The reader: a recording file into a :class:`~sensormodel.recording.Recording`, in named steps.

open the source (``_sources``, ``_csv``) → plan its columns and units (``_columns``) → load the
raw columns → the time base (``_timebase``) → the rate → the channels in SI with their findings
→ fail or split into segments → the :class:`Recording`.
"""

from __future__ import annotations

import os
import pathlib
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from types import MappingProxyType
from typing import Any

import numpy as np

from .. import validate
from ..errors import RecordingError
from ..quantities import SI_LABEL
from ._arrow import ArrowSource, ParquetSource
from ._bags import BagSource, is_bag_folder
from ._columns import ColumnPlan, UnitPlan, plan_columns, split_scale, to_si
from ._csv import TextSource
from ._formats import FORMATS_TEXT, fmt, format_of
from ._results import Finding, Recording, Segment
from ._sources import Hdf5Source, NpySource, NpzSource, Source
from ._stamps import first_row, is_number, iso_nanoseconds, looks_iso
from ._timebase import (
    data_findings,
    fail_or_split,
    range_findings,
    resolve_rate,
    sort_findings,
    time_base,
)

__all__ = ["read_recording", "open_source"]

#: The source class of each format of ``_formats.SUFFIXES``.
_SOURCES: dict[str, type[Source]] = {
    "csv": TextSource,
    "npy": NpySource,
    "npz": NpzSource,
    "hdf5": Hdf5Source,
    "parquet": ParquetSource,
    "arrow": ArrowSource,
    "bag": BagSource,
}


def read_recording(
    path: str | os.PathLike[str],
    *,
    rate: float | None = None,
    unit: str | Mapping[str, str] | None = None,
    increments: bool | None = None,
    columns: str | Sequence[str] | None = None,
    channel_map: Mapping[str, str] | None = None,
    auxiliary: str | Sequence[str] | None = None,
    time: str | bool | None = None,
    time_unit: str | None = None,
    topic: str | None = None,
    gaps: str = "fail",
    progress: Callable[[int, int], None] | None = None,
    cache: bool | str | os.PathLike[str] | None = None,
    constant_run: int = 1000,
    saturation_run: int = 16,
    min_segment: int = 100,
    ranges: Mapping[str, float] | None = None,
) -> Recording:
    """Read a recording file into SI arrays, check its time base and report its problems.

    Parameters
    ----------
    path : path-like
        A ``.csv``, ``.tsv``, ``.txt``, ``.npy``, ``.npz``, ``.h5`` or ``.hdf5`` file (module
        docstring: formats).
    rate : float, optional
        Sample rate [Hz]. Needed when the file has neither a time column nor a stated rate; when
        it has, the two must agree within a relative 1e-6.
    unit : str or mapping, optional
        One unit for every column that has none in the file (``"deg/s"``), or a unit per
        column name (``{"gyro_x": "mdps", "time": "ms"}``), which overrides the file's (noted).
    increments : bool, optional
        Samples are increments per sample period (angle, velocity); they are returned as mean
        rates over the period. Default: as the file states, else False.
    columns : str or sequence of str, optional
        Column names or globs (``"gyro*"``, comma-separated in one string) to analyse; the
        other columns but time are auxiliary. Default: the columns whose name maps to a channel
        id, or, when none does, every column that is not auxiliary by its name or unit. Columns
        named in ``channel_map`` are always analysed.
    channel_map : mapping, optional
        ``{"COLUMN": "gyro.x"}``: the channel id of columns whose name is not one.
    auxiliary : str or sequence of str, optional
        Column names or globs kept as auxiliary (never analysed or checked) whatever their
        name; temperature (by name or unit), status and counter columns are auxiliary anyway.
    time : str or False, optional
        The time column's name (default: the one column named like one: ``time``, ``t``,
        ``ts_ms``, ``time_us``, ``timestamp_ns`` …); False: no time column (the rate from the
        file or ``rate``; time-named columns are then auxiliary).
    time_unit : str, optional
        The time column's unit when neither the file nor its name gives one: ``s``, ``ms``,
        ``us``, ``ns``, a tick (``"25 us"``), ``epoch`` (seconds) or ``iso8601`` (text).
    topic : str, optional
        ROS bags: the ``sensor_msgs/Imu`` topic to read (needed when there are several).
    gaps : {"fail", "split"}
        ``"fail"``: raise on the first problem; ``"split"``: return the clean segments.
    progress : callable, optional
        Called as ``progress(done, total)`` while a CSV file is parsed (bytes).
    cache : bool or path-like, optional
        CSV binary cache: None caches files of at least :data:`CACHE_MIN_BYTES` in
        :func:`cache_folder`; True caches any size; False never; a folder caches there.
    constant_run : int
        This many identical consecutive samples are a ``constant`` finding (0: no check).
    saturation_run : int
        This many consecutive samples at an extreme that stands apart from the data are
        ``saturated`` (0: no check; ``_timebase.APART_SIGMAS``, ``COARSE_STEPS``).
    ranges : mapping, optional
        {channel id: full scale [SI]}: a sample at or beyond it is ``saturated``.
    min_segment : int
        With ``gaps="split"``, clean stretches shorter than this (≥ 2) are dropped (and
        reported).

    Returns
    -------
    Recording
        Channels, SI data (rad/s, m/s², rad, m/s, or as recorded), units, rate [Hz], start time
        [s], findings and segments.

    Raises
    ------
    RecordingError
        A file that cannot be read as a uniformly sampled record, naming the file and the line
        (text) or index (binary), what was found and what was expected.
    """
    src = str(path)
    min_segment = _check_options(gaps, min_segment, constant_run, saturation_run)
    option_rate = None if rate is None else validate.rate(rate, "--rate")
    source = open_source(pathlib.Path(path), src, topic=topic)
    plan = _plan(
        source,
        unit=unit,
        increments=increments,
        columns=columns,
        channel_map=channel_map,
        auxiliary=auxiliary,
        time=time,
        time_unit=time_unit,
    )
    raw = _load(source, plan, cache=cache, progress=progress)
    clock = _clock(source, plan, raw)
    time_name = None if plan.time_index is None else source.names[plan.time_index]
    final_rate = resolve_rate(option_rate, source.rate, clock.rate, time_name, src)
    runs = {"constant_run": constant_run, "saturation_run": saturation_run}
    channels = _channels(source, plan, raw, final_rate, **runs, ranges=ranges or {})
    checked = _Checked(
        source,
        plan,
        clock,
        channels,
        final_rate,
        clock.start_time(source.start_time),
        _auxiliary(plan, raw, src),
    )
    findings, segments = checked.segments(gaps=gaps, min_segment=min_segment)
    return checked.recording(findings, segments)


def open_source(path: pathlib.Path, src: str, *, topic: str | None = None) -> Source:
    """The source of a recording file, by its name ending (format), after its header; a ROS 2
    bag folder (with ``metadata.yaml``) is a bag."""
    fmt_name = "bag" if is_bag_folder(path) else format_of(path, src)
    if not path.exists():
        raise RecordingError("no such file", f"an existing recording ({FORMATS_TEXT})", source=src)
    if path.is_dir() and fmt_name != "bag":
        raise RecordingError("is a folder", f"a recording file ({FORMATS_TEXT})", source=src)
    if fmt_name == "bag":
        return BagSource(path, src, topic)
    if topic is not None:
        raise RecordingError(
            f"--topic {topic} given for a .{fmt_name} file",
            "--topic with ROS bags only",
            source=src,
        )
    return _SOURCES[fmt_name](path, src)


def _plan(source: Source, **options: Any) -> UnitPlan:
    """The unit plan of a source: ISO-8601 time and text columns found in a text file's first
    row (an auxiliary text column, e.g. a status word, is left unread, noted)."""
    row = first_row(source)
    texts = {i for i, f in enumerate(row) if i < len(source.names) and not is_number(f)}
    plan = plan_columns(
        source.names,
        source.units,
        file_increments=source.increments,
        src=source.src,
        text_stamps={i for i in texts if looks_iso(row[i])},
        **options,
    )
    left = [a for a in plan.auxiliary if a.index in texts]
    if left:
        notes = [
            Finding("note", a.name, 0, f"column '{a.name}' holds text ('{row[a.index]}'); not read")
            for a in left
        ]
        plan = replace(
            plan,
            auxiliary=tuple(a for a in plan.auxiliary if a not in left),
            notes=(*plan.notes, *notes),
        )
    return plan


def _check_options(gaps: str, min_segment: int, constant_run: int, saturation_run: int) -> int:
    """Check the reader's policy arguments; return ``min_segment`` as an int."""
    if gaps not in ("fail", "split"):
        raise RecordingError(f"gaps={gaps!r}", "'fail' or 'split'", field="gaps")
    validate.whole_number(constant_run, "constant_run", minimum=0)
    validate.whole_number(saturation_run, "saturation_run", minimum=0)
    return validate.whole_number(min_segment, "min_segment", minimum=2)


def _load(
    source: Source,
    plan: UnitPlan,
    *,
    cache: bool | str | os.PathLike[str] | None,
    progress: Callable[[int, int], None] | None,
) -> list[np.ndarray]:
    """The raw columns of the plan (data columns, then time), at least two samples each."""
    raw = source.load(plan.wanted, cache=cache, progress=progress)
    if plan.time_iso and plan.time_index is not None:
        raw = [*raw, iso_nanoseconds(source, plan.time_index)]
    if len(raw[0]) < 2:
        row_word = "data row" if source.text else "sample"
        raise RecordingError(
            f"only one {row_word}",
            f"at least 2 {row_word}s",
            source=source.src,
            field=source.where(0) if source.text else None,
        )
    return raw


@dataclass(frozen=True)
class _Clock:
    """The time base: the time column in seconds (None without one), the rate of its regular
    steps, the samples that break the regular steps, the non-finite time stamps, findings."""

    time: np.ndarray | None
    rate: float | None
    brk: np.ndarray
    bad: np.ndarray
    findings: list[Finding]

    def start_time(self, stated: float | None) -> float:
        """Time of the first sample [s]: the time column's, else as the file states, else 0."""
        if self.time is not None and np.isfinite(self.time[0]):
            return float(self.time[0])
        return stated or 0.0


def _clock(source: Source, plan: UnitPlan, raw: Sequence[np.ndarray]) -> _Clock:
    """The time base from the time column (the last raw column), or an empty one."""
    n = len(raw[0])
    if plan.time_index is None:
        return _Clock(None, None, np.zeros(n, dtype=bool), np.zeros(n, dtype=bool), [])
    rel, t0 = seconds(raw[-1], 1e-9 if plan.time_iso else plan.time_factor)
    findings, rate, brk = time_base(rel, source.where, offset=t0)
    t = rel + t0 if t0 else rel
    if rate is None:
        raise RecordingError(
            f"the time column '{source.names[plan.time_index]}' never increases",
            "increasing time stamps",
            source=source.src,
        )
    return _Clock(t, rate, brk, ~np.isfinite(t), findings)


@dataclass
class _Channels:
    """Per channel, the SI data and the mask of its flagged samples; the data findings."""

    data: dict[str, np.ndarray] = field(default_factory=dict)
    bad: dict[str, np.ndarray] = field(default_factory=dict)
    findings: list[Finding] = field(default_factory=list)


def _channels(
    source: Source,
    plan: UnitPlan,
    raw: Sequence[np.ndarray],
    rate: float,
    *,
    constant_run: int,
    saturation_run: int,
    ranges: Mapping[str, float],
) -> _Channels:
    """Check each data column (in file units) and convert it to SI at ``rate`` [Hz]."""
    out = _Channels()
    for pl, x0 in zip(plan.columns, raw, strict=False):
        x = as_float(x0, pl.name, source.src)
        found, out.bad[pl.channel] = data_findings(
            x,
            pl.name,
            pl.channel,
            source.where,
            constant_run=constant_run,
            saturation_run=saturation_run,
        )
        out.findings += found
        if pl.unit is not None and _counts(x0, pl):
            out.findings.append(_count_note(pl, x0.dtype))
        # our own float copy, or a writable array the source hands over: scale it in place
        fresh = x.flags.writeable and (x is not x0 or getattr(source, "hands_over", False))
        out.data[pl.channel] = _readonly(to_si(x, pl, rate, in_place=fresh))
        if pl.channel in ranges:  # the declared range, on the SI samples
            found, at = range_findings(
                out.data[pl.channel], float(ranges[pl.channel]), pl.name, pl.channel, source.where
            )
            out.findings += found
            out.bad[pl.channel] = out.bad[pl.channel] | at
    return out


def _counts(x: np.ndarray, pl: ColumnPlan) -> bool:
    """Whether a column holds counts: an integer array, or whole numbers (judged on the first
    65 536 samples) under a unit that carries a scale ('8.75 mdps')."""
    if x.dtype.kind in "iu":
        return True
    if pl.unit is None or split_scale(pl.unit)[0] is None:
        return False
    head = x[:65536]
    head = head[np.isfinite(head)]
    return bool(len(head)) and bool(np.all(head == np.rint(head)))


def _count_note(pl: ColumnPlan, dtype: np.dtype) -> Finding:
    """The note of a column of counts: its count step in SI."""
    si = SI_LABEL.get(pl.quantity, pl.unit or "1")  # of the file's kind (rad for increments)
    what = f"{dtype} counts" if dtype.kind in "iu" else "whole-number counts"
    return Finding(
        "note",
        pl.channel,
        0,
        f"column '{pl.name}' holds {what}; one count is {fmt(pl.factor)} {si} ([{pl.unit}])",
    )


def _auxiliary(
    plan: UnitPlan, raw: Sequence[np.ndarray], src: str
) -> tuple[dict[str, np.ndarray], dict[str, str | None]]:
    """The auxiliary columns (after the analysed ones in ``raw``) × their scale, read-only."""
    first = len(plan.columns)
    data: dict[str, np.ndarray] = {}
    units: dict[str, str | None] = {}
    for a, x0 in zip(plan.auxiliary, raw[first : first + len(plan.auxiliary)], strict=True):
        x = as_float(x0, a.name, src)
        if a.scale != 1.0:
            x = np.multiply(x, a.scale, out=x) if x is not x0 else x * a.scale
        data[a.name] = _readonly(x)
        units[a.name] = a.unit
    return data, units


@dataclass(frozen=True)
class _Checked:
    """The results of the steps up to the data checks, and the last two steps on them."""

    source: Source
    plan: UnitPlan
    clock: _Clock
    channels: _Channels
    rate: float
    start_time: float
    auxiliary: tuple[dict[str, np.ndarray], dict[str, str | None]] = ({}, {})

    def segments(
        self, *, gaps: str, min_segment: int
    ) -> tuple[list[Finding], dict[str, tuple[Segment, ...]]]:
        """Every finding in file order, and the segments of each channel (or the refusal)."""
        clock, plan = self.clock, self.plan
        findings = [*plan.notes, *clock.findings, *self.channels.findings]
        sort_findings(findings)

        def start_of(i: int) -> float:
            if clock.time is not None and np.isfinite(clock.time[i]):
                return float(clock.time[i])
            return self.start_time + i / self.rate

        segments = fail_or_split(
            findings,
            [(c.channel, c.name) for c in plan.columns],
            len(clock.bad),
            gaps=gaps,
            bad_of=self.channels.bad,
            time_bad=clock.bad,
            brk=clock.brk,
            start_time=self.start_time,
            start_of=start_of,
            min_segment=min_segment,
            where=self.source.where,
            src=self.source.src,
        )
        return findings, segments

    def recording(
        self, findings: list[Finding], segments: dict[str, tuple[Segment, ...]]
    ) -> Recording:
        """The :class:`Recording` (read-only mappings and arrays)."""
        cols = self.plan.columns
        time = self.clock.time
        ti = self.plan.time_index
        return Recording(
            source=self.source.src,
            format=self.source.fmt,
            channels=tuple(c.channel for c in cols),
            data=MappingProxyType(self.channels.data),
            units=MappingProxyType({c.channel: c.si_unit for c in cols}),
            quantities=MappingProxyType({c.channel: c.si_quantity for c in cols}),
            columns=MappingProxyType({c.channel: c.name for c in cols}),
            rate=self.rate,
            start_time=self.start_time,
            increments=self.plan.increments,
            findings=tuple(findings),
            segments=MappingProxyType(segments),
            time=None if time is None else _readonly(time),
            auxiliary=MappingProxyType(self.auxiliary[0]),
            auxiliary_units=MappingProxyType(self.auxiliary[1]),
            column_units=MappingProxyType({c.channel: c.unit for c in cols}),
            time_column=None if ti is None else self.source.names[ti],
            time_unit=self.plan.time_unit,
        )


#: Integers up to this magnitude are exact in float64 (53-bit significand, IEEE 754).
EXACT_INTEGER = 2**53


def as_float(x: np.ndarray, name: str, src: str) -> np.ndarray:
    """A raw column as float64: integer counts of any width converted exactly.

    Every integer of magnitude ≤ 2**53 is a float64 (IEEE 754 binary64, 53-bit significand);
    a column with larger counts is refused rather than rounded.
    """
    if x.dtype == np.float64:
        return x
    if x.dtype.kind in "iu" and x.dtype.itemsize == 8 and len(x):
        big = np.max(x) > EXACT_INTEGER or (x.dtype.kind == "i" and np.min(x) < -EXACT_INTEGER)
        if big:
            raise RecordingError(
                f"column '{name}' holds {x.dtype} counts beyond ±2**53",
                "counts that float64 holds exactly (|count| ≤ 2**53)",
                source=src,
            )
    return x.astype(np.float64)


def seconds(traw: np.ndarray, factor: float) -> tuple[np.ndarray, float]:
    """A time column in seconds relative to its first finite stamp (float64), and that stamp.

    The steps of large stamps (epoch seconds, epoch nanoseconds, which need 61 bits) stay exact:
    integer stamps are subtracted in integer arithmetic before the conversion.
    """
    if traw.dtype.kind in "iu" and len(traw):
        first = int(traw[0])
        rel = (traw.astype(np.int64) - np.int64(first)).astype(np.float64)
        rel *= factor
        return rel, first * factor
    t = traw if traw.dtype == np.float64 else traw.astype(np.float64)
    if factor != 1.0:
        t = t * factor
    fin = np.flatnonzero(np.isfinite(t[: min(len(t), 1024)]))
    if not len(fin) or abs(float(t[fin[0]])) < 1e6:  # small stamps: as they are
        return t, 0.0
    t0 = float(t[fin[0]])
    return t - t0, t0


def _readonly(x: np.ndarray) -> np.ndarray:
    if x.flags.writeable:
        x = x.view()
        x.flags.writeable = False
    return x
