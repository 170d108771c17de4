"""The ``sensormodel`` command line: parse, call the library, print. No maths here.

Every command reports bad input as one line on stderr,
``error: <file>[:<field or line>]: <what is wrong>; expected <what>``, with exit code 2 and no
traceback (``--debug`` shows one). Exit codes 1 and 3 are reserved for verdicts (``verify``).
"""

from __future__ import annotations

import functools
import sys
from collections.abc import Callable
from typing import Any

import click

from .errors import SensorModelError

__all__ = ["cli", "main"]

EXIT_BAD_INPUT = 2

_CONTEXT = {"help_option_names": ["-h", "--help"], "max_content_width": 100}


def _fail(message: str) -> None:
    click.echo(f"error: {message}", err=True)
    sys.exit(EXIT_BAD_INPUT)


def guarded(func: Callable[..., Any]) -> Callable[..., Any]:
    """Translate every SensorModelError (and a few OS errors) into the one-line error contract."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        ctx = click.get_current_context()
        debug = bool(ctx.find_root().params.get("debug"))
        try:
            return func(*args, **kwargs)
        except SensorModelError as exc:
            if debug:
                raise
            _fail(str(exc))
        except (FileNotFoundError, IsADirectoryError, PermissionError) as exc:
            if debug:
                raise
            _fail(f"{exc.filename}: {exc.strerror}")
        except KeyboardInterrupt:
            _fail("interrupted; no output was written")
        return None

    return wrapper


def _version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("sensormodel")
    except PackageNotFoundError:  # pragma: no cover - running from a source tree
        return "0+unknown"


@click.group(context_settings=_CONTEXT)
@click.option("--debug", is_flag=True, help="Show a Python traceback on errors.")
@click.version_option(_version(), prog_name="sensormodel")
def cli(debug: bool) -> None:
    """Inertial-sensor noise models: datasheet -> model -> theory, simulation, Allan analysis
    and acceptance, with units checked at every step.

    \b
    Start with:
      sensormodel demo --out demo-output      # the whole chain on the bundled example
      sensormodel build examples/<sheet>.toml -o imu.json
      sensormodel inspect imu.json
    Every command has --help with an example.
    """


def main() -> None:  # pragma: no cover - console entry
    cli(prog_name="sensormodel")


# ---------------------------------------------------------------------------------------------
# Commands are added below, one block each. Keep bodies to: convert options, call one library
# function, write / print the result.
# ---------------------------------------------------------------------------------------------


def _force_option(func: Callable[..., Any]) -> Callable[..., Any]:
    return click.option("--force", is_flag=True, help="Overwrite an existing output file.")(func)


@cli.command(context_settings=_CONTEXT)
@click.argument("datasheet", type=click.Path(dir_okay=False))
@click.option("-o", "--output", "output", required=True, type=click.Path(dir_okay=False),
              help="The noise-model JSON file to write.")
@click.option("--worst-case", is_flag=True, help="Use the datasheet's max values instead of typ.")
@_force_option
@guarded
def build(datasheet: str, output: str, worst_case: bool, force: bool) -> None:
    """Turn a datasheet (TOML) into a noise model (JSON, SI units, schema-checked).

    \b
    Example:
      sensormodel build examples/bw-t900.toml -o t900.json
      sensormodel build examples/bw-m200.toml -o m200-worst.json --worst-case
    """
    from ._io import check_writable
    from .convert import build_model

    check_writable(output, force=force)
    model = build_model(datasheet, worst_case=worst_case)
    model.save(output, force=force)
    n_terms = sum(len(c.terms) for c in model.channels)
    click.echo(f"wrote {output}: {len(model.channels)} channels, {n_terms} terms "
               f"({'max' if worst_case else 'typ'} values)")
    for note in model.provenance.get("notes", []):
        click.echo(f"note: {note}", err=True)


@cli.command(context_settings=_CONTEXT)
@click.argument("model_file", metavar="MODEL", type=click.Path(dir_okay=False))
@click.option("--rate", type=float, default=None,
              help="Output rate [Hz] for the per-sample standard deviation "
                   "(default: the channel's).")
@click.option("--channel", "channels", multiple=True,
              help="Show only this channel (repeatable), e.g. --channel gyro.z.")
@click.option("--plot", "plot_file", type=click.Path(dir_okay=False), default=None,
              help="Write a figure: log-log Allan deviation of each term and the sum, and the "
                   "one-sided PSD, per channel (.png, .pdf or .svg).")
@_force_option
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
    from .errors import AnalysisError
    from .model import NoiseModel
    from .report import inspect_text

    if rate is not None and not rate > 0:
        raise AnalysisError(f"--rate {rate}", "a positive rate in Hz")
    if plot_file:
        from ._io import check_writable

        check_writable(plot_file, force=force)
    model = NoiseModel.load(model_file).select(list(channels))
    click.echo(inspect_text(model, rate=rate, extra=_realization_lines(model)))
    if plot_file:
        from .plots import model_figure, save_figure

        save_figure(model_figure(model, display=_model_display(model)), plot_file, force=force)
        click.echo(f"wrote {plot_file}")


# --- export and drift (theory: linear.py, drift.py) -------------------------------------------

_CAUTION_HELP = (
    "Caution: navigation-integrity use of these numbers follows the applicable standards and "
    "the customer's contract."
)


def _positive_quantity(value: str, option: str, kind: str, example: str) -> float:
    """A positive quantity option in SI: a bare number is SI; otherwise a value with its unit."""
    from .errors import AnalysisError
    from .quantities import parse_quantity

    text = value.strip()
    try:
        si = float(text)
    except ValueError:
        si = parse_quantity(text, kind, field=option)
    if not (si > 0 and si < float("inf")):
        raise AnalysisError(f"{option} {value}", f"a positive {kind}, e.g. {example}")
    return si


def _seconds(value: str, option: str) -> float:
    """A time option: a bare number is seconds; otherwise a time with its unit ('10 ms')."""
    return _positive_quantity(value, option, "time", "0.01 or '10 ms'")


def _frequency_option(value: str, option: str) -> float:
    """A frequency option: a bare number is hertz; otherwise a frequency with its unit."""
    return _positive_quantity(value, option, "frequency", "50 or '50 Hz'")


def _realization_lines(model: Any) -> dict[str, list[str]]:
    """Per channel, one line per flicker term on its Gauss-Markov realization (for inspect)."""
    from .errors import AnalysisError
    from .quantities import format_value

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


def _model_display(model: Any) -> dict[str, tuple[str, float]]:
    """Display units of the inspect figure: °/h for gyros, µg for accelerometers."""
    from .quantities import DISPLAY_UNITS, convert_from_si

    out = {}
    for ch in model.channels:
        if ch.quantity in ("angular_rate", "acceleration"):
            unit, label = DISPLAY_UNITS[ch.quantity]
            out[ch.id] = (label, convert_from_si(1.0, ch.quantity, unit))
    return out


def _format_time(seconds: float) -> str:
    from .quantities import convert_from_si, format_value

    for unit, limit in (("d", 86400.0), ("h", 3600.0), ("min", 60.0)):
        if seconds >= limit:
            return format_value(convert_from_si(seconds, "time", unit), unit)
    return format_value(seconds, "s")


@cli.command("export", context_settings=_CONTEXT, epilog=_CAUTION_HELP)
@click.argument("model_file", metavar="MODEL", type=click.Path(dir_okay=False))
@click.option("--dt", "dt_text", required=True, metavar="DT",
              help="Filter step: seconds, or a time with its unit ('10 ms').")
@click.option("--format", "formats", default=None, metavar="FMT[,FMT...]",
              help="json, npz, csv, or a comma list of them (default: from the -o suffix). With "
                   "several, -o names the base and each form gets its suffix.")
@click.option("-o", "--output", "output", required=True, type=click.Path(dir_okay=False),
              help="The file to write (.json, .npz or .csv).")
@click.option("--channel", "channels", multiple=True,
              help="Export only this channel (repeatable).")
@click.option("--quantization-in", "quantization", type=click.Choice(["states", "r"]),
              default="states", show_default=True,
              help="Carry quantization as two exact discrete states, or fold it into R.")
@_force_option
@guarded
def export_command(model_file: str, dt_text: str, formats: str | None, output: str,
                   channels: tuple[str, ...], quantization: str, force: bool) -> None:
    """Exact discrete Φ, Qd, H, R, P0 per channel at a filter step (Van Loan), with the state
    names and the meaning of R written in the file.

    R is the variance of the white term averaged over one step (N²/dt, IEEE Std 952 density);
    quantization is carried by two discrete states unless --quantization-in r.

    \b
    Example:
      sensormodel export t900.json --dt 0.01 -o t900-100hz.json
      sensormodel export t900.json --dt "5 ms" --format json,npz,csv -o t900-200hz
    """
    import pathlib

    from ._io import check_writable
    from .errors import AnalysisError
    from .export import FORMATS, discrete_document, write_discrete
    from .model import NoiseModel

    dt = _seconds(dt_text, "--dt")
    out = pathlib.Path(output)
    if formats:
        wanted = [f.strip().lower() for f in formats.split(",") if f.strip()]
        bad = [f for f in wanted if f not in FORMATS]
        if bad or not wanted:
            raise AnalysisError(f"--format {formats}", f"a comma list of {', '.join(FORMATS)}")
    else:
        wanted = [out.suffix.lstrip(".").lower()]
        if wanted[0] not in FORMATS:
            raise AnalysisError(f"cannot tell the form of '{output}' from its suffix",
                                "a name ending in .json, .npz or .csv, or --format")
    if len(wanted) == 1:
        targets = [(wanted[0], out)]
    else:
        base = out.with_suffix("") if out.suffix.lstrip(".").lower() in FORMATS else out
        targets = [(f, base.with_name(f"{base.name}.{f}")) for f in dict.fromkeys(wanted)]
    for _, path in targets:
        check_writable(path, force=force)
    model = NoiseModel.load(model_file).select(list(channels))
    doc = discrete_document(model.discretize(dt, quantization=quantization),
                            units={c.id: c.unit for c in model.channels}, sensor=model.sensor)
    for fmt, path in targets:
        write_discrete(path, doc, fmt=fmt, force=force)
        click.echo(f"wrote {path}")
    for c in doc["channels"]:
        unit = f" ({c['unit']})²" if c.get("unit") else ""
        click.echo(f"  {c['id']}: {len(c['states'])} states, R = {c['r']:.4g}{unit}")
    click.echo(f"dt = {dt:g} s; {doc['r_convention'].split(':', 1)[0]}")


@cli.command("drift", context_settings=_CONTEXT, epilog=_CAUTION_HELP)
@click.argument("model_file", metavar="MODEL", type=click.Path(dir_okay=False))
@click.option("--horizon", "horizon_text", required=True, metavar="T",
              help="Last time since turn-on: seconds, or a time with its unit ('1 h').")
@click.option("--channel", "channels", multiple=True,
              help="Only this channel (repeatable).")
@click.option("--points", type=click.IntRange(min=2), default=121, show_default=True,
              help="Log-spaced times of the curve (JSON, plot).")
@click.option("--json", "json_file", type=click.Path(dir_okay=False), default=None,
              help="Write the curves as JSON (schema sensormodel/drift/1, SI, 1σ).")
@click.option("--plot", "plot_file", type=click.Path(dir_okay=False), default=None,
              help="Write a log-log figure (.png, .pdf or .svg).")
@_force_option
@guarded
def drift_command(model_file: str, horizon_text: str, channels: tuple[str, ...], points: int,
                  json_file: str | None, plot_file: str | None, force: bool) -> None:
    """Open-loop 1σ error growth over a horizon: angle from each gyro channel, velocity and
    position from each accelerometer channel (variance equation, integrated exactly).

    No Schuler feedback and no tilt coupling: each channel's own noise, integrated once
    (angle, velocity) or twice (position).

    \b
    Example:
      sensormodel drift t900.json --horizon 1h
      sensormodel drift t900.json --horizon 600 --channel gyro.z --json drift.json --plot drift.png
    """
    from ._io import check_writable, write_json
    from .drift import drift, table_times
    from .model import NoiseModel
    from .quantities import convert_from_si, format_value

    horizon = _seconds(horizon_text, "--horizon")
    for path in (json_file, plot_file):
        if path:
            check_writable(path, force=force)
    model = NoiseModel.load(model_file).select(list(channels))
    result = drift(model, horizon, points=points)
    # display units: angle in degrees; velocity and position stay SI (m/s, m)
    display = {"angle": ("°", convert_from_si(1.0, "angle", "deg")), "velocity": ("m/s", 1.0),
               "position": ("m", 1.0)}
    rows_t = table_times(horizon)
    for ch in result.channels:
        kinds = list(ch.values)
        heads = ["time"] + [f"{k} 1σ [{display[k][0]}]" for k in kinds] + ["largest term"]
        at = ch.at(rows_t)
        main = ch.largest_term(rows_t)
        table = [
            [_format_time(t)]
            + [format_value(float(at[k][i]) * display[k][1]) for k in kinds]
            + [main[i]]
            for i, t in enumerate(rows_t)
        ]
        widths = [max(len(r[j]) for r in [heads, *table]) for j in range(len(heads))]
        click.echo(f"{ch.id}")
        for r in [heads, *table]:
            cells = (c.ljust(w) for c, w in zip(r, widths, strict=True))
            click.echo(("  " + "  ".join(cells)).rstrip())
    for cid in result.skipped:
        click.echo(f"note: {cid} is not a gyro or accelerometer channel; not integrated", err=True)
    if json_file:
        write_json(json_file, result.to_dict(), force=force, schema="drift.schema.json")
        click.echo(f"wrote {json_file}")
    if plot_file:
        from .plots import drift_figure, save_figure

        save_figure(drift_figure(result, display=display), plot_file, force=force)
        click.echo(f"wrote {plot_file}")


# --- acceptance: verify, plan, demo (acceptance.py, report.py, demo.py) -----------------------

EXIT_FAIL = 1
EXIT_INCONCLUSIVE = 3

_ACCEPTANCE_HELP = (
    "Exit codes: 0 every term passes, 1 a term fails, 3 otherwise (inconclusive), 2 bad input. "
    "Caution: acceptance decisions follow the customer's contract and the applicable standards."
)


def _acceptance_channel_map(values: tuple[str, ...]) -> dict[str, str]:
    from .errors import AnalysisError

    out = {}
    for v in values:
        column, sep, channel = v.partition("=")
        if not sep or not column.strip() or not channel.strip():
            raise AnalysisError(f"--channel {v}", "COLUMN=CHANNEL_ID, e.g. --channel rate_z=gyro.z")
        out[column.strip()] = channel.strip()
    return out


def _acceptance_probability(value: float, option: str) -> float:
    from .errors import AnalysisError

    if not 0.0 < value < 1.0:
        raise AnalysisError(f"{option} {value}", "a probability between 0 and 1, e.g. 0.9")
    return value


@cli.command("verify", context_settings=_CONTEXT, epilog=_ACCEPTANCE_HELP)
@click.argument("recording_file", metavar="REC", type=click.Path(dir_okay=False))
@click.option("--spec", "spec_file", required=True, type=click.Path(dir_okay=False),
              metavar="DATASHEET", help="The datasheet (TOML) the unit is accepted against.")
@click.option("--against", type=click.Choice(["max", "typ"]), default="max", show_default=True,
              help="The datasheet column used as the limit.")
@click.option("--confidence", type=float, default=0.9, show_default=True,
              help="Two-sided confidence of the intervals (each one-sided error ≤ (1−C)/2).")
@click.option("--power", type=float, default=0.8, show_default=True,
              help="Probability with which the suggested record length decides a term.")
@click.option("--report", "report_file", type=click.Path(dir_okay=False), default=None,
              help="Write the HTML report (and one PNG per figure beside it).")
@click.option("--json", "json_file", type=click.Path(dir_okay=False), default=None,
              help="Write the verdict report as JSON (schema sensormodel/verdict-report/1, SI).")
@click.option("--rate", type=float, default=None, help="Sample rate [Hz] if the file has none.")
@click.option("--unit", default=None, help="Unit of columns that give none, e.g. 'deg/s'.")
@click.option("--channel", "channel_map", multiple=True, metavar="COLUMN=CHANNEL_ID",
              help="Map a column to a channel id (repeatable).")
@click.option("--only", "only", multiple=True, metavar="CHANNEL_ID",
              help="Verify only this channel (repeatable).")
@click.option("--gaps", type=click.Choice(["fail", "split"]), default="fail", show_default=True,
              help="Refuse a record with gaps, or analyse its longest clean segment.")
@click.option("--seed", type=int, default=0, show_default=True,
              help="Seed of the identification's random parts (the verdict is reproducible).")
@click.option("--bootstrap", "n_boot", type=click.IntRange(min=1), default=None,
              help="Bootstrap records per channel for the intervals (default 200; fewer is "
                   "quicker and rougher).")
@_force_option
@guarded
def verify_command(recording_file: str, spec_file: str, against: str, confidence: float,
                   power: float, report_file: str | None, json_file: str | None,
                   rate: float | None, unit: str | None, channel_map: tuple[str, ...],
                   only: tuple[str, ...], gaps: str, seed: int, n_boot: int | None,
                   force: bool) -> None:
    """Does a delivered sensor meet its datasheet? Verdict per channel and term, with
    confidence: pass (the whole interval within the limit), fail (beyond it) or inconclusive
    (the limit inside the interval, with the record length that would decide it).

    \b
    Example:
      sensormodel verify unit42.csv --spec examples/bw-t900.toml
      sensormodel verify unit42.npy --spec examples/bw-t900.toml --report unit42.html \
          --json unit42.json
    """
    from ._io import check_writable
    from .acceptance import verify
    from .datasheet import load_datasheet
    from .recording import read_recording
    from .report import verdict_text, write_verdict_html, write_verdict_json

    _acceptance_probability(confidence, "--confidence")
    _acceptance_probability(power, "--power")
    for path in (report_file, json_file):
        if path:
            check_writable(path, force=force)
    ds = load_datasheet(spec_file)
    rec = read_recording(recording_file, rate=rate, unit=unit, gaps=gaps,
                         channel_map=_acceptance_channel_map(channel_map) or None)

    def progress(channel_id: str) -> None:
        if sys.stderr.isatty():
            click.echo(f"… analysing {channel_id}", err=True)

    result = verify(rec, ds, confidence=confidence, against=against, power=power,
                    channels=list(only) or None, seed=seed, n_boot=n_boot, workers=2,
                    progress=progress)
    click.echo(verdict_text(result))
    if json_file:
        write_verdict_json(result, json_file, force=force)
        click.echo(f"wrote {json_file}")
    if report_file:
        for path in write_verdict_html(result, report_file, force=force):
            click.echo(f"wrote {path}")
    click.get_current_context().exit(result.exit_code)


@cli.command("plan", context_settings=_CONTEXT, epilog=_ACCEPTANCE_HELP)
@click.argument("datasheet", type=click.Path(dir_okay=False))
@click.option("--confidence", type=float, default=0.9, show_default=True,
              help="Two-sided confidence of the intervals.")
@click.option("--precision", type=float, default=0.25, show_default=True,
              help="Wanted half-width of each term's interval, as a fraction of its value.")
@click.option("--against", type=click.Choice(["max", "typ"]), default="max", show_default=True,
              help="The datasheet column to verify.")
@click.option("--rate", type=float, default=None,
              help="Sample rate of the planned record [Hz] (default the datasheet's).")
@guarded
def plan_command(datasheet: str, confidence: float, precision: float, against: str,
                 rate: float | None) -> None:
    """Before any test: how long must a static record be to verify each datasheet term?

    Shows, per term, the averaging time τ it is read at, the Allan-variance degrees of freedom
    needed there and the record length that gives them, for a unit exactly at its limits.

    \b
    Example:
      sensormodel plan examples/bw-t900.toml
      sensormodel plan examples/bw-t900.toml --confidence 0.95 --precision 0.2
    """
    from .acceptance import plan
    from .errors import AnalysisError
    from .report import plan_text

    _acceptance_probability(confidence, "--confidence")
    if not 0.0 < precision < 1.0:
        raise AnalysisError(f"--precision {precision}", "a fraction between 0 and 1, e.g. 0.25")
    if rate is not None and not rate > 0:
        raise AnalysisError(f"--rate {rate}", "a positive rate in Hz")
    click.echo(plan_text(plan(datasheet, confidence=confidence, precision=precision,
                              against=against, sample_rate=rate)))


@cli.command("demo", context_settings=_CONTEXT)
@click.option("--out", "out", type=click.Path(file_okay=False), default="demo-output",
              show_default=True, help="Folder for the demo's files.")
@_force_option
@guarded
def demo_command(out: str, force: bool) -> None:
    """The whole chain on the bundled invented example, ending in an HTML report.

    Builds the model of examples/bw-t900.toml, simulates a record of a "delivered" unit that
    deviates from its datasheet on one term, analyses it, verifies it and writes the reports.
    Exits 0 when the demo ran (whatever the staged unit's verdict).

    \b
    Example:
      sensormodel demo --out demo-output
    """
    import sys

    from .demo import run_demo
    from .report import verdict_text

    def progress(text: str) -> None:
        if sys.stderr.isatty():
            click.echo(f"… {text}", err=True)

    result = run_demo(out, force=force, progress=progress)
    click.echo(verdict_text(result.report))
    click.echo("")
    click.echo(f"staged deviation: {result.staged}")
    for what, path in result.files.items():
        click.echo(f"wrote {what}: {path}")
    total = sum(result.timings.values())
    steps = ", ".join(f"{k} {v:.1f} s" for k, v in result.timings.items())
    click.echo(f"done in {total:.1f} s ({steps}); open {result.files['report (HTML)']} "
               "in a browser")


# --- allan (recording.py reads, allan.py computes, plots.py draws) ----------------------------


class _StderrBar:
    """A ``progress(done, total)`` callback: a click progress bar on stderr when stderr is a
    terminal; nothing in pipes, files and tests."""

    def __init__(self, label: str) -> None:
        self.label = label
        self.enabled = sys.stderr.isatty()
        self._bar: Any = None
        self._shown = 0

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled:
            return
        if self._bar is None:
            self._bar = click.progressbar(length=1000, label=self.label, file=sys.stderr)
            self._bar.__enter__()
        pos = 1000 if total <= 0 else min(1000, int(1000 * done / total))
        if pos > self._shown:
            self._bar.update(pos - self._shown)
            self._shown = pos

    def close(self) -> None:
        if self._bar is not None:
            self._bar.__exit__(None, None, None)
            self._bar = None


def _unit_option(values: tuple[str, ...]) -> str | dict[str, str] | None:
    """``--unit U`` (every column without a unit) or ``--unit COLUMN=U`` (repeatable)."""
    from .errors import RecordingError

    bare = [v.strip() for v in values if "=" not in v]
    pairs = [v.partition("=") for v in values if "=" in v]
    if len(bare) > 1 or (bare and pairs):
        raise RecordingError(
            f"--unit {' --unit '.join(values)}",
            "one unit for every column without one (--unit deg/s), or COLUMN=UNIT pairs "
            "(--unit gyro_x=deg/s --unit time=ms)",
        )
    if bare:
        return bare[0]
    if pairs:
        for column, _, unit in pairs:
            if not column.strip() or not unit.strip():
                raise RecordingError(f"--unit {column}={unit}", "COLUMN=UNIT, e.g. gyro_x=deg/s")
        return {column.strip(): unit.strip() for column, _, unit in pairs}
    return None


def _channel_option(values: tuple[str, ...]) -> dict[str, str] | None:
    """``--channel COLUMN=ID`` (repeatable) as a mapping, or None."""
    from .errors import RecordingError

    out = {}
    for v in values:
        column, sep, channel = v.partition("=")
        if not sep or not column.strip() or not channel.strip():
            raise RecordingError(
                f"--channel {v}", "COLUMN=CHANNEL_ID, e.g. --channel rate_z=gyro.z"
            )
        out[column.strip()] = channel.strip()
    return out or None


def _taus_option(text: str | None) -> str | list[float] | None:
    """``octave``, ``decade``, ``N/decade`` pass through; ``T1,T2,...`` become seconds."""
    if text is None:
        return None
    spec = text.strip().lower()
    if spec in ("octave", "decade") or spec.endswith("/decade"):
        return spec
    return [_seconds(part, "--taus") for part in text.split(",") if part.strip()]


def _allan_table(curve: Any, heading: str, display: tuple[str, float]) -> str:
    from .quantities import format_value

    label, factor = display
    unit = label if label and label != "1" else "as recorded"
    lines = [heading, f"  {'τ [s]':>11} {'ADEV':>11} {'CI low':>11} {'CI high':>11} "
                      f"{'clusters':>10}    (deviations in {unit})"]
    clusters = curve.n_clusters if curve.n_clusters is not None else [None] * len(curve.tau)
    for t, a, lo, hi, n in zip(curve.tau, curve.adev, curve.ci_low, curve.ci_high, clusters,
                               strict=True):
        lines.append(f"  {format_value(float(t)):>11} {format_value(float(a) * factor):>11} "
                     f"{format_value(float(lo) * factor):>11} "
                     f"{format_value(float(hi) * factor):>11} "
                     f"{'' if n is None else int(n):>10}")
    return "\n".join(lines)


def _recording_input_options(func: Callable[..., Any]) -> Callable[..., Any]:
    """The options that say how to read a recording (shared by the analysis commands)."""
    options = [
        click.option("--rate", type=float, default=None, metavar="HZ",
                     help="Sample rate [Hz] when the file has no time column (must agree if "
                          "it has)."),
        click.option("--unit", "units", multiple=True, metavar="U|COLUMN=U",
                     help="Unit of the columns that give none (--unit deg/s), or of one column "
                          "(--unit gyro_x=mdps, repeatable; overrides the file)."),
        click.option("--increments/--rates", "increments", default=None,
                     help="Samples are angle/velocity increments per sample period (default: "
                          "as the file states, else rates)."),
        click.option("--channel", "channel_map", multiple=True, metavar="COLUMN=ID",
                     help="Map a column to a channel id, e.g. --channel rate_z=gyro.z "
                          "(repeatable)."),
    ]
    for option in reversed(options):
        func = option(func)
    return func


@cli.command("allan", context_settings=_CONTEXT)
@click.argument("recording_file", metavar="REC", type=click.Path(dir_okay=False))
@_recording_input_options
@click.option("--columns", "columns", multiple=True, metavar="GLOB",
              help="Analyse only these columns: names or globs, e.g. 'gyro*' (repeatable).")
@click.option("--taus", default=None, metavar="SPEC",
              help="Averaging times: octave (default), decade, N/decade, or T1,T2,... seconds.")
@click.option("--confidence", type=float, default=0.683, show_default=True,
              help="Two-sided confidence of the intervals.")
@click.option("--gaps", type=click.Choice(["fail", "split"]), default="fail", show_default=True,
              help="Refuse a record with gaps, NaN, time errors, stuck or saturated stretches, "
                   "or analyse each clean segment separately.")
@click.option("-o", "--output", "output", type=click.Path(dir_okay=False), default=None,
              metavar="F.json|F.csv", help="Write the curves (JSON schema "
              "sensormodel/allan-curve/1, or CSV with one row per τ), SI units.")
@click.option("--plot", type=click.Path(dir_okay=False), default=None, metavar="F.png",
              help="Write a log-log figure with the confidence bands (.png, .pdf, .svg).")
@_force_option
@guarded
def allan_command(recording_file: str, rate: float | None, units: tuple[str, ...],
                  increments: bool | None, channel_map: tuple[str, ...],
                  columns: tuple[str, ...], taus: str | None, confidence: float, gaps: str,
                  output: str | None, plot: str | None, force: bool) -> None:
    """Overlapping Allan deviation of each channel of a recording, with confidence intervals
    (chi-square, Greenhall-Riley degrees of freedom).

    REC is a CSV/TSV (units in the header: 'gyro_x [deg/s]'), NPY, NPZ or HDF5 recording.
    Deviations are in the channel's SI unit (rad/s, m/s^2) in the files and in °/h or µg in the
    table; a column without a unit stays as recorded. With --gaps split, each clean segment is
    analysed on its own and written as '<channel id>#<segment number>'.

    \b
    Example:
      sensormodel allan static.csv -o static-allan.json --plot static-allan.png
      sensormodel allan log.tsv --channel rate_z=gyro.z --unit rate_z=deg/s --rate 400 \\
          --taus 10/decade --gaps split -o log-allan.csv
    """
    import pathlib

    from ._io import atomic_writer, check_writable, write_json
    from .allan import SCHEMA_FILE, curves_to_csv, curves_to_json, overlapping_many
    from .errors import AnalysisError
    from .quantities import DISPLAY_UNITS, convert_from_si, format_value
    from .recording import read_recording

    if not 0.0 < confidence < 1.0:
        raise AnalysisError(
            f"--confidence {confidence}", "a probability between 0 and 1, e.g. 0.683"
        )
    taus_spec = _taus_option(taus)
    if output is not None:
        if pathlib.Path(output).suffix.lower() not in (".json", ".csv"):
            raise AnalysisError(f"-o {output}", "a file name ending in .json or .csv")
        check_writable(output, force=force)
    if plot is not None:
        check_writable(plot, force=force)

    bar = _StderrBar("reading")
    try:
        rec = read_recording(recording_file, rate=rate, unit=_unit_option(units),
                             increments=increments,
                             columns=[c for v in columns for c in v.split(",")] or None,
                             channel_map=_channel_option(channel_map),
                             gaps=gaps, progress=bar)
    finally:
        bar.close()
    for f in rec.findings:
        where = f"{rec.source}:{f.where}" if f.where else rec.source
        click.echo(f"note: {where}: {f.detail}", err=True)

    jobs = [(ch, k, seg) for ch in rec.channels for k, seg in enumerate(rec.segments[ch])]
    headings, display, pieces = [], {}, []
    for ch, k, seg in jobs:  # one heading, display unit and provenance entry per piece
        n_seg = len(rec.segments[ch])
        cid = ch if n_seg == 1 else f"{ch}#{k + 1}"
        pieces.append({"id": cid, "channel": ch, "column": rec.columns[ch],
                       "start": seg.start, "stop": seg.stop, "start_time": seg.start_time})
        quantity = rec.quantities[ch]
        if quantity in ("angular_rate", "acceleration"):
            unit, label = DISPLAY_UNITS[quantity]
            display[cid] = (label, convert_from_si(1.0, quantity, unit))
        else:
            display[cid] = (rec.units[ch], 1.0)
        span = (f", segment {k + 1} of {n_seg}: samples {seg.start}-{seg.stop - 1} from "
                f"t = {format_value(seg.start_time, 's')}" if n_seg > 1 else "")
        headings.append(
            f"{cid} [{rec.units[ch]}]{span}: {seg.n} samples at "
            f"{format_value(rec.rate, 'Hz')} ({_format_time(seg.n / rec.rate)}), "
            f"{100 * confidence:.1f} % intervals"
        )
    bar = _StderrBar("Allan deviation")
    try:
        curves = overlapping_many([rec.data[ch][seg.start:seg.stop] for ch, _, seg in jobs],
                                  rec.rate, taus=taus_spec, confidence=confidence,
                                  units=[rec.units[ch] for ch, _, _ in jobs],
                                  channels=[p["id"] for p in pieces], progress=bar)
    finally:
        bar.close()

    for n, (curve, heading) in enumerate(zip(curves, headings, strict=True)):
        if n:
            click.echo("")
        click.echo(_allan_table(curve, heading, display[curve.channel]))
    for ch in rec.channels:
        if len(rec.segments[ch]) > 1:
            click.echo(f"note: {ch}: {len(rec.segments[ch])} clean segments analysed separately "
                       "(--gaps split)", err=True)
    if output is not None:
        if pathlib.Path(output).suffix.lower() == ".json":
            doc = curves_to_json(curves)
            doc["provenance"] = {
                "recording": rec.source,
                "format": rec.format,
                "increments": rec.increments,
                "gaps": gaps,
                "segments": pieces,
                "findings": [{"kind": f.kind, "channel": f.channel, "where": f.where,
                              "detail": f.detail} for f in rec.findings],
            }
            write_json(output, doc, force=force, schema=SCHEMA_FILE)
        else:
            with atomic_writer(output, force=force) as fh:
                fh.write(curves_to_csv(curves))
        click.echo(f"wrote {output}")
    if plot is not None:
        from .plots import allan_figure

        allan_figure(curves, plot, display=display, title=pathlib.Path(rec.source).name,
                     force=force)
        click.echo(f"wrote {plot}")


# --- simulate (simulate.py generates, recording.py writes) ------------------------------------


@cli.command("simulate", context_settings=_CONTEXT)
@click.argument("model_file", metavar="MODEL", type=click.Path(dir_okay=False))
@click.option("--duration", "duration_text", required=True, metavar="T",
              help="Record length: seconds, or a time with its unit ('600 s', '2 h', '1 d').")
@click.option("--rate", type=float, default=None, metavar="HZ",
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
@_force_option
@guarded
def simulate_command(model_file: str, duration_text: str, rate: float | None, seed: int | None,
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
    import contextlib

    from ._io import check_writable
    from .model import NoiseModel
    from .simulate import new_seed, record_rate, run_path, samples_for, write_record

    duration = _seconds(duration_text, "--duration")
    model = NoiseModel.load(model_file).select(list(channels))
    sim_rate = record_rate(model, rate)
    n = samples_for(duration, sim_rate)
    paths = [run_path(output, r, runs) for r in range(runs)]
    for p in paths:  # refuse before the long work, not after it
        check_writable(p, force=force)
        if p.suffix.lower() == ".npy":
            check_writable(p.with_name(p.name + ".json"), force=force)
    if seed is None:
        seed = new_seed()
        click.echo(f"note: seed {seed} (pass --seed {seed} to repeat this record)", err=True)
    # progress bar on stderr only when it is a terminal (quiet in pipes, files and tests)
    with contextlib.ExitStack() as stack:
        progress = None
        if sys.stderr.isatty():
            bar = stack.enter_context(
                click.progressbar(length=n * runs, label="simulating", file=sys.stderr)
            )
            progress = bar.update
        for r, p in enumerate(paths):
            write_record(p, model, n, sim_rate, seed=seed, run=r, increments=increments,
                         flicker=flicker, force=force, progress=progress,
                         time_column=not no_time)
    kind = "increments" if increments else "rate samples"
    what = f"{len(model.channels)} channel{'s' if len(model.channels) != 1 else ''}"
    where = str(paths[0]) if runs == 1 else f"{paths[0]} … {paths[-1]} ({runs} runs)"
    click.echo(f"wrote {where}: {n} {kind} × {what} at {sim_rate:g} Hz "
               f"({_format_time(n / sim_rate)}), seed {seed}, flicker: {flicker}")


# --- shape: spectral factorization -----------------------------------------------------------

_SHAPE_QUANTITY = {"gyro": ("angular_rate", "rad/s"), "accelerometer": ("acceleration", "m/s^2")}


def _read_spectrum_table(path: str) -> tuple[Any, Any, dict[str, Any]]:
    """(numerator, denominator) in ω² and the other keys of a rational-PSD TOML file."""
    import tomllib

    from .errors import AnalysisError, DatasheetError
    from .spectrum import omega_polynomial_to_omega2

    try:
        with open(path, "rb") as fh:
            data = tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise DatasheetError(f"not valid TOML ({exc})", "a [spectrum] table", source=path) from None
    table = data.get("spectrum")
    if not isinstance(table, dict):
        raise DatasheetError("no [spectrum] table", "a [spectrum] table with numerator and "
                             "denominator (in ω²) or numerator_omega and denominator_omega",
                             source=path, field="spectrum")
    known = {"numerator", "denominator", "numerator_omega", "denominator_omega", "channel",
             "sample_rate", "name"}
    for key in table:
        if key not in known:
            raise DatasheetError(f"unknown key '{key}'", f"one of {', '.join(sorted(known))}",
                                 source=path, field=f"spectrum.{key}")
    out = []
    for part in ("numerator", "denominator"):
        if part in table and f"{part}_omega" in table:
            raise DatasheetError(f"both {part} and {part}_omega", "one of the two",
                                 source=path, field=f"spectrum.{part}")
        try:
            if f"{part}_omega" in table:
                out.append(omega_polynomial_to_omega2(table[f"{part}_omega"], name=f"{part}_omega"))
            elif part in table:
                out.append(table[part])
            else:
                raise DatasheetError(f"no {part}", f"{part} = [coefficients in ω², highest first]",
                                     source=path, field=f"spectrum.{part}")
        except AnalysisError as exc:
            raise exc.located(source=path, field=f"spectrum.{part}_omega") from None
    return out[0], out[1], table


def _read_spectrum_csv(path: str) -> tuple[Any, Any]:
    """Frequency [Hz] and PSD columns of a two-column CSV (a header line is allowed)."""
    import numpy as np

    from .errors import RecordingError

    rows_f, rows_p = [], []
    with open(path, encoding="utf-8") as fh:
        for lineno, line in enumerate(fh, start=1):
            text = line.strip()
            if not text or text.startswith("#"):
                continue
            parts = [p for p in text.replace(";", ",").replace("\t", ",").split(",") if p.strip()]
            try:
                f, p = float(parts[0]), float(parts[1])
            except (ValueError, IndexError):
                if not rows_f:  # a header
                    continue
                raise RecordingError(f"cannot read '{text}' as frequency, PSD",
                                     "two numbers per line", source=path,
                                     field=f"line {lineno}") from None
            rows_f.append(f)
            rows_p.append(p)
    if len(rows_f) < 3:
        raise RecordingError(f"{len(rows_f)} data lines", "at least 3 lines of frequency, PSD",
                             source=path)
    return np.array(rows_f), np.array(rows_p)


@cli.command("shape", context_settings=_CONTEXT)
@click.argument("spectrum_file", metavar="PSD", type=click.Path(dir_okay=False))
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False),
              help="Noise-model JSON to write (holds the shaped term).")
@click.option("--channel", "channel_id", default=None,
              help="Channel id of the term (default: the file's 'channel', else gyro.z).")
@click.option("--rate", type=float, default=None,
              help="Output rate [Hz] of the channel (default: the file's sample_rate, the "
                   "recording's rate, or the --add-to model's channel).")
@click.option("--orders", default="0/2", show_default=True,
              help="Fit only: numerator/denominator order of H(s), e.g. 1/3.")
@click.option("--sided", type=click.Choice(["one-sided", "two-sided"]), default="one-sided",
              show_default=True, help="Fit only: sidedness of the PSD column.")
@click.option("--from-recording", is_flag=True,
              help="PSD is a recording: fit its Welch PSD (one channel, see --channel).")
@click.option("--add-to", "add_to", type=click.Path(dir_okay=False), default=None,
              help="Add the shaped term to this noise model's channel instead of a new model.")
@_force_option
@guarded
def shape_command(spectrum_file: str, output: str, channel_id: str | None, rate: float | None,
                  orders: str, sided: str, from_recording: bool, add_to: str | None,
                  force: bool) -> None:
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
      sensormodel shape psd.csv --orders 1/3 --channel accelerometer.z \
          --add-to t900.json -o t900-vib.json
    """
    from ._io import check_writable
    from .errors import AnalysisError
    from .model import Channel, NoiseModel
    from .quantities import parse_quantity
    from .spectrum import factorize, fit_rational_psd, shaped_term, welch

    check_writable(output, force=force)
    meta: dict[str, Any] = {}
    fit = None
    name = None
    if spectrum_file.lower().endswith(".toml") and not from_recording:
        num, den, table = _read_spectrum_table(spectrum_file)
        try:
            filt = factorize(num, den)
        except AnalysisError as exc:
            raise exc.located(source=spectrum_file, field="spectrum") from None
        channel_id = channel_id or table.get("channel")
        name = table.get("name")
        if rate is None and "sample_rate" in table:
            rate = parse_quantity(table["sample_rate"], "frequency", field="spectrum.sample_rate",
                                  source=spectrum_file, allow_zero=False)
        meta["origin"] = "spectral factorization"
    else:
        try:
            n_ord, d_ord = (int(v) for v in orders.split("/"))
        except ValueError:
            raise AnalysisError(f"--orders {orders}", "two whole numbers such as 1/3") from None
        if from_recording:
            from .recording import read_recording

            rec = read_recording(spectrum_file)
            channel_id = channel_id or rec.channels[0]
            if channel_id not in rec.channels:
                raise AnalysisError(f"no channel '{channel_id}' in the recording",
                                    f"one of {', '.join(rec.channels)}", source=spectrum_file)
            rate = rate or rec.rate
            seg = max(rec.segment_arrays(channel_id), key=len)
            psd = welch(seg, rec.rate)
            f, p, sided = psd.f[1:], psd.psd[1:], "one-sided"
        else:
            f, p = _read_spectrum_csv(spectrum_file)
        try:
            fit = fit_rational_psd(f, p, numerator_order=n_ord, denominator_order=d_ord,
                                   sided=sided)
        except AnalysisError as exc:
            raise exc.located(source=spectrum_file) from None
        filt = fit.filter
        meta["origin"] = "rational fit to a measured spectrum"
        meta["fit"] = {"rms_db": fit.rms_db, "max_db": fit.max_db, "points": fit.n_points,
                       "orders": [n_ord, d_ord]}
    channel_id = channel_id or "gyro.z"
    term = shaped_term(filt, meta=meta)
    if add_to:
        base = NoiseModel.load(add_to)
        ch = base.channel(channel_id)
        from dataclasses import replace

        model = base.with_channel(replace(ch, terms=(*ch.terms, term)))
    else:
        instrument = channel_id.split(".", 1)[0]
        quantity, unit = _SHAPE_QUANTITY.get(instrument, ("as_recorded", "1"))
        if rate is None:
            raise AnalysisError("no output rate for the channel",
                                "--rate HZ (or sample_rate in the [spectrum] table)")
        model = NoiseModel(
            sensor={"name": name or f"shaped noise ({spectrum_file})"},
            channels=(Channel(id=channel_id, quantity=quantity, unit=unit, sample_rate=rate,
                              terms=(term,)),),
            provenance={"created_by": "sensormodel", "from": "spectrum",
                        "spectrum": {"file": spectrum_file}},
            conventions={"psd": "shaped: unit-intensity white noise (two-sided PSD 1 per hertz) "
                                "through H(s); output two-sided PSD |H(j2πf)|²"},
        )
    model.save(output, force=force)
    fmt = ", ".join
    click.echo(f"H(s) numerator   {fmt(f'{v:.6g}' for v in filt.numerator)}")
    click.echo(f"     denominator {fmt(f'{v:.6g}' for v in filt.denominator)}")
    click.echo(f"poles {fmt(f'{p:.6g}' for p in filt.poles)}")
    if filt.zeros.size:
        click.echo(f"zeros {fmt(f'{z:.6g}' for z in filt.zeros)}")
    click.echo(f"variance (Lyapunov) {term.variance():.6g} ({model.channel(channel_id).unit})²")
    if fit is not None:
        click.echo(f"fit error over {fit.n_points} points: rms {fit.rms_db:.3g} dB, "
                   f"worst {fit.max_db:.3g} dB")
    click.echo(f"wrote {output}: channel {channel_id} with a shaped term")


# --- identify (recording.py reads, allan.py computes, identify.py fits) ------------------------


def _identify_rows(ident: Any) -> list[list[str]]:
    """Table rows of one identified channel: SI value, readable value, interval, reading."""
    from .quantities import DISPLAY_UNITS, KINDS, convert_from_si, format_value, kind_of
    from .terms import TERM_TYPES

    rows = []
    for ft in ident.terms:
        rel = TERM_TYPES[ft.term].units[ft.parameter]
        kind = None
        if ident.unit not in ("", "1"):
            try:
                kind = kind_of(rel.replace("u", f"({ident.unit})"))
            except SensorModelError:  # a recorded unit of no known kind: its own unit only
                kind = None
        if kind is not None:
            si_unit = KINDS[kind].si
        else:
            si_unit = rel.replace("u", ident.unit if ident.unit not in ("", "1") else "(rec.)")

        def shown(v: float, kind: str | None = kind) -> str:
            if kind is None or kind not in DISPLAY_UNITS:
                return ""
            unit, label = DISPLAY_UNITS[kind]
            return format_value(convert_from_si(v, kind, unit), label)

        reading = "" if ft.slope_reading is None else format_value(ft.slope_reading)
        flag = "disagrees" if ft.disagrees else ""
        rows.append([
            ft.term,
            f"{format_value(ft.estimate)} {si_unit}",
            shown(ft.estimate),
            f"[{format_value(ft.low)}, {format_value(ft.high)}]",
            f"[{shown(ft.low)}, {shown(ft.high)}]" if kind else "",
            "yes" if ft.supported else "no",
            reading,
            flag,
        ])
    return rows


def _identify_table(ident: Any) -> str:
    head = ["term", "estimate (SI)", "readable", f"{100 * ident.confidence:g} % interval (SI)",
            "interval (readable)", "supported", "slope reading (SI)", "flag"]
    rows = _identify_rows(ident)
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(head)]
    lines = ["  " + "  ".join(h.ljust(w) for h, w in zip(head, widths, strict=True)).rstrip()]
    for r in rows:
        lines.append("  " + "  ".join(v.ljust(w) for v, w in zip(r, widths, strict=True)).rstrip())
    return "\n".join(lines)


