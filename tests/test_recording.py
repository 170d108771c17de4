"""Tests of sensormodel.recording: formats, units, time base, problems, engines, cache, writers.

Outside references used here:
- degree = pi/180 rad and hour = 3600 s (SI Brochure, 9th ed., BIPM 2019, Table 8);
- standard gravity g_n = 9.80665 m/s^2 exactly (3rd CGPM 1901; NIST SP 330);
- Python's ``float()`` (correctly rounded decimal-to-binary conversion, IEEE 754-2008 §5.12) is
  the reference for every number a CSV engine returns.
"""

from __future__ import annotations

import math
import os
import pathlib
import sys

import numpy as np
import pytest

from sensormodel import recording as rec
from sensormodel.recording import _csv as csv_engine
from sensormodel._io import OutputExistsError
from sensormodel.errors import AnalysisError, RecordingError, UnitError
from sensormodel.recording import Finding, open_writer, read_recording

DEG = math.pi / 180  # SI Brochure Table 8
HOUR = 3600.0  # SI Brochure Table 8
G_N = 9.80665  # 3rd CGPM 1901, exact

CHANNELS = ["gyro.x", "gyro.y", "accelerometer.z"]


def _write(tmp_path: pathlib.Path, name: str, text: str) -> pathlib.Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8", newline="")
    return p


