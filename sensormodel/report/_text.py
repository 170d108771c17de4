"""Terminal tables and summaries: models, Allan curves, identifications, drift, commands.

Plain functions from results to strings (no click, no I/O); units are chosen with
:mod:`._units`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from ..errors import AnalysisError
from ..quantities import (
    DISPLAY_UNITS,
    convert_from_si,
    display_scale,
    format_value,
    split_value,
)
from ..terms import FLICKER_FLOOR_FACTOR, TERM_TYPES
from ._reasons import reason_text
from ._units import counted, format_duration, parameter_kind, sample_std_display, si_label

__all__ = [
    "TermRow",
    "allan_heading",
    "allan_table",
    "drift_table",
    "export_summary",
    "identify_heading",
    "identify_notes",
    "identify_rows",
    "identify_table",
    "inspect_text",
    "realization_lines",
    "shape_summary",
    "simulate_summary",
    "term_rows",
]


@dataclass(frozen=True)
class TermRow:
    """One parameter of one term, formatted: SI value and the same value in display units."""

    term: str
    parameter: str
    si: str
    display: str
    origin: str


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
            kind = parameter_kind(rel, channel.unit)
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
            si = f"{format_value(value)} {si_label(rel, channel.unit)}".strip()
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
                    floor = convert_from_si(value * FLICKER_FLOOR_FACTOR, kind, unit_text)
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
        lines.append("")
        lines.extend(_channel_lines(ch, rate or ch.sample_rate))
        for line in (extra or {}).get(ch.id, []):
            lines.append(f"  {line}")
    notes = model.provenance.get("notes", []) if model.provenance else []
    if notes:
        lines.append("")
        lines.append("notes:")
        lines.extend(f"  - {n}" for n in notes)
    return "\n".join(lines)


def _channel_lines(ch, r: float) -> list[str]:
    """The heading, the term table and the per-sample white noise of one channel."""
    head = (
        f"{ch.id}  ({ch.quantity}, SI unit {ch.unit}, "
        f"output rate {format_value(ch.sample_rate, 'Hz')}"
    )
    if ch.bandwidth:
        head += f", bandwidth {format_value(ch.bandwidth, 'Hz')}"
        if ch.filter_order:
            head += f" order {ch.filter_order}"
    lines = [head + ")"]
    rows = term_rows(ch)
    if not rows:
        lines.append("  (no noise terms)")
    heads = ("term", "parameter", "SI", "datasheet units")
    cells = [(t.term, t.parameter, t.si, t.display) for t in rows]
    w = [max([len(c[i]) for c in cells] + [len(h)]) for i, h in enumerate(heads)]
    lines.append("  " + "  ".join(h.ljust(n) for h, n in zip(heads, w, strict=True)) + "  from")
    for t, c in zip(rows, cells, strict=True):
        text = "  ".join(v.ljust(n) for v, n in zip(c, w, strict=True))
        lines.append("  " + text + f"  {t.origin}".rstrip())
    std = ch.white_sample_std(r)
    if std > 0:
        sample = sample_std_display(ch.unit)
        shown = ""
        if sample is not None:
            kind, unit_text, label = sample
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
    return lines


def realization_lines(model: Any) -> dict[str, list[str]]:
    """Per channel, one line per flicker term on its Gauss-Markov realization (for inspect)."""
    out: dict[str, list[str]] = {}
    for ch in model.channels:
        for term in ch.terms:
            if term.type != "flicker":
                continue
            try:
                real = term.realization(sample_rate=ch.sample_rate)
            except AnalysisError as exc:
                out.setdefault(ch.id, []).append(f"flicker realization: none ({exc.problem})")
                continue
            T = real.time_constants
            lo, hi = real.tau_band
            out.setdefault(ch.id, []).append(
                f"flicker realization: {T.size} Gauss-Markov states, T = {format_value(T[0], 's')}"
                f" … {format_value(T[-1], 's')}; worst Allan-deviation error "
                f"{100 * real.worst_error:.2f} % for τ = {format_value(lo, 's')} … "
                f"{format_value(hi, 's')}"
            )
    return out


def allan_heading(analysis: Any, rate: float, confidence: float) -> str:
    """First line of a channel's Allan table: id, unit, segment, length, interval confidence."""
    seg = analysis.segment
    span = ""
    if analysis.n_segments > 1:
        span = (
            f", longest of {analysis.n_segments} clean segments: samples {seg.start}-"
            f"{seg.stop - 1} from t = {format_value(seg.start_time, 's')}"
        )
    return (
        f"{analysis.channel} [{analysis.unit}]{span}: {seg.n} samples at "
        f"{format_value(rate, 'Hz')} ({format_duration(seg.n / rate)}), "
        f"{100 * confidence:.1f} % intervals"
    )


