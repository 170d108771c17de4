"""Imperfect static records (:mod:`sensormodel.quality`): warm-up, temperature, steps and spikes.

Every record is built like a real one from plain-numpy generators independent of the library
(white + flicker noise of an industrial MEMS gyro, tests/identify_records.py), with the
imperfection added with known truth: an exponential warm-up, a linear temperature effect on a
slow ramp measured by a noisy thermometer, spikes and a step. Seeded; the tolerances are
stated beside each check with where they come from.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from identify_records import flicker, white
from realistic_records import GYRO, Truth

from sensormodel import quality
from sensormodel.allan import overlapping, overlapping_pooled
from sensormodel.datasheet import SpecValue
from sensormodel.errors import AnalysisError
from sensormodel.model import Channel
from sensormodel.report import reason_text
from sensormodel.terms import Flicker, White

_DEG_H = math.pi / 180.0 / 3600.0  # 1 °/h in rad/s
#: A 20 Hz record: the settling and temperature rules work on window means of a minute or
#: more, so the rate only sets the cost; the step and spike rules run at 100 Hz.
SLOW_RATE = 20.0
FAST_RATE = 100.0
#: A unit whose 60 s mean is dominated by white noise (Allan minimum near 10 min: floor 5 °/h
#: with the white density of GYRO), as most MEMS gyros are.
QUIET = Truth(white=GYRO.white, flicker=5.0 * _DEG_H / 0.6643)


def _model(truth: Truth, rate: float) -> Channel:
    return Channel(
        "gyro.x", "angular_rate", "rad/s", rate, (White(truth.white), Flicker(truth.flicker))
    )


def _noise(seed: int, n: int, rate: float, truth: Truth) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return white(rng, n, rate, truth.white) + flicker(rng, n, rate, truth.flicker)


def _within(curve, reference, max_tau: float) -> float:
    """Share of the τ ≤ max_tau where ``curve`` lies inside ``reference``'s interval."""
    keep = reference.tau <= max_tau
    inside = (curve.adev >= reference.ci_low) & (curve.adev <= reference.ci_high)
    return float(np.mean(inside[keep]))


# ---------------------------------------------------------------------------------------------
# Warm-up
# ---------------------------------------------------------------------------------------------

TIME_CONSTANT = 300.0  # the 5 min
HOURS2 = int(2 * 3600 * SLOW_RATE)


def _warm(seed: int, truth: Truth = QUIET) -> tuple[np.ndarray, np.ndarray, float]:
    """(clean record, record with warm-up, σ_A(60 s) of the truth): the transient starts at
    10 σ of a 60 s mean (the issue's) and decays with T = 5 min."""
    y = _noise(seed, HOURS2, SLOW_RATE, truth)
    s60 = float(_model(truth, SLOW_RATE).allan_deviation([60.0])[0])
    t = np.arange(HOURS2) / SLOW_RATE
    return y, y + 10.0 * s60 * np.exp(-t / TIME_CONSTANT), s60


#: The truth's settling time at criterion 1: when 10 σ·exp(−t/T) = σ, T·ln 10 = 691 s.
TRUE_SETTLING = TIME_CONSTANT * math.log(10.0)


@pytest.mark.parametrize("with_model", [True, False])
def test_settling_time_within_a_quarter(with_model):
    """The issue's target: the settling time within ±25 % of the truth. One record's estimate
    scatters by about 15 % (measured over these seeds: T̂ and Â are fitted to about ten window
    means inside the transient), so ±25 % holds for about 90 % of records; asserted for at
    least 9 of 12 seeds (P(fewer) ≈ 0.03 at a 90 % rate; measured 11 of 12 with the model, 10
    without) and for the median within ±15 %."""
    model = _model(QUIET, SLOW_RATE)
    found = []
    for seed in range(12):
        _, y, _ = _warm(seed)
        s = quality.detect_settling(y, SLOW_RATE, model=model if with_model else None)
        assert s.detected and s.reasons[0][0] == "settling_detected"
        found.append(s.settling_time)
    found = np.array(found)
    assert np.sum(np.abs(found / TRUE_SETTLING - 1.0) <= 0.25) >= 9, found
    assert abs(np.median(found) / TRUE_SETTLING - 1.0) <= 0.15, found


