"""A parametric bootstrap test of one fitted term's parameter at a given value (a datasheet
limit): the null model refitted with the term held there, records simulated from it.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import numpy.typing as npt

from .. import validate
from ..errors import AnalysisError
from ._bootstrap import ProgressCallback, _bootstrap, _Progress
from ._checks import _check_records
from ._design import _chi2, _fit_subset, _irls, _null_gauss_markov, _params, _phi, _RefitState
from ._names import PARAMETERS
from ._results import Identification, LimitTest

__all__ = ["limit_test"]

_FloatArray = npt.NDArray[np.float64]


def limit_test(
    identification: Identification,
    term: str,
    value: float,
    *,
    n_records: int | None = None,
    seed: int | None = None,
    progress: ProgressCallback | None = None,
) -> LimitTest:
    """Test whether a fitted term's parameter differs from ``value`` (e.g. a datasheet limit).

    A parametric bootstrap test (B. Efron & R. Tibshirani, *An Introduction to the Bootstrap*,
    Chapman & Hall 1993, ch. 16; A. C. Davison & D. V. Hinkley, *Bootstrap Methods and their
    Application*, Cambridge 1997, section 4.2) under the null hypothesis "the parameter equals
    ``value``": the other terms of the estimate are refitted with this one held at ``value``
    (weighted least squares with the fixed term as an offset; a Gauss-Markov term tested by its
    σ has its time constant profiled too), ``n_records`` records of the
    measured length are simulated from that null model (the generator of the fit's
    bootstrap), and the term's coefficient T is refitted on each (the same terms in the
    model; the rare-term tests are not repeated, so the statistic is the same function of
    every record and of the measured curve). The p-values are the Monte Carlo ones,
    (1 + #{T* ≥ T})/(B + 1), whose level is exact for a null law known exactly (Davison &
    Hinkley eq. (4.11)); here the null's other terms are estimated, which the seeded studies
    of ``tests/test_acceptance.py`` check.

    Unlike the ratio interval of :func:`fit`, which simulates from the *estimated* model, the
    test simulates from a model *at* the value: where a term's precision depends on its own
    size (flicker between white noise and a random walk: an estimate that came out high is
    also better separated in its own bootstrap), the interval is too narrow on that side and
    the test is not.

    Parameters
    ----------
    identification : Identification
        From :func:`fit` (it carries ``refit_state``).
    term : str
        A fitted term type (``white``, ``flicker``, ...).
    value : float
        The parameter value tested [SI, the term's ``parameter``], > 0.
    n_records : int, optional
        Null records B (default: the identification's ``n_boot``, made at least 3/α − 1 for
        α = (1 − confidence)/2, so that at least three records lie beyond a rejection).
    seed : int, optional
        Seed of the null records; None draws fresh entropy.
    progress : callable, optional
        ``progress(done, total)`` as the records are simulated.

    Returns
    -------
    LimitTest

    Raises
    ------
    AnalysisError
        An identification without ``refit_state``, a term it did not fit, a value that is not
        a positive finite number, too few records.
    """
    state, j, value = _check_limit(identification, term, value)
    d, c = state.design, state.curve
    alpha = 0.5 * (1.0 - identification.confidence)
    need = int(math.ceil(3.0 / alpha - 1e-9)) - 1
    if n_records is None:
        n_records = max(int(identification.n_boot), need)
    else:
        why = f"records for a test at level {alpha:g} (three beyond a rejection)"
        n_records = _check_records(n_records, "n_records", need, why)
    seed = validate.seed(seed, "seed")
    mask = state.in_fit.copy()
    mask[j] = True
    start = _phi(d, state.time_constant) @ state.coef
    observed = float(_fit_subset(c.avar, d, mask, start=start)[0][j])
    null, t_null = _null_model(state, mask, j, value**2, start)
    params = _params(d.names, null)
    av = _bootstrap(
        params,
        t_null,
        c,
        n_records,
        np.random.SeedSequence(seed),
        _Progress(progress, 0, n_records),
        d.white_filter,
    )
    reasons = _null_edge_reasons(state, mask, j, value**2, t_null)
    null_model = _phi(d, t_null) @ null
    stats = np.array([_fit_subset(a, d, mask, start=null_model)[0][j] for a in av])
    b = stats.size
    return LimitTest(
        term=term,
        parameter=PARAMETERS[term],
        value=value,
        estimate=math.sqrt(max(observed, 0.0)),
        p_above=float((1 + np.count_nonzero(stats >= observed)) / (b + 1)),
        p_below=float((1 + np.count_nonzero(stats <= observed)) / (b + 1)),
        n_records=b,
        null_parameters=params,
        null_time_constant=None if d.gm_index is None else t_null,
        reasons=reasons,
    )


def _check_limit(
    identification: Identification, term: str, value: Any
) -> tuple[_RefitState, int, float]:
    """The fit state of ``identification``, the index of ``term`` in it, and ``value`` [SI]."""
    state = getattr(identification, "refit_state", None)
    if not isinstance(state, _RefitState):
        raise AnalysisError(
            f"{identification.channel}: an identification without its fit state",
            "an identification made by sensormodel.identify.fit",
            field="identification",
        )
    names = state.design.names
    if term not in names:
        raise AnalysisError(
            f"{state.curve.channel}: {term!r} was not fitted",
            f"one of {', '.join(names)}",
            field="term",
        )
    value = float(value)
    if not math.isfinite(value) or value <= 0:
        raise AnalysisError(f"got {value!r}", "a parameter value > 0", field="value")
    return state, names.index(term), value


def _null_model(
    state: _RefitState,
    mask: npt.NDArray[np.bool_],
    j: int,
    held: float,
    start: _FloatArray,
) -> tuple[_FloatArray, float | None]:
    """The null model: term ``j`` held at ``held`` (variance scale), the other terms of
    ``mask`` refitted beside it (weighted least squares with the held term as an offset).
    Returns the coefficients and the Gauss-Markov time constant [s] (None without one)."""
    d, c = state.design, state.curve
    others = mask.copy()
    others[j] = False
    if d.names[j] == "gauss_markov":
        # σ is held, its time constant is a nuisance parameter like the other terms: profiled
        null, t_null = _null_gauss_markov(c, d, others, held, start)
    else:
        null = np.zeros(len(d.names))
        t_null = state.time_constant
        if np.any(others):
            offset = held * _phi(d, state.time_constant)[:, j]
            null, t_fit = _fit_subset(c.avar, d, others, start=start, offset=offset)
            if t_fit is not None:
                t_null = t_fit
    null[j] = held
    return null, t_null


def _null_edge_reasons(
    state: _RefitState,
    mask: npt.NDArray[np.bool_],
    j: int,
    held: float,
    t_null: float | None,
) -> tuple[tuple[str, dict[str, Any]], ...]:
    """``null_time_constant_at_search_edge`` where the null model's Gauss-Markov time constant
    [s] sits at an end of its search range: within the last (first) step of the grid with the
    null's misfit no higher at the last (first) grid point than at the one before (after), the
    rule of :func:`._design._time_constant_edge` applied to the null fit (term ``j`` held at
    ``held``, variance scale, the other terms of ``mask`` refitted beside it)."""
    d, c = state.design, state.curve
    grid = d.gm_grid
    if grid is None or d.gm_index is None or t_null is None or not mask[d.gm_index]:
        return ()
    others = np.flatnonzero(mask & (np.arange(mask.size) != j))

    def misfit(t: float) -> float:
        phi = d.with_gm(t)
        offset = held * phi[:, j]
        if others.size == 0:
            return _chi2(c.avar, offset, c.edf)
        return _irls(c.avar, phi[:, others], d.edf, None, offset)[1]

    edge = None
    if t_null > grid[-2] and misfit(grid[-1]) <= misfit(grid[-2]):
        edge = "upper"
    elif t_null < grid[1] and misfit(grid[0]) <= misfit(grid[1]):
        edge = "lower"
    if edge is None:
        return ()
    numbers = {"edge": edge, "value": float(t_null), "low": float(grid[0]), "high": float(grid[-1])}
    return (("null_time_constant_at_search_edge", numbers),)
