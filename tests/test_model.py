"""sensormodel.model: the noise-model JSON file, round trips and refusals."""

from __future__ import annotations

import copy
import json
import math
import pathlib
import re

import jsonschema
import numpy as np
import pytest
from reference import units as ref
from scipy import integrate, signal

from sensormodel.convert import build_model
from sensormodel.errors import AnalysisError, ModelFileError, SensorModelError
from sensormodel.model import (
    SCHEMA_ID,
    Channel,
    NoiseModel,
    noise_bandwidth,
    white_sample_std,
)
from sensormodel.terms import White

SCHEMAS = pathlib.Path(__file__).resolve().parent.parent / "schemas"


@pytest.fixture(scope="module")
def m200() -> NoiseModel:
    examples = pathlib.Path(__file__).resolve().parent.parent / "examples"
    return build_model(examples / "bw-m200.toml")


def _schema_validator() -> jsonschema.Draft202012Validator:
    schema = json.loads((SCHEMAS / "noise-model.schema.json").read_text(encoding="utf-8"))
    return jsonschema.Draft202012Validator(schema)


def test_every_example_builds_a_model_that_validates(example_datasheet):
    # validated here with jsonschema directly, apart from the package's own check
    model = build_model(example_datasheet)
    doc = json.loads(json.dumps(model.to_dict(), allow_nan=False))
    _schema_validator().validate(doc)
    assert doc["schema"] == SCHEMA_ID == "sensormodel/noise-model/1"
    for ch in doc["channels"]:
        assert ch["unit"] in ("rad/s", "m/s^2")
        assert ch["terms"]


def test_save_load_round_trip(example_datasheet, tmp_path):
    model = build_model(example_datasheet)
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
        with pytest.raises(AnalysisError, match=r"^rate: got .*; expected a finite sample rate"):
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
    elif how == "unit":
        doc["channels"][0]["unit"] = "deg/s"
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
    # a hand-edited unit was once relabelled by inspect and ignored by drift (57× apart)
    ("unit", r"channels\[0\]\.unit", r"unit is 'deg/s' for a channel of quantity angular_rate"),
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


# ---- the output-filter rule (ENBW) ----------------------------------------------------------


@pytest.mark.parametrize("order", sorted(ref.BUTTERWORTH_ENBW))
def test_butterworth_enbw_against_winder_table(order):
    # S. Winder, Analog and Digital Filter Design, App. A, Table A.3 (7 digits printed).
    assert noise_bandwidth(1.0, order) == pytest.approx(
        ref.BUTTERWORTH_ENBW[order], rel=ref.digits_rtol(ref.BUTTERWORTH_ENBW[order])
    )
    assert noise_bandwidth(50.0, order) == pytest.approx(
        50.0 * noise_bandwidth(1.0, order), rel=1e-14
    )


def test_butterworth_enbw_closed_values():
    # n = 1: pi/2 (one pole / RC); n = 2: pi/(2 sqrt 2) (Winder Table A.3).
    assert noise_bandwidth(1.0, 1) == pytest.approx(math.pi / 2, rel=1e-15)
    assert noise_bandwidth(1.0, 2) == pytest.approx(math.pi / (2 * math.sqrt(2)), rel=1e-15)


@pytest.mark.parametrize("order", [1, 2, 3, 5, 8])
def test_butterworth_enbw_against_scipy_filter(order):
    # scipy as the reference library: integrate |H(j 2 pi f)|² of scipy's analog Butterworth
    # (-3 dB at f_c) over f >= 0, divided by |H(0)|² = 1.
    fc = 10.0
    b, a = signal.butter(order, 2 * np.pi * fc, analog=True)

    def gain2(f: float) -> float:
        _, h = signal.freqs(b, a, worN=[2 * np.pi * f])
        return float(abs(h[0]) ** 2)

    head, _ = integrate.quad(gain2, 0, 10 * fc, limit=200, epsabs=0, epsrel=1e-12)
    tail, _ = integrate.quad(gain2, 10 * fc, np.inf, limit=200, epsabs=0, epsrel=1e-12)
    assert noise_bandwidth(fc, order) == pytest.approx(head + tail, rel=1e-8)


@pytest.mark.parametrize(
    ("bandwidth", "order"), [(0.0, 1), (-1.0, 1), (math.nan, 1), (math.inf, 1), (1.0, 0)]
)
def test_noise_bandwidth_refuses_bad_arguments(bandwidth, order):
    with pytest.raises(AnalysisError, match=r"^(bandwidth|filter_order): got .*; expected a"):
        noise_bandwidth(bandwidth, order)


@pytest.mark.parametrize("rate", [0.0, -1.0, math.nan, math.inf])
def test_white_sample_std_refuses_bad_rate(rate):
    with pytest.raises(AnalysisError, match=r"^sample_rate: got .*; expected a finite sample rate"):
        white_sample_std(1e-4, rate)


def test_white_sample_std_plain_average():
    # Each sample the average over its period (ENBW = rate/2): sigma = N sqrt(rate), i.e.
    # ADEV(tau0) = N/sqrt(tau0) (REFERENCES §0, IEEE Std 952 white-noise AVAR N²/tau).
    n = 0.15 * ref.DEG_PER_RT_H
    assert white_sample_std(n, 400.0) == pytest.approx(n * 20.0, rel=1e-15)


@pytest.mark.parametrize("order", [1, 2, 4])
def test_white_sample_std_through_a_butterworth(order):
    # var = (one-sided PSD 2 N²) x ENBW (REFERENCES §0/§8), ENBW from Winder Table A.3.
    n, bw = 60e-6 * ref.STANDARD_GRAVITY, 50.0
    expected = n * math.sqrt(2.0 * ref.BUTTERWORTH_ENBW[order] * bw)
    got = white_sample_std(n, 200.0, bandwidth=bw, filter_order=order)
    assert got == pytest.approx(expected, rel=ref.digits_rtol(ref.BUTTERWORTH_ENBW[order]))
    # the output rate does not enter once the filter is named
    assert white_sample_std(n, 1000.0, bandwidth=bw, filter_order=order) == got
    # no order given: one pole
    if order == 1:
        assert white_sample_std(n, 200.0, bandwidth=bw) == got
