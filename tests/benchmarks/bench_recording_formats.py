"""Reading speed of the columnar and logger formats: Parquet and Feather (MB/s of the file)
and ROS bags of sensor_msgs/Imu (messages per second), through read_recording.

Run: python tests/benchmarks/bench_recording_formats.py [--rows N] [--messages M]
The load (uptime) is printed beside the numbers; compare ratios within one run.
"""

from __future__ import annotations

import argparse
import os
import pathlib
import tempfile
import time

import numpy as np


def _parquet(folder: pathlib.Path, rows: int) -> list[str]:
    import pyarrow as pa
    import pyarrow.feather as feather
    import pyarrow.parquet as pq

    from sensormodel.recording import read_recording

    rng = np.random.default_rng(0)
    cols = {"time [s]": np.arange(rows) / 400.0}
    for name in ("gyro_x", "gyro_y", "gyro_z"):
        cols[f"{name} [deg/s]"] = rng.normal(0, 0.01, rows)
    for name in ("acc_x", "acc_y", "acc_z"):
        cols[f"{name} [g]"] = rng.normal(0, 1e-3, rows)
    table = pa.table(cols)
    out = []
    for name, write in (
        ("parquet", lambda p: pq.write_table(table, p, compression="none")),
        ("parquet-snappy", lambda p: pq.write_table(table, p)),
        ("feather", lambda p: feather.write_feather(table, p, compression="uncompressed")),
    ):
        path = folder / f"rec.{name.split('-')[0]}"
        write(path)
        size = path.stat().st_size
        best = min(_timed(lambda p=path: read_recording(p)) for _ in range(3))
        out.append(
            f"{name:15s} {size / 1e6:8.1f} MB  {best:6.3f} s  {size / 1e6 / best:8.0f} MB/s"
            f"  ({rows} rows × 7 columns; in-memory data {rows * 56 / 1e6:.0f} MB)"
        )
        path.unlink()
    return out


def _bags(folder: pathlib.Path, messages: int) -> list[str]:
    from rosbags.rosbag1 import Writer as Writer1
    from rosbags.rosbag2 import StoragePlugin, Writer
    from rosbags.typesys import Stores, get_typestore

    from sensormodel.recording import read_recording

    out = []
    for kind in ("ros1", "sqlite3", "mcap"):
        store = get_typestore(Stores.ROS1_NOETIC if kind == "ros1" else Stores.ROS2_HUMBLE)
        t = store.types
        vec = t["geometry_msgs/msg/Vector3"]
        hdr = t["std_msgs/msg/Header"]
        stamp = t["builtin_interfaces/msg/Time"]
        quat = t["geometry_msgs/msg/Quaternion"]
        rng = np.random.default_rng(1)
        w = rng.normal(0, 1e-3, (messages, 6))
        ser = store.serialize_ros1 if kind == "ros1" else store.serialize_cdr
        path = folder / ("b.bag" if kind == "ros1" else f"b-{kind}")
        if kind == "ros1":
            writer = Writer1(path)
        else:
            plugin = StoragePlugin.MCAP if kind == "mcap" else StoragePlugin.SQLITE3
            writer = Writer(path, version=9, storage_plugin=plugin)
        with writer:
            conn = writer.add_connection("/imu", "sensor_msgs/msg/Imu", typestore=store)
            for i in range(messages):
                ns = 1_700_000_000 * 10**9 + i * 2_500_000
                st = stamp(sec=ns // 10**9, nanosec=ns % 10**9)
                h = (
                    hdr(seq=i, stamp=st, frame_id="imu")
                    if kind == "ros1"
                    else hdr(stamp=st, frame_id="imu")
                )
                msg = t["sensor_msgs/msg/Imu"](
                    header=h,
                    orientation=quat(x=0.0, y=0.0, z=0.0, w=1.0),
                    orientation_covariance=np.zeros(9),
                    angular_velocity=vec(x=w[i, 0], y=w[i, 1], z=w[i, 2]),
                    angular_velocity_covariance=np.zeros(9),
                    linear_acceleration=vec(x=w[i, 3], y=w[i, 4], z=w[i, 5]),
                    linear_acceleration_covariance=np.zeros(9),
                )
                writer.write(conn, ns, ser(msg, "sensor_msgs/msg/Imu"))
        best = min(_timed(lambda p=path: read_recording(p)) for _ in range(2))
        out.append(
            f"bag {kind:8s} {messages} messages  {best:6.3f} s  {messages / best:10.0f} messages/s"
        )
    return out


def _timed(f) -> float:  # type: ignore[no-untyped-def]
    t0 = time.perf_counter()
    f()
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=4_000_000)
    ap.add_argument("--messages", type=int, default=200_000)
    args = ap.parse_args()
    print("load:", os.getloadavg())
    with tempfile.TemporaryDirectory() as d:
        for line in _parquet(pathlib.Path(d), args.rows):
            print(line)
        for line in _bags(pathlib.Path(d), args.messages):
            print(line)
    print("load:", os.getloadavg())


if __name__ == "__main__":
    main()
