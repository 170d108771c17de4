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
from ._temperature import (
    TemperatureEffect,
    paired_arrays,
    remove_temperature,
    temperature_sensitivity,
)
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
        Samples cut at the start (0 without a trim).
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


def _after(events: Events, start: int, rate: float) -> Events:
    """The events from sample ``start`` on (those in a trimmed warm-up dropped), their
    reasons rebuilt."""
    spikes = tuple(e for e in events.spikes if e.index >= start)
    steps = tuple(e for e in events.steps if e.index >= start)
    reasons: list[Reason] = []
    if spikes:
        reasons.append(("spikes_found", found_values(list(spikes), events.spike_threshold)))
    if steps:
        reasons.append(("steps_found", found_values(list(steps), events.step_threshold)))
    return dataclasses.replace(events, spikes=spikes, steps=steps, reasons=tuple(reasons))


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
        Rate samples of one channel [unit], uniformly spaced, finite (one clean stretch).
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
    arr = as_record(y)
    n = arr.shape[0]
    if remove_temperature_effect and temperature is None:
        raise AnalysisError(
            "the removal of the temperature effect was asked without a temperature column",
            "a temperature column (or no removal)",
            field="temperature",
        )
    temp = None if temperature is None else paired_arrays(arr, temperature)[1]
    # events first: a step is not a transient, and a slow transient or a temperature drift
    # does not disturb the two-window test
    found = detect_events(
        arr, rate, model=model,
        start_time=start_time, step_window=step_window, false_alarm=false_alarm,
    )  # fmt: skip
    level = levelled(arr, found)
    start, settling, reasons = _settling(
        level, rate, trim, model, settling_window, false_alarm, temp
    )  # fmt: skip
    events = _after(found, start, rate)
    effect, samples = None, arr
    if temp is not None:
        effect, samples, more = _temperature(
            arr, level, temp, start, rate, model, remove_temperature_effect,
            {"window": temperature_window, "confidence": confidence,
             "datasheet": datasheet_sensitivity, "unit": unit},
        )  # fmt: skip
        reasons.extend(more)
    reasons.extend(events.reasons)
    if exclude_events and (events.spikes or events.steps):
        keep = exclusion_mask(n, events)
        keep[:start] = False
        segments = clean_segments(keep, min_length=min_segment)
        reasons.append(
            ("events_excluded", {"samples": int(n - start - keep.sum()), "segments": len(segments)})
        )
    else:
        segments = [(start, n)]
    used = sum(b - a for a, b in segments)
    reasons.append(("record_fraction_used", {"fraction": used / n, "used": used, "total": n}))
    return RecordQuality(
        channel, rate, n, settling, start, effect, samples is not arr, events, tuple(segments),
        tuple(reasons), samples,
    )  # fmt: skip
