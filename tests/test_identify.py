"""identify: noise terms from an Allan curve, their intervals, the classical slope readings,
the test at a limit, through the package's public names.

The "true" records of these tests come from the independent generators of
``tests/identify_records.py`` (plain numpy, independent of sensormodel's simulators); the
flicker generator is checked here against the exact Annex C form. The project's own simulator
(sensormodel.simulate) is used in one further recovery test. The bootstrap's own generator and
Allan-variance engine are tested in ``tests/test_identify_bootstrap.py``.
"""

from __future__ import annotations

import math
import multiprocessing
import os
from concurrent.futures import ProcessPoolExecutor

import numpy as np
import pytest
from identify_records import (
    band_limited_white,
    flicker,
    flicker_avar,
    mean_within,
    oavar,
    random_walk,
    white,
)
from reference import ieee952
from scipy.stats import binom, chi2

from sensormodel import identify
from sensormodel.allan import overlapping
from sensormodel.errors import AnalysisError
from sensormodel.terms import Flicker, Quantization, Ramp, RandomWalk, White

# ---------------------------------------------------------------------------------------------
# the independent flicker generator and the published flicker form
# ---------------------------------------------------------------------------------------------


def test_flicker_form_matches_published_values() -> None:
    # regression values of the Annex C form, B = 1 (reference notes §3, checked by quadrature)
    for f0, tau, value in ieee952.FLICKER_REGRESSION:
        assert flicker_avar(np.array([tau]), 1.0, f0)[0] == pytest.approx(value, rel=1e-8)


def test_reference_flicker_generator_follows_the_exact_form() -> None:
    rng = np.random.default_rng(11)
    n, rate = 4096, 10.0
    m = 2 ** np.arange(11)
    samples = np.array([oavar(flicker(rng, n, rate, 1.0), m) for _ in range(400)])
    mean_within(samples, flicker_avar(m / rate, 1.0, rate / 2.0))


# ---------------------------------------------------------------------------------------------
# recovery of known coefficients
# ---------------------------------------------------------------------------------------------

RATE = 100.0


def _curve(y: np.ndarray, rate: float = RATE, **kw):
    return overlapping(y, rate, unit="rad/s", channel="gyro.z", **kw)


def test_recovers_independent_record_within_intervals() -> None:
    # 2^15 samples at 10 Hz (55 min) of white + flicker + random walk, crossovers at
    # τ = N²/(0.441 B²) = 0.57 s and 3·0.441 B²/K² = 33 s, so that each term shows over
    # more than an octave. With 0.98 intervals each true value lies inside with probability
    # 0.98, all three with about 0.94.
    rng = np.random.default_rng(2024)
    n, rate = 1 << 15, 10.0
    truth = {"white": 5e-5, "flicker": 1e-4, "random_walk": 2e-5}
    y = (
        white(rng, n, rate, truth["white"])
        + flicker(rng, n, rate, truth["flicker"])
        + random_walk(rng, n, rate, truth["random_walk"])
    )
    curve = _curve(y, rate)
    result = identify.fit(curve, confidence=0.98, seed=1, n_boot=200)
    assert result.channel == "gyro.z" and result.unit == "rad/s"
    assert result.sample_rate == rate and result.n_samples == n
    for name, value in truth.items():
        ft = result.term(name)
        assert ft.supported, ft
        assert ft.low <= value <= ft.high, (name, value, ft)
        assert ft.parameter == identify.PARAMETERS[name]
        assert ft.low < ft.estimate < ft.high
    for name in ("quantization", "ramp"):
        assert not result.term(name).supported
        assert result.term(name).low == 0.0
    # the fitted curve follows the measured one within its scatter: edf·AVAR̂/AVAR is about
    # chi-square with the curve's edf (NIST SP 1065 §5.3); each point within the two-sided
    # 0.999 range (about 1.5 % for one of the 15 τ to fall out by chance)
    fitted = result.fitted_adev(result.tau)
    stat = curve.edf * (result.adev / fitted) ** 2
    assert np.all(chi2.ppf(0.0005, curve.edf) <= stat), stat
    assert np.all(stat <= chi2.ppf(0.9995, curve.edf)), stat


