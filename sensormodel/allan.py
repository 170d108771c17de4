"""Overlapping Allan deviation of recordings, with confidence intervals.

The estimator is the overlapping Allan variance of IEEE Std 1139-2008 and NIST SP 1065 (W. J.
Riley, "Handbook of Frequency Stability Analysis", 2008, section 5.2.4, eq. (11)), written on the
phase (integrated) form of the rate samples ``y`` taken at ``rate`` [Hz], τ0 = 1/rate::

    x[0] = 0,  x[k] = τ0 · Σ_{j<k} (y[j] − ȳ)          (N = n + 1 phase points)
    AVAR(τ = m τ0) = Σ_{i=0}^{N−2m−1} (x[i+2m] − 2 x[i+m] + x[i])² / (2 m² τ0² (N − 2m))

Subtracting the mean ȳ before integrating changes nothing in exact arithmetic (a linear phase is
annihilated by the second difference) and keeps the phase small, hence precise. The unit of the
deviation is the unit of ``y`` (rad/s for a gyro in SI, or whatever the samples are in).

Engine
------
One float64 phase array is built block by block (the only copy of the input; a
:class:`numpy.memmap` is read block by block), then every τ is evaluated block-major: for each
block of ``_BLOCK`` second differences, all τ of the grid are accumulated while the phase slices
are still in cache, so the memory traffic per τ is about one stream instead of three. The index
range is cut into fixed chunks of 2^20 second differences that worker threads share (numpy
releases the GIL in its loops; the phase array is only read); each chunk's sums are kept and the
chunks added exactly (``math.fsum``), so a result does not depend on the number of threads, to
the bit. The noise identification runs beside the chunks. Several records
(:func:`overlapping_many`) share one pool of workers: all take chunks of the earliest unfinished
record, and the next record's phase is built by the first worker that runs out of chunks; at
most one phase array per worker exists at a time, and a finished record's array is reused.
Peak memory is the phase array (8 (n+1) bytes) plus a few blocks per thread.

Precision: the phase is formed exactly as ``allantools.frequency2phase`` forms it (mean removed,
sequential cumulative sum, then scaled), so the second differences are bit-for-bit the same and
results agree to the rounding of the final sums (~1e-15). Both carry the rounding of the phase,
about eps·max|x|: a record dominated by random-walk rate noise has a phase growing like n^1.5, so
at τ = τ0 over 10^7 samples the deviation keeps about 9 significant digits (far below its
statistical uncertainty).

Uncertainty
-----------
The confidence interval at each τ is the chi-square interval of SP 1065 eq. (45) with the
equivalent degrees of freedom (EDF) of C. A. Greenhall and W. J. Riley, "Uncertainty of
stability variances based on finite differences", Proc. 35th PTTI Meeting (2003), for the
overlapped, unmodified Allan variance. The EDF depends on the power-law noise type α at each τ
(one-sided PSD of the rate S_y(f) ∝ f^α: α = 2 white angle noise, 0 white rate noise, −1 flicker
rate noise, −2 random-walk rate noise), identified from the data by the lag-1 autocorrelation
method of W. J. Riley and C. A. Greenhall, "Power law noise identification using the lag 1
autocorrelation", Proc. 18th EFTF (2004), or given by the caller.

Numbers of the trade: ``n_clusters`` in an :class:`AllanCurve` is the number of overlapping
second differences N − 2m = n + 1 − 2m that enter the sum (``n_independent`` gives the number of
non-overlapping clusters ⌊n/m⌋ for comparison).
"""

from __future__ import annotations

import csv
import functools
import io
import math
import os
import re
import threading
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from .confidence import DEFAULT_CONFIDENCE, chi2_interval
from .errors import AnalysisError, ModelFileError, SensorModelError

__all__ = [
    "AllanCurve",
    "overlapping",
    "overlapping_from_increments",
    "overlapping_many",
    "tau_grid",
    "averaging_factors",
    "noise_alpha",
    "edf",
    "edf_greenhall",
    "edf_simple",
    "chi2_interval",
    "curves_to_json",
    "curves_from_json",
    "csv_rows",
    "curves_to_csv",
    "curves_from_csv",
    "SCHEMA_ID",
    "SCHEMA_FILE",
    "DEFAULT_CONFIDENCE",
    "NOISE_ALPHAS",
]

#: Identifier written in the ``schema`` field of an Allan-curve JSON document (DESIGN §5).
SCHEMA_ID = "sensormodel/allan-curve/1"
#: The JSON Schema file of that document in ``schemas/``.
SCHEMA_FILE = "allan-curve.schema.json"
#: Power-law exponents α of the rate PSD for which the EDF is defined here (d = 2, AVAR).
NOISE_ALPHAS = (2, 1, 0, -1, -2)
#: Names of the power-law types (time-and-frequency names; the inertial meaning in brackets).
NOISE_NAMES = {
    2: "white PM (white angle noise)",
    1: "flicker PM (flicker angle noise)",
    0: "white FM (white rate noise, angle/velocity random walk)",
    -1: "flicker FM (flicker rate noise, bias instability)",
    -2: "random-walk FM (rate/acceleration random walk)",
}

#: Second differences per block of the engine: 2^16 float64 = 512 KiB per slice, so the few
#: slices touched per τ stay in a 2 MiB L2 cache (measured fastest of 2^14…2^17 here).
_BLOCK = 1 << 16
#: Second differences per work chunk (16 blocks): the unit of work the workers share. Each
#: chunk's sums are kept apart and added exactly at the end (``math.fsum``), so a result does
#: not depend on how many workers computed it, nor on which other records were analysed with it.
_CHUNK = 16 * _BLOCK
#: Below this many samples the engine stays in the calling thread (thread start-up dominates).
_THREAD_MIN_SAMPLES = 1 << 20
#: Fewest decimated phase points for the lag-1 autocorrelation noise identification. Riley &
#: Greenhall (2004) suggest about 30 (from memory); seeded simulations here (300 records per
#: case) identified white rate noise correctly in 77 % of records at 33 points, 89 % at 50 and
#: 97 % at 100 (white angle and random-walk rate noise ≥ 97 % throughout), and a white record
#: taken for angle noise gets a far too large EDF, so 100 points are required; longer τ keep the
#: α of the nearest τ that had them.
_ID_MIN_POINTS = 100
#: Decision bounds on the unrounded estimate after two differences when m > 1 (block-averaged
#: rate): (random walk | flicker, flicker | white). Averaging over m biases the lag-1
#: autocorrelation of the differenced block means: for random-walk rate noise r1 → 1/4
#: (estimate −2.4), for flicker rate noise r1 → −0.2169 (estimate −1.446), both derived here from
#: the generalized autocovariances |t|³ and t² ln|t| of the phase, and seen in seeded
#: simulations (−2.37…−2.44 and −1.40…−1.44 at m = 4…256). Plain rounding puts the
#: flicker/random-walk bound at −1.5, right beside the flicker value, so the bounds are set at
#: the midpoints −1.92 (between −1.446 and −2.4) and −0.72 (between −1.446 and 0, white noise
#: differenced once too often). For m = 1 there is no averaging and plain rounding is kept.
_AVERAGED_BOUNDS = (-1.92, -0.72)
#: Most decimated phase points used for the identification (in 4 spread segments beyond it);
#: the lag-1 autocorrelation then has a standard error of about 1/sqrt(65536) = 0.004.
_ID_MAX_POINTS = 1 << 16
#: α assumed when no τ of the record has enough points for the identification (very short
#: records): white rate noise, the usual dominant term at short τ (common practice).
_ID_FALLBACK_ALPHA = 0

