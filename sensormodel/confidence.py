"""The statistics of intervals: chi-square confidence intervals of deviations, equivalent
degrees of freedom of the Allan variance, the probability that a record decides a verdict, and
the record length that would decide it.

One owner: allan (curve intervals), identify (slope readings) and acceptance (verdicts,
planning) import these rather than writing their own. The Greenhall-Riley tables live here
only, where the degrees of freedom are computed.

Sections
--------
* Chi-square intervals: :func:`chi2_interval` (arrays, for curves) and
  :func:`interval_factors` (one ν, as factors of the estimate).
* Equivalent degrees of freedom of the overlapping Allan variance: :func:`edf_greenhall`
  (Greenhall & Riley's algorithm), :func:`edf` (with the exact moving-average EDF where their
  short-τ branch is approximate), :func:`edf_simple` (SP 1065 Table 5), and the closed
  large-record form :func:`allan_edf` with its inverse :func:`duration_for_edf`.
* Degrees of freedom of an interval and the record length that decides a verdict:
  :func:`dof_from_interval`, :func:`dof_for_precision`, :func:`decision_probability`,
  :func:`required_dof`, :func:`required_duration`.

References
----------
NIST SP 1065, W. J. Riley, "Handbook of Frequency Stability Analysis" (2008), eq. (45): the
chi-square interval of the Allan variance; section 5.4.1, Table 5: simple EDF formulas.
C. A. Greenhall and W. J. Riley, "Uncertainty of stability variances based on finite
differences", Proc. 35th PTTI Meeting (2003): equivalent degrees of freedom.
"""

from __future__ import annotations

import functools
import math
from typing import Any

import numpy as np
import numpy.typing as npt

from . import validate
from .errors import AnalysisError

__all__ = [
    "DEFAULT_CONFIDENCE",
    "DECISION_CONFIDENCE",
    "DEFAULT_POWER",
    "NOISE_ALPHAS",
    "chi2_interval",
    "interval_factors",
    "edf",
    "edf_greenhall",
    "edf_simple",
    "edf_cached",
    "allan_edf",
    "duration_for_edf",
    "dof_from_interval",
    "dof_for_precision",
    "decision_probability",
    "required_dof",
    "required_duration",
]

#: Default two-sided confidence of an Allan-deviation interval: one sigma (common practice).
DEFAULT_CONFIDENCE = 0.683
#: Default two-sided confidence of a verdict's interval (each one-sided error ≤ 5 %).
DECISION_CONFIDENCE = 0.9
#: Default probability with which a record of the required length decides the verdict.
DEFAULT_POWER = 0.8
#: Power-law exponents α of the rate PSD for which the EDF is defined here (d = 2, AVAR).
NOISE_ALPHAS = (2, 1, 0, -1, -2)
#: Degrees of freedom searched by the solvers (beyond it, an interval is a point).
_MAX_DOF = 1e12

# ---------------------------------------------------------------------------------------------
# Chi-square intervals
# ---------------------------------------------------------------------------------------------


def chi2_interval(
    deviation: npt.ArrayLike, edf: npt.ArrayLike, confidence: float = DEFAULT_CONFIDENCE
) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """Chi-square confidence interval of a deviation (NIST SP 1065, eq. (45)).

    σ_low = σ̂ sqrt(edf / χ²_{(1+c)/2}(edf)),  σ_high = σ̂ sqrt(edf / χ²_{(1−c)/2}(edf)).

    Parameters
    ----------
    deviation : array_like
        Estimated deviation σ̂ [any unit].
    edf : array_like
        Equivalent degrees of freedom [-], > 0.
    confidence : float
        Two-sided confidence c, 0 < c < 1.

    Returns
    -------
    low, high : ndarray
        Interval bounds [unit of ``deviation``].
    """
    from scipy.stats import chi2

    c = validate.probability(confidence, "confidence", example="0.683")
    dev = np.asarray(deviation, dtype=np.float64)
    nu = np.asarray(edf, dtype=np.float64)
    if np.any(~np.isfinite(nu)) or np.any(nu <= 0.0):
        raise AnalysisError(f"got edf = {nu!r}", "equivalent degrees of freedom > 0", field="edf")
    low = dev * np.sqrt(nu / chi2.ppf(0.5 * (1.0 + c), nu))
    high = dev * np.sqrt(nu / chi2.ppf(0.5 * (1.0 - c), nu))
    return low, high


