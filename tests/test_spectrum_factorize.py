"""Spectral factorization, shaping filters, the shaped term and band-limited white noise.

Outside values, each with its source:
- S(ω) = 1/(1 + ω²) factors to H(s) = 1/(1 + s) (the textbook first-order lag; Brown & Hwang,
  "Introduction to Random Signals and Applied Kalman Filtering", shaping-filter chapter, from
  memory for the chapter); its unit-white-noise response has steady-state variance 0.5.
- Dryden turbulence spectra, MIL-F-8785C (1980) §3.7 / MIL-HDBK-1797 (section numbers from
  memory), longitudinal and vertical forms, factor to their published shaping filters
  H_u = σ_u √(2L_u/(πV)) / (1 + (L_u/V) s) and H_w = σ_w √(L_w/(πV)) (1 + √3 (L_w/V) s) /
  (1 + (L_w/V) s)² (REFERENCES §7; the forms with π take a one-sided unit PSD per rad/s).
- Equivalent noise bandwidth of an n-th order Butterworth, ENBW/f3dB = (π/2n)/sin(π/2n):
  π/2 = 1.570796 (n = 1), π/(2√2) = 1.110721 (n = 2); S. Winder, "Analog and Digital Filter
  Design", 2nd ed., App. A, Table A.3.
- scipy.integrate.quad as a reference library for ∫ S df; scipy.signal.welch for the simulated
  PSD; scipy.signal.butter for the Butterworth poles.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate, signal, stats

from sensormodel.cli import cli
from sensormodel.convert import build_model
from sensormodel.errors import AnalysisError, ModelFileError
from sensormodel.model import NoiseModel
from sensormodel.simulate import simulate
from sensormodel.spectrum import (
    factorize,
    fit_rational_psd,
    omega_polynomial_to_omega2,
    shaped_term,
    welch,
)
from sensormodel.terms import Shaped, White, term_from_dict

WINDER_ENBW = {1: 1.570796, 2: 1.110721, 3: 1.047198, 4: 1.026172}  # Winder Table A.3


# --- factorization against published factors ---------------------------------------------------


def test_first_order_lag():
    # 1/(1 + ω²) = |1/(1 + jω)|² (textbook; see module docstring)
    h = factorize([1.0], [1.0, 1.0])
    assert_allclose(h.numerator, [1.0], rtol=1e-14)
    assert_allclose(h.denominator, [1.0, 1.0], rtol=1e-14)
    assert_allclose(h.poles, [-1.0], rtol=1e-14)
    term = shaped_term(h)
    assert_allclose(term.variance(), 0.5, rtol=1e-12)  # steady-state variance of 1/(s+1)
    w = np.array([1e-3, 0.3, 1.0, 7.0])
    assert_allclose(term.psd(w / (2 * np.pi)), 1.0 / (1.0 + w**2), rtol=1e-13)


def test_dryden_longitudinal_factors_to_published_filter():
    # MIL-F-8785C longitudinal: Φ_u(Ω) = σ² (2L/π) / (1 + (LΩ)²); temporal S(ω) = Φ(ω/V)/V
    sigma, L, V = 1.8, 533.0, 80.0  # m/s, m, m/s (a scenario value, not from the standard)
    a = L / V
    h = factorize([sigma**2 * 2 * L / (np.pi * V)], [a**2, 1.0])
    k = sigma * math.sqrt(2 * L / (np.pi * V))
    # published H_u = k / (1 + a s) = (k/a) / (s + 1/a)
    assert_allclose(h.numerator, [k / a], rtol=1e-12)
    assert_allclose(h.denominator, [1.0, 1.0 / a], rtol=1e-12)


def test_dryden_vertical_factors_to_published_filter():
    # MIL-F-8785C vertical: Φ_w(Ω) = σ² (L/π)(1 + 3(LΩ)²)/(1 + (LΩ)²)²
    sigma, L, V = 1.2, 300.0, 60.0
    a = L / V
    num = sigma**2 * L / (np.pi * V) * np.array([3 * a**2, 1.0])
    den = np.polymul([a**2, 1.0], [a**2, 1.0])
    h = factorize(num, den)
    k = sigma * math.sqrt(L / (np.pi * V))
    pub_num = k * np.array([math.sqrt(3) * a, 1.0]) / a**2  # monic denominator form
    pub_den = np.polymul([1.0, 1.0 / a], [1.0, 1.0 / a])
    assert_allclose(h.numerator, pub_num, rtol=1e-7)
    assert_allclose(h.denominator, pub_den, rtol=1e-7)
    assert np.all(h.poles.real < 0) and np.all(h.zeros.real < 0)  # stable, minimum phase
    w = np.logspace(-3, 2, 50)
    s_target = np.polyval(num, w**2) / np.polyval(den, w**2)
    assert_allclose(h.psd(w), s_target, rtol=1e-9)


def test_complex_zeros_and_poles_are_left_half_plane():
    # N(x) = x² − 2x + 1.5 > 0 (no real root), D(x) = (x + 1)(x² + 0.5x + 4): valid spectrum
    num = [1.0, -2.0, 1.5]
    den = np.polymul([1.0, 1.0], [1.0, 0.5, 4.0])
    h = factorize(num, den)
    assert np.all(h.poles.real < 0) and np.all(h.zeros.real < 0)
    w = np.linspace(0, 20, 400)
    assert_allclose(h.psd(w), np.polyval(num, w**2) / np.polyval(den, w**2), rtol=1e-9)


def test_spectral_zero_on_the_axis_is_split():
    # N(x) = (x − 1)²: S(1) = 0, zeros ±j on the imaginary axis (closed left half-plane)
    h = factorize(np.polymul([1.0, -1.0], [1.0, -1.0]), np.polymul([1.0, 2.0], [1.0, 3.0, 9.0]))
    assert_allclose(sorted(h.zeros.imag), [-1.0, 1.0], atol=1e-6)
    assert np.all(h.zeros.real <= 1e-6)


@pytest.mark.parametrize(
    ("num", "den", "match"),
    [
        ([1.0, 0.0], [1.0, 1.0], "degree"),  # improper: infinite variance
        ([1.0], [1.0, -1.0], "vanishes"),  # pole on the frequency axis (unstable)
        ([1.0], [1.0, 0.0], "vanishes"),  # pole at ω = 0 (random walk, not stationary)
        ([-1.0], [1.0, 1.0], "negative"),  # negative spectrum
        ([1.0, -3.0], [1.0, 1.0, 1.0], "negative"),  # N(x) = x − 3 < 0 for x < 3
        ([np.nan], [1.0, 1.0], "finite"),
        ([0.0], [1.0, 1.0], "zero"),
    ],
    ids=["improper", "unstable", "integrator", "negative-hf", "negative-lf", "nan", "zero"],
)
def test_bad_spectra_refused(num, den, match):
    with pytest.raises(AnalysisError, match=match):
        factorize(num, den)


def test_odd_powers_of_omega_refused():
    assert_allclose(omega_polynomial_to_omega2([2.0, 0.0, 3.0, 0.0, 1.0]), [2.0, 3.0, 1.0])
    with pytest.raises(AnalysisError, match=r"ω\^1"):
        omega_polynomial_to_omega2([1.0, 1.0, 1.0])
    with pytest.raises(AnalysisError, match=r"ω\^3"):
        omega_polynomial_to_omega2([1.0, 2.0, 0.0, 0.0])


# --- the shaped term -----------------------------------------------------------------------------


def test_shaped_variance_equals_integral_of_psd():
    # Lyapunov steady-state variance = ∫ S(f) df over all f (two-sided), scipy quad as reference
    term = Shaped(numerator=(0.5, 2.0), denominator=(1.0, 1.2, 9.0, 4.0))
    total, _ = integrate.quad(lambda f: term.psd([f])[0], 0, np.inf, limit=400)
    assert_allclose(term.variance(), 2 * total, rtol=1e-8)


def test_shaped_three_views_agree():
    # exact Allan variance from the realization vs the PSD integral (IEEE 952 Annex C relation)
    term = Shaped(numerator=(0.02,), denominator=(1.0, 0.314159, 2.4674))
    tau = np.array([0.05, 0.5, 2.0, 20.0, 200.0])
    exact = term.allan_variance(tau)
    from sensormodel.terms import allan_variance_from_psd

    quad = allan_variance_from_psd(lambda f: term.psd(f), tau, breakpoints=(0.25,))
    assert_allclose(exact, quad, rtol=1e-6)
    ss = term.state_space()
    assert_allclose(ss.psd(np.array([0.1, 0.25, 1.0])), term.psd([0.1, 0.25, 1.0]), rtol=1e-10)


def test_shaped_round_trip_and_refusals():
    t = Shaped(numerator=(2.0,), denominator=(1.0, 3.0, 25.0))
    assert term_from_dict(t.to_dict()) == t
    for bad, match in [
        ({"numerator": [1, 1], "denominator": [1, 1]}, "strictly proper"),
        ({"numerator": [1], "denominator": [1, -1]}, "left half-plane"),
        ({"numerator": "x", "denominator": [1, 1]}, "coefficients"),
    ]:
        with pytest.raises(ModelFileError, match=match):
            term_from_dict({"type": "shaped", **bad})


# --- band-limited white noise ---------------------------------------------------------------


@pytest.mark.parametrize("order", [1, 2, 3, 4])
def test_band_limited_white_variance_follows_enbw(order):
    # variance of N·B(s) = 2 N² ENBW (one-sided PSD 2N², REFERENCES §0/§8); ENBW from Winder
    n, bw = 3.0e-4, 50.0
    w = White(density=n, bandwidth=bw, filter_order=order)
    assert_allclose(w.shaping_filter().variance(), 2 * n**2 * WINDER_ENBW[order] * bw, rtol=2e-6)
    # poles are those of scipy's analog Butterworth (reference library)
    _, p, _ = signal.butter(order, 2 * np.pi * bw, analog=True, output="zpk")
    assert_allclose(
        np.sort_complex(np.round(w.shaping_filter().poles, 6)),
        np.sort_complex(np.round(p, 6)),
        rtol=1e-9,
    )


def test_band_limited_white_allan_rolls_off_and_recovers():
    n, bw = 1e-3, 20.0
    w = White(density=n, bandwidth=bw, filter_order=2)
    tau = np.array([1e-3, 1e-2, 10.0, 100.0])
    ratio = w.allan_variance(tau) / (n**2 / tau)
    assert ratio[0] < 0.2  # short τ: the filter removes most of the white variance
    assert_allclose(ratio[2:], 1.0, rtol=3e-3)  # τ ≫ 1/bandwidth: N²/τ (IEEE 952 Annex C)


@pytest.mark.parametrize(
    ("bw", "order", "tau"),
    [(50.0, 1, 0.005), (400.0, 6, 1e-3), (100.0, 8, 1e-3), (1000.0, 6, 0.01), (40.0, 8, 0.01)],
)
def test_band_limited_white_allan_matches_psd_quadrature(bw, order, tau):
    # AVAR(τ) = ∫₀^∞ S₁(f)·2 sin⁴(πfτ)/(πfτ)² df (IEEE Std 952 Annex C, NIST SP 1065 §5.2),
    # one-sided S₁ = 2N²/(1 + (f/bw)^(2·order)), by scipy.integrate.quad one period 1/τ of the
    # kernel at a time up to F = 2000/τ; the rest is below 4|B(F)|²/(π²τ²F), < 1e-9 here.
    # High orders and bandwidths once failed here (an ill-conditioned ωc^order realization).
    from scipy.integrate import quad

    def integrand(f):
        return (
            2.0
            / (1.0 + (f / bw) ** (2 * order))
            * 2.0
            * np.sin(np.pi * f * tau) ** 4
            / (np.pi * f * tau) ** 2
        )

    ref = sum(
        quad(integrand, k / tau, (k + 1) / tau, epsabs=0.0, epsrel=1e-12)[0] for k in range(2000)
    )
    got = White(density=1.0, bandwidth=bw, filter_order=order).allan_variance(np.array([tau]))
    assert_allclose(got[0], ref, rtol=1e-9)


@pytest.mark.parametrize(("bw", "order"), [(400.0, 6), (100.0, 8), (50.0, 1), (200.0, 3)])
def test_band_limited_white_state_space_is_well_conditioned(bw, order):
    # the realization's output variance is 2 N² ENBW with ENBW/f3dB = (π/2n)/sin(π/2n) (the
    # Butterworth noise bandwidth, Winder Table A.3 / Carlson, module notes), also for orders
    # whose companion form in s has coefficients up to ωc^order; and its P0 solves the
    # Lyapunov equation (scipy.linalg.solve_continuous_lyapunov as the reference)
    from scipy.linalg import solve_continuous_lyapunov

    n = 1e-3
    ss = White(density=n, bandwidth=bw, filter_order=order).state_space(sample_rate=1000.0)
    x = np.pi / (2 * order)
    assert_allclose((ss.H @ ss.P0 @ ss.H.T).item(), 2 * n**2 * bw * x / np.sin(x), rtol=1e-9)
    ref = solve_continuous_lyapunov(ss.F, -ss.G @ ss.Qc @ ss.G.T)
    assert_allclose(ss.P0, ref, rtol=1e-7, atol=1e-12 * np.max(np.abs(ref)))


def test_datasheet_bandwidth_band_limits_the_white_term(example_datasheet):
    model = build_model(example_datasheet)
    for ch in model.channels:
        white = ch.term("white")
        if white is None:
            continue
        assert white.bandwidth == ch.bandwidth
        if ch.bandwidth:
            # per-sample std of the model = √(variance of the band-limited term)
            assert_allclose(
                ch.white_sample_std() ** 2, white.shaping_filter().variance(), rtol=1e-5
            )


# --- fitting a measured spectrum ---------------------------------------------------------------


def test_fit_recovers_a_known_filter():
    f = np.logspace(-2, 2, 200)
    s = 2j * np.pi * f
    true = np.abs((s + 0.5) / ((s**2 + 3 * s + 25) * (s + 40))) ** 2
    fit = fit_rational_psd(f, true, numerator_order=1, denominator_order=3, sided="two-sided")
    assert fit.rms_db < 1e-6
    assert_allclose(fit.filter.denominator, np.polymul([1, 3, 25], [1, 40]), rtol=1e-5)
    assert_allclose(fit.filter.numerator, [1.0, 0.5], rtol=1e-5)


def test_fit_of_simulated_record_matches_target():
    # Welch PSD (one-sided) of a record of a shaped term, fitted with the right orders, gives
    # back a PSD within the Welch scatter: with K averaged segments each PSD ordinate is
    # ~ χ²(2K)/(2K) (scipy welch, Hann, 50 % overlap ≈ 1.9K dof) and the log fit averages
    # ~200 of them, so the fitted curve is within a few percent (3 dB is a loose bound).
    from sensormodel.model import Channel

    term = Shaped(numerator=(0.02,), denominator=(1.0, 0.6, 4.0))
    model = NoiseModel(
        sensor={"name": "test"},
        channels=(
            Channel(
                id="accelerometer.x",
                quantity="acceleration",
                unit="m/s^2",
                sample_rate=20.0,
                terms=(term,),
            ),
        ),
    )
    y = simulate(model, 2**18, rate=20.0, seed=4)[:, 0]
    psd = welch(y, 20.0, nperseg=4096)
    keep = (psd.f > 0.02) & (psd.f < 5.0)
    fit = fit_rational_psd(psd.f[keep], psd.psd[keep], numerator_order=0, denominator_order=2)
    got = fit.filter.psd(2 * np.pi * psd.f[keep])
    want = term.psd(psd.f[keep])
    assert np.max(np.abs(10 * np.log10(got / want))) < 1.0
    assert fit.rms_db < 3.0


def test_simulated_shaped_record_has_the_target_variance():
    # sample variance of a long record vs the Lyapunov variance; the record's effective number
    # of independent samples is n·dt/(2·T_c) with T_c ~ 1/(ζω0) the correlation time, so the
    # 99.9 % χ² band is used with that dof (derived).
    from sensormodel.model import Channel

    term = Shaped(numerator=(0.02,), denominator=(1.0, 0.6, 4.0))
    model = NoiseModel(
        sensor={"name": "test"},
        channels=(
            Channel(
                id="gyro.x", quantity="angular_rate", unit="rad/s", sample_rate=50.0, terms=(term,)
            ),
        ),
    )
    n, dt = 2**19, 1 / 50.0
    y = simulate(model, n, rate=50.0, seed=11)[:, 0]
    dof = n * dt / (2 * (1 / 0.3))
    lo, hi = stats.chi2.ppf([5e-4, 1 - 5e-4], dof) / dof
    # period means of the process: variance slightly below the point variance (τ0 ≪ T_c)
    assert lo < np.var(y) / term.variance() < hi


# --- command line ----------------------------------------------------------------------------


def test_shape_command_factorizes_the_example(runner, examples_dir, tmp_path):
    out = tmp_path / "sway.json"
    res = runner.invoke(
        cli, ["shape", str(examples_dir / "spectra" / "tern4-mast-sway.toml"), "-o", str(out)]
    )
    assert res.exit_code == 0, res.output + res.stderr
    assert "variance (Lyapunov)" in res.output
    model = NoiseModel.load(out)
    (term,) = model.channel("accelerometer.y").terms
    assert term.type == "shaped"
    w0, zeta = 2 * np.pi * 0.25, 0.1  # the example's resonance
    assert_allclose(term.denominator, [1.0, 2 * zeta * w0, w0**2], rtol=1e-5)


def test_shape_command_fits_a_csv_and_adds_to_a_model(runner, examples_dir, tmp_path):
    f = np.logspace(-1, 1.5, 80)
    s = 2j * np.pi * f
    psd = 2 * np.abs(0.01 / (s**2 + 1.0 * s + 9.0)) ** 2  # one-sided
    csv = tmp_path / "psd.csv"
    csv.write_text(
        "frequency [Hz],psd [(m/s^2)^2/Hz]\n"
        + "".join(f"{a:.17g},{b:.17g}\n" for a, b in zip(f, psd, strict=True))
    )
    base = tmp_path / "t900.json"
    assert (
        runner.invoke(cli, ["build", str(examples_dir / "bw-t900.toml"), "-o", str(base)]).exit_code
        == 0
    )
    out = tmp_path / "t900-vib.json"
    res = runner.invoke(
        cli,
        [
            "shape",
            str(csv),
            "--orders",
            "0/2",
            "--channel",
            "accelerometer.z",
            "--add-to",
            str(base),
            "-o",
            str(out),
        ],
    )
    assert res.exit_code == 0, res.stderr
    assert "fit error" in res.output
    doc = json.loads(out.read_text())
    types = [t["type"] for c in doc["channels"] if c["id"] == "accelerometer.z" for t in c["terms"]]
    assert types[-1] == "shaped"
    # the combined model still exports and drifts
    assert (
        runner.invoke(
            cli, ["export", str(out), "--dt", "0.01", "-o", str(tmp_path / "d.json")]
        ).exit_code
        == 0
    )
    assert runner.invoke(cli, ["drift", str(out), "--horizon", "60"]).exit_code == 0


def test_shape_command_refuses_bad_spectra(runner, tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(
        "[spectrum]\nnumerator_omega = [1.0, 1.0]\ndenominator = [1.0, 1.0]\n"
        "sample_rate = '10 Hz'\n"
    )
    res = runner.invoke(cli, ["shape", str(bad), "-o", str(tmp_path / "x.json")])
    assert res.exit_code == 2
    assert res.stderr.startswith(f"error: {bad}:spectrum.numerator_omega: ")
    assert "ω^1" in res.stderr and "Traceback" not in res.stderr
    assert not (tmp_path / "x.json").exists()
    unstable = tmp_path / "unstable.toml"
    unstable.write_text(
        "[spectrum]\nnumerator = [1.0]\ndenominator = [1.0, -2.0]\nsample_rate = '10 Hz'\n"
    )
    res = runner.invoke(cli, ["shape", str(unstable), "-o", str(tmp_path / "x.json")])
    assert res.exit_code == 2 and "vanishes" in res.stderr


def test_shaped_drift_propagation_matches_quadrature():
    # the variance equation (exact discrete propagation) against quadrature of the stationary
    # autocovariance, Var ∫y = 2∫(t − s)R(s)ds (derived; independent of the propagation code)
    from sensormodel.drift import channel_drift
    from sensormodel.model import Channel

    term = Shaped(numerator=(0.02,), denominator=(1.0, 0.314159, 2.4674))
    ch = Channel(
        id="accelerometer.y",
        quantity="acceleration",
        unit="m/s^2",
        sample_rate=200.0,
        terms=(term,),
    )
    res = channel_drift(ch, 3600.0, times=[1.0, 10.0, 60.0, 600.0, 3600.0])
    for key in ("velocity", "position"):
        assert_allclose(res.values[key], res.closed_form[key], rtol=1e-4)
    # long horizon: Var ∫y → S(0)·t with S(0) = |H(0)|² two-sided (Wiener-Khinchin)
    s0 = (0.02 / 2.4674) ** 2
    assert_allclose(res.values["velocity"][-1] ** 2, s0 * 3600.0, rtol=3e-3)
