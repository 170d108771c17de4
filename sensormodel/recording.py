"""Recordings: read and write CSV/TSV, NPY, NPZ and HDF5 records; time base, gaps and units.

:func:`read_recording` turns a recording file into a :class:`Recording`: one float64 array per
channel in SI (rad/s, m/s², or the recorded unit when the file gives none), the sample rate, the
start time, the problems found (:class:`Finding`) and the clean stretches to analyse
(:class:`Segment`). :func:`open_writer` streams SI samples into any of the formats so that
:func:`read_recording` reads them back without options.

Formats
-------
CSV / TSV (``.csv``, ``.tsv``, ``.txt``)
    Comment lines starting with ``#`` may come before the header. The header names each column
    and may give its unit in brackets: ``time [s],gyro_x [deg/s],acc_z [mg]``. The delimiter
    (``,``, tab or ``;``) is found from the header and the first data row (``.tsv`` is always
    tab). A file whose first line is all numbers has no header; its columns are ``ch0``, ``ch1``…
    An empty field, ``nan`` or a blank line is a missing sample (reported, never filled). Three
    comment settings are read, as :func:`open_writer` writes them::

        # sensormodel rate = 400 Hz          (sample rate when there is no time column)
        # sensormodel increments = true      (samples are increments per sample period)
        # sensormodel start_time = 12.5 s    (time of the first sample, no time column)

NPY (``.npy``)
    A 1-D (one channel) or 2-D (samples × columns) array, memory-mapped (``mmap_mode="r"``), so
    a large record is not loaded. Column names, units and the rate travel in a JSON *sidecar*
    named after the whole file name, ``rec.npy.json``::

        {"schema": "sensormodel/recording/1", "rate": 400.0, "increments": false,
         "start_time": 0.0, "columns": [{"name": "time", "unit": "s"},
                                         {"name": "gyro.x", "unit": "rad/s"}]}

    Without a sidecar the columns are ``ch0``, ``ch1``… "as recorded" and ``rate`` is needed.
NPZ (``.npz``)
    One 1-D array per column, by name; a ``time`` array or a 0-d ``rate`` array [Hz]; the same
    JSON as the NPY sidecar may sit in a 0-d string array named ``_sensormodel``. Uncompressed
    entries are memory-mapped.
HDF5 (``.h5``, ``.hdf5``; needs the optional ``h5py``: ``pip install sensormodel[hdf5]``)
    One 1-D dataset per column (nested groups allowed; the last path part is the name), a
    ``unit`` attribute on each, a ``rate`` attribute [Hz] on the file or the datasets.
    Contiguous uncompressed float64 datasets are memory-mapped.

Channels and units (DESIGN §10)
-------------------------------
A column whose name equals a channel id (``gyro.x``, ``gyro_x``, ``GYRO_X``: ``.`` and ``_``
alike, case ignored) is that channel; ``channel_map={"COLUMN": "gyro.x"}`` maps any other.
Columns that map to no channel keep their name as id. A gyro column's unit must be an angular
rate (an angle with ``increments``), an accelerometer column's an acceleration (a velocity with
``increments``); there ``g``, ``mg``, ``µg`` are standard gravity. An unmapped column's kind is
inferred from its unit among angular rate, acceleration, angle and velocity; any other unit
(``degC``, ``LSB``) and a column with no unit are kept *as recorded*: values unchanged, unit
label as written (``1`` when there is none), so results stay in that unit.

Time base and problems
----------------------
The rate comes from a time column (``time``, ``t`` or ``timestamp``, with a unit), from the file
(sidecar, attribute, comment setting) or from ``rate``; two sources must agree within a relative
1e-6. From a time column the rate is the number of regular steps over their total duration.
Problems are found and reported with their position, never filled or dropped silently:

* ``gap``: a time step larger than 1.5 × the median step;
* ``non_monotonic``: time going backwards; ``duplicate_time``: a time equal to the previous one;
* ``non_finite``: NaN, an empty field or ±inf (in the time column or a data column);
* ``constant``: at least ``constant_run`` identical consecutive samples (a stuck sensor);
* ``saturated``: at least ``saturation_run`` consecutive samples at the column's maximum or
  minimum (clipping at full scale).

With ``gaps="fail"`` (default) the first of them raises :class:`RecordingError` naming the file
and the line; with ``gaps="split"`` the recording is cut at them into clean segments per channel
(segments shorter than ``min_segment`` samples are dropped and reported).

Positions: a :class:`Finding`'s ``position`` is the 0-based sample index. Messages of text files
name **file lines as an editor shows them: 1-based, counting the header and any comment lines
above it** (with a one-line header and no comments, the first sample is line 2). Messages of
binary files name the 0-based sample ``index``.

Increments
----------
With ``increments=True`` each sample is the angle (velocity) increment over its sample period;
it is converted to the mean rate over that period by dividing by the nominal period 1/rate (not
by each time step, so timestamp jitter does not enter the data). The returned data are rates
(rad/s, m/s²); ``Recording.increments`` says that the file held increments; multiply by
``1/rate`` to get them back.

CSV speed and the cache
-----------------------
CSV text is parsed with ``pyarrow.csv`` when it is importable, in pieces of 64 MiB. A piece
pyarrow cannot read (every piece when pyarrow is missing) goes to ``numpy.loadtxt``, and a piece
that refuses too to the pure-Python reader, which decides: it accepts what the other two accept
with identical numbers (and a little more: blank lines and blank fields as missing samples,
quoted numbers), and it names the exact line and column of anything it cannot read.

Files of at least ``CACHE_MIN_BYTES`` (8 MiB) are converted once into raw float64 column files
(memory-mapped on later reads) in a cache folder keyed by the file's absolute path, size and
modification time: ``$SENSORMODEL_CACHE`` if set, else ``$XDG_CACHE_HOME/sensormodel/csv``
(default ``~/.cache/sensormodel/csv``). ``SENSORMODEL_CACHE=off`` or ``cache=False`` disables it;
``cache=True`` caches any size; the folder can be deleted at any time.
"""

from __future__ import annotations

import codecs
import contextlib
import csv
import fnmatch
import hashlib
import io
import json
import math
import mmap
import os
import pathlib
import re
import shutil
import struct
import tempfile
import zipfile
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any

import numpy as np
import numpy.typing as npt

from ._io import atomic_path, atomic_writer, check_writable
from .errors import RecordingError, UnitError
from .quantities import parse_quantity, parse_unit_factor

__all__ = [
    "CHANNEL_IDS",
    "TIME_COLUMN_NAMES",
    "SUFFIXES",
    "CACHE_MIN_BYTES",
    "Finding",
    "Segment",
    "Recording",
    "read_recording",
    "channel_id_for",
    "cache_folder",
    "RecordingWriter",
    "open_writer",
]

#: The channel ids of DESIGN §10.
CHANNEL_IDS = (
    "gyro.x",
    "gyro.y",
    "gyro.z",
    "accelerometer.x",
    "accelerometer.y",
    "accelerometer.z",
)
#: Column names (case ignored) taken as the time column.
TIME_COLUMN_NAMES = ("time", "t", "timestamp")
#: File name endings and the format each is read and written as.
SUFFIXES = {
    ".csv": "csv",
    ".tsv": "csv",
    ".txt": "csv",
    ".npy": "npy",
    ".npz": "npz",
    ".h5": "hdf5",
    ".hdf5": "hdf5",
}
#: CSV files at least this large [bytes] are cached as binary columns by default.
CACHE_MIN_BYTES = 8 * 2**20
#: A time step larger than this multiple of the median step is a gap.
GAP_FACTOR = 1.5
#: Relative tolerance within which two rates (time column, file, option) must agree.
RATE_RTOL = 1e-6

_SCHEMA = "sensormodel/recording/1"
_CACHE_VERSION = "1"
_PIECE_BYTES = 64 * 2**20
_MAX_FINDINGS = 1000
_FATAL = ("non_finite", "non_monotonic", "duplicate_time", "gap", "saturated", "constant")
_KIND_ORDER = {k: i for i, k in enumerate(_FATAL)}
_SPLIT_HINT = "or --gaps split to analyse the clean segments"
_EXPECTED = {
    "gap": f"uniformly sampled time, {_SPLIT_HINT}",
    "non_monotonic": f"increasing time, {_SPLIT_HINT}",
    "duplicate_time": f"increasing time, {_SPLIT_HINT}",
    "non_finite": f"finite samples, {_SPLIT_HINT}",
    "constant": f"a live signal, {_SPLIT_HINT}",
    "saturated": f"samples within the sensor's range, {_SPLIT_HINT}",
}
_FORMATS_TEXT = "a .csv, .tsv, .txt, .npy, .npz, .h5 or .hdf5 file"

# SI labels per kind (the noise-model files use the same spellings).
_SI_LABEL = {"angular_rate": "rad/s", "acceleration": "m/s^2", "angle": "rad", "velocity": "m/s"}
_RATE_OF = {"angle": "angular_rate", "velocity": "acceleration"}
_INCREMENT_OF = {v: k for k, v in _RATE_OF.items()}
_INFER_KINDS = ("angular_rate", "acceleration", "angle", "velocity")
_INSTRUMENT_KIND = {"gyro": "angular_rate", "accelerometer": "acceleration"}
_KIND_WHAT = {
    "angular_rate": "an angular rate such as 'deg/s'",
    "acceleration": "an acceleration such as 'm/s^2' or 'mg'",
    "angle": "an angle increment such as 'rad' or 'deg'",
    "velocity": "a velocity increment such as 'm/s'",
}


# ---------------------------------------------------------------------------------------------
# Results
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Finding:
    """One problem found in a recording.

    Attributes
    ----------
    kind : str
        ``gap``, ``non_monotonic``, ``duplicate_time``, ``non_finite``, ``constant``,
        ``saturated`` (problems of the data) or ``short_segment``, ``note`` (information).
    channel : str or None
        The channel id concerned, ``"time"`` for the time column, None for the whole file.
    position : int
        0-based index of the first sample concerned.
    detail : str
        What was found, e.g. ``"time step of 0.01 s where the median step is 0.0025 s"``.
    length : int
        Number of consecutive samples concerned.
    where : str
        The place in the file: ``"line 17"``, ``"lines 17-19"`` (text) or ``"index 15"``.
    count : int
        Number of stretches the finding stands for: 1, or, for the last finding of a kind and
        channel after ``_MAX_FINDINGS`` (1000) of them, all the remaining stretches.
    """

    kind: str
    channel: str | None
    position: int
    detail: str
    length: int = 1
    where: str = ""
    count: int = 1

    @property
    def fatal(self) -> bool:
        """Whether the finding makes the recording unusable as one uniform record."""
        return self.kind in _FATAL


