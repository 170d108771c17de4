"""The file formats a recording may have, and what their readers and writers share.

One table (:data:`SUFFIXES`) says which file name ending is read and written as which format;
the metadata schema id, the optional-package imports and the one check of a rate a file states
live here, so the sources (``_sources``, ``_csv``) and the writers (``_writers``) do not repeat
them.
"""

from __future__ import annotations

import math
import pathlib
from typing import Any

from ..errors import RecordingError

__all__ = [
    "SUFFIXES",
    "SCHEMA",
    "FORMATS_TEXT",
    "RATE_RTOL",
    "format_of",
    "file_rate",
    "rates_agree",
    "fmt",
    "import_h5py",
    "import_pyarrow_csv",
]

#: File name endings and the format each is read and written as.
SUFFIXES = {
    ".csv": "csv",
    ".tsv": "csv",
    ".txt": "csv",
    ".npy": "npy",
    ".npz": "npz",
    ".h5": "hdf5",
    ".hdf5": "hdf5",
    ".parquet": "parquet",
    ".pq": "parquet",
    ".feather": "arrow",
    ".arrow": "arrow",
    ".ipc": "arrow",
    ".bag": "bag",
    ".mcap": "bag",
    ".db3": "bag",
}
#: The ``schema`` value of sensormodel's recording metadata (sidecar, NPZ entry, HDF5 attribute).
SCHEMA = "sensormodel/recording/1"
#: The accepted formats, as error messages name them.
FORMATS_TEXT = (
    "a .csv, .tsv, .txt, .npy, .npz, .h5, .hdf5, .parquet, .feather, .arrow file, or a ROS "
    "bag (.bag, .mcap, .db3, or a ROS 2 bag folder)"
)
#: Relative tolerance within which two rates (time column, file, option) must agree.
RATE_RTOL = 1e-6


def format_of(path: pathlib.Path, source: str) -> str:
    """The format of a recording file from its name ending.

    Raises
    ------
    RecordingError
        An ending not in :data:`SUFFIXES`, naming ``source``.
    """
    fmt_name = SUFFIXES.get(path.suffix.lower())
    if fmt_name is None:
        raise RecordingError(
            f"unknown recording format '{path.suffix}'", FORMATS_TEXT, source=source
        )
    return fmt_name


def file_rate(value: Any, *, source: str, field: str) -> float:
    """A sample rate [Hz] stated in a file (sidecar, array, attribute): finite and > 0.

    The one check of a file's rate; the error names the file and where in it the rate stands.
    (A rate given as an argument is checked by :func:`sensormodel.validate.rate`.)

    Raises
    ------
    RecordingError
        Naming ``source`` and ``field``.
    """
    try:
        r = float(value)
    except (TypeError, ValueError):
        r = math.nan
    if not (math.isfinite(r) and r > 0):
        raise RecordingError(
            f"rate {value!r}", "a positive sample rate in Hz", source=source, field=field
        )
    return r


def rates_agree(a: float, b: float) -> bool:
    """Whether two rates [Hz] agree within :data:`RATE_RTOL` (relative)."""
    return abs(a - b) <= RATE_RTOL * max(abs(a), abs(b))


def fmt(x: float) -> str:
    """A number in messages: 10 significant digits, no trailing zeros."""
    return f"{x:.10g}"


def import_h5py(source: str) -> Any:
    """The h5py module, or a RecordingError naming ``source`` saying how to install it."""
    try:
        import h5py
    except ImportError:
        raise RecordingError(
            "reading or writing HDF5 needs the optional package h5py, which is not installed",
            "it installed: pip install sensormodel[hdf5]",
            source=source,
        ) from None
    return h5py


def import_pyarrow_csv() -> Any:
    """pyarrow and pyarrow.csv, or None when pyarrow is not installed (the fast path is off)."""
    try:
        import pyarrow as pa
        import pyarrow.csv as pacsv
    except ImportError:
        return None
    return pa, pacsv