@pytest.mark.parametrize("with_model", [True, False])
def test_no_settling_on_a_settled_record(with_model):
    """False alarms at the stated probability (1 %, Bonferroni over the T grid, conservative):
    none of 12 settled records with the model; at most one without (the record's own
    variogram estimate widens the rate somewhat)."""
    model = _model(QUIET, SLOW_RATE)
    alarms = 0
    for seed in range(12):
        y, _, _ = _warm(seed)
        s = quality.detect_settling(y, SLOW_RATE, model=model if with_model else None)
        alarms += s.detected
        assert s.detected or (s.settling_time == 0.0 and s.reasons[0][0] == "settling_none")
    assert alarms <= (0 if with_model else 1)


def test_flicker_dominated_unit_still_detected():
    """Where flicker dominates the 60 s mean (GYRO: floor 25 °/h over 16 °/h of white), the
    window means wander and the test uses the model's variogram: the transient is found in
    most records and a settled record is not flagged."""
    model = _model(GYRO, SLOW_RATE)
    detected, alarms = 0, 0
    for seed in range(6):
        clean, y, _ = _warm(seed, GYRO)
        detected += quality.detect_settling(y, SLOW_RATE, model=model).detected
        alarms += quality.detect_settling(clean, SLOW_RATE, model=model).detected
    assert detected >= 4 and alarms == 0


def test_trim_auto_restores_the_long_tau_curve():
    """The Allan curve of the auto-trimmed record lies within the 68 % interval of the same
    noise trimmed alike at ≥ 90 % of τ up to an eighth of the record; untrimmed, the transient
    lifts the long τ out of it."""
    model = _model(QUIET, SLOW_RATE)
    clean, y, _ = _warm(3)
    start, found = quality.settling_trim(y, SLOW_RATE, "auto", model=model)
    assert found is not None and start == math.ceil(found.settling_time * SLOW_RATE - 1e-9)
    reference = overlapping(clean[start:], SLOW_RATE)
    trimmed = overlapping(y[start:], SLOW_RATE)
    span = (HOURS2 - start) / SLOW_RATE / 8.0
    assert _within(trimmed, reference, span) >= 0.9
    raw = overlapping(y, SLOW_RATE, taus=reference.tau)
    assert _within(raw, overlapping(clean, SLOW_RATE, taus=reference.tau), span) < 0.9


def test_trim_refusals():
    y = _noise(1, 24_000, SLOW_RATE, QUIET)  # 20 min: 20 windows of 60 s
    with pytest.raises(AnalysisError, match="not shorter than the record"):
        quality.settling_trim(y, SLOW_RATE, 1200.0)
    with pytest.raises(AnalysisError, match="'auto' or a time"):
        quality.settling_trim(y, SLOW_RATE, "soon")
    with pytest.raises(AnalysisError, match="at least 20 windows to judge settling"):
        quality.settling_trim(y[:20_000], SLOW_RATE, "auto")
    assert quality.settling_trim(y, SLOW_RATE, 30.0) == (600, None)


# ---------------------------------------------------------------------------------------------
# Temperature
# ---------------------------------------------------------------------------------------------


def _thermal(seed: int, sensitivity: float, truth: Truth = GYRO):
    """(noise, record, temperature): a 5 °C ramp over 2 h read by a thermometer with 0.05 °C
    noise; the bias follows the true temperature linearly."""
    rng = np.random.default_rng(1000 + seed)
    y = _noise(seed, HOURS2, SLOW_RATE, truth)
    true_t = 25.0 + 5.0 * np.arange(HOURS2) / HOURS2
    measured = true_t + rng.normal(0.0, 0.05, HOURS2)
    return y, y + sensitivity * (true_t - 25.0), measured


def _coverage(seeds: range, with_model: bool) -> float:
    truth = 0.02 * _DEG_H  # the 0.02 °/h/°C
    model = _model(GYRO, SLOW_RATE) if with_model else None
    hits = 0
    for seed in seeds:
        _, y, temp = _thermal(seed, truth)
        e = quality.temperature_sensitivity(y, temp, SLOW_RATE, model=model)
        assert e.confidence == 0.9 and e.basis == ("noise_model" if with_model else
                                                   "record_variogram")  # fmt: skip
        hits += e.low <= truth <= e.high
    return hits / len(seeds)


def test_temperature_interval_coverage_quick():
    """30 seeded records: the 90 % interval must cover the truth at a rate consistent with 90 %
    (three binomial standard deviations, √(0.9·0.1/30) = 5.5 %, below: ≥ 0.74)."""
    assert _coverage(range(30), True) >= 0.74