@dataclass(frozen=True)
class Segment:
    """A clean, uniformly sampled stretch of one channel.

    Attributes
    ----------
    start, stop : int
        Sample indices, 0-based, ``stop`` excluded (``data[start:stop]``).
    start_time : float
        Time of the first sample [s].
    """

    start: int
    stop: int
    start_time: float

    @property
    def n(self) -> int:
        """Number of samples."""
        return self.stop - self.start


@dataclass(frozen=True)
class Recording:
    """A recording read into SI arrays, with its time base and the problems found.

    Attributes
    ----------
    source : str
        The file read.
    format : str
        ``csv``, ``npy``, ``npz`` or ``hdf5``.
    channels : tuple of str
        Channel ids in file order: ``gyro.x`` … ``accelerometer.z`` for mapped columns, the
        column name otherwise.
    data : mapping of str to ndarray
        Per channel, every sample as read (flagged ones included), float64, read-only, in the
        SI unit of ``units`` (rad/s, m/s², rad, m/s) or as recorded. Memory-mapped views of the
        file (or of the CSV cache) where no conversion was needed.
    units : mapping of str to str
        Unit label per channel: ``rad/s``, ``m/s^2``, ``rad``, ``m/s``, or as recorded (``1``
        when the file gives no unit; ``1/s`` for unit-less increments).
    quantities : mapping of str to str
        ``angular_rate``, ``acceleration``, ``angle``, ``velocity`` or ``as_recorded``.
    columns : mapping of str to str
        The file's column (or array, dataset) name per channel.
    rate : float
        Sample rate [Hz].
    start_time : float
        Time of the first sample [s].
    increments : bool
        The file held increments; ``data`` holds the rates derived from them.
    findings : tuple of Finding
        Every problem and note, in file order.
    segments : mapping of str to tuple of Segment
        Per channel, the clean stretches to analyse: one segment covering everything for a clean
        recording; with ``gaps="split"`` the stretches between problems.
    time : ndarray or None
        The time column [s], when the file has one.
    """

    source: str
    format: str
    channels: tuple[str, ...]
    data: Mapping[str, npt.NDArray[np.float64]]
    units: Mapping[str, str]
    quantities: Mapping[str, str]
    columns: Mapping[str, str]
    rate: float
    start_time: float
    increments: bool
    findings: tuple[Finding, ...]
    segments: Mapping[str, tuple[Segment, ...]]
    time: npt.NDArray[np.float64] | None = None

    @property
    def n_samples(self) -> int:
        """Number of samples (rows) in the file."""
        return len(next(iter(self.data.values()))) if self.data else 0

    @property
    def duration(self) -> float:
        """Length of the record, ``n_samples / rate`` [s]."""
        return self.n_samples / self.rate

    def segment_arrays(self, channel: str) -> list[npt.NDArray[np.float64]]:
        """The samples of each clean segment of ``channel`` (views of ``data[channel]``)."""
        x = self.data[channel]
        return [x[s.start : s.stop] for s in self.segments[channel]]


# ---------------------------------------------------------------------------------------------
# Small helpers
# ---------------------------------------------------------------------------------------------


def channel_id_for(name: str) -> str | None:
    """The channel id a column name maps to by the naming rule (DESIGN §10), or None.

    ``gyro.x``, ``gyro_x`` and ``GYRO_X`` all give ``gyro.x``; ``acc_z`` gives None.
    """
    n = name.strip().lower().replace("_", ".")
    return n if n in CHANNEL_IDS else None


def _no_unit(unit: str | None) -> bool:
    return unit is None or unit.strip() in ("", "1", "-")


def _runs(mask: npt.NDArray[np.bool_]) -> tuple[npt.NDArray[np.intp], npt.NDArray[np.intp]]:
    """Starts and lengths of the runs of True in a 1-D boolean array."""
    if not mask.any():
        empty = np.zeros(0, dtype=np.intp)
        return empty, empty
    m = np.zeros(len(mask) + 2, dtype=np.int8)
    m[1:-1] = mask
    d = np.diff(m)
    starts = np.flatnonzero(d == 1)
    stops = np.flatnonzero(d == -1)
    return starts, stops - starts


def _readonly(x: np.ndarray) -> np.ndarray:
    if x.flags.writeable:
        x = x.view()
        x.flags.writeable = False
    return x


def _number(text: str) -> float:
    """Read one CSV field as pyarrow does: empty is NaN; ASCII decimal or nan/inf spellings."""
    s = text.strip()
    if not s:
        return math.nan
    if s.isascii() and "_" not in s:
        try:
            return float(s)
        except ValueError:
            low = s.lower().lstrip("+-")
            if low.startswith("nan(") and low.endswith(")"):
                return math.nan
    raise ValueError(s)


def _fmt(x: float) -> str:
    return f"{x:.10g}"


def cache_folder() -> pathlib.Path | None:
    """The CSV cache folder: ``$SENSORMODEL_CACHE``, else ``$XDG_CACHE_HOME/sensormodel/csv``
    (default ``~/.cache/sensormodel/csv``); None when ``SENSORMODEL_CACHE`` is ``off``."""
    env = os.environ.get("SENSORMODEL_CACHE")
    if env is not None:
        if env.strip().lower() in ("", "0", "off", "no", "false", "none"):
            return None
        return pathlib.Path(env).expanduser()
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return pathlib.Path(base) / "sensormodel" / "csv"


def _import_pyarrow_csv() -> Any:
    """pyarrow and pyarrow.csv, or None when pyarrow is not installed (the fast path is off)."""
    try:
        import pyarrow as pa
        import pyarrow.csv as pacsv
    except ImportError:
        return None
    return pa, pacsv


def _import_h5py(source: str) -> Any:
    try:
        import h5py
    except ImportError:
        raise RecordingError(
            "reading or writing HDF5 needs the optional package h5py, which is not installed",
            "it installed: pip install sensormodel[hdf5]",
            source=source,
        ) from None
    return h5py


# ---------------------------------------------------------------------------------------------
# Sources: one per format. Each gives column names, header units, file-declared settings and a
# loader of raw columns (file units, float64).
# ---------------------------------------------------------------------------------------------


class _Source:
    fmt = ""
    text = False

    def __init__(self, path: pathlib.Path, src: str) -> None:
        self.path = path
        self.src = src
        self.names: list[str] = []
        self.units: list[str | None] = []
        self.rate: float | None = None
        self.increments: bool | None = None
        self.start_time: float | None = None

    def where(self, i: int, length: int = 1) -> str:
        if length > 1:
            return f"indices {i}-{i + length - 1}"
        return f"index {i}"

    def load(
        self, wanted: Sequence[int], *, cache: Any, progress: Callable[[int, int], None] | None
    ) -> list[np.ndarray]:
        raise NotImplementedError

    def _meta(self, meta: Any, where: str) -> list[dict[str, Any]]:
        """Apply a sensormodel metadata document (sidecar, npz entry); return its columns."""
        if not isinstance(meta, dict) or meta.get("schema") != _SCHEMA:
            raise RecordingError(
                f"{where} is not sensormodel recording metadata",
                f'a JSON object with "schema": "{_SCHEMA}"',
                source=self.src,
            )
        rate = meta.get("rate")
        if rate is not None:
            self.rate = _check_rate(rate, source=self.src, field=f"{where}.rate")
        if meta.get("increments") is not None:
            self.increments = bool(meta["increments"])
        if meta.get("start_time") is not None:
            self.start_time = float(meta["start_time"])
        cols = meta.get("columns", [])
        if not isinstance(cols, list) or not all(
            isinstance(c, dict) and isinstance(c.get("name"), str) for c in cols
        ):
            raise RecordingError(
                f"{where}.columns is malformed",
                'a list of {"name": ..., "unit": ...} objects',
                source=self.src,
            )
        return cols


