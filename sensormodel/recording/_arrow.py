"""Columnar recordings through pyarrow: Parquet (``.parquet``, ``.pq``) and Feather / Arrow IPC
(``.feather``, ``.arrow``, ``.ipc``).

One column per field. A field's unit comes from its ``unit`` field metadata, else from its
name (``gyro_x [deg/s]``, ``GyroX(dps)``); a timestamp field (``timestamp[ns]`` …) is a time
column in integer nanoseconds since the epoch. The sensormodel metadata document (the same JSON
as the NPY sidecar) may sit in the schema metadata under the key ``sensormodel``; a ``rate``
schema metadata entry [Hz] states the rate. Columns are read with pyarrow's memory-mapped,
multi-threaded readers; numeric columns without missing values become NumPy arrays without a
copy where the layout allows.
"""

from __future__ import annotations

import json
import pathlib
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from ..errors import RecordingError
from ._columns import no_unit, split_header
from ._sources import Source

__all__ = ["ParquetSource", "ArrowSource"]


def _pyarrow() -> Any:
    import pyarrow as pa

    return pa


class _ArrowTable(Source):
    """A pyarrow-readable file: schema → names, units, stated settings; loader of columns."""

    what = ""
    #: Writable arrays from ``load`` are the reader's to scale in place (nothing else holds them).
    hands_over = True

    def __init__(self, path: pathlib.Path, src: str) -> None:
        super().__init__(path, src)
        pa = _pyarrow()
        try:
            schema = self._schema()
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError, OSError) as exc:
            raise RecordingError(
                f"not a readable {self.what} file ({exc})", f"a {self.what} file", source=src
            ) from None
        meta = {k.decode("utf-8", "replace"): v for k, v in (schema.metadata or {}).items()}
        declared: dict[str, str | None] = {}
        if "sensormodel" in meta:
            try:
                doc = json.loads(meta["sensormodel"])
            except (ValueError, UnicodeDecodeError) as exc:
                raise RecordingError(
                    f"the 'sensormodel' schema metadata is not JSON ({exc})",
                    "the metadata written by sensormodel",
                    source=src,
                ) from None
            declared = {c["name"]: c.get("unit") for c in self._meta(doc, "sensormodel")}
        if "rate" in meta:
            self.declare_rate(meta["rate"].decode(), field="rate", what="the schema's rate")
        self.fields: list[str] = []
        for f in schema:
            typ = f.type
            if not (
                pa.types.is_integer(typ)
                or pa.types.is_floating(typ)
                or pa.types.is_boolean(typ)
                or pa.types.is_timestamp(typ)
            ):
                continue  # text, lists, structs: not samples
            fmeta = {k.decode(): v.decode() for k, v in (f.metadata or {}).items()}
            name, unit = split_header(f.name)
            unit = declared.get(f.name, fmeta.get("unit", fmeta.get("units", unit)))
            if pa.types.is_timestamp(typ):
                unit = "ns"  # read as integer nanoseconds since the epoch
            self.fields.append(f.name)
            self.names.append(name)
            self.units.append(None if no_unit(unit) else unit)
        if not self.fields:
            raise RecordingError(
                f"the {self.what} file has no numeric column",
                "numeric columns, one per channel, and optionally a time column",
                source=src,
            )

    def _schema(self) -> Any:
        raise NotImplementedError

    def _table(self, columns: list[str]) -> Any:
        raise NotImplementedError

    def load(
        self, wanted: Sequence[int], *, cache: Any, progress: Callable[[int, int], None] | None
    ) -> list[np.ndarray]:
        pa = _pyarrow()
        names = [self.fields[j] for j in wanted]
        try:
            table = self._table(sorted(set(names), key=names.index))
        except (pa.ArrowInvalid, OSError) as exc:
            raise RecordingError(
                f"cannot read the {self.what} file ({exc})",
                f"a {self.what} file",
                source=self.src,
            ) from None
        out = [_numpy(table.column(n), pa) for n in names]
        if progress is not None:
            progress(1, 1)
        return out


def _numpy(column: Any, pa: Any) -> np.ndarray:
    """A chunked column as a NumPy array: timestamps as int64 ns, missing values as NaN."""
    if pa.types.is_timestamp(column.type):
        column = column.cast(pa.timestamp("ns", tz=column.type.tz)).cast(pa.int64())
    if column.null_count:
        column = column.cast(pa.float64())
    if pa.types.is_boolean(column.type):
        return np.asarray(column.to_numpy(), dtype=np.uint8)
    chunks = [c.to_numpy(zero_copy_only=False) for c in column.chunks]
    if len(chunks) == 1:
        return chunks[0]  # a view of pyarrow's memory map where the layout allows
    return np.concatenate(chunks)  # one copy, ours: the reader may scale it in place


class ParquetSource(_ArrowTable):
    """A Parquet file (``.parquet``, ``.pq``)."""

    fmt = "parquet"
    what = "Parquet"

    def _schema(self) -> Any:
        import pyarrow.parquet as pq

        return pq.read_schema(self.path)

    def _table(self, columns: list[str]) -> Any:
        import pyarrow.parquet as pq

        return pq.read_table(self.path, columns=columns, memory_map=True, use_threads=True)


class ArrowSource(_ArrowTable):
    """A Feather v2 / Arrow IPC file (``.feather``, ``.arrow``, ``.ipc``)."""

    fmt = "arrow"
    what = "Feather/Arrow IPC"

    def _schema(self) -> Any:
        pa = _pyarrow()
        with pa.memory_map(str(self.path), "r") as mm:
            try:
                return pa.ipc.open_file(mm).schema
            except pa.ArrowInvalid:
                mm.seek(0)
                return pa.ipc.open_stream(mm).schema

    def _table(self, columns: list[str]) -> Any:
        pa = _pyarrow()
        import pyarrow.feather as feather

        try:
            return feather.read_table(self.path, columns=columns, memory_map=True)
        except pa.ArrowInvalid:  # the IPC stream format
            with pa.memory_map(str(self.path), "r") as mm:
                return pa.ipc.open_stream(mm).read_all().select(columns)
