"""Noise terms identified from an Allan-deviation curve, with honest uncertainties.

The Allan variance of a sum of independent noise terms is the sum of their Allan variances
(IEEE Std 952-1997, Annex C; El-Sheimy, Hou & Niu, IEEE Trans. Instrum. Meas. 57(1), 2008),
and each term's Allan variance is its parameter squared times a known function of τ::

    AVAR(τ) = Σ_k c_k φ_k(τ),   c_k = p_k² ≥ 0

with φ_k the exact forms of :mod:`sensormodel.terms` at unit parameter: quantization 3/τ²,
white 1/τ, flicker the exact 1/f form with its cut-off at the Nyquist frequency (→ 2 ln2/π),
random walk τ/3, ramp τ²/2, Gauss-Markov the closed form of Annex C (nonlinear in its time
constant, which is profiled). So the fit and the theory agree by construction.

Estimate
--------
Non-negative weighted least squares on the Allan *variance* (the Annex C least-squares fit
Σ A_n τⁿ with A_n ≥ 0): scipy's NNLS (Lawson & Hanson) with weights 1/var(AVAR̂(τ_i)),
var ≈ 2 AVAR(τ_i)²/edf_i (chi-square with the curve's equivalent degrees of freedom, NIST SP
1065 section 5.3). The variance in the weight is the *fitted* AVAR, iterated to convergence
(iteratively reweighted least squares), not the measured one: weighting each point by its own
noisy value favours the points that came out low and biases the fit downward.

Which terms the data support
----------------------------
Allan variances at neighbouring τ come from the same samples and are strongly correlated, and
some terms are nearly collinear over a short record (random walk and ramp over the last
octaves, quantization and white noise over the first). Support is decided by backward
elimination with generalized least squares, using the covariance of the Allan-variance
estimates from bootstrap records of the full fit (:class:`_Gls`): a term is dropped when leaving
it out does not worsen the GLS fit significantly (one-sided test at level α = (1 − confidence)/2).
The **rare** terms, ramp and quantization, are tested first and at the stricter level α/5
(common practice: they are the less usual of the two collinear pairs); one that fails is left
out of the estimate too, since it would take its share from the random walk or the white noise.
The **common** terms (white, flicker, random walk and a requested Gauss-Markov) stay in the
estimate whether supported or not, so that a real but weak term is not silently absorbed by its
neighbours. A term that is not supported is *reported* (estimate and an interval from zero) but
left out of the model.

Uncertainty
-----------
Intervals from a naive per-point fit would be wrong (the points are correlated; the tests
measure by how much). They come from a **parametric bootstrap of the whole procedure**:
``n_boot`` records of the same length and rate are simulated from the fitted model
(:class:`_Simulator`: exact sample means of each term), their overlapping Allan variance is
computed at the same τ (the estimator of :func:`sensormodel.allan.overlapping`), and the tests
of the rare terms and the fit are repeated on each. For a supported term (variance scale
c = p²):

* the ratio r = ĉ*/ĉ of the bootstrap coefficient to the fitted one is used as a pivot (its law
  hardly depends on the true value): [ĉ/q_{1−α}(r), ĉ/q_α(r)]. This follows the skew of the
  chi-square-like law of a variance better than the percentile interval
  [q_α(ĉ*), q_{1−α}(ĉ*)] (reported in ``details`` for comparison). The quantiles are the
  (B + 1)p-th order statistics, which keep the coverage of a finite bootstrap (B records) at
  its nominal value. A record whose test dropped a kept rare term is refitted with it, so its
  interval is that of the coefficient given that the term is in the model.

For a term that is not supported: [0, upper], upper the larger of ĉ/q_α(r) (when the refits
keep the term in more than a fraction 1 − α of the records) and max(ĉ_u, 0) − q_α(ĉ_u* − ĉ),
the basic bootstrap of the unconstrained weighted least-squares estimate ĉ_u with all requested
terms (unbiased: E[AVAR̂] = Σ c_k φ_k exactly), from the selection bootstrap.

The seeded coverage study in ``tests/test_identify.py`` (records simulated by an independent
generator) shows the stated interval containing the true coefficient in the stated fraction of
trials for white, flicker and random-walk terms. Its two sides are not equally good where a
term's precision depends on its own size: flicker squeezed between white noise and a random
walk is better separated in the bootstrap of an estimate that came out high, so the interval
misses a true value below it in 10-13 % of records instead of α = 5 % (the other side is
conservative). A decision against a given value (a datasheet limit) therefore uses
:func:`limit_test`, which simulates *at* that value.

Assumptions: the samples are means over their sample period, of white noise that is either
unfiltered or band-limited by a stated output filter (``bandwidth``, ``filter_order``: an
unstated filter that rolls off within a few sample periods lowers the first points of the curve
and is read as less white noise and more flicker); the terms are independent; a flicker term
has its cut-off at the Nyquist frequency.

Classical slope readings (IEEE Std 952-1997 Annex C) are reported beside the fit: white density
N = σ(τ)·√τ from the point nearest τ = 1 s (on the −½ line), random walk K = σ(τ)·√(3/τ) from
the point nearest τ = 3 s (on the +½ line), flicker coefficient B = min σ / 0.6643 (the floor);
a reading whose own chi-square interval (from the one curve point it is read at) misses the
fitted interval is flagged. Where τ = 1 s or 3 s lies outside the curve, the reading is carried
from the nearest end point along its line, and a note says so.
"""

from __future__ import annotations

import math
import threading
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any

import numpy as np
import numpy.typing as npt

from .confidence import chi2_interval
from .errors import AnalysisError

__all__ = [
    "DEFAULT_TERMS",
    "KNOWN_TERMS",
    "PARAMETERS",
    "DEFAULT_CONFIDENCE",
    "DEFAULT_BOOTSTRAP",
    "FittedTerm",
    "Identification",
    "LimitTest",
    "fit",
    "fit_recording",
    "limit_test",
    "to_model",
    "slope_readings",
]

_FloatArray = npt.NDArray[np.float64]
ProgressCallback = Callable[[int, int], Any]

#: Terms fitted unless told otherwise (Gauss-Markov only on request).
DEFAULT_TERMS: tuple[str, ...] = ("quantization", "white", "flicker", "random_walk", "ramp")
#: Every term type the fit knows, in the order of their dominant τ (short to long).
KNOWN_TERMS: tuple[str, ...] = (
    "quantization",
    "white",
    "flicker",
    "gauss_markov",
    "random_walk",
    "ramp",
)
#: The SI parameter each term's coefficient is (as in the noise-model JSON).
PARAMETERS: dict[str, str] = {
    "quantization": "coefficient",
    "white": "density",
    "flicker": "coefficient",
    "gauss_markov": "sigma",
    "random_walk": "density",
    "ramp": "slope",
}
#: Default two-sided confidence of the coefficient intervals.
DEFAULT_CONFIDENCE = 0.9
#: Default number of bootstrap records.
DEFAULT_BOOTSTRAP = 200

#: √(2 ln2/π): Allan-deviation floor of flicker noise per unit coefficient (IEEE Std 952 Annex C).
_FLOOR = math.sqrt(2.0 * math.log(2.0) / math.pi)
#: Reading points of the classical slope method [s] (IEEE Std 952 Annex C: σ(1) = N, σ(3) = K).
_WHITE_READ_TAU = 1.0
_RW_READ_TAU = 3.0
#: IRLS: most iterations and relative convergence tolerance of the coefficients.
_IRLS_MAX = 20
_IRLS_TOL = 1e-5
#: Terms the selection tests first (the rarer of two nearly collinear pairs; common practice),
#: at the stricter level α/_RARE_LEVEL_DIVISOR (1 % one-sided for 90 % intervals): a spurious
#: ramp or quantization term takes its share from the random walk or the white noise.
_TESTED_FIRST = ("ramp", "quantization")
_RARE_LEVEL_DIVISOR = 5.0
#: Second differences per block of the bootstrap's Allan-variance engine (2^15 float64 =
#: 256 KiB per slice).
_OAVAR_BLOCK = 1 << 15
#: Records of at least this many samples are simulated on two threads in the bootstrap.
_THREAD_MIN_SAMPLES = 1 << 18
#: Gauss-Markov time-constant grid for the profile: points per decade.
_GM_PER_DECADE = 6