class _TextSource(_Source):
    fmt = "csv"
    text = True

    def __init__(self, path: pathlib.Path, src: str) -> None:
        super().__init__(path, src)
        self.size = path.stat().st_size
        self._sniff()

    # -- layout --------------------------------------------------------------------------------
    def _sniff(self) -> None:
        with open(self.path, "rb") as fh:
            head = fh.read(1 << 20)
        if not head.strip():
            raise RecordingError(
                "the file is empty",
                "a header line such as 'time [s],gyro.x [rad/s]' and rows of samples",
                source=self.src,
            )
        pos = len(codecs.BOM_UTF8) if head.startswith(codecs.BOM_UTF8) else 0
        line_no = 0
        header: str | None = None
        while pos < len(head):
            nl = head.find(b"\n", pos)
            end = len(head) if nl < 0 else nl + 1
            line_no += 1
            text = self._decode(head[pos:end], line_no).strip()
            if not text or text.startswith("#"):
                self._directive(text, line_no)
                pos = end
                continue
            header, header_line, header_start, data_offset = text, line_no, pos, end
            break
        if header is None:
            raise RecordingError(
                "no header line (only comments or blank lines)",
                "a header line such as 'time [s],gyro.x [rad/s]' and rows of samples",
                source=self.src,
            )
        nl = head.find(b"\n", data_offset)
        first = self._decode(head[data_offset : len(head) if nl < 0 else nl], header_line + 1)
        self.delimiter = "\t" if self.path.suffix.lower() == ".tsv" else _sniff(header, first)
        fields = _split(header, self.delimiter)
        self.n_fields = len(fields)
        try:
            for f in fields:
                if not f.strip():
                    raise ValueError(f)
                _number(f)
        except ValueError:
            headerless = False
        else:
            headerless = True
        if headerless:
            self.names = [f"ch{i}" for i in range(len(fields))]
            self.units = [None] * len(fields)
            self.first_line = header_line
            self.data_offset = header_start
        else:
            for i, f in enumerate(fields):
                name, unit = _header_field(f)
                self.names.append(name or f"ch{i}")
                self.units.append(unit)
            self.first_line = header_line + 1
            self.data_offset = data_offset
        self.data_end = self._data_end()
        if self.data_end <= self.data_offset:
            raise RecordingError(
                f"no data rows after the header (line {header_line})",
                "at least 2 rows of samples",
                source=self.src,
            )

    def _decode(self, raw: bytes, line_no: int) -> str:
        try:
            return raw.decode("utf-8")
        except UnicodeDecodeError:
            raise RecordingError(
                "cannot decode the line as UTF-8 text",
                "a UTF-8 (or ASCII) text file",
                source=self.src,
                field=f"line {line_no}",
            ) from None

    def _directive(self, text: str, line_no: int) -> None:
        m = re.match(r"^#\s*sensormodel\s+([A-Za-z_]+)\s*=\s*(.*?)\s*$", text)
        if m is None:
            return
        key, value = m.group(1).lower(), m.group(2)
        where = f"line {line_no}"
        if key == "rate":
            try:
                self.rate = parse_quantity(value, "frequency", allow_zero=False)
            except UnitError as exc:
                raise RecordingError(
                    exc.problem, exc.expected, source=self.src, field=where
                ) from None
        elif key == "start_time":
            try:
                self.start_time = parse_quantity(value, "time", allow_negative=True)
            except UnitError as exc:
                raise RecordingError(
                    exc.problem, exc.expected, source=self.src, field=where
                ) from None
        elif key == "increments":
            if value.lower() not in ("true", "false"):
                raise RecordingError(
                    f"increments = {value!r}", "true or false", source=self.src, field=where
                )
            self.increments = value.lower() == "true"
        else:
            raise RecordingError(
                f"unknown setting '{key}'",
                "one of 'rate', 'increments', 'start_time'",
                source=self.src,
                field=where,
            )

    def _data_end(self) -> int:
        """Offset after the last non-whitespace byte (trailing blank lines are not samples)."""
        end = self.size
        with open(self.path, "rb") as fh:
            while end > 0:
                start = max(0, end - 65536)
                fh.seek(start)
                chunk = fh.read(end - start).rstrip(b" \t\r\n")
                if chunk:
                    return start + len(chunk)
                end = start
        return 0

    def where(self, i: int, length: int = 1) -> str:
        line = self.first_line + i
        if length > 1:
            return f"lines {line}-{line + length - 1}"
        return f"line {line}"

    # -- parsing -------------------------------------------------------------------------------
    def load(
        self, wanted: Sequence[int], *, cache: Any, progress: Callable[[int, int], None] | None
    ) -> list[np.ndarray]:
        folder = self._cache_folder(cache)
        if folder is not None:
            try:
                return self._load_cached(folder, wanted, progress)
            except OSError:
                pass  # an unwritable cache only costs speed; parse in memory
        return self._parse(wanted, None, progress)

    def _cache_folder(self, cache: Any) -> pathlib.Path | None:
        if cache is False:
            return None
        if cache is None or cache is True:
            if cache is None and self.size < CACHE_MIN_BYTES:
                return None
            root = cache_folder()
            if root is None:
                return None
        else:
            root = pathlib.Path(cache)
        st = self.path.stat()
        resolved = str(self.path.resolve())
        path_key = hashlib.sha256(resolved.encode()).hexdigest()[:10]
        state = f"{st.st_size}\0{st.st_mtime_ns}\0{_CACHE_VERSION}\0{self.delimiter}\0"
        state += f"{self.data_offset}\0{self.data_end}"
        state_key = hashlib.sha256(state.encode()).hexdigest()[:12]
        stem = re.sub(r"[^A-Za-z0-9_.-]", "_", self.path.name)[:40]
        return root / f"{stem}-{path_key}-{state_key}"

    def _load_cached(
        self,
        folder: pathlib.Path,
        wanted: Sequence[int],
        progress: Callable[[int, int], None] | None,
    ) -> list[np.ndarray]:
        files = {j: folder / f"f{j}.f64" for j in wanted}
        sizes = {j: f.stat().st_size for j, f in files.items() if f.is_file()}
        if len(set(sizes.values())) > 1 or any(s % 8 for s in sizes.values()):
            sizes = {}  # inconsistent: rebuild
        missing = [j for j in wanted if j not in sizes]
        if missing:
            if not folder.is_dir():
                folder.parent.mkdir(parents=True, exist_ok=True)
                prefix = folder.name.rsplit("-", 1)[0] + "-"
                for old in folder.parent.glob(prefix + "*"):  # stale entries of this file
                    shutil.rmtree(old, ignore_errors=True)
                folder.mkdir(exist_ok=True)
            self._parse(missing, folder, progress)
        elif progress is not None:
            progress(self.data_end - self.data_offset, self.data_end - self.data_offset)
        return [np.memmap(files[j], dtype="<f8", mode="r") for j in wanted]

    def _pieces(self, mm: mmap.mmap) -> list[tuple[int, int]]:
        bounds = []
        a = self.data_offset
        while a < self.data_end:
            b = min(self.data_end, a + _PIECE_BYTES)
            if b < self.data_end:
                nl = mm.find(b"\n", b, self.data_end)
                b = self.data_end if nl < 0 else nl + 1
            bounds.append((a, b))
            a = b
        return bounds

    def _parse(
        self,
        wanted: Sequence[int],
        folder: pathlib.Path | None,
        progress: Callable[[int, int], None] | None,
    ) -> list[np.ndarray]:
        arrow = _import_pyarrow_csv()
        total = self.data_end - self.data_offset
        parts: list[list[np.ndarray]] = [[] for _ in wanted]
        sinks = []
        arrow_file = None
        tag = f".{os.getpid()}.part"
        try:
            if folder is not None:
                sinks = [open(folder / f"f{j}.f64{tag}", "wb") for j in wanted]  # noqa: SIM115
            row = 0
            arrow_file = None if arrow is None else arrow[0].memory_map(str(self.path), "r")
            with (
                open(self.path, "rb") as fh,
                mmap.mmap(fh.fileno(), 0, access=mmap.ACCESS_READ) as mm,
            ):
                for a, b in self._pieces(mm):
                    cols = None
                    if arrow_file is not None:
                        arrow_file.seek(a)  # a zero-copy slice of pyarrow's memory map
                        buf = arrow_file.read_buffer(b - a)
                        cols = _arrow_piece(arrow, buf, self.n_fields, wanted, self.delimiter)
                        del buf
                    if cols is None:
                        raw = mm[a:b]
                        cols = _numpy_piece(raw, self.n_fields, wanted, self.delimiter)
                        if cols is None:
                            cols = self._python_piece(raw, row, wanted)
                    row += len(cols[0])
                    for k, c in enumerate(cols):
                        if sinks:
                            sinks[k].write(np.ascontiguousarray(c, dtype="<f8").tobytes())
                        else:
                            parts[k].append(c)
                    if progress is not None:
                        progress(b - self.data_offset, total)
            for s in sinks:
                s.close()
            if folder is not None:
                for j in wanted:
                    os.replace(folder / f"f{j}.f64{tag}", folder / f"f{j}.f64")
                return []
        finally:
            if arrow_file is not None:
                arrow_file.close()
            for s in sinks:
                s.close()
            if folder is not None:
                for j in wanted:
                    with contextlib.suppress(FileNotFoundError):
                        os.unlink(folder / f"f{j}.f64{tag}")
        return [np.concatenate(p) if len(p) > 1 else p[0] for p in parts]

    def _python_piece(self, raw: bytes, row0: int, wanted: Sequence[int]) -> list[np.ndarray]:
        """The reference reader: csv-module rules, :func:`_number` per field, exact errors."""
        line0 = self.first_line + row0
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError as exc:
            line = line0 + raw[: exc.start].count(b"\n")
            raise RecordingError(
                "cannot decode the line as UTF-8 text",
                "a UTF-8 (or ASCII) text file",
                source=self.src,
                field=f"line {line}",
            ) from None
        lines = text.split("\n")
        if lines and lines[-1] == "":
            lines.pop()
        out = np.empty((len(wanted), len(lines)))
        nf = self.n_fields
        for r, line in enumerate(lines):
            if line.endswith("\r"):
                line = line[:-1]
            if not line.strip():
                out[:, r] = math.nan  # a blank line is a row of missing samples
                continue
            fields = _split(line, self.delimiter)
            if len(fields) != nf:
                raise RecordingError(
                    f"{len(fields)} fields",
                    f"{nf} fields separated by {_delim_name(self.delimiter)}, as in the header",
                    source=self.src,
                    field=f"line {line0 + r}",
                )
            for k, j in enumerate(wanted):
                try:
                    out[k, r] = _number(fields[j])
                except ValueError:
                    raise RecordingError(
                        f"column '{self.names[j]}' holds '{fields[j].strip()}', not a number",
                        "a decimal number such as -0.0123 (with '.' as the decimal mark)",
                        source=self.src,
                        field=f"line {line0 + r}",
                    ) from None
        return list(out)


def _arrow_piece(
    arrow: Any, buf: Any, n_fields: int, wanted: Sequence[int], delimiter: str
) -> list[np.ndarray] | None:
    """Parse one piece of CSV text with pyarrow; None when pyarrow refuses it."""
    pa, pacsv = arrow
    names = [f"f{i}" for i in range(n_fields)]
    keep = [names[j] for j in wanted]
    try:
        table = pacsv.read_csv(
            pa.BufferReader(buf),
            read_options=pacsv.ReadOptions(column_names=names, use_threads=True),
            parse_options=pacsv.ParseOptions(
                delimiter=delimiter, ignore_empty_lines=False, newlines_in_values=False
            ),
            convert_options=pacsv.ConvertOptions(
                column_types={n: pa.float64() for n in keep},
                include_columns=keep,
                null_values=[""],
                strings_can_be_null=False,
                quoted_strings_can_be_null=False,
            ),
        )
    except (pa.ArrowInvalid, pa.ArrowTypeError, pa.ArrowNotImplementedError):
        return None
    return [np.asarray(table.column(n).to_numpy(), dtype=np.float64) for n in keep]


def _numpy_piece(
    raw: bytes, n_fields: int, wanted: Sequence[int], delimiter: str
) -> list[np.ndarray] | None:
    """Parse one piece with numpy.loadtxt (the fallback without pyarrow); None when it refuses.

    Its number syntax is a subset of :func:`_number`'s with the same values; blank lines, which
    it would skip, are caught by the row count and left to the Python reader.
    """
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        return None
    n_lines = text.count("\n") + (0 if text.endswith("\n") else 1)
    try:
        arr = np.loadtxt(
            io.StringIO(text),
            delimiter=delimiter,
            dtype=np.float64,
            ndmin=2,
            comments=None,
            quotechar=None,
        )
    except ValueError:
        return None
    if arr.shape != (n_lines, n_fields):
        return None
    return [np.ascontiguousarray(arr[:, j]) for j in wanted]


