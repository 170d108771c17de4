"""Tests of sensormodel.allan against published values and reference libraries.

Sources (each check names its own):
* NIST SP 1065 (W. J. Riley, "Handbook of Frequency Stability Analysis", 2008): the 1000-point
  and 9-point test sets (section 12.4; "Table 31" per secondary citations), the chi-square
  interval eq. (45), the simple EDF formulas of Table 5 — values in tests/reference/nist_sp1065.py.
* allantools 2024.06 as a reference library: ``oadev`` (same estimator) and
  ``ci.edf_greenhall`` (Greenhall & Riley 2003).
* IEEE Std 952-1997 Annex C: white rate noise of density N has ADEV(τ) = N/√τ.
* Exact results derived here in comments (white-noise AVAR of iid samples, binomial bounds).
"""

from __future__ import annotations

import json
import math
import pathlib
import tempfile
import threading
import tracemalloc

import allantools
import numpy as np
import pytest
from reference import nist_sp1065 as ref
from scipy.signal import fftconvolve

from sensormodel import allan, confidence
from sensormodel._io import load_schema, read_json, write_json
from sensormodel.errors import AnalysisError, ModelFileError


def kasdin(n: int, alpha: float, rng: np.random.Generator) -> np.ndarray:
    """Power-law noise S ∝ 1/f^alpha by the Kasdin & Walter (1992) impulse response
    h_0 = 1, h_k = h_(k-1) (alpha/2 + k - 1)/k (reference notes §9), driven by unit white noise."""
    k = np.arange(1, n)
    h = np.concatenate([[1.0], np.cumprod((alpha / 2.0 + k - 1.0) / k)])
    return fftconvolve(rng.standard_normal(n), h)[:n]


def half_ulp(value: float, digits: int = 7) -> float:
    """Half a unit in the last printed digit of a value given to ``digits`` significant figures."""
    return 0.5 * 10.0 ** (math.floor(math.log10(abs(value))) - digits + 1)


def oadev_reference(y: np.ndarray, rate: float, tau: np.ndarray) -> np.ndarray:
    """allantools.oadev on rate ("freq") data at the given τ (a reference library)."""
    t, dev, _, _ = allantools.oadev(y, rate=rate, data_type="freq", taus=np.asarray(tau))
    np.testing.assert_allclose(t, tau, rtol=1e-15)
    return dev


# ---------------------------------------------------------------------------------------------
# NIST SP 1065 test data
# ---------------------------------------------------------------------------------------------


