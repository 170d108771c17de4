"""Verdict reports in words: the JSON document, the terminal summary and the recording plan.

An acceptance result carries verdicts, reason codes and numbers; this module writes them for
people (sentences from :mod:`._reasons`, values in the datasheet's units from :mod:`._units`).
"""

from __future__ import annotations

import datetime
import math

from .. import __version__
from .._io import write_json
from ..allan import NOISE_NAMES
from ..quantities import format_value
from ._reasons import reason_text, term_note
from ._units import display_values, format_duration

__all__ = [
    "SAFETY_CAUTION",
    "VERDICT_SCHEMA_FILE",
    "VERDICT_SCHEMA_ID",
    "plan_text",
    "verdict_document",
    "verdict_text",
    "write_verdict_json",
]


#: The caution every report and help text on acceptance or navigation use carries.
SAFETY_CAUTION = (
    "Caution: these figures support, not replace, engineering judgement. Acceptance of flight "
    "hardware and navigation-integrity decisions follow the applicable standards and the "
    "customer's contract."
)


#: The schema id of verdict reports (DESIGN §10).
VERDICT_SCHEMA_ID = "sensormodel/verdict-report/1"
#: Schema file of verdict reports in ``schemas/``.
VERDICT_SCHEMA_FILE = "verdict-report.schema.json"


def _unverified_reason(u) -> str:
    return reason_text(u.reason, {"text": u.text, **u.values})


def _limit_test(test) -> dict | None:
    """The test at the limit as written in the report (a skipped test's reason as text)."""
    if test is None:
        return None
    if "skipped" in test:
        return {"skipped": reason_text(test["skipped"], test)}
    return dict(test)


def _conventions(report) -> dict[str, str]:
    c = report.confidence
    return {
        "interval": (
            f"Each term's estimate comes with a two-sided {100 * c:.0f} % interval from the "
            "identification of the overlapping Allan deviation; so each one-sided error is at "
            f"most {100 * (1 - c) / 2:.1f} %: a unit exactly at its limit is called fail (or "
            "pass) in no more than that fraction of records."
        ),
        "verdict": (
            "pass: the whole interval is within the limit; fail: the whole interval is beyond "
            "it; inconclusive: the limit lies inside the interval. A pass or fail call must be "
            "confirmed by a parametric bootstrap test at the limit (records simulated with the "
            "term held at the limit); where it is not, the term is inconclusive and its "
            "interval is widened to the limit."
        ),
        "limits": (
            f"Limits are the datasheet's {report.against} values. Densities are IEEE Std 952 "
            "coefficients (two-sided PSD N², Allan variance N²/τ; a one-sided datasheet density "
            "is divided by √2). Bias instability is compared as the Allan-deviation floor, "
            "√(2 ln2/π)·B for flicker noise of coefficient B, or the Allan-deviation peak "
            "0.6174·σ of a Gauss-Markov bias (IEEE Std 952 Annex C). g is standard gravity, "
            "9.80665 m/s²."
        ),
        "curve": (
            "Whole-curve check: the limit curve is the exact Allan deviation of the model built "
            "from the datasheet's limits (the sum of the terms' Allan variances); it is exceeded "
            "with confidence where the lower end of the measured interval lies above it. The "
            "intervals are pointwise, so this check is shown beside the verdicts and does not "
            "enter them."
        ),
        "required_duration": (
            "For an inconclusive term: the record length at which a unit whose true value is "
            f"the present estimate would be decided with probability {report.power:.0%}, from "
            "the degrees of freedom of its interval, which grow in proportion to the record "
            "length (Greenhall & Riley 2003)."
        ),
        "psd": "PSDs are one-sided (2 × the IEEE two-sided PSD), by Welch's method.",
    }


def verdict_document(report) -> dict:
    """The JSON document of a :class:`~sensormodel.acceptance.VerdictReport` (DESIGN §10;
    ``schemas/verdict-report.schema.json``). SI values, τ and durations in s."""
    rec = {k: v for k, v in report.recording.items() if v is not None or k == "file"}
    return {
        "schema": VERDICT_SCHEMA_ID,
        "overall": report.overall,
        "exit_code": report.exit_code,
        "confidence": float(report.confidence),
        "power": float(report.power),
        "against": report.against,
        "created_by": f"sensormodel {__version__}",
        "created": datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds"),
        "datasheet": dict(report.datasheet),
        "recording": rec,
        "channels": [_channel_document(ch) for ch in report.channels],
        "notes": [reason_text(code, values) for code, values in report.notes],
        "conventions": _conventions(report),
        "caution": SAFETY_CAUTION,
    }


def _num(x) -> float | None:
    return None if x is None else float(x)


