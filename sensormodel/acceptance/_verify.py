"""Verification: a recording or its Allan curves against a datasheet (private to
:mod:`sensormodel.acceptance`).

The path of a recording: the unit check (each verified channel in the SI unit of its
instrument's quantity), :func:`sensormodel.pipeline.analyse` (the longest clean segment of each
channel, its Allan deviation and its Welch spectrum for the figures), then per channel the
identification (:func:`sensormodel.identify.fit`), the verdict of each limited term with its
test at the limit (:func:`sensormodel.identify.limit_test`), and the whole-curve check.
"""

from __future__ import annotations

import math
import multiprocessing
import os
import threading
import time
import zlib
from collections.abc import Mapping, Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import replace
from typing import Any

import numpy as np

from .. import identify, pipeline, validate
from ..confidence import allan_edf, dof_for_precision, dof_from_interval, required_duration
from ..datasheet import AxisSpec, Datasheet, load_datasheet
from ..errors import AnalysisError, DatasheetError
from ..quantities import INSTRUMENT_KIND, SI_LABEL
from ._limits import (
    UNLIMITED_SHARE_MAX,
    SpecLimit,
    _fit_reading,
    fit_terms,
    limit_channel,
    limited_share,
    output_filter,
    spec_limits,
)
from ._plan import _term_curves, reading_tau
from ._verdicts import (
    DEFAULT_CONFIDENCE,
    DEFAULT_POWER,
    DEFAULT_PRECISION,
    ChannelVerdict,
    TermVerdict,
    VerdictReport,
    curve_check,
    decide,
)

__all__ = ["verify_curve", "verify"]

#: Below this many samples in all (channels together) the identification runs in this
#: process: starting worker processes would take longer than the work.
_PARALLEL_MIN_SAMPLES = 1 << 17
#: A limit more than this many times as far from the estimate (log scale) as the farthest
#: bootstrap record is decided without the test at the limit (it would only cost time: a unit
#: at its limit is that far in a small fraction of records: 1 in 400 in each of the seeded
#: at-limit studies of white noise and of flicker between white noise and a random walk).
_SKIP_MARGIN = 2.0
#: Mixed into the seed of each term's test at the limit (any fixed number: it keeps the test's
#: records apart from the identification's).
_LIMIT_TEST_SALT = 0x5EED7E57
#: Bins per decade of the spectrum shown beside a verdict.
_SPECTRUM_BINS = 20

Reasons = list[tuple[str, dict[str, Any]]]


# ---------------------------------------------------------------------------------------------
# One channel
# ---------------------------------------------------------------------------------------------


def verify_curve(
    curve: Any,
    ax: AxisSpec,
    *,
    duration: float,
    confidence: float = DEFAULT_CONFIDENCE,
    against: str = "max",
    power: float = DEFAULT_POWER,
    identification: Any | None = None,
    seed: int | None = None,
    n_boot: int | None = None,
) -> ChannelVerdict:
    """Verdicts for one channel from its measured Allan curve.

    Parameters
    ----------
    curve : AllanCurve
        Overlapping Allan deviation of the channel (SI, interval at ``confidence``).
    ax : AxisSpec
        The channel's datasheet spec.
    duration : float
        Length of the record the curve comes from [s].
    confidence : float
        Two-sided confidence of the term intervals (default 0.9).
    against : {"max", "typ"}
        The datasheet column used as the limit.
    power : float
        Probability of a decided verdict at the required length (default 0.8).
    identification : Identification, optional
        A fit already made; default :func:`sensormodel.identify.fit` of ``curve`` with the
        datasheet's term types (and white, flicker, random walk).
    seed : int, optional
        Seed passed to the identification.
    n_boot : int, optional
        Bootstrap records of the identification (default its own, 200).
    """
    limits, skipped = spec_limits(ax, against=against)
    rate = float(curve.sample_rate)
    if identification is None:
        bandwidth, order = output_filter(ax)
        identification = identify.fit(
            curve,
            terms=list(fit_terms(ax)),
            confidence=confidence,
            seed=seed,
            n_boot=n_boot,
            bandwidth=bandwidth,
            filter_order=order,
        )
    reading = _Reading(identification, curve, duration, confidence)
    verdicts = [
        _term_verdict(
            spec,
            identification,
            reading,
            duration=duration,
            confidence=confidence,
            power=power,
            seed=None if seed is None else _test_seed(seed, index),
        )
        for index, spec in enumerate(limits)
    ]
    lim_ch = limit_channel(ax, rate=rate, against=against)
    tau = np.asarray(curve.tau)
    share = limited_share(ax, tau, rate=rate, against=against)
    check = curve_check(
        curve,
        lim_ch.allan_deviation(tau),
        confidence=confidence,
        checked=share >= 1.0 - UNLIMITED_SHARE_MAX,
    )
    return ChannelVerdict(
        id=ax.channel_id,
        unit=SI_LABEL[INSTRUMENT_KIND[ax.instrument]],
        terms=tuple(verdicts),
        unverified=tuple(skipped),
        curve=check,
        limit_channel=lim_ch,
        identification=identification,
        allan=curve,
        duration=float(duration),
    )


