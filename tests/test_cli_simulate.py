"""The ``sensormodel simulate`` command: files, reproducibility, refusals, and faithfulness.

Outside references:
- Allan deviation: NIST SP 1065 (W. J. Riley 2008) eq. (45) chi-square interval with the EDF of
  Greenhall & Riley (Proc. 35th PTTI, 2003) from allantools (a reference library); the record's
  overlapping Allan deviation is computed both by ``sensormodel allan`` and by allantools.
- The model's exact Allan deviation: IEEE Std 952-1997 Annex C forms (sensormodel.terms).
"""

from __future__ import annotations

import json
import pathlib

import allantools
import numpy as np
import pytest
from conftest import EXAMPLE_DATASHEETS
from scipy import stats

from sensormodel.cli import cli
from sensormodel.model import Channel, NoiseModel
from sensormodel.recording import read_recording
from sensormodel.simulate import simulate
from sensormodel.terms import Flicker, GaussMarkov, Quantization, RandomWalk, White

FAMILY = 0.05  # family-wise error of the Allan checks (Bonferroni; see tests/test_simulate.py)


def _run(runner, *args):  # type: ignore[no-untyped-def]
    return runner.invoke(cli, [str(a) for a in args], catch_exceptions=False)


@pytest.fixture
def model_file(tmp_path: pathlib.Path) -> pathlib.Path:
    """A two-channel model at 100 Hz (gyro and accelerometer) as a noise-model file."""
    chans = (
        Channel("gyro.z", "angular_rate", "rad/s", 100.0, (White(1e-3), RandomWalk(1e-5))),
        Channel(
            "accelerometer.x",
            "acceleration",
            "m/s^2",
            100.0,
            (White(2e-3), GaussMarkov(1e-3, 10.0)),
        ),
    )
    path = tmp_path / "imu.json"
    NoiseModel(sensor={"name": "test"}, channels=chans).save(path)
    return path


def test_help_has_an_example(runner) -> None:  # type: ignore[no-untyped-def]
    res = _run(runner, "simulate", "--help")
    assert res.exit_code == 0
    assert "Example:" in res.output
    for option in (
        "--duration T",
        "--rate HZ",
        "--seed",
        "--runs",
        "--increments",
        "--flicker [realization|power-law]",
        "--channel",
        "-o, --output",
        "--force",
    ):
        assert option in res.output, option


def test_csv_record_reads_back_and_equals_the_library(runner, model_file, tmp_path) -> None:  # type: ignore[no-untyped-def]
    out = tmp_path / "rec.csv"
    res = _run(runner, "simulate", model_file, "--duration", "20 s", "--seed", 5, "-o", out)
    assert res.exit_code == 0, res.stderr
    assert res.stdout.startswith(f"wrote {out}: 2000 rate samples × 2 channels at 100 Hz")
    header = out.read_text().splitlines()[0]
    assert header == "time [s],gyro.z [rad/s],accelerometer.x [m/s^2]"
    rec = read_recording(out)
    assert rec.rate == pytest.approx(100.0, rel=1e-9) and rec.n_samples == 2000
    lib = simulate(NoiseModel.load(model_file), 2000, seed=5)
    np.testing.assert_allclose(rec.data["gyro.z"], lib[:, 0], rtol=1e-15, atol=0)
    np.testing.assert_allclose(rec.data["accelerometer.x"], lib[:, 1], rtol=1e-15, atol=0)


def test_same_seed_same_file_and_fresh_seed_is_reported(runner, model_file, tmp_path) -> None:  # type: ignore[no-untyped-def]
    a, b, c, d = (tmp_path / f"{k}.csv" for k in "abcd")
    _run(runner, "simulate", model_file, "--duration", "5", "--seed", 9, "-o", a)
    _run(runner, "simulate", model_file, "--duration", "5", "--seed", 9, "-o", b)
    assert a.read_bytes() == b.read_bytes()
    res = _run(runner, "simulate", model_file, "--duration", "5", "-o", c)
    assert res.exit_code == 0
    note = res.stderr.strip().splitlines()[0]
    assert note.startswith("note: seed ") and "(pass --seed " in note
    seed = int(note.split()[2])
    _run(runner, "simulate", model_file, "--duration", "5", "--seed", seed, "-o", d)
    assert c.read_bytes() == d.read_bytes()
    assert a.read_bytes() != c.read_bytes() or seed == 9


