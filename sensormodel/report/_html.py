"""The self-contained HTML report of a verdict, and its figures.

Plain HTML and CSS with the figures embedded as PNG data URIs; every text that comes from an
input is escaped.
"""

from __future__ import annotations

import base64
import html
import pathlib

from .. import __version__
from .._io import atomic_writer, check_writable
from ..plots import figure_png, verdict_allan_figure, verdict_psd_figure
from ..quantities import INSTRUMENT_KIND, format_value
from ._reasons import reason_text
from ._units import channel_display, display_values, format_duration
from ._verdict import (
    SAFETY_CAUTION,
    _conventions,
    _curve_result,
    _interval_text,
    _record_text,
    _unverified_groups,
    _verdict_row_note,
)

__all__ = ["verdict_figures", "verdict_html", "write_verdict_html", "check_verdict_html"]

#: The figures of a channel's verdict, by file tag (``<stem>-<channel>-<tag>.png``).
FIGURE_TAGS = ("allan", "psd")


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
    sensor = report.datasheet.get("sensor", {})
    name = " ".join(str(sensor.get(k, "")) for k in ("name", "model")).strip() or "sensor"
    title = title or f"Acceptance report: {name}"
    out: list[str] = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(title)}</title>",
        f"<style>{_CSS}</style></head><body>",
        f"<h1>{_e(title)}</h1>",
    ]
    out.append(_html_meta(report, name))
    for para in intro or []:
        out.append(f"<p>{_e(para)}</p>")
    out.append(f'<p class="overall">Overall verdict: {_badge(report.overall)}</p>')
    out.append(f'<div class="caution">{_e(SAFETY_CAUTION)}</div>')
    out.extend(_html_summary(report))
    for ch in report.channels:
        out.extend(_html_channel(ch, figures.get(ch.id, [])))
    out.append("<h2>Conventions</h2><ul>")
    out.extend(f"<li>{_e(v)}</li>" for v in _conventions(report).values())
    out.append("</ul>")
    out.append(f'<div class="caution">{_e(SAFETY_CAUTION)}</div>')
    out.append(f'<p class="meta">Written by sensormodel {_e(__version__)}.</p>')
    out.append("</body></html>")
    return "\n".join(out) + "\n"


def _html_meta(report, name: str) -> str:
    """The paragraph of what was verified against what, at which confidence."""
    sensor = report.datasheet.get("sensor", {})
    c = report.confidence
    sha = report.datasheet.get("sha256")
    meta = [
        f"Datasheet: {_e(report.datasheet.get('file'))} ({_e(report.against)} values)"
        + (f", SHA-256 {_e(sha[:16])}…" if sha else ""),
        f"Recording: {_e(report.recording.get('file') or '(Allan curves)')}; "
        f"{_e(_record_text(report))}",
        f"Confidence: {100 * c:.0f} % two-sided intervals; each one-sided error at most "
        f"{100 * (1 - c) / 2:.1f} %",
    ]
    if sensor.get("manufacturer"):
        meta.insert(0, f"Sensor: {_e(name)}, {_e(sensor['manufacturer'])}")
    return '<p class="meta">' + "<br>".join(meta) + "</p>"


def _html_summary(report) -> list[str]:
    """The summary of verdicts, the terms not verified, the whole-curve check and the notes."""
    out = ["<h2>Summary of verdicts</h2>"]
    out.append(
        "<table><thead><tr><th>channel</th><th>term</th><th>limit (as printed)</th>"
        f"<th>estimate [{100 * report.confidence:.0f} % interval]</th><th>verdict</th>"
        "<th>record needed to decide</th></tr></thead><tbody>"
    )
    for ch in report.channels:
        for t in ch.terms:
            _, lim, est = _interval_text(t)
            need = _verdict_row_note(t) if t.verdict == "inconclusive" else ""
            out.append(
                f"<tr><td>{_e(ch.id)}</td><td>{_e(t.spec.key)}<br><small>{_e(t.spec.field)}"
                f'</small></td><td class="num">{_e(t.spec.text or lim)}</td>'
                f'<td class="num">{_e(est)}</td><td>{_badge(t.verdict)}</td>'
                f"<td>{_e(need)}</td></tr>"
            )
    out.append("</tbody></table>")
    groups = _unverified_groups(report)
    if groups:
        out.append("<h3>Not verified</h3><ul>")
        out.extend(
            f"<li><b>{_e(key)}</b> ({_e(', '.join(ids))}): {_e(why)}</li>"
            for key, ids, why in groups
        )
        out.append("</ul>")
    out.append(
        "<h3>Whole-curve check</h3><table><thead><tr><th>channel</th><th>result</th>"
        "</tr></thead><tbody>"
    )
    for ch in report.channels:
        text = _curve_result(ch.curve, dash="–", lead="limit curve ")
        out.append(f"<tr><td>{_e(ch.id)}</td><td>{_e(text)}</td></tr>")
    out.append("</tbody></table>")
    if report.notes:
        out.append("<h3>Notes</h3><ul>")
        out.extend(f"<li>{_e(reason_text(code, values))}</li>" for code, values in report.notes)
        out.append("</ul>")
    return out