def test_nist_1000_point_set_is_the_published_one():
    # SP 1065 section 12.4 (Table 31 per secondary citations): the generator, mean, SD and the
    # NON-overlapping ADEV (computed here from cluster means, independently of the engine)
    y = ref.lcg_1000()
    n1_to_3 = [ref.LCG_MULTIPLIER * ref.LCG_SEED % ref.LCG_MODULUS]
    for _ in range(2):
        n1_to_3.append(ref.LCG_MULTIPLIER * n1_to_3[-1] % ref.LCG_MODULUS)
    assert tuple(n1_to_3) == ref.LCG_FIRST
    assert abs(y.mean() - ref.SET_1000["mean"]) <= half_ulp(ref.SET_1000["mean"])
    assert abs(y.std(ddof=1) - ref.SET_1000["sd"]) <= half_ulp(ref.SET_1000["sd"])
    for tau, published in zip(ref.SET_1000["tau"], ref.SET_1000["adev"], strict=True):
        m = int(tau)
        means = y[: (y.size // m) * m].reshape(-1, m).mean(axis=1)
        adev = math.sqrt(0.5 * np.mean(np.diff(means) ** 2))
        assert abs(adev - published) <= half_ulp(published)


def test_nist_1000_point_overlapping_adev():
    # SP 1065 section 12.4 / Table 31 [secondary citations]: OADEV(1, 10, 100) to 7 digits
    curve = allan.overlapping(ref.lcg_1000(), 1.0, taus=list(ref.SET_1000["tau"]))
    np.testing.assert_array_equal(curve.tau, ref.SET_1000["tau"])
    for ours, published in zip(curve.adev, ref.SET_1000["oadev"], strict=True):
        assert abs(ours - published) <= half_ulp(published)
    np.testing.assert_array_equal(curve.n_clusters, [999, 981, 801])  # N - 2m, N = 1001


def test_nist_9_point_set():
    # SP 1065 validation chapter, 9-point set: ADEV(1) = OADEV(1) = 91.22945 (one cluster size,
    # overlap changes nothing at m = 1), OADEV(2) = 85.95287
    y = np.array(ref.SMALL_SET)
    assert abs(y.mean() - ref.SMALL_SET_VALUES["mean"]) <= half_ulp(788.8889)
    assert abs(y.std(ddof=1) - ref.SMALL_SET_VALUES["sd"]) <= half_ulp(100.9770)
    curve = allan.overlapping(y, 1.0, taus=[1.0, 2.0])
    assert abs(curve.adev[0] - ref.SMALL_SET_VALUES["adev"][1.0]) <= half_ulp(91.22945)
    assert abs(curve.adev[1] - ref.SMALL_SET_VALUES["oadev"][2.0]) <= half_ulp(85.95287)
    # 10 phase points: far too few for the lag-1 method, and the local Allan-variance slope
    # (3 octaves) leaves every type the slope allows open, so the conservative one is taken:
    # white angle noise, the fewest degrees of freedom among them at m = 1 and at m = 2
    # (Greenhall & Riley 2003 EDF), so no interval is narrower than with white rate noise
    np.testing.assert_array_equal(curve.noise_alpha, [2, 2])
    for k, m in enumerate((1, 2)):
        assert curve.edf[k] == min(confidence.edf(a, m, 10) for a in (2, 1, 0, -1))
        assert curve.edf[k] <= confidence.edf(0, m, 10)


# ---------------------------------------------------------------------------------------------
# Equality with the reference library (allantools.oadev)
# ---------------------------------------------------------------------------------------------

N_LIB = 1 << 17
RATE_LIB = 200.0


def _signals() -> dict[str, np.ndarray]:
    rng = np.random.default_rng(20240601)
    return {
        "white": 3e-3 + rng.normal(0.0, 1e-3, N_LIB),  # with an offset: mean removal matters
        "random_walk": np.cumsum(rng.normal(0.0, 1e-5, N_LIB)),
        "flicker": kasdin(N_LIB, 1.0, rng) * 1e-4,
        "white_angle": np.diff(rng.normal(0.0, 1e-3, N_LIB + 1)) * RATE_LIB,
    }


SIGNALS = _signals()
# allantools' own "decade" grid (1, 2, 4, 10, 20, 40, …) given to both as explicit τ
LIB_DECADE = np.array([k * 10.0**e for e in range(5) for k in (1, 2, 4)]) / RATE_LIB
LIB_DECADE = LIB_DECADE[LIB_DECADE * RATE_LIB <= (N_LIB - 1) // 2]


@pytest.mark.parametrize("kind", sorted(SIGNALS))
@pytest.mark.parametrize(
    "taus",
    ["octave", "decade", "7/decade", "explicit", "library-decade"],
)
def test_equals_allantools_oadev(kind, taus):
    y = SIGNALS[kind]
    spec = {
        "explicit": [0.005, 0.0123, 0.5, 3.3, 100.0, 250.0],
        "library-decade": LIB_DECADE,
    }.get(taus, taus)
    curve = allan.overlapping(y, RATE_LIB, taus=spec, noise_type=0)
    # relative 1e-10 (the phase is formed exactly as allantools forms it; only the order of
    # the final summation differs)
    np.testing.assert_allclose(curve.adev, oadev_reference(y, RATE_LIB, curve.tau), rtol=1e-10)


def test_octave_grid_is_the_reference_library_octave_grid():
    y = SIGNALS["white"][:100_000]
    t_lib, dev_lib, _, _ = allantools.oadev(y, rate=RATE_LIB, data_type="freq", taus="octave")
    curve = allan.overlapping(y, RATE_LIB)
    np.testing.assert_allclose(curve.tau, t_lib, rtol=1e-15)
    np.testing.assert_allclose(curve.adev, dev_lib, rtol=1e-10)


def test_threads_memmap_float32_and_increments_agree(tmp_path):
    y = SIGNALS["flicker"]
    one = allan.overlapping(y, RATE_LIB, threads=1, noise_type=-1)
    three = allan.overlapping(y, RATE_LIB, threads=3, noise_type=-1)
    # the sums are kept per chunk and added exactly, so the split does not change a bit
    assert_same_curve(three, one)

    path = tmp_path / "y.f64"
    y.tofile(path)
    mm = np.memmap(path, dtype=np.float64, mode="r")
    np.testing.assert_allclose(allan.overlapping(mm, RATE_LIB).adev, one.adev, rtol=1e-13)

    y32 = y.astype(np.float32)
    np.testing.assert_allclose(
        allan.overlapping(y32, RATE_LIB, noise_type=-1).adev,
        oadev_reference(y32.astype(np.float64), RATE_LIB, one.tau),
        rtol=1e-10,
    )

    # increments dx = y/rate (e.g. angle increments) give the Allan deviation of the rate
    inc = allan.overlapping(
        y / RATE_LIB, RATE_LIB, increments=True, noise_type=-1, unit="rad/s"
    )
    np.testing.assert_allclose(inc.adev, one.adev, rtol=1e-12)
    assert inc.unit == "rad/s"


def test_peak_memory_is_one_phase_array():
    # the engine keeps one float64 phase array (n + 1 values) and a few 512 KiB blocks
    y = SIGNALS["white"]
    allan.overlapping(y[:1000], RATE_LIB)  # warm imports and caches outside the trace
    tracemalloc.start()
    try:
        allan.overlapping(y, RATE_LIB, threads=2)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak <= 1.25 * y.nbytes + 4 * 8 * (1 << 16) + (1 << 20)


def test_progress_is_reported_from_the_calling_thread():
    calls = []
    caller = threading.get_ident()

    def progress(done, total):
        calls.append((done, total, threading.get_ident()))

    allan.overlapping(SIGNALS["white"], RATE_LIB, threads=2, progress=progress)
    assert calls, "no progress reported"
    dones = [c[0] for c in calls]
    assert dones == sorted(dones)
    assert calls[-1][0] == calls[-1][1]
    assert {c[2] for c in calls} == {caller}


# ---------------------------------------------------------------------------------------------
# Several records at once (overlapping_many)
# ---------------------------------------------------------------------------------------------

CURVE_FIELDS = ("tau", "adev", "ci_low", "ci_high", "edf", "n_clusters", "noise_alpha")


def assert_same_curve(a: allan.AllanCurve, b: allan.AllanCurve) -> None:
    for name in CURVE_FIELDS:
        assert np.array_equal(getattr(a, name), getattr(b, name)), name
    assert (a.channel, a.unit, a.n_samples, a.confidence) == (
        b.channel,
        b.unit,
        b.n_samples,
        b.confidence,
    )


def _many_records() -> list[np.ndarray]:
    # lengths across the engine's chunks of 2^20 second differences: 3 chunks, 2, 1, and the
    # NIST SP 1065 test-set size; white, random-walk, flicker and white-angle noise
    rng = np.random.default_rng(20240605)
    return [
        2e-3 + rng.normal(0.0, 1e-3, (1 << 21) + 3),
        np.cumsum(rng.normal(0.0, 1e-5, (1 << 20) + 7)),
        kasdin(40_000, 1.0, rng) * 1e-4,
        np.diff(rng.normal(0.0, 1e-3, 1002)) * RATE_LIB,
    ]


MANY = _many_records()
MANY_IDS = ["gyro.x", "gyro.y", "gyro.z", "accelerometer.x"]
MANY_UNITS = ["rad/s", "rad/s", "rad/s", "m/s^2"]


@pytest.fixture(scope="module")
def singles():
    """overlapping() of each record, split across 1 and across 2 threads."""
    return {
        threads: [
            allan.overlapping(y, RATE_LIB, unit=u, channel=c, threads=threads)
            for y, c, u in zip(MANY, MANY_IDS, MANY_UNITS, strict=True)
        ]
        for threads in (1, 2)
    }


@pytest.mark.parametrize("workers", [1, 2, 3])
def test_many_equals_overlapping_to_the_bit(workers, singles):
    curves = allan.overlapping_many(
        MANY, RATE_LIB, channels=MANY_IDS, units=MANY_UNITS, workers=workers
    )
    assert [c.channel for c in curves] == MANY_IDS
    for threads in (1, 2):  # whatever split the single-record call uses
        for curve, single in zip(curves, singles[threads], strict=True):
            assert_same_curve(curve, single)
    # and the shared engine still is the reference estimator (allantools.oadev, relative 1e-10
    # as in test_equals_allantools_oadev)
    np.testing.assert_allclose(
        curves[1].adev, oadev_reference(MANY[1], RATE_LIB, curves[1].tau), rtol=1e-10
    )


def test_many_increments_fixed_noise_and_grids_to_the_bit():
    dx = [y / RATE_LIB for y in MANY[1:3]]
    for kwargs in ({"noise_type": -1, "taus": "decade"}, {"taus": [0.05, 1.0, 30.0]}):
        curves = allan.overlapping_many(dx, RATE_LIB, increments=True, workers=2, **kwargs)
        assert [c.channel for c in curves] == ["signal#1", "signal#2"]
        for d, curve in zip(dx, curves, strict=True):
            single = allan.overlapping(
                d, RATE_LIB, increments=True, channel=curve.channel, **kwargs
            )
            assert_same_curve(curve, single)
    one = allan.overlapping_many([MANY[3]], RATE_LIB)
    assert one[0].channel == "signal"


def test_many_progress_is_one_count_from_the_calling_thread():
    calls = []
    caller = threading.get_ident()

    def progress(done, total):
        calls.append((done, total, threading.get_ident()))

    allan.overlapping_many(MANY[:3], RATE_LIB, workers=2, progress=progress)
    # work units: the samples read plus the second differences summed, over all records
    total = sum(
        y.shape[0] + int(np.sum(y.shape[0] + 1 - 2 * allan.averaging_factors(y.shape[0], RATE_LIB)))
        for y in MANY[:3]
    )
    assert {c[1] for c in calls} == {total}
    dones = [c[0] for c in calls]
    assert dones == sorted(dones) and dones[-1] == total
    assert {c[2] for c in calls} == {caller}


def test_many_keeps_at_most_one_phase_array_per_worker():
    ys = [MANY[1], MANY[1] * 2.0, MANY[1] * 3.0]
    phase_bytes = 8 * (ys[0].shape[0] + 1)
    allan.overlapping_many([y[:1000] for y in ys], RATE_LIB)  # warm imports outside the trace
    for workers in (1, 2):
        tracemalloc.start()
        try:
            allan.overlapping_many(ys, RATE_LIB, workers=workers)
            _, peak = tracemalloc.get_traced_memory()
        finally:
            tracemalloc.stop()
        # per worker: a phase array, a 512 KiB scratch block and the identification's work on
        # at most 65536 decimated points (its copies, detrended and differenced: 1.5 MiB
        # measured, 2 MiB allowed); 1 MiB for the rest. Without the limit of one phase array
        # per worker the three records would hold 3 × 8 MiB.
        allowed = workers * (phase_bytes + (1 << 19) + (2 << 20)) + (1 << 20)
        assert peak <= allowed, (workers, peak)


def test_many_reports_the_first_bad_record_by_its_id():
    bad = MANY[1].copy()
    bad[123_456] = np.nan
    with pytest.raises(AnalysisError, match=r"^gyro\.y: sample 123456 is nan") as info:
        allan.overlapping_many(
            [MANY[0], bad, MANY[2]], RATE_LIB, channels=["gyro.x", "gyro.y", "gyro.z"], workers=2
        )
    assert info.value.field == "gyro.y"
    with pytest.raises(AnalysisError, match=r"^records\[1\]: got 2 samples"):
        allan.overlapping_many([MANY[3], [1.0, 2.0]], RATE_LIB)


@pytest.mark.parametrize(
    ("records", "kwargs", "field", "match"),
    [
        (np.zeros((3, 100)), {}, "records", r"shape \(3, 100\).*list\(a\.T\)"),
        (np.zeros(100), {}, "records", r"one array of samples.*\[y\]"),
        ([0.0, 1.0, 2.0], {}, "records", "one array of samples"),
        ([], {}, "records", "got no records"),
        ([np.zeros(100)] * 2, {"units": ["rad/s"]}, "units", "2 labels"),
        ([np.zeros(100)] * 2, {"channels": ["gyro.x"]}, "channels", "2 channel ids"),
        ([np.zeros(100)] * 2, {"workers": 0}, "workers", "a whole number ≥ 1"),
        ([np.zeros(100)] * 2, {"workers": 1.5}, "workers", "a whole number ≥ 1"),
        ([np.zeros(100)], {"rate": -1.0}, "rate", "got -1.0 Hz"),
        ([np.zeros(100)], {"taus": [100.0]}, "taus", "τ = 100 s needs"),
    ],
)
def test_many_bad_input_is_refused_naming_the_argument(records, kwargs, field, match):
    args = {"rate": 10.0, **kwargs}
    rate = args.pop("rate")
    with pytest.raises(AnalysisError, match=match) as info:
        allan.overlapping_many(records, rate, **args)
    assert info.value.field == field


# ---------------------------------------------------------------------------------------------
# τ grids
# ---------------------------------------------------------------------------------------------


def test_tau_grids():
    n, rate = 100_000, 10.0
    m_max = (n - 1) // 2  # at least two overlapping differences: n + 1 - 2m >= 2
    octave = allan.tau_grid(n, rate, "octave") * rate
    np.testing.assert_array_equal(octave, 2.0 ** np.arange(16))
    assert 2 * octave[-1] > m_max
    np.testing.assert_array_equal(allan.tau_grid(n, rate, None), allan.tau_grid(n, rate, "octave"))
    np.testing.assert_array_equal(allan.tau_grid(n, rate, "decade") * rate, [1, 10, 100, 1e3, 1e4])
    ten = np.rint(allan.tau_grid(n, rate, "10/decade") * rate)
    assert ten[0] == 1 and np.all(np.diff(ten) > 0) and ten[-1] <= m_max
    np.testing.assert_array_equal(ten[:12], [1, 2, 3, 4, 5, 6, 8, 10, 13, 16, 20, 25])
    # explicit τ: rounded to whole samples, sorted, duplicates removed
    np.testing.assert_array_equal(
        allan.tau_grid(n, rate, [1.04, 0.1, 0.96, 0.12, 4e3]), [0.1, 1.0, 4e3]
    )


@pytest.mark.parametrize(
    ("taus", "match"),
    [
        ([1.0, 1e6], r"τ = 1e\+06 s needs 10000000 samples per cluster.*τ ≤ 4999\.9 s"),
        ([0.01], r"τ = 0\.01 s is shorter than half the sample period"),
        ([-1.0], r"τ = -1\.0 s"),
        ([], r"no τ values"),
        ("weekly", r"'octave', 'decade', 'N/decade'"),
        ("0/decade", r"'N/decade'"),
    ],
)
def test_bad_taus_are_refused_by_name(taus, match):
    with pytest.raises(AnalysisError, match=match) as info:
        allan.overlapping(np.zeros(100_000), 10.0, taus=taus)
    assert info.value.field == "taus"


# ---------------------------------------------------------------------------------------------
# Bad input
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("kwargs", "field", "match"),
    [
        ({"y": []}, "y", "got no samples"),
        ({"y": [1.0]}, "y", "got 1 sample;"),
        ({"y": [1.0, 2.0]}, "y", "got 2 samples"),
        ({"y": [1.0, 2.0, np.nan, 4.0]}, "y", r"sample 2 is nan"),
        ({"y": [1.0, np.inf, 2.0, 4.0]}, "y", r"sample 1 is inf"),
        ({"y": np.zeros((10, 2))}, "y", r"shape \(10, 2\)"),
        ({"y": np.zeros(10, dtype=complex)}, "y", "complex"),
        ({"y": ["a", "b", "c"]}, "y", "real numbers"),
        ({"rate": 0.0}, "rate", "got 0.0 Hz"),
        ({"rate": -5.0}, "rate", "got -5.0 Hz"),
        ({"rate": float("nan")}, "rate", "nan"),
        ({"rate": "fast"}, "rate", "'fast'"),
        ({"confidence": 1.0}, "confidence", "strictly between 0 and 1"),
        ({"noise_type": 3}, "noise_type", r"α in \{2, 1, 0, -1, -2\}"),
        ({"noise_type": "pink"}, "noise_type", "'pink'"),
        ({"threads": 0}, "threads", "a whole number ≥ 1"),
    ],
)
def test_bad_input_is_refused_naming_the_argument(kwargs, field, match):
    args = {"y": np.arange(100.0), "rate": 10.0, **kwargs}
    y, rate = args.pop("y"), args.pop("rate")
    with pytest.raises(AnalysisError, match=match) as info:
        allan.overlapping(y, rate, **args)
    assert info.value.field == field
    assert field in str(info.value)


def test_increments_name_their_argument():
    with pytest.raises(AnalysisError, match=r"^dx: got 1 sample"):
        allan.overlapping([0.1], 10.0, increments=True)


# ---------------------------------------------------------------------------------------------
# Intervals of the curve
# ---------------------------------------------------------------------------------------------


def test_coverage_of_the_interval_for_white_noise():
    # For iid samples of variance s², AVAR(m) = s²/m exactly (the difference of two means of m
    # samples has variance 2s²/m). 400 seeded records of 2048 samples; at m = 1, 8, 64 count how
    # often the 68.3 % interval contains the true deviation. The count is binomial(400, 0.683)
    # if the EDF is right: standard deviation sqrt(0.683·0.317/400) = 0.0233; we accept
    # |fraction - 0.683| <= 3 x 0.0233 = 0.070 at each τ (false alarm 0.27 % per τ if exact).
    rng = np.random.default_rng(20240602)
    ms = np.array([1, 8, 64])
    hits = np.zeros(ms.size)
    records = 400
    for _ in range(records):
        y = rng.standard_normal(2048)
        c = allan.overlapping(y, 1.0, taus=ms.astype(float))  # noise type identified each time
        true = 1.0 / np.sqrt(ms)
        hits += (c.ci_low <= true) & (true <= c.ci_high)
    fraction = hits / records
    assert np.all(np.abs(fraction - 0.683) <= 0.070), fraction


def test_white_noise_follows_ieee952():
    # IEEE Std 952-1997 Annex C: white rate noise of density N has ADEV(τ) = N/√τ. Sampling at
    # fs gives per-sample std N·√fs (reference notes §0). Interval at c = 0.9999 per τ so that
    # the ~17 τ together fail with probability < 0.2 % (Bonferroni).
    density, fs = 4.4e-5, 100.0  # rad/s/√Hz (about 0.15 °/√h)
    y = np.random.default_rng(20240603).normal(0.0, density * math.sqrt(fs), 1 << 20)
    c = allan.overlapping(y, fs, confidence=0.9999, unit="rad/s", channel="gyro.x")
    true = density / np.sqrt(c.tau)
    assert np.all((c.ci_low <= true) & (true <= c.ci_high))
    assert np.all(c.noise_alpha[c.tau <= 100.0] == 0)


# ---------------------------------------------------------------------------------------------
# Noise identification (Riley & Greenhall 2004)
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("kind", "alpha"),
    [("white_angle", 2), ("white", 0), ("flicker", -1), ("random_walk", -2)],
)
def test_noise_identification(kind, alpha):
    # The lag-1 method recovers the power law of simulated noise (Kasdin & Walter 1992 for
    # flicker). Seeded; flicker is the hardest case (its unrounded estimate sits near -1.4).
    y = SIGNALS[kind]
    for m in (1, 4, 16, 64, 256):
        assert allan.noise_alpha(y, m)[0] == alpha, m
    assert np.all(allan.overlapping(y, RATE_LIB, taus=[0.005, 0.08, 1.28]).noise_alpha == alpha)


def test_noise_type_where_points_run_out_is_decided_at_each_tau():
    # 600 samples: m = 8 leaves 76 decimated points (< 100), m = 32 only 19. There the type is
    # decided from the local Allan-variance slope (μ = −α − 1, Barnes et al. 1971) on a
    # fixed octave grid of the record, not copied from another τ: random-walk rate noise has
    # μ = +1, so α = −2 at every τ, and each τ gives the same α and EDF when asked for alone
    y = SIGNALS["random_walk"][:600]
    c = allan.overlapping(y, 1.0, taus=[1.0, 4.0, 8.0, 32.0])
    np.testing.assert_array_equal(c.noise_alpha, [-2, -2, -2, -2])
    for k, tau in enumerate(c.tau):
        alone = allan.overlapping(y, 1.0, taus=[tau])
        assert alone.noise_alpha[0] == c.noise_alpha[k] and alone.edf[0] == c.edf[k]
    with pytest.raises(AnalysisError, match="at least 100 points"):
        allan.noise_alpha(y, 8)


def test_lag1_answer_the_local_slope_excludes_takes_the_fewer_degrees_of_freedom():
    # A seeded 2^23-sample white rate noise record (N = 1 per √s, so ADEV = 1/√τ): at
    # m = 65 536 (129 decimated points) the lag-1 method (Riley & Greenhall 2004) says flicker
    # angle noise (estimate 0.57) while the local Allan-variance slope on the octave grid is
    # −1.11 ± 0.06 (white rate noise, μ = −α − 1). Taken alone, the lag-1 answer gave ~3500
    # degrees of freedom and a 68 % interval of ±1.2 % that missed the true deviation by 6 %.
    # Undecided, the type with the fewest degrees of freedom among the candidates is taken.
    n, m = 1 << 23, 65536
    y = np.random.default_rng(1).normal(0.0, 1.0, n)
    tau = [float(m)]
    n_phase = n + 1
    c = allan.overlapping(y, 1.0, taus=tau)
    assert c.noise_alpha[0] == 0 or c.edf[0] <= confidence.edf(0, m, n_phase)
    assert c.edf[0] < 0.1 * confidence.edf(1, m, n_phase)
    white = allan.overlapping(y, 1.0, taus=tau, noise_type=0)
    assert c.ci_low[0] <= white.ci_low[0] and c.ci_high[0] >= white.ci_high[0]
    # the estimate sits 1.4 standard deviations below the truth on this record, so its 95 %
    # interval covers the true deviation, where the one of the lag-1 answer alone does not
    truth = 1.0 / math.sqrt(m)
    wide = allan.overlapping(y, 1.0, taus=tau, confidence=0.95)
    assert wide.ci_low[0] <= truth <= wide.ci_high[0]
    lag1_alone = allan.overlapping(y, 1.0, taus=tau, confidence=0.95, noise_type=1)
    assert not lag1_alone.ci_low[0] <= truth <= lag1_alone.ci_high[0]
    # where the slope agrees with the lag-1 answer (every shorter octave τ), it is kept
    short = allan.overlapping(y, 1.0, taus=[16.0, 1024.0, 16384.0])
    np.testing.assert_array_equal(short.noise_alpha, [0, 0, 0])


def test_white_and_flicker_angle_noise_undecided_take_the_fewer_degrees_of_freedom():
    # The Allan variance falls as τ^-2 for white and for flicker angle noise alike (Barnes et
    # al. 1971; NIST SP 1065), so with fewer than 30 decimated points (too few for the lag-1
    # method, Riley & Greenhall 2004) the type is undecided and the conservative one is taken:
    # the one with the fewer degrees of freedom (the wider interval), flicker angle noise here
    y = SIGNALS["white_angle"][:4000]
    c = allan.overlapping(y, 1.0, taus=[200.0, 400.0])
    n_phase = y.shape[0] + 1
    for k, m in enumerate((200, 400)):
        assert c.noise_alpha[k] == 1
        assert c.edf[k] == confidence.edf(1, m, n_phase) < confidence.edf(2, m, n_phase)


# ---------------------------------------------------------------------------------------------
# Real records with published bounds (allantools test-suite reference data)
# ---------------------------------------------------------------------------------------------

REFERENCE_DATA = pathlib.Path(__file__).parent / "reference" / "data"


@pytest.mark.parametrize("name", ["tic", "phasedat"])
def test_reference_records_deviation_and_68_percent_bounds(name):
    # allantools test-suite reference data, sets "tic" (time-interval-counter noise floor,
    # 55 687 rate samples) and "phasedat" (PHASE.DAT, 1 000): overlapping ADEV and 68.3 %
    # bounds printed to 5 digits by an independent program that identifies the noise type at
    # every τ and takes Greenhall-Riley degrees of freedom. The deviation agrees to the printed
    # digits; every bound within 2 %, the last rows included (for "tic" τ ≥ 2048 s, fewer than
    # 30 averages, where the program finds flicker angle noise and a type copied from shorter τ
    # gave bounds ~6 % too narrow)
    y = np.loadtxt(REFERENCE_DATA / f"{name}-frequency.csv", skiprows=1)
    table = np.genfromtxt(REFERENCE_DATA / f"{name}-oadev.csv", delimiter=",", names=True)
    c = allan.overlapping(y, 1.0, taus=table["tau_s"])
    for k in range(table.shape[0]):
        assert abs(c.adev[k] - table["adev"][k]) <= half_ulp(table["adev"][k], 5), k
    np.testing.assert_allclose(c.ci_low, table["low_68"], rtol=0.02)
    np.testing.assert_allclose(c.ci_high, table["high_68"], rtol=0.02)
    np.testing.assert_array_equal(c.noise_alpha, table["noise_alpha"].astype(int))


def test_interval_at_a_tau_does_not_depend_on_the_grid():
    # The noise type (hence EDF and interval) at τ = 1e5 s of a 5.6e5-sample record (5.6
    # averages) is decided from the record around that τ alone: the same to the bit whether
    # the grid is the octave grid with it, the decade grid with it, or that τ alone, and on 1
    # or 2 threads. Before, the type was copied from the longest τ with 100 averages, which
    # depended on the grid.
    rng = np.random.default_rng(20240611)
    n = 560_000
    y = rng.normal(0.0, 1.0, n) + np.cumsum(rng.normal(0.0, 2e-3, n))
    grids = [
        np.union1d(allan.tau_grid(n, 1.0, "octave"), [1e5]),
        np.union1d(allan.tau_grid(n, 1.0, "decade"), [1e5]),
        np.array([1e5]),
    ]
    found = []
    for grid, threads in zip(grids, (1, 2, 1), strict=True):
        c = allan.overlapping(y, 1.0, taus=grid, threads=threads)
        k = int(np.flatnonzero(c.tau == 1e5)[0])
        found.append((c.noise_alpha[k], c.edf[k], c.ci_low[k], c.ci_high[k]))
    assert found[0] == found[1] == found[2]
    # and the interval is as wide as 5.6 averages warrant (fewer than 20 degrees of freedom)
    assert found[0][1] < 20.0


def test_fixed_noise_types():
    y = SIGNALS["white"][:10_000]
    c = allan.overlapping(y, 1.0, taus=[1.0, 10.0], noise_type=[-1, -2])
    np.testing.assert_array_equal(c.noise_alpha, [-1, -2])
    assert c.edf[0] == confidence.edf(-1, 1, 10_001) and c.edf[1] == confidence.edf(-2, 10, 10_001)


# ---------------------------------------------------------------------------------------------
# Files
# ---------------------------------------------------------------------------------------------


def _curves():
    a = allan.overlapping(SIGNALS["white"][:50_000], 200.0, unit="rad/s", channel="gyro.x")
    b = allan.overlapping(
        SIGNALS["random_walk"][:50_000],
        200.0,
        unit="m/s^2",
        channel="accelerometer.z",
        taus="decade",
        confidence=0.95,
    )
    return [a, b]


def test_json_round_trip_through_the_schema(tmp_path):
    curves = _curves()
    doc = allan.curves_to_json(curves)
    assert doc["schema"] == "sensormodel/allan-curve/1"
    # DESIGN §5 keys of every channel entry
    for entry in doc["channels"]:
        assert {
            "id",
            "unit",
            "sample_rate",
            "tau",
            "adev",
            "ci_low",
            "ci_high",
            "edf",
            "confidence",
        } <= set(entry)
    path = tmp_path / "curve.json"
    write_json(path, doc, schema=allan.SCHEMA_FILE)
    back = allan.curves_from_json(read_json(path, schema=allan.SCHEMA_FILE), source=str(path))
    for a, b in zip(curves, back, strict=True):
        assert (a.channel, a.unit, a.sample_rate, a.confidence, a.n_samples) == (
            b.channel,
            b.unit,
            b.sample_rate,
            b.confidence,
            b.n_samples,
        )
        for name in ("tau", "adev", "ci_low", "ci_high", "edf", "n_clusters", "noise_alpha"):
            np.testing.assert_array_equal(getattr(a, name), getattr(b, name))


def test_schema_is_valid_draft_2020_12():
    import jsonschema

    schema = load_schema(allan.SCHEMA_FILE)
    jsonschema.validators.validator_for(schema).check_schema(schema)
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert schema["properties"]["schema"]["const"] == allan.SCHEMA_ID


def test_json_refusals(tmp_path):
    doc = allan.curves_to_json(_curves())
    with pytest.raises(ModelFileError, match=r"schema: unknown schema 'sensormodel/allan-curve/2'"):
        allan.curves_from_json({**doc, "schema": "sensormodel/allan-curve/2"}, source="c.json")
    broken = json.loads(json.dumps(doc))
    broken["channels"][0]["adev"] = broken["channels"][0]["adev"][:-1]
    with pytest.raises(ModelFileError, match=r"c\.json:gyro\.x\.adev: has \d+ values for \d+ τ"):
        allan.curves_from_json(broken, source="c.json")
    broken = json.loads(json.dumps(doc))
    broken["channels"][1]["edf"][0] = -1.0
    with pytest.raises(ModelFileError, match=r"channels\[1\]\.edf\[0\]"):
        allan.curves_from_json(broken, source="c.json")
    with pytest.raises(AnalysisError, match="appears more than once"):
        allan.curves_to_json([doc_curve := _curves()[0], doc_curve])


def test_csv_round_trip():
    curves = _curves()
    text = allan.curves_to_csv(curves)
    lines = text.splitlines()
    assert lines[0] == ",".join(allan.CSV_HEADER)
    assert len(lines) == 1 + sum(c.tau.size for c in curves)  # one row per τ
    back = allan.curves_from_csv(text)
    for a, b in zip(curves, back, strict=True):
        assert (a.channel, a.unit, a.confidence) == (b.channel, b.unit, b.confidence)
        for name in ("tau", "adev", "ci_low", "ci_high", "edf", "n_clusters", "noise_alpha"):
            np.testing.assert_array_equal(getattr(a, name), getattr(b, name))
    with pytest.raises(ModelFileError, match="line 1"):
        allan.curves_from_csv("tau,adev\n1,2\n")


def test_curve_validates_itself():
    c = _curves()[0]
    with pytest.raises(AnalysisError, match="one value per τ") as info:
        allan.AllanCurve(
            tau=c.tau,
            adev=c.adev[:-1],
            ci_low=c.ci_low,
            ci_high=c.ci_high,
            edf=c.edf,
            sample_rate=c.sample_rate,
        )
    assert info.value.field == "adev"
    with pytest.raises(AnalysisError, match="ci_low ≤ adev ≤ ci_high"):
        allan.AllanCurve(
            tau=c.tau,
            adev=c.adev,
            ci_low=c.ci_high,
            ci_high=c.ci_high,
            edf=c.edf,
            sample_rate=c.sample_rate,
        )
    assert not c.tau.flags.writeable
    np.testing.assert_array_equal(c.n_clusters, c.n_samples + 1 - 2 * c.m)
    np.testing.assert_array_equal(c.n_independent, c.n_samples // c.m)


# ---------------------------------------------------------------------------------------------
# Larger than memory: the streamed path
# ---------------------------------------------------------------------------------------------


def _tiny_chunks(monkeypatch, tmp_path) -> None:
    """Chunks, blocks, row chunks and the phase window far smaller than the record, so every
    boundary of the streamed path is crossed many times; temporary files in ``tmp_path``."""
    from sensormodel.allan import _engine, _stream

    monkeypatch.setattr(_engine, "_CHUNK", 1 << 12)
    monkeypatch.setattr(_engine, "_BLOCK", 1 << 8)
    monkeypatch.setattr(_stream, "_ROWS", 1000)  # not a multiple of the phase's block
    monkeypatch.setattr(_stream, "_WINDOW_EXTRA", 64)
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))


