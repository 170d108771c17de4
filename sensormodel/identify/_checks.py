"""Argument checks of the identification: term names, bootstrap sizes, the output filter, and
the Allan curve (:class:`_Curve`, the parts of it the fit uses).

The shared checks (a probability, a seed, a whole number) are :mod:`sensormodel.validate`'s.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from .. import validate
from ..errors import AnalysisError
from ._names import DEFAULT_BOOTSTRAP, KNOWN_TERMS

_FloatArray = npt.NDArray[np.float64]


def _check_terms(terms: Any) -> tuple[str, ...]:
    """Term names (a sequence or a comma-separated string), each once, in the order of
    :data:`KNOWN_TERMS`."""
    if isinstance(terms, str):
        terms = [t.strip() for t in terms.split(",") if t.strip()]
    try:
        names = [str(t).strip().lower().replace("-", "_") for t in terms]
    except TypeError:
        raise AnalysisError(
            f"got {terms!r}", f"term names among {', '.join(KNOWN_TERMS)}", field="terms"
        ) from None
    if not names:
        raise AnalysisError(
            "got no terms", f"one or more of {', '.join(KNOWN_TERMS)}", field="terms"
        )
    for n in names:
        if n not in KNOWN_TERMS:
            raise AnalysisError(
                f"unknown term {n!r}", f"one of {', '.join(KNOWN_TERMS)}", field="terms"
            )
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise AnalysisError(f"{dup[0]!r} is given twice", "each term once", field="terms")
    return tuple(t for t in KNOWN_TERMS if t in names)


def bootstrap_minimum(confidence: float) -> int:
    """The fewest bootstrap records for intervals at two-sided ``confidence``: ⌈2/α⌉ with
    α = (1 − c)/2, so that two records lie beyond each end (40 at 0.9, 400 at 0.99)."""
    alpha = 0.5 * (1.0 - validate.probability(confidence, "confidence"))
    return int(math.ceil(2.0 / alpha - 1e-9))


def _check_n_boot(n_boot: Any, confidence: float) -> int:
    """Bootstrap records for intervals at ``confidence``: at least :func:`bootstrap_minimum`
    (default the larger of that and 200)."""
    need = bootstrap_minimum(confidence)
    if n_boot is None:
        return max(DEFAULT_BOOTSTRAP, need)
    why = f"bootstrap records for a {confidence:g} interval (two records beyond each end)"
    return _check_records(n_boot, "n_boot", need, why)


def _check_records(value: Any, name: str, need: int, why: str) -> int:
    """A count of simulated records: a whole number of at least ``need`` (``why`` says why)."""
    count = validate.whole_number(value, name)
    if count < need:
        raise AnalysisError(f"got {count}", f"at least {need} {why}", field=name)
    return count


@dataclass(frozen=True)
class _Curve:
    """The parts of an Allan curve the fit uses, checked."""

    tau: _FloatArray
    avar: _FloatArray
    adev: _FloatArray
    edf: _FloatArray
    m: npt.NDArray[np.int64]
    rate: float
    n: int
    channel: str
    unit: str


def _check_curve(curve: Any, n_terms: int) -> _Curve:
    """The curve's τ [s], Allan variance and deviation [u², u], EDF, averaging factors and
    record length, checked: positive values on the sample grid, at least ``n_terms`` + 1 τ."""
    for name in ("tau", "adev", "edf", "sample_rate"):
        if not hasattr(curve, name):
            raise AnalysisError(
                f"got {type(curve).__name__} without '{name}'",
                "an AllanCurve (sensormodel.allan.overlapping)",
                field="curve",
            )
    channel = str(getattr(curve, "channel", "signal"))
    tau = np.asarray(curve.tau, dtype=np.float64)
    adev = np.asarray(curve.adev, dtype=np.float64)
    edf = np.asarray(curve.edf, dtype=np.float64)
    rate = validate.rate(curve.sample_rate, f"{channel}.sample_rate")
    if tau.ndim != 1 or tau.shape != adev.shape or tau.shape != edf.shape:
        raise AnalysisError(
            "tau, adev and edf differ in shape", "one value of each per τ", field=channel
        )
    bad = ~(np.isfinite(adev) & (adev > 0))
    if np.any(bad):
        i = int(np.flatnonzero(bad)[0])
        raise AnalysisError(
            f"the Allan deviation at τ = {tau[i]:g} s is {float(adev[i])!r}",
            "a noisy record (Allan deviation > 0 at every τ)",
            field=channel,
        )
    if not np.all(np.isfinite(edf) & (edf > 0)):
        raise AnalysisError("an EDF is not a positive number", "edf > 0 at every τ", field=channel)
    m = np.rint(tau * rate).astype(np.int64)
    if np.any(m < 1) or np.any(np.abs(m - tau * rate) > 1e-6 * np.maximum(m, 1)):
        raise AnalysisError(
            "a τ is not a whole number of sample periods",
            "τ = m/sample_rate with m = 1, 2, … (a curve from sensormodel.allan.overlapping)",
            field=channel,
        )
    n = getattr(curve, "n_samples", None)
    if n is None:
        nc = getattr(curve, "n_clusters", None)
        if nc is None:
            raise AnalysisError(
                "the curve gives neither n_samples nor n_clusters",
                "the record length (a curve from sensormodel.allan.overlapping)",
                field=channel,
            )
        # n_clusters = n + 1 − 2m (allan.py)
        n = int(np.asarray(nc)[0]) + 2 * int(m[0]) - 1
    n = int(n)
    if tau.size < n_terms + 1:
        raise AnalysisError(
            f"the curve of the {n}-sample record has {tau.size} τ for {n_terms} terms",
            f"at least {n_terms + 1} τ (one more than the terms fitted): a longer record, a "
            "denser τ grid or fewer terms",
            field=channel,
        )
    if 2 * int(m[-1]) > n - 1:
        raise AnalysisError(
            f"τ = {tau[-1]:g} s needs more than the {n} samples of the record",
            "τ ≤ (n − 1)/(2·rate)",
            field=channel,
        )
    return _Curve(
        tau=tau,
        avar=adev**2,
        adev=adev,
        edf=edf,
        m=m,
        rate=rate,
        n=n,
        channel=channel,
        unit=str(getattr(curve, "unit", "1")),
    )


def _check_white_filter(bandwidth: Any, filter_order: Any) -> tuple[float, int] | None:
    """The sensor's output filter: (bandwidth [Hz], Butterworth order 1 to 8), or None."""
    if bandwidth is None:
        if filter_order is not None:
            raise AnalysisError(
                f"filter_order {filter_order!r} without a bandwidth",
                "a bandwidth [Hz] with the filter order",
                field="filter_order",
            )
        return None
    if isinstance(bandwidth, bool) or not isinstance(bandwidth, (int, float, np.floating)):
        raise AnalysisError(f"got {bandwidth!r}", "a bandwidth [Hz] > 0", field="bandwidth")
    bw = float(bandwidth)
    if not math.isfinite(bw) or bw <= 0:
        raise AnalysisError(f"got {bandwidth!r}", "a bandwidth [Hz] > 0", field="bandwidth")
    order = 1 if filter_order is None else filter_order
    if isinstance(order, bool) or not isinstance(order, (int, np.integer)) or not 1 <= order <= 8:
        raise AnalysisError(f"got {filter_order!r}", "a filter order 1 to 8", field="filter_order")
    return bw, int(order)


def _check_count_step(count_step: Any) -> float | None:
    """A record's count step [u] (a positive finite number), or None."""
    if count_step is None:
        return None
    if isinstance(count_step, bool) or not isinstance(count_step, (int, float, np.floating)):
        raise AnalysisError(f"got {count_step!r}", "a count step [u] > 0", field="count_step")
    q = float(count_step)
    if not math.isfinite(q) or q <= 0:
        raise AnalysisError(f"got {count_step!r}", "a count step [u] > 0", field="count_step")
    return q
