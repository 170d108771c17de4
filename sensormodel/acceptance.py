"""Acceptance: does a delivered sensor meet its datasheet, and how long must a recording be?

Verdicts
--------
For every channel and every datasheet term that has a limit (the ``max`` column, or the ``typ``
column with ``against="typ"``), the term is estimated from the recording's overlapping Allan
deviation by :func:`sensormodel.identify.fit`, with a two-sided interval at ``confidence``
(default 0.9), and compared with the limit:

* ``pass``: the whole interval lies within the limit (``high <= limit``);
* ``fail``: the whole interval lies beyond it (``low > limit``);
* ``inconclusive``: the limit lies inside the interval.

A ``pass`` or ``fail`` call of the interval must be confirmed by a parametric bootstrap test
*at the limit* (:func:`sensormodel.identify.limit_test`: records simulated with the term held at
the limit, the other terms refitted beside it) rejecting the limit on the same side at level
α = (1 − c)/2; otherwise the term is ``inconclusive`` and its interval is widened to the limit.
The interval alone simulates around the estimate, and where a term's precision depends on its
own size (flicker squeezed between white noise and a random walk) it is too narrow on the side
of a high estimate: a unit exactly at its bias-instability limit was then called ``fail`` in
10-13 % of seeded records instead of 5 % (with the test: 3.7 % of 400). The test is skipped
where the limit lies far beyond every bootstrap record of the interval.

So a unit exactly at its limit is called ``fail`` in at most about (1 − c)/2 of records (5 % for
c = 0.9) and ``pass`` in at most about as many (tests/test_acceptance.py measures both): a good
unit is rarely rejected and a bad one rarely accepted; a unit close to its limit needs a long
record to be decided at all.

What is compared (the datasheet's own conventions, DESIGN §3):

============================  ===============================================================
datasheet term                compared as
============================  ===============================================================
angle / velocity random walk  white density N [u·√s] (a one-sided ``noise_density`` is /√2)
bias instability              the Allan-deviation floor [u]; identify reports the flicker
                              coefficient B, floor = √(2 ln2/π)·B (IEEE Std 952 Annex C);
                              with a correlation time, the Gauss-Markov Allan peak 0.6174·σ
rate / accel. random walk     density K [u/√s]
quantization                  coefficient Q [u·s] (a ``step`` is Q·√12)
rate ramp                     slope R [u/s]
bias repeatability            not verifiable from a single run (turn-on to turn-on)
============================  ===============================================================

Beside the terms, a whole-curve check compares the measured Allan deviation with the curve the
datasheet's limits imply (the exact Allan deviation of the model built from the ``max`` values,
the sum of the terms' Allan variances): the τ ranges where the curve is exceeded with confidence
(``ci_low > limit``) are reported. It does not enter the overall verdict: its intervals are
pointwise, not simultaneous over τ, so a unit exactly at its limits exceeds the curve at some τ
in many records.

Recording length
----------------
The width of a term's interval is expressed as the degrees of freedom ν of a chi-square
interval of the same width (:func:`dof_from_interval`); ν grows in proportion to the record
length (the equivalent degrees of freedom of the overlapping Allan variance at a fixed τ grow as
the record length over τ; Greenhall & Riley 2003). :func:`required_duration` gives the length at
which a unit whose true value is the present estimate would be decided with probability
``power`` (default 0.8). :func:`plan` does the same before any test, for a unit exactly at its
limits, with the criterion that the interval's half-width is at most ``precision`` of the value;
it shows the τ each term is read at and the degrees of freedom needed there, which is why bias
instability (read at τ of hundreds of seconds) and random walks (read at the longest τ) need
hours of record while white noise needs minutes.

References
----------
IEEE Std 952-1997, Annex C (Allan-variance forms of the noise terms). W. J. Riley, "Handbook of
Frequency Stability Analysis", NIST SP 1065 (2008): chi-square confidence intervals of the Allan
variance (eq. 45, from memory for the number). C. A. Greenhall & W. J. Riley, "Uncertainty of
stability variances based on finite differences", Proc. 35th PTTI Meeting (2003): equivalent
degrees of freedom, the large-r form 1/edf ≈ (1/r)(a0 − a1/r).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from functools import lru_cache
from typing import Any

import numpy as np
import numpy.typing as npt

from .convert import QUANTITY, axis_terms
from .datasheet import FIELDS, AxisSpec, Datasheet
from .errors import AnalysisError, DatasheetError
from .terms import FLICKER_FLOOR_FACTOR as FLOOR_FACTOR

__all__ = [
    "VERDICTS",
    "DEFAULT_CONFIDENCE",
    "DEFAULT_POWER",
    "DEFAULT_PRECISION",
    "NOT_VERIFIABLE",
    "SpecLimit",
    "Unverified",
    "spec_limits",
    "decide",
    "combine",
    "interval_factors",
    "dof_from_interval",
    "dof_for_precision",
    "decision_probability",
    "required_dof",
    "required_duration",
    "allan_edf",
    "reading_tau",
    "fit_terms",
    "output_filter",
    "TermVerdict",
    "CurveCheck",
    "ChannelVerdict",
    "VerdictReport",
    "limit_channel",
    "curve_check",
    "verify_curve",
    "verify",
    "PlanRow",
    "Plan",
    "plan",
]

#: The three verdicts, best first.
VERDICTS = ("pass", "fail", "inconclusive")
#: Default two-sided confidence of the intervals (each one-sided error ≤ 5 %).
DEFAULT_CONFIDENCE = 0.9
#: Default probability with which a record of the required length decides the verdict.
DEFAULT_POWER = 0.8
#: Default relative half-width of the interval a plan aims at.
DEFAULT_PRECISION = 0.25
#: The reason given for terms one static run cannot verify.
NOT_VERIFIABLE = (
    "not verifiable from a single run: bias repeatability is the spread of the turn-on bias "
    "from run to run, and needs several turn-ons"
)

_MAX_DOF = 1e12
#: A record must be at least this many times the τ a term is read at (common practice: the
#: longest τ of an Allan analysis is a small fraction of the record).
_MIN_RECORD_OVER_TAU = 8.0
#: Below this many samples in all (channels together) the identification runs in this
#: process: starting worker processes would take longer than the work.
_PARALLEL_MIN_SAMPLES = 1 << 17
#: A plan reads no term below this many sample periods (common practice: the first points of
#: an Allan curve carry the output filter and aliasing, not the noise terms alone).
_MIN_TAU_SAMPLES = 10.0

#: Greenhall & Riley (2003) Table 2, unmodified AVAR (d = 2): alpha -> (a0, a1).
_GR_TABLE2 = {0: (2.0 / 3.0, 1.0 / 3.0), -1: (0.852, 0.375), -2: (1.079, 0.368)}
#: A limit more than this many times as far from the estimate (log scale) as the farthest
#: bootstrap record is decided without the test at the limit (it would only cost time: a unit
#: at its limit is that far in a small fraction of records: 1 in 400 in each of the seeded
#: at-limit studies of white noise and of flicker between white noise and a random walk).
_SKIP_MARGIN = 2.0
#: Mixed into the seed of each term's test at the limit (any fixed number: it keeps the test's
#: records apart from the identification's).
_LIMIT_TEST_SALT = 0x5EED7E57
_NOISE_NAME = {2: "white PM", 0: "white FM", -1: "flicker FM", -2: "random-walk FM"}


# ---------------------------------------------------------------------------------------------
# What the datasheet limits
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class SpecLimit:
    """One datasheet term with a limit, as the quantity that is compared.

    Attributes
    ----------
    channel : str
        Channel id, e.g. ``gyro.z``.
    key : str
        Datasheet key, e.g. ``bias_instability``.
    field : str
        Where it is on the datasheet, e.g. ``gyro.z.bias_instability``.
    type : str
        The model term it produces (``white``, ``flicker``, ``gauss_markov``, ``random_walk``,
        ``quantization``, ``ramp``).
    quantity : str
        What is compared: ``density``, ``allan_floor``, ``coefficient`` or ``slope``.
    limit : float
        The limit in SI, as ``quantity`` (see :attr:`unit`).
    unit : str
        SI unit of ``limit``, e.g. ``rad/s*s**0.5``.
    text : str
        The value as printed on the datasheet.
    column : str
        ``max`` or ``typ``.
    kind : str
        The datasheet key's kind of quantity (:data:`sensormodel.quantities.KINDS`).
    display_scale : float
        Factor from the compared SI value to the datasheet's printed convention (√2 for a
        one-sided density, 1/0.6643 for a bias-instability coefficient, √12 for a quantization
        step, else 1).
    """

    channel: str
    key: str
    field: str
    type: str
    quantity: str
    limit: float
    unit: str
    text: str
    column: str
    kind: str
    display_scale: float = 1.0


@dataclass(frozen=True)
class Unverified:
    """A datasheet term that is not verified, and why."""

    channel: str
    key: str
    field: str
    text: str
    reason: str


_QUANTITY = {
    "white": ("density", "u*s**0.5"),
    "flicker": ("allan_floor", "u"),
    "gauss_markov": ("allan_floor", "u"),
    "random_walk": ("density", "u/s**0.5"),
    "quantization": ("coefficient", "u*s"),
    "ramp": ("slope", "u/s"),
}


def _compared_value(term: Any) -> float:
    """The compared quantity of a model term (SI)."""
    if term.type == "white":
        return term.density
    if term.type == "flicker":
        return term.coefficient * FLOOR_FACTOR
    if term.type == "gauss_markov":
        return term.peak()[1]
    if term.type == "random_walk":
        return term.density
    if term.type == "quantization":
        return term.coefficient
    if term.type == "ramp":
        return term.slope
    raise AnalysisError(f"term type {term.type!r} has no acceptance rule")  # pragma: no cover


def _display_scale(ax: AxisSpec, key: str) -> float:
    conv = ax.conventions
    if key == "noise_density" and conv.get("density_is") == "one-sided":
        return math.sqrt(2.0)
    if key == "bias_instability" and conv.get("bias_instability_is") == "coefficient":
        return 1.0 / FLOOR_FACTOR
    if key == "quantization" and conv.get("quantization_is") == "step":
        return math.sqrt(12.0)
    return 1.0


def spec_limits(
    ax: AxisSpec, *, against: str = "max", include_other: bool = False
) -> tuple[list[SpecLimit], list[Unverified]]:
    """The limits of one channel's datasheet terms, and the terms that are not verified.

    Parameters
    ----------
    ax : AxisSpec
        One channel of a :class:`~sensormodel.datasheet.Datasheet`.
    against : {"max", "typ"}
        Which column is the limit. A term printed without that column is not verified (it is
        listed with the reason).
    include_other : bool
        Return such terms as limits too, at the other column's value (``column`` tells), for
        information (:func:`plan` shows what verifying them would take).

    Returns
    -------
    (list of SpecLimit, list of Unverified)
    """
    if against not in ("max", "typ"):
        raise AnalysisError(f"against = {against!r}", "'max' or 'typ'")
    terms, _notes = axis_terms(ax, basis=against)
    _, si_unit = QUANTITY[ax.instrument]
    limits: list[SpecLimit] = []
    skipped: list[Unverified] = []
    for term in terms:
        ds = term.meta.get("datasheet", {})
        origin = ds.get("field", "")
        key = origin.rsplit(".", 1)[-1]
        text = ds.get("text", "")
        if term.type == "random_constant":
            skipped.append(Unverified(ax.channel_id, key, origin, text, NOT_VERIFIABLE))
            continue
        if ds.get("column") != against and not include_other:
            skipped.append(
                Unverified(
                    ax.channel_id,
                    key,
                    origin,
                    text,
                    f"the datasheet gives no {against} value (only {ds.get('column')} "
                    f"{text}); nothing to verify against",
                )
            )
            continue
        quantity, rel = _QUANTITY[term.type]
        limits.append(
            SpecLimit(
                channel=ax.channel_id,
                key=key,
                field=origin,
                type=term.type,
                quantity=quantity,
                limit=_compared_value(term),
                unit=rel.replace("u", f"({si_unit})"),
                text=text,
                column=ds.get("column", against),
                kind=FIELDS[ax.instrument][key].kind,
                display_scale=_display_scale(ax, key),
            )
        )
    return limits, skipped


# ---------------------------------------------------------------------------------------------
# Verdict logic
# ---------------------------------------------------------------------------------------------


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
        raise AnalysisError(f"interval [{low}, {high}] and limit {limit}", "finite numbers")
    if low > high:
        raise AnalysisError(f"interval [{low}, {high}]", "low <= high")
    if high <= limit:
        return "pass"
    if low > limit:
        return "fail"
    return "inconclusive"


def combine(verdicts: Sequence[str]) -> str:
    """Overall verdict: ``fail`` if any fails, ``pass`` if all pass (and there is at least one),
    else ``inconclusive``."""
    v = list(verdicts)
    if "fail" in v:
        return "fail"
    if v and all(x == "pass" for x in v):
        return "pass"
    return "inconclusive"


# ---------------------------------------------------------------------------------------------
# Degrees of freedom and recording length
# ---------------------------------------------------------------------------------------------


def _check_confidence(confidence: float, name: str = "confidence") -> float:
    if not (isinstance(confidence, (int, float)) and 0.0 < confidence < 1.0):
        raise AnalysisError(f"{name} = {confidence!r}", "a probability between 0 and 1, e.g. 0.9")
    return float(confidence)


def interval_factors(dof: float, confidence: float) -> tuple[float, float]:
    """Chi-square interval of a deviation (square root of a variance) with ``dof`` degrees of
    freedom, as factors of the estimate.

    σ_lo = σ̂·√(ν/χ²((1+c)/2, ν)), σ_hi = σ̂·√(ν/χ²((1−c)/2, ν)) (NIST SP 1065, the chi-square
    interval of the Allan variance).

    Returns
    -------
    (float, float)
        (low factor, high factor), low < 1 < high.
    """
    from scipy.stats import chi2

    c = _check_confidence(confidence)
    q_hi = float(chi2.ppf(0.5 * (1.0 + c), dof))
    q_lo = float(chi2.ppf(0.5 * (1.0 - c), dof))
    high = math.sqrt(dof / q_lo) if q_lo > dof * 1e-300 else math.inf
    return math.sqrt(dof / q_hi), high


def _solve_dof(fun: Any, target: float, *, increasing: bool) -> float | None:
    """ν in [1e-2, _MAX_DOF] with fun(ν) = target (fun monotone), or None."""
    from scipy.optimize import brentq

    lo, hi = math.log(1e-2), math.log(_MAX_DOF)

    def g(x: float) -> float:
        return fun(math.exp(x)) - target

    glo, ghi = g(lo), g(hi)
    if not increasing:
        glo, ghi = -glo, -ghi
    if glo >= 0:
        return math.exp(lo)
    if ghi < 0:
        return None
    return math.exp(brentq(g, lo, hi, xtol=1e-9, rtol=1e-9))


def dof_from_interval(low: float, high: float, confidence: float) -> float | None:
    """The degrees of freedom of the chi-square interval as wide (high/low) as [low, high].

    Returns None when ``low <= 0`` (a bound, not an interval of that shape).
    """
    _check_confidence(confidence)
    if not (low > 0 and high >= low and math.isfinite(high)):
        return None
    ratio = high / low
    if ratio <= 1.0 + 1e-12:
        return _MAX_DOF

    def width(nu: float) -> float:
        lo, hi = interval_factors(nu, confidence)
        return hi / lo

    return _solve_dof(width, ratio, increasing=False) or _MAX_DOF


@lru_cache(maxsize=64)
def dof_for_precision(precision: float, confidence: float) -> float:
    """Degrees of freedom at which the chi-square interval of a deviation has a half-width of
    ``precision`` (a fraction of the estimate): (hi − lo)/2 = precision."""
    if not (isinstance(precision, (int, float)) and 0.0 < precision < 1.0):
        raise AnalysisError(f"precision = {precision!r}", "a fraction between 0 and 1, e.g. 0.25")

    def half(nu: float) -> float:
        lo, hi = interval_factors(nu, confidence)
        return 0.5 * (hi - lo)

    nu = _solve_dof(half, precision, increasing=False)
    return nu if nu is not None else _MAX_DOF


def decision_probability(value: float, limit: float, dof: float, confidence: float) -> float:
    """Probability that a record gives a decided verdict for a unit whose true value is
    ``value``, when the estimate's interval is the chi-square interval with ``dof``.

    The estimate is p̂ = p·√(X/ν) with X ~ χ²(ν). Above the limit (p > L) the record decides
    ``fail`` when p̂·√(ν/χ²((1+c)/2, ν)) > L, i.e. X > χ²((1+c)/2, ν)·(L/p)²; below it, ``pass``
    when X < χ²((1−c)/2, ν)·(L/p)². At p = L each is exactly (1 − c)/2.
    """
    from scipy.stats import chi2

    c = _check_confidence(confidence)
    if not (value > 0 and limit > 0):
        raise AnalysisError(f"value {value!r}, limit {limit!r}", "positive numbers")
    ratio2 = (limit / value) ** 2
    if value >= limit:
        return float(chi2.sf(chi2.ppf(0.5 * (1.0 + c), dof) * ratio2, dof))
    return float(chi2.cdf(chi2.ppf(0.5 * (1.0 - c), dof) * ratio2, dof))


def required_dof(value: float, limit: float, *, confidence: float, power: float) -> float | None:
    """Degrees of freedom at which a unit of true value ``value`` is decided with probability
    ``power`` (:func:`decision_probability`); None if no finite number does (value = limit)."""
    _check_confidence(power, "power")
    if power <= 0.5 * (1.0 - confidence):
        raise AnalysisError(
            f"power = {power!r}", f"a probability above (1 - confidence)/2 = {(1 - confidence) / 2}"
        )
    if value == limit:
        return None
    return _solve_dof(
        lambda nu: decision_probability(value, limit, nu, confidence), power, increasing=True
    )


def required_duration(
    estimate: float,
    limit: float,
    *,
    low: float,
    high: float,
    duration: float,
    confidence: float = DEFAULT_CONFIDENCE,
    power: float = DEFAULT_POWER,
) -> tuple[float | None, float | None, str]:
    """Record length that would decide an inconclusive term [s].

    Parameters
    ----------
    estimate, low, high : float
        The term's estimate and interval from the present record (SI, compared quantity).
    limit : float
        The limit (same unit).
    duration : float
        Length of the present record [s].
    confidence : float
        Two-sided confidence of the interval.
    power : float
        Probability with which a record of the returned length decides the verdict, for a unit
        whose true value equals ``estimate``.

    Returns
    -------
    (float or None, float or None, str)
        (length [s], the present effective degrees of freedom, how it was found). The length is
        None when the estimate equals the limit (no length decides it).

    Notes
    -----
    The present interval's width gives ν₀ (:func:`dof_from_interval`); ν grows in proportion to
    the record length (Allan-variance EDF at a fixed τ, Greenhall & Riley 2003), so the length
    is duration·ν/ν₀ with ν from :func:`required_dof`. When the interval is only a bound
    (``low = 0``: the term is not resolved) the bound is taken to shrink as duration^(-1/4)
    (the scatter of an Allan variance at fixed τ falls as 1/√ν, and a parameter is its square
    root), a conservative rule: length = duration·(high/limit)⁴.
    """
    if not duration > 0:
        raise AnalysisError(f"duration = {duration!r}", "a positive record length in s")
    nu0 = dof_from_interval(low, high, confidence)
    if nu0 is None or estimate <= 0:
        if high <= limit:
            return duration, None, "already within the limit"
        return duration * (high / limit) ** 4, None, "bound only: upper bound ∝ duration^-1/4"
    nu = required_dof(estimate, limit, confidence=confidence, power=power)
    if nu is None:
        return None, nu0, "the estimate equals the limit: no record length decides it"
    return max(duration, duration * nu / nu0), nu0, "chi-square dof ∝ record length"


def _alpha_at(slope: float) -> int:
    """Power-law noise type α of the frequency PSD from the Allan-variance slope μ (AVAR ∝ τ^μ):
    μ = −α − 1 for −3 < α ≤ 1 (NIST SP 1065); μ ≤ −1.5 is taken as white PM (α = 2)."""
    if slope <= -1.5:
        return 2
    return int(min(0, max(-2, round(-slope - 1.0))))


def allan_edf(alpha: int, tau: float, duration: float, rate: float) -> float:
    """Equivalent degrees of freedom of the overlapping Allan variance at τ [-].

    Greenhall & Riley (2003), unmodified overlapped AVAR (d = 2) for large r = M/m:
    1/edf ≈ (1/r)(a0 − a1/r) with (a0, a1) from their Table 2 for α = 0, −1, −2, and for white
    PM (α = 2) 1/edf = (1/M)(35/18 − 1/r). M = N − 2m, with N = duration·rate + 1 phase
    points (one more than the rate samples) and m = τ·rate; r = M/m.

    Parameters
    ----------
    alpha : int
        Noise type (2, 0, −1, −2).
    tau : float
        Averaging time [s].
    duration : float
        Record length [s].
    rate : float
        Sample rate [Hz].
    """
    m = max(1.0, tau * rate)
    M = duration * rate + 1.0 - 2.0 * m
    if M < 1:
        return 0.0
    r = M / m
    if alpha == 2:
        return M / max(1e-12, 35.0 / 18.0 - 1.0 / r)
    a0, a1 = _GR_TABLE2[alpha]
    return r / max(1e-12, a0 - a1 / r)


def _duration_for_edf(alpha: int, tau: float, edf: float, rate: float) -> float:
    """Record length [s] at which :func:`allan_edf` reaches ``edf`` (closed form)."""
    m = max(1.0, tau * rate)
    if alpha == 2:
        # edf = M/(a0 − m/M) >= M/a0: M = edf·a0 is enough (and nearly exact for M >> m)
        M = edf * 35.0 / 18.0
        return (M + 2.0 * m - 1.0) / rate
    a0, a1 = _GR_TABLE2[alpha]
    disc = max(0.0, (edf * a0) ** 2 - 4.0 * edf * a1)
    r = 0.5 * (edf * a0 + math.sqrt(disc))
    return ((r + 2.0) * m - 1.0) / rate


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
    are edf(τ)·s(τ)². For each τ the record length T(τ) with edf(τ, T)·s² = ``dof`` follows from
    :func:`allan_edf` (noise type from the local slope), at least 8 τ; the reading τ is the one
    with the shortest T.

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
        dur = max(_duration_for_edf(alpha, float(t), edf, rate), _MIN_RECORD_OVER_TAU * t)
        if best is None or dur < best.duration:
            best = Reading(float(t), s, alpha, dof, edf, dur)
    if best is None:
        raise AnalysisError(
            f"the {terms[index].type} term contributes nothing to the Allan variance",
            "a term with a non-zero value",
        )
    return best


# ---------------------------------------------------------------------------------------------
# Results
# ---------------------------------------------------------------------------------------------


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
    note : str
        How the required length was found, or other remarks.
    limit_test : dict or None
        For an interval that excluded the limit: the parametric bootstrap test at the limit
        (:func:`sensormodel.identify.limit_test`) that must confirm the call: ``p_value`` (of
        the side the interval pointed to), ``n_records``, ``confirmed``; or ``skipped`` with the
        reason. None where no call was made.
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
    note: str = ""
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
    """

    tau: npt.NDArray[np.float64]
    adev: npt.NDArray[np.float64]
    ci_low: npt.NDArray[np.float64]
    ci_high: npt.NDArray[np.float64]
    limit: npt.NDArray[np.float64]
    exceeded: tuple[tuple[float, float], ...]
    within: npt.NDArray[np.bool_]
    confidence: float

    @property
    def verdict(self) -> str:
        """``fail`` if exceeded anywhere, ``pass`` if within everywhere, else ``inconclusive``."""
        if self.exceeded:
            return "fail"
        if bool(np.all(self.within)):
            return "pass"
        return "inconclusive"


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
    rate : float
        Sample rate [Hz].
    psd : (ndarray, ndarray) or None
        (f [Hz], one-sided PSD [u²/Hz]) of the record by Welch's method, when the record was
        given.
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
    rate: float
    psd: tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]] | None = None

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
    notes : tuple of str
    """

    channels: tuple[ChannelVerdict, ...]
    confidence: float
    against: str
    power: float
    datasheet: dict[str, Any] = field(default_factory=dict)
    recording: dict[str, Any] = field(default_factory=dict)
    notes: tuple[str, ...] = ()

    @property
    def overall(self) -> str:
        """``fail`` if any term fails, ``pass`` if all pass, else ``inconclusive``."""
        return combine([t.verdict for c in self.channels for t in c.terms])

    @property
    def exit_code(self) -> int:
        """0 all pass, 1 any fail, 3 otherwise (inconclusive)."""
        return {"pass": 0, "fail": 1}.get(self.overall, 3)

    def with_notes(self, *notes: str) -> VerdictReport:
        """A copy with more notes."""
        return replace(self, notes=self.notes + tuple(notes))


# ---------------------------------------------------------------------------------------------
# The checks
# ---------------------------------------------------------------------------------------------


def limit_channel(ax: AxisSpec, *, rate: float, against: str = "max") -> Any:
    """The channel model the datasheet's limits imply (terms at their ``against`` values, the
    other column where a term has none), at the recording's ``rate``."""
    from .model import Channel

    terms, _ = axis_terms(ax, basis=against)
    quantity, unit = QUANTITY[ax.instrument]
    return Channel(
        id=ax.channel_id,
        quantity=quantity,
        unit=unit,
        sample_rate=rate,
        terms=tuple(t for t in terms if t.type != "random_constant"),
    )


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


