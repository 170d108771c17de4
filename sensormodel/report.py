"""Reports: text tables of models, JSON reports and the self-contained HTML report.

This module turns SI numbers into text for people: it is one of the edges where units are
formatted (with :mod:`sensormodel.quantities`). It computes nothing of its own.
"""

from __future__ import annotations

from dataclasses import dataclass

from .errors import SensorModelError
from .quantities import DISPLAY_UNITS, convert_from_si, format_value, kind_of, split_value

__all__ = [
    "TermRow",
    "term_rows",
    "inspect_text",
    "SAFETY_CAUTION",
    "VERDICT_SCHEMA_ID",
    "VERDICT_SCHEMA_FILE",
    "format_duration",
    "display_values",
    "channel_display",
    "verdict_document",
    "write_verdict_json",
    "verdict_text",
    "plan_text",
    "verdict_html",
    "verdict_figures",
    "write_verdict_html",
]

#: The caution every report and help text on acceptance or navigation use carries.
SAFETY_CAUTION = (
    "Caution: these figures support, not replace, engineering judgement. Acceptance of flight "
    "hardware and navigation-integrity decisions follow the applicable standards and the "
    "customer's contract."
)


@dataclass(frozen=True)
class TermRow:
    """One parameter of one term, formatted: SI value and the same value in display units."""

    term: str
    parameter: str
    si: str
    display: str
    origin: str


def _param_kind(channel_unit: str, rel_unit: str) -> str | None:
    if rel_unit in ("Hz", "s"):
        return {"Hz": "frequency", "s": "time"}[rel_unit]
    if channel_unit in ("", "1"):
        return None
    expr = rel_unit.replace("u", f"({channel_unit})")
    try:
        return kind_of(expr)
    except Exception:
        return None


def _si_label(channel_unit: str, rel_unit: str) -> str:
    if channel_unit in ("", "1"):
        base = "(as recorded)"
        return rel_unit.replace("u", base)
    simple = {
        ("rad/s", "u*s**0.5"): "rad/√s",
        ("rad/s", "u"): "rad/s",
        ("rad/s", "u/s**0.5"): "rad/s/√s",
        ("rad/s", "u*s"): "rad",
        ("rad/s", "u/s"): "rad/s²",
        ("m/s^2", "u*s**0.5"): "m/s/√s",
        ("m/s^2", "u"): "m/s²",
        ("m/s^2", "u/s**0.5"): "m/s²/√s",
        ("m/s^2", "u*s"): "m/s",
        ("m/s^2", "u/s"): "m/s³",
    }
    return simple.get((channel_unit, rel_unit), rel_unit.replace("u", f"({channel_unit})"))


def term_rows(channel) -> list[TermRow]:
    """Rows for every parameter of every term of a channel, in SI and in datasheet units.

    The datasheet's own unit is used where the term came from a datasheet field of the same
    kind; otherwise the readable unit of :data:`quantities.DISPLAY_UNITS`.
    """
    rows = []
    for term in channel.terms:
        ds = term.meta.get("datasheet", {}) if isinstance(term.meta, dict) else {}
        origin = ds.get("field", term.meta.get("origin", "")) if isinstance(term.meta, dict) else ""
        ds_unit = None
        if ds.get("text"):
            try:
                ds_unit = split_value(ds["text"])[1]
            except Exception:
                ds_unit = None
        for name, value in term.parameters().items():
            rel = type(term).units.get(name, "")
            kind = _param_kind(channel.unit, rel)
            where = origin
            if name == "bandwidth" and ds.get("bandwidth_field"):
                where = ds["bandwidth_field"]
            elif name == "filter_order" and ds.get("filter_order_field"):
                where = ds["filter_order_field"]
            if rel == "1":  # a plain count (filter order)
                rows.append(TermRow(term.type, name, f"{value:g}", f"{value:g}", where))
                continue
            if isinstance(value, (list, tuple)):  # shaped filter polynomials in s
                si = "[" + ", ".join(f"{v:.4g}" for v in value) + "] (in s)"
                rows.append(TermRow(term.type, name, si, "", origin))
                continue
            si = f"{format_value(value)} {_si_label(channel.unit, rel)}".strip()
            display = ""
            if kind is not None:
                unit_text = None
                if ds_unit:
                    try:
                        convert_from_si(1.0, kind, ds_unit)
                        unit_text = ds_unit
                    except Exception:
                        unit_text = None
                if unit_text is None:
                    unit_text, pretty = DISPLAY_UNITS[kind]
                else:
                    pretty = unit_text
                display = format_value(convert_from_si(value, kind, unit_text), pretty)
                if ds.get("convention") == "one-sided" and name == "density":
                    # the model's N is the IEEE (two-sided) density: say so beside the print
                    display += f" two-sided (printed one-sided: {ds.get('text', '')})"
                if term.type == "flicker" and name == "coefficient":
                    from .terms import FLICKER_FLOOR_FACTOR as FLOOR_FACTOR

                    floor = convert_from_si(value * FLOOR_FACTOR, kind, unit_text)
                    display += f" (Allan floor {format_value(floor, pretty)})"
            rows.append(TermRow(term.type, name, si, display, where))
    return rows


