"""Noise terms of a whole recording: every channel's overlapping Allan deviation, fitted.

Each channel must be one clean segment today; :mod:`sensormodel.pipeline` is to own the path
from a recording to a curve, with its one segment policy.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from .. import validate
from ..allan import overlapping
from ..errors import AnalysisError
from ._bootstrap import ProgressCallback
from ._checks import _check_n_boot
from ._fit import fit
from ._names import DEFAULT_CONFIDENCE, DEFAULT_TERMS
from ._results import Identification

__all__ = ["fit_recording"]


def fit_recording(
    recording: Any,
    *,
    channels: Sequence[str] | None = None,
    taus: Any = None,
    terms: Sequence[str] | str = DEFAULT_TERMS,
    confidence: float = DEFAULT_CONFIDENCE,
    seed: int | None = None,
    n_boot: int | None = None,
    progress: ProgressCallback | None = None,
    bandwidth: float | None = None,
    filter_order: int | None = None,
) -> list[Identification]:
    """Identify every channel of a :class:`sensormodel.recording.Recording`.

    The overlapping Allan deviation of each channel (:func:`sensormodel.allan.overlapping`,
    τ grid ``taus``, default octaves) is fitted by :func:`fit`.

    Parameters
    ----------
    recording : Recording
        From :func:`sensormodel.recording.read_recording`; each channel must be one clean
        segment.
    channels : sequence of str, optional
        Channel ids to identify (default all).
    taus : optional
        τ grid for the Allan deviation (see :func:`sensormodel.allan.tau_grid`).
    terms, confidence, seed, n_boot, progress, bandwidth, filter_order
        As for :func:`fit` (the same output filter for every channel); ``progress(done,
        total)`` counts bootstrap records over all channels.
    """
    ids = list(recording.channels) if not channels else list(channels)
    for cid in ids:
        if cid not in recording.channels:
            raise AnalysisError(
                f"no channel {cid!r} in the recording",
                f"one of {', '.join(recording.channels)}",
                source=getattr(recording, "source", None),
                field="channel",
            )
    out = []
    total = len(ids) * _check_n_boot(n_boot, validate.probability(confidence, "confidence"))
    for k, cid in enumerate(ids):
        segs = recording.segments[cid]
        if len(segs) != 1:
            raise AnalysisError(
                f"channel {cid} has {len(segs)} clean segments",
                "one uniform record per channel (cut the recording at its gaps first)",
                source=getattr(recording, "source", None),
                field=cid,
            )
        s = segs[0]
        y = recording.data[cid][s.start : s.stop]
        curve = overlapping(y, recording.rate, taus=taus, unit=recording.units[cid], channel=cid)
        base = k * (total // len(ids))
        sub = None
        if progress is not None:

            def sub(done: int, _tot: int, base: int = base) -> None:
                progress(base + done, total)

        out.append(
            fit(
                curve,
                terms=terms,
                confidence=confidence,
                seed=seed,
                n_boot=n_boot,
                progress=sub,
                bandwidth=bandwidth,
                filter_order=filter_order,
            )
        )
    return out