@pytest.mark.parametrize("taus", ["octave", "5/decade"])
def test_streamed_path_equals_the_in_memory_path(monkeypatch, tmp_path, taus):
    from sensormodel.allan import _stream

    rng = np.random.default_rng(77)
    n = 50_001
    # white + random-walk rate noise + an offset, three columns of one row-major file
    walk = np.cumsum(rng.standard_normal((n, 3)), axis=0) * 2e-3
    data = 0.5 + rng.standard_normal((n, 3)) + walk
    np.save(tmp_path / "rec.npy", data)
    mm = np.load(tmp_path / "rec.npy", mmap_mode="r")
    cols = [mm[:, j] for j in range(3)] + [mm[:, 1].astype(np.float32)]
    _tiny_chunks(monkeypatch, tmp_path)
    expected = allan.overlapping_many(cols, RATE_LIB, taus=taus)
    incr = allan.overlapping_many(cols[:1], RATE_LIB, taus=taus, increments=True)
    seen = []
    monkeypatch.setattr(_stream, "STREAM_ABOVE", 0)
    got = allan.overlapping_many(cols, RATE_LIB, taus=taus, progress=lambda d, t: seen.append(d))
    got_incr = allan.overlapping_many(cols[:1], RATE_LIB, taus=taus, increments=True)
    for a, b in zip(expected + incr, got + got_incr, strict=True):
        # the same estimator: equal to rounding (the mean is summed in row chunks here)
        np.testing.assert_allclose(b.adev, a.adev, rtol=1e-12, atol=0)
        np.testing.assert_array_equal(b.tau, a.tau)
        np.testing.assert_array_equal(b.noise_alpha, a.noise_alpha)
        np.testing.assert_array_equal(b.edf, a.edf)
        np.testing.assert_allclose(b.ci_high, a.ci_high, rtol=1e-12, atol=0)
    assert seen == sorted(seen) and len(seen) > 10
    assert not list(tmp_path.glob("sensormodel-phase-*")), "temporary phase files left behind"


