"""Benchmark of acceptance at the scale of real recordings (not a test).

Run:  python tests/benchmarks/bench_verify.py [--hours 6] [--parts all] [--large] [--data DIR]

It builds its test records itself, times in ONE run and prints each time, its ratio and the
target it is held against, the peak memory and the machine's load:

* ``oadev``: ``allantools.oadev`` of one channel (gyro.x) of the 6 h record at octave τ, the
  reference every ratio is taken against (and ``sensormodel.allan.overlapping`` beside it);
* ``verify``: ``sensormodel verify REC.csv --spec bw-t900.toml`` with its defaults, on the
  six-channel record of ``--hours`` (6) h at 400 Hz, read from CSV with a time column (a cold
  CSV cache: the parse is timed); target ≤ 30 × oadev, peak memory ≤ 2 × the record's float64
  size (six channels and the time column);
* ``verify24``: the same on a 4 × longer record (24 h); target ≤ 2 × the ``verify`` time;
* ``identify``: ``sensormodel identify REC.npy --columns gyro.x`` with its defaults (one
  8.64 M-sample channel at 6 h); target ≤ 10 × oadev;
* ``many``: six seeded white-noise channels of 10⁷ samples through
  ``allan.overlapping_many`` (default workers) against the same six one after another on one
  thread; target ≥ 1.8 × the throughput (wall); the CPU time of both is printed, since a
  shared machine's other load takes from the wall-clock gain (best of ``--repeats``);
* ``demo``: ``sensormodel demo``; target < 60 s;
* ``--large``: a six-channel 72 h record at 2 kHz (518 M samples per channel, 25 GB of
  float64, built in chunks with ``numpy.lib.format.open_memmap``) through ``sensormodel
  allan`` and ``sensormodel verify``; target peak memory ≤ 3 GB. The file is deleted
  afterwards unless ``--keep``.

Records: the bundled BW-T900 example datasheet simulated at its typical values by the
project's simulator (``sensormodel.simulate.write_record``, seeded), written as NPY and then
converted to CSV with a time column by the project's writer. The large record uses a faster
equivalent generator (white noise at each channel's typical white-noise density plus its
random walk, seeded, in chunks): simulating 3.1 G samples with the full model would take
about a quarter of an hour. Records are kept in ``--data`` (default
``$TMPDIR/sensormodel-bench``) and reused by later runs with the same settings.

Each command runs in its own subprocess: its wall time, the peak resident memory of the
largest single process among it and its worker processes (``os.wait4``'s ``ru_maxrss``, which
Linux takes over the process and its waited-for children) and the peak of the sum over the
process and its children together (sampled every 50 ms from /proc), which the memory targets
are held against. The load average (``os.getloadavg``) is
printed before and after each part: on a shared machine the wall times follow it.
"""

from __future__ import annotations

import argparse
import json
import mmap
import os
import pathlib
import platform
import shutil
import subprocess
import sys
import tempfile
import threading
import time

RATE = 400.0
SEED = 20261202
DATASHEET = "bw-t900.toml"
HOUR = 3600.0
PARTS = ("oadev", "verify", "verify24", "identify", "many", "demo")
GB = 1e9
#: The source tree this script belongs to: imported first, here and in every subprocess.
ROOT = pathlib.Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))


# ---------------------------------------------------------------------------------------------
# Machine and load
# ---------------------------------------------------------------------------------------------


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

    mem = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / GB
    return (
        f"machine: {os.cpu_count()} cores (usable {len(os.sched_getaffinity(0))}), CPU {model}, "
        f"{mem:.1f} GB memory; Python {platform.python_version()}, numpy {np.__version__}, "
        f"allantools {allantools.__version__}"
    )


def _load() -> str:
    return "load " + " ".join(f"{v:.2f}" for v in os.getloadavg())


# ---------------------------------------------------------------------------------------------
# Records
# ---------------------------------------------------------------------------------------------


def _example() -> pathlib.Path:
    from sensormodel.demo import example_path

    return example_path(DATASHEET)


def _stamp_ok(path: pathlib.Path, settings: dict) -> bool:
    stamp = path.with_name(path.name + ".bench.json")
    if not path.is_file() or not stamp.is_file():
        return False
    return json.loads(stamp.read_text()) == settings


def _stamp(path: pathlib.Path, settings: dict) -> None:
    path.with_name(path.name + ".bench.json").write_text(json.dumps(settings))


