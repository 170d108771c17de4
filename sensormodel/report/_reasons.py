"""Reason codes → sentences: the one table of what every code the results carry says.

Results (:mod:`sensormodel.pipeline`, :mod:`sensormodel.acceptance`) carry a code and its
numbers; the reports and the commands write them with :func:`reason_text`.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

__all__ = ["REASONS", "reason_text", "term_note"]


def _segments_left_out(values: Mapping[str, Any]) -> str:
    """The segments a recording's analysis left out: a verdict report's note (with the channel
    and the durations) or a command's note on one channel (with the count and samples only)."""
    if "recording_duration" in values:
        return (
            "{channel}: the recording has {segments} clean segments; the longest "
            "({duration:.6g} s of {recording_duration:.6g} s) was analysed"
        ).format(**values)
    count, samples = int(values["count"]), int(values["samples"])
    return (
        f"{count} shorter clean segment{'s' if count != 1 else ''} ({samples} samples) left "
        "out; the longest is analysed"
    )


def _time_constant_not_resolved(values: Mapping[str, Any]) -> str:
    """A Gauss-Markov time constant at the longest the record resolves; σ a lower bound where
    the term is supported (``sigma`` > 0)."""
    head = (
        "gauss_markov: time constant not resolved (T ≥ {bound:.4g} s): this record resolves T "
        "up to {resolvable:.4g} s (Allan-deviation peak at τ = {tau:.4g} s, the longest τ with "
        "4 degrees of freedom)"
    ).format(**values)
    if float(values.get("sigma", 0.0)) > 0.0:
        return head + (
            "; a longer T is not excluded, and with it a larger σ: σ ≥ {sigma:.4g} {unit} "
            "(the rising side of the curve fixes σ²/T), so σ has no upper bound from this record"
        ).format(**values)
    return head + "; the term is not told from zero"


def _term_masked(values: Mapping[str, Any]) -> str:
    """A planned term that dominates the datasheet's curve at no τ; no length below a share."""
    head = (
        "{term} is masked by {masked_by}: it is the largest term of the Allan variance at no τ "
        "(at most {pct:.0f} % of it, at τ = {tau:.3g} s)"
    ).format(pct=100.0 * float(values["share"]), **values)
    if float(values["share"]) < float(values["min_share"]):
        return head + (
            "; below {pct:.0f} % no record length verifies it: its estimate would rest on the "
            "model of the other terms being exact"
        ).format(pct=100.0 * float(values["min_share"]))
    return head + "; planned there, where its estimate rests on the model of the other terms"


def _sampling_sentence(values: Mapping[str, Any]) -> str:
    """The sampling assumption of a band-limited white term: detected from the curve or the
    default."""
    how = (
        "means over the sample period"
        if values["sampling"] == "average"
        else "point samples of the filtered output"
    )
    if "detected" in values.get("origin", ""):
        return f"the samples are {how} (told from the short-τ curve)"
    return f"the samples are taken as {how} (the default: the short-τ curve does not tell)"


