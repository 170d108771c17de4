"""`sensormodel build` and `sensormodel inspect` through click's CliRunner.

Bad input: exit code 2, one line ``error: <file>:<field>: ...`` on stderr, no traceback, no
output file (DESIGN §6/§8). click >= 8.2 keeps ``result.stderr`` apart from ``result.stdout``
(``result.output`` interleaves both); the ``runner`` fixture handles click 8.1.
"""

from __future__ import annotations

import copy
import json
import math
import pathlib
import re
from dataclasses import replace

import jsonschema
import pytest
from reference import units as ref

from sensormodel.cli import cli
from sensormodel.convert import build_model
from sensormodel.errors import UnitError
from sensormodel.model import NoiseModel

SCHEMAS = pathlib.Path(__file__).resolve().parent.parent / "schemas"
BASE = '[sensor]\nsample_rate = "100 Hz"\n'
G = BASE + "[gyro]\n"


def assert_refused(result, prefix: str, *, leftovers: list[pathlib.Path] = ()) -> str:
    """Exit 2, exactly one stderr line starting with ``prefix``, no traceback, nothing written."""
    assert result.exit_code == 2, (result.exit_code, result.output)
    assert isinstance(result.exception, SystemExit)
    lines = result.stderr.splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith(prefix), (lines[0], prefix)
    assert "Traceback" not in result.output
    assert result.stdout == ""
    for path in leftovers:
        assert not path.exists(), path
    return lines[0]


# ---- build ----------------------------------------------------------------------------------


