"""`sensormodel export`, `sensormodel drift` and `inspect --plot` through click's CliRunner, on
every example model: files match the library, JSON matches its schema, NPZ and CSV carry the
same numbers, refusals follow DESIGN §6 (exit 2, one error line, no file)."""

from __future__ import annotations

import csv
import json
import pathlib

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.io import loadmat

from sensormodel._io import validate
from sensormodel.cli import cli
from sensormodel.convert import build_model
from sensormodel.drift import drift
from sensormodel.export import FORMATS, mat_name
from sensormodel.model import NoiseModel

EXAMPLES = pathlib.Path(__file__).resolve().parents[1] / "examples"


@pytest.fixture
def model_file(example_datasheet, tmp_path) -> pathlib.Path:
    path = tmp_path / f"{example_datasheet.stem}.json"
    build_model(example_datasheet).save(path)
    return path


def _refused(result, text: str) -> None:
    assert result.exit_code == 2, result.output
    lines = result.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and text in lines[0], lines
    assert "Traceback" not in result.output


def _read_csv(path: pathlib.Path) -> tuple[dict[str, str], dict[tuple[str, str], np.ndarray]]:
    head, rows = {}, []
    for line in path.read_text(encoding="utf-8").splitlines():
        if line.startswith("# "):
            key, value = line[2:].split(": ", 1)
            head[key] = value
        else:
            rows.append(line)
    table = list(csv.DictReader(rows))
    mats: dict[tuple[str, str], dict[tuple[int, int], float]] = {}
    for r in table:
        mats.setdefault((r["channel"], r["matrix"]), {})[(int(r["row"]), int(r["col"]))] = float(
            r["value"]
        )
    out = {}
    for key, cells in mats.items():
        shape = (max(i for i, _ in cells) + 1, max(j for _, j in cells) + 1)
        m = np.zeros(shape)
        for (i, j), v in cells.items():
            m[i, j] = v
        out[key] = m
    return head, out


def test_export_every_example_in_all_forms(runner, model_file, tmp_path):
    base = tmp_path / "disc"
    result = runner.invoke(
        cli,
        [
            "export", str(model_file), "--dt", "10 ms", "--format", "json,npz,csv,mat",
            "-o", str(base),
        ],
    )
    assert result.exit_code == 0, result.output
    doc = json.loads((tmp_path / "disc.json").read_text(encoding="utf-8"))
    validate(doc, "discrete-model.schema.json")
    assert doc["schema"] == "sensormodel/discrete-model/1" and doc["dt"] == 0.01
    assert "N^2/dt" in doc["r_convention"] and "customer's contract" in doc["caution"]
    # the file holds what the library computes
    model = NoiseModel.load(model_file)
    lib = model.discretize(0.01)
    assert [c["id"] for c in doc["channels"]] == model.channel_ids
    with np.load(tmp_path / "disc.npz") as npz_file:
        npz = {k: npz_file[k] for k in npz_file.files}
    head, mats = _read_csv(tmp_path / "disc.csv")
    assert float(head["dt [s]"]) == 0.01 and head["r_convention"] == doc["r_convention"]
    # the MATLAB file read back with scipy.io.loadmat (the reader MATLAB's format is checked by)
    mat = loadmat(tmp_path / "disc.mat", squeeze_me=True, simplify_cells=True)
    assert float(mat["dt"]) == 0.01 and mat["r_convention"] == doc["r_convention"]
    assert list(np.atleast_1d(mat["channels"])) == model.channel_ids
    for c in doc["channels"]:
        d = lib[c["id"]]
        m = mat[mat_name(c["id"])]
        assert m["id"] == c["id"] and list(np.atleast_1d(m["states"])) == list(d.states)
        assert float(m["r"]) == d.r
        for key in ("phi", "qd", "p0"):
            assert_allclose(np.array(m[key]).reshape(d.phi.shape), getattr(d, key), rtol=0)
        assert c["states"] == list(d.states)
        for key in ("phi", "qd", "p0"):
            assert_allclose(np.array(c[key]).reshape(d.phi.shape), getattr(d, key), rtol=0)
            assert_allclose(npz[f"{c['id']}/{key}"], getattr(d, key), rtol=0)
            if d.states:
                assert_allclose(mats[(c["id"], key)], getattr(d, key), rtol=0)
        assert c["r"] == d.r and float(npz[f"{c['id']}/r"]) == d.r
        assert mats[(c["id"], "r")][0, 0] == d.r
        assert list(npz[f"{c['id']}/states"]) == list(d.states)
    assert str(npz["r_convention"]) == doc["r_convention"]


def test_export_single_form_from_suffix_and_quantization_in_r(runner, tmp_path):
    model = tmp_path / "t900.json"
    build_model(pathlib.Path(__file__).parents[1] / "examples" / "bw-t900.toml").save(
        model
    )
    out = tmp_path / "d.json"
    result = runner.invoke(
        cli,
        [
            "export",
            str(model),
            "--dt",
            "0.005",
            "-o",
            str(out),
            "--quantization-in",
            "r",
            "--channel",
            "gyro.x",
        ],
    )
    assert result.exit_code == 0, result.output
    doc = json.loads(out.read_text(encoding="utf-8"))
    assert [c["id"] for c in doc["channels"]] == ["gyro.x"]
    assert not any(s.startswith("quantization") for s in doc["channels"][0]["states"])
    assert "2 Q^2/dt^2" in doc["r_convention"]