def test_streamed_path_refuses_a_bad_sample_by_index(monkeypatch, tmp_path):
    from sensormodel.allan import _stream

    y = np.random.default_rng(5).standard_normal(20_000)
    y[12_345] = np.inf
    _tiny_chunks(monkeypatch, tmp_path)
    monkeypatch.setattr(_stream, "STREAM_ABOVE", 0)
    with pytest.raises(AnalysisError, match=r"^gyro\.x: sample 12345 is inf"):
        allan.overlapping_many([y], RATE_LIB, channels=["gyro.x"])
    assert not list(tmp_path.glob("sensormodel-phase-*"))


def test_stream_limit_follows_memory_and_its_overrides(monkeypatch):
    from sensormodel.allan import _stream

    monkeypatch.delenv("SENSORMODEL_STREAM_ABOVE", raising=False)
    auto = _stream.stream_limit()
    assert 0 < auto <= _stream._available_memory()
    monkeypatch.setenv("SENSORMODEL_STREAM_ABOVE", "1e6")
    assert _stream.stream_limit() == 1_000_000
    monkeypatch.setattr(_stream, "STREAM_ABOVE", 5)
    assert _stream.stream_limit() == 5


def _rss_file_bytes() -> int:
    """Resident pages of file mappings in this process [bytes] (Linux /proc)."""
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith("RssFile:"):
                return int(line.split()[1]) * 1024
    pytest.skip("no RssFile in /proc/self/status")


