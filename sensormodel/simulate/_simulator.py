"""The public simulator: :class:`Simulator` (streaming, one run), :func:`simulate` (in memory),
:func:`simulate_ensemble` (Monte Carlo runs), and the rate, seed and length of a record."""

from __future__ import annotations

import math
import threading
from collections.abc import Iterator
from dataclasses import dataclass, fields, replace
from typing import TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt

from .. import validate
from ..errors import AnalysisError
from ._channel import _ChannelGenerator
from ._powerlaw import DEFAULT_MAX_TAPS
from ._streams import BLOCK

if TYPE_CHECKING:  # pragma: no cover
    from ..model import NoiseModel

_FloatArray = npt.NDArray[np.float64]

#: Flicker simulation methods: the term's Gauss-Markov realization, or Kasdin-Walter power law.
FLICKER_METHODS = ("realization", "power-law")


def _check_method(flicker: str) -> str:
    if flicker not in FLICKER_METHODS:
        raise AnalysisError(
            f"got {flicker!r}", f"one of {', '.join(FLICKER_METHODS)}", field="flicker"
        )
    return flicker


def _seed(seed: Any) -> int:
    """A valid seed, or a fresh one (:func:`new_seed`) for ``None``."""
    checked = validate.seed(seed)
    return new_seed() if checked is None else checked


def new_seed() -> int:
    """A fresh 32-bit seed from the operating system's entropy (print it to repeat the
    record)."""
    return int(np.random.SeedSequence().entropy) % 2**32  # type: ignore[arg-type]


def record_rate(model: NoiseModel, rate: float | None = None) -> float:
    """The rate a record of ``model`` is simulated at [Hz].

    Parameters
    ----------
    model : NoiseModel
        The model.
    rate : float, optional
        An explicit rate [Hz]; without it the channels' common sample rate (an
        :class:`~sensormodel.errors.AnalysisError` when they differ).

    Returns
    -------
    float
    """
    if rate is not None:
        return validate.rate(rate)
    rates = sorted({c.sample_rate for c in model.channels})
    if len(rates) != 1:
        raise AnalysisError(
            f"the channels have different sample rates {rates} Hz",
            "a simulation rate (rate=..., or --rate) shared by the record",
        )
    return validate.rate(rates[0], "sample_rate")


def samples_for(duration: float, rate: float) -> int:
    """The number of samples of a record (duration × rate, rounded; at least one).

    Parameters
    ----------
    duration : float
        Record length [s].
    rate : float
        Sample rate [Hz].

    Returns
    -------
    int
    """
    rate = validate.rate(rate)
    d = float(duration)
    n = round(d * rate) if math.isfinite(d) else 0
    if n < 1:
        raise AnalysisError(
            f"duration {duration!r} s at {rate:g} Hz is {n} samples",
            f"at least one sample period ({1.0 / rate:g} s)",
        )
    return int(n)