def test_export_refusals(runner, model_file, tmp_path):
    out = tmp_path / "x.txt"
    _refused(
        runner.invoke(cli, ["export", str(model_file), "--dt", "0.01", "-o", str(out)]), "suffix"
    )
    _refused(
        runner.invoke(
            cli, ["export", str(model_file), "--dt", "0.01", "--format", "xml", "-o", str(out)]
        ),
        "--format xml",
    )
    _refused(
        runner.invoke(
            cli, ["export", str(model_file), "--dt", "-1", "-o", str(tmp_path / "a.json")]
        ),
        "--dt -1",
    )
    _refused(
        runner.invoke(
            cli, ["export", str(model_file), "--dt", "3 m", "-o", str(tmp_path / "a.json")]
        ),
        "--dt",
    )
    assert not out.exists() and not (tmp_path / "a.json").exists()
    existing = tmp_path / "b.json"
    existing.write_text("{}")
    _refused(
        runner.invoke(cli, ["export", str(model_file), "--dt", "0.01", "-o", str(existing)]),
        "exists",
    )
    assert existing.read_text() == "{}"
    assert set(FORMATS) == {"json", "npz", "csv", "mat"}


def test_drift_every_example(runner, model_file, tmp_path):
    js = tmp_path / "drift.json"
    result = runner.invoke(
        cli, ["drift", str(model_file), "--horizon", "1 h", "--points", "20", "--json", str(js)]
    )
    assert result.exit_code == 0, result.output
    doc = json.loads(js.read_text(encoding="utf-8"))
    validate(doc, "drift.schema.json")
    lib = drift(NoiseModel.load(model_file), 3600.0, points=20).to_dict()
    assert doc == json.loads(json.dumps(lib))
    # the table: one block per channel, rows at 1 s, 10 s, 60 s, 10 min and the horizon, written
    # by report.format_duration (3600 s reads "60 min")
    out = result.stdout
    for c in doc["channels"]:
        assert f"{c['id']}\n" in out
    assert out.count("\n  60 min ") == len(doc["channels"])
    # the 1 h angle row of the first gyro, in degrees (display unit), matches the JSON
    gyro = next((c for c in doc["channels"] if "angle" in c), None)
    if gyro is not None:
        block = out.split(f"{gyro['id']}\n", 1)[1]
        row = next(line for line in block.splitlines() if line.startswith("  60 min "))
        assert float(row.split()[2]) == pytest.approx(np.degrees(gyro["angle"][-1]), rel=1e-3)


def test_drift_plot(runner, tmp_path):
    model = tmp_path / "t900.json"
    build_model(EXAMPLES / "bw-t900.toml").save(model)
    png = tmp_path / "drift.png"
    result = runner.invoke(
        cli,
        [
            "drift",
            str(model),
            "--horizon",
            "600",
            "--points",
            "20",
            "--channel",
            "gyro.x",
            "--channel",
            "accelerometer.x",
            "--plot",
            str(png),
        ],
    )
    assert result.exit_code == 0, result.output
    assert png.stat().st_size > 10_000 and png.read_bytes()[:4] == b"\x89PNG"


def test_drift_refusals(runner, model_file, tmp_path):
    _refused(runner.invoke(cli, ["drift", str(model_file), "--horizon", "0"]), "--horizon 0")
    _refused(runner.invoke(cli, ["drift", str(model_file), "--horizon", "2 deg"]), "--horizon")
    existing = tmp_path / "d.json"
    existing.write_text("{}")
    _refused(
        runner.invoke(cli, ["drift", str(model_file), "--horizon", "10", "--json", str(existing)]),
        "exists",
    )


def test_inspect_shows_flicker_realization(runner, model_file):
    result = runner.invoke(cli, ["inspect", str(model_file)])
    assert result.exit_code == 0, result.output
    model = NoiseModel.load(model_file)
    for ch in model.channels:
        for term in ch.terms:
            if term.type == "flicker":
                err = 100 * term.realization_error(ch.sample_rate)
                assert f"worst Allan-deviation error {err:.2f} %" in result.stdout


def test_inspect_plot(runner, tmp_path):
    model = tmp_path / "t900.json"
    build_model(EXAMPLES / "bw-t900.toml").save(model)
    png = tmp_path / "model.png"
    args = [
        "inspect",
        str(model),
        "--channel",
        "gyro.z",
        "--channel",
        "accelerometer.x",
        "--plot",
        str(png),
    ]
    result = runner.invoke(cli, args)
    assert result.exit_code == 0, result.output
    assert png.read_bytes()[:4] == b"\x89PNG" and f"wrote {png}" in result.stdout
    _refused(runner.invoke(cli, args), "exists")
