"""The statistics of intervals (sensormodel.confidence): chi-square intervals, equivalent
degrees of freedom of the Allan variance (Greenhall & Riley; SP 1065 Table 5), the decision
model and the record length that decides a verdict.

Checked against published values and a reference library (tests/reference), closed forms and
seeded Monte Carlo.
"""

from __future__ import annotations

import math

import allantools
import numpy as np
import pytest
from reference import acceptance as aref
from reference import nist_sp1065 as ref
from scipy.stats import binom

from sensormodel import confidence

# ---------------------------------------------------------------------------------------------
# Equivalent degrees of freedom and confidence intervals
# ---------------------------------------------------------------------------------------------

ALPHAS = (2, 1, 0, -1, -2)  # order of the reference tables


@pytest.mark.parametrize("m", sorted(ref.EDF_GREENHALL_LIBRARY_N1001))
def test_edf_greenhall_reference_library_values(m):
    # [L] allantools 2024.06 ci.edf_greenhall(alpha, 2, m, 1001, overlapping=True), two
    # decimals (a reference library implementing Greenhall & Riley 2003, not a published table)
    for alpha, value in zip(ALPHAS, ref.EDF_GREENHALL_LIBRARY_N1001[m], strict=True):
        assert confidence.edf_greenhall(alpha, m, 1001) == pytest.approx(value, abs=0.005 + 1e-9)


