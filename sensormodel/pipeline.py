"""The one path from a recording to the analysis of its channels.

Every consumer of a recording (the ``allan``, ``identify`` and ``verify`` commands,
:func:`sensormodel.identify.fit_recording`, :func:`sensormodel.acceptance.verify` and the Python
API) goes through :func:`analyse`: it applies the one segment policy, computes each channel's
overlapping Allan deviation (:func:`sensormodel.allan.overlapping_many`, all channels on one pool
of workers) and, on request, its Welch spectrum (:func:`sensormodel.spectrum.welch`, averaged in
logarithmic bins by :func:`sensormodel.spectrum.log_bins`).

Segment policy
--------------
A recording read with ``gaps="split"`` may hold several clean segments per channel. The
analysis takes **the longest clean segment of each channel** (the first of equal length): it
reaches the longest τ, which the long-τ terms (bias instability, random walks) are read at.
The segments left out are counted in the result (reason code ``segments_left_out``) so that a
report can say so; they are never silently merged across a gap (the Allan variance across a gap
is not the Allan variance of the process).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from . import allan, spectrum
from .confidence import DEFAULT_CONFIDENCE
from .errors import AnalysisError

__all__ = [
    "SEGMENT_POLICY",
    "ChannelAnalysis",
    "RecordingAnalysis",
    "analysed_segment",
    "analyse",
]

#: The one segment policy of every analysis of a recording (see the module docstring).
SEGMENT_POLICY = "longest"


@dataclass(frozen=True)
class ChannelAnalysis:
    """The analysis of one channel of a recording.

    Attributes
    ----------
    channel : str
        Channel id (``gyro.x`` …), or the column name of an unmapped column.
    column : str
        The column of the file it was read from.
    unit : str
        Unit label of the samples (the SI unit of the quantity, or as recorded).
    quantity : str or None
        Kind of quantity (``angular_rate``, ``acceleration`` …), None when unknown.
    segment : Segment
        The analysed clean segment (sample indices into the recording).
    n_segments : int
        Clean segments of the channel in the recording (≥ 1).
    samples_total : int
        Samples in all clean segments of the channel.
    curve : AllanCurve
        Overlapping Allan deviation of the segment, with intervals at the asked confidence.
    psd : PSDResult or None
        One-sided Welch PSD [unit²/Hz] of the segment in logarithmic bins, when asked.
    """

    channel: str
    column: str
    unit: str
    quantity: str | None
    segment: Any
    n_segments: int
    samples_total: int
    curve: Any
    psd: Any = None

    @property
    def duration(self) -> float:
        """Length of the analysed segment [s]."""
        return self.segment.n / self.curve.sample_rate

    @property
    def reasons(self) -> tuple[tuple[str, dict[str, int]], ...]:
        """Reason codes with their numbers: ``("segments_left_out", {count, samples})`` (whole
        numbers) when the channel has clean segments that were not analysed."""
        if self.n_segments <= 1:
            return ()
        left = {
            "count": self.n_segments - 1,
            "samples": self.samples_total - self.segment.n,
        }
        return (("segments_left_out", left),)


@dataclass(frozen=True)
class RecordingAnalysis:
    """The analysis of the selected channels of one recording (in the recording's order)."""

    recording: Any
    channels: tuple[ChannelAnalysis, ...]
    confidence: float

    def __getitem__(self, channel: str) -> ChannelAnalysis:
        for ch in self.channels:
            if ch.channel == channel:
                return ch
        raise KeyError(channel)

    def __iter__(self):
        return iter(self.channels)

    def __len__(self) -> int:
        return len(self.channels)


def analysed_segment(recording: Any, channel: str) -> Any:
    """The clean segment of ``channel`` that every analysis uses: the longest (the first of
    equal length).

    Raises
    ------
    AnalysisError
        When the channel has no clean segment.
    """
    if not recording.segments.get(channel):
        raise AnalysisError(
            f"channel {channel} has no clean segment",
            "a clean, uniformly sampled stretch of at least a few samples",
            source=getattr(recording, "source", None),
            field=channel,
        )
    return recording.longest_segment(channel)


def _selected(recording: Any, channels: Sequence[str] | None) -> list[str]:
    if channels is None:
        return list(recording.channels)
    unknown = [c for c in channels if c not in recording.channels]
    if unknown:
        raise AnalysisError(
            f"no channel {unknown[0]!r} in the recording",
            f"one of {', '.join(recording.channels)}",
            source=getattr(recording, "source", None),
            field="channel",
        )
    return list(channels)


def analyse(
    recording: Any,
    *,
    channels: Sequence[str] | None = None,
    taus: Any = None,
    confidence: float = DEFAULT_CONFIDENCE,
    spectrum_bins: int | None = None,
    workers: int | None = None,
    progress: Callable[[int, int], Any] | None = None,
) -> RecordingAnalysis:
    """Analyse the channels of a recording: one segment each, its Allan deviation and spectrum.

    Parameters
    ----------
    recording : Recording
        From :func:`sensormodel.recording.read_recording` (rates in SI, or as recorded).
    channels : sequence of str, optional
        Channel ids to analyse, in this order (default every channel of the recording).
    taus : None, str or array_like
        τ grid (see :func:`sensormodel.allan.tau_grid`; default octaves).
    confidence : float
        Two-sided confidence of the Allan-deviation intervals (default 0.683).
    spectrum_bins : int, optional
        When given, also the one-sided Welch PSD of each segment, averaged in this many
        logarithmic bins per decade (20 is a good figure).
    workers : int, optional
        Worker threads of the Allan engine (default: automatic). Results do not depend on it.
    progress : callable, optional
        ``progress(done, total)`` over the Allan work of all channels.

    Returns
    -------
    RecordingAnalysis
    """
    ids = _selected(recording, channels)
    segments = [analysed_segment(recording, cid) for cid in ids]
    samples = [recording.samples(cid, s) for cid, s in zip(ids, segments, strict=True)]
    # the reader's checks touched every page of a memory-mapped record: let them go, so that
    # each channel's pages come back only while it is analysed (allan.release; nothing for
    # arrays in memory)
    for cid in recording.channels:
        allan.release(recording.data[cid])
    if recording.time is not None:
        allan.release(recording.time)
    curves = allan.overlapping_many(
        samples,
        recording.rate,
        taus=taus,
        confidence=confidence,
        units=[recording.units[cid] for cid in ids],
        channels=ids,
        workers=workers,
        progress=progress,
    )
    out = []
    for cid, seg, y, curve in zip(ids, segments, samples, curves, strict=True):
        psd = None
        if spectrum_bins is not None:
            psd = spectrum.log_bins(
                spectrum.welch(np.asarray(y), recording.rate), per_decade=spectrum_bins
            )
            allan.release(y)
        out.append(
            ChannelAnalysis(
                channel=cid,
                column=recording.columns.get(cid, cid),
                unit=recording.units[cid],
                quantity=recording.quantities.get(cid),
                segment=seg,
                n_segments=len(recording.segments[cid]),
                samples_total=sum(s.n for s in recording.segments[cid]),
                curve=curve,
                psd=psd,
            )
        )
    return RecordingAnalysis(recording=recording, channels=tuple(out), confidence=confidence)
