"""The ``sensormodel allan`` command: exit codes, exact error lines, output files, figure.

Outside references:
- IEEE Std 952-1997, Annex C: white rate noise of density N has Allan deviation N/sqrt(tau);
  sampled at ``fs`` with per-sample standard deviation sigma, N = sigma/sqrt(fs).
- The JSON output is validated with the reference library ``jsonschema`` against
  ``schemas/allan-curve.schema.json``.
"""

from __future__ import annotations

import json
import math
import pathlib

import jsonschema
import numpy as np
import pytest

from sensormodel import allan
from sensormodel.cli import cli
from sensormodel.recording import open_writer, read_recording

SCHEMA = pathlib.Path(__file__).resolve().parent.parent / "schemas" / "allan-curve.schema.json"
DEG_PER_H = math.pi / 180 / 3600  # SI Brochure 9th ed., Table 8: degree and hour

SIGMA = {"gyro.x": 2e-3, "accelerometer.z": 5e-3}  # per-sample std [rad/s], [m/s^2]
RATE = 100.0


@pytest.fixture
def white(tmp_path: pathlib.Path) -> pathlib.Path:
    """A seeded white-noise record, 20 000 samples at 100 Hz, two channels, CSV in SI."""
    rng = np.random.default_rng(11)
    n = 20_000
    block = np.column_stack([rng.normal(0, s, n) for s in SIGMA.values()])
    path = tmp_path / "white.csv"
    with open_writer(path, list(SIGMA), None, RATE) as w:
        w.write(block)
    return path


def _run(runner, *args: object):  # type: ignore[no-untyped-def]
    return runner.invoke(cli, [str(a) for a in args], catch_exceptions=False)


def test_help_has_an_example(runner) -> None:  # type: ignore[no-untyped-def]
    res = _run(runner, "allan", "--help")
    assert res.exit_code == 0
    assert "Example:" in res.output
    for option in (
        "--rate HZ",
        "--taus SPEC",
        "--confidence",
        "--gaps [fail|split]",
        "-o, --output F.json|F.csv",
        "--plot F.png",
        "--force",
        "--channel COLUMN=ID",
        "--columns GLOB",
        "--increments / --rates",
        "--unit U|COLUMN=U",
    ):
        assert option in res.output, option


def test_json_output_validates_and_matches_theory(runner, white, tmp_path) -> None:  # type: ignore[no-untyped-def]
    out = tmp_path / "curve.json"
    res = _run(runner, "allan", white, "-o", out, "--confidence", "0.9999")
    assert res.exit_code == 0, res.stderr
    assert res.stderr == ""  # no findings, no progress bar outside a terminal
    assert res.stdout.endswith(f"wrote {out}\n")
    doc = json.loads(out.read_text())
    jsonschema.validate(doc, json.loads(SCHEMA.read_text()))
    assert doc["schema"] == "sensormodel/allan-curve/1"
    assert [c["id"] for c in doc["channels"]] == ["gyro.x", "accelerometer.z"]
    assert [c["unit"] for c in doc["channels"]] == ["rad/s", "m/s^2"]
    rec = read_recording(white)
    for entry in doc["channels"]:
        # the command prints and writes what the library computes
        ref = allan.overlapping(rec.data[entry["id"]], RATE, confidence=0.9999)
        np.testing.assert_array_equal(entry["tau"], ref.tau)
        np.testing.assert_array_equal(entry["adev"], ref.adev)
        np.testing.assert_array_equal(entry["ci_low"], ref.ci_low)
        # IEEE 952 Annex C: ADEV = N/sqrt(tau), N = sigma/sqrt(fs). With 99.99 % intervals at
        # each of the ~13 τ, the chance that the truth falls outside any of them is below
        # 13 × 1e-4 (Bonferroni), so a miss would mean an error, not bad luck (seeded anyway).
        truth = SIGMA[entry["id"]] / math.sqrt(RATE) / np.sqrt(np.array(entry["tau"]))
        assert np.all(np.array(entry["ci_low"]) <= truth), entry["id"]
        assert np.all(truth <= np.array(entry["ci_high"])), entry["id"]
        assert entry["sample_rate"] == pytest.approx(RATE, rel=1e-12)
        assert entry["confidence"] == 0.9999


