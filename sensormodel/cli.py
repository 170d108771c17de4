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
    from .model import NoiseModel

    check_writable(output, force=force)
    model = NoiseModel.from_datasheet(datasheet, worst_case=worst_case)
    model.save(output, force=force)
    n_terms = sum(len(c.terms) for c in model.channels)
    click.echo(f"wrote {output}: {len(model.channels)} channels, {n_terms} terms "
               f"({'max' if worst_case else 'typ'} values)")
    for note in model.provenance.get("notes", []):
        click.echo(f"note: {note}", err=True)


@cli.command(context_settings=_CONTEXT)
@click.argument("model_file", metavar="MODEL", type=click.Path(dir_okay=False))
@click.option("--rate", type=float, default=None,
              help="Output rate [Hz] for the per-sample standard deviation (default: the channel's).")
@click.option("--channel", "channels", multiple=True,
              help="Show only this channel (repeatable), e.g. --channel gyro.z.")
@guarded
def inspect(model_file: str, rate: float | None, channels: tuple[str, ...]) -> None:
    """Show a noise model's terms in SI and in datasheet units, and the per-sample std.

    \b
    Example:
      sensormodel inspect t900.json
      sensormodel inspect t900.json --rate 100 --channel gyro.z
    """
    from .errors import AnalysisError
    from .model import NoiseModel
    from .report import inspect_text

    if rate is not None and not rate > 0:
        raise AnalysisError(f"--rate {rate}", "a positive rate in Hz")
    model = NoiseModel.load(model_file).select(list(channels))
    click.echo(inspect_text(model, rate=rate))