def test_band_limited_record_with_and_without_its_bandwidth() -> None:
    # 2^15 samples at 100 Hz of white noise through a 1-pole filter at 20 Hz (a MEMS output
    # filter; the Allan deviation at τ = 10 ms is 0.48 of the white line) plus a random walk.
    # Fitted with the bandwidth, the white density and the random walk lie within their 0.98
    # intervals and no flicker is claimed. Fitted without it, the short-τ curve departs below
    # white noise, so the filter is fitted as a nuisance parameter (its corner and order,
    # reported) and the same holds: the earlier premise of this test, that a record without
    # its bandwidth is read as less white noise and made-up flicker, no longer holds (the
    # fitted filter is what replaced it; its uncertainty widens the white interval, the
    # refits profiling the corner again).
    rng = np.random.default_rng(77)
    n, rate, bw = 1 << 15, 100.0, 20.0
    truth = {"white": 2e-3, "random_walk": 2e-5}
    y = band_limited_white(rng, n, rate, truth["white"], bw) + random_walk(
        rng, n, rate, truth["random_walk"]
    )
    curve = _curve(y, rate)
    terms = ("white", "flicker", "random_walk")
    good = identify.fit(curve, terms=terms, confidence=0.98, seed=3, n_boot=200, bandwidth=bw)
    for name, value in truth.items():
        ft = good.term(name)
        assert ft.low <= value <= ft.high, (name, value, ft)
    assert good.white_filter == (bw, 1) and good.white_filter_origin == "given"
    flick = good.term("flicker")
    assert not flick.supported, flick
    # the identified model keeps the band limit
    white_term = next(t for t in good.to_channel().terms if t.type == "white")
    assert (white_term.bandwidth, white_term.filter_order) == (bw, 1)
    # the records are period means (band_limited_white), and the short-τ curve says so
    assert (good.sampling, good.sampling_origin) == ("average", "detected")
    fitted = identify.fit(curve, terms=terms, confidence=0.98, seed=3, n_boot=200)
    assert fitted.white_filter_origin == "fitted"
    assert fitted.white_filter[1] == 1
    # the corner: within 5 % (its profile is sharp: the τ = 10-40 ms points have EDF > 10^3)
    assert fitted.white_filter[0] == pytest.approx(bw, rel=0.05)
    assert ("output_filter_fitted", {"bandwidth": fitted.white_filter[0], "order": 1}) in (
        fitted.record_reasons
    )
    for name, value in truth.items():
        ft = fitted.term(name)
        assert ft.low <= value <= ft.high, (name, value, ft)
    assert not fitted.term("flicker").supported
    w_fit, w_good = fitted.term("white"), good.term("white")
    assert (w_fit.high - w_fit.low) > (w_good.high - w_good.low)
    # an ideal record (no filter) has none fitted
    plain = _curve(white(rng, n, rate, truth["white"]), rate)
    ideal = identify.fit(plain, terms="white", seed=3, n_boot=40)
    assert ideal.white_filter is None and ideal.white_filter_origin is None
    assert ideal.record_reasons == ()
    with pytest.raises(AnalysisError, match="bandwidth"):
        identify.fit(curve, terms=terms, bandwidth=-1.0)
    with pytest.raises(AnalysisError, match="filter_order"):
        identify.fit(curve, terms=terms, filter_order=2)
    with pytest.raises(AnalysisError, match="filter order"):
        identify.fit(curve, terms=terms, bandwidth=bw, filter_order=0)
    with pytest.raises(AnalysisError, match="count step"):
        identify.fit(curve, terms=terms, count_step=-1.0)


def test_band_limited_basis_table_matches_the_exact_form() -> None:
    # the fit's table of the period means' band-limited shape against White.allan_variance
    # (two matrix exponentials per τ), inside the table, beyond its end and below its start
    from sensormodel.identify._design import _average_white_avar

    tau = np.geomspace(1e-4, 1e6, 300)
    for order in (1, 2, 4):
        for bw in (0.3, 20.0, 190.0):
            exact = White(density=1.0, bandwidth=bw, filter_order=order).allan_variance(tau)
            assert np.allclose(_average_white_avar(tau, bw, order), exact, rtol=1e-6, atol=0)


def test_increment_record_count_step_is_angle_quantization() -> None:
    # angle increments of a gyro that counts whole steps q of accumulated angle (white rate
    # noise underneath): the quantization error of the angle is uniform, variance q²/12, so
    # Q = q/√12 (IEEE Std 952 Annex C, AVAR 3Q²/τ²); the identification reports that Q beside
    # the fitted quantization term, whose 90 % interval covers it
    rng = np.random.default_rng(31)
    rate, n, q = 100.0, 1 << 17, 2e-5
    angle = np.cumsum(white(rng, n, rate, 2e-4)) / rate
    increments = np.diff(np.concatenate([[0.0], np.round(angle / q) * q]))
    curve = overlapping(increments, rate, increments=True, unit="rad/s", channel="gyro.z")
    result = identify.fit(
        curve, terms=("quantization", "white"), seed=2, n_boot=60, count_step=q, increments=True
    )
    codes = dict(result.record_reasons)
    values = codes["count_step_quantization"]
    assert values["coefficient"] == pytest.approx(q / math.sqrt(12.0), rel=1e-12)
    quant = result.term("quantization")
    assert quant.low <= values["coefficient"] <= quant.high, quant
    assert values["fitted"] == quant.estimate
    assert "count_step_white_floor" not in codes


def _point_record(seed: int, n: int, rate: float, density: float, bw: float) -> np.ndarray:
    """Point samples of white noise (density N) through a 1-pole analog low-pass at ``bw``:
    the exact AR(1) with φ = e^(−2π·bw/rate) and variance N²·π·bw (stationary start)."""
    rng = np.random.default_rng(seed)
    phi = math.exp(-2.0 * math.pi * bw / rate)
    var = density**2 * math.pi * bw
    drive = rng.standard_normal(n) * math.sqrt(var * (1.0 - phi**2))
    drive[0] = rng.standard_normal() * math.sqrt(var)
    from scipy.signal import lfilter

    return lfilter([1.0], [1.0, -phi], drive)


def test_point_sampled_white_basis_and_bootstrap_follow_independent_records() -> None:
    # the point-sample basis (divided by the aliasing factor A, so that its coefficient is the
    # delivered density) against the mean of 200 independent AR(1) records, and the
    # bootstrap's point-sampled records against the same basis (mean_within: 4 standard
    # errors of the mean per τ)
    from sensormodel.identify._bootstrap import _Simulator
    from sensormodel.identify._design import _aliasing_factor, _basis

    rate, bw, n = 200.0, 50.0, 4096
    m = 2 ** np.arange(9)
    phi = math.exp(-2.0 * math.pi * bw / rate)
    alias = _aliasing_factor(rate, bw, 1)
    # the AR(1)'s long-run variance σ²(1 + φ)/(1 − φ) over N²·rate
    assert alias == pytest.approx(math.pi * bw / rate * (1 + phi) / (1 - phi), rel=1e-12)
    basis = _basis("white", m / rate, rate, white_filter=(bw, 1, "point"))
    samples = np.array([oavar(_point_record(s, n, rate, 1.0, bw), m) for s in range(200)])
    # oavar subtracts the record mean: a bias of order 1/n, below a standard error here
    mean_within(samples, alias * basis)
    sim = _Simulator({"white": 1.0}, None, n, rate, (bw, 1, "point"))
    rng = np.random.default_rng(8)
    boot = np.array([oavar(sim.record(rng), m) for _ in range(200)])
    mean_within(boot, basis)


