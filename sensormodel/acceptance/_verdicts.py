"""Verdict objects and decisions: an interval against a limit, the combination of verdicts,
the whole-curve check, and the results of a verification (private to
:mod:`sensormodel.acceptance`). Results carry reason codes and numbers;
:mod:`sensormodel.report` writes the sentences."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from ..confidence import DECISION_CONFIDENCE, DEFAULT_POWER
from ..errors import AnalysisError
from ._limits import SpecLimit, Unverified

__all__ = [
    "VERDICTS",
    "DEFAULT_CONFIDENCE",
    "DEFAULT_POWER",
    "DEFAULT_PRECISION",
    "decide",
    "combine",
    "TermVerdict",
    "CurveCheck",
    "ChannelVerdict",
    "VerdictReport",
    "curve_check",
]

#: The three verdicts, best first.
VERDICTS = ("pass", "fail", "inconclusive")
#: Default two-sided confidence of the intervals (each one-sided error ≤ 5 %).
DEFAULT_CONFIDENCE = DECISION_CONFIDENCE
#: Default relative half-width of the interval a plan aims at.
DEFAULT_PRECISION = 0.25


#: Report notes that mean a datasheet limit was not checked: the overall verdict is then at
#: best ``inconclusive`` (a verdict is never better than what was checked).
UNCHECKED = frozenset({"limits_not_checked"})


def _verdict(failed: bool, passed: bool) -> str:
    """The one ranking of the three verdicts: ``fail`` outranks ``pass``; neither is
    ``inconclusive``."""
    if failed:
        return "fail"
    return "pass" if passed else "inconclusive"


def decide(low: float, high: float, limit: float) -> str:
    """The verdict of an interval [low, high] against an upper limit.

    Returns
    -------
    str
        ``pass`` if ``high <= limit`` (the whole interval is within the limit), ``fail`` if
        ``low > limit`` (the whole interval is beyond it), else ``inconclusive``.
    """
    values = (low, high, limit)
    if not all(isinstance(v, (int, float)) and math.isfinite(v) for v in values):
        raise AnalysisError(
            f"interval [{low}, {high}] and limit {limit}", "finite numbers", field="interval"
        )
    if low > high:
        raise AnalysisError(f"interval [{low}, {high}]", "low <= high", field="interval")
    return _verdict(failed=low > limit, passed=high <= limit)  # never both: low <= high


def combine(verdicts: Sequence[str]) -> str:
    """Overall verdict: ``fail`` if any fails, ``pass`` if all pass (and there is at least one),
    else ``inconclusive``."""
    v = list(verdicts)
    return _verdict(failed="fail" in v, passed=bool(v) and all(x == "pass" for x in v))


@dataclass(frozen=True)
class TermVerdict:
    """The verdict on one datasheet term of one channel.

    Attributes
    ----------
    spec : SpecLimit
        The term and its limit.
    estimate, low, high : float
        The estimate and its interval (SI, the compared quantity ``spec.quantity``).
    confidence : float
        Two-sided confidence of the interval.
    verdict : str
        ``pass``, ``fail`` or ``inconclusive``.
    required_duration : float or None
        For ``inconclusive``: the record length [s] that would decide it (None if no length
        does); None otherwise.
    read_at : float or None
        τ [s] at which the term is read (for the fitted model).
    edf : float or None
        Equivalent degrees of freedom of the Allan variance at ``read_at`` in this record.
    dof : float or None
        Effective degrees of freedom of the term's interval (chi-square of the same width).
    supported : bool
        Whether the identification resolved the term (else the interval is a bound).
    reasons : tuple of (str, dict)
        Reason codes with their numbers, in order: ``limit_test_not_confirmed`` (``side``,
        ``p_value``, ``alpha``, ``n_records``) where the test at the limit refuted the
        interval's call, then for an inconclusive term how the required length was found
        (:func:`sensormodel.confidence.required_duration`'s code, or ``length_unknown``).
        :func:`sensormodel.report.term_note` writes them as the note of the reports.
    limit_test : dict or None
        For an interval that excluded the limit: the parametric bootstrap test at the limit
        (:func:`sensormodel.identify.limit_test`) that must confirm the call: ``p_value`` (of
        the side the interval pointed to), ``n_records``, ``confirmed``; or ``skipped`` with a
        reason code (``no_fit_state``, or ``beyond_bootstrap`` with ``skip_margin``). None
        where no call was made.
    """

    spec: SpecLimit
    estimate: float
    low: float
    high: float
    confidence: float
    verdict: str
    required_duration: float | None = None
    read_at: float | None = None
    edf: float | None = None
    dof: float | None = None
    supported: bool = True
    reasons: tuple[tuple[str, Mapping[str, Any]], ...] = ()
    limit_test: Mapping[str, Any] | None = None


@dataclass(frozen=True)
class CurveCheck:
    """The measured Allan deviation against the curve the datasheet's limits imply.

    Attributes
    ----------
    tau, adev, ci_low, ci_high : ndarray
        The measured curve and its pointwise interval [s], [u].
    limit : ndarray
        Allan deviation of the limit model at ``tau`` [u].
    exceeded : tuple of (float, float)
        τ ranges [s] (first, last τ of each run) where ``ci_low > limit``.
    within : ndarray of bool
        Where ``ci_high <= limit``.
    confidence : float
        Confidence of the pointwise interval.
    checked : ndarray of bool or None
        Where the limit curve is a limit (the datasheet's limited terms make it; see
        :data:`~sensormodel.acceptance.UNLIMITED_SHARE_MAX`); None: everywhere. Elsewhere the
        curve is only a reference built from typical values, and is not judged.
    """

    tau: npt.NDArray[np.float64]
    adev: npt.NDArray[np.float64]
    ci_low: npt.NDArray[np.float64]
    ci_high: npt.NDArray[np.float64]
    limit: npt.NDArray[np.float64]
    exceeded: tuple[tuple[float, float], ...]
    within: npt.NDArray[np.bool_]
    confidence: float
    checked: npt.NDArray[np.bool_] | None = None

    @property
    def judged(self) -> npt.NDArray[np.bool_]:
        """Where the curve is judged (``checked``, or everywhere)."""
        if self.checked is None:
            return np.ones(self.tau.shape, dtype=bool)
        return self.checked

    @property
    def not_judged(self) -> tuple[tuple[float, float], ...]:
        """τ ranges [s] (first, last τ of each run) where the curve is not judged."""
        return _runs(~self.judged, self.tau)

    @property
    def verdict(self) -> str:
        """``fail`` if exceeded anywhere judged, ``pass`` if within at every τ judged (and at
        least one is), else ``inconclusive``."""
        judged = self.judged
        passed = bool(np.any(judged)) and bool(np.all(self.within[judged]))
        return _verdict(failed=bool(self.exceeded), passed=passed)


@dataclass(frozen=True)
class ChannelVerdict:
    """Everything the acceptance of one channel found.

    Attributes
    ----------
    id : str
        Channel id.
    unit : str
        SI unit of the channel.
    terms : tuple of TermVerdict
    unverified : tuple of Unverified
    curve : CurveCheck
    limit_channel : Channel
        The model built from the limits (for figures).
    identification : Any
        The :class:`sensormodel.identify.Identification` the estimates come from.
    allan : Any
        The measured :class:`sensormodel.allan.AllanCurve`.
    duration : float
        Record length analysed [s].
    psd : PSDResult or None
        One-sided Welch PSD [u²/Hz] of the analysed segment in logarithmic bins
        (:func:`sensormodel.pipeline.analyse`), when a recording was given; for figures only.
    """

    id: str
    unit: str
    terms: tuple[TermVerdict, ...]
    unverified: tuple[Unverified, ...]
    curve: CurveCheck
    limit_channel: Any
    identification: Any
    allan: Any
    duration: float
    psd: Any = None

    @property
    def rate(self) -> float:
        """Sample rate [Hz] (of the measured curve ``allan``)."""
        return float(self.allan.sample_rate)

    @property
    def verdict(self) -> str:
        """Combined verdict of the channel's terms (:func:`combine`)."""
        return combine([t.verdict for t in self.terms])


@dataclass(frozen=True)
class VerdictReport:
    """The acceptance of a recording against a datasheet.

    Attributes
    ----------
    channels : tuple of ChannelVerdict
    confidence : float
    against : str
        ``max`` or ``typ``.
    power : float
        Probability used for the required lengths.
    datasheet : dict
        ``file``, ``sha256``, ``sensor`` (name, model, manufacturer as printed).
    recording : dict
        ``file``, ``duration`` [s], ``sample_rate`` [Hz], ``samples``.
    notes : tuple of (str, dict)
        Reason codes with their values: ``channels_missing`` / ``channels_extra``
        (``channels``), ``limits_not_checked`` (``terms``: the limits of missing channels),
        ``segments_left_out`` (``channel``, ``segments``, ``duration``,
        ``recording_duration``), ``note`` (``text``, a caller's own remark).
    """

    channels: tuple[ChannelVerdict, ...]
    confidence: float
    against: str
    power: float
    datasheet: dict[str, Any] = field(default_factory=dict)
    recording: dict[str, Any] = field(default_factory=dict)
    notes: tuple[tuple[str, Mapping[str, Any]], ...] = ()

    @property
    def overall(self) -> str:
        """``fail`` if any term fails, ``pass`` if all pass and every limit of the datasheet was
        checked (no note :data:`UNCHECKED`), else ``inconclusive``."""
        verdict = combine([t.verdict for c in self.channels for t in c.terms])
        if verdict == "pass" and any(code in UNCHECKED for code, _ in self.notes):
            return "inconclusive"
        return verdict

    @property
    def exit_code(self) -> int:
        """0 all pass, 1 any fail, 3 otherwise (inconclusive)."""
        return {"pass": 0, "fail": 1}.get(self.overall, 3)

    def with_notes(self, *notes: str) -> VerdictReport:
        """A copy with more notes (free text, kept as ``("note", {"text": …})``)."""
        return replace(self, notes=self.notes + tuple(("note", {"text": n}) for n in notes))


def _runs(mask: npt.NDArray[np.bool_], tau: npt.NDArray[np.float64]) -> tuple:
    out = []
    i = 0
    n = mask.size
    while i < n:
        if mask[i]:
            j = i
            while j + 1 < n and mask[j + 1]:
                j += 1
            out.append((float(tau[i]), float(tau[j])))
            i = j + 1
        else:
            i += 1
    return tuple(out)


def curve_check(
    curve: Any,
    limit_adev: npt.ArrayLike,
    *,
    confidence: float,
    checked: npt.ArrayLike | None = None,
) -> CurveCheck:
    """Compare a measured Allan curve with a limit curve at the same τ.

    Parameters
    ----------
    curve : AllanCurve
        With ``tau``, ``adev``, ``ci_low``, ``ci_high`` (pointwise interval at ``confidence``).
    limit_adev : array_like
        The limit Allan deviation at ``curve.tau`` [u].
    confidence : float
        The confidence of the curve's interval (recorded in the result).
    checked : array_like of bool, optional
        Where the limit curve is a limit (default everywhere); exceedances elsewhere are not
        reported.
    """
    tau = np.asarray(curve.tau, dtype=float)
    lim = np.asarray(limit_adev, dtype=float)
    lo = np.asarray(curve.ci_low, dtype=float)
    hi = np.asarray(curve.ci_high, dtype=float)
    if lim.shape != tau.shape:
        raise AnalysisError(
            f"limit curve of {lim.size} points", f"{tau.size} points, one per τ", field="limit"
        )
    judged = None if checked is None else np.asarray(checked, dtype=bool)
    if judged is not None and judged.shape != tau.shape:
        raise AnalysisError(
            f"checked mask of {judged.size} points",
            f"{tau.size} points, one per τ",
            field="checked",
        )
    exceeded = lo > lim if judged is None else (lo > lim) & judged
    return CurveCheck(
        tau=tau,
        adev=np.asarray(curve.adev, dtype=float),
        ci_low=lo,
        ci_high=hi,
        limit=lim,
        exceeded=_runs(exceeded, tau),
        within=hi <= lim,
        confidence=float(confidence),
        checked=judged,
    )
