"""Acceptance: verdict logic, degrees of freedom and recording length, spec limits, plans.

Verdicts are checked on constructed cases whose answer is known by construction; the
chi-square decision model and the recording-length rule are checked against the published
interval (NIST SP 1065) and by seeded Monte Carlo; the error rates and the recording length of
the whole chain (simulate -> Allan deviation -> identify -> verdict) by seeded simulation.
"""

from __future__ import annotations

import math
import os
import pathlib
import signal
import subprocess
import sys
import time
from dataclasses import replace
from types import SimpleNamespace

import numpy as np
import pytest
from reference import acceptance as ref
from reference import units as uref
from scipy.stats import binom

from sensormodel import acceptance as acc
from sensormodel import confidence, report
from sensormodel.datasheet import load_datasheet
from sensormodel.errors import AnalysisError, DatasheetError

# ---------------------------------------------------------------------------------------------
# verdict logic, constructed cases
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("low", "high", "limit", "expected"),
    [
        (1.0, 2.0, 100.0, "pass"),  # limit far above the interval
        (1.0, 2.0, 0.01, "fail"),  # limit far below it
        (1.0, 2.0, 1.5, "inconclusive"),  # limit inside it
        (1.0, 2.0, 2.0, "pass"),  # high on the limit: the whole interval is within
        (1.0, 2.0, 1.0, "inconclusive"),  # low on the limit: not wholly beyond
        (0.0, 2.0, 1.0, "inconclusive"),  # a bound that straddles the limit
    ],
    ids=["far-above", "far-below", "inside", "high-on-limit", "low-on-limit", "bound"],
)
def test_decide_constructed(low: float, high: float, limit: float, expected: str) -> None:
    assert acc.decide(low, high, limit) == expected


def test_decide_refuses_nonsense() -> None:
    with pytest.raises(AnalysisError, match="finite"):
        acc.decide(float("nan"), 1.0, 1.0)
    with pytest.raises(AnalysisError, match="low <= high"):
        acc.decide(2.0, 1.0, 1.0)


def test_combine() -> None:
    assert acc.combine(["pass", "pass"]) == "pass"
    assert acc.combine(["pass", "inconclusive"]) == "inconclusive"
    assert acc.combine(["inconclusive", "fail", "pass"]) == "fail"
    assert acc.combine([]) == "inconclusive"


# ---------------------------------------------------------------------------------------------
# the reading τ
# ---------------------------------------------------------------------------------------------


def test_reading_tau_random_walk_at_crossover() -> None:
    # Flicker floor F and random walk K: the random walk's share is K²τ/3 / (F² + K²τ/3). With
    # edf ∝ T/τ the length for fixed effective dof is ∝ τ/s² = τ (1 + a/τ)², a = 3F²/K²
    # (derived): d/dτ = 0 at τ = a, where the random-walk Allan variance equals the floor
    # (share 1/2).
    from sensormodel.terms import Flicker, RandomWalk

    floor, k = 1e-6, 1e-8
    terms = [Flicker(coefficient=floor / uref.FLOOR_FACTOR), RandomWalk(density=k)]
    r = acc.reading_tau(terms, 1, rate=1.0, dof=20.0, tau_min=1.0, tau_max=1e8)
    # the τ grid has 12 points per decade: the reading is within one step (×10^(1/12) = 1.21)
    assert r.tau == pytest.approx(3 * floor**2 / k**2, rel=0.22)
    assert r.share == pytest.approx(0.5, abs=0.06)  # 1/2.21 … 1.21/2.21 within one step


# ---------------------------------------------------------------------------------------------
# what the datasheet limits
# ---------------------------------------------------------------------------------------------


def _limits(path, channel: str, against: str = "max"):
    ds = load_datasheet(path)
    ax = next(a for a in ds.channels() if a.channel_id == channel)
    return acc.spec_limits(ax, against=against)


def test_spec_limits_t900(examples_dir) -> None:
    limits, skipped = _limits(examples_dir / "bw-t900.toml", "gyro.z")
    by_key = {s.key: s for s in limits}
    assert set(by_key) == {"angle_random_walk", "bias_instability"}
    # 0.02 deg/rt-h max -> rad/sqrt(s) (reference notes §10) and 0.15 deg/h floor -> rad/s
    assert by_key["angle_random_walk"].limit == pytest.approx(0.02 * uref.DEG_PER_RT_H, rel=1e-6)
    assert by_key["angle_random_walk"].quantity == "density"
    bi = by_key["bias_instability"]
    assert bi.quantity == "allan_floor" and bi.type == "flicker"
    assert bi.limit == pytest.approx(0.15 * ref.DEG_PER_H, rel=1e-6)
    reasons = {u.key: (u.reason, dict(u.values)) for u in skipped}
    assert reasons["bias_repeatability"] == ("single_run", {})
    no_max = ("no_limit_column", {"against": "max", "column": "typ"})
    assert reasons["rate_random_walk"] == no_max and reasons["quantization"] == no_max
    # the reports say it in words
    words = {u.key: report.reason_text(u.reason, {"text": u.text, **u.values}) for u in skipped}
    assert "single run" in words["bias_repeatability"]
    assert "no max value (only typ" in words["quantization"]


