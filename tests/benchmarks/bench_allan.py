"""Benchmark of sensormodel.allan.overlapping against allantools.oadev (not a test).

Run:  python tests/benchmarks/bench_allan.py [--sizes 1e7,1e8] [--repeats 1] [--threads N] [--six N]

For each size, both are timed on the same seeded data (white noise with an offset, float64,
100 Hz) at octave τ, each measurement in its own subprocess so that its memory numbers are its
own: the wall time of the call, the process's peak resident memory during the call above what
it held just before (the input array is already resident then), and throughput. The parent
prints the speed ratio and the largest relative difference of the deviations. ``overlapping``
is timed as a user calls it: deviation, noise identification, EDF and intervals included.
Numbers depend on the machine and its load (printed at start and end).

Six channels (``--six N``, default 1e7; 0 skips it): in one subprocess, a six-channel record
(six seeded white-noise columns of N samples, each contiguous as a recording reader returns
them) is analysed by ``overlapping_many`` and its first column alone by ``overlapping``, both
with their default workers, alternately ``--repeats`` times (best kept), with the wall and CPU
time of each; the ratio is printed as "six channels in the time of r single channels". The
single column with one thread and the six channels one after another are timed beside them,
for the bound 6·t(1 thread)/(workers·t(one channel)) that no split of the work can beat.
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

RATE = 100.0
SEED = 20240604


def _rss_bytes() -> int:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")


def _worker(kind: str, n: int, threads: int | None) -> None:
    import numpy as np

    y = np.random.default_rng(SEED).standard_normal(n)
    y *= 1e-3
    y += 3e-3
    if kind == "sensormodel":
        from sensormodel.allan import overlapping

        overlapping(y[:10_000], RATE)  # imports and first-call set-up outside the timing
        call = lambda: overlapping(y, RATE, taus="octave", threads=threads)  # noqa: E731
    else:
        import allantools

        allantools.oadev(y[:10_000], rate=RATE, data_type="freq", taus="octave")
        call = lambda: allantools.oadev(y, rate=RATE, data_type="freq", taus="octave")  # noqa: E731
    before = _rss_bytes()
    t0 = time.perf_counter()
    result = call()
    seconds = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    if kind == "sensormodel":
        tau, adev = result.tau, result.adev
    else:
        tau, adev = result[0], result[1]
    print(
        json.dumps(
            {
                "kind": kind,
                "n": n,
                "seconds": seconds,
                "input_bytes": int(y.nbytes),
                "rss_before": before,
                "peak_rss": peak,
                "tau": [float(t) for t in tau],
                "adev": [float(a) for a in adev],
            }
        )
    )


def _six_worker(n: int, repeats: int) -> None:
    import numpy as np

    from sensormodel.allan import overlapping, overlapping_many
    from sensormodel.allan._engine import _default_workers, _job

    rng = np.random.default_rng(SEED)
    columns = []
    for _ in range(6):
        y = rng.standard_normal(n)
        y *= 1e-3
        y += 3e-3
        columns.append(y)
    overlapping_many([c[:10_000] for c in columns], RATE)  # imports and first-call set-up
    calls = {
        "one": lambda: overlapping(columns[0], RATE),
        "six": lambda: overlapping_many(columns, RATE),
        "one, 1 thread": lambda: overlapping(columns[0], RATE, threads=1),
        "six, one after another": lambda: [overlapping(c, RATE) for c in columns],
    }
    best: dict[str, tuple[float, float]] = {}
    results = {}
    for r in range(repeats):
        for name, call in calls.items():
            if name == "six, one after another" and r > 0:
                continue  # a reference, once is enough
            c0, t0 = time.process_time(), time.perf_counter()
            results[name] = call()
            wall, cpu = time.perf_counter() - t0, time.process_time() - c0
            if name not in best or wall < best[name][0]:
                best[name] = (wall, cpu)
    one, six = results["one"], results["six"]
    same = all(
        np.array_equal(a.adev, b.adev) and np.array_equal(a.ci_high, b.ci_high)
        for a, b in zip(six, results["six, one after another"], strict=True)
    ) and np.array_equal(one.adev, six[0].adev)
    rate = 1.0 / RATE
    workers = _default_workers(
        [
            _job(
                i,
                c,
                RATE,
                rate,
                name="y",
                taus=None,
                confidence=0.683,
                noise_type="auto",
                unit="1",
                channel=str(i),
            )
            for i, c in enumerate(columns)
        ]
    )
    print(
        json.dumps(
            {
                "n": n,
                "best": best,
                "same": bool(same),
                "workers": workers,
                "peak_rss": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024,
                "input_bytes": 6 * int(columns[0].nbytes),
            }
        )
    )


def _six(n: int, repeats: int) -> None:
    cmd = [sys.executable, os.path.abspath(__file__), "--worker", "six", "--n", str(n)]
    cmd += ["--repeats", str(repeats)]
    out = subprocess.run(cmd, check=True, capture_output=True, text=True).stdout
    r = json.loads(out.strip().splitlines()[-1])
    best = r["best"]
    print(
        f"\nsix channels of n = {n:.0e} samples ({r['input_bytes'] / 1e9:.2f} GB input), "
        f"octave tau, {r['workers']} workers, best of {repeats}"
    )
    for name, (wall, cpu) in best.items():
        print(f"  {name:<24} {wall:6.2f} s wall   {cpu:6.2f} s CPU")
    ratio = best["six"][0] / best["one"][0]
    bound = 6.0 * best["one, 1 thread"][1] / (r["workers"] * best["one"][0])
    print(
        f"  six channels in the time of {ratio:.1f} single channels "
        f"(bound from the CPU time of one channel on one thread: {bound:.1f})"
    )
    print(
        f"  peak RSS {r['peak_rss'] / 1e9:.2f} GB; results equal to the one-by-one calls "
        f"to the bit: {'yes' if r['same'] else 'NO'}"
    )


def _measure(kind: str, n: int, threads: int | None) -> dict:
    cmd = [sys.executable, os.path.abspath(__file__), "--worker", kind, "--n", str(n)]
    if threads is not None:
        cmd += ["--threads", str(threads)]
    out = subprocess.run(cmd, check=True, capture_output=True, text=True).stdout
    return json.loads(out.strip().splitlines()[-1])


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
    import allantools
    import numpy as np

    return (
        f"machine: nproc={os.cpu_count()} (usable {len(os.sched_getaffinity(0))}), CPU {model}, "
        f"Python {platform.python_version()}, numpy {np.__version__}, "
        f"allantools {allantools.__version__}"
    )


def _load() -> str:
    return "load average: " + " ".join(f"{v:.2f}" for v in os.getloadavg())


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="1e7,1e8", help="comma-separated sample counts")
    ap.add_argument("--repeats", type=int, default=1, help="runs per size and kind (best kept)")
    ap.add_argument("--threads", type=int, default=None, help="threads for sensormodel")
    ap.add_argument("--six", default="1e7", help="samples per channel of the six-channel run")
    ap.add_argument("--worker", help=argparse.SUPPRESS)
    ap.add_argument("--n", type=int, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker == "six":
        _six_worker(args.n, args.repeats)
        return
    if args.worker:
        _worker(args.worker, args.n, args.threads)
        return

    import numpy as np

    print(_machine())
    print(_load())
    print(f"data: white noise + offset, float64, {RATE:g} Hz, seed {SEED}; octave tau")
    for size in (int(float(s)) for s in args.sizes.split(",")):
        best: dict[str, dict] = {}
        for _ in range(args.repeats):
            for kind in ("sensormodel", "allantools"):  # alternate, same conditions
                r = _measure(kind, size, args.threads)
                if kind not in best or r["seconds"] < best[kind]["seconds"]:
                    best[kind] = r
        ours, lib = best["sensormodel"], best["allantools"]
        assert np.allclose(ours["tau"], lib["tau"], rtol=1e-15), "different tau grids"
        rel = np.max(np.abs(np.array(ours["adev"]) / np.array(lib["adev"]) - 1.0))
        print(
            f"\nn = {size:.0e} samples ({ours['input_bytes'] / 1e9:.2f} GB input), "
            f"{len(ours['tau'])} tau, best of {args.repeats}"
        )
        for r in (ours, lib):
            extra = r["peak_rss"] - r["rss_before"]
            print(
                f"  {r['kind']:<12} {r['seconds']:8.2f} s   {size / r['seconds'] / 1e6:7.1f} "
                f"Msamples/s   peak RSS {r['peak_rss'] / 1e9:5.2f} GB, "
                f"+{extra / 1e9:5.2f} GB during the call "
                f"({extra / r['input_bytes']:.2f} x input)"
            )
        print(f"  speed ratio allantools/sensormodel: {lib['seconds'] / ours['seconds']:.1f}")
        print(f"  max relative difference of the deviations: {rel:.1e}")
    if int(float(args.six)) > 0:
        _six(int(float(args.six)), max(args.repeats, 3))
    print("\n" + _load())


if __name__ == "__main__":
    main()
