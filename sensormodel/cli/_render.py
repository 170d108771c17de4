"""Text the commands print: plain functions from results to strings (no click, no I/O).

They belong with :mod:`sensormodel.report` (results → sentences and tables); they live here
until that module takes them.
"""

from __future__ import annotations

from typing import Any

from ..errors import AnalysisError, SensorModelError
from ..quantities import DISPLAY_UNITS, KINDS, convert_from_si, display_scale, format_value, kind_of
from ..report import format_duration
from ..terms import TERM_TYPES

__all__ = [
    "DRIFT_DISPLAY",
    "allan_heading",
    "allan_table",
    "channel_display",
    "drift_table",
    "export_summary",
    "identify_heading",
    "identify_rows",
    "identify_table",
    "model_display",
    "realization_lines",
    "reason_text",
    "shape_summary",
    "simulate_summary",
]

#: Drift display units: angle in degrees; velocity and position stay SI (m/s, m).
DRIFT_DISPLAY: dict[str, tuple[str, float]] = {
    "angle": ("°", convert_from_si(1.0, "angle", "deg")),
    "velocity": ("m/s", 1.0),
    "position": ("m", 1.0),
}

_READABLE = ("angular_rate", "acceleration")


def channel_display(quantity: str | None, unit: str) -> tuple[str, float]:
    """(label, factor from the stored unit) of a channel's deviations: °/h for rates, µg for
    accelerations, the stored unit otherwise."""
    if quantity in _READABLE:
        return display_scale(quantity)
    return unit, 1.0


def model_display(model: Any) -> dict[str, tuple[str, float]]:
    """Display units of the inspect figure: °/h for gyros, µg for accelerometers."""
    return {ch.id: display_scale(ch.quantity) for ch in model.channels if ch.quantity in _READABLE}


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


def reason_text(code: str, numbers: dict[str, float]) -> str:
    """A sentence for a reason code of an analysis (:attr:`ChannelAnalysis.reasons`)."""
    if code == "segments_left_out":
        count, samples = int(numbers["count"]), int(numbers["samples"])
        return (
            f"{count} shorter clean segment{'s' if count != 1 else ''} ({samples} samples) left "
            "out; the longest is analysed"
        )
    return code.replace("_", " ")


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


def _parameter_kind(relative_unit: str, unit: str) -> str | None:
    """The kind of a term parameter whose unit is ``relative_unit`` with u = the channel unit."""
    if unit in ("", "1"):
        return None
    try:
        return kind_of(relative_unit.replace("u", f"({unit})"))
    except SensorModelError:  # a recorded unit of no known kind: its own unit only
        return None


def identify_rows(ident: Any) -> list[list[str]]:
    """Table rows of one identified channel: SI value, readable value, interval, reading."""
    rows = []
    for ft in ident.terms:
        rel = TERM_TYPES[ft.term].units[ft.parameter]
        kind = _parameter_kind(rel, ident.unit)
        if kind is not None:
            si_unit = KINDS[kind].si
        else:
            si_unit = rel.replace("u", ident.unit if ident.unit not in ("", "1") else "(rec.)")

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
    return rows


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
        lines.append(f"  {c['id']}: {len(c['states'])} states, R = {c['r']:.4g}{unit}")
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
    what = f"{channels} channel{'s' if channels != 1 else ''}"
    return (
        f"wrote {where}: {n} {kind} × {what} at {rate:g} Hz ({format_duration(n / rate)}), "
        f"seed {seed}, flicker: {flicker}"
    )
