"""Tests of sensormodel.recording's time base and data checks: findings, their positions, fail
or split into segments, and the Recording's segment views.
"""

from __future__ import annotations

import math
import pathlib

import numpy as np
import pytest
from recording_files import (
    csv_text,
    read_error,
    sample_rows,
    write_file,
)

from sensormodel.errors import RecordingError
from sensormodel.recording import read_recording

# ---------------------------------------------------------------------------------------------
# Time base and data problems: positions, fail and split
# ---------------------------------------------------------------------------------------------


def test_findings_positions_and_split(tmp_path: pathlib.Path) -> None:
    # 2 comment lines + header: sample i is on line i + 4
    def time(i: int) -> float:
        if i >= 150:
            return (i + 5) / 10  # 5 missing samples before sample 150
        return i / 10

    def value(i: int) -> float:
        if i == 40:
            return math.nan
        if 60 <= i < 80:
            return 7.0  # the column's maximum: saturation
        if 200 <= i < 230:
            return 0.25  # constant
        return (i * 7919 % 13) / 10

    rows = sample_rows(300, value, time)
    rows[100] = rows[99]  # duplicate row: same time
    path = write_file(tmp_path, "p.csv", "# a\n# b\n" + csv_text(rows))
    kw = {"constant_run": 25, "saturation_run": 10, "min_segment": 20}
    message = read_error(path, **kw)
    assert message == (
        f"{path}:line 44: column 'gyro_x' holds NaN or an empty field (and 5 more problems); "
        "expected finite samples, or --gaps split to analyse the clean segments"
    )
    r = read_recording(path, gaps="split", **kw)
    got = [(f.kind, f.channel, f.position, f.length, f.where) for f in r.findings]
    assert got == [
        ("non_finite", "gyro.x", 40, 1, "line 44"),
        ("saturated", "gyro.x", 60, 20, "lines 64-83"),
        ("duplicate_time", "time", 100, 1, "line 104"),
        ("gap", "time", 101, 1, "line 105"),  # the duplicated row replaced sample 100
        ("gap", "time", 150, 1, "line 154"),
        ("constant", "gyro.x", 200, 30, "lines 204-233"),
        ("short_segment", "gyro.x", 0, 0, ""),
    ]
    assert r.findings[1].detail == (
        "column 'gyro_x' stays at its maximum 7 for 20 consecutive samples (saturation)"
    )
    assert r.findings[4].detail == (
        "time step of 0.6 s where the median step is 0.1 s (about 5 samples missing)"
    )
    segs = [(s.start, s.stop) for s in r.segments["gyro.x"]]
    # [41,60) and [100,101) are shorter than 20: dropped
    assert segs == [(0, 40), (80, 100), (101, 150), (150, 200), (230, 300)]
    assert r.segments["gyro.x"][3].start_time == pytest.approx(15.5)
    assert r.findings[-1].detail == (
        "2 clean stretches of column 'gyro_x' shorter than 20 samples left out"
    )
    assert r.rate == pytest.approx(10.0, rel=1e-12)  # from the regular steps only
    pieces = r.segment_arrays("gyro.x")
    assert [len(p) for p in pieces] == [40, 20, 49, 50, 70]
    assert all(np.isfinite(p).all() for p in pieces)


def test_default_constant_run_is_1000(tmp_path: pathlib.Path) -> None:
    rng = np.random.default_rng(3)
    x = rng.normal(size=3000)
    x[1000:1999] = 0.5  # 999 identical samples: allowed
    path = tmp_path / "c.npy"
    np.save(path, x)
    assert read_recording(path, rate=1.0).findings == ()
    x[1999] = 0.5
    np.save(path, x)
    assert read_error(path, rate=1.0) == (
        f"{path}:index 1000: column 'ch0' holds the same value 0.5 for 1000 consecutive samples "
        "(a stuck sensor?); expected a live signal, or --gaps split to analyse the clean segments"
    )


def test_saturation_at_minimum_and_binary_positions(tmp_path: pathlib.Path) -> None:
    rng = np.random.default_rng(4)
    x = rng.normal(size=500)
    x[300:320] = -50.0  # clipped at a full scale far beyond the noise
    path = tmp_path / "s.npz"
    np.savez(path, gyro_y=x)
    r = read_recording(path, rate=10.0, gaps="split")
    assert [(f.kind, f.where) for f in r.findings] == [("saturated", "indices 300-319")]
    assert "at its minimum -50" in r.findings[0].detail
    assert [(s.start, s.stop) for s in r.segments["gyro.y"]] == [(0, 300), (320, 500)]


def test_backwards_time_splits(tmp_path: pathlib.Path) -> None:
    times = [i / 10 for i in range(150)] + [i / 10 for i in range(150)]  # logger restart
    rows = [f"{t!r},{(k * 31 % 17)}" for k, t in enumerate(times)]
    path = write_file(tmp_path, "b.csv", csv_text(rows))
    r = read_recording(path, gaps="split")
    assert [(f.kind, f.where) for f in r.findings] == [("non_monotonic", "line 152")]
    assert [(s.start, s.stop, s.start_time) for s in r.segments["gyro.x"]] == [
        (0, 150, 0.0),
        (150, 300, 0.0),
    ]


def test_no_clean_segment(tmp_path: pathlib.Path) -> None:
    rows = sample_rows(30, lambda i: math.nan if i % 5 == 0 else float(i))
    path = write_file(tmp_path, "n.csv", csv_text(rows))
    assert read_error(path, gaps="split") == (
        f"{path}: column 'gyro_x' has no clean stretch of at least 100 samples; expected a "
        "recording with longer clean stretches"
    )


