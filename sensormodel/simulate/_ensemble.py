"""Monte Carlo statistics of the integrated output, streamed run by run."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt

from .. import validate
from ..errors import AnalysisError
from ._simulator import SimulationOptions, Simulator, _seed, record_rate, samples_for

if TYPE_CHECKING:  # pragma: no cover
    from ..model import NoiseModel

_FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True)
class EnsembleStatistics:
    """Across-run statistics of the integrated output (angle [rad], velocity [m/s]).

    Attributes
    ----------
    time : ndarray, shape (k,)
        Instants t_i [s] (multiples of the sample period).
    mean : ndarray, shape (k, n_channels)
        Ensemble mean of the integrated output ∫₀^t y dt at each instant [u·s].
    variance : ndarray, shape (k, n_channels)
        Unbiased ensemble variance (divisor runs − 1) [u²·s²].
    runs : int
    channel_ids : list of str
    seed : int
    """

    time: _FloatArray
    mean: _FloatArray
    variance: _FloatArray
    runs: int
    channel_ids: list[str]
    seed: int


def ensemble_statistics(
    model: NoiseModel,
    duration: float,
    rate: float | None = None,
    *,
    runs: int,
    seed: int | None = None,
    times: npt.ArrayLike | None = None,
    progress: Callable[[int], None] | None = None,
    **options: Any,
) -> EnsembleStatistics:
    """Monte Carlo: the ensemble mean and variance of the integrated output at given instants.

    Each run is streamed (constant memory); the integrated output θ(t_k) = Σ_{j<k} Δ_j of the
    increments Δ_j is sampled at the requested instants and accumulated across runs (Welford).
    Compare the variance with the propagated covariance of the variance equation
    (:func:`sensormodel.linear.propagate` of the realization augmented with an integrator); a
    quantization term adds var(e_k − e_0) = 2Q² at every instant.

    Parameters
    ----------
    model : NoiseModel
        The noise model.
    duration : float
        Length of each run [s].
    runs : int
        Number of independent runs (≥ 2).
    rate, seed
        As for :func:`simulate` (``seed`` is the ensemble's: run r is the record of
        :func:`simulate` with ``run=r``).
    times : array_like, optional
        Instants [s] in (0, duration], rounded to whole samples; default 40 instants spaced
        logarithmically from one sample period to ``duration``.
    progress : callable, optional
        Called with the number of samples generated after each chunk.
    **options
        :class:`SimulationOptions` by name (``flicker``, ``channels``, ``max_taps``,
        ``threads``; each run is simulated as increments, with its own ``run``).

    Returns
    -------
    EnsembleStatistics
    """
    runs = validate.whole_number(runs, "runs", minimum=2)
    seed = _seed(seed)
    opts = SimulationOptions(**options)
    sel = opts.select(model)
    r = record_rate(sel, rate)
    duration = float(duration)
    n = samples_for(duration, r)
    if times is None:
        idx = np.unique(np.round(np.geomspace(1.0, n, 40)).astype(np.int64))
    else:
        t = np.asarray(times, dtype=float).ravel()
        if t.size == 0 or not np.all(np.isfinite(t)) or np.any(t <= 0) or np.any(t > duration):
            raise AnalysisError("times outside (0, duration]", "instants within the run, in s")
        idx = np.unique(np.clip(np.round(t * r).astype(np.int64), 1, n))
    k = len(sel.channels)
    mean = np.zeros((idx.size, k))
    m2 = np.zeros((idx.size, k))
    for run in range(runs):
        sim = Simulator(model, r, seed=seed, options=replace(opts, run=run, increments=True))
        theta = np.zeros(k)
        start = 0
        values = np.empty((idx.size, k))
        for block in sim.chunks(int(idx[-1])):
            cum = np.cumsum(block, axis=0) + theta
            stop = start + block.shape[0]
            sel_i = (idx > start) & (idx <= stop)
            values[sel_i] = cum[idx[sel_i] - start - 1]
            theta = cum[-1]
            start = stop
            if progress is not None:
                progress(block.shape[0])
        delta = values - mean
        mean += delta / (run + 1)
        m2 += delta * (values - mean)
    return EnsembleStatistics(
        time=idx / r,
        mean=mean,
        variance=m2 / (runs - 1),
        runs=runs,
        channel_ids=[c.id for c in sel.channels],
        seed=seed,
    )

