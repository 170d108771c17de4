"""Commands on recordings: allan and identify read one (through :mod:`sensormodel.pipeline`,
the one recording → analysis path); simulate writes one.

Each command parses its options, calls the library and prints the result.
"""

from __future__ import annotations

import pathlib
from typing import Any

import click

from .. import plots
from .._io import atomic_writer, check_writable, write_json
from ..allan import SCHEMA_FILE, curves_to_csv, curves_to_json
from ..confidence import DEFAULT_CONFIDENCE
from ..errors import AnalysisError
from ..identify import fit_recording, to_model
from ..model import NoiseModel
from ..pipeline import SEGMENT_POLICY, RecordingAnalysis, analyse
from ..recording import cache_entries, cache_folder, cache_limit, format_of, prune_cache
from ..report import (
    allan_heading,
    allan_table,
    channel_display,
    counted,
    identify_heading,
    identify_notes,
    identify_table,
    reason_text,
    simulate_summary,
)
from ..simulate import new_seed, record_rate, run_path, samples_for, write_record
from ._app import CONTEXT, StderrBar, echo_findings, force_option, guarded
from ._options import RecordingOptions, recording_options
from ._types import (
    BOOTSTRAP_HELP,
    DURATION,
    FREQUENCY,
    RATE,
    OutputFile,
    Probability,
    TauGrid,
    check_bootstrap,
)

__all__ = ["COMMANDS"]

_TAUS_HELP = "octave (default), decade, N/decade, or T1,T2,... seconds"


def _analyse(reading: RecordingOptions, path: str, **kwargs: Any) -> RecordingAnalysis:
    """Read a recording and analyse it (the pipeline), with notes and progress on stderr."""
    rec = reading.read(path)
    echo_findings(rec)
    with StderrBar("Allan deviation") as bar:
        try:
            analysis = analyse(rec, progress=bar, **kwargs)
        except AnalysisError as exc:  # "gyro.x: got 2 samples" names the file too
            raise exc.located(source=rec.source or path) from None
    for ch in analysis:
        for code, numbers in ch.reasons:
            click.echo(f"note: {ch.channel}: {reason_text(code, numbers)} "
                       f"(--gaps {reading.gaps})", err=True)
    return analysis


def _allan_provenance(analysis: RecordingAnalysis, gaps: str) -> dict[str, Any]:
    """Where the curves come from: file, options, the analysed segment of each channel."""
    rec = analysis.recording
    segments = []
    for ch in analysis:
        seg = ch.segment
        segments.append({"id": ch.channel, "channel": ch.channel, "column": ch.column,
                         "start": seg.start, "stop": seg.stop, "start_time": seg.start_time,
                         "clean_segments": ch.n_segments,
                         "reasons": [{"code": code, **numbers} for code, numbers in ch.reasons]})
    return {
        "recording": rec.source,
        "format": rec.format,
        "increments": rec.increments,
        "gaps": gaps,
        "segment_policy": SEGMENT_POLICY,
        "segments": segments,
        "findings": [{"kind": f.kind, "channel": f.channel, "where": f.where,
                      "detail": f.detail} for f in rec.findings],
    }


@click.command("allan", context_settings=CONTEXT)
@click.argument("recording_file", metavar="REC", type=click.Path())
@recording_options
@click.option("--taus", type=TauGrid(), default=None, metavar="SPEC",
              help=f"Averaging times: {_TAUS_HELP}.")
@click.option("--confidence", type=Probability(f"{DEFAULT_CONFIDENCE:g}"),
              default=DEFAULT_CONFIDENCE, show_default=True,
              help="Two-sided confidence of the intervals.")
@click.option("-o", "--output", "output", type=OutputFile((".json", ".csv")), default=None,
              metavar="F.json|F.csv", help="Write the curves (JSON schema "
              "sensormodel/allan-curve/1, or CSV with one row per τ), SI units.")
@click.option("--plot", type=click.Path(dir_okay=False), default=None, metavar="F.png",
              help="Write a log-log figure with the confidence bands (.png, .pdf, .svg).")
