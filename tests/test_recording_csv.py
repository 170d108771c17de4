"""Tests of sensormodel.recording's CSV reading: text layouts, comment settings, the three
engines (pyarrow, numpy.loadtxt, the Python reader) and the cache.

Python's ``float()`` (correctly rounded decimal-to-binary conversion, IEEE 754-2008 §5.12) is
the reference for every number a CSV engine returns.
"""

from __future__ import annotations

import os
import pathlib

import numpy as np
import pytest
from recording_files import (
    CHANNELS,
    DEG,
    csv_text,
    read_error,
    sample_block,
    write_file,
)

from sensormodel import recording as rec
from sensormodel.recording import _csv as csv_engine
from sensormodel.recording import open_writer, read_recording


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
    path = write_file(tmp_path, "nohead.csv", "1,2\n3,4\n5,6\n")
    r = read_recording(path, rate=1.0)
    assert r.channels == ("ch0", "ch1")
    np.testing.assert_array_equal(r.data["ch1"], [2, 4, 6])


def test_settings_in_comments(tmp_path: pathlib.Path) -> None:
    path = write_file(tmp_path, "s.csv", "# sensormodel rate = 2 kHz\ngyro_x [deg/s]\n1\n2\n")
    assert read_recording(path).rate == 2000.0
    path = write_file(tmp_path, "bad.csv", "# sensormodel speed = 2\ngyro_x [deg/s]\n1\n2\n")
    assert read_error(path) == (
        f"{path}:line 1: unknown setting 'speed'; expected one of 'rate', 'increments', "
        "'start_time'"
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
    path = write_file(tmp_path, "e.csv", "time [s],a,b,c\n" + "\n".join(rows) + "\n")
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
    path = write_file(tmp_path, "x.csv", "# c\n" + csv_text(rows))
    monkeypatch.setattr(csv_engine, "_PIECE_BYTES", 4096)
    expected = (
        f"{path}:line 2348: column 'gyro_x' holds '1.2.3', not a number; expected a decimal "
        "number such as -0.0123 (with '.' as the decimal mark)"
    )
    assert read_error(path, cache=False) == expected
    monkeypatch.setattr(csv_engine, "import_pyarrow_csv", lambda: None)
    assert read_error(path, cache=False) == expected


def test_python_reader_extras(tmp_path: pathlib.Path) -> None:
    # quoted numbers, blank fields and blank lines: read by the Python reader, as missing samples
    rows = "".join(f"0.{i},{i}\n" for i in range(3, 10))
    path = write_file(tmp_path, "q.csv", 'time [s],gyro_x [deg/s]\n0,"1"\n0.1,  \n\n' + rows)
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
    block = sample_block(2000)
    path = tmp_path / "rec.csv"
    with open_writer(path, CHANNELS, None, 100.0) as w:
        w.write(block)
    cache = tmp_path / "cache"
    first = read_recording(path, cache=cache)
    entries = list(cache.iterdir())
    assert len(entries) == 1
    assert sorted(f.name for f in entries[0].iterdir()) == [f"f{j}.f64" for j in range(4)] + [
        "source.txt"  # the CSV file it was parsed from, for the cache's pruning
    ]
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
    path = write_file(tmp_path, "small.csv", csv_text(["0,1", "0.5,2"]))
    read_recording(path)  # below CACHE_MIN_BYTES: not cached
    assert not (tmp_path / "c").exists()
    read_recording(path, cache=True)
    assert len(list((tmp_path / "c").iterdir())) == 1


def test_failed_parse_leaves_no_cached_column(
    tmp_path: pathlib.Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    rows = [f"{i / 10!r},{i % 7}" for i in range(3000)]
    rows[2345] = f"{2345 / 10!r},x"
    path = write_file(tmp_path, "bad.csv", csv_text(rows))
    monkeypatch.setattr(csv_engine, "_PIECE_BYTES", 4096)  # the bad line is in a later piece
    cache = tmp_path / "cache"
    assert read_error(path, cache=cache).startswith(f"{path}:line 2347: column 'gyro_x'")
    entries = list(cache.iterdir())
    assert len(entries) == 1 and list(entries[0].iterdir()) == []  # no column, no part file


def test_cache_is_bounded_and_drops_entries_of_files_gone(tmp_path, monkeypatch) -> None:
    # The CSV cache grew without bound and kept entries of deleted files: a new entry now
    # keeps the folder within its bound (least recently used removed first), the entries of
    # files that are gone are dropped, and `sensormodel cache` shows and clears it.
    from click.testing import CliRunner

    from sensormodel.cli import cli
    from sensormodel.recording import cache_entries, prune_cache

    root = tmp_path / "cache"
    monkeypatch.setenv("SENSORMODEL_CACHE", str(root))
    files = []
    for k in range(3):
        path = tmp_path / f"r{k}.csv"
        rows = "".join(f"{i / 10},{(i * 7919 + k) % 13 / 10}\n" for i in range(2000))
        path.write_text("time [s],gyro_x [rad/s]\n" + rows, encoding="utf-8")
        read_recording(path, cache=True)
        files.append(path)
    entries = cache_entries(root)
    assert len(entries) == 3 and [e[3] for e in entries] == [str(f.resolve()) for f in files]
    one = entries[0][1]
    # a bound of two entries: the next new entry removes the least recently used (r0)
    monkeypatch.setenv("SENSORMODEL_CACHE_MAX", str(2 * one + one // 2))
    read_recording(files[1], cache=True)  # r1 used again: r2 is now the least recently used
    new = tmp_path / "r3.csv"
    new.write_text(files[0].read_text(encoding="utf-8"), encoding="utf-8")
    read_recording(new, cache=True)
    assert {pathlib.Path(e[3]).name for e in cache_entries(root)} == {"r1.csv", "r3.csv"}
    files[1].unlink()
    removed = prune_cache(root)
    assert [p.name.split("-")[0] for p in removed] == ["r1.csv"]
    out = CliRunner().invoke(cli, ["cache"]).output
    assert "1 entry" in out and "r3.csv" in out
    out = CliRunner().invoke(cli, ["cache", "--clear"]).output
    assert "removed 1 entry" in out and cache_entries(root) == []
