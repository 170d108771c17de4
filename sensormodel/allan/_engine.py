"""The Allan engine: phase, second-difference sums in fixed chunks, the schedule of several
records on one pool of worker threads, and the public functions over it (private to
:mod:`sensormodel.allan`, which exports them)."""

from __future__ import annotations

import dataclasses
import math
import threading
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from .. import validate
from ..confidence import DEFAULT_CONFIDENCE, chi2_interval, edf_cached
from ..errors import AnalysisError
from . import _stream
from ._curve import AllanCurve
from ._noise import _identify_all, _noise_types
from ._samples import _as_samples, _block_sumsq, _check_finite_mean, _phase, averaging_factors

__all__ = [
    "overlapping",
    "overlapping_many",
    "second_difference_sums",
    "aligned_scratch",
]

#: Second differences per block of the engine: 2^16 float64 = 512 KiB per slice, so the few
#: slices touched per τ stay in a 2 MiB L2 cache (measured fastest of 2^14…2^17 here).
_BLOCK = 1 << 16
#: Second differences per work chunk (16 blocks): the unit of work the workers share. Each
#: chunk's sums are kept apart and added exactly at the end (``math.fsum``), so a result does
#: not depend on how many workers computed it, nor on which other records were analysed with it.
_CHUNK = 16 * _BLOCK
#: Below this many samples the engine stays in the calling thread (thread start-up dominates).
_THREAD_MIN_SAMPLES = 1 << 20

ProgressCallback = Callable[[int, int], Any]


# ---------------------------------------------------------------------------------------------
# Second-difference sums
# ---------------------------------------------------------------------------------------------


def aligned_scratch(size: int) -> np.ndarray:
    """A float64 scratch array starting on a 64-byte boundary, so that every chunk's sums are
    formed on identically aligned data whichever worker computes them."""
    raw = np.empty(size + 8, dtype=np.float64)
    offset = (-raw.ctypes.data % 64) // 8
    return raw[offset : offset + size]


def second_difference_sums(
    x: np.ndarray, ms: np.ndarray, lo: int, hi: int, buf: np.ndarray
) -> np.ndarray:
    """Σ_i (x[i+2m] − 2x[i+m] + x[i])² over lo ≤ i < min(hi, N − 2m), for every m, block-major.

    ``buf`` is a scratch array of ``_BLOCK`` values (see :func:`aligned_scratch`).
    """
    n_phase = x.shape[0]
    mlist = [int(m) for m in ms]
    ends = [n_phase - 2 * m for m in mlist]
    sums = [0.0] * len(mlist)
    for i0 in range(lo, hi, _BLOCK):
        i1 = min(i0 + _BLOCK, hi)
        x0 = x[i0:i1]
        for k, m in enumerate(mlist):
            e = min(i1, ends[k])
            if e <= i0:
                break  # the factors are sorted, so the later ones end even earlier
            sums[k] += _block_sumsq(
                x0[: e - i0], x[i0 + m : e + m], x[i0 + 2 * m : e + 2 * m], buf[: e - i0]
            )
    return np.array(sums)


# ---------------------------------------------------------------------------------------------
# The schedule: records, chunks and workers
# ---------------------------------------------------------------------------------------------

_WAITING, _BUILDING, _READY, _FINISHING, _DONE = range(5)


@dataclass(eq=False)
class _Job:
    """One record on the engine's schedule; its mutable state is guarded by the schedule's lock.

    Its tasks: ``build`` (mean and phase), then ``identify`` (noise types, when not given) and
    one ``chunk`` per ``_CHUNK`` second differences, in any order and on any worker, then
    ``finish`` (deviations, EDF, intervals), which releases the phase array.
    """

    index: int
    arr: np.ndarray
    name: str
    rate: float
    scale: float
    ms: np.ndarray
    fixed: np.ndarray | None
    confidence: float
    unit: str
    channel: str
    chunks: list[tuple[int, int]]
    chunk_work: list[int]
    sums: np.ndarray
    mean: float = 0.0
    x: np.ndarray | None = None
    alphas: np.ndarray | None = None
    state: int = _WAITING
    next_chunk: int = 0
    identify_taken: bool = False
    running: int = 0
    curve: AllanCurve | None = None

    @property
    def n(self) -> int:
        return int(self.arr.shape[0])

    @property
    def work(self) -> int:
        """Work units of the progress callback: samples read plus second differences summed."""
        return self.n + sum(self.chunk_work)


