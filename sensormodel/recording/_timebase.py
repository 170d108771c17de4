"""The time base of a recording and the problems in its data: findings and clean segments.

The checks find and report; they never fill or drop samples. :func:`time_base` reads the time
column (rate from its regular steps; gaps, backward and repeated time stamps), :func:`data_findings`
one data column (non-finite, saturated and constant runs), :func:`resolve_rate` makes the rate
sources agree, and :func:`fail_or_split` either refuses the record at its first problem or cuts
each channel into the clean segments between problems.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np
import numpy.typing as npt

from ..errors import RecordingError
from ._formats import RATE_RTOL, fmt, rates_agree
from ._results import FATAL_KINDS, MAX_FINDINGS, Finding, Segment

__all__ = [
    "GAP_FACTOR",
    "APART_SIGMAS",
    "COARSE_STEPS",
    "range_findings",
    "time_base",
    "data_findings",
    "resolve_rate",
    "sort_findings",
    "fail_or_split",
]

#: A time step larger than this multiple of the median step is a gap.
GAP_FACTOR = 1.5
#: A run at the data's maximum or minimum is saturation only where that extreme stands this many
#: robust standard deviations (1.4826 × the median absolute deviation; IEEE/ISO common practice
#: for Gaussian data) from the median: a static record's noise reaches ~6 σ in 10⁹ samples,
#: while a clipped output sits at full scale. A coarsely quantized channel's extremes are a
#: few counts from its median: not saturation.
APART_SIGMAS = 8.0
#: A channel whose values lie on a lattice of step q with a robust spread below this many steps
#: is coarsely quantized: its noise (and a slow bias wander) moves it by a count or two, so it
#: holds one count for long stretches while live, and runs of one value are not judged as a
#: stuck sensor there (the project's own rule; it is said in a note).
COARSE_STEPS = 3.0
#: Most samples the robust spread and the lattice of a column are judged on.
_SPREAD_SAMPLES = 1 << 21

_KIND_ORDER = {k: i for i, k in enumerate(FATAL_KINDS)}
_SPLIT_HINT = "or --gaps split to analyse the clean segments"
_EXPECTED = {
    "gap": f"uniformly sampled time, {_SPLIT_HINT}",
    "non_monotonic": f"increasing time, {_SPLIT_HINT}",
    "duplicate_time": f"increasing time, {_SPLIT_HINT}",
    "non_finite": f"finite samples, {_SPLIT_HINT}",
    "constant": f"a live signal, {_SPLIT_HINT}",
    "saturated": f"samples within the sensor's range, {_SPLIT_HINT}",
}


def _runs(mask: npt.NDArray[np.bool_]) -> tuple[npt.NDArray[np.intp], npt.NDArray[np.intp]]:
    """Starts and lengths of the runs of True in a 1-D boolean array."""
    if not mask.any():
        empty = np.zeros(0, dtype=np.intp)
        return empty, empty
    m = np.zeros(len(mask) + 2, dtype=np.int8)
    m[1:-1] = mask
    d = np.diff(m)
    starts = np.flatnonzero(d == 1)
    stops = np.flatnonzero(d == -1)
    return starts, stops - starts


def _emit(
    findings: list[Finding],
    kind: str,
    channel: str,
    runs: tuple[np.ndarray, np.ndarray],
    text: Callable[[int, int], str],
    where: Callable[[int, int], str],
    *,
    offset: int = 0,
) -> None:
    """One Finding per run (start + offset, length); past ``MAX_FINDINGS`` runs, one more
    Finding stands for all the rest (its ``count``)."""
    starts, lengths = runs
    for s0, ln0 in zip(starts[:MAX_FINDINGS], lengths[:MAX_FINDINGS], strict=True):
        s, ln = int(s0) + offset, int(ln0)
        findings.append(Finding(kind, channel, s, text(s, ln), ln, where(s, ln)))
    rest = len(starts) - MAX_FINDINGS
    if rest > 0:
        s, ln = int(starts[MAX_FINDINGS]) + offset, int(lengths[MAX_FINDINGS])
        findings.append(
            Finding(
                kind,
                channel,
                s,
                f"{text(s, ln)}, and {rest - 1} more such stretches after it",
                ln,
                where(s, ln),
                count=rest,
            )
        )


def _mask(n: int, starts: np.ndarray, lengths: np.ndarray) -> np.ndarray:
    """Boolean mask of n samples, True inside the runs."""
    d = np.zeros(n + 1, dtype=np.int64)
    np.add.at(d, starts, 1)
    np.add.at(d, starts + lengths, -1)
    return np.cumsum(d[:-1]) > 0


def time_base(
    t: np.ndarray, where: Callable[[int, int], str], *, offset: float = 0.0
) -> tuple[list[Finding], float | None, np.ndarray]:
    """Findings of the time column, the rate from its regular steps, and the break mask
    (True where a sample does not follow its predecessor by a regular step).

    ``t`` is in seconds, relative to ``offset`` [s] (messages show ``t + offset``), so that
    the steps of epoch stamps are not rounded to the resolution of their size."""
    n = len(t)
    findings: list[Finding] = []
    fin = np.isfinite(t)
    _emit(
        findings,
        "non_finite",
        "time",
        _runs(~fin),
        lambda s, ln: "the time column holds NaN, an empty field or an infinite value",
        where,
    )
    brk = np.zeros(n, dtype=bool)
    dt = np.diff(t)
    okdt = np.isfinite(dt)
    pos = okdt & (dt > 0)
    if not pos.any():
        return findings, None, brk
    med = float(np.median(dt[pos]))
    back = okdt & (dt < 0)
    dup = okdt & (dt == 0)
    gap = okdt & (dt > GAP_FACTOR * med)

    def backwards(i: int, ln: int) -> str:
        text = f"time goes backwards, from {fmt(t[i - 1] + offset)} s to {fmt(t[i] + offset)} s"
        return text + (f" (in {ln} consecutive steps)" if ln > 1 else "")

    def repeated(i: int, ln: int) -> str:
        text = f"time {fmt(t[i] + offset)} s repeats the previous sample's"
        return text + (f" ({ln + 1} samples share it)" if ln > 1 else "")

    def gapped(i: int, ln: int) -> str:
        if ln > 1:
            return f"{ln} time steps longer than {GAP_FACTOR} × the median {fmt(med)} s"
        step = float(dt[i - 1])
        missing = max(1, round(step / med) - 1)
        return (
            f"time step of {fmt(step)} s where the median step is {fmt(med)} s "
            f"(about {missing} samples missing)"
        )

    _emit(findings, "non_monotonic", "time", _runs(back), backwards, where, offset=1)
    _emit(findings, "duplicate_time", "time", _runs(dup), repeated, where, offset=1)
    _emit(findings, "gap", "time", _runs(gap), gapped, where, offset=1)
    bad_step = back | dup | gap
    brk[1:] = bad_step
    good = pos & ~gap
    if fin.all() and not bad_step.any():
        rate = (n - 1) / float(t[-1] - t[0])
    else:
        rate = int(good.sum()) / float(dt[good].sum())
    return findings, rate, brk


def data_findings(
    x: np.ndarray,
    name: str,
    channel: str,
    where: Callable[[int, int], str],
    *,
    constant_run: int,
    saturation_run: int,
) -> tuple[list[Finding], np.ndarray]:
    """Findings of one data column and the mask of its flagged samples."""
    findings: list[Finding] = []
    fin = np.isfinite(x)
    bad = ~fin
    if not fin.all():
        inf = np.isinf(x)

        def missing(s: int, ln: int) -> str:
            what = "an infinite value" if inf[s : s + ln].all() else "NaN or an empty field"
            return f"column '{name}' holds {what}" + (
                f" in {ln} consecutive samples" if ln > 1 else ""
            )

        _emit(findings, "non_finite", channel, _runs(~fin), missing, where)
    if not fin.any() or len(x) < 2:
        return findings, bad
    hi = float(np.max(x, where=fin, initial=-np.inf))
    lo = float(np.min(x, where=fin, initial=np.inf))
    saturated_starts: list[np.ndarray] = []
    spread = _Spread(x, fin)
    if saturation_run > 0 and hi > lo:
        for value, label in ((hi, "maximum"), (lo, "minimum")):
            starts, lengths = _runs(x == value)
            keep = lengths >= saturation_run
            starts, lengths = starts[keep], lengths[keep]
            if len(starts) and spread.apart(value):
                saturated_starts.append(starts)
                bad = bad | _mask(len(x), starts, lengths)

                def at_limit(s: int, ln: int, label: str = label, value: float = value) -> str:
                    return (
                        f"column '{name}' stays at its {label} {fmt(value)} for {ln} "
                        "consecutive samples (saturation)"
                    )

                _emit(findings, "saturated", channel, (starts, lengths), at_limit, where)
    if constant_run > 1:
        starts, lengths = _runs(x[1:] == x[:-1])
        lengths = lengths + 1
        keep = lengths >= constant_run
        if saturated_starts:
            keep &= ~np.isin(starts, np.concatenate(saturated_starts))
        starts, lengths = starts[keep], lengths[keep]
        if len(starts) and spread.coarse():  # a live coarse channel holds one count for long
            findings.append(
                Finding(
                    "note",
                    channel,
                    int(starts[0]),
                    f"column '{name}' is coarsely quantized (its spread is under "
                    f"{COARSE_STEPS:g} counts): runs of one value, the longest "
                    f"{int(lengths.max())} samples, are not judged as a stuck sensor",
                    int(lengths.max()),
                    where(int(starts[0]), int(lengths[0])),
                )
            )
            starts, lengths = starts[:0], lengths[:0]
        if len(starts):
            bad = bad | _mask(len(x), starts, lengths)

            def stuck(s: int, ln: int) -> str:
                return (
                    f"column '{name}' holds the same value {fmt(float(x[s]))} for {ln} "
                    "consecutive samples (a stuck sensor?)"
                )

            _emit(findings, "constant", channel, (starts, lengths), stuck, where)
    return findings, bad


class _Spread:
    """The robust centre and spread of one column's finite samples and the lattice of its
    values, computed only when a candidate run asks, from at most :data:`_SPREAD_SAMPLES`
    evenly spaced samples (a long record is neither copied nor sorted whole)."""

    def __init__(self, x: np.ndarray, fin: np.ndarray) -> None:
        self.x, self.fin = x, fin
        self._centre: tuple[float, float] | None = None

    def _sample(self) -> np.ndarray:
        step = max(1, len(self.x) // _SPREAD_SAMPLES)
        return np.asarray(self.x[::step][self.fin[::step]], dtype=float)

    def _stats(self) -> tuple[float, float]:
        if self._centre is None:
            v = self._sample()
            med = float(np.median(v))
            sigma = 1.4826 * float(np.median(np.abs(v - med)))
            if sigma == 0.0:  # most samples on one count: the plain standard deviation
                sigma = float(np.std(v))
            self._centre = (med, sigma)
        return self._centre

    def apart(self, value: float) -> bool:
        """Whether ``value`` stands :data:`APART_SIGMAS` robust σ from the median."""
        med, sigma = self._stats()
        return abs(value - med) > APART_SIGMAS * sigma

    def coarse(self) -> bool:
        """Whether the values lie on a lattice whose step is over 1/:data:`COARSE_STEPS` of the
        robust spread (one value alone: not coarse, a constant column)."""
        levels = np.unique(self._sample())
        if len(levels) < 2 or len(levels) > 4096:
            return False
        steps = np.diff(levels)
        step = float(steps.min())
        on_lattice = np.allclose(steps / step, np.rint(steps / step), rtol=0.0, atol=1e-6)
        return bool(on_lattice) and self._stats()[1] < COARSE_STEPS * step


def range_findings(
    x: np.ndarray,
    full_scale: float,
    name: str,
    channel: str,
    where: Callable[[int, int], str],
) -> tuple[list[Finding], np.ndarray]:
    """Saturation against a declared range: the samples at or beyond ±``full_scale`` (the same
    unit as ``x``, e.g. the datasheet's ``measurement_range`` in SI), and their mask."""
    at = np.abs(x) >= full_scale
    if not at.any():
        return [], at
    findings: list[Finding] = []

    def beyond(s: int, ln: int) -> str:
        return (
            f"column '{name}' is at or beyond the declared range ±{fmt(full_scale)} for {ln} "
            "consecutive sample" + ("s" if ln != 1 else "") + " (saturation)"
        )

    _emit(findings, "saturated", channel, _runs(at), beyond, where)
    return findings, at


def _segments(
    n: int,
    bad: np.ndarray,
    brk: np.ndarray,
    start_of: Callable[[int], float],
    min_segment: int,
) -> tuple[list[Segment], int]:
    """Clean segments (no bad sample, no break inside) of at least ``min_segment`` samples."""
    good = ~bad
    new = good.copy()
    new[1:] &= ~good[:-1] | brk[1:]
    starts = np.flatnonzero(new)
    bad_idx = np.flatnonzero(bad)
    nxt_start = np.append(starts[1:], n)
    j = np.searchsorted(bad_idx, starts)
    nxt_bad = np.append(bad_idx, n)[j]
    ends = np.minimum(nxt_start, nxt_bad)
    keep = ends - starts >= min_segment
    segs = [
        Segment(int(a), int(b), start_of(int(a)))
        for a, b in zip(starts[keep], ends[keep], strict=True)
    ]
    dropped = int((~keep).sum())
    return segs, dropped


def resolve_rate(
    option: float | None,
    declared: float | None,
    from_time: float | None,
    time_name: str | None,
    src: str,
) -> float:
    """The sample rate [Hz] from its sources, which must agree within :data:`RATE_RTOL`.

    Parameters
    ----------
    option : float or None
        The ``rate`` argument (``--rate``); it wins when it agrees.
    declared : float or None
        The rate the file states (sidecar, attribute, comment setting).
    from_time : float or None
        The rate of the time column's regular steps; ``time_name`` is that column's name.
    src : str
        The file, for messages.
    """
    sources = []
    if from_time is not None:
        sources.append((f"the time column '{time_name}'", from_time))
    if declared is not None:
        sources.append(("the file's stated rate", declared))
    if option is not None:
        sources.append(("--rate", option))
    if not sources:
        raise RecordingError(
            "no time column and no sample rate",
            "a column named time, t or timestamp, or --rate HZ",
            source=src,
        )
    (name0, r0) = sources[0]
    for name, r in sources[1:]:
        if not rates_agree(r0, r):
            raise RecordingError(
                f"{name0} gives {fmt(r0)} Hz but {name} gives {fmt(r)} Hz "
                f"(relative difference {abs(r - r0) / max(r, r0):.1e})",
                f"agreement within {RATE_RTOL:g}, or only one of them",
                source=src,
            )
    return option if option is not None else r0


def sort_findings(findings: list[Finding]) -> None:
    """Sort findings in place into file order (at one sample: notes, then by kind)."""
    findings.sort(key=lambda f: (f.position, _KIND_ORDER.get(f.kind, -1)))


def fail_or_split(
    findings: list[Finding],
    channels: Sequence[tuple[str, str]],
    n: int,
    *,
    gaps: str,
    bad_of: dict[str, np.ndarray],
    time_bad: np.ndarray,
    brk: np.ndarray,
    start_time: float,
    start_of: Callable[[int], float],
    min_segment: int,
    where: Callable[[int], str],
    src: str,
) -> dict[str, tuple[Segment, ...]]:
    """The segments of each channel; with ``gaps="fail"`` a problem refuses the record.

    Parameters
    ----------
    findings : list of Finding
        Every finding, sorted; ``short_segment`` findings are appended.
    channels : sequence of (channel id, column name)
    n : int
        Number of samples.
    gaps : {"fail", "split"}
    bad_of : dict
        Per channel, the mask of its flagged samples; ``time_bad`` that of the time column.
    brk : ndarray of bool
        True where a sample does not follow its predecessor by a regular step.
    start_time : float
        Time of the first sample [s]; ``start_of(i)`` that of sample ``i``.
    min_segment : int
        Shortest clean stretch kept with ``gaps="split"``.
    where : callable
        The place of a sample in the file, for messages.
    src : str
        The file, for messages.

    Raises
    ------
    RecordingError
        ``gaps="fail"`` and a fatal finding (the first, counting the rest), or a channel
        without a clean stretch of ``min_segment`` samples.
    """
    if gaps == "fail":
        fatal = [f for f in findings if f.fatal]
        if fatal:
            first = fatal[0]
            n_more = sum(f.count for f in fatal) - 1
            more = f" (and {n_more} more problems)" if n_more else ""
            raise RecordingError(
                first.detail + more, _EXPECTED[first.kind], source=src, field=where(first.position)
            )
        return {cid: (Segment(0, n, start_time),) for cid, _ in channels}
    segments: dict[str, tuple[Segment, ...]] = {}
    for cid, name in channels:
        segs, dropped = _segments(n, time_bad | bad_of[cid], brk, start_of, min_segment)
        if dropped:
            findings.append(
                Finding(
                    "short_segment",
                    cid,
                    0,
                    f"{dropped} clean stretches of column '{name}' shorter than "
                    f"{min_segment} samples left out",
                    0,
                )
            )
        if not segs:
            raise RecordingError(
                f"column '{name}' has no clean stretch of at least {min_segment} samples",
                "a recording with longer clean stretches",
                source=src,
            )
        segments[cid] = tuple(segs)
    return segments
