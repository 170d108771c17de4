"""The bootstrap of sensormodel.identify: its record generator has the exact Allan variances of
the terms (IEEE Std 952-1997 Annex C), its Allan variance is sensormodel.allan's, and its
records do not depend on how they are shared among threads.

These test the private module ``sensormodel.identify._bootstrap`` (and the fit's bases, which
the generator must match) through its private names: no public function exposes them.
"""

from __future__ import annotations

import math

import allantools
import numpy as np
import pytest
from identify_records import flicker_avar, mean_within, random_walk, white
from reference import ieee952

from sensormodel.allan import overlapping
from sensormodel.errors import AnalysisError
from sensormodel.identify._bootstrap import (
    _bootstrap,
    _BootstrapAllan,
    _Progress,
    _Simulator,
    _white_alias_sum,
)
from sensormodel.identify._checks import _check_curve
from sensormodel.identify._design import _basis

# ---------------------------------------------------------------------------------------------
# the Allan variance of the bootstrap records
# ---------------------------------------------------------------------------------------------


def test_allan_engine_matches_reference_libraries() -> None:
    # the bootstrap's Allan variance against allantools (reference library) and
    # sensormodel.allan, whose block sums it uses
    rng = np.random.default_rng(3)
    rate = 50.0
    y = white(rng, 5000, rate, 0.3) + random_walk(rng, 5000, rate, 0.05)
    curve = overlapping(y, rate)
    ours = _BootstrapAllan(y.size, curve.m)(y)
    np.testing.assert_allclose(np.sqrt(ours), curve.adev, rtol=1e-10)
    taus, adev, _err, _n = allantools.oadev(y, rate=rate, data_type="freq", taus=curve.tau)
    np.testing.assert_allclose(np.sqrt(ours), adev, rtol=1e-9)


def test_allan_engine_reuses_its_buffers_across_records_of_many_blocks() -> None:
    # records longer than the engine's blocks (2^17 samples), one engine for three records:
    # each result is sensormodel.allan's to rounding (the same block sums on the same phase;
    # only the mean's summation order may differ), and a record does not leak into the next
    rng = np.random.default_rng(21)
    n, rate = 1 << 17, 100.0
    records = [white(rng, n, rate, 0.2) + random_walk(rng, n, rate, 0.01) for _ in range(3)]
    curve = overlapping(records[0], rate)
    engine = _BootstrapAllan(n, curve.m)
    for y in records:
        expected = overlapping(y, rate, taus=curve.tau).adev ** 2
        np.testing.assert_allclose(engine(y), expected, rtol=1e-12)
    with pytest.raises(AnalysisError, match="increasing m"):
        _BootstrapAllan(n, curve.m[::-1])


def test_bootstrap_records_do_not_depend_on_the_threads() -> None:
    # 2^18 samples: the records are shared between two threads; record i still comes from its
    # own generator, default_rng(seeds.spawn(count)[i]), whichever thread ran it
    rng = np.random.default_rng(22)
    n, rate = 1 << 18, 100.0
    curve = overlapping(white(rng, n, rate, 0.2), rate, taus=2.0 ** np.arange(-6, 6))
    c = _check_curve(curve, 2)
    params = {"white": 0.2, "random_walk": 0.01}
    calls = []
    av = _bootstrap(
        params, None, c, 4, np.random.SeedSequence(5), _Progress(lambda d, t: calls.append(d), 0, 4)
    )
    children = np.random.SeedSequence(5).spawn(4)
    sim = _Simulator(params, None, n, rate)
    engine = _BootstrapAllan(n, c.m)
    for i in range(4):
        np.testing.assert_array_equal(av[i], engine(sim.record(np.random.default_rng(children[i]))))
    assert calls and calls[-1] == 4


