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
from recording_files import (
    ACCEL_COUNT,
    DEG,
    G_N,
    GYRO_COUNT,
    read_error,
    rig_counts,
    rig_csv,
)

from sensormodel import recording as rec
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


# ---------------------------------------------------------------------------------------------
# Rig logs: six channels of raw counts with a scale, temperature and counter, time in ms
# ---------------------------------------------------------------------------------------------

RIG_HEADER = [
    "ts_ms",
    "gx_raw",
    "gy_raw",
    "gz_raw",
    "accel_x [0.061 mg]",
    "accel_y [0.061 mg]",
    "accel_z [0.061 mg]",
    "temp [0.1 degC]",
    "counter",
]
GYRO_UNITS = {"gx_raw": "8.75 mdps", "gy_raw": "0.00875 deg/s", "gz_raw": "0.00875 dps/LSB"}


def _check_rig(r: rec.Recording, counts: dict[str, np.ndarray]) -> None:
    """The recording holds the counts × their scales, the temperature and counter as auxiliary."""
    assert r.channels == (*(f"gyro.{a}" for a in "xyz"), *(f"accelerometer.{a}" for a in "xyz"))
    for a in "xyz":
        np.testing.assert_allclose(r.data[f"gyro.{a}"], counts[f"g{a}"] * GYRO_COUNT, rtol=1e-14)
        np.testing.assert_allclose(
            r.data[f"accelerometer.{a}"], counts[f"a{a}"] * ACCEL_COUNT, rtol=1e-14
        )
    assert sorted(r.auxiliary) == ["counter", "temp"]
    np.testing.assert_allclose(r.auxiliary["temp"], 25.0, rtol=1e-15)
    assert r.auxiliary_units["temp"] == "degC"
    np.testing.assert_array_equal(r.auxiliary["counter"], counts["counter"])
    # a flat temperature and a wrapping counter are never findings (never checked)
    assert not [f for f in r.findings if f.kind != "note"]


def test_rig_csv_counts_with_scales(tmp_path: pathlib.Path) -> None:
    counts = rig_counts()
    n = len(counts["gx"])
    path = rig_csv(tmp_path / "rig.csv", counts, RIG_HEADER, [f"{2.5 * i:.1f}" for i in range(n)])
    r = read_recording(path, unit=GYRO_UNITS)
    _check_rig(r, counts)
    assert r.rate == pytest.approx(400.0, rel=1e-12)
    assert (r.time_column, r.time_unit) == ("ts_ms", "ms")
    assert r.column_units["gyro.x"] == "8.75 mdps"
    # whole numbers under a unit with a scale: counts, their step reported
    notes = [f.detail for f in r.findings if f.kind == "note"]
    assert notes[0] == (
        f"column 'gx_raw' holds whole-number counts; one count is {GYRO_COUNT:.10g} rad/s "
        "([8.75 mdps])"
    )


def test_rig_npy_int16_counts_with_a_scale(tmp_path: pathlib.Path) -> None:
    counts = rig_counts(seed=6)
    path = tmp_path / "rig.npy"
    np.save(path, np.column_stack(list(counts.values())).astype(np.int16))
    cols = [{"name": n} for n in ("gx", "gy", "gz", "ax", "ay", "az", "temp", "counter")]
    (tmp_path / "rig.npy.json").write_text(
        json.dumps({"schema": "sensormodel/recording/1", "rate": 400.0, "columns": cols}),
        encoding="utf-8",
    )
    unit = {"gx": "8.75 mdps", "gy": "8.75 mdps", "gz": "8.75 mdps"}
    unit |= {a: "0.061 mg" for a in ("ax", "ay", "az")} | {"temp": "0.1 degC"}
    r = read_recording(path, unit=unit)
    counts["counter"] = counts["counter"].astype(np.int16)  # stored as int16 in the array
    _check_rig(r, counts)
    notes = [f.detail for f in r.findings if f.kind == "note"]
    assert notes[0] == (
        f"column 'gx' holds int16 counts; one count is {GYRO_COUNT:.10g} rad/s ([8.75 mdps])"
    )


def test_iso_time_and_parenthesized_units(tmp_path: pathlib.Path) -> None:
    counts = rig_counts(n=1200, seed=7)
    base = np.datetime64("2024-05-01T12:00:00.000", "ms")
    stamps = [str(base + np.timedelta64(5 * i, "ms")) + "Z" for i in range(1200)]  # 200 Hz
    header = [
        "Time",
        "GyroX(8.75 mdps)",
        "GyroY(8.75 mdps)",
        "GyroZ(8.75 mdps)",
        "accel_x [0.061 mg]",
        "accel_y [0.061 mg]",
        "accel_z [0.061 mg]",
        "temp (0.1 degC)",
        "counter",
    ]
    path = rig_csv(tmp_path / "iso.csv", counts, header, stamps)
    r = read_recording(path)
    _check_rig(r, counts)
    assert r.time_unit == "iso8601"
    assert r.rate == pytest.approx(200.0, rel=1e-12)
    # 2024-05-01T12:00:00Z is 1714564800 s after the epoch (19844 days × 86400 s + 12 h)
    assert r.start_time == 1714564800.0


@pytest.mark.parametrize(
    ("name", "scale"),
    [("time_us", 1e-6), ("timestamp_ns", 1e-9), ("t_ms", 1e-3), ("time_s", 1.0)],
)
def test_time_units_from_the_name(tmp_path: pathlib.Path, name: str, scale: float) -> None:
    n = 500
    rows = [f"{round(i * 0.01 / scale, 6)!r},{i % 5}" for i in range(n)]  # 100 Hz
    path = tmp_path / "t.csv"
    path.write_text(f"{name},gyro_z [deg/s]\n" + "\n".join(rows) + "\n", encoding="utf-8")
    r = read_recording(path)
    assert r.rate == pytest.approx(100.0, rel=1e-12) and r.time_column == name
    np.testing.assert_allclose(r.data["gyro.z"], (np.arange(n) % 5) * DEG, rtol=1e-15)