@dataclass(frozen=True)
class _Request:
    """The keyword arguments every public function shares, applied to each of its records."""

    taus: Any
    confidence: Any
    noise_type: Any
    workers: Any
    #: The worker count's argument name in messages (``threads`` or ``workers``).
    workers_name: str
    progress: ProgressCallback | None


def _job(
    index: int, y: Any, rate: float, scale: float, label: tuple[str, str, str], request: _Request
) -> _Job:
    """Check one record's arguments and lay out its chunks (no pass over the samples yet).

    ``label`` is (name in messages, channel id, unit label); ``request.confidence`` is checked.
    """
    name, channel, unit = label
    arr = _as_samples(y, name)
    n = arr.shape[0]
    ms = averaging_factors(n, rate, request.taus)
    fixed = _noise_types(request.noise_type, len(ms))
    n_phase = n + 1
    n_diff = n_phase - 2 * ms
    ends = [int(e) for e in n_diff]
    chunks = [(lo, min(ends[0], lo + _CHUNK)) for lo in range(0, ends[0], _CHUNK)]
    work = [sum(max(0, min(hi, e) - lo) for e in ends) for lo, hi in chunks]
    return _Job(
        index=index,
        arr=arr,
        name=name,
        rate=rate,
        scale=scale,
        ms=ms,
        fixed=fixed,
        confidence=request.confidence,
        unit=unit,
        channel=channel,
        chunks=chunks,
        chunk_work=work,
        sums=np.zeros((len(chunks), len(ms))),
    )


def _finish(job: _Job) -> AllanCurve:
    """Deviations, EDF and intervals of a record whose sums and noise types are complete."""
    ms = job.ms
    n_phase = job.n + 1
    n_diff = n_phase - 2 * ms
    # exact sum of the chunks' partial sums: independent of the order they were computed in
    sums = np.array([math.fsum(job.sums[:, k]) for k in range(ms.shape[0])])
    tau0 = 1.0 / job.rate
    # x is in [unit·s] both for rate samples (scale = τ0) and for increments (scale = 1)
    avar = sums / (2.0 * (ms * tau0) ** 2 * n_diff)
    adev = np.sqrt(avar)
    alphas = job.fixed if job.fixed is not None else job.alphas
    assert alphas is not None
    nu = np.array([edf_cached(int(a), int(m), n_phase) for a, m in zip(alphas, ms, strict=True)])
    low, high = chi2_interval(adev, nu, job.confidence)
    return AllanCurve(
        tau=ms * tau0,
        adev=adev,
        ci_low=low,
        ci_high=high,
        edf=nu,
        sample_rate=job.rate,
        confidence=job.confidence,
        unit=job.unit,
        channel=job.channel,
        n_samples=job.n,
        n_clusters=n_diff,
        noise_alpha=alphas,
    )


