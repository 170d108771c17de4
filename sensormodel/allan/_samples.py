"""The record and its τ grid: sample checks, the phase (integrated rate) and averaging
factors (private to :mod:`sensormodel.allan`)."""

from __future__ import annotations

import math
import re
from typing import Any

import numpy as np
import numpy.typing as npt

from .. import validate
from ..errors import AnalysisError

__all__ = ["averaging_factors", "tau_grid"]

# ---------------------------------------------------------------------------------------------
# Samples and phase
# ---------------------------------------------------------------------------------------------


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


def _check_finite_mean(arr: np.ndarray, name: str, offset: int = 0) -> float:
    """The mean of the samples in float64; a non-finite sample is refused by index (plus
    ``offset``, the place of ``arr[0]`` in the record)."""
    mean = float(np.mean(arr, dtype=np.float64))
    if math.isfinite(mean):
        return mean
    for i0 in range(0, arr.shape[0], 1 << 20):
        block = np.asarray(arr[i0 : i0 + (1 << 20)], dtype=np.float64)
        bad = np.flatnonzero(~np.isfinite(block))
        if bad.size:
            i = offset + i0 + int(bad[0])
            raise AnalysisError(
                f"sample {i} is {float(block[bad[0]])!r}",
                "finite samples only (cut the record at gaps, or repair them, before the analysis)",
                field=name,
            )
    raise _too_large(name)


def _too_large(name: str) -> AnalysisError:
    """The refusal of finite samples whose float64 sum overflows."""
    return AnalysisError(
        "the samples are too large to sum in float64", "samples below about 1e300", field=name
    )


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


def _block_sumsq(x0: np.ndarray, x1: np.ndarray, x2: np.ndarray, b: np.ndarray) -> float:
    """Σ (x2 − 2·x1 + x0)² of equally long slices, formed in the scratch ``b`` (same length).

    The one kernel of the second-difference sums (in memory and streamed), in the textbook
    operation order (x2 − 2·x1) + x0.
    """
    np.multiply(x1, 2.0, out=b)
    np.subtract(x2, b, out=b)
    np.add(b, x0, out=b)
    return _sumsq(b)


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
    rate = validate.rate(rate)
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
    rate = validate.rate(rate)
    return averaging_factors(n, rate, spec).astype(np.float64) / rate