def inspect_text(model, *, rate: float | None = None, extra: dict | None = None) -> str:
    """A readable summary of a noise model: per channel, each term in SI and datasheet units,
    and the per-sample standard deviation of the white term at the channel's rate (or ``rate``).

    Parameters
    ----------
    model : NoiseModel
    rate : float, optional
        Output rate [Hz] for the per-sample standard deviation (default: each channel's).
    extra : dict, optional
        channel id -> list of extra lines (e.g. realization errors) to print under the channel.
    """
    lines = []
    name = " ".join(str(model.sensor.get(k, "")) for k in ("name", "model")).strip()
    if name:
        lines.append(f"sensor: {name}")
    src = model.provenance.get("datasheet", {}).get("file") if model.provenance else None
    if src:
        lines.append(f"from datasheet: {src} ({model.conventions.get('basis', 'typ')} values)")
    for ch in model.channels:
        r = rate or ch.sample_rate
        head = (
            f"{ch.id}  ({ch.quantity}, SI unit {ch.unit}, "
            f"output rate {format_value(ch.sample_rate, 'Hz')}"
        )
        if ch.bandwidth:
            head += f", bandwidth {format_value(ch.bandwidth, 'Hz')}"
            if ch.filter_order:
                head += f" order {ch.filter_order}"
        lines.append("")
        lines.append(head + ")")
        rows = term_rows(ch)
        if not rows:
            lines.append("  (no noise terms)")
        w = [
            max([len(x) for x in col] + [len(h)])
            for col, h in zip(
                zip(*[(t.term, t.parameter, t.si, t.display) for t in rows], strict=False)
                if rows
                else [[], [], [], []],
                ("term", "parameter", "SI", "datasheet units"),
                strict=False,
            )
        ]
        lines.append(
            "  "
            + "  ".join(
                h.ljust(n)
                for h, n in zip(("term", "parameter", "SI", "datasheet units"), w, strict=False)
            )
            + "  from"
        )
        for t in rows:
            lines.append(
                "  "
                + "  ".join(
                    v.ljust(n)
                    for v, n in zip((t.term, t.parameter, t.si, t.display), w, strict=False)
                )
                + f"  {t.origin}".rstrip()
            )
        std = ch.white_sample_std(r)
        if std > 0:
            kind = (
                "angular_rate"
                if ch.unit == "rad/s"
                else "acceleration"
                if ch.unit == "m/s^2"
                else None
            )
            shown = ""
            if kind:
                unit_text = "deg/s" if kind == "angular_rate" else "mg"
                label = "°/s" if kind == "angular_rate" else "mg"
                shown = f" = {format_value(convert_from_si(std, kind, unit_text), label)}"
            rule = (
                f"ENBW of the {ch.filter_order or 1}-pole Butterworth at "
                f"{format_value(ch.bandwidth, 'Hz')}"
                if ch.bandwidth
                else "average over each sample"
            )
            lines.append(
                f"  white noise per sample at {format_value(r, 'Hz')}: "
                f"std {format_value(std, ch.unit)}{shown}  ({rule})"
            )
        for line in (extra or {}).get(ch.id, []):
            lines.append(f"  {line}")
    notes = model.provenance.get("notes", []) if model.provenance else []
    if notes:
        lines.append("")
        lines.append("notes:")
        lines.extend(f"  - {n}" for n in notes)
    return "\n".join(lines)


