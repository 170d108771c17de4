"""The out-of-core path of the Allan engine: records larger than memory (private to
:mod:`sensormodel.allan`; :func:`sensormodel.allan.overlapping_many` routes to it).

The estimator is the same exact, fully overlapping one (module notes of the package), computed
with bounded memory:

1. **Mean** of every record, in one pass over row chunks of ``_ROWS`` samples (all records of
   one file are read in the same pass, so a row-major file is read once per pass).
2. **Phase** x[k] = scale·Σ_{j<k}(y[j] − ȳ), in a second pass, block by block with the running
   sum carried exactly as the in-memory ``_phase`` carries it, written to a temporary float64
   file per record (``tempfile.gettempdir()``; deleted at the end).
3. **Noise type** at each τ from the phase file, mapped read-only; every read copies what it
   needs and drops the mapped pages again, so they do not stay in the process's memory.
4. **Second-difference sums** Σ (x[i+2m] − 2x[i+m] + x[i])² chunk by chunk, on the engine's
   fixed chunks of second differences (``_engine._CHUNK``): per chunk, one buffered read of the
   phase from the chunk's start to its end plus 2·``_WINDOW_EXTRA`` serves every m with
   2m ≤ ``_WINDOW_EXTRA``; each longer m needs the phase at the chunk's start plus m and plus
   2m, read once per distinct offset (on an octave grid 2m of one τ is m of the next). The
   sums of each chunk are formed block by block by the one kernel the in-memory engine uses,
   in the same order, so each chunk's sums are those of the in-memory path to the bit when the
   phase is; the chunks are added exactly by the engine.

Reads of the samples go through the array given (a :class:`numpy.memmap` column, or any
array): each row chunk is copied into a small buffer and the pages of the mapping it touched
are dropped (``madvise(MADV_DONTNEED)``; they stay in the page cache, not in the process), so
the resident memory stays at a few buffers of ``_ROWS`` samples plus the phase reads of one
chunk per worker thread, whatever the record's length. Pages of a file mapping count as the
process's resident memory while they are mapped; without the drop a pass over a 25 GB mapping
grows the process to whatever the machine's memory holds.

Numbers: equal to the in-memory path to rounding (the mean is summed in chunks, ~1e-16
relative, and moves the phase by a linear trend the second difference annihilates; with the
phase built in blocks of 2^20 they are equal to the bit otherwise).
"""

from __future__ import annotations

import contextlib
import math
import mmap
import os
import tempfile
import threading
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from typing import Any

import numpy as np

from ._noise import _identify_all
from ._samples import _block_sumsq, _check_finite_mean, _too_large

__all__ = ["release", "stream_limit", "run_streamed"]

#: Samples per row chunk of the passes over the records (the in-memory phase's block, so the
#: phase is built by the same carried sums).
_ROWS = 1 << 20
#: Phase points beyond a chunk read in its one window: every m with 2m at most this is served
#: from the window (8 · (2^20 + 2^22) bytes = 40 MiB per worker).
_WINDOW_EXTRA = 1 << 22
#: Records of more than this many bytes in all (8 bytes per sample) go the streamed way; None:
#: half the memory available when the analysis starts (``MemAvailable``), or the
#: ``SENSORMODEL_STREAM_ABOVE`` environment variable [bytes] when set.
STREAM_ABOVE: int | None = None


def stream_limit() -> int:
    """The size [bytes, 8 per sample of all records together] above which records stream."""
    if STREAM_ABOVE is not None:
        return int(STREAM_ABOVE)
    env = os.environ.get("SENSORMODEL_STREAM_ABOVE")
    if env:
        return int(float(env))
    return _available_memory() // 2


