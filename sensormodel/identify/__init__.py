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
estimates from bootstrap records of the full fit (``_select._Gls``): a term is dropped when
leaving it out does not worsen the GLS fit significantly (one-sided test at level
α = (1 − confidence)/2).
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
(``_bootstrap._Simulator``: exact sample means of each term), their overlapping Allan
variance is computed at the same τ by the engine of :func:`sensormodel.allan.overlapping`, and
the tests of the rare terms and the fit are repeated on each. For a supported term (variance scale
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

Assumptions: the terms are independent; a flicker term has its cut-off at the Nyquist
frequency; white noise is unfiltered or band-limited by an output filter, stated
(``bandwidth``, ``filter_order``) or, where the short-τ curve lies below white noise and none is
stated, fitted as a nuisance parameter (corner frequency, 1 or 2 Butterworth poles;
``_design._choose_white_filter``). The samples of band-limited white noise are either means
over their sample period or point samples of the filtered output; the short-τ curve tells
them apart where it can (``Identification.sampling``, ``sampling_origin``), else the period
mean is assumed. Point samples alias the filter's power above rate/2 into the band, and the
white parameter is then the density of the delivered samples at low frequency (the Allan line
a datasheet reads), the filter's input density beside it in the details
(``_design._point_white_avar``), so the white estimate does not depend on the sampling
assumption, the terms requested or whether the bandwidth was given. An integer-coded record's
count step (:mod:`sensormodel.counts`) is reported with its quantization: a white floor
q²/(12·rate) for a rate record (reported, not subtracted: it is part of the delivered output),
Q = q/√12 for an increment record (``_readings._count_step_reasons``).

Gauss-Markov time constant
--------------------------
The time constant T is profiled: the fit is repeated over a grid of T (6 per decade) and refined
in log T around the least χ² (``_design._profile_time_constant``). The grid runs from a quarter
of the shortest τ to the longest T the record resolves, whose Allan-deviation peak (τ ≈ 1.89 T)
lies at the longest τ with at least 4 equivalent degrees of freedom
(``_design._resolvable_time_constant``; about an eighth of a long record). Beyond it the
curve shows only the rising side of the term, where σ²/T alone is determined. An estimate at
an edge of that range is never reported silently: the fitted term carries
``estimate_at_search_edge`` and ``time_constant_not_resolved`` (T ≥ the bound, σ then a lower
bound; the interval's upper end is ``inf``) or ``time_constant_at_lower_edge`` (T ≤ the
bound); an estimate inside the range whose interval reaches beyond it carries
``time_constant_not_resolved`` with the interval's lower end as the bound
(:attr:`FittedTerm.reasons`).

Classical slope readings (IEEE Std 952-1997 Annex C) are reported beside the fit: white density
N = σ(τ)·√τ from the point nearest τ = 1 s (on the −½ line), random walk K = σ(τ)·√(3/τ) from
the point nearest τ = 3 s (on the +½ line), flicker coefficient B = min σ / 0.6643 (the floor);
a reading whose own chi-square interval (from the one curve point it is read at) misses the
fitted interval is flagged. Where τ = 1 s or 3 s lies outside the curve, the reading is carried
from the nearest end point along its line, and a note says so.

Layout
------
``_names`` (term names, parameters, defaults), ``_checks`` (argument and curve checks),
``_design`` (bases, IRLS, the time-constant profile), ``_select`` (the GLS term selection),
``_bootstrap`` (records of a fitted model and their Allan variance), ``_readings`` (slope
readings and their reason codes), ``_results`` (the result types, :func:`to_model`), ``_fit``
(:func:`fit` in named steps), ``_limit`` (:func:`limit_test`), ``_recording``
(:func:`fit_recording`).
"""

from ._checks import bootstrap_minimum
from ._fit import fit
from ._limit import limit_test
from ._names import (
    DEFAULT_BOOTSTRAP,
    DEFAULT_CONFIDENCE,
    DEFAULT_TERMS,
    KNOWN_TERMS,
    PARAMETERS,
)
from ._readings import SlopeNote, slope_readings
from ._recording import fit_recording
from ._results import FittedTerm, Identification, LimitTest, to_model

__all__ = [
    "DEFAULT_TERMS",
    "KNOWN_TERMS",
    "PARAMETERS",
    "DEFAULT_CONFIDENCE",
    "DEFAULT_BOOTSTRAP",
    "bootstrap_minimum",
    "FittedTerm",
    "Identification",
    "LimitTest",
    "SlopeNote",
    "fit",
    "fit_recording",
    "limit_test",
    "to_model",
    "slope_readings",
]
