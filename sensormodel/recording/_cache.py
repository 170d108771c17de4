"""The CSV cache: text columns parsed once into raw float64 files, memory-mapped later.

An entry is a folder named after the CSV file (its name, a hash of its absolute path and a hash
of its state: size, modification time, cache version and text layout) holding one ``f<j>.f64``
file per parsed column ``j``. Columns are written under a temporary name and renamed into place
when complete, so an interrupted parse leaves no column behind; an entry of an older state of
the same file is removed when a new one is made. The folder may be deleted at any time.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import pathlib
import re
import shutil
import time
from collections.abc import Callable, Sequence
from types import TracebackType
from typing import Any

import numpy as np

__all__ = [
    "CACHE_MIN_BYTES",
    "CACHE_MAX_BYTES",
    "cache_folder",
    "cache_limit",
    "cache_entries",
    "prune_cache",
    "entry_folder",
    "load_cached",
    "ColumnSinks",
]

#: CSV files at least this large [bytes] are cached as binary columns by default.
CACHE_MIN_BYTES = 8 * 2**20
#: Default bound of the cache folder [bytes] (``$SENSORMODEL_CACHE_MAX`` sets another): past it
#: the least recently used entries are removed.
CACHE_MAX_BYTES = 4 * 2**30
#: The file in each entry naming the CSV file it was parsed from.
_SOURCE_FILE = "source.txt"

_CACHE_VERSION = "1"
_OFF = ("", "0", "off", "no", "false", "none")

#: ``parse(columns, folder, progress)``: parse the columns into the entry ``folder``.
Parse = Callable[[Sequence[int], pathlib.Path, Callable[[int, int], None] | None], Any]


def cache_folder() -> pathlib.Path | None:
    """The CSV cache folder: ``$SENSORMODEL_CACHE``, else ``$XDG_CACHE_HOME/sensormodel/csv``
    (default ``~/.cache/sensormodel/csv``); None when ``SENSORMODEL_CACHE`` is ``off``."""
    env = os.environ.get("SENSORMODEL_CACHE")
    if env is not None:
        if env.strip().lower() in _OFF:
            return None
        return pathlib.Path(env).expanduser()
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return pathlib.Path(base) / "sensormodel" / "csv"


def cache_limit() -> int:
    """The cache bound [bytes]: ``$SENSORMODEL_CACHE_MAX`` (a whole number of bytes) or
    :data:`CACHE_MAX_BYTES`."""
    text = os.environ.get("SENSORMODEL_CACHE_MAX", "").strip()
    return int(text) if text.isdigit() else CACHE_MAX_BYTES


def cache_entries(root: pathlib.Path | None = None) -> list[tuple[pathlib.Path, int, float, str]]:
    """The entries of a cache folder (default :func:`cache_folder`): (folder, size [bytes],
    last use [s since the epoch], source file or "" when unknown), least recently used first."""
    root = cache_folder() if root is None else pathlib.Path(root)
    if root is None or not root.is_dir():
        return []
    out = []
    for entry in root.iterdir():
        if not entry.is_dir():
            continue
        size = sum(f.stat().st_size for f in entry.iterdir() if f.is_file())
        marker = entry / _SOURCE_FILE
        source = marker.read_text(encoding="utf-8") if marker.is_file() else ""
        used_ns = entry.stat().st_mtime_ns
        out.append((used_ns, (entry, size, used_ns / 1e9, source)))
    return [e for _, e in sorted(out, key=lambda pair: pair[0])]


def prune_cache(
    root: pathlib.Path | None = None, *, max_bytes: int | None = None, everything: bool = False
) -> list[pathlib.Path]:
    """Remove the entries whose CSV file is gone, then the least recently used ones until the
    folder holds at most ``max_bytes`` (default :func:`cache_limit`); ``everything`` clears it.
    Returns the entries removed."""
    limit = cache_limit() if max_bytes is None else int(max_bytes)
    entries = cache_entries(root)
    removed = []
    kept = []
    for entry, size, _used, source in entries:
        if everything or (source and not os.path.exists(source)):
            shutil.rmtree(entry, ignore_errors=True)
            removed.append(entry)
        else:
            kept.append((entry, size))
    total = sum(size for _, size in kept)
    for entry, size in kept:  # least recently used first
        if total <= limit:
            break
        shutil.rmtree(entry, ignore_errors=True)
        removed.append(entry)
        total -= size
    return removed


def entry_folder(path: pathlib.Path, cache: Any, *, layout: str) -> pathlib.Path | None:
    """The cache entry of a CSV file in its current state, None when it is not cached.

    Parameters
    ----------
    path : pathlib.Path
        The CSV file.
    cache : bool, path-like or None
        The reader's ``cache`` option: None caches files of at least :data:`CACHE_MIN_BYTES`
        in :func:`cache_folder`; True caches any size; False never; a folder caches there.
    layout : str
        What else decides the parsed columns (delimiter, offsets of the data).
    """
    if cache is False:
        return None
    st = path.stat()
    if cache is None or cache is True:
        if cache is None and st.st_size < CACHE_MIN_BYTES:
            return None
        root = cache_folder()
        if root is None:
            return None
    else:
        root = pathlib.Path(cache)
    resolved = str(path.resolve())
    path_key = hashlib.sha256(resolved.encode()).hexdigest()[:10]
    state = f"{st.st_size}\0{st.st_mtime_ns}\0{_CACHE_VERSION}\0{layout}"
    state_key = hashlib.sha256(state.encode()).hexdigest()[:12]
    stem = re.sub(r"[^A-Za-z0-9_.-]", "_", path.name)[:40]
    return root / f"{stem}-{path_key}-{state_key}"


def _column_file(folder: pathlib.Path, j: int) -> pathlib.Path:
    return folder / f"f{j}.f64"


def load_cached(
    folder: pathlib.Path,
    wanted: Sequence[int],
    parse: Parse,
    progress: Callable[[int, int], None] | None,
    total: int,
    *,
    source: os.PathLike[str] | str | None = None,
) -> list[np.ndarray]:
    """The wanted columns from the entry ``folder``, parsing the missing ones into it first
    (``source``, the CSV file, is written into a new entry so that :func:`prune_cache` can drop
    the entries of files that are gone; a new entry then keeps the folder within
    :func:`cache_limit`).

    Raises
    ------
    OSError
        The cache cannot be written (the caller then parses in memory).
    """
    files = {j: _column_file(folder, j) for j in wanted}
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
        parse(missing, folder, progress)
        if source is not None:  # after a whole parse: a failed one leaves nothing behind
            (folder / _SOURCE_FILE).write_text(str(source), encoding="utf-8")
        # the new entry is the most recently used: the bound is kept without touching it
        _touch(folder)
        prune_cache(folder.parent, max_bytes=max(cache_limit(), _entry_size(folder)))
    elif progress is not None:
        progress(total, total)
    _touch(folder)  # its last use, for the least-recently-used bound
    return [np.memmap(files[j], dtype="<f8", mode="r") for j in wanted]


def _touch(folder: pathlib.Path) -> None:
    """Mark an entry used now, to the nanosecond (the kernel's own file times are coarse:
    entries used within one clock tick would tie)."""
    now = time.time_ns()
    os.utime(folder, ns=(now, now))


def _entry_size(folder: pathlib.Path) -> int:
    return sum(f.stat().st_size for f in folder.iterdir() if f.is_file())


class ColumnSinks:
    """The column files of a cache entry being written, piece by piece.

    Use as a context manager: :meth:`commit` renames the complete files into place; leaving
    the block removes whatever was not committed.
    """

    def __init__(self, folder: pathlib.Path, wanted: Sequence[int]) -> None:
        self.folder = folder
        self.wanted = list(wanted)
        self._tag = f".{os.getpid()}.part"
        self._files: list[Any] = []
        try:
            for j in self.wanted:
                self._files.append(open(self._part(j), "wb"))  # noqa: SIM115
        except BaseException:
            self.__exit__(None, None, None)
            raise

    def _part(self, j: int) -> pathlib.Path:
        return self.folder / f"f{j}.f64{self._tag}"

    def write(self, k: int, column: np.ndarray) -> None:
        """Append values to the ``k``-th wanted column."""
        self._files[k].write(np.ascontiguousarray(column, dtype="<f8").tobytes())

    def commit(self) -> None:
        """Close the files and rename them into place."""
        for f in self._files:
            f.close()
        for j in self.wanted:
            os.replace(self._part(j), _column_file(self.folder, j))

    def __enter__(self) -> ColumnSinks:
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        for f in self._files:
            f.close()
        for j in self.wanted:
            with contextlib.suppress(FileNotFoundError):
                os.unlink(self._part(j))
