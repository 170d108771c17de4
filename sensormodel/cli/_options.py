"""The one set of recording options, shared by every command that reads a recording.

``@recording_options`` adds the options and hands the command ONE argument, ``reading``
(a :class:`RecordingOptions`), whose :meth:`RecordingOptions.read` calls
:func:`sensormodel.recording.read_recording`. A new way of reading a recording is one option in
:data:`_OPTIONS` and one field of :class:`RecordingOptions`; every command gets it.
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Sequence
from dataclasses import dataclass, fields
from typing import Any

import click

from ..errors import RecordingError
from ..recording import Recording, read_recording
from ._app import StderrBar
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
        Column names or globs to read (None: all).
    gaps : {"fail", "split"}
        Refuse a record with problems, or keep its clean segments.
    """

    rate: float | None = None
    unit: str | dict[str, str] | None = None
    increments: bool | None = None
    channel_map: dict[str, str] | None = None
    columns: list[str] | None = None
    gaps: str = "fail"

    def read(self, path: str) -> Recording:
        """Read ``path`` with these options, a progress bar on a terminal."""
        # the fields are read_recording's keyword arguments, by name
        arguments = {f.name: getattr(self, f.name) for f in fields(self)}
        with StderrBar("reading") as bar:
            return read_recording(path, progress=bar, **arguments)


def _units(ctx: click.Context, param: click.Parameter, value: Sequence[Any]) -> Any:
    try:
        return unit_plan(value)
    except RecordingError as exc:
        raise OptionError(str(exc), ctx=ctx, param=param) from None


def _channels(ctx: click.Context, param: click.Parameter, value: Sequence[Any]) -> Any:
    return dict(value) or None


def _columns(ctx: click.Context, param: click.Parameter, value: Sequence[str]) -> Any:
    return [c.strip() for v in value for c in v.split(",") if c.strip()] or None


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
        help="Unit of the columns that give none (--unit deg/s), or of one column "
        "(--unit gyro_x=mdps, repeatable; overrides the file).",
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
        help="Read only these columns: names or globs, e.g. 'gyro*' (repeatable, or a comma "
        "list).",
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

_FIELDS = ("rate", "unit", "increments", "channel_map", "columns", "gaps")


def recording_options(func: Callable[..., Any]) -> Callable[..., Any]:
    """Add the recording options to a command; it receives them as ``reading``."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        reading = RecordingOptions(**{name: kwargs.pop(name) for name in _FIELDS})
        return func(*args, reading=reading, **kwargs)

    for option in reversed(_OPTIONS):
        wrapper = option(wrapper)
    return wrapper