def interval_factors(dof: float, confidence: float) -> tuple[float, float]:
    """Chi-square interval of a deviation (square root of a variance) with ``dof`` degrees of
    freedom, as factors of the estimate.

    σ_lo = σ̂·√(ν/χ²((1+c)/2, ν)), σ_hi = σ̂·√(ν/χ²((1−c)/2, ν)) (NIST SP 1065, the chi-square
    interval of the Allan variance).

    Returns
    -------
    (float, float)
        (low factor, high factor), low < 1 < high.
    """
    from scipy.stats import chi2

    c = validate.probability(confidence, "confidence", example="0.9")
    q_hi = float(chi2.ppf(0.5 * (1.0 + c), dof))
    q_lo = float(chi2.ppf(0.5 * (1.0 - c), dof))
    high = math.sqrt(dof / q_lo) if q_lo > dof * 1e-300 else math.inf
    return math.sqrt(dof / q_hi), high


# ---------------------------------------------------------------------------------------------
# Equivalent degrees of freedom of the Allan variance
# ---------------------------------------------------------------------------------------------


#: Greenhall & Riley (2003), Table 2 (unmodified variances, large r), column d = 2:
#: (a0, a1) in 1/edf ≈ (1/r)(a0 − a1/r), for :func:`edf_greenhall` and :func:`allan_edf`.
#: α = 0, −1, −2 as listed in the project's reference notes; α = 1 (used with Table 3) as
#: transcribed in allantools 2024.06 (a reference library).
_GR_TABLE2 = {
    1: (790.0, 410.0),
    0: (2.0 / 3.0, 1.0 / 3.0),
    -1: (0.852, 0.375),
    -2: (1.079, 0.368),
}
#: Greenhall & Riley (2003), Table 3, d = 2 (flicker PM): (b0, b1) in sz(0) ≈ b0 + b1 ln m.
_GR_TABLE3_D2 = (15.23, 12.0)
_GR_JMAX = 100


def _sw(t: np.ndarray, alpha: int) -> np.ndarray:
    """Greenhall & Riley (2003) eq. (7): the generalized autocovariance kernel for S ∝ f^α.

    Only ratios of squares of its differences enter the EDF, so the overall sign of each
    kernel does not matter.
    """
    a = np.abs(t)
    if alpha == 2:
        return -a
    if alpha == 0:
        return a**3
    if alpha == -2:
        return a**5
    if alpha == -4:
        return a**7
    power = {1: 2, -1: 4, -3: 6}[alpha]
    with np.errstate(divide="ignore", invalid="ignore"):
        v = a**power * np.log(a)
    return np.where(a == 0.0, 0.0, v)


def _sx(t: np.ndarray, F: float, alpha: int) -> np.ndarray:
    """Greenhall & Riley (2003) eq. (8): F²[2 sw(t) − sw(t − 1/F) − sw(t + 1/F)]; sw(t, α+2)
    for F = ∞.

    For α = 1 (t² ln|t|) and large F the plain second difference cancels catastrophically; it is
    rewritten exactly with log1p/atanh where |t| > 2/F:
    −2 ln|t| − F²[(t² + h²) log1p(−h²/t²) + 4|t| h atanh(h/|t|)], h = 1/F.
    """
    t = np.asarray(t, dtype=np.float64)
    if math.isinf(F):
        return _sw(t, alpha + 2)
    h = 1.0 / F
    out = F * F * (2.0 * _sw(t, alpha) - _sw(t - h, alpha) - _sw(t + h, alpha))
    if alpha != 1:
        return out
    a = np.abs(np.atleast_1d(t))
    far = a > 2.0 * h
    if np.any(far):
        af = a[far]
        u = h / af
        out = np.array(np.atleast_1d(out), dtype=np.float64)
        out[far] = -2.0 * np.log(af) - F * F * (
            (af * af + h * h) * np.log1p(-u * u) + 4.0 * af * h * np.arctanh(u)
        )
        out = out.reshape(t.shape)
    return out


