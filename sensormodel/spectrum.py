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

from . import validate
from .allan import release
from .errors import AnalysisError
from .terms import Shaped

__all__ = [
    "PSDResult",
    "welch",
    "default_nperseg",
    "log_bins",
    "ShapingFilter",
    "RationalFit",
    "factorize",
    "fit_rational_psd",
    "omega_polynomial_to_omega2",
    "shaped_term",
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
    fs = validate.rate(rate)
    n = arr.shape[0]
    nperseg, noverlap = _segment_layout(n, nperseg, noverlap)
    _check_finite(arr)
    release(arr)  # a memory-mapped record: its pages are read again chunk by chunk

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
        release(arr[a:b])  # (after the chunk is used: it may be a view of the mapping)
        total = p * k if total is None else total + p * k
    assert total is not None and f is not None
    return PSDResult(f=f, psd=total / n_seg, n_segments=n_seg, nperseg=nperseg)


def _segment_layout(n: int, nperseg: Any, noverlap: Any) -> tuple[int, int]:
    """Welch segment length and overlap [samples] for ``n`` samples (defaults, checks)."""
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
    return nperseg, int(noverlap)


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


# =============================================================================================
# Section 2 — Spectral factorization and shaping filters
# =============================================================================================
#
# A rational PSD S(ω) = N(ω²)/D(ω²) is factored into S(ω) = H(−jω)·H(jω) = |H(jω)|² with H
# stable and minimum phase: substitute ω² = −s², so S becomes N(−s²)/D(−s²), whose roots come in
# pairs ±r; keep the left-half-plane root of each pair for H. (The classical Wiener/Kolmogorov
# spectral factorization; e.g. Brown & Hwang, "Introduction to Random Signals and Applied Kalman
# Filtering", chapter on shaping filters [from memory for the chapter].)
#
# Convention: H is driven by unit-intensity white noise w, E[w(t) w(t+s)] = δ(s), i.e. two-sided
# PSD 1 per hertz; the output's two-sided PSD per hertz at f is then |H(j2πf)|² = S(2πf), and its
# variance is (1/2π)∫ S(ω) dω over all ω = ∫ S(2πf) df over all f.


@dataclass(frozen=True)
class ShapingFilter:
    """A stable, minimum-phase shaping filter H(s) = numerator(s)/denominator(s).

    Attributes
    ----------
    numerator, denominator : ndarray
        Polynomial coefficients in s, highest power first (as numpy.polyval takes them);
        ``denominator`` is monic.
    zeros, poles : ndarray
        Roots of numerator and denominator, all in the closed left half-plane.
    gain : float
        Leading coefficient of the numerator (H = gain·Π(s − z)/Π(s − p)).
    """

    numerator: npt.NDArray[np.float64]
    denominator: npt.NDArray[np.float64]
    zeros: npt.NDArray[np.complex128]
    poles: npt.NDArray[np.complex128]
    gain: float

    def response(self, omega: npt.ArrayLike) -> npt.NDArray[np.complex128]:
        """H(jω) at angular frequencies ``omega`` [rad/s]."""
        s = 1j * np.asarray(omega, dtype=float)
        return np.polyval(self.numerator, s) / np.polyval(self.denominator, s)

    def psd(self, omega: npt.ArrayLike) -> npt.NDArray[np.float64]:
        """|H(jω)|² = S(ω): the output's two-sided PSD per hertz for unit-intensity input."""
        return np.abs(self.response(omega)) ** 2


def _poly_in_s_from_omega2(c: npt.NDArray[np.float64]) -> npt.NDArray[np.float64]:
    """Coefficients in s of P(−s²), for P given in ω² (highest power first)."""
    n = len(c) - 1
    out = np.zeros(2 * n + 1)
    for i, a in enumerate(c):
        k = n - i  # power of ω²
        out[2 * n - 2 * k] = a * (-1.0) ** k
    return out


def _left_half(
    roots: npt.NDArray[np.complex128], what: str, tol: float
) -> npt.NDArray[np.complex128]:
    """Pick one root of each ± pair, the one with negative real part (imaginary-axis roots come
    in even multiplicity and are split evenly)."""
    left = roots[roots.real < -tol]
    axis = roots[np.abs(roots.real) <= tol]
    if len(axis) % 2:
        raise AnalysisError(
            f"{what} has an odd number of roots on the imaginary axis",
            "a PSD that does not change sign",
        )
    axis = axis[np.argsort(axis.imag)]
    # each axis root appears twice (pair ±r coincide); keep every other one
    keep_axis = axis[::2]
    return np.concatenate([left, keep_axis])


def factorize(numerator: npt.ArrayLike, denominator: npt.ArrayLike) -> ShapingFilter:
    """Spectral factorization of a rational PSD given in powers of ω².

    Parameters
    ----------
    numerator, denominator : array_like
        Coefficients of N(ω²) and D(ω²), highest power of ω² first (as numpy.polyval takes
        them), of the PSD S(ω) = N(ω²)/D(ω²) [unit²/Hz, two-sided, ω in rad/s].

    Returns
    -------
    ShapingFilter
        H(s), stable and minimum phase (every pole and zero in the closed left half-plane),
        with |H(jω)|² = S(ω).

    Raises
    ------
    AnalysisError
        If S is not a valid spectrum: negative somewhere, a pole on the real ω axis (D(ω²) = 0
        for real ω: an undamped or unstable H), not strictly proper (deg N ≥ deg D: infinite
        variance), or coefficients not finite.

    Examples
    --------
    >>> h = factorize([1.0], [1.0, 1.0])      # S(ω) = 1/(1 + ω²)
    >>> h.numerator, h.denominator
    (array([1.]), array([1., 1.]))
    """
    num = np.atleast_1d(np.asarray(numerator, dtype=float))
    den = np.atleast_1d(np.asarray(denominator, dtype=float))
    for name, c in (("numerator", num), ("denominator", den)):
        if c.ndim != 1 or c.size == 0 or not np.all(np.isfinite(c)):
            raise AnalysisError(f"{name} = {c.tolist()}", "finite polynomial coefficients in ω²")
    num = np.trim_zeros(num, "f")
    den = np.trim_zeros(den, "f")
    if num.size == 0:
        raise AnalysisError("the numerator is zero", "a non-zero spectrum")
    if den.size == 0:
        raise AnalysisError("the denominator is zero", "a non-zero denominator")
    if num.size >= den.size:
        raise AnalysisError(
            f"numerator degree {num.size - 1} ≥ denominator degree {den.size - 1} in ω²",
            "a spectrum that rolls off (deg N < deg D) so the variance is finite",
        )
    # S must be non-negative and D must not vanish for real ω (x = ω² ≥ 0)
    if np.sign(num[0]) != np.sign(den[0]):
        raise AnalysisError(
            "the spectrum is negative at high frequency", "a non-negative spectrum N(ω²)/D(ω²)"
        )
    d_roots = np.roots(den)
    for r in d_roots:
        if abs(r.imag) <= 1e-9 * max(1.0, abs(r)) and r.real >= -1e-12 * max(1.0, abs(r)):
            raise AnalysisError(
                f"the denominator vanishes at ω² = {r.real:.6g} (a pole on the frequency axis)",
                "a spectrum finite at every frequency (a stable shaping filter)",
            )
    x = np.concatenate([[0.0], np.logspace(-6, 6, 2001) * _scale(den)])
    n_roots = np.roots(num) if num.size > 1 else np.array([])
    real_pos = [r.real for r in n_roots if abs(r.imag) < 1e-9 * max(1.0, abs(r)) and r.real > 0]
    for r in real_pos:
        x = np.concatenate([x, [r * (1 - 1e-6), r * (1 + 1e-6)]])
    s_val = np.polyval(num, x) / np.polyval(den, x)
    if np.any(s_val < -1e-12 * np.max(np.abs(s_val))):
        bad = x[np.argmin(s_val)]
        raise AnalysisError(
            f"the spectrum is negative near ω = {np.sqrt(bad):.6g} rad/s", "a non-negative spectrum"
        )
    ns = _poly_in_s_from_omega2(num)
    ds = _poly_in_s_from_omega2(den)
    scale = _scale(den)
    z_all = np.roots(ns) if ns.size > 1 else np.array([], dtype=complex)
    p_all = np.roots(ds)
    zeros = _left_half(z_all, "the numerator", 1e-7 * scale)
    poles = _left_half(p_all, "the denominator", 1e-7 * scale)
    if poles.size != den.size - 1 or zeros.size != num.size - 1:
        raise AnalysisError(
            "the spectrum could not be split into H(−s)·H(s)",
            "a PSD that is a ratio of polynomials in ω² with real coefficients",
        )
    num_s = np.real_if_close(np.poly(zeros)) if zeros.size else np.array([1.0])
    den_s = np.real(np.poly(poles))
    num_s = np.real(num_s)
    # |H(jω)|² = g² |Π(jω − z)|² / |Π(jω − p)|² ; leading behaviour g² ω^{2nz}/ω^{2np} = a_n/b_m
    gain = float(np.sqrt(num[0] / den[0]))
    return ShapingFilter(gain * num_s, den_s, zeros, poles, gain)


def _scale(den: npt.NDArray[np.float64]) -> float:
    r = np.abs(np.roots(den)) if den.size > 1 else np.array([1.0])
    return float(np.sqrt(np.max(r))) if r.size else 1.0


@dataclass(frozen=True)
class RationalFit:
    """A rational PSD fitted to a spectrum, as a shaping filter, and how well it fits.

    Attributes
    ----------
    filter : ShapingFilter
        The fitted H(s); its |H(j2πf)|² is the fitted two-sided PSD per hertz.
    rms_db, max_db : float
        RMS and worst |10·log10(fitted / target)| over the fitted points [dB].
    n_points : int
        Number of (frequency, PSD) points fitted.
    """

    filter: ShapingFilter
    rms_db: float
    max_db: float
    n_points: int


def _sections(params: npt.NDArray[np.float64], order: int) -> npt.NDArray[np.float64]:
    """Monic polynomial in s with all roots in the open left half-plane from log-parameters:
    second-order sections s² + 2ζω s + ω² (ω = e^a, ζ = e^b) and one s + e^c if order is odd."""
    poly = np.array([1.0])
    i = 0
    for _ in range(order // 2):
        w, z = np.exp(params[i]), np.exp(params[i + 1])
        poly = np.polymul(poly, [1.0, 2.0 * z * w, w * w])
        i += 2
    if order % 2:
        poly = np.polymul(poly, [1.0, np.exp(params[i])])
    return poly


def _n_params(order: int) -> int:
    return 2 * (order // 2) + order % 2


def fit_rational_psd(
    frequency: npt.ArrayLike,
    psd: npt.ArrayLike,
    *,
    numerator_order: int,
    denominator_order: int,
    sided: str = "one-sided",
) -> RationalFit:
    """Fit a rational spectrum of the given orders to a measured PSD, as a shaping filter.

    Parameters
    ----------
    frequency : array_like
        Frequencies [Hz], positive.
    psd : array_like
        PSD at those frequencies [unit²/Hz], ``sided`` as stated (Welch returns one-sided).
    numerator_order, denominator_order : int
        Orders of H(s) in s (the PSD has twice these in ω); ``numerator_order <
        denominator_order`` so the variance is finite.
    sided : {"one-sided", "two-sided"}
        Sidedness of ``psd``; a one-sided PSD is halved to the two-sided form H is fitted to.

    Returns
    -------
    RationalFit
        The stable, minimum-phase filter (poles and zeros constrained to the left half-plane
        by construction) and the fit error in dB.

    Notes
    -----
    Least squares on the log of the PSD (every decade weighs alike), with each pole/zero pair
    parameterized as a second-order section s² + 2ζωs + ω² with log-parameters, started from
    corner frequencies spread over the band; the best of several starts is kept.
    """
    from scipy.optimize import least_squares

    f, target = _fit_inputs(frequency, psd, numerator_order, denominator_order, sided)
    w = 2.0 * np.pi * f
    nz, npole = _n_params(numerator_order), _n_params(denominator_order)
    model = _log_model(w, numerator_order, denominator_order)
    best = None
    wmin, wmax = w.min(), w.max()
    for lo, hi in (
        (wmin, wmax),
        (wmin * 3, wmax / 3),
        (np.sqrt(wmin * wmax) / 10, np.sqrt(wmin * wmax) * 10),
        (wmin / 3, wmax * 3),
    ):
        try:
            th = np.array(
                [0.0, *_corners(numerator_order, lo, hi), *_corners(denominator_order, lo, hi)]
            )
            th[0] = np.mean(target - (model(th) - 2.0 * th[0])) / 2.0
            res = least_squares(
                lambda t: model(t) - target,
                th,
                method="lm" if target.size > 1 + nz + npole else "trf",
                max_nfev=4000,
            )
        except (ValueError, np.linalg.LinAlgError):
            continue
        if best is None or res.cost < best.cost:
            best = res
    if best is None or not np.all(np.isfinite(best.x)):
        raise AnalysisError(
            "the rational fit did not converge", "a smoother spectrum or other orders", field="psd"
        )
    theta = best.x
    num = np.exp(theta[0]) * _sections(theta[1 : 1 + nz], numerator_order)
    den = _sections(theta[1 + nz :], denominator_order)
    filt = ShapingFilter(
        num,
        den,
        np.roots(num) if num.size > 1 else np.array([], complex),
        np.roots(den),
        float(num[0]),
    )
    err_db = 10.0 / np.log(10.0) * (model(theta) - target)
    return RationalFit(
        filt, float(np.sqrt(np.mean(err_db**2))), float(np.max(np.abs(err_db))), int(f.size)
    )


def _fit_inputs(
    frequency: npt.ArrayLike,
    psd: npt.ArrayLike,
    numerator_order: int,
    denominator_order: int,
    sided: str,
) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """The usable frequencies [Hz] and the log of the two-sided PSD there (arguments checked)."""
    f = np.asarray(frequency, dtype=float)
    p = np.asarray(psd, dtype=float)
    if f.shape != p.shape or f.ndim != 1 or f.size < 3:
        raise AnalysisError(
            f"frequency and psd of shapes {f.shape}, {p.shape}",
            "two 1-D arrays of equal length ≥ 3",
            field="psd",
        )
    ok = np.isfinite(f) & np.isfinite(p) & (f > 0) & (p > 0)
    if ok.sum() < numerator_order + denominator_order + 2:
        raise AnalysisError(
            f"{int(ok.sum())} usable points (positive, finite)",
            "more points than fitted parameters",
            field="psd",
        )
    if not 0 <= numerator_order < denominator_order:
        raise AnalysisError(
            f"{numerator_order=}, {denominator_order=}",
            "0 ≤ numerator_order < denominator_order (finite variance)",
            field="numerator_order",
        )
    if sided not in ("one-sided", "two-sided"):
        raise AnalysisError(f"{sided=}", "'one-sided' or 'two-sided'", field="sided")
    f, p = f[ok], p[ok]
    return f, np.log(p / 2.0 if sided == "one-sided" else p)


def _log_model(w: npt.NDArray[np.float64], numerator_order: int, denominator_order: int) -> Any:
    """θ ↦ log |H(iω)|² of the gain θ[0] and the sections' log-parameters, at ω = ``w``."""
    nz = _n_params(numerator_order)

    def model(theta: npt.NDArray[np.float64]) -> npt.NDArray[np.float64]:
        with np.errstate(all="ignore"):
            num = _sections(theta[1 : 1 + nz], numerator_order)
            den = _sections(theta[1 + nz :], denominator_order)
            s = 1j * w
            out = 2.0 * theta[0] + 2.0 * (
                np.log(np.abs(np.polyval(num, s))) - np.log(np.abs(np.polyval(den, s)))
            )
        return np.nan_to_num(out, nan=1e6, posinf=1e6, neginf=-1e6)

    return model


def _corners(order: int, a: float, b: float) -> list[float]:
    """Start log-parameters of ``order`` poles (or zeros): corners spread over [a, b] rad/s,
    pairs at damping 0.7."""
    out: list[float] = []
    k = _n_params(order)
    freqs = np.exp(np.linspace(np.log(a), np.log(b), max(order, 1)))
    j = 0
    for _ in range(order // 2):
        out += [np.log(freqs[j]), np.log(0.7)]
        j += 2 if j + 2 <= len(freqs) else 0
    if order % 2:
        out.append(np.log(freqs[-1]))
    return out[:k]


def omega_polynomial_to_omega2(
    coefficients: npt.ArrayLike, *, name: str = "polynomial"
) -> npt.NDArray[np.float64]:
    """Turn a polynomial in ω (highest power first) into the same polynomial in ω².

    A PSD is an even function of ω; a non-zero coefficient of an odd power of ω is refused.
    """
    c = np.atleast_1d(np.asarray(coefficients, dtype=float))
    if c.ndim != 1 or c.size == 0 or not np.all(np.isfinite(c)):
        raise AnalysisError(
            f"{name} = {np.asarray(coefficients).tolist()}", "finite coefficients in ω"
        )
    c = np.trim_zeros(c, "f")
    if c.size == 0:
        return np.array([0.0])
    degree = c.size - 1
    powers = np.arange(degree, -1, -1)
    odd = powers % 2 == 1
    if np.any(c[odd] != 0):
        bad = int(powers[odd][np.nonzero(c[odd])[0][0]])
        raise AnalysisError(
            f"{name} has a term in ω^{bad}",
            "only even powers of ω (a PSD is even in ω: write it in ω²)",
        )
    if degree % 2:
        raise AnalysisError(f"{name} has odd degree {degree} in ω", "an even polynomial in ω")
    return c[~odd]


def shaped_term(filt: ShapingFilter, *, meta: dict[str, Any] | None = None):
    """The :class:`sensormodel.terms.Shaped` noise term of a shaping filter."""
    return Shaped(
        numerator=tuple(float(v) for v in filt.numerator),
        denominator=tuple(float(v) for v in filt.denominator),
        meta=dict(meta or {}),
    )