class _Schedule:
    """Runs the tasks of several records on ``workers`` threads, earliest record first.

    A worker always takes the first available task of the earliest unfinished record, so all
    workers share the chunks of one record (one phase array in the caches) and the next record's
    phase is built by the first worker that runs out of chunks. At most ``workers`` phase arrays
    exist at once; a finished record's array is reused for the next one (no fresh pages to
    fault in). numpy releases the GIL in every loop the tasks run.
    """

    def __init__(self, jobs: list[_Job], workers: int) -> None:
        self.jobs = jobs
        self.workers = workers
        self.cond = threading.Condition()
        self.live = 0
        self.spare: list[np.ndarray] = []
        self.first = 0
        self.finished = 0
        self.done_work = 0
        self.total_work = sum(job.work for job in jobs)
        self.errors: list[tuple[int, BaseException]] = []

    # -- under the lock ----------------------------------------------------------------------

    def _buffer(self, size: int) -> np.ndarray | None:
        fits = [i for i, b in enumerate(self.spare) if b.shape[0] >= size]
        if fits:
            best = min(fits, key=lambda i: self.spare[i].shape[0])
            return self.spare.pop(best)[:size]
        if self.spare:
            self.spare.pop()  # too small: let it go before a larger one is allocated
        return None

    def _take(self) -> tuple[str, _Job, Any] | None:
        while self.first < len(self.jobs) and self.jobs[self.first].state == _DONE:
            self.first += 1
        for job in self.jobs[self.first :]:
            if job.state == _READY:
                if job.fixed is None and not job.identify_taken:
                    job.identify_taken = True
                    job.running += 1
                    return "identify", job, None
                if job.next_chunk < len(job.chunks):
                    job.next_chunk += 1
                    job.running += 1
                    return "chunk", job, job.next_chunk - 1
                if job.running == 0:
                    job.state = _FINISHING
                    return "finish", job, None
            elif job.state == _WAITING:
                if self.live >= self.workers:
                    return None
                job.state = _BUILDING
                self.live += 1
                return "build", job, self._buffer(job.n + 1)
        return None

    def _apply(self, kind: str, job: _Job, arg: Any, result: Any) -> None:
        if kind == "build":
            job.mean, job.x = result
            job.state = _READY
            self.done_work += job.n
        elif kind == "identify":
            job.alphas = result
            job.running -= 1
        elif kind == "chunk":
            job.sums[arg] = result
            job.running -= 1
            self.done_work += job.chunk_work[arg]
        else:
            job.curve = result
            job.state = _DONE
            if job.x is not None:
                self.spare.append(job.x.base if job.x.base is not None else job.x)
            job.x = None
            self.live -= 1
            self.finished += 1

    # -- outside the lock --------------------------------------------------------------------

    @staticmethod
    def _execute(kind: str, job: _Job, arg: Any, scratch: np.ndarray) -> Any:
        if kind == "build":
            mean = _check_finite_mean(job.arr, job.name)
            x = _phase(job.arr, mean, job.scale, out=arg)
            _stream.release(job.arr)  # a mapped record's pages: one record's at a time
            return mean, x
        assert job.x is not None
        if kind == "identify":
            return _identify_all(job.x, job.ms)
        if kind == "chunk":
            lo, hi = job.chunks[arg]
            return second_difference_sums(job.x, job.ms, lo, hi, scratch)
        return _finish(job)

    def _work(self) -> None:
        scratch = aligned_scratch(_BLOCK)
        task: tuple[str, _Job, Any] | None = None
        try:
            while True:
                with self.cond:
                    task = None
                    while True:
                        if self.errors or self.finished == len(self.jobs):
                            return
                        task = self._take()
                        if task is not None:
                            break
                        self.cond.wait()
                result = self._execute(*task, scratch)
                with self.cond:
                    self._apply(*task, result)
                    self.cond.notify_all()
        except BaseException as exc:  # handed to the calling thread
            with self.cond:
                self.errors.append((task[1].index if task is not None else -1, exc))
                self.cond.notify_all()

    def run(self, progress: ProgressCallback | None) -> list[AllanCurve]:
        """Run every task; ``progress(done, total)`` is called from the calling thread."""
        if self.workers <= 1:
            scratch = aligned_scratch(_BLOCK)
            while self.finished < len(self.jobs):
                task = self._take()
                assert task is not None  # one worker never waits on another
                self._apply(*task, self._execute(*task, scratch))
                if progress is not None:
                    progress(self.done_work, self.total_work)
        else:
            threads = [
                threading.Thread(target=self._work, name=f"allan-{i}", daemon=True)
                for i in range(self.workers)
            ]
            for t in threads:
                t.start()
            try:
                while True:
                    with self.cond:
                        if self.errors or self.finished == len(self.jobs):
                            break
                        self.cond.wait(timeout=0.1)
                        done = self.done_work
                    if progress is not None:
                        progress(done, self.total_work)
            except BaseException as exc:  # e.g. KeyboardInterrupt: stop the workers first
                with self.cond:
                    self.errors.append((-1, exc))
                    self.cond.notify_all()
                raise
            finally:
                for t in threads:
                    t.join()
            if self.errors:
                raise min(self.errors, key=lambda e: e[0])[1]
        if progress is not None:
            progress(self.total_work, self.total_work)
        return [job.curve for job in self.jobs if job.curve is not None]