def test_epoch_seconds_and_the_time_option(tmp_path: pathlib.Path) -> None:
    n = 800
    t = 1_717_000_000.0 + np.arange(n) / 400.0  # epoch seconds, as a logger prints them
    rows = [f"{t[i]:.6f},{i % 3},{i % 7}" for i in range(n)]
    path = tmp_path / "e.csv"
    path.write_text("stamp,wz [dps],seq\n" + "\n".join(rows) + "\n", encoding="utf-8")
    # 'stamp' is a time word without a unit: named with its unit by the option
    assert "the time column 'stamp' has no unit" in read_error(path)
    r = read_recording(path, time="stamp", time_unit="epoch")
    # epoch seconds in float64 are good to 2**-22 s (2.4e-7 s) near 1.7e9 s: over this 2 s
    # record the rate is good to about 2.4e-7 / 2 = 1.2e-7 (relative)
    assert r.rate == pytest.approx(400.0, rel=2e-7) and r.start_time == t[0]
    assert r.channels == ("gyro.z",) and list(r.auxiliary) == ["seq"]
    # --time none: no time column, the rate from the option; 'stamp' becomes auxiliary
    r = read_recording(path, time=False, rate=400.0)
    assert sorted(r.auxiliary) == ["seq", "stamp"] and r.time is None


def test_per_column_units_and_accel_names(tmp_path: pathlib.Path) -> None:
    path = tmp_path / "mix.csv"
    path.write_text(
        "time [s],GyroX(dps),gyro_y,accel_x [g],acc_y,temperature\n"
        "0,1,2,1,3,20.5\n0.01,2,3,1,3,20.5\n0.02,3,4,1,3,20.5\n",
        encoding="utf-8",
    )
    r = read_recording(path, unit={"gyro_y": "deg/h", "acc_y": "mg"})
    assert r.channels == ("gyro.x", "gyro.y", "accelerometer.x", "accelerometer.y")
    np.testing.assert_allclose(r.data["gyro.x"], np.array([1, 2, 3]) * DEG, rtol=1e-15)
    np.testing.assert_allclose(r.data["gyro.y"], np.array([2, 3, 4]) * DEG / 3600, rtol=1e-15)
    np.testing.assert_allclose(r.data["accelerometer.x"], G_N, rtol=1e-15)
    np.testing.assert_allclose(r.data["accelerometer.y"], 3e-3 * G_N, rtol=1e-15)
    assert list(r.auxiliary) == ["temperature"]


def test_auxiliary_option_and_gaps(tmp_path: pathlib.Path) -> None:
    # a status column with NaN and a stuck value: auxiliary, it neither fails nor cuts
    n = 300
    rows = [f"{i / 100!r},{(i * 7919) % 13},{'' if i == 50 else 1}" for i in range(n)]
    path = tmp_path / "a.csv"
    path.write_text("t [s],gyro_x [deg/s],health\n" + "\n".join(rows) + "\n", encoding="utf-8")
    r = read_recording(path, gaps="split")  # 'health' is not a channel name: auxiliary
    assert r.channels == ("gyro.x",) and r.segments["gyro.x"][0].n == n
    assert np.isnan(r.auxiliary["health"][50])
    # without a channel name in the file every column is analysed, unless marked auxiliary
    path.write_text("t [s],q [deg/s],health\n" + "\n".join(rows) + "\n", encoding="utf-8")
    assert "holds NaN" in read_error(path)
    r = read_recording(path, auxiliary="health")
    assert r.channels == ("q",) and list(r.auxiliary) == ["health"]


@pytest.mark.parametrize(
    ("header", "kw", "message"),
    [
        (
            "time [fortnightly],gx [deg/s]",
            {},
            "column 'time': cannot read the unit 'fortnightly' (unknown unit 'fortnightly'); "
            "expected a time such as '100 s'",
        ),
        (
            "time [s],gx [8.75 blorps]",
            {},
            "column 'gx': cannot read the unit 'blorps' (unknown unit 'blorps'); expected an "
            "angular rate such as 'deg/s' for channel gyro.x",
        ),
        (
            "time [s],gx [deg/s/LSB]",
            {},
            "column 'gx': the unit 'deg/s/LSB' gives no value of one count; expected the value of "
            "one count with its unit, e.g. '0.00875 deg/s/LSB' for channel gyro.x",
        ),
        (
            "time [s],gx [0 mdps]",
            {},
            "column 'gx': the scale in '0 mdps' is 0; expected a finite, non-zero value of one "
            "count, e.g. '8.75 mdps' for channel gyro.x",
        ),
        (
            "time [s],gx [deg/s],gx [deg/s]",
            {},
            "column 'gx': the column name 'gx' appears 2 times; expected unique column names",
        ),
        (
            "time [s],gx [deg/s]",
            {"time": "clock"},
            " unknown column 'clock' in --time; expected one of the columns 'time', 'gx'",
        ),
    ],
    ids=[
        "time-unit",
        "scale-unit",
        "per-count-without-number",
        "zero-scale",
        "named-twice",
        "time-option",
    ],
)
def test_rig_refusals(tmp_path: pathlib.Path, header: str, kw: dict, message: str) -> None:
    path = tmp_path / "bad.csv"
    n = header.count(",") + 1
    path.write_text(
        header
        + "\n"
        + "\n".join(",".join(["0"] * n).replace("0", str(i), 1) for i in range(3))
        + "\n",
        encoding="utf-8",
    )
    assert read_error(path, **kw) == f"{path}:{message}"