def test_spec_limits_gauss_markov_floor(examples_dir) -> None:
    # accelerometer bias instability 20 µg max with a correlation time: a Gauss-Markov bias
    # whose Allan peak equals the floor (0.6173643 sigma; reference notes §2).
    limits, _ = _limits(examples_dir / "bw-t900.toml", "accelerometer.x")
    bi = next(s for s in limits if s.key == "bias_instability")
    assert bi.type == "gauss_markov"
    assert bi.limit == pytest.approx(20 * ref.MICRO_G, rel=1e-6)


def test_spec_limits_conventions_g30(examples_dir) -> None:
    # One-sided density: D = value/√2; coefficient B: floor = 0.6643 B (DESIGN §3).
    limits, _ = _limits(examples_dir / "bw-g30.toml", "gyro.z", against="typ")
    by_key = {s.key: s for s in limits}
    nd = by_key["noise_density"]
    assert nd.limit == pytest.approx(5e-3 * math.pi / 180 / math.sqrt(2), rel=1e-9)
    assert nd.display_scale == pytest.approx(math.sqrt(2))
    bi = by_key["bias_instability"]
    assert bi.limit == pytest.approx(3 * ref.DEG_PER_H * uref.FLOOR_FACTOR, rel=1e-6)
    assert bi.limit * bi.display_scale == pytest.approx(3 * ref.DEG_PER_H, rel=1e-6)
    assert by_key["rate_ramp"].quantity == "slope"
    # against max, the G30 has nothing to verify
    limits, skipped = _limits(examples_dir / "bw-g30.toml", "gyro.z")
    assert limits == [] and len(skipped) == 3


def test_spec_limits_rejects_column() -> None:
    with pytest.raises(AnalysisError, match="'max' or 'typ'"):
        acc.spec_limits(None, against="worst")  # type: ignore[arg-type]


# ---------------------------------------------------------------------------------------------
# verify from constructed curves and identifications (answer known by construction)
# ---------------------------------------------------------------------------------------------


def _curve(adev_scale: float = 1.0, *, rate: float = 10.0):
    tau = np.geomspace(0.1, 100.0, 13)
    adev = adev_scale * 1e-5 / np.sqrt(tau)
    return SimpleNamespace(
        tau=tau, adev=adev, ci_low=0.9 * adev, ci_high=1.1 * adev, sample_rate=rate, confidence=0.9
    )


def _fit(**terms: tuple[float, float, float]):
    """A stand-in identification: term name -> (estimate, low, high) of its main parameter."""
    param = {
        "white": "density",
        "flicker": "coefficient",
        "random_walk": "density",
        "gauss_markov": "sigma",
    }
    return SimpleNamespace(
        terms=tuple(
            SimpleNamespace(
                term=k, parameter=param[k], estimate=v[0], low=v[1], high=v[2], supported=v[1] > 0
            )
            for k, v in terms.items()
        )
    )


def _axis(write_datasheet, text: str, channel: str = "gyro.z"):
    ds = load_datasheet(write_datasheet(text))
    return next(a for a in ds.channels() if a.channel_id == channel)


_SHEET = """
[sensor]
name = "constructed"
sample_rate = "10 Hz"
axes = ["z"]
[gyro]
angle_random_walk = { typ = "0.01 deg/rt-hr", max = "0.02 deg/rt-hr" }
bias_instability = { max = "0.1 deg/h" }
"""


def test_verify_curve_constructed(write_datasheet) -> None:
    ax = _axis(write_datasheet, _SHEET)
    n_lim = 0.02 * uref.DEG_PER_RT_H
    b_lim = 0.1 * ref.DEG_PER_H / uref.FLOOR_FACTOR  # the coefficient whose floor is the limit
    cases = {
        "pass": _fit(
            white=(0.5 * n_lim, 0.45 * n_lim, 0.55 * n_lim),
            flicker=(0.2 * b_lim, 0.1 * b_lim, 0.3 * b_lim),
        ),
        "fail": _fit(
            white=(3 * n_lim, 2.8 * n_lim, 3.2 * n_lim),
            flicker=(0.2 * b_lim, 0.1 * b_lim, 0.3 * b_lim),
        ),
        "inconclusive": _fit(
            white=(0.5 * n_lim, 0.45 * n_lim, 0.55 * n_lim),
            flicker=(1.1 * b_lim, 0.8 * b_lim, 1.5 * b_lim),
        ),
    }
    for expected, fit in cases.items():
        cv = acc.verify_curve(_curve(), ax, duration=3600.0, identification=fit)
        assert cv.verdict == expected
        verdicts = {t.spec.key: t for t in cv.terms}
        if expected == "inconclusive":
            t = verdicts["bias_instability"]
            assert t.verdict == "inconclusive"
            # estimate 1.1 × limit, interval as wide as chi-square with nu0 dof -> longer record
            assert t.required_duration is not None and t.required_duration > 3600.0
            nu0 = confidence.dof_from_interval(t.low, t.high, 0.9)
            nu = confidence.required_dof(1.1, 1.0, confidence=0.9, power=acc.DEFAULT_POWER)
            assert t.required_duration == pytest.approx(3600.0 * nu / nu0, rel=1e-6)
        else:
            assert all(t.required_duration is None for t in cv.terms)
        # the flicker coefficient is compared as the Allan floor (IEEE Std 952 Annex C)
        assert verdicts["bias_instability"].estimate == pytest.approx(
            fit.terms[1].estimate * uref.FLOOR_FACTOR, rel=1e-9
        )


def test_verify_curve_missing_term_is_an_error(write_datasheet) -> None:
    ax = _axis(write_datasheet, _SHEET)
    with pytest.raises(AnalysisError, match="no flicker coefficient"):
        acc.verify_curve(_curve(), ax, duration=100.0, identification=_fit(white=(1, 1, 1)))