def _default_workers(jobs: list[_Job]) -> int:
    """Up to one worker per usable CPU, none beside the caller for small work."""
    if sum(job.n for job in jobs) < _THREAD_MIN_SAMPLES:
        return 1
    tasks = sum(len(job.chunks) + (job.fixed is None) for job in jobs)
    return max(1, min(validate.usable_cpus(), tasks))


# ---------------------------------------------------------------------------------------------
# The computation
# ---------------------------------------------------------------------------------------------


def _run(
    items: list[Any],
    rate: Any,
    labels: tuple[list[str], list[str], list[str]],
    increments: bool,
    request: _Request,
) -> list[AllanCurve]:
    """The one path of every public function: check, lay out the jobs, run the schedule.

    ``labels`` is (names in messages, channel ids, unit labels), one of each per record.
    """
    rate = validate.rate(rate)
    confidence = validate.probability(request.confidence, "confidence", example="0.683")
    request = dataclasses.replace(request, confidence=confidence)
    count = validate.workers(request.workers, request.workers_name)
    scale = 1.0 if increments else 1.0 / rate
    jobs = [
        _job(i, y, rate, scale, label, request)
        for i, (y, label) in enumerate(zip(items, zip(*labels, strict=True), strict=True))
    ]
    if count is None:
        count = _default_workers(jobs)
    if 8 * sum(job.n for job in jobs) > _stream.stream_limit():
        # larger than memory: the out-of-core path fills the sums, then the same finish
        _stream.run_streamed(jobs, count, lambda: aligned_scratch(_BLOCK), request.progress)
        return [_finish(job) for job in jobs]
    return _Schedule(jobs, count).run(request.progress)


def _records(records: Any) -> list[Any]:
    """The records of :func:`overlapping_many` as a list (a 2-D array or one record refused)."""
    if isinstance(records, np.ndarray) and records.ndim != 1:
        raise AnalysisError(
            f"got an array of shape {records.shape}",
            "a sequence of 1-D arrays, one per record (list(a.T) for one record per column)",
            field="records",
        )
    items = list(records)
    if isinstance(records, np.ndarray) or (items and np.isscalar(items[0])):
        raise AnalysisError(
            "got one array of samples",
            "a sequence of 1-D arrays, one per record ([y] for a single record)",
            field="records",
        )
    if not items:
        raise AnalysisError("got no records", "at least one array of samples", field="records")
    return items


def _labels(
    k: int, units: str | Iterable[str], channels: Iterable[str] | None
) -> tuple[list[str], list[str], list[str]]:
    """(names in messages, channel ids, unit labels) of ``k`` records."""
    unit_list = [units] * k if isinstance(units, str) else list(units)
    if len(unit_list) != k or not all(isinstance(u, str) for u in unit_list):
        raise AnalysisError(
            f"got {units!r} for {k} records", f"one unit label, or {k} labels", field="units"
        )
    if channels is None:
        ids = ["signal"] if k == 1 else [f"signal#{i + 1}" for i in range(k)]
        return [f"records[{i}]" for i in range(k)], ids, unit_list
    ids = list(channels)
    if len(ids) != k or not all(isinstance(c, str) and c for c in ids):
        raise AnalysisError(
            f"got {channels!r} for {k} records", f"{k} channel ids", field="channels"
        )
    return ids, ids, unit_list


