"""Text in text recordings: the first data row's fields, and ISO-8601 time stamps.

The CSV engines (``_csv``) read numbers only. This module looks at the first data row to tell
which columns hold text (an ISO-8601 time column is read as such; another text column, e.g. a
status word, is left unread), and parses an ISO-8601 time column into integer nanoseconds
since 1970-01-01 UTC with pyarrow's timestamp parser.
"""

from __future__ import annotations

import csv
import re
from typing import Any

import numpy as np

from ..errors import RecordingError

__all__ = ["first_row", "looks_iso", "iso_nanoseconds"]

# The date-time shape of ISO 8601 (ISO 8601-1:2019 §5.4: date, 'T' or space, time).
_ISO = re.compile(r"^\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(:\d{2}(\.\d+)?)?(Z|[+-]\d{2}:?\d{2})?$")


def looks_iso(text: str) -> bool:
    """Whether a field is an ISO-8601 date and time (``2024-05-01T12:00:00.125Z``)."""
    return _ISO.match(text.strip().strip('"')) is not None


def first_row(source: Any) -> list[str]:
    """The fields of a text source's first data row ([] for a binary source)."""
    if not getattr(source, "text", False):
        return []
    with open(source.path, "rb") as fh:
        fh.seek(source.data_offset)
        line = fh.readline(1 << 20).decode("utf-8", errors="replace").rstrip("\r\n")
    return next(csv.reader([line], delimiter=source.delimiter), [])


def is_number(text: str) -> bool:
    """Whether a field reads as a number (or is empty: a missing sample)."""
    s = text.strip().strip('"')
    if not s:
        return True
    try:
        float(s)
    except ValueError:
        return False
    return True


def iso_nanoseconds(source: Any, index: int) -> np.ndarray:
    """The ISO-8601 stamps of column ``index`` of a text source, as int64 ns since the epoch.

    Stamps with a zone (``Z``, ``+02:00``) are taken in UTC; stamps without one as they are
    (their steps are what matters). A stamp that is not ISO-8601 is refused naming its line.
    """
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.csv as pacsv

    name = source.names[index]
    if not getattr(source, "text", False):
        raise RecordingError(
            f"the time column '{name}' is declared ISO-8601 text",
            "ISO-8601 stamps in a CSV/TSV file, or numeric stamps with their unit",
            source=source.src,
        )
    with open(source.path, "rb") as fh:
        fh.seek(source.data_offset)
        raw = fh.read(source.data_end - source.data_offset)
    names = [f"f{i}" for i in range(source.n_fields)]
    try:
        table = pacsv.read_csv(
            pa.BufferReader(raw),
            read_options=pacsv.ReadOptions(column_names=names),
            parse_options=pacsv.ParseOptions(delimiter=source.delimiter),
            convert_options=pacsv.ConvertOptions(
                include_columns=[names[index]], column_types={names[index]: pa.string()}
            ),
        )
    except (pa.ArrowInvalid, pa.ArrowTypeError) as exc:
        raise RecordingError(
            f"cannot read the time column '{name}' ({exc})",
            "one ISO-8601 stamp per row",
            source=source.src,
        ) from None
    col = pc.utf8_trim_whitespace(table.column(0))
    for typ in (pa.timestamp("ns", tz="UTC"), pa.timestamp("ns")):
        try:
            stamps = pc.cast(col, typ)
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            continue
        if stamps.null_count:
            break
        return np.asarray(stamps.cast(pa.int64()).to_numpy(), dtype=np.int64)
    values = col.to_pylist()
    bad = next(
        (i for i, v in enumerate(values) if v is None or not looks_iso(v)),
        0,
    )
    raise RecordingError(
        f"column '{name}' holds '{values[bad] or ''}', not an ISO-8601 time stamp"
        if values[bad] is not None and not looks_iso(values[bad])
        else f"column '{name}' mixes stamps with and without a time zone",
        "ISO-8601 stamps such as 2024-05-01T12:00:00.125Z, all with or all without a zone",
        source=source.src,
        field=source.where(bad),
    )
