"""sensormodel.model: the noise-model JSON file, round trips and refusals."""

from __future__ import annotations

import copy
import json
import math
import pathlib
import re

import jsonschema
import pytest
from reference import units as ref

from sensormodel.errors import AnalysisError, ModelFileError, SensorModelError
from sensormodel.model import SCHEMA_ID, Channel, NoiseModel
from sensormodel.terms import White

SCHEMAS = pathlib.Path(__file__).resolve().parent.parent / "schemas"


@pytest.fixture(scope="module")
def m200() -> NoiseModel:
    examples = pathlib.Path(__file__).resolve().parent.parent / "examples"
    return NoiseModel.from_datasheet(examples / "bw-m200.toml")


def _schema_validator() -> jsonschema.Draft202012Validator:
    schema = json.loads((SCHEMAS / "noise-model.schema.json").read_text(encoding="utf-8"))
    return jsonschema.Draft202012Validator(schema)


def test_every_example_builds_a_model_that_validates(example_datasheet):
    # validated here with jsonschema directly, apart from the package's own check
    model = NoiseModel.from_datasheet(example_datasheet)
    doc = json.loads(json.dumps(model.to_dict(), allow_nan=False))
    _schema_validator().validate(doc)
    assert doc["schema"] == SCHEMA_ID == "sensormodel/noise-model/1"
    for ch in doc["channels"]:
        assert ch["unit"] in ("rad/s", "m/s^2")
        assert ch["terms"]


def test_save_load_round_trip(example_datasheet, tmp_path):
    model = NoiseModel.from_datasheet(example_datasheet)
    path = tmp_path / "model.json"
    model.save(path)
    loaded = NoiseModel.load(path)
    assert loaded == model
    assert loaded.to_dict() == model.to_dict()
    assert [t.meta for c in loaded.channels for t in c.terms] == [
        t.meta for c in model.channels for t in c.terms
    ]
    # and once more through the file: byte-identical
    again = tmp_path / "again.json"
    loaded.save(again)
    assert again.read_bytes() == path.read_bytes()


def test_save_refuses_to_overwrite_without_force(m200, tmp_path):
    path = tmp_path / "model.json"
    path.write_text("keep me", encoding="utf-8")
    with pytest.raises(
        SensorModelError,
        match=rf"^{re.escape(str(path))}: the file exists; expected a new file name, or --force",
    ):
        m200.save(path)
    assert path.read_text(encoding="utf-8") == "keep me"
    m200.save(path, force=True)
    assert NoiseModel.load(path) == m200
    assert sorted(p.name for p in tmp_path.iterdir()) == ["model.json"]  # no temp files left


def test_save_into_a_missing_folder(m200, tmp_path):
    with pytest.raises(SensorModelError, match="does not exist; expected an existing folder"):
        m200.save(tmp_path / "nowhere" / "model.json")


def test_white_sample_std_of_a_channel(m200):
    # sigma = N sqrt(2 ENBW) with ENBW = (pi/2) f_3dB for one pole (REFERENCES §0/§8; Winder A.3)
    ch = m200.channel("gyro.x")
    n = ch.term("white").density
    assert ch.white_sample_std() == pytest.approx(
        n * math.sqrt(2 * ref.BUTTERWORTH_ENBW[1] * 50.0), rel=1e-6
    )
    # without a named filter: the average over a sample period, N sqrt(rate) (REFERENCES §0)
    plain = Channel(
        id="gyro.x",
        quantity="angular_rate",
        unit="rad/s",
        sample_rate=400.0,
        terms=(White(density=1e-4),),
    )
    assert plain.white_sample_std() == pytest.approx(1e-4 * 20.0, rel=1e-15)
    assert plain.white_sample_std(100.0) == pytest.approx(1e-4 * 10.0, rel=1e-15)
    empty = Channel(id="gyro.x", quantity="angular_rate", unit="rad/s", sample_rate=400.0)
    assert empty.white_sample_std() == 0.0
    for bad in (0.0, -5.0, math.inf, math.nan):  # never a silent fallback or an inf/NaN
        with pytest.raises(AnalysisError, match=r"^rate: got .*; expected a positive, finite rate"):
            plain.white_sample_std(bad)


def test_channel_lookup_and_select(m200):
    assert m200.channel("Gyro_X") is m200.channel("gyro.x")
    assert m200.select(["gyro.z", "accelerometer.x"]).channel_ids == ["gyro.z", "accelerometer.x"]
    assert m200.select(None) is m200
    with pytest.raises(
        ModelFileError, match=r"^channel: no channel 'gyro\.w'; expected one of gyro\.x"
    ):
        m200.channel("gyro.w")


