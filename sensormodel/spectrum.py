"""Spectra of recordings and of models.

Section 1 (this part): the Welch power spectral density of a recording, computed in bounded
memory for long records, and a log-frequency binning helper for plotting long spectra.
Section 2 (further down, when present): spectral factorization / shaping filters.

Sidedness: every PSD of section 1 is **one-sided** (``sided="one-sided"``): its integral over
0 ≤ f ≤ rate/2 is the variance of the samples. White noise of density N in the IEEE Std 952
convention (two-sided PSD N², Allan variance N²/τ, e.g. an angle random walk N [rad/s/√Hz]
= [rad/√s]) has the one-sided PSD 2 N² here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from .errors import AnalysisError

__all__ = [
    "PSDResult",
    "welch",
    "default_nperseg",
    "log_bins",
]

# =============================================================================================
# Section 1 — Welch PSD of recordings
# =============================================================================================

#: Bounds of the default segment length (samples).
_NPERSEG_MIN = 256
_NPERSEG_MAX = 1 << 20
#: Samples of windowed segments held at once per chunk (2^22 float64 = 32 MiB).
_CHUNK_SAMPLES = 1 << 22


@dataclass(frozen=True, eq=False, kw_only=True)
class PSDResult:
    """A one-sided power spectral density estimate.

    Attributes
    ----------
    f : ndarray
        Frequencies [Hz], increasing.
    psd : ndarray
        One-sided PSD [unit²/Hz] (unit of the samples); white noise of IEEE density N gives 2N².
    sided : str
        Always ``"one-sided"`` here (the label travels with the numbers into files and plots).
    n_segments : int
        Number of Welch segments averaged.
    nperseg : int
        Segment length [samples]; the frequency resolution is rate/nperseg [Hz].
    n_bins : ndarray of int or None
        For a log-binned result (:func:`log_bins`), how many Welch frequency bins each point
        averages; None for a plain Welch result.
    """

    f: npt.NDArray[np.float64]
    psd: npt.NDArray[np.float64]
    sided: str = "one-sided"
    n_segments: int
    nperseg: int
    n_bins: npt.NDArray[np.int64] | None = None

    def __post_init__(self) -> None:
        f = np.array(self.f, dtype=np.float64)
        p = np.array(self.psd, dtype=np.float64)
        if f.ndim != 1 or f.shape != p.shape:
            raise AnalysisError(
                f"f has shape {f.shape}, psd {p.shape}",
                "two 1-D arrays of equal length",
                field="psd",
            )
        if self.sided not in ("one-sided", "two-sided"):
            raise AnalysisError(f"got {self.sided!r}", "'one-sided' or 'two-sided'", field="sided")
        f.setflags(write=False)
        p.setflags(write=False)
        object.__setattr__(self, "f", f)
        object.__setattr__(self, "psd", p)
        if self.n_bins is not None:
            nb = np.array(self.n_bins, dtype=np.int64)
            if nb.shape != f.shape:
                raise AnalysisError(
                    f"has shape {nb.shape}", f"one count per frequency {f.shape}", field="n_bins"
                )
            nb.setflags(write=False)
            object.__setattr__(self, "n_bins", nb)


def default_nperseg(n: int) -> int:
    """Default Welch segment length for ``n`` samples [samples].

    The largest power of two ≤ n/8, so that with the default 50 % overlap about 15 segments
    (many more for long records) are averaged, kept between 256 (or ``n`` if shorter) and
    2^20 = 1 048 576. For a long record the cap keeps the resolution at rate/2^20 and averages
    many segments instead (a 10^8-sample record averages about 190), so each frequency bin
    carries a small scatter; :func:`log_bins` then smooths the crowded high frequencies for
    plotting. Common practice, not a published rule.
    """
    n = int(n)
    if n <= _NPERSEG_MIN:
        return n
    p = 2 ** int(math.floor(math.log2(n / 8.0))) if n >= 8 * _NPERSEG_MIN else _NPERSEG_MIN
    return int(min(_NPERSEG_MAX, max(_NPERSEG_MIN, p)))


def _check_samples(y: Any) -> np.ndarray:
    arr = y if isinstance(y, np.ndarray) else np.asarray(y)
    if arr.dtype == object or not (
        np.issubdtype(arr.dtype, np.floating) or np.issubdtype(arr.dtype, np.integer)
    ):
        raise AnalysisError(f"got an array of {arr.dtype}", "real samples", field="y")
    if arr.ndim != 1:
        raise AnalysisError(f"got shape {arr.shape}", "a 1-D array of samples", field="y")
    if arr.shape[0] < 2:
        raise AnalysisError(f"got {arr.shape[0]} sample(s)", "at least 2 samples", field="y")
    return arr


def _check_finite(arr: np.ndarray) -> None:
    if math.isfinite(float(np.sum(arr, dtype=np.float64))):
        return
    for i0 in range(0, arr.shape[0], 1 << 20):
        block = np.asarray(arr[i0 : i0 + (1 << 20)], dtype=np.float64)
        bad = np.flatnonzero(~np.isfinite(block))
        if bad.size:
            raise AnalysisError(
                f"sample {i0 + int(bad[0])} is {float(block[bad[0]])!r}",
                "finite samples only (cut the record at gaps first)",
                field="y",
            )
    raise AnalysisError("the samples are too large to sum", "samples below about 1e300", field="y")


def welch(
    y: npt.ArrayLike,
    rate: float,
    *,
    nperseg: int | None = None,
    noverlap: int | None = None,
    window: str | tuple[Any, ...] = "hann",
    detrend: str | bool = "constant",
) -> PSDResult:
    """One-sided Welch PSD of a recording, in bounded memory (P. D. Welch, IEEE Trans. Audio
    Electroacoust. 15(2), 1967), a thin layer over :func:`scipy.signal.welch`.

    The record is cut into the same segments :func:`scipy.signal.welch` would use (length
    ``nperseg``, step ``nperseg − noverlap``, the tail that does not fill a segment is left
    out); they are processed a chunk at a time (about 2^22 samples) and the chunk averages are
    combined weighted by their segment counts, which is the mean over all segments of the whole
    record. A :class:`numpy.memmap` is read chunk by chunk.

    Parameters
    ----------
    y : array_like
        Samples (e.g. angular rate [rad/s]), 1-D, finite, uniformly spaced.
    rate : float
        Sample rate [Hz].
    nperseg : int, optional
        Segment length [samples]; default :func:`default_nperseg` (≈ n/8 as a power of two,
        256 … 2^20).
    noverlap : int, optional
        Overlap of consecutive segments [samples]; default ``nperseg // 2``.
    window : str or tuple
        Window passed to scipy (default ``"hann"``; ``"boxcar"`` with ``noverlap=0`` makes each
        bin an exact χ²(2K)/(2K) scatter for K segments of Gaussian white noise).
    detrend : str or False
        Per-segment detrending passed to scipy (default ``"constant"``: the segment mean).

    Returns
    -------
    PSDResult
        ``f`` [Hz] from 0 to rate/2, ``psd`` [unit²/Hz] one-sided, ``n_segments``, ``nperseg``.

    Notes
    -----
    One-sided: ∫₀^{rate/2} psd df equals the sample variance. White noise of IEEE density N
    (ADEV(τ) = N/√τ; per-sample standard deviation N·√rate) has psd = 2N² [unit²/Hz].

    Examples
    --------
    >>> import numpy as np
    >>> from sensormodel.spectrum import welch
    >>> N = 1e-3                                   # rad/s/√Hz, IEEE (two-sided) density
    >>> y = np.random.default_rng(0).normal(0.0, N * np.sqrt(100.0), 400_000)
    >>> p = welch(y, 100.0)
    >>> round(float(np.mean(p.psd[1:-1])) / (2 * N**2), 2)
    1.0
    """
    import scipy.signal

    arr = _check_samples(y)
    try:
        fs = float(rate)
    except (TypeError, ValueError):
        raise AnalysisError(f"got {rate!r}", "a sample rate in Hz", field="rate") from None
    if not math.isfinite(fs) or fs <= 0.0:
        raise AnalysisError(f"got {fs!r} Hz", "a finite sample rate > 0 Hz", field="rate")
    n = arr.shape[0]
    if nperseg is None:
        nperseg = default_nperseg(n)
    if isinstance(nperseg, bool) or int(nperseg) != nperseg or not (2 <= nperseg <= n):
        raise AnalysisError(
            f"got nperseg={nperseg!r} for {n} samples",
            f"a whole number 2 ≤ nperseg ≤ {n}",
            field="nperseg",
        )
    nperseg = int(nperseg)
    if noverlap is None:
        noverlap = nperseg // 2
    if isinstance(noverlap, bool) or int(noverlap) != noverlap or not (0 <= noverlap < nperseg):
        raise AnalysisError(
            f"got noverlap={noverlap!r}",
            f"a whole number 0 ≤ noverlap < nperseg = {nperseg}",
            field="noverlap",
        )
    noverlap = int(noverlap)
    _check_finite(arr)

    step = nperseg - noverlap
    n_seg = (n - noverlap) // step
    per_chunk = max(1, _CHUNK_SAMPLES // nperseg)
    total = None
    f = None
    for s0 in range(0, n_seg, per_chunk):
        k = min(per_chunk, n_seg - s0)
        a = s0 * step
        b = a + (k - 1) * step + nperseg
        chunk = np.asarray(arr[a:b], dtype=np.float64)
        f, p = scipy.signal.welch(
            chunk,
            fs=fs,
            window=window,
            nperseg=nperseg,
            noverlap=noverlap,
            detrend=detrend,
            return_onesided=True,
            scaling="density",
            average="mean",
        )
        total = p * k if total is None else total + p * k
    assert total is not None and f is not None
    return PSDResult(f=f, psd=total / n_seg, n_segments=n_seg, nperseg=nperseg)


def log_bins(result: PSDResult, *, per_decade: int = 20) -> PSDResult:
    """Average a spectrum over logarithmically spaced frequency bins (for plotting).

    The f = 0 bin is dropped; the positive frequencies are grouped into bins of equal width in
    log f (``per_decade`` per decade); each output point is the arithmetic mean of the PSD over
    its bin (which keeps the estimate unbiased) at the geometric mean of the bin's frequencies.
    At low frequencies, where a bin holds one Welch frequency or none, the Welch points are kept
    as they are. ``n_bins`` counts the Welch frequencies averaged per point (its scatter falls
    roughly as 1/√n_bins).

    Parameters
    ----------
    result : PSDResult
        A spectrum from :func:`welch`.
    per_decade : int
        Bins per decade of frequency (≥ 1).

    Returns
    -------
    PSDResult
        Same sidedness and units as ``result``, with ``n_bins`` set.
    """
    if isinstance(per_decade, bool) or int(per_decade) != per_decade or per_decade < 1:
        raise AnalysisError(f"got {per_decade!r}", "a whole number ≥ 1", field="per_decade")
    keep = result.f > 0.0
    f = result.f[keep]
    p = result.psd[keep]
    if f.size == 0:
        raise AnalysisError("has no positive frequency", "a spectrum with f > 0", field="result")
    index = np.floor(per_decade * np.log10(f / f[0]) + 1e-9).astype(np.int64)
    edges = np.flatnonzero(np.diff(index)) + 1
    starts = np.concatenate([[0], edges])
    counts = np.diff(np.concatenate([starts, [f.size]]))
    mean_p = np.add.reduceat(p, starts) / counts
    mean_logf = np.add.reduceat(np.log(f), starts) / counts
    return PSDResult(
        f=np.exp(mean_logf),
        psd=mean_p,
        sided=result.sided,
        n_segments=result.n_segments,
        nperseg=result.nperseg,
        n_bins=counts,
    )