def _unresolved(ft: Any) -> dict[str, Any] | None:
    """The numbers of a fitted term's ``time_constant_not_resolved`` reason, or None."""
    for code, values in getattr(ft, "reasons", ()):
        if code == "time_constant_not_resolved":
            return dict(values)
    return None


def _fitted(identification: Any, term: str, parameter: str) -> Any | None:
    for ft in identification.terms:
        if ft.term == term and ft.parameter == parameter:
            return ft
    return None


def _term_verdict(
    spec: SpecLimit,
    identification: Any,
    reading: _Reading,
    *,
    duration: float,
    confidence: float,
    power: float,
    seed: int | None,
) -> TermVerdict:
    """The verdict on one limited term: the interval's call, its test at the limit, and for an
    inconclusive term the record length that would decide it."""
    name, parameter, factor = _fit_reading(spec.type, {ft.term for ft in identification.terms})
    ft = _fitted(identification, name, parameter)
    if ft is None:
        raise AnalysisError(
            f"{spec.channel}: the identification has no {name} {parameter}",
            f"an estimate of every term the datasheet limits ({spec.field})",
        )
    est = float(ft.estimate) * factor
    low = float(ft.low) * factor
    high = float(ft.high) * factor
    verdict = decide(low, high, spec.limit)
    req: float | None = None
    reasons: Reasons = []
    test: dict[str, Any] | None = None
    unresolved = _unresolved(ft)
    if verdict == "pass" and unresolved is not None:
        # the rising side of the curve fixes σ²/T only: σ's upper end is no bound, so a pass
        # was not checked (a fail stands: σ's lower end is one)
        verdict, high = "inconclusive", max(high, math.nextafter(spec.limit, math.inf))
        reasons.append(("time_constant_not_resolved", unresolved))
    if verdict != "inconclusive":
        verdict, low, high, test, reasons = _confirm_at_limit(
            identification, ft, name, spec.limit, factor, verdict, low, high, seed=seed
        )
    dof = dof_from_interval(low, high, confidence)
    if verdict == "inconclusive":
        req, dof, why = required_duration(
            est,
            spec.limit,
            low=low,
            high=high,
            duration=duration,
            confidence=confidence,
            power=power,
        )
        if unresolved is not None or (
            test is not None
            and test.get("confirmed") is False
            and (req is None or req <= duration * (1.0 + 1e-9))
        ):
            # the interval's width, which the test just refuted, is no guide to the length
            req, why = None, "length_unknown"
        reasons.append((why, {}))
    read_at, edf = reading.at(name)
    return TermVerdict(
        spec=spec,
        estimate=est,
        low=low,
        high=high,
        confidence=confidence,
        verdict=verdict,
        required_duration=req,
        read_at=read_at,
        edf=edf,
        dof=dof,
        supported=bool(getattr(ft, "supported", True)),
        reasons=tuple(reasons),
        limit_test=test,
    )