def overlapping(
    y: npt.ArrayLike,
    rate: float,
    *,
    taus: Any = None,
    confidence: float = DEFAULT_CONFIDENCE,
    noise_type: Any = "auto",
    unit: str = "1",
    channel: str = "signal",
    increments: bool = False,
    threads: int | None = None,
    progress: ProgressCallback | None = None,
) -> AllanCurve:
    """Overlapping Allan deviation of rate samples (or of the rate behind increments), with
    chi-square confidence intervals.

    The estimator of IEEE Std 1139-2008 / NIST SP 1065 section 5.2.4 eq. (11) on the phase
    form x = cumsum(y − ȳ)/rate (see the module notes); the EDF of Greenhall & Riley (2003) with
    the noise type decided at each τ (the lag-1 autocorrelation method of Riley & Greenhall
    2004, or the local Allan-variance slope with the conservative type where it is undecided);
    the interval of SP 1065 eq. (45).

    Parameters
    ----------
    y : array_like
        Rate samples (e.g. angular rate [rad/s]), uniformly spaced, 1-D, finite. A
        :class:`numpy.memmap` is read block by block and copied once into the phase array.
    rate : float
        Sample rate [Hz]; τ0 = 1/rate.
    taus : None, str or array_like
        τ grid: ``None``/``"octave"``, ``"decade"``, ``"N/decade"`` or τ values [s]
        (see :func:`tau_grid`).
    confidence : float
        Two-sided confidence of the intervals (default 0.683).
    noise_type : "auto", int or sequence of int
        α of the rate PSD S_y ∝ f^α used for the EDF: ``"auto"`` decides it at each τ from
        the record at and around that τ alone, so it does not depend on the other τ requested:
        the lag-1 autocorrelation where 100 decimated points remain, else the local slope of
        the Allan variance on a fixed octave grid of the record (narrowed by the lag-1 answer
        from 30 points), and where that leaves more than one type (always for white against
        flicker angle noise) the one with the fewest degrees of freedom, the widest interval.
        An int fixes it for all τ; a sequence gives one per τ of the grid.
    unit : str
        Unit label of ``y``, kept in the result for display and files (no conversion).
    channel : str
        Channel id kept in the result.
    increments : bool
        ``y`` holds increments per sample period (angle increments Δθ [rad], velocity
        increments Δv [m/s]), the native output of many navigation-grade units: the phase is
        x = cumsum(y − mean) directly, with no division by the rate, so the rate is never
        formed. The result is the Allan deviation of the rate y·rate, in [unit of y]/s
        (give ``unit`` as that rate's unit, e.g. ``"rad/s"``), identical to rounding to
        ``overlapping(y * rate, rate)``.
    threads : int, optional
        Threads for the engine (default: one per usable CPU for records of 2^20 samples or
        more, else the calling thread only). Results do not depend on it, to the bit.
    progress : callable, optional
        ``progress(done, total)`` is called from the calling thread as the work advances
        (work units are samples processed; ``done == total`` at the end). Nothing is printed.

    Returns
    -------
    AllanCurve
        τ [s], deviation, interval and EDF per τ, in the unit of ``y``.

    Raises
    ------
    AnalysisError
        Naming the argument: fewer than 3 samples, a non-finite sample (by index), a rate that is
        not a positive number, a τ shorter than half a sample or longer than the record allows,
        a confidence outside (0, 1), an unknown noise type.

    Notes
    -----
    White rate noise of density N (ARW, IEEE Std 952 convention, two-sided PSD N²) sampled at
    ``rate`` has ADEV(τ) = N/√τ (IEEE Std 952-1997, Annex C). The result agrees with
    ``allantools.oadev(y, rate=rate, data_type="freq")`` to rounding: the phase is formed the
    same way.

    Examples
    --------
    >>> import numpy as np
    >>> from sensormodel.allan import overlapping
    >>> y = np.random.default_rng(1).normal(0.0, 0.01, 100_000)   # rad/s at 100 Hz
    >>> curve = overlapping(y, 100.0, taus=[0.01, 1.0])
    >>> np.round(curve.adev * np.sqrt(curve.tau) / (0.01 * np.sqrt(0.01)), 1)
    array([1., 1.])
    """
    request = _Request(taus, confidence, noise_type, threads, "threads", progress)
    name = "dx" if increments else "y"
    (curve,) = _run([y], rate, ([name], [channel], [unit]), bool(increments), request)
    return curve


