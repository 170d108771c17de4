"""The overlapping Allan variance pooled across the clean segments of a broken record (private to
:mod:`sensormodel.allan`, which exports :func:`overlapping_pooled`).

A record with gaps (dropped samples, excluded spikes or steps) is a list of clean segments.
Every cluster of three consecutive τ-averages (one overlapping second difference of the phase)
that lies wholly inside one segment is a valid term of the overlapping Allan variance; a cluster
that straddles a gap is not (its phase difference spans unknown samples, and a level shift
across the gap would enter it). The pooled estimate takes every valid cluster of every segment:

    AVAR(τ = m τ0) = Σ_s Σ_i (x_s[i+2m] − 2 x_s[i+m] + x_s[i])² / (2 m² τ0² Σ_s M_s),
    M_s = N_s − 2m  (N_s = n_s + 1 phase points of segment s; as in the engine, a segment
    enters at a τ where it holds at least two clusters, M_s ≥ 2)

the overlapping estimator of NIST SP 1065 eq. (11) with the sum running over the clusters that
the gaps leave whole. This is the "gap-skipping" treatment of missing data in the Allan
variance: I. Sesia and P. Tavella, "Estimating the Allan variance in the presence of long
periods of missing data and outliers", Metrologia 45 (2008) S134-S142 (the dynamic / gap-aware
Allan variance, from memory), and D. A. Howe and N. Schlossberger's treatment of the Allan
variance of time series with gaps (from memory: averages over the clusters free of gaps are
unbiased; the degrees of freedom fall with the clusters lost). Each segment's phase is formed
from its own samples, so no level is carried across a gap.

Degrees of freedom. The pooled variance is a weighted mean Σ w_s V_s of the segments' own
overlapping estimates V_s with weights w_s = M_s/Σ M. Taking the segments as independent (the
gaps separate them; for noise whose correlation time is short against the segments, white and
flicker at τ well below the segment lengths, this holds closely; for random-walk rate noise the
segments share the random walk's level but not its increments, which the second difference
removes), each V_s ~ E[V]·χ²(ν_s)/ν_s with ν_s the Greenhall-Riley EDF of segment s
(:func:`sensormodel.confidence.edf_cached` at its own N_s), and Satterthwaite's approximation
(F. E. Satterthwaite, "An approximate distribution of estimates of variance components",
Biometrics Bulletin 2 (1946) 110-114) gives the EDF of the weighted mean:

    ν = (Σ_s w_s)² / Σ_s (w_s² / ν_s) = (Σ_s M_s)² / Σ_s (M_s² / ν_s)

which is Σ ν_s when ν_s ∝ M_s (white noise at short τ) and never more than Σ ν_s. For one
segment the result is :func:`sensormodel.allan.overlapping`'s curve, with the same EDF.

The noise type behind each τ's EDF is decided, as the engine decides it, on the longest
segment at that τ (the record where the most clusters lie), unless the caller gives it.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import numpy.typing as npt

from .. import validate
from ..confidence import DEFAULT_CONFIDENCE, chi2_interval, edf_cached
from ..errors import AnalysisError
from ._curve import AllanCurve
from ._engine import _BLOCK, aligned_scratch, second_difference_sums
from ._noise import _identify_all, _noise_types
from ._samples import _as_samples, _check_finite_mean, _phase, averaging_factors

__all__ = ["overlapping_pooled", "pooled_sums"]


def _segments(segments: Any) -> list[np.ndarray]:
    """The segments as a list of 1-D real arrays; segments of fewer than 3 samples are kept
    (they add no cluster) but an empty list or a 2-D array is refused."""
    if isinstance(segments, np.ndarray):
        raise AnalysisError(
            f"got one array of shape {segments.shape}",
            "a sequence of 1-D arrays, one per clean segment ([y] for an unbroken record)",
            field="segments",
        )
    items = list(segments)
    if not items:
        raise AnalysisError("got no segments", "at least one clean segment", field="segments")
    out = []
    for i, s in enumerate(items):
        arr = np.asarray(s)
        if arr.ndim != 1:
            raise AnalysisError(
                f"segment {i} has shape {arr.shape}", "1-D arrays of samples", field="segments"
            )
        out.append(arr)
    return out


def pooled_sums(
    segments: Sequence[npt.ArrayLike], ms: npt.ArrayLike, scale: float
) -> tuple[np.ndarray, np.ndarray]:
    """Σ of squared second differences of the phase and their count, over every cluster that lies
    wholly inside a segment, for each averaging factor m.

    Parameters
    ----------
    segments : sequence of array_like
        The clean segments' samples (rates, or increments with ``scale`` = 1).
    ms : array_like of int
        Averaging factors m ≥ 1, increasing.
    scale : float
        Phase scale: 1/rate [s] for rate samples, 1 for increments.

    Returns
    -------
    sums : ndarray
        Σ_s Σ_i (x_s[i+2m] − 2x_s[i+m] + x_s[i])² per m [unit²·s²] (from
        :func:`sensormodel.allan.second_difference_sums`, the engine's one kernel).
    counts : ndarray of int
        Σ_s (N_s − 2m) over the segments with N_s − 2m ≥ 2, per m: the clusters in the sum.
    """
    mlist = np.asarray(ms, dtype=np.int64)
    sums = np.zeros(mlist.shape[0])
    counts = np.zeros(mlist.shape[0], dtype=np.int64)
    buf = aligned_scratch(_BLOCK)
    for i, seg in enumerate(_segments(segments)):
        n_phase = seg.shape[0] + 1
        fits = mlist[n_phase - 2 * mlist >= 2]
        if fits.size == 0:
            continue
        arr = _as_samples(seg, f"segments[{i}]")
        x = _phase(arr, _check_finite_mean(arr, f"segments[{i}]"), scale)
        sums[: fits.size] += second_difference_sums(x, fits, 0, n_phase - 2 * int(fits[0]), buf)
        counts[: fits.size] += n_phase - 2 * fits
    return sums, counts


def _pooled_edf(lengths: list[int], ms: np.ndarray, alphas: np.ndarray) -> np.ndarray:
    """Satterthwaite's EDF of the cluster-weighted mean of the segments' estimates (module
    notes), each segment's EDF from :func:`sensormodel.confidence.edf_cached`."""
    out = np.zeros(ms.shape[0])
    for k, (m, a) in enumerate(zip(ms, alphas, strict=True)):
        total, denom = 0.0, 0.0
        for n in lengths:
            big_m = n + 1 - 2 * int(m)
            if big_m < 2:
                continue
            total += big_m
            denom += big_m * big_m / edf_cached(int(a), int(m), n + 1)
        out[k] = total * total / denom
    return out


def overlapping_pooled(
    segments: Sequence[npt.ArrayLike],
    rate: float,
    *,
    taus: Any = None,
    confidence: float = DEFAULT_CONFIDENCE,
    noise_type: Any = "auto",
    unit: str = "1",
    channel: str = "signal",
    increments: bool = False,
) -> AllanCurve:
    """Overlapping Allan deviation pooled over the clean segments of a record with gaps.

    Every cluster (three consecutive τ-averages) lying wholly inside one segment enters the sum;
    the sum over all segments is divided by the total count of such clusters (NIST SP 1065
    eq. (11) restricted to gap-free clusters; Sesia & Tavella, Metrologia 45 (2008) S134; see
    the module notes). The EDF is Satterthwaite's (1946) for the cluster-weighted mean of the
    segments' estimates, each with its Greenhall-Riley (2003) EDF; the interval is SP 1065
    eq. (45).

    Parameters
    ----------
    segments : sequence of array_like
        The clean segments of one channel, in time order, each 1-D (rate samples in [unit], or
        increments per period with ``increments=True``). A segment too short for a τ adds no
        cluster at that τ.
    rate : float
        Sample rate [Hz]; τ0 = 1/rate.
    taus : None, str or array_like
        τ grid as for :func:`sensormodel.allan.overlapping`, laid out on the longest segment
        (no cluster is longer than a segment).
    confidence : float
        Two-sided confidence of the intervals (default 0.683).
    noise_type : "auto", int or sequence of int
        α for the EDF; ``"auto"`` decides it at each τ on the longest segment, as
        :func:`sensormodel.allan.overlapping` does on a record.
    unit, channel : str
        Labels kept in the result.
    increments : bool
        The segments hold increments (phase = their running sum, no division by the rate).

    Returns
    -------
    AllanCurve
        τ [s], pooled deviation, interval and EDF; ``n_samples`` is the samples of all
        segments, ``n_clusters`` the clusters pooled at each τ.

    Raises
    ------
    AnalysisError
        No segments, a 2-D array, a non-finite sample (naming the segment), a bad rate,
        confidence or noise type, a τ longer than the longest segment allows.

    Examples
    --------
    >>> import numpy as np
    >>> from sensormodel.allan import overlapping, overlapping_pooled
    >>> y = np.random.default_rng(3).normal(0.0, 0.01, 20_000)
    >>> one = overlapping_pooled([y], 100.0, taus=[0.01, 1.0])
    >>> bool(np.allclose(one.adev, overlapping(y, 100.0, taus=[0.01, 1.0]).adev, rtol=1e-12))
    True
    """
    rate = validate.rate(rate)
    confidence = validate.probability(confidence, "confidence", example="0.683")
    items = _segments(segments)
    lengths = [int(s.shape[0]) for s in items]
    longest = int(np.argmax(lengths))
    ms = averaging_factors(lengths[longest], rate, taus)
    fixed = _noise_types(noise_type, len(ms))
    scale = 1.0 if increments else 1.0 / rate
    sums, counts = pooled_sums(items, ms, scale)
    if fixed is None:
        arr = _as_samples(items[longest], f"segments[{longest}]")
        x = _phase(arr, _check_finite_mean(arr, f"segments[{longest}]"), 1.0)
        alphas = _identify_all(x, ms)
    else:
        alphas = fixed
    tau0 = 1.0 / rate
    avar = sums / (2.0 * (ms * tau0) ** 2 * counts)
    adev = np.sqrt(avar)
    nu = _pooled_edf(lengths, ms, alphas)
    low, high = chi2_interval(adev, nu, confidence)
    if not np.all(np.isfinite(adev)):
        raise AnalysisError(
            "the pooled Allan variance is not finite", "finite samples", field="segments"
        )
    return AllanCurve(
        tau=ms * tau0,
        adev=adev,
        ci_low=low,
        ci_high=high,
        edf=nu,
        sample_rate=rate,
        confidence=confidence,
        unit=unit,
        channel=channel,
        n_samples=int(sum(lengths)),
        n_clusters=counts,
        noise_alpha=np.asarray(alphas, dtype=np.int64),
    )