def test_increments_channels_and_formats(runner, model_file, tmp_path) -> None:  # type: ignore[no-untyped-def]
    lib = simulate(NoiseModel.load(model_file), 1000, seed=2)
    out = tmp_path / "inc.npz"
    res = _run(
        runner, "simulate", model_file, "--duration", "10 s", "--seed", 2, "--increments", "-o", out
    )
    assert res.exit_code == 0, res.stderr
    rec = read_recording(out)
    assert rec.increments  # the file says so; the reader returns mean rates
    np.testing.assert_allclose(rec.data["gyro.z"], lib[:, 0], rtol=1e-12)
    out = tmp_path / "inc.csv"
    _run(
        runner, "simulate", model_file, "--duration", "10 s", "--seed", 2, "--increments", "-o", out
    )
    # the recording writer marks increments in a comment line above the header
    assert out.read_text().splitlines()[:2] == [
        "# sensormodel increments = true",
        "time [s],gyro.z [rad],accelerometer.x [m/s]",
    ]
    # --channel selects, and the selected channel's record is unchanged
    out = tmp_path / "z.npy"
    _run(
        runner,
        "simulate",
        model_file,
        "--duration",
        "10 s",
        "--seed",
        2,
        "--channel",
        "gyro_z",
        "-o",
        out,
    )
    rec = read_recording(out)
    assert list(rec.channels) == ["gyro.z"]
    np.testing.assert_array_equal(rec.data["gyro.z"], lib[:, 0])
    pytest.importorskip("h5py")
    out = tmp_path / "rec.h5"
    res = _run(
        runner, "simulate", model_file, "--duration", "10 s", "--seed", 2, "--rate", 50, "-o", out
    )
    assert res.exit_code == 0, res.stderr
    rec = read_recording(out)
    assert rec.rate == pytest.approx(50.0, rel=1e-9) and rec.n_samples == 500


def test_runs_write_independent_records(runner, model_file, tmp_path) -> None:  # type: ignore[no-untyped-def]
    out = tmp_path / "mc.npy"
    res = _run(
        runner, "simulate", model_file, "--duration", "3 s", "--seed", 4, "--runs", 3, "-o", out
    )
    assert res.exit_code == 0, res.stderr
    files = sorted(tmp_path.glob("mc-run*.npy"))
    assert [f.name for f in files] == ["mc-run000.npy", "mc-run001.npy", "mc-run002.npy"]
    model = NoiseModel.load(model_file)
    for r, f in enumerate(files):
        rec = read_recording(f)
        np.testing.assert_array_equal(rec.data["gyro.z"], simulate(model, 300, seed=4, run=r)[:, 0])


def test_refusals(runner, model_file, tmp_path) -> None:  # type: ignore[no-untyped-def]
    out = tmp_path / "rec.csv"
    _run(runner, "simulate", model_file, "--duration", "1", "--seed", 1, "-o", out)
    before = out.read_bytes()
    res = _run(runner, "simulate", model_file, "--duration", "1", "--seed", 2, "-o", out)
    assert res.exit_code == 2
    assert res.stderr == (
        f"error: {out}: the file exists; expected a new file name, or --force to overwrite it\n"
    )
    assert out.read_bytes() == before
    res = _run(runner, "simulate", model_file, "--duration", "1", "--seed", 2, "-o", out, "--force")
    assert res.exit_code == 0 and out.read_bytes() != before
    res = _run(runner, "simulate", model_file, "--duration", "10 m", "-o", tmp_path / "x.csv")
    assert res.exit_code == 2
    assert res.stderr.startswith("error: --duration: got 'm' (length); expected a time")
    assert "Traceback" not in res.stderr and not (tmp_path / "x.csv").exists()
    res = _run(
        runner,
        "simulate",
        model_file,
        "--duration",
        "1 ms",
        "--rate",
        100,
        "-o",
        tmp_path / "x.csv",
    )
    assert res.exit_code == 2
    assert res.stderr == (
        "error: duration 0.001 s at 100 Hz is 0 samples; expected at least one sample period "
        "(0.01 s)\n"
    )
    res = _run(runner, "simulate", model_file, "--duration", "1", "-o", tmp_path / "x.wav")
    assert res.exit_code == 2 and "unknown recording format '.wav'" in res.stderr
    # refused before a seed is drawn: no "note: seed …" for a record never written
    assert "seed" not in res.stderr and res.stderr.count("\n") == 1
    assert not (tmp_path / "x.wav").exists()
    res = _run(
        runner,
        "simulate",
        model_file,
        "--duration",
        "1",
        "--channel",
        "gyro.q",
        "-o",
        tmp_path / "x.csv",
    )
    assert res.exit_code == 2 and "no channel 'gyro.q'" in res.stderr


