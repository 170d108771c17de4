"""The one set of recording options, shared by every command that reads a recording.

``@recording_options`` adds the options and hands the command ONE argument, ``reading``
(a :class:`RecordingOptions`), whose :meth:`RecordingOptions.read` calls
:func:`sensormodel.recording.read_recording`. A new way of reading a recording is one option in
:data:`_OPTIONS` and one field of :class:`RecordingOptions`; every command gets it.
"""

from __future__ import annotations

import functools
import inspect
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, fields
from typing import Any

import click

from ..errors import RecordingError
from ..recording import Recording, channel_id_for, read_recording
from ._app import EXIT_BAD_INPUT, StderrBar
from ._types import RATE, ChannelPair, OptionError, UnitSpec, unit_plan

__all__ = ["RecordingOptions", "recording_options"]


@dataclass(frozen=True)
class RecordingOptions:
    """How to read a recording, as the options gave it: the keyword arguments of
    :func:`read_recording` of the same names.

    Attributes
    ----------
    rate : float or None
        Sample rate [Hz] of a file without a time base.
    unit : str, dict or None
        One unit for every column without one, or a unit per column.
    increments : bool or None
        Samples are increments per sample period (None: as the file states).
    channel_map : dict or None
        Column → channel id.
    columns : list of str or None
        Column names or globs to analyse (None: the columns named like channels).
    auxiliary : list of str or None
        Column names or globs kept as auxiliary (never analysed or checked).
    time, time_unit : str, False or None
        The time column (False: none) and its unit, when the file does not say.
    topic : str or None
        ROS bags: the sensor_msgs/Imu topic.
    gaps : {"fail", "split"}
        Refuse a record with problems, or keep its clean segments.
    layout : bool
        Print how the file is read and stop.
    """

    rate: float | None = None
    unit: str | dict[str, str] | None = None
    increments: bool | None = None
    channel_map: dict[str, str] | None = None
    columns: list[str] | None = None
    auxiliary: list[str] | None = None
    time: str | bool | None = None
    time_unit: str | None = None
    topic: str | None = None
    gaps: str = "fail"
    layout: bool = False
    #: Notes on how the file was read, printed when the command ends without an input error.
    notes: list[str] = field(default_factory=list, compare=False, repr=False)

    def read(self, path: str, **more: Any) -> Recording:
        """Read ``path`` with these options (and ``more`` of read_recording's keyword
        arguments, e.g. ``ranges``), a progress bar on a terminal.

        Prints on stderr how the columns were read when any was guessed (a channel from a
        common spelling, auxiliary columns, a time unit from the column's name); with
        ``layout``, prints the whole layout on stdout and ends the command (exit 0).
        """
        # the fields but layout are read_recording's keyword arguments, by name
        arguments = {
            f.name: getattr(self, f.name) for f in fields(self) if f.name not in _NOT_READER
        }
        with StderrBar("reading") as bar:
            rec = read_recording(path, progress=bar, **arguments, **more)
        if self.layout:
            click.echo("\n".join(layout_lines(rec)))
            click.get_current_context().exit(0)
        guessed = _guessed(rec, self.channel_map or {})
        if guessed:
            self.notes.append(f"note: {rec.source}: read as {guessed}")
        return rec

    def flush(self) -> None:
        """Print the notes on stderr (once)."""
        for note in self.notes:
            click.echo(note, err=True)
        self.notes.clear()


#: The fields of RecordingOptions that are not arguments of read_recording.
_NOT_READER = ("layout", "notes")


def _column_text(name: str, unit: str | None) -> str:
    return f"'{name}'" + (f" [{unit}]" if unit else "")


def _guessed(rec: Recording, mapped: dict[str, str]) -> str:
    """What was read by a rule beyond the exact channel ids and ``--channel``: '' when
    nothing."""
    parts = [
        f"{cid} ← {_column_text(rec.columns[cid], rec.column_units.get(cid))}"
        for cid in rec.channels
        if rec.columns[cid].strip().lower().replace("_", ".") != cid
        and rec.columns[cid] not in mapped
        and channel_id_for(rec.columns[cid]) == cid
    ]
    if rec.auxiliary:
        parts.append(
            "auxiliary (kept, not analysed): "
            + ", ".join(_column_text(n, rec.auxiliary_units.get(n)) for n in rec.auxiliary)
        )
    return "; ".join(parts)