@force_option
@guarded
def allan_command(recording_file: str, reading: RecordingOptions, taus: Any, confidence: float,
                  output: str | None, plot: str | None, force: bool) -> None:
    """Overlapping Allan deviation of each channel of a recording, with confidence intervals
    (chi-square, Greenhall-Riley degrees of freedom).

    REC is a CSV/TSV (units in the header: 'gyro_x [deg/s]'), NPY, NPZ or HDF5 recording.
    Deviations are in the channel's SI unit (rad/s, m/s^2) in the files and in °/h or µg in the
    table; a column without a unit stays as recorded. With --gaps split, the longest clean
    segment of each channel is analysed and the segments left out are reported.

    \b
    Example:
      sensormodel allan static.csv -o static-allan.json --plot static-allan.png
      sensormodel allan log.tsv --channel rate_z=gyro.z --unit rate_z=deg/s --rate 400 \\
          --taus 10/decade --gaps split -o log-allan.csv
    """
    for path in (output, plot):
        if path is not None:
            check_writable(path, force=force)
    analysis = _analyse(reading, recording_file, taus=taus, confidence=confidence)
    rate = analysis.recording.rate
    display = {ch.channel: channel_display(ch.quantity, ch.unit) for ch in analysis}
    click.echo("\n\n".join(
        allan_table(ch.curve, allan_heading(ch, rate, confidence), display[ch.channel])
        for ch in analysis
    ))
    curves = [ch.curve for ch in analysis]
    if output is not None:
        if pathlib.Path(output).suffix.lower() == ".json":
            doc = curves_to_json(curves)
            doc["provenance"] = _allan_provenance(analysis, reading.gaps)
            write_json(output, doc, force=force, schema=SCHEMA_FILE)
        else:
            with atomic_writer(output, force=force) as fh:
                fh.write(curves_to_csv(curves))
        click.echo(f"wrote {output}")
    if plot is not None:
        plots.allan_figure(curves, plot, display=display,
                           title=pathlib.Path(analysis.recording.source).name, force=force)
        click.echo(f"wrote {plot}")


#: identify.fit's argument names → the options that set them (for the error messages).
_FIT_OPTIONS = {"terms": "--terms", "confidence": "--confidence", "n_boot": "--bootstrap"}


def _fit_channels(analysis: RecordingAnalysis, **options: Any) -> list[Any]:
    """identify.fit_recording of the analysed channels, one progress bar over all bootstrap
    records; an argument error names the command's option."""
    with StderrBar("bootstrap") as bar:
        try:
            return fit_recording(analysis, progress=bar, **options)
        except AnalysisError as exc:  # name the option rather than the argument
            option = _FIT_OPTIONS.get(exc.field or "")
            if option is None:
                raise exc.located(source=analysis.recording.source) from None
            raise AnalysisError(exc.problem, exc.expected, field=option) from None


@click.command("identify", context_settings=CONTEXT)
@click.argument("recording_file", metavar="REC", type=click.Path())
@click.option("-o", "--output", "output", required=True, type=click.Path(dir_okay=False),
              metavar="MODEL.json", help="The noise-model JSON file to write (supported terms, "
              "each with its interval).")
@click.option("--terms", "terms", default="quantization,white,flicker,random_walk,ramp",
              show_default=True, metavar="T1,T2,...",
              help="Terms to fit, from quantization, white, flicker, gauss_markov, random_walk, "
                   "ramp (gauss_markov only when asked for).")
@click.option("--confidence", type=Probability("0.9"), default=0.9, show_default=True,
              help="Two-sided confidence of the coefficient intervals (not of the Allan "
                   "deviation's).")
@recording_options
@click.option("--taus", type=TauGrid(), default=None, metavar="SPEC",
              help=f"Averaging times of the fitted curve: {_TAUS_HELP}.")
@click.option("--bootstrap", "n_boot", type=click.IntRange(min=1), default=None, metavar="N",
              help=BOOTSTRAP_HELP)
@click.option("--seed", type=click.IntRange(min=0), default=0, show_default=True,
              help="Seed of the bootstrap (the same seed gives the same intervals).")
@click.option("--bandwidth", "bandwidth", type=FREQUENCY, default=None, metavar="FREQ",
              help="The sensor's output filter (-3 dB), e.g. '50 Hz': the white term is fitted "
                   "as white noise through it (its Allan deviation falls below the white line "
                   "at tau below about 1/bandwidth). Without it the samples are taken as "
                   "unfiltered.")