def test_duplicate_channel_ids_refused(m200):
    ch = m200.channels[0]
    with pytest.raises(ModelFileError, match=r"duplicate channel ids \['gyro\.x'\]"):
        NoiseModel(sensor={}, channels=(ch, ch))


# ---- refusals on load -----------------------------------------------------------------------


def _edit(doc: dict, how: str) -> dict:
    doc = copy.deepcopy(doc)
    term = doc["channels"][0]["terms"][0]
    if how == "version":
        doc["schema"] = "sensormodel/noise-model/2"
    elif how == "no-version":
        del doc["schema"]
    elif how == "term-type":
        term["type"] = "pink"
    elif how == "negative":
        term["density"] = -1.0
    elif how == "missing-parameter":
        del term["density"]
    elif how == "text-parameter":
        term["density"] = "1e-4"
    elif how == "zero-rate":
        doc["channels"][0]["sample_rate"] = 0
    elif how == "extra-key":
        doc["channels"][0]["colour"] = "red"
    elif how == "no-channels":
        doc["channels"] = []
    elif how == "duplicate":
        doc["channels"][1]["id"] = doc["channels"][0]["id"]
    return doc


LOAD_REFUSALS = [
    (
        "version",
        r"schema",
        r"schema is 'sensormodel/noise-model/2'; expected 'sensormodel/noise-model/1'",
    ),
    ("no-version", r"schema", r"schema is None; expected 'sensormodel/noise-model/1'"),
    (
        "term-type",
        r"channels\[0\]\.terms\[0\]\.type",
        r"does not match noise-model\.schema\.json: 'pink' is not one of \['flicker', ",
    ),
    (
        "negative",
        r"channels\[0\]\.terms\[0\]\.density",
        r"does not match noise-model\.schema\.json: -1\.0 is less than the minimum of 0",
    ),
    (
        "missing-parameter",
        r"channels\[0\]\.terms\[0\]",
        r"does not match noise-model\.schema\.json: 'density' is a required property",
    ),
    ("text-parameter", r"channels\[0\]\.terms\[0\]\.density", r".*'1e-4' is not of type 'number'"),
    ("zero-rate", r"channels\[0\]\.sample_rate", r".*0 is less than or equal to the minimum of 0"),
    (
        "extra-key",
        r"channels\[0\]",
        r".*Additional properties are not allowed \('colour' was unexpected\)",
    ),
    ("no-channels", r"channels", r".*\[\] should be non-empty"),
    ("duplicate", None, r"duplicate channel ids \['gyro\.x'\]"),
]


@pytest.mark.parametrize(
    ("how", "field", "message"), LOAD_REFUSALS, ids=[r[0] for r in LOAD_REFUSALS]
)
def test_load_refusals_name_the_field(m200, tmp_path, how, field, message):
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(_edit(m200.to_dict(), how)), encoding="utf-8")
    where = re.escape(str(path)) + (f":{field}" if field else "")
    with pytest.raises(ModelFileError, match=rf"^{where}: {message}") as info:
        NoiseModel.load(path)
    assert "\n" not in str(info.value)
    assert isinstance(info.value, ValueError)


@pytest.mark.parametrize("constant", ["NaN", "Infinity", "-Infinity", "1e400"])
def test_load_refuses_non_finite_numbers(m200, tmp_path, constant):
    # JSON has no NaN/Infinity (RFC 8259 §6); Python's json would read them, and 1e400 as inf.
    text = json.dumps(m200.to_dict(), indent=2)
    text = text.replace('"sample_rate": 200.0', f'"sample_rate": {constant}', 1)
    line = text[: text.index(constant)].count("\n") + 1
    path = tmp_path / "bad.json"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(
        ModelFileError,
        match=rf"^{re.escape(str(path))}:line {line}: "
        rf"the number {re.escape(constant)} is not finite",
    ):
        NoiseModel.load(path)


def test_load_refuses_bad_files(tmp_path):
    missing = tmp_path / "absent.json"
    with pytest.raises(ModelFileError, match=rf"^{re.escape(str(missing))}: no such file"):
        NoiseModel.load(missing)
    broken = tmp_path / "broken.json"
    broken.write_text('{\n  "schema": \n}', encoding="utf-8")
    with pytest.raises(ModelFileError, match=rf"^{re.escape(str(broken))}:line 3: not valid JSON"):
        NoiseModel.load(broken)
    array = tmp_path / "array.json"
    array.write_text("[1, 2]", encoding="utf-8")
    with pytest.raises(ModelFileError, match="not a JSON object; expected a noise-model document"):
        NoiseModel.load(array)


def test_term_refuses_non_finite_in_python():
    with pytest.raises(
        ModelFileError, match=r"white\.density = nan; expected a finite, non-negative"
    ):
        White(density=math.nan)