@pytest.mark.slow
def test_band_limited_white_one_answer_whatever_terms() -> None:
    # point samples of white noise (N = 0.15 °/√h) through a 1-pole 50 Hz filter at 200 Hz,
    # 2^19 samples (44 min): default terms, white alone, each with and without the bandwidth.
    # The white estimate is the delivered density N·√A (A = 1.198, the aliasing of point
    # samples: 0.1642 °/√h), inside every answer's 90 % interval, and any two answers differ
    # by less than the wider of their two intervals reaches on that side (an answer whose
    # filter was fitted carries the filter's uncertainty and has the wider one).
    deg_rt_h = math.pi / 180.0 / 60.0
    rate, bw, n = 200.0, 50.0, 1 << 19
    density = 0.15 * deg_rt_h
    curve = _curve(_point_record(5, n, rate, density, bw), rate)
    fits = {
        (terms, given): identify.fit(
            curve, terms=terms, seed=0, n_boot=60, bandwidth=bw if given else None
        )
        for terms in (identify.DEFAULT_TERMS, ("white",))
        for given in (True, False)
    }
    from sensormodel.identify._design import _aliasing_factor

    delivered = density * math.sqrt(_aliasing_factor(rate, bw, 1))
    for key, a in fits.items():
        wa = a.term("white")
        assert wa.low <= delivered <= wa.high, (key, wa.estimate / deg_rt_h)
        for b in fits.values():
            wb = b.term("white")
            below = max(wb.estimate - wb.low, wa.high - wa.estimate)
            above = max(wb.high - wb.estimate, wa.estimate - wa.low)
            assert -below <= wa.estimate - wb.estimate <= above, (key, wa, wb)
        assert a.white_filter is not None and a.white_filter[1] == 1
    # with the bandwidth, the point sampling is told from the short-τ curve, and the filter's
    # input density N = N_out/√A is reported beside the estimate
    given = fits[(("white",), True)]
    assert (given.sampling, given.sampling_origin) == ("point", "detected")
    assert given.term("white").details["input_density"] == pytest.approx(density, rel=0.01)
    assert ("sampling_detected", {"sampling": "point", "origin": "detected"}) in (
        given.record_reasons
    )
    # the fitted curve follows the measured one at the short τ the filter shapes (m ≤ 16:
    # EDF > 10^4, a 68 % interval of the deviation under ±1 %; NIST SP 1065 eq. 45)
    short = given.tau <= 16.0 / rate
    ratio = given.fitted_adev(given.tau[short]) / given.adev[short]
    assert np.all(np.abs(ratio - 1.0) < 0.01), ratio


def test_recovers_project_simulator_record() -> None:
    # the same with a record from sensormodel.simulate (exact period means of the model)
    from sensormodel.model import Channel, NoiseModel
    from sensormodel.simulate import simulate

    truth = {"white": 1e-3, "flicker": 2e-4, "random_walk": 5e-5}
    channel = Channel(
        id="gyro.x",
        quantity="angular_rate",
        unit="rad/s",
        sample_rate=RATE,
        terms=(
            White(density=truth["white"]),
            Flicker(coefficient=truth["flicker"]),
            RandomWalk(density=truth["random_walk"]),
        ),
    )
    model = NoiseModel(sensor={"name": "test"}, channels=(channel,))
    rec = simulate(model, 1 << 16, rate=RATE, seed=7)
    y = np.asarray(rec[:, 0], dtype=float)
    result = identify.fit(_curve(y), terms="white,flicker,random_walk", confidence=0.98, seed=2)
    for name, value in truth.items():
        ft = result.term(name)
        assert ft.low <= value <= ft.high, (name, value, ft)


def test_gauss_markov_on_request() -> None:
    # white + first-order Gauss-Markov (σ = 1e-3, T = 5 s), exact AR(1) discretization
    # x_k = φ x_{k−1} + N(0, σ²(1 − φ²)) point-sampled (T ≫ dt: the period-mean difference is
    # of order dt/T); 0.95 intervals.
    rng = np.random.default_rng(8)
    n, sigma, tc = 1 << 15, 1e-3, 5.0
    phi = math.exp(-1.0 / (RATE * tc))
    drive = rng.standard_normal(n) * sigma * math.sqrt(1.0 - phi**2)
    drive[0] = rng.standard_normal() * sigma
    from scipy.signal import lfilter

    y = lfilter([1.0], [1.0, -phi], drive) + white(rng, n, RATE, 2e-4)
    result = identify.fit(
        _curve(y), terms="white,gauss_markov", confidence=0.95, seed=3, n_boot=100
    )
    gm = result.term("gauss_markov")
    assert gm.supported and gm.parameter == "sigma"
    assert gm.low <= sigma <= gm.high
    assert gm.details["time_constant_low"] <= tc <= gm.details["time_constant_high"]
    term = result.to_channel().term("gauss_markov")
    assert term.time_constant == pytest.approx(gm.details["time_constant"])
    assert "time_constant_uncertainty" in term.meta