@cli.command("identify", context_settings=_CONTEXT)
@click.argument("recording_file", metavar="REC", type=click.Path(dir_okay=False))
@click.option("-o", "--output", "output", required=True, type=click.Path(dir_okay=False),
              metavar="MODEL.json", help="The noise-model JSON file to write (supported terms, "
              "each with its interval).")
@click.option("--terms", "terms", default="quantization,white,flicker,random_walk,ramp",
              show_default=True, metavar="T1,T2,...",
              help="Terms to fit, from quantization, white, flicker, gauss_markov, random_walk, "
                   "ramp (gauss_markov only when asked for).")
@click.option("--confidence", type=float, default=0.9, show_default=True,
              help="Two-sided confidence of the coefficient intervals (not of the Allan "
                   "deviation's).")
@_recording_input_options
@click.option("--taus", default=None, metavar="SPEC",
              help="Averaging times of the fitted curve: octave (default), decade, N/decade, or "
                   "T1,T2,... seconds.")
@click.option("--bootstrap", "n_boot", type=click.IntRange(min=1), default=None, metavar="N",
              help="Bootstrap records per channel for the intervals (default 200, more for a "
                   "confidence above 0.98; more: steadier interval ends, slower).")
@click.option("--seed", type=click.IntRange(min=0), default=0, show_default=True,
              help="Seed of the bootstrap (the same seed gives the same intervals).")
