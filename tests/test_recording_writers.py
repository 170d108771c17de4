"""Tests of sensormodel.recording's writers (open_writer): atomic, no overwrite, units checked."""

from __future__ import annotations

import pathlib

import numpy as np
import pytest
from recording_files import (
    CHANNELS,
    DEG,
    sample_block,
)

from sensormodel._io import OutputExistsError
from sensormodel.errors import AnalysisError, RecordingError, UnitError
from sensormodel.recording import open_writer, read_recording

# ---------------------------------------------------------------------------------------------
# Writers: atomic, no overwrite, units checked
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("ext", ["csv", "npy", "npz", "h5"])
def test_writer_failure_leaves_nothing(tmp_path: pathlib.Path, ext: str) -> None:
    path = tmp_path / f"rec.{ext}"
    with pytest.raises(RuntimeError, match="stop"):
        with open_writer(path, CHANNELS, None, 10.0) as w:
            w.write(sample_block(10))
            raise RuntimeError("stop")
    assert list(tmp_path.iterdir()) == []
    with pytest.raises(RecordingError, match="3 samples written; expected n_samples=5"):
        with open_writer(path, CHANNELS, None, 10.0, n_samples=5) as w:
            w.write(sample_block(3))
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
        w.write(sample_block(10))
    assert read_recording(path).n_samples == 10


def test_writer_checks(tmp_path: pathlib.Path) -> None:
    path = tmp_path / "rec.csv"
    with pytest.raises(UnitError) as info:
        open_writer(path, ["gyro.x"], "mg", 10.0)
    assert str(info.value) == (
        f"{path}:unit of gyro.x: got 'mg' (mass) ('g' is read as grams outside acceleration "
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


def test_writer_argument_checks(tmp_path: pathlib.Path) -> None:
    path = tmp_path / "rec.npz"
    # the rate is an argument, checked by the shared validator; nothing is written
    with pytest.raises(AnalysisError) as info:
        open_writer(path, ["gyro.x"], None, 0.0)
    assert str(info.value) == "rate: got 0.0 Hz; expected a finite sample rate > 0 Hz"
    with pytest.raises(AnalysisError, match=r"^n_samples: got -1; expected a whole number ≥ 0$"):
        open_writer(path, ["gyro.x"], None, 10.0, n_samples=-1)
    with pytest.raises(RecordingError) as info:
        open_writer(path, ["gyro.x", "gyro.x"], None, 10.0)
    assert str(info.value) == (
        f"{path}: channels ['gyro.x', 'gyro.x']; expected a non-empty list of distinct ids"
    )
    with pytest.raises(RecordingError, match="a channel is named like the time column"):
        open_writer(path, ["gyro.x", "Time"], None, 10.0)
    with pytest.raises(RecordingError, match="^2 units for 3 channels; expected one unit per"):
        open_writer(path, CHANNELS, ["deg/s", "deg/s"], 10.0)
    assert list(tmp_path.iterdir()) == []