def test_release_lets_a_read_only_mapping_go_and_keeps_its_data(tmp_path):
    data = np.random.default_rng(8).standard_normal((1 << 20, 2))  # 16 MiB
    np.save(tmp_path / "big.npy", data)
    mm = np.load(tmp_path / "big.npy", mmap_mode="r")
    col = mm[:, 1]
    before = _rss_file_bytes()
    total = float(np.sum(col))  # touches every page of the file (rows are interleaved)
    touched = _rss_file_bytes()
    assert touched - before > 12 << 20
    allan.release(col)
    # the pages the column spans left the process; its values did not change
    assert _rss_file_bytes() - before < 2 << 20
    assert float(np.sum(col)) == total
    np.testing.assert_array_equal(col, data[:, 1])


def test_release_leaves_writable_and_in_memory_arrays_alone(tmp_path):
    np.save(tmp_path / "w.npy", np.zeros(1 << 16))
    for mode in ("r+", "c"):
        mm = np.load(tmp_path / "w.npy", mmap_mode=mode)
        mm[123] = 7.0  # a change in a copy-on-write page would be lost by dropping it
        allan.release(mm)
        assert mm[123] == 7.0, mode
        del mm
    y = np.ones(1000)
    allan.release(y)
    assert y.sum() == 1000.0
