"""Tests of sensormodel.recording on files shaped like test-rig and logger output: raw integer
counts with a scale, time stamps in ms / µs / ns / epoch / ISO-8601 text, per-column units,
temperature and counter columns kept as auxiliary, Parquet, Arrow and ROS bags. Each file is
written from known values and read back against them.

Outside references used here:
- degree = pi/180 rad (SI Brochure, 9th ed., BIPM 2019, Table 8);
- standard gravity g_n = 9.80665 m/s^2 exactly (3rd CGPM 1901; NIST SP 330);
- float64 holds every integer of magnitude ≤ 2**53 exactly (IEEE 754-2019, binary64).
"""

from __future__ import annotations

import json
import pathlib

import numpy as np
import pytest
from recording_files import DEG, G_N, read_error

from sensormodel.recording import read_recording

# ---------------------------------------------------------------------------------------------
# Integer counts
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("dtype", ["int16", "int32", "int64", "uint16", "uint8", "uint64"])
def test_integer_npy_reads_exactly(tmp_path: pathlib.Path, dtype: str) -> None:
    info = np.iinfo(dtype)
    rng = np.random.default_rng(3)
    counts = rng.integers(max(info.min, -30000), min(info.max, 30000), size=(5000, 2), dtype=dtype)
    # the extremes of the type (of float64's exact integers for 64-bit types) read exactly too
    counts[0, 0] = min(info.max, 2**53)
    counts[1, 1] = max(info.min, -(2**53))
    path = tmp_path / "raw.npy"
    np.save(path, counts)
    r = read_recording(path, rate=200.0)
    assert r.channels == ("ch0", "ch1")
    for j, cid in enumerate(r.channels):
        assert r.data[cid].dtype == np.float64
        # every count exactly, compared as Python integers
        assert [int(v) for v in r.data[cid]] == [int(v) for v in counts[:, j]]
    assert r.rate == 200.0


def test_int64_counts_beyond_2_53_refused(tmp_path: pathlib.Path) -> None:
    counts = np.arange(100, dtype=np.int64)
    counts[50] = 2**53 + 1  # not a float64
    path = tmp_path / "big.npy"
    np.save(path, counts)
    assert read_error(path, rate=10.0) == (
        f"{path}: column 'ch0' holds int64 counts beyond ±2**53; expected counts that "
        "float64 holds exactly (|count| ≤ 2**53)"
    )


def test_int64_epoch_nanosecond_stamps_keep_their_steps(tmp_path: pathlib.Path) -> None:
    # epoch nanoseconds need 61 bits: float64 alone would round each stamp to 256 ns
    t0 = 1_717_000_000_123_456_789
    n = 4000
    stamps = t0 + np.arange(n, dtype=np.int64) * 2_500_000  # 400 Hz
    data = np.column_stack([stamps, np.arange(n, dtype=np.int64) % 7])
    path = tmp_path / "ns.npy"
    np.save(path, data)
    (tmp_path / "ns.npy.json").write_text(
        json.dumps(
            {
                "schema": "sensormodel/recording/1",
                "columns": [{"name": "time", "unit": "ns"}, {"name": "gyro.x", "unit": "mdps"}],
            }
        ),
        encoding="utf-8",
    )
    r = read_recording(path)
    assert r.rate == pytest.approx(400.0, rel=1e-12)
    assert r.start_time == pytest.approx(t0 * 1e-9, rel=1e-15)
    steps = np.diff(r.time)
    assert np.all(np.abs(steps - 2.5e-3) < 1e-6)
    np.testing.assert_allclose(r.data["gyro.x"], (np.arange(n) % 7) * 1e-3 * DEG, rtol=1e-15)
