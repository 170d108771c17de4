"""Figures (matplotlib, no display needed): model Allan deviation and PSD, error growth.

Figures are built on :class:`matplotlib.figure.Figure` directly (no pyplot state, the Agg
canvas), so they work in scripts, tests and servers alike. Values arrive in SI; an optional
``display`` mapping gives a label and a factor per curve family for display units (the command
line builds it with :mod:`sensormodel.quantities`).
"""

from __future__ import annotations

import io
import os
import pathlib
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from ._io import atomic_path
from .errors import AnalysisError, SensorModelError
from .terms import DEFAULT_LONGEST_TIME

__all__ = [
    "allan_figure",
    "model_figure",
    "drift_figure",
    "save_figure",
    "verdict_allan_figure",
    "verdict_psd_figure",
    "figure_png",
]

#: Display spec: label of the unit, factor that multiplies the SI value.
Display = Mapping[str, tuple[str, float]]


def _new_figure(figsize: tuple[float, float], **options: Any) -> Any:
    """A matplotlib Figure on the Agg canvas (no pyplot state, no display)."""
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    return Figure(figsize=figsize, **options)


def _figure(
    rows: int,
    cols: int,
    *,
    width: float = 10.0,
    row_height: float = 3.0,
    fixed_margins: bool = False,
) -> Any:
    height = max(row_height * rows, 3.0)
    if not fixed_margins:
        fig = _new_figure((width, height), layout="constrained")
        return fig, fig.subplots(rows, cols, squeeze=False)
    fig = _new_figure((width, height))
    # fixed margins in inches: a layout engine would draw a many-panel figure twice
    fig.subplots_adjust(
        left=0.9 / width,
        right=1 - 0.25 / width,
        bottom=0.55 / height,
        top=1 - 0.35 / height,
        wspace=0.3,
        hspace=0.9 / (row_height - 0.9),
    )
    axes = fig.subplots(rows, cols, squeeze=False)
    return fig, axes


def _label(ax: Any, title: str, xlabel: str, ylabel: str) -> None:
    """Title and axis labels of a log-log panel of a report, its grid and legend."""
    ax.set_title(title)
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize="small")


def model_figure(
    model: Any,
    *,
    channels: Sequence[str] | None = None,
    display: Display | None = None,
    longest_time: float | None = None,
) -> Any:
    """Log-log Allan deviation of each term and of the sum, and the one-sided PSD, per channel.

    Parameters
    ----------
    model : NoiseModel
        The model.
    channels : sequence of str, optional
        Channel ids to show (default all).
    display : mapping, optional
        {channel id: (unit label, factor)}: ADEV is multiplied by factor, PSD by factor².
        Default: the channel's SI unit.
    longest_time : float, optional
        Largest τ shown [s] (default 10⁴ s or the longest flicker time of interest).

    Returns
    -------
    matplotlib.figure.Figure
        One row per channel: Allan deviation (left, τ from one sample period), one-sided PSD
        (right, up to the Nyquist frequency); terms dashed, their sum solid black. A flicker
        term's legend states its realization's worst Allan-deviation error.
    """
    chans = [model.channel(c) for c in channels] if channels else list(model.channels)
    fig, axes = _figure(len(chans), 2, fixed_margins=True)
    for row, ch in enumerate(chans):
        label, factor = (display or {}).get(ch.id, (ch.unit, 1.0))
        t_max = longest_time or max(
            [DEFAULT_LONGEST_TIME]
            + [t.longest_time for t in ch.terms if getattr(t, "longest_time", None)]
        )
        tau = np.geomspace(1.0 / ch.sample_rate, t_max, 200)
        f = np.geomspace(min(1e-4, 0.1 / t_max), 0.5 * ch.sample_rate, 300)
        ax_a, ax_p = axes[row]
        for term in ch.terms:
            name = term.type
            if term.type == "flicker":
                try:
                    err = term.realization_error(ch.sample_rate)
                    name = f"flicker (realization {100 * err:.1f} %)"
                except AnalysisError:  # no band: the legend just says flicker
                    name = "flicker"
            adev = term.allan_deviation(tau, sample_rate=ch.sample_rate) * factor
            if np.any(adev > 0):
                ax_a.loglog(tau, adev, "--", lw=1.2, label=name)
            psd = term.psd(f, sided="one-sided", sample_rate=ch.sample_rate) * factor**2
            if np.any(psd > 0):
                nominal = " (nominal)" if term.type == "ramp" else ""
                ax_p.loglog(f, np.where(psd > 0, psd, np.nan), "--", lw=1.2, label=name + nominal)
        total = ch.allan_deviation(tau) * factor
        if np.any(total > 0):
            ax_a.loglog(tau, total, "k-", lw=2.0, label="sum")
        total_p = ch.psd(f, sided="one-sided") * factor**2
        if np.any(total_p > 0):
            ax_p.loglog(f, np.where(total_p > 0, total_p, np.nan), "k-", lw=2.0, label="sum")
        ax_a.set_title(f"{ch.id}: Allan deviation")
        ax_a.set_xlabel("averaging time τ [s]")
        ax_a.set_ylabel(f"σ(τ) [{label}]")
        ax_p.set_title(f"{ch.id}: PSD (one-sided)")
        ax_p.set_xlabel("frequency [Hz]")
        ax_p.set_ylabel(f"S(f) [({label})²/Hz]")
        # show the sum and what matters near it: three decades below the sum's smallest value
        if np.any(total > 0):
            ax_a.set_ylim(bottom=np.min(total[total > 0]) * 1e-3)
        if np.any(total_p > 0):
            ax_p.set_ylim(bottom=np.min(total_p[total_p > 0]) * 1e-3)
        for ax in (ax_a, ax_p):
            _style(ax)
    return fig


