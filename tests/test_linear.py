"""State-space algebra: Van Loan discretization, Lyapunov steady state, covariance propagation,
stacking and the discrete model, against closed forms (tests/reference/ieee952.py) and against
scipy.linalg (expm, solve_continuous_lyapunov) as the reference library."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.linalg
from numpy.testing import assert_allclose
from reference import ieee952 as ref
from reference import simulation as sim_ref
from scipy import signal

from sensormodel.errors import AnalysisError
from sensormodel.linear import (
    INNOVATIONS_TOLERANCE,
    R_CONVENTION,
    R_CONVENTION_QUANTIZATION_IN_R,
    StateSpace,
    discretize,
    innovations_filter,
    propagate,
    stack,
    steady_state_covariance,
    step_model,
    van_loan,
)
from sensormodel.model import Channel
from sensormodel.terms import (
    Flicker,
    GaussMarkov,
    Quantization,
    Ramp,
    RandomConstant,
    RandomWalk,
    White,
)

# --- Van Loan against closed forms (Van Loan 1978; reference notes §5) -------------------------


def test_van_loan_first_order_markov():
    c = ref.VAN_LOAN_GM
    T, var, dt = c["T"], c["var"], c["dt"]
    phi, qd = van_loan([[-1 / T]], [[1.0]], [[2 * var / T]], dt)
    # Φ = e^(−dt/T), Qd = σ²(1 − e^(−2dt/T))
    assert phi[0, 0] == pytest.approx(math.exp(-dt / T), rel=1e-14)
    assert qd[0, 0] == pytest.approx(var * (1 - math.exp(-2 * dt / T)), rel=1e-13)
    assert phi[0, 0] == pytest.approx(c["phi"], abs=1e-10)
    assert qd[0, 0] == pytest.approx(c["qd"], abs=1e-10)
    # discrete consistency: Qd/(1 − Φ²) = σ² exactly (reference notes §2)
    assert qd[0, 0] / (1 - phi[0, 0] ** 2) == pytest.approx(var, rel=1e-13)


def test_van_loan_white_driven_double_integrator():
    c = ref.VAN_LOAN_DOUBLE_INTEGRATOR
    q, dt = c["q"], c["dt"]
    phi, qd = van_loan([[0, 1], [0, 0]], [[0], [1]], [[q]], dt)
    assert_allclose(phi, [[1, dt], [0, 1]], rtol=1e-15, atol=1e-16)
    assert_allclose(qd, q * np.array([[dt**3 / 3, dt**2 / 2], [dt**2 / 2, dt]]), rtol=1e-13)
    assert_allclose(qd, c["qd"], rtol=1e-9)


def test_van_loan_triple_integrator_and_arw_rrw():
    F3 = np.diag([1.0, 1.0], k=1)
    _, qd = van_loan(F3, [[0], [0], [1]], [[1.7]], 0.3)
    assert_allclose(qd, ref.triple_integrator_qd(1.7, 0.3), rtol=1e-12)
    c = ref.VAN_LOAN_ARW_RRW
    _, qd = van_loan([[0, 1], [0, 0]], np.eye(2), np.diag([c["n2"], c["k2"]]), c["dt"])
    assert_allclose(qd, c["qd"], rtol=1e-5)  # printed to 6 digits
    dt, n2, k2 = c["dt"], c["n2"], c["k2"]
    exact = [[n2 * dt + k2 * dt**3 / 3, k2 * dt**2 / 2], [k2 * dt**2 / 2, k2 * dt]]
    assert_allclose(qd, exact, rtol=1e-13)


# --- Van Loan against scipy.linalg (reference library) -----------------------------------------


def _random_stable(rng, n, m, spread):
    F = rng.normal(size=(n, n)) - spread * np.eye(n)
    G = rng.normal(size=(n, m))
    A = rng.normal(size=(m, m))
    return F, G, A @ A.T + np.eye(m)


@pytest.mark.parametrize("n", [1, 3, 8])
def test_van_loan_against_scipy_expm(n):
    # scipy.linalg.expm of Van Loan's block matrix at moderate dt (no overflow in e^(−F dt)).
    rng = np.random.default_rng(1978 + n)
    F, G, Qc = _random_stable(rng, n, 2, 2.0)
    for dt in (1e-3, 0.1, 0.7):
        phi, qd = van_loan(F, G, Qc, dt)
        A = np.zeros((2 * n, 2 * n))
        A[:n, :n], A[:n, n:], A[n:, n:] = -F * dt, G @ Qc @ G.T * dt, F.T * dt
        B = scipy.linalg.expm(A)
        assert_allclose(phi, scipy.linalg.expm(F * dt), rtol=1e-12, atol=1e-14)
        assert_allclose(qd, B[n:, n:].T @ B[:n, n:], rtol=1e-10, atol=1e-14)


def test_van_loan_stiff_system_against_lyapunov_identity():
    # Time constants from 1e-4 s to 1e4 s, dt = 10 s: the plain Van Loan block matrix overflows
    # (e^(dt/T) = e^(1e5)); the split-and-double form stays exact. Reference: for stable F,
    # Qd = P − Φ P Φᵀ with P from scipy.linalg.solve_continuous_lyapunov and Φ = expm(F dt).
    T = np.geomspace(1e-4, 1e4, 9)
    F = np.diag(-1 / T) + np.diag(np.full(8, 0.05), k=1)
    G = np.eye(9)
    Qc = np.diag(2 / T)
    dt = 10.0
    phi, qd = van_loan(F, G, Qc, dt)
    P = scipy.linalg.solve_continuous_lyapunov(F, -G @ Qc @ G.T)
    phi_ref = scipy.linalg.expm(F * dt)
    assert np.all(np.isfinite(qd))
    assert_allclose(phi, phi_ref, rtol=1e-10, atol=1e-14)
    assert_allclose(qd, P - phi_ref @ P @ phi_ref.T, rtol=1e-9, atol=1e-12)


def test_van_loan_zero_step_and_errors():
    phi, qd = van_loan([[-1.0]], [[1.0]], [[2.0]], 0.0)
    assert phi[0, 0] == 1.0 and qd[0, 0] == 0.0
    with pytest.raises(AnalysisError, match="non-negative"):
        van_loan([[-1.0]], [[1.0]], [[2.0]], -1.0)
    with pytest.raises(AnalysisError, match="square F"):
        van_loan(np.zeros((2, 3)), np.zeros((2, 1)), [[1.0]], 1.0)
    with pytest.raises(AnalysisError, match="symmetric"):
        van_loan(-np.eye(2), np.eye(2), [[1.0, 0.5], [0.0, 1.0]], 1.0)


# --- steady state (Lyapunov) -------------------------------------------------------------------


def test_steady_state_gauss_markov_and_first_order_lag():
    c = ref.LYAPUNOV_GM
    P = steady_state_covariance([[-1 / c["T"]]], [[1.0]], [[c["q"]]])
    assert P[0, 0] == pytest.approx(c["P"], rel=1e-13)  # P = qT/2 (reference notes §6)
    # 1/(s + 1) driven by unit-strength white noise: variance 1/2, PSD 1/(1 + ω²)
    lag = StateSpace(F=[[-1.0]], G=[[1.0]], Qc=[[1.0]], H=[[1.0]], P0=[[0.5]], states=("x",))
    assert steady_state_covariance(lag.F, lag.G, lag.Qc)[0, 0] == pytest.approx(0.5, rel=1e-13)
    w = np.array([0.01, 1.0, 30.0])
    assert_allclose(lag.psd(w / (2 * np.pi)), 1 / (1 + w**2), rtol=1e-13)


@pytest.mark.parametrize("n", [2, 6])
def test_steady_state_against_scipy(n):
    rng = np.random.default_rng(6 + n)
    F, G, Qc = _random_stable(rng, n, 3, 3.0)
    ours = steady_state_covariance(F, G, Qc)
    # scipy solves A X + X Aᴴ = Q, so pass Q = −G Qc Gᵀ (reference notes §6)
    theirs = scipy.linalg.solve_continuous_lyapunov(F, -G @ Qc @ G.T)
    assert_allclose(ours, theirs, rtol=1e-10, atol=1e-13)
    assert_allclose(F @ ours + ours @ F.T + G @ Qc @ G.T, 0, atol=1e-11)


@pytest.mark.parametrize(
    "term", [RandomWalk(1.0), Ramp(1.0), RandomConstant(1.0)], ids=lambda t: t.type
)
def test_steady_state_refused_for_non_stationary_states(term):
    ss = stack([GaussMarkov(1.0, 2.0), term])
    with pytest.raises(AnalysisError, match="not stationary") as err:
        steady_state_covariance(ss.F, ss.G, ss.Qc, states=ss.states)
    assert term.type in str(err.value)


def test_stacked_flicker_steady_state_is_its_initial_covariance():
    ss = Flicker(2e-6).state_space(sample_rate=100.0)
    P = steady_state_covariance(ss.F, ss.G, ss.Qc)
    assert_allclose(P, ss.P0, rtol=1e-10, atol=1e-30)
    assert_allclose(
        P,
        scipy.linalg.solve_continuous_lyapunov(ss.F, -ss.G @ ss.Qc @ ss.G.T),
        rtol=1e-10,
        atol=1e-30,
    )


# --- propagation (variance equation) -----------------------------------------------------------


def test_propagate_closed_forms():
    t = np.array([0.0, 0.3, 1.0, 1.0, 7.5, 100.0])
    # random walk from 0: P = K² t
    P = propagate([[0.0]], [[1.0]], [[0.2]], [[0.0]], t)
    assert_allclose(P[:, 0, 0], 0.2 * t, rtol=1e-13)
    # GM from rest: P = σ² (1 − e^(−2t/T)); from stationary: σ² at all t
    T, var = 4.0, 0.3
    P = propagate([[-1 / T]], [[1.0]], [[2 * var / T]], [[0.0]], t)
    assert_allclose(P[:, 0, 0], var * (1 - np.exp(-2 * t / T)), rtol=1e-12)
    P = propagate([[-1 / T]], [[1.0]], [[2 * var / T]], [[var]], t)
    assert_allclose(P[:, 0, 0], var, rtol=1e-12)
    # double integrator: q [[t³/3, t²/2], [t²/2, t]] (reference notes §5 with dt = t)
    P = propagate([[0, 1], [0, 0]], [[0], [1]], [[2.5]], np.zeros((2, 2)), t)
    for Pi, ti in zip(P, t, strict=True):
        assert_allclose(
            Pi, 2.5 * np.array([[ti**3 / 3, ti**2 / 2], [ti**2 / 2, ti]]), rtol=1e-11, atol=1e-15
        )


def test_propagate_uneven_steps_equal_one_step():
    rng = np.random.default_rng(3)
    F, G, Qc = _random_stable(rng, 4, 2, 1.0)
    P0 = np.eye(4) * 0.1
    t = np.sort(rng.uniform(0, 5, 17))
    P = propagate(F, G, Qc, P0, np.r_[t, 5.0])
    phi, qd = van_loan(F, G, Qc, 5.0)
    assert_allclose(P[-1], phi @ P0 @ phi.T + qd, rtol=1e-11)
    with pytest.raises(AnalysisError, match="decreasing"):
        propagate(F, G, Qc, P0, [1.0, 0.5])


# --- stacking and the discrete model ---------------------------------------------------------


def _channel(terms, rate=100.0):
    return Channel(
        id="gyro.x", quantity="angular_rate", unit="rad/s", sample_rate=rate, terms=tuple(terms)
    )


def test_stack_blocks_and_names():
    terms = [
        White(1e-4),
        GaussMarkov(1e-5, 10.0),
        GaussMarkov(2e-5, 100.0),
        RandomWalk(1e-7),
        Ramp(1e-8),
        RandomConstant(1e-3),
        Quantization(1e-6),
    ]
    ss = stack(terms, sample_rate=100.0)
    assert ss.states == (
        "gauss_markov",
        "gauss_markov#2",
        "random_walk",
        "ramp.value",
        "ramp.slope",
        "random_constant",
    )
    assert ss.white == pytest.approx(1e-8) and ss.quantization == pytest.approx(1e-12)
    assert_allclose(np.diag(ss.F), [-0.1, -0.01, 0, 0, 0, 0])
    assert ss.F[3, 4] == 1.0 and ss.H.tolist() == [[1, 1, 1, 1, 0, 1]]
    assert_allclose(np.diag(ss.P0), [1e-10, 4e-10, 0, 0, 1e-16, 1e-6])
    # the stacked Allan variance is the sum of the terms' (three views: closed form vs exact
    # covariance of the realization)
    tau = np.array([0.01, 1.0, 100.0])
    total = sum(t.allan_variance(tau, sample_rate=100.0) for t in terms)
    assert_allclose(ss.allan_variance(tau), total, rtol=1e-9)


def test_discretize_white_gm_and_conventions():
    ch = _channel([White(2e-4), GaussMarkov(3e-5, 50.0)])
    d = discretize(ch, 0.01)
    # R = N²/dt: variance of white noise of density N averaged over dt (two-sided convention)
    assert d.r == pytest.approx(4e-8 / 0.01, rel=1e-14)
    assert d.r_convention == R_CONVENTION and "N^2/dt" in d.r_convention
    assert d.phi[0, 0] == pytest.approx(math.exp(-0.01 / 50.0), rel=1e-14)
    assert d.qd[0, 0] == pytest.approx(9e-10 * (1 - math.exp(-0.02 / 50.0)), rel=1e-12)
    assert d.states == ("gauss_markov",) and d.h.tolist() == [[1.0]]
    assert d.p0[0, 0] == pytest.approx(9e-10)
    only_white = discretize(_channel([White(1.0)]), 0.5)
    assert only_white.phi.shape == (0, 0) and only_white.h.shape == (1, 0)
    assert only_white.r == 2.0


def _sequence_allan_variance(d, m):
    """Allan variance of the stationary output sequence y_k of a discrete model, at τ = m·dt,
    from its autocovariance C(j) = H Φ^j P Hᵀ + R δ_j (exact; P the stationary covariance)."""
    n = 2 * m
    C = np.empty(n)
    P = d.p0
    phij = np.eye(len(d.states))
    for j in range(n):
        C[j] = (d.h @ phij @ P @ d.h.T)[0, 0] + (d.r if j == 0 else 0.0)
        phij = d.phi @ phij
    cov = scipy.linalg.toeplitz(C)
    w = np.r_[-np.ones(m), np.ones(m)] / m
    return 0.5 * w @ cov @ w


def test_quantization_discrete_states_reproduce_allan_variance():
    # Quantization as two discrete states [e_k, e_(k−1)]: the output sequence has Allan
    # variance 3Q²/τ² at τ = m·dt (IEEE Std 952 Annex C) and per-sample variance 2Q²/dt².
    q, dt = 3e-6, 0.02
    d = discretize(_channel([Quantization(q), White(1e-5)]), dt)
    assert d.states[-2:] == ("quantization.e[k]", "quantization.e[k-1]")
    for m in (1, 3, 20):
        expected = ref.avar_quantization(m * dt, q) + ref.avar_white(m * dt, 1e-5)
        assert _sequence_allan_variance(d, m) == pytest.approx(expected, rel=1e-12)
    var_y = (d.h @ d.p0 @ d.h.T)[0, 0]
    assert var_y == pytest.approx(2 * q**2 / dt**2, rel=1e-14)
    in_r = discretize(_channel([Quantization(q), White(1e-5)]), dt, quantization="r")
    assert in_r.states == () and in_r.r_convention == R_CONVENTION_QUANTIZATION_IN_R
    assert in_r.r == pytest.approx(1e-10 / dt + 2 * q**2 / dt**2, rel=1e-14)


def test_discrete_gm_sequence_allan_variance():
    # A GM state sampled at dt: its sequence autocovariance is σ² Φ^|j| (Φ = e^(−dt/T)),
    # checked by the discrete Lyapunov fixed point P = Φ P Φᵀ + Qd (reference notes §6).
    d = discretize(_channel([GaussMarkov(2.0, 3.0), RandomConstant(1.0)]), 0.1)
    P = d.phi @ d.p0 @ d.phi.T + d.qd
    assert_allclose(P, d.p0, rtol=1e-13)


def test_discretize_stiff_flicker_at_coarse_step():
    # T_min = 1/(π f0) ≈ 1.6 ms exported at dt = 1 s: no overflow; fast states decorrelate.
    term = Flicker(1e-6)
    d = discretize(_channel([term], rate=400.0), 1.0)
    real = term.realization(sample_rate=400.0)
    assert_allclose(np.diag(d.phi), np.exp(-1.0 / real.time_constants), rtol=1e-12, atol=1e-300)
    assert_allclose(
        np.diag(d.qd), real.variances * (1 - np.exp(-2.0 / real.time_constants)), rtol=1e-12
    )


def test_discretize_refuses_bad_arguments():
    ch = _channel([White(1.0)])
    with pytest.raises(AnalysisError, match="positive step"):
        discretize(ch, 0.0)
    with pytest.raises(AnalysisError, match="'states' or 'r'"):
        discretize(ch, 1.0, quantization="both")


def test_state_space_shape_checks():
    with pytest.raises(AnalysisError, match="H has 2 columns"):
        StateSpace(F=[[-1.0]], G=[[1.0]], Qc=[[1.0]], H=[[1.0, 1.0]], P0=[[1.0]], states=("x",))
    with pytest.raises(AnalysisError, match="state names"):
        StateSpace(F=[[-1.0]], G=[[1.0]], Qc=[[1.0]], H=[[1.0]], P0=[[1.0]], states=())


# --- the Python API on the example models ------------------------------------------------------


def test_noise_model_theory_api(example_datasheet):
    from sensormodel import build_model

    model = build_model(example_datasheet)
    tau = np.array([0.01, 1.0, 100.0])
    adev = model.allan_deviation(tau)
    f = np.array([0.01, 1.0, 10.0])
    psd2 = model.psd(f)
    psd1 = model.psd(f, sided="one-sided")
    disc = model.discretize(0.01)
    assert list(adev) == list(psd2) == list(disc) == model.channel_ids
    for ch in model.channels:
        total = sum(t.allan_variance(tau, sample_rate=ch.sample_rate) for t in ch.terms)
        assert_allclose(adev[ch.id], np.sqrt(total), rtol=1e-14)
        assert_allclose(psd1[ch.id], 2 * psd2[ch.id], rtol=1e-14)
        d = disc[ch.id]
        n = len(d.states)
        assert d.phi.shape == d.qd.shape == d.p0.shape == (n, n) and d.h.shape == (1, n)
        assert np.all(np.isfinite(d.qd)) and np.min(np.linalg.eigvalsh(d.qd)) > -1e-20
        # exact: the realization's Allan variance vs the closed forms, within the flicker
        # realization's stated error (zero for the other terms)
        tol = max(
            [t.realization_error(ch.sample_rate) for t in ch.terms if t.type == "flicker"] or [0.0]
        )
        real = ch.state_space().allan_variance(tau)
        assert np.all(np.abs(np.sqrt(real / total) - 1) <= tol + 1e-9)


# --- the exact step with its output mean, and the innovations form -----------------------------


def test_step_model_random_walk_is_the_double_integrator():
    # Random walk of density √q with the mean of its output over the step: in (rate, angle)
    # coordinates the augmented system is the double integrator, whose Van Loan Qd is
    # q [[dt³/3, dt²/2], [dt²/2, dt]] (reference notes section 5). The mean is angle/dt.
    r = sim_ref.DOUBLE_INTEGRATOR
    q, dt = r["q"], r["dt"]
    sm = step_model([[0.0]], [[1.0]], [[q]], [[1.0]], dt)
    (aa, ax), (_, xx) = r["qd"]
    np.testing.assert_allclose(sm.phi, [[1.0]], rtol=1e-14)
    np.testing.assert_allclose(sm.gamma, [1.0], rtol=1e-14)
    np.testing.assert_allclose(sm.qxx[0, 0], xx, rtol=1e-4)  # printed to 4-5 digits
    np.testing.assert_allclose(sm.c[0] * sm.qxx[0, 0] * dt, ax, rtol=1e-4)
    np.testing.assert_allclose((sm.residual + sm.c[0] ** 2 * sm.qxx[0, 0]) * dt**2, aa, rtol=1e-4)
    # Closed forms to machine precision: c = 1/2, residual = q dt / 12 (Brownian bridge).
    np.testing.assert_allclose(sm.c, [0.5], rtol=1e-13)
    np.testing.assert_allclose(sm.residual, q * dt / 12.0, rtol=1e-12)


def test_step_model_gauss_markov_matches_closed_form():
    # Φ = e^(−dt/T), Qd = σ²(1 − e^(−2dt/T)) (reference notes section 2); mean-output gain
    # γ = T(1 − Φ)/dt, cov(w, mean) = q T²(1 − Φ)²/(2 dt) with q = 2σ²/T (derived by
    # integrating the Ornstein-Uhlenbeck kernel).
    r = sim_ref.GM_DISCRETE
    T, var, dt = r["T"], r["var"], r["dt"]
    q = 2 * var / T
    sm = step_model([[-1 / T]], [[1.0]], [[q]], [[1.0]], dt)
    np.testing.assert_allclose(sm.phi[0, 0], r["phi"], rtol=1e-9)
    np.testing.assert_allclose(sm.qxx[0, 0], r["qd"], rtol=1e-9)
    phi = math.exp(-dt / T)
    np.testing.assert_allclose(sm.gamma[0], T * (1 - phi) / dt, rtol=1e-12)
    qxa = q * T**2 * (1 - phi) ** 2 / (2 * dt)
    np.testing.assert_allclose(sm.c[0] * sm.qxx[0, 0], qxa, rtol=1e-11)


@pytest.mark.parametrize("rate", [100.0, 1000.0])
def test_innovations_filter_has_the_model_autocovariance(rate):
    # One innovation stream through one filter replaces the white stream and one stream per
    # Gauss-Markov / flicker state (sensormodel.simulate notes). The filter's output must have
    # exactly the model's autocovariance. Model: the continuous terms' period means in closed
    # form (sim_ref.gm_period_mean_autocov for the Gauss-Markov term and for each process of
    # the flicker realization; white N²/dt at lag 0). Filter: C(j) = Λ Σ_k h_k h_{k+j} with h
    # its impulse response from scipy.signal.sosfilt (a causal filter driven by white noise). The
    # slowest
    # time constant is 10 s, so h has decayed to e^{-40} within 40·T·rate samples.
    dt = 1 / rate
    wn, gm, fl = White(1e-4), GaussMarkov(2e-3, 0.05), Flicker(1e-3, longest_time=10.0)
    steps = [step_model(s.F, s.G, s.Qc, s.H, dt) for s in (gm.state_space(), fl.state_space(
        sample_rate=rate))]  # fmt: skip
    design = innovations_filter(
        np.concatenate([np.diag(s.phi) for s in steps]),
        np.concatenate([s.gamma for s in steps]),
        np.diag(np.concatenate([np.diag(s.qxx) for s in steps])),
        np.concatenate([s.c for s in steps]),
        wn.density**2 / dt + sum(s.residual for s in steps),
    )
    assert design is not None
    assert design.spectrum_error <= INNOVATIONS_TOLERANCE
    assert design.variance_error <= INNOVATIONS_TOLERANCE
    assert design.parallel_error <= INNOVATIONS_TOLERANCE
    # zeros interlace the poles (g_i > 0): one zero below each pole, above the previous one
    assert np.all(design.zeros < design.poles)
    assert np.all(design.zeros[1:] > design.poles[:-1])
    n = int(40 * 10.0 * rate)
    imp = np.zeros(n)
    imp[0] = 1.0
    h = signal.sosfilt(design.sos, imp) * design.std
    # the parallel form 1 + Σ g_i/(z − p_i) (what a channel runs): the same impulse response
    hp = imp + sum(signal.lfilter([0.0, g], [1.0, -p], imp) for p, g in zip(
        design.poles, design.gains, strict=True))  # fmt: skip
    np.testing.assert_allclose(hp * design.std, h, rtol=0, atol=1e-9 * np.max(np.abs(h)))
    lags = np.array([0, 1, 2, 5, 30, 300, 3000])
    ours = np.array([np.dot(h[: n - j], h[j:]) for j in lags])
    real = fl.realization(sample_rate=rate)
    model = sim_ref.gm_period_mean_autocov(gm.sigma**2, gm.time_constant, dt, lags)
    for T, v in zip(real.time_constants, real.variances, strict=True):
        model += sim_ref.gm_period_mean_autocov(v, T, dt, lags)
    model[0] += wn.density**2 / dt
    # Rounding only: poles carried to ε/(1 − p) ≈ 1e-12 relative, sums of 10^5-10^6 terms.
    np.testing.assert_allclose(ours, model, rtol=1e-9, atol=1e-12 * model[0])
