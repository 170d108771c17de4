"""CSV / TSV text recordings: the layout of the file and three engines that agree.

:class:`TextSource` finds the comment settings (``# sensormodel rate = 400 Hz``), the header and
the delimiter, then parses the wanted columns in pieces of :data:`_PIECE_BYTES`: with
``pyarrow.csv`` when it is importable, else (or for a piece pyarrow refuses) with
``numpy.loadtxt``, and a piece both refuse with the pure-Python reader, which decides: it reads
what the other two read with identical numbers (and a little more: blank lines and blank fields
as missing samples, quoted numbers) and names the exact line and column of anything it cannot
read. Large files go through the cache (``_cache``).
"""

from __future__ import annotations

import codecs
import contextlib
import csv
import io
import math
import mmap
import pathlib
import re
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from ..errors import RecordingError, UnitError
from ..quantities import parse_quantity
from ._cache import ColumnSinks, entry_folder, load_cached
from ._columns import split_header
from ._formats import import_pyarrow_csv
from ._sources import Source

__all__ = ["TextSource"]

_PIECE_BYTES = 64 * 2**20
# The comment settings that hold a quantity: its kind and how it is parsed.
_QUANTITY_SETTINGS: dict[str, tuple[str, dict[str, bool]]] = {
    "rate": ("frequency", {"allow_zero": False}),
    "start_time": ("time", {"allow_negative": True}),
}


class TextSource(Source):
    """A CSV / TSV file: comment settings, header (or none), delimiter; columns parsed by
    the engines, through the cache for large files. Messages name file lines."""

    fmt = "csv"
    text = True
    position_words = ("line", "lines")

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
        self.delimiter = "\t" if self.path.suffix.lower() == ".tsv" else _delimiter(header, first)
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
            self.first_position = header_line
            self.data_offset = header_start
        else:
            for i, f in enumerate(fields):
                name, unit = split_header(f)
                self.names.append(name or f"ch{i}")
                self.units.append(unit)
            self.first_position = header_line + 1
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
        if key in ("rate", "start_time"):
            kind, options = _QUANTITY_SETTINGS[key]
            try:
                setattr(self, key, parse_quantity(value, kind, **options))
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

    # -- parsing -------------------------------------------------------------------------------
    def load(
        self, wanted: Sequence[int], *, cache: Any, progress: Callable[[int, int], None] | None
    ) -> list[np.ndarray]:
        layout = f"{self.delimiter}\0{self.data_offset}\0{self.data_end}"
        folder = entry_folder(self.path, cache, layout=layout)
        if folder is not None:
            total = self.data_end - self.data_offset
            try:
                return load_cached(
                    folder, wanted, self._parse, progress, total, source=self.path.resolve()
                )
            except OSError:
                pass  # an unwritable cache only costs speed; parse in memory
        return self._parse(wanted, None, progress)

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
        """Parse the wanted columns piece by piece: into the cache entry ``folder`` (returns
        ``[]``), or into memory when ``folder`` is None."""
        arrow = import_pyarrow_csv()
        total = self.data_end - self.data_offset
        parts: list[list[np.ndarray]] = [[] for _ in wanted]
        with contextlib.ExitStack() as stack:
            sinks = None if folder is None else stack.enter_context(ColumnSinks(folder, wanted))
            fh = stack.enter_context(open(self.path, "rb", buffering=0))
            mm = stack.enter_context(mmap.mmap(fh.fileno(), 0, access=mmap.ACCESS_READ))
            text = _PieceBuffer(fh)
            row = 0
            for a, b in self._pieces(mm):
                cols = self._piece(mm, arrow, text, (a, b), row, wanted)
                row += len(cols[0])
                for k, c in enumerate(cols):
                    if sinks is not None:
                        sinks.write(k, c)
                    else:
                        parts[k].append(c)
                if progress is not None:
                    progress(b - self.data_offset, total)
            if sinks is not None:
                sinks.commit()
        if arrow is not None:
            # the pool keeps a piece's worth of freed buffers for reuse: give them back
            with contextlib.suppress(AttributeError):
                arrow[0].default_memory_pool().release_unused()
        return [] if folder is not None else _joined(parts)

    def _piece(
        self,
        mm: mmap.mmap,
        arrow: Any,
        text: _PieceBuffer,
        bounds: tuple[int, int],
        row: int,
        wanted: Sequence[int],
    ) -> list[np.ndarray]:
        """One piece by the first engine that reads it: pyarrow, numpy, the Python reader."""
        a, b = bounds
        cols = None
        if arrow is not None:
            # read into one reused buffer, not through a file mapping: mapped pages of the
            # text would count as the process's memory until the whole file is parsed
            buf = arrow[0].py_buffer(text.read(a, b))
            cols = _arrow_piece(arrow, buf, self.n_fields, wanted, self.delimiter)
            del buf
        if cols is None:
            raw = mm[a:b]
            cols = _numpy_piece(raw, self.n_fields, wanted, self.delimiter)
            if cols is None:
                cols = self._python_piece(raw, row, wanted)
        return cols

    def _python_piece(self, raw: bytes, row0: int, wanted: Sequence[int]) -> list[np.ndarray]:
        """The reference reader: csv-module rules, :func:`_number` per field, exact errors."""
        line0 = self.first_position + row0
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


class _PieceBuffer:
    """One reusable byte buffer the pieces of the text are read into (buffered reads)."""

    def __init__(self, fh: Any) -> None:
        self.fh = fh
        self.buf = bytearray()

    def read(self, a: int, b: int) -> memoryview:
        """Bytes ``a`` … ``b − 1`` of the file, a view of the buffer (valid until the next)."""
        if len(self.buf) < b - a:
            self.buf = bytearray(b - a)
        view = memoryview(self.buf)[: b - a]
        self.fh.seek(a)
        got = 0
        while got < b - a:
            n = self.fh.readinto(view[got:])
            if not n:
                raise OSError("the file ended early")
            got += n
        return view


def _joined(parts: list[list[np.ndarray]]) -> list[np.ndarray]:
    """Each column's pieces as one array, column by column, each column's pieces let go as
    soon as it is joined (at most one column is held twice)."""
    out = []
    for k in range(len(parts)):
        p, parts[k] = parts[k], []
        out.append(np.concatenate(p) if len(p) > 1 else p[0])
        del p
    return out


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
    # copies: numpy owns them, and pyarrow's pool reuses its buffers for the next piece
    return [np.array(table.column(n).to_numpy(), dtype=np.float64) for n in keep]


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


def _delimiter(header: str, first: str) -> str:
    """The delimiter that splits the header and the first data row into the same count (> 1)."""
    counts = {d: (len(_split(header, d)), len(_split(first, d))) for d in ("\t", ",", ";")}
    for d, (nh, nd) in counts.items():
        if nh > 1 and nh == nd:
            return d
    best = max(counts, key=lambda d: counts[d][0])
    return best if counts[best][0] > 1 else ","


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