def _term_document(t) -> dict:
    s = t.spec
    label, (lim, est, lo, hi) = display_values(s, s.limit, t.estimate, t.low, t.high)
    return {
        "term": s.key,
        "field": s.field,
        "type": s.type,
        "quantity": s.quantity,
        "unit": s.unit,
        "column": s.column,
        "limit_text": s.text,
        "limit": float(s.limit),
        "estimate": float(t.estimate),
        "low": float(t.low),
        "high": float(t.high),
        "confidence": float(t.confidence),
        "verdict": t.verdict,
        "required_duration": _num(t.required_duration),
        "read_at_tau": _num(t.read_at),
        "edf": _num(t.edf),
        "dof": _num(t.dof),
        "supported": bool(t.supported),
        "display": {"unit": label, "limit": lim, "estimate": est, "low": lo, "high": hi},
        "note": term_note(t),
        "limit_test": _limit_test(t.limit_test),
    }


def _channel_document(ch) -> dict:
    c = ch.curve
    return {
        "id": ch.id,
        "unit": ch.unit,
        "overall": ch.verdict,
        "duration": float(ch.duration),
        "sample_rate": float(ch.rate),
        "terms": [_term_document(t) for t in ch.terms],
        "not_verified": [
            {"term": u.key, "field": u.field, "text": u.text, "reason": _unverified_reason(u)}
            for u in ch.unverified
        ],
        "curve": {
            "tau": c.tau.tolist(),
            "adev": c.adev.tolist(),
            "ci_low": c.ci_low.tolist(),
            "ci_high": c.ci_high.tolist(),
            "limit": c.limit.tolist(),
            "confidence": float(c.confidence),
            "exceeded": [{"tau_from": a, "tau_to": b} for a, b in c.exceeded],
            "judged": c.judged.tolist(),
            "verdict": c.verdict,
        },
    }


def write_verdict_json(report, path, *, force: bool = False) -> None:
    """Write the verdict report as JSON, validated against its schema, atomically."""
    write_json(path, verdict_document(report), force=force, schema=VERDICT_SCHEMA_FILE)


def _interval_text(t) -> tuple[str, str, str]:
    label, (lim, est, lo, hi) = display_values(t.spec, t.spec.limit, t.estimate, t.low, t.high)
    return (
        f"{t.spec.text}",
        f"{lim:.4g} {label}",
        f"{est:.4g} [{lo:.4g}, {hi:.4g}] {label}",
    )


def _record_text(report) -> str:
    rec = report.recording
    parts = []
    if rec.get("duration"):
        parts.append(f"record {format_duration(rec['duration'])}")
    if rec.get("sample_rate"):
        parts.append(f"at {format_value(rec['sample_rate'], 'Hz')}")
    return " ".join(parts)


def _verdict_row_note(t) -> str:
    if t.verdict != "inconclusive":
        return ""
    where = f" (read at τ ≈ {t.read_at:.3g} s)" if t.read_at else ""
    test = getattr(t, "limit_test", None) or {}
    why = (
        "interval excluded the limit, the test at the limit did not confirm; "
        if (test.get("confirmed") is False)
        else ""
    )
    if t.required_duration is None and why:
        return f"{why}a longer record is needed"
    if t.required_duration is None:
        return f"{why}{term_note(t)}"  # its reasons say why no length is given
    return f"{why}needs a record of ≈ {format_duration(t.required_duration)}{where}"


def _unverified_groups(report) -> list[tuple[str, list[str], str]]:
    """(term, channel ids, reason) of each distinct term not verified, in first-seen order."""
    unver = [(ch.id, u.key, _unverified_reason(u)) for ch in report.channels for u in ch.unverified]
    groups: dict[tuple[str, str], list[str]] = {}
    for cid, key, why in unver:
        groups.setdefault((key, why), []).append(cid)
    return [(key, ids, why) for (key, why), ids in groups.items()]


def _tau_span(a: float, b: float, dash: str) -> str:
    """A τ range in words: one τ alone, or its ends joined by ``dash``."""
    return f"{a:.3g} s" if a == b else f"{a:.3g}{dash}{b:.3g} s"


def _curve_result(check, *, dash: str, lead: str = "") -> str:
    """The whole-curve check of one channel in words (``dash`` between the ends of a range)."""
    if not any(check.judged):
        return (
            "not judged: at every τ, terms printed without a limit (typ only) make the datasheet "
            "curve; it is drawn as a reference only"
        )
    if check.exceeded:
        spans = ", ".join(_tau_span(a, b, dash) for a, b in check.exceeded)
        text = f"{lead}exceeded with confidence at τ {spans}"
    elif check.verdict == "pass":
        text = "within the limit curve at every τ judged"
    else:
        text = "not exceeded with confidence at any τ judged"
    if check.not_judged:
        spans = ", ".join(_tau_span(a, b, dash) for a, b in check.not_judged)
        text += (
            f"; not judged at τ {spans}, where terms printed without a limit (typ only) make the "
            "datasheet curve"
        )
    return text