# ---------------------------------------------------------------------------------------------
# Results
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class FittedTerm:
    """One fitted noise term.

    Attributes
    ----------
    term : str
        Term type: ``white``, ``flicker``, ``random_walk``, ``quantization``, ``ramp``,
        ``gauss_markov``.
    parameter : str
        The SI parameter estimated: ``density`` (white [u·√s], random walk [u/√s]),
        ``coefficient`` (flicker [u], quantization [u·s]), ``slope`` (ramp [u/s]) or ``sigma``
        (Gauss-Markov [u]); u is the channel unit.
    estimate : float
        The fitted value [SI].
    low, high : float
        The two-sided interval at ``confidence`` [SI]; ``low`` is 0 for an unsupported term.
    confidence : float
        Confidence of the interval.
    supported : bool
        Whether the data distinguish the term from zero (module notes).
    slope_reading : float or None
        The classical slope reading of the same parameter [SI] (white, flicker, random walk),
        else None.
    disagrees : bool
        The slope reading disagrees with the fit: its own chi-square interval at the same
        confidence (from the one curve point it is read at, ``details["slope_reading_low"]``
        and ``["slope_reading_high"]``) does not overlap [low, high].
    tau_range : (float, float) or None
        The τ of the curve where this term's fitted Allan variance is the largest of all terms
        [s]; None where it dominates nowhere.
    method : str
        How the interval was formed (module notes): ``ratio`` (the bootstrap ratio pivot),
        ``ratio-linear`` (ratio pivot below, the unconstrained estimate's bound above, for a
        term the refits drop in more than a fraction α of the records) or ``linear`` (an
        unsupported term: [0, upper]).
    details : dict
        More results: for ``gauss_markov`` the ``time_constant`` [s] and its interval
        (``time_constant_low``, ``time_constant_high``); ``kept_fraction``, the fraction of
        bootstrap refits that kept the term.
    """

    term: str
    parameter: str
    estimate: float
    low: float
    high: float
    confidence: float
    supported: bool
    slope_reading: float | None = None
    disagrees: bool = False
    tau_range: tuple[float, float] | None = None
    method: str = "ratio"
    details: Mapping[str, float] = field(default_factory=dict, compare=False)


@dataclass(frozen=True)
class Identification:
    """The noise terms identified from one channel's Allan curve.

    Attributes
    ----------
    channel : str
        Channel id.
    unit : str
        The channel's unit u (SI, or as recorded).
    sample_rate : float
        Sample rate of the record [Hz].
    n_samples : int
        Record length (samples).
    confidence : float
        Confidence of the coefficient intervals.
    terms : tuple of FittedTerm
        Every requested term, supported or not.
    slope_readings : dict
        ``white`` (N [u·√s]), ``flicker`` (B [u]), ``random_walk`` (K [u/√s]): the classical
        readings (module notes).
    notes : tuple of str
        How each slope reading was taken where it deviates from the textbook point, and any
        remark on the fit.
    tau : ndarray
        The τ of the curve that was fitted [s].
    adev : ndarray
        The measured Allan deviation at ``tau`` [u].
    chi2 : float
        Σ (AVAR̂ − AVAR_fit)²/var over the τ, var = 2 AVAR_fit²/edf (a naive goodness-of-fit
        figure: the points are correlated).
    n_boot : int
        Bootstrap records used.
    seed : int or None
        The bootstrap seed.
    white_filter : (float, int) or None
        The output filter (bandwidth [Hz], Butterworth order) the white term was fitted with.
    refit_state : object or None
        What :func:`limit_test` needs to repeat the fit on new records (the checked curve, the
        design, the terms in the estimate); None for an identification not made by :func:`fit`.
    """

    channel: str
    unit: str
    sample_rate: float
    n_samples: int
    confidence: float
    terms: tuple[FittedTerm, ...]
    slope_readings: dict[str, float]
    notes: tuple[str, ...] = ()
    tau: _FloatArray = field(default_factory=lambda: np.zeros(0), compare=False)
    adev: _FloatArray = field(default_factory=lambda: np.zeros(0), compare=False)
    chi2: float = 0.0
    n_boot: int = 0
    seed: int | None = None
    white_filter: tuple[float, int] | None = None
    refit_state: Any = field(default=None, repr=False, compare=False)

    def term(self, name: str) -> FittedTerm | None:
        """The fitted term of this type, or None."""
        for t in self.terms:
            if t.term == name:
                return t
        return None

    @property
    def duration(self) -> float:
        """Record length [s]."""
        return self.n_samples / self.sample_rate

    def _model_terms(self, *, supported_only: bool) -> list[Any]:
        from .terms import Flicker, GaussMarkov, Quantization, Ramp, RandomWalk

        out = []
        for ft in self.terms:
            if supported_only and not ft.supported:
                continue
            meta = {
                "uncertainty": {"low": ft.low, "high": ft.high, "confidence": ft.confidence},
                "supported": bool(ft.supported),
                "origin": "identified",
            }
            if ft.term == "white":
                out.append(_white_term(ft.estimate, self.white_filter, meta=meta))
            elif ft.term == "flicker":
                out.append(Flicker(coefficient=ft.estimate, meta=meta))
            elif ft.term == "random_walk":
                out.append(RandomWalk(density=ft.estimate, meta=meta))
            elif ft.term == "quantization":
                out.append(Quantization(coefficient=ft.estimate, meta=meta))
            elif ft.term == "ramp":
                out.append(Ramp(slope=ft.estimate, meta=meta))
            elif ft.term == "gauss_markov":
                tc = float(ft.details["time_constant"])
                meta["time_constant_uncertainty"] = {
                    "low": float(ft.details["time_constant_low"]),
                    "high": float(ft.details["time_constant_high"]),
                    "confidence": ft.confidence,
                }
                out.append(GaussMarkov(sigma=ft.estimate, time_constant=tc, meta=meta))
        return out

    def fitted_adev(self, tau: npt.ArrayLike) -> _FloatArray:
        """Allan deviation of the fitted terms (all of them, supported or not) [u].

        Parameters
        ----------
        tau : array_like
            Averaging times [s], positive.
        """
        tau = np.asarray(tau, dtype=np.float64)
        if tau.size == 0 or not np.all(np.isfinite(tau)) or np.any(tau <= 0):
            raise AnalysisError(f"got τ = {tau!r}", "averaging times > 0 s", field="tau")
        total = np.zeros(tau.shape)
        for t in self._model_terms(supported_only=False):
            total = total + t.allan_variance(tau, sample_rate=self.sample_rate)
        return np.sqrt(total)

    def to_channel(self) -> Any:
        """The identified channel as a :class:`sensormodel.model.Channel`.

        Supported terms only; each carries ``meta["uncertainty"] = {"low", "high",
        "confidence"}`` (SI, DESIGN §10) and ``meta["supported"]``. The flicker term has no
        explicit cut-off (the channel's Nyquist frequency, as in the fit).
        """
        from .model import Channel

        return Channel(
            id=self.channel,
            quantity=_quantity(self.unit),
            unit=self.unit,
            sample_rate=self.sample_rate,
            terms=tuple(self._model_terms(supported_only=True)),
        )


def _quantity(unit: str) -> str:
    u = unit.replace(" ", "").replace("**", "^")
    if u == "rad/s":
        return "angular_rate"
    if u in ("m/s^2", "m/s2"):
        return "acceleration"
    return "as_recorded"


# ---------------------------------------------------------------------------------------------
# Argument checks
# ---------------------------------------------------------------------------------------------


def _check_terms(terms: Any) -> tuple[str, ...]:
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


def _check_confidence(confidence: Any) -> float:
    try:
        c = float(confidence)
    except (TypeError, ValueError):
        raise AnalysisError(
            f"got {confidence!r}", "a probability between 0 and 1, e.g. 0.9", field="confidence"
        ) from None
    if not 0.0 < c < 1.0:
        raise AnalysisError(
            f"got {c!r}", "a probability strictly between 0 and 1, e.g. 0.9", field="confidence"
        )
    return c


def _check_n_boot(n_boot: Any, confidence: float) -> int:
    alpha = 0.5 * (1.0 - confidence)
    need = int(math.ceil(2.0 / alpha - 1e-9))
    if n_boot is None:
        return max(DEFAULT_BOOTSTRAP, need)
    if isinstance(n_boot, bool) or not isinstance(n_boot, (int, np.integer)):
        raise AnalysisError(
            f"got {n_boot!r}", "a whole number of bootstrap records", field="n_boot"
        )
    if n_boot < need:
        raise AnalysisError(
            f"got {int(n_boot)}",
            f"at least {need} bootstrap records for a {confidence:g} interval "
            "(two records beyond each end)",
            field="n_boot",
        )
    return int(n_boot)


def _check_seed(seed: Any) -> int | None:
    if seed is None:
        return None
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise AnalysisError(f"got {seed!r}", "a whole number ≥ 0", field="seed")
    return int(seed)


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
    rate = float(curve.sample_rate)
    if not (math.isfinite(rate) and rate > 0):
        raise AnalysisError(
            f"sample_rate = {rate!r}", "a rate > 0 Hz", field=f"{channel}.sample_rate"
        )
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


# ---------------------------------------------------------------------------------------------
# Basis functions (the exact Allan variances of sensormodel.terms at unit parameter)
# ---------------------------------------------------------------------------------------------


def _basis(
    name: str,
    tau: _FloatArray,
    rate: float,
    time_constant: float = 1.0,
    white_filter: tuple[float, int] | None = None,
) -> _FloatArray:
    from .terms import Flicker, GaussMarkov, Quantization, Ramp, RandomWalk

    if name == "white":
        term: Any = _white_term(1.0, white_filter)
    elif name == "flicker":
        term = Flicker(coefficient=1.0)
    elif name == "random_walk":
        term = RandomWalk(density=1.0)
    elif name == "quantization":
        term = Quantization(coefficient=1.0)
    elif name == "ramp":
        term = Ramp(slope=1.0)
    else:
        term = GaussMarkov(sigma=1.0, time_constant=time_constant)
    return np.asarray(term.allan_variance(tau, sample_rate=rate), dtype=np.float64)


