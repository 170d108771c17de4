"""The fit: an Allan curve to noise terms with intervals, in named steps (package notes).

1. :func:`_fit_all_terms`: every requested term (non-negative IRLS, :mod:`._design`);
2. :func:`_select_terms`: a bootstrap from that fit; which terms the data support
   (:class:`._select._Gls`) and the unconstrained estimate's spread;
3. :func:`_estimate`: the fit with the supported common and rare terms;
4. :func:`_refits`: a bootstrap from the estimate, the estimate repeated on each record;
5. :func:`_fitted_terms`: each term's interval (:func:`_interval`), slope reading and range.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from .. import validate
from ..errors import AnalysisError
from ._bootstrap import ProgressCallback, _bootstrap, _Progress
from ._checks import (
    _check_count_step,
    _check_curve,
    _check_n_boot,
    _check_terms,
    _check_white_filter,
    _Curve,
)
from ._design import (
    _GM_PEAK_RATIO,
    FILTER_FITTED,
    SAMPLING_POINT,
    _aliasing_factor,
    _chi2,
    _choose_white_filter,
    _Design,
    _design,
    _fit_one,
    _fit_subset,
    _params,
    _phi,
    _RefitState,
    _restrict,
    _sampling,
    _time_constant_edge,
    _wls_matrix,
)
from ._names import DEFAULT_CONFIDENCE, DEFAULT_TERMS, PARAMETERS
from ._readings import (
    _count_step_reasons,
    _filter_reasons,
    _notes,
    _reading_interval,
    _reading_points,
    slope_readings,
)
from ._results import FittedTerm, Identification
from ._select import _RARE_LEVEL_DIVISOR, _TESTED_FIRST, _Gls, _quantile, _z

__all__ = ["fit"]

_FloatArray = npt.NDArray[np.float64]


def fit(
    curve: Any,
    *,
    terms: Sequence[str] | str = DEFAULT_TERMS,
    confidence: float = DEFAULT_CONFIDENCE,
    seed: int | None = None,
    n_boot: int | None = None,
    progress: ProgressCallback | None = None,
    bandwidth: float | None = None,
    filter_order: int | None = None,
    count_step: float | None = None,
    increments: bool = False,
) -> Identification:
    """Identify noise terms from an overlapping Allan-deviation curve.

    Non-negative weighted least squares on the Allan variance with the exact term forms as
    bases; intervals from a parametric bootstrap (package notes).

    Parameters
    ----------
    curve : AllanCurve
        From :func:`sensormodel.allan.overlapping`: τ [s] (whole numbers of sample periods),
        Allan deviation [u], ``edf``, ``sample_rate`` [Hz], ``n_samples`` (or ``n_clusters``),
        ``channel``, ``unit``.
    terms : sequence of str or str
        Term types to fit (a comma-separated string is accepted): any of ``quantization``,
        ``white``, ``flicker``, ``gauss_markov``, ``random_walk``, ``ramp``. Default
        :data:`DEFAULT_TERMS` (all but Gauss-Markov).
    confidence : float
        Two-sided confidence of the coefficient intervals (default 0.9).
    seed : int, optional
        Seed of the bootstrap (``numpy.random.default_rng``); None draws fresh entropy.
    n_boot : int, optional
        Bootstrap records for the intervals (default :data:`DEFAULT_BOOTSTRAP`, 200, or
        ⌈2/α⌉ if more, so that two records lie beyond each end of the interval); the term
        selection uses max(⌈2/α⌉, n_boot/2) more.
    progress : callable, optional
        ``progress(done, total)`` after each batch of bootstrap records.
    bandwidth : float, optional
        The sensor's output filter [Hz] (−3 dB), when it rolls off within a few sample periods:
        the white term is then band-limited white (:class:`sensormodel.terms.White` with this
        bandwidth: its Allan variance falls below N²/τ at τ ≲ 1/bandwidth), in the fit and in
        the bootstrap. Without it, where the shortest τ lie below white noise, the filter's
        corner and order (1 or 2) are fitted (``Identification.white_filter_origin``).
    filter_order : int, optional
        Butterworth order of that filter (1 to 8; default 1 with a bandwidth).
    count_step : float, optional
        The record's count step [u] where its samples are integer multiples of one
        (:func:`sensormodel.counts.count_step`; :func:`fit_recording` finds it from the
        samples): its quantization is reported (reason codes ``count_step_white_floor`` /
        ``count_step_quantization``, ``count_step_coarse``; package notes).
    increments : bool
        The curve was computed from increments (angle or velocity per sample,
        :func:`sensormodel.allan.overlapping` with ``increments=True``): a count step is then
        an angle/velocity quantization step (Q = step/√12), not a rate one.

    Without ``bandwidth`` a 1- or 2-pole filter is fitted where the short-τ curve needs one;
    the samples' sampling is told from that curve where it can be (package notes).

    Returns
    -------
    Identification
        Estimates and intervals in SI, slope readings, the fitted curve.

    Raises
    ------
    AnalysisError
        A curve that cannot be fitted (non-positive deviation, fewer τ than terms + 1, τ not on
        the sample grid, unknown length), unknown or repeated terms, a confidence outside
        (0, 1), too few bootstrap records.
    """
    names = _check_terms(terms)
    given = _check_white_filter(bandwidth, filter_order)
    confidence = validate.probability(confidence, "confidence")
    n_boot = _check_n_boot(n_boot, confidence)
    seed = validate.seed(seed, "seed")
    step = _check_count_step(count_step)
    whole = _check_curve(curve, len(names))
    choice = _choose_white_filter(whole, names, given)
    wf = choice.white_filter
    c = _restrict(whole, choice.fit_range.start)
    alpha = 0.5 * (1.0 - confidence)
    n_pilot = max(int(math.ceil(2.0 / alpha - 1e-9)), n_boot // 2)
    total = n_pilot + n_boot
    seeds = np.random.SeedSequence(seed)

    full = _fit_all_terms(c, names, wf, _white_search(choice))
    sel = _select_terms(c, full, alpha, n_pilot, seeds.spawn(1)[0], _Progress(progress, 0, total))
    est = _estimate(c, full, sel)
    # the interval bootstrap: records from that estimate, the estimate repeated on each
    params = _params(names, est.coef)
    progress_b = _Progress(progress, n_pilot, total)
    av = _bootstrap(params, est.time_constant, c, n_boot, seeds.spawn(1)[0], progress_b, wf)
    boot, boot_t = _refits(av, full.design, sel, est.model)
    fitted = _white_details(_fitted_terms(c, full, sel, est, boot, boot_t, confidence), wf, c.rate)
    readings, notes = slope_readings(whole.tau, whole.adev)
    return Identification(
        channel=c.channel,
        unit=c.unit,
        sample_rate=c.rate,
        n_samples=c.n,
        confidence=confidence,
        terms=fitted,
        slope_readings=readings,
        notes=notes,
        reasons=_notes(whole.tau, _reading_points(whole.tau, whole.adev)),
        tau=whole.tau,
        adev=whole.adev,
        chi2=_chi2(c.avar, est.model, c.edf),
        n_boot=n_boot,
        seed=seed,
        refit_state=_RefitState(
            curve=c,
            design=full.design,
            in_fit=sel.in_fit.copy(),
            coef=est.coef.copy(),
            time_constant=est.time_constant,
        ),
        **_record_fields(choice, names, c, whole, fitted, step, increments),
    )


def _record_fields(
    choice: Any,
    names: tuple[str, ...],
    c: _Curve,
    whole: _Curve,
    fitted: tuple[FittedTerm, ...],
    step: float | None,
    increments: bool,
) -> dict[str, Any]:
    """The fields of an :class:`Identification` that describe the record: the τ range fitted
    (``c``, of the ``whole`` curve), the output filter and sampling (``choice``, a
    :class:`._design._FilterChoice`), the count step, and their reason codes."""
    wf = choice.white_filter
    return {
        "white_filter": None if wf is None else (float(wf[0]), int(wf[1])),
        "sampling": _sampling(wf),
        "white_filter_origin": choice.origin,
        "sampling_origin": choice.sampling_origin,
        "count_step": step,
        "record_reasons": (
            *_filter_reasons(choice, names),
            *_count_step_reasons(step, whole, fitted, increments=increments),
        ),
        "fit_range": (float(c.tau[0]), float(c.tau[-1])),
        "fit_range_reason": choice.fit_range.reason,
        "fit_range_departure": choice.fit_range.departure,
    }


def _white_details(
    fitted: tuple[FittedTerm, ...], white_filter: tuple[Any, ...] | None, rate: float
) -> tuple[FittedTerm, ...]:
    """The fitted terms with a band-limited white term's filter in its details (``bandwidth``
    [Hz], ``order``) and, for point samples, the aliasing factor A and the filter's input
    density N/√A [u·√s] (the estimate is the delivered density,
    :func:`._design._point_white_avar`)."""
    if white_filter is None:
        return fitted
    out = []
    for ft in fitted:
        if ft.term == "white":
            details = {**ft.details, "bandwidth": float(white_filter[0])}
            details["order"] = float(white_filter[1])
            if _sampling(white_filter) == SAMPLING_POINT:
                alias = _aliasing_factor(rate, float(white_filter[0]), int(white_filter[1]))
                details["aliasing_factor"] = alias
                details["input_density"] = ft.estimate / math.sqrt(alias)
            ft = replace(ft, details=details)
        out.append(ft)
    return tuple(out)


# ---------------------------------------------------------------------------------------------
# The steps of the fit
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _FullFit:
    """Step 1, the fit with every requested term: coefficients (variance scale c_k = p_k²),
    Gauss-Markov time constant [s] (or None), design matrix at it, and the unconstrained
    weighted least-squares estimate ``coef_u = wls @ avar``."""

    design: _Design
    coef: _FloatArray
    time_constant: float | None
    phi: _FloatArray
    wls: _FloatArray
    coef_u: _FloatArray

    @property
    def model(self) -> _FloatArray:
        """Its Allan variance at the curve's τ [u²]."""
        return self.phi @ self.coef


