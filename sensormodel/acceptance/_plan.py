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
from ..confidence import allan_edf, duration_for_edf, edf, required_dof
from ..datasheet import AxisSpec, Datasheet, load_datasheet
from ..errors import AnalysisError, DatasheetError
from ..identify._design import _basis, _resolvable_time_constant
from ._limits import (
    SpecLimit,
    Unverified,
    _fit_reading,
    fit_terms,
    limit_channel,
    output_filter,
    spec_limits,
)
from ._verdicts import DEFAULT_CONFIDENCE, DEFAULT_POWER

__all__ = ["Reading", "reading_tau", "PlanRow", "Plan", "plan", "plan_dof", "DEFAULT_MARGIN"]

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
#: Default margin of the plan's promise: the unit whose decision it promises lies 25 % below
#: its limit (:func:`plan`).
DEFAULT_MARGIN = 0.25


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


def _scaled(term: Any, factor: float) -> Any:
    """The term with its compared quantity (its limited parameter, :func:`_fit_reading`)
    multiplied by ``factor``."""
    _, parameter, _ = _fit_reading(term.type, {term.type})
    return replace(term, **{parameter: getattr(term, parameter) * factor})


def _reading_at(tau: float, share: float, slope: float, rate: float, dof: float) -> Reading:
    """The reading of a term of this ``share`` at ``tau`` (noise type from the ``slope``)."""
    alpha = _alpha_at(slope)
    edf = dof / share**2
    dur = max(duration_for_edf(alpha, tau, edf, rate), _MIN_RECORD_OVER_TAU * tau)
    return Reading(tau, share, alpha, dof, edf, dur)


# ---------------------------------------------------------------------------------------------
# The precision of verify's fit, before any record
# ---------------------------------------------------------------------------------------------


def _parameter(term: Any) -> float:
    """The term's limited parameter (:func:`_fit_reading`) [SI]."""
    _, parameter, _ = _fit_reading(term.type, {term.type})
    return float(getattr(term, parameter))