def _white_term(density: float, white_filter: tuple[float, int] | None, **meta: Any) -> Any:
    """White noise of density N [u·√s], band-limited by the sensor's output filter (bandwidth
    [Hz], Butterworth order) when one is given."""
    from .terms import White

    if white_filter is None:
        return White(density=density, **meta)
    return White(density=density, bandwidth=white_filter[0], filter_order=white_filter[1], **meta)


def _check_white_filter(bandwidth: Any, filter_order: Any) -> tuple[float, int] | None:
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


# ---------------------------------------------------------------------------------------------
# The fit engine
# ---------------------------------------------------------------------------------------------


@dataclass
class _Design:
    """The fixed (linear) part of the fit: basis matrix, weights, and the GM grid."""

    names: tuple[str, ...]
    tau: _FloatArray
    rate: float
    edf: _FloatArray
    phi: _FloatArray  # (k, p) with the GM column (if any) filled per time constant
    gm_index: int | None
    gm_grid: _FloatArray | None
    gm_columns: _FloatArray | None  # (n_grid, k)
    white_filter: tuple[float, int] | None = None  # the white term's band limit

    def with_gm(self, time_constant: float) -> _FloatArray:
        phi = self.phi.copy()
        if self.gm_index is not None:
            phi[:, self.gm_index] = _basis("gauss_markov", self.tau, self.rate, time_constant)
        return phi


def _design(
    names: tuple[str, ...], c: _Curve, white_filter: tuple[float, int] | None = None
) -> _Design:
    phi = np.zeros((c.tau.size, len(names)))
    gm_index = None
    for j, name in enumerate(names):
        if name == "gauss_markov":
            gm_index = j
        else:
            phi[:, j] = _basis(name, c.tau, c.rate, white_filter=white_filter)
    grid = cols = None
    if gm_index is not None:
        lo = math.log10(c.tau[0] / 4.0)
        hi = math.log10(c.tau[-1] * 2.0)
        grid = 10.0 ** np.arange(lo, hi + 1e-9, 1.0 / _GM_PER_DECADE)
        cols = np.array([_basis("gauss_markov", c.tau, c.rate, t) for t in grid])
    return _Design(names, c.tau, c.rate, c.edf, phi, gm_index, grid, cols, white_filter)


def _irls(
    avar: _FloatArray,
    phi: _FloatArray,
    edf: _FloatArray,
    start: _FloatArray | None = None,
    offset: _FloatArray | None = None,
) -> tuple[_FloatArray, float]:
    """Non-negative least squares with weights from the fitted AVAR, iterated.

    The first weights come from ``start`` (an AVAR curve, e.g. a previous fit) or else from the
    measured values; every later one from the current fit, until the coefficients change by
    less than a relative 1e-5. ``offset`` is a fixed part of the model (a term held at a given
    value): the columns fit ``avar − offset``, the weights and χ² use the whole model. Returns
    the coefficients (variance scale, c_k = p_k²) and χ² = Σ (â − m)² edf/(2 m²) with m the
    fitted AVAR.
    """
    from scipy.optimize import nnls

    fixed = np.zeros(avar.shape) if offset is None else offset
    colscale = np.sqrt(np.sum(phi * phi, axis=0))
    colscale[colscale == 0] = 1.0
    ref = avar if start is None else start
    c = np.zeros(phi.shape[1])
    for _ in range(_IRLS_MAX):
        s = ref * np.sqrt(2.0 / edf)
        a = phi / s[:, None] / colscale
        sol, _res = nnls(a, (avar - fixed) / s, maxiter=50 * phi.shape[1])
        c_new = sol / colscale
        model = phi @ c_new + fixed
        floor = 1e-9 * float(np.max(model)) if np.max(model) > 0 else 0.0
        if floor == 0.0:
            c = c_new
            break
        ref = np.maximum(model, floor)
        done = np.all(np.abs(c_new - c) <= _IRLS_TOL * np.maximum(np.abs(c_new), 1e-300))
        c = c_new
        if done:
            break
    model = phi @ c + fixed
    model = np.maximum(model, 1e-300)
    chi2 = float(np.sum((avar - model) ** 2 * edf / (2.0 * model**2)))
    return c, chi2


def _fit_one(
    avar: _FloatArray,
    d: _Design,
    *,
    start: _FloatArray | None = None,
    offset: _FloatArray | None = None,
) -> tuple[_FloatArray, float, float | None]:
    """Fit one Allan-variance vector: coefficients, χ², GM time constant (or None).

    ``start`` only speeds up the iteration (first weights); the result is its fixed point.
    ``offset``: a fixed part of the model (:func:`_irls`).
    """
    if d.gm_index is None:
        c, chi2 = _irls(avar, d.phi, d.edf, start, offset)
        return c, chi2, None
    assert d.gm_grid is not None and d.gm_columns is not None
    phi = d.phi.copy()
    gm = d.gm_index

    def fit_grid(k: int) -> tuple[_FloatArray, float]:
        phi[:, gm] = d.gm_columns[k]  # type: ignore[index]
        return _irls(avar, phi, d.edf, start, offset)

    def fit_at(t: float) -> tuple[_FloatArray, float]:
        return _irls(avar, d.with_gm(t), d.edf, start, offset)

    t_best, c, chi2 = _profile_time_constant(d.gm_grid, fit_grid, fit_at)
    return c, chi2, t_best


def _profile_time_constant(
    grid: _FloatArray,
    fit_grid: Callable[[int], tuple[_FloatArray, float]],
    fit_at: Callable[[float], tuple[_FloatArray, float]],
) -> tuple[float, _FloatArray, float]:
    """The Gauss-Markov time constant of least χ²: the best point of ``grid`` [s], refined in
    log T between its neighbours (bounded golden-section search on a unimodal bracket) and kept
    only if no worse. ``fit_grid(k)`` and ``fit_at(T)`` return (coefficients, χ²) at grid
    point k and at any T. Returns (T, coefficients, χ²)."""
    from scipy.optimize import minimize_scalar

    results = [fit_grid(k) for k in range(grid.size)]
    i = int(np.argmin([r[1] for r in results]))
    t_best, best = float(grid[i]), results[i]
    lo = math.log(grid[max(i - 1, 0)])
    hi = math.log(grid[min(i + 1, grid.size - 1)])
    if hi > lo:
        res = minimize_scalar(
            lambda logt: fit_at(math.exp(logt))[1],
            bounds=(lo, hi),
            method="bounded",
            options={"xatol": 1e-3},
        )
        t = math.exp(float(res.x))
        refined = fit_at(t)
        if refined[1] <= best[1]:
            t_best, best = t, refined
    return t_best, best[0], best[1]


def _wls_matrix(phi: _FloatArray, model: _FloatArray, edf: _FloatArray) -> _FloatArray:
    """A with ĉ_u = A·â: unconstrained weighted least squares with var = 2 model²/edf."""
    w = edf / (2.0 * model**2)
    colscale = np.sqrt(np.sum(phi * phi, axis=0))
    colscale[colscale == 0] = 1.0
    ps = phi / colscale
    normal = ps.T @ (ps * w[:, None])
    a = np.linalg.pinv(normal) @ (ps.T * w[None, :])
    return a / colscale[:, None]


# ---------------------------------------------------------------------------------------------
# Bootstrap: simulation from the fitted model and the overlapping Allan variance
# ---------------------------------------------------------------------------------------------


