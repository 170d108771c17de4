"""Tests of sensormodel.recording's columns: headers and units, increments, column selection,
channel ids and the COLUMN=CHANNEL_ID option syntax.
"""

from __future__ import annotations

import pathlib

import numpy as np
import pytest
from recording_files import (
    DEG,
    G_N,
    HOUR,
    csv_text,
    read_error,
    write_file,
)

from sensormodel import recording as rec
from sensormodel.errors import RecordingError
from sensormodel.recording import Finding, read_recording

# ---------------------------------------------------------------------------------------------
# Headers, units and channel mapping
# ---------------------------------------------------------------------------------------------


def test_datasheet_units_in_headers(tmp_path: pathlib.Path) -> None:
    path = write_file(
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
    # temperature and counter: kept as auxiliary columns, as written, never analysed
    assert dict(r.auxiliary_units) == {"temp": "degC", "counter": None}
    np.testing.assert_array_equal(r.auxiliary["temp"], [20, 21, 21])
    np.testing.assert_array_equal(r.auxiliary["counter"], [5, 6, 7])
    assert dict(r.columns)["accelerometer.z"] == "acc_z"


def test_unmapped_column_unit_infers_kind(tmp_path: pathlib.Path) -> None:
    path = write_file(tmp_path, "u.csv", csv_text(["0,1", "0.5,2"], "time [s],lin_z [mg]"))
    r = read_recording(path)
    assert r.channels == ("lin_z",)
    assert r.quantities["lin_z"] == "acceleration" and r.units["lin_z"] == "m/s^2"
    np.testing.assert_allclose(r.data["lin_z"], [1e-3 * G_N, 2e-3 * G_N], rtol=1e-15)


def test_unit_option(tmp_path: pathlib.Path) -> None:
    path = write_file(
        tmp_path, "u.csv", csv_text(["0,1,1", "0.5,2,2"], "time [s],gyro_x,gyro_y [deg/s]")
    )
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
    assert read_error(path, unit={"gyro_q": "deg/s"}) == (
        f"{path}: unknown column 'gyro_q' in --unit; expected one of the columns 'time', "
        "'gyro_x', 'gyro_y'"
    )


def test_increments(tmp_path: pathlib.Path) -> None:
    path = write_file(tmp_path, "i.csv", csv_text(["0,0.01", "0.1,0.02"], "time [s],gyro_x [deg]"))
    r = read_recording(path, increments=True)
    # increment / period = mean rate over the period
    np.testing.assert_allclose(r.data["gyro.x"], np.array([0.01, 0.02]) * DEG * 10.0, rtol=1e-15)
    assert r.units["gyro.x"] == "rad/s" and r.increments
    # without the option, angle units can only be increments: read so, noted
    r = read_recording(path)
    assert r.increments and r.findings[0].kind == "note" and "increments" in r.findings[0].detail
    np.testing.assert_allclose(r.data["gyro.x"], np.array([0.01, 0.02]) * DEG * 10.0, rtol=1e-15)
    assert read_error(path, increments=False) == (
        f"{path}:column 'gyro_x': got 'deg' (angle); expected an angular rate such as 'deg/s' "
        "for channel gyro.x (or --increments if the samples are increments per sample)"
    )
    path = write_file(
        tmp_path, "v.csv", csv_text(["0,0.01", "0.1,0.02"], "time [s],accelerometer_y [m/s]")
    )
    r = read_recording(path, increments=True)
    np.testing.assert_allclose(r.data["accelerometer.y"], [0.1, 0.2], rtol=1e-15)
    assert r.units["accelerometer.y"] == "m/s^2"


def test_columns_and_channel_map(tmp_path: pathlib.Path) -> None:
    path = write_file(
        tmp_path,
        "c.csv",
        csv_text(["0,1,2,3,4", "1,2,3,4,5"], "t [s],gx [deg/s],gyro_y [deg/s],ax [g],temp [degC]"),
    )
    r = read_recording(path, columns="gyro*", channel_map={"gx": "gyro_x", "ax": "ACCELEROMETER.X"})
    assert r.channels == ("gyro.x", "gyro.y", "accelerometer.x")
    np.testing.assert_allclose(r.data["accelerometer.x"], [3 * G_N, 4 * G_N], rtol=1e-15)
    r = read_recording(path, columns=["temp", "g?"])
    assert r.channels == ("gyro.x", "temp")  # selected: analysed, even a temperature
    assert sorted(r.auxiliary) == ["ax", "gyro_y"]  # the others are kept as auxiliary
    assert read_error(path, columns="acc*") == (
        f"{path}: no column matches 'acc*' in --columns; expected a name or glob matching one "
        "of the columns 'gx', 'gyro_y', 'ax', 'temp'"
    )
    assert read_error(path, channel_map={"gz": "gyro.z"}) == (
        f"{path}: unknown column 'gz' in --channel; expected one of the columns 't', 'gx', "
        "'gyro_y', 'ax', 'temp'"
    )
    assert read_error(path, channel_map={"gx": "gyro.w"}) == (
        f"{path}: 'gyro.w' in --channel gx=gyro.w is not a channel id; expected one of gyro.x, "
        "gyro.y, gyro.z, accelerometer.x, accelerometer.y, accelerometer.z"
    )
    assert read_error(path, channel_map={"gx": "gyro.y"}) == (
        f"{path}: columns 'gx' and 'gyro_y' both map to channel gyro.y; expected one column per "
        "channel (--channel, --columns or --aux to choose)"
    )


def test_channel_id_rule() -> None:
    # DESIGN §10: '.' and '_' interchangeable, case ignored; and the common spellings of
    # logger output (common practice): an instrument word, the axis, optionally a unit or raw
    assert rec.channel_id_for("GYRO_X") == "gyro.x"
    assert rec.channel_id_for("Accelerometer.Z") == "accelerometer.z"
    for name in ("gx", "GyroX", "wx", "rate_x", "omega_x", "gyr_x", "imu.gyro.x", "gx_raw"):
        assert rec.channel_id_for(name) == "gyro.x", name
    for name in ("acc_z", "accel_z", "AccZ", "az", "accelerometer_z", "acc_z_mg", "dv_z"):
        assert rec.channel_id_for(name) == "accelerometer.z", name
    for name in ("gyro_xx", "temp", "gyro_temp", "counter", "time", "gyro", "x", "mag_x"):
        assert rec.channel_id_for(name) is None, name


# ---------------------------------------------------------------------------------------------
# The COLUMN=CHANNEL_ID option syntax (one parser, used by every command)
# ---------------------------------------------------------------------------------------------


def test_parse_channel_map() -> None:
    assert rec.parse_channel_map([]) == {}
    assert rec.parse_channel_map([" rate_z = gyro.z", "acc=ACCELEROMETER_X", "rate_z=gyro.y"]) == {
        "rate_z": "gyro.y",  # a column given twice takes the last channel
        "acc": "ACCELEROMETER_X",  # ids are checked against the file by read_recording
    }


@pytest.mark.parametrize("pair", ["rate_z", "=gyro.z", "rate_z=", " = "])
def test_parse_channel_map_refuses(pair: str) -> None:
    with pytest.raises(RecordingError) as info:
        rec.parse_channel_map(["gx=gyro.x", pair])
    assert str(info.value) == (
        f"--channel {pair}; expected COLUMN=CHANNEL_ID, e.g. --channel rate_z=gyro.z"
    )
    with pytest.raises(RecordingError, match=r"^--map rate_z; expected .* --map rate_z=gyro.z$"):
        rec.parse_channel_map(["rate_z"], option="--map")


def test_parsed_channel_map_reads(tmp_path: pathlib.Path) -> None:
    path = write_file(tmp_path, "m.csv", csv_text(["0,1", "0.5,2"], "t [s],rate_z [deg/s]"))
    r = read_recording(path, channel_map=rec.parse_channel_map(["rate_z=gyro.z"]))
    assert r.channels == ("gyro.z",)
    assert dict(r.columns) == {"gyro.z": "rate_z"}
    np.testing.assert_allclose(r.data["gyro.z"], [DEG, 2 * DEG], rtol=1e-15)