def test_curve_check_constructed() -> None:
    curve = _curve()
    limit = curve.adev.copy()
    limit[3:6] = 0.5 * curve.adev[3:6]  # exceeded at indices 3..5
    limit[8:] = 2.0 * curve.adev[8:]  # within from index 8
    check = acc.curve_check(curve, limit, confidence=0.9)
    assert check.exceeded == ((curve.tau[3], curve.tau[5]),)
    assert check.verdict == "fail"
    assert np.array_equal(check.within, np.arange(13) >= 8)
    inside = acc.curve_check(curve, curve.adev, confidence=0.9)
    assert inside.exceeded == () and inside.verdict == "inconclusive"
    above = acc.curve_check(curve, 2.0 * curve.adev, confidence=0.9)
    assert above.verdict == "pass"


def test_verify_mapping_refusals(write_datasheet) -> None:
    path = write_datasheet(_SHEET)
    with pytest.raises(AnalysisError, match="duration"):
        acc.verify({"gyro.z": _curve()}, path)
    with pytest.raises(AnalysisError, match="no channel in common"):
        acc.verify({"accelerometer.x": _curve()}, path, duration=10.0)


def test_verify_curve_typ_only_sheet(write_datasheet) -> None:
    # Nothing printed with a max: nothing verified, every term listed with the reason.
    ax = _axis(
        write_datasheet,
        _SHEET.replace(
            '{ typ = "0.01 deg/rt-hr", max = "0.02 deg/rt-hr" }', '"0.01 deg/rt-hr"'
        ).replace('{ max = "0.1 deg/h" }', '"0.1 deg/h"'),
    )
    fit = _fit(white=(1e-6, 0.9e-6, 1.1e-6), flicker=(1e-7, 0.5e-7, 2e-7))
    cv = acc.verify_curve(_curve(), ax, duration=100.0, identification=fit)
    assert cv.terms == () and cv.verdict == "inconclusive"
    assert {u.key for u in cv.unverified} == {"angle_random_walk", "bias_instability"}


# ---------------------------------------------------------------------------------------------
# plans
# ---------------------------------------------------------------------------------------------


def test_plan_t900(examples_dir) -> None:
    p = acc.plan(examples_dir / "bw-t900.toml")
    rows = {(r.spec.channel, r.spec.key): r for r in p.rows}
    arw = rows[("gyro.x", "angle_random_walk")]
    bi = rows[("gyro.x", "bias_instability")]
    rrw = rows[("gyro.x", "rate_random_walk")]
    assert arw.verified and bi.verified and not rrw.verified
    # white noise is read at short τ, bias instability at τ of tens to hundreds of seconds,
    # the random walk far beyond: the lengths follow (≈ EDF × τ, Greenhall & Riley)
    assert arw.read_at < 1.0 < 10.0 < bi.read_at < 1e3 < rrw.read_at
    assert arw.duration < 60.0 < 1800.0 < bi.duration < rrw.duration
    assert p.driver is not None and p.driver.spec.key == "bias_instability"
    assert p.duration == max(r.duration for r in p.rows if r.verified)
    # each row's degrees of freedom are verify's decision at the plan's power and margin
    for r in p.rows:
        assert r.dof == confidence.required_dof(
            1 - p.margin, 1.0, confidence=p.confidence, power=p.power
        )
    assert {u.key for u in p.unverified} == {"bias_repeatability"}


def test_plan_margin_and_confidence(write_datasheet) -> None:
    sheet = write_datasheet(_SHEET)
    base = acc.plan(sheet)
    closer = acc.plan(sheet, margin=0.1)
    surer = acc.plan(sheet, confidence=0.99)
    assert closer.duration > base.duration and surer.duration > base.duration
    with pytest.raises(AnalysisError, match="margin"):
        acc.plan(sheet, margin=1.5)


def test_plan_rejects_bad_datasheet(write_datasheet) -> None:
    with pytest.raises(DatasheetError):
        acc.plan(write_datasheet("[sensor]\nname = 1\n"))


# ---------------------------------------------------------------------------------------------
# error rates and recording length, by seeded simulation of the whole chain
# (records -> overlapping Allan deviation -> identify.fit -> verdict)
# ---------------------------------------------------------------------------------------------

#: Bootstrap records per identification in the studies: the least identify accepts at 0.9
#: (keeps the studies quick; verify's default is 200). The error rates below are those of the
#: procedure with this setting.
_N_BOOT = 41

_WHITE_SHEET = """
[sensor]
name = "white-only study unit"
sample_rate = "1 Hz"
axes = ["z"]
[gyro]
angle_random_walk = { max = "0.1 deg/rt-hr" }
"""

_FLICKER_SHEET = """
[sensor]
name = "bias-instability study unit"
sample_rate = "1 Hz"
axes = ["z"]
[gyro]
angle_random_walk = { typ = "0.2 deg/rt-hr" }
bias_instability = { max = "3 deg/h" }
"""


def _white_trials(ax, density: float, n: int, trials: int, seed: int) -> list:
    """Verdicts on records of white noise of the given density (period means: per-sample std
    N·√rate, DESIGN §3), n samples at 1 Hz, one per trial."""
    from sensormodel.allan import overlapping

    rng = np.random.default_rng(seed)
    out = []
    for i in range(trials):
        y = rng.normal(0.0, density, n)
        curve = overlapping(y, 1.0, confidence=0.9, unit="rad/s", channel="gyro.z")
        cv = acc.verify_curve(curve, ax, duration=float(n), n_boot=_N_BOOT, seed=seed + i)
        out.append(cv.terms[0])
    return out


