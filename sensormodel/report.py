"""Reports: text tables of models, JSON reports and the self-contained HTML report.

This module turns SI numbers into text for people: it is one of the edges where units are
formatted (with :mod:`sensormodel.quantities`). It computes nothing of its own.
"""

from __future__ import annotations

from dataclasses import dataclass

from .quantities import DISPLAY_UNITS, convert_from_si, format_value, kind_of, split_value

__all__ = ["TermRow", "term_rows", "inspect_text", "SAFETY_CAUTION"]

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
                if term.type == "flicker" and name == "coefficient":
                    from .convert import FLOOR_FACTOR

                    floor = convert_from_si(value * FLOOR_FACTOR, kind, unit_text)
                    display += f" (Allan floor {format_value(floor, pretty)})"
            rows.append(TermRow(term.type, name, si, display, origin))
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
        head = f"{ch.id}  ({ch.quantity}, SI unit {ch.unit}, output rate {format_value(ch.sample_rate, 'Hz')}"
        if ch.bandwidth:
            head += f", bandwidth {format_value(ch.bandwidth, 'Hz')}"
            if ch.filter_order:
                head += f" order {ch.filter_order}"
        lines.append("")
        lines.append(head + ")")
        rows = term_rows(ch)
        if not rows:
            lines.append("  (no noise terms)")
        w = [max([len(x) for x in col] + [len(h)]) for col, h in zip(
            zip(*[(t.term, t.parameter, t.si, t.display) for t in rows]) if rows else [[], [], [], []],
            ("term", "parameter", "SI", "datasheet units"),
        )]
        lines.append("  " + "  ".join(h.ljust(n) for h, n in zip(
            ("term", "parameter", "SI", "datasheet units"), w)) + "  from")
        for t in rows:
            lines.append("  " + "  ".join(v.ljust(n) for v, n in zip(
                (t.term, t.parameter, t.si, t.display), w)) + f"  {t.origin}".rstrip())
        std = ch.white_sample_std(r)
        if std > 0:
            kind = "angular_rate" if ch.unit == "rad/s" else "acceleration" if ch.unit == "m/s^2" else None
            shown = ""
            if kind:
                unit_text = "deg/s" if kind == "angular_rate" else "mg"
                label = "°/s" if kind == "angular_rate" else "mg"
                shown = f" = {format_value(convert_from_si(std, kind, unit_text), label)}"
            rule = (f"ENBW of the {ch.filter_order or 1}-pole Butterworth at "
                    f"{format_value(ch.bandwidth, 'Hz')}" if ch.bandwidth else "average over each sample")
            lines.append(f"  white noise per sample at {format_value(r, 'Hz')}: "
                         f"std {format_value(std, ch.unit)}{shown}  ({rule})")
        for line in (extra or {}).get(ch.id, []):
            lines.append(f"  {line}")
    notes = model.provenance.get("notes", []) if model.provenance else []
    if notes:
        lines.append("")
        lines.append("notes:")
        lines.extend(f"  - {n}" for n in notes)
    return "\n".join(lines)