@dataclass(frozen=True)
class SimulationOptions:
    """How a record is simulated, besides its model, rate, seed and length: the one owner of
    the keyword options of :class:`Simulator`, :func:`simulate`, :func:`simulate_ensemble`,
    :func:`ensemble_statistics` and :func:`write_record` (each takes them as keywords and
    passes them here, where they are checked).

    Attributes
    ----------
    run : int
        Run index for Monte Carlo ensembles: run r of a seed is independent of every other run.
    increments : bool
        Deliver increments (integral over each sample period, [u·s]) instead of rate samples
        (period means, [u]).
    flicker : {"realization", "power-law"}
        Flicker method (package notes).
    channels : tuple of str or None
        Channel ids to simulate, in this order (None: all, in model order).
    max_taps : int
        Largest Kasdin-Walter filter length (``flicker="power-law"``), at least 2.
    threads : int or None
        Channels generated at once, in threads (None: one per available core, at most one per
        channel). The record does not depend on it: every channel has its own streams.
    """

    run: int = 0
    increments: bool = False
    flicker: str = "realization"
    channels: tuple[str, ...] | None = None
    max_taps: int = DEFAULT_MAX_TAPS
    threads: int | None = None

    def __post_init__(self) -> None:
        checked = {
            "run": validate.whole_number(self.run, "run", minimum=0),
            "increments": bool(self.increments),
            "flicker": _check_method(self.flicker),
            "channels": tuple(self.channels) if self.channels else None,
            "max_taps": validate.whole_number(self.max_taps, "max_taps", minimum=2),
        }
        if self.threads is not None:
            checked["threads"] = validate.whole_number(self.threads, "threads")
        for name, value in checked.items():
            object.__setattr__(self, name, value)

    @classmethod
    def split(cls, keywords: dict[str, Any]) -> tuple[SimulationOptions, dict[str, Any]]:
        """The options among ``keywords`` (checked) and the other keywords, untouched."""
        names = {f.name for f in fields(cls)}
        mine = {k: v for k, v in keywords.items() if k in names}
        return cls(**mine), {k: v for k, v in keywords.items() if k not in names}

    def select(self, model: NoiseModel) -> NoiseModel:
        """The model reduced to :attr:`channels` (all channels when None)."""
        return model.select(list(self.channels) if self.channels else None)


#: Reads shorter than this many rows run the channels one after the other (thread overhead).
_THREADED_READ = 4096
_EXECUTOR: Any = None
_EXECUTOR_LOCK = threading.Lock()


def _executor() -> Any:
    """The module's worker threads (one per available core), created on first use."""
    global _EXECUTOR
    with _EXECUTOR_LOCK:
        if _EXECUTOR is None:
            from concurrent.futures import ThreadPoolExecutor

            _EXECUTOR = ThreadPoolExecutor(
                max_workers=validate.usable_cpus(), thread_name_prefix="sensormodel-simulate"
            )
        return _EXECUTOR


class Simulator:
    """A streaming noise generator for the channels of a model (one run).

    Parameters
    ----------
    model : NoiseModel
        The model; its channels are simulated in file order (or ``channels``).
    rate : float, optional
        Simulation rate [Hz]; default the channels' common sample rate.
    seed : int, optional
        Seed of the record; ``None`` draws fresh entropy (read it back from :attr:`seed`).
    options : SimulationOptions, optional
        How the record is simulated (default :class:`SimulationOptions` ()).
    **keywords
        Options by name, over ``options``: ``run``, ``increments``, ``flicker``,
        ``channels``, ``max_taps``, ``threads`` (:class:`SimulationOptions`).

    Attributes
    ----------
    options : SimulationOptions
        The options, checked.
    channel_ids : list of str
    units : list of str
        The channels' SI units of the *rate* samples (an increment is that unit times s).
    rate : float
        [Hz].
    seed : int
    threads : int
        Channels generated at once.
    position : int
        Samples delivered so far.
    """

    def __init__(
        self,
        model: NoiseModel,
        rate: float | None = None,
        *,
        seed: int | None = None,
        options: SimulationOptions | None = None,
        **keywords: Any,
    ) -> None:
        self.options = opts = replace(options or SimulationOptions(), **keywords)
        model = opts.select(model)
        self.rate = record_rate(model, rate)
        self.seed = _seed(seed)
        self.channel_ids = [c.id for c in model.channels]
        self.units = [c.unit for c in model.channels]
        self.position = 0
        self._gens = [
            _ChannelGenerator(
                c, self.rate, seed=self.seed, run=opts.run, flicker=opts.flicker,
                max_taps=opts.max_taps,
            )
            for c in model.channels
        ]
        cores = validate.usable_cpus() if opts.threads is None else opts.threads
        self.threads = max(1, min(cores, len(self._gens)))

    @property
    def dt(self) -> float:
        """Sample period [s]."""
        return 1.0 / self.rate

    def read(self, n: int) -> _FloatArray:
        """The next ``n`` samples of every channel.

        Returns
        -------
        ndarray, shape (n, n_channels)
            Rate samples [u] or increments [u·s] (SI), float64.
        """
        n = validate.whole_number(n, "n", minimum=0)
        out = np.empty((n, len(self._gens)))
        if self.threads > 1 and n >= _THREADED_READ:
            # numpy's generators, its ufuncs and scipy's filters release the GIL: channels
            # run in parallel; each is gathered into the (row-major) record by this thread.
            jobs = [_executor().submit(g.take, n) for g in self._gens]
            for j, job in enumerate(jobs):
                out[:, j] = job.result()
        else:
            for j, g in enumerate(self._gens):
                g.take(n, out[:, j])
        if self.options.increments:
            out *= self.dt
        self.position += n
        return out

    def chunks(self, n: int, *, chunk: int = BLOCK) -> Iterator[_FloatArray]:
        """Yield the next ``n`` samples in blocks of at most ``chunk`` rows."""
        n = validate.whole_number(n, "n", minimum=0)
        chunk = validate.whole_number(chunk, "chunk")
        done = 0
        while done < n:
            k = min(chunk, n - done)
            yield self.read(k)
            done += k