def _html_channel(ch, figures: list[tuple[str, bytes]]) -> list[str]:
    """One channel's section: its verdicts in the datasheet's units and its figures."""
    out = [f"<h2>{_e(ch.id)} {_badge(ch.verdict)}</h2>"]
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
        label, (lim, est, lo, hi) = display_values(t.spec, t.spec.limit, t.estimate, t.low, t.high)
        out.append(
            f'<tr><td>{_e(t.spec.key)}</td><td class="num">{_e(f"{lim:.4g} {label}")}</td>'
            f'<td class="num">{_e(f"{est:.4g}")}</td>'
            f'<td class="num">{_e(f"[{lo:.4g}, {hi:.4g}]")}</td><td>{_badge(t.verdict)}</td>'
            f'<td class="num">{_e(f"{t.read_at:.3g} s" if t.read_at else "")}</td>'
            f'<td class="num">{_e(f"{t.edf:.3g}" if t.edf else "")}</td></tr>'
        )
    out.append("</tbody></table>")
    for caption, png in figures:
        data = base64.b64encode(png).decode("ascii")
        out.append(
            f'<figure><img alt="{_e(caption)}" src="data:image/png;base64,{data}">'
            f"<figcaption>{_e(caption)}</figcaption></figure>"
        )
    return out


def verdict_figures(report, *, asd: bool = False) -> dict[str, list[tuple[str, str, object]]]:
    """The figures of a verdict report: {channel id: [(file tag, caption, Figure), ...]};
    ``asd``: the spectrum as an amplitude density (√ two-sided PSD, as datasheets print it)."""
    out = {}
    for ch in report.channels:
        display = channel_display(INSTRUMENT_KIND.get(ch.id.split(".", 1)[0]))
        items = [
            (
                FIGURE_TAGS[0],
                f"{ch.id}: overlapping Allan deviation with its {100 * ch.curve.confidence:.0f} % "
                "band, the datasheet limit curve and the fitted model",
                verdict_allan_figure(ch, display=display),
            )
        ]
        if ch.psd is not None:
            items.append(
                (
                    FIGURE_TAGS[1],
                    f"{ch.id}: "
                    + ("amplitude spectral density (√ two-sided PSD)" if asd else "one-sided PSD")
                    + " of the record (Welch), the datasheet limit model and the fitted model",
                    verdict_psd_figure(ch, display=display, asd=asd),
                )
            )
        out[ch.id] = items
    return out


def _figure_path(target: pathlib.Path, channel_id: str, tag: str) -> pathlib.Path:
    return target.with_name(f"{target.stem}-{channel_id}-{tag}.png")


def check_verdict_html(path, channel_ids, *, force: bool = False) -> None:
    """Refuse, before any work, an HTML report whose page or figure files (for any of
    ``channel_ids``) exist (unless ``force``) or whose folder is missing.

    Parameters
    ----------
    path : path-like
        The HTML page; the figures go beside it (:func:`write_verdict_html`).
    channel_ids : iterable of str
        Every channel that may get figures (e.g. the datasheet's).
    """
    target = pathlib.Path(path)
    check_writable(target, force=force)
    for cid in channel_ids:
        for tag in FIGURE_TAGS:
            check_writable(_figure_path(target, cid, tag), force=force)


def write_verdict_html(
    report,
    path,
    *,
    force: bool = False,
    png: bool = True,
    title: str | None = None,
    intro: list[str] | None = None,
    asd: bool = False,
) -> list[str]:
    """Write the HTML report and, beside it, one PNG per figure (``<stem>-<channel>-<tag>.png``;
    ``asd``: the spectra as amplitude densities, :func:`verdict_figures`).

    Returns
    -------
    list of str
        The files written, the HTML page first.
    """
    target = pathlib.Path(path)
    check_writable(target, force=force)
    figs = verdict_figures(report, asd=asd)
    pngs: dict[str, list[tuple[str, bytes]]] = {}
    files: list[tuple[pathlib.Path, bytes]] = []
    for cid, items in figs.items():
        for tag, caption, fig in items:
            data = figure_png(fig)
            pngs.setdefault(cid, []).append((caption, data))
            files.append((_figure_path(target, cid, tag), data))
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
