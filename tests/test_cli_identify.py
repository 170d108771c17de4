"""`sensormodel identify` through click's CliRunner.

The recording is written here with plain numpy (white noise of density N: normal samples of
std N·√rate, IEEE Std 952 Annex C; a random walk of density K: cumulative sum of N(0, K² dt)
steps). Bad input: exit code 2, one line ``error: ...`` on stderr, no traceback, no output file
(DESIGN §6/§8).
"""

from __future__ import annotations

import json
import math
import pathlib

import jsonschema
import numpy as np
import pytest

from sensormodel.cli import cli
from sensormodel.identify import fit_recording
from sensormodel.model import NoiseModel
from sensormodel.recording import read_recording

SCHEMAS = pathlib.Path(__file__).resolve().parent.parent / "schemas"
RATE = 50.0
#: White density 0.01 °/s/√Hz-like in deg/s·√s, random walk 0.002 deg/s/√s (arbitrary, SI below).
WHITE_DEG = 0.02
RW_DEG = 0.004


def _write_csv(path: pathlib.Path, n: int = 1 << 13, seed: int = 3) -> pathlib.Path:
    rng = np.random.default_rng(seed)
    x = rng.standard_normal(n) * WHITE_DEG * math.sqrt(RATE)
    x += np.cumsum(rng.standard_normal(n)) * RW_DEG / math.sqrt(RATE)
    z = rng.standard_normal(n) * WHITE_DEG * math.sqrt(RATE)
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("time [s],gyro_x [deg/s],rate_z [deg/s]\n")
        for i in range(n):
            fh.write(f"{i / RATE!r},{float(x[i])!r},{float(z[i])!r}\n")
    return path


@pytest.fixture(scope="module")
def recording(tmp_path_factory) -> pathlib.Path:
    return _write_csv(tmp_path_factory.mktemp("rec") / "static.csv")


ARGS = ["--channel", "rate_z=gyro.z", "--bootstrap", "60", "--seed", "4"]


@pytest.fixture(scope="module")
def identified(recording, tmp_path_factory):
    from click.testing import CliRunner

    try:
        runner = CliRunner(mix_stderr=False)  # type: ignore[call-arg]
    except TypeError:
        runner = CliRunner()
    out = tmp_path_factory.mktemp("out") / "model.json"
    result = runner.invoke(cli, ["identify", str(recording), "-o", str(out), *ARGS])
    return result, out


def assert_refused(result, prefix: str, *, leftovers=()) -> str:
    """Exit 2, exactly one stderr line starting with ``prefix``, no traceback, nothing written."""
    assert result.exit_code == 2, (result.exit_code, result.output)
    lines = result.stderr.splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith(prefix), (lines[0], prefix)
    assert "Traceback" not in result.output
    for path in leftovers:
        assert not path.exists(), path
    return lines[0]