# ---------------------------------------------------------------------------------------------
# Acceptance reports: JSON, text and a self-contained HTML page
# ---------------------------------------------------------------------------------------------

#: The schema id of verdict reports (DESIGN §10).
VERDICT_SCHEMA_ID = "sensormodel/verdict-report/1"
#: Schema file of verdict reports in ``schemas/``.
VERDICT_SCHEMA_FILE = "verdict-report.schema.json"


def format_duration(seconds: float | None) -> str:
    """A record length for people: ``45 s``, ``12.5 min``, ``3.2 h``, ``4.1 d``, ``2.3 years``."""
    import math

    if seconds is None:
        return "none decides it"
    if not math.isfinite(seconds):
        return "unbounded"
    if seconds < 1.0:
        return "< 1 s"
    if seconds < 120.0:
        return f"{seconds:.3g} s"
    if seconds < 2 * 3600.0:
        return f"{seconds / 60.0:.3g} min"
    if seconds < 72 * 3600.0:
        return f"{seconds / 3600.0:.3g} h"
    if seconds < 2 * 365.25 * 86400.0:
        return f"{seconds / 86400.0:.3g} d"
    return f"{seconds / (365.25 * 86400.0):.3g} years"


def _spec_unit(spec) -> tuple[str, str]:
    """(unit text to convert to, label) for a spec term: the datasheet's printed unit."""
    unit = ""
    if spec.text:
        try:
            unit = split_value(spec.text)[1].strip()
            convert_from_si(1.0, spec.kind, unit)
        except SensorModelError:
            unit = ""
    if not unit:
        unit, label = DISPLAY_UNITS[spec.kind]
        return unit, label
    return unit, unit


def display_values(spec, *values: float) -> tuple[str, list[float]]:
    """SI values of a spec term's compared quantity in the datasheet's unit and convention.

    Returns
    -------
    (str, list of float)
        The unit label and the converted values (each × ``spec.display_scale``).
    """
    unit, label = _spec_unit(spec)
    return label, [convert_from_si(v * spec.display_scale, spec.kind, unit) for v in values]


def channel_display(channel_id: str) -> tuple[str, float]:
    """(label, factor from SI) of the readable unit of a channel's output (°/h, µg)."""
    instrument = channel_id.split(".", 1)[0]
    kind = {"gyro": "angular_rate", "accelerometer": "acceleration"}.get(instrument)
    if kind is None:
        return "", 1.0
    unit, label = DISPLAY_UNITS[kind]
    return label, convert_from_si(1.0, kind, unit)


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
    import datetime

    from . import __version__

    def num(x):
        return None if x is None else float(x)

    channels = []
    for ch in report.channels:
        terms = []
        for t in ch.terms:
            s = t.spec
            label, (lim, est, lo, hi) = display_values(s, s.limit, t.estimate, t.low, t.high)
            terms.append(
                {
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
                    "required_duration": num(t.required_duration),
                    "read_at_tau": num(t.read_at),
                    "edf": num(t.edf),
                    "dof": num(t.dof),
                    "supported": bool(t.supported),
                    "display": {
                        "unit": label,
                        "limit": lim,
                        "estimate": est,
                        "low": lo,
                        "high": hi,
                    },
                    "note": t.note,
                    "limit_test": None if t.limit_test is None else dict(t.limit_test),
                }
            )
        c = ch.curve
        channels.append(
            {
                "id": ch.id,
                "unit": ch.unit,
                "overall": ch.verdict,
                "duration": float(ch.duration),
                "sample_rate": float(ch.rate),
                "terms": terms,
                "not_verified": [
                    {"term": u.key, "field": u.field, "text": u.text, "reason": u.reason}
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
                    "verdict": c.verdict,
                },
            }
        )
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
        "channels": channels,
        "notes": list(report.notes),
        "conventions": _conventions(report),
        "caution": SAFETY_CAUTION,
    }


