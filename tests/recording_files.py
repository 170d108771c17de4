"""Small recording files and unit constants for the tests of sensormodel.recording
(``tests/test_recording*.py``; pytest puts ``tests/`` on the path).

Outside references used here:
- degree = pi/180 rad and hour = 3600 s (SI Brochure, 9th ed., BIPM 2019, Table 8);
- standard gravity g_n = 9.80665 m/s^2 exactly (3rd CGPM 1901; NIST SP 330).
"""

from __future__ import annotations

import math
import pathlib
from collections.abc import Callable

import numpy as np
import pytest

from sensormodel.errors import RecordingError
from sensormodel.recording import read_recording

DEG = math.pi / 180  # SI Brochure Table 8
HOUR = 3600.0  # SI Brochure Table 8
G_N = 9.80665  # 3rd CGPM 1901, exact

#: The channels of :func:`sample_block`.
CHANNELS = ["gyro.x", "gyro.y", "accelerometer.z"]


def write_file(tmp_path: pathlib.Path, name: str, text: str) -> pathlib.Path:
    """Write ``text`` as it is (no newline translation) to ``tmp_path / name``."""
    p = tmp_path / name
    p.write_text(text, encoding="utf-8", newline="")
    return p


def sample_block(n: int = 3000, seed: int = 1) -> np.ndarray:
    """Seeded SI samples of :data:`CHANNELS` (rad/s, rad/s, m/s^2), one row per sample."""
    rng = np.random.default_rng(seed)
    return np.column_stack(
        [rng.normal(0, 1e-3, n), rng.normal(2e-4, 1e-3, n), rng.normal(G_N, 1e-2, n)]
    )


def csv_text(rows: list[str], header: str = "time [s],gyro_x [deg/s]") -> str:
    """A CSV text: the header, then the rows."""
    return header + "\n" + "\n".join(rows) + "\n"


def read_error(path: pathlib.Path, **kw: object) -> str:
    """The message of the RecordingError that reading ``path`` raises."""
    with pytest.raises(RecordingError) as info:
        read_recording(path, **kw)
    return str(info.value)


def sample_rows(
    n: int, value: Callable[[int], float], time: Callable[[int], float] = lambda i: i / 10
) -> list[str]:
    """CSV rows ``time,value`` for samples 0 … n-1."""
    return [f"{time(i)!r},{value(i)!r}" for i in range(n)]


#: The scales of the rig log of :func:`rig_counts`: one count of the gyro (8.75 mdps, a
#: ±250 dps MEMS range) and of the accelerometer (0.061 mg, a ±2 g range), and of the
#: temperature (0.1 degC); values from memory of typical MEMS datasheets.
GYRO_COUNT = 8.75e-3 * DEG  # rad/s
ACCEL_COUNT = 0.061e-3 * G_N  # m/s^2


def rig_counts(n: int = 4000, seed: int = 5) -> dict[str, np.ndarray]:
    """Raw int16 counts of a six-channel rig log at rest: gyro noise of a few counts, the
    accelerometer z axis at +1 g, a flat temperature (25.0 degC: one value throughout, as a
    0.1 degC sensor shows in a short static run) and a wrapping uint16 message counter."""
    rng = np.random.default_rng(seed)
    g = np.rint(rng.normal(0.0, 4.0, (n, 3))).astype(np.int16)
    a = np.rint(rng.normal(0.0, 6.0, (n, 3))).astype(np.int16)
    a[:, 2] += np.int16(round(1.0 / 0.061e-3))  # +1 g in counts
    return {
        "gx": g[:, 0],
        "gy": g[:, 1],
        "gz": g[:, 2],
        "ax": a[:, 0],
        "ay": a[:, 1],
        "az": a[:, 2],
        "temp": np.full(n, 250, dtype=np.int16),  # 0.1 degC counts
        "counter": (np.arange(n) + 65000).astype(np.uint16),  # wraps at 65536
    }


def rig_csv(
    path: pathlib.Path, counts: dict[str, np.ndarray], header: list[str], time: list[str]
) -> pathlib.Path:
    """A rig CSV: the ``time`` texts, then the columns of ``counts`` in order, under ``header``
    (time's field first)."""
    cols = list(counts.values())
    rows = [",".join([time[i], *(str(int(c[i])) for c in cols)]) for i in range(len(time))]
    path.write_text(",".join(header) + "\n" + "\n".join(rows) + "\n", encoding="utf-8")
    return path