@dataclass(frozen=True)
class _Selection:
    """Step 2, which terms the data support: ``in_fit`` (every common term and the rare terms
    that passed their test: the terms of the estimate), ``selected`` (those left by the whole
    backward elimination), the GLS selector and the rare terms' indices for the refits, and
    the upper bound of the unconstrained estimate from the selection bootstrap (``lin_high``,
    variance scale)."""

    gls: _Gls
    first: tuple[int, ...]
    in_fit: npt.NDArray[np.bool_]
    selected: npt.NDArray[np.bool_]
    lin_high: _FloatArray


@dataclass(frozen=True)
class _Estimate:
    """Step 3, the estimate with the terms ``in_fit``: coefficients, Gauss-Markov time constant
    [s] (or None), the design matrix at it, its Allan variance at the curve's τ [u²], and the
    terms supported (selected, and not set to 0 by the estimate)."""

    coef: _FloatArray
    time_constant: float | None
    phi: _FloatArray
    model: _FloatArray
    supported: npt.NDArray[np.bool_]


def _white_search(choice: Any) -> tuple[float, float] | None:
    """The bandwidth range [Hz] the fit's later steps search for a fitted output filter:
    a factor :data:`_FILTER_SPAN` either side of the choice, within the profile's range."""
    if choice.origin != FILTER_FITTED:
        return None
    bw = float(choice.white_filter[0])
    return bw / _FILTER_SPAN, bw * _FILTER_SPAN


