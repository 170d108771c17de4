"""The statistics of intervals: chi-square confidence intervals of deviations, equivalent
degrees of freedom, the probability that a record decides a verdict, and the record length
that would decide it.

One owner: allan (curve intervals), identify (slope readings) and acceptance (verdicts,
planning) import these rather than writing their own.

References
----------
NIST SP 1065, W. J. Riley, "Handbook of Frequency Stability Analysis" (2008), eq. (45): the
chi-square interval of the Allan variance.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from . import validate
from .errors import AnalysisError

__all__ = ["DEFAULT_CONFIDENCE", "chi2_interval"]

#: Default two-sided confidence of an Allan-deviation interval: one sigma (common practice).
DEFAULT_CONFIDENCE = 0.683


def chi2_interval(
    deviation: npt.ArrayLike, edf: npt.ArrayLike, confidence: float = DEFAULT_CONFIDENCE
) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """Chi-square confidence interval of a deviation (NIST SP 1065, eq. (45)).

    σ_low = σ̂ sqrt(edf / χ²_{(1+c)/2}(edf)),  σ_high = σ̂ sqrt(edf / χ²_{(1−c)/2}(edf)).

    Parameters
    ----------
    deviation : array_like
        Estimated deviation σ̂ [any unit].
    edf : array_like
        Equivalent degrees of freedom [-], > 0.
    confidence : float
        Two-sided confidence c, 0 < c < 1.

    Returns
    -------
    low, high : ndarray
        Interval bounds [unit of ``deviation``].
    """
    from scipy.stats import chi2

    c = validate.probability(confidence, "confidence", example="0.683")
    dev = np.asarray(deviation, dtype=np.float64)
    nu = np.asarray(edf, dtype=np.float64)
    if np.any(~np.isfinite(nu)) or np.any(nu <= 0.0):
        raise AnalysisError(f"got edf = {nu!r}", "equivalent degrees of freedom > 0", field="edf")
    low = dev * np.sqrt(nu / chi2.ppf(0.5 * (1.0 + c), nu))
    high = dev * np.sqrt(nu / chi2.ppf(0.5 * (1.0 - c), nu))
    return low, high