def _binom_max(n: int, p: float, q: float = 0.999) -> int:
    """Largest count a binomial(n, p) exceeds with probability below 1 − q."""
    return int(binom.ppf(q, n, p))


@pytest.mark.slow
def test_error_rates_white_at_limit(write_datasheet) -> None:
    # A unit exactly at its limit is called fail in at most (1 − c)/2 = 5 % of records, and
    # pass in at most 5 % (two-sided 90 % interval). 100 seeded records of 600 samples; the
    # count of each call is binomial(100, ≤ 0.05), so the test allows up to its 99.9 %
    # quantile (scipy.stats.binom; 11 of 100). Larger studies (400 records of 600 samples):
    # with the interval alone 5.0-5.3 % fail and 7.5-8 % pass calls; with the confirming test
    # at the limit (acceptance module notes) 3.3 % fail and 3.0 % pass calls.
    ax = _axis(write_datasheet, _WHITE_SHEET)
    limit = acc.spec_limits(ax)[0][0].limit
    trials = 100
    verdicts = [t.verdict for t in _white_trials(ax, limit, 600, trials, seed=100)]
    n_fail, n_pass = verdicts.count("fail"), verdicts.count("pass")
    assert n_fail <= _binom_max(trials, 0.05), (n_fail, n_pass)
    assert n_pass <= _binom_max(trials, 0.05), (n_fail, n_pass)
    # and the calls are not trivially avoided: the interval straddles the limit most times
    assert verdicts.count("inconclusive") >= trials - 2 * _binom_max(trials, 0.05)


_HIDDEN_FLICKER_SHEET = _FLICKER_SHEET + 'rate_random_walk = "25 deg/h/rt-h"\n'


@pytest.mark.slow
@pytest.mark.parametrize(
    ("sheet", "trials", "n"),
    [(_FLICKER_SHEET, 80, 2000), (_HIDDEN_FLICKER_SHEET, 150, 4000)],
    ids=["white-flicker", "flicker-between-white-and-random-walk"],
)
def test_error_rates_bias_instability_at_limit(write_datasheet, sheet, trials, n) -> None:
    # Flicker noise with its Allan floor exactly at the datasheet max (3 °/h), white noise at
    # the typical ARW, and in the second case a random walk (25 °/h/√h) that meets the floor at
    # τ ≈ 160 s, ten times the white noise's crossing: the floor is squeezed between them.
    # Records of n s at 1 Hz simulated by sensormodel.simulate (a generator independent of
    # the identification's bootstrap; its flicker realization reproduces the floor within its
    # stated error, about 2 %). The allowance for each call is the binomial 99.9 % quantile at
    # 5 % (scipy.stats.binom: 10 of 80, 15 of 150). The squeezed case is the one the interval
    # alone got wrong: 13 % fail calls in 300 development records (9.5 % with records from
    # the bootstrap's own generator), 3.7 % in 400 other records with the confirming test at
    # the limit (module notes of acceptance.py); white + flicker alone: 5.2 % and about 2 %.
    from sensormodel.allan import overlapping
    from sensormodel.convert import build_model
    from sensormodel.simulate import simulate

    ax = _axis(write_datasheet, sheet)
    model = build_model(load_datasheet(write_datasheet(sheet)), worst_case=True)
    calls, overturned = [], 0
    for i in range(trials):
        y = simulate(model, n, 1.0, seed=500 + i)[:, 0]
        curve = overlapping(y, 1.0, confidence=0.9, unit="rad/s", channel="gyro.z")
        cv = acc.verify_curve(curve, ax, duration=float(n), n_boot=_N_BOOT, seed=i)
        t = next(t for t in cv.terms if t.spec.key == "bias_instability")
        calls.append(t.verdict)
        if t.limit_test is not None and t.limit_test.get("confirmed") is False:
            overturned += 1
            # the reported interval agrees with the verdict: widened to the limit
            assert t.verdict == "inconclusive" and t.low <= t.spec.limit <= t.high
    print(f"fail {calls.count('fail')}, pass {calls.count('pass')}, overturned {overturned}")
    assert calls.count("fail") <= _binom_max(trials, 0.05), calls.count("fail")
    assert calls.count("pass") <= _binom_max(trials, 0.05), calls.count("pass")
    # the test at the limit does work here: some calls of the interval were not confirmed
    assert overturned >= 1


