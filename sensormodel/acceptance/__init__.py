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
interval of the same width (:func:`sensormodel.confidence.dof_from_interval`); ν grows in
proportion to the record length (the equivalent degrees of freedom of the overlapping Allan
variance at a fixed τ grow as the record length over τ; Greenhall & Riley 2003).
:func:`sensormodel.confidence.required_duration` gives the length at which a unit whose true
value is the present estimate would be decided with probability ``power`` (default 0.8).
:func:`plan` answers before any test, with one promise: a unit whose term lies at
(1 − margin)·limit (default margin 0.25), recorded for the planned length, gets a decided verdict
on that term (pass; a unit as far above, fail) with probability at least ``power`` (default
0.8) by the decision above. The length is the shortest at which verify's weighted fit of the
Allan curve gives the term the degrees of freedom of
:func:`sensormodel.confidence.required_dof` (the fit's sandwich covariance, with the covariance
of the Allan-variance estimates across τ from the unit's spectrum), and for a Gauss-Markov
bias also resolves the time constant; it shows the τ each term is read at (where it dominates
the curve), which is why bias instability (read at τ of hundreds of seconds) and random walks
(read at the longest τ) need hours of record while white noise needs seconds to minutes.

Modules (private; this package exports the public names): ``_limits`` (what the datasheet
limits, the terms not verified, the model of the limits, what is fitted), ``_verdicts``
(decisions and the result objects, which carry reason codes and numbers; the sentences are
:mod:`sensormodel.report`'s), ``_verify`` (a recording through :mod:`sensormodel.pipeline`,
the identification, the test at the limit), ``_plan`` (reading τ and planning). The statistics
of intervals are :mod:`sensormodel.confidence`'s.

References
----------
IEEE Std 952-1997, Annex C (Allan-variance forms of the noise terms). W. J. Riley, "Handbook of
Frequency Stability Analysis", NIST SP 1065 (2008): chi-square confidence intervals of the Allan
variance (eq. 45, from memory for the number). C. A. Greenhall & W. J. Riley, "Uncertainty of
stability variances based on finite differences", Proc. 35th PTTI Meeting (2003): equivalent
degrees of freedom, the large-r form 1/edf ≈ (1/r)(a0 − a1/r).
"""

from __future__ import annotations

from ._limits import (
    UNLIMITED_SHARE_MAX,
    SpecLimit,
    Unverified,
    declared_ranges,
    fit_terms,
    limit_channel,
    limited_share,
    output_filter,
    spec_limits,
)
from ._plan import DEFAULT_MARGIN, Plan, PlanRow, Reading, plan, plan_dof, reading_tau
from ._verdicts import (
    DEFAULT_CONFIDENCE,
    DEFAULT_POWER,
    DEFAULT_PRECISION,
    VERDICTS,
    ChannelVerdict,
    CurveCheck,
    TermVerdict,
    VerdictReport,
    combine,
    curve_check,
    decide,
)
from ._verify import verify, verify_curve

__all__ = [
    "VERDICTS",
    "DEFAULT_CONFIDENCE",
    "DEFAULT_POWER",
    "DEFAULT_PRECISION",
    "SpecLimit",
    "Unverified",
    "spec_limits",
    "decide",
    "combine",
    "Reading",
    "reading_tau",
    "fit_terms",
    "output_filter",
    "TermVerdict",
    "CurveCheck",
    "ChannelVerdict",
    "VerdictReport",
    "limit_channel",
    "limited_share",
    "declared_ranges",
    "UNLIMITED_SHARE_MAX",
    "curve_check",
    "verify_curve",
    "verify",
    "PlanRow",
    "Plan",
    "plan",
    "plan_dof",
    "DEFAULT_MARGIN",
]