@pytest.mark.slow
def test_temperature_interval_coverage():
    """The issue's target: the 90 % interval covers the truth in 90 ± 5 % of 200 seeded
    records (binomial standard deviation 2.1 %, so ±5 % is 2.4 of them)."""
    assert 0.85 <= _coverage(range(200), True) <= 0.95


def test_temperature_interval_without_model_is_approximate():
    """Without a noise model the variogram comes from the record itself: approximate (measured
    0.83 on 60 records); asserted ≥ 0.7 on 30 and the reason given."""
    assert _coverage(range(30), False) >= 0.7
    _, y, temp = _thermal(0, 0.0)
    e = quality.temperature_sensitivity(y, temp, SLOW_RATE)
    assert [c for c, _ in e.reasons] == [
        "temperature_sensitivity",
        "temperature_interval_approximate",
    ]


def test_temperature_removal_restores_the_allan_curve():
    """100 °/h/°C on a 5 °C ramp lifts the long τ of the curve above the noise's interval;
    after the fitted effect is removed, the curve lies within the noise-only record's 68 %
    interval at ≥ 90 % of τ up to an eighth of the record (the longest τ, with fewer than 4
    EDF, also absorb the fitted slope's error, which is the noise's own trend)."""
    model = _model(GYRO, SLOW_RATE)
    b = 100.0 * _DEG_H
    for seed in range(3):
        noise, y, temp = _thermal(seed, b)
        e = quality.temperature_sensitivity(y, temp, SLOW_RATE, model=model)
        assert abs(e.sensitivity - b) <= 3.3 * e.standard_error  # 99.9 % two-sided
        corrected = quality.remove_temperature(y, temp, SLOW_RATE, e)
        reference = overlapping(noise, SLOW_RATE)
        span = HOURS2 / SLOW_RATE / 8.0
        assert _within(overlapping(corrected, SLOW_RATE), reference, span) >= 0.9
        last = int(np.flatnonzero(reference.tau <= span)[-1])
        assert overlapping(y, SLOW_RATE).adev[last] > reference.ci_high[last]


def test_temperature_against_the_datasheet():
    """A white-noise unit and a chamber ramp: the sensitivity is well determined, so the
    datasheet's ±limit is decided both ways, and inconclusive where the interval straddles it."""
    b = 20.0 * _DEG_H
    truth = Truth(white=GYRO.white, flicker=1e-12)
    _, y, temp = _thermal(5, b, truth)
    e = quality.temperature_sensitivity(y, temp, SLOW_RATE, model=_model(truth, SLOW_RATE))
    assert e.high - e.low < 0.2 * b
    within = quality.temperature_sensitivity(
        y, temp, SLOW_RATE, datasheet=SpecValue(typ=None, max=2.0 * b), unit="rad/s"
    )
    assert within.datasheet_call == "within" and within.datasheet == pytest.approx(2.0 * b)
    over = quality.temperature_sensitivity(y, temp, SLOW_RATE, datasheet=0.5 * b)
    assert over.datasheet_call == "exceeds"
    edge = quality.temperature_sensitivity(y, temp, SLOW_RATE, datasheet=e.sensitivity)
    assert edge.datasheet_call == "inconclusive"
    for code, values in within.reasons + over.reasons + edge.reasons:
        assert reason_text(code, values)


def test_temperature_refusals():
    y = _noise(2, 20_000, SLOW_RATE, QUIET)
    with pytest.raises(AnalysisError, match="temperature is constant"):
        quality.temperature_sensitivity(y, np.full(20_000, 23.5), SLOW_RATE)
    with pytest.raises(AnalysisError, match="one temperature per sample"):
        quality.temperature_sensitivity(y, np.linspace(20, 25, 19_999), SLOW_RATE)


# ---------------------------------------------------------------------------------------------
# Steps and spikes
# ---------------------------------------------------------------------------------------------

HOUR_FAST = int(3600 * FAST_RATE)
SPIKES = (50_000, 123_457, 300_001)
STEP = 200_000


def _bumped(seed: int) -> tuple[np.ndarray, np.ndarray, float]:
    """(clean, with three 50 σ spikes, one of them two samples long, and a step of 10 σ_A(10 s)
    at sample 200 000, σ_A(10 s))."""
    y = _noise(seed, HOUR_FAST, FAST_RATE, GYRO)
    sigma = GYRO.white * math.sqrt(FAST_RATE)
    s10 = float(_model(GYRO, FAST_RATE).allan_deviation([10.0])[0])
    bumped = y.copy()
    bumped[SPIKES[0]] += 50.0 * sigma
    bumped[SPIKES[1] : SPIKES[1] + 2] -= 50.0 * sigma
    bumped[SPIKES[2]] += 50.0 * sigma
    bumped[STEP:] += 10.0 * s10
    return y, bumped, s10


