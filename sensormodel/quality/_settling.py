"""Warm-up: the settling transient at the start of a record (private to
:mod:`sensormodel.quality`).

Criterion (stated; the reasons carry its numbers):

1. The record is cut into consecutive windows of ``window`` seconds (default 60 s) and their
   means ȳ_k taken. The noise of a window mean is σ_A(window), the Allan deviation at the
   window length: Var(ȳ_a − ȳ_b) = 2σ²_A for adjacent windows (IEEE Std 952-1997 Annex C; NIST
   SP 1065 §5.2.2). Flicker and random-walk rate noise make the window means wander, so the
   test uses the whole variogram of the window means, D(h) = E[(ȳ(t + h) − ȳ(t))²]: from the
   noise model when one is given (:func:`window_variogram`, from its PSD), else from the
   second half of the record (D(h) = 2σ²_A + b·ln(h/τ), b ≥ 0, the form of white plus flicker
   noise, fitted to the classical estimator; σ_A from the median absolute deviation of the
   differences of adjacent window means over √2, Hampel 1974).
2. The transient model is L + A·exp(−t/T). On the first differences Δȳ_k (which the level L
   leaves and which are stationary for every power-law type), the generalized least-squares
   amplitude Â(T) with the differences' covariance ½[D((j+1)τ) + D((j−1)τ) − 2D(jτ)] has the
   standard normal statistic z(T) = Â/se(Â) when there is no transient. A transient is
   **detected** when max |z(T)| over a log grid of T (half a window to half the record)
   exceeds the Bonferroni threshold for the grid at the false-alarm probability
   ``false_alarm`` (default 1 %; conservative, the z(T) being strongly correlated). With a
   temperature column, the differences of its window means are a second regressor of the same
   generalized least squares, so a linear temperature effect is not read as a transient.
3. T̂ is the T of largest |z| (the maximum-likelihood T for the given noise), Â its amplitude.
   The **settling time** is when the fitted transient has decayed to ``criterion`` (default 1)
   times σ_A: t_s = T̂·ln(|Â|/(criterion·σ_A)), i.e. when it is no larger than the noise of
   one window mean. Where the exponential does not describe the first half (a whitened
   residual, an innovation of the Cholesky factor, above the threshold for the windows of the
   first half), the reason ``settling_not_exponential`` is given and the settling time is at
   least the end of the last such window. A settling time beyond half the record is reported
   with ``settling_not_within_record`` (the level of the second half is not final).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import AnalysisError
from ._temperature import window_variogram
from ._windows import (
    Reason,
    as_record,
    bonferroni_threshold,
    mean_sigma,
    record_variogram,
    window_means,
    window_samples,
)

__all__ = ["Settling", "detect_settling", "settling_trim", "DEFAULT_SETTLING_WINDOW"]

#: Window of the settling test [s] (the 60 s mean of bias-stability practice; common practice).
DEFAULT_SETTLING_WINDOW = 60.0
#: Fewest windows that judge settling (a first half and a second half of 10 each).
MIN_SETTLING_WINDOWS = 20


@dataclass(frozen=True)
class Settling:
    """The settling transient of a record.

    Attributes
    ----------
    settling_time : float
        Time from the record's start until the transient is below ``criterion`` σ_A [s]; 0 when
        no transient is detected.
    detected : bool
        Whether a transient was detected (statistic > threshold).
    statistic : float
        max |z_k| over the windows of the first half [-].
    threshold : float
        The Bonferroni threshold it is compared with [-].
    window : float
        Window length [s].
    sigma : float
        σ_A(window), the noise of a window mean [unit].
    sigma_source : str
        ``model`` or ``record``.
    level : float
        The final level [unit] (the fit's L where fitted).
    amplitude : float or None
        Fitted A [unit] (transient at t = 0).
    time_constant : float or None
        Fitted T [s].
    criterion : float
        The settling criterion in units of σ_A.
    duration : float
        Record length [s].
    reasons : tuple
        (code, values) pairs: ``settling_detected`` or ``settling_none``, and
        ``settling_not_exponential``, ``settling_not_within_record`` where they apply.
    """

    settling_time: float
    detected: bool
    statistic: float
    threshold: float
    window: float
    sigma: float
    sigma_source: str
    level: float
    amplitude: float | None
    time_constant: float | None
    criterion: float
    duration: float
    reasons: tuple[Reason, ...] = field(default=())


def _variogram(tail: np.ndarray, tau: float, model: Any, sigma: float, count: int) -> np.ndarray:
    """D(jτ), j = 0 … count, of τ-window means (module notes, point 1); D(0) = 0."""
    lags = np.arange(count + 1) * tau
    if model is not None:
        d = window_variogram(model, tau, lags)
    else:
        d = record_variogram(tail, sigma, count)
    d[0] = 0.0
    return d


def _difference_covariance(d: np.ndarray, k: int) -> np.ndarray:
    """Covariance of the k − 1 first differences of window means from their variogram."""
    lag = np.abs(np.arange(k - 1)[:, None] - np.arange(k - 1)[None, :])
    return 0.5 * (d[lag + 1] + d[np.abs(lag - 1)] - 2.0 * d[lag])


def _gls_profile(
    means: np.ndarray,
    centres: np.ndarray,
    cov: np.ndarray,
    grid: np.ndarray,
    temps: np.ndarray | None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """z(T), Â(T) and the temperature coefficient ĉ(T) on the grid of T, and the Cholesky
    factor of ``cov`` (module notes); with ``temps`` the temperature's window means are a
    second regressor, so that a temperature drift is not read as a transient."""
    from scipy.linalg import cho_solve, cholesky

    jitter = np.eye(cov.shape[0]) * 1e-12 * np.trace(cov) / cov.shape[0]
    factor = cholesky(cov + jitter, lower=True)
    diffs = np.diff(means)
    z = np.empty(grid.shape[0])
    amp = np.empty(grid.shape[0])
    coef = np.zeros(grid.shape[0])
    for i, tc in enumerate(grid):
        cols = [np.diff(np.exp(-centres / tc))]
        if temps is not None:
            cols.append(np.diff(temps))
        x = np.column_stack(cols)
        cx = cho_solve((factor, True), x)
        info = x.T @ cx
        inv = np.linalg.inv(info)
        beta = inv @ (cx.T @ diffs)
        amp[i] = beta[0]
        z[i] = beta[0] / math.sqrt(inv[0, 0])
        if temps is not None:
            coef[i] = beta[1]
    return z, amp, coef, factor


def _temperature_means(temperature: Any, n: int, m: int) -> np.ndarray:
    temp = as_record(temperature, "temperature")
    if temp.shape[0] != n:
        raise AnalysisError(
            f"the temperature has {temp.shape[0]} samples, the channel {n}",
            "one temperature per sample",
            field="temperature",
        )
    return window_means(temp, m)[0]


def detect_settling(
    y: Any,
    rate: float,
    *,
    model: Any = None,
    window: float = DEFAULT_SETTLING_WINDOW,
    criterion: float = 1.0,
    false_alarm: float = 0.01,
    temperature: Any = None,
) -> Settling:
    """Detect the warm-up transient at the start of a record and its settling time.

    The criterion of the module notes: window means against the final level, judged with
    σ_A(window) (IEEE Std 952-1997 Annex C) from ``model`` or the record's second half, a
    Bonferroni threshold at ``false_alarm``, and an exponential fit whose decay to
    ``criterion``·σ_A is the settling time.

    Parameters
    ----------
    y : array_like
        Rate samples of one channel [unit], uniformly spaced, finite.
    rate : float
        Sample rate [Hz].
    model : sensormodel.model.Channel, optional
        The channel's noise model; its ``allan_variance(window)`` is σ²_A.
    window : float
        Window length [s] (default 60 s).
    criterion : float
        The transient counts as settled below ``criterion``·σ_A (default 1).
    false_alarm : float
        Probability of detecting a transient in a settled record (default 0.01).
    temperature : array_like, optional
        The temperature at each sample: its window means enter the fit as a second regressor
        (a linear temperature effect is then not read as a transient).

    Returns
    -------
    Settling

    Raises
    ------
    AnalysisError
        Fewer than 20 windows (too short a record to judge settling), a bad window, rate,
        criterion or false-alarm probability, a non-finite sample.
    """
    from .. import validate

    rate = validate.rate(rate)
    arr = as_record(y)
    if isinstance(criterion, bool) or not float(criterion) > 0.0:
        raise AnalysisError(f"got {criterion!r}", "a criterion > 0 (in σ_A)", field="criterion")
    m = window_samples(window, rate, arr.shape[0])
    means, starts = window_means(arr, m)
    k = means.shape[0]
    duration = arr.shape[0] / rate
    if k < MIN_SETTLING_WINDOWS:
        raise AnalysisError(
            f"the record ({duration:g} s) holds {k} windows of {m / rate:g} s",
            f"at least {MIN_SETTLING_WINDOWS} windows to judge settling (a record of "
            f"{MIN_SETTLING_WINDOWS * m / rate:g} s or more, or a shorter window)",
            field="y",
        )
    half = k // 2
    sigma, source = mean_sigma(arr, rate, m, model, part=slice(half * m, k * m))
    centres = (starts + 0.5 * m) / rate
    d = _variogram(means[half:], m / rate, model, sigma, k)
    cov = _difference_covariance(d, k)
    grid = np.geomspace(0.5 * m / rate, 0.5 * duration, 40)
    temps = None if temperature is None else _temperature_means(temperature, arr.shape[0], m)
    if temps is not None and np.ptp(temps) <= 1e-9 * max(1.0, abs(float(np.mean(temps)))):
        temps = None  # a constant temperature explains nothing (and would be singular)
    z, amps, coefs, factor = _gls_profile(means, centres, cov, grid, temps)
    best = int(np.argmax(np.abs(z)))
    threshold = bonferroni_threshold(false_alarm, grid.shape[0])
    statistic = float(abs(z[best]))
    common = {"window": m / rate, "statistic": statistic, "threshold": threshold}
    amp, tc = float(amps[best]), float(grid[best])
    transient = amp * np.exp(-centres / tc)
    if temps is not None:
        transient = transient + float(coefs[best]) * (temps - float(np.mean(temps[half:])))
    level = float(np.mean(means[half:] - transient[half:]))
    if statistic <= threshold:
        return Settling(
            0.0, False, statistic, threshold, m / rate, sigma, source, float(np.mean(means[half:])),
            None, None, float(criterion), duration, (("settling_none", common),),
        )  # fmt: skip
    from scipy.linalg import solve_triangular

    ratio = abs(amp) / (float(criterion) * sigma)
    settling = tc * math.log(ratio) if ratio > 1.0 else 0.0
    reasons: list[Reason] = []
    innovations = solve_triangular(factor, np.diff(means - transient), lower=True)
    limit = bonferroni_threshold(false_alarm, half)
    over = np.flatnonzero(np.abs(innovations[: half - 1]) > limit)
    if over.size:
        reasons.append(("settling_not_exponential", {"departure": float(np.max(np.abs(
            innovations[: half - 1]))), "threshold": limit}))  # fmt: skip
        settling = max(settling, float((starts[over[-1] + 1] + m) / rate))
    if settling > 0.5 * duration:
        reasons.append(
            ("settling_not_within_record", {"settling_time": settling, "duration": duration})
        )
    values = dict(
        common, settling_time=settling, time_constant=tc, amplitude_sigma=amp / sigma,
        criterion=float(criterion),
    )  # fmt: skip
    return Settling(
        settling, True, statistic, threshold, m / rate, sigma, source, level, amp, tc,
        float(criterion), duration, (("settling_detected", values), *reasons),
    )  # fmt: skip


def settling_trim(
    y: Any,
    rate: float,
    trim: Any,
    *,
    model: Any = None,
    window: float = DEFAULT_SETTLING_WINDOW,
    criterion: float = 1.0,
    false_alarm: float = 0.01,
    temperature: Any = None,
) -> tuple[int, Settling | None]:
    """The samples to cut from the start of a record: ``"auto"`` (the settling time of
    :func:`detect_settling`, rounded up to whole samples) or a time in seconds.

    Parameters
    ----------
    y, rate, model, window, criterion, false_alarm, temperature
        As for :func:`detect_settling`.
    trim : "auto" or float
        ``"auto"`` or the time to cut [s], 0 ≤ trim < the record's length.

    Returns
    -------
    start : int
        Index of the first sample kept.
    settling : Settling or None
        The detection behind ``"auto"`` (None for a given time).

    Raises
    ------
    AnalysisError
        A trim that is neither ``"auto"`` nor a time, a trim as long as the record or longer, a
        settling time that leaves fewer than half the record (``"auto"``: the record has not
        settled), and :func:`detect_settling`'s errors.
    """
    from .. import validate

    rate = validate.rate(rate)
    n = int(np.shape(y)[0])
    duration = n / rate
    if isinstance(trim, str) and trim.strip().lower() == "auto":
        found = detect_settling(
            y, rate, model=model, window=window, criterion=criterion, false_alarm=false_alarm,
            temperature=temperature,
        )  # fmt: skip
        if found.settling_time > 0.5 * duration:
            raise AnalysisError(
                f"the record has not settled: its settling time {found.settling_time:.4g} s is "
                f"beyond half of its {duration:.4g} s",
                "a longer record, or a trim time",
                field="trim",
            )
        return min(n, int(math.ceil(found.settling_time * rate - 1e-9))), found
    try:
        seconds = float(trim) if not isinstance(trim, bool) else math.nan
    except (TypeError, ValueError):
        raise AnalysisError(f"got {trim!r}", "'auto' or a time in seconds", field="trim") from None
    if not math.isfinite(seconds) or seconds < 0.0:
        raise AnalysisError(f"got {trim!r}", "'auto' or a time in seconds ≥ 0", field="trim")
    if seconds >= duration:
        raise AnalysisError(
            f"a trim of {seconds:g} s is not shorter than the record ({duration:g} s)",
            "a trim shorter than the record",
            field="trim",
        )
    return int(math.ceil(seconds * rate - 1e-9)), None
