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