def _available_memory() -> int:
    """Memory available to new allocations [bytes] (Linux ``MemAvailable``, else physical)."""
    with contextlib.suppress(OSError, ValueError, IndexError):
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    try:
        return int(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES"))
    except (ValueError, OSError):
        return 1 << 33


# ---------------------------------------------------------------------------------------------
# Reading with bounded resident memory
# ---------------------------------------------------------------------------------------------


def _mapping(arr: Any) -> tuple[mmap.mmap, int] | None:
    """The read-only file mapping behind ``arr`` and its start address, or None (an array in
    memory, or a writable or copy-on-write mapping, whose pages must not be dropped)."""
    base: Any = arr
    while base is not None:
        if isinstance(base, np.memmap) and getattr(base, "mode", None) != "r":
            return None
        if isinstance(base, mmap.mmap):
            address = np.frombuffer(base, dtype=np.uint8).__array_interface__["data"][0]
            return base, int(address)
        base = getattr(base, "base", None)
    return None


def _drop_pages(mapping: tuple[mmap.mmap, int], view: np.ndarray) -> None:
    """Drop the pages of a read-only mapping that ``view`` (a 1-D view of it) spans from the
    process (``madvise(MADV_DONTNEED)``: the data stay in the page cache and in the file)."""
    n = view.shape[0]
    if n == 0:
        return
    mm, start = mapping
    lo = view.__array_interface__["data"][0] - start
    hi = lo + (n - 1) * view.strides[0] + view.itemsize if view.strides[0] > 0 else lo + 1
    lo -= lo % mmap.PAGESIZE
    with contextlib.suppress(OSError, ValueError, AttributeError):
        mm.madvise(mmap.MADV_DONTNEED, lo, min(len(mm), hi) - lo)


def release(arr: Any) -> None:
    """Let the pages of a read-only file mapping that ``arr`` (1-D) spans go from the process's
    resident memory; nothing for an array in memory. They are read again from the page cache
    when touched, so a record analysed channel by channel holds one channel's pages at a time.
    """
    if isinstance(arr, np.ndarray) and arr.ndim == 1:
        mapping = _mapping(arr)
        if mapping is not None:
            _drop_pages(mapping, arr)


class _Reader:
    """Row chunks of one record as float64 copies; the mapped pages read are dropped again."""

    def __init__(self, arr: np.ndarray) -> None:
        self.arr = arr
        self.map = _mapping(arr)

    def read(self, i0: int, i1: int) -> np.ndarray:
        view = self.arr[i0:i1]
        out = np.array(view, dtype=np.float64)
        if self.map is not None:
            _drop_pages(self.map, view)
        return out


class _MappedPhase:
    """A phase file read through a read-only mapping whose pages are dropped after each read:
    the noise identification's slices, without the file staying resident."""

    def __init__(self, path: str, n_phase: int) -> None:
        self.mm = np.memmap(path, dtype=np.float64, mode="r", shape=(n_phase,))
        self.shape = self.mm.shape

    def __getitem__(self, key: Any) -> np.ndarray:
        out = np.array(self.mm[key])
        with contextlib.suppress(OSError, ValueError, AttributeError):
            self.mm._mmap.madvise(mmap.MADV_DONTNEED)  # type: ignore[attr-defined]
        return out

    def close(self) -> None:
        mm = getattr(self.mm, "_mmap", None)
        del self.mm
        if mm is not None:
            with contextlib.suppress(BufferError):
                mm.close()


# ---------------------------------------------------------------------------------------------
# The passes
# ---------------------------------------------------------------------------------------------


def _means(jobs: list[Any], readers: list[_Reader], tick: Callable[[int], None]) -> None:
    """Pass 1: the mean of each record (``job.mean``); a non-finite sample refused by index."""
    totals: list[list[float]] = [[] for _ in jobs]
    for i0 in range(0, max(job.n for job in jobs), _ROWS):
        for k, (job, reader) in enumerate(zip(jobs, readers, strict=True)):
            if i0 >= job.n:
                continue
            chunk = reader.read(i0, min(job.n, i0 + _ROWS))
            total = float(np.sum(chunk))
            if not math.isfinite(total):
                _check_finite_mean(chunk, job.name, offset=i0)  # names the sample
            totals[k].append(total)
            tick(chunk.shape[0] // 2)
    for job, sums in zip(jobs, totals, strict=True):
        job.mean = math.fsum(sums) / job.n
        if not math.isfinite(job.mean):  # finite samples, but too large to sum
            raise _too_large(job.name)


def _phases(
    jobs: list[Any], readers: list[_Reader], folder: str, tick: Callable[[int], None]
) -> list[str]:
    """Pass 2: each record's phase into a temporary file in ``folder``; returns the paths."""
    paths, files, carry = [], [], []
    try:
        for _ in jobs:
            fd, path = tempfile.mkstemp(prefix="sensormodel-phase-", suffix=".f64", dir=folder)
            paths.append(path)
            files.append(os.fdopen(fd, "wb"))
            files[-1].write(np.zeros(1).tobytes())  # x[0] = 0
            carry.append(0.0)
        seg = np.empty(_ROWS)
        for i0 in range(0, max(job.n for job in jobs), _ROWS):
            for k, (job, reader) in enumerate(zip(jobs, readers, strict=True)):
                if i0 >= job.n:
                    continue
                chunk = reader.read(i0, min(job.n, i0 + _ROWS))
                x = seg[: chunk.shape[0]]
                # as _samples._phase: mean removed, carry into the first element, cumsum, scale
                np.subtract(chunk, job.mean, out=x)
                x[0] += carry[k]
                np.cumsum(x, out=x)
                carry[k] = float(x[-1])
                if job.scale != 1.0:
                    x *= job.scale
                files[k].write(x.tobytes())
                tick(chunk.shape[0] - chunk.shape[0] // 2)
    except BaseException:
        for f in files:
            f.close()
        for p in paths:
            with contextlib.suppress(OSError):
                os.unlink(p)
        raise
    for f in files:
        f.close()
    return paths


def _chunk_sums(path: str, job: Any, index: int, buffers: dict[str, np.ndarray]) -> np.ndarray:
    """The second-difference sums of chunk ``index`` of a record, from its phase file."""
    lo, hi = job.chunks[index]
    n_phase = job.n + 1
    ms = [int(m) for m in job.ms]
    small = [m for m in ms if 2 * m <= _WINDOW_EXTRA]
    window_end = min(n_phase, hi + 2 * max(small, default=0))
    reads: dict[int, int] = {lo: window_end - lo}  # phase offset → points
    for m in ms:
        if 2 * m > _WINDOW_EXTRA:
            length = max(0, min(hi, n_phase - 2 * m) - lo)
            for off in (lo + m, lo + 2 * m):
                reads[off] = max(reads.get(off, 0), length)
    data: dict[int, np.ndarray] = {}
    with open(path, "rb", buffering=0) as fh:
        for k, (off, count) in enumerate(sorted(reads.items())):
            buf = buffers.get(f"r{k}")
            if buf is None or buf.shape[0] < count:
                buf = buffers[f"r{k}"] = np.empty(count)
            view = buf[:count]
            got = os.preadv(fh.fileno(), [memoryview(view).cast("B")], 8 * off)
            if got != 8 * count:
                raise OSError(f"short read of the phase file {path}")
            data[off] = view
    window = data[lo]
    scratch = buffers["scratch"]
    sums = np.zeros(len(ms))
    block = scratch.shape[0]
    for k, m in enumerate(ms):
        length = min(hi, n_phase - 2 * m) - lo
        if length <= 0:
            break  # the factors are sorted: the later ones end even earlier
        if 2 * m <= _WINDOW_EXTRA:
            x1, x2 = window[m : m + length], window[2 * m : 2 * m + length]
        else:
            x1, x2 = data[lo + m][:length], data[lo + 2 * m][:length]
        total = 0.0
        for j in range(0, length, block):
            e = min(length, j + block)
            total += _block_sumsq(window[j:e], x1[j:e], x2[j:e], scratch[: e - j])
        sums[k] = total
    return sums


def run_streamed(
    jobs: list[Any],
    workers: int,
    scratch: Callable[[], np.ndarray],
    progress: Callable[[int, int], Any] | None,
) -> None:
    """Fill ``job.mean``, ``job.alphas`` (where not fixed) and ``job.sums`` of each record the
    out-of-core way (module notes); ``scratch()`` makes one block of engine scratch."""
    total = sum(job.work for job in jobs)
    done = [0]
    lock = threading.Lock()

    def tick(units: int) -> None:
        with lock:
            done[0] += units
            value = done[0]
        if progress is not None and threading.current_thread() is threading.main_thread():
            progress(value, total)

    readers = [_Reader(job.arr) for job in jobs]
    folder = tempfile.gettempdir()
    _means(jobs, readers, tick)
    paths = _phases(jobs, readers, folder, tick)
    local = threading.local()

    def chunk(task: tuple[int, int]) -> tuple[int, int, np.ndarray]:
        j, c = task
        if not hasattr(local, "buffers"):
            local.buffers = {"scratch": scratch()}
        return j, c, _chunk_sums(paths[j], jobs[j], c, local.buffers)

    try:
        for j, job in enumerate(jobs):
            if job.fixed is None:
                phase = _MappedPhase(paths[j], job.n + 1)
                try:
                    job.alphas = _identify_all(phase, job.ms)  # type: ignore[arg-type]
                finally:
                    phase.close()
        tasks = [(j, c) for j, job in enumerate(jobs) for c in range(len(job.chunks))]
        with ThreadPoolExecutor(max_workers=max(1, workers)) as pool:
            for j, c, sums in pool.map(chunk, tasks):
                jobs[j].sums[c] = sums
                tick(jobs[j].chunk_work[c])
    finally:
        for p in paths:
            with contextlib.suppress(OSError):
                os.unlink(p)
    if progress is not None:
        progress(total, total)