#: The sentence of each reason code: a ``str.format`` template over the reason's values (a
#: tuple of names is written as a comma-separated list) or a function of the values.
REASONS: dict[str, str | Callable[[Mapping[str, Any]], str]] = {
    # a datasheet term that is not verified (Unverified.reason)
    "single_run": (
        "not verifiable from a single run: bias repeatability is the spread of the turn-on bias "
        "from run to run, and needs several turn-ons"
    ),
    "no_limit_column": (
        "the datasheet gives no {against} value (only {column} {text}); nothing to verify against"
    ),
    # a term's verdict (TermVerdict.reasons)
    "limit_test_not_confirmed": (
        "the interval lies {side} the limit, but the bootstrap test at the limit does not "
        "confirm it (p = {p_value:.3f} > {alpha:g}, {n_records} records): interval widened to "
        "the limit"
    ),
    "within_limit": "already within the limit",
    "null_time_constant_at_search_edge": (
        "gauss_markov: the time constant of the model at the limit, {value:.4g} s, is at the "
        "{edge} end of its search range ({low:.4g} to {high:.4g} s): the test at the limit holds "
        "for that time constant only"
    ),
    "bound_only": "bound only: upper bound ∝ duration^-1/4",
    "estimate_at_limit": "the estimate equals the limit: no record length decides it",
    "dof_scaling": "chi-square dof ∝ record length",
    "length_unknown": "a longer record is needed; how much longer, the interval does not say",
    # a test at the limit that was not run (TermVerdict.limit_test["skipped"])
    "no_fit_state": "no fit state to test with",
    "beyond_bootstrap": "the limit is over {skip_margin:g} times as far as any bootstrap record",
    # the report (VerdictReport.notes)
    "channels_missing": "not in the recording, not verified: {channels}",
    "channels_extra": "in the recording but not on the datasheet, ignored: {channels}",
    "limits_not_checked": (
        "not checked (channel missing from the recording): {terms}; the overall verdict cannot "
        "be pass"
    ),
    # a fitted term (identify.FittedTerm.reasons; printed as notes by the identify command)
    "estimate_at_search_edge": (
        "{term}: the {parameter} estimate {value:.4g} is at the {edge} end of its search range "
        "({low:.4g} to {high:.4g}, SI)"
    ),
    "time_constant_not_resolved": _time_constant_not_resolved,
    "time_constant_at_lower_edge": (
        "gauss_markov: time constant at the short end of its search range (T ≤ {bound:.4g} s, "
        "shortest τ {shortest_tau:.4g} s): the term is white noise to this curve"
    ),
    # a planned term (acceptance.PlanRow.reasons)
    "term_masked": _term_masked,
    # the τ range an identification fitted (identify.Identification.fit_range_reason)
    "fit_range_full": "fitted over the whole curve, τ {low:.4g} s to {high:.4g} s",
    "fit_range_short_tau_departs_model": (
        "fitted over τ {low:.4g} s to {high:.4g} s: at shorter τ the record departs from the "
        "terms (by up to {departure:.0%} of the Allan variance; an output filter, quantization "
        "of counts or a spectral line), so those τ were left out"
    ),
    "fit_range_model_departs": (
        "fitted over the whole curve, τ {low:.4g} s to {high:.4g} s, although no range of it "
        "fits the terms within its intervals (worst departure {departure:.0%} of the Allan "
        "variance): read the estimates with care"
    ),
    # the record behind an identification (identify.Identification.record_reasons)
    "output_filter_fitted": (
        "the short-τ curve lies below white noise: an output filter was fitted, "
        "{order}-pole Butterworth at {bandwidth:.4g} Hz (no bandwidth was given)"
    ),
    "output_filter_not_resolved": (
        "the short-τ curve lies below the terms, and no 1- or 2-pole output filter describes "
        "it: those τ are left out of the fit"
    ),
    "sampling_detected": _sampling_sentence,
    "sampling_assumed": _sampling_sentence,
    "count_step_white_floor": (
        "integer-coded record, count step {step:.4g} {unit}: its quantization is white noise of "
        "density {density:.4g} {unit}·√s ({share:.1%} of the fitted white variance), reported "
        "and not subtracted (it is part of the delivered output)"
    ),
    "count_step_quantization": (
        "integer-coded increments, count step {step:.4g}: quantization Q = step/√12 = "
        "{coefficient:.4g} (IEEE Std 952 Annex C)"
    ),
    "count_step_coarse": (
        "the count step {step:.4g} {unit} is {ratio:.2g} times the sample-to-sample noise "
        "({sigma:.4g} {unit}): the quantization error follows the signal, step²/12 is not its "
        "variance; read the shortest τ with care"
    ),
    # a channel's analysis (pipeline.ChannelAnalysis.reasons; a verdict report's notes)
    "segments_left_out": _segments_left_out,
    # a record's quality (sensormodel.quality: Settling, TemperatureEffect, Events,
    # RecordQuality reasons)
    "settling_detected": (
        "warm-up: a settling transient (largest |z| = {statistic:.3g} over the threshold "
        "{threshold:.3g} of {window:.4g} s means), time constant {time_constant:.4g} s, settled "
        "to {criterion:g} σ of a {window:.4g} s mean after {settling_time:.4g} s"
    ),
    "settling_none": (
        "warm-up: no settling transient (largest |z| = {statistic:.3g}, threshold "
        "{threshold:.3g}, {window:.4g} s means)"
    ),
    "settling_not_exponential": (
        "warm-up: the transient is not exponential (a departure of {departure:.3g} σ, "
        "threshold {threshold:.3g}); the settling time is at least the end of the last "
        "departing window"
    ),
    "settling_not_within_record": (
        "warm-up: the record has not settled in its first half (settling time "
        "{settling_time:.4g} s of {duration:.4g} s); its long-τ Allan deviation is dominated by "
        "the transient"
    ),
    "settling_not_judged": (
        "warm-up: not judged, the record ({duration:.4g} s) is shorter than 20 means of "
        "{window:.4g} s"
    ),
    "settling_trimmed": "the first {seconds:.4g} s ({samples} samples) were cut as warm-up",
    "temperature_sensitivity": (
        "bias temperature sensitivity {sensitivity:.4g} {unit}/K ({confidence:.0%} interval "
        "{low:.4g} to {high:.4g}) over temperatures {temperature_low:.4g} to {temperature_high:.4g}"
    ),
    "temperature_interval_approximate": (
        "the sensitivity's interval rests on the noise estimated from the record itself "
        "({windows} windows), not on a noise model: approximate"
    ),
    "temperature_sensitivity_within": (
        "the temperature sensitivity is within the datasheet's ±{limit:.4g} {unit}/K"
    ),
    "temperature_sensitivity_exceeds": (
        "the temperature sensitivity exceeds the datasheet's ±{limit:.4g} {unit}/K"
    ),
    "temperature_sensitivity_inconclusive": (
        "the temperature sensitivity's interval ({low:.4g} to {high:.4g} {unit}/K) straddles "
        "the datasheet's ±{limit:.4g} {unit}/K: not decided by this record"
    ),
    "temperature_removed": (
        "the linear temperature effect ({sensitivity:.4g} {unit}/K) was removed before the "
        "Allan analysis"
    ),
    "spikes_found": (
        "{count} spike(s) at sample(s) {indices} (t = {times} s), largest {largest:.3g} σ "
        "(threshold {threshold:.3g})"
    ),
    "steps_found": (
        "{count} step(s) at sample(s) {indices} (t = {times} s), largest {largest:.3g} σ of the "
        "two-window test (threshold {threshold:.3g})"
    ),
    "events_excluded": (
        "spikes and steps excluded as short gaps ({samples} samples); {segments} clean "
        "segment(s) pooled"
    ),
    "record_fraction_used": "{fraction:.1%} of the record used ({used} of {total} samples)",
    "note": "{text}",
}


def reason_text(code: str, values: Mapping[str, Any] | None = None) -> str:
    """The sentence of a reason code with its values (:data:`REASONS`).

    Parameters
    ----------
    code : str
        A key of :data:`REASONS`; another code raises KeyError.
    values : mapping, optional
        The reason's numbers and names.
    """
    shown = {
        k: ", ".join(map(str, v)) if isinstance(v, (tuple, list)) else v
        for k, v in (values or {}).items()
    }
    sentence = REASONS[code]
    if callable(sentence):
        return sentence(shown)
    return sentence.format(**shown)


def term_note(term) -> str:
    """The note of a :class:`~sensormodel.acceptance.TermVerdict`: its reasons, in order."""
    return "; ".join(reason_text(code, values) for code, values in term.reasons)