def _sz(t: np.ndarray, F: float, alpha: int) -> np.ndarray:
    """Greenhall & Riley (2003) eq. (9) for d = 2 (the Allan variance)."""
    t = np.asarray(t, dtype=np.float64)
    return (
        6.0 * _sx(t, F, alpha)
        - 4.0 * _sx(t - 1.0, F, alpha)
        - 4.0 * _sx(t + 1.0, F, alpha)
        + _sx(t - 2.0, F, alpha)
        + _sx(t + 2.0, F, alpha)
    )


def _basic_sum(J: float, M: float, S: float, F: float, alpha: int) -> float:
    """Greenhall & Riley (2003) eq. (10):
    sz(0)² + (1 − J/M) sz(J/S)² + 2 Σ_{j=1}^{J−1} (1 − j/M) sz(j/S)²."""
    j = np.arange(1, int(J), dtype=np.float64)
    z0 = float(_sz(np.array(0.0), F, alpha))
    zJ = float(_sz(np.array(J / S), F, alpha))
    zj = _sz(j / S, F, alpha)
    return z0 * z0 + (1.0 - J / M) * zJ * zJ + 2.0 * float(np.sum((1.0 - j / M) * zj * zj))


def edf_greenhall(alpha: int, m: int, n_phase: int, *, overlapping: bool = True) -> float:
    """Equivalent degrees of freedom of the (unmodified) Allan variance at τ = m τ0.

    The algorithm of C. A. Greenhall and W. J. Riley, "Uncertainty of stability variances based
    on finite differences", Proc. 35th PTTI Meeting (2003), NASA NTRS 20050061319, for d = 2
    (second differences) and F = m (unmodified), with S = m for the overlapped estimator
    (``overlapping=True``) or S = 1 for the non-overlapped one:
    L = m/F + m d, M = 1 + ⌊S (N − L)/m⌋, J = min(M, (d + 1) S), r = M/S, J_max = 100; the
    "basic sum" of their eq. (10) when J ≤ J_max, their large-r approximation
    1/edf ≈ (1/r)(a0 − a1/r) (Table 2; for flicker PM divided by (b0 + b1 ln m)², Table 3) when
    r > d + 1, and the basic sum rescaled to J_max otherwise.

    White PM (α = 2) uses the exact result for white phase noise: the second differences have
    covariances 6, −4, 1 (times the phase variance) at lags 0, S, 2S of the M terms, so
    1/edf = [36 M + 32 (M − S)₊ + 2 (M − 2S)₊]/(36 M²), which equals Greenhall & Riley's
    (1/M)(35/18 − 1/r) whenever M ≥ 2S and also covers the short case they treat separately.

    Parameters
    ----------
    alpha : int
        Exponent of the rate PSD S_y(f) ∝ f^α, one of 2, 1, 0, −1, −2.
    m : int
        Averaging factor, τ = m τ0.
    n_phase : int
        Number of phase points N (n + 1 for n rate samples).
    overlapping : bool
        Overlapped estimator (the one :func:`sensormodel.allan.overlapping` computes) or not.

    Returns
    -------
    edf : float
        Equivalent degrees of freedom [-].
    """
    alpha = int(alpha)
    if alpha not in NOISE_ALPHAS:
        raise AnalysisError(f"got α = {alpha}", "α in {2, 1, 0, -1, -2}", field="alpha")
    m = int(m)
    N = int(n_phase)
    d = 2
    F = float(m)
    S = float(m) if overlapping else 1.0
    L = m / F + m * d
    if m < 1 or N < L + 1:
        raise AnalysisError(
            f"m = {m} with N = {N} phase points leaves no complete second difference",
            "N ≥ 2m + 2",
            field="m",
        )
    M = 1.0 + math.floor(S * (N - L) / m)
    J = min(M, (d + 1) * S)
    r = M / S
    if alpha == 2:
        inv = (36.0 * M + 32.0 * max(0.0, M - S) + 2.0 * max(0.0, M - 2.0 * S)) / (36.0 * M * M)
        return 1.0 / inv
    if alpha <= 0:
        if J <= _GR_JMAX:
            Fp = F if m * (d + 1) <= _GR_JMAX else math.inf
            z0 = float(_sz(np.array(0.0), Fp, alpha))
            return M * z0 * z0 / _basic_sum(J, M, S, Fp, alpha)
        if r > d + 1:
            a0, a1 = _GR_TABLE2[alpha]
            return r / (a0 - a1 / r)
        mp = _GR_JMAX / r
        z0 = float(_sz(np.array(0.0), math.inf, alpha))
        return _GR_JMAX * z0 * z0 / _basic_sum(_GR_JMAX, _GR_JMAX, mp, math.inf, alpha)
    # alpha == 1, flicker PM
    if J <= _GR_JMAX:
        z0 = float(_sz(np.array(0.0), F, 1))
        return M * z0 * z0 / _basic_sum(J, M, S, F, 1)
    b0, b1 = _GR_TABLE3_D2
    norm = (b0 + b1 * math.log(m)) ** 2
    if r > d + 1:
        a0, a1 = _GR_TABLE2[1]
        return norm * r / (a0 - a1 / r)
    mp = _GR_JMAX / r
    return norm * _GR_JMAX / _basic_sum(_GR_JMAX, _GR_JMAX, mp, mp, 1)