def write_verdict_json(report, path, *, force: bool = False) -> None:
    """Write the verdict report as JSON, validated against its schema, atomically."""
    from ._io import write_json

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
        return f"{why}no record length decides it: {t.note}"
    return f"{why}needs a record of ≈ {format_duration(t.required_duration)}{where}"


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
    unver = [(ch.id, u) for ch in report.channels for u in ch.unverified]
    if unver:
        lines.append("")
        lines.append("not verified:")
        seen = set()
        for _cid, u in unver:
            key = (u.key, u.reason)
            if key in seen:
                continue
            seen.add(key)
            ids = [i for i, v in unver if (v.key, v.reason) == key]
            lines.append(f"  {u.key} ({', '.join(ids)}): {u.reason}")
    lines.append("")
    lines.append("whole-curve check (Allan deviation against the curve the limits imply):")
    for ch in report.channels:
        cc = ch.curve
        if cc.exceeded:
            spans = ", ".join(f"{a:.3g}-{b:.3g} s" for a, b in cc.exceeded)
            lines.append(f"  {ch.id}: exceeded with confidence at τ {spans}")
        elif cc.verdict == "pass":
            lines.append(f"  {ch.id}: within the limit curve at every τ")
        else:
            lines.append(f"  {ch.id}: not exceeded with confidence at any τ")
    for note in report.notes:
        lines.append(f"note: {note}")
    lines.append("")
    lines.append(f"overall: {report.overall}")
    return "\n".join(lines)