def curve_check(curve: Any, limit_adev: npt.ArrayLike, *, confidence: float) -> CurveCheck:
    """Compare a measured Allan curve with a limit curve at the same τ.

    Parameters
    ----------
    curve : AllanCurve
        With ``tau``, ``adev``, ``ci_low``, ``ci_high`` (pointwise interval at ``confidence``).
    limit_adev : array_like
        The limit Allan deviation at ``curve.tau`` [u].
    confidence : float
        The confidence of the curve's interval (recorded in the result).
    """
    tau = np.asarray(curve.tau, dtype=float)
    lim = np.asarray(limit_adev, dtype=float)
    lo = np.asarray(curve.ci_low, dtype=float)
    hi = np.asarray(curve.ci_high, dtype=float)
    if lim.shape != tau.shape:
        raise AnalysisError(f"limit curve of {lim.size} points", f"{tau.size} points, one per τ")
    exceeded = lo > lim
    return CurveCheck(
        tau=tau,
        adev=np.asarray(curve.adev, dtype=float),
        ci_low=lo,
        ci_high=hi,
        limit=lim,
        exceeded=_runs(exceeded, tau),
        within=hi <= lim,
        confidence=float(confidence),
    )


#: Compared quantity of each spec term type -> (identify term, parameter, factor).
def _fit_reading(spec_type: str, fitted_types: set[str]) -> tuple[str, str, float]:
    if spec_type == "white":
        return "white", "density", 1.0
    if spec_type == "flicker":
        return "flicker", "coefficient", FLOOR_FACTOR
    if spec_type == "gauss_markov":
        if "gauss_markov" in fitted_types:
            from .terms import gauss_markov_peak

            return "gauss_markov", "sigma", gauss_markov_peak()[1]
        return "flicker", "coefficient", FLOOR_FACTOR
    if spec_type == "random_walk":
        return "random_walk", "density", 1.0
    if spec_type == "quantization":
        return "quantization", "coefficient", 1.0
    if spec_type == "ramp":
        return "ramp", "slope", 1.0
    raise AnalysisError(f"term type {spec_type!r} has no acceptance rule")  # pragma: no cover