def _gauss_markov_record(
    rng: np.random.Generator, n: int, rate: float, sigma: float, tc: float
) -> np.ndarray:
    """A first-order Gauss-Markov record point-sampled by its exact AR(1) step (stationary
    start): x_k = φ x_{k−1} + N(0, σ²(1 − φ²)), φ = e^(−1/(rate·T))."""
    from scipy.signal import lfilter

    phi = math.exp(-1.0 / (rate * tc))
    drive = rng.standard_normal(n) * sigma * math.sqrt(1.0 - phi**2)
    drive[0] = rng.standard_normal() * sigma
    return lfilter([1.0], [1.0, -phi], drive)


def test_gauss_markov_time_constant_resolved_by_a_long_record() -> None:
    # T = 300 s in 3 h at 2 Hz (36 T): the Allan-deviation peak (τ ≈ 570 s) lies well inside
    # what the record resolves; no edge reason, and T's interval is finite and covers 300 s
    rate, n, sigma, tc = 2.0, 21_600, 2.4e-4, 300.0
    rng = np.random.default_rng(31)
    y = _gauss_markov_record(rng, n, rate, sigma, tc) + white(rng, n, rate, 5e-4)
    result = identify.fit(_curve(y, rate), terms="white,gauss_markov", seed=4, n_boot=60)
    gm = result.term("gauss_markov")
    assert gm.supported and gm.reasons == () and result.term_reasons == ()
    low, high = gm.details["time_constant_low"], gm.details["time_constant_high"]
    assert math.isfinite(high) and low <= tc <= high, gm.details
    assert gm.low <= sigma <= gm.high
    # the search range ends where the record stops resolving T: about an eighth of its length
    assert 0.05 * n / rate < high <= n / rate / 1.8926


def test_gauss_markov_time_constant_too_long_for_the_record_is_not_resolved() -> None:
    # T = 3000 s in 20 min at 2 Hz: the record sees only the rising side of the term's Allan
    # deviation; the result says "not resolved (T ≥ …)", never a silent value at a grid end
    rate, n, sigma, tc = 2.0, 2_400, 2.4e-4, 3000.0
    rng = np.random.default_rng(32)
    y = _gauss_markov_record(rng, n, rate, sigma, tc) + white(rng, n, rate, 2e-5)
    result = identify.fit(_curve(y, rate), terms="white,gauss_markov", seed=5, n_boot=60)
    gm = result.term("gauss_markov")
    codes = dict(gm.reasons)
    assert set(codes) == {"estimate_at_search_edge", "time_constant_not_resolved"}
    assert result.term_reasons == gm.reasons
    edge, why = codes["estimate_at_search_edge"], codes["time_constant_not_resolved"]
    assert edge["term"] == "gauss_markov" and edge["parameter"] == "time_constant"
    assert edge["edge"] == "upper" and edge["value"] == gm.details["time_constant"]
    # the estimate is within the last step of the search, below what a 20-minute record
    # resolves; the bound T ≥ … is the interval's lower end, at most the estimate
    t_est = gm.details["time_constant"]
    assert t_est <= why["resolvable"] == edge["high"]
    assert why["bound"] == gm.details["time_constant_low"] <= t_est
    assert why["resolvable"] < 0.25 * n / rate < tc
    assert why["tau"] == pytest.approx(1.8926 * why["resolvable"])
    # σ read as a lower bound (only σ²/T is fixed by the rising side), and it is one
    assert gm.supported and why["sigma"] == gm.estimate < sigma
    assert gm.details["time_constant_high"] == math.inf
    # the model file keeps the unbounded end as null, not a number at the grid end
    meta = result.to_channel().term("gauss_markov").meta["time_constant_uncertainty"]
    assert meta["high"] is None


def test_gauss_markov_standing_in_for_white_noise_is_at_the_lower_edge() -> None:
    # white noise and a random walk (1 h at 2 Hz) fitted as Gauss-Markov + random walk: the
    # Gauss-Markov term takes the white noise with T at the short end of its search (a quarter
    # of the shortest τ), and says so
    rate, n = 2.0, 7200
    rng = np.random.default_rng(33)
    y = white(rng, n, rate, 7e-4) + random_walk(rng, n, rate, 2e-5)
    result = identify.fit(_curve(y, rate), terms="gauss_markov,random_walk", seed=6, n_boot=40)
    gm = result.term("gauss_markov")
    codes = dict(gm.reasons)
    assert set(codes) == {"estimate_at_search_edge", "time_constant_at_lower_edge"}
    edge = codes["estimate_at_search_edge"]
    assert edge["edge"] == "lower" and edge["low"] == pytest.approx(0.25 / rate)
    assert edge["value"] == gm.details["time_constant"] < edge["low"] * 1.5
    why = codes["time_constant_at_lower_edge"]
    # T ≤ the bound: the interval's upper end, inside the first octave of τ
    assert gm.details["time_constant"] <= why["bound"] == gm.details["time_constant_high"]
    assert why["bound"] < why["shortest_tau"] == 1.0 / rate


# ---------------------------------------------------------------------------------------------
# the coverage study
# ---------------------------------------------------------------------------------------------