ProgressCallback = Callable[[int, int], Any]


# ---------------------------------------------------------------------------------------------
# Argument checks (each names the argument)
# ---------------------------------------------------------------------------------------------


def _check_rate(rate: Any, name: str = "rate") -> float:
    try:
        value = float(rate)
    except (TypeError, ValueError):
        raise AnalysisError(
            f"got {rate!r}", "a sample rate in Hz (a positive number)", field=name
        ) from None
    if not math.isfinite(value) or value <= 0.0:
        raise AnalysisError(f"got {value!r} Hz", "a finite sample rate > 0 Hz", field=name)
    return value


def _check_confidence(confidence: Any) -> float:
    try:
        c = float(confidence)
    except (TypeError, ValueError):
        raise AnalysisError(
            f"got {confidence!r}", "a probability between 0 and 1", field="confidence"
        ) from None
    if not (0.0 < c < 1.0):
        raise AnalysisError(
            f"got {c!r}", "a probability strictly between 0 and 1, e.g. 0.683", field="confidence"
        )
    return c


def _as_samples(y: Any, name: str) -> np.ndarray:
    """The samples as a 1-D real array without copying (a memmap stays a memmap)."""
    arr = y if isinstance(y, np.ndarray) else np.asarray(y)
    if arr.dtype == object or not (
        np.issubdtype(arr.dtype, np.floating) or np.issubdtype(arr.dtype, np.integer)
    ):
        raise AnalysisError(
            f"got an array of {arr.dtype}", "real numbers (float or integer samples)", field=name
        )
    if arr.ndim != 1:
        raise AnalysisError(
            f"got an array of shape {arr.shape}", "a 1-D array of samples (one channel)", field=name
        )
    n = arr.shape[0]
    if n < 3:
        what = "no samples" if n == 0 else f"{n} sample{'s' if n > 1 else ''}"
        raise AnalysisError(
            f"got {what}", "at least 3 samples (two overlapping differences at τ = τ0)", field=name
        )
    return arr


def _check_finite_mean(arr: np.ndarray, name: str) -> float:
    """The mean of the samples in float64; a non-finite sample is refused by index."""
    mean = float(np.mean(arr, dtype=np.float64))
    if math.isfinite(mean):
        return mean
    for i0 in range(0, arr.shape[0], 1 << 20):
        block = np.asarray(arr[i0 : i0 + (1 << 20)], dtype=np.float64)
        bad = np.flatnonzero(~np.isfinite(block))
        if bad.size:
            i = i0 + int(bad[0])
            raise AnalysisError(
                f"sample {i} is {float(block[bad[0]])!r}",
                "finite samples only (cut the record at gaps, or repair them, before the analysis)",
                field=name,
            )
    raise AnalysisError(
        "the samples are too large to sum in float64", "samples below about 1e300", field=name
    )


# ---------------------------------------------------------------------------------------------
# τ grids
# ---------------------------------------------------------------------------------------------

_PER_DECADE = re.compile(r"^\s*(\d+)\s*/\s*decade\s*$")


def _max_factor(n: int) -> int:
    """Largest m with at least two overlapping second differences: n + 1 − 2m ≥ 2."""
    return (n - 1) // 2


def averaging_factors(n: int, rate: float, taus: Any = None) -> np.ndarray:
    """Averaging factors m (τ = m/rate) of a τ specification for ``n`` samples at ``rate``.

    See :func:`tau_grid` for the specification; returns sorted unique int64 factors.
    """
    n = int(n)
    if n < 3:
        raise AnalysisError(
            f"got {n} samples", "at least 3 samples (two overlapping differences)", field="n"
        )
    rate = _check_rate(rate)
    m_max = _max_factor(n)
    if taus is None:
        taus = "octave"
    if isinstance(taus, str):
        spec = taus.strip().lower()
        if spec == "octave":
            return 2 ** np.arange(int(math.floor(math.log2(m_max))) + 1, dtype=np.int64)
        if spec == "decade":
            per = 1
        else:
            match = _PER_DECADE.match(spec)
            if not match or int(match.group(1)) < 1:
                raise AnalysisError(
                    f"got {taus!r}",
                    "'octave', 'decade', 'N/decade' (N a whole number ≥ 1, e.g. '10/decade') "
                    "or τ values in seconds",
                    field="taus",
                )
            per = int(match.group(1))
        k_max = int(math.floor(per * math.log10(m_max) + 1e-9))
        m = np.unique(np.rint(10.0 ** (np.arange(k_max + 1) / per)).astype(np.int64))
        return m[m <= m_max]
    try:
        tau = np.asarray(taus, dtype=np.float64).ravel()
    except (TypeError, ValueError):
        raise AnalysisError(
            f"got {taus!r}", "'octave', 'decade', 'N/decade' or τ values in seconds", field="taus"
        ) from None
    if tau.size == 0:
        raise AnalysisError("got no τ values", "at least one τ in seconds", field="taus")
    for t in tau:
        if not math.isfinite(t) or t <= 0.0:
            raise AnalysisError(f"got τ = {float(t)!r} s", "τ values > 0 s", field="taus")
    m = np.rint(tau * rate)
    for t, mi in zip(tau, m, strict=True):
        if mi < 1:
            raise AnalysisError(
                f"τ = {t:g} s is shorter than half the sample period (τ0 = {1.0 / rate:g} s)",
                f"τ ≥ {0.5 / rate:g} s (it is rounded to a whole number of samples)",
                field="taus",
            )
        if mi > m_max:
            raise AnalysisError(
                f"τ = {t:g} s needs {int(mi)} samples per cluster, but {n} samples allow at most "
                f"{m_max} (two overlapping differences)",
                f"τ ≤ {m_max / rate:g} s for this record, or a longer record",
                field="taus",
            )
    return np.unique(m.astype(np.int64))


def tau_grid(n: int, rate: float, spec: Any = None) -> npt.NDArray[np.float64]:
    """The averaging times τ [s] of a τ specification for ``n`` rate samples at ``rate`` [Hz].

    Parameters
    ----------
    n : int
        Number of rate samples (N = n + 1 phase points).
    rate : float
        Sample rate [Hz]; τ0 = 1/rate.
    spec : None, str or array_like
        ``None`` or ``"octave"``: m = 1, 2, 4, 8, …; ``"decade"``: m = 1, 10, 100, …;
        ``"N/decade"`` (e.g. ``"10/decade"``): m = round(10^(k/N)), duplicates removed;
        an array of τ [s]: each rounded to the nearest whole m = τ·rate, duplicates removed, and
        refused (:class:`~sensormodel.errors.AnalysisError` naming the τ) where m < 1 or where
        fewer than two overlapping differences remain. Generated grids stop at the same limit,
        m ≤ (n − 1)/2.

    Returns
    -------
    tau : ndarray
        Sorted averaging times m/rate [s].
    """
    rate = _check_rate(rate)
    return averaging_factors(n, rate, spec).astype(np.float64) / rate


