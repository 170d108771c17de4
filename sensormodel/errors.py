"""The exception hierarchy of sensormodel (DESIGN §8).

Every error a user can cause is a :class:`SensorModelError`. Each carries the place it refers to
(``source``: a file name or ``None``; ``field``: a key path, column or line) and builds the one-line
message of DESIGN §6::

    <source>[:<field>]: <what is wrong>; <what is expected>

The command line prints it as ``error: <message>`` with exit code 2. Each subclass also inherits
the builtin exception a Python caller would expect (``ValueError`` for bad values, ``OSError`` is
never used for content problems).
"""

from __future__ import annotations

__all__ = [
    "SensorModelError",
    "UnitError",
    "DatasheetError",
    "ModelFileError",
    "RecordingError",
    "AnalysisError",
]


class SensorModelError(Exception):
    """Base class of every error sensormodel raises on bad input.

    Parameters
    ----------
    problem : str
        What is wrong, e.g. ``"got '0.1 1/s**0.5' ([1/time]**0.5)"``.
    expected : str, optional
        What was expected, e.g. ``"an angle per square-root time such as '0.15 deg/rt-h'"``.
    source : str, optional
        The file (or other input) the problem is in.
    field : str, optional
        The field, key path, column or line within ``source``.
    """

    def __init__(
        self,
        problem: str,
        expected: str | None = None,
        *,
        source: str | None = None,
        field: str | None = None,
    ) -> None:
        self.problem = problem
        self.expected = expected
        self.source = source
        self.field = field
        super().__init__(problem, expected, source, field)

    def __str__(self) -> str:
        where = ""
        if self.source and self.field:
            where = f"{self.source}:{self.field}: "
        elif self.source or self.field:
            where = f"{self.source or self.field}: "
        text = f"{where}{self.problem}"
        if self.expected:
            text += f"; expected {self.expected}"
        return " ".join(text.splitlines())  # one line, even when a value held a line break

    def __reduce__(self):  # keep pickling (multiprocessing) faithful
        return (
            _rebuild,
            (type(self), self.problem, self.expected, self.source, self.field),
        )

    def located(self, *, source: str | None = None, field: str | None = None):
        """Return a copy of this error with ``source`` / ``field`` filled where still empty."""
        return type(self)(
            self.problem,
            self.expected,
            source=self.source or source,
            field=self.field or field,
        )


def _rebuild(cls, problem, expected, source, field):
    return cls(problem, expected, source=source, field=field)


class UnitError(SensorModelError, ValueError):
    """A value has no unit, an unknown unit, or a unit of the wrong dimension."""


class DatasheetError(SensorModelError, ValueError):
    """A datasheet file is malformed, inconsistent or has an unknown key."""


class ModelFileError(SensorModelError, ValueError):
    """A noise-model (or other sensormodel JSON) file is malformed or of an unknown version."""


class RecordingError(SensorModelError, ValueError):
    """A recording cannot be read as a clean, uniformly sampled record."""


class AnalysisError(SensorModelError, ValueError):
    """A computation cannot give a meaningful result for the given data or arguments."""
