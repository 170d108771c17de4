"""Output files: written whole or not at all, with the mode the user's umask gives."""

from __future__ import annotations

import os
import stat

import pytest

from sensormodel._io import atomic_path, atomic_writer, write_json
from sensormodel.errors import SensorModelError


@pytest.fixture
def umask():
    """Set the process umask for one test and restore it after."""
    saved = os.umask(0o022)
    os.umask(saved)
    yield os.umask
    os.umask(saved)


@pytest.mark.parametrize(("mask", "mode"), [(0o022, 0o644), (0o002, 0o664), (0o077, 0o600)])
def test_outputs_follow_the_umask(tmp_path, umask, mask, mode) -> None:
    # Every output was once 0600 whatever the umask (a temporary file renamed into place), so
    # colleagues could not read shared reports. POSIX: a new file is 0666 & ~umask.
    umask(mask)
    write_json(tmp_path / "a.json", {"x": 1})
    with atomic_writer(tmp_path / "b.bin", binary=True) as fh:
        fh.write(b"\x00")
    with atomic_path(tmp_path / "c.npz") as tmp:
        tmp.write_bytes(b"by name")
    for name in ("a.json", "b.bin", "c.npz"):
        assert stat.S_IMODE((tmp_path / name).stat().st_mode) == mode, name


def test_a_failed_write_leaves_nothing(tmp_path) -> None:
    with pytest.raises(RuntimeError), atomic_writer(tmp_path / "half.txt") as fh:
        fh.write("half")
        raise RuntimeError("stopped")
    assert list(tmp_path.iterdir()) == []
    (tmp_path / "old.txt").write_text("old")
    with pytest.raises(SensorModelError, match="--force"):
        write_json(tmp_path / "old.txt", {})
    assert (tmp_path / "old.txt").read_text() == "old"