def _split(line: str, delimiter: str) -> list[str]:
    if '"' in line:
        return next(csv.reader([line], delimiter=delimiter))
    return line.split(delimiter)


def _delim_name(d: str) -> str:
    return {"\t": "tabs", ",": "commas", ";": "semicolons"}.get(d, repr(d))


def _sniff(header: str, first: str) -> str:
    """The delimiter that splits the header and the first data row into the same count (> 1)."""
    counts = {d: (len(_split(header, d)), len(_split(first, d))) for d in ("\t", ",", ";")}
    for d, (nh, nd) in counts.items():
        if nh > 1 and nh == nd:
            return d
    best = max(counts, key=lambda d: counts[d][0])
    return best if counts[best][0] > 1 else ","


def _header_field(text: str) -> tuple[str, str | None]:
    """``'gyro_x [deg/s]'`` → ``('gyro_x', 'deg/s')``; ``'gyro_x'`` → ``('gyro_x', None)``."""
    s = text.strip()
    m = re.match(r"^(?P<name>.*?)\s*\[(?P<unit>[^\[\]]*)\]\s*$", s)
    if m is None:
        return s, None
    unit = m.group("unit").strip()
    return m.group("name").strip(), (None if _no_unit(unit) else unit)


class _NpySource(_Source):
    fmt = "npy"

    def __init__(self, path: pathlib.Path, src: str) -> None:
        super().__init__(path, src)
        try:
            arr = np.load(path, mmap_mode="r", allow_pickle=False)
        except (ValueError, OSError, EOFError) as exc:
            raise RecordingError(
                f"not a readable .npy file ({exc})", "an array saved with numpy.save", source=src
            ) from None
        if arr.ndim not in (1, 2) or arr.dtype.kind not in "fiub" or arr.size == 0:
            raise RecordingError(
                f"holds a {arr.ndim}-D {arr.dtype} array of shape {arr.shape}",
                "a non-empty numeric 1-D array (one channel) or 2-D array (samples × columns)",
                source=src,
            )
        self.arr = arr
        ncols = 1 if arr.ndim == 1 else arr.shape[1]
        self.names = [f"ch{i}" for i in range(ncols)]
        self.units = [None] * ncols
        sidecar = path.with_name(path.name + ".json")
        if sidecar.is_file():
            try:
                meta = json.loads(sidecar.read_text(encoding="utf-8"))
            except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
                raise RecordingError(
                    f"cannot read the sidecar ({exc})", "a JSON file", source=str(sidecar)
                ) from None
            cols = self._meta(meta, sidecar.name)
            if cols:
                if len(cols) != ncols:
                    raise RecordingError(
                        f"the sidecar lists {len(cols)} columns but the array has {ncols}",
                        "one entry per array column",
                        source=str(sidecar),
                    )
                self.names = [c["name"] for c in cols]
                self.units = [None if _no_unit(c.get("unit")) else c["unit"] for c in cols]

    def load(
        self, wanted: Sequence[int], *, cache: Any, progress: Callable[[int, int], None] | None
    ) -> list[np.ndarray]:
        out = [self.arr if self.arr.ndim == 1 else self.arr[:, j] for j in wanted]
        if progress is not None:
            progress(1, 1)
        return out


class _NpzSource(_Source):
    fmt = "npz"

    def __init__(self, path: pathlib.Path, src: str) -> None:
        super().__init__(path, src)
        self.arrays: dict[str, tuple[tuple[int, ...], np.dtype, int | None]] = {}
        try:
            with zipfile.ZipFile(path) as zf:
                for info in zf.infolist():
                    if not info.filename.endswith(".npy"):
                        continue
                    with zf.open(info) as fh:
                        version = np.lib.format.read_magic(fh)
                        if version == (1, 0):
                            shape, fortran, dtype = np.lib.format.read_array_header_1_0(fh)
                        else:
                            shape, fortran, dtype = np.lib.format.read_array_header_2_0(fh)
                        header_len = fh.tell() if hasattr(fh, "tell") else None
                    offset = None
                    if info.compress_type == zipfile.ZIP_STORED and not fortran and header_len:
                        offset = _zip_data_offset(path, info) + header_len
                    self.arrays[info.filename[:-4]] = (shape, dtype, offset)
        except (zipfile.BadZipFile, ValueError, OSError, EOFError) as exc:
            raise RecordingError(
                f"not a readable .npz file ({exc})", "arrays saved with numpy.savez", source=src
            ) from None
        cols = []
        if "_sensormodel" in self.arrays:
            with np.load(path, allow_pickle=False) as z:
                try:
                    meta = json.loads(str(z["_sensormodel"][()]))
                except (ValueError, json.JSONDecodeError) as exc:
                    raise RecordingError(
                        f"the _sensormodel entry is not JSON ({exc})",
                        "the metadata written by sensormodel",
                        source=src,
                    ) from None
            cols = self._meta(meta, "_sensormodel")
        declared_units = {c["name"]: c.get("unit") for c in cols}
        for name, (shape, dtype, _) in self.arrays.items():
            if name == "_sensormodel":
                continue
            if len(shape) == 0 and name.lower() in ("rate", "fs") and dtype.kind in "fiu":
                with np.load(path, allow_pickle=False) as z:
                    file_rate = _check_rate(float(z[name]), source=src, field=name)
                if self.rate is not None and not _agree(self.rate, file_rate):
                    raise RecordingError(
                        f"the '{name}' array ({_fmt(file_rate)} Hz) and _sensormodel.rate "
                        f"({_fmt(self.rate)} Hz) disagree",
                        "one rate",
                        source=src,
                    )
                self.rate = file_rate
            elif len(shape) == 1 and dtype.kind in "fiub":
                self.names.append(name)
                u = declared_units.get(name)
                self.units.append(None if _no_unit(u) else u)

    def load(
        self, wanted: Sequence[int], *, cache: Any, progress: Callable[[int, int], None] | None
    ) -> list[np.ndarray]:
        out = []
        with np.load(self.path, allow_pickle=False) as z:
            for j in wanted:
                name = self.names[j]
                shape, dtype, offset = self.arrays[name]
                if offset is not None:
                    out.append(
                        np.memmap(self.path, dtype=dtype, mode="r", offset=offset, shape=shape)
                    )
                else:
                    out.append(z[name])
        _equal_lengths(out, [self.names[j] for j in wanted], self.src)
        if progress is not None:
            progress(1, 1)
        return out


def _zip_data_offset(path: pathlib.Path, info: zipfile.ZipInfo) -> int:
    """Offset of a stored zip member's data (after its local header)."""
    with open(path, "rb") as fh:
        fh.seek(info.header_offset)
        local = fh.read(30)
    sig, name_len, extra_len = local[:4], *struct.unpack("<HH", local[26:30])
    if sig != b"PK\x03\x04":
        raise zipfile.BadZipFile("bad local header")
    return info.header_offset + 30 + name_len + extra_len


class _Hdf5Source(_Source):
    fmt = "hdf5"

    def __init__(self, path: pathlib.Path, src: str) -> None:
        super().__init__(path, src)
        h5py = _import_h5py(src)
        self.paths: list[str] = []
        rates: dict[str, float] = {}
        order: list[str] = []
        try:
            with h5py.File(path, "r") as f:
                if f.attrs.get("schema") is not None and _attr_text(f.attrs["schema"]) == _SCHEMA:
                    if "increments" in f.attrs:
                        self.increments = bool(f.attrs["increments"])
                    if "start_time" in f.attrs:
                        self.start_time = float(f.attrs["start_time"])
                    if "columns" in f.attrs:
                        with contextlib.suppress(ValueError, TypeError):
                            order = list(json.loads(_attr_text(f.attrs["columns"])))
                if "rate" in f.attrs:
                    rates["the file's rate attribute"] = float(f.attrs["rate"])
                found: list[tuple[str, Any]] = []
                f.visititems(
                    lambda name, obj: (
                        found.append((name, obj)) if isinstance(obj, h5py.Dataset) else None
                    )
                )
                for name, ds in found:
                    base = name.rsplit("/", 1)[-1]
                    if ds.ndim == 0 and base.lower() in ("rate", "fs") and ds.dtype.kind in "fiu":
                        rates[f"dataset '{name}'"] = float(ds[()])
                        continue
                    if ds.ndim != 1 or ds.dtype.kind not in "fiub":
                        continue
                    self.paths.append(name)
                    self.names.append(base)
                    u = ds.attrs.get("unit", ds.attrs.get("units"))
                    u = None if u is None else _attr_text(u)
                    self.units.append(None if _no_unit(u) else u)
                    if "rate" in ds.attrs:
                        rates[f"dataset '{name}'"] = float(ds.attrs["rate"])
        except OSError as exc:
            raise RecordingError(
                f"not a readable HDF5 file ({exc})", "an HDF5 file", source=src
            ) from None
        if order:  # the writer's column order (HDF5 lists datasets by name)
            rank = {name: k for k, name in enumerate(order)}
            idx = sorted(range(len(self.paths)), key=lambda k: rank.get(self.paths[k], len(rank)))
            self.paths = [self.paths[k] for k in idx]
            self.names = [self.names[k] for k in idx]
            self.units = [self.units[k] for k in idx]
        if len(set(self.names)) != len(self.names):
            self.names = list(self.paths)  # nested groups with repeated names: use full paths
        for where, r in rates.items():
            r = _check_rate(r, source=src, field=where)
            if self.rate is not None and not _agree(self.rate, r):
                raise RecordingError(
                    f"{where} gives {_fmt(r)} Hz but another gives {_fmt(self.rate)} Hz",
                    "one rate",
                    source=src,
                )
            self.rate = r

    def load(
        self, wanted: Sequence[int], *, cache: Any, progress: Callable[[int, int], None] | None
    ) -> list[np.ndarray]:
        import h5py

        out = []
        with h5py.File(self.path, "r") as f:
            for j in wanted:
                ds = f[self.paths[j]]
                offset = ds.id.get_offset()
                if (
                    offset is not None
                    and ds.chunks is None
                    and ds.compression is None
                    and ds.dtype.isnative
                ):
                    out.append(
                        np.memmap(
                            self.path, dtype=ds.dtype, mode="r", offset=offset, shape=ds.shape
                        )
                    )
                else:
                    out.append(ds[()])
        _equal_lengths(out, [self.names[j] for j in wanted], self.src)
        if progress is not None:
            progress(1, 1)
        return out


def _attr_text(v: Any) -> str:
    if isinstance(v, bytes):
        return v.decode("utf-8")
    return str(v)