def test_build_every_example(runner, example_datasheet, tmp_path):
    out = tmp_path / "model.json"
    result = runner.invoke(cli, ["build", str(example_datasheet), "-o", str(out)])
    assert result.exit_code == 0, result.output
    doc = json.loads(out.read_text(encoding="utf-8"))
    schema = json.loads((SCHEMAS / "noise-model.schema.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(schema).validate(doc)
    n_terms = sum(len(c["terms"]) for c in doc["channels"])
    assert (
        result.stdout
        == f"wrote {out}: {len(doc['channels'])} channels, {n_terms} terms (typ values)\n"
    )
    # the CLI writes what the library builds
    # (the time stamp of its provenance aside: the two may be made in different seconds)
    library = build_model(example_datasheet)
    written = NoiseModel.load(out)
    stamp = {"created": library.provenance["created"]}
    assert replace(written, provenance={**written.provenance, **stamp}) == library
    assert sorted(p.name for p in tmp_path.iterdir()) == ["model.json"]


def test_build_worst_case_uses_max(runner, examples_dir, tmp_path):
    out = tmp_path / "worst.json"
    result = runner.invoke(
        cli, ["build", str(examples_dir / "bw-t900.toml"), "-o", str(out), "--worst-case"]
    )
    assert result.exit_code == 0, result.output
    assert result.stdout.endswith("(max values)\n")
    model = NoiseModel.load(out)
    assert model.conventions["basis"] == "max"
    # max column: ARW 0.02 °/√h, VRW 0.03 m/s/√h (REFERENCES §10: 1 °/√h = 2.908882e-4 rad/√s)
    assert model.channel("gyro.y").term("white").density == pytest.approx(
        0.02 * ref.DEG_PER_RT_H, rel=5e-7
    )
    assert model.channel("accelerometer.z").term("white").density == pytest.approx(
        0.03 / 60, rel=1e-12
    )
    assert model.channel("gyro.x").term("white").meta["datasheet"]["column"] == "max"


def test_build_prints_fallback_notes_on_stderr(runner, write_datasheet, tmp_path):
    sheet = write_datasheet(G + 'angle_random_walk = "0.1 deg/rt-h"\n')
    out = tmp_path / "m.json"
    result = runner.invoke(cli, ["build", str(sheet), "-o", str(out), "--worst-case"])
    assert result.exit_code == 0, result.output
    assert result.stderr.splitlines()[0] == (
        "note: gyro.x: gyro.angle_random_walk has no 'max' value; 'typ' (0.1 deg/rt-h) used"
    )


# (id, datasheet text, field of the message)
BAD_SHEETS = [
    ("wrong-dimension", G + 'angle_random_walk = "0.1 1/sqrt(h)"', "gyro.angle_random_walk"),
    ("bare-number", G + "angle_random_walk = 0.1", "gyro.angle_random_walk"),
    ("number-only", G + 'angle_random_walk = "0.1"', "gyro.angle_random_walk"),
    ("negative", G + 'angle_random_walk = "-0.1 deg/rt-h"', "gyro.angle_random_walk"),
    ("non-finite", G + 'angle_random_walk = "1e999 deg/rt-h"', "gyro.angle_random_walk"),
    ("unknown-unit", G + 'angle_random_walk = "0.1 blorp/rt-h"', "gyro.angle_random_walk"),
    ("broken-unit", G + 'angle_random_walk = "0.1 deg/rt-h/"', "gyro.angle_random_walk"),
    ("unknown-key", G + 'bias_instabilty = "1 deg/h"', "gyro.bias_instabilty"),
    ("unknown-table", BASE + '[gyros]\nbias_instability = "1 deg/h"', "gyros"),
    (
        "disagree",
        G + 'angle_random_walk = "0.15 deg/rt-h"\nnoise_density = "0.003 deg/s/rtHz"',
        "gyro.angle_random_walk / gyro.noise_density",
    ),
    (
        "typ-above-max",
        G + 'bias_instability = { typ = "2 deg/h", max = "1 deg/h" }',
        "gyro.bias_instability",
    ),
    (
        "missing-sample-rate",
        '[sensor]\nname = "x"\n[gyro]\nangle_random_walk = "0.1 deg/rt-h"',
        "gyro.sample_rate",
    ),
    (
        "bad-convention",
        BASE + 'density_is = "single"\n[gyro]\nangle_random_walk = "0.1 deg/rt-h"',
        "sensor.density_is",
    ),
    (
        "bad-filter-order",
        G + 'filter_order = 0\nangle_random_walk = "0.1 deg/rt-h"',
        "gyro.filter_order",
    ),
    (
        "correlation-time-alone",
        G + 'angle_random_walk = "0.1 deg/rt-h"\ncorrelation_time = "100 s"',
        "gyro.correlation_time",
    ),
    ("invalid-toml", G + 'angle_random_walk = "0.1 deg/rt-h', "line 4"),
]


@pytest.mark.parametrize(
    ("text", "field"), [b[1:] for b in BAD_SHEETS], ids=[b[0] for b in BAD_SHEETS]
)
def test_build_refusals(runner, write_datasheet, tmp_path, text, field):
    sheet = write_datasheet(text + "\n")
    out = tmp_path / "model.json"
    result = runner.invoke(cli, ["build", str(sheet), "-o", str(out)])
    assert_refused(result, f"error: {sheet}:{field}: ", leftovers=[out])
    assert sorted(p.name for p in tmp_path.iterdir()) == [sheet.name]  # no temp files either


def test_build_refusal_message_is_the_library_message(runner, write_datasheet, tmp_path):
    sheet = write_datasheet(G + 'angle_random_walk = "0.1 1/sqrt(h)"\n')
    result = runner.invoke(cli, ["build", str(sheet), "-o", str(tmp_path / "m.json")])
    with pytest.raises(UnitError) as info:
        build_model(sheet)
    assert result.stderr == f"error: {info.value}\n"
    assert result.stderr == (
        f"error: {sheet}:gyro.angle_random_walk: got '1/sqrt(h)' (1 / √time); expected an "
        "angle random walk (angular rate per root hertz) convertible to 'rad/s**0.5', such as "
        "'0.15 deg/rt-h'\n"
    )


def test_build_missing_datasheet(runner, tmp_path):
    sheet = tmp_path / "absent.toml"
    out = tmp_path / "m.json"
    result = runner.invoke(cli, ["build", str(sheet), "-o", str(out)])
    line = assert_refused(result, f"error: {sheet}: no such file", leftovers=[out])
    assert line == f"error: {sheet}: no such file; expected an existing datasheet .toml file"


def test_build_existing_output_needs_force(runner, examples_dir, tmp_path):
    out = tmp_path / "m.json"
    out.write_text("old", encoding="utf-8")
    sheet = str(examples_dir / "bw-g30.toml")
    result = runner.invoke(cli, ["build", sheet, "-o", str(out)])
    line = assert_refused(result, f"error: {out}: ")
    assert (
        line
        == f"error: {out}: the file exists; expected a new file name, or --force to overwrite it"
    )
    assert out.read_text(encoding="utf-8") == "old"
    result = runner.invoke(cli, ["build", sheet, "-o", str(out), "--force"])
    assert result.exit_code == 0, result.output
    assert NoiseModel.load(out).channel_ids == ["gyro.z"]


def test_debug_shows_the_exception(runner, write_datasheet, tmp_path):
    sheet = write_datasheet(G + 'angle_random_walk = "0.1 1/sqrt(h)"\n')
    result = runner.invoke(cli, ["--debug", "build", str(sheet), "-o", str(tmp_path / "m.json")])
    assert isinstance(result.exception, UnitError)
    assert result.exit_code != 0


# ---- inspect --------------------------------------------------------------------------------


@pytest.fixture
def t900_model(runner, examples_dir, tmp_path) -> pathlib.Path:
    out = tmp_path / "t900.json"
    result = runner.invoke(cli, ["build", str(examples_dir / "bw-t900.toml"), "-o", str(out)])
    assert result.exit_code == 0, result.output
    return out


STD = re.compile(
    r"^  white noise per sample at (?P<rate>\S+) Hz: std (?P<std>\S+) (?P<unit>\S+)", re.M
)


def test_inspect_prints_every_channel_and_the_sample_std(runner, t900_model):
    result = runner.invoke(cli, ["inspect", str(t900_model)])
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert out.startswith("sensor: BW-T900")
    for cid in (
        "gyro.x",
        "gyro.y",
        "gyro.z",
        "accelerometer.x",
        "accelerometer.y",
        "accelerometer.z",
    ):
        assert re.search(rf"^{re.escape(cid)}  \(", out, re.M), cid
    stds = STD.findall(out)
    assert len(stds) == 6
    # By hand, sigma = N sqrt(2 ENBW) (REFERENCES §0/§8), ENBW = 1.110721 x 200 Hz for the
    # 2nd-order Butterworth (Winder Table A.3); N = 0.012 °/√h and 0.02 m/s/√h (datasheet typ).
    enbw = ref.BUTTERWORTH_ENBW[2] * 200.0
    gyro = 0.012 * ref.DEG_PER_RT_H * math.sqrt(2 * enbw)
    accel = 0.02 / 60 * math.sqrt(2 * enbw)
    for (rate, std, _unit), expected in zip(stds, [gyro] * 3 + [accel] * 3, strict=True):
        assert rate == "400"
        # printed with 4 significant digits: half a unit of the 4th is <= 5e-4 relative
        assert float(std) == pytest.approx(expected, rel=5e-4)
    assert [u for _, _, u in stds] == ["rad/s"] * 3 + ["m/s^2"] * 3
    # the datasheet's own units appear beside SI
    assert "0.012 deg/rt-hr" in out and "16.2 µg" in out and "gauss_markov" in out


def test_inspect_rate_and_channel(runner, examples_dir, tmp_path):
    model = tmp_path / "g30.json"
    assert (
        runner.invoke(cli, ["build", str(examples_dir / "bw-g30.toml"), "-o", str(model)]).exit_code
        == 0
    )
    result = runner.invoke(cli, ["inspect", str(model), "--rate", "100", "--channel", "gyro.z"])
    assert result.exit_code == 0, result.output
    ((rate, std, unit),) = STD.findall(result.stdout)
    # no output filter named: average over each sample, sigma = N sqrt(rate) (REFERENCES §0),
    # with N = 5e-3 °/s/√Hz / √2 (one-sided density, DESIGN §3)
    expected = math.radians(5e-3) / math.sqrt(2) * math.sqrt(100.0)
    assert (rate, unit) == ("100", "rad/s")
    assert float(std) == pytest.approx(expected, rel=5e-4)
    # the density row says which convention its number is in, and shows the print
    row = next(line for line in result.stdout.splitlines() if "density" in line)
    assert "0.003536 dps/rtHz two-sided (printed one-sided: 5 x 10^-3 dps/rtHz)" in row


def test_inspect_names_the_bandwidth_field(runner, examples_dir, tmp_path):
    # BW-M200 prints its output bandwidth in [sensor]: the band-limited white term's bandwidth
    # row comes from there, not from the density's field
    model = tmp_path / "m200.json"
    args = ["build", str(examples_dir / "bw-m200.toml"), "-o", str(model)]
    assert runner.invoke(cli, args).exit_code == 0
    out = runner.invoke(cli, ["inspect", str(model), "--channel", "gyro.x"]).stdout
    rows = {line.split()[1]: line for line in out.splitlines() if line.strip().startswith("white")}
    assert rows["density"].rstrip().endswith("gyro.noise_density")
    assert rows["bandwidth"].rstrip().endswith("sensor.bandwidth")
    assert rows["filter_order"].rstrip().endswith("datasheet filter_order")


def test_inspect_refuses_bad_rate(runner, t900_model):
    result = runner.invoke(cli, ["inspect", str(t900_model), "--rate", "0"])
    line = assert_refused(result, "error: --rate 0")
    assert line == "error: --rate 0; expected a positive rate in Hz, e.g. 100 or '100 Hz'"


def test_inspect_refuses_infinite_rate(runner, examples_dir, tmp_path):
    model = tmp_path / "g30.json"
    assert (
        runner.invoke(cli, ["build", str(examples_dir / "bw-g30.toml"), "-o", str(model)]).exit_code
        == 0
    )
    result = runner.invoke(cli, ["inspect", str(model), "--rate", "inf"])
    line = assert_refused(result, "error: --rate inf")
    assert line == "error: --rate inf; expected a positive rate in Hz, e.g. 100 or '100 Hz'"


def test_inspect_unknown_channel(runner, t900_model):
    result = runner.invoke(cli, ["inspect", str(t900_model), "--channel", "gyro.w"])
    assert_refused(result, "error: channel: no channel 'gyro.w'; expected one of gyro.x")


def _rewrite(path: pathlib.Path, edit) -> pathlib.Path:
    doc = json.loads(path.read_text(encoding="utf-8"))
    doc = copy.deepcopy(doc)
    edit(doc)
    bad = path.with_name("bad.json")
    bad.write_text(json.dumps(doc), encoding="utf-8")
    return bad


def test_inspect_unknown_schema_version(runner, t900_model):
    bad = _rewrite(t900_model, lambda d: d.update(schema="sensormodel/noise-model/9"))
    result = runner.invoke(cli, ["inspect", str(bad)])
    line = assert_refused(result, f"error: {bad}:schema: ")
    assert line == (
        f"error: {bad}:schema: schema is 'sensormodel/noise-model/9'; expected "
        "'sensormodel/noise-model/1' (a noise-model file written by this version of sensormodel)"
    )


def test_inspect_unknown_term_type(runner, t900_model):
    bad = _rewrite(t900_model, lambda d: d["channels"][2]["terms"][1].update(type="pink_noise"))
    result = runner.invoke(cli, ["inspect", str(bad)])
    line = assert_refused(result, f"error: {bad}:channels[2].terms[1].type: ")
    assert "'pink_noise' is not one of ['flicker', " in line


def test_inspect_missing_and_broken_files(runner, tmp_path):
    missing = tmp_path / "absent.json"
    assert_refused(runner.invoke(cli, ["inspect", str(missing)]), f"error: {missing}: no such file")
    broken = tmp_path / "broken.json"
    broken.write_text("{", encoding="utf-8")
    assert_refused(
        runner.invoke(cli, ["inspect", str(broken)]), f"error: {broken}:line 1: not valid JSON"
    )