# ---------------------------------------------------------------------------------------------
# the bootstrap simulator against the exact Allan variances (IEEE Std 952 Annex C)
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("params", "time_constant", "extra"),
    [
        ({"white": 0.3}, None, 0.0),
        # through a 1-pole output filter at 2 Hz (sample rate 10 Hz): a Gauss-Markov process
        # of T = 1/(2π·2 Hz), σ² = N²·π·2 Hz (two-sided N²|B|² integrated), IEEE 952 Markov row
        ({"white": 0.3, "white_filter": (2.0, 1)}, None, 0.0),
        ({"quantization": 0.02}, None, 0.0),
        ({"random_walk": 0.1}, None, 0.0),
        # spectral synthesis over 2n samples with the slope for the missing band: within 1 %
        # up to an eighth of the record (documented in _Simulator)
        ({"flicker": 1.0}, None, 0.01),
        ({"ramp": 0.01}, None, 0.0),
        ({"gauss_markov": 0.5}, 2.0, 0.0),
    ],
    ids=[
        "white",
        "band-limited white",
        "quantization",
        "random_walk",
        "flicker",
        "ramp",
        "gauss_markov",
    ],
)
def test_simulator_has_the_exact_allan_variance(params, time_constant, extra) -> None:
    n, rate = 4096, 10.0
    m = 2 ** np.arange(10)  # τ up to n/8 samples
    tau = m / rate
    params = dict(params)
    white_filter = params.pop("white_filter", None)
    sim = _Simulator(params, time_constant, n, rate, white_filter)
    rng = np.random.default_rng(5)
    engine = _BootstrapAllan(n, m)
    samples = np.array([engine(sim.record(rng)) for _ in range(300)])
    (name, value), *_ = params.items()
    if white_filter is not None:
        name = "band-limited white"
        bw = white_filter[0]
        t_c = 1.0 / (2.0 * math.pi * bw)
        sigma = value * math.sqrt(math.pi * bw)
    theory = {
        "white": lambda: ieee952.avar_white(tau, value),
        "band-limited white": lambda: ieee952.avar_markov(tau, sigma * math.sqrt(2.0 / t_c), t_c),
        "quantization": lambda: ieee952.avar_quantization(tau, value),
        "random_walk": lambda: ieee952.avar_random_walk(tau, value),
        "flicker": lambda: flicker_avar(tau, value, rate / 2.0),
        "ramp": lambda: ieee952.avar_ramp(tau, value),
        # Markov row with (q_c T_c)² = 2σ²T, i.e. q_c = σ√(2/T) (reference notes §2)
        "gauss_markov": lambda: ieee952.avar_markov(
            tau, value * math.sqrt(2.0 / time_constant), time_constant
        ),
    }[name]()
    if name == "ramp":  # deterministic: exact to rounding
        np.testing.assert_allclose(samples.mean(axis=0), theory, rtol=1e-9)
    else:
        mean_within(samples, theory, extra)
    if white_filter is not None:
        # the fit's basis is the same curve (terms.White with the bandwidth), and far above
        # the filter's time constant it is the plain white line
        basis = _basis("white", tau, rate, white_filter=white_filter) * value**2
        np.testing.assert_allclose(basis, theory, rtol=1e-9)
        assert theory[0] < 0.7 * ieee952.avar_white(tau[0], value)
        # (the relative gap is about 3T/(2τ), 2.3e-3 at τ = 51.2 s)
        np.testing.assert_allclose(theory[-1], ieee952.avar_white(tau[-1], value), rtol=3e-3)


def test_band_limited_white_spectrum_folds_every_alias() -> None:
    # Σ_k sinc²(x + k) = 1 (the spectrum of period means of white noise is flat), and with a
    # Butterworth |B|² the brute-force sum over 40 001 aliases (its own truncation ~1e-5)
    f = np.fft.rfftfreq(1000, d=1 / 200.0)[1:]
    np.testing.assert_allclose(_white_alias_sum(f, 200.0, None), 1.0)
    np.testing.assert_allclose(_white_alias_sum(f, 200.0, (1e9, 2)), 1.0, atol=1e-6)
    for bw, order in ((50.0, 1), (50.0, 3), (8000.0, 1)):
        k = np.arange(-20_000, 20_001)[:, None]
        g = f[None, :] + k * 200.0
        brute = np.sum(np.sinc(g / 200.0) ** 2 / (1.0 + (g / bw) ** (2 * order)), axis=0)
        got = _white_alias_sum(f, 200.0, (bw, order))
        np.testing.assert_allclose(got, brute, rtol=2e-5)


# ---------------------------------------------------------------------------------------------
# the test at a limit: a null whose Gauss-Markov time constant sits at the end of its search
# ---------------------------------------------------------------------------------------------


def _gauss_markov_plus_white(rng, n, rate, sigma, tc, density):
    """A first-order Gauss-Markov process (σ, T) point-sampled by its exact AR(1) step, plus
    white noise of density N (IEEE Std 952 Annex C: std N·√rate)."""
    from scipy.signal import lfilter

    phi = math.exp(-1.0 / (rate * tc))
    drive = rng.standard_normal(n) * sigma * math.sqrt(1.0 - phi**2)
    drive[0] = rng.standard_normal() * sigma
    return lfilter([1.0], [1.0, -phi], drive) + white(rng, n, rate, density)


def test_limit_test_flags_a_null_time_constant_at_the_end_of_its_search() -> None:
    # T = 3000 s in 20 min at 2 Hz: the record resolves only T ≲ 60 s, so σ held at twice its
    # estimate pushes the null's profiled T to the upper end of the search (the rising side
    # fixes σ²/T): the result says so; a null inside the range (T = 30 s in 3 h) says nothing
    from sensormodel import identify

    rng = np.random.default_rng(32)
    rate, n = 2.0, 2_400
    y = _gauss_markov_plus_white(rng, n, rate, 2.4e-4, 3000.0, 2e-5)
    idn = identify.fit(overlapping(y, rate), terms="white,gauss_markov", seed=5, n_boot=60)
    gm = idn.term("gauss_markov")
    test = identify.limit_test(idn, "gauss_markov", 2.0 * gm.estimate, seed=1)
    codes = dict(test.reasons)
    assert set(codes) == {"null_time_constant_at_search_edge"}
    edge = codes["null_time_constant_at_search_edge"]
    assert edge["edge"] == "upper" and edge["value"] == test.null_time_constant
    assert edge["high"] < 0.25 * n / rate and edge["value"] > 0.8 * edge["high"]

    rng = np.random.default_rng(31)
    rate, n = 2.0, 21_600
    y = _gauss_markov_plus_white(rng, n, rate, 2.4e-4, 30.0, 5e-4)
    idn = identify.fit(overlapping(y, rate), terms="white,gauss_markov", seed=4, n_boot=60)
    gm = idn.term("gauss_markov")
    test = identify.limit_test(idn, "gauss_markov", gm.estimate, seed=1)
    assert test.reasons == () and test.null_time_constant is not None