def fit_terms(ax: AxisSpec) -> tuple[str, ...]:
    """The term types fitted to verify a channel.

    The datasheet's own terms (each term it prints, whatever the column) and white noise. A
    bias printed with a correlation time is a Gauss-Markov term, and then nothing else is
    added: below its correlation time a Gauss-Markov Allan deviation rises like a random
    walk's, so an unprinted random walk would take part of the bias from it. Otherwise a
    flicker bias and a random walk are always fitted (their Allan-deviation slopes, 0 and +½,
    tell them apart), so that a unit with such a term unprinted does not bias the others.
    """
    terms, _ = axis_terms(ax, basis="max")
    wanted = {"white"} | {t.type for t in terms if t.type != "random_constant"}
    if "gauss_markov" not in wanted:
        wanted |= {"flicker", "random_walk"}
    order = ("quantization", "white", "flicker", "gauss_markov", "random_walk", "ramp")
    return tuple(t for t in order if t in wanted)


def output_filter(ax: AxisSpec) -> tuple[float | None, int | None]:
    """The channel's output filter from its datasheet: (bandwidth [Hz], Butterworth order), or
    (None, None) when none is printed. The white term is fitted as band-limited white through
    it (a 1-pole filter where the order is not printed, as in the datasheet model)."""
    if "bandwidth" not in ax.values:
        return None, None
    return float(ax.values["bandwidth"].pick("typ")[0]), int(ax.filter_order or 1)