def _simulated(data: pathlib.Path, hours: float) -> tuple[pathlib.Path, pathlib.Path]:
    """The six-channel BW-T900 record of ``hours`` at 400 Hz as NPY and as CSV (time column)."""
    import numpy as np

    import sensormodel as sm
    from sensormodel.recording import open_writer
    from sensormodel.simulate import write_record

    tag = f"bw-t900-{hours:g}h"
    npy, csv = data / f"{tag}.npy", data / f"{tag}.csv"
    n = int(round(hours * HOUR * RATE))
    settings = {"n": n, "rate": RATE, "seed": SEED, "generator": "simulate", "v": 2}
    if not _stamp_ok(npy, settings):
        t0 = time.perf_counter()
        model = sm.build_model(_example())
        write_record(npy, model, n, RATE, seed=SEED, force=True, time_column=False)
        _stamp(npy, settings)
        print(f"  built {npy.name}: {n} samples x 6 in {time.perf_counter() - t0:.0f} s")
    if not _stamp_ok(csv, settings):
        t0 = time.perf_counter()
        arr = np.load(npy, mmap_mode="r")
        meta = json.loads(npy.with_name(npy.name + ".json").read_text())
        names = [c["name"] for c in meta["columns"]]
        with open_writer(csv, names, None, RATE, force=True, time_column=True) as w:
            for i0 in range(0, n, 1 << 18):
                w.write(np.array(arr[i0 : i0 + (1 << 18)]))
        _stamp(csv, settings)
        print(f"  built {csv.name} ({csv.stat().st_size / GB:.2f} GB) "
              f"in {time.perf_counter() - t0:.0f} s")
    return npy, csv