def test_table(runner, white) -> None:  # type: ignore[no-untyped-def]
    res = _run(runner, "allan", white, "--taus", "0.01,1", "--columns", "gyro*")
    assert res.exit_code == 0, res.stderr
    lines = res.stdout.splitlines()
    assert lines[0] == "gyro.x [rad/s]: 20000 samples at 100 Hz (3.33 min), 68.3 % intervals"
    assert lines[1].split() == [
        "τ",
        "[s]",
        "ADEV",
        "CI",
        "low",
        "CI",
        "high",
        "clusters",
        "(deviations",
        "in",
        "°/h)",
    ]
    curve = allan.overlapping(read_recording(white).data["gyro.x"], RATE, taus=[0.01, 1.0])
    for line, t, a, n in zip(lines[2:], curve.tau, curve.adev, curve.n_clusters, strict=True):
        fields = line.split()
        assert float(fields[0]) == pytest.approx(t)
        assert float(fields[1]) == pytest.approx(a / DEG_PER_H, rel=5e-4)  # 4 digits shown
        assert int(fields[4]) == n == 20_001 - 2 * round(t * RATE)
    assert len(lines) == 4


def test_csv_output(runner, white, tmp_path) -> None:  # type: ignore[no-untyped-def]
    out = tmp_path / "curve.csv"
    res = _run(runner, "allan", white, "-o", out, "--taus", "decade")
    assert res.exit_code == 0, res.stderr
    rows = [r.split(",") for r in out.read_text().splitlines()]
    assert rows[0] == list(allan.CSV_HEADER)
    taus = [float(r[4]) for r in rows[1:] if r[0] == "gyro.x"]
    assert taus == [0.01, 0.1, 1.0, 10.0]  # m = 1 … 1000 ≤ (n − 1)/2
    assert {r[0] for r in rows[1:]} == {"gyro.x", "accelerometer.z"}
    assert {r[1] for r in rows[1:]} == {"rad/s", "m/s^2"}


def test_refuses_to_overwrite(runner, white, tmp_path) -> None:  # type: ignore[no-untyped-def]
    out = tmp_path / "curve.json"
    out.write_text("old")
    res = _run(runner, "allan", white, "-o", out)
    assert res.exit_code == 2
    assert res.stderr == (
        f"error: {out}: the file exists; expected a new file name, or --force to overwrite it\n"
    )
    assert out.read_text() == "old"
    plot = tmp_path / "fig.png"
    plot.write_bytes(b"old")
    res = _run(runner, "allan", white, "--plot", plot)
    assert res.exit_code == 2 and plot.read_bytes() == b"old"
    res = _run(runner, "allan", white, "-o", out, "--plot", plot, "--force")
    assert res.exit_code == 0, res.stderr
    assert json.loads(out.read_text())["schema"] == "sensormodel/allan-curve/1"
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_bad_recording_writes_nothing(runner, tmp_path) -> None:  # type: ignore[no-untyped-def]
    rec = tmp_path / "bad.csv"
    rows = [f"{i / 10},{i % 3}" for i in range(300)]
    rows[3] = "0.3,nan"
    rec.write_text("time [s],gyro_x [deg/s]\n" + "\n".join(rows) + "\n")
    out = tmp_path / "curve.json"
    res = _run(runner, "allan", rec, "-o", out)
    assert res.exit_code == 2
    assert res.stderr == (
        f"error: {rec}:line 5: column 'gyro_x' holds NaN or an empty field; expected finite "
        "samples, or --gaps split to analyse the clean segments\n"
    )
    assert res.stdout == ""
    assert not out.exists()


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (
            ["--channel", "rate_q=gyro.z"],
            "{rec}: unknown column 'rate_q' in --channel; expected "
            "one of the columns 'time', 'rate_z'",
        ),
        (
            ["--channel", "rate_z"],
            "--channel rate_z; expected COLUMN=CHANNEL_ID, e.g. --channel rate_z=gyro.z",
        ),
        (
            ["-o", "{tmp}/curve.txt"],
            "-o {tmp}/curve.txt; expected a file name ending in .json or .csv",
        ),
        (
            ["--confidence", "1.5"],
            "--confidence: got 1.5; expected a probability strictly between 0 and 1, e.g. 0.683",
        ),
        (
            ["--unit", "deg/s", "--unit", "rate_z=deg/s"],
            "--unit deg/s --unit rate_z=deg/s; "
            "expected one unit for every column without one (--unit deg/s), or COLUMN=UNIT pairs "
            "(--unit gyro_x=deg/s --unit time=ms)",
        ),
        (
            ["--rate", "50"],
            "{rec}: the time column 'time' gives 100 Hz but --rate gives 50 Hz "
            "(relative difference 5.0e-01); expected agreement within 1e-06, or only one of them",
        ),
        (
            ["--taus", "1000"],
            "{rec}:taus: τ = 1000 s needs 100000 samples per cluster, but 1000 "
            "samples allow at most 499 (two overlapping differences); expected τ ≤ 4.99 s for this "
            "record, or a longer record",
        ),
        (
            ["--taus", "ten/decade"],
            "--taus ten/decade; expected N/decade with N a whole number ≥ 1, e.g. 10/decade",
        ),
        (
            ["--taus", "0.01,2 m"],
            "--taus: got 'm' (length); expected a time convertible to 's', such as '100 s'",
        ),
        (["--unit", "rate_z="], "--unit rate_z=; expected COLUMN=UNIT, e.g. gyro_x=deg/s"),
        (["--rate", "fast"], "--rate: cannot read 'fast' as a number followed by a unit; "
         "expected a frequency such as '400 Hz'"),
    ],
    ids=[
        "unknown-column",
        "channel-syntax",
        "output-suffix",
        "confidence",
        "unit-mix",
        "rate-disagrees",
        "tau-too-long",
        "taus-per-decade",
        "taus-unit",
        "unit-syntax",
        "rate-text",
    ],
)
def test_option_errors(runner, tmp_path, args, message) -> None:  # type: ignore[no-untyped-def]
    rec = tmp_path / "r.csv"
    rows = [f"{i / 100!r},{(i * 7919) % 11}" for i in range(1000)]
    rec.write_text("time [s],rate_z [deg/s]\n" + "\n".join(rows) + "\n")
    args = [a.format(tmp=tmp_path) for a in args]
    res = _run(runner, "allan", rec, *args)
    assert res.exit_code == 2
    assert res.stderr == "error: " + message.format(rec=rec, tmp=tmp_path) + "\n"
    assert res.stdout == ""