def _fitted(identification: Any, term: str, parameter: str) -> Any | None:
    for ft in identification.terms:
        if ft.term == term and ft.parameter == parameter:
            return ft
    return None


def verify_curve(
    curve: Any,
    ax: AxisSpec,
    *,
    duration: float,
    confidence: float = DEFAULT_CONFIDENCE,
    against: str = "max",
    power: float = DEFAULT_POWER,
    identification: Any | None = None,
    seed: int | None = None,
    n_boot: int | None = None,
) -> ChannelVerdict:
    """Verdicts for one channel from its measured Allan curve.

    Parameters
    ----------
    curve : AllanCurve
        Overlapping Allan deviation of the channel (SI, interval at ``confidence``).
    ax : AxisSpec
        The channel's datasheet spec.
    duration : float
        Length of the record the curve comes from [s].
    confidence : float
        Two-sided confidence of the term intervals (default 0.9).
    against : {"max", "typ"}
        The datasheet column used as the limit.
    power : float
        Probability of a decided verdict at the required length (default 0.8).
    identification : Identification, optional
        A fit already made; default :func:`sensormodel.identify.fit` of ``curve`` with the
        datasheet's term types (and white, flicker, random walk).
    seed : int, optional
        Seed passed to the identification.
    n_boot : int, optional
        Bootstrap records of the identification (default its own, 200).
    """
    limits, skipped = spec_limits(ax, against=against)
    rate = float(curve.sample_rate)
    if identification is None:
        from .identify import fit

        bandwidth, order = output_filter(ax)
        identification = fit(
            curve,
            terms=list(fit_terms(ax)),
            confidence=confidence,
            seed=seed,
            n_boot=n_boot,
            bandwidth=bandwidth,
            filter_order=order,
        )
    fitted_types = {ft.term for ft in identification.terms}
    model = identification.to_channel() if hasattr(identification, "to_channel") else None
    model_terms = [t for t in getattr(model, "terms", ()) if t.type != "random_constant"]
    verdicts = []
    model_curves = None
    for spec in limits:
        name, parameter, factor = _fit_reading(spec.type, fitted_types)
        ft = _fitted(identification, name, parameter)
        if ft is None:
            raise AnalysisError(
                f"{ax.channel_id}: the identification has no {name} {parameter}",
                f"an estimate of every term the datasheet limits ({spec.field})",
            )
        est = float(ft.estimate) * factor
        low = float(ft.low) * factor
        high = float(ft.high) * factor
        verdict = decide(low, high, spec.limit)
        req: float | None = None
        note = ""
        test: dict[str, Any] | None = None
        if verdict != "inconclusive":
            verdict, low, high, test, note = _confirm_at_limit(
                identification,
                ft,
                name,
                spec.limit,
                factor,
                verdict,
                low,
                high,
                seed=None if seed is None else _test_seed(seed, len(verdicts)),
            )
        dof = dof_from_interval(low, high, confidence)
        if verdict == "inconclusive":
            req, dof, why = required_duration(
                est,
                spec.limit,
                low=low,
                high=high,
                duration=duration,
                confidence=confidence,
                power=power,
            )
            if (
                test is not None
                and test.get("confirmed") is False
                and (req is None or req <= duration * (1.0 + 1e-9))
            ):
                # the interval's width, which the test just refuted, is no guide to the length
                req = None
                why = "a longer record is needed; how much longer, the interval does not say"
            note = "; ".join(x for x in (note, why) if x)
        read_at = edf = None
        idx = next((i for i, t in enumerate(model_terms) if t.type == name), None)
        if idx is not None:
            if model_curves is None:
                model_curves = _term_curves(model_terms, rate=rate, tau_min=1.0 / rate, tau_max=1e7)
            try:
                reading = reading_tau(
                    model_terms,
                    idx,
                    rate=rate,
                    dof=dof_for_precision(DEFAULT_PRECISION, confidence),
                    curves=model_curves,
                )
                read_at = reading.tau
                edf = _edf_at(curve, read_at, reading.alpha, duration)
            except AnalysisError:
                pass
        verdicts.append(
            TermVerdict(
                spec=spec,
                estimate=est,
                low=low,
                high=high,
                confidence=confidence,
                verdict=verdict,
                required_duration=req,
                read_at=read_at,
                edf=edf,
                dof=dof,
                supported=bool(getattr(ft, "supported", True)),
                note=note,
                limit_test=test,
            )
        )
    lim_ch = limit_channel(ax, rate=rate, against=against)
    check = curve_check(curve, lim_ch.allan_deviation(np.asarray(curve.tau)), confidence=confidence)
    return ChannelVerdict(
        id=ax.channel_id,
        unit=QUANTITY[ax.instrument][1],
        terms=tuple(verdicts),
        unverified=tuple(skipped),
        curve=check,
        limit_channel=lim_ch,
        identification=identification,
        allan=curve,
        duration=float(duration),
        rate=rate,
    )


