"""Commands on noise models: build, inspect, export, drift, shape.

Each command parses its options, calls one library function and prints the result.
"""

from __future__ import annotations

import pathlib

import click

from .. import plots
from .._io import check_writable, write_json
from ..convert import build_model
from ..datasheet import load_datasheet
from ..drift import drift, table_times
from ..errors import AnalysisError
from ..export import FORMATS, discrete_document, write_discrete
from ..model import NoiseModel
from ..report import (
    DRIFT_DISPLAY,
    drift_table,
    export_summary,
    inspect_text,
    model_display,
    realization_lines,
    shape_summary,
)
from ..shaping import DEFAULT_CHANNEL, shape
from ._app import CONTEXT, force_option, guarded, output_option
from ._options import RecordingOptions, recording_options
from ._types import DURATION, RATE, TIME_STEP, FormatList, Orders

__all__ = ["COMMANDS"]

_CAUTION_HELP = (
    "Caution: navigation-integrity use of these numbers follows the applicable standards and "
    "the customer's contract."
)


@click.command(context_settings=CONTEXT)
@click.argument("datasheet", type=click.Path(dir_okay=False))
@click.option("-o", "--output", "output", required=True, type=click.Path(dir_okay=False),
              help="The noise-model JSON file to write.")
@click.option("--worst-case", is_flag=True, help="Use the datasheet's max values instead of typ.")
@force_option
@guarded
def build(datasheet: str, output: str, worst_case: bool, force: bool) -> None:
    """Turn a datasheet (TOML) into a noise model (JSON, SI units, schema-checked).

    \b
    Example:
      sensormodel build examples/bw-t900.toml -o t900.json
      sensormodel build examples/bw-m200.toml -o m200-worst.json --worst-case
    """
    check_writable(output, force=force)
    model = build_model(load_datasheet(datasheet), worst_case=worst_case)
    model.save(output, force=force)
    n_terms = sum(len(c.terms) for c in model.channels)
    click.echo(f"wrote {output}: {len(model.channels)} channels, {n_terms} terms "
               f"({'max' if worst_case else 'typ'} values)")
    for note in model.provenance.get("notes", []):
        click.echo(f"note: {note}", err=True)


@click.command(context_settings=CONTEXT)
@click.argument("model_file", metavar="MODEL", type=click.Path(dir_okay=False))
@click.option("--rate", type=RATE, default=None, metavar="HZ",
              help="Output rate [Hz] for the per-sample standard deviation "
                   "(default: the channel's).")
@click.option("--channel", "channels", multiple=True,
              help="Show only this channel (repeatable), e.g. --channel gyro.z.")
@output_option("--plot", "plot_file",
               help="Write a figure: log-log Allan deviation of each term and the sum, and the "
                    "one-sided PSD, per channel (.png, .pdf or .svg).")
@force_option
@guarded
def inspect(model_file: str, rate: float | None, channels: tuple[str, ...],
            plot_file: str | None, force: bool) -> None:
    """Show a noise model's terms in SI and in datasheet units, and the per-sample std.

    \b
    Example:
      sensormodel inspect t900.json
      sensormodel inspect t900.json --rate 100 --channel gyro.z
      sensormodel inspect t900.json --plot t900.png
    """
    if plot_file:
        check_writable(plot_file, force=force)
    model = NoiseModel.load(model_file).select(list(channels))
    click.echo(inspect_text(model, rate=rate, extra=realization_lines(model)))
    if plot_file:
        figure = plots.model_figure(model, display=model_display(model))
        plots.save_figure(figure, plot_file, force=force)
        click.echo(f"wrote {plot_file}")


def _export_targets(output: str, formats: list[str] | None) -> list[tuple[str, pathlib.Path]]:
    """(form, file) pairs: the -o suffix's form, or each asked form beside the -o base name."""
    out = pathlib.Path(output)
    if not formats:
        form = out.suffix.lstrip(".").lower()
        if form not in FORMATS:
            raise AnalysisError(f"cannot tell the form of '{output}' from its suffix",
                                "a name ending in .json, .npz, .csv or .mat, or --format")
        return [(form, out)]
    if len(formats) == 1:
        return [(formats[0], out)]
    base = out.with_suffix("") if out.suffix.lstrip(".").lower() in FORMATS else out
    return [(f, base.with_name(f"{base.name}.{f}")) for f in dict.fromkeys(formats)]