def _equal_lengths(arrays: Sequence[np.ndarray], names: Sequence[str], src: str) -> None:
    if not arrays:
        return
    n0 = len(arrays[0])
    for a, name in zip(arrays, names, strict=True):
        if len(a) != n0:
            raise RecordingError(
                f"'{name}' has {len(a)} samples but '{names[0]}' has {n0}",
                "arrays of equal length, one sample per row",
                source=src,
            )


def _check_rate(rate: Any, *, source: str | None, field: str | None) -> float:
    try:
        r = float(rate)
    except (TypeError, ValueError):
        r = math.nan
    if not (math.isfinite(r) and r > 0):
        raise RecordingError(
            f"rate {rate!r}", "a positive sample rate in Hz", source=source, field=field
        )
    return r


def _agree(a: float, b: float) -> bool:
    return abs(a - b) <= RATE_RTOL * max(abs(a), abs(b))


def _open_source(path: pathlib.Path, src: str) -> _Source:
    fmt = SUFFIXES.get(path.suffix.lower())
    if fmt is None:
        raise RecordingError(f"unknown recording format '{path.suffix}'", _FORMATS_TEXT, source=src)
    if not path.exists():
        raise RecordingError("no such file", f"an existing recording ({_FORMATS_TEXT})", source=src)
    if path.is_dir():
        raise RecordingError("is a folder", f"a recording file ({_FORMATS_TEXT})", source=src)
    cls = {"csv": _TextSource, "npy": _NpySource, "npz": _NpzSource, "hdf5": _Hdf5Source}[fmt]
    return cls(path, src)


# ---------------------------------------------------------------------------------------------
# Column selection, channel mapping and units
# ---------------------------------------------------------------------------------------------


def _find_column(key: str, names: Sequence[str], what: str, src: str) -> int:
    """Index of the column called ``key`` (exact, else case-insensitive, else channel rule)."""
    if key in names:
        if names.count(key) > 1:
            raise RecordingError(
                f"the column name '{key}' appears {names.count(key)} times",
                "unique column names",
                source=src,
            )
        return names.index(key)
    low = [n.lower() for n in names]
    if low.count(key.lower()) == 1:
        return low.index(key.lower())
    cid = channel_id_for(key)
    if cid is not None:
        hits = [i for i, n in enumerate(names) if channel_id_for(n) == cid]
        if len(hits) == 1:
            return hits[0]
    raise RecordingError(
        f"unknown column '{key}' in {what}",
        "one of the columns " + ", ".join(f"'{n}'" for n in names),
        source=src,
    )


def _select(
    names: Sequence[str],
    time_idx: int | None,
    columns: str | Sequence[str] | None,
    mapped: Sequence[int],
    src: str,
) -> list[int]:
    data_idx = [i for i in range(len(names)) if i != time_idx]
    if columns is None:
        return data_idx
    patterns = (
        [p.strip() for p in columns.split(",")] if isinstance(columns, str) else list(columns)
    )
    chosen: set[int] = set(mapped)
    for pat in patterns:
        hits = [
            i
            for i in data_idx
            if fnmatch.fnmatchcase(names[i].lower(), pat.lower())
            or fnmatch.fnmatchcase(
                names[i].lower().replace("_", "."), pat.lower().replace("_", ".")
            )
        ]
        if not hits:
            raise RecordingError(
                f"no column matches '{pat}' in --columns",
                "a name or glob matching one of the columns "
                + ", ".join(f"'{names[i]}'" for i in data_idx),
                source=src,
            )
        chosen.update(hits)
    return sorted(chosen)


@dataclass
class _ColumnPlan:
    index: int
    name: str
    channel: str
    unit: str | None
    quantity: str  # kind in file, or "as_recorded"
    factor: float  # file value × factor = SI (of the file's quantity)
    per_sample: bool  # increments: divide by the sample period


def _plan_column(
    index: int,
    name: str,
    channel: str,
    unit: str | None,
    increments: bool,
    src: str,
) -> _ColumnPlan:
    field = f"column '{name}'"
    instrument = channel.split(".", 1)[0] if channel in CHANNEL_IDS else None
    if _no_unit(unit):
        return _ColumnPlan(index, name, channel, None, "as_recorded", 1.0, increments)
    assert unit is not None
    if instrument is not None:
        rate_kind = _INSTRUMENT_KIND[instrument]
        kind = _INCREMENT_OF[rate_kind] if increments else rate_kind
        try:
            factor = parse_unit_factor(unit, kind, field=field, source=src)
        except UnitError as exc:
            other = rate_kind if increments else _INCREMENT_OF[rate_kind]
            expected = f"{_KIND_WHAT[kind]} for channel {channel}"
            with contextlib.suppress(UnitError):
                parse_unit_factor(unit, other)
                expected += (
                    " (leave out --increments if the samples are rates)"
                    if increments
                    else " (or --increments if the samples are increments per sample)"
                )
            raise RecordingError(exc.problem, expected, source=src, field=field) from None
        return _ColumnPlan(index, name, channel, unit, kind, factor, increments)
    for kind in _INFER_KINDS:
        try:
            factor = parse_unit_factor(unit, kind)
        except UnitError:
            continue
        per_sample = increments and kind in _RATE_OF
        return _ColumnPlan(index, name, channel, unit, kind, factor, per_sample)
    return _ColumnPlan(index, name, channel, unit, "as_recorded", 1.0, False)


def _column_units(
    names: Sequence[str],
    header_units: Sequence[str | None],
    unit: str | Mapping[str, str] | None,
    time_idx: int | None,
    src: str,
) -> tuple[list[str | None], list[Finding]]:
    units = list(header_units)
    notes: list[Finding] = []
    if unit is None:
        return units, notes
    if isinstance(unit, str):
        for i in range(len(names)):
            if i != time_idx and _no_unit(units[i]):
                units[i] = unit
        return units, notes
    for key, u in unit.items():
        i = _find_column(key, names, "--unit", src)
        if not _no_unit(units[i]) and units[i] != u:
            notes.append(
                Finding(
                    "note",
                    names[i],
                    0,
                    f"column '{names[i]}' says [{units[i]}] in the file; read as [{u}] as asked",
                )
            )
        units[i] = u
    return units, notes


# ---------------------------------------------------------------------------------------------
# Time base and data checks
# ---------------------------------------------------------------------------------------------


def _emit(
    findings: list[Finding],
    kind: str,
    channel: str,
    runs: tuple[np.ndarray, np.ndarray],
    text: Callable[[int, int], str],
    where: Callable[[int, int], str],
    *,
    offset: int = 0,
) -> None:
    """One Finding per run (start + offset, length); past ``_MAX_FINDINGS`` runs, one more
    Finding stands for all the rest (its ``count``)."""
    starts, lengths = runs
    for s0, ln0 in zip(starts[:_MAX_FINDINGS], lengths[:_MAX_FINDINGS], strict=True):
        s, ln = int(s0) + offset, int(ln0)
        findings.append(Finding(kind, channel, s, text(s, ln), ln, where(s, ln)))
    rest = len(starts) - _MAX_FINDINGS
    if rest > 0:
        s, ln = int(starts[_MAX_FINDINGS]) + offset, int(lengths[_MAX_FINDINGS])
        findings.append(
            Finding(
                kind,
                channel,
                s,
                f"{text(s, ln)}, and {rest - 1} more such stretches after it",
                ln,
                where(s, ln),
                count=rest,
            )
        )


def _mask(n: int, starts: np.ndarray, lengths: np.ndarray) -> np.ndarray:
    """Boolean mask of n samples, True inside the runs."""
    d = np.zeros(n + 1, dtype=np.int64)
    np.add.at(d, starts, 1)
    np.add.at(d, starts + lengths, -1)
    return np.cumsum(d[:-1]) > 0


def _time_base(
    t: np.ndarray, where: Callable[[int, int], str]
) -> tuple[list[Finding], float | None, np.ndarray]:
    """Findings of the time column, the rate from its regular steps, and the break mask
    (True where a sample does not follow its predecessor by a regular step)."""
    n = len(t)
    findings: list[Finding] = []
    fin = np.isfinite(t)
    _emit(
        findings,
        "non_finite",
        "time",
        _runs(~fin),
        lambda s, ln: "the time column holds NaN, an empty field or an infinite value",
        where,
    )
    brk = np.zeros(n, dtype=bool)
    dt = np.diff(t)
    okdt = np.isfinite(dt)
    pos = okdt & (dt > 0)
    if not pos.any():
        return findings, None, brk
    med = float(np.median(dt[pos]))
    back = okdt & (dt < 0)
    dup = okdt & (dt == 0)
    gap = okdt & (dt > GAP_FACTOR * med)

    def backwards(i: int, ln: int) -> str:
        text = f"time goes backwards, from {_fmt(t[i - 1])} s to {_fmt(t[i])} s"
        return text + (f" (in {ln} consecutive steps)" if ln > 1 else "")

    def repeated(i: int, ln: int) -> str:
        text = f"time {_fmt(t[i])} s repeats the previous sample's"
        return text + (f" ({ln + 1} samples share it)" if ln > 1 else "")

    def gapped(i: int, ln: int) -> str:
        if ln > 1:
            return f"{ln} time steps longer than {GAP_FACTOR} × the median {_fmt(med)} s"
        step = float(dt[i - 1])
        missing = max(1, round(step / med) - 1)
        return (
            f"time step of {_fmt(step)} s where the median step is {_fmt(med)} s "
            f"(about {missing} samples missing)"
        )

    _emit(findings, "non_monotonic", "time", _runs(back), backwards, where, offset=1)
    _emit(findings, "duplicate_time", "time", _runs(dup), repeated, where, offset=1)
    _emit(findings, "gap", "time", _runs(gap), gapped, where, offset=1)
    bad_step = back | dup | gap
    brk[1:] = bad_step
    good = pos & ~gap
    if fin.all() and not bad_step.any():
        rate = (n - 1) / float(t[-1] - t[0])
    else:
        rate = int(good.sum()) / float(dt[good].sum())
    return findings, rate, brk