def overlapping_many(
    records: Iterable[npt.ArrayLike],
    rate: float,
    *,
    taus: Any = None,
    confidence: float = DEFAULT_CONFIDENCE,
    noise_type: Any = "auto",
    units: str | Iterable[str] = "1",
    channels: Iterable[str] | None = None,
    increments: bool = False,
    workers: int | None = None,
    progress: ProgressCallback | None = None,
) -> list[AllanCurve]:
    """Overlapping Allan deviation of several records (channels, segments) at one sample rate.

    Each result is bit-for-bit the :func:`overlapping` curve (with the same ``increments``)
    of its record, whatever ``workers`` is: every record's second-difference sums are
    formed in fixed chunks of 2^20 and the chunks added exactly (``math.fsum``). The records
    share one pool of worker threads: all workers take chunks of the earliest unfinished record
    (one phase array in the caches at a time), the noise identification runs beside its chunks,
    and the next record's phase is built by the first worker that runs out of chunks, so there
    is no per-record serial step left idle on the other cores. At most ``workers`` phase arrays
    (8 (n + 1) bytes each) exist at once, and a finished record's array is reused.

    Parameters
    ----------
    records : iterable of array_like
        One 1-D array of rate samples per record (e.g. angular rate [rad/s]), or of increments
        per sample period with ``increments=True``; lengths may differ. A 2-D array is refused
        (pass ``list(a.T)`` for one record per column).
    rate : float
        Sample rate of every record [Hz]; τ0 = 1/rate.
    taus : None, str or array_like
        τ grid for every record, as for :func:`overlapping` (generated grids follow each
        record's length).
    confidence : float
        Two-sided confidence of the intervals (default 0.683).
    noise_type : "auto", int or sequence of int
        As for :func:`overlapping`, applied to every record.
    units : str or iterable of str
        Unit label of the samples' rate (one for all records, or one per record); display only.
    channels : iterable of str, optional
        Channel id of each record (default ``signal#1``, ``signal#2``, …); also names the record
        in error messages.
    increments : bool
        The records hold increments per sample period, as for :func:`overlapping`.
    workers : int, optional
        Worker threads (default: one per usable CPU when the records hold 2^20 samples or more
        in all, else none beside the caller). Results do not depend on it.
    progress : callable, optional
        ``progress(done, total)`` for all records together, called from the calling thread
        (work units are samples read and second differences summed; ``done == total`` at the
        end). Nothing is printed.

    Returns
    -------
    list of AllanCurve
        One curve per record, in the order given, in the unit of the record's rate.

    Raises
    ------
    AnalysisError
        As for :func:`overlapping`, naming the record by its channel id (or ``records[i]``);
        no records; a units or channels list of the wrong length; a bad ``workers``.

    Examples
    --------
    >>> import numpy as np
    >>> from sensormodel.allan import overlapping, overlapping_many
    >>> rng = np.random.default_rng(2)
    >>> gyro = [rng.normal(0.0, 0.01, 50_000) for _ in range(3)]   # rad/s at 100 Hz
    >>> curves = overlapping_many(gyro, 100.0, channels=["gyro.x", "gyro.y", "gyro.z"])
    >>> [c.channel for c in curves]
    ['gyro.x', 'gyro.y', 'gyro.z']
    >>> bool(np.array_equal(curves[2].adev, overlapping(gyro[2], 100.0).adev))
    True
    """
    items = _records(records)
    request = _Request(taus, confidence, noise_type, workers, "workers", progress)
    return _run(items, rate, _labels(len(items), units, channels), increments, request)