class _Simulator:
    """Records of ``n`` samples at ``rate`` of a fitted model, one at a time.

    Each sample is the **mean of the continuous process over its period**, so the Allan
    variance of a record is the model's exact Allan variance at τ = m/rate (the bases of the
    fit). The stationary Gaussian terms are drawn together by spectral synthesis (random
    Gaussian Fourier coefficients; J. Timmer & M. König, Astron. Astrophys. 300:707, 1995) over
    L = 2n samples of which the first n are kept, with the one-sided PSD of the sample means
    (0 < f ≤ rate/2, dt = 1/rate):

    * white N: flat 2N² (variance N²·rate per sample; IEEE Std 952 Annex C); band-limited by
      an output filter B (bandwidth, Butterworth order): 2N² Σ_k |B(f + k·rate)|²
      sinc²((f + k·rate)·dt), the period means' spectrum folded into the band (integrate, then
      sample; for B = 1 the sum is 1);
    * quantization Q: 8Q²·rate·sin²(πf dt), the PSD of (e_{k+1} − e_k)/dt with e white of
      variance Q² (its covariance is banded, so the circular embedding is exact on n samples);
    * flicker B: (B²/(πf))·sinc²(f dt): the 1/f PSD B²/(πf) up to rate/2 (two-sided
      B²/(2πf), Annex C) times sinc², the effect of averaging over a period (the band-limited
      process does not alias). The power below the first bin, 0 < f < f_L = rate/(2L), shows
      within the record as a slope; it is added as a random slope of variance
      ∫ (B²/(πf))(2πf)² df = 2π B² f_L². The Allan variance then follows the exact form of
      :meth:`sensormodel.terms.Flicker.allan_variance` within about 1 % for τ up to an
      eighth of the record (tests/test_identify.py);
    * random walk K: the mean of Brownian motion of intensity K² over a period is the mean of
      its end values plus an independent N(0, K² dt/12) (the Brownian-bridge part); the end
      values are a cumulative sum, the bridge part joins the white spectrum (flat K² dt²/6);
    * ramp R: R·t at the period mid-points (its Allan variance R²τ²/2 is the same for either
      sign of the slope);
    * Gauss-Markov σ, T: the exact joint law of the state at the period ends and its integral
      over the period, from a stationary start (:meth:`_gauss_markov`).
    """

    def __init__(
        self,
        params: Mapping[str, float],
        time_constant: float | None,
        n: int,
        rate: float,
        white_filter: tuple[float, int] | None = None,
    ) -> None:
        self.n = int(n)
        self.rate = float(rate)
        self.dt = 1.0 / self.rate
        dt = self.dt
        self.length = 2 * self.n
        f = np.fft.rfftfreq(self.length, d=dt)
        s1 = np.zeros(f.size)
        w = params.get("white", 0.0)
        k = params.get("random_walk", 0.0)
        q = params.get("quantization", 0.0)
        b = params.get("flicker", 0.0)
        s1[1:] += k**2 * dt**2 / 6.0
        s1[1:] += 2.0 * w**2 * _white_alias_sum(f[1:], self.rate, white_filter)
        s1[1:] += 8.0 * q**2 * self.rate * np.sin(np.pi * f[1:] * dt) ** 2
        s1[1:] += b**2 / (np.pi * f[1:]) * np.sinc(f[1:] * dt) ** 2
        # E|Z_j|² = L·S1(f_j)/(2 dt): then Var y = Σ S1(f_j) Δf with Δf = 1/(L dt)
        self.amp = np.sqrt(s1 * self.length / (4.0 * dt))
        self.amp[-1] *= math.sqrt(2.0)  # the Nyquist bin is real: all its variance in one part
        self.amp32 = self.amp.astype(np.float32)
        self.spectral = bool(np.any(s1 > 0))
        f_low = self.rate / (2.0 * self.length)
        self.flicker_slope = b * math.sqrt(2.0 * math.pi) * f_low
        self.rw_step = k * math.sqrt(dt)
        self.mid = (np.arange(self.n) + 0.5) * dt
        self.ramp = params.get("ramp", 0.0)
        self.gm = (params.get("gauss_markov", 0.0), time_constant)

    def record(self, rng: np.random.Generator) -> _FloatArray:
        """One record [u].

        The random draws and the FFT are in single precision (relative error ~1e-7, far below
        the sampling noise of any Allan variance); the record and its phase are double.
        """
        from scipy import fft

        n = self.n
        if self.spectral:
            nb = self.amp.size
            z = rng.standard_normal(2 * nb, dtype=np.float32).view(np.complex64)
            z[-1] = z[-1].real
            z *= self.amp32
            y = fft.irfft(z, n=self.length)[:n].astype(np.float64)
        else:
            y = np.zeros(n)
        slope = self.ramp
        if self.flicker_slope > 0:
            slope = slope + self.flicker_slope * float(rng.standard_normal())
        if slope != 0.0:
            y += slope * self.mid
        if self.rw_step > 0:
            ends = np.empty(n + 1)
            ends[0] = 0.0
            np.cumsum(rng.standard_normal(n, dtype=np.float32), dtype=np.float64, out=ends[1:])
            ends *= self.rw_step
            y += 0.5 * (ends[1:] + ends[:-1])
        sigma, tc = self.gm
        if sigma > 0 and tc:
            y += self._gauss_markov(sigma, tc, rng)
        return y

    def _gauss_markov(self, sigma: float, tc: float, rng: np.random.Generator) -> _FloatArray:
        """Period means of a stationary first-order Gauss-Markov process (σ, T), exactly.

        Over one step, x_{k+1} = φ x_k + w_k and the integral I_k = T(1 − φ) x_k + v_k, with
        φ = e^(−dt/T) and (w_k, v_k) jointly Gaussian: var w = σ²(1 − φ²),
        cov(w, v) = σ² T (1 − φ)², var v = σ² T [2 dt − T (1 − φ)(3 − φ)] (the transition of
        the Ornstein-Uhlenbeck process and of its integral). The mean is I_k/dt.
        """
        from scipy.signal import lfilter

        n, dt = self.n, self.dt
        phi = math.exp(-dt / tc)
        vw = sigma**2 * (1.0 - phi**2)
        cwv = sigma**2 * tc * (1.0 - phi) ** 2
        vv = sigma**2 * tc * (2.0 * dt - tc * (1.0 - phi) * (3.0 - phi))
        g = cwv / vw if vw > 0 else 0.0
        ve = max(vv - g * cwv, 0.0)
        w = rng.standard_normal(n) * math.sqrt(vw)
        drive = np.empty(n)
        drive[0] = rng.standard_normal() * sigma  # x_0, stationary
        drive[1:] = w[:-1]
        x = lfilter([1.0], [1.0, -phi], drive)
        integral = tc * (1.0 - phi) * x + g * w + rng.standard_normal(n) * math.sqrt(ve)
        return integral / dt


#: Aliases folded one by one into the band-limited white spectrum of the bootstrap (the rest
#: as an integral).
_ALIASES = 64


def _white_alias_sum(
    f: _FloatArray, rate: float, white_filter: tuple[float, int] | None
) -> _FloatArray:
    """Σ_k |B(f + k·rate)|² sinc²((f + k·rate)/rate) for 0 < f ≤ rate/2 (1 without a filter).

    With x = f/rate, sinc²(x + k) = sin²(πx)/(π(x + k))² for every k, so the sum is
    sin²(πx)/π² · Σ_k |B|²/(x + k)², |B(g)|² = 1/(1 + (g/bandwidth)^(2·order)) (Butterworth).
    """
    if white_filter is None:
        return np.ones(f.shape)
    return _alias_sum_cached(f.size, float(f[0]), float(f[-1]), rate, white_filter).copy()


@lru_cache(maxsize=4)
def _alias_sum_cached(
    size: int, f_first: float, f_last: float, rate: float, white_filter: tuple[float, int]
) -> _FloatArray:
    from scipy.integrate import quad
    from scipy.interpolate import CubicSpline

    bw, order = white_filter
    c = rate / bw
    x = np.linspace(f_first, f_last, size) / rate
    total = np.zeros(size)
    for k in range(-_ALIASES, _ALIASES + 1):
        g = x + k
        total += 1.0 / (g * g * (1.0 + ((g * c) ** 2) ** order))

    # the aliases beyond ±K by the midpoint rule, Σ_{k>K} h(x + k) ≈ ∫_{K+½}^∞ h(x + t) dt
    # (error ~h'/24 ≈ 3e-7 of the sum at K = 64), the integral G tabulated on [K, K + 1]
    def h(u: float) -> float:
        return 1.0 / (u * u * (1.0 + (c * u) ** (2 * order)))

    grid = np.linspace(_ALIASES, _ALIASES + 1.0, 17)
    tail = CubicSpline(grid, [quad(h, u0, np.inf, epsabs=0.0, epsrel=1e-12)[0] for u0 in grid])
    total += tail(_ALIASES + 0.5 + x) + tail(_ALIASES + 0.5 - x)
    total *= (np.sin(np.pi * x) / np.pi) ** 2
    total.setflags(write=False)
    return total


class _Oavar:
    """Overlapping Allan variance of records of ``n`` samples at the averaging factors ``m``.

    The estimator of :func:`sensormodel.allan.overlapping` (NIST SP 1065 section 5.2.4 eq. (11))
    on the phase x = τ0·cumsum(y − ȳ) with N = n + 1 points:
    Σ (x[i+2m] − 2x[i+m] + x[i])²/(2 m² τ0² (N − 2m)), written here with τ0 cancelled. One
    record at a time, in preallocated buffers (a record of up to ~2^16 samples stays in cache).
    """

    def __init__(self, n: int, m: npt.NDArray[np.int64]) -> None:
        self.n = int(n)
        self.m = sorted(int(v) for v in m)
        if self.m != [int(v) for v in m]:
            raise AnalysisError("averaging factors not increasing", "increasing m", field="m")
        self.x = np.empty(self.n + 1)
        self.buf = np.empty(self.n + 1)

    def __call__(self, y: _FloatArray) -> _FloatArray:
        n, x, buf = self.n, self.x, self.buf
        x[0] = 0.0
        np.subtract(y, y.mean(), out=buf[:n])
        np.cumsum(buf[:n], out=x[1:])
        sums = [0.0] * len(self.m)
        # block-major: every τ of a block of second differences while its phase slices are
        # still in cache (one memory stream per τ instead of three)
        for i0 in range(0, n + 1 - 2 * self.m[0], _OAVAR_BLOCK):
            i1 = i0 + _OAVAR_BLOCK
            for j, mm in enumerate(self.m):
                e = min(i1, n + 1 - 2 * mm)
                if e <= i0:
                    break  # the factors are sorted: the longer ones end even earlier
                b = buf[: e - i0]
                np.multiply(x[i0 + mm : e + mm], 2.0, out=b)
                np.subtract(x[i0 + 2 * mm : e + 2 * mm], b, out=b)
                np.add(b, x[i0:e], out=b)
                sums[j] += float(np.einsum("i,i->", b, b))
        return np.array(
            [sums[j] / (2.0 * mm * mm * (n + 1 - 2 * mm)) for j, mm in enumerate(self.m)]
        )