# ---------------------------------------------------------------------------------------------
# The engine
# ---------------------------------------------------------------------------------------------


def _phase(
    arr: np.ndarray,
    mean: float,
    scale: float,
    *,
    out: np.ndarray | None = None,
    block: int = 1 << 20,
) -> np.ndarray:
    """x[0] = 0, x[k] = scale·Σ_{j<k}(arr[j] − mean), built block by block in one float64 array.

    The running sum is carried into the first element of each block before the block's
    cumulative sum, so the result is bit-for-bit the one-pass ``np.cumsum(arr - mean) * scale``.
    ``out`` (n + 1 float64 values) is filled when given, e.g. a buffer reused across records.
    """
    n = arr.shape[0]
    x = np.empty(n + 1, dtype=np.float64) if out is None else out
    x[0] = 0.0
    carry = 0.0
    for i0 in range(0, n, block):
        i1 = min(n, i0 + block)
        seg = x[1 + i0 : 1 + i1]
        np.subtract(arr[i0:i1], mean, out=seg, dtype=np.float64)
        seg[0] += carry
        np.cumsum(seg, out=seg)
        carry = float(seg[-1])
        if scale != 1.0:
            seg *= scale
    return x


def _sumsq(b: np.ndarray) -> float:
    """Σ b² without BLAS (a threaded BLAS dot inside our own threads oversubscribes the cores)."""
    return float(np.einsum("i,i->", b, b))


def _aligned_scratch(size: int) -> np.ndarray:
    """A float64 scratch array starting on a 64-byte boundary, so that every chunk's sums are
    formed on identically aligned data whichever worker computes them."""
    raw = np.empty(size + 8, dtype=np.float64)
    offset = (-raw.ctypes.data % 64) // 8
    return raw[offset : offset + size]


def _chunk_sums(x: np.ndarray, ms: np.ndarray, lo: int, hi: int, buf: np.ndarray) -> np.ndarray:
    """Σ_i (x[i+2m] − 2x[i+m] + x[i])² over lo ≤ i < min(hi, N − 2m), for every m, block-major.

    ``buf`` is a scratch array of ``_BLOCK`` values (see :func:`_aligned_scratch`).
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
            b = buf[: e - i0]
            # the textbook operation order, (x2 − 2·x1) + x0
            np.multiply(x[i0 + m : e + m], 2.0, out=b)
            np.subtract(x[i0 + 2 * m : e + 2 * m], b, out=b)
            np.add(b, x0[: e - i0], out=b)
            sums[k] += _sumsq(b)
    return np.array(sums)


def _usable_cpus() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        return os.cpu_count() or 1


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


def _job(
    index: int,
    y: Any,
    rate: float,
    scale: float,
    *,
    name: str,
    taus: Any,
    confidence: float,
    noise_type: Any,
    unit: str,
    channel: str,
) -> _Job:
    """Check one record's arguments and lay out its chunks (no pass over the samples yet)."""
    arr = _as_samples(y, name)
    n = arr.shape[0]
    ms = averaging_factors(n, rate, taus)
    fixed = _noise_types(noise_type, len(ms))
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
        confidence=confidence,
        unit=unit,
        channel=channel,
        chunks=chunks,
        chunk_work=work,
        sums=np.zeros((len(chunks), len(ms))),
    )


@functools.lru_cache(maxsize=4096)
def _edf_cached(alpha: int, m: int, n_phase: int) -> float:
    """:func:`edf` of the overlapped estimator, shared by records of equal length and type."""
    return edf(alpha, m, n_phase)


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
    nu = np.array([_edf_cached(int(a), int(m), n_phase) for a, m in zip(alphas, ms, strict=True)])
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
            return mean, _phase(job.arr, mean, job.scale, out=arg)
        assert job.x is not None
        if kind == "identify":
            return _identify_all(job.x, job.ms)
        if kind == "chunk":
            lo, hi = job.chunks[arg]
            return _chunk_sums(job.x, job.ms, lo, hi, scratch)
        return _finish(job)

    def _work(self) -> None:
        scratch = _aligned_scratch(_BLOCK)
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
            scratch = _aligned_scratch(_BLOCK)
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
    return max(1, min(_usable_cpus(), tasks))


def _check_workers(workers: Any, name: str) -> int | None:
    if workers is None:
        return None
    if isinstance(workers, bool) or not isinstance(workers, (int, np.integer)) or workers < 1:
        raise AnalysisError(f"got {workers!r}", f"a whole number of {name} ≥ 1", field=name)
    return int(workers)


# ---------------------------------------------------------------------------------------------
# Noise identification: lag-1 autocorrelation (Riley & Greenhall 2004)
# ---------------------------------------------------------------------------------------------


def _detrend_quadratic(z: np.ndarray) -> np.ndarray:
    """z minus its least-squares quadratic in t ∈ [−1, 1] (normal equations; no BLAS)."""
    t = np.linspace(-1.0, 1.0, z.shape[0])
    t2 = t * t
    moments = [float(np.einsum("i->", t2 ** (k / 2))) if k % 2 == 0 else 0.0 for k in range(5)]
    gram = np.array([[moments[i + j] for j in range(3)] for i in range(3)])
    rhs = np.array(
        [
            float(np.einsum("i->", z)),
            float(np.einsum("i,i->", t, z)),
            float(np.einsum("i,i->", t2, z)),
        ]
    )
    c = np.linalg.solve(gram, rhs)
    return z - (c[0] + c[1] * t + c[2] * t2)


def _lag1(segments: list[np.ndarray]) -> float:
    """Pooled lag-1 autocorrelation r1 of the segments (each about its own mean).

    Sums by ``einsum``, not BLAS: a threaded BLAS dot is slow and erratic beside other work.
    """
    num = 0.0
    den = 0.0
    for z in segments:
        c = z - z.mean()
        num += float(np.einsum("i,i->", c[:-1], c[1:]))
        den += float(np.einsum("i,i->", c, c))
    return num / den if den > 0.0 else 0.0


def _alpha_from_phase_segments(segments: list[np.ndarray], m: int) -> tuple[int, float]:
    """Riley & Greenhall (2004) on phase segments decimated by m, for the Allan variance.

    Detrend the phase (quadratic), then difference until δ = r1/(1 + r1) < 0.25 or d = 2
    differences were taken; p = −2(δ + d) is the exponent of the PSD of the phase, and the
    estimate of α (rate PSD) is p + 2. Rounding it gives α, with one correction for m > 1 (see
    ``_AVERAGED_BOUNDS``). Returns (α in −2…2, the unrounded estimate).
    """
    z = [_detrend_quadratic(s) for s in segments]
    d = 0
    while True:
        r1 = _lag1(z)
        delta = r1 / (1.0 + r1) if r1 > -1.0 else -0.5
        if delta < 0.25 or d >= 2:
            estimate = -2.0 * (delta + d) + 2.0
            if d == 2 and m > 1 and estimate <= _AVERAGED_BOUNDS[1]:
                alpha = -2 if estimate <= _AVERAGED_BOUNDS[0] else -1
            else:
                alpha = int(min(2, max(-2, round(estimate))))
            return alpha, estimate
        z = [np.diff(s) for s in z]
        d += 1