#: A fitted output filter's bandwidth is searched again within this factor of its first value.
_FILTER_SPAN = 2.0


def _fit_all_terms(
    c: _Curve,
    names: tuple[str, ...],
    white_filter: tuple[Any, ...] | None,
    white_search: tuple[float, float] | None = None,
) -> _FullFit:
    """Step 1: every requested term, and the unconstrained estimate's matrix."""
    d = replace(_design(names, c, white_filter), white_search=white_search)
    coef, _chi2_full, t_full = _fit_one(c.avar, d)
    if not np.any(coef > 0):
        raise AnalysisError(
            "no combination of the requested terms fits the curve",
            "a curve that a sum of the terms can describe (try more terms)",
            field=c.channel,
        )
    phi = d.with_gm(t_full) if t_full is not None else d.phi
    wls = _wls_matrix(phi, phi @ coef, c.edf)
    return _FullFit(d, coef, t_full, phi, wls, wls @ c.avar)


def _select_terms(
    c: _Curve,
    full: _FullFit,
    alpha: float,
    count: int,
    seeds: np.random.SeedSequence,
    progress: _Progress,
) -> _Selection:
    """Step 2: ``count`` records from the full fit give the covariance of the GLS selection and
    the spread of the unconstrained estimate (its basic bootstrap upper bound)."""
    names = full.design.names
    params = _params(names, full.coef)
    av = _bootstrap(params, full.time_constant, c, count, seeds, progress, full.design.white_filter)
    dev = av @ full.wls.T - full.coef[None, :]  # the records were drawn with full.coef
    lower = np.array([_quantile(dev[:, j], alpha) for j in range(len(names))])
    lin_high = np.maximum(full.coef_u, 0.0) - lower
    first = tuple(names.index(t) for t in _TESTED_FIRST if t in names)
    gls = _Gls(
        av,
        full.model,
        full.phi,
        z_crit=_z(1.0 - alpha),
        first=first,
        z_first=_z(1.0 - alpha / _RARE_LEVEL_DIVISOR),
    )
    in_fit, selected = gls.select(c.avar)
    return _Selection(gls, first, in_fit, selected, lin_high)