@pytest.mark.slow
def test_required_length_decides_in_stated_fraction(write_datasheet) -> None:
    # A unit 5 % above its white-noise limit, first recorded for 400 s: inconclusive. The
    # length required_duration gives (power 0.8) is then recorded 150 times: the verdict is
    # decided (fail) in about 80 % of them. Allowance: the binomial 99.9 % two-sided band at
    # p = 0.8 for 80 records (±0.15), widened by 0.05 for the approximation that the
    # interval's degrees of freedom grow in proportion to the record length.
    ax = _axis(write_datasheet, _WHITE_SHEET)
    limit = acc.spec_limits(ax)[0][0].limit
    truth = 1.05 * limit
    n0 = 400
    ref_terms = _white_trials(ax, truth, n0, 7, seed=900)
    assert any(t.verdict == "inconclusive" for t in ref_terms)
    # the present interval's width (median of 7 references), rescaled to the true value
    ratio = float(np.median([t.high / t.low for t in ref_terms]))
    low, high = truth / math.sqrt(ratio), truth * math.sqrt(ratio)
    # the present record decides such a unit with less than the wanted power (0.8): the
    # probability from the chi-square interval of the same width
    nu0 = confidence.dof_from_interval(low, high, 0.9)
    assert confidence.decision_probability(truth, limit, nu0, 0.9) < 0.8
    t_req, _, _ = confidence.required_duration(
        truth, limit, low=low, high=high, duration=float(n0), confidence=0.9, power=0.8
    )
    assert t_req is not None and t_req > n0
    trials = 80
    runs = _white_trials(ax, truth, int(round(t_req)), trials, seed=2000)
    decided = sum(t.verdict == "fail" for t in runs) / trials
    lo, hi = binom.interval(0.999, trials, 0.8)
    assert lo / trials - 0.05 <= decided <= hi / trials + 0.05, (decided, t_req)
    # a good unit is not rejected on the way: no pass calls for a unit above its limit
    assert sum(t.verdict == "pass" for t in runs) <= _binom_max(trials, 0.05)


def test_verify_from_allan_curves(write_datasheet) -> None:
    # The mapping form: Allan curves already computed (they carry their record length).
    from sensormodel.allan import overlapping

    path = write_datasheet(_SHEET)
    n_lim = 0.02 * uref.DEG_PER_RT_H
    rng = np.random.default_rng(3)
    y = rng.normal(0.0, 3.0 * n_lim * math.sqrt(10.0), 6000)  # white at 3 × its max, 10 Hz
    curve = overlapping(y, 10.0, confidence=0.9, unit="rad/s", channel="gyro.z")
    rep = acc.verify({"gyro_z": curve}, path, n_boot=41, seed=1)
    assert rep.recording["duration"] == pytest.approx(600.0)
    arw = next(t for t in rep.channels[0].terms if t.spec.key == "angle_random_walk")
    assert arw.verdict == "fail" and rep.overall == "fail" and rep.exit_code == 1
    assert arw.low > n_lim


def test_call_of_the_interval_needs_the_test_at_the_limit(write_datasheet, monkeypatch) -> None:
    # Constructed: white noise far above its limit (the interval excludes the limit), with the
    # test at the limit replaced by one that reports p-values of our choosing.
    from sensormodel import identify
    from sensormodel.allan import overlapping

    ax = _axis(write_datasheet, _WHITE_SHEET)
    limit = acc.spec_limits(ax)[0][0].limit
    rng = np.random.default_rng(4)
    y = rng.normal(0.0, 1.5 * limit, 2000)  # 1 Hz: density 1.5 × the limit
    curve = overlapping(y, 1.0, confidence=0.9, unit="rad/s", channel="gyro.z")
    real = acc.verify_curve(curve, ax, duration=2000.0, n_boot=_N_BOOT, seed=1).terms[0]
    assert real.verdict == "fail"
    assert real.limit_test is not None  # a call: confirmed or skipped, and recorded
    calls = []

    def fake(identification, term, value, **kw):
        calls.append((term, value))
        return identify.LimitTest(term, "density", value, 0.0, p, 1.0, 59, {})

    monkeypatch.setattr(identify, "limit_test", fake)
    monkeypatch.setattr(acc._verify, "_SKIP_MARGIN", math.inf)  # always test
    for p, verdict in ((0.01, "fail"), (0.05, "fail"), (0.2, "inconclusive")):
        t = acc.verify_curve(curve, ax, duration=2000.0, n_boot=_N_BOOT, seed=1).terms[0]
        assert calls[-1] == ("white", pytest.approx(limit))
        assert t.verdict == verdict, (p, t.verdict)
        assert t.limit_test["p_value"] == p and t.limit_test["confirmed"] is (p <= 0.05)
        if verdict == "fail":
            assert (t.low, t.high) == (real.low, real.high)
        else:  # widened to the limit
            assert t.low == limit and t.high == real.high
            assert acc.decide(t.low, t.high, limit) == "inconclusive"
            # the refuted interval is no guide to a length: none is given unless it is longer
            codes = [code for code, _ in t.reasons]
            assert codes[0] == "limit_test_not_confirmed"
            assert "does not confirm" in report.term_note(t)
            assert t.required_duration is None or t.required_duration > 2000.0
            if t.required_duration is None:
                assert codes[-1] == "length_unknown"
                assert "a longer record is needed" in report.term_note(t)
    # the pass side: a unit at 0.6 × its limit, the test's p-value below the limit our choice
    low_unit = overlapping(
        rng.normal(0.0, 0.6 * limit, 2000), 1.0, confidence=0.9, unit="rad/s", channel="gyro.z"
    )

    def fake_below(identification, term, value, **kw):
        return identify.LimitTest(term, "density", value, 0.0, 1.0, p, 59, {})

    monkeypatch.setattr(identify, "limit_test", fake_below)
    for p, verdict in ((0.02, "pass"), (0.3, "inconclusive")):
        t = acc.verify_curve(low_unit, ax, duration=2000.0, n_boot=_N_BOOT, seed=1).terms[0]
        assert t.verdict == verdict, (p, t.verdict)
        if verdict == "pass":
            assert t.high <= limit
        else:  # the limit strictly inside the widened interval: decide() agrees
            assert t.low < limit < t.high and acc.decide(t.low, t.high, limit) == "inconclusive"
            assert t.required_duration is None or t.required_duration > 2000.0
            assert t.reasons[0][0] == "limit_test_not_confirmed"
            assert t.reasons[0][1]["side"] == "below"


