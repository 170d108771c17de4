"""The verify and plan commands: verdicts and exit codes on recordings they have never seen,
the JSON and HTML reports, and the one-line errors on bad input."""

from __future__ import annotations

import json
import pathlib
from dataclasses import replace

import jsonschema
import pytest
from conftest import SCHEMAS

from sensormodel.cli import cli
from sensormodel.convert import build_model
from sensormodel.datasheet import load_datasheet
from sensormodel.simulate import write_record

SHEET = """
[sensor]
name = "CLI study unit"
sample_rate = "1 Hz"
axes = ["z"]
[gyro]
angle_random_walk = { typ = "0.05 deg/rt-hr", max = "0.1 deg/rt-hr" }
bias_instability = { typ = "1 deg/h", max = "3 deg/h" }
bias_repeatability = "10 deg/h"
"""


def _record(
    tmp_path: pathlib.Path, name: str, *, white_factor: float, n: int, seed: int
) -> pathlib.Path:
    """A record of the typical unit with its white density scaled by ``white_factor``."""
    sheet = tmp_path / "sheet.toml"
    if not sheet.exists():
        sheet.write_text(SHEET, encoding="utf-8")
    model = build_model(load_datasheet(sheet))
    ch = model.channels[0]
    terms = tuple(
        replace(t, density=t.density * white_factor) if t.type == "white" else t for t in ch.terms
    )
    model = model.with_channel(replace(ch, terms=terms))
    out = tmp_path / name
    write_record(out, model, n, 1.0, seed=seed)
    return out


@pytest.fixture
def sheet(tmp_path: pathlib.Path) -> pathlib.Path:
    p = tmp_path / "sheet.toml"
    p.write_text(SHEET, encoding="utf-8")
    return p


def _validate(path: pathlib.Path) -> dict:
    schema = json.loads((SCHEMAS / "verdict-report.schema.json").read_text(encoding="utf-8"))
    doc = json.loads(path.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(schema).validate(doc)
    return doc


def test_verify_pass_exit_0(runner, sheet, tmp_path) -> None:
    # typical unit (ARW half its max, bias instability a third of it), 4000 s at 1 Hz
    rec = _record(tmp_path, "good.csv", white_factor=1.0, n=4000, seed=1)
    out = tmp_path / "good.json"
    result = runner.invoke(cli, ["verify", str(rec), "--spec", str(sheet), "--json", str(out)])
    assert result.exit_code == 0, result.output
    assert "overall: pass" in result.stdout
    doc = _validate(out)
    assert doc["overall"] == "pass" and doc["exit_code"] == 0
    assert {t["term"] for t in doc["channels"][0]["terms"]} == {
        "angle_random_walk",
        "bias_instability",
    }


def test_verify_fail_exit_1_with_report(runner, sheet, tmp_path) -> None:
    # white noise 4 × the typical, i.e. twice the max: fail
    rec = _record(tmp_path, "bad.npy", white_factor=4.0, n=4000, seed=2)
    html = tmp_path / "bad.html"
    out = tmp_path / "bad.json"
    result = runner.invoke(
        cli, ["verify", str(rec), "--spec", str(sheet), "--report", str(html), "--json", str(out)]
    )
    assert result.exit_code == 1, result.output
    doc = _validate(out)
    arw = next(t for t in doc["channels"][0]["terms"] if t["term"] == "angle_random_walk")
    assert arw["verdict"] == "fail"
    assert arw["display"]["low"] > 0.1  # the whole interval beyond 0.1 deg/rt-hr
    page = html.read_text(encoding="utf-8")
    assert page.count("data:image/png;base64,") == 2
    assert (tmp_path / "bad-gyro.z-allan.png").is_file()
    assert (tmp_path / "bad-gyro.z-psd.png").is_file()


def test_verify_inconclusive_exit_3(runner, sheet, tmp_path) -> None:
    # white noise 2.04 × typical = 1.02 × max, 300 s: the interval straddles the limit
    rec = _record(tmp_path, "short.csv", white_factor=2.04, n=300, seed=3)
    result = runner.invoke(cli, ["verify", str(rec), "--spec", str(sheet)])
    assert result.exit_code == 3, result.output
    assert "inconclusive" in result.stdout and "needs a record of" in result.stdout


def test_verify_against_typ(runner, sheet, tmp_path) -> None:
    # the same good unit against the typical values: its ARW equals typ, so it is no pass
    rec = _record(tmp_path, "good.csv", white_factor=1.0, n=4000, seed=1)
    result = runner.invoke(cli, ["verify", str(rec), "--spec", str(sheet), "--against", "typ"])
    assert result.exit_code in (1, 3), result.output
    assert "(typ values)" in result.stdout


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (
            ["--confidence", "1.5"],
            "error: --confidence: got 1.5; expected a probability strictly between 0 and 1, "
            "e.g. 0.9\n",
        ),
        (
            ["--power", "0"],
            "error: --power: got 0.0; expected a probability strictly between 0 and 1, "
            "e.g. 0.8\n",
        ),
    ],
)
def test_verify_bad_options(runner, sheet, tmp_path, args, message) -> None:
    rec = _record(tmp_path, "r.csv", white_factor=1.0, n=500, seed=4)
    result = runner.invoke(cli, ["verify", str(rec), "--spec", str(sheet), *args])
    assert result.exit_code == 2
    assert result.stderr == message  # one line, checked where the option is parsed


