"""The demo command: the whole chain on the bundled example (:func:`sensormodel.demo.run_demo`)."""

from __future__ import annotations

import click

from ..demo import run_demo
from ..report import verdict_text
from ._app import CONTEXT, force_option, guarded, status

__all__ = ["COMMANDS"]


@click.command("demo", context_settings=CONTEXT)
@click.option("--out", "out", type=click.Path(file_okay=False), default="demo-output",
              show_default=True, help="Folder for the demo's files.")
@force_option
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
    result = run_demo(out, force=force, progress=status)
    click.echo(verdict_text(result.report))  # its notes name the staged deviation
    click.echo("")
    for what, path in result.files.items():
        click.echo(f"wrote {what}: {path}")
    total = sum(result.timings.values())
    steps = ", ".join(f"{k} {v:.1f} s" for k, v in result.timings.items())
    click.echo(f"done in {total:.1f} s ({steps}); open {result.files['report (HTML)']} "
               "in a browser")


COMMANDS = (demo_command,)