#: Trials of the coverage study, record length, bootstrap records per trial.
COVERAGE_TRIALS = 200
COVERAGE_SAMPLES = 1 << 14
COVERAGE_BOOT = 100
#: True values: white, flicker and random walk with the crossovers at τ ≈ 0.1 s (white to
#: flicker) and τ ≈ 2 s (flicker to random walk) within a 164 s record at 100 Hz (arbitrary
#: units "as recorded"); quantization and ramp are fitted too (the default terms) but absent.
COVERAGE_TRUTH = {"white": 0.21, "flicker": 1.0, "random_walk": 0.813}


def _truth_record(seed: int, n: int) -> np.ndarray:
    """A record of the coverage study's model (:data:`COVERAGE_TRUTH`) from the independent
    generators."""
    rng = np.random.default_rng(seed)
    t = COVERAGE_TRUTH
    return (
        white(rng, n, RATE, t["white"])
        + flicker(rng, n, RATE, t["flicker"])
        + random_walk(rng, n, RATE, t["random_walk"])
    )


def _coverage_trial(k: int) -> dict[str, tuple[float, float, float, bool, float, float, float]]:
    curve = overlapping(_truth_record(100_000 + k, COVERAGE_SAMPLES), RATE)
    result = identify.fit(curve, seed=k, n_boot=COVERAGE_BOOT)
    # the naive interval: weighted least squares with independent points of variance
    # 2·AVAR²/edf (what a per-point fit would state), 90 %, on the variance scale
    names = [ft.term for ft in result.terms]
    unit = {  # each term at unit parameter: its exact Allan variance (sensormodel.terms)
        "quantization": Quantization(coefficient=1.0),
        "white": White(density=1.0),
        "flicker": Flicker(coefficient=1.0),
        "random_walk": RandomWalk(density=1.0),
        "ramp": Ramp(slope=1.0),
    }
    phi = np.array([unit[nm].allan_variance(curve.tau, sample_rate=RATE) for nm in names]).T
    coef = np.array([ft.estimate**2 for ft in result.terms])
    model = phi @ coef
    cov = np.linalg.pinv(phi.T @ (phi * (curve.edf / (2.0 * model**2))[:, None]))
    half = 1.6448536 * np.sqrt(np.diag(cov))
    out = {}
    for j, ft in enumerate(result.terms):
        out[ft.term] = (
            ft.estimate,
            ft.low,
            ft.high,
            ft.supported,
            math.sqrt(max(coef[j] - half[j], 0.0)),
            math.sqrt(coef[j] + half[j]),
            ft.details["percentile_low"],
            ft.details["percentile_high"],
        )
    return out


@pytest.mark.slow
def test_coverage_of_the_stated_intervals() -> None:
    """200 seeded records (2^14 samples each) from the independent generators; each fitted with
    the default terms and 90 % intervals (100 bootstrap records).

    Band: with 200 trials a true coverage of 0.90 gives a binomial count with sd
    √(200·0.9·0.1) = 4.24 trials = 2.1 %; the band 85-95 % that the issue asks is ±2.36 sd,
    which a correctly calibrated method leaves with probability 1.8 % per term (binomial,
    two-sided). The trials are independent and seeded, so the result is reproducible.
    """
    workers = min(2, len(os.sched_getaffinity(0)))
    ctx = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(max_workers=workers, mp_context=ctx) as pool:
        rows = list(pool.map(_coverage_trial, range(COVERAGE_TRIALS), chunksize=10))
    n = len(rows)
    for name, value in COVERAGE_TRUTH.items():
        covered = sum(r[name][1] <= value <= r[name][2] for r in rows)
        naive = sum(r[name][4] <= value <= r[name][5] for r in rows)
        supported = sum(r[name][3] for r in rows)
        print(f"{name}: coverage {covered / n:.3f}, naive {naive / n:.3f}, supported {supported}")
        assert 0.85 <= covered / n <= 0.95, (name, covered / n)
        assert supported >= 0.95 * n, (name, supported)
    # the naive per-point intervals are too narrow for the correlated points: the random walk's
    # (read from the few, strongly correlated long-τ points) covers less than the band allows
    rw = COVERAGE_TRUTH["random_walk"]
    naive_rw = sum(r["random_walk"][4] <= rw <= r["random_walk"][5] for r in rows) / n
    assert naive_rw < 0.85, naive_rw

    # the ratio interval covers the random walk, whose estimate has the most skewed law, better
    # than the plain percentile interval of the same bootstrap records (in development, over
    # 1100 other trials: ratio 0.90-0.93, percentile 0.82-0.88)
    for name, value in COVERAGE_TRUTH.items():
        pct = sum(r[name][6] <= value <= r[name][7] for r in rows) / n
        print(f"{name}: percentile interval coverage {pct:.3f}")
    pct_rw = sum(r["random_walk"][6] <= rw <= r["random_walk"][7] for r in rows) / n
    ratio_rw = sum(r["random_walk"][1] <= rw <= r["random_walk"][2] for r in rows) / n
    assert pct_rw < ratio_rw, (pct_rw, ratio_rw)
    # absent terms: ramp and quantization are tested at the nominal level 1 % (one-sided); the
    # covariance behind the test comes from 50 bootstrap records, so the real level is somewhat
    # higher. Assert no worse than the 5 % level of the other terms: at most the 0.999 binomial
    # quantile of 200 trials at 5 %, 21 records.
    for name in ("quantization", "ramp"):
        false = sum(r[name][3] for r in rows)
        assert false <= binom.ppf(0.999, n, 0.05), (name, false)


# ---------------------------------------------------------------------------------------------
# slope readings (IEEE Std 952 Annex C)
# ---------------------------------------------------------------------------------------------