@click.option("--bandwidth", "bandwidth", default=None, metavar="FREQ",
              help="The sensor's output filter (-3 dB), e.g. '50 Hz': the white term is fitted "
                   "as white noise through it (its Allan deviation falls below the white line "
                   "at tau below about 1/bandwidth). Without it the samples are taken as "
                   "unfiltered.")
@click.option("--filter-order", "filter_order", type=click.IntRange(1, 8), default=None,
              metavar="N", help="Butterworth order of that filter (default 1).")
@_force_option
@guarded
def identify_command(recording_file: str, output: str, terms: str, confidence: float,
                     rate: float | None, units: tuple[str, ...], increments: bool | None,
                     channel_map: tuple[str, ...], taus: str | None, n_boot: int | None,
                     seed: int, bandwidth: str | None, filter_order: int | None,
                     force: bool) -> None:
    """Fit noise terms to the overlapping Allan variance of each channel of a recording, with
    intervals from a parametric bootstrap, and write them as a noise model.

    The fit is non-negative weighted least squares on the Allan variance with the exact form of
    each term; terms the data cannot tell from zero are reported but left out of the model.
    Beside each fit the classical slope reading (IEEE Std 952 Annex C: white at τ = 1 s,
    random walk at τ = 3 s, flicker from the floor) is shown and flagged where it falls outside
    the interval. The model file is a normal noise model (inspect, simulate, export read it).

    \b
    Example:
      sensormodel identify static.csv -o static-model.json
      sensormodel identify log.tsv --channel rate_z=gyro.z --unit rate_z=deg/s --rate 400 \\
          --terms white,flicker,random_walk -o unit42.json
      sensormodel identify mems.npy --bandwidth "50 Hz" --filter-order 2 -o mems-model.json
    """
    import pathlib

    from ._io import check_writable
    from .allan import overlapping_many
    from .errors import AnalysisError
    from .identify import fit, to_model
    from .quantities import format_value
    from .recording import read_recording

    check_writable(output, force=force)
    taus_spec = _taus_option(taus)
    band = None if bandwidth is None else _frequency_option(bandwidth, "--bandwidth")
    if filter_order is not None and band is None:
        raise AnalysisError("--filter-order without --bandwidth", "a --bandwidth with it",
                            field="--filter-order")
    bar = _StderrBar("reading")
    try:
        rec = read_recording(recording_file, rate=rate, unit=_unit_option(units),
                             increments=increments, channel_map=_channel_option(channel_map),
                             progress=bar)
    finally:
        bar.close()
    for f in rec.findings:
        where = f"{rec.source}:{f.where}" if f.where else rec.source
        click.echo(f"note: {where}: {f.detail}", err=True)
    bar = _StderrBar("Allan deviation")
    try:
        firsts = [rec.segments[ch][0] for ch in rec.channels]
        curves = overlapping_many([rec.data[ch][seg.start:seg.stop]
                                   for ch, seg in zip(rec.channels, firsts, strict=True)],
                                  rec.rate, taus=taus_spec,
                                  units=[rec.units[ch] for ch in rec.channels],
                                  channels=list(rec.channels), progress=bar)
    finally:
        bar.close()
    results = []
    bar = _StderrBar("bootstrap")
    try:
        for j, curve in enumerate(curves):

            def progress(done: int, total: int, j: int = j) -> None:
                bar(j * total + done, len(rec.channels) * total)

            try:
                results.append(fit(curve, terms=terms, confidence=confidence, seed=seed,
                                   n_boot=n_boot, progress=progress, bandwidth=band,
                                   filter_order=filter_order))
            except AnalysisError as exc:  # name the option rather than the argument
                option = {"terms": "--terms", "confidence": "--confidence",
                          "n_boot": "--bootstrap"}.get(exc.field or "")
                if option is None:
                    raise exc.located(source=rec.source) from None
                raise AnalysisError(exc.problem, exc.expected, field=option) from None
    finally:
        bar.close()
    model = to_model(results, sensor={"name": f"identified from {pathlib.Path(rec.source).name}"},
                     source=rec.source)
    for n, ident in enumerate(results):
        if n:
            click.echo("")
        click.echo(f"{ident.channel} [{ident.unit}]: {ident.n_samples} samples at "
                   f"{format_value(ident.sample_rate, 'Hz')} ({_format_time(ident.duration)}), "
                   f"{ident.n_boot} bootstrap records")
        click.echo(_identify_table(ident))
        for note in ident.notes:
            click.echo(f"  note: {note}")
    model.save(output, force=force)
    kept = sum(len(c.terms) for c in model.channels)
    left = sum(1 for i in results for t in i.terms if not t.supported)
    click.echo(f"wrote {output}: {len(model.channels)} channels, {kept} terms"
               + (f" ({left} not supported, left out)" if left else ""))