@click.option("--filter-order", "filter_order", type=click.IntRange(1, 8), default=None,
              metavar="N", help="Butterworth order of that filter (default 1).")
@force_option
@guarded
def identify_command(recording_file: str, output: str, terms: str, confidence: float,
                     reading: RecordingOptions, taus: Any, n_boot: int | None, seed: int,
                     bandwidth: float | None, filter_order: int | None, force: bool) -> None:
    """Fit noise terms to the overlapping Allan variance of each channel of a recording, with
    intervals from a parametric bootstrap, and write them as a noise model.

    The fit is non-negative weighted least squares on the Allan variance with the exact form of
    each term; terms the data cannot tell from zero are reported but left out of the model.
    Beside each fit the classical slope reading (IEEE Std 952 Annex C: white at τ = 1 s,
    random walk at τ = 3 s, flicker from the floor) is shown and flagged where it falls outside
    the interval. The model file is a normal noise model (inspect, simulate, export read it).
    With --gaps split, the longest clean segment of each channel is fitted.

    \b
    Example:
      sensormodel identify static.csv -o static-model.json
      sensormodel identify log.tsv --channel rate_z=gyro.z --unit rate_z=deg/s --rate 400 \\
          --terms white,flicker,random_walk -o unit42.json
      sensormodel identify mems.npy --bandwidth "50 Hz" --filter-order 2 -o mems-model.json
    """
    check_bootstrap(n_boot, confidence)
    check_writable(output, force=force)
    if filter_order is not None and bandwidth is None:
        raise AnalysisError("--filter-order without --bandwidth", "a --bandwidth with it",
                            field="--filter-order")
    analysis = _analyse(reading, recording_file, taus=taus)
    results = _fit_channels(analysis, terms=terms, confidence=confidence, seed=seed,
                            n_boot=n_boot, bandwidth=bandwidth, filter_order=filter_order)
    source = analysis.recording.source
    model = to_model(results, sensor={"name": f"identified from {pathlib.Path(source).name}"},
                     source=source)
    for n, ident in enumerate(results):
        if n:
            click.echo("")
        click.echo(identify_heading(ident))
        click.echo(identify_table(ident))
        for note in identify_notes(ident):
            click.echo(f"  note: {note}")
    model.save(output, force=force)
    kept = sum(len(c.terms) for c in model.channels)
    left = sum(1 for i in results for t in i.terms if not t.supported)
    click.echo(f"wrote {output}: {counted(len(model.channels), 'channel')}, "
               f"{counted(kept, 'term')}"
               + (f" ({left} not supported, left out)" if left else ""))


@click.command("simulate", context_settings=CONTEXT)
@click.argument("model_file", metavar="MODEL", type=click.Path(dir_okay=False))
@click.option("--duration", "duration", type=DURATION, required=True, metavar="T",
              help="Record length: seconds, or a time with its unit ('600 s', '2 h', '1 d').")
@click.option("--rate", type=RATE, default=None, metavar="HZ",
              help="Sample rate [Hz] (default: the channels' common sample rate).")
@click.option("--seed", type=click.IntRange(min=0), default=None,
              help="Seed; the same seed gives the same record (default: a fresh one, printed).")
@click.option("--runs", type=click.IntRange(min=1), default=1, show_default=True,
              help="Independent records for Monte Carlo, written as NAME-run000.EXT, … (or "
                   "where '{run}' stands in the file name).")
@click.option("--increments", is_flag=True,
              help="Write each sample as its increment over the sample period (delta-angle "
                   "[rad] / delta-velocity [m/s]) instead of the rate.")
@click.option("--flicker", "flicker", type=click.Choice(["realization", "power-law"]),
              default="realization", show_default=True,
              help="Flicker by the model's sum of Gauss-Markov states, or by the Kasdin-Walter "
                   "power-law filter.")
@click.option("--channel", "channels", multiple=True,
              help="Simulate only this channel (repeatable), e.g. --channel gyro.z.")
@click.option("--no-time", "no_time", is_flag=True,
              help="Leave out the time column (the rate is written into the file instead).")