def simulate(
    model: NoiseModel, n: int, rate: float | None = None, seed: int | None = None, **options: Any
) -> _FloatArray:
    """A noise record of ``n`` samples per channel, in memory (DESIGN §7:
    ``sensormodel.simulate(model, n, rate, seed)``).

    Parameters
    ----------
    model : NoiseModel
        The noise model.
    n : int
        Samples per channel.
    rate : float, optional
        Simulation rate [Hz]; default the channels' common sample rate.
    seed : int, optional
        The same seed gives the same record; ``None``: fresh entropy.
    **options
        :class:`SimulationOptions` by name: ``run`` (Monte Carlo run index), ``increments``
        ([u·s] instead of period means [u]), ``flicker`` (method), ``channels`` (ids, default
        all, in model order), ``max_taps`` (Kasdin-Walter filter length), ``threads`` (the
        record does not depend on them).

    Returns
    -------
    ndarray, shape (n, n_channels)
        Rate samples [u] (period means; rad/s, m/s²) or increments [u·s] (rad, m/s), channels in
        model order (or ``channels`` order).

    Examples
    --------
    >>> from sensormodel.model import Channel, NoiseModel
    >>> from sensormodel.terms import White
    >>> m = NoiseModel(sensor={}, channels=(Channel("gyro.z", "angular_rate", "rad/s", 100.0,
    ...                                             (White(1e-4),)),))
    >>> y = simulate(m, 1000, seed=1)
    >>> y.shape
    (1000, 1)
    """
    n = validate.whole_number(n, "n")
    return Simulator(model, rate, seed=seed, **options).read(n)


def simulate_ensemble(
    model: NoiseModel,
    n: int,
    rate: float | None = None,
    *,
    runs: int,
    seed: int | None = None,
    **options: Any,
) -> _FloatArray:
    """``runs`` independent records (Monte Carlo), in memory.

    Run r is the record of :func:`simulate` with ``run=r`` and the same seed. For long records
    use :func:`ensemble_statistics` (streamed) or :func:`write_record` per run.

    Parameters
    ----------
    model : NoiseModel
        The noise model.
    n : int
        Samples per channel and run.
    runs : int
        Number of runs.
    rate, seed
        As for :func:`simulate` (``seed`` is the ensemble's).
    **options
        :class:`SimulationOptions` by name, as for :func:`simulate` (``run`` is each
        record's index).

    Returns
    -------
    ndarray, shape (runs, n, n_channels)
        SI, as in :func:`simulate`.
    """
    runs = validate.whole_number(runs, "runs")
    seed = _seed(seed)
    opts = SimulationOptions(**options)
    n = validate.whole_number(n, "n")
    out = np.empty((runs, n, len(opts.select(model).channels)))
    for r in range(runs):
        out[r] = Simulator(model, rate, seed=seed, options=replace(opts, run=r)).read(n)
    return out
