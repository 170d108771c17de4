"""Writers: stream SI samples into a recording file that :func:`read_recording` reads back
without options; atomic (through ``_io``), so a failed or aborted write leaves nothing.

:func:`open_writer` checks the arguments into a ``_Layout`` (output units from
``_columns.output_unit``) and opens the writer of the file's format; each format writes its
metadata where its reader (``_sources``, ``_csv``) finds it.
"""

from __future__ import annotations

import contextlib
import json
import os
import pathlib
import shutil
import struct
import tempfile
import zipfile
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from .. import validate
from .._io import atomic_path, atomic_writer, check_writable
from ..errors import RecordingError
from ._columns import TIME_COLUMN_NAMES, output_unit
from ._formats import SCHEMA, format_of, import_h5py, import_pyarrow_csv

__all__ = ["RecordingWriter", "open_writer"]


#: The ``units`` argument of :func:`open_writer`: one for all, one per channel, by id, or None.
UnitsArg = str | Sequence[str | None] | Mapping[str, str] | None


@dataclass(frozen=True)
class _Layout:
    """What a writer writes, checked (:meth:`build`)."""

    #: Channel ids, one per block column.
    channels: tuple[str, ...]
    #: Output unit label per channel (``""``: as recorded).
    units: tuple[str, ...]
    #: Per channel, file value = SI sample / divisor.
    divisors: tuple[float, ...]
    #: Sample rate [Hz].
    rate: float
    #: Write increments per sample period (marked in the file).
    increments: bool
    #: Write a time column ``time [s]``.
    time_column: bool
    #: Time of the first sample [s].
    start_time: float
    #: The number of samples to be written, when known (preallocation).
    n_samples: int | None

    @classmethod
    def build(
        cls,
        src: str,
        channels: Sequence[str],
        units: UnitsArg,
        rate: Any,
        increments: Any,
        time_column: Any,
        start_time: Any,
        n_samples: Any,
    ) -> _Layout:
        """Check :func:`open_writer`'s arguments; ``src`` names the file in messages."""
        chans = tuple(channels)
        if not chans or len(set(chans)) != len(chans) or not all(isinstance(c, str) for c in chans):
            raise RecordingError(
                f"channels {list(chans)!r}", "a non-empty list of distinct ids", source=src
            )
        if time_column and any(c.lower() in TIME_COLUMN_NAMES for c in chans):
            raise RecordingError(
                "a channel is named like the time column", "other channel ids", source=src
            )
        r = validate.rate(rate, "rate")
        inc = bool(increments)
        out = [
            output_unit(ch, _unit_for(units, ch, k, len(chans)), inc, r, src)
            for k, ch in enumerate(chans)
        ]
        n = None if n_samples is None else validate.whole_number(n_samples, "n_samples", minimum=0)
        return cls(
            chans,
            tuple(label for label, _ in out),
            tuple(d for _, d in out),
            r,
            inc,
            bool(time_column),
            float(start_time),
            n,
        )


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

    def __init__(self, path: pathlib.Path, layout: _Layout, *, force: bool = False) -> None:
        self.path = path
        self.channels = layout.channels
        self.units = layout.units
        self.rate = layout.rate
        self.increments = layout.increments
        self.time_column = layout.time_column
        self.start_time = layout.start_time
        self.n_samples = layout.n_samples
        self.force = force
        self.n_written = 0
        self._done = False
        self._div = np.array(layout.divisors)
        self._cm: Any = None
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

    # -- the atomic temporary file ---------------------------------------------------------------
    def _enter(self, cm: Any) -> Any:
        """Enter an atomic context of ``_io`` (its temporary file or path)."""
        self._cm = cm
        return cm.__enter__()

    def _leave(self, exc: BaseException | None = None) -> None:
        """Leave it: rename the file into place, or (with ``exc``) remove it."""
        if exc is None:
            self._cm.__exit__(None, None, None)
        else:
            self._cm.__exit__(type(exc), exc, None)

    @contextlib.contextmanager
    def _removing_on_error(self) -> Iterator[None]:
        try:
            yield
        except BaseException as exc:
            self._leave(exc)
            raise

    def _drop(self) -> None:
        """Remove the temporary file (abort)."""
        with contextlib.suppress(RecordingError):
            self._leave(RecordingError("aborted"))

    # -- public --------------------------------------------------------------------------------
    def _meta(self) -> dict[str, Any]:
        cols = [{"name": "time", "unit": "s"}] if self.time_column else []
        cols += [
            {"name": c, "unit": u or "1"} for c, u in zip(self.channels, self.units, strict=True)
        ]
        return {
            "schema": SCHEMA,
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


def _unit_for(units: UnitsArg, ch: str, k: int, n: int) -> str | None:
    """The output unit asked for channel ``ch`` (the ``k``-th of ``n``), None for SI."""
    if units is None or isinstance(units, str):
        return units
    if isinstance(units, Mapping):
        return units.get(ch)
    seq = list(units)
    if len(seq) != n:
        raise RecordingError(f"{len(seq)} units for {n} channels", "one unit per channel")
    return seq[k]


class _CsvWriter(RecordingWriter):
    format = "csv"

    def _open(self) -> None:
        self._delim = "\t" if self.path.suffix.lower() == ".tsv" else ","
        self._fh = self._enter(atomic_writer(self.path, force=self.force, binary=True))
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
        self._arrow = import_pyarrow_csv()

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
        self._leave()

    def _discard(self) -> None:
        self._drop()


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
        self._tmp = self._enter(atomic_path(self.path, force=self.force))
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
        with self._removing_on_error():
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
        self._leave()

    def _discard(self) -> None:
        if self._stream is not None:
            self._stream.fh.close()
        self._mm = None
        self._drop()


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
        h5py = import_h5py(str(self.path))
        self._tmp = self._enter(atomic_path(self.path, force=self.force))
        with self._removing_on_error():
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

    def _write(self, t: np.ndarray | None, values: np.ndarray) -> None:
        cols = ([t] if t is not None else []) + list(values.T)
        a, b = self.n_written, self.n_written + len(values)
        for ds, c in zip(self._ds, cols, strict=True):
            if self.n_samples is None:
                ds.resize((b,))
            ds[a:b] = c

    def _finish(self) -> None:
        with self._removing_on_error():
            self._f.close()
        self._leave()

    def _discard(self) -> None:
        with contextlib.suppress(Exception):
            self._f.close()
        self._drop()


class _ColumnarWriter(RecordingWriter):
    """Parquet or Feather/Arrow IPC through pyarrow: one float64 field per column with its
    ``unit`` field metadata, the sensormodel metadata in the schema's ``sensormodel`` key; one
    row group / record batch per written block."""

    def _schema(self) -> Any:
        import pyarrow as pa

        meta = self._meta()
        fields = [
            pa.field(c["name"], pa.float64(), metadata={"unit": c["unit"]}) for c in meta["columns"]
        ]
        return pa.schema(fields, metadata={"sensormodel": json.dumps(meta)})

    def _new(self, tmp: Any, schema: Any) -> Any:
        raise NotImplementedError

    def _open(self) -> None:
        self._tmp = self._enter(atomic_path(self.path, force=self.force))
        with self._removing_on_error():
            self._schema_ = self._schema()
            self._out = self._new(self._tmp, self._schema_)

    def _write(self, t: np.ndarray | None, values: np.ndarray) -> None:
        import pyarrow as pa

        cols = ([t] if t is not None else []) + [np.ascontiguousarray(c) for c in values.T]
        self._out.write_table(pa.Table.from_arrays(cols, schema=self._schema_))

    def _finish(self) -> None:
        with self._removing_on_error():
            self._out.close()
        self._leave()

    def _discard(self) -> None:
        with contextlib.suppress(Exception):
            self._out.close()
        self._drop()


class _ParquetWriter(_ColumnarWriter):
    format = "parquet"

    def _new(self, tmp: Any, schema: Any) -> Any:
        import pyarrow.parquet as pq

        return pq.ParquetWriter(str(tmp), schema)


class _ArrowWriter(_ColumnarWriter):
    format = "arrow"

    def _new(self, tmp: Any, schema: Any) -> Any:
        import pyarrow as pa

        return pa.ipc.new_file(str(tmp), schema)


def open_writer(
    path: str | os.PathLike[str],
    channels: Sequence[str],
    units: UnitsArg,
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
        ``<name>.npy.json`` sidecar), ``.npz``, ``.h5``/``.hdf5`` (needs h5py), ``.parquet``
        / ``.pq`` or ``.feather`` / ``.arrow`` / ``.ipc`` (pyarrow). ROS bags are read only.
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
    target = pathlib.Path(path)
    fmt_name = format_of(target, str(path))
    if fmt_name not in _WRITERS:
        raise RecordingError(
            f"sensormodel does not write .{fmt_name} recordings",
            "a .csv, .tsv, .txt, .npy, .npz, .h5, .hdf5, .parquet, .feather or .arrow file name",
            source=str(path),
        )
    cls = _WRITERS[fmt_name]
    layout = _Layout.build(
        str(path), channels, units, rate, increments, time_column, start_time, n_samples
    )
    return cls(target, layout, force=force)


_WRITERS: dict[str, type[RecordingWriter]] = {
    "csv": _CsvWriter,
    "npy": _NpyWriter,
    "npz": _NpzWriter,
    "hdf5": _Hdf5Writer,
    "parquet": _ParquetWriter,
    "arrow": _ArrowWriter,
}
