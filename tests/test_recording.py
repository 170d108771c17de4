"""Tests of sensormodel.recording's reader through its public names: every format read and
read back, the sources' metadata, bad input named by file and line.
"""

from __future__ import annotations

import pathlib
import sys

import numpy as np
import pytest
from recording_files import (
    CHANNELS,
    DEG,
    G_N,
    HOUR,
    csv_text,
    read_error,
    sample_block,
    write_file,
)

from sensormodel import recording as rec
from sensormodel.errors import AnalysisError, RecordingError
from sensormodel.recording import open_writer, read_recording

# ---------------------------------------------------------------------------------------------
# Round trips: every writer format reads back without options
# ---------------------------------------------------------------------------------------------

FORMATS = ["csv", "tsv", "txt", "npy", "npz", "h5", "hdf5", "parquet", "feather"]


@pytest.mark.parametrize("ext", FORMATS)
@pytest.mark.parametrize("preallocate", [False, True], ids=["stream", "n_samples"])
def test_round_trip_si(tmp_path: pathlib.Path, ext: str, preallocate: bool) -> None:
    block = sample_block()
    path = tmp_path / f"rec.{ext}"
    kw = {"n_samples": len(block)} if preallocate else {}
    with open_writer(path, CHANNELS, None, 400.0, **kw) as w:
        w.write(block[:1000])
        w.write(block[1000:])
    assert w.n_written == len(block)
    r = read_recording(path)
    assert r.channels == tuple(CHANNELS)
    assert dict(r.units) == {"gyro.x": "rad/s", "gyro.y": "rad/s", "accelerometer.z": "m/s^2"}
    assert r.rate == pytest.approx(400.0, rel=1e-12)
    assert r.start_time == 0.0
    assert not r.increments
    assert r.findings == ()
    for k, c in enumerate(CHANNELS):
        # SI values are written with round-trip precision: exactly equal
        np.testing.assert_array_equal(r.data[c], block[:, k])
        assert r.data[c].dtype == np.float64
        assert r.segments[c] == (rec.Segment(0, len(block), 0.0),)
    np.testing.assert_allclose(r.time, np.arange(len(block)) / 400.0, rtol=0, atol=1e-15)


@pytest.mark.parametrize("ext", ["csv", "npy", "npz", "h5"])
def test_round_trip_datasheet_units(tmp_path: pathlib.Path, ext: str) -> None:
    block = sample_block()
    path = tmp_path / f"rec.{ext}"
    units = {"gyro.x": "deg/s", "gyro.y": "°/h", "accelerometer.z": "mg"}
    with open_writer(path, CHANNELS, units, 100.0) as w:
        w.write(block)
    r = read_recording(path)
    for k, c in enumerate(CHANNELS):
        # one division and one multiplication by the same factor: within a few ulp
        np.testing.assert_allclose(r.data[c], block[:, k], rtol=4e-16 * 4, atol=0)
    if ext == "csv":
        header = path.read_text().splitlines()[0]
        assert header == "time [s],gyro.x [deg/s],gyro.y [°/h],accelerometer.z [mg]"
        first = path.read_text().splitlines()[1].split(",")
        assert float(first[1]) == pytest.approx(block[0, 0] / DEG, rel=1e-15)
        assert float(first[2]) == pytest.approx(block[0, 1] / (DEG / HOUR), rel=1e-15)
        assert float(first[3]) == pytest.approx(block[0, 2] / (G_N * 1e-3), rel=1e-15)


@pytest.mark.parametrize("ext", ["csv", "npy", "npz", "h5"])
def test_round_trip_increments_without_time(tmp_path: pathlib.Path, ext: str) -> None:
    block = sample_block(500)
    path = tmp_path / f"rec.{ext}"
    with open_writer(
        path, CHANNELS, None, 200.0, increments=True, time_column=False, start_time=5.0
    ) as w:
        w.write(block)
    assert w.units == ("rad", "rad", "m/s")
    r = read_recording(path)
    assert r.increments
    assert r.rate == 200.0
    assert r.start_time == 5.0
    assert r.time is None
    assert dict(r.units) == {"gyro.x": "rad/s", "gyro.y": "rad/s", "accelerometer.z": "m/s^2"}
    for k, c in enumerate(CHANNELS):
        np.testing.assert_allclose(r.data[c], block[:, k], rtol=1e-15, atol=0)
    assert r.segments["gyro.x"][0].start_time == 5.0
    if ext == "csv":
        lines = path.read_text().splitlines()
        assert lines[:3] == [
            "# sensormodel increments = true",
            "# sensormodel rate = 200.0 Hz",
            "# sensormodel start_time = 5.0 s",
        ]
        # the file holds increments: rate x period
        assert float(lines[4].split(",")[0]) == pytest.approx(block[0, 0] / 200.0, rel=1e-15)