def _estimate(c: _Curve, full: _FullFit, sel: _Selection) -> _Estimate:
    """Step 3: the fit with the terms of the estimate; a term it sets to 0 is not selected."""
    coef, t_gm = _fit_subset(c.avar, full.design, sel.in_fit, start=None)
    phi = _phi(full.design, t_gm if t_gm is not None else full.time_constant)
    return _Estimate(coef, t_gm, phi, phi @ coef, sel.selected & (coef > 0))


def _refits(
    av: _FloatArray, d: _Design, sel: _Selection, start: _FloatArray
) -> tuple[_FloatArray, _FloatArray]:
    """Step 4: the estimate repeated on each bootstrap record (the rare terms' tests included).

    Returns the coefficients (records × terms) and the Gauss-Markov time constants [s] (NaN
    where the refit has none).
    """
    p = len(d.names)
    out = np.zeros((av.shape[0], p))
    out_t = np.full(av.shape[0], math.nan)
    for i in range(av.shape[0]):
        s_i = sel.gls.select(av[i], rare_only=True)[0] if sel.first else sel.in_fit
        cb, tb = _fit_subset(av[i], d, s_i, start=start)
        out[i] = cb
        if tb is not None:
            out_t[i] = tb
        # a kept rare term's interval is conditional on the term being in the model:
        # where this record's test dropped it, refit with it added
        for k in np.flatnonzero(sel.in_fit & ~s_i):
            with_k = s_i.copy()
            with_k[k] = True
            out[i, k] = _fit_subset(av[i], d, with_k, start=start)[0][k]
    return out, out_t


def _fitted_terms(
    c: _Curve,
    full: _FullFit,
    sel: _Selection,
    est: _Estimate,
    boot: _FloatArray,
    boot_t: _FloatArray,
    confidence: float,
) -> tuple[FittedTerm, ...]:
    """Step 5: each term's estimate, interval, slope reading and the τ where it dominates."""
    alpha = 0.5 * (1.0 - confidence)
    names = full.design.names
    points = _reading_points(c.tau, c.adev)
    readings = {k: float(c.adev[j] * f) for k, (j, f) in points.items()}
    report_coef = np.where(sel.in_fit, est.coef, full.coef)
    dominant = np.argmax(est.phi * report_coef[None, :], axis=1)
    fitted = []
    for j, nm in enumerate(names):
        details: dict[str, float] = {"kept_fraction": float(np.mean(boot[:, j] > 0))}
        estimate, low, high, method = _interval(
            float(report_coef[j]),
            boot[:, j],
            in_fit=bool(sel.in_fit[j]),
            selected=bool(est.supported[j]),
            lin_high=float(sel.lin_high[j]),
            alpha=alpha,
            details=details,
            cut=nm == "gauss_markov" and _refits_cut(full.design, boot_t, alpha),
        )
        disagrees = False
        if nm in points:
            # the reading's own chi-square interval at the same confidence; flagged where it
            # misses the fitted interval
            r_lo, r_hi = _reading_interval(points[nm], c.adev, c.edf, confidence)
            details["slope_reading_low"] = r_lo
            details["slope_reading_high"] = r_hi
            disagrees = bool(r_hi < low or r_lo > high)
        where = np.flatnonzero(dominant == j) if report_coef[j] > 0 else np.zeros(0, dtype=int)
        tau_range = (float(c.tau[where[0]]), float(c.tau[where[-1]])) if where.size else None
        # the plain percentile interval of the bootstrap estimates, for comparison only
        pct = np.sqrt(np.maximum(boot[:, j], 0.0))
        details["percentile_low"] = _quantile(pct, alpha)
        details["percentile_high"] = _quantile(pct, 1.0 - alpha)
        reasons: tuple[tuple[str, dict[str, Any]], ...] = ()
        if nm == "gauss_markov":
            tc_details, reasons = _time_constant_result(
                c, full, sel, est, bool(est.supported[j]), boot_t, alpha, estimate
            )
            details.update(tc_details)
        fitted.append(
            FittedTerm(
                term=nm,
                parameter=PARAMETERS[nm],
                estimate=estimate,
                low=low,
                high=high,
                confidence=confidence,
                supported=bool(est.supported[j]),
                slope_reading=readings.get(nm),
                disagrees=disagrees,
                tau_range=tau_range,
                method=method,
                details=details,
                reasons=reasons,
            )
        )
    return tuple(fitted)


