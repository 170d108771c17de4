"""The fit engine: the bases (each term's exact Allan variance at unit parameter), the design
matrix, non-negative iteratively reweighted least squares, the Gauss-Markov time-constant
profile, and the fit on a subset of the terms.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from functools import lru_cache
from typing import Any

import numpy as np
import numpy.typing as npt

from ..terms import Flicker, GaussMarkov, Quantization, Ramp, RandomWalk, White
from ._checks import _Curve

_FloatArray = npt.NDArray[np.float64]

#: IRLS: most iterations and relative convergence tolerance of the coefficients.
_IRLS_MAX = 20
_IRLS_TOL = 1e-5
#: Gauss-Markov time-constant grid for the profile: points per decade.
_GM_PER_DECADE = 6
#: Where the Allan deviation of a Gauss-Markov term peaks, τ_peak/T
#: (:func:`sensormodel.terms.gauss_markov_peak`).
_GM_PEAK_RATIO = 1.8926
#: The least equivalent degrees of freedom of a curve point that can show that peak.
_GM_MIN_EDF = 4.0
#: The shortest time constant of the profile, as a fraction of the shortest τ of the curve.
_GM_LOWEST = 0.25


# ---------------------------------------------------------------------------------------------
# Basis functions (the exact Allan variances of sensormodel.terms at unit parameter)
# ---------------------------------------------------------------------------------------------


#: How a sample of a band-limited record relates to the filtered output: its mean over the
#: sample period (the convention of :mod:`sensormodel.simulate` and the default) or its value
#: at the sample instant (an oversampling converter whose filtered stream is decimated).
SAMPLING_AVERAGE = "average"
SAMPLING_POINT = "point"
SAMPLINGS = (SAMPLING_AVERAGE, SAMPLING_POINT)

#: The white term's band limit inside the fit: (bandwidth [Hz], Butterworth order) or
#: (bandwidth, order, sampling), sampling one of :data:`SAMPLINGS` (average when absent).
_WhiteFilter = tuple[Any, ...]


def _sampling(white_filter: _WhiteFilter | None) -> str:
    """The sampling assumption of a band limit (:data:`SAMPLING_AVERAGE` when not stated)."""
    if white_filter is None or len(white_filter) < 3:
        return SAMPLING_AVERAGE
    return str(white_filter[2])


def _basis(
    name: str,
    tau: _FloatArray,
    rate: float,
    time_constant: float = 1.0,
    white_filter: _WhiteFilter | None = None,
) -> _FloatArray:
    """The Allan variance of term ``name`` at unit parameter at ``tau`` [s] (a column of the
    fit): the term's own exact form from :mod:`sensormodel.terms`; band-limited white noise
    sampled at points: :func:`_point_white_avar`."""
    if name == "white" and _sampling(white_filter) == SAMPLING_POINT:
        assert white_filter is not None
        m = np.rint(np.asarray(tau) * rate).astype(np.int64)
        return _point_white_avar(m, rate, float(white_filter[0]), int(white_filter[1]))
    if name == "white" and white_filter is not None:
        return _average_white_avar(np.asarray(tau, dtype=np.float64), *white_filter[:2])
    if name == "white":
        term: Any = _white_term(1.0, white_filter)
    elif name == "flicker":
        term = Flicker(coefficient=1.0)
    elif name == "random_walk":
        term = RandomWalk(density=1.0)
    elif name == "quantization":
        term = Quantization(coefficient=1.0)
    elif name == "ramp":
        term = Ramp(slope=1.0)
    else:
        term = GaussMarkov(sigma=1.0, time_constant=time_constant)
    return np.asarray(term.allan_variance(tau, sample_rate=rate), dtype=np.float64)


def _white_term(density: float, white_filter: _WhiteFilter | None, **meta: Any) -> Any:
    """White noise of density N [u·√s], band-limited by the sensor's output filter (bandwidth
    [Hz], Butterworth order) when one is given."""
    if white_filter is None:
        return White(density=density, **meta)
    return White(
        density=density, bandwidth=float(white_filter[0]), filter_order=int(white_filter[1]), **meta
    )


#: The table of the period means' band-limited shape: x = 2π·bandwidth·τ from
#: :data:`_SHAPE_LOWEST` to :data:`_SHAPE_HIGHEST`, :data:`_SHAPE_PER_DECADE` points per decade.
_SHAPE_LOWEST = 1e-2
_SHAPE_HIGHEST = 1e6
_SHAPE_PER_DECADE = 128


def _average_white_avar(tau: _FloatArray, bandwidth: float, order: int) -> _FloatArray:
    """Allan variance [u²] of period means of unit-density white noise through the
    Butterworth low-pass at ``bandwidth`` [Hz] (the form of :meth:`White.allan_variance`),
    from a table of its shape.

    White noise through B(s/ωc) has AVAR(τ) = ωc·AVAR₁(ωc·τ) (ωc = 2π·bandwidth; the
    normalized filter's AVAR₁, :meth:`White.allan_variance`), so one table of
    h(x) = ln(x·AVAR₁(x)) per order serves every bandwidth (:func:`_average_shape`, exact values
    from :mod:`sensormodel.terms`, cubic spline in ln x: relative error < 1e-8, tested). One
    pole is the first-order Gauss-Markov process (T = 1/ωc, σ² = N²·π·bandwidth) and takes its
    closed form (:class:`GaussMarkov`, IEEE Std 952-1997 Annex C) instead. The
    fit evaluates this basis for many bandwidths (the filter's profile and its refits), where
    the exact form costs two matrix exponentials per τ. Beyond the table, x·AVAR₁(x) − 1
    falls as 1/x (the filter's variance deficit over N²/τ is fixed: AVAR = N²/τ − c/τ² + …),
    and it is continued so; below it, the exact form.
    """
    if int(order) == 1:
        # one pole: the Gauss-Markov process T = 1/ωc, σ² = N²·π·bandwidth, in closed form
        sigma, tc = math.sqrt(math.pi * bandwidth), 0.5 / (math.pi * bandwidth)
        gm = GaussMarkov(sigma=sigma, time_constant=tc)
        return np.asarray(gm.allan_variance(tau), dtype=np.float64)
    wc = 2.0 * math.pi * bandwidth
    x = wc * tau
    spline, h_top = _average_shape(int(order))
    out = np.empty(x.shape)
    low = x < _SHAPE_LOWEST
    high = x > _SHAPE_HIGHEST
    mid = ~(low | high)
    out[mid] = np.exp(spline(np.log(x[mid]))) / x[mid]
    out[high] = (1.0 + (math.exp(h_top) - 1.0) * _SHAPE_HIGHEST / x[high]) / x[high]
    if np.any(low):
        out[low] = _white_term(1.0, (1.0 / (2.0 * math.pi), order)).allan_variance(x[low])
    return wc * out


@lru_cache(maxsize=8)
def _average_shape(order: int) -> tuple[Any, float]:
    """The spline of h(x) = ln(x·AVAR₁(x)) over the table (:func:`_average_white_avar`) and
    its value at the table's end."""
    from scipy.interpolate import CubicSpline

    count = int(round(math.log10(_SHAPE_HIGHEST / _SHAPE_LOWEST) * _SHAPE_PER_DECADE)) + 1
    x = np.geomspace(_SHAPE_LOWEST, _SHAPE_HIGHEST, count)
    unit = _white_term(1.0, (1.0 / (2.0 * math.pi), order))
    h = np.log(x * unit.allan_variance(x))
    return CubicSpline(np.log(x), h), float(h[-1])


#: Autocovariance lags of point-sampled band-limited white noise are summed until they fall
#: below this fraction of the variance (or :data:`_POINT_MAX_LAGS` lags).
_POINT_TAIL = 1e-14
_POINT_MAX_LAGS = 1 << 20


def _point_white_avar(
    m: npt.NDArray[np.int64], rate: float, bandwidth: float, order: int
) -> _FloatArray:
    """Allan variance [u²] at τ = m/rate of **point samples** of unit-density white noise
    (two-sided PSD 1) through the Butterworth low-pass (``bandwidth`` [Hz], ``order``).

    The samples y_k = x(k/rate) form a stationary sequence with autocovariance
    r_k = H·Φ^k·P0·Hᵀ, Φ = exp(F/rate) (the filter's realization, :class:`White`
    ``state_space``; P0 its stationary covariance). The overlapping Allan variance at factor m
    is ½·var(ȳ₂ − ȳ₁) of two adjacent means of m samples:
    AVAR(m) = (1/(2m²))·Σ_{|k|≤2m} W_m(k)·r_|k| with W_m(k) = 2m − 3|k| for |k| ≤ m and
    |k| − 2m for m < |k| ≤ 2m (the autocorrelation of the ±1 weights; e.g. D. W. Allan,
    "Statistics of atomic frequency standards", Proc. IEEE 54(2), 1966, for the variance of
    a difference of means of a stationary sequence). Unlike the period means of
    :meth:`White.allan_variance`, point samples alias the filter's power above rate/2 into the
    band: their long-τ Allan variance is (r_0 + 2Σ r_k)/m = N²·A/τ with the aliasing factor
    A = Σ_j |B(j·rate)|² ≥ 1 (1-pole at rate/4: A = 1.198; :func:`_aliasing_factor`).

    The column is divided by A, so that its coefficient is the density of the **delivered**
    samples at low frequency, N_out = N·√A (their Allan deviation at τ ≫ 1/bandwidth is
    N_out/√τ, the line a datasheet's density is read from): the white estimate is then the
    same whichever sampling is assumed, which only shapes the curve at τ ≲ 1/bandwidth. The
    filter's input density N = N_out/√A is reported beside it (``FittedTerm.details``).
    """
    r0, s0, s1 = _point_lag_sums(rate, bandwidth, order)
    alias = (r0 + 2.0 * float(s0[-1])) / rate
    out = np.empty(m.size)
    kmax = s0.size - 1  # s0[k] = Σ_{j=1..k} r_j, zero-padded beyond the tail
    for i, mm in enumerate(np.asarray(m).ravel()):
        a, b = min(int(mm), kmax), min(2 * int(mm), kmax)
        inner = 2 * mm * s0[a] - 3.0 * s1[a]
        outer = (s1[b] - s1[a]) - 2 * mm * (s0[b] - s0[a])
        out[i] = (2 * mm * r0 + 2.0 * (inner + outer)) / (2.0 * mm * mm)
    return out / alias


def _aliasing_factor(rate: float, bandwidth: float, order: int) -> float:
    """A = Σ_j |B(j·rate)|²: the long-τ Allan variance of point samples of white noise through
    the filter over that of the filter's input, N²/τ (:func:`_point_white_avar`)."""
    r0, s0, _s1 = _point_lag_sums(rate, bandwidth, order)
    return (r0 + 2.0 * float(s0[-1])) / rate


@lru_cache(maxsize=64)
def _point_lag_sums(rate: float, bandwidth: float, order: int) -> tuple[float, Any, Any]:
    """r_0 and the prefix sums Σ_{j≤k} r_j, Σ_{j≤k} j·r_j (k = 0 … K) of the point samples'
    autocovariance (:func:`_point_white_avar`), K where the state's
    propagated covariance falls below :data:`_POINT_TAIL` of its start."""
    from scipy.linalg import expm

    ss = _white_term(1.0, (bandwidth, order)).state_space(sample_rate=rate)
    phi = expm(np.asarray(ss.F) / rate)
    h = np.asarray(ss.H)[0]
    v = np.asarray(ss.P0) @ h
    r0 = float(h @ v)
    size0 = float(np.max(np.abs(v)))
    lags = [0.0]
    while len(lags) < _POINT_MAX_LAGS:
        v = phi @ v
        lags.append(float(h @ v))
        if float(np.max(np.abs(v))) < _POINT_TAIL * size0:
            break
    r = np.asarray(lags)
    k = np.arange(r.size, dtype=np.float64)
    s0, s1 = np.cumsum(r), np.cumsum(k * r)
    s0.setflags(write=False)
    s1.setflags(write=False)
    return r0, s0, s1


# ---------------------------------------------------------------------------------------------
# The fit engine
# ---------------------------------------------------------------------------------------------


@dataclass
class _Design:
    """The fixed (linear) part of the fit: basis matrix, weights, and the GM grid."""

    names: tuple[str, ...]
    tau: _FloatArray
    rate: float
    edf: _FloatArray
    phi: _FloatArray  # (k, p) with the GM column (if any) filled per time constant
    gm_index: int | None
    gm_grid: _FloatArray | None
    gm_columns: _FloatArray | None  # (n_grid, k)
    white_filter: _WhiteFilter | None = None  # the white term's band limit
    # a fitted band limit: the bandwidth's search range [Hz], re-profiled by every fit
    white_search: tuple[float, float] | None = None

    def with_gm(self, time_constant: float) -> _FloatArray:
        phi = self.phi.copy()
        if self.gm_index is not None:
            phi[:, self.gm_index] = _basis("gauss_markov", self.tau, self.rate, time_constant)
        return phi


def _design(
    names: tuple[str, ...], c: _Curve, white_filter: _WhiteFilter | None = None
) -> _Design:
    phi = np.zeros((c.tau.size, len(names)))
    gm_index = None
    for j, name in enumerate(names):
        if name == "gauss_markov":
            gm_index = j
        else:
            phi[:, j] = _basis(name, c.tau, c.rate, white_filter=white_filter)
    grid = cols = None
    if gm_index is not None:
        grid = _time_constant_grid(c.tau, c.edf)
        cols = np.array([_basis("gauss_markov", c.tau, c.rate, t) for t in grid])
    return _Design(names, c.tau, c.rate, c.edf, phi, gm_index, grid, cols, white_filter)


def _resolvable_time_constant(tau: npt.ArrayLike, edf: npt.ArrayLike) -> float:
    """The longest Gauss-Markov time constant an Allan curve can resolve [s].

    A first-order Gauss-Markov term's Allan deviation rises as a random walk's (σ²τ/(3T)) for
    τ ≪ T and peaks at τ_peak = 1.8926·T (IEEE Std 952-1997 Annex C closed form;
    :func:`sensormodel.terms.gauss_markov_peak`). Below the peak only σ²/T is determined: a
    longer T with a larger σ draws the same rising curve, so T and σ are told apart only by
    the bend into the peak. The rule: T is resolvable up to the T whose peak lies at the
    longest τ measured with at least :data:`_GM_MIN_EDF` = 4 equivalent degrees of freedom
    (the curve's own EDF, NIST SP 1065 section 5.3; at ν = 4 the 68 % chi-square interval of
    the deviation is already −22 %/+68 %, and beyond it a point cannot place a peak).
    That τ is found on the log-log line between the two curve points whose EDF straddle 4,
    so it follows the EDF rather than the spacing of the τ grid; for a long record of a
    random-walk-like term it is about a quarter of the record length, and the bound about an
    eighth of it.

    Parameters
    ----------
    tau : array_like
        Averaging times of the curve [s], increasing.
    edf : array_like
        Their equivalent degrees of freedom.

    Returns
    -------
    float
        τ_res / 1.8926 [s], τ_res the longest τ with EDF ≥ 4 (the shortest τ of the curve
        when no point has that many, the longest when every point has).
    """
    tau = np.asarray(tau, dtype=np.float64)
    edf = np.asarray(edf, dtype=np.float64)
    ok = np.flatnonzero(edf >= _GM_MIN_EDF)
    if ok.size == 0:
        tau_res = float(tau[0])
    elif ok[-1] == tau.size - 1:
        tau_res = float(tau[-1])
    else:
        j = int(ok[-1])
        # log-log interpolation to where the EDF falls to the threshold
        frac = math.log(edf[j] / _GM_MIN_EDF) / math.log(edf[j] / edf[j + 1])
        tau_res = float(tau[j] * (tau[j + 1] / tau[j]) ** min(max(frac, 0.0), 1.0))
    return tau_res / _GM_PEAK_RATIO


def _time_constant_grid(tau: _FloatArray, edf: _FloatArray) -> _FloatArray:
    """The time constants [s] of the profile: :data:`_GM_PER_DECADE` per decade from a quarter
    of the shortest τ (a term that fast is white noise to the curve) to
    :func:`_resolvable_time_constant`, both ends included."""
    lo = _GM_LOWEST * float(tau[0])
    hi = _resolvable_time_constant(tau, edf)
    count = max(3, int(math.ceil(math.log10(hi / lo) * _GM_PER_DECADE)) + 1)
    return np.geomspace(lo, hi, count)


def _time_constant_edge(
    avar: _FloatArray, d: _Design, mask: npt.NDArray[np.bool_], time_constant: float
) -> str | None:
    """Whether a profiled time constant [s] (of the fit with the terms where ``mask`` is True)
    sits at an edge of its search range: ``"upper"`` where it lies within the last step of the
    grid and the profile is lower at the last grid point than at the one before (its least χ²
    is at the end of what the record resolves, :func:`_resolvable_time_constant`), ``"lower"``
    likewise at the first step, else None."""
    grid = d.gm_grid
    if grid is None or d.gm_index is None or not mask[d.gm_index]:
        return None
    idx = np.flatnonzero(mask)

    def misfit(t: float) -> float:
        return _irls(avar, d.with_gm(t)[:, idx], d.edf)[1]

    if time_constant > grid[-2] and misfit(grid[-1]) <= misfit(grid[-2]):
        return "upper"
    if time_constant < grid[1] and misfit(grid[0]) <= misfit(grid[1]):
        return "lower"
    return None


def _irls(
    avar: _FloatArray,
    phi: _FloatArray,
    edf: _FloatArray,
    start: _FloatArray | None = None,
    offset: _FloatArray | None = None,
) -> tuple[_FloatArray, float]:
    """Non-negative least squares with weights from the fitted AVAR, iterated.

    The first weights come from ``start`` (an AVAR curve, e.g. a previous fit) or else from the
    measured values; every later one from the current fit, until the coefficients change by
    less than a relative 1e-5. ``offset`` is a fixed part of the model (a term held at a given
    value): the columns fit ``avar − offset``, the weights and χ² use the whole model. Returns
    the coefficients (variance scale, c_k = p_k²) and χ² = Σ (â − m)² edf/(2 m²) with m the
    fitted AVAR.
    """
    from scipy.optimize import nnls

    fixed = np.zeros(avar.shape) if offset is None else offset
    colscale = np.sqrt(np.sum(phi * phi, axis=0))
    colscale[colscale == 0] = 1.0
    ref = avar if start is None else start
    c = np.zeros(phi.shape[1])
    for _ in range(_IRLS_MAX):
        s = ref * np.sqrt(2.0 / edf)
        a = phi / s[:, None] / colscale
        sol, _res = nnls(a, (avar - fixed) / s, maxiter=50 * phi.shape[1])
        c_new = sol / colscale
        model = phi @ c_new + fixed
        floor = 1e-9 * float(np.max(model)) if np.max(model) > 0 else 0.0
        if floor == 0.0:
            c = c_new
            break
        ref = np.maximum(model, floor)
        done = np.all(np.abs(c_new - c) <= _IRLS_TOL * np.maximum(np.abs(c_new), 1e-300))
        c = c_new
        if done:
            break
    return c, _chi2(avar, phi @ c + fixed, edf)


def _chi2(avar: _FloatArray, model: _FloatArray, edf: _FloatArray) -> float:
    """Σ (â − m)² edf/(2 m²): the misfit of a model AVAR m with var(â) = 2 m²/edf."""
    model = np.maximum(model, 1e-300)
    return float(np.sum((avar - model) ** 2 * edf / (2.0 * model**2)))


def _fit_one(
    avar: _FloatArray,
    d: _Design,
    *,
    start: _FloatArray | None = None,
    offset: _FloatArray | None = None,
) -> tuple[_FloatArray, float, float | None]:
    """Fit one Allan-variance vector: coefficients, χ², GM time constant (or None).

    ``start`` only speeds up the iteration (first weights); the result is its fixed point.
    ``offset``: a fixed part of the model (:func:`_irls`).
    """
    if d.gm_index is None:
        c, chi2 = _irls(avar, d.phi, d.edf, start, offset)
        return c, chi2, None
    assert d.gm_grid is not None and d.gm_columns is not None
    phi = d.phi.copy()
    gm = d.gm_index

    def fit_grid(k: int) -> tuple[_FloatArray, float]:
        phi[:, gm] = d.gm_columns[k]  # type: ignore[index]
        return _irls(avar, phi, d.edf, start, offset)

    def fit_at(t: float) -> tuple[_FloatArray, float]:
        return _irls(avar, d.with_gm(t), d.edf, start, offset)

    t_best, c, chi2 = _profile_time_constant(d.gm_grid, fit_grid, fit_at)
    return c, chi2, t_best


def _profile_time_constant(
    grid: _FloatArray,
    fit_grid: Callable[[int], tuple[_FloatArray, float]],
    fit_at: Callable[[float], tuple[_FloatArray, float]],
) -> tuple[float, _FloatArray, float]:
    """The Gauss-Markov time constant of least χ²: the best point of ``grid`` [s], refined in
    log T between its neighbours (bounded golden-section search on a unimodal bracket) and kept
    only if no worse. ``fit_grid(k)`` and ``fit_at(T)`` return (coefficients, χ²) at grid
    point k and at any T. Returns (T, coefficients, χ²). The grid ends at what the record
    resolves (:func:`_time_constant_grid`), so T never leaves that range; whether it sits at an
    end is :func:`_time_constant_edge`'s question."""
    from scipy.optimize import minimize_scalar

    results = [fit_grid(k) for k in range(grid.size)]
    i = int(np.argmin([r[1] for r in results]))
    t_best, best = float(grid[i]), results[i]
    lo = math.log(grid[max(i - 1, 0)])
    hi = math.log(grid[min(i + 1, grid.size - 1)])
    if hi > lo:
        res = minimize_scalar(
            lambda logt: fit_at(math.exp(logt))[1],
            bounds=(lo, hi),
            method="bounded",
            options={"xatol": 1e-3},
        )
        t = math.exp(float(res.x))
        refined = fit_at(t)
        if refined[1] <= best[1]:
            t_best, best = t, refined
    return t_best, best[0], best[1]


def _null_gauss_markov(
    c: _Curve, d: _Design, others: npt.NDArray[np.bool_], held: float, start: _FloatArray
) -> tuple[_FloatArray, float]:
    """The fit with the Gauss-Markov variance held at ``held`` (σ²): its time constant profiled
    over the design's grid and refined (:func:`_profile_time_constant`), the ``others``
    refitted beside it. Returns coefficients and T [s]."""
    assert d.gm_grid is not None and d.gm_columns is not None
    idx = np.flatnonzero(others)
    phi_o = d.phi[:, idx]

    def fit_with(column: _FloatArray) -> tuple[_FloatArray, float]:
        offset = held * column
        if idx.size == 0:
            return np.zeros(0), _chi2(c.avar, offset, c.edf)
        return _irls(c.avar, phi_o, d.edf, start, offset)

    t_best, coef_o, _misfit = _profile_time_constant(
        d.gm_grid,
        lambda k: fit_with(d.gm_columns[k]),  # type: ignore[index]
        lambda t: fit_with(_basis("gauss_markov", c.tau, c.rate, t)),
    )
    out = np.zeros(len(d.names))
    out[idx] = coef_o
    return out, t_best


def _wls_matrix(phi: _FloatArray, model: _FloatArray, edf: _FloatArray) -> _FloatArray:
    """A with ĉ_u = A·â: unconstrained weighted least squares with var = 2 model²/edf."""
    w = edf / (2.0 * model**2)
    colscale = np.sqrt(np.sum(phi * phi, axis=0))
    colscale[colscale == 0] = 1.0
    ps = phi / colscale
    normal = ps.T @ (ps * w[:, None])
    a = np.linalg.pinv(normal) @ (ps.T * w[None, :])
    return a / colscale[:, None]


@dataclass(frozen=True)
class _RefitState:
    """The parts of a fit that :func:`limit_test` repeats on new records."""

    curve: _Curve
    design: _Design
    in_fit: npt.NDArray[np.bool_]
    coef: _FloatArray
    time_constant: float | None


def _params(names: Sequence[str], coef: _FloatArray) -> dict[str, float]:
    """SI parameters p_k = √c_k of a coefficient vector."""
    return {nm: math.sqrt(max(float(v), 0.0)) for nm, v in zip(names, coef, strict=True)}


def _phi(d: _Design, time_constant: float | None) -> _FloatArray:
    """The design matrix with the Gauss-Markov column (if any) at ``time_constant`` [s]."""
    return d.with_gm(time_constant) if (d.gm_index is not None and time_constant) else d.phi


def _refilter(
    avar: _FloatArray,
    d: _Design,
    mask: npt.NDArray[np.bool_],
    *,
    start: _FloatArray | None,
    offset: _FloatArray | None,
) -> _Design:
    """The design with the white term's bandwidth of least χ² within ``d.white_search`` (a
    bounded search in log bandwidth; the order and sampling kept)."""
    from scipy.optimize import minimize_scalar

    assert d.white_search is not None and d.white_filter is not None
    j = d.names.index("white")
    fixed = replace(d, white_search=None)

    def with_bw(log_bw: float) -> _Design:
        wf = (math.exp(log_bw), *d.white_filter[1:])
        phi = d.phi.copy()
        phi[:, j] = _basis("white", d.tau, d.rate, white_filter=wf)
        return replace(fixed, phi=phi, white_filter=wf)

    def misfit(log_bw: float) -> float:
        return _fit_fixed(avar, with_bw(log_bw), mask, start=start, offset=offset)[1]

    lo, hi = (math.log(b) for b in d.white_search)
    res = minimize_scalar(misfit, bounds=(lo, hi), method="bounded", options={"xatol": 1e-2})
    return with_bw(float(res.x))


def _fit_subset(
    avar: _FloatArray,
    d: _Design,
    mask: npt.NDArray[np.bool_],
    *,
    start: _FloatArray | None,
    offset: _FloatArray | None = None,
) -> tuple[_FloatArray, float | None]:
    """Fit with the terms where ``mask`` is True; the others get 0 (plus ``offset``, a fixed
    part of the model). A fitted output filter (``d.white_search``) is profiled again
    (:func:`_refilter`), so that the estimate, its bootstrap refits and a test at a limit carry
    the filter's uncertainty."""
    if d.white_search is not None and "white" in d.names and mask[d.names.index("white")]:
        d = _refilter(avar, d, mask, start=start, offset=offset)
    out, _chi2_v, t = _fit_fixed(avar, d, mask, start=start, offset=offset)
    return out, t


def _fit_fixed(
    avar: _FloatArray,
    d: _Design,
    mask: npt.NDArray[np.bool_],
    *,
    start: _FloatArray | None,
    offset: _FloatArray | None = None,
) -> tuple[_FloatArray, float, float | None]:
    """:func:`_fit_subset` with the design's filter as it is: coefficients, χ², GM T."""
    idx = np.flatnonzero(mask)
    gm = d.gm_index if (d.gm_index is not None and mask[d.gm_index]) else None
    sub = _Design(
        names=tuple(d.names[i] for i in idx),
        tau=d.tau,
        rate=d.rate,
        edf=d.edf,
        phi=d.phi[:, idx],
        gm_index=None if gm is None else int(np.flatnonzero(idx == gm)[0]),
        gm_grid=d.gm_grid if gm is not None else None,
        gm_columns=d.gm_columns if gm is not None else None,
        white_filter=d.white_filter,
    )
    c_sub, chi2_v, t = _fit_one(avar, sub, start=start, offset=offset)
    out = np.zeros(len(d.names))
    out[idx] = c_sub
    return out, chi2_v, t


# ---------------------------------------------------------------------------------------------
# The τ range of the fit: where the record departs from the model
# ---------------------------------------------------------------------------------------------

#: The model's stated relative precision ε in Allan variance: no point is trusted closer than
#: this, whatever its EDF (a model-error floor beside the statistical interval).
MODEL_PRECISION = 0.01
#: Family-wise probability that an ideal record has a point flagged (Bonferroni over the τ).
_RANGE_ALPHA = 0.01
#: The shortest τ of the fit is at most this fraction of the record length.
_RANGE_MAX_FRACTION = 1e-3

#: Reason codes of the τ range (``Identification.fit_range_reason``).
RANGE_FULL = "fit_range_full"
RANGE_SHORT_TAU_DEPARTS = "fit_range_short_tau_departs_model"
RANGE_MODEL_DEPARTS = "fit_range_model_departs"


@dataclass(frozen=True)
class _FitRange:
    """The τ range of the fit: index of its first τ, reason code and the largest relative
    departure |â/m − 1| of an excluded τ from the fit over the range (0 if none)."""

    start: int
    reason: str
    departure: float
    chi2: float = 0.0  # of the fit over the range (the whole curve for RANGE_MODEL_DEPARTS)
    first: float = 0.0  # â/m − 1 at the shortest τ of the curve (m the range's fit)


def _departs(avar: _FloatArray, model: _FloatArray, edf: _FloatArray, alpha: float) -> Any:
    """True where â lies outside its two-sided 1 − α chi-square interval about the model m,
    widened by the model precision: m·χ²_ν(α/2)/ν·(1 − ε) ≤ â ≤ m·χ²_ν(1 − α/2)/ν·(1 + ε)."""
    from scipy.stats import chi2

    low = model * chi2.ppf(0.5 * alpha, edf) / edf * (1.0 - MODEL_PRECISION)
    high = model * chi2.ppf(1.0 - 0.5 * alpha, edf) / edf * (1.0 + MODEL_PRECISION)
    return (avar < low) | (avar > high)


def _fit_range(
    c: _Curve, names: tuple[str, ...], white_filter: _WhiteFilter | None
) -> _FitRange:
    """The shortest τ from which the requested terms describe the record (a goodness-of-fit
    test of the residuals by τ, shortest τ left out first).

    The weighted fit gives each τ the weight edf/(2·AVAR²) (the Allan variance estimate is
    χ²-distributed with the equivalent degrees of freedom: D. A. Howe, D. W. Allan, J. A.
    Barnes, "Properties of signal sources and measurement methods", Proc. 35th Frequency
    Control Symposium, 1981; C. A. Greenhall, W. J. Riley, PTTI 2003), so the shortest τ, with
    EDF of order the sample count, dominate it. There a real record departs from the ideal
    terms (an undeclared output filter, coarse integer coding, a narrow-band line), and a fit
    that follows them bends the flicker and white terms (reported on industrial MEMS records:
    the floor 3–4× too high, white noise 13–40 % low). Each τ's estimate is therefore tested
    against the fitted model: outside its chi-square interval (NIST SP 1065 eq. 45) at a
    family-wise level α = 1 % (Bonferroni over the τ of the fit), widened by the model's
    stated precision ε = :data:`MODEL_PRECISION` (the relative error of the term forms no
    record is expected to beat; common practice of a systematic-error floor in a χ² fit, e.g.
    P. R. Bevington, D. K. Robinson, *Data Reduction and Error Analysis*, 3rd ed., §11). While
    some τ of the fit departs, the shortest τ is left out, down to a shortest τ of at most
    1/1000 of the record and at least p + 3 points for p terms. If no such range passes, the
    whole curve is used (reason :data:`RANGE_MODEL_DEPARTS`: the terms do not describe the
    record anywhere; leaving out short τ would not help).
    """
    p = len(names)
    duration = c.n / c.rate
    shortest = int(np.searchsorted(c.tau, duration * _RANGE_MAX_FRACTION, "right")) - 1
    last = min(c.tau.size - (p + 3), shortest)
    chi2_whole, first_whole = math.inf, 0.0
    for s in range(max(last, 0) + 1):
        sub = _restrict(c, s)
        d = _design(names, sub, white_filter)
        coef, chi2_s, t_gm = _fit_one(sub.avar, d)
        model = _phi(d, t_gm) @ coef
        if s == 0:
            chi2_whole, first_whole = chi2_s, float(c.avar[0] / max(model[0], 1e-300) - 1.0)
        if not np.any(_departs(sub.avar, model, sub.edf, _RANGE_ALPHA / sub.tau.size)):
            if s == 0:
                return _FitRange(0, RANGE_FULL, 0.0, chi2_s)
            full_model = _phi(_design(names, c, white_filter), t_gm) @ coef
            rel = c.avar[:s] / np.maximum(full_model[:s], 1e-300) - 1.0
            return _FitRange(
                s, RANGE_SHORT_TAU_DEPARTS, float(np.max(np.abs(rel))), chi2_s, float(rel[0])
            )
    return _FitRange(0, RANGE_MODEL_DEPARTS, 0.0, chi2_whole, first_whole)


def _restrict(c: _Curve, start: int) -> _Curve:
    """The curve from its ``start``-th τ on."""
    if start == 0:
        return c
    return replace(
        c,
        tau=c.tau[start:],
        avar=c.avar[start:],
        adev=c.adev[start:],
        edf=c.edf[start:],
        m=c.m[start:],
    )


# ---------------------------------------------------------------------------------------------
# The output filter and the sampling assumption
# ---------------------------------------------------------------------------------------------

#: Orders of an undeclared output filter that are fitted (Butterworth).
FITTED_ORDERS = (1, 2)
#: The fitted corner frequency's search: from rate/100 to twice the rate, points per decade.
_FILTER_LOWEST = 0.01
_FILTER_HIGHEST = 2.0
_FILTER_PER_DECADE = 8
#: Level of the likelihood-ratio test of one sampling assumption against the other (one
#: degree of freedom: χ²₁ quantile 6.63 at 1 %).
_SAMPLING_LEVEL = 0.01

#: Origins of the white term's band limit and of its sampling assumption.
FILTER_GIVEN = "given"
FILTER_FITTED = "fitted"
SAMPLING_DETECTED = "detected"
SAMPLING_DEFAULT = "default"


@dataclass(frozen=True)
class _FilterChoice:
    """The white term's band limit the fit uses and why.

    ``white_filter``: (bandwidth [Hz], order, sampling) or None; ``origin``
    :data:`FILTER_GIVEN`, :data:`FILTER_FITTED` or None; ``sampling_origin``
    :data:`SAMPLING_DETECTED` or :data:`SAMPLING_DEFAULT`; ``fit_range`` the τ range with that
    filter; ``details``: numbers behind the choice (the range's first τ index without a
    filter ``start_without``, the χ² gain of the chosen sampling over the other
    ``sampling_chi2_gain``, …)."""

    white_filter: _WhiteFilter | None
    origin: str | None
    sampling_origin: str
    fit_range: _FitRange
    details: dict[str, float]


def _choose_white_filter(
    c: _Curve, names: tuple[str, ...], given: tuple[float, int] | None
) -> _FilterChoice:
    """The output filter and the sampling assumption the white term is fitted with.

    A band-limited white spectrum lowers the Allan variance at τ ≲ 1/bandwidth below N²/τ,
    and how much depends on how a sample is taken: the mean over its period, or the filtered
    output at the sample instant (which also aliases the power above rate/2 into the band,
    :func:`_point_white_avar`). Each assumption draws its own short-τ curve for the same filter,
    so it is decided from that curve:

    * a **given** filter (datasheet or ``--bandwidth``): both samplings are fitted; the one
      whose fit describes more of the short-τ curve (the range test :func:`_fit_range` starts
      at a shorter τ), or on the same range has the smaller χ² by more than the χ²₁ quantile at
      1 % (a likelihood-ratio test of two non-nested models of equal size, each tried as the
      null: common practice), is **detected**; otherwise the **default**, period means (the
      convention of :mod:`sensormodel.simulate`).
    * **no filter given**: when the unfiltered terms describe the whole curve, or the shortest
      τ lies above their fit (a low-pass can only lower it: a spectral line or coarse counts
      raise it), none. Otherwise
      the filter is a nuisance parameter: its corner frequency (profiled on a grid of
      :data:`_FILTER_PER_DECADE` per decade from rate/100 to 2·rate, refined as the
      Gauss-Markov time constant is, :func:`_profile_time_constant`) for each order in
      :data:`FITTED_ORDERS` and each sampling, by least χ² over the curve; of these, the one
      whose range test starts at the shortest τ (then the least χ²). It is used (**fitted**)
      only where it describes τ the unfiltered terms could not (its range starts at a shorter
      τ): the short-τ curve departs from white and the filter accounts for it. Else no filter,
      and the range starts above the filter's influence (:func:`_fit_range`).

    Why a fitted filter rather than only a range that starts above it: the Allan variance of
    filtered white noise is fixed by the filter's response, AVAR(τ) = 4∫ S(f)·sin⁴(πfτ)/(πfτ)²
    df (IEEE Std 952-1997 Annex C), so a one- or two-pole low-pass and its sampling are
    determined by the shortest τ, where the EDF are largest; modelling them keeps those τ in
    the fit instead of discarding them, and the filter's corner and order are reported. The
    corner is a nonlinear nuisance parameter, profiled (least χ² over it for each set of
    coefficients) as the Gauss-Markov time constant is (profile likelihood: Y. Pawitan, *In
    All Likelihood*, Oxford University Press, 2001). Where no filter of these orders describes
    the short-τ curve (a filter of higher order, a narrow-band line), the range test leaves
    those τ out as before.
    """
    if "white" not in names:
        wf = None if given is None else (given[0], given[1], SAMPLING_AVERAGE)
        origin = None if given is None else FILTER_GIVEN
        return _FilterChoice(wf, origin, SAMPLING_DEFAULT, _fit_range(c, names, wf), {})
    if given is not None:
        cands = [(float(given[0]), int(given[1]), smp) for smp in SAMPLINGS]
        return _pick_sampling(c, names, cands, FILTER_GIVEN, {})
    base = _fit_range(c, names, None)
    if base.reason == RANGE_FULL or base.first >= 0.0:
        # described by white noise, or departing upward (a line, coarse counts): no low-pass
        return _FilterChoice(None, None, SAMPLING_DEFAULT, base, {})
    cands = [
        _profile_bandwidth(c, names, order, smp) for order in FITTED_ORDERS for smp in SAMPLINGS
    ]
    choice = _pick_sampling(c, names, cands, FILTER_FITTED, {"start_without": base.start})
    if _range_key(choice.fit_range)[0] >= _range_key(base)[0]:
        return _FilterChoice(None, None, SAMPLING_DEFAULT, base, choice.details)
    return choice


def _range_key(r: _FitRange) -> tuple[float, float]:
    """Ranks fit ranges: a range test that starts at a shorter τ first, then the least χ²; the
    whole curve because no range passes (:data:`RANGE_MODEL_DEPARTS`) last."""
    start = math.inf if r.reason == RANGE_MODEL_DEPARTS else float(r.start)
    return start, r.chi2


def _pick_sampling(
    c: _Curve,
    names: tuple[str, ...],
    cands: Sequence[_WhiteFilter],
    origin: str,
    details: dict[str, float],
) -> _FilterChoice:
    """The best of the candidate filters by :func:`_range_key`, and whether its sampling is
    told from the other's (:func:`_choose_white_filter`)."""
    from scipy.stats import chi2 as chi2_law

    ranges = [_fit_range(c, names, wf) for wf in cands]
    best = min(range(len(cands)), key=lambda i: _range_key(ranges[i]))
    smp = _sampling(cands[best])
    others = [i for i in range(len(cands)) if _sampling(cands[i]) != smp]
    other = min(others, key=lambda i: _range_key(ranges[i]))
    b_key, o_key = _range_key(ranges[best]), _range_key(ranges[other])
    gain = o_key[1] - b_key[1] if o_key[0] == b_key[0] else math.inf
    detected = o_key[0] > b_key[0] or gain > chi2_law.ppf(1.0 - _SAMPLING_LEVEL, 1)
    details = {**details, "sampling_chi2_gain": float(gain)}
    if detected:
        return _FilterChoice(cands[best], origin, SAMPLING_DETECTED, ranges[best], details)
    # not told apart: the default sampling, with its own best filter
    avg = [i for i in range(len(cands)) if _sampling(cands[i]) == SAMPLING_AVERAGE]
    pick = min(avg, key=lambda i: _range_key(ranges[i]))
    return _FilterChoice(cands[pick], origin, SAMPLING_DEFAULT, ranges[pick], details)


def _profile_bandwidth(
    c: _Curve, names: tuple[str, ...], order: int, sampling: str
) -> _WhiteFilter:
    """The corner frequency [Hz] of least χ² over the whole curve for a Butterworth filter of
    ``order`` and ``sampling`` (every requested term fitted beside it)."""
    grid = np.geomspace(
        _FILTER_LOWEST * c.rate,
        _FILTER_HIGHEST * c.rate,
        int(math.ceil(math.log10(_FILTER_HIGHEST / _FILTER_LOWEST) * _FILTER_PER_DECADE)) + 1,
    )

    def fit_at(bw: float) -> tuple[_FloatArray, float]:
        coef, chi2_v, _t = _fit_one(c.avar, _design(names, c, (bw, order, sampling)))
        return coef, chi2_v

    bw, _coef, _chi2_v = _profile_time_constant(grid, lambda k: fit_at(float(grid[k])), fit_at)
    return (float(bw), order, sampling)