@pytest.mark.parametrize("n_phase", [1001, 10_001, 100_001])
@pytest.mark.parametrize("alpha", [1, 0, -1, -2])
def test_edf_greenhall_equals_reference_library(alpha, n_phase):
    # allantools.ci.edf_greenhall as a reference library over the octave grid (it does not
    # implement white PM for r <= 2, which the exact form covers here; see the next test)
    for m in 2 ** np.arange(int(math.log2((n_phase - 2) // 2)) + 1):
        lib = allantools.ci.edf_greenhall(alpha, 2, int(m), n_phase, overlapping=True)
        # flicker PM at large m: the library's plain second difference of t² ln|t| at step 1/m
        # loses digits (relative error ~ 1e-16 m²); ours is rewritten with log1p/atanh
        rtol = 1e-9 if alpha != 1 or m <= 64 else 1e-16 * float(m) ** 2 * 100
        assert confidence.edf_greenhall(alpha, int(m), n_phase) == pytest.approx(lib, rel=rtol)
        lib_plain = allantools.ci.edf_greenhall(alpha, 2, int(m), n_phase, overlapping=False)
        ours_plain = confidence.edf_greenhall(alpha, int(m), n_phase, overlapping=False)
        assert ours_plain == pytest.approx(lib_plain, rel=rtol)


def test_white_pm_edf_is_exact():
    # Derived: for white phase noise the M overlapping second differences have covariances
    # 6, -4, 1 (x phase variance) at lags 0, m, 2m, so 1/edf = [36M + 32(M-m)+ + 2(M-2m)+]/(36M²).
    # Greenhall & Riley's case 4 (1/M)(35/18 - 1/r) is the same for M >= 2m; check both, and a
    # seeded simulation in the short case (M < 2m) the reference library leaves unimplemented.
    n_phase, m = 1001, 100
    M = n_phase - 2 * m
    assert confidence.edf_greenhall(2, m, n_phase) == pytest.approx(
        M / (35 / 18 - m / M), rel=1e-14
    )
    n_phase, m = 101, 40  # M = 21 < 2m
    M = n_phase - 2 * m
    exact = 36 * M**2 / (36 * M + 32 * (M - m) * (M > m) + 2 * (M - 2 * m) * (M > 2 * m))
    assert confidence.edf_greenhall(2, m, n_phase) == pytest.approx(exact, rel=1e-14)
    rng = np.random.default_rng(7)
    x = rng.standard_normal((40_000, n_phase))
    d = x[:, 2 * m :] - 2 * x[:, m:-m] + x[:, : -2 * m]
    v = np.mean(d * d, axis=1)
    # edf_hat = 2 mean²/var; with R = 40 000 records its relative standard error is about
    # sqrt(2/R)·sqrt(1 + 12/edf) (fourth moment of a scaled chi-square) < 1.5 %; allow 5 %.
    assert 2 * v.mean() ** 2 / v.var() == pytest.approx(exact, rel=0.05)


@pytest.mark.parametrize("m", sorted(ref.EDF_SIMPLE_N1001))
def test_edf_simple_formulas(m):
    # SP 1065 section 5.4.1, Table 5, at N = 1001 (values to 3 decimals in the reference notes);
    # the flicker-FM m = 1 value keeps the square (the reference library's version drops it)
    for alpha, value in zip(ALPHAS, ref.EDF_SIMPLE_N1001[m], strict=True):
        assert confidence.edf_simple(alpha, m, 1001) == pytest.approx(value, abs=0.0005 + 1e-9)


def test_edf_exact_for_white_and_random_walk_rate_noise():
    # The EDF the engine uses for alpha = 0, -2 at m <= 33 is the exact one of the sampled model.
    # Checks: (1) it is close to SP 1065 Table 5 (an approximation fitted to the same model)
    # where the Greenhall-Riley F = m branch is not; (2) at the hand-over to Greenhall-Riley
    # (F = infinity) from m = 34 on, edf·m (nearly constant for m << N) has no step, while the
    # F = m branch itself steps by ~3 %; (3) a seeded simulation at m = 1, 2.
    assert confidence.edf(0, 1, 1001) == pytest.approx(ref.EDF_SIMPLE_N1001[1][2], rel=2e-3)
    assert confidence.edf(0, 10, 1001) == pytest.approx(ref.EDF_SIMPLE_N1001[10][2], rel=2e-3)
    assert confidence.edf(-2, 1, 1001) == pytest.approx(ref.EDF_SIMPLE_N1001[1][4], rel=2e-3)
    assert confidence.edf_greenhall(0, 1, 1001) > 1.15 * confidence.edf(0, 1, 1001)
    for alpha in (0, -2):
        assert confidence.edf(alpha, 34, 1001) == confidence.edf_greenhall(alpha, 34, 1001)
        step = 33 * confidence.edf(alpha, 33, 1001) / (34 * confidence.edf(alpha, 34, 1001))
        assert step == pytest.approx(1.0, abs=0.005)
    gr_step = (
        33 * confidence.edf_greenhall(0, 33, 1001) / (34 * confidence.edf_greenhall(0, 34, 1001))
    )
    assert abs(gr_step - 1.0) > 0.02
    rng = np.random.default_rng(8)
    y = rng.standard_normal((20_000, 1000))
    x = np.concatenate([np.zeros((20_000, 1)), np.cumsum(y, axis=1)], axis=1)
    for m in (1, 2):
        d = x[:, 2 * m :] - 2 * x[:, m:-m] + x[:, : -2 * m]
        v = np.mean(d * d, axis=1)
        # relative standard error of 2 mean²/var with R = 20 000: ~ sqrt(2/R) = 1 %; allow 4 %
        assert 2 * v.mean() ** 2 / v.var() == pytest.approx(confidence.edf(0, m, 1001), rel=0.04)


def test_chi2_interval_check_value():
    # SP 1065 eq. (45), check value from the reference notes: c = 0.682689, edf = 146.1788
    low, high = confidence.chi2_interval(1.0, ref.CHI2_CHECK["edf"], ref.CHI2_CHECK["confidence"])
    assert float(low) == pytest.approx(ref.CHI2_CHECK["low"], abs=5e-8)
    assert float(high) == pytest.approx(ref.CHI2_CHECK["high"], abs=5e-8)


# ---------------------------------------------------------------------------------------------
# chi-square intervals, degrees of freedom, required length
# ---------------------------------------------------------------------------------------------


def test_interval_factors_published_check() -> None:
    # NIST SP 1065 eq. (45) chi-square interval; check value of the reference notes [N].
    c, edf, lo, hi = aref.CHI2_INTERVAL
    got = confidence.interval_factors(edf, c)
    np.testing.assert_allclose(got, (lo, hi), rtol=1e-6)


@pytest.mark.parametrize("nu", [0.7, 3.0, 25.0, 400.0, 1e5])
@pytest.mark.parametrize("c", [0.683, 0.9, 0.95])
def test_dof_from_interval_inverts(nu: float, c: float) -> None:
    lo, hi = confidence.interval_factors(nu, c)
    assert confidence.dof_from_interval(2.0 * lo, 2.0 * hi, c) == pytest.approx(nu, rel=1e-6)


def test_dof_from_interval_bound_is_none() -> None:
    assert confidence.dof_from_interval(0.0, 1.0, 0.9) is None


def test_dof_for_precision() -> None:
    nu = confidence.dof_for_precision(0.25, 0.9)
    lo, hi = confidence.interval_factors(nu, 0.9)
    assert 0.5 * (hi - lo) == pytest.approx(0.25, rel=1e-8)


@pytest.mark.parametrize("c", [0.8, 0.9, 0.95])
@pytest.mark.parametrize("nu", [2.0, 30.0, 500.0])
def test_decision_probability_at_the_limit(c: float, nu: float) -> None:
    # Exactly at the limit, each wrong call has probability (1 - c)/2: the chi-square interval
    # contains the true value with probability c, half the miss on each side (SP 1065 eq. 45).
    assert confidence.decision_probability(1.0, 1.0, nu, c) == pytest.approx((1 - c) / 2, rel=1e-9)


def test_decision_probability_monte_carlo() -> None:
    # Seeded check of the decision model itself: p_hat = p sqrt(X/nu), X ~ chi2(nu); the
    # interval is the chi-square interval. n = 20000 draws; the count is binomial, so a
    # 99.9 % two-sided binomial band (scipy.stats.binom) bounds the difference.
    rng = np.random.default_rng(11)
    c, nu, n = 0.9, 12.0, 20000
    lo_f, hi_f = confidence.interval_factors(nu, c)
    for p, limit in ((1.3, 1.0), (0.8, 1.0), (1.0, 1.0)):
        x = rng.chisquare(nu, n)
        est = p * np.sqrt(x / nu)
        fail = np.mean(est * lo_f > limit)
        ok = np.mean(est * hi_f <= limit)
        decided = fail if p >= limit else ok
        prob = confidence.decision_probability(p, limit, nu, c)
        lo, hi = binom.interval(0.999, n, prob)
        assert lo / n <= decided <= hi / n, (p, decided, prob)


@pytest.mark.parametrize(("value", "power"), [(1.3, 0.8), (0.7, 0.8), (1.1, 0.5), (0.95, 0.9)])
def test_required_dof_meets_power(value: float, power: float) -> None:
    nu = confidence.required_dof(value, 1.0, confidence=0.9, power=power)
    assert nu is not None
    assert confidence.decision_probability(value, 1.0, nu, 0.9) == pytest.approx(power, abs=1e-6)


def test_required_dof_at_the_limit_is_none() -> None:
    assert confidence.required_dof(1.0, 1.0, confidence=0.9, power=0.8) is None


def test_required_duration_scales_with_dof() -> None:
    # Present interval with nu0 dof over 600 s; the length is 600 s * nu/nu0.
    nu0, c = 10.0, 0.9
    lo_f, hi_f = confidence.interval_factors(nu0, c)
    est, limit = 1.2, 1.0
    t, dof, how = confidence.required_duration(
        est, limit, low=est * lo_f, high=est * hi_f, duration=600.0, confidence=c, power=0.8
    )
    assert dof == pytest.approx(nu0, rel=1e-6)
    nu = confidence.required_dof(est, limit, confidence=c, power=0.8)
    assert t == pytest.approx(600.0 * nu / nu0, rel=1e-6)
    assert t > 600.0
    assert how == "dof_scaling"


def test_required_duration_bound_and_limit() -> None:
    t, dof, how = confidence.required_duration(0.0, 1.0, low=0.0, high=2.0, duration=100.0)
    assert dof is None and t == pytest.approx(100.0 * 2.0**4) and how == "bound_only"
    t, _, how = confidence.required_duration(1.0, 1.0, low=0.8, high=1.25, duration=100.0)
    assert t is None and how == "estimate_at_limit"


# ---------------------------------------------------------------------------------------------
# equivalent degrees of freedom (Greenhall & Riley) and the reading τ
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("alpha", [2, 0, -1, -2])
def test_allan_edf_against_reference(alpha: int) -> None:
    # Greenhall & Riley (2003) large-r EDF; values of the reference library allantools at
    # m = 100, N = 1001 phase points (1000 samples at 1 Hz, tau = 100 s), printed to 4-5 digits.
    got = confidence.allan_edf(alpha, 100.0, 1000.0, 1.0)
    assert got == pytest.approx(aref.GREENHALL_EDF_M100_N1001[alpha], abs=0.006)


def test_allan_edf_live_allantools() -> None:
    allantools_ci = pytest.importorskip("allantools.ci")
    for alpha in (2, 0, -1, -2):
        for m, n in ((1000, 100001), (300, 20001)):
            want = allantools_ci.edf_greenhall(alpha, 2, m, n, overlapping=True)
            assert confidence.allan_edf(alpha, m, n - 1.0, 1.0) == pytest.approx(want, rel=1e-9)


@pytest.mark.parametrize("alpha", [2, 0, -1, -2])
def test_duration_for_edf_inverts(alpha: int) -> None:
    for tau, edf in ((10.0, 30.0), (300.0, 80.0)):
        t = confidence.duration_for_edf(alpha, tau, edf, 20.0)
        if alpha == 2:  # white PM: M = edf·a0 is a sufficient (conservative) length
            assert confidence.allan_edf(alpha, tau, t, 20.0) >= edf
        else:
            assert confidence.allan_edf(alpha, tau, t, 20.0) == pytest.approx(edf, rel=1e-9)