def _phase_segments(x: np.ndarray, m: int) -> list[np.ndarray] | None:
    """Phase decimated by m (x[0], x[m], …), or up to 4 spread segments of it; None if too few."""
    k_total = (x.shape[0] - 1) // m + 1
    if k_total < _ID_MIN_POINTS:
        return None
    if k_total <= _ID_MAX_POINTS:
        return [np.array(x[: (k_total - 1) * m + 1 : m], dtype=np.float64)]
    seg = _ID_MAX_POINTS // 4
    starts = np.rint(np.linspace(0, k_total - seg, 4)).astype(np.int64)
    return [np.array(x[int(a) * m : (int(a) + seg - 1) * m + 1 : m]) for a in starts]


def _identify_all(x: np.ndarray, ms: np.ndarray) -> np.ndarray:
    """α at each m; where too few points remain, the α of the nearest τ that had enough
    (the longest shorter τ, as the short records run out at long τ), else white rate noise."""
    found: dict[int, int] = {}
    for k, m in enumerate(ms):
        segs = _phase_segments(x, int(m))
        if segs is not None:
            found[k] = _alpha_from_phase_segments(segs, int(m))[0]
    alphas = np.empty(len(ms), dtype=np.int64)
    for k in range(len(ms)):
        if k in found:
            alphas[k] = found[k]
        elif found:
            nearest = min(found, key=lambda j: (abs(j - k), -j))
            alphas[k] = found[nearest]
        else:
            alphas[k] = _ID_FALLBACK_ALPHA
    return alphas


def noise_alpha(y: npt.ArrayLike, m: int) -> tuple[int, float]:
    """Power-law noise type of rate samples ``y`` at averaging factor ``m`` (lag-1 method).

    W. J. Riley and C. A. Greenhall, "Power law noise identification using the lag 1
    autocorrelation", Proc. 18th European Frequency and Time Forum (2004): the phase
    (integrated ``y``) decimated by ``m`` is detrended and differenced until its lag-1
    autocorrelation r1 gives δ = r1/(1 + r1) < 0.25 (at most twice, for the Allan variance);
    then p = −2(δ + d) and α = p + 2. At most 65 536 decimated points are used (in 4 spread
    segments), which leaves a standard error of about 0.004 on r1.

    Parameters
    ----------
    y : array_like
        Rate samples (any unit; the scale does not matter).
    m : int
        Averaging factor (τ = m τ0), m ≥ 1.

    Returns
    -------
    alpha : int
        Exponent of the rate PSD S_y(f) ∝ f^α, rounded and clipped to −2…2
        (2 white angle noise, 1 flicker angle noise, 0 white rate noise, −1 flicker rate noise,
        −2 random-walk rate noise).
    alpha_estimate : float
        The unrounded estimate p + 2.

    Raises
    ------
    AnalysisError
        If fewer than 100 decimated points remain (n/m < 99).
    """
    arr = _as_samples(y, "y")
    m = int(m)
    if m < 1:
        raise AnalysisError(f"got m = {m}", "an averaging factor m ≥ 1", field="m")
    mean = _check_finite_mean(arr, "y")
    segs = _phase_segments(_phase(arr, mean, 1.0), m)
    if segs is None:
        raise AnalysisError(
            f"{arr.shape[0]} samples give only {arr.shape[0] // m + 1} points at m = {m}",
            f"at least {_ID_MIN_POINTS} points (n/m ≥ {_ID_MIN_POINTS - 1})",
            field="m",
        )
    return _alpha_from_phase_segments(segs, m)


# ---------------------------------------------------------------------------------------------
# Equivalent degrees of freedom
# ---------------------------------------------------------------------------------------------

#: Greenhall & Riley (2003), Table 2 (unmodified variances, large r), column d = 2:
#: (a0, a1) in 1/edf ≈ (1/r)(a0 − a1/r). α = 0, −1, −2 as listed in the project's reference
#: notes; α = 1 (used with Table 3) as transcribed in allantools 2024.06 (a reference library).
_GR_TABLE2_D2 = {
    1: (790.0, 410.0),
    0: (2.0 / 3.0, 1.0 / 3.0),
    -1: (0.852, 0.375),
    -2: (1.079, 0.368),
}
#: Greenhall & Riley (2003), Table 3, d = 2 (flicker PM): (b0, b1) in sz(0) ≈ b0 + b1 ln m.
_GR_TABLE3_D2 = (15.23, 12.0)
_GR_JMAX = 100


def _sw(t: np.ndarray, alpha: int) -> np.ndarray:
    """Greenhall & Riley (2003) eq. (7): the generalized autocovariance kernel for S ∝ f^α.

    Only ratios of squares of its differences enter the EDF, so the overall sign of each
    kernel does not matter.
    """
    a = np.abs(t)
    if alpha == 2:
        return -a
    if alpha == 0:
        return a**3
    if alpha == -2:
        return a**5
    if alpha == -4:
        return a**7
    power = {1: 2, -1: 4, -3: 6}[alpha]
    with np.errstate(divide="ignore", invalid="ignore"):
        v = a**power * np.log(a)
    return np.where(a == 0.0, 0.0, v)


def _sx(t: np.ndarray, F: float, alpha: int) -> np.ndarray:
    """Greenhall & Riley (2003) eq. (8): F²[2 sw(t) − sw(t − 1/F) − sw(t + 1/F)]; sw(t, α+2)
    for F = ∞.

    For α = 1 (t² ln|t|) and large F the plain second difference cancels catastrophically; it is
    rewritten exactly with log1p/atanh where |t| > 2/F:
    −2 ln|t| − F²[(t² + h²) log1p(−h²/t²) + 4|t| h atanh(h/|t|)], h = 1/F.
    """
    t = np.asarray(t, dtype=np.float64)
    if math.isinf(F):
        return _sw(t, alpha + 2)
    h = 1.0 / F
    out = F * F * (2.0 * _sw(t, alpha) - _sw(t - h, alpha) - _sw(t + h, alpha))
    if alpha != 1:
        return out
    a = np.abs(np.atleast_1d(t))
    far = a > 2.0 * h
    if np.any(far):
        af = a[far]
        u = h / af
        out = np.array(np.atleast_1d(out), dtype=np.float64)
        out[far] = -2.0 * np.log(af) - F * F * (
            (af * af + h * h) * np.log1p(-u * u) + 4.0 * af * h * np.arctanh(u)
        )
        out = out.reshape(t.shape)
    return out


def _sz(t: np.ndarray, F: float, alpha: int) -> np.ndarray:
    """Greenhall & Riley (2003) eq. (9) for d = 2 (the Allan variance)."""
    t = np.asarray(t, dtype=np.float64)
    return (
        6.0 * _sx(t, F, alpha)
        - 4.0 * _sx(t - 1.0, F, alpha)
        - 4.0 * _sx(t + 1.0, F, alpha)
        + _sx(t - 2.0, F, alpha)
        + _sx(t + 2.0, F, alpha)
    )


def _basic_sum(J: float, M: float, S: float, F: float, alpha: int) -> float:
    """Greenhall & Riley (2003) eq. (10):
    sz(0)² + (1 − J/M) sz(J/S)² + 2 Σ_{j=1}^{J−1} (1 − j/M) sz(j/S)²."""
    j = np.arange(1, int(J), dtype=np.float64)
    z0 = float(_sz(np.array(0.0), F, alpha))
    zJ = float(_sz(np.array(J / S), F, alpha))
    zj = _sz(j / S, F, alpha)
    return z0 * z0 + (1.0 - J / M) * zJ * zJ + 2.0 * float(np.sum((1.0 - j / M) * zj * zj))