class _Reading:
    """Where the fitted model's terms are read (:func:`reading_tau`) and the EDF there; the
    model's term curves are computed once per channel, on first use."""

    def __init__(self, identification: Any, curve: Any, duration: float, confidence: float):
        model = identification.to_channel() if hasattr(identification, "to_channel") else None
        self.terms = [t for t in getattr(model, "terms", ()) if t.type != "random_constant"]
        self.curve = curve
        self.rate = float(curve.sample_rate)
        self.duration = duration
        self.dof = dof_for_precision(DEFAULT_PRECISION, confidence)
        self.curves: Any = None

    def at(self, name: str) -> tuple[float | None, float | None]:
        """(τ [s] the term of type ``name`` is read at, EDF of this record there), or Nones."""
        idx = next((i for i, t in enumerate(self.terms) if t.type == name), None)
        if idx is None:
            return None, None
        if self.curves is None:
            self.curves = _term_curves(
                self.terms, rate=self.rate, tau_min=1.0 / self.rate, tau_max=1e7
            )
        try:
            r = reading_tau(self.terms, idx, rate=self.rate, dof=self.dof, curves=self.curves)
        except AnalysisError:
            return None, None
        return r.tau, _edf_at(self.curve, r.tau, r.alpha, self.duration)


def _test_seed(seed: int, index: int) -> int:
    """The seed of the test at the limit of the ``index``-th term of a channel."""
    return int(np.random.SeedSequence([int(seed), _LIMIT_TEST_SALT, index]).generate_state(1)[0])


def _confirm_at_limit(
    identification: Any,
    ft: Any,
    name: str,
    limit: float,
    factor: float,
    verdict: str,
    low: float,
    high: float,
    *,
    seed: int | None,
) -> tuple[str, float, float, dict[str, Any] | None, list[tuple[str, dict[str, Any]]]]:
    """A pass or fail call of the interval, confirmed by the test at the limit.

    The interval comes from a bootstrap around the *estimate*; the call stands only if the
    parametric bootstrap test *at the limit* (:func:`sensormodel.identify.limit_test`)
    also rejects the limit on the same side at level α = (1 − confidence)/2. Otherwise the
    verdict is ``inconclusive`` and the interval is widened to take the limit in (so that the
    reported interval and the verdict agree). The test is skipped where the limit lies more
    than :data:`_SKIP_MARGIN` times as far (log scale) from the estimate as the farthest
    bootstrap record of the interval (``details["bootstrap_low"/"bootstrap_high"]``; never for
    a Gauss-Markov term), or where the identification cannot be refitted (one made
    elsewhere): the interval's call stands.

    Returns the verdict, the interval, the test record and the reason codes.
    """
    if not hasattr(identification, "refit_state") or identification.refit_state is None:
        return verdict, low, high, {"skipped": "no_fit_state"}, []
    value = limit / factor  # the limit as the term's SI parameter
    details = getattr(ft, "details", {}) or {}
    b_low, b_high = details.get("bootstrap_low"), details.get("bootstrap_high")
    est = float(ft.estimate)
    # not for a Gauss-Markov bias: its unknown time constant makes the interval's bootstrap
    # (at the estimated T) a poor guide to what records at the limit look like
    if b_low and b_high and est > 0 and name != "gauss_markov":
        # far beyond the bootstrap: the limit is more than _SKIP_MARGIN times as far from the
        # estimate (in log) as the farthest bootstrap record went on that side
        reach = math.log(est / b_low) if verdict == "fail" else math.log(b_high / est)
        if reach > 0 and abs(math.log(value / est)) > _SKIP_MARGIN * reach:
            skipped = {"skipped": "beyond_bootstrap", "skip_margin": _SKIP_MARGIN}
            return verdict, low, high, skipped, []
    test = identify.limit_test(identification, name, value, seed=seed)
    alpha = 0.5 * (1.0 - float(identification.confidence))
    p = test.p_above if verdict == "fail" else test.p_below
    # (1 + k)/(B + 1) may equal α exactly (3/60 at 90 %), which 0.5·(1 − 0.9) misses by an ulp
    confirmed = p <= alpha * (1.0 + 1e-9)
    record: dict[str, Any] = {"p_value": p, "n_records": test.n_records, "confirmed": confirmed}
    noted = [(code, dict(values)) for code, values in test.reasons]  # e.g. the null's T at an edge
    if confirmed:
        return verdict, low, high, record, noted
    why = {
        "side": "above" if verdict == "fail" else "below",
        "p_value": p,
        "alpha": alpha,
        "n_records": test.n_records,
    }
    # the limit inside the widened interval (decide() calls an interval ending at the limit
    # from below a pass)
    if verdict == "fail":
        low = min(low, limit)
    else:
        high = max(high, math.nextafter(limit, math.inf))
    return "inconclusive", low, high, record, [("limit_test_not_confirmed", why), *noted]