def _test_seed(seed: int, index: int) -> int:
    """The seed of the test at the limit of the ``index``-th term of a channel."""
    return int(np.random.SeedSequence([int(seed), _LIMIT_TEST_SALT, index]).generate_state(1)[0])


def _confirm_at_limit(
    identification: Any,
    ft: Any,
    name: str,
    limit: float,
    factor: float,
    verdict: str,
    low: float,
    high: float,
    *,
    seed: int | None,
) -> tuple[str, float, float, dict[str, Any] | None, str]:
    """A pass or fail call of the interval, confirmed by the test at the limit.

    The interval comes from a bootstrap around the *estimate*; the call stands only if the
    parametric bootstrap test *at the limit* (:func:`sensormodel.identify.limit_test`)
    also rejects the limit on the same side at level α = (1 − confidence)/2. Otherwise the
    verdict is ``inconclusive`` and the interval is widened to take the limit in (so that the
    reported interval and the verdict agree). The test is skipped where the limit lies more
    than :data:`_SKIP_MARGIN` times as far (log scale) from the estimate as the farthest
    bootstrap record of the interval (``details["bootstrap_low"/"bootstrap_high"]``; never for
    a Gauss-Markov term), or where the identification cannot be refitted (one made
    elsewhere): the interval's call stands.

    Returns the verdict, the interval, the test record and a note.
    """
    if not hasattr(identification, "refit_state") or identification.refit_state is None:
        return verdict, low, high, {"skipped": "no fit state to test with"}, ""
    from .identify import limit_test

    value = limit / factor  # the limit as the term's SI parameter
    details = getattr(ft, "details", {}) or {}
    b_low, b_high = details.get("bootstrap_low"), details.get("bootstrap_high")
    est = float(ft.estimate)
    # not for a Gauss-Markov bias: its unknown time constant makes the interval's bootstrap
    # (at the estimated T) a poor guide to what records at the limit look like
    if b_low and b_high and est > 0 and name != "gauss_markov":
        # far beyond the bootstrap: the limit is more than _SKIP_MARGIN times as far from the
        # estimate (in log) as the farthest bootstrap record went on that side
        reach = math.log(est / b_low) if verdict == "fail" else math.log(b_high / est)
        if reach > 0 and abs(math.log(value / est)) > _SKIP_MARGIN * reach:
            why = f"the limit is over {_SKIP_MARGIN:g} times as far as any bootstrap record"
            return verdict, low, high, {"skipped": why}, ""
    test = limit_test(identification, name, value, seed=seed)
    alpha = 0.5 * (1.0 - float(identification.confidence))
    p = test.p_above if verdict == "fail" else test.p_below
    # (1 + k)/(B + 1) may equal α exactly (3/60 at 90 %), which 0.5·(1 − 0.9) misses by an ulp
    confirmed = p <= alpha * (1.0 + 1e-9)
    record: dict[str, Any] = {"p_value": p, "n_records": test.n_records, "confirmed": confirmed}
    if confirmed:
        return verdict, low, high, record, ""
    side = "above" if verdict == "fail" else "below"
    note = (
        f"the interval lies {side} the limit, but the bootstrap test at the limit does not "
        f"confirm it (p = {p:.3f} > {alpha:g}, {test.n_records} records): interval widened to "
        "the limit"
    )
    # the limit inside the widened interval (decide() calls an interval ending at the limit
    # from below a pass)
    if verdict == "fail":
        low = min(low, limit)
    else:
        high = max(high, math.nextafter(limit, math.inf))
    return "inconclusive", low, high, record, note


