"""The recording options in the commands: rig-shaped files of every format through `verify`
(the verdict checked against the unit the record was simulated from), `--layout`, `--time`,
`--aux`, `--increments` in verify, per-column units in `shape --from-recording`, the help text,
and one-line refusals that write nothing.

The records are simulated from the datasheet below (seeded), then written as a logger would:
raw int16 counts of 0.01 mdps (1e-5 deg/s; the white noise per sample is ~83 counts, so the
rounding adds a variance 1/12 count², 1e-5 of the white variance: negligible), a flat
temperature in 0.1 degC counts, a message counter, time stamps in ms.
"""

from __future__ import annotations

import json
import math
import pathlib
from dataclasses import replace

import numpy as np
import pytest

from sensormodel.cli import cli
from sensormodel.convert import build_model
from sensormodel.datasheet import load_datasheet
from sensormodel.simulate import simulate

SHEET = """
[sensor]
name = "rig study unit"
sample_rate = "1 Hz"
axes = ["z"]
[gyro]
angle_random_walk = { typ = "0.05 deg/rt-hr", max = "0.1 deg/rt-hr" }
bias_instability = { typ = "1 deg/h", max = "3 deg/h" }
"""
COUNT_DPS = 1e-5  # one count [deg/s]: '0.01 mdps'
N = 4000  # samples at 1 Hz


@pytest.fixture(scope="module")
def sheet(tmp_path_factory: pytest.TempPathFactory) -> pathlib.Path:
    p = tmp_path_factory.mktemp("sheet") / "sheet.toml"
    p.write_text(SHEET, encoding="utf-8")
    return p


def _gyro_z(sheet: pathlib.Path, white_factor: float, seed: int) -> np.ndarray:
    """gyro.z [rad/s] of the typical unit with its white density × ``white_factor``."""
    model = build_model(load_datasheet(sheet))
    ch = model.channels[0]
    terms = tuple(
        replace(t, density=t.density * white_factor) if t.type == "white" else t for t in ch.terms
    )
    model = model.with_channel(replace(ch, terms=terms))
    return simulate(model, N, 1.0, seed=seed)[:, 0]


def _rig_columns(gz: np.ndarray, seed: int) -> dict[str, np.ndarray]:
    """Six int16 count columns (gyro.z the record, the others seeded noise), temperature
    counts (flat 25.0 degC) and a counter."""
    rng = np.random.default_rng(seed)
    counts = np.rint(rng.normal(0.0, 80.0, (N, 6))).astype(np.int16)
    counts[:, 2] = np.rint(gz * 180 / math.pi / COUNT_DPS).astype(np.int16)
    cols = {n: counts[:, j] for j, n in enumerate(["gx", "gy", "gz", "ax", "ay", "az"])}
    cols["temp"] = np.full(N, 250, dtype=np.int16)
    cols["counter"] = np.arange(N, dtype=np.int16)
    return cols


def _write_csv(path: pathlib.Path, cols: dict[str, np.ndarray]) -> pathlib.Path:
    header = "ts_ms,gx,gy,gz,accel_x [mg],accel_y [mg],accel_z [mg],temp [0.1 degC],counter"
    rows = [f"{1000 * i}," + ",".join(str(int(c[i])) for c in cols.values()) for i in range(N)]
    path.write_text(header + "\n" + "\n".join(rows) + "\n", encoding="utf-8")
    return path


def _write_npy(path: pathlib.Path, cols: dict[str, np.ndarray]) -> pathlib.Path:
    np.save(path, np.column_stack(list(cols.values())))
    names = ["gx", "gy", "gz", "ax", "ay", "az", "temp", "counter"]
    meta = {
        "schema": "sensormodel/recording/1",
        "rate": 1.0,
        "columns": [{"name": n} for n in names],
    }
    path.with_name(path.name + ".json").write_text(json.dumps(meta), encoding="utf-8")
    return path


def _write_parquet(path: pathlib.Path, cols: dict[str, np.ndarray]) -> pathlib.Path:
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    table = pa.table(
        {
            "time_ms": np.arange(N, dtype=np.int64) * 1000,
            **{f"{k} [0.01 mdps]" if k.startswith("g") else k: v for k, v in cols.items()},
        }
    )
    pq.write_table(table, path)
    return path