# ---------------------------------------------------------------------------------------------
# Slope readings (IEEE Std 952 Annex C)
# ---------------------------------------------------------------------------------------------


def slope_readings(
    tau: npt.ArrayLike, adev: npt.ArrayLike
) -> tuple[dict[str, float], tuple[str, ...]]:
    """The classical slope readings of an Allan-deviation curve (IEEE Std 952-1997 Annex C).

    * white density N [u·√s]: on the −½ line through the curve point nearest τ = 1 s,
      N = σ(τ_j)·√τ_j (σ(1 s) itself when the curve has τ = 1 s);
    * random walk K [u/√s]: on the +½ line through the point nearest τ = 3 s,
      K = σ(τ_j)·√(3/τ_j) (σ(3 s) when the curve has it);
    * flicker coefficient B [u]: the floor, min σ / √(2 ln2/π) = min σ / 0.6643.

    Parameters
    ----------
    tau : array_like
        Averaging times [s], increasing.
    adev : array_like
        Allan deviation [u].

    Returns
    -------
    readings : dict
        ``white``, ``random_walk``, ``flicker``.
    notes : tuple of str
        Where a reading point lies outside the curve, or the floor is at an end of it.
    """
    tau = np.asarray(tau, dtype=np.float64)
    adev = np.asarray(adev, dtype=np.float64)
    if tau.ndim != 1 or tau.shape != adev.shape or tau.size == 0:
        raise AnalysisError(
            f"got {tau.size} τ and {adev.size} deviations", "one deviation per τ", field="adev"
        )
    if not (np.all(tau > 0) and np.all(adev > 0) and np.all(np.isfinite(adev))):
        raise AnalysisError("a τ or deviation is not positive", "τ > 0 s, σ > 0", field="adev")
    points = _reading_points(tau, adev)
    values = {k: float(adev[j] * f) for k, (j, f) in points.items()}
    notes = []
    j = points["white"][0]
    if not tau[0] <= _WHITE_READ_TAU <= tau[-1]:
        notes.append(
            f"white: τ = 1 s is outside the curve ({tau[0]:.4g}-{tau[-1]:.4g} s); read at "
            f"τ = {tau[j]:.4g} s and carried to 1 s along the −½ line"
        )
    j = points["random_walk"][0]
    if not tau[0] <= _RW_READ_TAU <= tau[-1]:
        notes.append(
            f"random_walk: τ = 3 s is outside the curve ({tau[0]:.4g}-{tau[-1]:.4g} s); read at "
            f"τ = {tau[j]:.4g} s and carried to 3 s along the +½ line"
        )
    j = points["flicker"][0]
    if j == tau.size - 1:
        notes.append(
            "flicker: the Allan deviation still falls at the longest τ; the floor reading is an "
            "upper bound"
        )
    elif j == 0:
        notes.append("flicker: the Allan deviation is lowest at the shortest τ (no floor seen)")
    return values, tuple(notes)


# ---------------------------------------------------------------------------------------------
# The fit
# ---------------------------------------------------------------------------------------------


def _reading_points(tau: _FloatArray, adev: _FloatArray) -> dict[str, tuple[int, float]]:
    """Index of the curve point each slope reading uses and its factor: reading = σ_j·factor."""
    jw = int(np.argmin(np.abs(np.log(tau / _WHITE_READ_TAU))))
    jr = int(np.argmin(np.abs(np.log(tau / _RW_READ_TAU))))
    jf = int(np.argmin(adev))
    return {
        "white": (jw, math.sqrt(tau[jw])),
        "random_walk": (jr, math.sqrt(_RW_READ_TAU / tau[jr])),
        "flicker": (jf, 1.0 / _FLOOR),
    }


def _quantile(x: _FloatArray, q: float) -> float:
    return float(np.quantile(x, q, method="weibull"))


def _z(p: float) -> float:
    from scipy.stats import norm

    return float(norm.ppf(p))


class _Gls:
    """Term selection by backward elimination with generalized least squares.

    The covariance of the Allan-variance estimates across τ is taken from bootstrap records
    (``av``, drawn from a model with Allan variance ``model``), on the relative scale
    e = AVAR̂/model − 1, with its correlations shrunk toward zero by the Schäfer-Strimmer rule
    (J. Schäfer & K. Strimmer, Stat. Appl. Genet. Mol. Biol. 4(1):32, 2005, target "D"): a
    bootstrap of a few dozen records gives a usable, well-conditioned matrix. With it,

        χ²(S) = min_{c ≥ 0} (â − Φ_S c)ᵀ Σ⁻¹ (â − Φ_S c)

    and a term k of the set S is dropped when χ²(S \\ k) − χ²(S) < z²_{1−α}, the one-sided
    test of c_k = 0 at level α (the statistic of a parameter on its bound, ½χ²₀ + ½χ²₁; Self &
    Liang, J. Am. Stat. Assoc. 82:605, 1987). The least significant term goes first; the
    elimination stops when every remaining term is significant. Unlike a test of each
    coefficient in the full model, this keeps one of two nearly collinear terms (random walk and
    ramp over the last octaves) when the data need one of them. The terms ``first`` (ramp,
    then quantization: the rarer ones, common practice) are tested before the others and at the
    stricter critical value ``z_first``, so that where the data cannot tell a ramp from a random
    walk, or quantization from white noise, the common term is kept.
    """

    def __init__(
        self,
        av: _FloatArray,
        model: _FloatArray,
        phi: _FloatArray,
        *,
        z_crit: float,
        first: Sequence[int] = (),
        z_first: float | None = None,
    ) -> None:
        self._first = tuple(int(k) for k in first)
        self._crit_first = (z_crit if z_first is None else z_first) ** 2
        e = av / model[None, :] - 1.0
        nb = e.shape[0]
        sd = e.std(axis=0, ddof=1)
        sd = np.where(sd > 0, sd, 1e-12)
        w = (e - e.mean(axis=0)) / sd
        r = (w.T @ w) / (nb - 1)
        # Schäfer-Strimmer shrinkage intensity toward the identity correlation
        wij = w[:, :, None] * w[:, None, :]
        var_r = nb / (nb - 1) ** 3 * np.sum((wij - wij.mean(axis=0)) ** 2, axis=0)
        off = ~np.eye(r.shape[0], dtype=bool)
        denom = float(np.sum(r[off] ** 2))
        lam = 1.0 if denom == 0 else min(1.0, max(0.0, float(np.sum(var_r[off])) / denom))
        while True:  # fewer records than τ leave the plain estimate singular: shrink more
            rs = np.where(off, (1.0 - lam) * r, 1.0)
            try:
                chol = np.linalg.cholesky(rs * sd[:, None] * sd[None, :])
                break
            except np.linalg.LinAlgError:
                lam = min(1.0, max(2.0 * lam, 0.01))
        self._whiten = np.linalg.inv(chol)
        self._model = model
        self._phi_w = self._whiten @ (phi / model[:, None])
        self._crit = z_crit**2
        self.shrinkage = lam

    def _chi2(self, b: _FloatArray, mask: npt.NDArray[np.bool_]) -> float:
        from scipy.optimize import nnls

        a = self._phi_w[:, mask]
        scale = np.sqrt(np.sum(a * a, axis=0))
        scale[scale == 0] = 1.0
        _x, res = nnls(a / scale, b, maxiter=50 * a.shape[1])
        return float(res) ** 2

    def select(
        self, avar: _FloatArray, *, rare_only: bool = False
    ) -> tuple[npt.NDArray[np.bool_], npt.NDArray[np.bool_]]:
        """The terms kept for this Allan-variance vector.

        Returns ``(after_rare, kept)``: the terms left once the rare terms (``first``) have
        been tested, and those left at the end of the backward elimination (``kept`` is
        ``after_rare`` with ``rare_only``).
        """
        b = self._whiten @ (avar / self._model)
        mask = np.ones(self._phi_w.shape[1], dtype=bool)
        current = self._chi2(b, mask)
        for k in self._first:
            if np.sum(mask) <= 1:
                break
            trial = mask.copy()
            trial[k] = False
            reduced = self._chi2(b, trial)
            if reduced - current < self._crit_first:
                mask, current = trial, reduced
        after_rare = mask.copy()
        if rare_only:
            return after_rare, mask
        while np.sum(mask) > 1:
            best_k, best_delta = -1, math.inf
            for k in np.flatnonzero(mask):
                trial = mask.copy()
                trial[k] = False
                delta = self._chi2(b, trial) - current
                if delta < best_delta:
                    best_k, best_delta = int(k), delta
            if best_delta >= self._crit:
                break
            mask[best_k] = False
            current += best_delta
        return after_rare, mask