@pytest.mark.parametrize("with_model", [True, False])
def test_spikes_and_step_found_where_they_are(with_model):
    """Spikes at their indices exactly (and their lengths); the step within a tenth of the
    10 s window (100 samples) of its place: the two-window statistic peaks there with a width
    of the window, noise moves the peak by a small part of it."""
    model = _model(GYRO, FAST_RATE) if with_model else None
    for seed in range(3):
        _, y, s10 = _bumped(seed)
        ev = quality.detect_events(y, FAST_RATE, model=model, start_time=5.0)
        assert [e.index for e in ev.spikes] == list(SPIKES)
        assert [e.length for e in ev.spikes] == [1, 2, 1]
        assert all(e.statistic > 30.0 for e in ev.spikes)
        assert len(ev.steps) == 1
        step = ev.steps[0]
        assert abs(step.index - STEP) <= 100
        assert step.time == pytest.approx(5.0 + step.index / FAST_RATE)
        assert step.size == pytest.approx(10.0 * s10, rel=0.3)
        codes = [c for c, _ in ev.reasons]
        assert codes == ["spikes_found", "steps_found"]
        for code, values in ev.reasons:
            assert str(SPIKES[0]) in reason_text(code, values) or code == "steps_found"


def test_no_false_events_on_clean_records():
    """The stated false-alarm probability is 1 % per rule and record (Bonferroni): over 8
    clean records (white + flicker, and the same coded in integer counts of σ/7) none is
    expected; asserted none."""
    sigma = GYRO.white * math.sqrt(FAST_RATE)
    for seed in range(4):
        y = _noise(100 + seed, HOUR_FAST, FAST_RATE, GYRO)
        coded = np.round(y / (sigma / 7.0)) * (sigma / 7.0)
        for record in (y, coded):
            ev = quality.detect_events(record, FAST_RATE)
            assert not ev.spikes and not ev.steps and not ev.reasons


def test_excluded_events_pooled_like_the_clean_record():
    """Spikes and the step excluded as short gaps, the segments pooled: the Allan curve lies
    within the clean record's 68 % interval at ≥ 90 % of τ up to an eighth of the record,
    where the bumped record's does not."""
    clean, y, _ = _bumped(7)
    ev = quality.detect_events(y, FAST_RATE)
    keep = quality.exclusion_mask(y.shape[0], ev)
    assert not keep[list(SPIKES)].any() and not keep[ev.steps[0].index]
    segments = quality.clean_segments(keep)
    assert len(segments) == 5
    pooled = overlapping_pooled([y[a:b] for a, b in segments], FAST_RATE)
    reference = overlapping(clean, FAST_RATE, taus=pooled.tau)
    assert _within(pooled, reference, HOUR_FAST / FAST_RATE / 8.0) >= 0.9
    bumped = overlapping(y, FAST_RATE, taus=pooled.tau)
    assert _within(bumped, reference, HOUR_FAST / FAST_RATE / 8.0) < 0.9


def test_events_refusals():
    with pytest.raises(AnalysisError, match="fewer than 4 step windows"):
        quality.detect_events(np.zeros(3000), FAST_RATE)
    bad = np.zeros(10_000)
    bad[7] = np.inf
    with pytest.raises(AnalysisError, match="sample 7"):
        quality.detect_events(bad, FAST_RATE, step_window=1.0)


# ---------------------------------------------------------------------------------------------
# A record off the bench
# ---------------------------------------------------------------------------------------------