def _write_bag(path: pathlib.Path, gz: np.ndarray) -> pathlib.Path:
    pytest.importorskip("rosbags")
    from rosbags.rosbag2 import Writer
    from rosbags.typesys import Stores, get_typestore

    store = get_typestore(Stores.ROS2_HUMBLE)
    types = store.types
    imu, hdr, stamp = (
        types["sensor_msgs/msg/Imu"],
        types["std_msgs/msg/Header"],
        types["builtin_interfaces/msg/Time"],
    )
    quat, vec = types["geometry_msgs/msg/Quaternion"], types["geometry_msgs/msg/Vector3"]
    rng = np.random.default_rng(9)
    other = rng.normal(0.0, 1e-3, (N, 5))
    with Writer(path, version=9) as w:
        conn = w.add_connection("/imu/data", "sensor_msgs/msg/Imu", typestore=store)
        for i in range(N):
            t = 1_700_000_000 * 10**9 + i * 10**9
            msg = imu(
                header=hdr(stamp=stamp(sec=t // 10**9, nanosec=0), frame_id="imu"),
                orientation=quat(x=0.0, y=0.0, z=0.0, w=1.0),
                orientation_covariance=np.zeros(9),
                angular_velocity=vec(x=other[i, 0], y=other[i, 1], z=gz[i]),
                angular_velocity_covariance=np.zeros(9),
                linear_acceleration=vec(x=other[i, 2], y=other[i, 3], z=other[i, 4]),
                linear_acceleration_covariance=np.zeros(9),
            )
            w.write(conn, t, store.serialize_cdr(msg, "sensor_msgs/msg/Imu"))
    return path


_UNITS = ["--unit", "gx=0.01 mdps", "--unit", "gy=0.01 mdps", "--unit", "gz=0.01 mdps"]


@pytest.mark.parametrize(
    ("fmt", "white_factor", "exit_code"),
    [("csv", 1.0, 0), ("npy", 4.0, 1), ("parquet", 1.0, 0), ("bag", 4.0, 1)],
)
def test_rig_files_through_verify(
    runner, sheet, tmp_path, fmt: str, white_factor: float, exit_code: int
) -> None:  # type: ignore[no-untyped-def]
    # the typical unit passes (ARW half its max), one with 4 × the white noise fails (twice the
    # max), as test_cli_verify shows on plain SI files of the same model and length
    gz = _gyro_z(sheet, white_factor, seed=1 if white_factor == 1.0 else 2)
    cols = _rig_columns(gz, seed=3)
    if fmt == "csv":
        path, args = _write_csv(tmp_path / "rig.csv", cols), _UNITS
    elif fmt == "npy":
        args = [*_UNITS, "--unit", "temp=0.1 degC"]
        path = _write_npy(tmp_path / "rig.npy", cols)
    elif fmt == "parquet":
        path, args = _write_parquet(tmp_path / "rig.parquet", cols), []
    else:
        path, args = _write_bag(tmp_path / "rig-bag", gz), []
    out = tmp_path / "v.json"
    res = runner.invoke(
        cli,
        [
            "verify",
            str(path),
            "--spec",
            str(sheet),
            "--json",
            str(out),
            "--bootstrap",
            "100",
            *args,
        ],
    )
    assert res.exit_code == exit_code, res.output
    doc = json.loads(out.read_text(encoding="utf-8"))
    assert [c["id"] for c in doc["channels"]] == ["gyro.z"]
    if fmt != "bag":  # the note says how the rig's names were read, temperature kept aside
        assert "auxiliary (kept, not analysed): 'temp'" in res.stderr, res.stderr


def test_layout_shows_how_a_file_is_read(runner, sheet, tmp_path) -> None:  # type: ignore[no-untyped-def]
    cols = _rig_columns(_gyro_z(sheet, 1.0, seed=1), seed=3)
    path = _write_csv(tmp_path / "rig.csv", cols)
    res = runner.invoke(cli, ["allan", str(path), "--layout", "--unit", "gz=0.01 mdps"])
    assert res.exit_code == 0, res.output
    lines = res.stdout.splitlines()
    assert lines[0] == f"{path} (csv): {N} samples at 1 Hz ({N} s)"
    assert lines[1] == "  time            'ts_ms' [ms], first stamp 0 s"
    assert "  gyro.z          'gz' [0.01 mdps] → rad/s (angular rate)" in lines
    assert "  gyro.x          'gx' → 1 (as recorded)" in lines  # no unit given: as recorded
    assert "  auxiliary       'temp' [degC]" in lines and "  auxiliary       'counter'" in lines
    assert not (tmp_path / "rig-allan.json").exists()


def test_verify_takes_increments(runner, sheet, tmp_path) -> None:  # type: ignore[no-untyped-def]
    gz = _gyro_z(sheet, 1.0, seed=1)
    path = tmp_path / "inc.csv"
    rows = [f"{i},{float(gz[i]) * 180 / math.pi!r}" for i in range(N)]  # increments over 1 s [deg]
    path.write_text("t [s],dtheta_z\n" + "\n".join(rows) + "\n", encoding="utf-8")
    res = runner.invoke(
        cli,
        [
            "verify",
            str(path),
            "--spec",
            str(sheet),
            "--increments",
            "--unit",
            "dtheta_z=deg",
            "--bootstrap",
            "100",
        ],
    )
    assert res.exit_code == 0, res.output
    res = runner.invoke(
        cli, ["verify", str(path), "--spec", str(sheet), "--unit", "dtheta_z=deg", "--rates"]
    )
    assert res.exit_code == 2
    assert res.stderr.splitlines()[-1] == (
        f"error: {path}:column 'dtheta_z': got 'deg' (angle); expected an angular rate such "
        "as 'deg/s' for channel gyro.z (or --increments if the samples are increments per "
        "sample)"
    )


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (
            ["--time", "ts_ms=blorps"],
            "{path}:column 'ts_ms': cannot read the unit "
            "'blorps' (unknown unit 'blorps'); expected a time such as '100 s'",
        ),
        (
            ["--unit", "gz=8.75 blorps"],
            "{path}:column 'gz': cannot read the unit 'blorps' "
            "(unknown unit 'blorps'); expected an angular rate such as 'deg/s' for channel gyro.z",
        ),
        (["--time", "=ms"], "--time =ms; expected COLUMN, COLUMN=UNIT (e.g. --time ts=ms) or none"),
        (
            ["--aux", "pressure"],
            "{path}: no column matches 'pressure' in --aux; expected a name "
            "or glob matching one of the columns 'gx', 'gy', 'gz', 'accel_x', 'accel_y', "
            "'accel_z', 'temp', 'counter'",
        ),
    ],
    ids=["time-unit", "scale-unit", "time-syntax", "aux-unknown"],
)
def test_refusals_write_nothing(runner, sheet, tmp_path, args, message) -> None:  # type: ignore[no-untyped-def]
    path = _write_csv(tmp_path / "rig.csv", _rig_columns(_gyro_z(sheet, 1.0, seed=1), seed=3))
    out = tmp_path / "v.json"
    res = runner.invoke(
        cli, ["verify", str(path), "--spec", str(sheet), "--json", str(out), *_UNITS, *args]
    )
    assert res.exit_code == 2, res.output
    lines = res.stderr.splitlines()
    assert len(lines) == 1 and "Traceback" not in res.output
    assert (
        lines[0].removeprefix("error: ").removeprefix("Error: ").endswith(message.format(path=path))
    ), lines[0]
    assert not out.exists()