_BAND_LIMITED_SHEET = """
[sensor]
name = "band-limited study unit"
sample_rate = "200 Hz"
bandwidth = "40 Hz"
filter_order = 2
axes = ["z"]
[gyro]
noise_density = { typ = "0.004 deg/s/rt-Hz" }
bias_instability = { typ = "5 deg/h" }
"""


def test_band_limited_unit_at_typical_values(write_datasheet) -> None:
    # A unit exactly at its typical values, with a 2-pole output filter at 40 Hz (200 Hz
    # samples: the first τ of its Allan deviation lie well below the white line), simulated
    # by sensormodel.simulate. Verified against typ, it is fitted through the datasheet's
    # filter: the density comes back within its interval (90 %: the interval misses it in 10 %
    # of seeds, so the seed is fixed) and nothing is failed. Fitted as unfiltered samples the
    # same record was called pass at 0.6 × its density and fail at 10 × its bias instability
    # (development run of this kind, BW-M200 example at 1-pole 50 Hz).
    from sensormodel.allan import overlapping
    from sensormodel.convert import build_model
    from sensormodel.simulate import simulate

    path = write_datasheet(_BAND_LIMITED_SHEET)
    ax = _axis(write_datasheet, _BAND_LIMITED_SHEET)
    assert acc.output_filter(ax) == (40.0, 2)
    model = build_model(load_datasheet(path))
    n, rate = 60_000, 200.0
    y = simulate(model, n, rate, seed=8)[:, 0]
    curve = overlapping(y, rate, confidence=0.9, unit="rad/s", channel="gyro.z")
    assert curve.adev[0] < 0.8 * model.channels[0].terms[0].density / math.sqrt(curve.tau[0])
    cv = acc.verify_curve(curve, ax, duration=n / rate, against="typ", n_boot=_N_BOOT, seed=2)
    verdicts = {t.spec.key: t for t in cv.terms}
    arw = verdicts["noise_density"]
    assert arw.low <= arw.spec.limit <= arw.high, arw
    assert "fail" not in {t.verdict for t in cv.terms}, [(t.spec.key, t.verdict) for t in cv.terms]
    assert cv.identification.white_filter == (40.0, 2)


_GM_SHEET = """
[sensor]
name = "Gauss-Markov bias study unit"
sample_rate = "2 Hz"
axes = ["z"]
[accelerometer]
velocity_random_walk = { typ = "0.02 m/s/rt-h" }
bias_instability = { max = "20 ug" }
correlation_time = "600 s"
"""
_GM_TRIALS = 60
_GM_SAMPLES = 14_400


def _gm_trial(k: int) -> str:
    """The verdict on the bias instability of one record of a unit exactly at its limit."""
    import pathlib
    import tempfile

    from sensormodel.allan import overlapping
    from sensormodel.convert import build_model
    from sensormodel.simulate import simulate

    with tempfile.TemporaryDirectory() as tmp:
        path = pathlib.Path(tmp) / "gm.toml"
        path.write_text(_GM_SHEET, encoding="utf-8")
        sheet = load_datasheet(path)
    ax = sheet.channels()[0]
    model = build_model(sheet, worst_case=True)
    y = simulate(model, _GM_SAMPLES, 2.0, seed=100 + k)[:, 0]
    curve = overlapping(y, 2.0, confidence=0.9, unit="m/s^2", channel=ax.channel_id)
    cv = acc.verify_curve(curve, ax, duration=_GM_SAMPLES / 2.0, n_boot=_N_BOOT, seed=k)
    return next(t.verdict for t in cv.terms if t.spec.key == "bias_instability")


@pytest.mark.slow
def test_error_rates_gauss_markov_bias_at_limit() -> None:
    # A bias instability with a correlation time (compared as the Gauss-Markov Allan peak
    # 0.6174·σ): σ exactly at the limit, T = 600 s, white noise at the typical VRW; records of
    # 2 h at 2 Hz (12 T, so T itself is poorly known) from sensormodel.simulate. The test at
    # the limit profiles T under the null; before it did (T held at the estimate, and the skip
    # rule applied to this term) a development run gave 5 pass calls in its first 20 records.
    # 160 development records with it: 4.4 % fail, 4.4 % pass. Here 60 records (two
    # processes): each call's count is binomial(60, ≤ 0.05), allowed up to its 99.9 % quantile
    # (scipy.stats.binom: 9).
    import multiprocessing
    import os
    from concurrent.futures import ProcessPoolExecutor

    workers = min(2, len(os.sched_getaffinity(0)))
    ctx = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(max_workers=workers, mp_context=ctx) as pool:
        calls = list(pool.map(_gm_trial, range(_GM_TRIALS), chunksize=5))
    print(f"fail {calls.count('fail')}, pass {calls.count('pass')} of {_GM_TRIALS}")
    assert calls.count("fail") <= _binom_max(_GM_TRIALS, 0.05), calls.count("fail")
    assert calls.count("pass") <= _binom_max(_GM_TRIALS, 0.05), calls.count("pass")
    assert calls.count("inconclusive") >= _GM_TRIALS - 2 * _binom_max(_GM_TRIALS, 0.05)


