"""Argument checks shared by every engine: each takes the argument's name and raises
:class:`~sensormodel.errors.AnalysisError` naming it.

One owner per check: the engines (allan, identify, acceptance, simulate, linear, spectrum,
recording) import these rather than writing their own. A check returns the value in the type
the engine computes with (float, int, float64 array).
"""

from __future__ import annotations

import math
import os
from typing import Any

import numpy as np
import numpy.typing as npt

from .errors import AnalysisError

__all__ = [
    "probability",
    "rate",
    "seed",
    "whole_number",
    "workers",
    "positive_array",
    "usable_cpus",
]


def _number(value: Any, name: str, expected: str) -> tuple[float, Any]:
    """``float(value)`` and the value as messages show it, or AnalysisError(``got <value>;
    expected <expected>``) naming ``name``.

    A boolean is read (and shown) as NaN: ``float(True)`` is 1.0, never a meant number, so the
    caller's range check refuses it with its own message.
    """
    if isinstance(value, bool):
        return math.nan, math.nan
    try:
        return float(value), value
    except (TypeError, ValueError):
        raise AnalysisError(f"got {value!r}", expected, field=name) from None


def probability(value: Any, name: str = "confidence", *, example: str = "0.9") -> float:
    """A probability strictly between 0 and 1 (a confidence, a power, a quantile).

    Parameters
    ----------
    value : Any
        The argument as given.
    name : str
        The argument's name, used in the message.
    example : str
        A valid value shown in the message.

    Returns
    -------
    float
    """
    c, value = _number(value, name, f"a probability between 0 and 1, e.g. {example}")
    if not 0.0 < c < 1.0:
        raise AnalysisError(
            f"got {value!r}", f"a probability strictly between 0 and 1, e.g. {example}", field=name
        )
    return c


def rate(value: Any, name: str = "rate") -> float:
    """A sample rate [Hz]: a finite number > 0."""
    r, value = _number(value, name, "a sample rate in Hz (a positive number)")
    if not (math.isfinite(r) and r > 0.0):
        raise AnalysisError(f"got {value!r} Hz", "a finite sample rate > 0 Hz", field=name)
    return r


def whole_number(value: Any, name: str, *, minimum: int = 1) -> int:
    """A whole number ≥ ``minimum`` (booleans refused)."""
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise AnalysisError(f"got {value!r}", f"a whole number ≥ {minimum}", field=name)
    return int(value)


def seed(value: Any, name: str = "seed") -> int | None:
    """A random seed: None (fresh entropy, decided by the caller) or a whole number ≥ 0."""
    if value is None:
        return None
    return whole_number(value, name, minimum=0)


def workers(value: Any, name: str = "workers") -> int | None:
    """A worker (thread or process) count: None (automatic) or a whole number ≥ 1."""
    if value is None:
        return None
    return whole_number(value, name, minimum=1)


def positive_array(x: npt.ArrayLike, name: str) -> npt.NDArray[np.float64]:
    """A non-empty float64 array of positive, finite values (τ, frequencies, horizons)."""
    a = np.asarray(x, dtype=float)
    if a.size == 0:
        raise AnalysisError("got no values", f"at least one {name} value", field=name)
    ok = np.isfinite(a) & (a > 0)
    if not np.all(ok):
        bad = a[~ok].ravel()[0]
        raise AnalysisError(f"contains {bad!r}", f"positive, finite values of {name}", field=name)
    return a


def usable_cpus() -> int:
    """The number of CPUs this process may run on (its affinity mask where the OS has one)."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        return os.cpu_count() or 1