def layout_lines(rec: Recording) -> list[str]:
    """How a recording was read, for people: time base, rate, channels, auxiliary columns."""
    lines = [
        f"{rec.source} ({rec.format}): {rec.n_samples} samples at {rec.rate:.10g} Hz "
        f"({rec.duration:.6g} s)" + (", increments per sample" if rec.increments else "")
    ]
    if rec.time_column is not None:
        lines.append(
            f"  {'time':<15} {_column_text(rec.time_column, rec.time_unit)}, first "
            f"stamp {rec.start_time:.10g} s"
        )
    else:
        lines.append("  time            none (the rate from the file or --rate)")
    for cid in rec.channels:
        lines.append(
            f"  {cid:<15} {_column_text(rec.columns[cid], rec.column_units.get(cid))}"
            f" → {rec.units[cid]} ({rec.quantities[cid].replace('_', ' ')})"
        )
    for name in rec.auxiliary:
        lines.append(f"  {'auxiliary':<15} {_column_text(name, rec.auxiliary_units.get(name))}")
    for f in rec.findings:
        lines.append(f"  {f.kind:<15} {f.where + ': ' if f.where else ''}{f.detail}")
    return lines


def _units(ctx: click.Context, param: click.Parameter, value: Sequence[Any]) -> Any:
    try:
        return unit_plan(value)
    except RecordingError as exc:
        raise OptionError(str(exc), ctx=ctx, param=param) from None


def _channels(ctx: click.Context, param: click.Parameter, value: Sequence[Any]) -> Any:
    return dict(value) or None


def _columns(ctx: click.Context, param: click.Parameter, value: Sequence[str]) -> Any:
    return [c.strip() for v in value for c in v.split(",") if c.strip()] or None


def _time(ctx: click.Context, param: click.Parameter, value: str | None) -> Any:
    """``--time COLUMN``, ``--time COLUMN=UNIT`` or ``--time none`` → (time, time_unit)."""
    if value is None:
        return None, None
    column, sep, unit = value.partition("=")
    if not column.strip() or (sep and not unit.strip()):
        raise OptionError(
            str(
                RecordingError(f"--time {value}", "COLUMN, COLUMN=UNIT (e.g. --time ts=ms) or none")
            ),
            ctx=ctx,
            param=param,
        )
    if column.strip().lower() == "none" and not sep:
        return False, None
    return column.strip(), unit.strip() or None


_OPTIONS = (
    click.option(
        "--rate",
        type=RATE,
        default=None,
        metavar="HZ",
        help="Sample rate [Hz] when the file has no time column (must agree if it has).",
    ),
    click.option(
        "--unit",
        "unit",
        type=UnitSpec(),
        multiple=True,
        callback=_units,
        metavar="U|COLUMN=U",
        help="Unit of the analysed columns that give none (--unit deg/s), or of one column "
        "(--unit gyro_x=mdps, repeatable; overrides the file). A unit may carry the value of one "
        "count: --unit gx_raw='8.75 mdps', '0.00875 deg/s/LSB', '0.061 mg'.",
    ),
    click.option(
        "--increments/--rates",
        "increments",
        default=None,
        help="Samples are angle/velocity increments per sample period (default: as the file "
        "states, else rates).",
    ),
    click.option(
        "--channel",
        "channel_map",
        type=ChannelPair(),
        multiple=True,
        callback=_channels,
        metavar="COLUMN=ID",
        help="Map a column to a channel id, e.g. --channel rate_z=gyro.z (repeatable).",
    ),
    click.option(
        "--columns",
        "columns",
        multiple=True,
        callback=_columns,
        metavar="GLOB",
        help="Analyse only these columns: names or globs, e.g. 'gyro*' (repeatable, or a comma "
        "list); the others are kept as auxiliary.",
    ),
    click.option(
        "--aux",
        "auxiliary",
        multiple=True,
        callback=_columns,
        metavar="GLOB",
        help="Keep these columns as auxiliary: read, never analysed or checked (repeatable, or "
        "a comma list). Temperature, status and counter columns are auxiliary anyway.",
    ),
    click.option(
        "--time",
        "time",
        default=None,
        callback=_time,
        metavar="COLUMN[=UNIT]|none",
        help="The time column and its unit when the header does not say: s, ms, us, ns, a "
        "tick ('25 us'), epoch (seconds) or iso8601 (text), e.g. --time ts=ms; 'none' to ignore "
        "time columns (then --rate).",
    ),
    click.option(
        "--topic",
        "topic",
        default=None,
        metavar="TOPIC",
        help="ROS bags: the sensor_msgs/Imu topic to read, when there are several.",
    ),
    click.option(
        "--layout",
        "layout",
        is_flag=True,
        help="Print how the file is read (time base, rate, channels, units, auxiliary columns, "
        "findings) and stop.",
    ),
    click.option(
        "--gaps",
        type=click.Choice(["fail", "split"]),
        default="fail",
        show_default=True,
        help="Refuse a record with gaps, NaN, time errors, stuck or saturated stretches, or "
        "analyse the longest clean segment of each channel (the others are reported).",
    ),
)

