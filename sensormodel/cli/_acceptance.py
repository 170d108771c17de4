"""Acceptance commands: verify (a recording against a datasheet) and plan (how long to record).

Each command parses its options, calls one library function and prints the result.
"""

from __future__ import annotations

import click

from .._io import check_writable
from ..acceptance import declared_ranges, plan, verify
from ..datasheet import load_datasheet
from ..errors import AnalysisError
from ..report import (
    check_verdict_html,
    plan_text,
    verdict_text,
    write_verdict_html,
    write_verdict_json,
)
from ._app import CONTEXT, force_option, guarded, output_option, status
from ._options import RecordingOptions, recording_options
from ._types import BOOTSTRAP_HELP, RATE, Fraction, Probability, check_bootstrap

__all__ = ["COMMANDS", "EXIT_FAIL", "EXIT_INCONCLUSIVE"]

EXIT_FAIL = 1
EXIT_INCONCLUSIVE = 3

_CAUTION = (
    "Caution: acceptance decisions follow the customer's contract and the applicable standards."
)
_ACCEPTANCE_HELP = (
    "Exit codes: 0 every term passes, 1 a term fails, 3 otherwise (inconclusive), 2 bad input. "
    + _CAUTION
)
_PLAN_HELP = "Exit codes: 0 the plan was made, 2 bad input. " + _CAUTION


@click.command("verify", context_settings=CONTEXT, epilog=_ACCEPTANCE_HELP)
@click.argument("recording_file", metavar="REC", type=click.Path())
@click.option("--spec", "spec_file", required=True, type=click.Path(dir_okay=False),
              metavar="DATASHEET", help="The datasheet (TOML) the unit is accepted against.")
@click.option("--against", type=click.Choice(["max", "typ"]), default="max", show_default=True,
              help="The datasheet column used as the limit.")
@click.option("--confidence", type=Probability("0.9"), default=0.9, show_default=True,
              help="Two-sided confidence of the intervals (each one-sided error ≤ (1−C)/2).")
@click.option("--power", type=Probability("0.8"), default=0.8, show_default=True,
              help="Probability with which the suggested record length decides a term.")
@output_option("--report", "report_file",
               help="Write the HTML report (and one PNG per figure beside it).")
@output_option("--json", "json_file",
               help="Write the verdict report as JSON (schema sensormodel/verdict-report/1, SI).")
@click.option("--asd", is_flag=True,
              help="Draw the report's spectra as amplitude densities (√ two-sided PSD in the "
                   "datasheet's unit per √Hz: a white level reads as the printed noise density).")
@recording_options
@click.option("--only", "only", multiple=True, metavar="CHANNEL_ID",
              help="Verify only this channel (repeatable).")
@click.option("--seed", type=click.IntRange(min=0), default=0, show_default=True,
              help="Seed of the identification's random parts (the verdict is reproducible).")
@click.option("--bootstrap", "n_boot", type=click.IntRange(min=1), default=None, metavar="N",
              help=BOOTSTRAP_HELP)
@force_option
@guarded
def verify_command(recording_file: str, spec_file: str, against: str, confidence: float,
                   power: float, report_file: str | None, json_file: str | None, asd: bool,
                   reading: RecordingOptions, only: tuple[str, ...], seed: int,
                   n_boot: int | None, force: bool) -> None:
    """Does a delivered sensor meet its datasheet? Verdict per channel and term, with
    confidence: pass (the whole interval within the limit), fail (beyond it) or inconclusive
    (the limit inside the interval, with the record length that would decide it).

    With --gaps split, the longest clean segment of each channel is verified.

    \b
    Example:
      sensormodel verify unit42.csv --spec examples/bw-t900.toml
      sensormodel verify unit42.npy --spec examples/bw-t900.toml --report unit42.html \\
          --json unit42.json
    """
    # every input and output checked before any work (the figures too: named by channel)
    check_bootstrap(n_boot, confidence)
    datasheet = load_datasheet(spec_file)
    if json_file:
        check_writable(json_file, force=force)
    if report_file:
        check_verdict_html(report_file, [ax.channel_id for ax in datasheet.channels()],
                           force=force)
    recording = reading.read(recording_file, ranges=declared_ranges(datasheet))
    try:
        result = verify(recording, datasheet, confidence=confidence, against=against,
                        power=power, channels=list(only) or None, seed=seed, n_boot=n_boot,
                        workers=2, progress=lambda channel_id: status(f"analysing {channel_id}"))
    except AnalysisError as exc:  # an analysis error names the recording it is about
        raise exc.located(source=recording.source or recording_file) from None
    click.echo(verdict_text(result))
    if json_file:
        write_verdict_json(result, json_file, force=force)
        click.echo(f"wrote {json_file}")
    if report_file:
        for path in write_verdict_html(result, report_file, force=force, asd=asd):
            click.echo(f"wrote {path}")
    click.get_current_context().exit(result.exit_code)


@click.command("plan", context_settings=CONTEXT, epilog=_PLAN_HELP)
@click.argument("datasheet", type=click.Path(dir_okay=False))
@click.option("--confidence", type=Probability("0.9"), default=0.9, show_default=True,
              help="Two-sided confidence of verify's intervals.")
@click.option("--power", type=Probability("0.8"), default=0.8, show_default=True,
              help="Probability with which the planned length decides a term.")
@click.option("--margin", type=Fraction("0.25"), default=0.25, show_default=True,
              help="The unit the plan promises a decision for lies this fraction below each "
                   "limit (a term at (1 - M)·limit).")
@click.option("--against", type=click.Choice(["max", "typ"]), default="max", show_default=True,
              help="The datasheet column to verify.")
@click.option("--rate", type=RATE, default=None, metavar="HZ",
              help="Sample rate of the planned record [Hz] (default the datasheet's).")
@guarded
def plan_command(datasheet: str, confidence: float, power: float, margin: float, against: str,
                 rate: float | None) -> None:
    """Before any test: how long must a static record be to verify each datasheet term?

    The promise: a unit whose term lies at (1 - margin)·limit, recorded for the planned
    length, gets a decided verdict on that term from verify (pass; a unit as far above the
    limit, fail) with probability at least --power: its --confidence interval lies wholly
    within (beyond) the limit. A unit exactly at its limit is decided in only about
    (1 - C)/2 of records, whatever the length.

    Shows, per term, the averaging time τ it is read at (where it dominates the curve), its
    share of the Allan variance there and the record length verify's fit needs.

    \b
    Example:
      sensormodel plan examples/bw-t900.toml
      sensormodel plan examples/bw-t900.toml --power 0.9 --margin 0.1
    """
    click.echo(plan_text(plan(datasheet, confidence=confidence, power=power, margin=margin,
                              against=against, sample_rate=rate)))


COMMANDS = (verify_command, plan_command)