def _data_findings(
    x: np.ndarray,
    name: str,
    channel: str,
    where: Callable[[int, int], str],
    *,
    constant_run: int,
    saturation_run: int,
) -> tuple[list[Finding], np.ndarray]:
    """Findings of one data column and the mask of its flagged samples."""
    findings: list[Finding] = []
    fin = np.isfinite(x)
    bad = ~fin
    if not fin.all():
        inf = np.isinf(x)

        def missing(s: int, ln: int) -> str:
            what = "an infinite value" if inf[s : s + ln].all() else "NaN or an empty field"
            return f"column '{name}' holds {what}" + (
                f" in {ln} consecutive samples" if ln > 1 else ""
            )

        _emit(findings, "non_finite", channel, _runs(~fin), missing, where)
    if not fin.any() or len(x) < 2:
        return findings, bad
    hi = float(np.max(x, where=fin, initial=-np.inf))
    lo = float(np.min(x, where=fin, initial=np.inf))
    saturated_starts: list[np.ndarray] = []
    if saturation_run > 0 and hi > lo:
        for value, label in ((hi, "maximum"), (lo, "minimum")):
            starts, lengths = _runs(x == value)
            keep = lengths >= saturation_run
            starts, lengths = starts[keep], lengths[keep]
            if len(starts):
                saturated_starts.append(starts)
                bad = bad | _mask(len(x), starts, lengths)

                def at_limit(s: int, ln: int, label: str = label, value: float = value) -> str:
                    return (
                        f"column '{name}' stays at its {label} {_fmt(value)} for {ln} "
                        "consecutive samples (saturation)"
                    )

                _emit(findings, "saturated", channel, (starts, lengths), at_limit, where)
    if constant_run > 1:
        starts, lengths = _runs(x[1:] == x[:-1])
        lengths = lengths + 1
        keep = lengths >= constant_run
        if saturated_starts:
            keep &= ~np.isin(starts, np.concatenate(saturated_starts))
        starts, lengths = starts[keep], lengths[keep]
        if len(starts):
            bad = bad | _mask(len(x), starts, lengths)

            def stuck(s: int, ln: int) -> str:
                return (
                    f"column '{name}' holds the same value {_fmt(float(x[s]))} for {ln} "
                    "consecutive samples (a stuck sensor?)"
                )

            _emit(findings, "constant", channel, (starts, lengths), stuck, where)
    return findings, bad


def _segments(
    n: int,
    bad: np.ndarray,
    brk: np.ndarray,
    start_of: Callable[[int], float],
    min_segment: int,
) -> tuple[list[Segment], int]:
    """Clean segments (no bad sample, no break inside) of at least ``min_segment`` samples."""
    good = ~bad
    new = good.copy()
    new[1:] &= ~good[:-1] | brk[1:]
    starts = np.flatnonzero(new)
    bad_idx = np.flatnonzero(bad)
    nxt_start = np.append(starts[1:], n)
    j = np.searchsorted(bad_idx, starts)
    nxt_bad = np.append(bad_idx, n)[j]
    ends = np.minimum(nxt_start, nxt_bad)
    keep = ends - starts >= min_segment
    segs = [
        Segment(int(a), int(b), start_of(int(a)))
        for a, b in zip(starts[keep], ends[keep], strict=True)
    ]
    dropped = int((~keep).sum())
    return segs, dropped


# ---------------------------------------------------------------------------------------------
# The reader
# ---------------------------------------------------------------------------------------------


def read_recording(
    path: str | os.PathLike[str],
    *,
    rate: float | None = None,
    unit: str | Mapping[str, str] | None = None,
    increments: bool | None = None,
    columns: str | Sequence[str] | None = None,
    channel_map: Mapping[str, str] | None = None,
    gaps: str = "fail",
    progress: Callable[[int, int], None] | None = None,
    cache: bool | str | os.PathLike[str] | None = None,
    constant_run: int = 1000,
    saturation_run: int = 16,
    min_segment: int = 100,
) -> Recording:
    """Read a recording file into SI arrays, check its time base and report its problems.

    Parameters
    ----------
    path : path-like
        A ``.csv``, ``.tsv``, ``.txt``, ``.npy``, ``.npz``, ``.h5`` or ``.hdf5`` file (module
        docstring: formats).
    rate : float, optional
        Sample rate [Hz]. Needed when the file has neither a time column nor a stated rate; when
        it has, the two must agree within a relative 1e-6.
    unit : str or mapping, optional
        One unit for every column that has none in the file (``"deg/s"``), or a unit per
        column name (``{"gyro_x": "mdps", "time": "ms"}``), which overrides the file's (noted).
    increments : bool, optional
        Samples are increments per sample period (angle, velocity); they are returned as mean
        rates over the period. Default: as the file states, else False.
    columns : str or sequence of str, optional
        Column names or globs (``"gyro*"``, comma-separated in one string) to read; default all
        but the time column. Columns named in ``channel_map`` are always read.
    channel_map : mapping, optional
        ``{"COLUMN": "gyro.x"}``: the channel id of columns whose name is not one.
    gaps : {"fail", "split"}
        ``"fail"``: raise on the first problem; ``"split"``: return the clean segments.
    progress : callable, optional
        Called as ``progress(done, total)`` while a CSV file is parsed (bytes).
    cache : bool or path-like, optional
        CSV binary cache: None caches files of at least :data:`CACHE_MIN_BYTES` in
        :func:`cache_folder`; True caches any size; False never; a folder caches there.
    constant_run : int
        This many identical consecutive samples are a ``constant`` finding (0: no check).
    saturation_run : int
        This many consecutive samples at a column's maximum or minimum are ``saturated``
        (0: no check).
    min_segment : int
        With ``gaps="split"``, clean stretches shorter than this (≥ 2) are dropped (and
        reported).

    Returns
    -------
    Recording
        Channels, SI data (rad/s, m/s², rad, m/s, or as recorded), units, rate [Hz], start time
        [s], findings and segments.

    Raises
    ------
    RecordingError
        A file that cannot be read as a uniformly sampled record, naming the file and the line
        (text) or index (binary), what was found and what was expected.
    """
    p = pathlib.Path(path)
    src = str(path)
    if gaps not in ("fail", "split"):
        raise RecordingError(f"gaps={gaps!r}", "'fail' or 'split'", field="gaps")
    if isinstance(min_segment, bool) or int(min_segment) != min_segment or min_segment < 2:
        raise RecordingError(
            f"min_segment={min_segment!r}", "a whole number ≥ 2", field="min_segment"
        )
    min_segment = int(min_segment)
    if rate is not None:
        rate = _check_rate(rate, source=None, field="--rate")
    source = _open_source(p, src)
    names = source.names

    # time column
    time_hits = [
        i for i, n in enumerate(names) if n.rsplit("/", 1)[-1].lower() in TIME_COLUMN_NAMES
    ]
    if len(time_hits) > 1:
        raise RecordingError(
            "several time columns: " + ", ".join(f"'{names[i]}'" for i in time_hits),
            "one column named time, t or timestamp",
            source=src,
        )
    time_idx = time_hits[0] if time_hits else None

    # channel mapping
    mapping: dict[int, str] = {}
    for col, cid in (channel_map or {}).items():
        i = _find_column(col, names, "--channel", src)
        target = channel_id_for(cid)
        if target is None:
            raise RecordingError(
                f"'{cid}' in --channel {col}={cid} is not a channel id",
                "one of " + ", ".join(CHANNEL_IDS),
                source=src,
            )
        if i == time_idx:
            raise RecordingError(
                f"--channel maps the time column '{names[i]}'",
                "a data column",
                source=src,
            )
        mapping[i] = target
    selected = _select(names, time_idx, columns, list(mapping), src)
    if not selected:
        raise RecordingError("no data columns", "at least one column besides time", source=src)

    # units and plans
    units, notes = _column_units(names, source.units, unit, time_idx, src)
    file_increments = source.increments
    if increments is None:
        increments = bool(file_increments)
    elif file_increments is not None and bool(increments) != file_increments:
        raise RecordingError(
            f"the file says its samples are {'increments' if file_increments else 'rates'}",
            f"{'--increments' if file_increments else 'no --increments'} as the file states",
            source=src,
        )
    plans: list[_ColumnPlan] = []
    seen: dict[str, str] = {}
    for i in selected:
        cid = mapping.get(i) or channel_id_for(names[i]) or names[i]
        if cid in seen:
            raise RecordingError(
                f"columns '{seen[cid]}' and '{names[i]}' both map to channel {cid}",
                "one column per channel (use --channel or --columns)",
                source=src,
            )
        seen[cid] = names[i]
        plans.append(_plan_column(i, names[i], cid, units[i], bool(increments), src))
    time_factor = 1.0
    if time_idx is not None:
        tu = units[time_idx]
        if _no_unit(tu):
            raise RecordingError(
                f"the time column '{names[time_idx]}' has no unit",
                f"a unit in the header such as '{names[time_idx]} [s]', or --unit "
                f"{names[time_idx]}=s",
                source=src,
            )
        assert tu is not None
        try:
            time_factor = parse_unit_factor(
                tu, "time", field=f"column '{names[time_idx]}'", source=src
            )
        except UnitError as exc:
            raise RecordingError(exc.problem, exc.expected, source=src, field=exc.field) from None

    # load
    wanted = [pl.index for pl in plans] + ([time_idx] if time_idx is not None else [])
    raw = source.load(wanted, cache=cache, progress=progress)
    n = len(raw[0])
    row_word = "data row" if source.text else "sample"
    if n < 2:
        raise RecordingError(
            f"only one {row_word}",
            f"at least 2 {row_word}s",
            source=src,
            field=source.where(0) if source.text else None,
        )

    # time base and rate
    findings: list[Finding] = list(notes)
    brk = np.zeros(n, dtype=bool)
    time_si: np.ndarray | None = None
    time_bad = np.zeros(n, dtype=bool)
    time_rate: float | None = None
    if time_idx is not None:
        traw = raw[-1]
        time_si = traw if traw.dtype == np.float64 else traw.astype(np.float64)
        if time_factor != 1.0:
            time_si = time_si * time_factor
        tf, time_rate, brk = _time_base(time_si, source.where)
        findings += tf
        time_bad = ~np.isfinite(time_si)
        if time_rate is None:
            raise RecordingError(
                f"the time column '{names[time_idx]}' never increases",
                "increasing time stamps",
                source=src,
            )
    final_rate = _resolve_rate(rate, source.rate, time_rate, names, time_idx, src)

    # data
    data: dict[str, np.ndarray] = {}
    unit_labels: dict[str, str] = {}
    quantities: dict[str, str] = {}
    bad_of: dict[str, np.ndarray] = {}
    for pl, x in zip(plans, raw, strict=False):
        found, bad_of[pl.channel] = _data_findings(
            x,
            pl.name,
            pl.channel,
            source.where,
            constant_run=constant_run,
            saturation_run=saturation_run,
        )
        findings += found
        factor = pl.factor * (final_rate if pl.per_sample else 1.0)
        if factor != 1.0:
            y = np.multiply(x, factor, dtype=np.float64)
        elif x.dtype != np.float64:
            y = x.astype(np.float64)
        else:
            y = x
        data[pl.channel] = _readonly(y)
        quantity = _RATE_OF.get(pl.quantity, pl.quantity) if pl.per_sample else pl.quantity
        quantities[pl.channel] = quantity
        if quantity in _SI_LABEL:
            unit_labels[pl.channel] = _SI_LABEL[quantity]
        elif pl.unit is None:
            unit_labels[pl.channel] = "1/s" if pl.per_sample else "1"
        else:
            unit_labels[pl.channel] = pl.unit
    findings.sort(key=lambda f: (f.position, _KIND_ORDER.get(f.kind, -1)))

    if time_si is not None and np.isfinite(time_si[0]):
        start_time = float(time_si[0])
    else:
        start_time = source.start_time or 0.0

    def start_of(i: int) -> float:
        if time_si is not None and np.isfinite(time_si[i]):
            return float(time_si[i])
        return start_time + i / final_rate

    # fail or split
    fatal = [f for f in findings if f.fatal]
    segments: dict[str, tuple[Segment, ...]] = {}
    if gaps == "fail":
        if fatal:
            first = fatal[0]
            n_more = sum(f.count for f in fatal) - 1
            more = f" (and {n_more} more problems)" if n_more else ""
            raise RecordingError(
                first.detail + more,
                _EXPECTED[first.kind],
                source=src,
                field=source.where(first.position),
            )
        for pl in plans:
            segments[pl.channel] = (Segment(0, n, start_time),)
    else:
        for pl in plans:
            bad = time_bad | bad_of[pl.channel]
            segs, dropped = _segments(n, bad, brk, start_of, min_segment)
            if dropped:
                findings.append(
                    Finding(
                        "short_segment",
                        pl.channel,
                        0,
                        f"{dropped} clean stretches of column '{pl.name}' shorter than "
                        f"{min_segment} samples left out",
                        0,
                    )
                )
            if not segs:
                raise RecordingError(
                    f"column '{pl.name}' has no clean stretch of at least {min_segment} samples",
                    "a recording with longer clean stretches",
                    source=src,
                )
            segments[pl.channel] = tuple(segs)

    channels = tuple(pl.channel for pl in plans)
    return Recording(
        source=src,
        format=source.fmt,
        channels=channels,
        data=MappingProxyType(data),
        units=MappingProxyType(unit_labels),
        quantities=MappingProxyType(quantities),
        columns=MappingProxyType({pl.channel: pl.name for pl in plans}),
        rate=final_rate,
        start_time=start_time,
        increments=bool(increments),
        findings=tuple(findings),
        segments=MappingProxyType(segments),
        time=None if time_si is None else _readonly(time_si),
    )


