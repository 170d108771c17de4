"""The quality of one channel's static record: settling, temperature, steps and spikes, the part
used (private to :mod:`sensormodel.quality`)."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .. import validate
from ..confidence import DECISION_CONFIDENCE
from ..errors import AnalysisError
from ._events import (
    DEFAULT_STEP_WINDOW,
    Events,
    clean_segments,
    detect_events,
    exclusion_mask,
    found_values,
    levelled,
)
from ._settling import (
    DEFAULT_SETTLING_WINDOW,
    MIN_SETTLING_WINDOWS,
    Settling,
    detect_settling,
    settling_trim,
)
from ._temperature import TemperatureEffect, remove_temperature, temperature_sensitivity
from ._windows import Reason, as_record

__all__ = ["RecordQuality", "assess"]


@dataclass(frozen=True)
class RecordQuality:
    """What was found in one channel's record and what was done to it (numbers and reason
    codes; the reports write the sentences from :data:`sensormodel.report.REASONS`).

    Attributes
    ----------
    channel : str
        Channel id.
    rate : float
        Sample rate [Hz].
    n_samples : int
        Samples in the record.
    settling : Settling or None
        The warm-up detection (None where the record is too short to judge it and no trim
        was asked).
    trim_start : int
        Index of the first sample kept after the warm-up (0 without a trim).
    temperature : TemperatureEffect or None
        The temperature regression (on the record after the trim).
    temperature_removed : bool
        Whether its linear effect was removed from ``samples``.
    events : Events or None
        Spikes and steps (indices in the whole record).
    segments : tuple of (int, int)
        The (start, stop) sample ranges used for the analysis.
    reasons : tuple
        (code, values) pairs, in the order found.
    samples : ndarray
        The whole record as analysed (temperature effect removed where asked) [unit]; not
        compared, not shown.
    """

    channel: str
    rate: float
    n_samples: int
    settling: Settling | None
    trim_start: int
    temperature: TemperatureEffect | None
    temperature_removed: bool
    events: Events | None
    segments: tuple[tuple[int, int], ...]
    reasons: tuple[Reason, ...]
    samples: np.ndarray = field(repr=False, compare=False)

    @property
    def samples_used(self) -> int:
        """Samples in ``segments``."""
        return sum(b - a for a, b in self.segments)

    @property
    def fraction_used(self) -> float:
        """Share of the record in ``segments`` [-]."""
        return self.samples_used / self.n_samples

    def segment_arrays(self) -> list[np.ndarray]:
        """The used segments of ``samples``, for :func:`sensormodel.allan.overlapping_pooled`."""
        return [self.samples[a:b] for a, b in self.segments]


def _after(events: Events, start: int, pos: np.ndarray, rate: float, t0: float) -> Events:
    """The events from joined sample ``start`` on (those in a trimmed warm-up dropped), in the
    record's own indices and times (``pos`` maps a joined index to the record's), their
    reasons rebuilt."""

    def place(e: Any) -> Any:
        return dataclasses.replace(e, index=int(pos[e.index]), time=t0 + pos[e.index] / rate)

    spikes = tuple(place(e) for e in events.spikes if e.index >= start)
    steps = tuple(place(e) for e in events.steps if e.index >= start)
    reasons: list[Reason] = []
    if spikes:
        reasons.append(("spikes_found", found_values(list(spikes), events.spike_threshold)))
    if steps:
        reasons.append(("steps_found", found_values(list(steps), events.step_threshold)))
    return dataclasses.replace(events, spikes=spikes, steps=steps, reasons=tuple(reasons))


def _temperature_column(
    temperature: Any, n: int, pos: np.ndarray, remove: bool
) -> np.ndarray | None:
    """The temperature at the joined samples (None without one); a removal asked without a
    temperature is refused."""
    if temperature is None:
        if remove:
            raise AnalysisError(
                "the removal of the temperature effect was asked without a temperature column",
                "a temperature column (or no removal)",
                field="temperature",
            )
        return None
    column = np.asarray(temperature, dtype=np.float64)
    if column.ndim != 1 or column.shape[0] != n:
        raise AnalysisError(
            f"the temperature has shape {column.shape}, the channel {n} samples",
            "one temperature per sample",
            field="temperature",
        )
    return as_record(column[pos], "temperature")


def _joined(y: Any, segments: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """(the clean segments joined end to end, the record index of each joined sample, the
    joined index where each segment starts, the record's length)."""
    full = np.asarray(y, dtype=np.float64)
    n = int(full.shape[0]) if full.ndim == 1 else 0
    bounds = [(0, n)] if segments is None else [(int(a), int(b)) for a, b in segments]
    last = 0
    for a, b in bounds:
        if not (last <= a < b <= n):
            raise AnalysisError(
                f"got segment ({a}, {b}) of a record of {n} samples",
                "(start, stop) sample ranges in order, not overlapping, within the record",
                field="segments",
            )
        last = b
    if not bounds:
        raise AnalysisError("got no segments", "at least one clean segment", field="segments")
    joined = as_record(np.concatenate([full[a:b] for a, b in bounds]))
    pos = np.concatenate([np.arange(a, b) for a, b in bounds])
    starts = np.cumsum([0] + [b - a for a, b in bounds[:-1]])
    return joined, pos, starts, n


def _used(keep: np.ndarray, starts: np.ndarray, pos: np.ndarray, min_segment: int) -> list:
    """The kept runs of the joined record cut at the segments' joints, in record indices."""
    marks = np.zeros(keep.shape[0] + 1, dtype=np.int64)
    marks[starts] = 1
    out = []
    ident = np.cumsum(marks[:-1])  # which segment each joined sample belongs to
    for a, b in clean_segments(keep, min_length=1):
        for s_id in np.unique(ident[a:b]):
            idx = np.flatnonzero(ident[a:b] == s_id) + a
            if idx.size >= min_segment:
                out.append((int(pos[idx[0]]), int(pos[idx[-1]]) + 1))
    return out


def _settling(
    arr: np.ndarray,
    rate: float,
    trim: Any,
    model: Any,
    window: float,
    false_alarm: float,
    temp: np.ndarray | None,
) -> tuple[int, Settling | None, list[Reason]]:
    """The trim and the settling detection (judged wherever the record is long enough)."""
    reasons: list[Reason] = []
    if trim is None:
        if arr.shape[0] < MIN_SETTLING_WINDOWS * max(1, round(window * rate)):
            return (
                0,
                None,
                [("settling_not_judged", {"duration": arr.shape[0] / rate, "window": window})],
            )
        found = detect_settling(
            arr, rate, model=model, window=window, false_alarm=false_alarm, temperature=temp
        )
        return 0, found, list(found.reasons)
    start, found = settling_trim(
        arr, rate, trim, model=model, window=window, false_alarm=false_alarm, temperature=temp
    )
    if found is not None:
        reasons.extend(found.reasons)
    reasons.append(
        ("settling_trimmed", {"seconds": start / rate, "samples": start, "auto": found is not None})
    )
    return start, found, reasons


def _temperature(
    arr: np.ndarray,
    level: np.ndarray,
    temp: np.ndarray,
    start: int,
    rate: float,
    model: Any,
    remove: bool,
    options: dict[str, Any],
) -> tuple[TemperatureEffect, np.ndarray, list[Reason]]:
    """The sensitivity on the levelled record after the trim, and the samples with its effect
    removed when asked (else ``arr`` itself)."""
    effect = temperature_sensitivity(level[start:], temp[start:], rate, model=model, **options)
    reasons = list(effect.reasons)
    samples = arr
    if remove:
        samples = arr.copy()
        samples[start:] = remove_temperature(arr[start:], temp[start:], rate, effect)
        values = {"sensitivity": effect.sensitivity, "unit": options["unit"]}
        reasons.append(("temperature_removed", values))
    return effect, samples, reasons


def assess(
    y: Any,
    rate: float,
    *,
    channel: str = "signal",
    unit: str = "1",
    start_time: float = 0.0,
    model: Any = None,
    temperature: Any = None,
    trim: Any = None,
    remove_temperature_effect: bool = False,
    exclude_events: bool = False,
    datasheet_sensitivity: Any = None,
    settling_window: float = DEFAULT_SETTLING_WINDOW,
    temperature_window: float | None = None,
    step_window: float = DEFAULT_STEP_WINDOW,
    confidence: float = DECISION_CONFIDENCE,
    false_alarm: float = 0.01,
    min_segment: int = 100,
    segments: Any = None,
) -> RecordQuality:
    """Judge one channel's static record and prepare it for the Allan analysis.

    In order: spikes and steps (:func:`detect_events`), the warm-up (:func:`detect_settling` on
    the record with its spikes and steps levelled and the temperature as a second regressor;
    cut with ``trim``), the temperature sensitivity on what remains
    (:func:`temperature_sensitivity`, levelled too; removed with ``remove_temperature_effect``),
    and the events after the trim excluded as short gaps with ``exclude_events``, leaving clean
    segments for :func:`sensormodel.allan.overlapping_pooled`.

    Parameters
    ----------
    y : array_like
        Rate samples of one channel [unit], uniformly spaced, finite within ``segments``.
    rate : float
        Sample rate [Hz].
    channel, unit : str
        Labels kept in the result and its reasons.
    start_time : float
        Time of the first sample [s].
    model : sensormodel.model.Channel, optional
        The channel's noise model (σ_A for settling and steps, the variogram for the
        temperature interval); else each is estimated from the record.
    temperature : array_like, optional
        The temperature at each sample [°C or K] (e.g. ``Recording.auxiliary["temp"]``).
    trim : None, "auto" or float
        Cut the warm-up: ``"auto"`` (the settling time) or a time [s].
    remove_temperature_effect : bool
        Remove the fitted linear temperature effect from the samples analysed.
    exclude_events : bool
        Exclude spikes and steps as short gaps.
    datasheet_sensitivity : float or SpecValue, optional
        The datasheet's ``bias_temperature_sensitivity`` [unit/K].
    settling_window, temperature_window, step_window : float
        Windows [s] of the three tests (60 s; the record in 100; 10 s).
    confidence : float
        Confidence of the sensitivity's interval (default 0.9).
    false_alarm : float
        False-alarm probability of each detection on a clean record (default 0.01).
    min_segment : int
        Shortest segment kept after the exclusions [samples] (default 100).
    segments : sequence of (int, int), optional
        The record's clean segments (start, stop) (e.g. from ``Recording.segments``, with
        ``gaps="split"``); the tests run on them joined end to end (a dropped second moves the
        later windows by that second: negligible for windows of a minute) and report positions
        in the record's indices; no used segment spans a gap. Default: the whole record.

    Returns
    -------
    RecordQuality

    Raises
    ------
    AnalysisError
        A trim as long as the record, a record that has not settled (``trim="auto"``), too
        short a record to judge settling with ``trim="auto"``, a constant temperature, a
        temperature of another length, removal without a temperature, and the tests' errors.
    """
    rate = validate.rate(rate)
    arr, pos, joints, n = _joined(y, segments)
    temp = _temperature_column(temperature, n, pos, remove_temperature_effect)
    # events first: a step is not a transient, and a slow transient or a temperature drift
    # does not disturb the two-window test
    found = detect_events(
        arr, rate, model=model, step_window=step_window, false_alarm=false_alarm
    )  # fmt: skip
    level = levelled(arr, found)
    start, settling, reasons = _settling(
        level, rate, trim, model, settling_window, false_alarm, temp
    )  # fmt: skip
    events = _after(found, start, pos, rate, start_time)
    effect, corrected = None, arr
    if temp is not None:
        effect, corrected, more = _temperature(
            arr, level, temp, start, rate, model, remove_temperature_effect,
            {"window": temperature_window, "confidence": confidence,
             "datasheet": datasheet_sensitivity, "unit": unit},
        )  # fmt: skip
        reasons.extend(more)
    reasons.extend(events.reasons)
    keep = exclusion_mask(arr.shape[0], found) if exclude_events else np.ones(arr.shape, bool)
    keep[:start] = False
    used_segments = _used(keep, joints, pos, min_segment)
    if exclude_events and (events.spikes or events.steps):
        values = {"samples": int(arr.shape[0] - start - keep.sum()), "segments": len(used_segments)}
        reasons.append(("events_excluded", values))
    used = sum(b - a for a, b in used_segments)
    reasons.append(("record_fraction_used", {"fraction": used / n, "used": used, "total": n}))
    samples = np.array(y, dtype=np.float64)
    samples[pos] = corrected
    return RecordQuality(
        channel, rate, n, settling, int(pos[start]), effect, corrected is not arr, events,
        tuple(used_segments), tuple(reasons), samples,
    )  # fmt: skip
