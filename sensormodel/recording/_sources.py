"""Sources: one per file format. Each gives the column names, the units in the file, the
settings the file states (rate, increments, start time) and a loader of raw columns.

:class:`Source` is the base; the binary formats are here (NPY with its JSON sidecar, NPZ,
HDF5), the text formats in ``_csv``. A source reads what the file says and checks what only
the file can say (a sidecar's shape, a stated rate); choosing, mapping and converting columns
is ``_columns``'s, checking the samples ``_timebase``'s.
"""

from __future__ import annotations

import contextlib
import json
import pathlib
import struct
import zipfile
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from ..errors import RecordingError
from ._columns import no_unit
from ._formats import SCHEMA, file_rate, fmt, import_h5py, rates_agree

__all__ = ["Source", "NpySource", "NpzSource", "Hdf5Source"]


class Source:
    """A recording file opened for reading: what it says about itself, and its loader.

    Attributes
    ----------
    fmt : str
        The format (a value of ``_formats.SUFFIXES``).
    text : bool
        A text format: messages name file lines, else sample indices.
    position_words : (str, str)
        How messages name one sample's place and a stretch's (``index``/``indices``).
    first_position : int
        The place of sample 0 in those words (0, or the first data line of a text file).
    names, units : list
        Column names and the units the file gives (None where it gives none).
    rate, increments, start_time
        What the file states (None where it says nothing): rate [Hz], whether the samples
        are increments, time of the first sample [s].
    """

    fmt = ""
    text = False
    position_words = ("index", "indices")

    def __init__(self, path: pathlib.Path, src: str) -> None:
        self.path = path
        self.src = src
        self.first_position = 0
        self.names: list[str] = []
        self.units: list[str | None] = []
        self.rate: float | None = None
        self.increments: bool | None = None
        self.start_time: float | None = None
        self._rate_what = ""

    def declare_rate(self, value: Any, *, field: str, what: str) -> None:
        """Take a rate [Hz] the file states at ``what``; every stated rate must agree."""
        r = file_rate(value, source=self.src, field=field)
        if self.rate is not None and not rates_agree(self.rate, r):
            raise RecordingError(
                f"{what} gives {fmt(r)} Hz but {self._rate_what} gives {fmt(self.rate)} Hz",
                "one rate",
                source=self.src,
            )
        self.rate, self._rate_what = r, what

    def where(self, i: int, length: int = 1) -> str:
        """The place of samples ``i`` … ``i + length - 1`` in the file, for messages: the
        0-based sample index (binary) or the file line as an editor shows it (text)."""
        first = self.first_position + i
        one, several = self.position_words
        if length > 1:
            return f"{several} {first}-{first + length - 1}"
        return f"{one} {first}"

    def load(
        self, wanted: Sequence[int], *, cache: Any, progress: Callable[[int, int], None] | None
    ) -> list[np.ndarray]:
        """The raw columns ``wanted`` (file units; float or integer), of equal length."""
        raise NotImplementedError

    def _meta(self, meta: Any, where: str) -> list[dict[str, Any]]:
        """Apply a sensormodel metadata document (sidecar, npz entry); return its columns."""
        if not isinstance(meta, dict) or meta.get("schema") != SCHEMA:
            raise RecordingError(
                f"{where} is not sensormodel recording metadata",
                f'a JSON object with "schema": "{SCHEMA}"',
                source=self.src,
            )
        rate = meta.get("rate")
        if rate is not None:
            self.declare_rate(rate, field=f"{where}.rate", what=f"{where}.rate")
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


class NpySource(Source):
    """A ``.npy`` array (1-D: one channel; 2-D: samples × columns), memory-mapped; names,
    units and settings from the ``<name>.npy.json`` sidecar when there is one."""

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
                self.units = [None if no_unit(c.get("unit")) else c["unit"] for c in cols]

    def load(
        self, wanted: Sequence[int], *, cache: Any, progress: Callable[[int, int], None] | None
    ) -> list[np.ndarray]:
        out = [self.arr if self.arr.ndim == 1 else self.arr[:, j] for j in wanted]
        if progress is not None:
            progress(1, 1)
        return out


class NpzSource(Source):
    """A ``.npz`` archive: one 1-D array per column, a 0-d ``rate`` (or ``fs``) array, the
    metadata in a ``_sensormodel`` entry; stored (uncompressed) entries are memory-mapped."""

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
                    value = float(z[name])
                self.declare_rate(value, field=name, what=f"the '{name}' array")
            elif len(shape) == 1 and dtype.kind in "fiub":
                self.names.append(name)
                u = declared_units.get(name)
                self.units.append(None if no_unit(u) else u)

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


class Hdf5Source(Source):
    """An HDF5 file: one 1-D dataset per column (``unit`` attributes, ``rate`` attributes or
    0-d datasets); contiguous uncompressed native datasets are memory-mapped."""

    fmt = "hdf5"

    def __init__(self, path: pathlib.Path, src: str) -> None:
        super().__init__(path, src)
        h5py = import_h5py(src)
        self.paths: list[str] = []
        rates: dict[str, float] = {}
        order: list[str] = []
        try:
            with h5py.File(path, "r") as f:
                if f.attrs.get("schema") is not None and _attr_text(f.attrs["schema"]) == SCHEMA:
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
                    self.units.append(None if no_unit(u) else u)
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
            self.declare_rate(r, field=where, what=where)

    def load(
        self, wanted: Sequence[int], *, cache: Any, progress: Callable[[int, int], None] | None
    ) -> list[np.ndarray]:
        h5py = import_h5py(self.src)
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