def _edf_at(curve: Any, tau: float, alpha: int, duration: float) -> float | None:
    """EDF of the Allan variance at τ in this record: the curve's own where τ lies within its
    grid (nearest point in log τ), else Greenhall & Riley's for a τ the record allows."""
    taus = np.asarray(curve.tau, dtype=float)
    edfs = getattr(curve, "edf", None)
    if edfs is not None and taus.size and taus[0] <= tau <= taus[-1]:
        i = int(np.argmin(np.abs(np.log(taus / tau))))
        return float(np.asarray(edfs)[i])
    if tau * 2.0 <= duration:
        return allan_edf(alpha, tau, duration, float(curve.sample_rate))
    return None


# ---------------------------------------------------------------------------------------------
# A recording, or curves, against a datasheet
# ---------------------------------------------------------------------------------------------


def verify(
    source: Any,
    datasheet: Datasheet | str,
    *,
    confidence: float = DEFAULT_CONFIDENCE,
    against: str = "max",
    power: float = DEFAULT_POWER,
    channels: Sequence[str] | None = None,
    duration: float | None = None,
    seed: int | None = None,
    n_boot: int | None = None,
    workers: int | None = None,
    progress: Any = None,
) -> VerdictReport:
    """Acceptance verdicts of a recording (or of Allan curves) against a datasheet.

    Parameters
    ----------
    source : Recording, or mapping of channel id to AllanCurve
        A :class:`~sensormodel.recording.Recording` (its channels are analysed by
        :func:`sensormodel.pipeline.analyse`, the longest clean segment of each, at
        ``confidence``; each channel must be in the SI unit of its instrument's quantity), or
        curves already computed (then ``duration`` is needed).
    datasheet : Datasheet or path
        The datasheet the unit is accepted against.
    confidence : float
        Two-sided confidence of every interval (default 0.9: each one-sided error ≤ 5 %).
    against : {"max", "typ"}
        The datasheet column used as the limit.
    power : float
        Probability of a decided verdict at the required recording length (default 0.8).
    channels : sequence of str, optional
        Only these channel ids.
    duration : float, optional
        Record length [s] (for curves; a Recording knows its own).
    seed : int, optional
        Seed for the identification's random parts.
    n_boot : int, optional
        Bootstrap records of the identification (default its own, 200); fewer are quicker.
    workers : int, optional
        Identify the channels in this many processes (at most the usable CPUs, and only for
        records of at least 2^17 samples in all; default one, in this process). The results
        do not depend on it.
    progress : callable, optional
        Called as ``progress(channel_id)`` for each channel once its Allan deviation is
        computed, before its identification.

    Returns
    -------
    VerdictReport
    """
    validate.probability(confidence, "confidence", example="0.9")
    validate.probability(power, "power", example="0.8")
    ds = datasheet if isinstance(datasheet, Datasheet) else load_datasheet(datasheet)
    specs = {_key(ax.channel_id): ax for ax in ds.channels()}
    if isinstance(source, Mapping):
        available = {_key(cid): cid for cid in source}
        rec_info: dict[str, Any] = {"file": None}
    else:
        available = {_key(cid): cid for cid in source.channels}
        rec_info = {
            "file": getattr(source, "source", None),
            "duration": float(source.duration),
            "sample_rate": float(source.rate),
            "samples": int(source.n_samples),
        }
    order, notes = _channel_order(specs, available, channels, rec_info.get("file"))
    notes += _limits_not_checked(specs, available, channels, against)
    if isinstance(source, Mapping):
        jobs, longest = _curve_jobs(source, available, order, specs, duration)
        rec_info["duration"] = longest or None
    else:
        jobs = _recording_jobs(source, available, order, specs, confidence, notes)
    options = {"confidence": confidence, "against": against, "power": power, "n_boot": n_boot}
    if progress is not None:
        for job in jobs:
            progress(job[1].channel_id)
    cvs = _run_jobs(jobs, seed, options, workers)
    results = [replace(cv, psd=job[3]) for cv, job in zip(cvs, jobs, strict=True)]
    if not any(c.terms for c in results):
        raise DatasheetError(
            f"no term of the datasheet has a {against} value to verify against",
            "terms printed with a max value ({ typ = …, max = … }), or --against typ",
            source=ds.source,
        )
    return VerdictReport(
        channels=tuple(results),
        confidence=float(confidence),
        against=against,
        power=float(power),
        datasheet={
            "file": ds.source,
            "sha256": ds.sha256,
            "sensor": {k: v for k, v in ds.sensor.items() if isinstance(v, str)},
        },
        recording=rec_info,
        notes=tuple(notes),
    )


