"""Tests of the columnar and logger formats of sensormodel.recording: Parquet, Feather/Arrow
IPC and ROS bags (ROS 1, ROS 2 with SQLite3 and MCAP storage) of sensor_msgs/Imu, each written
here from known values (the bags with the rosbags library's own writer) and read back against
them; and the one-line refusals of bad bags.

Outside references used here:
- sensor_msgs/Imu: angular_velocity in rad/s, linear_acceleration in m/s^2, header stamps
  (REP 103, "Standard Units of Measure and Coordinate Conventions");
- degree = pi/180 rad (SI Brochure, 9th ed., BIPM 2019, Table 8);
- standard gravity g_n = 9.80665 m/s^2 exactly (3rd CGPM 1901).
"""

from __future__ import annotations

import pathlib

import numpy as np
import pytest
from recording_files import ACCEL_COUNT, GYRO_COUNT, read_error, rig_counts

from sensormodel.recording import read_recording

pa = pytest.importorskip("pyarrow")
pq = pytest.importorskip("pyarrow.parquet")
feather = pytest.importorskip("pyarrow.feather")

# ---------------------------------------------------------------------------------------------
# Parquet and Arrow IPC
# ---------------------------------------------------------------------------------------------


def _rig_table(n: int = 3000) -> tuple[object, dict[str, np.ndarray], np.ndarray]:
    """A rig log as an Arrow table: epoch-ns timestamps at 400 Hz, int16 counts with their
    scales in the field metadata, a temperature and a counter."""
    counts = rig_counts(n=n, seed=11)
    t0 = np.datetime64("2024-06-01T08:00:00", "ns")
    stamps = t0 + np.arange(n) * np.timedelta64(2_500_000, "ns")
    fields = [pa.field("stamp", pa.timestamp("ns", tz="UTC"))]
    arrays = [pa.array(stamps.astype(np.int64), pa.int64()).cast(pa.timestamp("ns", tz="UTC"))]
    for name, unit in [
        ("gx", "8.75 mdps"),
        ("gy", "8.75 mdps"),
        ("gz", "8.75 mdps"),
        ("ax", "0.061 mg"),
        ("ay", "0.061 mg"),
        ("az", "0.061 mg"),
        ("temp", "0.1 degC"),
        ("counter", None),
    ]:
        meta = None if unit is None else {"unit": unit}
        fields.append(pa.field(name, pa.from_numpy_dtype(counts[name].dtype), metadata=meta))
        arrays.append(pa.array(counts[name]))
    return pa.Table.from_arrays(arrays, schema=pa.schema(fields)), counts, stamps


def _check(r: object, counts: dict[str, np.ndarray], stamps: np.ndarray) -> None:
    assert r.rate == pytest.approx(400.0, rel=1e-12)
    assert r.start_time == stamps[0].astype(np.int64) / 1e9
    for a in "xyz":
        np.testing.assert_allclose(r.data[f"gyro.{a}"], counts[f"g{a}"] * GYRO_COUNT, rtol=1e-14)
        np.testing.assert_allclose(
            r.data[f"accelerometer.{a}"], counts[f"a{a}"] * ACCEL_COUNT, rtol=1e-14
        )
    np.testing.assert_allclose(r.auxiliary["temp"], 25.0, rtol=1e-15)
    np.testing.assert_array_equal(r.auxiliary["counter"], counts["counter"])


@pytest.mark.parametrize("ext", [".parquet", ".pq", ".feather", ".arrow"])
def test_columnar_rig_log(tmp_path: pathlib.Path, ext: str) -> None:
    table, counts, stamps = _rig_table()
    path = tmp_path / f"rig{ext}"
    if ext in (".parquet", ".pq"):
        pq.write_table(table, path)
    else:
        feather.write_feather(table, path)
    r = read_recording(path)
    assert r.format == ("parquet" if "p" in ext else "arrow")
    assert (r.time_column, r.time_unit) == ("stamp", "ns")
    _check(r, counts, stamps)


def test_parquet_units_in_names_and_missing_values(tmp_path: pathlib.Path) -> None:
    n = 1000
    x = np.sin(np.arange(n) * 0.37)
    y = x.copy()
    y[10] = np.nan
    table = pa.table({"time [s]": np.arange(n) / 100.0, "GyroZ(dps)": x, "acc_x [g]": y})
    path = tmp_path / "u.parquet"
    pq.write_table(table, path)
    r = read_recording(path, gaps="split")
    np.testing.assert_allclose(r.data["gyro.z"], x * np.pi / 180, rtol=1e-15)
    assert [f.position for f in r.findings if f.kind == "non_finite"] == [10]
    assert "index 10" in read_error(path)  # binary formats name the sample index