def test_mixed_rates_need_a_rate(runner, tmp_path) -> None:  # type: ignore[no-untyped-def]
    chans = (
        Channel("gyro.x", "angular_rate", "rad/s", 100.0, (White(1e-3),)),
        Channel("accelerometer.x", "acceleration", "m/s^2", 200.0, (White(1e-3),)),
    )
    path = tmp_path / "m.json"
    NoiseModel(sensor={}, channels=chans).save(path)
    res = _run(runner, "simulate", path, "--duration", "1", "-o", tmp_path / "x.csv")
    assert res.exit_code == 2
    assert res.stderr == (
        "error: the channels have different sample rates [100.0, 200.0] Hz; expected a "
        "simulation rate (rate=..., or --rate) shared by the record\n"
    )
    res = _run(runner, "simulate", path, "--duration", "1", "--rate", 400, "-o", tmp_path / "x.csv")
    assert res.exit_code == 0


# -- done means: every example model simulates into a record faithful to it ---------------------


def _alphas(channel: Channel) -> tuple[int, ...]:
    """Power-law exponents α (rate PSD ∝ f^α) of the noise types a channel contains."""
    out: set[int] = set()
    for t in channel.terms:
        out |= {
            "white": {0},
            "flicker": {0, -1},
            "random_walk": {-2},
            "gauss_markov": {0, -1, -2},
            "quantization": {2},
        }.get(t.type, set())
    return tuple(sorted(out)) or (0,)


@pytest.mark.parametrize("sheet", EXAMPLE_DATASHEETS, ids=lambda p: p.stem)
def test_every_example_model_simulates_faithfully(runner, sheet, tmp_path) -> None:  # type: ignore[no-untyped-def]
    model_path = tmp_path / "model.json"
    assert _run(runner, "build", sheet, "-o", model_path).exit_code == 0
    model = NoiseModel.load(model_path)
    rate = model.channels[0].sample_rate
    n = 2**16
    rec_path = tmp_path / "rec.npy"
    res = _run(
        runner, "simulate", model_path, "--duration", n / rate, "--seed", 2024, "-o", rec_path
    )
    assert res.exit_code == 0, res.stderr
    curve_path = tmp_path / "curve.json"
    res = _run(runner, "allan", rec_path, "--taus", "octave", "-o", curve_path)
    assert res.exit_code == 0, res.stderr
    curves = {c["id"]: c for c in json.loads(curve_path.read_text())["channels"]}
    rec = read_recording(rec_path)
    checks = []
    for ch in model.channels:
        curve = curves[ch.id]
        tau = np.array(curve["tau"])
        m = np.round(tau * rate).astype(int)
        keep = n / m >= 32  # enough clusters
        tau, m = tau[keep], m[keep]
        adev = np.array(curve["adev"])[keep]
        # independent computation with allantools: the same estimate to rounding
        _, ref_adev, _, _ = allantools.oadev(rec.data[ch.id], rate=rate, data_type="freq", taus=tau)
        np.testing.assert_allclose(adev, ref_adev, rtol=1e-8)
        widen = max(
            (
                t.realization(sample_rate=rate).worst_error
                for t in ch.terms
                if isinstance(t, Flicker)
            ),
            default=0.0,
        )
        edf = np.array(
            [
                min(
                    allantools.edf_greenhall(a, 2, int(mi), n + 1, overlapping=True)
                    for a in _alphas(ch)
                )
                for mi in m
            ]
        )
        checks.append((ch.id, adev**2 / ch.allan_variance(tau), edf, widen))
    # Family-wise 95 % over every channel and τ (Bonferroni): edf·σ̂²/σ² ~ χ²(edf) per τ
    # (SP 1065 eq. (45)), widened by the flicker realization's stated worst ADEV error.
    k = sum(r.size for _, r, _, _ in checks)
    a = FAMILY / k
    for cid, ratio, edf, widen in checks:
        lo = stats.chi2.ppf(a / 2, edf) / edf * (1 - widen) ** 2
        hi = stats.chi2.ppf(1 - a / 2, edf) / edf * (1 + widen) ** 2
        bad = (ratio < lo) | (ratio > hi)
        assert not bad.any(), (cid, ratio[bad], lo[bad], hi[bad])


def test_power_law_option_and_quantization_through_the_cli(runner, tmp_path) -> None:  # type: ignore[no-untyped-def]
    chans = (
        Channel(
            "gyro.z",
            "angular_rate",
            "rad/s",
            100.0,
            (Flicker(1e-3, longest_time=600.0), Quantization(1e-6)),
        ),
    )
    path = tmp_path / "m.json"
    NoiseModel(sensor={}, channels=chans).save(path)
    out = tmp_path / "r.npy"
    res = _run(
        runner,
        "simulate",
        path,
        "--duration",
        "10 min",
        "--seed",
        1,
        "--flicker",
        "power-law",
        "-o",
        out,
    )
    assert res.exit_code == 0, res.stderr
    assert "flicker: power-law" in res.stdout
    rec = read_recording(out)
    np.testing.assert_array_equal(
        rec.data["gyro.z"],
        simulate(NoiseModel.load(path), 60000, seed=1, flicker="power-law")[:, 0],
    )