def test_increments_contradicting_the_file(tmp_path: pathlib.Path) -> None:
    path = tmp_path / "inc.csv"
    with open_writer(path, ["gyro.x"], None, 10.0, increments=True) as w:
        w.write(np.ones((3, 1)))
    assert read_error(path, increments=False) == (
        f"{path}: the file says its samples are increments; "
        "expected --increments as the file states"
    )


def test_npy_is_memory_mapped(tmp_path: pathlib.Path) -> None:
    path = tmp_path / "rec.npy"
    with open_writer(path, CHANNELS, None, 400.0) as w:
        w.write(sample_block())
    r = read_recording(path)
    for c in CHANNELS:
        # a column view of the file's memory map, not a loaded copy
        assert isinstance(r.data[c], np.memmap)
        assert not r.data[c].flags.writeable
    assert isinstance(r.time, np.memmap)


def test_npz_and_contiguous_hdf5_are_memory_mapped(tmp_path: pathlib.Path) -> None:
    for name, kw in (("rec.npz", {}), ("rec.h5", {"n_samples": 3000})):
        path = tmp_path / name
        with open_writer(path, CHANNELS, None, 400.0, **kw) as w:
            w.write(sample_block())
        r = read_recording(path)
        assert all(isinstance(r.data[c], np.memmap) for c in CHANNELS), name


def test_npy_without_sidecar_and_1d(tmp_path: pathlib.Path) -> None:
    data = sample_block(200)
    np.save(tmp_path / "plain.npy", data.astype(np.float32))
    r = read_recording(tmp_path / "plain.npy", rate=50.0)
    assert r.channels == ("ch0", "ch1", "ch2")
    assert dict(r.units) == {"ch0": "1", "ch1": "1", "ch2": "1"}
    assert dict(r.quantities) == {"ch0": "as_recorded", "ch1": "as_recorded", "ch2": "as_recorded"}
    np.testing.assert_array_equal(r.data["ch2"], data[:, 2].astype(np.float32).astype(np.float64))
    np.save(tmp_path / "one.npy", data[:, 0])
    r = read_recording(tmp_path / "one.npy", rate=50.0, channel_map={"ch0": "gyro.z"}, unit="deg/s")
    assert r.channels == ("gyro.z",)
    np.testing.assert_allclose(r.data["gyro.z"], data[:, 0] * DEG, rtol=1e-15)
    assert read_error(tmp_path / "one.npy") == (
        f"{tmp_path / 'one.npy'}: no time column and no sample rate; "
        "expected a column named time, t or timestamp, or --rate HZ"
    )


def test_generic_npz_and_hdf5(tmp_path: pathlib.Path) -> None:
    import h5py

    t = np.arange(100) / 10.0
    g = np.linspace(0, 1, 100)
    np.savez(tmp_path / "a.npz", Gyro_Z=g, rate=np.float64(10.0))
    r = read_recording(tmp_path / "a.npz")
    assert r.channels == ("gyro.z",) and r.rate == 10.0 and r.units["gyro.z"] == "1"
    np.savez_compressed(tmp_path / "b.npz", time=t, gyro_z=g)
    r = read_recording(tmp_path / "b.npz", unit={"time": "s", "gyro_z": "deg/s"})
    assert r.rate == pytest.approx(10.0, rel=1e-12)
    np.testing.assert_allclose(r.data["gyro.z"], g * DEG, rtol=1e-15)
    with h5py.File(tmp_path / "c.h5", "w") as f:
        f.attrs["rate"] = 10.0
        grp = f.create_group("imu")
        grp.create_dataset("gyro_z", data=g).attrs["unit"] = "deg/h"
        grp.create_dataset("temperature", data=g + 20).attrs["unit"] = "degC"
    r = read_recording(tmp_path / "c.h5")
    assert r.channels == ("gyro.z",) and dict(r.auxiliary_units) == {"temperature": "degC"}
    assert dict(r.units) == {"gyro.z": "rad/s"}
    np.testing.assert_allclose(r.data["gyro.z"], g * DEG / HOUR, rtol=1e-15)
    np.testing.assert_array_equal(r.auxiliary["temperature"], g + 20)