def edf_greenhall(alpha: int, m: int, n_phase: int, *, overlapping: bool = True) -> float:
    """Equivalent degrees of freedom of the (unmodified) Allan variance at τ = m τ0.

    The algorithm of C. A. Greenhall and W. J. Riley, "Uncertainty of stability variances based
    on finite differences", Proc. 35th PTTI Meeting (2003), NASA NTRS 20050061319, for d = 2
    (second differences) and F = m (unmodified), with S = m for the overlapped estimator
    (``overlapping=True``) or S = 1 for the non-overlapped one:
    L = m/F + m d, M = 1 + ⌊S (N − L)/m⌋, J = min(M, (d + 1) S), r = M/S, J_max = 100; the
    "basic sum" of their eq. (10) when J ≤ J_max, their large-r approximation
    1/edf ≈ (1/r)(a0 − a1/r) (Table 2; for flicker PM divided by (b0 + b1 ln m)², Table 3) when
    r > d + 1, and the basic sum rescaled to J_max otherwise.

    White PM (α = 2) uses the exact result for white phase noise: the second differences have
    covariances 6, −4, 1 (times the phase variance) at lags 0, S, 2S of the M terms, so
    1/edf = [36 M + 32 (M − S)₊ + 2 (M − 2S)₊]/(36 M²), which equals Greenhall & Riley's
    (1/M)(35/18 − 1/r) whenever M ≥ 2S and also covers the short case they treat separately.

    Parameters
    ----------
    alpha : int
        Exponent of the rate PSD S_y(f) ∝ f^α, one of 2, 1, 0, −1, −2.
    m : int
        Averaging factor, τ = m τ0.
    n_phase : int
        Number of phase points N (n + 1 for n rate samples).
    overlapping : bool
        Overlapped estimator (the one :func:`overlapping` computes) or not.

    Returns
    -------
    edf : float
        Equivalent degrees of freedom [-].
    """
    alpha = int(alpha)
    if alpha not in NOISE_ALPHAS:
        raise AnalysisError(f"got α = {alpha}", "α in {2, 1, 0, -1, -2}", field="alpha")
    m = int(m)
    N = int(n_phase)
    d = 2
    F = float(m)
    S = float(m) if overlapping else 1.0
    L = m / F + m * d
    if m < 1 or N < L + 1:
        raise AnalysisError(
            f"m = {m} with N = {N} phase points leaves no complete second difference",
            "N ≥ 2m + 2",
            field="m",
        )
    M = 1.0 + math.floor(S * (N - L) / m)
    J = min(M, (d + 1) * S)
    r = M / S
    if alpha == 2:
        inv = (36.0 * M + 32.0 * max(0.0, M - S) + 2.0 * max(0.0, M - 2.0 * S)) / (36.0 * M * M)
        return 1.0 / inv
    if alpha <= 0:
        if J <= _GR_JMAX:
            Fp = F if m * (d + 1) <= _GR_JMAX else math.inf
            z0 = float(_sz(np.array(0.0), Fp, alpha))
            return M * z0 * z0 / _basic_sum(J, M, S, Fp, alpha)
        if r > d + 1:
            a0, a1 = _GR_TABLE2_D2[alpha]
            return r / (a0 - a1 / r)
        mp = _GR_JMAX / r
        z0 = float(_sz(np.array(0.0), math.inf, alpha))
        return _GR_JMAX * z0 * z0 / _basic_sum(_GR_JMAX, _GR_JMAX, mp, math.inf, alpha)
    # alpha == 1, flicker PM
    if J <= _GR_JMAX:
        z0 = float(_sz(np.array(0.0), F, 1))
        return M * z0 * z0 / _basic_sum(J, M, S, F, 1)
    b0, b1 = _GR_TABLE3_D2
    norm = (b0 + b1 * math.log(m)) ** 2
    if r > d + 1:
        a0, a1 = _GR_TABLE2_D2[1]
        return norm * r / (a0 - a1 / r)
    mp = _GR_JMAX / r
    return norm * _GR_JMAX / _basic_sum(_GR_JMAX, _GR_JMAX, mp, mp, 1)