def _resolve_rate(
    option: float | None,
    declared: float | None,
    from_time: float | None,
    names: Sequence[str],
    time_idx: int | None,
    src: str,
) -> float:
    sources = []
    if from_time is not None:
        sources.append((f"the time column '{names[time_idx or 0]}'", from_time))
    if declared is not None:
        sources.append(("the file's stated rate", declared))
    if option is not None:
        sources.append(("--rate", option))
    if not sources:
        raise RecordingError(
            "no time column and no sample rate",
            "a column named time, t or timestamp, or --rate HZ",
            source=src,
        )
    (name0, r0) = sources[0]
    for name, r in sources[1:]:
        if not _agree(r0, r):
            raise RecordingError(
                f"{name0} gives {_fmt(r0)} Hz but {name} gives {_fmt(r)} Hz "
                f"(relative difference {abs(r - r0) / max(r, r0):.1e})",
                f"agreement within {RATE_RTOL:g}, or only one of them",
                source=src,
            )
    return option if option is not None else r0


# ---------------------------------------------------------------------------------------------
# Writers
# ---------------------------------------------------------------------------------------------


class RecordingWriter:
    """Stream SI samples into a recording file; atomic (nothing appears unless it succeeds).

    Use it as a context manager (from :func:`open_writer`): the file is renamed into place when
    the block ends normally; on an exception the temporary file is removed.

    Attributes
    ----------
    path : pathlib.Path
        The final file.
    format : str
        ``csv``, ``npy``, ``npz`` or ``hdf5``.
    channels : tuple of str
        Channel ids, one per block column.
    units : tuple of str
        Output unit per channel (``""`` for as recorded).
    rate : float
        Sample rate [Hz].
    n_written : int
        Samples written so far.
    """

    format = ""

    def __init__(
        self,
        path: str | os.PathLike[str],
        channels: Sequence[str],
        units: str | Sequence[str | None] | Mapping[str, str] | None,
        rate: float,
        *,
        increments: bool = False,
        force: bool = False,
        time_column: bool = True,
        start_time: float = 0.0,
        n_samples: int | None = None,
    ) -> None:
        self.path = pathlib.Path(path)
        src = str(path)
        chans = tuple(channels)
        if not chans or len(set(chans)) != len(chans) or not all(isinstance(c, str) for c in chans):
            raise RecordingError(
                f"channels {list(chans)!r}", "a non-empty list of distinct ids", source=src
            )
        if time_column and any(c.lower() in TIME_COLUMN_NAMES for c in chans):
            raise RecordingError(
                "a channel is named like the time column", "other channel ids", source=src
            )
        self.channels = chans
        self.rate = _check_rate(rate, source=src, field="rate")
        self.increments = bool(increments)
        self.time_column = bool(time_column)
        self.start_time = float(start_time)
        self.n_samples = n_samples
        self.force = force
        self.n_written = 0
        self._done = False
        labels, divisors = [], []
        for k, ch in enumerate(chans):
            u = _unit_for(units, ch, k, len(chans))
            label, d = _output_unit(ch, u, self.increments, self.rate, src)
            labels.append(label)
            divisors.append(d)
        self.units = tuple(labels)
        self._div = np.array(divisors)
        self._open()

    # -- format hooks --------------------------------------------------------------------------
    def _open(self) -> None:
        raise NotImplementedError

    def _write(self, t: np.ndarray | None, values: np.ndarray) -> None:
        raise NotImplementedError

    def _finish(self) -> None:
        raise NotImplementedError

    def _discard(self) -> None:
        raise NotImplementedError

    # -- public --------------------------------------------------------------------------------
    def _meta(self) -> dict[str, Any]:
        cols = [{"name": "time", "unit": "s"}] if self.time_column else []
        cols += [
            {"name": c, "unit": u or "1"} for c, u in zip(self.channels, self.units, strict=True)
        ]
        return {
            "schema": _SCHEMA,
            "rate": self.rate,
            "increments": self.increments,
            "start_time": self.start_time,
            "columns": cols,
        }

    def write(self, block: npt.ArrayLike) -> None:
        """Append samples.

        Parameters
        ----------
        block : array_like, shape (n, n_channels)
            SI samples (rad/s, m/s², or as recorded), one row per sample; a 1-D array for a
            single channel. With ``increments`` each value is the mean rate over its sample
            period and is written as the increment ``value / rate`` in the output unit.
        """
        if self._done:
            raise RecordingError(
                "write after close", "writes inside the with-block", source=str(self.path)
            )
        b = np.asarray(block, dtype=np.float64)
        if b.ndim == 1 and len(self.channels) == 1:
            b = b[:, None]
        if b.ndim != 2 or b.shape[1] != len(self.channels):
            raise RecordingError(
                f"a block of shape {b.shape}",
                f"shape (n, {len(self.channels)}), one column per channel",
                source=str(self.path),
            )
        if not np.isfinite(b).all():
            row = int(np.flatnonzero(~np.isfinite(b).all(axis=1))[0]) + self.n_written
            raise RecordingError(
                f"sample {row} is not finite", "finite samples", source=str(self.path)
            )
        k = len(b)
        if self.n_samples is not None and self.n_written + k > self.n_samples:
            raise RecordingError(
                f"{self.n_written + k} samples written",
                f"at most n_samples={self.n_samples}",
                source=str(self.path),
            )
        t = None
        if self.time_column:
            t = self.start_time + (self.n_written + np.arange(k)) / self.rate
        self._write(t, b / self._div)
        self.n_written += k

    def close(self) -> None:
        """Finish the file and rename it into place."""
        if self._done:
            return
        if self.n_samples is not None and self.n_written != self.n_samples:
            self.abort()
            raise RecordingError(
                f"{self.n_written} samples written",
                f"n_samples={self.n_samples}; no file was written",
                source=str(self.path),
            )
        self._done = True
        self._finish()

    def abort(self) -> None:
        """Remove the temporary file; nothing is written."""
        if not self._done:
            self._done = True
            self._discard()

    def __enter__(self) -> RecordingWriter:
        return self

    def __exit__(self, exc_type: Any, exc: Any, tb: Any) -> None:
        if exc_type is not None:
            self.abort()
        else:
            self.close()


def _unit_for(
    units: str | Sequence[str | None] | Mapping[str, str] | None, ch: str, k: int, n: int
) -> str | None:
    if units is None or isinstance(units, str):
        return units
    if isinstance(units, Mapping):
        return units.get(ch)
    seq = list(units)
    if len(seq) != n:
        raise RecordingError(f"{len(seq)} units for {n} channels", "one unit per channel")
    return seq[k]


def _output_unit(
    ch: str, unit: str | None, increments: bool, rate: float, src: str
) -> tuple[str, float]:
    """(unit label, divisor): file value = SI sample / divisor, for one output channel."""
    per_sample = rate if increments else 1.0
    cid = channel_id_for(ch)
    if cid is not None:
        kind = _INSTRUMENT_KIND[cid.split(".", 1)[0]]
        kind = _INCREMENT_OF[kind] if increments else kind
        label = unit or _SI_LABEL[kind]
        return label, per_sample * parse_unit_factor(label, kind, field=f"unit of {ch}", source=src)
    if _no_unit(unit):
        return "", per_sample
    assert unit is not None
    for kind in _INFER_KINDS:
        with contextlib.suppress(UnitError):
            f = parse_unit_factor(unit, kind)
            return unit, (per_sample if kind in _RATE_OF else 1.0) * f
    return unit, 1.0