@pytest.mark.parametrize("command", ["allan", "identify", "verify"])
def test_every_reader_takes_the_same_recording_options(runner, command) -> None:
    # one set of options wherever a recording is read (cli/_options.py)
    result = runner.invoke(cli, [command, "--help"])
    assert result.exit_code == 0 and "Example:" in result.stdout
    for option in (
        "--rate HZ",
        "--unit U|COLUMN=U",
        "--increments / --rates",
        "--channel COLUMN=ID",
        "--columns GLOB",
        "--gaps [fail|split]",
    ):
        assert option in result.stdout, (command, option)


def test_verify_unit_per_column_and_channel_map(runner, sheet, tmp_path) -> None:
    # the recording options verify shares with allan: a unit per column and a column mapping
    import numpy as np

    from sensormodel.recording import read_recording

    si = _record(tmp_path, "si.npy", white_factor=4.0, n=2000, seed=6)
    y = np.asarray(read_recording(si).data["gyro.z"])
    deg = tmp_path / "rig.csv"
    rows = "".join(f"{i:d},{float(v) * 180.0 / np.pi!r}\n" for i, v in enumerate(y))
    deg.write_text("time [s],rate_z\n" + rows, encoding="utf-8")
    out_si, out_deg = tmp_path / "si.json", tmp_path / "rig.json"
    a = runner.invoke(cli, ["verify", str(si), "--spec", str(sheet), "--json", str(out_si)])
    args = ["verify", str(deg), "--spec", str(sheet), "--json", str(out_deg)]
    b = runner.invoke(cli, [*args, "--unit", "rate_z=deg/s", "--channel", "rate_z=gyro.z"])
    assert a.exit_code == b.exit_code == 1, (a.output, b.output)
    for x, z in zip(
        _validate(out_si)["channels"][0]["terms"],
        _validate(out_deg)["channels"][0]["terms"],
        strict=True,
    ):
        assert x["verdict"] == z["verdict"]
        assert z["estimate"] == pytest.approx(x["estimate"], rel=1e-9)


def test_verify_missing_file(runner, sheet, tmp_path) -> None:
    result = runner.invoke(cli, ["verify", str(tmp_path / "none.csv"), "--spec", str(sheet)])
    assert result.exit_code == 2
    assert result.stderr.startswith("error: ") and len(result.stderr.strip().splitlines()) == 1


def test_verify_unitless_column(runner, sheet, tmp_path) -> None:
    rec = tmp_path / "raw.csv"
    rec.write_text(
        "time [s],gyro_z\n" + "".join(f"{i},{(i * 7919) % 13 - 6}\n" for i in range(400)),
        encoding="utf-8",
    )
    result = runner.invoke(cli, ["verify", str(rec), "--spec", str(sheet)])
    assert result.exit_code == 2
    assert "physical unit" in result.stderr and "--unit" in result.stderr


def test_verify_no_common_channel(runner, sheet, tmp_path) -> None:
    rec = tmp_path / "acc.csv"
    rec.write_text(
        "time [s],accelerometer_x [m/s^2]\n"
        + "".join(f"{i},{((i * 7919) % 13 - 6) * 1e-4}\n" for i in range(400)),
        encoding="utf-8",
    )
    result = runner.invoke(cli, ["verify", str(rec), "--spec", str(sheet)])
    assert result.exit_code == 2
    assert "no channel in common" in result.stderr


def test_verify_existing_report_refused(runner, sheet, tmp_path) -> None:
    rec = _record(tmp_path, "r.csv", white_factor=1.0, n=500, seed=5)
    out = tmp_path / "exists.json"
    out.write_text("{}", encoding="utf-8")
    result = runner.invoke(cli, ["verify", str(rec), "--spec", str(sheet), "--json", str(out)])
    assert result.exit_code == 2 and "--force" in result.stderr
    assert out.read_text(encoding="utf-8") == "{}"


def test_verify_figure_clash_refused_before_any_work(runner, sheet, tmp_path, monkeypatch) -> None:
    # A figure already beside the report was found only after all the work (exit 2, the
    # verdict hidden, the --json file left behind): every output is checked first.
    from sensormodel.cli import _acceptance

    def no_work(*args, **kwargs):  # the work must not start
        raise AssertionError("verify ran before the outputs were checked")

    monkeypatch.setattr(_acceptance, "verify", no_work)
    rec = _record(tmp_path, "r.csv", white_factor=1.0, n=500, seed=5)
    page, js = tmp_path / "rep.html", tmp_path / "rep.json"
    clash = tmp_path / "rep-gyro.z-allan.png"
    clash.write_bytes(b"old figure")
    result = runner.invoke(
        cli, ["verify", str(rec), "--spec", str(sheet), "--report", str(page), "--json", str(js)]
    )
    assert result.exit_code == 2, result.output
    assert "rep-gyro.z-allan.png" in result.stderr and "--force" in result.stderr
    assert not page.exists() and not js.exists() and clash.read_bytes() == b"old figure"