def _style(ax: Any) -> None:
    ax.minorticks_off()  # log axes over many decades: minor ticks cost much and say little
    ax.grid(True, which="major", alpha=0.3)
    if ax.lines:
        ax.legend(fontsize="small")


def drift_figure(result: Any, *, display: Display | None = None) -> Any:
    """1σ error growth per channel: angle (gyros), velocity and position (accelerometers).

    Parameters
    ----------
    result : DriftResult
        From :func:`sensormodel.drift.drift`.
    display : mapping, optional
        {"angle" | "velocity" | "position": (unit label, factor)}; default SI (rad, m/s, m).

    Returns
    -------
    matplotlib.figure.Figure
        One row per channel, log-log; the propagated 1σ solid black, each term's closed-form
        contribution dashed.
    """
    si = {"angle": ("rad", 1.0), "velocity": ("m/s", 1.0), "position": ("m", 1.0)}
    panels = [(ch, kind) for ch in result.channels for kind in ch.values]
    # panels flow over columns (three, or two, whichever fills the rows; no empty panel)
    n = len(panels)
    cols = next((c for c in (3, 2) if n % c == 0), min(n, 3))
    rows = -(-n // cols)
    fig, axes = _figure(rows, cols, fixed_margins=True)
    for k in range(n, rows * cols):  # a last row that cannot be full: its spare cells go
        fig.delaxes(axes[k // cols][k % cols])
    for k, (ch, kind) in enumerate(panels):
        ax = axes[k // cols][k % cols]
        label, factor = (display or {}).get(kind, si[kind])
        t = ch.time
        for term, d in ch.contributions.items():
            y = d[kind] * factor
            if np.any(y > 0):
                ax.loglog(t, np.where(y > 0, y, np.nan), "--", lw=1.1, label=term)
        y = ch.values[kind] * factor
        ax.loglog(t, np.where(y > 0, y, np.nan), "k-", lw=2.0, label="total (1σ)")
        ax.set_title(f"{ch.id}: {kind} error")
        ax.set_xlabel("time since turn-on [s]")
        ax.set_ylabel(f"{kind} 1σ [{label}]")
        if np.any(y > 0):
            ax.set_ylim(bottom=np.min(y[y > 0]) * 1e-3)
        _style(ax)
    return fig


def save_figure(fig: Any, path: str | os.PathLike[str], *, force: bool = False) -> None:
    """Write a figure atomically (format from the suffix: .png, .pdf, .svg)."""
    suffix = pathlib.Path(path).suffix.lstrip(".").lower() or "png"
    with atomic_path(path, force=force) as tmp:
        fig.savefig(tmp, format=suffix, dpi=120)


# -- acceptance figures --------------------------------------------------------------------------


def _single_figure() -> tuple[Any, Any]:
    """One log-log panel of a report, fixed margins (quicker to render than a layout engine)."""
    fig = _new_figure((7.5, 4.6))
    fig.subplots_adjust(left=0.135, right=0.975, bottom=0.115, top=0.925)
    return fig, fig.subplots()


def verdict_allan_figure(verdict: Any, *, display: tuple[str, float] | None = None) -> Any:
    """Log-log Allan deviation of one channel against its datasheet limits.

    Parameters
    ----------
    verdict : ChannelVerdict
        From :func:`sensormodel.acceptance.verify`.
    display : (str, float), optional
        Unit label and the factor that multiplies SI values (default the channel's SI unit).

    Returns
    -------
    matplotlib.figure.Figure
        The measured overlapping Allan deviation (dots) with its pointwise confidence band
        (shaded), the limit curve implied by the datasheet (red, dashed), the fitted model
        (black), and the τ ranges where the limit is exceeded with confidence (red bands).
    """
    label, factor = display or (verdict.unit, 1.0)
    check = verdict.curve
    fig, ax = _single_figure()
    tau = check.tau
    ax.fill_between(tau, check.ci_low * factor, check.ci_high * factor, color="tab:blue",
                    alpha=0.22, lw=0, label=f"{100 * check.confidence:.0f} % interval")
    ax.loglog(tau, check.adev * factor, "o", ms=3.5, color="tab:blue", label="measured")
    t_fine = np.geomspace(tau[0], tau[-1], 120)
    fitted = getattr(verdict.identification, "fitted_adev", None)
    if fitted is not None:
        ax.loglog(t_fine, np.asarray(fitted(t_fine)) * factor, "k-", lw=1.6, label="fitted model")
    _mark_datasheet_values(ax, verdict, factor)
    limit = verdict.limit_channel.allan_deviation(t_fine) * factor
    # judged where the nearest measured τ (in log τ) is judged; elsewhere a reference only
    nearest = np.abs(np.log(t_fine)[:, None] - np.log(tau)[None, :]).argmin(axis=1)
    judged = check.judged[nearest]
    ax.loglog(t_fine, np.where(judged, limit, np.nan), "--", color="tab:red", lw=1.8,
              label="datasheet limit")
    if not np.all(judged):
        ax.loglog(t_fine, np.where(judged, np.nan, limit), ":", color="0.45", lw=1.6,
                  label="datasheet curve at typ values (reference, not a limit)")
    for k, (t0, t1) in enumerate(check.exceeded):
        lo, hi = t0 / 1.15, t1 * 1.15
        ax.axvspan(lo, hi, color="tab:red", alpha=0.12, lw=0,
                   label="limit exceeded" if k == 0 else None)
    _label(
        ax,
        f"{verdict.id}: Allan deviation against the datasheet ({verdict.verdict})",
        "averaging time τ [s]",
        f"σ(τ) [{label}]",
    )
    return fig


def _mark_datasheet_values(ax: Any, verdict: Any, factor: float) -> None:
    """The datasheet's own readings on an Allan figure: a white term's limit N at τ = 1 s
    (σ(1 s) = N, IEEE Std 952 Annex C) and a bias-instability limit as its floor line."""
    for tv in verdict.terms:
        spec = tv.spec
        value = spec.limit * factor
        if spec.type == "white":
            ax.loglog([1.0], [value], "v", ms=8, color="tab:red", zorder=5,
                      label=f"{spec.key} ({spec.text}) at τ = 1 s")
        elif spec.quantity == "allan_floor":
            ax.axhline(value, color="tab:red", ls=":", lw=1.2,
                       label=f"{spec.key} ({spec.text}): the floor")


def verdict_psd_figure(
    verdict: Any, *, display: tuple[str, float] | None = None, asd: bool = False
) -> Any:
    """One-sided PSD of one channel's recording, with the limit and fitted models; or, with
    ``asd``, the amplitude spectral density as datasheets print it.

    Parameters
    ----------
    verdict : ChannelVerdict
        From :func:`sensormodel.acceptance.verify`; its ``psd`` is the one-sided Welch PSD
        (:class:`~sensormodel.spectrum.PSDResult`, f [Hz], psd [u²/Hz]) of the record, or None.
    display : (str, float), optional
        Unit label and the factor that multiplies SI values; the PSD is multiplied by factor².
    asd : bool
        Draw √(two-sided PSD) [label/√Hz] instead: white noise of IEEE Std 952 density N then
        reads N, the number a datasheet prints as its noise density (its default convention).

    Returns
    -------
    matplotlib.figure.Figure
        Measured one-sided PSD (blue), the datasheet-limit model (red, dashed) and the fitted
        model (black), all one-sided (= 2 × the IEEE Std 952 two-sided PSD); or their
        two-sided amplitude densities.
    """
    label, factor = display or (verdict.unit, 1.0)

    def shown(one_sided: Any) -> Any:  # what is drawn of a one-sided PSD [u²/Hz]
        s = np.asarray(one_sided, dtype=float)
        return np.sqrt(0.5 * s) * factor if asd else s * factor**2

    fig, ax = _single_figure()
    psd = getattr(verdict, "psd", None)
    f_lo = 1.0 / max(verdict.duration, 1e-9)
    f_hi = 0.5 * verdict.rate
    if psd is not None:
        f, s = psd.f, psd.psd
        keep = f > 0
        ax.loglog(f[keep], shown(s[keep]), "-", color="tab:blue", lw=0.9,
                  label="measured (Welch)")
        if np.any(keep):
            f_lo = float(f[keep][0])
    f_grid = np.geomspace(f_lo, f_hi, 160)
    lim = shown(verdict.limit_channel.psd(f_grid, sided="one-sided"))
    ax.loglog(f_grid, np.where(lim > 0, lim, np.nan), "--", color="tab:red", lw=1.8,
              label="datasheet limit")
    to_channel = getattr(verdict.identification, "to_channel", None)
    if to_channel is not None:
        try:
            fitted = to_channel()
            s_fit = shown(fitted.psd(f_grid, sided="one-sided"))
            ax.loglog(f_grid, np.where(s_fit > 0, s_fit, np.nan), "k-", lw=1.4,
                      label="fitted model")
        except SensorModelError:  # a fitted model without a PSD is just not drawn
            pass
    _label(
        ax,
        f"{verdict.id}: "
        + ("amplitude spectral density (√ two-sided PSD)" if asd else "power spectral density "
           "(one-sided)"),
        "frequency [Hz]",
        f"√S(f) [{label}/√Hz]" if asd else f"S(f) [({label})²/Hz]",
    )
    return fig


def figure_png(fig: Any, *, dpi: int = 110) -> bytes:
    """The figure as PNG bytes (for embedding in a report)."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return buf.getvalue()

# -- Allan deviation of recordings ----------------------------------------------------------------


def allan_figure(
    curves: Sequence[Any],
    path: str | os.PathLike[str],
    *,
    labels: Sequence[str] | None = None,
    display: Display | None = None,
    title: str | None = None,
    force: bool = False,
) -> None:
    """Log-log overlapping Allan deviation of recorded channels with their confidence bands.

    One panel per unit (gyros together, accelerometers together, …), one line per curve, the
    chi-square interval of each curve shaded around it; written atomically.

    Parameters
    ----------
    curves : sequence of AllanCurve
        From :func:`sensormodel.allan.overlapping`; values in each curve's ``unit``.
    path : path-like
        The figure file (.png, .pdf or .svg, from the suffix).
    labels : sequence of str, optional
        Legend text per curve (default the channel id).
    display : mapping, optional
        {channel id: (unit label, factor)}: deviations are multiplied by factor (e.g. rad/s →
        °/h). Default: the curve's own unit.
    title : str, optional
        Figure title (e.g. the recording's name).
    force : bool
        Overwrite an existing file.
    """
    items = list(curves)
    if not items:
        raise AnalysisError("got no curves", "at least one Allan curve", field="curves")
    names = list(labels) if labels is not None else [c.channel for c in items]
    shown = [(display or {}).get(c.channel, (c.unit, 1.0)) for c in items]
    panels: dict[str, list[int]] = {}
    for k, (label, _) in enumerate(shown):
        panels.setdefault(label, []).append(k)
    fig, axes = _figure(len(panels), 1, width=7.5, row_height=4.2)
    for ax, (label, members) in zip(axes[:, 0], panels.items(), strict=True):
        for k in members:
            c, factor = items[k], shown[k][1]
            line = ax.loglog(c.tau, c.adev * factor, "o-", ms=3, lw=1.2, label=names[k])[0]
            ax.fill_between(c.tau, c.ci_low * factor, c.ci_high * factor,
                            color=line.get_color(), alpha=0.2, lw=0)
        conf = items[members[0]].confidence
        unit = f" [{label}]" if label and label != "1" else " [as recorded]"
        _label(
            ax,
            f"overlapping Allan deviation, {100 * conf:.1f} % intervals shaded",
            "averaging time τ [s]",
            f"Allan deviation σ(τ){unit}",
        )
    if title:
        fig.suptitle(title)
    save_figure(fig, path, force=force)