@click.option("-o", "--output", "output", required=True, type=click.Path(dir_okay=False),
              help="Record to write; the format follows the extension: .csv, .tsv, .npy "
                   "(with a .npy.json sidecar), .npz, .h5/.hdf5 (needs h5py).")
@force_option
@guarded
def simulate_command(model_file: str, duration: float, rate: float | None, seed: int | None,
                     runs: int, increments: bool, flicker: str, channels: tuple[str, ...],
                     no_time: bool, output: str, force: bool) -> None:
    """Simulate a noise record of a model: every channel, reproducible from a seed.

    Each sample is the exact mean of the model's noise over its sample period (or, with
    --increments, its integral), so the record's Allan deviation is the model's at any rate.
    Values are SI (rad/s, m/s²; rad, m/s as increments). Long records stream to disk.

    \b
    Example:
      sensormodel simulate t900.json --duration 2h --seed 7 -o t900-2h.npy
      sensormodel simulate t900.json --duration "600 s" --rate 1000 --channel gyro.z -o z.csv
      sensormodel simulate t900.json --duration 60s --runs 100 --increments -o mc/run.npz
    """
    model = NoiseModel.load(model_file).select(list(channels))
    sim_rate = record_rate(model, rate)
    n = samples_for(duration, sim_rate)
    paths = [run_path(output, r, runs) for r in range(runs)]
    for p in paths:  # refuse before the long work (and before a seed is drawn), not after it
        format_of(p, str(p))
        check_writable(p, force=force)
        if p.suffix.lower() == ".npy":
            check_writable(p.with_name(p.name + ".json"), force=force)
    if seed is None:
        seed = new_seed()
        click.echo(f"note: seed {seed} (pass --seed {seed} to repeat this record)", err=True)
    with StderrBar("simulating", total=n * runs) as bar:
        for r, p in enumerate(paths):
            write_record(p, model, n, sim_rate, seed=seed, run=r, increments=increments,
                         flicker=flicker, force=force, progress=bar.advance,
                         time_column=not no_time)
    where = str(paths[0]) if runs == 1 else f"{paths[0]} … {paths[-1]} ({runs} runs)"
    click.echo(simulate_summary(where, n, increments, len(model.channels), sim_rate,
                                seed, flicker))


@click.command("cache", context_settings=CONTEXT)
@click.option("--prune", is_flag=True,
              help="Remove the entries of CSV files that are gone, then the least recently used "
                   "ones beyond the bound.")
@click.option("--clear", is_flag=True, help="Remove every entry.")
@guarded
def cache_command(prune: bool, clear: bool) -> None:
    """The binary cache of parsed CSV recordings: where it is, what it holds, its bound.

    A CSV file of 8 MiB or more is parsed once into column files in the cache folder
    ($SENSORMODEL_CACHE, default ~/.cache/sensormodel/csv; "off" disables it), so reading it
    again is fast. An entry belongs to one state of one file (size, time of change): an edited
    file is parsed again. The folder is kept within $SENSORMODEL_CACHE_MAX bytes (default
    4 GiB) by removing the least recently used entries, and entries of files that are gone are
    dropped, whenever a new entry is written.

    \b
    Example:
      sensormodel cache
      sensormodel cache --prune
      sensormodel cache --clear
    """
    root = cache_folder()
    if root is None:
        click.echo("the CSV cache is off (SENSORMODEL_CACHE=off)")
        return
    if clear or prune:
        removed = prune_cache(root, everything=clear)
        click.echo(f"removed {counted(len(removed), 'entry', 'entries')}")
    entries = cache_entries(root)
    size = sum(e[1] for e in entries)
    click.echo(f"{root}: {counted(len(entries), 'entry', 'entries')}, {size / 2**20:.1f} MiB of "
               f"at most {cache_limit() / 2**30:.3g} GiB")
    for entry, bytes_, _, source in reversed(entries):  # most recently used first
        gone = "" if not source or pathlib.Path(source).exists() else " (file gone)"
        click.echo(f"  {bytes_ / 2**20:9.1f} MiB  {source or entry.name}{gone}")


COMMANDS = (allan_command, identify_command, simulate_command, cache_command)