def test_verify_recording_notes_as_reason_codes(write_datasheet, tmp_path) -> None:
    # A recording through the one pipeline: the longest clean segment is analysed, and the
    # report notes the segment left out, the datasheet channel not recorded and the recorded
    # channel not on the datasheet, as reason codes with their numbers (words in the report).
    from sensormodel.recording import read_recording

    path = write_datasheet(_SHEET.replace('axes = ["z"]', 'axes = ["y", "z"]'))
    n_lim = 0.02 * uref.DEG_PER_RT_H
    rng = np.random.default_rng(11)
    rows, t = ["time [s],gyro_x [deg/s],gyro_z [deg/s]"], 0.0
    for n in (2000, 6000):  # two stretches at 10 Hz, 0.5 s apart
        y = np.rad2deg(rng.normal(0.0, 3.0 * n_lim * math.sqrt(10.0), (n, 2)))
        for a, b in y:
            rows.append(f"{t:.2f},{a:.10g},{b:.10g}")
            t += 0.1
        t += 0.5
    csv = tmp_path / "gappy.csv"
    csv.write_text("\n".join(rows) + "\n")
    rec = read_recording(csv, gaps="split")
    rep = acc.verify(rec, path, n_boot=41, seed=1)
    (ch,) = rep.channels
    assert ch.id == "gyro.z" and ch.duration == pytest.approx(600.0, rel=1e-6)
    assert ch.allan.n_samples == 6000 and ch.psd is not None
    codes = dict(rep.notes)
    assert codes["channels_missing"] == {"channels": ("gyro.y",)}
    assert codes["channels_extra"] == {"channels": ("gyro.x",)}
    left = codes["segments_left_out"]
    assert left["channel"] == "gyro.z" and left["segments"] == 2 and left["count"] == 1
    assert left["samples"] == 2000.0 and left["duration"] == pytest.approx(600.0, rel=1e-6)
    text = report.verdict_text(rep)
    assert "note: not in the recording, not verified: gyro.y" in text
    assert "note: in the recording but not on the datasheet, ignored: gyro.x" in text
    assert "gyro.z: the recording has 2 clean segments; the longest (600 s of" in text
    # the missing channel's limits were not checked: even with every checked term passing, the
    # overall verdict is inconclusive (exit 3), never pass
    assert codes["limits_not_checked"] == {
        "terms": ("gyro.y angle_random_walk", "gyro.y bias_instability")
    }
    assert "not checked (channel missing from the recording): gyro.y angle_random_walk" in text
    passed = replace(
        rep,
        channels=tuple(
            replace(c, terms=tuple(replace(t, verdict="pass") for t in c.terms))
            for c in rep.channels
        ),
    )
    assert passed.overall == "inconclusive" and passed.exit_code == 3
    checked = replace(passed, notes=tuple(n for n in passed.notes if n[0] != "limits_not_checked"))
    assert checked.overall == "pass" and checked.exit_code == 0
    # channels left out on purpose are not "not checked": the report names those verified
    only = acc.verify(rec, path, n_boot=41, seed=1, channels=["gyro.z"])
    assert "limits_not_checked" not in dict(only.notes)


_GM_LONG_SHEET = """
[sensor]
name = "slow-bias unit"
sample_rate = "2 Hz"
axes = ["z"]
[accelerometer]
velocity_random_walk = { typ = "0.02 m/s/rt-h" }
bias_instability = { typ = "10 ug", max = "20 ug" }
correlation_time = "3000 s"
"""


def test_unresolved_time_constant_is_never_a_pass(write_datasheet) -> None:
    # A Gauss-Markov bias with T = 3000 s recorded for 20 min (T is 2.5 × the record): the
    # curve shows only the rising side of the bias, which fixes σ²/T, not σ; σ's upper end is
    # then no bound, so a pass cannot be called whatever the interval says (a verdict is never
    # better than what was checked; common practice). The unit is at its typical values
    # (floor 10 µg against a max of 20 µg).
    from sensormodel.allan import overlapping
    from sensormodel.convert import build_model
    from sensormodel.simulate import simulate

    sheet = load_datasheet(write_datasheet(_GM_LONG_SHEET))
    ax = sheet.channels()[0]
    y = simulate(build_model(sheet), 2400, 2.0, seed=5)[:, 0]
    curve = overlapping(y, 2.0, confidence=0.9, unit="m/s^2", channel=ax.channel_id)
    cv = acc.verify_curve(curve, ax, duration=1200.0, n_boot=_N_BOOT, seed=3)
    bias = next(t for t in cv.terms if t.spec.key == "bias_instability")
    ft = next(t for t in cv.identification.terms if t.term == "gauss_markov")
    assert "time_constant_not_resolved" in dict(ft.reasons)
    assert bias.verdict == "inconclusive", (bias.verdict, bias.low, bias.high)
    codes = dict(bias.reasons)
    assert "time_constant_not_resolved" in codes
    assert bias.low <= bias.spec.limit <= bias.high
    assert bias.required_duration is None and "length_unknown" in codes
    assert "time constant not resolved" in report.term_note(bias)


_TYP_ONLY_SHEET = """
[sensor]
name = "constructed, bias instability typ only"
sample_rate = "10 Hz"
axes = ["z"]
[gyro]
angle_random_walk = { typ = "0.01 deg/rt-hr", max = "0.02 deg/rt-hr" }
bias_instability = { typ = "0.5 deg/h" }
"""


