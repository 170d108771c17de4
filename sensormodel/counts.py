"""Integer-coded records: whether samples are whole multiples of a count step, and its size.

Many sensors deliver integer counts that the user (or the file) scales to a physical unit,
y = offset + k·q with k an integer: 0.05 °/s per count for an industrial MEMS gyro, for
example. The count step q is then a property of the record, and its quantization a known
noise floor (:mod:`sensormodel.identify` reports it). Nothing here reads files: the samples
come from a recording (:meth:`sensormodel.recording.Recording.samples`).

Detection
---------
The distinct values of an integer-coded record lie on a lattice offset + k·q. They are sorted;
values closer than the arithmetic's own resolution (a few units in the last place of the
largest value, :data:`_MERGE_ULPS`) are merged (one count written twice through different
floating-point paths); the step candidate is the smallest spacing q₀ of the merged values,
refined over the whole span, q = span/round(span/q₀), so that its relative error is that of
the span divided by the number of steps. The values are on the lattice when every spacing is a
whole multiple of q within :data:`LATTICE_TOLERANCE` of a step, and the lattice is **occupied**:
the span holds at most :data:`MAX_EMPTY_RATIO` lattice points per distinct value. The last
condition refuses continuous data, whose smallest spacing is tiny (about span/n² for n
samples), so that every value would trivially sit on a lattice of it. Fewer than
:data:`MIN_LEVELS` distinct values are not called a lattice either (two values always are).

Robust to an offset (the lattice origin is the smallest value) and a scale (q is in the
samples' unit). A record whose counts were scaled in single precision keeps its spacings to
about 1e-7 of the values, within the tolerance where the counts are below about 10⁴; a finer
record is refused rather than given a wrong step.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from .errors import AnalysisError

__all__ = ["CountStep", "count_step", "LATTICE_TOLERANCE", "MAX_EMPTY_RATIO", "MIN_LEVELS"]

#: A spacing is a whole number of steps when it is within this fraction of a step of one.
LATTICE_TOLERANCE = 1e-3
#: At most this many lattice points per distinct value between the smallest and the largest.
MAX_EMPTY_RATIO = 4.0
#: The fewest distinct values of a lattice.
MIN_LEVELS = 3
#: Values closer than this many units in the last place of the largest |value| are one value.
_MERGE_ULPS = 64.0


@dataclass(frozen=True)
class CountStep:
    """The lattice of an integer-coded record.

    Attributes
    ----------
    step : float
        The count step q [u] (the samples' unit): every sample is offset + k·q, k an integer.
    offset : float
        The lattice's offset [u], in [0, q).
    levels : int
        Distinct values in the record.
    span : int
        Lattice steps between the smallest and the largest value.
    """

    step: float
    offset: float
    levels: int
    span: int


def count_step(samples: npt.ArrayLike) -> CountStep | None:
    """The count step of a record whose samples are whole multiples of one, else None.

    Parameters
    ----------
    samples : array_like
        The samples [u] (one channel, one clean segment); non-finite values are ignored.

    Returns
    -------
    CountStep or None
        The lattice (module notes); None where the values are not on an occupied lattice of
        at least :data:`MIN_LEVELS` values.

    Raises
    ------
    AnalysisError
        Samples that are not a one-dimensional array of numbers.
    """
    try:
        y = np.asarray(samples, dtype=np.float64)
    except (TypeError, ValueError):
        raise AnalysisError(
            f"got {type(samples).__name__}", "an array of samples", field="samples"
        ) from None
    if y.ndim != 1:
        raise AnalysisError(f"got {y.ndim} dimensions", "one channel's samples", field="samples")
    values = np.unique(y[np.isfinite(y)])
    if values.size < MIN_LEVELS:
        return None
    resolution = _MERGE_ULPS * float(np.spacing(np.max(np.abs(values))))
    gaps = np.diff(values)
    keep = np.concatenate([[True], gaps > resolution])
    values = values[keep]
    if values.size < MIN_LEVELS:
        return None
    gaps = np.diff(values)
    width = float(values[-1] - values[0])
    q0 = float(np.min(gaps))
    steps = round(width / q0)
    if steps > MAX_EMPTY_RATIO * values.size:
        return None
    q = width / steps
    k = gaps / q
    if np.any(np.abs(k - np.rint(k)) > LATTICE_TOLERANCE):
        return None
    return CountStep(
        step=q,
        offset=float(math.fmod(float(values[0]), q)) % q,
        levels=int(values.size),
        span=int(steps),
    )