def allan_table(curve: Any, heading: str, display: tuple[str, float]) -> str:
    """A heading and one row per τ: τ, deviation and interval in the display unit, clusters."""
    label, factor = display
    unit = label if label and label != "1" else "as recorded"
    lines = [
        heading,
        f"  {'τ [s]':>11} {'ADEV':>11} {'CI low':>11} {'CI high':>11} "
        f"{'clusters':>10}    (deviations in {unit})",
    ]
    clusters = curve.n_clusters if curve.n_clusters is not None else [None] * len(curve.tau)
    for t, a, lo, hi, n in zip(
        curve.tau, curve.adev, curve.ci_low, curve.ci_high, clusters, strict=True
    ):
        lines.append(
            f"  {format_value(float(t)):>11} {format_value(float(a) * factor):>11} "
            f"{format_value(float(lo) * factor):>11} "
            f"{format_value(float(hi) * factor):>11} "
            f"{'' if n is None else int(n):>10}"
        )
    return "\n".join(lines)


def identify_rows(ident: Any) -> list[list[str]]:
    """Table rows of one identified channel: SI value, readable value, interval, reading; a
    Gauss-Markov term is followed by a row of its time constant (s, and min/h readable)."""
    rows = []
    for ft in ident.terms:
        rel = TERM_TYPES[ft.term].units[ft.parameter]
        kind = parameter_kind(rel, ident.unit)
        si_unit = si_label(rel, ident.unit)  # typeset: rad/√s, not rad/s**0.5

        def shown(v: float, kind: str | None = kind) -> str:
            if kind is None or kind not in DISPLAY_UNITS:
                return ""
            label, factor = display_scale(kind)
            return format_value(v * factor, label)

        reading = "" if ft.slope_reading is None else format_value(ft.slope_reading)
        rows.append(
            [
                ft.term,
                f"{format_value(ft.estimate)} {si_unit}",
                shown(ft.estimate),
                f"[{format_value(ft.low)}, {format_value(ft.high)}]",
                f"[{shown(ft.low)}, {shown(ft.high)}]" if kind else "",
                "yes" if ft.supported else "no",
                reading,
                "disagrees" if ft.disagrees else "",
            ]
        )
        if "time_constant" in ft.details:
            rows.append(_time_constant_row(ft))
    return rows


def _time_constant_row(ft: Any) -> list[str]:
    """The row of a Gauss-Markov time constant T: value and interval in s and readable; an
    unresolved T (an infinite upper end) is shown as a lower bound."""
    t = float(ft.details["time_constant"])
    lo = float(ft.details.get("time_constant_low", math.nan))
    hi = float(ft.details.get("time_constant_high", math.nan))
    resolved = math.isfinite(hi)
    si = f"[{format_value(lo)}, {format_value(hi)}] s" if resolved else f"≥ {format_value(lo)} s"
    shown = (
        f"[{format_duration(lo)}, {format_duration(hi)}]"
        if resolved
        else f"≥ {format_duration(lo)}"
    )
    flag = "" if resolved else "not resolved"
    return [
        "  time constant T",
        f"{format_value(t)} s",
        format_duration(t),
        si,
        shown,
        "",
        "",
        flag,
    ]