def test_identify_writes_a_noise_model(identified, recording) -> None:
    result, out = identified
    assert result.exit_code == 0, result.output
    doc = json.loads(out.read_text(encoding="utf-8"))
    schema = json.loads((SCHEMAS / "noise-model.schema.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(schema).validate(doc)
    assert doc["provenance"]["from"] == "recording"
    model = NoiseModel.load(out)
    assert model.channel_ids == ["gyro.x", "gyro.z"]
    for ch in model.channels:
        assert ch.unit == "rad/s" and ch.quantity == "angular_rate" and ch.sample_rate == RATE
        for term in ch.terms:
            unc = term.to_dict()["uncertainty"]
            assert set(unc) == {"low", "high", "confidence"} and unc["confidence"] == 0.9
            value = next(iter(term.parameters().values()))
            assert unc["low"] <= value <= unc["high"]
    # the CLI writes what the library computes (same seed, same bootstrap size)
    rec = read_recording(recording, channel_map={"rate_z": "gyro.z"})
    library = fit_recording(rec, seed=4, n_boot=60)
    assert model.channel("gyro.x") == library[0].to_channel()
    assert model.channel("gyro.z") == library[1].to_channel()
    # white noise in deg/s·√s → rad/√s (the true value lies in the 90 % interval)
    white = model.channel("gyro.x").term("white")
    true = WHITE_DEG * math.pi / 180.0
    assert white.meta["uncertainty"]["low"] <= true <= white.meta["uncertainty"]["high"]


def test_identify_prints_a_table_per_channel(identified) -> None:
    result, out = identified
    text = result.stdout
    assert text.count("bootstrap records") == 2
    assert "gyro.x [rad/s]: 8192 samples at 50 Hz" in text
    header = next(line for line in text.splitlines() if line.strip().startswith("term"))
    for column in (
        "estimate (SI)",
        "readable",
        "90 % interval (SI)",
        "supported",
        "slope reading (SI)",
        "flag",
    ):
        assert column in header
    white_row = next(line for line in text.splitlines() if line.strip().startswith("white"))
    assert "°/√h" in white_row and " yes " in white_row
    assert text.rstrip().splitlines()[-1].startswith(f"wrote {out}: 2 channels")


def test_identified_model_feeds_inspect_simulate_export(identified, runner, tmp_path) -> None:
    _, out = identified
    r = runner.invoke(cli, ["inspect", str(out)])
    assert r.exit_code == 0, r.output
    assert "gyro.x" in r.stdout and "white" in r.stdout
    rec = tmp_path / "sim.csv"
    r = runner.invoke(
        cli, ["simulate", str(out), "--duration", "10 s", "--seed", "1", "-o", str(rec)]
    )
    assert r.exit_code == 0, r.output
    assert rec.exists()
    exp = tmp_path / "disc.json"
    r = runner.invoke(
        cli, ["export", str(out), "--dt", "0.02 s", "--format", "json", "-o", str(exp)]
    )
    assert r.exit_code == 0, r.output
    assert json.loads(exp.read_text(encoding="utf-8"))["schema"] == "sensormodel/discrete-model/1"


def test_identify_refuses_bad_input(recording, runner, tmp_path) -> None:
    out = tmp_path / "m.json"
    r = runner.invoke(cli, ["identify", str(tmp_path / "missing.csv"), "-o", str(out)])
    assert_refused(r, "error: ", leftovers=[out])
    r = runner.invoke(cli, ["identify", str(recording), "-o", str(out), "--terms", "white,bias"])
    line = assert_refused(r, "error: --terms: unknown term 'bias'", leftovers=[out])
    assert "expected one of quantization, white, flicker" in line
    r = runner.invoke(cli, ["identify", str(recording), "-o", str(out), "--confidence", "1.2"])
    assert_refused(r, "error: --confidence: got 1.2", leftovers=[out])
    r = runner.invoke(cli, ["identify", str(recording), "-o", str(out), "--bootstrap", "5"])
    assert_refused(r, "error: --bootstrap: got 5; expected at least 40", leftovers=[out])
    short = _write_csv(tmp_path / "short.csv", n=20)
    r = runner.invoke(cli, ["identify", str(short), "-o", str(out)])
    assert_refused(
        r,
        f"error: {short}:gyro.x: the curve of the 20-sample record has 4 τ for 5 terms",
        leftovers=[out],
    )
    out.write_text("{}", encoding="utf-8")
    r = runner.invoke(cli, ["identify", str(recording), "-o", str(out)])
    assert_refused(r, f"error: {out}")
    assert out.read_text(encoding="utf-8") == "{}"


def test_identify_with_an_output_filter(recording, runner, tmp_path) -> None:
    # --bandwidth makes the white term band-limited white (identify.fit(bandwidth=...)); the
    # written model keeps the filter (here far above the 25 Hz Nyquist frequency, so the
    # estimate is the unfiltered one within 1 %: the Allan variance of white noise through a
    # 1-pole filter at 1 kHz differs from N²/τ by about 3/(4π·1 kHz·τ) ≤ 1.2 % at τ = 20 ms)
    out = tmp_path / "filtered.json"
    args = ["identify", str(recording), "-o", str(out), *ARGS, "--terms", "white,random_walk"]
    r = runner.invoke(cli, [*args, "--bandwidth", "1 kHz", "--filter-order", "1"])
    assert r.exit_code == 0, r.output
    model = NoiseModel.load(out)
    white = next(t for t in model.channel("gyro.z").terms if t.type == "white")
    assert (white.bandwidth, white.filter_order) == (1000.0, 1)
    plain = tmp_path / "plain.json"
    assert (
        runner.invoke(
            cli,
            ["identify", str(recording), "-o", str(plain), *ARGS, "--terms", "white,random_walk"],
        ).exit_code
        == 0
    )
    w0 = next(t for t in NoiseModel.load(plain).channel("gyro.z").terms if t.type == "white")
    assert white.density == pytest.approx(w0.density, rel=0.01)
    bad = tmp_path / "bad.json"
    r = runner.invoke(cli, [*args[:3], str(bad), *args[4:], "--filter-order", "2"])
    assert_refused(r, "error: --filter-order: --filter-order without --bandwidth", leftovers=[bad])
    r = runner.invoke(cli, [*args[:3], str(bad), *args[4:], "--bandwidth", "-3"])
    assert_refused(r, "error: --bandwidth -3; expected a positive frequency", leftovers=[bad])
    r = runner.invoke(cli, [*args[:3], str(bad), *args[4:], "--bandwidth", "3 s"])
    assert_refused(r, "error: --bandwidth", leftovers=[bad])


def test_identify_gaps_split_fits_the_longest_segment(runner, tmp_path) -> None:
    # a logger's CSV at 50 Hz that lost 50 samples after its 3000th: clean segments of 3000 and
    # 5192 samples; the longer (second) one is fitted, the other reported as left out
    from sensormodel.allan import overlapping
    from sensormodel.identify import fit

    rng = np.random.default_rng(8)
    n, start, lost = 8192, 3000, 50
    x = rng.standard_normal(n) * WHITE_DEG * math.sqrt(RATE)
    t = np.delete(np.arange(n + lost) / RATE, np.s_[start : start + lost])
    path = tmp_path / "log.csv"
    rows = "".join(f"{a:.2f},{float(b)!r}\n" for a, b in zip(t, x, strict=True))
    path.write_text("time [s],gyro_x [deg/s]\n" + rows, encoding="utf-8")
    out = tmp_path / "m.json"
    args = ["identify", str(path), "-o", str(out), "--terms", "white,random_walk"]
    args += ["--bootstrap", "40", "--seed", "4"]
    r = runner.invoke(cli, args)
    assert_refused(r, f"error: {path}:line {start + 2}: time step of 1.02 s", leftovers=[out])
    r = runner.invoke(cli, [*args, "--gaps", "split"])
    assert r.exit_code == 0, r.output
    assert r.stderr.splitlines()[-1] == (
        f"note: gyro.x: 1 shorter clean segment ({start} samples) left out; the longest is "
        "analysed (--gaps split)"
    )
    assert f"gyro.x [rad/s]: {n - start} samples at 50 Hz" in r.stdout
    # the CLI's model is the library's fit of the longest segment's curve
    longest = x[start:] * math.pi / 180.0
    ident = fit(
        overlapping(longest, RATE, unit="rad/s", channel="gyro.x"),
        terms="white,random_walk",
        confidence=0.9,
        seed=4,
        n_boot=40,
    )
    written = NoiseModel.load(out).channel("gyro.x")
    expected = ident.to_channel()
    assert [t.type for t in written.terms] == [t.type for t in expected.terms]
    for a, b in zip(written.terms, expected.terms, strict=True):
        for key, value in b.parameters().items():
            assert a.parameters()[key] == pytest.approx(value, rel=1e-9)


def test_identify_prints_the_time_constant_and_says_when_it_is_not_resolved(tmp_path) -> None:
    # a first-order Gauss-Markov bias (σ = 0.01 deg/s, T = 3000 s, exact AR(1) steps) in
    # 20 minutes at 2 Hz, with a little white noise: far too short to resolve T
    from click.testing import CliRunner
    from scipy.signal import lfilter

    rate, n, tc = 2.0, 2400, 3000.0
    rng = np.random.default_rng(12)
    phi = math.exp(-1.0 / (rate * tc))
    drive = rng.standard_normal(n) * 0.01 * math.sqrt(1.0 - phi**2)
    drive[0] = rng.standard_normal() * 0.01
    y = lfilter([1.0], [1.0, -phi], drive) + rng.standard_normal(n) * 0.001 * math.sqrt(rate)
    rec = tmp_path / "bias.csv"
    with open(rec, "w", encoding="utf-8") as fh:
        fh.write("time [s],rate_z [deg/s]\n")
        fh.writelines(f"{i / rate!r},{float(v)!r}\n" for i, v in enumerate(y))
    out = tmp_path / "bias.json"
    result = CliRunner().invoke(
        cli,
        ["identify", str(rec), "-o", str(out), "--terms", "white,gauss_markov", *ARGS],
    )
    assert result.exit_code == 0, result.output
    t_rows = [line for line in result.output.splitlines() if "time constant T" in line]
    assert len(t_rows) == 1 and "not resolved" in t_rows[0] and "≥" in t_rows[0]
    notes = [line for line in result.output.splitlines() if line.startswith("  note: ")]
    assert any("time constant not resolved (T ≥" in line for line in notes), result.output
    # the bound is a lower end below the true T (3000 s)
    bound = [line for line in notes if "not resolved (T ≥" in line][0]
    assert float(bound.split("T ≥ ")[1].split(" s")[0]) < tc
    doc = json.loads(out.read_text(encoding="utf-8"))
    (gm,) = [t for t in doc["channels"][0]["terms"] if t["type"] == "gauss_markov"]
    assert gm["time_constant_uncertainty"]["high"] is None
    assert gm["time_constant"] < 0.25 * n / rate