def test_hdf5_needs_h5py(tmp_path: pathlib.Path, monkeypatch: pytest.MonkeyPatch) -> None:
    path = tmp_path / "rec.h5"
    path.write_bytes(b"")
    monkeypatch.setitem(sys.modules, "h5py", None)
    assert read_error(path) == (
        f"{path}: reading or writing HDF5 needs the optional package h5py, which is not "
        "installed; expected it installed: pip install sensormodel[hdf5]"
    )
    with pytest.raises(RecordingError, match=r"pip install sensormodel\[hdf5\]"):
        open_writer(tmp_path / "out.h5", ["gyro.x"], None, 10.0)


# ---------------------------------------------------------------------------------------------
# Bad input: one line naming file, line or column
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "kw", "message"),
    [
        (
            "",
            {},
            ": the file is empty; expected a header line such as 'time [s],gyro.x [rad/s]' "
            "and rows of samples",
        ),
        (
            "# a\n\n# b\n",
            {},
            ": no header line (only comments or blank lines); expected a header "
            "line such as 'time [s],gyro.x [rad/s]' and rows of samples",
        ),
        (
            "time [s],gyro_x [deg/s]\n\n",
            {},
            ": no data rows after the header (line 1); expected at least 2 rows of samples",
        ),
        (csv_text(["0,1"]), {}, ":line 2: only one data row; expected at least 2 data rows"),
        (
            csv_text(["0,1", "0.1,abc", "0.2,3"]),
            {},
            ":line 3: column 'gyro_x' holds 'abc', not a "
            "number; expected a decimal number such as -0.0123 (with '.' as the decimal mark)",
        ),
        (
            csv_text(["0,1", "0.1,2,3"]),
            {},
            ":line 3: 3 fields; expected 2 fields separated by commas, as in the header",
        ),
        (
            csv_text(["0,1", "0.1,nan", "0.2,3"]),
            {},
            ":line 3: column 'gyro_x' holds NaN or an empty "
            "field; expected finite samples, or --gaps split to analyse the clean segments",
        ),
        (
            csv_text(["0,1", "0.1,", "0.2,3"]),
            {},
            ":line 3: column 'gyro_x' holds NaN or an empty "
            "field; expected finite samples, or --gaps split to analyse the clean segments",
        ),
        (
            csv_text(["0,1", "0.1,-inf", "0.2,3"]),
            {},
            ":line 3: column 'gyro_x' holds an infinite "
            "value; expected finite samples, or --gaps split to analyse the clean segments",
        ),
        (
            csv_text(["0,1", "0.1,2", "0.1,3", "0.2,4"]),
            {},
            ":line 4: time 0.1 s repeats the "
            "previous sample's; expected increasing time, or --gaps split to analyse the clean "
            "segments",
        ),
        (
            csv_text(["0,1", "0.1,2", "0.05,3", "0.2,4"]),
            {},
            ":line 4: time goes backwards, from "
            "0.1 s to 0.05 s; expected increasing time, or --gaps split to analyse the clean "
            "segments",
        ),
        (
            csv_text(["0,1", "0.1,2"], "time [s],gyro_x [m/s]"),
            {},
            ":column 'gyro_x': got 'm/s' "
            "(length / time); expected an angular rate such as 'deg/s' for channel gyro.x",
        ),
        (
            csv_text(["0,1", "0.1,2"], "time [s],accelerometer_x [deg/s]"),
            {},
            ":column 'accelerometer_x': got 'deg/s' (angle / time); expected an acceleration "
            "such as 'm/s^2' or 'mg' for channel accelerometer.x",
        ),
        (
            csv_text(["0,1", "0.1,2"], "time,gyro_x [deg/s]"),
            {},
            ": the time column 'time' has no unit; expected a unit in the header such as "
            "'time [ms]', or --time time=UNIT (s, ms, us, ns, iso8601)",
        ),
        (
            csv_text(["0,1", "0.1,2"]),
            {"rate": 10.5},
            ": the time column 'time' gives 10 Hz but --rate "
            "gives 10.5 Hz (relative difference 4.8e-02); expected agreement within 1e-06, or only "
            "one of them",
        ),
        (
            csv_text(["0,1", "1,2"], "time [s],t [s],gyro_x [deg/s]"),
            {},
            ": several time columns: 'time', 't'; expected one of them named with --time (e.g. "
            "--time time; the others are kept as auxiliary), or --time none",
        ),
    ],
    ids=[
        "empty",
        "comments-only",
        "header-only",
        "one-row",
        "text",
        "ragged",
        "nan",
        "empty-field",
        "inf",
        "duplicate-time",
        "backwards-time",
        "gyro-in-m/s",
        "acc-in-deg/s",
        "time-without-unit",
        "rate-disagrees",
        "two-time-columns",
    ],
)
def test_bad_input_messages(
    tmp_path: pathlib.Path, text: str, kw: dict[str, object], message: str
) -> None:
    path = write_file(tmp_path, "bad.csv", text)
    assert read_error(path, **kw) == f"{path}{message}"


