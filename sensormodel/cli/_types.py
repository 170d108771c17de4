"""click parameter types: every option value is converted and checked where it is parsed.

A refused value ends the command before any work with the one-line error of DESIGN §6
(``error: <option> <value>; expected <what>``, exit code 2): :class:`OptionError` is a click
``BadParameter`` shown as that one line. The checks themselves are the library's
(:mod:`sensormodel.validate`, :mod:`sensormodel.quantities`); these types only name the option.
"""

from __future__ import annotations

import math
import pathlib
from collections.abc import Sequence
from typing import Any, NoReturn

import click

from .. import validate
from ..errors import AnalysisError, RecordingError, SensorModelError
from ..identify import bootstrap_minimum
from ..quantities import parse_quantity
from ..recording import parse_channel_map

__all__ = [
    "OptionError",
    "Quantity",
    "DURATION",
    "FREQUENCY",
    "RATE",
    "TIME_STEP",
    "Probability",
    "Fraction",
    "TauGrid",
    "ChannelPair",
    "UnitSpec",
    "OutputFile",
    "FormatList",
    "Orders",
    "unit_plan",
]


class OptionError(click.BadParameter):
    """An option value refused where it is parsed, shown as ``error: <message>`` (exit 2)."""

    def format_message(self) -> str:
        return self.message

    def show(self, file: Any = None) -> None:
        click.echo(f"error: {self.format_message()}", err=True)


def _option_label(param: click.Parameter | None, fallback: str) -> str:
    """The option's first spelling (``--rate``, ``-o``), as messages name it."""
    if param is not None and getattr(param, "opts", None):
        return str(param.opts[0])
    return fallback


class _Checked(click.ParamType):
    """A parameter type whose refusals are :class:`OptionError` one-liners."""

    def fail(
        self, message: str, param: click.Parameter | None = None, ctx: click.Context | None = None
    ) -> NoReturn:
        raise OptionError(message, ctx=ctx, param=param)

    def label(self, param: click.Parameter | None) -> str:
        return _option_label(param, self.name)

    def refuse(
        self, value: Any, expected: str, param: click.Parameter | None, ctx: click.Context | None
    ) -> NoReturn:
        """Fail with ``<option> <value>; expected <expected>``."""
        self.fail(str(AnalysisError(f"{self.label(param)} {value}", expected)), param, ctx)