def test_many_problems_are_summarized(tmp_path: pathlib.Path) -> None:
    x = np.arange(5000, dtype=float) % 7
    x[np.arange(5000) % 4 < 2] = np.nan  # 1250 stretches of 2 missing samples
    path = tmp_path / "many.npy"
    np.save(path, x)
    assert read_error(path, rate=1.0) == (
        f"{path}:index 0: column 'ch0' holds NaN or an empty field in 2 consecutive samples "
        "(and 1249 more problems); expected finite samples, or --gaps split to analyse the "
        "clean segments"
    )
    r = read_recording(path, rate=1.0, gaps="split", min_segment=2)
    nan_findings = [f for f in r.findings if f.kind == "non_finite"]
    assert len(nan_findings) == 1001  # MAX_FINDINGS, then one for the rest
    assert nan_findings[-1].count == 250 and nan_findings[-1].position == 4000
    assert nan_findings[-1].detail == (
        "column 'ch0' holds NaN or an empty field in 2 consecutive samples, and 249 more such "
        "stretches after it"
    )
    assert sum(f.count for f in nan_findings) == 1250
    # the segments come from the data, not from the (summarized) list
    assert len(r.segments["ch0"]) == 1250
    assert all(s.n == 2 and s.start % 4 == 2 for s in r.segments["ch0"])
    assert read_error(path, rate=1.0, gaps="split", min_segment=3) == (
        f"{path}: column 'ch0' has no clean stretch of at least 3 samples; expected a "
        "recording with longer clean stretches"
    )


# ---------------------------------------------------------------------------------------------
# The Recording's segment views
# ---------------------------------------------------------------------------------------------


def test_longest_segment_and_samples(tmp_path: pathlib.Path) -> None:
    # NaN at samples 30 and 100: clean stretches 0-29 (30), 31-99 (69), 101-169 (69)
    rows = sample_rows(170, lambda i: math.nan if i in (30, 100) else float(i % 11))
    path = write_file(tmp_path, "s.csv", csv_text(rows))
    r = read_recording(path, gaps="split", min_segment=10)
    segs = r.segments["gyro.x"]
    assert [(s.start, s.stop) for s in segs] == [(0, 30), (31, 100), (101, 170)]
    assert r.longest_segment("gyro.x") == segs[1]  # the first of the two longest
    x = r.samples("gyro.x", segs[2])
    np.testing.assert_array_equal(x, r.data["gyro.x"][101:170])
    assert not x.flags.writeable
    assert [len(a) for a in r.segment_arrays("gyro.x")] == [30, 69, 69]
    assert r.n_samples == 170 and r.duration == pytest.approx(17.0, rel=1e-12)


def test_unknown_channel_is_named(tmp_path: pathlib.Path) -> None:
    path = write_file(tmp_path, "u.csv", csv_text(["0,1", "0.1,2"]))
    r = read_recording(path)
    for method in (r.longest_segment, r.segment_arrays):
        with pytest.raises(RecordingError) as info:
            method("gyro.z")
        assert str(info.value) == (
            f"{path}:channel: no channel 'gyro.z' in the recording; expected one of gyro.x"
        )


def test_coarse_counts_are_neither_saturated_nor_stuck(tmp_path: pathlib.Path) -> None:
    # A coarsely quantized static channel (noise σ = 0.12 count on a bias wandering ±0.8 count)
    # sits at its extreme count for a thousand samples and holds one count for thousands:
    # neither is saturation nor a stuck sensor (its extremes are a count from the median; a
    # live coarse channel holds one count while the bias sits between thresholds: noted). The
    # same channel clipped at a full scale far beyond the noise is still found.
    rng = np.random.default_rng(8)
    n = 200_000
    wander = 0.8 * np.sin(np.arange(n) * 2 * np.pi / 50_000)
    counts = np.rint(rng.normal(0.0, 0.12, n) + wander).astype(np.int16)
    path = tmp_path / "coarse.npy"
    np.save(path, counts)

    # the premise: the old rules (16 samples at an extreme; 1000 of one value) would fire
    def longest(mask: np.ndarray) -> int:
        edges = np.flatnonzero(np.diff(np.concatenate(([0], mask.astype(np.int8), [0]))))
        return int(np.max(edges[1::2] - edges[::2])) if len(edges) else 0

    assert longest(counts == counts.max()) >= 16
    assert max(longest(counts == v) for v in np.unique(counts)) >= 1000
    found = read_recording(path, rate=100.0).findings
    assert [f.kind for f in found] == ["note"] and "coarsely quantized" in found[0].detail
    clipped = counts.copy()
    clipped[1000:1040] = 300
    np.save(path, clipped)
    kinds = [f.kind for f in read_recording(path, rate=100.0, gaps="split").findings]
    assert "saturated" in kinds


def test_saturation_against_a_declared_range(tmp_path: pathlib.Path) -> None:
    # With a declared full scale (the datasheet's measurement_range, SI), a sample at or
    # beyond it is saturation even where the data alone could not tell.
    rng = np.random.default_rng(9)
    x = rng.normal(0.0, 0.01, 2000)
    x[700:703] = 4.0  # three samples at a 4 rad/s full scale
    path = tmp_path / "r.npz"
    np.savez(path, gyro_x=x)
    assert read_recording(path, rate=10.0).findings == ()  # 3 samples: shorter than a run
    r = read_recording(path, rate=10.0, gaps="split", ranges={"gyro.x": 4.0})
    sat = [f for f in r.findings if f.kind == "saturated"]
    assert [(f.position, f.length) for f in sat] == [(700, 3)]
    assert "declared range ±4" in sat[0].detail