def _edf_moving_average(v: np.ndarray, M: int, step: int) -> float:
    """Exact EDF 2 E[V]²/Var[V] of V = mean of M terms z_i = Σ_j v_j e_(i·step + j), e iid
    Gaussian: M² c(0)² / Σ_{|k|<M} (M − |k|) c(k·step)², c the autocorrelation of v."""
    c = np.correlate(v, v, mode="full")
    mid = v.shape[0] - 1
    k = np.arange(0, min(M, mid // step + 1))
    ck = c[mid + k * step]
    weights = np.where(k == 0, float(M), 2.0 * (M - k))
    return float(M * M * ck[0] ** 2 / np.sum(weights * ck * ck))


def edf(alpha: int, m: int, n_phase: int, *, overlapping: bool = True) -> float:
    """Equivalent degrees of freedom of the Allan variance as :func:`overlapping` uses them.

    :func:`edf_greenhall` everywhere, except where its short-τ branch (F = m, used for
    3m ≤ 100) models the unmodified variance only approximately: for white rate noise (α = 0)
    and random-walk rate noise (α = −2) at m ≤ 33 the exact EDF of the sampled model is used
    instead (V is a mean of M Gaussian terms whose moving-average weights are
    [−1]·m + [+1]·m for α = 0 in terms of the white rate samples, and the triangle
    0, 1, …, m, …, 1 for α = −2 in terms of the white increments of the rate), computed as
    2 E[V]²/Var[V] from their exact autocorrelation. At m = 1, N = 1001 the Greenhall-Riley
    branch gives 782 (α = 0) and 762 (α = −2) against the exact 666 and 999, which also match
    the simple formulas of SP 1065 Table 5 and seeded simulations; from m = 34 on the
    Greenhall-Riley value (F = ∞) and the exact one agree to about 0.1 %. White PM is exact in
    :func:`edf_greenhall` already.

    Parameters
    ----------
    alpha : int
        Exponent of the rate PSD, one of 2, 1, 0, −1, −2.
    m : int
        Averaging factor.
    n_phase : int
        Number of phase points N.
    overlapping : bool
        Overlapped estimator or not.
    """
    alpha = int(alpha)
    m = int(m)
    value = edf_greenhall(alpha, m, n_phase, overlapping=overlapping)  # checks the arguments
    if alpha in (0, -2) and m * 3 <= _GR_JMAX:
        M = int(n_phase) - 2 * m if overlapping else (int(n_phase) - 1) // m - 1
        if alpha == 0:
            v = np.concatenate([-np.ones(m), np.ones(m)])
        else:
            v = np.concatenate([np.arange(0.0, m + 1.0), np.arange(m - 1.0, 0.0, -1.0)])
        return _edf_moving_average(v, M, 1 if overlapping else m)
    return value


def edf_simple(alpha: int, m: int, n_phase: int) -> float:
    """The simple EDF formulas of NIST SP 1065, section 5.4.1, Table 5 (overlapping AVAR).

    From Howe, Allan and Barnes (1981), with N phase points and averaging factor m:

    ============  ====================================================================
    white PM      (N + 1)(N − 2m) / (2(N − m))
    flicker PM    exp( sqrt( ln((N − 1)/(2m)) · ln((2m + 1)(N − 1)/4) ) )
    white FM      [3(N − 1)/(2m) − 2(N − 2)/N] · 4m²/(4m² + 5)
    flicker FM    m = 1: 2(N − 2)²/(2.3 N − 4.9);   m ≥ 2: 5 N²/(4m(N + 3m))
    RW FM         (N − 2)/(m (N − 3)²) · [(N − 1)² − 3m(N − 1) + 4m²]
    ============  ====================================================================

    The flicker-FM case m = 1 keeps the square on (N − 2) (several transcriptions agree; a
    version without it gives an EDF below 1).

    Parameters
    ----------
    alpha : int
        Exponent of the rate PSD, one of 2, 1, 0, −1, −2.
    m : int
        Averaging factor.
    n_phase : int
        Number of phase points N.
    """
    alpha = int(alpha)
    N = float(n_phase)
    m = float(m)
    if alpha == 2:
        return (N + 1.0) * (N - 2.0 * m) / (2.0 * (N - m))
    if alpha == 1:
        return math.exp(
            math.sqrt(math.log((N - 1.0) / (2.0 * m)) * math.log((2.0 * m + 1.0) * (N - 1.0) / 4.0))
        )
    if alpha == 0:
        return (
            (3.0 * (N - 1.0) / (2.0 * m) - 2.0 * (N - 2.0) / N) * 4.0 * m * m / (4.0 * m * m + 5.0)
        )
    if alpha == -1:
        if m == 1:
            return 2.0 * (N - 2.0) ** 2 / (2.3 * N - 4.9)
        return 5.0 * N * N / (4.0 * m * (N + 3.0 * m))
    if alpha == -2:
        return (
            (N - 2.0) / (m * (N - 3.0) ** 2) * ((N - 1.0) ** 2 - 3.0 * m * (N - 1.0) + 4.0 * m * m)
        )
    raise AnalysisError(f"got α = {alpha}", "α in {2, 1, 0, -1, -2}", field="alpha")


# ---------------------------------------------------------------------------------------------
# The result
# ---------------------------------------------------------------------------------------------


def _frozen(a: Any, dtype: Any, name: str) -> np.ndarray:
    try:
        arr = np.array(a, dtype=dtype)
    except (TypeError, ValueError):
        raise AnalysisError(f"got {a!r}", "a list of numbers", field=name) from None
    if arr.ndim != 1:
        raise AnalysisError(f"got shape {arr.shape}", "a 1-D list of numbers", field=name)
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True, eq=False, kw_only=True)
class AllanCurve:
    """An overlapping Allan-deviation curve of one channel, with confidence intervals.

    Attributes
    ----------
    tau : ndarray
        Averaging times [s], increasing, each a whole number of sample periods.
    adev : ndarray
        Overlapping Allan deviation [``unit``].
    ci_low, ci_high : ndarray
        Chi-square confidence interval of the deviation at ``confidence`` [``unit``].
    edf : ndarray
        Equivalent degrees of freedom used for the interval [-].
    sample_rate : float
        Sample rate of the record [Hz].
    confidence : float
        Two-sided confidence of the interval (default 0.683, one sigma).
    unit : str
        Label of the unit of the samples and of the deviations (display only; "1" when the
        record has none).
    channel : str
        Channel id (e.g. ``gyro.x``).
    n_samples : int or None
        Number of rate samples n in the record (N = n + 1 phase points).
    n_clusters : ndarray of int or None
        Number of overlapping second differences in the sum at each τ, N − 2m = n + 1 − 2m.
    noise_alpha : ndarray of int or None
        Power-law exponent α of the rate PSD used for the EDF at each τ (identified or given).
    """

    tau: npt.NDArray[np.float64]
    adev: npt.NDArray[np.float64]
    ci_low: npt.NDArray[np.float64]
    ci_high: npt.NDArray[np.float64]
    edf: npt.NDArray[np.float64]
    sample_rate: float
    confidence: float = DEFAULT_CONFIDENCE
    unit: str = "1"
    channel: str = "signal"
    n_samples: int | None = None
    n_clusters: npt.NDArray[np.int64] | None = None
    noise_alpha: npt.NDArray[np.int64] | None = None

    def __post_init__(self) -> None:
        put = object.__setattr__
        for name in ("tau", "adev", "ci_low", "ci_high", "edf"):
            put(self, name, _frozen(getattr(self, name), np.float64, name))
        for name in ("n_clusters", "noise_alpha"):
            if getattr(self, name) is not None:
                put(self, name, _frozen(getattr(self, name), np.int64, name))
        k = self.tau.shape[0]
        if k == 0:
            raise AnalysisError("got no τ", "at least one τ", field="tau")
        for name in ("adev", "ci_low", "ci_high", "edf", "n_clusters", "noise_alpha"):
            a = getattr(self, name)
            if a is not None and a.shape[0] != k:
                raise AnalysisError(
                    f"has {a.shape[0]} values for {k} τ", "one value per τ", field=name
                )
            if a is not None and not np.all(np.isfinite(a)):
                raise AnalysisError("has a non-finite value", "finite numbers", field=name)
        if not np.all(np.isfinite(self.tau)) or np.any(self.tau <= 0.0):
            raise AnalysisError("has a τ ≤ 0 or non-finite", "τ > 0 s", field="tau")
        if np.any(np.diff(self.tau) <= 0.0):
            raise AnalysisError("is not strictly increasing", "increasing τ", field="tau")
        if np.any(self.adev < 0.0):
            raise AnalysisError("has a negative value", "deviations ≥ 0", field="adev")
        if np.any(self.ci_low > self.adev) or np.any(self.ci_high < self.adev):
            raise AnalysisError(
                "does not contain the deviation", "ci_low ≤ adev ≤ ci_high", field="ci_low"
            )
        if np.any(self.edf <= 0.0):
            raise AnalysisError("has a value ≤ 0", "degrees of freedom > 0", field="edf")
        put(self, "sample_rate", _check_rate(self.sample_rate, "sample_rate"))
        put(self, "confidence", _check_confidence(self.confidence))
        if not isinstance(self.unit, str) or not isinstance(self.channel, str) or not self.channel:
            raise AnalysisError(
                f"got unit={self.unit!r}, channel={self.channel!r}",
                "text labels (a non-empty channel id)",
                field="channel",
            )
        if self.n_samples is not None:
            if isinstance(self.n_samples, bool) or int(self.n_samples) != self.n_samples:
                raise AnalysisError(f"got {self.n_samples!r}", "a whole number", field="n_samples")
            put(self, "n_samples", int(self.n_samples))
            if self.n_samples < 3:
                raise AnalysisError(f"got {self.n_samples}", "at least 3", field="n_samples")
        if self.noise_alpha is not None and not set(self.noise_alpha.tolist()) <= set(NOISE_ALPHAS):
            raise AnalysisError(
                f"got {sorted(set(self.noise_alpha.tolist()))}",
                "exponents in {2, 1, 0, -1, -2}",
                field="noise_alpha",
            )

    # -- derived quantities ------------------------------------------------------------------

    @property
    def variance(self) -> npt.NDArray[np.float64]:
        """Overlapping Allan variance [``unit``²]."""
        return self.adev**2

    @property
    def m(self) -> npt.NDArray[np.int64]:
        """Averaging factors m = τ·rate [-]."""
        return np.rint(self.tau * self.sample_rate).astype(np.int64)

    @property
    def n_independent(self) -> npt.NDArray[np.int64] | None:
        """Number of non-overlapping clusters ⌊n/m⌋ at each τ (None if n is unknown)."""
        if self.n_samples is None:
            return None
        return self.n_samples // self.m

    @property
    def duration(self) -> float | None:
        """Record length n/rate [s] (None if n is unknown)."""
        return None if self.n_samples is None else self.n_samples / self.sample_rate

    # -- files -------------------------------------------------------------------------------

    def to_dict(self) -> dict[str, Any]:
        """The channel entry of the Allan-curve JSON document (DESIGN §5), SI values."""
        out: dict[str, Any] = {
            "id": self.channel,
            "unit": self.unit,
            "sample_rate": self.sample_rate,
            "confidence": self.confidence,
            "tau": self.tau.tolist(),
            "adev": self.adev.tolist(),
            "ci_low": self.ci_low.tolist(),
            "ci_high": self.ci_high.tolist(),
            "edf": self.edf.tolist(),
        }
        if self.n_samples is not None:
            out["n_samples"] = self.n_samples
        if self.n_clusters is not None:
            out["n_clusters"] = self.n_clusters.tolist()
        if self.noise_alpha is not None:
            out["noise_alpha"] = self.noise_alpha.tolist()
        return out

    @classmethod
    def from_dict(cls, data: Mapping[str, Any], *, source: str | None = None) -> AllanCurve:
        """Build a curve from a channel entry of the Allan-curve JSON (see :meth:`to_dict`)."""
        if not isinstance(data, Mapping):
            raise ModelFileError(
                f"got {type(data).__name__}", "an object with the channel's curve", source=source
            )
        missing = [k for k in _REQUIRED if k not in data]
        if missing:
            raise ModelFileError(
                f"missing {', '.join(missing)}",
                f"the keys {', '.join(_REQUIRED)}",
                source=source,
                field=str(data.get("id", "channel")),
            )
        try:
            return cls(
                channel=data["id"],
                unit=data["unit"],
                sample_rate=data["sample_rate"],
                confidence=data["confidence"],
                tau=data["tau"],
                adev=data["adev"],
                ci_low=data["ci_low"],
                ci_high=data["ci_high"],
                edf=data["edf"],
                n_samples=data.get("n_samples"),
                n_clusters=data.get("n_clusters"),
                noise_alpha=data.get("noise_alpha"),
            )
        except SensorModelError as exc:
            cid = str(data.get("id"))
            raise ModelFileError(
                exc.problem,
                exc.expected,
                source=source,
                field=f"{cid}.{exc.field}" if exc.field else cid,
            ) from None


_REQUIRED = ("id", "unit", "sample_rate", "tau", "adev", "ci_low", "ci_high", "edf", "confidence")


# ---------------------------------------------------------------------------------------------
# The computation
# ---------------------------------------------------------------------------------------------


def _noise_types(noise_type: Any, k: int) -> np.ndarray | None:
    """None for "auto", else one α per τ (checked)."""
    if isinstance(noise_type, str):
        if noise_type == "auto":
            return None
        raise AnalysisError(
            f"got {noise_type!r}",
            "'auto', or α in {2, 1, 0, -1, -2} (one, or one per τ)",
            field="noise_type",
        )
    a = np.asarray(noise_type)
    if a.ndim == 0:
        a = np.full(k, a)
    if a.shape != (k,) or not all(
        float(v).is_integer() and int(v) in NOISE_ALPHAS for v in a.tolist()
    ):
        raise AnalysisError(
            f"got {noise_type!r}",
            f"'auto', or α in {{2, 1, 0, -1, -2}} (one value, or {k}: one per τ)",
            field="noise_type",
        )
    return a.astype(np.int64)


def _analyse(
    arr: Any,
    rate: Any,
    *,
    increments: bool,
    name: str,
    taus: Any,
    confidence: Any,
    noise_type: Any,
    unit: str,
    channel: str,
    threads: Any,
    progress: ProgressCallback | None,
) -> AllanCurve:
    rate = _check_rate(rate)
    job = _job(
        0,
        arr,
        rate,
        1.0 if increments else 1.0 / rate,
        name=name,
        taus=taus,
        confidence=_check_confidence(confidence),
        noise_type=noise_type,
        unit=unit,
        channel=channel,
    )
    workers = _check_workers(threads, "threads")
    if workers is None:
        workers = _default_workers([job])
    return _Schedule([job], workers).run(progress)[0]


def overlapping(
    y: npt.ArrayLike,
    rate: float,
    *,
    taus: Any = None,
    confidence: float = DEFAULT_CONFIDENCE,
    noise_type: Any = "auto",
    unit: str = "1",
    channel: str = "signal",
    threads: int | None = None,
    progress: ProgressCallback | None = None,
) -> AllanCurve:
    """Overlapping Allan deviation of rate samples, with chi-square confidence intervals.

    The estimator of IEEE Std 1139-2008 / NIST SP 1065 section 5.2.4 eq. (11) on the phase
    form x = cumsum(y − ȳ)/rate (see the module notes); the EDF of Greenhall & Riley (2003) with
    the noise type at each τ from the lag-1 autocorrelation method (Riley & Greenhall 2004); the
    interval of SP 1065 eq. (45).

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
        α of the rate PSD S_y ∝ f^α used for the EDF: ``"auto"`` identifies it at each τ from
        the data; where fewer than 100 decimated points remain, the α of the longest τ that had
        enough is kept (white rate noise, α = 0, if no τ had enough). An int fixes it for all τ;
        a sequence gives one per τ of the grid.
    unit : str
        Unit label of ``y``, kept in the result for display and files (no conversion).
    channel : str
        Channel id kept in the result.
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
    return _analyse(
        y,
        rate,
        increments=False,
        name="y",
        taus=taus,
        confidence=confidence,
        noise_type=noise_type,
        unit=unit,
        channel=channel,
        threads=threads,
        progress=progress,
    )


def overlapping_from_increments(
    dx: npt.ArrayLike,
    rate: float,
    *,
    taus: Any = None,
    confidence: float = DEFAULT_CONFIDENCE,
    noise_type: Any = "auto",
    unit: str = "1",
    channel: str = "signal",
    threads: int | None = None,
    progress: ProgressCallback | None = None,
) -> AllanCurve:
    """Overlapping Allan deviation of the rate behind integrated samples (increments).

    For sensors that output increments per sample period (angle increments Δθ [rad], velocity
    increments Δv [m/s]): the phase is x = cumsum(dx − mean) directly, with no division by the
    rate, so the rate is never formed. The result is the Allan deviation of the rate dx·rate,
    in [unit of dx]/s, identical (to rounding) to ``overlapping(dx * rate, rate)``.

    Parameters
    ----------
    dx : array_like
        Increments per sample period [e.g. rad], 1-D, finite.
    rate : float
        Sample rate [Hz].
    taus, confidence, noise_type, threads, progress
        As for :func:`overlapping`.
    unit : str
        Unit label of the rate (e.g. ``"rad/s"`` for angle increments in rad).
    channel : str
        Channel id kept in the result.

    Returns
    -------
    AllanCurve
        Allan deviation of the rate [unit of dx / s].
    """
    return _analyse(
        dx,
        rate,
        increments=True,
        name="dx",
        taus=taus,
        confidence=confidence,
        noise_type=noise_type,
        unit=unit,
        channel=channel,
        threads=threads,
        progress=progress,
    )


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

    Each result is bit-for-bit the :func:`overlapping` (or :func:`overlapping_from_increments`)
    curve of its record, whatever ``workers`` is: every record's second-difference sums are
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
        The records hold increments per sample period, as for
        :func:`overlapping_from_increments`.
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
    k = len(items)
    rate = _check_rate(rate)
    confidence = _check_confidence(confidence)
    unit_list = [units] * k if isinstance(units, str) else list(units)
    if len(unit_list) != k or not all(isinstance(u, str) for u in unit_list):
        raise AnalysisError(
            f"got {units!r} for {k} records", f"one unit label, or {k} labels", field="units"
        )
    if channels is None:
        ids = ["signal"] if k == 1 else [f"signal#{i + 1}" for i in range(k)]
        names = [f"records[{i}]" for i in range(k)]
    else:
        ids = list(channels)
        if len(ids) != k or not all(isinstance(c, str) and c for c in ids):
            raise AnalysisError(
                f"got {channels!r} for {k} records", f"{k} channel ids", field="channels"
            )
        names = ids
    count = _check_workers(workers, "workers")
    scale = 1.0 if increments else 1.0 / rate
    jobs = [
        _job(
            i,
            y,
            rate,
            scale,
            name=names[i],
            taus=taus,
            confidence=confidence,
            noise_type=noise_type,
            unit=unit_list[i],
            channel=ids[i],
        )
        for i, y in enumerate(items)
    ]
    if count is None:
        count = _default_workers(jobs)
    return _Schedule(jobs, count).run(progress)


# ---------------------------------------------------------------------------------------------
# JSON and CSV
# ---------------------------------------------------------------------------------------------


def curves_to_json(curves: AllanCurve | Iterable[AllanCurve]) -> dict[str, Any]:
    """The Allan-curve JSON document (DESIGN §5) of one or more channels.

    Write it with ``sensormodel._io.write_json(path, doc, schema=SCHEMA_FILE)``.
    """
    items = [curves] if isinstance(curves, AllanCurve) else list(curves)
    if not items:
        raise AnalysisError("got no curves", "at least one AllanCurve", field="curves")
    ids = [c.channel for c in items]
    dup = sorted({i for i in ids if ids.count(i) > 1})
    if dup:
        raise AnalysisError(
            f"channel id {dup[0]!r} appears more than once",
            "one curve per channel id",
            field="curves",
        )
    return {"schema": SCHEMA_ID, "channels": [c.to_dict() for c in items]}


def curves_from_json(data: Any, *, source: str | None = None) -> list[AllanCurve]:
    """Curves from an Allan-curve JSON document (as read by ``json.load``).

    The document is checked against ``schemas/allan-curve.schema.json``; an unknown ``schema``
    version is refused by name.
    """
    from ._io import validate

    if not isinstance(data, Mapping):
        raise ModelFileError(
            f"got {type(data).__name__}",
            "a JSON object with 'schema' and 'channels'",
            source=source,
        )
    found = data.get("schema")
    if found != SCHEMA_ID:
        raise ModelFileError(
            f"unknown schema {found!r}", f"'{SCHEMA_ID}'", source=source, field="schema"
        )
    validate(data, SCHEMA_FILE, source=source)
    return [AllanCurve.from_dict(ch, source=source) for ch in data["channels"]]


#: CSV columns, one row per τ and channel.
CSV_HEADER = (
    "id",
    "unit",
    "sample_rate [Hz]",
    "confidence",
    "tau [s]",
    "adev",
    "ci_low",
    "ci_high",
    "edf",
    "n_clusters",
    "noise_alpha",
)


def csv_rows(curves: AllanCurve | Iterable[AllanCurve]) -> list[list[str]]:
    """Header and one row per τ (and channel) as text fields; deviations in the ``unit`` column.

    Numbers are written with ``repr`` (shortest round-trip form); missing optional values are
    empty fields.
    """
    items = [curves] if isinstance(curves, AllanCurve) else list(curves)
    rows = [list(CSV_HEADER)]
    for c in items:
        for k in range(c.tau.shape[0]):
            rows.append(
                [
                    c.channel,
                    c.unit,
                    repr(c.sample_rate),
                    repr(c.confidence),
                    repr(float(c.tau[k])),
                    repr(float(c.adev[k])),
                    repr(float(c.ci_low[k])),
                    repr(float(c.ci_high[k])),
                    repr(float(c.edf[k])),
                    "" if c.n_clusters is None else str(int(c.n_clusters[k])),
                    "" if c.noise_alpha is None else str(int(c.noise_alpha[k])),
                ]
            )
    return rows


def curves_to_csv(curves: AllanCurve | Iterable[AllanCurve]) -> str:
    """The CSV text of :func:`csv_rows` (write it through ``sensormodel._io.atomic_writer``)."""
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerows(csv_rows(curves))
    return out.getvalue()


def curves_from_csv(text: str, *, source: str | None = None) -> list[AllanCurve]:
    """Curves from the CSV text of :func:`curves_to_csv` (``n_samples`` is not in the CSV)."""
    reader = csv.reader(io.StringIO(text))
    header = next(reader, None)
    if header is None or tuple(h.strip() for h in header) != CSV_HEADER:
        raise ModelFileError(
            f"header {header!r}",
            f"the columns {', '.join(CSV_HEADER)}",
            source=source,
            field="line 1",
        )
    groups: dict[str, list[list[str]]] = {}
    for lineno, row in enumerate(reader, start=2):
        if not row:
            continue
        if len(row) != len(CSV_HEADER):
            raise ModelFileError(
                f"{len(row)} fields",
                f"{len(CSV_HEADER)} fields",
                source=source,
                field=f"line {lineno}",
            )
        groups.setdefault(row[0], []).append(row + [str(lineno)])
    curves = []
    for cid, rows in groups.items():
        try:
            col = list(zip(*rows, strict=True))
            first = rows[0]

            def opt(j: int, col: list[Any] = col) -> list[int] | None:
                return None if any(v == "" for v in col[j]) else [int(v) for v in col[j]]

            curves.append(
                AllanCurve(
                    channel=cid,
                    unit=first[1],
                    sample_rate=float(first[2]),
                    confidence=float(first[3]),
                    tau=[float(v) for v in col[4]],
                    adev=[float(v) for v in col[5]],
                    ci_low=[float(v) for v in col[6]],
                    ci_high=[float(v) for v in col[7]],
                    edf=[float(v) for v in col[8]],
                    n_clusters=opt(9),
                    noise_alpha=opt(10),
                )
            )
        except ValueError as exc:
            raise ModelFileError(
                f"channel {cid}: {exc}",
                "numbers in the numeric columns",
                source=source,
                field=f"line {rows[0][-1]}",
            ) from None
    return curves