def test_slope_readings_on_exact_curves() -> None:
    tau = 2.0 ** np.arange(-5, 8)  # 0.03-128 s, includes 1 s
    n_, k_, b_ = 3e-4, 2e-5, 1e-4
    readings, notes = identify.slope_readings(tau, np.sqrt(ieee952.avar_white(tau, n_)))
    assert readings["white"] == pytest.approx(n_, rel=1e-12)  # σ(1 s) = N
    readings, notes = identify.slope_readings(tau, np.sqrt(ieee952.avar_random_walk(tau, k_)))
    # nearest point to 3 s is 4 s: carried along the +½ line, σ(τ)·√(3/τ) = K
    assert readings["random_walk"] == pytest.approx(k_, rel=1e-12)
    flat = np.full(tau.shape, ieee952.FLICKER_FLOOR * b_**2)
    # small white and random-walk parts put the minimum at τ = sqrt(3 N²/K²) = 8 s, where they
    # add 2·N·K/√3 = 2.5e-13 to the floor 4.4e-9 (a relative 3e-5 on the deviation)
    readings, notes = identify.slope_readings(
        tau,
        np.sqrt(flat + ieee952.avar_white(tau, 1e-6) + ieee952.avar_random_walk(tau, 2.165e-7)),
    )
    # min σ / 0.6643 = B (IEEE Std 952 Annex C)
    assert readings["flicker"] == pytest.approx(b_, rel=1e-4)
    assert notes == ()


def test_slope_readings_say_when_the_point_is_off_the_curve() -> None:
    tau = np.array([2.0, 4.0, 8.0, 16.0])
    adev = np.sqrt(ieee952.avar_white(tau, 1e-3))
    readings, notes = identify.slope_readings(tau, adev)
    assert readings["white"] == pytest.approx(1e-3, rel=1e-12)
    assert any(note.startswith("white: τ = 1 s is outside the curve") for note in notes)
    assert any("flicker: the Allan deviation still falls" in note for note in notes)


def test_identification_carries_reason_codes_beside_its_notes() -> None:
    # a record at 0.2 Hz: the curve starts at τ = 5 s, past both reading points (1 s and 3 s),
    # so both readings are carried from its first point; each note has its code and numbers
    rng = np.random.default_rng(6)
    rate = 0.2
    y = white(rng, 4096, rate, 1e-3) + random_walk(rng, 4096, rate, 1e-6)
    result = identify.fit(_curve(y, rate), terms="white,random_walk", seed=1, n_boot=40)
    carried = [r for r in result.reasons if r.code == "reading_carried"]
    assert [(r.term, r.target) for r in carried] == [("white", 1.0), ("random_walk", 3.0)]
    for r in carried:
        assert r.tau == result.tau[0] == 5.0
        assert r.curve == (result.tau[0], result.tau[-1])
    assert len(result.reasons) == len(result.notes)
    for r, note in zip(result.reasons, result.notes, strict=True):
        assert isinstance(r, identify.SlopeNote)
        assert note.startswith(r.term + ":")
    # the readings' own notes are the same sentences
    assert identify.slope_readings(result.tau, result.adev)[1] == result.notes


def test_slope_reading_disagreement_is_flagged() -> None:
    # white + strong flicker: σ(1 s) is mostly flicker, so the −½ reading exceeds N
    rng = np.random.default_rng(4)
    n = 1 << 15
    y = white(rng, n, RATE, 1e-4) + flicker(rng, n, RATE, 5e-4)
    result = identify.fit(_curve(y), terms="white,flicker", seed=1, n_boot=60)
    ft = result.term("white")
    assert ft.slope_reading > ft.high
    assert ft.disagrees
    assert result.slope_readings["white"] == ft.slope_reading


# ---------------------------------------------------------------------------------------------
# the result objects, the model, reproducibility
# ---------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def small_fit():
    rng = np.random.default_rng(9)
    n = 1 << 14
    y = white(rng, n, RATE, 3e-4) + random_walk(rng, n, RATE, 3e-4)
    curve = _curve(y)
    return curve, identify.fit(curve, seed=5, n_boot=60)


def test_model_carries_supported_terms_with_uncertainty(small_fit, tmp_path) -> None:
    from sensormodel.model import NoiseModel

    curve, result = small_fit
    ch = result.to_channel()
    assert ch.id == "gyro.z" and ch.unit == "rad/s" and ch.quantity == "angular_rate"
    assert ch.sample_rate == RATE
    kept = {t.type for t in ch.terms}
    assert kept == {ft.term for ft in result.terms if ft.supported}
    assert {"white", "random_walk"} <= kept
    for term in ch.terms:
        ft = result.term(term.type)
        assert term.meta["uncertainty"] == {
            "low": ft.low,
            "high": ft.high,
            "confidence": 0.9,
        }
        assert term.meta["supported"] is True
        assert next(iter(term.parameters().values())) == ft.estimate
    model = identify.to_model([result], sensor={"name": "unit 42"}, source="rec.csv")
    assert model.provenance["from"] == "recording"
    assert model.provenance["file"] == "rec.csv"
    path = tmp_path / "m.json"
    model.save(path)
    back = NoiseModel.load(path)
    assert back.channel("gyro.z").terms == ch.terms
    assert back.channel("gyro.z").terms[0].meta["uncertainty"]["confidence"] == 0.9