def _time_constant_result(
    c: _Curve,
    full: _FullFit,
    sel: _Selection,
    est: _Estimate,
    supported: bool,
    boot_t: _FloatArray,
    alpha: float,
    sigma: float,
) -> tuple[dict[str, float], tuple[tuple[str, dict[str, Any]], ...]]:
    """The Gauss-Markov time constant's details (:func:`_time_constant_details`) and the
    reason codes of a time constant the record does not resolve, σ [u] the term's estimate.

    The time constant reported is the estimate's, or the full fit's (every requested term in
    the fit) for a term the data do not support. Its upper end is unbounded (``inf``) where
    the estimate sits at the upper edge of its search (:func:`._design._time_constant_edge`) or
    where the interval of a supported term reaches beyond the end of the search
    (:func:`_time_constant_details`): T beyond what the record resolves is then not excluded,
    and the result is a lower bound only, the interval's lower end (or the estimate, for a term
    the data do not support); at the lower edge an upper bound, the interval's upper end.
    """
    d = full.design
    assert d.gm_grid is not None
    details = _time_constant_details(c, full, est, supported, boot_t, alpha)
    t_rep, mask = (est.time_constant, sel.in_fit) if supported else (full.time_constant, None)
    if t_rep is None:
        return details, ()
    if mask is None:
        mask = np.ones(len(d.names), dtype=bool)
    edge = _time_constant_edge(c.avar, d, mask, t_rep)
    if edge is None and supported and details["time_constant_high"] > d.gm_grid[-1]:
        edge = "interval"
    if edge in ("upper", "interval") and supported:
        details["time_constant_high"] = math.inf
    # T ≥ bound at the upper end, T ≤ bound at the lower: for a supported term the interval's
    # lower or upper end (where further out than the estimate), else the estimate
    bound = t_rep
    if supported:
        low, high = details["time_constant_low"], details["time_constant_high"]
        bound = max(t_rep, high) if edge == "lower" else min(t_rep, low)
    return details, _edge_reasons(c, d, edge, t_rep, bound, sigma if supported else 0.0)


def _edge_reasons(
    c: _Curve, d: _Design, edge: str | None, time_constant: float, bound: float, sigma: float
) -> tuple[tuple[str, dict[str, Any]], ...]:
    """The reason codes of a Gauss-Markov time constant [s] at an ``edge`` of its search range
    with their numbers, σ [u] the term's estimate.

    ``edge`` ``"upper"`` or ``"lower"``: the estimate at that end
    (:func:`._design._time_constant_edge`): ``estimate_at_search_edge`` (term, parameter, edge,
    value, the range) and what it means: ``time_constant_not_resolved`` at the upper end
    (T ≥ ``bound``; the record shows only the rising side of the term's Allan deviation, so σ
    is a lower bound: σ²/T is what the curve fixes; ``sigma`` 0 for a term the data do not
    support) or ``time_constant_at_lower_edge`` (T ≤ ``bound``; the term is white noise to the
    curve). ``"interval"``: only the interval reaches the upper end;
    ``time_constant_not_resolved`` alone, ``bound`` the interval's lower end.
    """
    if edge is None:
        return ()
    assert d.gm_grid is not None
    low, high = float(d.gm_grid[0]), float(d.gm_grid[-1])
    at_edge = {
        "term": "gauss_markov",
        "parameter": "time_constant",
        "edge": edge,
        "value": time_constant,
        "low": low,
        "high": high,
    }
    if edge == "lower":
        meaning = {"bound": bound, "shortest_tau": float(c.tau[0])}
        return (("estimate_at_search_edge", at_edge), ("time_constant_at_lower_edge", meaning))
    why = {
        "bound": bound,
        "resolvable": high,
        "tau": high * _GM_PEAK_RATIO,
        "sigma": sigma,
        "unit": c.unit,
    }
    if edge == "interval":
        return (("time_constant_not_resolved", why),)
    return (("estimate_at_search_edge", at_edge), ("time_constant_not_resolved", why))


