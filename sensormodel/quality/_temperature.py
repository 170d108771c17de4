"""Temperature: the bias temperature sensitivity of a channel, its interval, its removal and its
comparison with a datasheet (private to :mod:`sensormodel.quality`).

Estimate. The record and its temperature column are cut into consecutive windows (default:
the record in 100 windows) whose means low-pass both; the sensitivity b is the ordinary
least-squares slope of the channel's window means on the temperature's window means (with an
intercept): b̂ = Σ w_k ȳ_k, w_k = (T_k − T̄)/Σ(T_j − T̄)², so Σ w_k = 0. The temperature's own
noise is taken as negligible after averaging (no errors-in-variables correction).

Interval, with a noise model (a :class:`sensormodel.model.Channel`). The window means of
inertial noise are correlated (flicker and random-walk rate noise are not even stationary), so
the OLS formula is wrong; but b̂ is a contrast (Σ w_k = 0) and its variance is exact from the
variogram of the window means, D(h) = E[(ȳ(t + h) − ȳ(t))²]:

    Var(b̂) = −½ Σ_j Σ_k w_j w_k D(|t_j − t_k|)

(the variogram identity of intrinsic random functions: G. Matheron, "The intrinsic random
functions and their applications", Adv. Appl. Probab. 5 (1973) 439-468, from memory), with
D computed from the model's one-sided PSD S(f) and the window's transfer function:
D(h) = ∫₀^∞ S(f)·sinc²(fτ)·2(1 − cos 2πfh) df (τ the window length; at h = τ this is twice the
Allan variance, IEEE Std 952-1997 Annex C). Gaussian noise makes b̂ normal: the interval is
b̂ ± Φ⁻¹((1 + c)/2)·√Var(b̂).

Interval, without a model: the same variance with the variogram estimated from the
regression's residual window means (:func:`record_variogram`: 2σ²_A + b·ln j, the form of white
plus flicker noise, fitted to the classical estimator), reason
``temperature_interval_approximate``: the estimated long-lag variogram is uncertain, and
random-walk rate noise is outside the form.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .. import validate
from ..confidence import DECISION_CONFIDENCE
from ..errors import AnalysisError
from ._windows import (
    Reason,
    as_record,
    normal_quantile,
    record_variogram,
    robust_sigma,
    window_means,
    window_samples,
)

__all__ = [
    "TemperatureEffect",
    "temperature_sensitivity",
    "remove_temperature",
    "window_variogram",
    "DEFAULT_TEMPERATURE_WINDOWS",
]

#: Windows the record is cut into by default for the regression.
DEFAULT_TEMPERATURE_WINDOWS = 100


@dataclass(frozen=True)
class TemperatureEffect:
    """The bias temperature sensitivity of one channel.

    Attributes
    ----------
    sensitivity : float
        b̂ [unit/K] (a temperature difference in °C is one in K).
    low, high : float
        Its interval at ``confidence`` [unit/K].
    confidence : float
        Two-sided confidence of the interval.
    standard_error : float
        √Var(b̂) [unit/K].
    basis : str
        ``noise_model`` (the variogram of the model) or ``record_variogram`` (no model).
    window : float
        Window length [s].
    n_windows : int
        Windows in the regression.
    reference_temperature : float
        T̄, the mean of the temperature window means [the temperature's unit].
    temperature_low, temperature_high : float
        Range of the temperature window means.
    datasheet : float or None
        The datasheet's |sensitivity| limit compared with [unit/K].
    datasheet_call : str or None
        ``within`` (the whole interval within ±limit), ``exceeds`` (the whole interval beyond
        it), ``inconclusive``, or None without a datasheet value.
    reasons : tuple
        (code, values) pairs.
    """

    sensitivity: float
    low: float
    high: float
    confidence: float
    standard_error: float
    basis: str
    window: float
    n_windows: int
    reference_temperature: float
    temperature_low: float
    temperature_high: float
    datasheet: float | None = None
    datasheet_call: str | None = None
    reasons: tuple[Reason, ...] = field(default=())


def window_variogram(model: Any, tau: float, lags: np.ndarray) -> np.ndarray:
    """D(h) = E[(ȳ(t + h) − ȳ(t))²] of τ-window means of ``model``'s noise at lags h ≥ 0 [unit²].

    D(h) = ∫₀^∞ S(f)·sinc²(fτ)·2(1 − cos 2πfh) df with S the one-sided PSD of the model
    (:meth:`sensormodel.model.Channel.psd`), summed by the midpoint rule with 8 points per
    period of the longest lag up to 64/τ, and the rest from the envelope of sinc²,
    1/(2π²f²τ²), with 2(1 − cos) at its mean 2. D(τ) = 2σ²_A(τ).
    """
    lags = np.asarray(lags, dtype=np.float64)
    h_max = max(float(np.max(lags)), tau)
    f_max = 64.0 / tau
    df = min(1.0 / (8.0 * h_max), 1.0 / (8.0 * tau))
    count = int(math.ceil(f_max / df))
    f = (np.arange(count) + 0.5) * df
    g = model.psd(f, sided="one-sided") * np.sinc(f * tau) ** 2 * df
    ft = np.geomspace(f_max, f_max * 1e4, 400)
    env = model.psd(ft, sided="one-sided") / (2.0 * math.pi**2 * ft**2 * tau**2)
    tail = 2.0 * float(np.sum(0.5 * (env[1:] + env[:-1]) * np.diff(ft)))
    return np.array([2.0 * float(g @ (1.0 - np.cos(2.0 * math.pi * f * h))) + tail for h in lags])


def _slope_variance_model(model: Any, t: np.ndarray, w: np.ndarray, tau: float) -> float:
    """−½ Σ Σ w_j w_k D(|t_j − t_k|) with D on a grid of τ/4 interpolated (module notes)."""
    span = float(t[-1] - t[0])
    grid = np.arange(0.0, span + tau / 4.0 + 1e-12, tau / 4.0)
    d = window_variogram(model, tau, grid)
    d[0] = 0.0
    lag = np.abs(t[:, None] - t[None, :])
    return max(0.0, -0.5 * float(w @ np.interp(lag, grid, d) @ w))


def _datasheet_limit(datasheet: Any) -> float | None:
    """The |sensitivity| limit [unit/K] of a datasheet value: a number, or a
    :class:`sensormodel.datasheet.SpecValue` (its max, else its typ)."""
    if datasheet is None:
        return None
    if hasattr(datasheet, "pick"):
        value = datasheet.pick("max")[0]
        return None if value is None else abs(float(value))
    value = float(datasheet)
    if not math.isfinite(value):
        raise AnalysisError(
            f"got {datasheet!r}", "a finite sensitivity [unit/K]", field="datasheet"
        )
    return abs(value)


def _call(low: float, high: float, limit: float) -> str:
    if -limit <= low and high <= limit:
        return "within"
    if low > limit or high < -limit:
        return "exceeds"
    return "inconclusive"


def _paired(y: Any, temperature: Any) -> tuple[np.ndarray, np.ndarray]:
    """The channel and its temperature as finite arrays of one length."""
    arr = as_record(y)
    temp = as_record(temperature, "temperature")
    if temp.shape[0] != arr.shape[0]:
        raise AnalysisError(
            f"the temperature has {temp.shape[0]} samples, the channel {arr.shape[0]}",
            "one temperature per sample",
            field="temperature",
        )
    return arr, temp


def _standard_error(
    model: Any, ym: np.ndarray, dt: np.ndarray, w: np.ndarray, centres: np.ndarray, tau: float
) -> float:
    """√Var(b̂) from the model's variogram, else from the residuals' (module notes)."""
    if model is not None:
        return math.sqrt(_slope_variance_model(model, centres, w, tau))
    resid = ym - float(w @ ym) * dt
    sigma = robust_sigma(np.diff(resid)) / math.sqrt(2.0)
    k = ym.shape[0]
    d = record_variogram(resid, sigma, k)
    lag = np.abs(np.arange(k)[:, None] - np.arange(k)[None, :])
    return math.sqrt(max(0.0, -0.5 * float(w @ d[lag] @ w)))


def temperature_sensitivity(
    y: Any,
    temperature: Any,
    rate: float,
    *,
    model: Any = None,
    window: float | None = None,
    confidence: float = DECISION_CONFIDENCE,
    datasheet: Any = None,
    unit: str = "1",
) -> TemperatureEffect:
    """The bias temperature sensitivity of a channel: regression of its low-passed bias on
    temperature, with an interval that accounts for the correlated noise (module notes).

    Parameters
    ----------
    y : array_like
        Rate samples of one channel [unit], finite.
    temperature : array_like
        The temperature at each sample [°C or K], same length.
    rate : float
        Sample rate [Hz].
    model : sensormodel.model.Channel, optional
        The channel's noise model: the interval from its variogram (else from the variogram
        estimated from the record, approximate).
    window : float, optional
        Window of the low-pass means [s] (default: the record in 100 windows).
    confidence : float
        Two-sided confidence of the interval (default 0.9).
    datasheet : float or SpecValue, optional
        The datasheet's ``bias_temperature_sensitivity`` [unit/K] (a limit on |b|).
    unit : str
        The channel's unit label (for the reasons).

    Returns
    -------
    TemperatureEffect

    Raises
    ------
    AnalysisError
        A temperature column of another length, a non-finite value, a constant temperature,
        fewer than 8 windows, a bad rate or confidence.
    """
    rate = validate.rate(rate)
    c = validate.probability(confidence, "confidence", example="0.9")
    arr, temp = _paired(y, temperature)
    n = arr.shape[0]
    m = (
        max(1, n // DEFAULT_TEMPERATURE_WINDOWS)
        if window is None
        else window_samples(window, rate, n)
    )
    ym, starts = window_means(arr, m)
    tm, _ = window_means(temp, m)
    k = ym.shape[0]
    if k < 8:
        raise AnalysisError(
            f"{k} windows of {m / rate:g} s",
            "at least 8 windows (a shorter window)",
            field="window",
        )
    t_ref = float(np.mean(tm))
    dt = tm - t_ref
    s_tt = float(dt @ dt)
    span = float(np.ptp(tm))
    if s_tt <= 0.0 or span <= 1e-9 * max(1.0, abs(t_ref)):
        raise AnalysisError(
            f"the temperature is constant ({t_ref:g} throughout)",
            "a temperature that varies over the record (or no temperature analysis)",
            field="temperature",
        )
    w = dt / s_tt
    b = float(w @ ym)
    reasons: list[Reason] = []
    se = _standard_error(model, ym, dt, w, (starts + 0.5 * m) / rate, m / rate)
    half = normal_quantile(0.5 * (1.0 + c)) * se
    basis = "noise_model" if model is not None else "record_variogram"
    if model is None:
        reasons.append(("temperature_interval_approximate", {"windows": k}))
    low, high = b - half, b + half
    values = {
        "sensitivity": b,
        "low": low,
        "high": high,
        "confidence": c,
        "unit": unit,
        "temperature_low": float(np.min(tm)),
        "temperature_high": float(np.max(tm)),
    }
    reasons.insert(0, ("temperature_sensitivity", values))
    limit = _datasheet_limit(datasheet)
    call = None
    if limit is not None:
        call = _call(low, high, limit)
        reasons.append((f"temperature_sensitivity_{call}", dict(values, limit=limit)))
    return TemperatureEffect(
        b, low, high, c, se, basis, m / rate, k, t_ref, float(np.min(tm)), float(np.max(tm)),
        limit, call, tuple(reasons),
    )  # fmt: skip


def remove_temperature(
    y: Any, temperature: Any, rate: float, effect: TemperatureEffect
) -> np.ndarray:
    """The record with its linear temperature effect removed: y − b̂·(T̃ − T̄) [unit], T̃ the
    temperature low-passed by a moving mean over the effect's window (edges held), T̄ its
    reference temperature, so the level at T̄ is kept.

    Raises
    ------
    AnalysisError
        A temperature of another length or a non-finite value.
    """
    from scipy.ndimage import uniform_filter1d

    rate = validate.rate(rate)
    arr, temp = _paired(y, temperature)
    size = max(1, min(arr.shape[0], int(round(effect.window * rate))))
    smooth = uniform_filter1d(temp, size=size, mode="nearest")
    return arr - effect.sensitivity * (smooth - effect.reference_temperature)