def test_parquet_refusals(tmp_path: pathlib.Path) -> None:
    path = tmp_path / "text.parquet"
    pq.write_table(pa.table({"note": ["a", "b"]}), path)
    assert read_error(path) == (
        f"{path}: the Parquet file has no numeric column; expected numeric columns, one per "
        "channel, and optionally a time column"
    )
    bad = tmp_path / "bad.parquet"
    bad.write_bytes(b"not parquet at all")
    assert read_error(bad).startswith(f"{bad}: not a readable Parquet file (")


# ---------------------------------------------------------------------------------------------
# ROS bags of sensor_msgs/Imu
# ---------------------------------------------------------------------------------------------


def _imu_messages(typestore: object, n: int, seed: int, ros1: bool) -> list:
    """(log time, message) pairs of a static IMU at 200 Hz: seeded noise, +1 g on z."""
    rng = np.random.default_rng(seed)
    w = rng.normal(0, 1e-3, (n, 3))
    a = rng.normal(0, 5e-3, (n, 3)) + [0, 0, 9.80665]
    types = typestore.types
    imu, hdr, stamp_t = (
        types["sensor_msgs/msg/Imu"],
        types["std_msgs/msg/Header"],
        types["builtin_interfaces/msg/Time"],
    )
    quat, vec = types["geometry_msgs/msg/Quaternion"], types["geometry_msgs/msg/Vector3"]
    t0 = 1_717_000_000_000_000_000
    out = []
    for i in range(n):
        t = t0 + i * 5_000_000
        st = stamp_t(sec=t // 10**9, nanosec=t % 10**9)
        h = hdr(seq=i, stamp=st, frame_id="imu_link") if ros1 else hdr(stamp=st, frame_id="imu")
        msg = imu(
            header=h,
            orientation=quat(x=0.0, y=0.0, z=0.0, w=1.0),
            orientation_covariance=np.zeros(9),
            angular_velocity=vec(x=w[i, 0], y=w[i, 1], z=w[i, 2]),
            angular_velocity_covariance=np.zeros(9),
            linear_acceleration=vec(x=a[i, 0], y=a[i, 1], z=a[i, 2]),
            linear_acceleration_covariance=np.zeros(9),
        )
        out.append((t + 1000, msg))  # logged 1 µs after the stamp: the stamp is the time base
    return out, w, a, t0


def _write_bag(path: pathlib.Path, kind: str, topics: dict[str, str], n: int, seed: int = 1):
    """A bag of ``kind`` (ros1, sqlite3, mcap) with one connection per topic: sensor_msgs/Imu
    topics get ``n`` messages, others none."""
    rosbags = pytest.importorskip("rosbags")
    from rosbags.typesys import Stores, get_typestore

    del rosbags
    ros1 = kind == "ros1"
    store = get_typestore(Stores.ROS1_NOETIC if ros1 else Stores.ROS2_HUMBLE)
    msgs, w, a, t0 = _imu_messages(store, n, seed, ros1)
    if ros1:
        from rosbags.rosbag1 import Writer

        writer = Writer(path)
    else:
        from rosbags.rosbag2 import StoragePlugin, Writer

        plugin = StoragePlugin.MCAP if kind == "mcap" else StoragePlugin.SQLITE3
        writer = Writer(path, version=9, storage_plugin=plugin)
    with writer:
        for topic, msgtype in topics.items():
            conn = writer.add_connection(topic, msgtype, typestore=store)
            if msgtype == "sensor_msgs/msg/Imu":
                for t, m in msgs:
                    raw = (store.serialize_ros1 if ros1 else store.serialize_cdr)(m, msgtype)
                    writer.write(conn, t, raw)
    return w, a, t0


@pytest.mark.parametrize("kind", ["ros1", "sqlite3", "mcap"])
def test_bag_imu_topic(tmp_path: pathlib.Path, kind: str) -> None:
    path = tmp_path / ("imu.bag" if kind == "ros1" else "imu")
    w, a, t0 = _write_bag(
        path, kind, {"/imu/data": "sensor_msgs/msg/Imu", "/status": "std_msgs/msg/String"}, 3000
    )
    r = read_recording(path)
    assert r.format == "bag" and r.channels == (
        "gyro.x",
        "gyro.y",
        "gyro.z",
        "accelerometer.x",
        "accelerometer.y",
        "accelerometer.z",
    )
    assert r.rate == pytest.approx(200.0, rel=1e-12) and r.start_time == t0 / 1e9
    for j, cid in enumerate(r.channels):
        truth = (w if j < 3 else a)[:, j % 3]
        np.testing.assert_array_equal(r.data[cid], truth)  # float64 end to end: exact
    if kind != "ros1":  # the storage file itself reads too
        (inner,) = [p for p in path.iterdir() if p.suffix in (".db3", ".mcap")]
        assert read_recording(inner).n_samples == 3000


def test_bag_refusals(tmp_path: pathlib.Path) -> None:
    two = tmp_path / "two"
    _write_bag(
        two, "sqlite3", {"/imu/a": "sensor_msgs/msg/Imu", "/imu/b": "sensor_msgs/msg/Imu"}, 200
    )
    assert read_error(two) == (
        f"{two}: several sensor_msgs/Imu topics: /imu/a, /imu/b; expected one of them named "
        "with --topic (e.g. --topic /imu/a)"
    )
    assert read_recording(two, topic="/imu/b").n_samples == 200
    assert read_error(two, topic="/imu/c") == (
        f"{two}:topic '/imu/c': no topic '/imu/c' in the bag (topics: /imu/a "
        "[sensor_msgs/msg/Imu], /imu/b [sensor_msgs/msg/Imu]); expected --topic naming one of "
        "its sensor_msgs/Imu topics"
    )
    other = tmp_path / "other.bag"
    _write_bag(other, "ros1", {"/chatter": "std_msgs/msg/String"}, 0)
    assert read_error(other) == (
        f"{other}: no sensor_msgs/Imu topic (topics: /chatter [std_msgs/msg/String]); expected "
        "a bag with a topic of sensor_msgs/Imu messages"
    )
    assert read_error(other, topic="/chatter") == (
        f"{other}:topic '/chatter': topic '/chatter' holds std_msgs/msg/String messages; "
        "expected a topic of sensor_msgs/Imu messages"
    )
    empty = tmp_path / "empty"
    _write_bag(empty, "mcap", {"/imu": "sensor_msgs/msg/Imu"}, 0)
    assert read_error(empty) == (
        f"{empty}:topic '/imu': topic '/imu' has no messages; expected a bag with at least 2 "
        "sensor_msgs/Imu messages"
    )
    junk = tmp_path / "junk.bag"
    junk.write_bytes(b"#ROSBAG V9.9\n")
    assert read_error(junk).startswith(f"{junk}: not a readable ROS bag (")
    csv = tmp_path / "x.csv"
    csv.write_text("t [s],gx [dps]\n0,1\n1,2\n", encoding="utf-8")
    assert read_error(csv, topic="/imu") == (
        f"{csv}: --topic /imu given for a .csv file; expected --topic with ROS bags only"
    )


def test_writers_of_columnar_formats_and_no_bag_writer(tmp_path: pathlib.Path) -> None:
    from sensormodel.errors import RecordingError
    from sensormodel.recording import open_writer

    x = np.random.default_rng(2).normal(0, 1e-3, (500, 2))
    for name in ("w.parquet", "w.feather"):
        with open_writer(
            tmp_path / name, ["gyro.x", "accelerometer.z"], ["deg/s", "mg"], 50.0
        ) as w:
            w.write(x[:200])
            w.write(x[200:])
        r = read_recording(tmp_path / name)
        assert r.rate == 50.0 and r.column_units["gyro.x"] == "deg/s"
        np.testing.assert_allclose(r.data["gyro.x"], x[:, 0], rtol=1e-13)
        np.testing.assert_allclose(r.data["accelerometer.z"], x[:, 1], rtol=1e-13)
    with pytest.raises(RecordingError) as info:
        open_writer(tmp_path / "w.bag", ["gyro.x"], None, 50.0)
    assert str(info.value) == (
        f"{tmp_path / 'w.bag'}: sensormodel does not write .bag recordings; expected a .csv, "
        ".tsv, .txt, .npy, .npz, .h5, .hdf5, .parquet, .feather or .arrow file name"
    )
    assert not list(tmp_path.glob("w.bag*"))
