"""ROS bags: ROS 1 (``.bag``) and ROS 2 (a bag folder with ``metadata.yaml``, or one ``.db3``
SQLite3 or ``.mcap`` file) holding ``sensor_msgs/Imu`` messages, read with the ``rosbags``
library (optional: ``pip install sensormodel[bags]``).

One IMU topic becomes seven columns: ``time`` (the header stamps, integer nanoseconds since the
epoch), ``gyro.x/y/z`` from ``angular_velocity`` [rad/s] and ``accelerometer.x/y/z`` from
``linear_acceleration`` [m/s²] (the units of sensor_msgs/Imu, REP 103). With several IMU topics,
``topic`` names the one to read.

Speed: the messages of a topic are decoded in batches straight from their serialized bytes
(the fixed layout of sensor_msgs/Imu after the header's frame id: ROS 1 serialization, or CDR
with its 8-byte alignment for ROS 2), checked against the library's own deserializer on the
first message of each batch; a batch whose messages differ in length (a frame id that changes)
goes through the deserializer message by message.
"""

from __future__ import annotations

import pathlib
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from ..errors import RecordingError
from ._sources import Source

__all__ = ["BagSource", "IMU_TYPES", "is_bag_folder"]

#: The message type read, as ROS 1 and ROS 2 name it.
IMU_TYPES = ("sensor_msgs/msg/Imu", "sensor_msgs/Imu")
_NAMES = [
    "time",
    "gyro.x",
    "gyro.y",
    "gyro.z",
    "accelerometer.x",
    "accelerometer.y",
    "accelerometer.z",
]
_UNITS: list[str | None] = ["ns", "rad/s", "rad/s", "rad/s", "m/s^2", "m/s^2", "m/s^2"]
_BATCH = 65536


def is_bag_folder(path: pathlib.Path) -> bool:
    """Whether a folder is a ROS 2 bag (it holds ``metadata.yaml``)."""
    return path.is_dir() and (path / "metadata.yaml").is_file()


def _rosbags(src: str) -> Any:
    try:
        from rosbags.highlevel import AnyReader
        from rosbags.typesys import Stores, get_typestore
    except ImportError:
        raise RecordingError(
            "reading ROS bags needs the optional package rosbags, which is not installed",
            "it installed: pip install sensormodel[bags]",
            source=src,
        ) from None
    return AnyReader, get_typestore(Stores.ROS2_HUMBLE)


class BagSource(Source):
    """A ROS 1 or ROS 2 bag: one ``sensor_msgs/Imu`` topic as time + six channels."""

    fmt = "bag"
    position_words = ("message", "messages")

    def __init__(self, path: pathlib.Path, src: str, topic: str | None = None) -> None:
        super().__init__(path, src)
        self.names = list(_NAMES)
        self.units = list(_UNITS)
        self.topic = topic
        self._columns: list[np.ndarray] | None = None
        self._open()  # refuse a bag without the topic now, before any column is planned

    def _reader(self) -> Any:
        any_reader, store = _rosbags(self.src)
        try:
            return any_reader([self.path], default_typestore=store)
        except Exception as exc:  # the library's errors have no common base
            raise RecordingError(
                f"not a readable ROS bag ({type(exc).__name__}: {exc})",
                "a ROS 1 .bag file, a ROS 2 bag folder, or a .db3 / .mcap file",
                source=self.src,
            ) from None

    def _open(self) -> None:
        reader = self._reader()
        try:
            reader.open()
        except Exception as exc:
            raise RecordingError(
                f"not a readable ROS bag ({type(exc).__name__}: {exc})",
                "a ROS 1 .bag file, a ROS 2 bag folder, or a .db3 / .mcap file",
                source=self.src,
            ) from None
        try:
            self._pick(reader)
        finally:
            reader.close()

    def _pick(self, reader: Any) -> list[Any]:
        """The connections of the IMU topic (refusing a bag without one, or with several)."""
        conns = list(reader.connections)
        topics = {c.topic: c.msgtype for c in conns}
        listed = ", ".join(f"{t} [{m}]" for t, m in sorted(topics.items())) or "none"
        if self.topic is not None:
            if self.topic not in topics:
                raise RecordingError(
                    f"no topic '{self.topic}' in the bag (topics: {listed})",
                    "--topic naming one of its sensor_msgs/Imu topics",
                    source=self.src,
                    field=f"topic '{self.topic}'",
                )
            if topics[self.topic] not in IMU_TYPES:
                raise RecordingError(
                    f"topic '{self.topic}' holds {topics[self.topic]} messages",
                    "a topic of sensor_msgs/Imu messages",
                    source=self.src,
                    field=f"topic '{self.topic}'",
                )
            chosen = self.topic
        else:
            imu = sorted(t for t, m in topics.items() if m in IMU_TYPES)
            if not imu:
                raise RecordingError(
                    f"no sensor_msgs/Imu topic (topics: {listed})",
                    "a bag with a topic of sensor_msgs/Imu messages",
                    source=self.src,
                )
            if len(imu) > 1:
                raise RecordingError(
                    "several sensor_msgs/Imu topics: " + ", ".join(imu),
                    f"one of them named with --topic (e.g. --topic {imu[0]})",
                    source=self.src,
                )
            chosen = imu[0]
        self.topic = chosen
        picked = [c for c in conns if c.topic == chosen]
        if sum(c.msgcount for c in picked) == 0:
            raise RecordingError(
                f"topic '{chosen}' has no messages",
                "a bag with at least 2 sensor_msgs/Imu messages",
                source=self.src,
                field=f"topic '{chosen}'",
            )
        return picked

    def load(
        self, wanted: Sequence[int], *, cache: Any, progress: Callable[[int, int], None] | None
    ) -> list[np.ndarray]:
        if self._columns is None:
            self._columns = self._decode(progress)
        return [self._columns[j] for j in wanted]

    def _decode(self, progress: Callable[[int, int], None] | None) -> list[np.ndarray]:
        """Every message of the topic: stamps [ns] and the six values, in bag order."""
        reader = self._reader()
        with reader:
            conns = self._pick(reader)
            total = sum(c.msgcount for c in conns)
            ros1 = not getattr(reader, "is2", True)
            stamps = np.empty(total, dtype=np.int64)
            values = np.empty((total, 6))
            k = 0
            batch: list[Any] = []
            for conn, _, raw in reader.messages(connections=conns):
                batch.append(raw)
                if len(batch) == _BATCH:
                    k = self._batch(reader, conn, batch, ros1, stamps, values, k)
                    batch = []
                    if progress is not None:
                        progress(k, total)
            if batch:
                k = self._batch(reader, conns[0], batch, ros1, stamps, values, k)
        if progress is not None:
            progress(total, total)
        return [stamps[:k], *(values[:k, j] for j in range(6))]

    def _batch(
        self,
        reader: Any,
        conn: Any,
        batch: list[Any],
        ros1: bool,
        stamps: np.ndarray,
        values: np.ndarray,
        k: int,
    ) -> int:
        n = len(batch)
        fast = _fixed_layout(batch, ros1)
        if fast is not None:
            t, v = fast
            first = reader.deserialize(batch[0], conn.msgtype)
            if t[0] == _stamp(first) and np.array_equal(v[0], _values(first)):
                stamps[k : k + n], values[k : k + n] = t, v
                return k + n
        for i, raw in enumerate(batch):  # message by message
            msg = reader.deserialize(raw, conn.msgtype)
            stamps[k + i] = _stamp(msg)
            values[k + i] = _values(msg)
        return k + n