def plan_text(plan) -> str:
    """The recording-length plan for the terminal, with the reason each length is what it is."""
    c = plan.confidence
    lines = [
        f"recording length to verify {plan.datasheet.get('file')}: each term to "
        f"±{100 * plan.precision:.0f} % ({100 * c:.0f} % two-sided) for a unit exactly at its "
        f"limits, recorded at {format_value(plan.sample_rate, 'Hz')}",
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
            "EDF needed",
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
                r.noise,
                f"{r.edf:.3g}",
                format_duration(r.duration),
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
    if plan.unverified:
        lines.append("")
        seen = set()
        for u in plan.unverified:
            if (u.key, u.reason) in seen:
                continue
            seen.add((u.key, u.reason))
            lines.append(f"not verified: {u.key}: {u.reason}")
    lines.append("")
    lines.append(
        f"why: a term is read at the τ where a record reaches ±{100 * plan.precision:.0f} % "
        f"soonest; that takes {plan.rows[0].dof if plan.rows else 0:.3g} effective degrees of "
        "freedom, i.e. an Allan-variance EDF of that divided by the term's share² at τ. The "
        "overlapping Allan variance gains roughly (record length)/τ of EDF (Greenhall & Riley "
        "2003), so a term read at τ needs a record of about EDF × τ: white noise, read at "
        "short τ, needs seconds to minutes; bias instability, read where it rises above the "
        "white noise (τ of tens to hundreds of seconds), needs hours; a random walk, read "
        "where it rises above the bias-instability floor, needs the longest records."
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


_CSS = """
body{font-family:-apple-system,"Segoe UI",Helvetica,Arial,sans-serif;margin:2em auto;
max-width:1100px;color:#1d1d1f;line-height:1.45;padding:0 1em}
h1{font-size:1.6em;margin-bottom:.2em}h2{margin-top:1.6em;border-bottom:1px solid #ccc}
table{border-collapse:collapse;margin:.6em 0;font-size:.92em}
th,td{border:1px solid #ccc;padding:.3em .6em;text-align:left;vertical-align:top}
th{background:#f0f0f2}td.num{font-variant-numeric:tabular-nums;white-space:nowrap}
.v{font-weight:bold;padding:.1em .5em;border-radius:.3em;white-space:nowrap}
.pass{background:#d8f0dc;color:#14561f}.fail{background:#f8d7d7;color:#7a1010}
.inconclusive{background:#fdf0c8;color:#6b4e00}
.overall{font-size:1.3em}.caution{border-left:4px solid #b36b00;background:#fff6e5;
padding:.6em 1em;margin:1.2em 0}.meta{color:#555}
figure{margin:1em 0}figure img{max-width:100%;height:auto;border:1px solid #ddd}
figcaption{color:#555;font-size:.9em}
"""


def _e(text) -> str:
    import html

    return html.escape(str(text), quote=True)


def _badge(verdict: str) -> str:
    cls = verdict if verdict in ("pass", "fail", "inconclusive") else "inconclusive"
    return f'<span class="v {cls}">{_e(verdict)}</span>'


def verdict_html(
    report,
    figures: dict[str, list[tuple[str, bytes]]],
    *,
    title: str | None = None,
    intro: list[str] | None = None,
) -> str:
    """The self-contained HTML page of a verdict report.

    Plain HTML and CSS, no script and no external resource: the figures are embedded as
    base64 PNG data URIs, and every text that comes from an input (sensor names, file names,
    printed values, notes) is escaped with :func:`html.escape`.

    Parameters
    ----------
    report : VerdictReport
    figures : dict
        {channel id: [(caption, PNG bytes), ...]}.
    title : str, optional
        Page title (default from the sensor's name).
    intro : list of str, optional
        Paragraphs shown under the title (plain text, escaped).
    """
    import base64

    from . import __version__

    sensor = report.datasheet.get("sensor", {})
    name = " ".join(str(sensor.get(k, "")) for k in ("name", "model")).strip() or "sensor"
    title = title or f"Acceptance report: {name}"
    c = report.confidence
    out: list[str] = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(title)}</title>",
        f"<style>{_CSS}</style></head><body>",
        f"<h1>{_e(title)}</h1>",
    ]
    meta = [
        f"Datasheet: {_e(report.datasheet.get('file'))} ({_e(report.against)} values)"
        + (
            f", SHA-256 {_e(report.datasheet['sha256'][:16])}…"
            if report.datasheet.get("sha256")
            else ""
        ),
        f"Recording: {_e(report.recording.get('file') or '(Allan curves)')}; "
        f"{_e(_record_text(report))}",
        f"Confidence: {100 * c:.0f} % two-sided intervals; each one-sided error at most "
        f"{100 * (1 - c) / 2:.1f} %",
    ]
    if sensor.get("manufacturer"):
        meta.insert(0, f"Sensor: {_e(name)}, {_e(sensor['manufacturer'])}")
    out.append('<p class="meta">' + "<br>".join(meta) + "</p>")
    for para in intro or []:
        out.append(f"<p>{_e(para)}</p>")
    out.append(f'<p class="overall">Overall verdict: {_badge(report.overall)}</p>')
    out.append(f'<div class="caution">{_e(SAFETY_CAUTION)}</div>')

    out.append("<h2>Summary of verdicts</h2>")
    out.append(
        "<table><thead><tr><th>channel</th><th>term</th><th>limit (as printed)</th>"
        f"<th>estimate [{100 * c:.0f} % interval]</th><th>verdict</th>"
        "<th>record needed to decide</th></tr></thead><tbody>"
    )
    for ch in report.channels:
        for t in ch.terms:
            _, lim, est = _interval_text(t)
            need = ""
            if t.verdict == "inconclusive":
                need = _verdict_row_note(t)
            out.append(
                f"<tr><td>{_e(ch.id)}</td><td>{_e(t.spec.key)}<br><small>{_e(t.spec.field)}"
                f'</small></td><td class="num">{_e(t.spec.text or lim)}</td>'
                f'<td class="num">{_e(est)}</td><td>{_badge(t.verdict)}</td>'
                f"<td>{_e(need)}</td></tr>"
            )
    out.append("</tbody></table>")
    unver = [(ch.id, u) for ch in report.channels for u in ch.unverified]
    if unver:
        out.append("<h3>Not verified</h3><ul>")
        seen: set = set()
        for _cid, u in unver:
            if (u.key, u.reason) in seen:
                continue
            seen.add((u.key, u.reason))
            ids = [i for i, v in unver if (v.key, v.reason) == (u.key, u.reason)]
            out.append(f"<li><b>{_e(u.key)}</b> ({_e(', '.join(ids))}): {_e(u.reason)}</li>")
        out.append("</ul>")
    out.append(
        "<h3>Whole-curve check</h3><table><thead><tr><th>channel</th><th>result</th>"
        "</tr></thead><tbody>"
    )
    for ch in report.channels:
        cc = ch.curve
        if cc.exceeded:
            spans = ", ".join(f"{a:.3g}–{b:.3g} s" for a, b in cc.exceeded)
            text = f"limit curve exceeded with confidence at τ {spans}"
        elif cc.verdict == "pass":
            text = "within the limit curve at every τ"
        else:
            text = "not exceeded with confidence at any τ"
        out.append(f"<tr><td>{_e(ch.id)}</td><td>{_e(text)}</td></tr>")
    out.append("</tbody></table>")
    if report.notes:
        out.append("<h3>Notes</h3><ul>")
        out.extend(f"<li>{_e(n)}</li>" for n in report.notes)
        out.append("</ul>")

    for ch in report.channels:
        out.append(f"<h2>{_e(ch.id)} {_badge(ch.verdict)}</h2>")
        out.append(
            f'<p class="meta">{_e(format_duration(ch.duration))} analysed at '
            f"{_e(format_value(ch.rate, 'Hz'))}; SI unit {_e(ch.unit)}</p>"
        )
        out.append(
            "<table><thead><tr><th>term</th><th>limit</th><th>estimate</th>"
            "<th>interval</th><th>verdict</th><th>read at τ</th><th>EDF there</th>"
            "</tr></thead><tbody>"
        )
        for t in ch.terms:
            label, (lim, est, lo, hi) = display_values(
                t.spec, t.spec.limit, t.estimate, t.low, t.high
            )
            out.append(
                f'<tr><td>{_e(t.spec.key)}</td><td class="num">{_e(f"{lim:.4g} {label}")}</td>'
                f'<td class="num">{_e(f"{est:.4g}")}</td>'
                f'<td class="num">{_e(f"[{lo:.4g}, {hi:.4g}]")}</td><td>{_badge(t.verdict)}</td>'
                f'<td class="num">{_e(f"{t.read_at:.3g} s" if t.read_at else "")}</td>'
                f'<td class="num">{_e(f"{t.edf:.3g}" if t.edf else "")}</td></tr>'
            )
        out.append("</tbody></table>")
        for caption, png in figures.get(ch.id, []):
            data = base64.b64encode(png).decode("ascii")
            out.append(
                f'<figure><img alt="{_e(caption)}" src="data:image/png;base64,{data}">'
                f"<figcaption>{_e(caption)}</figcaption></figure>"
            )

    out.append("<h2>Conventions</h2><ul>")
    out.extend(f"<li>{_e(v)}</li>" for v in _conventions(report).values())
    out.append("</ul>")
    out.append(f'<div class="caution">{_e(SAFETY_CAUTION)}</div>')
    out.append(f'<p class="meta">Written by sensormodel {_e(__version__)}.</p>')
    out.append("</body></html>")
    return "\n".join(out) + "\n"