def _key(channel_id: str) -> str:
    return channel_id.replace("_", ".").lower()


def _channel_order(
    specs: Mapping[str, AxisSpec],
    available: Mapping[str, str],
    channels: Sequence[str] | None,
    source: str | None,
) -> tuple[list[str], Reasons]:
    """The channels verified (datasheet order) and the notes on those left out."""
    wanted = [_key(c) for c in channels] if channels else None
    order = [k for k in specs if k in available and (wanted is None or k in wanted)]
    if wanted:
        unknown = [c for c in wanted if c not in specs or c not in available]
        if unknown:
            raise AnalysisError(
                f"channel(s) {', '.join(unknown)} not in both the recording and the datasheet",
                f"one of {', '.join(k for k in specs if k in available) or '(none in common)'}",
            )
    missing = [k for k in specs if k not in available]
    extra = [k for k in available if k not in specs]
    if not order:
        raise AnalysisError(
            "the recording and the datasheet have no channel in common (recording: "
            f"{', '.join(available) or 'none'}; datasheet: {', '.join(specs)})",
            "recording columns named by channel id (gyro.x …) or mapped with --channel",
            source=source,
        )
    notes: Reasons = []
    if missing and wanted is None:
        notes.append(("channels_missing", {"channels": tuple(missing)}))
    if extra:
        notes.append(("channels_extra", {"channels": tuple(extra)}))
    return order, notes


def _limits_not_checked(
    specs: Mapping[str, AxisSpec],
    available: Mapping[str, str],
    channels: Sequence[str] | None,
    against: str,
) -> Reasons:
    """The datasheet limits of the channels missing from the recording (reason
    ``limits_not_checked``): a limit that was not checked keeps the overall verdict from
    ``pass`` (:attr:`VerdictReport.overall`). Channels left out on purpose (``channels``) are
    not counted: the report names the channels verified."""
    if channels:
        return []
    unchecked = [
        f"{lim.channel} {lim.key}"
        for key, ax in specs.items()
        if key not in available
        for lim in spec_limits(ax, against=against)[0]
    ]
    return [("limits_not_checked", {"terms": tuple(unchecked)})] if unchecked else []


def _curve_jobs(
    curves: Mapping[str, Any],
    available: Mapping[str, str],
    order: list[str],
    specs: Mapping[str, AxisSpec],
    duration: float | None,
) -> tuple[list[tuple[Any, AxisSpec, float, Any]], float]:
    """(curve, spec, record length, spectrum) of each verified channel given as a curve, and
    the longest record length of all the curves [s]."""
    lengths = {}
    for k, cid in available.items():
        length = duration if duration is not None else getattr(curves[cid], "duration", None)
        if length is None:
            raise AnalysisError(
                f"the Allan curve of {cid} does not say how long its record was",
                "duration [s] (or curves that carry n_samples)",
            )
        lengths[k] = float(length)
    jobs = [(curves[available[k]], specs[k], lengths[k], None) for k in order]
    return jobs, max(lengths.values(), default=0.0)