def _interval(
    est: float,
    boot: _FloatArray,
    *,
    in_fit: bool,
    selected: bool,
    lin_high: float,
    alpha: float,
    details: dict[str, float],
    cut: bool = False,
) -> tuple[float, float, float, str]:
    """One term's estimate and interval [SI parameter] and how the interval was formed
    (package notes): from the estimate ``est`` and its ``boot`` refits (variance scale).

    Adds the widest values the bootstrap pivot reaches to ``details`` (``bootstrap_low``,
    ``bootstrap_high``). ``cut``: the refits' upper tail is cut off (a Gauss-Markov σ whose
    time constant the refits push against the end of its search, :func:`_refits_cut`); the
    ratio pivot's lower end, which that tail sets, is then no higher than the reflection of the
    lower tail, ĉ·q_α(r). Returns (estimate, low, high, method).
    """
    high_lin = max(lin_high, est, 0.0)
    q_lo = q_hi = 0.0
    if in_fit and est > 0:
        r = boot / est
        q_lo, q_hi = _quantile(r, alpha), _quantile(r, 1.0 - alpha)
        if np.all(boot > 0):
            # a limit beyond these is further from the estimate than any bootstrap record
            # went (acceptance then skips its test at the limit, :func:`limit_test`)
            details["bootstrap_low"] = math.sqrt(est / float(np.max(r)))
            details["bootstrap_high"] = math.sqrt(est / float(np.min(r)))
    if selected and q_lo > 0:
        low_v, high_v, method = est / q_hi, est / q_lo, "ratio"
        if cut:  # the refits' upper tail is cut off (:func:`_refits_cut`): its reflection
            low_v = min(low_v, est * q_lo)
    elif selected:  # dropped by more than a fraction α of the refits
        low_v, high_v, method = est / q_hi if q_hi > 0 else 0.0, high_lin, "ratio-linear"
    else:  # not distinguishable from zero: an upper limit
        upper = est / q_lo if q_lo > 0 else 0.0
        low_v, high_v, method = 0.0, max(high_lin, upper), "linear"
    estimate = math.sqrt(max(est, 0.0))
    low = min(math.sqrt(max(low_v, 0.0)), estimate)
    high = max(math.sqrt(max(high_v, 0.0)), estimate)
    return estimate, low, high, method


def _refits_cut(d: _Design, boot_t: _FloatArray, alpha: float) -> bool:
    """Whether more than a fraction α of the refits' time constants [s] lie in the last step
    of the search (the refits cannot go beyond what the record resolves, so the upper tail of
    their law is cut off there)."""
    tb = boot_t[np.isfinite(boot_t)]
    if d.gm_grid is None or tb.size == 0:
        return False
    return bool(np.mean(tb > d.gm_grid[-2]) > alpha)


def _time_constant_details(
    c: _Curve,
    full: _FullFit,
    est: _Estimate,
    selected: bool,
    boot_t: _FloatArray,
    alpha: float,
) -> dict[str, float]:
    """The Gauss-Markov time constant [s] and its ratio-pivot interval from the refits' time
    constants; the whole search range of the profile (the design's grid: from a quarter of the
    shortest τ to what the record resolves) where the term is not supported.

    The refits cannot go beyond what the record resolves, so where more than a fraction α of
    them lie in the last step of the search their upper tail is cut off, and the pivot's lower
    end T/q_{1−α}(r) (which that tail sets) would come out too high: the lower end is then the
    smaller of it and the reflection in log T of the uncut lower tail, T·q_α(r). The upper end
    T/q_α(r) comes from the uncut tail.
    """
    grid = full.design.gm_grid
    assert grid is not None
    t_gm = est.time_constant
    t_est = t_gm if (selected and t_gm is not None) else full.time_constant
    out = {"time_constant": float(t_est) if t_est is not None else math.nan}
    tb = boot_t[np.isfinite(boot_t)]
    if selected and t_gm is not None and tb.size >= 2:
        ratio_t = tb / t_gm
        low = t_gm / _quantile(ratio_t, 1.0 - alpha)
        if _refits_cut(full.design, boot_t, alpha):
            low = min(low, t_gm * _quantile(ratio_t, alpha))
        out["time_constant_low"] = float(low)
        out["time_constant_high"] = float(t_gm / _quantile(ratio_t, alpha))
    else:
        out["time_constant_low"] = float(grid[0])
        out["time_constant_high"] = float(grid[-1])
    return out