def _stamp(msg: Any) -> int:
    s = msg.header.stamp
    return int(s.sec) * 1_000_000_000 + int(s.nanosec)


def _values(msg: Any) -> np.ndarray:
    w, a = msg.angular_velocity, msg.linear_acceleration
    return np.array([w.x, w.y, w.z, a.x, a.y, a.z])


def _fixed_layout(batch: list[Any], ros1: bool) -> tuple[np.ndarray, np.ndarray] | None:
    """Stamps [ns] and values of serialized sensor_msgs/Imu messages of one length, or None.

    ROS 1: seq, sec, nsec (uint32), frame id (uint32 length, bytes), then the float64 fields
    packed. ROS 2 (CDR, after a 4-byte encapsulation header): sec (int32), nanosec (uint32),
    frame id (uint32 length with its NUL, bytes), then the float64 fields aligned to 8 bytes
    from the body's start. After the header: orientation (4), its covariance (9), angular
    velocity (3), its covariance (9), linear acceleration (3), its covariance (9).
    """
    length = len(batch[0])
    if any(len(b) != length for b in batch):
        return None
    arr = np.frombuffer(b"".join(bytes(b) for b in batch), dtype=np.uint8).reshape(-1, length)
    if ros1:
        order, body, sec_off = "<", 0, 4
        sec_type = "u4"
        name_len = int(np.frombuffer(arr[0, 12:16].tobytes(), "<u4")[0])
        after = 16 + name_len
    else:
        if arr[0, 1] not in (0, 1):
            return None
        order = "<" if arr[0, 1] == 1 else ">"
        body, sec_off, sec_type = 4, 4, "i4"
        name_len = int(np.frombuffer(arr[0, 12:16].tobytes(), f"{order}u4")[0])
        after = 12 + name_len
        after = (after + 7) // 8 * 8
    start = body + after + 104  # orientation and its covariance: 13 float64
    if start + 24 + 72 + 24 > length:
        return None

    def field(offset: int, count: int, dtype: str) -> np.ndarray:
        size = count * np.dtype(dtype).itemsize
        return np.ascontiguousarray(arr[:, offset : offset + size]).view(order + dtype)

    sec = field(sec_off, 1, sec_type)[:, 0].astype(np.int64)
    nsec = field(sec_off + 4, 1, "u4")[:, 0].astype(np.int64)
    gyro = field(start, 3, "f8")
    accel = field(start + 24 + 72, 3, "f8")
    return sec * 1_000_000_000 + nsec, np.hstack([gyro, accel])