def _recording_jobs(
    recording: Any,
    available: Mapping[str, str],
    order: list[str],
    specs: Mapping[str, AxisSpec],
    confidence: float,
    notes: Reasons,
) -> list[tuple[Any, AxisSpec, float, Any]]:
    """Check the units, analyse the verified channels of a recording (one pipeline) and note
    the channels of which clean segments were left out."""
    for k in order:
        _check_unit(recording, available[k], specs[k])
    analysis = pipeline.analyse(
        recording,
        channels=[available[k] for k in order],
        confidence=confidence,
        spectrum_bins=_SPECTRUM_BINS,
    )
    jobs = []
    for k, ch in zip(order, analysis.channels, strict=True):
        ax = specs[k]
        curve = ch.curve
        if curve.channel != ax.channel_id:
            curve = replace(curve, channel=ax.channel_id)
        for code, values in ch.reasons:
            if code == "segments_left_out":
                left = {
                    "channel": ax.channel_id,
                    "segments": ch.n_segments,
                    "duration": ch.duration,
                    "recording_duration": float(recording.duration),
                    **values,
                }
                notes.append((code, left))
        jobs.append((curve, ax, ch.duration, ch.psd))
    return jobs


def _check_unit(recording: Any, cid: str, ax: AxisSpec) -> None:
    """A verified channel is in the SI unit of its instrument's quantity."""
    unit = recording.units[cid]
    si_unit = SI_LABEL[INSTRUMENT_KIND[ax.instrument]]
    if unit != si_unit:
        raise AnalysisError(
            f"channel {cid} is in '{unit}'",
            f"a {ax.instrument} channel in a physical unit ({si_unit}, or a unit in the "
            "column header / --unit) to compare with the datasheet",
            source=recording.source,
        )


def _run_jobs(
    jobs: list[tuple[Any, AxisSpec, float, Any]],
    seed: int | None,
    options: dict[str, Any],
    workers: int | None,
) -> list[ChannelVerdict]:
    """Verify each channel, in worker processes where it pays (results do not depend on it)."""
    total = sum(int(getattr(c, "n_samples", None) or 0) for c, *_ in jobs)
    n_workers = _worker_count(workers, len(jobs)) if total >= _PARALLEL_MIN_SAMPLES else 1
    if n_workers <= 1:
        return [
            _verify_job(curve, ax, length, _channel_seed(seed, ax), options)
            for curve, ax, length, _ in jobs
        ]
    context = multiprocessing.get_context("spawn")
    pool = ProcessPoolExecutor(
        max_workers=n_workers,
        mp_context=context,
        initializer=exit_with_parent,
        initargs=(os.getpid(),),
    )
    try:
        futures = [
            pool.submit(_verify_job, curve, ax, length, _channel_seed(seed, ax), options)
            for curve, ax, length, _ in jobs
        ]
        results = [f.result() for f in futures]
    except BaseException:  # Ctrl-C, SIGTERM, an error: do not wait for the other channels
        pool.shutdown(wait=False, cancel_futures=True)
        raise
    pool.shutdown()
    return results


def exit_with_parent(parent: int, period: float = 0.5) -> None:
    """Worker-process initializer: end this process when its parent ``parent`` (pid) is gone.

    A command stopped by Ctrl-C, SIGTERM or SIGKILL would otherwise leave its workers running
    under init with their memory; each worker polls its parent id every ``period`` s on a daemon
    thread (a POSIX orphan is re-parented, so its parent id changes).
    """

    def watch() -> None:
        while os.getppid() == parent:
            time.sleep(period)
        os._exit(1)

    threading.Thread(target=watch, name="exit-with-parent", daemon=True).start()


def _worker_count(workers: int | None, n_jobs: int) -> int:
    """Processes for the identification: ``workers`` (None or 1: none), at most one per job
    and per usable CPU."""
    if workers is None or workers <= 1 or n_jobs <= 1:
        return 1
    return max(1, min(int(workers), n_jobs, validate.usable_cpus()))


def _channel_seed(seed: int | None, ax: AxisSpec) -> int | None:
    """A seed per channel derived from ``seed`` and the channel id (independent streams)."""
    if seed is None:
        return None
    key = zlib.crc32(ax.channel_id.encode("utf-8"))
    return int(np.random.SeedSequence(seed, spawn_key=(key,)).generate_state(1)[0])


def _verify_job(
    curve: Any, ax: AxisSpec, length: float, seed: int | None, options: dict[str, Any]
) -> ChannelVerdict:
    """One channel's verification (a picklable job for a worker process)."""
    return verify_curve(curve, ax, duration=length, seed=seed, **options)