def _edf_at(curve: Any, tau: float, alpha: int, duration: float) -> float | None:
    """EDF of the Allan variance at τ in this record: the curve's own where τ lies within its
    grid (nearest point in log τ), else Greenhall & Riley's for a τ the record allows."""
    taus = np.asarray(curve.tau, dtype=float)
    edfs = getattr(curve, "edf", None)
    if edfs is not None and taus.size and taus[0] <= tau <= taus[-1]:
        i = int(np.argmin(np.abs(np.log(taus / tau))))
        return float(np.asarray(edfs)[i])
    if tau * 2.0 <= duration:
        return allan_edf(alpha, tau, duration, float(curve.sample_rate))
    return None


def _worker_count(workers: int | None, n_jobs: int) -> int:
    """Processes for the identification: ``workers`` (None or 1: none), at most one per job
    and per usable CPU."""
    import os

    if workers is None or workers <= 1 or n_jobs <= 1:
        return 1
    try:
        cpus = len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not Linux
        cpus = os.cpu_count() or 1
    return max(1, min(int(workers), n_jobs, cpus))


def _channel_seed(seed: int | None, ax: AxisSpec) -> int | None:
    """A seed per channel derived from ``seed`` and the channel id (independent streams)."""
    if seed is None:
        return None
    import zlib

    key = zlib.crc32(ax.channel_id.encode("utf-8"))
    return int(np.random.SeedSequence(seed, spawn_key=(key,)).generate_state(1)[0])