@pytest.mark.parametrize("command", ["allan", "identify", "verify", "shape"])
def test_help_shows_how_a_log_must_look(runner, command: str) -> None:  # type: ignore[no-untyped-def]
    res = runner.invoke(cli, [command, "--help"])
    assert res.exit_code == 0
    text = res.stdout
    assert "ts_ms,gx [8.75 mdps],gy [8.75 mdps]" in text  # the example header
    assert "Recordings" in text and "--layout" in text and "--time" in text
    for option in ("--unit", "--increments", "--columns", "--aux", "--gaps"):
        assert option in text, option


def test_shape_from_recording_takes_units(runner, tmp_path) -> None:  # type: ignore[no-untyped-def]
    rng = np.random.default_rng(4)
    x = rng.normal(0, 100.0, 20000)
    path = tmp_path / "s.csv"
    path.write_text(
        "time_ms,gz\n" + "\n".join(f"{10 * i},{float(v)!r}" for i, v in enumerate(x)) + "\n",
        encoding="utf-8",
    )
    out = tmp_path / "m.json"
    res = runner.invoke(
        cli,
        [
            "shape",
            str(path),
            "--from-recording",
            "--channel",
            "gyro.z",
            "--unit",
            "gz=0.01 mdps",
            "-o",
            str(out),
        ],
    )
    assert res.exit_code == 0, res.output
    assert json.loads(out.read_text(encoding="utf-8"))["channels"][0]["unit"] == "rad/s"