# ---------------------------------------------------------------------------------------------
# plan
# ---------------------------------------------------------------------------------------------


def test_plan_command(runner, examples_dir) -> None:
    result = runner.invoke(cli, ["plan", str(examples_dir / "bw-t900.toml")])
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert "read at τ" in out and "EDF at τ" in out and "why:" in out
    assert "longest: accelerometer.x bias_instability" in out  # Gauss-Markov: past its peak
    assert "rate_random_walk *" in out  # typ only: shown for information
    assert "not verifiable from a single run" in out


def test_plan_margin_changes_length(runner, sheet) -> None:
    a = runner.invoke(cli, ["plan", str(sheet)])
    b = runner.invoke(cli, ["plan", str(sheet), "--margin", "0.1", "--power", "0.9"])
    assert a.exit_code == b.exit_code == 0
    assert a.stdout != b.stdout and "10 % below its limit" in b.stdout and "≥ 90 %" in b.stdout


@pytest.mark.parametrize(
    "args", [["--margin", "2"], ["--power", "0"], ["--confidence", "0"], ["--rate", "-1"]]
)
def test_plan_bad_options(runner, sheet, args) -> None:
    result = runner.invoke(cli, ["plan", str(sheet), *args])
    assert result.exit_code == 2 and result.stderr.startswith("error: ")


def test_plan_nothing_to_verify(runner, examples_dir) -> None:
    result = runner.invoke(cli, ["plan", str(examples_dir / "bw-g30.toml")])
    assert result.exit_code == 0
    assert "nothing to verify" in result.stdout


def test_verify_reads_datasheet_units(runner, sheet, tmp_path) -> None:
    # The same samples written in deg/s with a gyro_z column name (DESIGN §10 naming) give the
    # same verdicts and estimates as the SI record: units are converted at the edge only.
    import numpy as np

    from sensormodel.recording import read_recording

    si = _record(tmp_path, "si.npy", white_factor=4.0, n=2000, seed=6)
    y = np.asarray(read_recording(si).data["gyro.z"])
    deg = tmp_path / "deg.csv"
    rows = "".join(f"{i:d},{float(v) * 180.0 / np.pi!r}\n" for i, v in enumerate(y))
    deg.write_text("time [s],gyro_z [deg/s]\n" + rows, encoding="utf-8")
    out_si, out_deg = tmp_path / "si.json", tmp_path / "deg.json"
    a = runner.invoke(cli, ["verify", str(si), "--spec", str(sheet), "--json", str(out_si)])
    b = runner.invoke(cli, ["verify", str(deg), "--spec", str(sheet), "--json", str(out_deg)])
    assert a.exit_code == b.exit_code == 1, (a.output, b.output)
    ta = _validate(out_si)["channels"][0]["terms"]
    tb = _validate(out_deg)["channels"][0]["terms"]
    for x, z in zip(ta, tb, strict=True):
        assert x["verdict"] == z["verdict"]
        assert z["estimate"] == pytest.approx(x["estimate"], rel=1e-9)


def test_verify_bootstrap_minimum_named_before_any_work(runner, sheet, tmp_path, monkeypatch):
    # --bootstrap once advertised x ≥ 1 but refused 20 after the work, by the internal name
    # n_boot. At confidence 0.9 two records beyond each end need ⌈2/0.05⌉ = 40.
    from sensormodel.cli import _acceptance

    monkeypatch.setattr(_acceptance, "verify", lambda *a, **k: pytest.fail("work started"))
    rec = _record(tmp_path, "r.csv", white_factor=1.0, n=500, seed=5)
    result = runner.invoke(cli, ["verify", str(rec), "--spec", str(sheet), "--bootstrap", "20"])
    assert result.exit_code == 2
    assert "--bootstrap" in result.stderr and "at least 40" in result.stderr
    assert "n_boot" not in result.stderr
    result = runner.invoke(cli, ["verify", "--help"])
    assert "40 at 0.9" in result.output


def test_plan_help_lists_its_own_exit_codes(runner) -> None:
    # plan --help once listed verify's exit codes (pass / fail / inconclusive)
    out = runner.invoke(cli, ["plan", "--help"]).output
    assert "0 the plan was made" in out and "1 a term fails" not in out


def test_verify_analysis_errors_name_the_recording(runner, sheet, tmp_path) -> None:
    # "error: gyro.x: got 2 samples…" named no file: an analysis error names the recording
    rec = tmp_path / "two.csv"
    rec.write_text("time [s],gyro_z [deg/s]\n0,0.01\n0.1,0.02\n", encoding="utf-8")
    result = runner.invoke(cli, ["verify", str(rec), "--spec", str(sheet)])
    assert result.exit_code == 2
    assert result.stderr.startswith(f"error: {rec}"), result.stderr