def _verify_job(
    curve: Any, ax: AxisSpec, length: float, seed: int | None, options: dict[str, Any]
) -> ChannelVerdict:
    """One channel's verification (a picklable job for a worker process)."""
    return verify_curve(curve, ax, duration=length, seed=seed, **options)


def _key(channel_id: str) -> str:
    return channel_id.replace("_", ".").lower()


def verify(
    source: Any,
    datasheet: Datasheet | str,
    *,
    confidence: float = DEFAULT_CONFIDENCE,
    against: str = "max",
    power: float = DEFAULT_POWER,
    channels: Sequence[str] | None = None,
    duration: float | None = None,
    seed: int | None = None,
    n_boot: int | None = None,
    workers: int | None = None,
    progress: Any = None,
) -> VerdictReport:
    """Acceptance verdicts of a recording (or of Allan curves) against a datasheet.

    Parameters
    ----------
    source : Recording, or mapping of channel id to AllanCurve
        A :class:`~sensormodel.recording.Recording` (its channels are analysed with
        :func:`sensormodel.allan.overlapping` at ``confidence``), or curves already computed
        (then ``duration`` is needed).
    datasheet : Datasheet or path
        The datasheet the unit is accepted against.
    confidence : float
        Two-sided confidence of every interval (default 0.9: each one-sided error ≤ 5 %).
    against : {"max", "typ"}
        The datasheet column used as the limit.
    power : float
        Probability of a decided verdict at the required recording length (default 0.8).
    channels : sequence of str, optional
        Only these channel ids.
    duration : float, optional
        Record length [s] (for curves; a Recording knows its own).
    seed : int, optional
        Seed for the identification's random parts.
    n_boot : int, optional
        Bootstrap records of the identification (default its own, 200); fewer are quicker.
    workers : int, optional
        Identify the channels in this many processes (at most the usable CPUs, and only for
        records of at least 2^17 samples in all; default one, in this process). The results
        do not depend on it.
    progress : callable, optional
        Called as ``progress(channel_id)`` before each channel.

    Returns
    -------
    VerdictReport
    """
    from .datasheet import load_datasheet

    _check_confidence(confidence)
    _check_confidence(power, "power")
    ds = datasheet if isinstance(datasheet, Datasheet) else load_datasheet(datasheet)
    specs = {_key(ax.channel_id): ax for ax in ds.channels()}
    notes: list[str] = []
    curves: dict[str, Any] = {}
    rec_info: dict[str, Any] = {}
    lengths: dict[str, float] = {}
    if isinstance(source, Mapping):
        for cid, c in source.items():
            length = duration if duration is not None else getattr(c, "duration", None)
            if length is None:
                raise AnalysisError(
                    f"the Allan curve of {cid} does not say how long its record was",
                    "duration [s] (or curves that carry n_samples)",
                )
            curves[_key(cid)] = c
            lengths[_key(cid)] = float(length)
        rec_info = {"file": None, "duration": max(lengths.values(), default=0.0) or None}
    else:
        rec_info = {
            "file": getattr(source, "source", None),
            "duration": float(source.duration),
            "sample_rate": float(source.rate),
            "samples": int(source.n_samples),
        }
        for cid in source.channels:
            curves[_key(cid)] = source
    wanted = [_key(c) for c in channels] if channels else None
    order = [k for k in specs if k in curves and (wanted is None or k in wanted)]
    if wanted:
        unknown = [c for c in wanted if c not in specs or c not in curves]
        if unknown:
            raise AnalysisError(
                f"channel(s) {', '.join(unknown)} not in both the recording and the datasheet",
                f"one of {', '.join(k for k in specs if k in curves) or '(none in common)'}",
            )
    missing = [k for k in specs if k not in curves]
    extra = [k for k in curves if k not in specs]
    if not order:
        raise AnalysisError(
            "the recording and the datasheet have no channel in common (recording: "
            f"{', '.join(curves) or 'none'}; datasheet: {', '.join(specs)})",
            "recording columns named by channel id (gyro.x …) or mapped with --channel",
            source=rec_info.get("file"),
        )
    if missing and wanted is None:
        notes.append(f"not in the recording, not verified: {', '.join(missing)}")
    if extra:
        notes.append(f"in the recording but not on the datasheet, ignored: {', '.join(extra)}")
    jobs = []
    for k in order:
        ax = specs[k]
        if progress is not None:
            progress(ax.channel_id)
        psd = None
        if isinstance(source, Mapping):
            curve, length = curves[k], lengths[k]
        else:
            curve, length, psd = _analyse(source, k, ax, confidence=confidence)
            n_seg = len(source.segments.get(next(c for c in source.channels if _key(c) == k), ()))
            if n_seg > 1:
                notes.append(
                    f"{ax.channel_id}: the recording has {n_seg} clean segments; the longest "
                    f"({length:.6g} s of {source.duration:.6g} s) was analysed"
                )
        jobs.append((curve, ax, length, psd))
    options = {
        "confidence": confidence,
        "against": against,
        "power": power,
        "n_boot": n_boot,
    }
    total = sum(int(getattr(c, "n_samples", None) or 0) for c, *_ in jobs)
    n_workers = _worker_count(workers, len(jobs)) if total >= _PARALLEL_MIN_SAMPLES else 1
    if n_workers > 1:
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor

        context = multiprocessing.get_context("spawn")
        with ProcessPoolExecutor(max_workers=n_workers, mp_context=context) as pool:
            futures = [
                pool.submit(_verify_job, curve, ax, length, _channel_seed(seed, ax), options)
                for curve, ax, length, _ in jobs
            ]
            cvs = [f.result() for f in futures]
    else:
        cvs = [
            _verify_job(curve, ax, length, _channel_seed(seed, ax), options)
            for curve, ax, length, _ in jobs
        ]
    results = [replace(cv, psd=job[3]) for cv, job in zip(cvs, jobs, strict=True)]
    if not any(c.terms for c in results):
        raise DatasheetError(
            f"no term of the datasheet has a {against} value to verify against",
            "terms printed with a max value ({ typ = …, max = … }), or --against typ",
            source=ds.source,
        )
    ds_info = {
        "file": ds.source,
        "sha256": ds.sha256,
        "sensor": {k: v for k, v in ds.sensor.items() if isinstance(v, str)},
    }
    return VerdictReport(
        channels=tuple(results),
        confidence=float(confidence),
        against=against,
        power=float(power),
        datasheet=ds_info,
        recording=rec_info,
        notes=tuple(notes),
    )