def verdict_text(report) -> str:
    """A readable summary of a verdict report for the terminal."""
    sensor = report.datasheet.get("sensor", {})
    name = " ".join(str(sensor.get(k, "")) for k in ("name", "model")).strip()
    c = report.confidence
    lines = [
        f"acceptance of {name or 'the sensor'} against {report.datasheet.get('file')} "
        f"({report.against} values); {_record_text(report)}; "
        f"{100 * c:.0f} % two-sided intervals (each one-sided error ≤ {100 * (1 - c) / 2:.1f} %)",
        "",
    ]
    rows = [("channel", "term", "limit", "estimate [interval]", "verdict", "")]
    for ch in report.channels:
        for t in ch.terms:
            _, lim, est = _interval_text(t)
            rows.append(
                (ch.id, t.spec.key, t.spec.text or lim, est, t.verdict, _verdict_row_note(t))
            )
    widths = [max(len(r[i]) for r in rows) for i in range(5)]
    for r in rows:
        lines.append(
            "  ".join(r[i].ljust(widths[i]) for i in range(5)) + ("  " + r[5] if r[5] else "")
        )
    groups = _unverified_groups(report)
    if groups:
        lines.append("")
        lines.append("not verified:")
        lines.extend(f"  {key} ({', '.join(ids)}): {why}" for key, ids, why in groups)
    lines.append("")
    lines.append("whole-curve check (Allan deviation against the curve the limits imply):")
    lines.extend(f"  {ch.id}: {_curve_result(ch.curve, dash='-')}" for ch in report.channels)
    lines.extend(f"note: {reason_text(code, values)}" for code, values in report.notes)
    lines.append("")
    lines.append(f"overall: {report.overall}")
    return "\n".join(lines)


def plan_text(plan) -> str:
    """The recording-length plan for the terminal, with the reason each length is what it is."""
    c = plan.confidence
    lines = [
        f"recording length to verify {plan.datasheet.get('file')}, recorded at "
        f"{format_value(plan.sample_rate, 'Hz')}: a unit whose term lies "
        f"{100 * plan.margin:.0f} % below its limit gets a decided verdict on it (pass; one at "
        f"limit/{1 - plan.margin:.3g}, fail) with probability ≥ {100 * plan.power:.0f} % "
        f"({100 * c:.0f} % two-sided intervals, verify's decision)",
        "",
    ]
    rows = [
        (
            "channel",
            "term",
            "limit",
            "read at τ",
            "share",
            "noise at τ",
            "EDF at τ",
            "record needed",
        )
    ]
    for r in plan.rows:
        mark = "" if r.verified else " *"
        rows.append(
            (
                r.spec.channel,
                r.spec.key + mark,
                r.spec.text,
                f"{r.read_at:.3g} s",
                f"{100 * r.share:.0f} %",
                NOISE_NAMES[r.noise_alpha],
                f"{r.edf:.3g}",
                format_duration(r.duration) if math.isfinite(r.duration) else "none suffices",
            )
        )
    widths = [max(len(x[i]) for x in rows) for i in range(len(rows[0]))]
    for x in rows:
        lines.append("  ".join(x[i].ljust(widths[i]) for i in range(len(x))).rstrip())
    if any(not r.verified for r in plan.rows):
        lines.append(
            "  * printed without a max value: not verified; shown at its typical value "
            "for information"
        )
    masked = [r for r in plan.rows if r.reasons]
    if masked:
        lines.append("")
        lines.extend(
            f"masked: {r.spec.channel}: " + "; ".join(reason_text(c, v) for c, v in r.reasons)
            for r in masked
        )
    if plan.unverified:
        lines.append("")
        seen = {(u.key, _unverified_reason(u)): None for u in plan.unverified}
        lines.extend(f"not verified: {key}: {why}" for key, why in seen)
    lines.append("")
    lines.append(
        f"why: that takes {plan.dof:.3g} effective degrees of freedom of the term's estimate "
        "(the chi-square interval of the deviation); the length is where verify's weighted "
        "fit of the Allan curve (its terms, octave τ, Greenhall & Riley 2003 EDF) reaches "
        "them, and for a Gauss-Markov bias where the record also resolves its time constant. "
        "A term is read where it dominates the Allan curve (its share the largest); the "
        "overlapping Allan variance gains roughly (record length)/τ of EDF, so white noise "
        "needs seconds to minutes, bias instability (read where it rises above the white "
        "noise; a Gauss-Markov bias at or past its peak, τ ≥ 1.89 T) hours, and a random "
        "walk, read where it rises above the bias-instability floor, the longest records."
    )
    driver = plan.driver
    if driver is not None:
        lines.append(
            f"a record of at least {format_duration(plan.duration)} verifies every term with a "
            f"limit (longest: {driver.spec.channel} {driver.spec.key}, read at τ ≈ "
            f"{driver.read_at:.3g} s)."
        )
    else:
        lines.append(
            "the datasheet has no term with a max value: nothing to verify (see --against typ)."
        )
    return "\n".join(lines)
