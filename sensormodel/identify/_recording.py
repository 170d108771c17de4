"""Noise terms of a whole recording: each channel's Allan deviation from the one recording →
analysis path (:func:`sensormodel.pipeline.analyse`, its segment policy), fitted by
:func:`~sensormodel.identify.fit`."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from .. import validate
from ..counts import count_step
from ..pipeline import RecordingAnalysis, analyse
from ._bootstrap import ProgressCallback
from ._checks import _check_n_boot
from ._fit import fit
from ._names import DEFAULT_CONFIDENCE
from ._results import Identification

__all__ = ["fit_recording"]


def fit_recording(
    source: Any,
    *,
    channels: Sequence[str] | None = None,
    taus: Any = None,
    progress: ProgressCallback | None = None,
    **options: Any,
) -> list[Identification]:
    """Identify every channel of a recording.

    Parameters
    ----------
    source : Recording or RecordingAnalysis
        A recording from :func:`sensormodel.recording.read_recording` (analysed here by
        :func:`sensormodel.pipeline.analyse`: the longest clean segment of each channel, its
        overlapping Allan deviation on the τ grid ``taus``, default octaves), or its analysis
        already made.
    channels : sequence of str, optional
        Channel ids to identify, for a recording (default all).
    taus : optional
        τ grid for the Allan deviation of a recording (see :func:`sensormodel.allan.tau_grid`).
    progress : callable, optional
        ``progress(done, total)`` over the bootstrap records of all channels.
    **options
        The keyword arguments of :func:`~sensormodel.identify.fit` (terms, confidence, seed,
        n_boot, bandwidth, filter_order), the same for every channel. Each channel's count step
        is found from its analysed samples (:func:`sensormodel.counts.count_step`) unless
        ``count_step`` is given.

    Returns
    -------
    list of Identification
        One per channel, in the analysis' order.
    """
    analysis = source
    if not isinstance(source, RecordingAnalysis):
        analysis = analyse(source, channels=channels, taus=taus)
    # argument errors before any channel's work
    confidence = validate.probability(options.get("confidence", DEFAULT_CONFIDENCE))
    _check_n_boot(options.get("n_boot"), confidence)
    out = []
    for k, ch in enumerate(analysis):
        sub = None
        if progress is not None:

            def sub(done: int, total: int, k: int = k) -> None:
                progress(k * total + done, len(analysis) * total)

        step = None
        if "count_step" not in options and analysis.recording is not None:
            found = count_step(analysis.recording.samples(ch.channel, ch.segment))
            step = None if found is None else found.step
        extra = {} if "count_step" in options else {"count_step": step}
        out.append(fit(ch.curve, progress=sub, **options, **extra))
    return out