@click.command("export", context_settings=CONTEXT, epilog=_CAUTION_HELP)
@click.argument("model_file", metavar="MODEL", type=click.Path(dir_okay=False))
@click.option("--dt", "dt", type=TIME_STEP, required=True, metavar="DT",
              help="Filter step: seconds, or a time with its unit ('10 ms').")
@click.option("--format", "formats", type=FormatList(FORMATS), default=None,
              metavar="FMT[,FMT...]",
              help="json, npz, csv, mat (MATLAB/Simulink), or a comma list of them (default: "
                   "from the -o suffix). With several, -o names the base and each form gets its "
                   "suffix.")
@click.option("-o", "--output", "output", required=True, type=click.Path(dir_okay=False),
              help="The file to write (.json, .npz, .csv or .mat).")
@click.option("--channel", "channels", multiple=True,
              help="Export only this channel (repeatable).")
@click.option("--quantization-in", "quantization", type=click.Choice(["states", "r"]),
              default="states", show_default=True,
              help="Carry quantization as two exact discrete states, or fold it into R.")
@force_option
@guarded
def export_command(model_file: str, dt: float, formats: list[str] | None, output: str,
                   channels: tuple[str, ...], quantization: str, force: bool) -> None:
    """Exact discrete Φ, Qd, H, R, P0 per channel at a filter step (Van Loan), with the state
    names and the meaning of R written in the file.

    R is the variance of the white term averaged over one step (N²/dt, IEEE Std 952 density);
    quantization is carried by two discrete states unless --quantization-in r.

    \b
    Example:
      sensormodel export t900.json --dt 0.01 -o t900-100hz.json
      sensormodel export t900.json --dt "5 ms" --format json,npz,csv -o t900-200hz
      sensormodel export t900.json --dt 0.01 -o t900-100hz.mat
    """
    targets = _export_targets(output, formats)
    for _, path in targets:
        check_writable(path, force=force)
    model = NoiseModel.load(model_file).select(list(channels))
    doc = discrete_document(model.discretize(dt, quantization=quantization),
                            units={c.id: c.unit for c in model.channels}, sensor=model.sensor)
    for fmt, path in targets:
        write_discrete(path, doc, fmt=fmt, force=force)
        click.echo(f"wrote {path}")
    click.echo("\n".join(export_summary(doc, dt)))


@click.command("drift", context_settings=CONTEXT, epilog=_CAUTION_HELP)
@click.argument("model_file", metavar="MODEL", type=click.Path(dir_okay=False))
@click.option("--horizon", "horizon", type=DURATION, required=True, metavar="T",
              help="Last time since turn-on: seconds, or a time with its unit ('1 h').")
@click.option("--channel", "channels", multiple=True,
              help="Only this channel (repeatable).")
@click.option("--points", type=click.IntRange(min=2), default=121, show_default=True,
              help="Log-spaced times of the curve (JSON, plot).")
@click.option("--without", "without", multiple=True, metavar="TERM",
              help="Leave this term type out (repeatable), e.g. random_constant when the "
                   "turn-on bias is calibrated at the start.")
@output_option("--json", "json_file",
               help="Write the curves as JSON (schema sensormodel/drift/1, SI, 1σ).")
@output_option("--plot", "plot_file",
               help="Write a log-log figure (.png, .pdf or .svg).")
