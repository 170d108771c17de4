"""The command group, the one error boundary and the terminal helpers every command shares.

Every command reports bad input as one line on stderr,
``error: <file>[:<field or line>]: <what is wrong>; expected <what>``, with exit code 2 and no
traceback (``--debug`` shows one). Exit codes 1 and 3 are reserved for verdicts (``verify``).
Option values are checked where they are parsed (:mod:`._types`); what the library refuses is
translated here (:func:`guarded`).
"""

from __future__ import annotations

import functools
import sys
from collections.abc import Callable
from importlib.metadata import PackageNotFoundError, version
from typing import Any

import click

from ..errors import SensorModelError

__all__ = [
    "CONTEXT",
    "EXIT_BAD_INPUT",
    "StderrBar",
    "cli",
    "echo_findings",
    "force_option",
    "output_option",
    "guarded",
    "main",
    "status",
]

EXIT_BAD_INPUT = 2

#: click settings of the group and of every command.
CONTEXT = {"help_option_names": ["-h", "--help"], "max_content_width": 100}


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


def force_option(func: Callable[..., Any]) -> Callable[..., Any]:
    """The ``--force`` flag of every command that writes files."""
    return click.option("--force", is_flag=True, help="Overwrite an existing output file.")(func)


def output_option(flag: str, dest: str, help: str) -> Callable[[Any], Any]:
    """An optional output file option (``--json``, ``--plot``, ``--report``) stored as ``dest``."""
    return click.option(flag, dest, type=click.Path(dir_okay=False), default=None, help=help)


class StderrBar:
    """A progress callback drawing a click progress bar on stderr when stderr is a terminal;
    nothing in pipes, files and tests.

    Call it as ``bar(done, total)``, or give ``total`` once and call ``bar.advance(k)`` (work
    counted in increments). Use it as a context manager, or call :meth:`close`.
    """

    def __init__(self, label: str, total: int | None = None) -> None:
        self.label = label
        self.total = total
        self.enabled = sys.stderr.isatty()
        self._bar: Any = None
        self._shown = 0
        self._done = 0

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

    def advance(self, count: int) -> None:
        """``count`` more units of the ``total`` given at construction are done."""
        self._done += count
        self(self._done, self.total or 0)

    def close(self) -> None:
        if self._bar is not None:
            self._bar.__exit__(None, None, None)
            self._bar = None

    def __enter__(self) -> StderrBar:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def status(text: str) -> None:
    """``… text`` on stderr when it is a terminal (what long work is doing); quiet otherwise."""
    if sys.stderr.isatty():
        click.echo(f"… {text}", err=True)


def echo_findings(recording: Any) -> None:
    """One ``note:`` line on stderr per finding of a recording read with ``gaps="split"``."""
    for f in recording.findings:
        where = f"{recording.source}:{f.where}" if f.where else recording.source
        click.echo(f"note: {where}: {f.detail}", err=True)


def _version() -> str:
    try:
        return version("sensormodel")
    except PackageNotFoundError:  # pragma: no cover - running from a source tree
        return "0+unknown"


@click.group(context_settings=CONTEXT)
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