def test_unit_and_channel_options(runner, tmp_path) -> None:  # type: ignore[no-untyped-def]
    rec = tmp_path / "r.tsv"
    rng = np.random.default_rng(3)
    x = rng.normal(0, 1.0, 2000)
    rec.write_text(
        "t [ms]\trate_z\n" + "\n".join(f"{10 * i}\t{float(v)!r}" for i, v in enumerate(x))
    )
    out = tmp_path / "c.json"
    res = _run(
        runner,
        "allan",
        rec,
        "--channel",
        "rate_z=gyro.z",
        "--unit",
        "rate_z=deg/h",
        "-o",
        out,
        "--taus",
        "0.01",
    )
    assert res.exit_code == 0, res.stderr
    (entry,) = json.loads(out.read_text())["channels"]
    assert entry["id"] == "gyro.z" and entry["unit"] == "rad/s"
    ref = allan.overlapping(x * DEG_PER_H, 100.0, taus=[0.01])
    np.testing.assert_allclose(entry["adev"], ref.adev, rtol=1e-12)
    # rate_z is a gyro's name (common spelling); without a unit its values stay as recorded:
    # unit "1", values unchanged
    res = _run(runner, "allan", rec, "-o", out, "--force", "--taus", "0.01")
    (entry,) = json.loads(out.read_text())["channels"]
    assert entry["id"] == "gyro.z" and entry["unit"] == "1"
    np.testing.assert_allclose(
        entry["adev"], allan.overlapping(x, 100.0, taus=[0.01]).adev, rtol=1e-12
    )


def test_increments(runner, tmp_path) -> None:  # type: ignore[no-untyped-def]
    rng = np.random.default_rng(4)
    rate = rng.normal(0, 1e-3, 4000)
    path = tmp_path / "inc.npy"
    with open_writer(path, ["gyro.y"], None, 200.0, increments=True, time_column=False) as w:
        w.write(rate)
    out = tmp_path / "c.json"
    res = _run(runner, "allan", path, "-o", out, "--taus", "octave")
    assert res.exit_code == 0, res.stderr
    (entry,) = json.loads(out.read_text())["channels"]
    assert entry["unit"] == "rad/s"
    np.testing.assert_allclose(entry["adev"], allan.overlapping(rate, 200.0).adev, rtol=1e-12)
    res = _run(runner, "allan", path, "--rates")
    assert res.exit_code == 2
    assert res.stderr == (
        f"error: {path}: the file says its samples are increments; expected --increments as the "
        "file states\n"
    )