def _block(n: int = 3000, seed: int = 1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return np.column_stack(
        [rng.normal(0, 1e-3, n), rng.normal(2e-4, 1e-3, n), rng.normal(G_N, 1e-2, n)]
    )


def _csv(rows: list[str], header: str = "time [s],gyro_x [deg/s]") -> str:
    return header + "\n" + "\n".join(rows) + "\n"


def _err(path: pathlib.Path, **kw: object) -> str:
    with pytest.raises(RecordingError) as info:
        read_recording(path, **kw)
    return str(info.value)


# ---------------------------------------------------------------------------------------------
# Round trips: every writer format reads back without options
# ---------------------------------------------------------------------------------------------

FORMATS = ["csv", "tsv", "txt", "npy", "npz", "h5", "hdf5"]


@pytest.mark.parametrize("ext", FORMATS)
@pytest.mark.parametrize("preallocate", [False, True], ids=["stream", "n_samples"])
def test_round_trip_si(tmp_path: pathlib.Path, ext: str, preallocate: bool) -> None:
    block = _block()
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
    block = _block()
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
    block = _block(500)
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
    assert _err(path, increments=False) == (
        f"{path}: the file says its samples are increments; "
        "expected --increments as the file states"
    )


def test_npy_is_memory_mapped(tmp_path: pathlib.Path) -> None:
    path = tmp_path / "rec.npy"
    with open_writer(path, CHANNELS, None, 400.0) as w:
        w.write(_block())
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
            w.write(_block())
        r = read_recording(path)
        assert all(isinstance(r.data[c], np.memmap) for c in CHANNELS), name


def test_npy_without_sidecar_and_1d(tmp_path: pathlib.Path) -> None:
    data = _block(200)
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
    assert _err(tmp_path / "one.npy") == (
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
    assert r.channels == ("gyro.z", "temperature")
    assert dict(r.units) == {"gyro.z": "rad/s", "temperature": "degC"}
    np.testing.assert_allclose(r.data["gyro.z"], g * DEG / HOUR, rtol=1e-15)
    np.testing.assert_array_equal(r.data["temperature"], g + 20)


def test_hdf5_needs_h5py(tmp_path: pathlib.Path, monkeypatch: pytest.MonkeyPatch) -> None:
    path = tmp_path / "rec.h5"
    path.write_bytes(b"")
    monkeypatch.setitem(sys.modules, "h5py", None)
    assert _err(path) == (
        f"{path}: reading or writing HDF5 needs the optional package h5py, which is not "
        "installed; expected it installed: pip install sensormodel[hdf5]"
    )
    with pytest.raises(RecordingError, match=r"pip install sensormodel\[hdf5\]"):
        open_writer(tmp_path / "out.h5", ["gyro.x"], None, 10.0)


# ---------------------------------------------------------------------------------------------
# Writers: atomic, no overwrite, units checked
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("ext", ["csv", "npy", "npz", "h5"])
def test_writer_failure_leaves_nothing(tmp_path: pathlib.Path, ext: str) -> None:
    path = tmp_path / f"rec.{ext}"
    with pytest.raises(RuntimeError, match="stop"):
        with open_writer(path, CHANNELS, None, 10.0) as w:
            w.write(_block(10))
            raise RuntimeError("stop")
    assert list(tmp_path.iterdir()) == []
    with pytest.raises(RecordingError, match="3 samples written; expected n_samples=5"):
        with open_writer(path, CHANNELS, None, 10.0, n_samples=5) as w:
            w.write(_block(3))
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("ext", ["csv", "npy", "npz", "h5"])
def test_writer_refuses_to_overwrite(tmp_path: pathlib.Path, ext: str) -> None:
    path = tmp_path / f"rec.{ext}"
    path.write_bytes(b"old")
    with pytest.raises(OutputExistsError) as info:
        open_writer(path, CHANNELS, None, 10.0)
    assert (
        str(info.value)
        == f"{path}: the file exists; expected a new file name, or --force to overwrite it"
    )
    assert path.read_bytes() == b"old"
    with open_writer(path, CHANNELS, None, 10.0, force=True) as w:
        w.write(_block(10))
    assert read_recording(path).n_samples == 10


def test_writer_checks(tmp_path: pathlib.Path) -> None:
    path = tmp_path / "rec.csv"
    with pytest.raises(UnitError) as info:
        open_writer(path, ["gyro.x"], "mg", 10.0)
    assert str(info.value) == (
        f"{path}:unit of gyro.x: got 'mg' ([mass]) ('g' is read as grams outside acceleration "
        "fields); expected an angular rate convertible to 'rad/s', such as '10 deg/h'"
    )
    with open_writer(path, ["gyro.x"], None, 10.0) as w:
        with pytest.raises(RecordingError, match=r"a block of shape \(4, 2\); expected shape"):
            w.write(np.zeros((4, 2)))
        with pytest.raises(RecordingError, match="sample 1 is not finite"):
            w.write(np.array([0.0, np.nan]))
        w.write(np.zeros(4))
    assert read_recording(path, constant_run=0).n_samples == 4
    with pytest.raises(RecordingError, match="unknown recording format '.dat'"):
        open_writer(tmp_path / "rec.dat", ["gyro.x"], None, 10.0)


def test_writer_docstring_example(tmp_path: pathlib.Path) -> None:
    path = tmp_path / "rec.csv"
    with open_writer(path, ["gyro.x"], "deg/s", 100.0) as w:
        w.write(np.full((3, 1), DEG))
    assert path.read_text() == "time [s],gyro.x [deg/s]\n0,1\n0.01,1\n0.02,1\n"


# ---------------------------------------------------------------------------------------------
# Headers, units and channel mapping
# ---------------------------------------------------------------------------------------------


def test_datasheet_units_in_headers(tmp_path: pathlib.Path) -> None:
    path = _write(
        tmp_path,
        "ds.csv",
        "# logger v2\n# 2 comment lines\n"
        "time [ms],gyro_x [deg/s],GYRO_Y [°/h],gyro.z [mdps],acc_z [mg],Accelerometer_X [µg],"
        "temp [degC],counter\n"
        "0,1,1,1,1,1,20,5\n"
        "10,2,3,4,5,6,21,6\n"
        "20,3,3,4,5,6,21,7\n",
    )
    r = read_recording(path, channel_map={"acc_z": "accelerometer.z"})
    assert r.channels == (
        "gyro.x",
        "gyro.y",
        "gyro.z",
        "accelerometer.z",
        "accelerometer.x",
        "temp",
        "counter",
    )
    assert r.rate == pytest.approx(100.0, rel=1e-12)  # 10 ms steps
    np.testing.assert_allclose(r.data["gyro.x"], np.array([1, 2, 3]) * DEG, rtol=1e-15)
    np.testing.assert_allclose(r.data["gyro.y"], np.array([1, 3, 3]) * DEG / HOUR, rtol=1e-15)
    np.testing.assert_allclose(r.data["gyro.z"], np.array([1, 4, 4]) * 1e-3 * DEG, rtol=1e-15)
    # mg and µg on accelerometer channels are standard gravity, not grams
    np.testing.assert_allclose(
        r.data["accelerometer.z"], np.array([1, 5, 5]) * 1e-3 * G_N, rtol=1e-15
    )
    np.testing.assert_allclose(
        r.data["accelerometer.x"], np.array([1, 6, 6]) * 1e-6 * G_N, rtol=1e-15
    )
    assert r.units["temp"] == "degC" and r.quantities["temp"] == "as_recorded"
    assert r.units["counter"] == "1" and r.quantities["counter"] == "as_recorded"
    np.testing.assert_array_equal(r.data["counter"], [5, 6, 7])
    assert dict(r.columns)["accelerometer.z"] == "acc_z"


def test_unmapped_column_unit_infers_kind(tmp_path: pathlib.Path) -> None:
    path = _write(tmp_path, "u.csv", _csv(["0,1", "0.5,2"], "time [s],acc_z [mg]"))
    r = read_recording(path)
    assert r.channels == ("acc_z",)
    assert r.quantities["acc_z"] == "acceleration" and r.units["acc_z"] == "m/s^2"
    np.testing.assert_allclose(r.data["acc_z"], [1e-3 * G_N, 2e-3 * G_N], rtol=1e-15)


def test_unit_option(tmp_path: pathlib.Path) -> None:
    path = _write(tmp_path, "u.csv", _csv(["0,1,1", "0.5,2,2"], "time [s],gyro_x,gyro_y [deg/s]"))
    r = read_recording(path)
    assert r.units["gyro.x"] == "1" and r.quantities["gyro.x"] == "as_recorded"
    np.testing.assert_array_equal(r.data["gyro.x"], [1.0, 2.0])
    # one unit: for the columns that have none
    r = read_recording(path, unit="deg/h")
    np.testing.assert_allclose(r.data["gyro.x"], np.array([1, 2]) * DEG / HOUR, rtol=1e-15)
    np.testing.assert_allclose(r.data["gyro.y"], np.array([1, 2]) * DEG, rtol=1e-15)
    # per column: overrides the file, with a note
    r = read_recording(path, unit={"gyro_y": "mdps"})
    np.testing.assert_allclose(r.data["gyro.y"], np.array([1, 2]) * 1e-3 * DEG, rtol=1e-15)
    assert r.findings == (
        Finding(
            "note", "gyro_y", 0, "column 'gyro_y' says [deg/s] in the file; read as [mdps] as asked"
        ),
    )
    assert _err(path, unit={"gyro_q": "deg/s"}) == (
        f"{path}: unknown column 'gyro_q' in --unit; expected one of the columns 'time', "
        "'gyro_x', 'gyro_y'"
    )


def test_increments(tmp_path: pathlib.Path) -> None:
    path = _write(tmp_path, "i.csv", _csv(["0,0.01", "0.1,0.02"], "time [s],gyro_x [deg]"))
    r = read_recording(path, increments=True)
    # increment / period = mean rate over the period
    np.testing.assert_allclose(r.data["gyro.x"], np.array([0.01, 0.02]) * DEG * 10.0, rtol=1e-15)
    assert r.units["gyro.x"] == "rad/s" and r.increments
    assert _err(path) == (
        f"{path}:column 'gyro_x': got 'deg' ([angle]); expected an angular rate such as 'deg/s' "
        "for channel gyro.x (or --increments if the samples are increments per sample)"
    )
    path = _write(tmp_path, "v.csv", _csv(["0,0.01", "0.1,0.02"], "time [s],accelerometer_y [m/s]"))
    r = read_recording(path, increments=True)
    np.testing.assert_allclose(r.data["accelerometer.y"], [0.1, 0.2], rtol=1e-15)
    assert r.units["accelerometer.y"] == "m/s^2"


def test_columns_and_channel_map(tmp_path: pathlib.Path) -> None:
    path = _write(
        tmp_path,
        "c.csv",
        _csv(["0,1,2,3,4", "1,2,3,4,5"], "t [s],gx [deg/s],gyro_y [deg/s],ax [g],temp [degC]"),
    )
    r = read_recording(path, columns="gyro*", channel_map={"gx": "gyro_x", "ax": "ACCELEROMETER.X"})
    assert r.channels == ("gyro.x", "gyro.y", "accelerometer.x")
    np.testing.assert_allclose(r.data["accelerometer.x"], [3 * G_N, 4 * G_N], rtol=1e-15)
    r = read_recording(path, columns=["temp", "g?"])
    assert r.channels == ("gx", "temp")
    assert _err(path, columns="acc*") == (
        f"{path}: no column matches 'acc*' in --columns; expected a name or glob matching one "
        "of the columns 'gx', 'gyro_y', 'ax', 'temp'"
    )
    assert _err(path, channel_map={"gz": "gyro.z"}) == (
        f"{path}: unknown column 'gz' in --channel; expected one of the columns 't', 'gx', "
        "'gyro_y', 'ax', 'temp'"
    )
    assert _err(path, channel_map={"gx": "gyro.w"}) == (
        f"{path}: 'gyro.w' in --channel gx=gyro.w is not a channel id; expected one of gyro.x, "
        "gyro.y, gyro.z, accelerometer.x, accelerometer.y, accelerometer.z"
    )
    assert _err(path, channel_map={"gx": "gyro.y"}) == (
        f"{path}: columns 'gx' and 'gyro_y' both map to channel gyro.y; expected one column per "
        "channel (use --channel or --columns)"
    )


def test_channel_id_rule() -> None:
    # DESIGN §10: '.' and '_' interchangeable, case ignored; nothing else guessed
    assert rec.channel_id_for("GYRO_X") == "gyro.x"
    assert rec.channel_id_for("Accelerometer.Z") == "accelerometer.z"
    assert rec.channel_id_for("acc_z") is None
    assert rec.channel_id_for("gyro_xx") is None


def test_text_layouts(tmp_path: pathlib.Path) -> None:
    rows = [f"{i / 4},{i % 3}" for i in range(6)]
    expected = np.array([i % 3 for i in range(6)]) * DEG
    variants = {
        "crlf.csv": ("time [s],gyro_x [deg/s]\r\n" + "\r\n".join(rows) + "\r\n").encode(),
        "bom.csv": ("\ufefftime [s],gyro_x [deg/s]\n" + "\n".join(rows)).encode(),
        "tabs.tsv": (
            "time [s]\tgyro_x [deg/s]\n" + "\n".join(r.replace(",", "\t") for r in rows)
        ).encode(),
        "tabs.txt": (
            "time [s]\tgyro_x [deg/s]\n" + "\n".join(r.replace(",", "\t") for r in rows)
        ).encode(),
        "semi.csv": (
            "time [s];gyro_x [deg/s]\n" + "\n".join(r.replace(",", ";") for r in rows)
        ).encode(),
        "quoted.csv": ('"time [s]","gyro_x [deg/s]"\n' + "\n".join(rows) + "\n\n\n").encode(),
        "spaces.csv": (
            "time [s], gyro_x [deg/s]\n" + "\n".join(r.replace(",", ", ") for r in rows)
        ).encode(),
    }
    for name, data in variants.items():
        (tmp_path / name).write_bytes(data)
        r = read_recording(tmp_path / name)
        assert r.channels == ("gyro.x",), name
        np.testing.assert_allclose(r.data["gyro.x"], expected, rtol=1e-15, err_msg=name)
        assert r.rate == pytest.approx(4.0, rel=1e-12), name
    path = _write(tmp_path, "nohead.csv", "1,2\n3,4\n5,6\n")
    r = read_recording(path, rate=1.0)
    assert r.channels == ("ch0", "ch1")
    np.testing.assert_array_equal(r.data["ch1"], [2, 4, 6])


def test_settings_in_comments(tmp_path: pathlib.Path) -> None:
    path = _write(tmp_path, "s.csv", "# sensormodel rate = 2 kHz\ngyro_x [deg/s]\n1\n2\n")
    assert read_recording(path).rate == 2000.0
    path = _write(tmp_path, "bad.csv", "# sensormodel speed = 2\ngyro_x [deg/s]\n1\n2\n")
    assert _err(path) == (
        f"{path}:line 1: unknown setting 'speed'; expected one of 'rate', 'increments', "
        "'start_time'"
    )


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
        (_csv(["0,1"]), {}, ":line 2: only one data row; expected at least 2 data rows"),
        (
            _csv(["0,1", "0.1,abc", "0.2,3"]),
            {},
            ":line 3: column 'gyro_x' holds 'abc', not a "
            "number; expected a decimal number such as -0.0123 (with '.' as the decimal mark)",
        ),
        (
            _csv(["0,1", "0.1,2,3"]),
            {},
            ":line 3: 3 fields; expected 2 fields separated by commas, as in the header",
        ),
        (
            _csv(["0,1", "0.1,nan", "0.2,3"]),
            {},
            ":line 3: column 'gyro_x' holds NaN or an empty "
            "field; expected finite samples, or --gaps split to analyse the clean segments",
        ),
        (
            _csv(["0,1", "0.1,", "0.2,3"]),
            {},
            ":line 3: column 'gyro_x' holds NaN or an empty "
            "field; expected finite samples, or --gaps split to analyse the clean segments",
        ),
        (
            _csv(["0,1", "0.1,-inf", "0.2,3"]),
            {},
            ":line 3: column 'gyro_x' holds an infinite "
            "value; expected finite samples, or --gaps split to analyse the clean segments",
        ),
        (
            _csv(["0,1", "0.1,2", "0.1,3", "0.2,4"]),
            {},
            ":line 4: time 0.1 s repeats the "
            "previous sample's; expected increasing time, or --gaps split to analyse the clean "
            "segments",
        ),
        (
            _csv(["0,1", "0.1,2", "0.05,3", "0.2,4"]),
            {},
            ":line 4: time goes backwards, from "
            "0.1 s to 0.05 s; expected increasing time, or --gaps split to analyse the clean "
            "segments",
        ),
        (
            _csv(["0,1", "0.1,2"], "time [s],gyro_x [m/s]"),
            {},
            ":column 'gyro_x': got 'm/s' "
            "([length] / [time]); expected an angular rate such as 'deg/s' for channel gyro.x",
        ),
        (
            _csv(["0,1", "0.1,2"], "time [s],accelerometer_x [deg/s]"),
            {},
            ":column 'accelerometer_x': got 'deg/s' ([angle] / [time]); expected an acceleration "
            "such as 'm/s^2' or 'mg' for channel accelerometer.x",
        ),
        (
            _csv(["0,1", "0.1,2"], "time,gyro_x [deg/s]"),
            {},
            ": the time column 'time' has no "
            "unit; expected a unit in the header such as 'time [s]', or --unit time=s",
        ),
        (
            _csv(["0,1", "0.1,2"]),
            {"rate": 10.5},
            ": the time column 'time' gives 10 Hz but --rate "
            "gives 10.5 Hz (relative difference 4.8e-02); expected agreement within 1e-06, or only "
            "one of them",
        ),
        (
            _csv(["0,1", "1,2"], "time [s],t [s],gyro_x [deg/s]"),
            {},
            ": several time columns: 'time', 't'; expected one column named time, t or timestamp",
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
    path = _write(tmp_path, "bad.csv", text)
    assert _err(path, **kw) == f"{path}{message}"


def test_missing_and_unknown_files(tmp_path: pathlib.Path) -> None:
    assert _err(tmp_path / "none.csv") == (
        f"{tmp_path / 'none.csv'}: no such file; expected an existing recording (a .csv, .tsv, "
        ".txt, .npy, .npz, .h5 or .hdf5 file)"
    )
    p = _write(tmp_path, "rec.dat", "x")
    assert _err(p) == (
        f"{p}: unknown recording format '.dat'; expected a .csv, .tsv, .txt, .npy, .npz, .h5 or "
        ".hdf5 file"
    )
    p = _write(tmp_path, "bad.npy", "not numpy")
    assert _err(p).startswith(f"{p}: not a readable .npy file (")
    # the rate argument is checked by the shared validator (not file content: no file named)
    with pytest.raises(AnalysisError) as info:
        read_recording(_write(tmp_path, "ok.csv", _csv(["0,1", "1,2"])), rate=-1)
    assert str(info.value) == "--rate: got -1 Hz; expected a finite sample rate > 0 Hz"


def test_rate_agreement_within_tolerance(tmp_path: pathlib.Path) -> None:
    rows = [f"{i * 0.01},{i % 2}" for i in range(1000)]
    path = _write(tmp_path, "r.csv", _csv(rows))
    r = read_recording(path, rate=100.0 * (1 + 5e-7))
    assert r.rate == 100.0 * (1 + 5e-7)  # the option, which agrees within 1e-6
    with pytest.raises(RecordingError, match="expected agreement within 1e-06"):
        read_recording(path, rate=100.0 * (1 + 2e-6))


# ---------------------------------------------------------------------------------------------
# Time base and data problems: positions, fail and split
# ---------------------------------------------------------------------------------------------


def _lines(n: int, value: callable, time: callable = lambda i: i / 10) -> list[str]:  # type: ignore[valid-type]
    return [f"{time(i)!r},{value(i)!r}" for i in range(n)]


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

    rows = _lines(300, value, time)
    rows[100] = rows[99]  # duplicate row: same time
    path = _write(tmp_path, "p.csv", "# a\n# b\n" + _csv(rows))
    kw = {"constant_run": 25, "saturation_run": 10, "min_segment": 20}
    message = _err(path, **kw)
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
    assert _err(path, rate=1.0) == (
        f"{path}:index 1000: column 'ch0' holds the same value 0.5 for 1000 consecutive samples "
        "(a stuck sensor?); expected a live signal, or --gaps split to analyse the clean segments"
    )


def test_saturation_at_minimum_and_binary_positions(tmp_path: pathlib.Path) -> None:
    rng = np.random.default_rng(4)
    x = rng.normal(size=500)
    x[300:320] = -5.0
    path = tmp_path / "s.npz"
    np.savez(path, gyro_y=x)
    r = read_recording(path, rate=10.0, gaps="split")
    assert [(f.kind, f.where) for f in r.findings] == [("saturated", "indices 300-319")]
    assert "at its minimum -5" in r.findings[0].detail
    assert [(s.start, s.stop) for s in r.segments["gyro.y"]] == [(0, 300), (320, 500)]


def test_backwards_time_splits(tmp_path: pathlib.Path) -> None:
    times = [i / 10 for i in range(150)] + [i / 10 for i in range(150)]  # logger restart
    rows = [f"{t!r},{(k * 31 % 17)}" for k, t in enumerate(times)]
    path = _write(tmp_path, "b.csv", _csv(rows))
    r = read_recording(path, gaps="split")
    assert [(f.kind, f.where) for f in r.findings] == [("non_monotonic", "line 152")]
    assert [(s.start, s.stop, s.start_time) for s in r.segments["gyro.x"]] == [
        (0, 150, 0.0),
        (150, 300, 0.0),
    ]


def test_no_clean_segment(tmp_path: pathlib.Path) -> None:
    rows = _lines(30, lambda i: math.nan if i % 5 == 0 else float(i))
    path = _write(tmp_path, "n.csv", _csv(rows))
    assert _err(path, gaps="split") == (
        f"{path}: column 'gyro_x' has no clean stretch of at least 100 samples; expected a "
        "recording with longer clean stretches"
    )


# ---------------------------------------------------------------------------------------------
# CSV engines: pyarrow, numpy.loadtxt and the Python reader give identical arrays
# ---------------------------------------------------------------------------------------------

TOKENS = [
    "1.5",
    " 1.5",
    "+1.5",
    ".5",
    "5.",
    "1e5",
    "1E+05",
    "-0",
    "4.9e-324",
    "1e400",
    "inf",
    "-Infinity",
    "nan",
    "NaN",
    "0001.5",
    "0.1000000000000000055511151231257827",
    "2.2250738585072011e-308",
    "-.5e-3",
]


def _engine_file(tmp_path: pathlib.Path) -> tuple[pathlib.Path, list[list[float]]]:
    rng = np.random.default_rng(5)
    rows, expected = [], []
    for i in range(4000):
        vals = rng.normal(size=3) * 10.0 ** rng.integers(-12, 12, size=3)
        text = [repr(float(v)) for v in vals]
        if i % 97 == 0:
            text[i % 3] = TOKENS[(i // 97) % len(TOKENS)]
        rows.append(",".join([repr(i / 100)] + text))
        expected.append([float(t) for t in text])  # Python float(): the reference
    path = _write(tmp_path, "e.csv", "time [s],a,b,c\n" + "\n".join(rows) + "\n")
    return path, expected


def _read_all(path: pathlib.Path) -> rec.Recording:
    return read_recording(
        path, gaps="split", min_segment=2, constant_run=0, saturation_run=0, cache=False
    )


def test_engines_identical(tmp_path: pathlib.Path, monkeypatch: pytest.MonkeyPatch) -> None:
    path, expected = _engine_file(tmp_path)
    ref = np.array(expected)
    used: list[str] = []
    real_numpy, real_python = csv_engine._numpy_piece, csv_engine.TextSource._python_piece

    def numpy_spy(*a: object, **k: object) -> object:
        used.append("numpy")
        return real_numpy(*a, **k)

    def python_spy(self: object, *a: object, **k: object) -> object:
        used.append("python")
        return real_python(self, *a, **k)

    monkeypatch.setattr(csv_engine, "_numpy_piece", numpy_spy)
    monkeypatch.setattr(csv_engine.TextSource, "_python_piece", python_spy)
    monkeypatch.setattr(csv_engine, "_PIECE_BYTES", 20000)  # many pieces
    results = {}
    results["pyarrow"] = _read_all(path)
    assert used == []  # pyarrow read every piece
    monkeypatch.setattr(csv_engine, "import_pyarrow_csv", lambda: None)
    results["numpy"] = _read_all(path)
    assert used and set(used) == {"numpy"}
    monkeypatch.setattr(csv_engine, "_numpy_piece", lambda *a, **k: None)
    used.clear()
    results["python"] = _read_all(path)
    assert used and set(used) == {"python"}
    for name, r in results.items():
        for k, c in enumerate("abc"):
            np.testing.assert_array_equal(r.data[c], ref[:, k], err_msg=name)
        np.testing.assert_array_equal(r.time, np.arange(4000) / 100, err_msg=name)


def test_error_line_in_a_later_piece(
    tmp_path: pathlib.Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    rows = [f"{i / 10!r},{i % 7}" for i in range(3000)]
    rows[2345] = f"{2345 / 10!r},1.2.3"
    path = _write(tmp_path, "x.csv", "# c\n" + _csv(rows))
    monkeypatch.setattr(csv_engine, "_PIECE_BYTES", 4096)
    expected = (
        f"{path}:line 2348: column 'gyro_x' holds '1.2.3', not a number; expected a decimal "
        "number such as -0.0123 (with '.' as the decimal mark)"
    )
    assert _err(path, cache=False) == expected
    monkeypatch.setattr(csv_engine, "import_pyarrow_csv", lambda: None)
    assert _err(path, cache=False) == expected


def test_python_reader_extras(tmp_path: pathlib.Path) -> None:
    # quoted numbers, blank fields and blank lines: read by the Python reader, as missing samples
    rows = "".join(f"0.{i},{i}\n" for i in range(3, 10))
    path = _write(tmp_path, "q.csv", 'time [s],gyro_x [deg/s]\n0,"1"\n0.1,  \n\n' + rows)
    r = read_recording(path, gaps="split", min_segment=5)
    np.testing.assert_array_equal(r.data["gyro.x"][[0, 3]], [DEG, 3 * DEG])
    assert [(s.start, s.stop) for s in r.segments["gyro.x"]] == [(3, 10)]
    assert np.isnan(r.data["gyro.x"][1:3]).all()
    assert [(f.kind, f.channel, f.where) for f in r.findings] == [
        ("non_finite", "gyro.x", "lines 3-4"),
        ("non_finite", "time", "line 4"),
        ("short_segment", "gyro.x", ""),
    ]


# ---------------------------------------------------------------------------------------------
# CSV cache
# ---------------------------------------------------------------------------------------------


def test_cache(tmp_path: pathlib.Path) -> None:
    block = _block(2000)
    path = tmp_path / "rec.csv"
    with open_writer(path, CHANNELS, None, 100.0) as w:
        w.write(block)
    cache = tmp_path / "cache"
    first = read_recording(path, cache=cache)
    entries = list(cache.iterdir())
    assert len(entries) == 1
    assert sorted(f.name for f in entries[0].iterdir()) == [f"f{j}.f64" for j in range(4)]
    second = read_recording(path, cache=cache)
    for k, c in enumerate(CHANNELS):
        assert isinstance(second.data[c], np.memmap)
        np.testing.assert_array_equal(second.data[c], block[:, k])
        np.testing.assert_array_equal(first.data[c], second.data[c])
    # a changed file gets a new entry; the stale one is removed
    text = path.read_text()
    path.write_text(text.replace("\n0,", "\n0.0,", 1))
    os.utime(path, ns=(1, 1))
    read_recording(path, cache=cache)
    assert len(list(cache.iterdir())) == 1 and next(cache.iterdir()) != entries[0]
    # only some columns: the others are added on demand
    read_recording(path, cache=cache, columns="gyro.x")


def test_cache_defaults(tmp_path: pathlib.Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("SENSORMODEL_CACHE", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    assert rec.cache_folder() == tmp_path / "xdg" / "sensormodel" / "csv"
    monkeypatch.setenv("SENSORMODEL_CACHE", "off")
    assert rec.cache_folder() is None
    monkeypatch.setenv("SENSORMODEL_CACHE", str(tmp_path / "c"))
    assert rec.cache_folder() == tmp_path / "c"
    path = _write(tmp_path, "small.csv", _csv(["0,1", "0.5,2"]))
    read_recording(path)  # below CACHE_MIN_BYTES: not cached
    assert not (tmp_path / "c").exists()
    read_recording(path, cache=True)
    assert len(list((tmp_path / "c").iterdir())) == 1


def test_many_problems_are_summarized(tmp_path: pathlib.Path) -> None:
    x = np.arange(5000, dtype=float) % 7
    x[np.arange(5000) % 4 < 2] = np.nan  # 1250 stretches of 2 missing samples
    path = tmp_path / "many.npy"
    np.save(path, x)
    assert _err(path, rate=1.0) == (
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
    assert _err(path, rate=1.0, gaps="split", min_segment=3) == (
        f"{path}: column 'ch0' has no clean stretch of at least 3 samples; expected a "
        "recording with longer clean stretches"
    )