def fit(
    curve: Any,
    *,
    terms: Sequence[str] | str = DEFAULT_TERMS,
    confidence: float = DEFAULT_CONFIDENCE,
    seed: int | None = None,
    n_boot: int | None = None,
    progress: ProgressCallback | None = None,
    bandwidth: float | None = None,
    filter_order: int | None = None,
) -> Identification:
    """Identify noise terms from an overlapping Allan-deviation curve.

    Non-negative weighted least squares on the Allan variance with the exact term forms as
    bases; intervals from a parametric bootstrap (module notes).

    Parameters
    ----------
    curve : AllanCurve
        From :func:`sensormodel.allan.overlapping`: τ [s] (whole numbers of sample periods),
        Allan deviation [u], ``edf``, ``sample_rate`` [Hz], ``n_samples`` (or ``n_clusters``),
        ``channel``, ``unit``.
    terms : sequence of str or str
        Term types to fit (a comma-separated string is accepted): any of ``quantization``,
        ``white``, ``flicker``, ``gauss_markov``, ``random_walk``, ``ramp``. Default
        :data:`DEFAULT_TERMS` (all but Gauss-Markov).
    confidence : float
        Two-sided confidence of the coefficient intervals (default 0.9).
    seed : int, optional
        Seed of the bootstrap (``numpy.random.default_rng``); None draws fresh entropy.
    n_boot : int, optional
        Bootstrap records for the intervals (default :data:`DEFAULT_BOOTSTRAP`, 200, or
        ⌈2/α⌉ if more, so that two records lie beyond each end of the interval); the term
        selection uses max(⌈2/α⌉, n_boot/2) more.
    progress : callable, optional
        ``progress(done, total)`` after each batch of bootstrap records.
    bandwidth : float, optional
        The sensor's output filter [Hz] (−3 dB), when it rolls off within a few sample periods:
        the white term is then band-limited white (:class:`sensormodel.terms.White` with this
        bandwidth: its Allan variance falls below N²/τ at τ ≲ 1/bandwidth), in the fit and in
        the bootstrap. Without it the samples are taken as unfiltered period means, and a
        band-limited record's first τ would be read as less white noise and more flicker.
    filter_order : int, optional
        Butterworth order of that filter (1 to 8; default 1 with a bandwidth).

    Returns
    -------
    Identification
        Estimates and intervals in SI, slope readings, the fitted curve.

    Raises
    ------
    AnalysisError
        A curve that cannot be fitted (non-positive deviation, fewer τ than terms + 1, τ not on
        the sample grid, unknown length), unknown or repeated terms, a confidence outside
        (0, 1), too few bootstrap records.
    """
    names = _check_terms(terms)
    white_filter = _check_white_filter(bandwidth, filter_order)
    confidence = _check_confidence(confidence)
    n_boot = _check_n_boot(n_boot, confidence)
    seed = _check_seed(seed)
    c = _check_curve(curve, len(names))
    alpha = 0.5 * (1.0 - confidence)
    n_pilot = max(int(math.ceil(2.0 / alpha - 1e-9)), n_boot // 2)
    total = n_pilot + n_boot
    seeds = np.random.SeedSequence(seed)
    p = len(names)

    # 1. all requested terms
    d_full = _design(names, c, white_filter)
    coef_full, _chi2, t_full = _fit_one(c.avar, d_full)
    if not np.any(coef_full > 0):
        raise AnalysisError(
            "no combination of the requested terms fits the curve",
            "a curve that a sum of the terms can describe (try more terms)",
            field=c.channel,
        )
    phi_full = d_full.with_gm(t_full) if t_full is not None else d_full.phi
    a_lin = _wls_matrix(phi_full, phi_full @ coef_full, c.edf)
    coef_u = a_lin @ c.avar

    # 2. selection bootstrap: records from the full fit, the unconstrained estimate's spread
    wf = d_full.white_filter
    av1 = _bootstrap(
        _params(names, coef_full), t_full, c, n_pilot, seeds.spawn(1)[0], progress, 0, total, wf
    )
    dev = av1 @ a_lin.T - coef_full[None, :]  # the records were drawn with coef_full
    lin_high = np.maximum(coef_u, 0.0) - np.array([_quantile(dev[:, j], alpha) for j in range(p)])
    model_full = phi_full @ coef_full
    first = [names.index(t) for t in _TESTED_FIRST if t in names]
    gls = _Gls(
        av1,
        model_full,
        phi_full,
        z_crit=_z(1.0 - alpha),
        first=first,
        z_first=_z(1.0 - alpha / _RARE_LEVEL_DIVISOR),
    )
    in_fit, selected = gls.select(c.avar)

    # 3. the estimate: every common term and the rare terms that passed their test
    coef, t_gm = _fit_subset(c.avar, d_full, in_fit, start=None)
    selected &= coef > 0
    phi = _phi(d_full, t_gm if t_gm is not None else t_full)
    model = phi @ coef

    # 4. interval bootstrap: records from that fit, the estimate repeated on each (the rare
    #    terms' tests included)
    def refits(av: _FloatArray) -> tuple[_FloatArray, _FloatArray]:
        out = np.zeros((av.shape[0], p))
        out_t = np.full(av.shape[0], math.nan)
        for i in range(av.shape[0]):
            s_i = gls.select(av[i], rare_only=True)[0] if first else in_fit
            cb, tb = _fit_subset(av[i], d_full, s_i, start=model)
            out[i] = cb
            if tb is not None:
                out_t[i] = tb
            # a kept rare term's interval is conditional on the term being in the model:
            # where this record's test dropped it, refit with it added
            for k in np.flatnonzero(in_fit & ~s_i):
                with_k = s_i.copy()
                with_k[k] = True
                out[i, k] = _fit_subset(av[i], d_full, with_k, start=model)[0][k]
        return out, out_t

    av2 = _bootstrap(
        _params(names, coef), t_gm, c, n_boot, seeds.spawn(1)[0], progress, n_pilot, total, wf
    )
    boot, boot_t = refits(av2)

    readings, notes = slope_readings(c.tau, c.adev)
    points = _reading_points(c.tau, c.adev)
    report_coef = np.where(in_fit, coef, coef_full)
    contrib = phi * report_coef[None, :]
    dominant = np.argmax(contrib, axis=1)
    fitted = []
    for j, nm in enumerate(names):
        kept = float(np.mean(boot[:, j] > 0))
        details: dict[str, float] = {"kept_fraction": kept}
        est = float(coef[j]) if in_fit[j] else float(coef_full[j])
        high_lin = max(float(lin_high[j]), est, 0.0)
        q_lo = q_hi = 0.0
        if in_fit[j] and est > 0:
            r = boot[:, j] / est
            q_lo, q_hi = _quantile(r, alpha), _quantile(r, 1.0 - alpha)
        if in_fit[j] and est > 0 and np.all(boot[:, j] > 0):
            # the widest values the bootstrap pivot reaches: a limit beyond them is further
            # from the estimate than any bootstrap record went (acceptance then skips its test
            # at the limit, :func:`limit_test`)
            details["bootstrap_low"] = math.sqrt(est / float(np.max(boot[:, j] / est)))
            details["bootstrap_high"] = math.sqrt(est / float(np.min(boot[:, j] / est)))
        if selected[j] and q_lo > 0:
            low_v, high_v, method = est / q_hi, est / q_lo, "ratio"
        elif selected[j]:  # dropped by more than a fraction α of the refits
            low_v, high_v, method = est / q_hi if q_hi > 0 else 0.0, high_lin, "ratio-linear"
        else:  # not distinguishable from zero: an upper limit
            upper = est / q_lo if q_lo > 0 else 0.0
            low_v, high_v, method = 0.0, max(high_lin, upper), "linear"
        estimate = math.sqrt(max(est, 0.0))
        low = min(math.sqrt(max(low_v, 0.0)), estimate)
        high = max(math.sqrt(max(high_v, 0.0)), estimate)
        reading = readings.get(nm)
        disagrees = False
        if reading is not None:
            # the reading's own chi-square interval at the same confidence (one curve point,
            # its edf; NIST SP 1065 eq. (45)); flagged where it misses the fitted interval
            jr, factor = points[nm]
            lo_hi = chi2_interval(float(c.adev[jr]), float(c.edf[jr]), confidence)
            r_lo, r_hi = float(lo_hi[0]), float(lo_hi[1])
            details["slope_reading_low"] = r_lo * factor
            details["slope_reading_high"] = r_hi * factor
            disagrees = bool(r_hi * factor < low or r_lo * factor > high)
        where = np.flatnonzero(dominant == j) if report_coef[j] > 0 else np.zeros(0, dtype=int)
        tau_range = (float(c.tau[where[0]]), float(c.tau[where[-1]])) if where.size else None
        # the plain percentile interval of the bootstrap estimates, for comparison only
        pct = np.sqrt(np.maximum(boot[:, j], 0.0))
        details["percentile_low"] = _quantile(pct, alpha)
        details["percentile_high"] = _quantile(pct, 1.0 - alpha)
        if nm == "gauss_markov":
            t_est = t_gm if (selected[j] and t_gm is not None) else t_full
            details["time_constant"] = float(t_est) if t_est is not None else math.nan
            tb = boot_t[np.isfinite(boot_t)]
            if selected[j] and t_gm is not None and tb.size >= 2:
                ratio_t = tb / t_gm
                details["time_constant_low"] = float(t_gm / _quantile(ratio_t, 1.0 - alpha))
                details["time_constant_high"] = float(t_gm / _quantile(ratio_t, alpha))
            else:
                details["time_constant_low"] = float(c.tau[0] / 4.0)
                details["time_constant_high"] = float(c.tau[-1] * 2.0)
        fitted.append(
            FittedTerm(
                term=nm,
                parameter=PARAMETERS[nm],
                estimate=estimate,
                low=low,
                high=high,
                confidence=confidence,
                supported=bool(selected[j]),
                slope_reading=reading,
                disagrees=disagrees,
                tau_range=tau_range,
                method=method,
                details=details,
            )
        )
    chi2 = float(np.sum((c.avar - model) ** 2 * c.edf / (2.0 * np.maximum(model, 1e-300) ** 2)))
    return Identification(
        channel=c.channel,
        unit=c.unit,
        sample_rate=c.rate,
        n_samples=c.n,
        confidence=confidence,
        terms=tuple(fitted),
        slope_readings=readings,
        notes=notes,
        tau=c.tau,
        adev=c.adev,
        chi2=chi2,
        n_boot=n_boot,
        seed=seed,
        white_filter=white_filter,
        refit_state=_RefitState(
            curve=c,
            design=d_full,
            in_fit=in_fit.copy(),
            coef=coef.copy(),
            time_constant=t_gm if t_gm is not None else t_full,
        ),
    )


@dataclass(frozen=True)
class _RefitState:
    """The parts of a fit that :func:`limit_test` repeats on new records."""

    curve: _Curve
    design: _Design
    in_fit: npt.NDArray[np.bool_]
    coef: _FloatArray
    time_constant: float | None


@dataclass(frozen=True)
class LimitTest:
    """A parametric bootstrap test of one term's parameter at a given value.

    Attributes
    ----------
    term, parameter : str
        The term type and its SI parameter (:data:`PARAMETERS`).
    value : float
        The parameter value tested [SI].
    estimate : float
        The parameter estimated from the measured curve by the statistic of the test [SI].
    p_above : float
        Monte Carlo p-value of the estimate being this large if the parameter were ``value``:
        (1 + #{T* ≥ T})/(B + 1). Small: the parameter is above ``value``.
    p_below : float
        The same for an estimate this small: (1 + #{T* ≤ T})/(B + 1). Small: below ``value``.
    n_records : int
        Null records B.
    null_parameters : dict
        The model the null records were drawn from: the tested term at ``value``, the others
        refitted with it held there [SI].
    null_time_constant : float or None
        The Gauss-Markov time constant of that model [s] (profiled when the Gauss-Markov σ is
        the tested parameter); None without a Gauss-Markov term.
    """

    term: str
    parameter: str
    value: float
    estimate: float
    p_above: float
    p_below: float
    n_records: int
    null_parameters: dict[str, float]
    null_time_constant: float | None = None


def limit_test(
    identification: Identification,
    term: str,
    value: float,
    *,
    n_records: int | None = None,
    seed: int | None = None,
    progress: ProgressCallback | None = None,
) -> LimitTest:
    """Test whether a fitted term's parameter differs from ``value`` (e.g. a datasheet limit).

    A parametric bootstrap test (B. Efron & R. Tibshirani, *An Introduction to the Bootstrap*,
    Chapman & Hall 1993, ch. 16; A. C. Davison & D. V. Hinkley, *Bootstrap Methods and their
    Application*, Cambridge 1997, section 4.2) under the null hypothesis "the parameter equals
    ``value``": the other terms of the estimate are refitted with this one held at ``value``
    (weighted least squares with the fixed term as an offset; a Gauss-Markov term tested by its
    σ has its time constant profiled too), ``n_records`` records of the
    measured length are simulated from that null model (the generator of the fit's
    bootstrap), and the term's coefficient T is refitted on each (the same terms in the
    model; the rare-term tests are not repeated, so the statistic is the same function of
    every record and of the measured curve). The p-values are the Monte Carlo ones,
    (1 + #{T* ≥ T})/(B + 1), whose level is exact for a null law known exactly (Davison &
    Hinkley eq. (4.11)); here the null's other terms are estimated, which the seeded studies
    of ``tests/test_acceptance.py`` check.

    Unlike the ratio interval of :func:`fit`, which simulates from the *estimated* model, the
    test simulates from a model *at* the value: where a term's precision depends on its own
    size (flicker between white noise and a random walk: an estimate that came out high is
    also better separated in its own bootstrap), the interval is too narrow on that side and
    the test is not.

    Parameters
    ----------
    identification : Identification
        From :func:`fit` (it carries ``refit_state``).
    term : str
        A fitted term type (``white``, ``flicker``, ...).
    value : float
        The parameter value tested [SI, the term's ``parameter``], > 0.
    n_records : int, optional
        Null records B (default: the identification's ``n_boot``, made at least 3/α − 1 for
        α = (1 − confidence)/2, so that at least three records lie beyond a rejection).
    seed : int, optional
        Seed of the null records; None draws fresh entropy.
    progress : callable, optional
        ``progress(done, total)`` as the records are simulated.

    Returns
    -------
    LimitTest

    Raises
    ------
    AnalysisError
        An identification without ``refit_state``, a term it did not fit, a value that is not
        a positive finite number, too few records.
    """
    state = getattr(identification, "refit_state", None)
    if not isinstance(state, _RefitState):
        raise AnalysisError(
            f"{identification.channel}: an identification without its fit state",
            "an identification made by sensormodel.identify.fit",
            field="identification",
        )
    d, c = state.design, state.curve
    if term not in d.names:
        raise AnalysisError(
            f"{c.channel}: {term!r} was not fitted", f"one of {', '.join(d.names)}", field="term"
        )
    value = float(value)
    if not math.isfinite(value) or value <= 0:
        raise AnalysisError(f"got {value!r}", "a parameter value > 0", field="value")
    alpha = 0.5 * (1.0 - identification.confidence)
    need = int(math.ceil(3.0 / alpha - 1e-9)) - 1
    if n_records is None:
        n_records = max(int(identification.n_boot), need)
    elif isinstance(n_records, bool) or not isinstance(n_records, (int, np.integer)):
        raise AnalysisError(f"got {n_records!r}", "a whole number of records", field="n_records")
    elif n_records < need:
        raise AnalysisError(
            f"got {int(n_records)}",
            f"at least {need} records for a test at level {alpha:g} (three beyond a rejection)",
            field="n_records",
        )
    seed = _check_seed(seed)
    j = d.names.index(term)
    mask = state.in_fit.copy()
    mask[j] = True
    phi = _phi(d, state.time_constant)
    start = phi @ state.coef
    observed = float(_fit_subset(c.avar, d, mask, start=start)[0][j])
    # the null model: term j at the value, the others refitted beside it
    held = value**2
    others = mask.copy()
    others[j] = False
    if d.names[j] == "gauss_markov":
        # σ is held, its time constant is a nuisance parameter like the other terms: profiled
        null, t_null = _null_gauss_markov(c, d, others, held, start)
    else:
        null = np.zeros(len(d.names))
        t_null = state.time_constant
        if np.any(others):
            null, t_fit = _fit_subset(c.avar, d, others, start=start, offset=held * phi[:, j])
            if t_fit is not None:
                t_null = t_fit
    null[j] = held
    params = _params(d.names, null)
    av = _bootstrap(
        params,
        t_null,
        c,
        int(n_records),
        np.random.SeedSequence(seed),
        progress,
        0,
        n_records,
        d.white_filter,
    )
    null_model = _phi(d, t_null) @ null
    stats = np.array([_fit_subset(a, d, mask, start=null_model)[0][j] for a in av])
    b = stats.size
    return LimitTest(
        term=term,
        parameter=PARAMETERS[term],
        value=value,
        estimate=math.sqrt(max(observed, 0.0)),
        p_above=float((1 + np.count_nonzero(stats >= observed)) / (b + 1)),
        p_below=float((1 + np.count_nonzero(stats <= observed)) / (b + 1)),
        n_records=b,
        null_parameters=params,
        null_time_constant=None if d.gm_index is None else t_null,
    )


def _null_gauss_markov(
    c: _Curve, d: _Design, others: npt.NDArray[np.bool_], held: float, start: _FloatArray
) -> tuple[_FloatArray, float]:
    """The fit with the Gauss-Markov variance held at ``held`` (σ²): its time constant profiled
    over the design's grid and refined (:func:`_profile_time_constant`), the ``others``
    refitted beside it. Returns coefficients and T [s]."""
    assert d.gm_grid is not None and d.gm_columns is not None
    idx = np.flatnonzero(others)
    phi_o = d.phi[:, idx]

    def fit_with(column: _FloatArray) -> tuple[_FloatArray, float]:
        offset = held * column
        if idx.size == 0:
            model = np.maximum(offset, 1e-300)
            return np.zeros(0), float(np.sum((c.avar - model) ** 2 * c.edf / (2.0 * model**2)))
        return _irls(c.avar, phi_o, d.edf, start, offset)

    t_best, coef_o, _chi2 = _profile_time_constant(
        d.gm_grid,
        lambda k: fit_with(d.gm_columns[k]),  # type: ignore[index]
        lambda t: fit_with(_basis("gauss_markov", c.tau, c.rate, t)),
    )
    out = np.zeros(len(d.names))
    out[idx] = coef_o
    return out, t_best


def _params(names: Sequence[str], coef: _FloatArray) -> dict[str, float]:
    """SI parameters p_k = √c_k of a coefficient vector."""
    return {nm: math.sqrt(max(float(v), 0.0)) for nm, v in zip(names, coef, strict=True)}


def _phi(d: _Design, time_constant: float | None) -> _FloatArray:
    return d.with_gm(time_constant) if (d.gm_index is not None and time_constant) else d.phi


def _fit_subset(
    avar: _FloatArray,
    d: _Design,
    mask: npt.NDArray[np.bool_],
    *,
    start: _FloatArray | None,
    offset: _FloatArray | None = None,
) -> tuple[_FloatArray, float | None]:
    """Fit with the terms where ``mask`` is True; the others get 0 (plus ``offset``, a fixed
    part of the model)."""
    idx = np.flatnonzero(mask)
    gm = d.gm_index if (d.gm_index is not None and mask[d.gm_index]) else None
    sub = _Design(
        names=tuple(d.names[i] for i in idx),
        tau=d.tau,
        rate=d.rate,
        edf=d.edf,
        phi=d.phi[:, idx],
        gm_index=None if gm is None else int(np.flatnonzero(idx == gm)[0]),
        gm_grid=d.gm_grid if gm is not None else None,
        gm_columns=d.gm_columns if gm is not None else None,
        white_filter=d.white_filter,
    )
    c_sub, _chi2, t = _fit_one(avar, sub, start=start, offset=offset)
    out = np.zeros(len(d.names))
    out[idx] = c_sub
    return out, t


def _bootstrap(
    params: Mapping[str, float],
    time_constant: float | None,
    c: _Curve,
    count: int,
    seeds: np.random.SeedSequence,
    progress: ProgressCallback | None,
    done_before: int,
    total: int,
    white_filter: tuple[float, int] | None = None,
) -> _FloatArray:
    """Allan variances at the curve's τ of ``count`` records simulated from ``params``.

    Record i draws from its own generator, ``default_rng(seeds.spawn(count)[i])``, so the
    result does not depend on how the records are shared among threads. Long records (2^18
    samples or more) are simulated on up to two threads (numpy and scipy.fft release the GIL
    in their loops); short ones in the calling thread.
    """
    children = seeds.spawn(count)
    out = np.empty((count, c.m.size))
    step = max(1, total // 50)
    from .allan import _usable_cpus

    workers = 1 if c.n < _THREAD_MIN_SAMPLES else min(2, _usable_cpus(), count)

    # read-only: shared by the threads
    sim = _Simulator(params, time_constant, c.n, c.rate, white_filter)
    local = threading.local()  # the Allan-variance buffers: one set per thread

    def run(indices: range) -> None:
        oavar = getattr(local, "oavar", None)
        if oavar is None:
            oavar = local.oavar = _Oavar(c.n, c.m)
        for i in indices:
            out[i] = oavar(sim.record(np.random.default_rng(children[i])))

    chunk = max(1, min(step, 8))
    if workers == 1:
        for i0 in range(0, count, chunk):
            run(range(i0, min(count, i0 + chunk)))
            done = done_before + min(count, i0 + chunk)
            if progress is not None:
                progress(done, total)
        return out
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(max_workers=workers) as pool:
        futures = [
            pool.submit(run, range(i0, min(count, i0 + chunk))) for i0 in range(0, count, chunk)
        ]
        finished = 0
        for i0, fut in zip(range(0, count, chunk), futures, strict=True):
            fut.result()
            finished = min(count, i0 + chunk)
            if progress is not None:
                progress(done_before + finished, total)
    return out


def fit_recording(
    recording: Any,
    *,
    channels: Sequence[str] | None = None,
    taus: Any = None,
    terms: Sequence[str] | str = DEFAULT_TERMS,
    confidence: float = DEFAULT_CONFIDENCE,
    seed: int | None = None,
    n_boot: int | None = None,
    progress: ProgressCallback | None = None,
    bandwidth: float | None = None,
    filter_order: int | None = None,
) -> list[Identification]:
    """Identify every channel of a :class:`sensormodel.recording.Recording`.

    The overlapping Allan deviation of each channel (:func:`sensormodel.allan.overlapping`,
    τ grid ``taus``, default octaves) is fitted by :func:`fit`.

    Parameters
    ----------
    recording : Recording
        From :func:`sensormodel.recording.read_recording`; each channel must be one clean
        segment.
    channels : sequence of str, optional
        Channel ids to identify (default all).
    taus : optional
        τ grid for the Allan deviation (see :func:`sensormodel.allan.tau_grid`).
    terms, confidence, seed, n_boot, progress, bandwidth, filter_order
        As for :func:`fit` (the same output filter for every channel); ``progress(done,
        total)`` counts bootstrap records over all channels.
    """
    from .allan import overlapping

    ids = list(recording.channels) if not channels else list(channels)
    for cid in ids:
        if cid not in recording.channels:
            raise AnalysisError(
                f"no channel {cid!r} in the recording",
                f"one of {', '.join(recording.channels)}",
                source=getattr(recording, "source", None),
                field="channel",
            )
    out = []
    total = len(ids) * _check_n_boot(n_boot, _check_confidence(confidence))
    for k, cid in enumerate(ids):
        segs = recording.segments[cid]
        if len(segs) != 1:
            raise AnalysisError(
                f"channel {cid} has {len(segs)} clean segments",
                "one uniform record per channel (cut the recording at its gaps first)",
                source=getattr(recording, "source", None),
                field=cid,
            )
        s = segs[0]
        y = recording.data[cid][s.start : s.stop]
        curve = overlapping(y, recording.rate, taus=taus, unit=recording.units[cid], channel=cid)
        base = k * (total // len(ids))
        sub = None
        if progress is not None:

            def sub(done: int, _tot: int, base: int = base) -> None:
                progress(base + done, total)

        out.append(
            fit(
                curve,
                terms=terms,
                confidence=confidence,
                seed=seed,
                n_boot=n_boot,
                progress=sub,
                bandwidth=bandwidth,
                filter_order=filter_order,
            )
        )
    return out


def to_model(
    identifications: Sequence[Identification],
    *,
    sensor: Mapping[str, Any] | None = None,
    source: str | None = None,
) -> Any:
    """A :class:`sensormodel.model.NoiseModel` of the identified channels (supported terms).

    Parameters
    ----------
    identifications : sequence of Identification
    sensor : mapping, optional
        The ``sensor`` entry (default ``{"name": "identified"}``).
    source : str, optional
        The recording file, kept in the provenance.

    Returns
    -------
    NoiseModel
        ``provenance = {"from": "recording", ...}`` with the method, confidence, bootstrap
        size and seed, and per channel the terms left out as not supported.
    """
    from .model import NoiseModel

    items = list(identifications)
    if not items:
        raise AnalysisError(
            "got no identifications", "at least one channel", field="identifications"
        )
    dropped = {
        i.channel: [t.term for t in i.terms if not t.supported]
        for i in items
        if any(not t.supported for t in i.terms)
    }
    provenance: dict[str, Any] = {
        "from": "recording",
        "method": "non-negative weighted least squares on the Allan variance; parametric "
        "bootstrap intervals",
        "confidence": items[0].confidence,
        "n_boot": items[0].n_boot,
        "seed": items[0].seed,
    }
    if source is not None:
        provenance["file"] = str(source)
    if dropped:
        provenance["not_supported"] = dropped
    notes = [f"{i.channel}: {n}" for i in items for n in i.notes]
    if notes:
        provenance["notes"] = notes
    return NoiseModel(
        sensor=dict(sensor) if sensor else {"name": "identified"},
        channels=tuple(i.to_channel() for i in items),
        provenance=provenance,
        conventions={"density": "IEEE Std 952 (two-sided PSD N²; AVAR N²/τ)"},
    )