class _FitModel:
    """Verify's weighted fit of one channel, before any record: the octave τ grid (m = 2^k,
    as :func:`sensormodel.allan.tau_grid` makes it) up to 10¹⁰ s, each term's Allan variance
    and each fitted basis (identify's own, :func:`sensormodel.identify._design._basis`) on it,
    computed once; a record of length D uses the grid's points with m ≤ (n − 1)/2."""

    def __init__(
        self,
        terms: Sequence[Any],
        fitted: Sequence[str],
        *,
        rate: float,
        white_filter: tuple[float, int] | None,
    ) -> None:
        self.rate = rate
        self.terms = list(terms)
        self.fitted = list(fitted)
        self.tau = 2.0 ** np.arange(0, int(math.log2(1e10 * rate)) + 1) / rate
        self.parts = np.array([t.allan_variance(self.tau, sample_rate=rate) for t in terms])
        gm = next((t for t in terms if t.type == "gauss_markov"), None)
        cols = []
        for name in fitted:
            t_c = float(gm.time_constant) if name == "gauss_markov" and gm is not None else 1.0
            cols.append(_basis(name, self.tau, rate, time_constant=t_c, white_filter=white_filter))
        if gm is not None and "gauss_markov" in fitted:
            # ∂AVAR/∂ln T at unit σ: the fit profiles T
            h = 1e-3
            up, down = (
                _basis("gauss_markov", self.tau, rate, time_constant=gm.time_constant * math.exp(e))
                for e in (h, -h)
            )
            cols.append((up - down) / (2.0 * h))
        self.cols = np.array(cols)
        #: per number of τ: (frequencies, |H|² of each τ, each term's PSD) of _covariance
        self._spectral: dict[int, Any] = {}

    def curve(self, index: int, factor: float) -> npt.NDArray[np.float64]:
        """The unit's Allan variance on the grid with term ``index`` at ``factor`` of its
        parameter."""
        scale = np.ones(len(self.terms))
        scale[index] = factor**2
        return scale @ self.parts

    def _grid(self, duration: float, model: npt.NDArray[np.float64]) -> tuple[Any, Any]:
        """(points used, their EDF) for a record of ``duration`` s: the overlapping estimator's
        (:func:`sensormodel.confidence.edf`, Greenhall & Riley 2003), noise type from the
        local slope of the unit's curve."""
        n = int(duration * self.rate)
        k = int(np.searchsorted(self.tau * self.rate, (n - 1) / 2.0, side="right"))
        m = model[:k]
        slope = np.gradient(np.log(m), np.log(self.tau[:k])) if k > 1 else np.zeros(k)
        edfs = np.array([edf(_alpha_at(float(q)), 1 << i, n + 1) for i, q in enumerate(slope)])
        return k, edfs

    def _covariance(self, index: int, factor: float, k: int, n: int) -> npt.NDArray[np.float64]:
        """Covariance of the overlapping Allan-variance estimates at the first ``k`` τ of the
        grid in a record of ``n`` samples [u⁴].

        With d_i(t) the difference of adjacent averages over τ_i (transfer function
        H_i(f) = (e^{i2πfτ} − 1)²/(i2πfτ), |H_i|² = 4 sin⁴(πfτ_i)/(πfτ_i)²) and
        â_i = Σ_k d_i(k)²/(2M_i) over M_i = n − 2m_i overlapping differences, a Gaussian
        record gives Cov(â_i, â_j) = Σ_k Σ_l ρ_ij(l − k)²/(2M_iM_j), ρ_ij the cross-covariance
        of d_i and d_j; for records long against the differences' span this is
        min(M_i, M_j)/(2M_iM_j)·Σ_n ρ_ij(n)², and by Parseval
        Σ_n ρ_ij(n)² = rate·∫ S(f)²|H_i(f)|²|H_j(f)|² df (S the unit's two-sided PSD; the
        aliases of the sampling neglected, exact for m ≫ 1). Where fτ > 20 the fast factor
        sin⁴ is replaced by its mean 3/8. (The diagonal reproduces the EDF of white-noise
        overlapping AVAR at large m, 1.5·M/m: NIST SP 1065 Table 5.)"""
        rate = self.rate
        tau = self.tau[:k]
        if k not in self._spectral:
            f = np.geomspace(
                1e-4 / tau[-1], 1e3 * rate, int(400 * math.log10(1e7 * tau[-1] * rate))
            )
            x = np.pi * np.outer(tau, f)
            h2 = 4.0 * np.where(x < 20.0 * np.pi, np.sin(x) ** 4, 0.375) / x**2
            psd = np.array([t.psd(f, sample_rate=rate) for t in self.terms], dtype=np.float64)
            self._spectral[k] = (f, h2, psd)
        f, h2, psd = self._spectral[k]
        scale = np.ones(len(self.terms))
        scale[index] = factor**2
        w = np.gradient(f) * (scale @ psd) ** 2
        r = 2.0 * rate * (h2 * w) @ h2.T
        m = np.maximum(float(n) - 2.0 * np.round(tau * rate), 1.0)
        return np.minimum.outer(m, m) / (2.0 * np.outer(m, m)) * r

    def dof(self, index: int, factor: float, duration: float) -> tuple[float, float]:
        """(effective degrees of freedom ν of term ``index``'s estimate, standard error of
        ln T of the Gauss-Markov term or 0) in verify's fit of a record of ``duration`` s,
        the term at ``factor`` of its parameter.

        The fit weighs each τ by w = edf/(2·AVAR²) (identify's weights) and fits the bases'
        coefficients c (variance scale, p²) and, for a Gauss-Markov term, ln T; linearized at
        the unit, its estimate is B·â with B = J⁻¹AᵀW (A the bases and ∂m/∂ln T, J = AᵀWA),
        so its covariance is B·Σ·Bᵀ with Σ the covariance of the Allan-variance estimates
        across τ (:meth:`_covariance`; the sandwich form: the weights treat the τ as
        independent, which they are not). ν = 2c²/Var(ĉ), the chi-square whose variance
        matches (Var(χ²_ν/ν) = 2/ν). Non-negativity, the bootstrap's ratio pivot and the
        test at the limit are not modelled: the seeded studies measure what they change."""
        model = self.curve(index, factor)
        k, edfs = self._grid(duration, model)
        if k < 2:
            return 0.0, math.inf
        truth = {t.type: (t, factor if i == index else 1.0) for i, t in enumerate(self.terms)}
        coef = [
            (_parameter(truth[nm][0]) * truth[nm][1]) ** 2 if nm in truth else 0.0
            for nm in self.fitted
        ]
        a = self.cols[:, :k].copy()
        if a.shape[0] > len(self.fitted):
            a[-1] *= coef[self.fitted.index("gauss_markov")]
        ok = edfs > 0
        w = edfs[ok] / (2.0 * model[:k][ok] ** 2)
        j = (a[:, ok] * w) @ a[:, ok].T
        scale = np.sqrt(np.maximum(np.diag(j), 1e-300))
        b = (np.linalg.pinv(j / np.outer(scale, scale)) / np.outer(scale, scale)) @ (a[:, ok] * w)
        sig = self._covariance(index, factor, k, int(duration * self.rate))
        # variances from the estimator's EDF (exact where the spectral form neglects the
        # aliases, at τ of a few samples), correlations from the spectral form
        fix = np.sqrt(2.0 * model[:k] ** 2 / edfs / np.diag(sig))
        cov = b @ (sig * np.outer(fix, fix))[np.ix_(ok, ok)] @ b.T
        c = self.fitted.index(self.terms[index].type)
        var = float(cov[c, c])
        nu = 2.0 * coef[c] ** 2 / var if var > 0 else math.inf
        se = math.sqrt(max(float(cov[-1, -1]), 0.0)) if a.shape[0] > len(self.fitted) else 0.0
        return nu, se

    def resolvable(self, index: int, factor: float, duration: float) -> float:
        """The longest Gauss-Markov time constant [s] a record of ``duration`` s resolves, by
        the identification's rule (:func:`sensormodel.identify._design._resolvable_time_constant`,
        its owner) on the octave curve with Greenhall-Riley EDF."""
        k, edfs = self._grid(duration, self.curve(index, factor))
        return float(_resolvable_time_constant(self.tau[:k], edfs))

    def duration(
        self,
        index: int,
        factor: float,
        *,
        dof: float,
        confidence: float,
        power: float,
        shortest: float,
    ) -> float:
        """The shortest record length D [s] at which verify's fit gives term ``index``
        ``dof`` effective degrees of freedom (:meth:`dof`) and, for a Gauss-Markov term,
        resolves its time constant with probability ``power``: the upper end of T's interval,
        T̂·exp(z_c·se) (z_c the normal quantile of the two-sided ``confidence``, se that of
        ln T̂), lies within the longest time constant the record resolves (:meth:`resolvable`;
        a record that does not resolve T never passes the term) when
        T·exp((z_c + z_p)·se) does, z_p the normal quantile of ``power`` (T̂ lognormal). At
        least ``shortest``; infinite beyond 10¹⁰ s."""
        from scipy.stats import norm

        z = float(norm.ppf(0.5 * (1.0 + confidence)) + norm.ppf(power))
        gm = self.terms[index] if self.terms[index].type == "gauss_markov" else None

        def enough(d: float) -> bool:
            nu, se = self.dof(index, factor, d)
            if nu < dof:
                return False
            return gm is None or gm.time_constant * math.exp(z * se) <= self.resolvable(
                index, factor, d
            )

        lo = max(shortest, 16.0 / self.rate)
        if enough(lo):
            return lo
        hi = lo
        while not enough(hi):
            lo, hi = hi, hi * 2.0
            if hi > 1e10:
                return math.inf
        while hi / lo > 1.01:
            mid = math.sqrt(lo * hi)
            lo, hi = (lo, mid) if enough(mid) else (mid, hi)
        return hi