def test_whole_curve_check_judges_limits_only(write_datasheet) -> None:
    # Only limits are limits: a term printed with a typ value alone fills the datasheet curve
    # at its typ, and where it makes that curve the check is not judged (a unit at exactly typ
    # was once "exceeded with confidence" there). Hand check (IEEE Std 952 Annex C): the ARW
    # max N = 0.02 °/√h gives σ² = N²/τ, the typ floor 0.5 °/h gives σ² ≈ (0.5 °/h)² on its
    # flat part; at τ = 0.1 s the ARW line is ~99.7 % of the curve, at 10⁴ s ~0.6 %.
    ax = _axis(write_datasheet, _TYP_ONLY_SHEET)
    tau = np.geomspace(0.1, 1e4, 31)
    share = acc.limited_share(ax, tau, rate=10.0, against="max")
    n2 = (0.02 * uref.DEG_PER_RT_H) ** 2 / tau
    assert share[0] > 1.0 - acc.UNLIMITED_SHARE_MAX and share[-1] < 0.05
    assert np.all(np.diff(share) < 1e-12)  # the ARW line's share falls with τ
    assert share[0] == pytest.approx(n2[0] / (n2[0] + (0.5 * ref.DEG_PER_H) ** 2), rel=0.05)
    # a measured curve: ARW at half its max, the floor 3× its typ (allowed: typ is no limit)
    lim = acc.limit_channel(ax, rate=10.0, against="max").allan_deviation(tau)
    floor_high = np.sqrt(n2 / 4.0 + (3.0 * 0.5 * ref.DEG_PER_H) ** 2)
    curve = SimpleNamespace(tau=tau, adev=floor_high, ci_low=0.95 * floor_high,
                            ci_high=1.05 * floor_high)
    judged = share >= 1.0 - acc.UNLIMITED_SHARE_MAX
    unjudged = acc.curve_check(curve, lim, confidence=0.9)
    assert unjudged.exceeded  # the old behaviour: the typ-filled curve read as a limit
    check = acc.curve_check(curve, lim, confidence=0.9, checked=judged)
    assert not check.exceeded and check.verdict == "pass"
    assert check.not_judged == ((float(tau[judged.argmin()]), float(tau[-1])),)
    words = report._verdict._curve_result(check, dash="-")
    assert words.startswith("within the limit curve at every τ judged; not judged at τ")
    with pytest.raises(AnalysisError, match="checked"):
        acc.curve_check(curve, lim, confidence=0.9, checked=judged[:-1])


def test_whole_curve_check_single_tau_range_in_words() -> None:
    # "τ 315-315 s" was printed for a range of one τ: one τ alone is printed once.
    tau = np.array([10.0, 315.0, 1000.0])
    curve = SimpleNamespace(tau=tau, adev=np.array([1.0, 3.0, 1.0]),
                            ci_low=np.array([0.9, 2.5, 0.9]), ci_high=np.array([1.1, 3.5, 1.1]))
    check = acc.curve_check(curve, np.full(3, 2.0), confidence=0.9)
    assert check.exceeded == ((315.0, 315.0),)
    assert report._verdict._curve_result(check, dash="-") == "exceeded with confidence at τ 315 s"


def test_declared_ranges_from_the_datasheet(write_datasheet) -> None:
    # the datasheet's measurement_range is the full scale a recording is checked against
    ds = load_datasheet(write_datasheet(_SHEET + 'measurement_range = "450 deg/s"\n'))
    assert acc.declared_ranges(ds) == {"gyro.z": pytest.approx(math.radians(450.0), rel=1e-12)}
    assert acc.declared_ranges(load_datasheet(write_datasheet(_SHEET, name="b.toml"))) == {}


_ORPHAN_SCRIPT = """
import multiprocessing, os, sys, time
from concurrent.futures import ProcessPoolExecutor
from sensormodel.acceptance._verify import exit_with_parent

def pid():
    return os.getpid()

if __name__ == "__main__":
    context = multiprocessing.get_context("spawn")
    pool = ProcessPoolExecutor(1, mp_context=context, initializer=exit_with_parent,
                               initargs=(os.getpid(), 0.1))
    print(pool.submit(pid).result(), flush=True)
    time.sleep(120)
"""


def _alive(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/status", encoding="ascii") as fh:
            return "\nState:\tZ" not in fh.read()  # a zombie has ended
    except FileNotFoundError:
        return False


@pytest.mark.skipif(not os.path.isdir("/proc"), reason="reads /proc (Linux)")
@pytest.mark.parametrize("how", [signal.SIGTERM, signal.SIGKILL])
def test_worker_processes_end_with_their_command(tmp_path, how) -> None:
    # Stopping verify left its worker processes running under init (~150 MB each): a worker
    # now ends when its parent is gone, however the parent was stopped.
    script = tmp_path / "orphan.py"
    script.write_text(_ORPHAN_SCRIPT, encoding="utf-8")
    root = pathlib.Path(__file__).resolve().parent.parent
    env = {**os.environ, "PYTHONPATH": str(root)}
    proc = subprocess.Popen([sys.executable, str(script)], stdout=subprocess.PIPE, env=env)
    worker = int(proc.stdout.readline())
    assert _alive(worker)
    proc.send_signal(how)
    proc.wait(timeout=30)
    proc.stdout.close()
    deadline = time.monotonic() + 20.0
    while _alive(worker) and time.monotonic() < deadline:
        time.sleep(0.1)
    assert not _alive(worker)