class _Parsed(_Checked):
    """A type that parses text into a ``converted`` value (a tuple, a list).

    click also passes values that are already converted (defaults, values given from Python);
    they go through unchanged, and only text reaches :meth:`parse`.
    """

    converted: type = tuple

    def convert(self, value: Any, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        if isinstance(value, self.converted):
            return value
        return self.parse(str(value), param, ctx)

    def parse(self, text: str, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        """The value of the option text ``text`` (refusals through :meth:`refuse`)."""
        raise NotImplementedError


class Quantity(_Checked):
    """A positive, finite quantity in SI: a bare number is SI; otherwise a value with its unit.

    Parameters
    ----------
    kind : str
        A kind of :data:`sensormodel.quantities.KINDS` (``time``, ``frequency``).
    what : str
        The noun in the message (``a positive <what>``).
    example : str
        Valid values shown in the message.
    """

    def __init__(self, kind: str, what: str, example: str) -> None:
        self.kind = kind
        self.what = what
        self.example = example
        self.name = kind

    def convert(self, value: Any, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        option = self.label(param)
        text = str(value).strip()
        try:
            si = float(text)
        except ValueError:
            try:
                si = parse_quantity(text, self.kind, field=option)
            except SensorModelError as exc:
                self.fail(str(exc), param, ctx)
        if not (si > 0 and math.isfinite(si)):
            self.refuse(value, f"a positive {self.what}, e.g. {self.example}", param, ctx)
        return si


#: A record length or horizon: seconds, or a time with its unit ('2 h').
DURATION = Quantity("time", "time", "600 or '2 h'")
#: A filter or sample step: seconds, or a time with its unit ('10 ms').
TIME_STEP = Quantity("time", "time", "0.01 or '10 ms'")
#: A frequency such as a filter bandwidth: hertz, or a frequency with its unit.
FREQUENCY = Quantity("frequency", "frequency", "50 or '50 Hz'")
#: A sample rate: hertz, or a frequency with its unit.
RATE = Quantity("frequency", "rate in Hz", "100 or '100 Hz'")


class Probability(_Checked):
    """A probability strictly between 0 and 1 (a confidence, a power), checked by
    :func:`sensormodel.validate.probability`."""

    name = "probability"

    def __init__(self, example: str) -> None:
        self.example = example

    def convert(self, value: Any, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        option = self.label(param)
        try:
            number = float(value)
        except (TypeError, ValueError):
            number = value  # validate names what it got
        try:
            return validate.probability(number, option, example=self.example)
        except AnalysisError as exc:
            self.fail(str(exc), param, ctx)


class Fraction(_Checked):
    """A fraction strictly between 0 and 1 (a relative precision)."""

    name = "fraction"

    def __init__(self, example: str) -> None:
        self.example = example

    def convert(self, value: Any, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        try:
            number = float(value)
        except (TypeError, ValueError):
            number = math.nan
        if not 0.0 < number < 1.0:
            self.refuse(value, f"a fraction between 0 and 1, e.g. {self.example}", param, ctx)
        return number


class TauGrid(_Checked):
    """Averaging times: ``octave``, ``decade``, ``N/decade`` (passed on as text, see
    :func:`sensormodel.allan.tau_grid`), or ``T1,T2,...`` (seconds or times with units)."""

    name = "taus"

    def convert(self, value: Any, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        if not isinstance(value, str):
            return value
        spec = value.strip().lower()
        if spec in ("octave", "decade"):
            return spec
        if spec.endswith("/decade"):
            per = spec.removesuffix("/decade").strip()
            if per.isdigit() and int(per) >= 1:
                return f"{int(per)}/decade"
            self.refuse(value, "N/decade with N a whole number ≥ 1, e.g. 10/decade", param, ctx)
        return [TIME_STEP.convert(part, param, ctx) for part in value.split(",") if part.strip()]


class ChannelPair(_Parsed):
    """``COLUMN=CHANNEL_ID``, e.g. ``rate_z=gyro.z`` → ``("rate_z", "gyro.z")``."""

    name = "channel map"

    def parse(self, text: str, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        try:
            ((column, channel),) = parse_channel_map([text]).items()
        except RecordingError as exc:
            self.fail(str(exc), param, ctx)
        return column, channel


class UnitSpec(_Parsed):
    """``U`` (every column without a unit) or ``COLUMN=U`` → ``(None, U)`` or ``(COLUMN, U)``.

    The unit itself is checked by the recording reader, which knows the column's quantity.
    """

    name = "unit"

    def parse(self, text: str, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        column, sep, unit = text.partition("=")
        if not sep:
            return None, column.strip()
        if not column.strip() or not unit.strip():
            self.fail(
                str(RecordingError(f"--unit {text}", "COLUMN=UNIT, e.g. gyro_x=deg/s")), param, ctx
            )
        return column.strip(), unit.strip()


def unit_plan(specs: Sequence[tuple[str | None, str]]) -> str | dict[str, str] | None:
    """The ``unit`` argument of :func:`sensormodel.recording.read_recording` from
    :class:`UnitSpec` values: one unit for all, a unit per column, or None.

    Raises
    ------
    RecordingError
        A unit for all columns mixed with per-column units, or two units for all.
    """
    bare = [u for c, u in specs if c is None]
    if len(bare) > 1 or (bare and len(bare) < len(specs)):
        given = " --unit ".join(u if c is None else f"{c}={u}" for c, u in specs)
        raise RecordingError(
            f"--unit {given}",
            "one unit for every column without one (--unit deg/s), or COLUMN=UNIT pairs "
            "(--unit gyro_x=deg/s --unit time=ms)",
        )
    if bare:
        return bare[0]
    return {c: u for c, u in specs if c is not None} or None


class OutputFile(click.Path):
    """An output file name with one of the given suffixes (``.json``, ``.csv`` …)."""

    def __init__(self, suffixes: Sequence[str]) -> None:
        super().__init__(dir_okay=False)
        self.suffixes = tuple(s.lower() for s in suffixes)

    def convert(self, value: Any, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        path = super().convert(value, param, ctx)
        if pathlib.Path(path).suffix.lower() not in self.suffixes:
            wanted = " or ".join(self.suffixes)
            message = f"a file name ending in {wanted}"
            raise OptionError(
                str(AnalysisError(f"{_option_label(param, 'output')} {value}", message)),
                ctx=ctx,
                param=param,
            )
        return path


class FormatList(_Parsed):
    """A comma list of file forms, each one of ``choices`` → list."""

    name = "formats"
    converted = list

    def __init__(self, choices: Sequence[str]) -> None:
        self.choices = tuple(choices)

    def parse(self, text: str, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        wanted = [f.strip().lower() for f in text.split(",") if f.strip()]
        if not wanted or any(f not in self.choices for f in wanted):
            self.refuse(text, f"a comma list of {', '.join(self.choices)}", param, ctx)
        return wanted


class Orders(_Parsed):
    """``N/D``: numerator and denominator orders of a rational fit, e.g. ``1/3`` → (1, 3)."""

    name = "orders"

    def parse(self, text: str, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        try:
            n_ord, d_ord = (int(v) for v in text.split("/"))
        except ValueError:
            self.refuse(text, "two whole numbers such as 1/3", param, ctx)
        return n_ord, d_ord


def check_bootstrap(n_boot: int | None, confidence: float) -> None:
    """Refuse, before any work, a ``--bootstrap`` count too small for ``--confidence``
    (:func:`sensormodel.identify.bootstrap_minimum`)."""
    if n_boot is None:
        return
    need = bootstrap_minimum(confidence)
    if n_boot < need:
        raise AnalysisError(
            f"got {n_boot}",
            f"at least {need} records for intervals at confidence {confidence:g} (two records "
            "beyond each end)",
            field="--bootstrap",
        )


#: The help of every ``--bootstrap`` option.
BOOTSTRAP_HELP = (
    "Bootstrap records per channel for the intervals: at least 2/α, α = (1 − confidence)/2 "
    "(40 at 0.9, 400 at 0.99); default the larger of that and 200. Fewer: quicker and rougher."
)