@dataclass(frozen=True)
class PlanRow:
    """The recording length after which verify decides one term of the plan's unit (the term at
    (1 − margin)·limit, the others at their limits) with the plan's power.

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
        Effective degrees of freedom of the term's estimate that decide it with the plan's
        power (:func:`plan_dof`).
    edf : float
        Equivalent degrees of freedom of the Allan variance at ``read_at`` in a record of
        ``duration`` (Greenhall & Riley 2003), for the table.
    duration : float
        Record length needed [s]: where verify's fit gives the term ``dof`` (and resolves a
        Gauss-Markov time constant); infinite for a term masked below
        :data:`MIN_MASKED_SHARE`.
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
    """Recording lengths needed to verify a datasheet (see :func:`plan`).

    Attributes
    ----------
    rows : tuple of PlanRow
    unverified : tuple of Unverified
    confidence : float
        Two-sided confidence of verify's intervals the plan is made for.
    power : float
        The probability of a decided verdict the plan promises.
    margin : float
        How far the unit of the promise lies from each limit: its term at (1 − margin)·limit.
    sample_rate : float
        Sample rate of the planned record [Hz].
    datasheet : dict
        ``file``, ``sha256``.
    """

    rows: tuple[PlanRow, ...]
    unverified: tuple[Unverified, ...]
    confidence: float
    power: float
    margin: float
    sample_rate: float
    datasheet: dict[str, Any] = field(default_factory=dict)

    @property
    def dof(self) -> float:
        """The effective degrees of freedom of a term's interval that decide it with
        :attr:`power` (:func:`sensormodel.confidence.required_dof` at (1 − margin)·limit)."""
        return plan_dof(self.margin, confidence=self.confidence, power=self.power)

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


def plan_dof(margin: float, *, confidence: float, power: float) -> float:
    """Effective degrees of freedom of a term's interval with which a unit whose term lies at
    (1 − ``margin``)·limit is decided ``pass`` with probability ``power`` by verify's decision
    rule (:func:`sensormodel.confidence.required_dof`; the chi-square interval of the
    deviation, NIST SP 1065 eq. 45).

    The pass side binds: a unit as far above its limit, at limit/(1 − margin), is decided
    ``fail`` with at least that probability at these degrees of freedom (the chi-square upper
    tail is the longer one), which ``tests/test_acceptance_plan.py`` checks.
    """
    if not (isinstance(margin, (int, float)) and 0.0 < margin < 1.0):
        raise AnalysisError(
            f"margin = {margin!r}", "a fraction between 0 and 1, e.g. 0.25", field="margin"
        )
    nu = required_dof(1.0 - float(margin), 1.0, confidence=confidence, power=power)
    assert nu is not None  # (1 − margin) ≠ 1
    return nu


def plan(
    datasheet: Datasheet | str,
    *,
    confidence: float = DEFAULT_CONFIDENCE,
    power: float = DEFAULT_POWER,
    margin: float = DEFAULT_MARGIN,
    against: str = "max",
    sample_rate: float | None = None,
) -> Plan:
    """Recording length needed to verify each term of a datasheet, before any test.

    **The promise.** A unit whose term lies at (1 − ``margin``)·limit, recorded for the
    planned length, gets a decided verdict on that term (``pass``; a unit as far above the
    limit, at limit/(1 − margin), ``fail``) with probability at least ``power``, by the
    decision :func:`sensormodel.acceptance.verify` makes: the term's two-sided interval at
    ``confidence`` (identify's) wholly within or wholly beyond the limit
    (:func:`sensormodel.acceptance.decide`). A unit exactly at its limit is decided in only
    about (1 − confidence)/2 of records whatever the length; the margin says how close to it
    the plan still promises a decision.

    **How.** The interval of a term is taken as the chi-square interval of a deviation with ν
    effective degrees of freedom (NIST SP 1065 eq. 45); ν = :func:`plan_dof` (from
    :func:`sensormodel.confidence.required_dof`, the one owner of the decision model). The
    unit: the model of the limits (the ``max`` values; a term printed without a max at its
    typical value) with the term under test at (1 − margin)·limit. The record length is the
    shortest at which verify's weighted fit of the Allan curve (the datasheet's terms and
    white, flicker and random walk, :func:`sensormodel.acceptance.fit_terms`; identify's
    bases and weights) gives the term ν, by the sandwich covariance of the fit with the
    covariance of the Allan-variance estimates across τ from the unit's spectrum
    (:class:`_FitModel`). A Gauss-Markov term must also be *resolved*: the upper end of its
    time constant's interval within the longest T the record resolves
    (:func:`sensormodel.identify._design._resolvable_time_constant`, the owner of that rule),
    or verify never passes it. Each term is also *read*, for the table, where it dominates
    the curve (:func:`reading_tau`); a term masked below :data:`MIN_MASKED_SHARE` has no
    length.

    Measured (seeded studies of ``tests/test_acceptance_plan.py`` and the notes of the
    acceptance package): the decided fraction at the planned length against ``power``.

    Parameters
    ----------
    datasheet : Datasheet or path
    confidence : float
        Two-sided confidence of verify's intervals (default 0.9).
    power : float
        Probability of a decided verdict at the planned length (default 0.8, verify's).
    margin : float
        The unit of the promise lies at (1 − margin)·limit (default 0.25).
    against : {"max", "typ"}
        The datasheet column verified.
    sample_rate : float, optional
        Recording rate [Hz] (default the datasheet's ``sample_rate``).

    Returns
    -------
    Plan
    """
    validate.probability(confidence, "confidence", example="0.9")
    validate.probability(power, "power", example="0.8")
    ds = datasheet if isinstance(datasheet, Datasheet) else load_datasheet(datasheet)
    nu = plan_dof(margin, confidence=confidence, power=power)
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
        rows.extend(
            _plan_channel(
                ax,
                limits,
                rate=rate,
                dof=nu,
                against=against,
                margin=float(margin),
                confidence=confidence,
                power=power,
            )
        )
    return Plan(
        rows=tuple(rows),
        unverified=tuple(skipped),
        confidence=float(confidence),
        power=float(power),
        margin=float(margin),
        sample_rate=rate_used,
        datasheet={"file": ds.source, "sha256": ds.sha256},
    )


def _plan_channel(
    ax: AxisSpec,
    limits: list[SpecLimit],
    *,
    rate: float,
    dof: float,
    against: str,
    margin: float,
    confidence: float,
    power: float,
) -> list[PlanRow]:
    """The plan rows of one channel's limited terms: each read on the model of the limits
    with that term at (1 − ``margin``) of its limit."""
    terms = list(limit_channel(ax, rate=rate, against=against).terms)
    bandwidth, order = output_filter(ax)
    white_filter = None if bandwidth is None else (bandwidth, order or 1)
    fit = _FitModel(terms, fit_terms(ax), rate=rate, white_filter=white_filter)
    tau, parts = _term_curves(terms, rate=rate, tau_min=_MIN_TAU_SAMPLES / rate, tau_max=1e9)
    factor = 1.0 - margin
    rows = []
    for spec in limits:
        idx = next(
            i
            for i, t in enumerate(terms)
            if t.type == spec.type and t.meta.get("datasheet", {}).get("field") == spec.field
        )
        unit_terms = list(terms)
        unit_terms[idx] = _scaled(terms[idx], factor)
        unit_parts = parts.copy()
        unit_parts[idx] *= factor**2
        r = reading_tau(unit_terms, idx, rate=rate, dof=dof, curves=(tau, unit_parts))
        if math.isfinite(r.duration):
            length = fit.duration(
                idx,
                factor,
                dof=dof,
                confidence=confidence,
                power=power,
                shortest=max(2.0 * r.tau, 2.0 ** (len(fit.fitted) + 3) / rate) + 1.0 / rate,
            )
            edf = allan_edf(r.alpha, r.tau, length, rate) if math.isfinite(length) else math.inf
            r = replace(r, duration=length, edf=edf)
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
