"""Planning: where each term is read on the Allan curve and the record length that verifies
it, before any test (private to :mod:`sensormodel.acceptance`)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
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


def _alpha_at(slope: float) -> int:
    """Power-law noise type α of the frequency PSD from the Allan-variance slope μ (AVAR ∝ τ^μ):
    μ = −α − 1 for −3 < α ≤ 1 (NIST SP 1065); μ ≤ −1.5 is taken as white PM (α = 2)."""
    if slope <= -1.5:
        return 2
    return int(min(0, max(-2, round(-slope - 1.0))))


def _term_curves(
    terms: Sequence[Any], *, rate: float, tau_min: float, tau_max: float
) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """A log τ grid (12 points per decade) and each term's Allan variance on it [u²]."""
    n = max(12, int(math.ceil(12 * math.log10(tau_max / tau_min))) + 1)
    tau = np.geomspace(tau_min, tau_max, n)
    return tau, np.array([t.allan_variance(tau, sample_rate=rate) for t in terms])


@dataclass(frozen=True)
class Reading:
    """Where a term is read on the Allan curve and what that takes (see :func:`reading_tau`)."""

    tau: float
    share: float
    alpha: int
    dof: float
    edf: float
    duration: float


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
    8 τ; the reading τ is the one with the shortest T.

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
    best: Reading | None = None
    for i, t in enumerate(tau):
        s = float(share[i])
        if s < 1e-6:
            continue
        alpha = _alpha_at(float(slope[i]))
        edf = dof / s**2
        dur = max(duration_for_edf(alpha, float(t), edf, rate), _MIN_RECORD_OVER_TAU * t)
        if best is None or dur < best.duration:
            best = Reading(float(t), s, alpha, dof, edf, dur)
    if best is None:
        raise AnalysisError(
            f"the {terms[index].type} term contributes nothing to the Allan variance",
            "a term with a non-zero value",
            field=terms[index].type,
        )
    return best


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
    """

    spec: SpecLimit
    read_at: float
    share: float
    noise_alpha: int
    dof: float
    edf: float
    duration: float
    verified: bool = True


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
        term that has a limit [s]."""
        return max((r.duration for r in self.rows if r.verified), default=0.0)

    @property
    def driver(self) -> PlanRow | None:
        """The verified row that needs the longest record."""
        return max((r for r in self.rows if r.verified), key=lambda r: r.duration, default=None)


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
            )
        )
    return rows
