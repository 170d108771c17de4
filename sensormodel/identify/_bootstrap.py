"""The parametric bootstrap: the overlapping Allan variances at a curve's τ of records of a
fitted model.

Two paths, one loop (:func:`_bootstrap`):

* records of fewer than :attr:`._bands._BandSettings.min_samples` samples are simulated whole at
  their rate (:class:`._synthesis._Simulator`) and their Allan variance computed at every τ
  (:class:`._synthesis._BootstrapAllan`): the exact joint law of the estimates;
* longer records take the banded path (:mod:`._bands`): each band of τ is one simulation of a
  bounded number of coarse samples, so the cost per record does not grow with its length.

Both compute the Allan variance with the engine of :func:`sensormodel.allan.overlapping`
(:func:`sensormodel.allan.second_difference_sums`).
"""

from __future__ import annotations

import threading
from collections.abc import Callable, Mapping
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from .. import validate
from . import _bands
from ._checks import _Curve
from ._synthesis import _BootstrapAllan, _Simulator, _white_alias_sum

__all__ = ["_BootstrapAllan", "_Simulator", "_white_alias_sum", "_bootstrap", "_Progress"]

_FloatArray = npt.NDArray[np.float64]
ProgressCallback = Callable[[int, int], Any]

#: Records (or bands) of at least this many samples in all are simulated on two threads.
_THREAD_MIN_SAMPLES = 1 << 17


# ---------------------------------------------------------------------------------------------
# The bootstrap loop
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Progress:
    """Where a batch of bootstrap records stands in the whole run: ``callback(done, total)``
    after each chunk, counting ``done_before`` records of earlier batches."""

    callback: ProgressCallback | None = None
    done_before: int = 0
    total: int = 0

    def report(self, done: int) -> None:
        if self.callback is not None:
            self.callback(self.done_before + done, self.total)


def _bootstrap(
    params: Mapping[str, float],
    time_constant: float | None,
    c: _Curve,
    count: int,
    seeds: np.random.SeedSequence,
    progress: _Progress,
    white_filter: tuple[float, int] | None = None,
) -> _FloatArray:
    """Allan variances at the curve's τ of ``count`` records simulated from ``params``.

    Record i draws from its own generator, ``default_rng(seeds.spawn(count)[i])``, so the
    result does not depend on how the records are shared among threads. Records of at least
    :attr:`._bands._BandSettings.min_samples` samples take the banded path (:mod:`._bands`).
    Where a record costs 2^17 simulated samples or more, the records are simulated on up to two
    threads (numpy and scipy.fft release the GIL in their loops); else in the calling thread.
    """
    children = seeds.spawn(count)
    out = np.empty((count, c.m.size))
    chunk = max(1, min(max(1, progress.total // 50), 8))
    settings = _bands._SETTINGS
    # read-only: shared by the threads
    draw: _bands._BandedDraw | _FullDraw
    if c.n >= settings.min_samples:
        draw = _bands._BandedDraw(params, time_constant, c, white_filter, settings)
    else:
        draw = _FullDraw(_Simulator(params, time_constant, c.n, c.rate, white_filter), c)
    workers = 1 if draw.samples < _THREAD_MIN_SAMPLES else min(2, validate.usable_cpus(), count)
    local = threading.local()  # the Allan-variance buffers: one set per thread

    def run(indices: range) -> None:
        engine = getattr(local, "engine", None)
        if engine is None:
            engine = local.engine = draw.worker()
        for i in indices:
            out[i] = engine(np.random.default_rng(children[i]))

    starts = range(0, count, chunk)
    if workers == 1:
        for i0 in starts:
            run(range(i0, min(count, i0 + chunk)))
            progress.report(min(count, i0 + chunk))
        return out
    with ThreadPoolExecutor(max_workers=workers) as pool:
        futures = [pool.submit(run, range(i0, min(count, i0 + chunk))) for i0 in starts]
        for i0, fut in zip(starts, futures, strict=True):
            fut.result()
            progress.report(min(count, i0 + chunk))
    return out


class _FullDraw:
    """The full-rate path: whole records at the curve's rate, their Allan variance at every τ
    (``worker()`` gives one thread's callable ``rng -> avar`` with its own buffers)."""

    def __init__(self, sim: _Simulator, c: _Curve) -> None:
        self.sim, self.c, self.samples = sim, c, c.n

    def worker(self) -> Callable[[np.random.Generator], _FloatArray]:
        engine = _BootstrapAllan(self.c.n, self.c.m)
        sim = self.sim
        return lambda rng: engine(sim.record(rng))
