"""The fit engine: the bases (each term's exact Allan variance at unit parameter), the design
matrix, non-negative iteratively reweighted least squares, the Gauss-Markov time-constant
profile, and the fit on a subset of the terms.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
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


def _basis(
    name: str,
    tau: _FloatArray,
    rate: float,
    time_constant: float = 1.0,
    white_filter: tuple[float, int] | None = None,
) -> _FloatArray:
    """The Allan variance of term ``name`` at unit parameter at ``tau`` [s] (a column of the
    fit): the term's own exact form from :mod:`sensormodel.terms`."""
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


def _white_term(density: float, white_filter: tuple[float, int] | None, **meta: Any) -> Any:
    """White noise of density N [u·√s], band-limited by the sensor's output filter (bandwidth
    [Hz], Butterworth order) when one is given."""
    if white_filter is None:
        return White(density=density, **meta)
    return White(density=density, bandwidth=white_filter[0], filter_order=white_filter[1], **meta)


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
    white_filter: tuple[float, int] | None = None  # the white term's band limit

    def with_gm(self, time_constant: float) -> _FloatArray:
        phi = self.phi.copy()
        if self.gm_index is not None:
            phi[:, self.gm_index] = _basis("gauss_markov", self.tau, self.rate, time_constant)
        return phi


def _design(
    names: tuple[str, ...], c: _Curve, white_filter: tuple[float, int] | None = None
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


def _fit_subset(
    avar: _FloatArray,
    d: _Design,
    mask: npt.NDArray[np.bool_],
    *,
    start: _FloatArray | None,
    offset: _FloatArray | None = None,
) -> tuple[_FloatArray, float | None]:
    """Fit with the terms where ``mask`` is True; the others get 0 (plus ``offset``, a fixed
    part of the model)."""
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
    c_sub, _chi2, t = _fit_one(avar, sub, start=start, offset=offset)
    out = np.zeros(len(d.names))
    out[idx] = c_sub
    return out, t


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


def _departs(avar: _FloatArray, model: _FloatArray, edf: _FloatArray, alpha: float) -> Any:
    """True where â lies outside its two-sided 1 − α chi-square interval about the model m,
    widened by the model precision: m·χ²_ν(α/2)/ν·(1 − ε) ≤ â ≤ m·χ²_ν(1 − α/2)/ν·(1 + ε)."""
    from scipy.stats import chi2

    low = model * chi2.ppf(0.5 * alpha, edf) / edf * (1.0 - MODEL_PRECISION)
    high = model * chi2.ppf(1.0 - 0.5 * alpha, edf) / edf * (1.0 + MODEL_PRECISION)
    return (avar < low) | (avar > high)


def _fit_range(
    c: _Curve, names: tuple[str, ...], white_filter: tuple[float, int] | None
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
    for s in range(max(last, 0) + 1):
        sub = _restrict(c, s)
        d = _design(names, sub, white_filter)
        coef, _chi2_s, t_gm = _fit_one(sub.avar, d)
        model = _phi(d, t_gm) @ coef
        if not np.any(_departs(sub.avar, model, sub.edf, _RANGE_ALPHA / sub.tau.size)):
            if s == 0:
                return _FitRange(0, RANGE_FULL, 0.0)
            full_model = _phi(_design(names, c, white_filter), t_gm) @ coef
            rel = np.abs(c.avar[:s] / np.maximum(full_model[:s], 1e-300) - 1.0)
            return _FitRange(s, RANGE_SHORT_TAU_DEPARTS, float(np.max(rel)))
    return _FitRange(0, RANGE_MODEL_DEPARTS, 0.0)


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