def test_fitted_terms_fields(small_fit) -> None:
    curve, result = small_fit
    assert [ft.term for ft in result.terms] == list(identify.DEFAULT_TERMS)
    for ft in result.terms:
        assert 0.0 <= ft.low <= ft.estimate <= ft.high
        assert ft.confidence == 0.9
        if ft.tau_range is not None:
            assert curve.tau[0] <= ft.tau_range[0] <= ft.tau_range[1] <= curve.tau[-1]
        assert (ft.slope_reading is None) == (ft.term not in ("white", "flicker", "random_walk"))
    assert result.term("white").tau_range[0] == curve.tau[0]
    assert result.term("random_walk").tau_range[1] == curve.tau[-1]
    assert result.duration == pytest.approx(curve.n_samples / RATE)
    with pytest.raises(AnalysisError, match="tau"):
        result.fitted_adev([-1.0])


def test_same_seed_same_result_and_progress(small_fit) -> None:
    curve, result = small_fit
    calls = []
    again = identify.fit(curve, seed=5, n_boot=60, progress=lambda d, t: calls.append((d, t)))
    assert again == result
    assert calls and calls[-1][0] == calls[-1][1]
    assert all(b >= a for (a, _), (b, _) in zip(calls, calls[1:], strict=False))
    other = identify.fit(curve, seed=6, n_boot=60)
    assert other.term("white").estimate == result.term("white").estimate  # the fit
    assert other.term("white").low != result.term("white").low  # the bootstrap


def test_fit_recording(tmp_path) -> None:
    from sensormodel.recording import read_recording

    rng = np.random.default_rng(12)
    n = 1 << 13
    y = white(rng, n, RATE, 0.01)
    path = tmp_path / "rec.csv"
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("time [s],gyro_x [rad/s],gyro_y [rad/s]\n")
        for i in range(n):
            fh.write(f"{i / RATE!r},{float(y[i])!r},{float(-y[i])!r}\n")
    rec = read_recording(path)
    results = identify.fit_recording(rec, terms="white,random_walk", seed=1, n_boot=60)
    assert [r.channel for r in results] == ["gyro.x", "gyro.y"]
    direct = identify.fit(
        overlapping(rec.data["gyro.x"], RATE, unit="rad/s", channel="gyro.x"),
        terms="white,random_walk",
        seed=1,
        n_boot=60,
    )
    assert results[0] == direct
    assert results[0].term("white").low <= 0.01 <= results[0].term("white").high
    with pytest.raises(AnalysisError, match="no channel 'gyro.q'"):
        identify.fit_recording(rec, channels=["gyro.q"])


# ---------------------------------------------------------------------------------------------
# bad input
# ---------------------------------------------------------------------------------------------


def test_bad_input_is_refused(small_fit) -> None:
    from dataclasses import replace

    curve, _ = small_fit
    with pytest.raises(AnalysisError, match="unknown term 'bias'; expected one of"):
        identify.fit(curve, terms="white,bias")
    with pytest.raises(AnalysisError, match="'white' is given twice"):
        identify.fit(curve, terms=["white", "white"])
    with pytest.raises(AnalysisError, match="got no terms"):
        identify.fit(curve, terms="")
    with pytest.raises(AnalysisError, match="confidence: got 1.5"):
        identify.fit(curve, confidence=1.5)
    with pytest.raises(AnalysisError, match="n_boot: got 10; expected at least 40"):
        identify.fit(curve, n_boot=10)
    with pytest.raises(AnalysisError, match="seed: got -1"):
        identify.fit(curve, seed=-1)
    with pytest.raises(AnalysisError, match="expected an AllanCurve"):
        identify.fit([1.0, 2.0])
    short = overlapping(np.random.default_rng(1).standard_normal(40), RATE)
    with pytest.raises(
        AnalysisError,
        match="the curve of the 40-sample record has 5 τ for 5 terms; expected at least 6 τ",
    ):
        identify.fit(short)
    flat = replace(
        curve,
        adev=np.where(np.arange(curve.tau.size) == 2, 0.0, curve.adev),
        ci_low=np.zeros(curve.tau.size),
    )
    with pytest.raises(AnalysisError, match=r"Allan deviation at τ = 0.04 s is 0.0"):
        identify.fit(flat)
    off_grid = replace(curve, tau=curve.tau * 1.5)
    with pytest.raises(AnalysisError, match="not a whole number of sample periods"):
        identify.fit(off_grid)
    unknown = replace(curve, n_samples=None, n_clusters=None)
    with pytest.raises(AnalysisError, match="neither n_samples nor n_clusters"):
        identify.fit(unknown)
    with pytest.raises(AnalysisError, match="got no identifications"):
        identify.to_model([])


# ---------------------------------------------------------------------------------------------
# limit_test: the parametric bootstrap test of a term at a value
# ---------------------------------------------------------------------------------------------


def test_limit_test_p_values(small_fit) -> None:
    _curve_, idn = small_fit
    w = idn.term("white")
    low = identify.limit_test(idn, "white", 0.5 * w.estimate, seed=1)
    at = identify.limit_test(idn, "white", w.estimate, seed=1)
    high = identify.limit_test(idn, "white", 2.0 * w.estimate, seed=1)
    b = at.n_records
    assert b == max(idn.n_boot, 59)  # 3/α − 1 records at least, α = 0.05
    # a value far below the estimate: no null record reaches it (Monte Carlo p-value 1/(B+1))
    assert low.p_above == pytest.approx(1.0 / (b + 1)) and low.p_below == 1.0
    assert high.p_below == pytest.approx(1.0 / (b + 1)) and high.p_above == 1.0
    # at the estimate itself neither side is rejected; the two p-values overlap by the ties
    assert at.p_above > 0.05 and at.p_below > 0.05
    assert at.p_above + at.p_below >= 1.0 + 1.0 / (b + 1) - 1e-12
    assert at.estimate == pytest.approx(w.estimate, rel=1e-6)
    # the null model: white held at the value, the random walk refitted beside it
    assert at.null_parameters["white"] == pytest.approx(w.estimate)
    rw = idn.term("random_walk").estimate
    assert at.null_parameters["random_walk"] == pytest.approx(rw, rel=0.05)
    assert high.null_parameters["white"] == pytest.approx(2.0 * w.estimate)
    assert identify.limit_test(idn, "white", w.estimate, seed=1) == at  # seeded