def _edf_moving_average(v: np.ndarray, M: int, step: int) -> float:
    """Exact EDF 2 E[V]²/Var[V] of V = mean of M terms z_i = Σ_j v_j e_(i·step + j), e iid
    Gaussian: M² c(0)² / Σ_{|k|<M} (M − |k|) c(k·step)², c the autocorrelation of v."""
    c = np.correlate(v, v, mode="full")
    mid = v.shape[0] - 1
    k = np.arange(0, min(M, mid // step + 1))
    ck = c[mid + k * step]
    weights = np.where(k == 0, float(M), 2.0 * (M - k))
    return float(M * M * ck[0] ** 2 / np.sum(weights * ck * ck))


def edf(alpha: int, m: int, n_phase: int, *, overlapping: bool = True) -> float:
    """Equivalent degrees of freedom of the Allan variance as :func:`sensormodel.allan.overlapping`
    uses them.

    :func:`edf_greenhall` everywhere, except where its short-τ branch (F = m, used for
    3m ≤ 100) models the unmodified variance only approximately: for white rate noise (α = 0)
    and random-walk rate noise (α = −2) at m ≤ 33 the exact EDF of the sampled model is used
    instead (V is a mean of M Gaussian terms whose moving-average weights are
    [−1]·m + [+1]·m for α = 0 in terms of the white rate samples, and the triangle
    0, 1, …, m, …, 1 for α = −2 in terms of the white increments of the rate), computed as
    2 E[V]²/Var[V] from their exact autocorrelation. At m = 1, N = 1001 the Greenhall-Riley
    branch gives 782 (α = 0) and 762 (α = −2) against the exact 666 and 999, which also match
    the simple formulas of SP 1065 Table 5 and seeded simulations; from m = 34 on the
    Greenhall-Riley value (F = ∞) and the exact one agree to about 0.1 %. White PM is exact in
    :func:`edf_greenhall` already.

    Parameters
    ----------
    alpha, m, n_phase, overlapping
        As for :func:`edf_greenhall`: noise type α of the rate PSD, averaging factor (τ = m τ0),
        phase points N, overlapped estimator or not.

    Returns
    -------
    edf : float
        Equivalent degrees of freedom [-].
    """
    alpha = int(alpha)
    m = int(m)
    value = edf_greenhall(alpha, m, n_phase, overlapping=overlapping)  # checks the arguments
    if alpha in (0, -2) and m * 3 <= _GR_JMAX:
        M = int(n_phase) - 2 * m if overlapping else (int(n_phase) - 1) // m - 1
        if alpha == 0:
            v = np.concatenate([-np.ones(m), np.ones(m)])
        else:
            v = np.concatenate([np.arange(0.0, m + 1.0), np.arange(m - 1.0, 0.0, -1.0)])
        return _edf_moving_average(v, M, 1 if overlapping else m)
    return value


def edf_simple(alpha: int, m: int, n_phase: int) -> float:
    """The simple EDF formulas of NIST SP 1065, section 5.4.1, Table 5 (overlapping AVAR).

    From Howe, Allan and Barnes (1981), with N phase points and averaging factor m:

    ============  ====================================================================
    white PM      (N + 1)(N − 2m) / (2(N − m))
    flicker PM    exp( sqrt( ln((N − 1)/(2m)) · ln((2m + 1)(N − 1)/4) ) )
    white FM      [3(N − 1)/(2m) − 2(N − 2)/N] · 4m²/(4m² + 5)
    flicker FM    m = 1: 2(N − 2)²/(2.3 N − 4.9);   m ≥ 2: 5 N²/(4m(N + 3m))
    RW FM         (N − 2)/(m (N − 3)²) · [(N − 1)² − 3m(N − 1) + 4m²]
    ============  ====================================================================

    The flicker-FM case m = 1 keeps the square on (N − 2) (several transcriptions agree; a
    version without it gives an EDF below 1).

    Parameters
    ----------
    alpha : int
        Exponent of the rate PSD, one of 2, 1, 0, −1, −2.
    m : int
        Averaging factor.
    n_phase : int
        Number of phase points N.
    """
    alpha = int(alpha)
    N = float(n_phase)
    m = float(m)
    if alpha == 2:
        return (N + 1.0) * (N - 2.0 * m) / (2.0 * (N - m))
    if alpha == 1:
        return math.exp(
            math.sqrt(math.log((N - 1.0) / (2.0 * m)) * math.log((2.0 * m + 1.0) * (N - 1.0) / 4.0))
        )
    if alpha == 0:
        return (
            (3.0 * (N - 1.0) / (2.0 * m) - 2.0 * (N - 2.0) / N) * 4.0 * m * m / (4.0 * m * m + 5.0)
        )
    if alpha == -1:
        if m == 1:
            return 2.0 * (N - 2.0) ** 2 / (2.3 * N - 4.9)
        return 5.0 * N * N / (4.0 * m * (N + 3.0 * m))
    if alpha == -2:
        return (
            (N - 2.0) / (m * (N - 3.0) ** 2) * ((N - 1.0) ** 2 - 3.0 * m * (N - 1.0) + 4.0 * m * m)
        )
    raise AnalysisError(f"got α = {alpha}", "α in {2, 1, 0, -1, -2}", field="alpha")


@functools.lru_cache(maxsize=4096)
def edf_cached(alpha: int, m: int, n_phase: int) -> float:
    """:func:`edf` of the overlapped estimator, cached (records of equal length and type share
    it)."""
    return edf(alpha, m, n_phase)


def allan_edf(alpha: int, tau: float, duration: float, rate: float) -> float:
    """Equivalent degrees of freedom of the overlapping Allan variance at τ [-].

    Greenhall & Riley (2003), unmodified overlapped AVAR (d = 2) for large r = M/m:
    1/edf ≈ (1/r)(a0 − a1/r) with (a0, a1) from their Table 2 for α = 0, −1, −2, and for white
    PM (α = 2) 1/edf = (1/M)(35/18 − 1/r). M = N − 2m, with N = duration·rate + 1 phase
    points (one more than the rate samples) and m = τ·rate; r = M/m.

    Parameters
    ----------
    alpha : int
        Noise type (2, 0, −1, −2).
    tau : float
        Averaging time [s].
    duration : float
        Record length [s].
    rate : float
        Sample rate [Hz].
    """
    m = max(1.0, tau * rate)
    M = duration * rate + 1.0 - 2.0 * m
    if M < 1:
        return 0.0
    r = M / m
    if alpha == 2:
        return M / max(1e-12, 35.0 / 18.0 - 1.0 / r)
    a0, a1 = _GR_TABLE2[alpha]
    return r / max(1e-12, a0 - a1 / r)


def duration_for_edf(alpha: int, tau: float, edf: float, rate: float) -> float:
    """Record length [s] at which :func:`allan_edf` reaches ``edf`` (closed form)."""
    m = max(1.0, tau * rate)
    if alpha == 2:
        # edf = M/(a0 − m/M) >= M/a0: M = edf·a0 is enough (and nearly exact for M >> m)
        M = edf * 35.0 / 18.0
        return (M + 2.0 * m - 1.0) / rate
    a0, a1 = _GR_TABLE2[alpha]
    disc = max(0.0, (edf * a0) ** 2 - 4.0 * edf * a1)
    r = 0.5 * (edf * a0 + math.sqrt(disc))
    return ((r + 2.0) * m - 1.0) / rate


# ---------------------------------------------------------------------------------------------
# Degrees of freedom of an interval, and the record length that decides
# ---------------------------------------------------------------------------------------------


def _solve_dof(fun: Any, target: float, *, increasing: bool) -> float | None:
    """ν in [1e-2, _MAX_DOF] with fun(ν) = target (fun monotone), or None."""
    from scipy.optimize import brentq

    lo, hi = math.log(1e-2), math.log(_MAX_DOF)

    def g(x: float) -> float:
        return fun(math.exp(x)) - target

    glo, ghi = g(lo), g(hi)
    if not increasing:
        glo, ghi = -glo, -ghi
    if glo >= 0:
        return math.exp(lo)
    if ghi < 0:
        return None
    return math.exp(brentq(g, lo, hi, xtol=1e-9, rtol=1e-9))


def dof_from_interval(low: float, high: float, confidence: float) -> float | None:
    """The degrees of freedom of the chi-square interval as wide (high/low) as [low, high].

    Returns None when ``low <= 0`` (a bound, not an interval of that shape).
    """
    validate.probability(confidence, "confidence", example="0.9")
    if not (low > 0 and high >= low and math.isfinite(high)):
        return None
    ratio = high / low
    if ratio <= 1.0 + 1e-12:
        return _MAX_DOF

    def width(nu: float) -> float:
        lo, hi = interval_factors(nu, confidence)
        return hi / lo

    return _solve_dof(width, ratio, increasing=False) or _MAX_DOF


@functools.lru_cache(maxsize=64)
def dof_for_precision(precision: float, confidence: float) -> float:
    """Degrees of freedom at which the chi-square interval of a deviation has a half-width of
    ``precision`` (a fraction of the estimate): (hi − lo)/2 = precision."""
    if not (isinstance(precision, (int, float)) and 0.0 < precision < 1.0):
        raise AnalysisError(
            f"precision = {precision!r}", "a fraction between 0 and 1, e.g. 0.25", field="precision"
        )

    def half(nu: float) -> float:
        lo, hi = interval_factors(nu, confidence)
        return 0.5 * (hi - lo)

    nu = _solve_dof(half, precision, increasing=False)
    return nu if nu is not None else _MAX_DOF


def decision_probability(value: float, limit: float, dof: float, confidence: float) -> float:
    """Probability that a record gives a decided verdict for a unit whose true value is
    ``value``, when the estimate's interval is the chi-square interval with ``dof``.

    The estimate is p̂ = p·√(X/ν) with X ~ χ²(ν). Above the limit (p > L) the record decides
    ``fail`` when p̂·√(ν/χ²((1+c)/2, ν)) > L, i.e. X > χ²((1+c)/2, ν)·(L/p)²; below it, ``pass``
    when X < χ²((1−c)/2, ν)·(L/p)². At p = L each is exactly (1 − c)/2.
    """
    from scipy.stats import chi2

    c = validate.probability(confidence, "confidence", example="0.9")
    if not (value > 0 and limit > 0):
        raise AnalysisError(f"value {value!r}, limit {limit!r}", "positive numbers")
    ratio2 = (limit / value) ** 2
    if value >= limit:
        return float(chi2.sf(chi2.ppf(0.5 * (1.0 + c), dof) * ratio2, dof))
    return float(chi2.cdf(chi2.ppf(0.5 * (1.0 - c), dof) * ratio2, dof))


def required_dof(value: float, limit: float, *, confidence: float, power: float) -> float | None:
    """Degrees of freedom at which a unit of true value ``value`` is decided with probability
    ``power`` (:func:`decision_probability`); None if no finite number does (value = limit)."""
    validate.probability(power, "power", example="0.8")
    if power <= 0.5 * (1.0 - confidence):
        raise AnalysisError(
            f"power = {power!r}",
            f"a probability above (1 - confidence)/2 = {(1 - confidence) / 2}",
            field="power",
        )
    if value == limit:
        return None
    return _solve_dof(
        lambda nu: decision_probability(value, limit, nu, confidence), power, increasing=True
    )


def required_duration(
    estimate: float,
    limit: float,
    *,
    low: float,
    high: float,
    duration: float,
    confidence: float = DECISION_CONFIDENCE,
    power: float = DEFAULT_POWER,
) -> tuple[float | None, float | None, str]:
    """Record length that would decide an inconclusive term [s].

    Parameters
    ----------
    estimate, low, high : float
        The term's estimate and interval from the present record (SI, compared quantity).
    limit : float
        The limit (same unit).
    duration : float
        Length of the present record [s].
    confidence : float
        Two-sided confidence of the interval.
    power : float
        Probability with which a record of the returned length decides the verdict, for a unit
        whose true value equals ``estimate``.

    Returns
    -------
    (float or None, float or None, str)
        (length [s], the present effective degrees of freedom, how it was found as a reason
        code: ``within_limit`` (a bound already within the limit), ``bound_only`` (the
        bound rule below), ``estimate_at_limit`` (no length decides it: the length is None),
        ``dof_scaling`` (degrees of freedom in proportion to the record length)).

    Notes
    -----
    The present interval's width gives ν₀ (:func:`dof_from_interval`); ν grows in proportion to
    the record length (Allan-variance EDF at a fixed τ, Greenhall & Riley 2003), so the length
    is duration·ν/ν₀ with ν from :func:`required_dof`. When the interval is only a bound
    (``low = 0``: the term is not resolved) the bound is taken to shrink as duration^(-1/4)
    (the scatter of an Allan variance at fixed τ falls as 1/√ν, and a parameter is its square
    root), a conservative rule: length = duration·(high/limit)⁴.
    """
    if not duration > 0:
        raise AnalysisError(
            f"duration = {duration!r}", "a positive record length in s", field="duration"
        )
    nu0 = dof_from_interval(low, high, confidence)
    if nu0 is None or estimate <= 0:
        if high <= limit:
            return duration, None, "within_limit"
        return duration * (high / limit) ** 4, None, "bound_only"
    nu = required_dof(estimate, limit, confidence=confidence, power=power)
    if nu is None:
        return None, nu0, "estimate_at_limit"
    return max(duration, duration * nu / nu0), nu0, "dof_scaling"