_FIELDS = (
    "rate",
    "unit",
    "increments",
    "channel_map",
    "columns",
    "auxiliary",
    "time",
    "topic",
    "layout",
    "gaps",
)


#: How a recording must look, appended to the help of every command that reads one.
RECORDINGS_HELP = """

Recordings (REC): CSV/TSV, NPY (+ .npy.json sidecar), NPZ, HDF5, Parquet, Feather/Arrow, or a
ROS 1 / ROS 2 bag of sensor_msgs/Imu (pip install sensormodel[bags]). One column per channel,
one row per sample, e.g. a rig log of raw counts:

\b
  ts_ms,gx [8.75 mdps],gy [8.75 mdps],gz [8.75 mdps],accel_x [0.061 mg],...,temp [degC],counter
  0,12,-3,5,-21,8,16390,25.1,1
  2.5,10,-1,4,-19,11,16395,25.1,2

\b
  - channels by name: gyro_x, gx, GyroX, wx, rate_x -> gyro.x; accel_x, acc_x, ax ->
    accelerometer.x (any other name: --channel COLUMN=gyro.x);
  - units in [brackets] or (parentheses), or --unit COLUMN=U; a unit may be the value of one
    count: '8.75 mdps', '0.061 mg', '0.00875 deg/s/LSB';
  - time: a column time, t, timestamp, ts_ms, time_us, timestamp_ns ... in s, ms, us, ns,
    epoch seconds or ISO-8601 text (--time COLUMN=UNIT when the header does not say), else
    --rate HZ;
  - temperature, status and counter columns are kept as auxiliary, never analysed (--aux,
    --columns choose); delta-angle / delta-velocity logs: --increments;
  - --layout shows how a file is read. The README's "Recordings" section lists the layouts.
"""


def recording_options(func: Callable[..., Any] | None = None, *, skip: Sequence[str] = ()) -> Any:
    """Add the recording options to a command; it receives them as ``reading``.

    ``@recording_options`` adds them all; ``@recording_options(skip=("rate", "channel_map"))``
    leaves out those a command already has with another meaning (``shape``'s ``--rate`` and
    ``--channel``).
    """
    names = [n for n in _FIELDS if n not in skip]

    def decorate(f: Callable[..., Any]) -> Callable[..., Any]:
        @functools.wraps(f)
        def wrapper(*args: Any, **kwargs: Any) -> Any:
            given = {name: kwargs.pop(name) for name in names}
            if "time" in given:
                given["time"], given["time_unit"] = given["time"]
            reading = RecordingOptions(**given)
            try:
                result = f(*args, reading=reading, **kwargs)
            except (SystemExit, click.exceptions.Exit) as stop:
                code = stop.code if isinstance(stop, SystemExit) else stop.exit_code
                if code != EXIT_BAD_INPUT:  # a verdict's exit code: say how the file was read
                    reading.flush()
                raise
            reading.flush()
            return result

        wrapper.__doc__ = inspect.cleandoc(f.__doc__ or "") + RECORDINGS_HELP
        for option, name in reversed(list(zip(_OPTIONS, _FIELDS, strict=True))):
            if name in names:
                wrapper = option(wrapper)
        return wrapper

    return decorate if func is None else decorate(func)