def identify_notes(ident: Any) -> list[str]:
    """The notes of one identified channel: the τ range fitted where it is not the whole curve,
    the record's output filter, sampling and count step (``record_reasons``), how the slope
    readings were taken, then the sentences of its fitted terms' reason codes
    (:data:`REASONS`)."""
    fitted = []
    if ident.fit_range_reason != "fit_range_full" and ident.fit_range is not None:
        low, high = ident.fit_range
        values = {"low": low, "high": high, "departure": ident.fit_range_departure}
        fitted.append(reason_text(ident.fit_range_reason, values))
    record = [reason_text(code, values) for code, values in ident.record_reasons]
    terms = (reason_text(code, values) for code, values in ident.term_reasons)
    return [*fitted, *record, *ident.notes, *terms]


def _columns(head: list[str], rows: list[list[str]], indent: str = "  ") -> list[str]:
    """Left-aligned columns, as wide as their widest cell, trailing blanks removed."""
    widths = [max(len(r[j]) for r in [head, *rows]) for j in range(len(head))]
    return [
        (indent + "  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True))).rstrip()
        for r in [head, *rows]
    ]


def identify_table(ident: Any) -> str:
    """The table of one identified channel (see :func:`identify_rows`)."""
    head = [
        "term",
        "estimate (SI)",
        "readable",
        f"{100 * ident.confidence:g} % interval (SI)",
        "interval (readable)",
        "supported",
        "slope reading (SI)",
        "flag",
    ]
    return "\n".join(_columns(head, identify_rows(ident)))


def identify_heading(ident: Any) -> str:
    """First line of an identified channel: id, unit, samples, rate, length, bootstrap size."""
    return (
        f"{ident.channel} [{ident.unit}]: {ident.n_samples} samples at "
        f"{format_value(ident.sample_rate, 'Hz')} ({format_duration(ident.duration)}), "
        f"{ident.n_boot} bootstrap records"
    )


def drift_table(channel: Any, times: list[float], display: dict[str, tuple[str, float]]) -> str:
    """One channel's drift at round times: 1σ of each integrated quantity, the largest term."""
    kinds = list(channel.values)
    head = ["time"] + [f"{k} 1σ [{display[k][0]}]" for k in kinds] + ["largest term"]
    at = channel.at(times)
    main = channel.largest_term(times)
    rows = [
        [format_duration(t)]
        + [format_value(float(at[k][i]) * display[k][1]) for k in kinds]
        + [main[i]]
        for i, t in enumerate(times)
    ]
    return "\n".join([channel.id, *_columns(head, rows)])


def export_summary(doc: dict[str, Any], dt: float) -> list[str]:
    """Per exported channel its state count and R, then the step and the R convention."""
    lines = []
    for c in doc["channels"]:
        unit = f" ({c['unit']})²" if c.get("unit") else ""
        lines.append(f"  {c['id']}: {counted(len(c['states']), 'state')}, R = {c['r']:.4g}{unit}")
    lines.append(f"dt = {dt:g} s; {doc['r_convention'].split(':', 1)[0]}")
    return lines


def shape_summary(result: Any) -> list[str]:
    """H(s), its poles and zeros, the term's variance and the fit error of a shaping."""
    filt, fmt = result.filter, ", ".join
    lines = [
        f"H(s) numerator   {fmt(f'{v:.6g}' for v in filt.numerator)}",
        f"     denominator {fmt(f'{v:.6g}' for v in filt.denominator)}",
        f"poles {fmt(f'{p:.6g}' for p in filt.poles)}",
    ]
    if filt.zeros.size:
        lines.append(f"zeros {fmt(f'{z:.6g}' for z in filt.zeros)}")
    unit = result.model.channel(result.channel).unit
    lines.append(f"variance (Lyapunov) {result.term.variance():.6g} ({unit})²")
    if result.fit is not None:
        lines.append(
            f"fit error over {result.fit.n_points} points: rms {result.fit.rms_db:.3g} dB, "
            f"worst {result.fit.max_db:.3g} dB"
        )
    return lines


def simulate_summary(
    where: str, n: int, increments: bool, channels: int, rate: float, seed: int, flicker: str
) -> str:
    """The line after a simulation: what was written, how much, at what rate, from which seed."""
    kind = "increments" if increments else "rate samples"
    what = counted(channels, "channel")
    return (
        f"wrote {where}: {n} {kind} × {what} at {rate:g} Hz ({format_duration(n / rate)}), "
        f"seed {seed}, flicker: {flicker}"
    )