def test_bench_record_assessed_and_prepared():
    """Warm-up, a temperature ramp, a spike and a bump in one record: trimmed, the temperature
    effect removed, the events excluded and the segments pooled, its Allan curve lies within
    the 68 % interval of the same noise cut alike at ≥ 90 % of τ up to an eighth of it."""
    rate = SLOW_RATE
    model = _model(QUIET, rate)
    noise, warm, s60 = _warm(21)
    t = np.arange(HOURS2) / rate
    temp = 25.0 + 5.0 * t / t[-1] + np.random.default_rng(3).normal(0.0, 0.05, HOURS2)
    y = warm + 20.0 * _DEG_H * (temp - 25.0)
    y[90_000] += 50.0 * QUIET.white * math.sqrt(rate)
    s10 = float(model.allan_deviation([10.0])[0])
    y[100_000:] += 12.0 * s10
    q = quality.assess(
        y, rate, channel="gyro.x", unit="rad/s", model=model, temperature=temp, trim="auto",
        remove_temperature_effect=True, exclude_events=True,
        datasheet_sensitivity=100.0 * _DEG_H,
    )  # fmt: skip
    # one record: its settling time scatters by about 15 % (see the test above), so ±40 %
    # (2.7 of that) here
    assert abs(q.trim_start / rate / TRUE_SETTLING - 1.0) <= 0.4
    assert q.temperature is not None and q.temperature_removed
    assert [e.index for e in q.events.spikes] == [90_000]
    assert len(q.events.steps) == 1 and abs(q.events.steps[0].index - 100_000) <= 20
    assert len(q.segments) == 3 and q.segments[0][0] == q.trim_start
    assert 0.85 < q.fraction_used < 1.0
    codes = [c for c, _ in q.reasons]
    for code in ("settling_detected", "settling_trimmed", "temperature_sensitivity",
                 "temperature_removed", "spikes_found", "steps_found", "events_excluded",
                 "record_fraction_used"):  # fmt: skip
        assert code in codes
    for code, values in q.reasons:
        assert reason_text(code, values)
    pooled = overlapping_pooled(q.segment_arrays(), rate)
    reference = overlapping(noise[q.trim_start :], rate, taus=pooled.tau)
    assert _within(pooled, reference, (HOURS2 - q.trim_start) / rate / 8.0) >= 0.9


def test_bench_record_with_a_dropped_second():
    """The reader's clean segments (a dropped second, its samples NaN here, and a NaN in the
    thermometer there): the tests run on the segments joined, positions come back in the
    record's indices, and no used segment spans the gap, so the pooled curve lies within the
    68 % interval of the same noise without the gap at ≥ 90 % of τ up to an eighth."""
    rate = SLOW_RATE
    model = _model(QUIET, rate)
    noise, y, _ = _warm(22)
    t = np.arange(HOURS2) / rate
    temp = 25.0 + 5.0 * t / t[-1]
    y = y + 20.0 * _DEG_H * (temp - 25.0)
    gap = (80_000, 80_020)  # one second at 20 Hz
    y[gap[0] : gap[1]] = np.nan
    temp = temp.copy()
    temp[gap[0] + 3] = np.nan
    y[120_000] += 50.0 * QUIET.white * math.sqrt(rate)
    q = quality.assess(
        y, rate, model=model, temperature=temp, trim="auto", exclude_events=True,
        remove_temperature_effect=True, segments=[(0, gap[0]), (gap[1], HOURS2)],
    )  # fmt: skip
    assert [e.index for e in q.events.spikes] == [120_000]
    assert q.events.spikes[0].time == pytest.approx(120_000 / rate)
    assert abs(q.trim_start / rate / TRUE_SETTLING - 1.0) <= 0.4  # one record (see above)
    assert all(not (a < gap[1] and b > gap[0]) for a, b in q.segments)
    assert len(q.segments) == 3 and q.segments[0][0] == q.trim_start
    pooled = overlapping_pooled(q.segment_arrays(), rate)
    reference = overlapping(noise[q.trim_start :], rate, taus=pooled.tau)
    assert _within(pooled, reference, (HOURS2 - q.trim_start) / rate / 8.0) >= 0.9
    with pytest.raises(AnalysisError, match="in order, not overlapping"):
        quality.assess(y, rate, segments=[(gap[1], HOURS2), (0, gap[0])])


def test_assess_refusals():
    y = _noise(4, 24_000, SLOW_RATE, QUIET)
    with pytest.raises(AnalysisError, match="without a temperature column"):
        quality.assess(y, SLOW_RATE, remove_temperature_effect=True)
    with pytest.raises(AnalysisError, match="not shorter than the record"):
        quality.assess(y, SLOW_RATE, trim=5000.0)
    with pytest.raises(AnalysisError, match="temperature is constant"):
        quality.assess(y, SLOW_RATE, temperature=np.full(y.shape[0], 21.0))
    short = quality.assess(y[:12_000], SLOW_RATE)
    assert short.settling is None and short.reasons[0][0] == "settling_not_judged"
