"""Benchmark of sensormodel.simulate: samples per second per channel (not a test).

Run:  python tests/benchmarks/bench_simulate.py [--samples N] [--rate HZ] [--write]

Prints, for a few channel models, the generation speed in samples per second per channel (the
first block, which pays for set-up and imports, is excluded), and with ``--write`` the speed of
streaming a 6-channel record to an NPY file. Numbers depend on the machine and its load.
"""

from __future__ import annotations

import argparse
import pathlib
import tempfile
import time

from sensormodel.model import Channel, NoiseModel
from sensormodel.simulate import BLOCK, Simulator, write_record
from sensormodel.terms import (
    Flicker,
    GaussMarkov,
    Quantization,
    RandomConstant,
    RandomWalk,
    White,
)


def _model(terms, rate: float, channels: int = 1) -> NoiseModel:
    ids = ["gyro.x", "gyro.y", "gyro.z", "accelerometer.x", "accelerometer.y", "accelerometer.z"]
    chans = tuple(
        Channel(
            i,
            "angular_rate" if i.startswith("gyro") else "acceleration",
            "rad/s" if i.startswith("gyro") else "m/s^2",
            rate,
            tuple(terms),
        )
        for i in ids[:channels]
    )
    return NoiseModel(sensor={"name": "bench"}, channels=chans)


CASES = {
    "white": (White(1e-3),),
    "white + random walk": (White(1e-3), RandomWalk(1e-5)),
    "white + flicker + random walk": (White(1e-3), Flicker(1e-4), RandomWalk(1e-5)),
    "white + flicker (power-law) + random walk": (White(1e-3), Flicker(1e-4), RandomWalk(1e-5)),
    "gauss-markov": (GaussMarkov(1e-3, 100.0),),
    "tactical gyro (all terms)": (
        White(1e-3),
        Flicker(1e-4),
        RandomWalk(1e-5),
        Quantization(1e-6),
        RandomConstant(1e-3),
    ),
}


def bench(samples: int, rate: float) -> None:
    print(f"generation, {samples} samples per channel at {rate:g} Hz (samples/s per channel):")
    for name, terms in CASES.items():
        method = "power-law" if "power-law" in name else "realization"
        sim = Simulator(_model(terms, rate), seed=1, flicker=method)
        sim.read(BLOCK * 2)  # set-up, imports, first (short) blocks
        t0 = time.perf_counter()
        done = 0
        while done < samples:
            k = min(4 * BLOCK, samples - done)
            sim.read(k)
            done += k
        dt = time.perf_counter() - t0
        n_states = sum(
            t.state_space(sample_rate=rate).n
            for t in terms
            if not (method == "power-law" and isinstance(t, Flicker))
        )
        print(f"  {name:45s} {samples / dt / 1e6:7.2f} M/s   ({n_states} Gauss-Markov/walk states)")


def bench_write(seconds: float, rate: float) -> None:
    terms = CASES["tactical gyro (all terms)"]
    model = _model(terms, rate, channels=6)
    n = int(seconds * rate)
    with tempfile.TemporaryDirectory() as tmp:
        write_record(pathlib.Path(tmp) / "warm.npy", model, 1000, seed=1)  # imports, caches
        path = pathlib.Path(tmp) / "bench.npy"
        t0 = time.perf_counter()
        write_record(path, model, n, seed=1)
        dt = time.perf_counter() - t0
        size = path.stat().st_size / 2**20
    print(
        f"record to NPY: 6 channels × {n} samples ({size:.0f} MiB) in {dt:.1f} s: "
        f"{6 * n / dt / 1e6:.2f} M channel-samples/s; the record grows by "
        f"{n / dt / 1e6:.2f} M rows/s; 24 h at {rate:g} Hz would take about "
        f"{86400 * rate / (n / dt) / 60:.0f} min"
    )


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--samples", type=int, default=1 << 22, help="samples per channel")
    p.add_argument("--rate", type=float, default=1000.0, help="sample rate [Hz]")
    p.add_argument("--write", action="store_true", help="also stream a 6-channel NPY record")
    p.add_argument("--write-seconds", type=float, default=600.0, help="record length [s]")
    a = p.parse_args()
    bench(a.samples, a.rate)
    if a.write:
        bench_write(a.write_seconds, a.rate)


if __name__ == "__main__":
    main()