@force_option
@guarded
def drift_command(model_file: str, horizon: float, channels: tuple[str, ...], points: int,
                  without: tuple[str, ...], json_file: str | None, plot_file: str | None,
                  force: bool) -> None:
    """Open-loop 1σ error growth over a horizon: angle from each gyro channel, velocity and
    position from each accelerometer channel (variance equation, integrated exactly).

    No Schuler feedback and no tilt coupling: each channel's own noise, integrated once
    (angle, velocity) or twice (position).

    \b
    Example:
      sensormodel drift t900.json --horizon 1h
      sensormodel drift t900.json --horizon 600 --channel gyro.z --json drift.json \\
          --plot drift.png
      sensormodel drift m200.json --horizon 10min --without random_constant
    """
    for path in (json_file, plot_file):
        if path:
            check_writable(path, force=force)
    model = NoiseModel.load(model_file).select(list(channels))
    result = drift(model, horizon, points=points, without=without)
    if result.without:
        click.echo(f"left out: {', '.join(result.without)}")
    times = table_times(horizon)
    for ch in result.channels:
        click.echo(drift_table(ch, times, DRIFT_DISPLAY))
    for cid in result.skipped:
        click.echo(f"note: {cid} is not a gyro or accelerometer channel; not integrated", err=True)
    if json_file:
        write_json(json_file, result.to_dict(), force=force, schema="drift.schema.json")
        click.echo(f"wrote {json_file}")
    if plot_file:
        figure = plots.drift_figure(result, display=DRIFT_DISPLAY)
        plots.save_figure(figure, plot_file, force=force)
        click.echo(f"wrote {plot_file}")


@click.command("shape", context_settings=CONTEXT)
@click.argument("spectrum_file", metavar="PSD", type=click.Path(dir_okay=False))
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False),
              help="Noise-model JSON to write (holds the shaped term).")
@click.option("--channel", "channel_id", default=None,
              help=f"Channel id of the term (default: the file's 'channel', else "
                   f"{DEFAULT_CHANNEL}).")
@click.option("--rate", type=RATE, default=None, metavar="HZ",
              help="Output rate [Hz] of the channel (default: the file's sample_rate, the "
                   "recording's rate, or the --add-to model's channel).")
@click.option("--orders", type=Orders(), default="0/2", show_default=True,
              help="Fit only: numerator/denominator order of H(s), e.g. 1/3.")
@click.option("--sided", type=click.Choice(["one-sided", "two-sided"]), default="one-sided",
              show_default=True, help="Fit only: sidedness of the PSD column.")
@click.option("--from-recording", is_flag=True,
              help="PSD is a recording: fit the Welch PSD of its longest clean segment (one "
                   "channel, see --channel).")
@click.option("--add-to", "add_to", type=click.Path(dir_okay=False), default=None,
              help="Add the shaped term to this noise model's channel instead of a new model.")
@recording_options(skip=("rate", "channel_map"))
@force_option
@guarded
def shape_command(spectrum_file: str, output: str, channel_id: str | None, rate: float | None,
                  orders: tuple[int, int], sided: str, from_recording: bool, add_to: str | None,
                  reading: RecordingOptions, force: bool) -> None:
    """Turn a coloured spectrum into a stable shaping filter H(s) and a noise model.

    \b
    PSD is one of
      - a TOML file with a [spectrum] table: S(ω) = N(ω²)/D(ω²), two-sided per hertz
        in the channel's SI unit²/Hz, ω in rad/s, coefficients highest power first:
            [spectrum]
            numerator = [1.0]            # or numerator_omega = [...] (even powers only)
            denominator = [1.0, 1.0]
            channel = "gyro.z"
            sample_rate = "100 Hz"
        It is factored exactly: |H(jω)|² = S(ω), poles and zeros in the left half-plane.
      - a CSV of frequency [Hz], PSD [unit²/Hz] (--sided): a rational PSD of --orders is
        fitted in log scale and the fit error reported;
      - with --from-recording, a recording: its Welch PSD is fitted the same way.
    The term is driven by unit-intensity white noise (two-sided PSD 1 per hertz).

    \b
    Examples:
      sensormodel shape examples/spectra/tern4-mast-sway.toml -o sway.json
      sensormodel shape psd.csv --orders 1/3 --channel accelerometer.z --rate 200 -o vib.json
      sensormodel shape psd.csv --orders 1/3 --channel accelerometer.z \\
          --add-to t900.json -o t900-vib.json
    """
    check_writable(output, force=force)
    result = shape(
        spectrum_file,
        channel=channel_id,
        rate=rate,
        orders=orders,
        sided=sided,
        recording=reading.read(spectrum_file) if from_recording else None,
        add_to=NoiseModel.load(add_to) if add_to else None,
    )
    result.model.save(output, force=force)
    click.echo("\n".join(shape_summary(result)))
    click.echo(f"wrote {output}: channel {result.channel} with a shaped term")


COMMANDS = (build, inspect, export_command, drift_command, shape_command)
