"""Planning: each term read where it dominates the datasheet's own Allan curve, a term dominant
nowhere reported as masked, the reading τ independent of the sample rate."""

from __future__ import annotations

import math

import pytest

from sensormodel import acceptance as acc
from sensormodel import report
from sensormodel.acceptance._plan import MIN_MASKED_SHARE

#: A navigation-grade gyro: a 0.0033 °/h bias-instability floor (max) met by the ARW line
#: N/√τ at τ = 2000 s, i.e. N = 0.0033 °/h · √(2000 s) = 0.0033·√(2000/3600) °/√h. A 2 µrad
#: quantization (typical only) dominates the shortest τ, where the Allan variance falls as
#: τ⁻² and its EDF barely depends on τ: there a near-zero share of the floor once won.
_FLOOR_DPH = 0.0033
_CROSSING_S = 2000.0
_ARW_DPRH = _FLOOR_DPH * math.sqrt(_CROSSING_S / 3600.0)
_NAV = f"""
[sensor]
name = "navigation-grade"
sample_rate = "200 Hz"
axes = ["z"]
[gyro]
angle_random_walk = {{ typ = "{0.8 * _ARW_DPRH:.6g} deg/rt-hr", max = "{_ARW_DPRH:.6g} deg/rt-hr" }}
bias_instability = {{ typ = "0.002 deg/h", max = "{_FLOOR_DPH} deg/h" }}
quantization = "2 µrad"
"""


def _row(p: acc.Plan, key: str) -> acc.PlanRow:
    return next(r for r in p.rows if r.spec.key == key)


@pytest.mark.parametrize("rate", [1.0, 20.0, 100.0, 400.0])
def test_navigation_grade_floor_read_where_it_dominates(write_datasheet, rate) -> None:
    p = acc.plan(write_datasheet(_NAV), sample_rate=rate)
    bi = _row(p, "bias_instability")
    # read past the crossing of the ARW line with the floor, where the floor dominates
    assert 1e3 <= bi.read_at <= 1e4
    assert bi.read_at >= _CROSSING_S * 10 ** (-1 / 12)
    assert bi.share >= 0.5 and not bi.reasons
    # many hours: ≈ EDF × τ of a term read at thousands of seconds
    assert bi.duration > 24 * 3600.0
    assert p.driver is bi and p.duration == bi.duration


def test_navigation_grade_reading_does_not_move_with_rate(write_datasheet) -> None:
    sheet = write_datasheet(_NAV)
    rows = [_row(acc.plan(sheet, sample_rate=r), "bias_instability") for r in (1, 20, 100, 400)]
    taus = [r.read_at for r in rows]
    # the same τ within one grid step (12 per decade), and nearly the same length
    assert max(taus) / min(taus) <= 10 ** (1 / 12) * (1 + 1e-9)
    lengths = [r.duration for r in rows]
    assert max(lengths) / min(lengths) < 1.1


def test_white_noise_read_where_it_dominates(write_datasheet) -> None:
    # at the shortest τ the quantization dominates; white noise is read past it
    p = acc.plan(write_datasheet(_NAV), sample_rate=200.0)
    arw, q = _row(p, "angle_random_walk"), _row(p, "quantization")
    assert arw.share >= 0.5 and arw.read_at > q.read_at
    assert q.read_at == pytest.approx(10 / 200.0, rel=0.2) and q.share > 0.9


def test_gauss_markov_read_at_or_past_its_peak(write_datasheet) -> None:
    sheet = write_datasheet(
        """
[sensor]
name = "gm"
sample_rate = "100 Hz"
axes = ["x"]
[accelerometer]
velocity_random_walk = { max = "0.03 m/s/√h" }
bias_instability = { max = "20 µg" }
correlation_time = "600 s"
"""
    )
    bi = _row(acc.plan(sheet), "bias_instability")
    assert bi.read_at >= 1.8926 * 600.0 * (1 - 1e-9)
    assert bi.share > 0.9 and not bi.reasons
    # a record must reach past the peak by the EDF needed there
    assert bi.duration > 8 * bi.read_at


def _masked_sheet(q_max: str) -> str:
    return f"""
[sensor]
name = "masked"
sample_rate = "100 Hz"
axes = ["z"]
[gyro]
angle_random_walk = {{ max = "0.1 deg/rt-hr" }}
quantization = {{ max = "{q_max}" }}
"""


def test_masked_term_planned_at_its_best_tau_with_reason(write_datasheet) -> None:
    # 3 µrad at 100 Hz: quantization √3 Q/τ against N/√τ stays below white noise at every
    # τ ≥ 10 samples, but above a tenth of the variance at the shortest
    p = acc.plan(write_datasheet(_masked_sheet("3 µrad")))
    q = _row(p, "quantization")
    ((code, why),) = q.reasons
    assert code == "term_masked" and why["masked_by"] == "white"
    assert MIN_MASKED_SHARE <= q.share < 0.5 and why["share"] == q.share
    assert q.read_at == pytest.approx(0.1, rel=1e-6)  # its share is largest at the shortest τ
    assert math.isfinite(q.duration) and p.duration == max(r.duration for r in p.rows)
    text = report.plan_text(p)
    assert "quantization is masked by white" in text and "planned there" in text


def test_term_masked_below_the_minimum_share_has_no_length(write_datasheet) -> None:
    p = acc.plan(write_datasheet(_masked_sheet("0.05 µrad")))
    q, arw = _row(p, "quantization"), _row(p, "angle_random_walk")
    assert q.share < MIN_MASKED_SHARE and q.reasons[0][0] == "term_masked"
    assert math.isinf(q.duration)
    # the plan's length and driver are the finite ones
    assert p.driver is arw and p.duration == arw.duration
    text = report.plan_text(p)
    assert "none suffices" in text and "no record length verifies it" in text
