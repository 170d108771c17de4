"""Window means and the noise of a window mean (private to :mod:`sensormodel.quality`)."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .. import validate
from ..errors import AnalysisError

#: 1/Φ⁻¹(3/4): the median absolute deviation of a normal sample times this is its σ
#: (F. R. Hampel, "The influence curve and its role in robust estimation", J. Amer. Statist.
#: Assoc. 69 (1974) 383-393).
MAD_TO_SIGMA = 1.482602218505602

Reason = tuple[str, dict[str, Any]]


def as_record(y: Any, name: str = "y") -> np.ndarray:
    """The samples as a finite 1-D float64 array (a non-finite sample refused by index)."""
    arr = np.asarray(y, dtype=np.float64)
    if arr.ndim != 1:
        raise AnalysisError(f"got an array of shape {arr.shape}", "a 1-D array", field=name)
    bad = np.flatnonzero(~np.isfinite(arr))
    if bad.size:
        raise AnalysisError(
            f"sample {int(bad[0])} is {float(arr[bad[0]])!r}",
            "finite samples (cut the record at its gaps first)",
            field=name,
        )
    return arr


def window_samples(window: Any, rate: float, n: int, name: str = "window") -> int:
    """Samples in a window of ``window`` seconds (at least 1, at most ``n``)."""
    w, shown = float(window) if not isinstance(window, bool) else math.nan, window
    if not math.isfinite(w) or w <= 0.0:
        raise AnalysisError(f"got {shown!r}", "a window length in seconds > 0", field=name)
    m = max(1, int(round(w * rate)))
    if m > n:
        raise AnalysisError(
            f"a {w:g} s window needs {m} samples; the record has {n}",
            "a shorter window or a longer record",
            field=name,
        )
    return m


def window_means(y: np.ndarray, m: int) -> tuple[np.ndarray, np.ndarray]:
    """Means of the whole consecutive windows of ``m`` samples and their first sample index."""
    k = y.shape[0] // m
    means = y[: k * m].reshape(k, m).mean(axis=1)
    return means, np.arange(k) * m


def robust_sigma(values: np.ndarray) -> float:
    """σ of the values from their median absolute deviation about the median (Hampel 1974)."""
    med = float(np.median(values))
    return MAD_TO_SIGMA * float(np.median(np.abs(values - med)))


def mean_sigma(
    y: np.ndarray, rate: float, m: int, model: Any, *, part: slice | None = None
) -> tuple[float, str]:
    """σ_A(τ = m/rate) [unit of y]: the Allan deviation at the window length, whose square is
    half the variance of the difference of two adjacent window means (IEEE Std 952-1997
    Annex C; NIST SP 1065 §5.2.2).

    From ``model`` (a :class:`sensormodel.model.Channel`, its exact ``allan_variance``), else from
    the record: the robust σ of the differences of adjacent window means over ``part`` (default
    the whole record) divided by √2. Returns (σ, "model" or "record").
    """
    if model is not None:
        return float(math.sqrt(model.allan_variance(np.array([m / rate]))[0])), "model"
    seg = y if part is None else y[part]
    means, _ = window_means(seg, m)
    if means.shape[0] < 8:
        raise AnalysisError(
            f"{means.shape[0]} windows of {m / rate:g} s to judge the noise of a window mean",
            "at least 8 (a longer record, a shorter window, or a noise model)",
            field="y",
        )
    sigma = robust_sigma(np.diff(means)) / math.sqrt(2.0)
    if sigma <= 0.0:
        sigma = float(np.std(np.diff(means))) / math.sqrt(2.0)
    return sigma, "record"


def normal_quantile(p: float) -> float:
    """Φ⁻¹(p) of the standard normal law."""
    from scipy.stats import norm

    return float(norm.ppf(p))


def bonferroni_threshold(false_alarm: Any, tests: int) -> float:
    """The |z| threshold at which ``tests`` two-sided normal tests together raise a false alarm
    with probability at most ``false_alarm`` (Bonferroni's inequality)."""
    alpha = validate.probability(false_alarm, "false_alarm", example="0.01")
    return normal_quantile(1.0 - alpha / (2.0 * max(1, int(tests))))


def record_variogram(means: np.ndarray, sigma: float, count: int) -> np.ndarray:
    """D(jτ), j = 0 … count, of consecutive window means estimated from the record: the form
    of white plus flicker noise, 2σ²_A + b·ln j (b ≥ 0), its b fitted by least squares weighted
    by the pair counts to the classical estimator (G. Matheron 1963: the mean squared difference
    at each lag j up to half the windows); D(0) = 0. Random-walk rate noise is not in the form
    (its variogram grows like j): an approximation, stated by the callers' reasons."""
    k = means.shape[0]
    j = np.arange(1, max(2, k // 2) + 1)
    est = np.array([np.mean((means[i:] - means[:-i]) ** 2) for i in j])
    x = np.log(j.astype(float))
    weight = k - j
    slope = float(np.sum(weight * x * (est - 2.0 * sigma**2)) / np.sum(weight * x * x))
    d = 2.0 * sigma**2 + max(0.0, slope) * np.log(np.maximum(np.arange(count + 1), 1.0))
    d[0] = 0.0
    return d