def _logger_csv(path: pathlib.Path, x: np.ndarray, dropped: slice) -> pathlib.Path:
    """A CSV as a logger writes it: time stamps [s] at 100 Hz, gyro_x in deg/s, with the samples
    of ``dropped`` (indices of the logger's clock) lost, so the time column jumps there."""
    t = np.delete(np.arange(x.size + dropped.stop - dropped.start) / RATE, dropped)
    rows = "".join(f"{a:.2f},{float(b)!r}\n" for a, b in zip(t, x, strict=True))
    path.write_text("time [s],gyro_x [deg/s]\n" + rows, encoding="utf-8")
    return path


def test_gaps_split_analyses_the_longest_segment(runner, tmp_path) -> None:  # type: ignore[no-untyped-def]
    # 3000 samples; the logger lost 100 after its 1200th: clean segments of 1200 and 1800
    rng = np.random.default_rng(5)
    x = rng.normal(0, 0.05, 3000)
    path = _logger_csv(tmp_path / "log.csv", x, slice(1200, 1300))
    out = tmp_path / "c.json"
    gap = "time step of 1.01 s where the median step is 0.01 s (about 100 samples missing)"
    res = _run(runner, "allan", path, "-o", out)
    assert res.exit_code == 2
    assert res.stderr == (
        f"error: {path}:line 1202: {gap}; expected uniformly sampled time, or --gaps split to "
        "analyse the clean segments\n"
    )
    assert not out.exists()
    res = _run(runner, "allan", path, "-o", out, "--gaps", "split")
    assert res.exit_code == 0, res.stderr
    assert res.stderr == (
        f"note: {path}:line 1202: {gap}\n"
        "note: gyro.x: 1 shorter clean segment (1200 samples) left out; the longest is analysed "
        "(--gaps split)\n"
    )
    assert res.stdout.startswith(
        "gyro.x [rad/s], longest of 2 clean segments: samples 1200-2999 from t = 13 s: 1800 "
        "samples at 100 Hz (18 s), 68.3 % intervals\n"
    )
    doc = json.loads(out.read_text())
    jsonschema.validate(doc, json.loads(SCHEMA.read_text()))
    (curve,) = doc["channels"]
    assert curve["id"] == "gyro.x"
    assert doc["provenance"]["segment_policy"] == "longest"
    assert doc["provenance"]["segments"] == [
        {
            "id": "gyro.x",
            "channel": "gyro.x",
            "column": "gyro_x",
            "start": 1200,
            "stop": 3000,
            "start_time": 13.0,
            "clean_segments": 2,
            "reasons": [{"code": "segments_left_out", "count": 1, "samples": 1200}],
        }
    ]
    assert [f["kind"] for f in doc["provenance"]["findings"]] == ["gap"]
    # the second (longer) stretch, in rad/s, is the one analysed
    longest = x[1200:] * math.pi / 180.0
    np.testing.assert_allclose(curve["adev"], allan.overlapping(longest, RATE).adev, rtol=1e-12)
    shorter = allan.overlapping(x[:1200] * math.pi / 180.0, RATE).adev
    assert not np.allclose(curve["adev"][: shorter.size], shorter, rtol=1e-3)


def test_progress_bar_only_on_a_terminal(monkeypatch: pytest.MonkeyPatch) -> None:
    import io
    import sys

    from sensormodel.cli._app import StderrBar

    class Terminal(io.StringIO):
        def isatty(self) -> bool:
            return True

    pipe = io.StringIO()
    monkeypatch.setattr(sys, "stderr", pipe)
    bar = StderrBar("reading")
    bar(50, 100)
    bar.close()
    assert pipe.getvalue() == ""
    term = Terminal()
    monkeypatch.setattr(sys, "stderr", term)
    bar = StderrBar("reading")
    bar(50, 100)
    bar(100, 100)
    bar.close()
    assert "reading" in term.getvalue() and "100%" in term.getvalue()


def test_columns_comma_separated(runner, white) -> None:  # type: ignore[no-untyped-def]
    res = _run(runner, "allan", white, "--columns", "gyro.x,accel*", "--taus", "0.01")
    assert res.exit_code == 0, res.stderr
    assert [ln.split(" ")[0] for ln in res.stdout.splitlines() if "samples at" in ln] == [
        "gyro.x",
        "accelerometer.z",
    ]