def _welch(y: npt.NDArray[np.float64], rate: float) -> tuple[Any, Any]:
    """One-sided PSD [u²/Hz] of a record by Welch's method, averaged in log-frequency bins.

    Welch (scipy.signal.welch): Hann window, half overlap, segments of 2^k ≤ N/4 samples (at
    most 2^18), mean removed per segment. Above the lowest bins the estimates are averaged in
    bins 1/20 of a decade wide (each bin's mean frequency and mean PSD), which keeps the
    estimate unbiased and shows the slopes; a figure then has some 20 points per decade.
    """
    from scipy.signal import welch

    n = len(y)
    nper = int(2 ** min(18, max(4, math.floor(math.log2(max(16, n / 4))))))
    f, s = welch(
        np.asarray(y, dtype=float),
        fs=rate,
        nperseg=min(nper, n),
        detrend="constant",
        return_onesided=True,
        scaling="density",
    )
    f, s = f[1:], s[1:]
    if f.size < 40:
        return f, s
    edges = np.geomspace(f[0], f[-1] * (1 + 1e-12), int(20 * math.log10(f[-1] / f[0])) + 2)
    idx = np.clip(np.searchsorted(edges, f, side="right") - 1, 0, edges.size - 2)
    counts = np.bincount(idx, minlength=edges.size - 1)
    keep = counts > 0
    fb = np.bincount(idx, weights=f, minlength=edges.size - 1)[keep] / counts[keep]
    sb = np.bincount(idx, weights=s, minlength=edges.size - 1)[keep] / counts[keep]
    return fb, sb


def _analyse(
    recording: Any, key: str, ax: AxisSpec, *, confidence: float
) -> tuple[Any, float, Any]:
    """The Allan curve of one recording channel, the length analysed and its PSD."""
    from .allan import overlapping

    cid = next(c for c in recording.channels if _key(c) == key)
    unit = recording.units[cid]
    _, si_unit = QUANTITY[ax.instrument]
    if unit != si_unit:
        raise AnalysisError(
            f"channel {cid} is in '{unit}'",
            f"a {ax.instrument} channel in a physical unit ({si_unit}, or a unit in the "
            "column header / --unit) to compare with the datasheet",
            source=recording.source,
        )
    segments = recording.segment_arrays(cid)
    if not segments:
        raise AnalysisError(
            f"channel {cid} has no clean segment", "a clean record", source=recording.source
        )
    y = max(segments, key=len)
    curve = overlapping(
        y, recording.rate, confidence=confidence, unit=si_unit, channel=ax.channel_id
    )
    return curve, len(y) / recording.rate, _welch(np.asarray(y), recording.rate)


# ---------------------------------------------------------------------------------------------
# Planning
# ---------------------------------------------------------------------------------------------


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
    noise : str
        The power-law noise type at that τ (for the EDF).
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
    noise: str
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
    from .datasheet import load_datasheet

    _check_confidence(confidence)
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
        ch = limit_channel(ax, rate=rate, against=against)
        terms = list(ch.terms)
        curves = _term_curves(terms, rate=rate, tau_min=_MIN_TAU_SAMPLES / rate, tau_max=1e9)
        for spec in limits:
            idx = next(
                i
                for i, t in enumerate(terms)
                if t.type == spec.type and t.meta.get("datasheet", {}).get("field") == spec.field
            )
            r = reading_tau(terms, idx, rate=rate, dof=nu, curves=curves)
            rows.append(
                PlanRow(
                    spec=spec,
                    read_at=r.tau,
                    share=r.share,
                    noise=_NOISE_NAME[r.alpha],
                    dof=nu,
                    edf=r.edf,
                    duration=r.duration,
                    verified=spec.column == against,
                )
            )
    return Plan(
        rows=tuple(rows),
        unverified=tuple(skipped),
        confidence=float(confidence),
        precision=float(precision),
        sample_rate=rate_used,
        datasheet={"file": ds.source, "sha256": ds.sha256},
    )
