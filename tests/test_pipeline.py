"""The recording → analysis path (sensormodel.pipeline): one segment policy, one Allan engine,
one Welch."""

from __future__ import annotations

import numpy as np
import pytest

from sensormodel import allan, pipeline, spectrum
from sensormodel.errors import AnalysisError
from sensormodel.recording import read_recording

RATE = 100.0


def _gap_csv(tmp_path, lengths: tuple[int, ...], seed: int = 3):
    """A static gyro log whose logger dropped 0.5 s between stretches of ``lengths`` samples
    (white noise, 0.01 deg/s per sample), written as a rig would: time [s] and one rate column."""
    rng = np.random.default_rng(seed)
    rows, t = ["time [s],gyro_z [deg/s]"], 0.0
    truth = []
    for n in lengths:
        y = rng.normal(0.0, 0.01, n)
        truth.append(np.deg2rad(y))
        for v in y:
            rows.append(f"{t:.4f},{v:.8f}")
            t += 1.0 / RATE
        t += 0.5
    path = tmp_path / "gappy.csv"
    path.write_text("\n".join(rows) + "\n")
    return path, truth


def test_the_longest_clean_segment_is_analysed(tmp_path):
    path, truth = _gap_csv(tmp_path, (700, 2500, 1200))
    rec = read_recording(path, gaps="split")
    result = pipeline.analyse(rec, confidence=0.9)
    (ch,) = result.channels
    assert ch.channel == "gyro.z" and ch.n_segments == 3
    assert ch.segment.n == 2500 and ch.samples_total == 4400
    # the analysed samples are the middle stretch, to the file's 8 digits
    np.testing.assert_allclose(rec.data["gyro.z"][ch.segment.start : ch.segment.stop], truth[1],
                               atol=np.deg2rad(1e-8))
    assert ch.duration == pytest.approx(25.0)
    assert ch.reasons == (("segments_left_out", {"count": 2, "samples": 1900}),)


def test_curve_is_the_allan_engine_of_that_segment(tmp_path):
    path, _ = _gap_csv(tmp_path, (900, 1500))
    rec = read_recording(path, gaps="split")
    ch = pipeline.analyse(rec, confidence=0.683, spectrum_bins=10)["gyro.z"]
    y = rec.data["gyro.z"][ch.segment.start : ch.segment.stop]
    # the rate estimated from the file's time column (not exactly RATE: 100.00000000000001 Hz
    # here) is the rate of the analysis; with it the curve is the engine's to the bit
    ref = allan.overlapping(y, rec.rate, confidence=0.683, unit="rad/s", channel="gyro.z")
    for name in ("tau", "adev", "ci_low", "ci_high", "edf"):
        np.testing.assert_array_equal(getattr(ch.curve, name), getattr(ref, name))
    binned = spectrum.log_bins(spectrum.welch(y, RATE), per_decade=10)
    np.testing.assert_array_equal(ch.psd.psd, binned.psd)


def test_equal_segments_take_the_first(tmp_path):
    path, _ = _gap_csv(tmp_path, (1000, 1000))
    rec = read_recording(path, gaps="split")
    seg = pipeline.analysed_segment(rec, "gyro.z")
    assert seg == rec.segments["gyro.z"][0]


def test_unknown_channel_is_named(tmp_path):
    path, _ = _gap_csv(tmp_path, (800,))
    rec = read_recording(path)
    with pytest.raises(AnalysisError, match="no channel 'gyro.x'.*one of gyro.z"):
        pipeline.analyse(rec, channels=["gyro.x"])


def _rss_file() -> int:
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith("RssFile:"):
                return int(line.split()[1]) * 1024
    pytest.skip("no RssFile in /proc/self/status")


def test_a_mapped_recording_is_analysed_without_keeping_its_pages(tmp_path):
    # a six-channel NPY recording read memory-mapped: after the analysis the process holds
    # almost none of its pages (the reader's checks and the engine read them all; each
    # channel's are let go after use), and the curves are those of the samples in memory
    from sensormodel.recording import open_writer

    rng = np.random.default_rng(4)
    n = 1 << 19
    data = rng.normal(0.0, 0.01, (n, 6))
    names = [f"gyro.{a}" for a in "xyz"] + [f"accelerometer.{a}" for a in "xyz"]
    path = tmp_path / "static.npy"
    with open_writer(path, names, None, RATE, time_column=False, n_samples=n) as w:
        w.write(data)
    pipeline.analyse(read_recording(path), channels=["gyro.x"], taus=[0.01], spectrum_bins=5)
    before = _rss_file()  # libraries loaded by a first analysis
    rec = read_recording(path)
    result = pipeline.analyse(rec, spectrum_bins=10)
    file_bytes = 8 * 6 * n  # 24 MiB, all of it read
    assert _rss_file() - before < file_bytes // 8
    for k, cid in enumerate(names):
        ref = allan.overlapping(data[:, k], RATE, unit=rec.units[cid], channel=cid)
        np.testing.assert_array_equal(result[cid].curve.adev, ref.adev)
