"""What reading a recording gives: :class:`Recording`, its :class:`Finding` and :class:`Segment`.

Data objects only: they hold what the reader (``_reader``) found and give views of it; they do
not read files or analyse.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np
import numpy.typing as npt

from ..errors import RecordingError

__all__ = ["Finding", "Segment", "Recording", "FATAL_KINDS", "MAX_FINDINGS"]

#: The kinds of finding that make a recording unusable as one uniform record, in the order
#: findings at the same sample are listed.
FATAL_KINDS = ("non_finite", "non_monotonic", "duplicate_time", "gap", "saturated", "constant")
#: Findings listed per kind and channel; one more stands for all the rest.
MAX_FINDINGS = 1000


def _empty() -> Mapping[str, Any]:
    return MappingProxyType({})


@dataclass(frozen=True)
class Finding:
    """One problem found in a recording.

    Attributes
    ----------
    kind : str
        ``gap``, ``non_monotonic``, ``duplicate_time``, ``non_finite``, ``constant``,
        ``saturated`` (problems of the data) or ``short_segment``, ``note`` (information).
    channel : str or None
        The channel id concerned, ``"time"`` for the time column, None for the whole file.
    position : int
        0-based index of the first sample concerned.
    detail : str
        What was found, e.g. ``"time step of 0.01 s where the median step is 0.0025 s"``.
    length : int
        Number of consecutive samples concerned.
    where : str
        The place in the file: ``"line 17"``, ``"lines 17-19"`` (text) or ``"index 15"``.
    count : int
        Number of stretches the finding stands for: 1, or, for the last finding of a kind and
        channel after ``MAX_FINDINGS`` (1000) of them, all the remaining stretches.
    """

    kind: str
    channel: str | None
    position: int
    detail: str
    length: int = 1
    where: str = ""
    count: int = 1

    @property
    def fatal(self) -> bool:
        """Whether the finding makes the recording unusable as one uniform record."""
        return self.kind in FATAL_KINDS


@dataclass(frozen=True)
class Segment:
    """A clean, uniformly sampled stretch of one channel.

    Attributes
    ----------
    start, stop : int
        Sample indices, 0-based, ``stop`` excluded (``data[start:stop]``).
    start_time : float
        Time of the first sample [s].
    """

    start: int
    stop: int
    start_time: float

    @property
    def n(self) -> int:
        """Number of samples."""
        return self.stop - self.start


@dataclass(frozen=True)
class Recording:
    """A recording read into SI arrays, with its time base and the problems found.

    Attributes
    ----------
    source : str
        The file read.
    format : str
        ``csv``, ``npy``, ``npz`` or ``hdf5``.
    channels : tuple of str
        Channel ids in file order: ``gyro.x`` … ``accelerometer.z`` for mapped columns, the
        column name otherwise.
    data : mapping of str to ndarray
        Per channel, every sample as read (flagged ones included), float64, read-only, in the
        SI unit of ``units`` (rad/s, m/s², rad, m/s) or as recorded. Memory-mapped views of the
        file (or of the CSV cache) where no conversion was needed.
    units : mapping of str to str
        Unit label per channel: ``rad/s``, ``m/s^2``, ``rad``, ``m/s``, or as recorded (``1``
        when the file gives no unit; ``1/s`` for unit-less increments).
    quantities : mapping of str to str
        ``angular_rate``, ``acceleration``, ``angle``, ``velocity`` or ``as_recorded``.
    columns : mapping of str to str
        The file's column (or array, dataset) name per channel.
    rate : float
        Sample rate [Hz].
    start_time : float
        Time of the first sample [s].
    increments : bool
        The file held increments; ``data`` holds the rates derived from them.
    findings : tuple of Finding
        Every problem and note, in file order.
    segments : mapping of str to tuple of Segment
        Per channel, the clean stretches to analyse: one segment covering everything for a clean
        recording; with ``gaps="split"`` the stretches between problems.
    time : ndarray or None
        The time column [s], when the file has one.
    auxiliary : mapping of str to ndarray
        The columns kept but not analysed (temperature, status, counters …), by column name:
        float64, read-only, every sample as read, in ``auxiliary_units`` (the file's unit, a
        scale it carries applied). Never checked, never cut by the gap policy.
    auxiliary_units : mapping of str to str or None
        The unit of each auxiliary column as written (None when the file gives none).
    column_units : mapping of str to str or None
        Per channel, the unit of its column as written in the file or given as an option
        (``8.75 mdps``, ``deg/s``), None without one.
    time_column : str or None
        The name of the time column, None without one.
    time_unit : str or None
        Its unit as read (``s``, ``ms``, ``25 us``, ``iso8601``).
    """

    source: str
    format: str
    channels: tuple[str, ...]
    data: Mapping[str, npt.NDArray[np.float64]]
    units: Mapping[str, str]
    quantities: Mapping[str, str]
    columns: Mapping[str, str]
    rate: float
    start_time: float
    increments: bool
    findings: tuple[Finding, ...]
    segments: Mapping[str, tuple[Segment, ...]]
    time: npt.NDArray[np.float64] | None = None
    auxiliary: Mapping[str, npt.NDArray[np.float64]] = field(default_factory=_empty)
    auxiliary_units: Mapping[str, str | None] = field(default_factory=_empty)
    column_units: Mapping[str, str | None] = field(default_factory=_empty)
    time_column: str | None = None
    time_unit: str | None = None

    @property
    def n_samples(self) -> int:
        """Number of samples (rows) in the file."""
        return len(next(iter(self.data.values()))) if self.data else 0

    @property
    def duration(self) -> float:
        """Length of the record, ``n_samples / rate`` [s]."""
        return self.n_samples / self.rate

    def segment_arrays(self, channel: str) -> list[npt.NDArray[np.float64]]:
        """The samples of each clean segment of ``channel`` (views of ``data[channel]``), in the
        unit of ``units[channel]``."""
        self._check_channel(channel)
        x = self.data[channel]
        return [x[s.start : s.stop] for s in self.segments[channel]]

    def longest_segment(self, channel: str) -> Segment:
        """The longest clean segment of ``channel`` (the first of equal ones).

        Every channel of a :class:`Recording` has at least one segment (the reader refuses a
        channel without a clean stretch).
        """
        self._check_channel(channel)
        return max(self.segments[channel], key=lambda s: s.n)

    def samples(self, channel: str, segment: Segment) -> npt.NDArray[np.float64]:
        """The samples of one segment of ``channel``: a read-only view of ``data[channel]``."""
        self._check_channel(channel)
        return self.data[channel][segment.start : segment.stop]

    def _check_channel(self, channel: str) -> None:
        if channel not in self.data:
            raise RecordingError(
                f"no channel '{channel}' in the recording",
                "one of " + ", ".join(self.channels),
                source=self.source,
                field="channel",
            )
