"""Planning: where each term is read on the Allan curve and the record length that verifies
it, before any test (private to :mod:`sensormodel.acceptance`)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from .. import validate
from ..confidence import dof_for_precision, duration_for_edf
from ..datasheet import AxisSpec, Datasheet, load_datasheet
from ..errors import AnalysisError, DatasheetError
from ._limits import SpecLimit, Unverified, limit_channel, spec_limits
from ._verdicts import DEFAULT_CONFIDENCE, DEFAULT_PRECISION

__all__ = ["Reading", "reading_tau", "PlanRow", "Plan", "plan"]

#: A record must be at least this many times the τ a term is read at (common practice: the
#: longest τ of an Allan analysis is a small fraction of the record).
_MIN_RECORD_OVER_TAU = 8.0
#: A plan reads no term below this many sample periods (common practice: the first points of
#: an Allan curve carry the output filter and aliasing, not the noise terms alone).
_MIN_TAU_SAMPLES = 10.0
#: τ grid points per decade (:func:`_term_curves`).
_PER_DECADE = 12
#: Below this share of the Allan variance at its best τ, a masked term has no planned length:
#: its variance would be the difference of numbers at least ten times its own, so the model of
#: the other terms would have to be exact to better than a tenth of the term.
MIN_MASKED_SHARE = 0.1


def _alpha_at(slope: float) -> int:
    """Power-law noise type α of the frequency PSD from the Allan-variance slope μ (AVAR ∝ τ^μ):
    μ = −α − 1 for −3 < α ≤ 1 (NIST SP 1065); μ ≤ −1.5 is taken as white PM (α = 2)."""
    if slope <= -1.5:
        return 2
    return int(min(0, max(-2, round(-slope - 1.0))))


def _term_curves(
    terms: Sequence[Any], *, rate: float, tau_min: float, tau_max: float
) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """A log τ grid and each term's Allan variance on it [u²].

    The grid is the points 10^(k/12) (12 per decade, k whole) from ``tau_min`` to ``tau_max``,
    whatever the sample rate, so a term read on it is read at the same τ at every rate."""
    k0 = math.ceil(_PER_DECADE * math.log10(tau_min) - 1e-9)
    k1 = math.floor(_PER_DECADE * math.log10(tau_max) + 1e-9)
    tau = 10.0 ** (np.arange(k0, max(k1, k0 + 11) + 1) / _PER_DECADE)
    return tau, np.array([t.allan_variance(tau, sample_rate=rate) for t in terms])


@dataclass(frozen=True)
class Reading:
    """Where a term is read on the Allan curve and what that takes (see :func:`reading_tau`).

    Attributes
    ----------
    tau : float
        τ [s] the term is read at.
    share : float
        Its share of the Allan variance there.
    alpha : int
        Power-law noise type α at ``tau`` (for the EDF).
    dof : float
        Effective degrees of freedom wanted for the term.
    edf : float
        Allan-variance EDF needed at ``tau`` (dof/share²).
    duration : float
        Record length needed [s]; infinite when no length suffices (a masked term).
    masked_by : str or None
        The type of the term that dominates where a masked term is read; None where the term
        dominates somewhere.
    """

    tau: float
    share: float
    alpha: int
    dof: float
    edf: float
    duration: float
    masked_by: str | None = None


def reading_tau(
    terms: Sequence[Any],
    index: int,
    *,
    rate: float,
    dof: float,
    tau_min: float | None = None,
    tau_max: float = 1e7,
    curves: tuple[Any, Any] | None = None,
) -> Reading:
    """The τ at which a term is best read, and the record length that gives it ``dof``.

    A term k contributes the share s(τ) = σ²_k(τ)/σ²(τ) of the Allan variance; its variance
    estimate σ̂² − Σ_others has the relative scatter of σ̂², so its effective degrees of freedom
    are edf(τ)·s(τ)². For each τ the record length T(τ) with edf(τ, T)·s² = ``dof`` follows
    from :func:`sensormodel.confidence.allan_edf` (noise type from the local slope), at least
    8 τ; the reading τ is the one with the shortest T among the τ where the term dominates
    the curve (its share is the largest of all terms'). Elsewhere the term's variance is the
    difference of larger numbers: its estimate then rests on the model of the other terms
    being exact to a fraction of the term, which neither a datasheet nor a fit warrants, and
    the short τ of huge EDF would otherwise win with a share near zero. A Gauss-Markov term is
    read at or past its Allan-deviation peak (τ ≥ 1.89 T, IEEE Std 952-1997 Annex C): below
    it the curve rises as a random walk's and fixes only σ²/T, not the floor. The grid is
    rate-independent (:func:`_term_curves`), so the reading τ does not move with the rate.

    Where no τ has the term dominate, it is *masked*: it is read where its share is largest,
    :attr:`Reading.masked_by` names the term that dominates there, and when that share is
    below :data:`MIN_MASKED_SHARE` no length suffices (``duration`` is infinite).

    Parameters
    ----------
    terms : sequence of Term
        The channel's terms (at the values assumed for the unit).
    index : int
        Which term.
    rate : float
        Sample rate [Hz].
    dof : float
        Effective degrees of freedom wanted for the term.
    tau_min, tau_max : float
        τ range searched [s] (default from one sample period), 12 points per decade.
    curves : (ndarray, ndarray), optional
        (τ grid, Allan variance of each term on it, shape (terms, τ)) already computed
        (:func:`_term_curves`), to read several terms of one channel without recomputing.
    """
    if curves is None:
        curves = _term_curves(terms, rate=rate, tau_min=tau_min or 1.0 / rate, tau_max=tau_max)
    tau, parts = curves
    total = parts.sum(axis=0)
    share = np.divide(parts[index], total, out=np.zeros_like(total), where=total > 0)
    slope = np.gradient(np.log(np.maximum(total, 1e-300)), np.log(tau))
    usable = share >= 1e-6
    if not usable.any():
        raise AnalysisError(
            f"the {terms[index].type} term contributes nothing to the Allan variance",
            "a term with a non-zero value",
            field=terms[index].type,
        )
    term = terms[index]
    if term.type == "gauss_markov":
        # below its peak a Gauss-Markov curve fixes only σ²/T; its floor needs the peak
        past_peak = usable & (tau >= term.peak()[0] * (1.0 - 1e-9))
        usable = past_peak if past_peak.any() else usable
    dominant = np.argmax(parts, axis=0)
    own = usable & (dominant == index)
    if own.any():
        found = [
            _reading_at(float(tau[i]), float(share[i]), float(slope[i]), rate, dof)
            for i in np.flatnonzero(own)
        ]
        return min(found, key=lambda r: r.duration)
    # masked: no τ where the term is the largest; read where its share is largest
    i = int(np.flatnonzero(usable)[np.argmax(share[usable])])
    r = _reading_at(float(tau[i]), float(share[i]), float(slope[i]), rate, dof)
    return replace(
        r,
        masked_by=str(terms[int(dominant[i])].type),
        duration=r.duration if r.share >= MIN_MASKED_SHARE else math.inf,
    )


def _reading_at(tau: float, share: float, slope: float, rate: float, dof: float) -> Reading:
    """The reading of a term of this ``share`` at ``tau`` (noise type from the ``slope``)."""
    alpha = _alpha_at(slope)
    edf = dof / share**2
    dur = max(duration_for_edf(alpha, tau, edf, rate), _MIN_RECORD_OVER_TAU * tau)
    return Reading(tau, share, alpha, dof, edf, dur)


@dataclass(frozen=True)
class PlanRow:
    """The recording length needed to verify one term of a unit exactly at its limits.

    Attributes
    ----------
    spec : SpecLimit
    read_at : float
        τ [s] at which the term is read.
    share : float
        Its share of the Allan variance there.
    noise_alpha : int
        The power-law noise type α at that τ (for the EDF; its name in
        :data:`sensormodel.allan.NOISE_NAMES`).
    dof : float
        Effective degrees of freedom needed for the term.
    edf : float
        Equivalent degrees of freedom of the Allan variance needed at ``read_at`` (dof/share²).
    duration : float
        Record length needed [s].
    verified : bool
        False for a term printed without the verified column (shown for information, at the
        value printed).
    reasons : tuple of (str, dict)
        Reason codes and their numbers (:mod:`sensormodel.report` writes them):
        ``term_masked`` where no τ has the term dominate the curve (``masked_by``, ``share``,
        ``tau``, ``min_share``; ``duration`` is then infinite when ``share`` is below
        :data:`MIN_MASKED_SHARE`).
    """

    spec: SpecLimit
    read_at: float
    share: float
    noise_alpha: int
    dof: float
    edf: float
    duration: float
    verified: bool = True
    reasons: tuple[tuple[str, dict[str, Any]], ...] = ()


@dataclass(frozen=True)
class Plan:
    """Recording lengths needed to verify a datasheet (see :func:`plan`)."""

    rows: tuple[PlanRow, ...]
    unverified: tuple[Unverified, ...]
    confidence: float
    precision: float
    sample_rate: float
    datasheet: dict[str, Any] = field(default_factory=dict)

    @property
    def duration(self) -> float:
        """The longest length needed by a verified term: a record this long verifies every
        term that has a limit and a finite length [s] (see :attr:`PlanRow.reasons` for a term
        that no length verifies)."""
        return max(
            (r.duration for r in self.rows if r.verified and math.isfinite(r.duration)),
            default=0.0,
        )

    @property
    def driver(self) -> PlanRow | None:
        """The verified row that needs the longest finite record."""
        return max(
            (r for r in self.rows if r.verified and math.isfinite(r.duration)),
            key=lambda r: r.duration,
            default=None,
        )


def plan(
    datasheet: Datasheet | str,
    *,
    confidence: float = DEFAULT_CONFIDENCE,
    precision: float = DEFAULT_PRECISION,
    against: str = "max",
    sample_rate: float | None = None,
) -> Plan:
    """Recording length needed to verify each term of a datasheet, before any test.

    For a unit exactly at its limits (the model of the ``max`` values; a term printed without
    a max at its typical value), each term is read at the τ where a record reaches the
    wanted precision soonest (:func:`reading_tau`): the interval's half-width at ``confidence``
    is at most ``precision`` of the term's value (:func:`dof_for_precision`). A unit whose true
    value lies more than about that fraction below (above) its limit is then decided ``pass``
    (``fail``) in most records.

    Parameters
    ----------
    datasheet : Datasheet or path
    confidence : float
        Two-sided confidence (default 0.9).
    precision : float
        Wanted relative half-width of the interval (default 0.25).
    against : {"max", "typ"}
        The datasheet column verified.
    sample_rate : float, optional
        Recording rate [Hz] (default the datasheet's ``sample_rate``).

    Returns
    -------
    Plan
    """
    validate.probability(confidence, "confidence", example="0.9")
    ds = datasheet if isinstance(datasheet, Datasheet) else load_datasheet(datasheet)
    nu = dof_for_precision(precision, confidence)
    rows: list[PlanRow] = []
    skipped: list[Unverified] = []
    rate_used = 0.0
    for ax in ds.channels():
        limits, unver = spec_limits(ax, against=against, include_other=True)
        skipped.extend(unver)
        if sample_rate is not None:
            rate = float(sample_rate)
        elif "sample_rate" in ax.values:
            rate = ax.values["sample_rate"].pick("max")[0]
        else:  # pragma: no cover - the datasheet schema requires a rate
            raise DatasheetError("no sample_rate", "a sample_rate", source=ds.source)
        rate_used = rate
        rows.extend(_plan_channel(ax, limits, rate=rate, dof=nu, against=against))
    return Plan(
        rows=tuple(rows),
        unverified=tuple(skipped),
        confidence=float(confidence),
        precision=float(precision),
        sample_rate=rate_used,
        datasheet={"file": ds.source, "sha256": ds.sha256},
    )


def _plan_channel(
    ax: AxisSpec, limits: list[SpecLimit], *, rate: float, dof: float, against: str
) -> list[PlanRow]:
    """The plan rows of one channel's limited terms, read on the model of its limits."""
    terms = list(limit_channel(ax, rate=rate, against=against).terms)
    curves = _term_curves(terms, rate=rate, tau_min=_MIN_TAU_SAMPLES / rate, tau_max=1e9)
    rows = []
    for spec in limits:
        idx = next(
            i
            for i, t in enumerate(terms)
            if t.type == spec.type and t.meta.get("datasheet", {}).get("field") == spec.field
        )
        r = reading_tau(terms, idx, rate=rate, dof=dof, curves=curves)
        reasons: tuple[tuple[str, dict[str, Any]], ...] = ()
        if r.masked_by is not None:
            why = {
                "term": spec.key,
                "masked_by": r.masked_by,
                "share": r.share,
                "tau": r.tau,
                "min_share": MIN_MASKED_SHARE,
            }
            reasons = (("term_masked", why),)
        rows.append(
            PlanRow(
                spec=spec,
                read_at=r.tau,
                share=r.share,
                noise_alpha=r.alpha,
                dof=dof,
                edf=r.edf,
                duration=r.duration,
                verified=spec.column == against,
                reasons=reasons,
            )
        )
    return rows