def _large_record(data: pathlib.Path, hours: float, rate: float) -> pathlib.Path:
    """The large six-channel NPY record, built in chunks with open_memmap (module notes)."""
    import numpy as np

    import sensormodel as sm

    path = data / f"large-{hours:g}h-{rate:g}hz.npy"
    n = int(round(hours * HOUR * rate))
    settings = {"n": n, "rate": rate, "seed": SEED, "generator": "white+random walk"}
    if _stamp_ok(path, settings):
        return path
    model = sm.build_model(_example())
    names, units, sigma, walk = [], [], [], []
    for ch in model.channels:
        names.append(ch.id)
        units.append("rad/s" if ch.id.startswith("gyro") else "m/s^2")
        # per-sample σ of the white term; random-walk increments per sample (σ_K·√τ0)
        white = [t for t in ch.terms if t.type == "white"]
        rw = [t for t in ch.terms if t.type == "random_walk"]
        sigma.append(ch.white_sample_std(rate) if white else 0.0)
        walk.append(float(rw[0].density) / np.sqrt(rate) if rw else 0.0)
    t0 = time.perf_counter()
    free = shutil.disk_usage(data).free
    need = 8 * 6 * n
    if free < need + 4 * GB:
        raise SystemExit(f"--large needs {need / GB:.0f} GB (+4) free in {data}; {free / GB:.0f}")
    out = np.lib.format.open_memmap(path, mode="w+", dtype=np.float64, shape=(n, 6))
    raw, offset = out._mmap, out.offset  # type: ignore[attr-defined]
    rng = np.random.default_rng(SEED)
    level = np.zeros(6)
    rows = 1 << 20
    for i0 in range(0, n, rows):
        k = min(rows, n - i0)
        block = rng.standard_normal((k, 6)) * np.array(sigma)
        steps = rng.standard_normal((k, 6)) * np.array(walk)
        np.cumsum(steps, axis=0, out=steps)
        steps += level
        level = steps[-1].copy()
        block += steps
        out[i0 : i0 + k] = block
        # drop the written pages from this process: a shared file mapping's dirty pages stay
        # in the page cache and reach the file; the process's memory stays small
        lo = offset + 48 * i0
        lo -= lo % mmap.PAGESIZE
        raw.madvise(mmap.MADV_DONTNEED, lo, offset + 48 * (i0 + k) - lo)
        if (i0 // rows) % 16 == 0:
            print(f"  building {path.name}: {100 * (i0 + k) / n:5.1f} %", flush=True)
    out.flush()
    del out, raw
    meta = {
        "schema": "sensormodel/recording/1",
        "rate": rate,
        "columns": [{"name": c, "unit": u} for c, u in zip(names, units, strict=True)],
    }
    path.with_name(path.name + ".json").write_text(json.dumps(meta))
    _stamp(path, settings)
    print(f"\r  built {path.name}: {n} samples x 6 ({need / GB:.1f} GB) "
          f"in {time.perf_counter() - t0:.0f} s")
    return path


# ---------------------------------------------------------------------------------------------
# Timed subprocesses
# ---------------------------------------------------------------------------------------------


def _tree_rss(pid: int) -> int:
    """Resident memory of ``pid`` and its descendants [bytes] (from /proc)."""
    children: dict[int, list[int]] = {}
    rss: dict[int, int] = {}
    page = os.sysconf("SC_PAGE_SIZE")
    for d in os.listdir("/proc"):
        if not d.isdigit():
            continue
        try:
            with open(f"/proc/{d}/stat") as fh:
                parts = fh.read().rsplit(")", 1)[1].split()
            ppid, pages = int(parts[1]), int(parts[21])
        except (OSError, IndexError, ValueError):
            continue
        children.setdefault(ppid, []).append(int(d))
        rss[int(d)] = pages * page
    total, todo = 0, [pid]
    while todo:
        p = todo.pop()
        total += rss.get(p, 0)
        todo += children.get(p, [])
    return total


def _run(cmd: list[str], env: dict | None = None, quiet: bool = True) -> dict:
    """Run ``cmd``: wall time, exit code, own peak RSS, sampled peak RSS of its process tree."""
    full_env = {**os.environ, "OPENBLAS_NUM_THREADS": "1", "PYTHONPATH": str(ROOT), **(env or {})}
    t0 = time.perf_counter()
    proc = subprocess.Popen(
        cmd,
        env=full_env,
        stdout=subprocess.PIPE if quiet else None,
        stderr=subprocess.PIPE if quiet else None,
        text=True,
    )
    peak = [0]
    done = threading.Event()

    def sample() -> None:
        while not done.wait(0.05):
            peak[0] = max(peak[0], _tree_rss(proc.pid))

    sampler = threading.Thread(target=sample, daemon=True)
    sampler.start()
    out, err = ("", "")
    buf: dict[str, str] = {}
    if quiet:
        reader = threading.Thread(target=_collect, args=(proc, buf), daemon=True)
        reader.start()
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    done.set()
    sampler.join()
    if quiet:
        reader.join()
        out, err = buf.get("out", ""), buf.get("err", "")
    proc.returncode = os.waitstatus_to_exitcode(status)
    return {
        "wall": wall,
        "code": proc.returncode,
        "cpu": usage.ru_utime + usage.ru_stime,
        "peak": usage.ru_maxrss * 1024,
        "tree_peak": max(peak[0], usage.ru_maxrss * 1024),
        "stdout": out,
        "stderr": err,
    }


def _collect(proc: subprocess.Popen, buf: dict[str, str]) -> None:
    buf["out"] = proc.stdout.read() if proc.stdout else ""
    buf["err"] = proc.stderr.read() if proc.stderr else ""


def _cli(*args: str) -> list[str]:
    return [sys.executable, "-m", "sensormodel.cli", *args]


def _check(r: dict, what: str, codes: tuple[int, ...] = (0,)) -> None:
    if r["code"] not in codes:
        sys.stderr.write(r["stderr"][-3000:])
        raise SystemExit(f"{what} exited with {r['code']}")


def _verdict_line(stdout: str) -> str:
    for line in stdout.splitlines():
        if line.strip().startswith("overall"):
            return line.strip()
    return "(no overall line)"


def _fmt_mem(r: dict) -> str:
    return (
        f"peak RSS of the largest process {r['peak'] / GB:.2f} GB, of all together "
        f"{r['tree_peak'] / GB:.2f} GB"
    )


# ---------------------------------------------------------------------------------------------
# Workers (run in their own subprocess)
# ---------------------------------------------------------------------------------------------


def _worker_oadev(npy: str) -> None:
    import allantools
    import numpy as np

    from sensormodel.allan import overlapping

    y = np.array(np.load(npy, mmap_mode="r")[:, 0])
    allantools.oadev(y[:10_000], rate=RATE, data_type="freq", taus="octave")
    overlapping(y[:10_000], RATE)
    t0 = time.perf_counter()
    tau, adev, *_ = allantools.oadev(y, rate=RATE, data_type="freq", taus="octave")
    t_ref = time.perf_counter() - t0
    t0 = time.perf_counter()
    curve = overlapping(y, RATE, taus="octave")
    t_ours = time.perf_counter() - t0
    rel = float(np.max(np.abs(curve.adev[: len(adev)] / adev - 1.0)))
    print(json.dumps({"oadev": t_ref, "overlapping": t_ours, "n": int(y.shape[0]), "rel": rel}))


def _worker_many(n: int, repeats: int) -> None:
    import numpy as np

    from sensormodel.allan import overlapping, overlapping_many

    rng = np.random.default_rng(SEED)
    cols = []
    for _ in range(6):
        y = rng.standard_normal(n)
        y *= 1e-3
        y += 3e-3
        cols.append(y)
    overlapping_many([c[:10_000] for c in cols], 100.0)
    calls = {
        "six through overlapping_many": lambda: overlapping_many(cols, 100.0),
        "six one after another, 1 thread": lambda: [
            overlapping(c, 100.0, threads=1) for c in cols
        ],
    }
    best: dict[str, list[float]] = {}
    results = {}
    for _ in range(repeats):
        for name, call in calls.items():
            c0, t0 = time.process_time(), time.perf_counter()
            results[name] = call()
            wall, cpu = time.perf_counter() - t0, time.process_time() - c0
            if name not in best or wall < best[name][0]:
                best[name] = [wall, cpu]
    a, b = results.values()
    same = all(np.array_equal(x.adev, y.adev) for x, y in zip(a, b, strict=True))
    print(json.dumps({"best": best, "same": same}))


# ---------------------------------------------------------------------------------------------
# Parts
# ---------------------------------------------------------------------------------------------


def _self(*args: str) -> list[str]:
    return [sys.executable, os.path.abspath(__file__), *args]


def part_oadev(npy: pathlib.Path) -> float:
    r = _run(_self("--worker", "oadev", str(npy)))
    _check(r, "oadev worker")
    res = json.loads(r["stdout"].strip().splitlines()[-1])
    print(
        f"oadev      allantools.oadev, gyro.x, {res['n']} samples, octave tau: "
        f"{res['oadev']:.2f} s (sensormodel.allan.overlapping {res['overlapping']:.2f} s, "
        f"max rel. difference {res['rel']:.1e})   [{_load()}]"
    )
    return float(res["oadev"])


def _verify(csv: pathlib.Path, cache: pathlib.Path) -> dict:
    shutil.rmtree(cache, ignore_errors=True)
    r = _run(_cli("verify", str(csv), "--spec", str(_example())), env={
        "SENSORMODEL_CACHE": str(cache)})
    _check(r, "verify", (0, 1, 3))
    return r


def _record_bytes(csv_hours: float) -> float:
    """float64 size of the record: six channels and the time column."""
    return 7 * 8 * csv_hours * HOUR * RATE


def part_verify(csv: pathlib.Path, hours: float, ref: float | None, cache: pathlib.Path) -> dict:
    r = _verify(csv, cache)
    size = _record_bytes(hours)
    ratio = "" if ref is None else f"= {r['wall'] / ref:.1f} x oadev (target <= 30)"
    print(
        f"verify     {hours:g} h CSV: {r['wall']:.1f} s {ratio}; CPU {r['cpu']:.0f} s; "
        f"{_fmt_mem(r)} = {r['tree_peak'] / size:.2f} x the record's float64 size "
        f"{size / GB:.2f} GB (target <= 2)   [{_load()}]\n"
        f"           {_verdict_line(r['stdout'])}"
    )
    return r


def part_verify24(csv: pathlib.Path, hours: float, six: dict | None, cache: pathlib.Path) -> None:
    r = _verify(csv, cache)
    ratio = "" if six is None else f"= {r['wall'] / six['wall']:.2f} x the shorter (target <= 2)"
    size = _record_bytes(hours)
    print(
        f"verify24   {hours:g} h CSV: {r['wall']:.1f} s {ratio}; {_fmt_mem(r)} = "
        f"{r['tree_peak'] / size:.2f} x {size / GB:.2f} GB   [{_load()}]\n"
        f"           {_verdict_line(r['stdout'])}"
    )


def part_identify(npy: pathlib.Path, ref: float | None) -> None:
    out = npy.with_name("identified-gyro-x.json")
    r = _run(_cli("identify", str(npy), "--columns", "gyro.x", "-o", str(out), "--force"))
    _check(r, "identify")
    ratio = "" if ref is None else f"= {r['wall'] / ref:.1f} x oadev (target <= 10)"
    print(f"identify   gyro.x NPY: {r['wall']:.1f} s {ratio}; {_fmt_mem(r)}   [{_load()}]")


def part_many(n: int, repeats: int) -> None:
    r = _run(_self("--worker", "many", str(n), str(repeats)))
    _check(r, "many worker")
    res = json.loads(r["stdout"].strip().splitlines()[-1])
    (w_many, c_many), (w_serial, c_serial) = res["best"].values()
    print(
        f"many       six channels of {n:.0e}: overlapping_many {w_many:.2f} s wall "
        f"({c_many:.2f} s CPU); one after another on 1 thread {w_serial:.2f} s "
        f"({c_serial:.2f} s CPU): throughput x {w_serial / w_many:.2f} (target >= 1.8); "
        f"CPU time ratio {c_many / c_serial:.2f}; equal results: {res['same']}; best of "
        f"{repeats}   [{_load()}]"
    )


def part_demo(data: pathlib.Path) -> None:
    out = data / "demo-output"
    shutil.rmtree(out, ignore_errors=True)
    r = _run(_cli("demo", "--out", str(out)))
    _check(r, "demo")
    print(f"demo       {r['wall']:.1f} s (target < 60); CPU {r['cpu']:.0f} s; {_fmt_mem(r)}"
          f"   [{_load()}]")


def part_large(
    data: pathlib.Path, hours: float, rate: float, keep: bool, stream_above: str | None
) -> None:
    path = _large_record(data, hours, rate)
    size = os.path.getsize(path)
    env = {} if stream_above is None else {"SENSORMODEL_STREAM_ABOVE": stream_above}
    try:
        for name, cmd in (
            ("allan", _cli("allan", str(path), "-o", str(data / "large-allan.json"), "--force")),
            ("verify", _cli("verify", str(path), "--spec", str(_example()))),
        ):
            print(f"large      {name} of {path.name} ({size / GB:.1f} GB) ...", flush=True)
            r = _run(cmd, env=env, quiet=False)
            _check(r, f"large {name}", (0, 1, 3))
            print(
                f"large      {name}: {r['wall']:.0f} s; {_fmt_mem(r)} (target <= 3 GB)"
                f"   [{_load()}]"
            )
    finally:
        if not keep:
            for p in path.parent.glob(path.name + "*"):
                p.unlink()


# ---------------------------------------------------------------------------------------------
# Main
# ---------------------------------------------------------------------------------------------


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--hours", type=float, default=6.0, help="length of the verify record [h]")
    ap.add_argument("--long-factor", type=float, default=4.0,
                    help="the verify24 record is this many times as long (default 4: 24 h)")
    ap.add_argument("--parts", default="all",
                    help=f"comma list of {','.join(PARTS)} (default all)")
    ap.add_argument("--large", action="store_true", help="also the larger-than-memory case")
    ap.add_argument("--large-hours", type=float, default=72.0)
    ap.add_argument("--large-rate", type=float, default=2000.0)
    ap.add_argument("--keep", action="store_true", help="keep the large record afterwards")
    ap.add_argument("--stream-above", default=None, metavar="BYTES",
                    help="SENSORMODEL_STREAM_ABOVE for the large commands (default: the "
                    "engine's own choice, half the available memory); e.g. 0 to try the "
                    "streamed path on a smaller --large-hours record")
    ap.add_argument("--many-n", type=float, default=1e7, help="samples per channel of 'many'")
    ap.add_argument("--repeats", type=int, default=3, help="repeats of 'many' (best kept)")
    ap.add_argument("--data", default=os.path.join(tempfile.gettempdir(), "sensormodel-bench"))
    ap.add_argument("--worker", nargs="*", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        kind, *rest = args.worker
        if kind == "oadev":
            _worker_oadev(rest[0])
        else:
            _worker_many(int(rest[0]), int(rest[1]))
        return
    parts = PARTS if args.parts == "all" else tuple(p.strip() for p in args.parts.split(","))
    unknown = set(parts) - set(PARTS)
    if unknown:
        raise SystemExit(f"unknown parts {sorted(unknown)}; choose from {', '.join(PARTS)}")
    data = pathlib.Path(args.data)
    data.mkdir(parents=True, exist_ok=True)
    cache = data / "csv-cache"
    print(_machine())
    print(f"start: {_load()}; records in {data}")
    six_h = args.hours
    long_h = args.hours * args.long_factor
    if {"oadev", "verify", "identify"} & set(parts):
        npy, csv = _simulated(data, six_h)
    if "verify24" in parts:
        _, csv24 = _simulated(data, long_h)
    print()
    ref = part_oadev(npy) if "oadev" in parts else None
    six = part_verify(csv, six_h, ref, cache) if "verify" in parts else None
    if "verify24" in parts:
        part_verify24(csv24, long_h, six, cache)
    if "identify" in parts:
        part_identify(npy, ref)
    if "many" in parts:
        part_many(int(args.many_n), args.repeats)
    if "demo" in parts:
        part_demo(data)
    if args.large:
        part_large(data, args.large_hours, args.large_rate, args.keep, args.stream_above)
    shutil.rmtree(cache, ignore_errors=True)
    print(f"\nend: {_load()}")


if __name__ == "__main__":
    main()
