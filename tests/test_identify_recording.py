"""identify.fit_recording: the channels of a recording fitted through the one recording →
analysis path (sensormodel.pipeline), with its segment policy."""

from __future__ import annotations

import numpy as np
import pytest

from sensormodel import identify, pipeline
from sensormodel.errors import AnalysisError
from sensormodel.recording import read_recording

RATE = 50.0
DENSITY = 0.002  # rad/s/√Hz, IEEE (two-sided) white density of the invented unit


def _logger_csv(tmp_path, lengths: tuple[int, ...]):
    """A static gyro log as a logger writes it: a time column in ms, a rate column in deg/s
    at 6 decimals, and a dropped stretch of 2 s between runs of ``lengths`` samples."""
    rng = np.random.default_rng(21)
    rows, t = ["time [ms],gyro_z [deg/s]"], 0.0
    for n in lengths:
        y = np.rad2deg(rng.normal(0.0, DENSITY * np.sqrt(RATE), n))
        rows += [f"{t + 1000.0 * i / RATE:.3f},{v:.6f}" for i, v in enumerate(y)]
        t += 1000.0 * n / RATE + 2000.0
    path = tmp_path / "log.csv"
    path.write_text("\n".join(rows) + "\n")
    return path


def test_the_longest_segment_is_fitted(tmp_path):
    rec = read_recording(_logger_csv(tmp_path, (1500, 6000)), gaps="split")
    (result,) = identify.fit_recording(rec, terms="white,random_walk", seed=2, n_boot=60)
    ch = pipeline.analyse(rec)["gyro.z"]
    assert ch.n_segments == 2 and ch.segment.n == 6000
    assert result.n_samples == 6000
    # the same fit as the curve of that segment, fitted directly
    direct = identify.fit(ch.curve, terms="white,random_walk", seed=2, n_boot=60)
    assert result == direct
    # and the truth it was built with lies in the interval (90 %, the default)
    white = result.term("white")
    assert white.low <= DENSITY <= white.high


def test_an_analysis_is_taken_as_it_is(tmp_path):
    rec = read_recording(_logger_csv(tmp_path, (4000,)))
    analysis = pipeline.analyse(rec, taus="decade")
    (result,) = identify.fit_recording(analysis, terms="white", seed=3, n_boot=60)
    assert result == identify.fit(analysis["gyro.z"].curve, terms="white", seed=3, n_boot=60)


def test_progress_counts_over_all_channels(tmp_path):
    rec = read_recording(_logger_csv(tmp_path, (3000,)))
    calls = []
    identify.fit_recording(rec, terms="white", seed=1, n_boot=60,
                           progress=lambda done, total: calls.append((done, total)))
    assert calls and calls[-1][0] == calls[-1][1]
    assert all(0 <= d <= t for d, t in calls)


def test_bad_options_are_refused_before_any_work(tmp_path):
    rec = read_recording(_logger_csv(tmp_path, (3000,)))
    with pytest.raises(AnalysisError, match="n_boot"):
        identify.fit_recording(rec, n_boot=0)


def test_an_integer_coded_log_has_its_count_step_found(tmp_path):
    # the logger writes counts of 0.05 °/s (a MEMS gyro's output register) at two decimals,
    # σ ≈ 7 counts; read back in rad/s, the step is 0.05 °/s in rad/s, and its quantization is
    # reported as a white floor of density q/√(12·rate) (Sheppard), not subtracted
    rng = np.random.default_rng(22)
    step_deg = 0.05
    counts = np.round(rng.normal(0.0, 7.0, 6000))
    rows = ["time [ms],gyro_z [deg/s]"]
    rows += [f"{1000.0 * i / RATE:.3f},{k * step_deg:.2f}" for i, k in enumerate(counts)]
    path = tmp_path / "counts.csv"
    path.write_text("\n".join(rows) + "\n")
    rec = read_recording(path)
    (result,) = identify.fit_recording(rec, terms="white", seed=4, n_boot=60)
    step = np.deg2rad(step_deg)
    assert result.count_step == pytest.approx(step, rel=1e-9)
    (code, values), = [r for r in result.record_reasons if r[0].startswith("count_step")]
    assert code == "count_step_white_floor"
    assert values["density"] == pytest.approx(step / np.sqrt(12.0 * RATE), rel=1e-9)
    # σ = 7 counts: the floor's share of the white variance is 1/(12·49) within the white
    # estimate's interval
    white = result.term("white")
    assert values["share"] * (white.estimate / white.high) ** 2 <= 1.0 / 588.0
    assert 1.0 / 588.0 <= values["share"] * (white.estimate / white.low) ** 2
    # a step given by the caller is taken as it is; the estimates do not depend on it
    (given,) = identify.fit_recording(rec, terms="white", seed=4, n_boot=60, count_step=2 * step)
    assert given.count_step == 2 * step
    assert given.terms == result.terms