def verdict_figures(report) -> dict[str, list[tuple[str, str, object]]]:
    """The figures of a verdict report: {channel id: [(file tag, caption, Figure), ...]}."""
    from .plots import verdict_allan_figure, verdict_psd_figure

    out = {}
    for ch in report.channels:
        display = channel_display(ch.id)
        items = [
            (
                "allan",
                f"{ch.id}: overlapping Allan deviation with its {100 * ch.curve.confidence:.0f} % "
                "band, the datasheet limit curve and the fitted model",
                verdict_allan_figure(ch, display=display),
            )
        ]
        if ch.psd is not None:
            items.append(
                (
                    "psd",
                    f"{ch.id}: one-sided PSD of the record (Welch), the datasheet limit model and "
                    "the fitted model",
                    verdict_psd_figure(ch, display=display),
                )
            )
        out[ch.id] = items
    return out


def write_verdict_html(
    report,
    path,
    *,
    force: bool = False,
    png: bool = True,
    title: str | None = None,
    intro: list[str] | None = None,
) -> list[str]:
    """Write the HTML report and, beside it, one PNG per figure (``<stem>-<channel>-<tag>.png``).

    Returns
    -------
    list of str
        The files written, the HTML page first.
    """
    import pathlib

    from ._io import atomic_writer, check_writable
    from .plots import figure_png

    target = pathlib.Path(path)
    check_writable(target, force=force)
    figs = verdict_figures(report)
    pngs: dict[str, list[tuple[str, bytes]]] = {}
    files: list[tuple[pathlib.Path, bytes]] = []
    for cid, items in figs.items():
        for tag, caption, fig in items:
            data = figure_png(fig)
            pngs.setdefault(cid, []).append((caption, data))
            files.append((target.with_name(f"{target.stem}-{cid}-{tag}.png"), data))
    if png:
        for p, _ in files:
            check_writable(p, force=force)
    page = verdict_html(report, pngs, title=title, intro=intro)
    written = []
    with atomic_writer(target, force=force) as fh:
        fh.write(page)
    written.append(str(target))
    if png:
        for p, data in files:
            with atomic_writer(p, force=force, binary=True) as fh:
                fh.write(data)
            written.append(str(p))
    return written
