"""Records on disk: a simulated record streamed to a file, and the file names of an ensemble."""

from __future__ import annotations

import os
import pathlib
from collections.abc import Callable
from dataclasses import replace
from typing import TYPE_CHECKING, Any

from .. import validate
from ..recording import open_writer
from ._simulator import SimulationOptions, Simulator
from ._streams import BLOCK

if TYPE_CHECKING:  # pragma: no cover
    from ..model import NoiseModel


def run_path(path: str | os.PathLike[str], run: int, runs: int) -> pathlib.Path:
    """The file name of run ``run`` of an ensemble of ``runs`` written to ``path``.

    One run: ``path`` itself. Several: ``name-run007.ext`` (zero-padded to the width of
    ``runs − 1``, at least three digits); a ``{run}`` in the name is replaced instead.

    Parameters
    ----------
    path : path-like
        The name given for the record(s).
    run : int
        Run index (0-based).
    runs : int
        Number of runs.

    Returns
    -------
    pathlib.Path
    """
    p = pathlib.Path(path)
    if runs == 1 and "{run}" not in p.name:
        return p
    width = max(3, len(str(runs - 1)))
    tag = f"{run:0{width}d}"
    if "{run}" in p.name:
        return p.with_name(p.name.replace("{run}", tag))
    suffixes = "".join(p.suffixes[-1:])
    stem = p.name[: len(p.name) - len(suffixes)] if suffixes else p.name
    return p.with_name(f"{stem}-run{tag}{suffixes}")


def write_record(
    path: str | os.PathLike[str],
    model: NoiseModel,
    n: int,
    rate: float | None = None,
    *,
    seed: int | None = None,
    force: bool = False,
    chunk: int = 4 * BLOCK,
    progress: Callable[[int], None] | None = None,
    **keywords: Any,
) -> Simulator:
    """Stream a simulated record to a file (CSV, NPY, NPZ or HDF5 by extension), atomically.

    Written chunk by chunk through :func:`sensormodel.recording.open_writer`, so memory stays
    constant whatever ``n``.

    Parameters
    ----------
    path : path-like
        Output file; its extension chooses the format (see :mod:`sensormodel.recording`).
    model : NoiseModel
        The noise model.
    n : int
        Samples per channel.
    rate, seed
        As for :func:`simulate` (read the seed back from the returned simulator).
    force : bool
        Overwrite an existing file.
    chunk : int
        Rows per write.
    progress : callable, optional
        Called with the number of rows written after each chunk.
    **keywords
        :class:`SimulationOptions` by name (``run``, ``increments``, ``flicker``,
        ``channels``, ``max_taps``, ``threads``); the others are passed on to
        :func:`sensormodel.recording.open_writer` (``time_column``, ``start_time``).

    Returns
    -------
    Simulator
        The exhausted generator (its ``seed``, ``rate``, ``channel_ids``, ``units``).
    """
    options, writer_options = SimulationOptions.split(keywords)
    # The writer takes period means (SI rates) and writes increments itself when asked.
    sim = Simulator(model, rate, seed=seed, options=replace(options, increments=False))
    n = validate.whole_number(n, "n")
    with open_writer(
        path,
        sim.channel_ids,
        None,
        sim.rate,
        increments=options.increments,
        force=force,
        n_samples=n,
        **writer_options,
    ) as writer:
        for block in sim.chunks(n, chunk=chunk):
            writer.write(block)
            if progress is not None:
                progress(block.shape[0])
    return sim
