"""Identification and verdicts on records built the way real sensors record (issue 13).

The records (:mod:`tests.realistic_records`): white noise + flicker at the level of an
industrial MEMS gyro (0.035 °/s/√Hz, floor 25 °/h), 100 Hz, one hour, then an undeclared 1- or
2-pole output filter at rate/4 (digital, or analog and point-sampled), integer coding with a
count step of σ/7 or σ, a 2 Hz line, a mild thermal ramp, and combinations. Each is fitted as
:func:`identify.fit_recording` fits a channel (the count step found from the samples; no
bandwidth given). The truth is what the datasheet prints for the delivered samples: the white
density √(N²·A + q²/(12·rate)) (A the aliasing of point samples, q the count step;
:func:`realistic_records.white_truth`) and the floor 0.6643·B.

Tolerances (the issue's acceptance numbers, argued here):

* white density within ±5 %: its 90 % bootstrap interval on an ideal record of this length is
  about ±1 % (checked below on each record: the ideal fit lands well inside), so ±5 % leaves
  the model error of the realistic steps at most a few per cent;
* floor 0.6643·B within ±20 %: about twice the half-width of the flicker coefficient's 90 %
  interval on an ideal one-hour record (±8–10 %, measured below as well);
* the fitted model's Allan deviation within ±25 % of the measured curve at every octave τ from
  1 s to a twentieth of the record: the measured deviation's 68 % chi-square interval at
  τ = T/20 (EDF ≈ 25 for flicker) is about ±15 % (NIST SP 1065 eq. 45), and the 90 % one
  about ±25 %;
* no ``fail`` verdict for a unit at its typical values against a max of twice typical
  (common practice of acceptance at the datasheet maximum).
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest

from sensormodel import report

sys.path.insert(0, str(Path(__file__).parent))

import realistic_records as rr  # noqa: E402

from sensormodel import acceptance, allan, identify, load_datasheet  # noqa: E402
from sensormodel.counts import count_step  # noqa: E402

_N = int(3600 * rr.RATE)  # one hour at 100 Hz
_NBOOT = 60
_DEG_H = math.pi / 180.0 / 3600.0


def _fit(case: str, seed: int = 1) -> tuple[identify.Identification, allan.AllanCurve]:
    """The case's record fitted as :func:`identify.fit_recording` fits one: its count step
    found from the samples (:func:`sensormodel.counts.count_step`)."""
    kwargs = {} if case == "ideal" else rr.CASES[case]
    y = rr.record(seed, _N, **kwargs)
    curve = allan.overlapping(y, rr.RATE, channel="gyro.z", unit="rad/s")
    found = count_step(y)
    step = None if found is None else found.step
    return identify.fit(curve, seed=0, n_boot=_NBOOT, count_step=step), curve


@pytest.fixture(scope="module")
def fits() -> dict[str, tuple[identify.Identification, allan.AllanCurve]]:
    return {case: _fit(case) for case in ["ideal", *rr.CASES]}


@pytest.mark.parametrize("case", ["ideal", *rr.CASES])
def test_white_and_floor_within_tolerance(fits, case):
    """White density within ±5 % and the flicker floor within ±20 % of the truth (issue 13)."""
    ident, _curve = fits[case]
    white = ident.term("white").estimate / rr.white_truth(case)
    floor = ident.term("flicker").estimate / rr.GYRO.flicker
    assert abs(white - 1.0) <= 0.05, (case, white, ident.fit_range, ident.fit_range_reason)
    assert abs(floor - 1.0) <= 0.20, (case, floor, ident.fit_range, ident.fit_range_reason)


@pytest.mark.parametrize("case", ["ideal", *rr.CASES])
def test_fitted_curve_follows_the_measured_one(fits, case):
    """The fitted Allan deviation within ±25 % of the measured one at every octave τ from 1 s
    to a twentieth of the record (issue 13; the measured curve's 90 % interval there)."""
    ident, curve = fits[case]
    octave = 2.0 ** np.arange(0, 30)
    octave = octave[octave <= _N / rr.RATE / 20.0]
    assert octave.size >= 7
    measured = np.interp(np.log(octave), np.log(curve.tau), curve.adev)
    ratio = ident.fitted_adev(octave) / measured
    assert np.all(np.abs(ratio - 1.0) <= 0.25), (case, ratio)


def test_ideal_record_is_fitted_over_the_whole_curve(fits):
    """A record the model describes keeps every τ (the range test's false-exclusion level is
    1 %), and the identification says so."""
    ident, curve = fits["ideal"]
    assert ident.fit_range_reason == "fit_range_full"
    assert ident.fit_range == (float(curve.tau[0]), float(curve.tau[-1]))
    assert ident.fit_range_departure == 0.0
    # the tolerances above are wide against the ideal record's own intervals
    w = ident.term("white")
    assert (w.high - w.low) / w.estimate < 0.05


@pytest.mark.parametrize("case", ["filter_1pole", "filter_2pole", "point_1pole", "point_2pole"])
def test_undeclared_filter_is_fitted_and_reported(fits, case):
    """An undeclared output filter near rate/4 (digital, or analog and point-sampled) is
    fitted as a nuisance parameter: 1 or 2 poles, a corner between rate/8 and rate/2 (a
    digital filter's response is matched by an analog one of nearby corner: 23-30 Hz measured
    for the 25 Hz filters), the fit keeps the shortest τ (at most the first is left out), and
    the identification says so."""
    ident, curve = fits[case]
    assert ident.white_filter_origin == "fitted"
    bandwidth, order = ident.white_filter
    assert order in (1, 2) and rr.RATE / 8 <= bandwidth <= rr.RATE / 2
    assert ident.fit_range[0] <= curve.tau[1]
    assert ("output_filter_fitted", {"bandwidth": bandwidth, "order": order}) in (
        ident.record_reasons
    )
    assert any("an output filter was fitted" in n for n in report.identify_notes(ident))
    assert ident.term("white").details["bandwidth"] == bandwidth


@pytest.mark.parametrize("case", ["ideal", "line_2hz", "thermal_drift", "integer_coded"])
def test_no_filter_claimed_without_one(fits, case):
    """A record with no output filter has none fitted: the shortest τ of a record with a
    2 Hz line lie above white noise there, or no filter describes them."""
    ident, _curve = fits[case]
    assert ident.white_filter is None and ident.white_filter_origin is None


@pytest.mark.parametrize("case", ["line_2hz", "filter_coded_line", "all"])
def test_short_tau_left_out_and_reported(fits, case):
    """Where the shortest τ depart from the terms and no filter describes them (a
    narrow-band line), they are left out, and the identification reports the range, the
    reason and the departure."""
    ident, curve = fits[case]
    assert ident.fit_range_reason == "fit_range_short_tau_departs_model"
    lo, hi = ident.fit_range
    assert curve.tau[0] < lo <= 1.0
    assert hi == float(curve.tau[-1])
    # the left-out τ depart far beyond their statistical interval and the model precision
    assert ident.fit_range_departure > 0.1
    # and the identify command's notes say so first (sensormodel.report)
    assert report.identify_notes(ident)[0].startswith(f"fitted over τ {lo:.4g} s to ")


def _datasheet(tmp_path: Path, max_factor: float, typ_factor: float = 1.0) -> Path:
    """A datasheet TOML of the gyro: typ = typ_factor × truth, max = max_factor × truth."""
    n_typ = typ_factor * rr.GYRO.white * 180.0 / math.pi  # °/s/√Hz (= °/s·√s)
    floor_typ = typ_factor * rr.GYRO.floor / _DEG_H  # °/h
    n_max = max_factor / typ_factor * n_typ
    floor_max = max_factor / typ_factor * floor_typ
    text = f"""
[sensor]
name = "realistic MEMS gyro (test)"
axes = ["z"]
sample_rate = "100 Hz"

[gyro]
noise_density = {{ typ = "{n_typ:.6g} °/s/√Hz", max = "{n_max:.6g} °/s/√Hz" }}
bias_instability = {{ typ = "{floor_typ:.6g} °/h", max = "{floor_max:.6g} °/h" }}
"""
    path = tmp_path / f"gyro-{max_factor:g}.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.mark.parametrize("case", ["filter_2pole", "all", "point_coded_line_drift"])
def test_good_unit_is_not_failed(tmp_path, case):
    """A unit at its typical values recorded as real sensors record, against a max of twice
    typical: no ``fail`` (issue 13: such units were failed on bias instability)."""
    _ident, curve = _fit(case, seed=2)
    ds = load_datasheet(_datasheet(tmp_path, 2.0))
    report = acceptance.verify(
        {"gyro.z": curve}, ds, duration=_N / rr.RATE, seed=0, n_boot=_NBOOT, workers=1
    )
    verdicts = [t.verdict for ch in report.channels for t in ch.terms]
    assert verdicts and "fail" not in verdicts, verdicts
    assert report.overall != "fail"


def test_overstated_unit_is_still_failed(tmp_path):
    """The same record against a max of half its typical floor and density is failed: the
    range step does not make the verdict blind."""
    _ident, curve = _fit("filter_2pole", seed=2)
    ds = load_datasheet(_datasheet(tmp_path, 0.5, typ_factor=0.5))
    report = acceptance.verify(
        {"gyro.z": curve}, ds, duration=_N / rr.RATE, seed=0, n_boot=_NBOOT, workers=1
    )
    verdicts = {t.spec.key: t.verdict for ch in report.channels for t in ch.terms}
    assert set(verdicts.values()) == {"fail"}, verdicts


@pytest.mark.parametrize("case", ["integer_coded", "coarse_counts", "filter_coded_line", "all"])
def test_count_step_found_and_reported(fits, case):
    """The count step of an integer-coded record (σ/7 or σ, with an offset of a third of a
    step) is found from the samples to 1e-9 and its quantization floor reported; at σ it is
    not yet coarse (Sheppard's q²/12 holds while exp(−2π²σ²/q²) ≤ 1 %, q ≲ 2σ: Widrow, Kollár
    & Liu, IEEE Trans. Instrum. Meas. 45(2), 1996), and the white estimate, the delivered
    density √(N² + q²/(12·rate)), is checked by test_white_and_floor_within_tolerance."""
    ident, _curve = fits[case]
    step = rr.CASES[case]["count_step"]
    assert ident.count_step == pytest.approx(step, rel=1e-9)
    codes = dict(ident.record_reasons)
    floor = codes["count_step_white_floor"]
    assert floor["density"] == pytest.approx(step / math.sqrt(12.0 * rr.RATE), rel=1e-9)
    assert "count_step_coarse" not in codes
    assert any(n.startswith("integer-coded record") for n in report.identify_notes(ident))


def test_uncoded_records_have_no_count_step(fits):
    for case in ("ideal", "filter_2pole", "point_2pole", "line_2hz"):
        assert fits[case][0].count_step is None, case