class _CsvWriter(RecordingWriter):
    format = "csv"

    def _open(self) -> None:
        self._delim = "\t" if self.path.suffix.lower() == ".tsv" else ","
        self._cm = atomic_writer(self.path, force=self.force, binary=True)
        self._fh = self._cm.__enter__()
        lines = []
        if self.increments:
            lines.append("# sensormodel increments = true")
        if not self.time_column:
            lines.append(f"# sensormodel rate = {self.rate!r} Hz")
            if self.start_time:
                lines.append(f"# sensormodel start_time = {self.start_time!r} s")
        head = ["time [s]"] if self.time_column else []
        head += [f"{c} [{u}]" if u else c for c, u in zip(self.channels, self.units, strict=True)]
        lines.append(self._delim.join(head))
        self._fh.write(("\n".join(lines) + "\n").encode("utf-8"))
        self._arrow = _import_pyarrow_csv()

    def _write(self, t: np.ndarray | None, values: np.ndarray) -> None:
        cols = ([t] if t is not None else []) + list(values.T)
        if self._arrow is not None:
            pa, pacsv = self._arrow
            table = pa.table({f"c{i}": np.ascontiguousarray(c) for i, c in enumerate(cols)})
            pacsv.write_csv(
                table,
                self._fh,
                write_options=pacsv.WriteOptions(include_header=False, delimiter=self._delim),
            )
        else:
            np.savetxt(self._fh, np.column_stack(cols), fmt="%.17g", delimiter=self._delim)

    def _finish(self) -> None:
        self._cm.__exit__(None, None, None)

    def _discard(self) -> None:
        err = RecordingError("aborted")
        with contextlib.suppress(RecordingError):
            self._cm.__exit__(RecordingError, err, None)


def _npy_header(shape: tuple[int, ...]) -> bytes:
    """A version-1.0 ``.npy`` header of fixed length (128 bytes) for float64 C-order data."""
    d = "{'descr': '<f8', 'fortran_order': False, 'shape': " + repr(shape) + ", }"
    body = d.ljust(128 - 10 - 1) + "\n"
    return b"\x93NUMPY\x01\x00" + struct.pack("<H", len(body)) + body.encode("latin1")


class _NpyStream:
    """Write a float64 ``.npy`` file row block by row block; the shape is fixed at close."""

    def __init__(self, path: pathlib.Path, ncols: int | None) -> None:
        self.fh = open(path, "wb")  # noqa: SIM115
        self.ncols = ncols
        self.rows = 0
        self.fh.write(_npy_header((0,) if ncols is None else (0, ncols)))

    def write(self, block: np.ndarray) -> None:
        self.fh.write(np.ascontiguousarray(block, dtype="<f8").tobytes())
        self.rows += len(block)

    def close(self) -> None:
        shape = (self.rows,) if self.ncols is None else (self.rows, self.ncols)
        self.fh.seek(0)
        self.fh.write(_npy_header(shape))
        self.fh.close()


class _NpyWriter(RecordingWriter):
    format = "npy"

    def _open(self) -> None:
        self._sidecar = self.path.with_name(self.path.name + ".json")
        check_writable(self._sidecar, force=self.force)
        self._cm = atomic_path(self.path, force=self.force)
        self._tmp = self._cm.__enter__()
        ncols = len(self.channels) + (1 if self.time_column else 0)
        self._mm = None
        self._stream = None
        if self.n_samples is not None:
            self._mm = np.lib.format.open_memmap(
                self._tmp, mode="w+", dtype="<f8", shape=(self.n_samples, ncols)
            )
        else:
            self._stream = _NpyStream(self._tmp, ncols)

    def _write(self, t: np.ndarray | None, values: np.ndarray) -> None:
        block = values if t is None else np.column_stack([t, values])
        if self._mm is not None:
            self._mm[self.n_written : self.n_written + len(block)] = block
        else:
            assert self._stream is not None
            self._stream.write(block)

    def _finish(self) -> None:
        try:
            if self._mm is not None:
                self._mm.flush()
                del self._mm
                self._mm = None
            else:
                assert self._stream is not None
                self._stream.close()
            with atomic_writer(self._sidecar, force=self.force) as fh:
                json.dump(self._meta(), fh, indent=2)
                fh.write("\n")
        except BaseException as exc:
            self._cm.__exit__(type(exc), exc, None)
            raise
        self._cm.__exit__(None, None, None)

    def _discard(self) -> None:
        if self._stream is not None:
            self._stream.fh.close()
        self._mm = None
        err = RecordingError("aborted")
        with contextlib.suppress(RecordingError):
            self._cm.__exit__(RecordingError, err, None)


class _NpzWriter(RecordingWriter):
    format = "npz"

    def _open(self) -> None:
        check_writable(self.path, force=self.force)
        self._dir = pathlib.Path(
            tempfile.mkdtemp(prefix=f".{self.path.name}.", suffix=".parts", dir=self.path.parent)
        )
        names = (["time"] if self.time_column else []) + list(self.channels)
        self._streams = {
            name: _NpyStream(self._dir / f"{k}.npy", None) for k, name in enumerate(names)
        }

    def _write(self, t: np.ndarray | None, values: np.ndarray) -> None:
        streams = iter(self._streams.values())
        if t is not None:
            next(streams).write(t)
        for k, s in enumerate(streams):
            s.write(values[:, k])

    def _finish(self) -> None:
        try:
            for s in self._streams.values():
                s.close()
            with atomic_path(self.path, force=self.force) as tmp:
                with zipfile.ZipFile(tmp, "w", zipfile.ZIP_STORED, allowZip64=True) as zf:
                    for k, name in enumerate(self._streams):
                        zf.write(self._dir / f"{k}.npy", arcname=f"{name}.npy")
                    meta = np.array(json.dumps(self._meta()))
                    with zf.open("_sensormodel.npy", "w") as fh:
                        np.lib.format.write_array(fh, meta, allow_pickle=False)
        finally:
            shutil.rmtree(self._dir, ignore_errors=True)

    def _discard(self) -> None:
        for s in self._streams.values():
            s.fh.close()
        shutil.rmtree(self._dir, ignore_errors=True)


class _Hdf5Writer(RecordingWriter):
    format = "hdf5"

    def _open(self) -> None:
        h5py = _import_h5py(str(self.path))
        self._cm = atomic_path(self.path, force=self.force)
        self._tmp = self._cm.__enter__()
        try:
            self._f = h5py.File(self._tmp, "w", track_order=True)
            meta = self._meta()
            for key in ("schema", "rate", "increments", "start_time"):
                self._f.attrs[key] = meta[key]
            self._f.attrs["columns"] = json.dumps([c["name"] for c in meta["columns"]])
            self._ds = []
            for col in meta["columns"]:
                if self.n_samples is not None:
                    ds = self._f.create_dataset(col["name"], shape=(self.n_samples,), dtype="<f8")
                else:
                    ds = self._f.create_dataset(
                        col["name"], shape=(0,), maxshape=(None,), dtype="<f8", chunks=(65536,)
                    )
                ds.attrs["unit"] = col["unit"]
                self._ds.append(ds)
        except BaseException as exc:
            self._cm.__exit__(type(exc), exc, None)
            raise

    def _write(self, t: np.ndarray | None, values: np.ndarray) -> None:
        cols = ([t] if t is not None else []) + list(values.T)
        a, b = self.n_written, self.n_written + len(values)
        for ds, c in zip(self._ds, cols, strict=True):
            if self.n_samples is None:
                ds.resize((b,))
            ds[a:b] = c

    def _finish(self) -> None:
        try:
            self._f.close()
        except BaseException as exc:
            self._cm.__exit__(type(exc), exc, None)
            raise
        self._cm.__exit__(None, None, None)

    def _discard(self) -> None:
        with contextlib.suppress(Exception):
            self._f.close()
        err = RecordingError("aborted")
        with contextlib.suppress(RecordingError):
            self._cm.__exit__(RecordingError, err, None)


def open_writer(
    path: str | os.PathLike[str],
    channels: Sequence[str],
    units: str | Sequence[str | None] | Mapping[str, str] | None,
    rate: float,
    *,
    increments: bool = False,
    force: bool = False,
    time_column: bool = True,
    start_time: float = 0.0,
    n_samples: int | None = None,
) -> RecordingWriter:
    """Open a streaming, atomic writer for a recording; the format follows the file name.

    Parameters
    ----------
    path : path-like
        ``.csv``/``.txt`` (commas), ``.tsv`` (tabs), ``.npy`` (2-D array plus the
        ``<name>.npy.json`` sidecar), ``.npz`` or ``.h5``/``.hdf5`` (needs h5py).
    channels : sequence of str
        Channel ids, one per block column (``gyro.x`` … or any name, then as recorded).
    units : str, sequence, mapping or None
        Output unit per channel (``"deg/s"``, ``{"accelerometer.z": "mg"}``); None or a missing
        entry writes SI (``rad/s``, ``m/s^2``; ``rad``, ``m/s`` for increments). Values are
        converted from SI at this edge only.
    rate : float
        Sample rate [Hz].
    increments : bool
        Write each sample as its increment over the sample period (rate × 1/rate), marked in
        the file so it reads back as increments.
    force : bool
        Overwrite an existing file.
    time_column : bool
        Write a time column ``time [s]`` (``start_time + i / rate``); without it the rate is
        stated in the file.
    start_time : float
        Time of the first sample [s].
    n_samples : int, optional
        The number of samples that will be written, when known: NPY and HDF5 files are then
        preallocated (``numpy.lib.format.open_memmap``, contiguous datasets that read back
        memory-mapped), and writing a different number is an error.

    Returns
    -------
    RecordingWriter
        Use as ``with open_writer(...) as w: w.write(block)``.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> import numpy as np
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "rec.csv"
    >>> with open_writer(path, ["gyro.x"], "deg/s", 100.0) as w:
    ...     w.write(np.full((3, 1), np.pi / 180))
    >>> print(path.read_text().strip())
    time [s],gyro.x [deg/s]
    0,1
    0.01,1
    0.02,1
    """
    fmt = SUFFIXES.get(pathlib.Path(path).suffix.lower())
    cls = {"csv": _CsvWriter, "npy": _NpyWriter, "npz": _NpzWriter, "hdf5": _Hdf5Writer}.get(
        fmt or ""
    )
    if cls is None:
        raise RecordingError(
            f"unknown recording format '{pathlib.Path(path).suffix}'",
            _FORMATS_TEXT,
            source=str(path),
        )
    return cls(
        path,
        channels,
        units,
        rate,
        increments=increments,
        force=force,
        time_column=time_column,
        start_time=start_time,
        n_samples=n_samples,
    )