def test_limit_test_refuses_bad_input(small_fit) -> None:
    _curve_, idn = small_fit
    with pytest.raises(AnalysisError, match="gauss_markov"):
        identify.limit_test(idn, "gauss_markov", 1.0)
    for value in (0.0, -1.0, math.nan, math.inf):
        with pytest.raises(AnalysisError, match="value"):
            identify.limit_test(idn, "white", value)
    with pytest.raises(AnalysisError, match="at least 59"):
        identify.limit_test(idn, "white", 1e-3, n_records=20)
    from dataclasses import replace

    with pytest.raises(AnalysisError, match="fit state"):
        identify.limit_test(replace(idn, refit_state=None), "white", 1e-3)


LEVEL_TRIALS = 120
LEVEL_SAMPLES = 4096


def _level_trial(k: int) -> dict[str, tuple[float, float, float, float]]:
    """One record of the coverage study's model (white, flicker between it and a random walk),
    fitted, then each term tested at its true value: (p_above, p_below, low, high)."""
    t = COVERAGE_TRUTH
    y = _truth_record(300_000 + k, LEVEL_SAMPLES)
    idn = identify.fit(_curve(y), terms=("white", "flicker", "random_walk"), seed=k, n_boot=41)
    out = {}
    for name in ("white", "flicker"):
        test = identify.limit_test(idn, name, t[name], seed=10_000 + k)
        ft = idn.term(name)
        out[name] = (test.p_above, test.p_below, ft.low, ft.high)
    return out


@pytest.mark.slow
def test_limit_test_level_by_simulation() -> None:
    """The test at the true value rejects on each side in about α = 5 % of records.

    120 seeded records of 4096 samples from the independent generators (the coverage study's
    model: flicker squeezed between white noise and a random walk, where the ratio interval of
    the estimate is narrow on the side of a high estimate). Each side's rejection count is
    binomial(120, ≤ 0.05) for a test of level 5 %: the allowance is its 99.9 % quantile
    (scipy.stats.binom; 14). Development runs of 200-300 records of the same kind through
    acceptance.verify: 4.0-5.5 % per side for the test, 9.5-13 % for the interval alone.
    """
    workers = min(2, len(os.sched_getaffinity(0)))
    ctx = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(max_workers=workers, mp_context=ctx) as pool:
        rows = list(pool.map(_level_trial, range(LEVEL_TRIALS), chunksize=10))
    allowed = binom.ppf(0.999, LEVEL_TRIALS, 0.05)
    for name in ("white", "flicker"):
        above = sum(r[name][0] <= 0.05 for r in rows)
        below = sum(r[name][1] <= 0.05 for r in rows)
        interval_above = sum(r[name][2] > COVERAGE_TRUTH[name] for r in rows)
        print(f"{name}: test rejects above {above}, below {below}; interval above {interval_above}")
        assert above <= allowed, (name, above)
        assert below <= allowed, (name, below)
        # and the test is not trivially passive: at the truth its p-values spread over (0, 1]
        p = np.array([r[name][0] for r in rows])
        assert 0.3 < float(np.median(p)) < 0.7, (name, float(np.median(p)))


def test_limit_test_profiles_a_gauss_markov_time_constant() -> None:
    # A Gauss-Markov bias (σ = 1 mrad/s, T = 30 s; generated as white noise through a 1-pole
    # filter at 1/(2πT), see band_limited_white) under white noise, 2^13 s at 1 Hz. Testing σ
    # at a value, the null model's T is refitted with σ held there (a nuisance parameter like
    # the other terms): at the estimate it is the fitted T, at half the estimate another one.
    rng = np.random.default_rng(31)
    n, rate, t_c, sigma = 1 << 13, 1.0, 30.0, 1e-3
    bw = 1.0 / (2.0 * math.pi * t_c)
    y = band_limited_white(rng, n, rate, sigma / math.sqrt(math.pi * bw), bw)
    y += white(rng, n, rate, 2e-3)
    idn = identify.fit(_curve(y, rate), terms=("white", "gauss_markov"), seed=2, n_boot=41)
    gm = idn.term("gauss_markov")
    assert gm.supported and gm.low <= sigma <= gm.high, gm
    t_fit = gm.details["time_constant"]
    at = identify.limit_test(idn, "gauss_markov", gm.estimate, seed=3)
    assert at.null_time_constant == pytest.approx(t_fit, rel=0.02)
    assert at.p_above > 0.05 and at.p_below > 0.05
    half = identify.limit_test(idn, "gauss_markov", 0.5 * gm.estimate, seed=3)
    assert abs(math.log(half.null_time_constant / t_fit)) > 0.05, (half, t_fit)
    assert half.p_above <= 0.05  # the estimate is far above half of itself
    # a test of the white term keeps the fitted T
    w = identify.limit_test(idn, "white", idn.term("white").estimate, seed=3)
    assert w.null_time_constant == pytest.approx(t_fit, rel=0.02)
