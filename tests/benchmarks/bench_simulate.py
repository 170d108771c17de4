"""Benchmark of sensormodel.simulate: samples per second per channel (not a test).

Run:  python tests/benchmarks/bench_simulate.py [--samples N] [--rate HZ] [--big N] [--repeats R]
      [--write]

Each measurement runs in its own subprocess (so its memory numbers are its own) and prints:
wall-clock and CPU-time throughput (samples per second per channel; CPU time counts every
thread of the process, so on a loaded machine it is the better measure of the code), and the
process's peak resident memory above what it held after set-up. Measured, on the same data
sizes in the same run:

* ``sensormodel`` for a few channel models (the first blocks, which pay for set-up and
  imports, are excluded);
* ``sections``: the same models without the block engine (the innovations stream through
  ``scipy.signal.sosfilt``, random walks as running sums: the method before it) — the ratio
  is the engine's speed-up;
* ``state by state``: the same models simulated as before the innovations form (one normal
  stream per Gauss-Markov/flicker state, numpy's ziggurat ``standard_normal``) — the ratio is
  the speed-up of this version;
* references: numpy's ``Generator.standard_normal`` filling the same number of samples (one
  normal deviate per sample: the floor for any Gaussian record), and for power-law flicker
  allantools' Kasdin-Walter generator ``allantools.Noise(b=-1)`` (a reference library; its
  filter is as long as the record);
* six channels of ``--big`` samples against one channel, channels in parallel threads (the
  ratio is "six channels in the time of r single channels");
* with ``--write``, streaming a six-channel record to an NPY file.

With ``--repeats R`` every measurement is repeated R times (each in a fresh process) and the
fastest (least CPU time) kept. Numbers depend on the machine and its load (both printed).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import subprocess
import sys
import time

SEED = 20240701
IDS = ["gyro.x", "gyro.y", "gyro.z", "accelerometer.x", "accelerometer.y", "accelerometer.z"]
TARGET = 20e6  # samples/s per channel, white + flicker + random walk (the target)


def _terms(name: str):
    from sensormodel.terms import (
        Flicker,
        GaussMarkov,
        Quantization,
        RandomConstant,
        RandomWalk,
        White,
    )

    return {
        "white": (White(1e-3),),
        "white + random walk": (White(1e-3), RandomWalk(1e-5)),
        "white + flicker + random walk": (White(1e-3), Flicker(1e-4), RandomWalk(1e-5)),
        "white + flicker (power-law) + random walk": (
            White(1e-3),
            Flicker(1e-4),
            RandomWalk(1e-5),
        ),
        "gauss-markov": (GaussMarkov(1e-3, 100.0),),
        "tactical gyro (all terms)": (
            White(1e-3),
            Flicker(1e-4),
            RandomWalk(1e-5),
            Quantization(1e-6),
            RandomConstant(1e-3),
        ),
    }[name]


CASES = [
    "white",
    "white + random walk",
    "white + flicker + random walk",
    "white + flicker (power-law) + random walk",
    "gauss-markov",
    "tactical gyro (all terms)",
]


def _model(terms, rate: float, channels: int = 1):
    from sensormodel.model import Channel, NoiseModel

    chans = tuple(
        Channel(
            i,
            "angular_rate" if i.startswith("gyro") else "acceleration",
            "rad/s" if i.startswith("gyro") else "m/s^2",
            rate,
            tuple(terms),
        )
        for i in IDS[:channels]
    )
    return NoiseModel(sensor={"name": "bench"}, channels=chans)


def _rss_bytes() -> int:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")


def _cpu() -> float:
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime


def _state_by_state() -> None:
    """Put simulate back to the method before the innovations form (for the ratio)."""
    import numpy as np

    from sensormodel.simulate import _channel, _streams

    _channel._channel_innovations = lambda *a, **k: None  # one stream per state

    def ziggurat(self, n, scale=1.0, out=None):
        z = self._rng.standard_normal(n) if out is None else self._rng.standard_normal(out=out)
        z *= scale
        return z

    _streams._Normals.normal = ziggurat  # numpy's ziggurat deviates
    assert np  # (imported for the side effect of a warm numpy)


def _worker(kind: str, case: str, n: int, rate: float, channels: int, path: str) -> None:
    """One measurement; prints a JSON line."""
    import numpy as np

    from sensormodel.simulate import BLOCK, Simulator, write_record

    info: dict = {}
    if kind == "numpy":
        rng = np.random.default_rng(SEED)
        rng.standard_normal(BLOCK)

        def call() -> None:
            done = 0
            while done < n:
                k = min(4 * BLOCK, n - done)
                rng.standard_normal(k)
                done += k

    elif kind == "allantools":
        import allantools

        state = np.random.get_state()  # noqa: NPY002 - the reference library's own generator
        np.random.seed(SEED)  # noqa: NPY002
        allantools.Noise(nr=1024, qd=1e-8, b=-1).generateNoise()

        def call() -> None:
            allantools.Noise(nr=n, qd=1e-8, b=-1).generateNoise()

        np.random.set_state(state)  # noqa: NPY002
    elif kind == "write":
        model = _model(_terms(case), rate, channels)
        write_record(path + ".warm.npy", model, 2000, seed=SEED, force=True)

        def call() -> None:
            write_record(path, model, n, seed=SEED, force=True)

    else:
        if kind == "state by state":
            _state_by_state()
        elif kind == "sections":
            from sensormodel.simulate import _channel

            _channel._ChannelGenerator._fuse = lambda self: None  # sosfilt, cumsum
        method = "power-law" if "power-law" in case else "realization"
        model = _model(_terms(case), rate, channels)
        sim = Simulator(model, seed=SEED, flicker=method)
        sim.read(BLOCK * 2)  # set-up, imports, the first (short) blocks
        gen = sim._gens[0]
        info["innovations"] = gen.innovations is not None
        if gen.innovations is not None:
            info["spectrum_error"] = gen.innovations.spectrum_error
        info["engine"] = any(type(s).__name__ == "_Parallel" for s in gen.sources)
        info["threads"] = sim.threads

        def call() -> None:
            done = 0
            while done < n:
                k = min(4 * BLOCK, n - done)
                sim.read(k)
                done += k

    before = _rss_bytes()
    c0, t0 = _cpu(), time.perf_counter()
    call()
    wall, cpu = time.perf_counter() - t0, _cpu() - c0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    info.update(
        {"kind": kind, "case": case, "n": n, "channels": channels, "wall": wall, "cpu": cpu}
    )
    info.update({"rss_before": before, "peak_rss": peak})
    print(json.dumps(info))


REPEATS = 1


def _measure(kind: str, case: str, n: int, rate: float, channels: int = 1, path: str = "") -> dict:
    cmd = [sys.executable, os.path.abspath(__file__), "--worker", kind, "--case", case]
    cmd += ["--n", str(n), "--rate", str(rate), "--channels", str(channels), "--path", path]
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    best: dict | None = None
    for _ in range(REPEATS):
        out = subprocess.run(cmd, check=True, capture_output=True, text=True, env=env).stdout
        r = json.loads(out.strip().splitlines()[-1])
        if best is None or r["cpu"] < best["cpu"]:
            best = r
    assert best is not None
    return best


def _machine() -> str:
    model = "unknown"
    try:
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    model = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    import numpy as np
    import scipy

    return (
        f"machine: nproc={os.cpu_count()} (usable {len(os.sched_getaffinity(0))}), CPU {model}, "
        f"Python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}"
    )


def _load() -> str:
    return "load average: " + " ".join(f"{v:.2f}" for v in os.getloadavg())


def _line(label: str, r: dict) -> str:
    per = r["n"] * r["channels"]
    extra = (r["peak_rss"] - r["rss_before"]) / 2**20
    return (
        f"  {label:<44} {per / r['wall'] / r['channels'] / 1e6:7.2f} M/s wall  "
        f"{per / r['cpu'] / 1e6:7.2f} M/s CPU   +{max(extra, 0):6.0f} MiB"
    )


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=1 << 22, help="samples per channel")
    ap.add_argument("--rate", type=float, default=1000.0, help="sample rate [Hz]")
    ap.add_argument("--big", type=int, default=10**7, help="samples per channel, six channels")
    ap.add_argument("--repeats", type=int, default=1, help="runs per measurement (best kept)")
    ap.add_argument("--write", action="store_true", help="also stream a six-channel NPY record")
    ap.add_argument("--write-seconds", type=float, default=600.0, help="record length [s]")
    ap.add_argument("--worker", help=argparse.SUPPRESS)
    ap.add_argument("--case", default="", help=argparse.SUPPRESS)
    ap.add_argument("--n", type=int, help=argparse.SUPPRESS)
    ap.add_argument("--channels", type=int, default=1, help=argparse.SUPPRESS)
    ap.add_argument("--path", default="", help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.worker:
        _worker(a.worker, a.case, a.n, a.rate, a.channels, a.path)
        return

    global REPEATS
    REPEATS = max(1, a.repeats)
    n, rate = a.samples, a.rate
    print(_machine())
    print(_load())
    print(
        f"\none channel, {n} samples at {rate:g} Hz: samples/s per channel (wall, CPU) and "
        f"memory above set-up; best of {REPEATS}"
    )
    ref = _measure("numpy", "", n, rate)
    print(_line("reference: numpy standard_normal (1/sample)", ref))
    for case in CASES:
        ours = _measure("sensormodel", case, n, rate)
        sections = _measure("sections", case, n, rate)
        old = _measure("state by state", case, n, rate)
        form = "innovations" if ours.get("innovations") else "per state"
        if "spectrum_error" in ours:
            form += f", spectrum error {ours['spectrum_error']:.0e}"
        if ours.get("engine"):
            form += ", block engine"
        print(f"{case}  ({form})")
        print(_line("sensormodel", ours))
        print(
            _line("without the block engine (sosfilt, cumsum)", sections)
            + f"   engine speed-up {sections['cpu'] / ours['cpu']:4.2f}x (CPU)"
        )
        print(_line("state by state, ziggurat (previous method)", old))
        print(
            f"  {'':<44} speed-up {old['cpu'] / ours['cpu']:5.2f}x (CPU), "
            f"{old['wall'] / ours['wall']:5.2f}x (wall); against numpy's 1/sample fill "
            f"{ref['cpu'] / ours['cpu']:4.2f}x (CPU)"
        )
        if "power-law" in case:
            lib = _measure("allantools", case, n, rate)
            print(_line("reference: allantools.Noise(b=-1), flicker only", lib))
            print(f"  {'':<44} allantools / sensormodel (CPU): {lib['cpu'] / ours['cpu']:.2f}")
        if case == "white + flicker + random walk":
            rate_cpu = n / ours["cpu"]
            verdict = "reached" if rate_cpu >= TARGET else "NOT reached"
            print(
                f"  {'':<44} target {TARGET / 1e6:.0f} M/s per channel: {verdict} "
                f"({rate_cpu / 1e6:.1f} M/s CPU, {n / ours['wall'] / 1e6:.1f} M/s wall)"
            )
    case = "white + flicker + random walk"
    print(f"\n{case}, {a.big} samples per channel: one channel against six (threads)")
    one = _measure("sensormodel", case, a.big, rate, channels=1)
    six = _measure("sensormodel", case, a.big, rate, channels=6)
    print(_line("1 channel", one))
    print(_line(f"6 channels ({six['threads']} threads)", six))
    print(
        f"  six channels took {six['wall']:.1f} s, one {one['wall']:.1f} s: the time of "
        f"{six['wall'] / one['wall']:.1f} single channels (wall), "
        f"CPU {six['cpu']:.1f} s against {one['cpu']:.1f} s"
    )
    if a.write:
        import tempfile

        with tempfile.TemporaryDirectory() as tmp:
            path = os.path.join(tmp, "bench.npy")
            nw = int(a.write_seconds * rate)
            r = _measure("write", "tactical gyro (all terms)", nw, rate, channels=6, path=path)
        print(
            f"\nrecord to NPY, tactical gyro, 6 channels × {nw} samples: {r['wall']:.1f} s, "
            f"{6 * nw / r['wall'] / 1e6:.2f} M channel-samples/s; 24 h at {rate:g} Hz would take "
            f"about {86400 * rate / (nw / r['wall']) / 60:.0f} min"
        )
    print("\n" + _load())


if __name__ == "__main__":
    main()