def test_missing_and_unknown_files(tmp_path: pathlib.Path) -> None:
    assert read_error(tmp_path / "none.csv") == (
        f"{tmp_path / 'none.csv'}: no such file; expected an existing recording (a .csv, .tsv, "
        ".txt, .npy, .npz, .h5, .hdf5, .parquet, .feather, .arrow file, or a ROS bag (.bag, "
        ".mcap, .db3, or a ROS 2 bag folder))"
    )
    p = write_file(tmp_path, "rec.dat", "x")
    assert read_error(p) == (
        f"{p}: unknown recording format '.dat'; expected a .csv, .tsv, .txt, .npy, .npz, .h5, "
        ".hdf5, .parquet, .feather, .arrow file, or a ROS bag (.bag, .mcap, .db3, or a ROS 2 bag "
        "folder)"
    )
    p = write_file(tmp_path, "bad.npy", "not numpy")
    assert read_error(p).startswith(f"{p}: not a readable .npy file (")
    # the rate argument is checked by the shared validator (not file content: no file named)
    with pytest.raises(AnalysisError) as info:
        read_recording(write_file(tmp_path, "ok.csv", csv_text(["0,1", "1,2"])), rate=-1)
    assert str(info.value) == "--rate: got -1 Hz; expected a finite sample rate > 0 Hz"


def test_rate_agreement_within_tolerance(tmp_path: pathlib.Path) -> None:
    rows = [f"{i * 0.01},{i % 2}" for i in range(1000)]
    path = write_file(tmp_path, "r.csv", csv_text(rows))
    r = read_recording(path, rate=100.0 * (1 + 5e-7))
    assert r.rate == 100.0 * (1 + 5e-7)  # the option, which agrees within 1e-6
    with pytest.raises(RecordingError, match="expected agreement within 1e-06"):
        read_recording(path, rate=100.0 * (1 + 2e-6))


def test_stated_rates_must_agree(tmp_path: pathlib.Path) -> None:
    meta = '{"schema": "sensormodel/recording/1", "rate": 20.0}'
    g = np.arange(50.0) % 7
    np.savez(tmp_path / "a.npz", gyro_x=g, rate=np.array(10.0), _sensormodel=np.array(meta))
    assert read_error(tmp_path / "a.npz") == (
        f"{tmp_path / 'a.npz'}: the 'rate' array gives 10 Hz but _sensormodel.rate gives 20 Hz; "
        "expected one rate"
    )
    np.savez(tmp_path / "b.npz", gyro_x=g, rate=np.array(-5.0))
    assert read_error(tmp_path / "b.npz") == (
        f"{tmp_path / 'b.npz'}:rate: rate -5.0; expected a positive sample rate in Hz"
    )
    h5py = pytest.importorskip("h5py")
    with h5py.File(tmp_path / "c.h5", "w") as f:
        f.attrs["rate"] = 10.0
        f.create_dataset("gyro_x", data=g).attrs["rate"] = 10.0 * (1 + 1e-7)  # agrees
    assert read_recording(tmp_path / "c.h5").rate == pytest.approx(10.0, rel=2e-7)
    with h5py.File(tmp_path / "d.h5", "w") as f:
        f.attrs["rate"] = 10.0
        f.create_dataset("gyro_x", data=g).attrs["rate"] = 12.5
    assert read_error(tmp_path / "d.h5") == (
        f"{tmp_path / 'd.h5'}: dataset 'gyro_x' gives 12.5 Hz but the file's rate attribute "
        "gives 10 Hz; expected one rate"
    )


def test_policy_arguments_are_checked(tmp_path: pathlib.Path) -> None:
    path = write_file(tmp_path, "ok.csv", csv_text(["0,1", "1,2"]))
    with pytest.raises(RecordingError, match=r"^gaps: gaps='drop'; expected 'fail' or 'split'$"):
        read_recording(path, gaps="drop")
    for kw, message in (
        ({"min_segment": 1}, "min_segment: got 1; expected a whole number ≥ 2"),
        ({"constant_run": -1}, "constant_run: got -1; expected a whole number ≥ 0"),
        ({"saturation_run": 2.5}, "saturation_run: got 2.5; expected a whole number ≥ 0"),
    ):
        with pytest.raises(AnalysisError) as info:
            read_recording(path, **kw)
        assert str(info.value) == message
    # 0 turns a check off
    assert read_recording(path, constant_run=0, saturation_run=0).n_samples == 2
