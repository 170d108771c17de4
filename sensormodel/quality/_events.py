"""Steps and spikes, and their exclusion as short gaps (private to :mod:`sensormodel.quality`).

Rules (stated; the thresholds are in the results):

* **Spikes**: a jump and a jump back. The first differences d_i = y_(i+1) − y_i of Gaussian
  noise are normal (their scale, 1.4826·MAD(d), is consistent for any noise type and robust
  to the spikes themselves: F. R. Hampel, J. Amer. Statist. Assoc. 69 (1974) 383-393; the
  outlier rule in the spirit of the Hampel identifier, R. K. Pearson, "Outliers in process
  modeling and identification", IEEE Trans. Control Syst. Technol. 10 (2002) 55-63). A jump is
  |d_i| above the Bonferroni threshold for the n − 1 differences at the false-alarm
  probability (default 1 %); a spike is a jump followed within h samples (default 5) by a
  jump of the other sign, and its samples are those between them. A false spike needs two
  false jumps, so the stated probability is a loose upper bound; a step has no jump back and
  is not a spike. The size is the largest departure from the mean of the samples on either
  side; the statistic is |size| over σ̂/√2 (the sample σ of white noise).
* **Steps**: the two-window mean test on the record with its spikes replaced (below):
  d_i = mean(y_i … y_{i+w−1}) − mean(y_{i−w} … y_{i−1}) at every sample boundary i,
  w samples of ``step_window`` seconds (default 10 s), spike samples replaced by the straight
  line between their neighbours. Its variance is exactly 2σ²_A(w/rate),
  the Allan variance at the window length (NIST SP 1065 §5.2.2), for any of the noise types,
  so d_i/(√2 σ_A) is a standard normal statistic: from the noise model when given, else from
  the record (1.4826·MAD of the non-overlapping d, over √2, robust to the few steps). A step is
  a run of |d_i| above the Bonferroni threshold for the n boundaries; its position is the
  boundary of largest |d_i|; its size the difference of the means over up to ten windows on
  each side (short of the neighbouring steps), which is more precise than d_i where white
  noise dominates.

Positions are 0-based sample indices in the array given, and times from its start plus
``start_time``; the caller adds a segment's offset and turns indices into file lines.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .. import validate
from ..errors import AnalysisError
from ._windows import (
    Reason,
    as_record,
    bonferroni_threshold,
    mean_sigma,
    robust_sigma,
    window_samples,
)

__all__ = [
    "Event",
    "Events",
    "detect_events",
    "exclusion_mask",
    "clean_segments",
    "levelled",
    "found_values",
]

#: The longest spike h (a jump back within h samples) [samples].
SPIKE_HALF_WIDTH = 5
#: Window of the step test [s].
DEFAULT_STEP_WINDOW = 10.0


@dataclass(frozen=True)
class Event:
    """A spike or a step.

    Attributes
    ----------
    kind : str
        ``spike`` or ``step``.
    index : int
        First sample of a spike; the first sample after a step [0-based].
    length : int
        Samples of a spike; 0 for a step.
    time : float
        Time of ``index`` [s] (``start_time`` + index/rate).
    size : float
        A spike's largest departure from its neighbours' mean; a step's change of level (means
        over up to ten step windows on each side) [unit].
    statistic : float
        |size| over its noise (the sample σ for a spike, √2 σ_A for a step) [-].
    """

    kind: str
    index: int
    length: int
    time: float
    size: float
    statistic: float


@dataclass(frozen=True)
class Events:
    """The spikes and steps of a record and the rules' numbers.

    Attributes
    ----------
    spikes, steps : tuple of Event
    spike_threshold, step_threshold : float
        The Bonferroni thresholds [-].
    spike_sigma : float
        σ̂ of the first differences [unit].
    step_sigma : float
        √2·σ_A(step window), the noise of d_i [unit].
    step_sigma_source : str
        ``model`` or ``record``.
    half_width : int
        h, the longest spike [samples].
    step_window : int
        w [samples].
    reasons : tuple
        ``spikes_found`` and ``steps_found`` where there are any.
    """

    spikes: tuple[Event, ...]
    steps: tuple[Event, ...]
    spike_threshold: float
    step_threshold: float
    spike_sigma: float
    step_sigma: float
    step_sigma_source: str
    half_width: int
    step_window: int
    reasons: tuple[Reason, ...] = field(default=())


def _runs(flags: np.ndarray, join: int) -> list[tuple[int, int]]:
    """(start, stop) of the runs of True, runs closer than ``join`` samples merged."""
    idx = np.flatnonzero(flags)
    if idx.size == 0:
        return []
    breaks = np.flatnonzero(np.diff(idx) > join)
    starts = np.concatenate([[idx[0]], idx[breaks + 1]])
    stops = np.concatenate([idx[breaks], [idx[-1]]]) + 1
    return [(int(a), int(b)) for a, b in zip(starts, stops, strict=True)]


def _spikes(
    arr: np.ndarray, h: int, false_alarm: float
) -> tuple[list[tuple[int, int, float]], float, float]:
    """Spike runs (start, stop, size), σ̂ of the first differences, threshold (module notes)."""
    d = np.diff(arr)
    sigma = robust_sigma(d)
    if sigma <= 0.0:  # integer counts whose differences are mostly 0
        sigma = float(np.std(d))
    threshold = bonferroni_threshold(false_alarm, d.shape[0])
    if sigma <= 0.0:
        return [], sigma, threshold
    jumps = np.flatnonzero(np.abs(d) > threshold * sigma)
    runs: list[tuple[int, int, float]] = []
    k = 0
    while k < jumps.size:
        i = int(jumps[k])
        back = [int(j) for j in jumps[k + 1 :] if j <= i + h and np.sign(d[j]) != np.sign(d[i])]
        if not back:
            k += 1
            continue
        j = back[0]
        base = 0.5 * (arr[i] + arr[j + 1])
        part = arr[i + 1 : j + 1] - base
        runs.append((i + 1, j + 1, float(part[int(np.argmax(np.abs(part)))])))
        k = int(np.searchsorted(jumps, j, side="right"))
    return runs, sigma, threshold


def _steps(
    clean: np.ndarray, w: int, sigma_d: float, threshold: float
) -> list[tuple[int, float, float]]:
    """(index, size, statistic) of each step of the two-window test."""
    c = np.concatenate([[0.0], np.cumsum(clean - float(np.mean(clean)))])
    i = np.arange(w, clean.shape[0] - w + 1)
    d = (c[i + w] - 2.0 * c[i] + c[i - w]) / w
    out = []
    for a, b in _runs(np.abs(d) > threshold * sigma_d, w):
        j = a + int(np.argmax(np.abs(d[a:b])))
        out.append((int(i[j]), float(d[j]), abs(float(d[j])) / sigma_d))
    return out


def detect_events(
    y: Any,
    rate: float,
    *,
    model: Any = None,
    start_time: float = 0.0,
    half_width: int = SPIKE_HALF_WIDTH,
    step_window: float = DEFAULT_STEP_WINDOW,
    false_alarm: float = 0.01,
) -> Events:
    """Spikes (a jump and a jump back) and steps (two-window mean test) of a record; the rules of
    the module notes.

    Parameters
    ----------
    y : array_like
        Rate samples of one clean segment [unit], finite.
    rate : float
        Sample rate [Hz].
    model : sensormodel.model.Channel, optional
        Noise model: σ_A at the step window from its exact Allan variance.
    start_time : float
        Time of the first sample [s].
    half_width : int
        The longest spike h [samples] (default 5).
    step_window : float
        w of the step test [s] (default 10 s; at most a quarter of the record).
    false_alarm : float
        Probability of a false spike, and of a false step, on a clean Gaussian record
        (Bonferroni bound; default 0.01).

    Returns
    -------
    Events

    Raises
    ------
    AnalysisError
        Fewer than 4 step windows in the record, a bad rate, width or probability.
    """
    rate = validate.rate(rate)
    h = validate.whole_number(half_width, "half_width")
    arr = as_record(y)
    n = arr.shape[0]
    w = window_samples(step_window, rate, n, "step_window")
    if n < 4 * w:
        raise AnalysisError(
            f"{n} samples hold fewer than 4 step windows of {w} samples",
            "a shorter step_window or a longer record",
            field="step_window",
        )
    runs, sigma, spike_thr = _spikes(arr, h, false_alarm)
    clean = arr.copy()
    spikes = []
    for a, b, size in runs:
        clean[a:b] = np.linspace(arr[a - 1], arr[b], b - a + 2)[1:-1]
        stat = abs(size) / (sigma / math.sqrt(2.0))
        spikes.append(Event("spike", a, b - a, start_time + a / rate, size, stat))
    if model is not None:
        sigma_a, source = mean_sigma(clean, rate, w, model)
    else:
        c = np.concatenate([[0.0], np.cumsum(clean - float(np.mean(clean)))])
        i = np.arange(w, n - w + 1, 2 * w)
        sigma_a = robust_sigma((c[i + w] - 2.0 * c[i] + c[i - w]) / w) / math.sqrt(2.0)
        source = "record"
    sigma_d = math.sqrt(2.0) * sigma_a
    step_thr = bonferroni_threshold(false_alarm, n - 2 * w + 1)
    found = _steps(clean, w, sigma_d, step_thr) if sigma_d > 0 else []
    places = [0] + [i for i, _, _ in found] + [n]
    steps = []
    for k, (i, _, stat) in enumerate(found):
        # the size from means over up to ten windows on each side, short of the next steps
        before = max(places[k], i - 10 * w)
        after = min(places[k + 2], i + 10 * w)
        size = float(np.mean(clean[i:after]) - np.mean(clean[before:i]))
        steps.append(Event("step", i, 0, start_time + i / rate, size, stat))
    reasons: list[Reason] = []
    if spikes:
        reasons.append(("spikes_found", found_values(spikes, spike_thr)))
    if steps:
        reasons.append(("steps_found", found_values(steps, step_thr)))
    return Events(
        tuple(spikes),
        tuple(steps),
        spike_thr,
        step_thr,
        sigma,
        sigma_d,
        source,
        h,
        w,
        tuple(reasons),
    )


def found_values(events: list[Event], threshold: float) -> dict[str, Any]:
    return {
        "count": len(events),
        "indices": tuple(e.index for e in events),
        "times": tuple(round(e.time, 6) for e in events),
        "largest": max(e.statistic for e in events),
        "threshold": threshold,
    }


def levelled(y: Any, events: Events) -> np.ndarray:
    """A copy of the record with its spikes replaced by the straight line between their
    neighbours and each step's change of level taken off the samples after it: the record the
    slow tests (settling, temperature) are run on, so that a bump is not read as a drift."""
    arr = np.array(y, dtype=np.float64)
    for e in events.spikes:
        a, b = e.index, e.index + e.length
        arr[a:b] = np.linspace(arr[a - 1], arr[min(b, arr.shape[0] - 1)], b - a + 2)[1:-1]
    for e in events.steps:
        arr[e.index :] -= e.size
    return arr


def exclusion_mask(n: int, events: Events, *, guard: int | None = None) -> np.ndarray:
    """Samples kept (True) when the events are excluded as short gaps.

    A spike takes its samples and ``guard`` on each side (default h, the longest spike); a
    step the step window w on each side of its position (its place is known to about w), so
    no cluster of a pooled Allan variance spans the change of level.
    """
    keep = np.ones(int(n), dtype=bool)
    g = events.half_width if guard is None else int(guard)
    for e in events.spikes:
        keep[max(0, e.index - g) : e.index + e.length + g] = False
    for e in events.steps:
        keep[max(0, e.index - events.step_window) : e.index + events.step_window] = False
    return keep


def clean_segments(keep: np.ndarray, *, min_length: int = 100) -> list[tuple[int, int]]:
    """(start, stop) of the runs of kept samples of at least ``min_length`` samples (the
    reader's shortest segment is 100 samples)."""
    flags = np.asarray(keep, dtype=bool)
    edges = np.diff(np.concatenate([[0], flags.astype(np.int8), [0]]))
    starts, stops = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    return [
        (int(a), int(b)) for a, b in zip(starts, stops, strict=True) if b - a >= int(min_length)
    ]
