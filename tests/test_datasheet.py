"""sensormodel.datasheet: TOML datasheets -> SI values per axis, conventions, refusals."""

from __future__ import annotations

import json
import math
import pathlib
import re
import tomllib

import jsonschema
import pytest
from reference import units as ref

from sensormodel.datasheet import (
    CONVENTIONS,
    FIELDS,
    check_keys,
    load_datasheet,
    parse_datasheet,
)
from sensormodel.errors import DatasheetError, SensorModelError, UnitError

SCHEMAS = pathlib.Path(__file__).resolve().parent.parent / "schemas"
BASE = '[sensor]\nsample_rate = "100 Hz"\n'


def parse(text: str):
    return parse_datasheet(tomllib.loads(text), source="sheet.toml")


# ---- the examples ---------------------------------------------------------------------------


def test_examples_validate_against_the_schema(example_datasheet):
    schema = json.loads((SCHEMAS / "datasheet.schema.json").read_text(encoding="utf-8"))
    data = tomllib.loads(example_datasheet.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(schema).validate(data)
    ds = load_datasheet(example_datasheet)
    assert ds.channels()
    assert len(ds.sha256) == 64


def test_t900_values_in_si(examples_dir):
    ds = load_datasheet(examples_dir / "bw-t900.toml")
    assert [ax.channel_id for ax in ds.channels()] == [
        "gyro.x",
        "gyro.y",
        "gyro.z",
        "accelerometer.x",
        "accelerometer.y",
        "accelerometer.z",
    ]
    gx = ds.instruments["gyro"].axes["x"]
    # REFERENCES §10: 1 °/√h = 2.908882e-4 rad/√s, 1 °/h = 4.848137e-6 rad/s (7 digits)
    arw = gx.values["angle_random_walk"]
    assert arw.typ == pytest.approx(0.012 * ref.DEG_PER_RT_H, rel=5e-7)
    assert arw.max == pytest.approx(0.02 * ref.DEG_PER_RT_H, rel=5e-7)
    assert (arw.typ_text, arw.max_text) == ("0.012 deg/rt-hr", "0.02 deg/rt-hr")
    assert gx.values["bias_repeatability"].typ == pytest.approx(0.5 * ref.DEG_PER_H, rel=5e-7)
    assert gx.values["quantization"].typ == pytest.approx(0.3e-6, rel=1e-12)
    assert gx.values["sample_rate"].typ == 400.0
    assert gx.values["bandwidth"].typ == 200.0
    assert gx.filter_order == 2
    ax = ds.instruments["accelerometer"].axes["y"]
    assert ax.values["velocity_random_walk"].typ == pytest.approx(0.02 / 60, rel=1e-12)
    # µg is micro standard gravity (CGPM 1901)
    assert ax.values["bias_instability"].max == pytest.approx(
        20e-6 * ref.STANDARD_GRAVITY, rel=1e-12
    )
    assert ax.values["correlation_time"].typ == 600.0


def test_per_axis_override_applies_only_to_that_axis(examples_dir):
    ds = load_datasheet(examples_dir / "bw-t900.toml")
    gyro = ds.instruments["gyro"].axes
    for axis in ("x", "y"):
        bi = gyro[axis].values["bias_instability"]
        assert (bi.typ_text, bi.max_text) == ("0.05 deg/hr", "0.1 deg/hr")
        assert gyro[axis].origin["bias_instability"] == "gyro.bias_instability"
    bz = gyro["z"].values["bias_instability"]
    assert bz.typ == pytest.approx(0.08 * ref.DEG_PER_H, rel=5e-7)
    assert bz.max == pytest.approx(0.15 * ref.DEG_PER_H, rel=5e-7)
    assert gyro["z"].origin["bias_instability"] == "gyro.z.bias_instability"
    # everything else on z is the instrument's
    others = set(gyro["x"].values) - {"bias_instability"}
    assert others == set(gyro["z"].values) - {"bias_instability"}
    for key in others:
        assert gyro["z"].values[key] == gyro["x"].values[key]


def test_axis_override_of_one_white_form_replaces_the_other():
    ds = parse(
        BASE + '[gyro]\nangle_random_walk = "0.15 deg/rt-h"\n'
        '[gyro.z]\nnoise_density = "0.003 deg/s/rtHz"\n'
    )
    gyro = ds.instruments["gyro"].axes
    assert "noise_density" not in gyro["x"].values
    assert "angle_random_walk" not in gyro["z"].values
    assert gyro["z"].origin["noise_density"] == "gyro.z.noise_density"


def test_conventions_resolve_sensor_then_instrument_then_axis():
    ds = parse(
        BASE + 'density_is = "one-sided"\nbias_instability_is = "coefficient"\n'
        '[gyro]\nnoise_density = "0.003 deg/s/rtHz"\ndensity_is = "two-sided"\n'
        '[gyro.z]\nbias_instability = "1 deg/h"\nbias_instability_is = "floor"\n'
        'quantization_is = "step"\n'
        '[accelerometer]\nnoise_density = "60 ug/rtHz"\n'
    )
    gx = ds.instruments["gyro"].axes["x"].conventions
    gz = ds.instruments["gyro"].axes["z"].conventions
    ax = ds.instruments["accelerometer"].axes["x"].conventions
    assert gx == {
        "density_is": "two-sided",
        "bias_instability_is": "coefficient",
        "quantization_is": "coefficient",
    }
    assert gz == {
        "density_is": "two-sided",
        "bias_instability_is": "floor",
        "quantization_is": "step",
    }
    assert ax == {
        "density_is": "one-sided",
        "bias_instability_is": "coefficient",
        "quantization_is": "coefficient",
    }
    # defaults when nothing is said (DESIGN §3)
    plain = parse(BASE + '[gyro]\nangle_random_walk = "0.1 deg/rt-h"\n')
    assert plain.channels()[0].conventions == {k: d for k, (_, d) in CONVENTIONS.items()}


def test_axes_subset_and_instrument_sample_rate():
    ds = parse(
        '[sensor]\naxes = ["z"]\nsample_rate = "1 kHz"\n'
        '[gyro]\nangle_random_walk = "0.1 deg/rt-h"\nsample_rate = "200 Hz"\n'
    )
    (gz,) = ds.channels()
    assert gz.channel_id == "gyro.z"
    assert gz.values["sample_rate"].typ == 200.0
    assert gz.origin["sample_rate"] == "gyro.sample_rate"
    assert ds.sensor["axes"] == ["z"]


def test_typ_and_max_pick_with_fallback():
    ds = parse(
        BASE + '[gyro]\nbias_instability = { typ = "1 deg/h", max = "2 deg/h" }\n'
        'rate_random_walk = { max = "3 deg/h/rt-h" }\nangle_random_walk = "0.1 deg/rt-h"\n'
    )
    v = ds.channels()[0].values
    assert v["bias_instability"].pick("typ") == (
        pytest.approx(ref.DEG_PER_H, rel=5e-7),
        "1 deg/h",
        "typ",
    )
    assert v["bias_instability"].pick("max")[2] == "max"
    assert v["bias_instability"].pick("max")[0] == pytest.approx(2 * ref.DEG_PER_H, rel=5e-7)
    # a missing column falls back to the other one
    assert v["rate_random_walk"].pick("typ")[2] == "max"
    assert v["angle_random_walk"].pick("max")[2] == "typ"
    # typ equal to max is fine
    parse(BASE + '[gyro]\nbias_instability = { typ = "1 deg/h", max = "1 deg/h" }\n')


def test_density_agreeing_within_one_percent_is_accepted():
    # 0.15 °/√h is 0.0025 °/s/√Hz (common practice, two-sided): 0.00252 is 0.8 % off.
    ds = parse(
        BASE + '[gyro]\nangle_random_walk = "0.15 deg/rt-h"\nnoise_density = "0.00252 deg/s/rtHz"\n'
    )
    assert set(ds.channels()[0].values) >= {"angle_random_walk", "noise_density"}
    # one-sided: the density is √2 larger (REFERENCES §0): 0.0025·√2 = 0.0035355
    parse(
        BASE + 'density_is = "one-sided"\n[gyro]\nangle_random_walk = "0.15 deg/rt-h"\n'
        'noise_density = "0.003536 deg/s/rtHz"\n'
    )


def test_field_table_kinds_exist():
    from sensormodel.quantities import KINDS

    for table in FIELDS.values():
        for spec in table.values():
            assert spec.kind in KINDS


# ---- refusals -------------------------------------------------------------------------------

G = BASE + "[gyro]\n"
ARW = "gyro\\.angle_random_walk"
# (id, datasheet text, error class, field (regex), message after "<field>: " (regex))
REFUSALS = [
    (
        "wrong-dimension",
        G + 'angle_random_walk = "0.1 1/sqrt(h)"',
        UnitError,
        ARW,
        r"got '1/sqrt\(h\)' \(1 / √time\); expected an angle random walk",
    ),
    (
        "bare-number",
        G + "angle_random_walk = 0.1",
        UnitError,
        ARW,
        r"got the bare number 0\.1 with no unit",
    ),
    ("number-only-string", G + 'angle_random_walk = "0.1"', UnitError, ARW, r"'0\.1' has no unit"),
    (
        "negative",
        G + 'angle_random_walk = "-0.1 deg/rt-h"',
        UnitError,
        ARW,
        r"'-0\.1 deg/rt-h' is negative",
    ),
    (
        "non-finite",
        G + 'angle_random_walk = "1e999 deg/rt-h"',
        UnitError,
        ARW,
        r"'1e999 deg/rt-h' is not finite",
    ),
    (
        "nan-text",
        G + 'angle_random_walk = "nan deg/rt-h"',
        UnitError,
        ARW,
        r"'nan deg/rt-h' is not finite",
    ),
    (
        "toml-nan",
        G + "angle_random_walk = nan",
        UnitError,
        ARW,
        r"got the bare number nan with no unit",
    ),
    (
        "unknown-unit",
        G + 'angle_random_walk = "0.1 blorp/rt-h"',
        UnitError,
        ARW,
        r"cannot read the unit 'blorp/rt-h' \(unknown unit 'blorp'\)",
    ),
    (
        "grams-in-gyro",
        G + 'bias_instability = "25 ug"',
        UnitError,
        r"gyro\.bias_instability",
        r"got 'ug' \(mass\) \('g' is read as grams outside acceleration fields\)",
    ),
    (
        "wrong-dimension-typ",
        G + 'bias_instability = { typ = "1 deg/rt-h" }',
        UnitError,
        r"gyro\.bias_instability\.typ",
        r"got 'deg/rt-h'",
    ),
    (
        "unknown-key",
        G + 'bias_instabilty = "1 deg/h"',
        DatasheetError,
        r"gyro\.bias_instabilty",
        r"unknown key 'bias_instabilty' \(did you mean 'bias_instability'\?\); expected one of ",
    ),
    (
        "unknown-key-axis",
        G + 'angle_random_walk = "0.1 deg/rt-h"\n[gyro.z]\nbias_instabilty = "1 deg/h"',
        DatasheetError,
        r"gyro\.z\.bias_instabilty",
        r"unknown key 'bias_instabilty' \(did you mean 'bias_instability'\?\)",
    ),
    (
        "unknown-key-sensor",
        '[sensor]\nsample_rte = "100 Hz"\n[gyro]\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"sensor\.sample_rte",
        r"unknown key 'sample_rte' \(did you mean 'sample_rate'\?\)",
    ),
    (
        "unknown-key-spec",
        G + 'angle_random_walk = { typical = "0.1 deg/rt-h" }',
        DatasheetError,
        r"gyro\.angle_random_walk\.typical",
        r"unknown key 'typical' \(did you mean 'typ'\?\)",
    ),
    (
        "unknown-table",
        BASE + '[gyros]\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"gyros",
        r"unknown table '\[gyros\]' \(did you mean 'gyro'\?\)",
    ),
    # 0.15 °/√h = 0.0025 °/s/√Hz (common practice); 0.003 is 16.7 % off
    (
        "arw-density-disagree",
        G + 'angle_random_walk = "0.15 deg/rt-h"\nnoise_density = "0.003 deg/s/rtHz"',
        DatasheetError,
        r"gyro\.angle_random_walk / gyro\.noise_density",
        r"angle_random_walk \(0\.15 deg/rt-h\) and noise_density \(0\.003 deg/s/rtHz, two-sided\) "
        r"disagree by 16\.7% \(typ\); expected equivalent values \(within 1 %\)",
    ),
    # just over the 1 % line: 0.00253 vs 0.0025 is 1.2 %
    (
        "arw-density-1.2pct",
        G + 'angle_random_walk = "0.15 deg/rt-h"\nnoise_density = "0.00253 deg/s/rtHz"',
        DatasheetError,
        r"gyro\.angle_random_walk / gyro\.noise_density",
        r".*disagree by 1\.2% \(typ\)",
    ),
    (
        "arw-density-disagree-max",
        G + 'angle_random_walk = { typ = "0.15 deg/rt-h", max = "0.2 deg/rt-h" }\n'
        'noise_density = { typ = "0.0025 deg/s/rtHz", max = "0.004 deg/s/rtHz" }',
        DatasheetError,
        r"gyro\.angle_random_walk / gyro\.noise_density",
        r".*disagree by .*% \(max\)",
    ),
    # one-sided: D = 0.0025/√2, 29 % below the ARW
    (
        "arw-density-one-sided",
        BASE + 'density_is = "one-sided"\n[gyro]\nangle_random_walk = "0.15 deg/rt-h"\n'
        'noise_density = "0.0025 deg/s/rtHz"',
        DatasheetError,
        r"gyro\.angle_random_walk / gyro\.noise_density",
        r".*\(0\.0025 deg/s/rtHz, one-sided\) disagree by 29\.3%",
    ),
    (
        "arw-density-disagree-axis",
        G + 'angle_random_walk = "0.15 deg/rt-h"\n[gyro.z]\nangle_random_walk = "0.15 deg/rt-h"\n'
        'noise_density = "0.003 deg/s/rtHz"',
        DatasheetError,
        r"gyro\.z\.angle_random_walk / gyro\.z\.noise_density",
        r".*disagree by 16\.7%",
    ),
    (
        "typ-above-max",
        G + 'bias_instability = { typ = "2 deg/h", max = "1 deg/h" }',
        DatasheetError,
        r"gyro\.bias_instability",
        r"typ '2 deg/h' is larger than max '1 deg/h'; expected typ <= max",
    ),
    ("empty-spec", G + "angle_random_walk = {}", DatasheetError, ARW, r"empty table"),
    (
        "missing-sample-rate",
        '[sensor]\nname = "x"\n[gyro]\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"gyro\.sample_rate",
        r"no sample_rate; expected sample_rate in \[sensor\]",
    ),
    (
        "zero-sample-rate",
        '[sensor]\nsample_rate = "0 Hz"\n[gyro]\nangle_random_walk = "0.1 deg/rt-h"',
        UnitError,
        r"sensor\.sample_rate",
        r"sample_rate is zero",
    ),
    (
        "zero-bandwidth",
        BASE + 'bandwidth = "0 Hz"\n[gyro]\nangle_random_walk = "0.1 deg/rt-h"',
        UnitError,
        r"sensor\.bandwidth",
        r"bandwidth is zero",
    ),
    (
        "bandwidth-wrong-dimension",
        BASE + 'bandwidth = "100 deg/s"\n[gyro]\nangle_random_walk = "0.1 deg/rt-h"',
        UnitError,
        r"sensor\.bandwidth",
        r"got 'deg/s' \(angle / time\); expected a frequency",
    ),
    (
        "bad-density-is",
        BASE + 'density_is = "single"\n[gyro]\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"sensor\.density_is",
        r"got 'single'; expected 'two-sided' or 'one-sided'",
    ),
    (
        "bad-bias-instability-is",
        G + 'bias_instability_is = "peak"\nbias_instability = "1 deg/h"',
        DatasheetError,
        r"gyro\.bias_instability_is",
        r"got 'peak'; expected 'floor' or 'coefficient'",
    ),
    (
        "bad-quantization-is",
        G + 'quantization = "1 urad"\n[gyro.z]\nquantization_is = "lsb"',
        DatasheetError,
        r"gyro\.z\.quantization_is",
        r"got 'lsb'; expected 'coefficient' or 'step'",
    ),
    (
        "filter-order-0",
        BASE + 'filter_order = 0\n[gyro]\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"sensor\.filter_order",
        r"got 0; expected a whole number from 1 to 8",
    ),
    (
        "filter-order-9",
        G + 'filter_order = 9\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"gyro\.filter_order",
        r"got 9; expected a whole number from 1 to 8",
    ),
    (
        "filter-order-float",
        G + 'filter_order = 2.5\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"gyro\.filter_order",
        r"got 2\.5",
    ),
    (
        "filter-order-bool",
        G + 'filter_order = true\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"gyro\.filter_order",
        r"got True",
    ),
    (
        "filter-order-text",
        G + 'filter_order = "2"\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"gyro\.filter_order",
        r"got '2'",
    ),
    (
        "no-sensor-table",
        '[gyro]\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"sensor",
        r"missing table \[sensor\]",
    ),
    (
        "override-absent-axis",
        '[sensor]\naxes = ["z"]\nsample_rate = "1 Hz"\n[gyro]\n'
        'angle_random_walk = "0.1 deg/rt-h"\n[gyro.x]\nbias_instability = "1 deg/h"',
        DatasheetError,
        r"gyro\.x",
        r"an override for axis 'x', which the sensor does not have",
    ),
    (
        "bad-axes",
        BASE + 'axes = ["w"]\n[gyro]\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"sensor\.axes",
        r"got \['w'\]; expected a list of distinct axes",
    ),
    (
        "repeated-axes",
        G + 'axes = ["x", "x"]\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"gyro\.axes",
        r"got \['x', 'x'\]",
    ),
    (
        "axis-not-table",
        G + 'angle_random_walk = "0.1 deg/rt-h"\nz = 3',
        DatasheetError,
        r"gyro\.z",
        r"got 3; expected a table of per-axis values",
    ),
    (
        "name-not-text",
        BASE + 'name = 3\n[gyro]\nangle_random_walk = "0.1 deg/rt-h"',
        DatasheetError,
        r"sensor\.name",
        r"got 3; expected a text",
    ),
    (
        "no-noise-term",
        G + 'bandwidth = "10 Hz"',
        DatasheetError,
        r"gyro",
        r"no noise term; expected at least one of angle_random_walk",
    ),
]


@pytest.mark.parametrize(
    ("text", "cls", "field", "message"), [r[1:] for r in REFUSALS], ids=[r[0] for r in REFUSALS]
)
def test_refusals_name_the_field(text, cls, field, message):
    with pytest.raises(cls, match=rf"^sheet\.toml:{field}: {message}") as info:
        parse(text)
    assert "\n" not in str(info.value)
    assert re.fullmatch(field, info.value.field)


def test_no_instrument_table():
    with pytest.raises(
        DatasheetError, match=r"^sheet\.toml: no instrument table; expected a \[gyro\]"
    ):
        parse(BASE)


# ---- file-level refusals --------------------------------------------------------------------


def test_invalid_toml_names_the_line(write_datasheet):
    path = write_datasheet(BASE + '[gyro]\nangle_random_walk = "0.1 deg/rt-h\n')
    with pytest.raises(
        DatasheetError, match=rf"^{re.escape(str(path))}:line 4: not valid TOML"
    ) as info:
        load_datasheet(path)
    assert info.value.field == "line 4"


def test_missing_file(tmp_path):
    path = tmp_path / "absent.toml"
    with pytest.raises(DatasheetError, match=rf"^{re.escape(str(path))}: no such file; expected"):
        load_datasheet(path)


def test_folder_instead_of_file(tmp_path):
    with pytest.raises(DatasheetError, match="is a folder"):
        load_datasheet(tmp_path)


def test_not_utf8(tmp_path):
    path = tmp_path / "latin1.toml"
    path.write_bytes(BASE.encode() + b'[gyro]\nname = "\xb0"\n')
    with pytest.raises(DatasheetError, match="not UTF-8 text"):
        load_datasheet(path)


def test_errors_are_sensormodel_errors_and_value_errors(write_datasheet):
    path = write_datasheet(G + 'angle_random_walk = "0.1 1/sqrt(h)"\n')
    with pytest.raises(SensorModelError) as info:
        load_datasheet(path)
    assert isinstance(info.value, ValueError)
    assert info.value.source == str(path)


def test_sha256_is_of_the_file_bytes(write_datasheet):
    import hashlib

    text = G + 'angle_random_walk = "0.1 deg/rt-h"\n'
    path = write_datasheet(text)
    assert load_datasheet(path).sha256 == hashlib.sha256(text.encode()).hexdigest()


def test_values_are_finite_floats(example_datasheet):
    for ax in load_datasheet(example_datasheet).channels():
        for spec in ax.values.values():
            for v in (spec.typ, spec.max):
                assert v is None or (isinstance(v, float) and math.isfinite(v) and v >= 0)


def test_check_keys_refuses_an_unknown_key_with_the_nearest_name():
    check_keys({"typ": 1, "max": 2}, ["typ", "max"], "gyro.arw", "unit.toml")  # all known
    with pytest.raises(DatasheetError) as info:
        check_keys({"typ": 1, "maks": 2}, ["typ", "max"], "gyro.arw", "unit.toml")
    assert info.value.field == "gyro.arw.maks"
    assert info.value.source == "unit.toml"
    assert "did you mean 'max'?" in info.value.problem
    assert info.value.expected == "one of typ, max"


# ---- keys that are not noise terms ------------------------------------------------------------

_PASTED = BASE + """
[gyro]
angle_random_walk = "0.15 deg/rt-h"
measurement_range = "450 deg/s"
bias_offset = { max = "0.2 deg/s" }
bias_temperature_sensitivity = "0.01 deg/s/°C"
scale_factor_error = "0.1 %"
scale_factor_nonlinearity = "300 ppm"
scale_factor_stability = { typ = "500 ppm" }
scale_factor_temperature_sensitivity = "100 ppm/degC"
misalignment = "1 mrad"
cross_axis_sensitivity = "0.5 %"
g_sensitivity = "1 deg/h/g"
g_squared_sensitivity = "0.1 deg/h/g^2"
[accelerometer]
velocity_random_walk = "60 ug/rtHz"
measurement_range = "8 g"
bias_temperature_sensitivity = "0.05 mg/degC"
vibration_rectification = "50 ug/g^2"
"""


def test_a_pasted_datasheet_table_is_read_and_its_other_keys_listed():
    # A whole datasheet table pasted in was refused at its first non-noise key: the common
    # ones are read (units checked, SI; g is standard gravity 9.80665 m/s², CGPM 1901), and
    # the model lists them as not noise terms, saying what the used ones are kept for.
    from sensormodel import build_model

    ds = parse(_PASTED)
    g = ds.instruments["gyro"].axes["x"].values
    a = ds.instruments["accelerometer"].axes["x"].values
    deg = math.pi / 180.0
    assert g["measurement_range"].typ == pytest.approx(450 * deg, rel=1e-12)
    assert g["bias_offset"].max == pytest.approx(0.2 * deg, rel=1e-12)
    assert g["bias_temperature_sensitivity"].typ == pytest.approx(0.01 * deg, rel=1e-12)  # /K
    assert g["scale_factor_error"].typ == pytest.approx(1e-3, rel=1e-12)
    assert g["scale_factor_nonlinearity"].typ == pytest.approx(300e-6, rel=1e-12)
    assert g["scale_factor_temperature_sensitivity"].typ == pytest.approx(100e-6, rel=1e-12)
    assert g["misalignment"].typ == pytest.approx(1e-3, rel=1e-12)
    assert g["g_sensitivity"].typ == pytest.approx(ref.DEG_PER_H / ref.STANDARD_GRAVITY, rel=1e-6)
    assert g["g_squared_sensitivity"].typ == pytest.approx(
        0.1 * ref.DEG_PER_H / ref.STANDARD_GRAVITY**2, rel=1e-6
    )
    assert a["measurement_range"].typ == pytest.approx(8 * ref.STANDARD_GRAVITY, rel=1e-12)
    assert a["bias_temperature_sensitivity"].typ == pytest.approx(
        0.05e-3 * ref.STANDARD_GRAVITY, rel=1e-12
    )
    vre = a["vibration_rectification"].typ
    assert vre == pytest.approx(50e-6 / ref.STANDARD_GRAVITY, rel=1e-12)
    notes = build_model(ds).provenance["notes"]
    kept = "gyro.measurement_range (450 deg/s): not a noise term, kept for: saturation"
    assert any(n.startswith(kept) for n in notes), notes
    assert "gyro.misalignment (1 mrad): not a noise term, not used" in notes
    # an instrument-level key is noted once, not once per axis
    assert sum(n.startswith("gyro.misalignment") for n in notes) == 1


@pytest.mark.parametrize(
    ("line", "message"),
    [
        ('scale_factor_eror = "0.1 %"', r"did you mean 'scale_factor_error'\?"),
        ('g_sensitivity = "1 deg/h"', r"g_sensitivity"),  # the wrong kind of quantity
        ('bias_temperature_sensitivity = "0.01 deg/s"', r"bias_temperature_sensitivity"),
    ],
)
def test_other_keys_still_refuse_misspellings_and_wrong_units(line, message):
    with pytest.raises(SensorModelError, match=message):
        parse(BASE + '[gyro]\nangle_random_walk = "0.15 deg/rt-h"\n' + line + "\n")


def test_every_key_is_documented_in_the_readme():
    # The README documents every datasheet key (key, meaning, a value, the term it makes).
    readme = (pathlib.Path(__file__).resolve().parent.parent / "README.md").read_text("utf-8")
    for fields in FIELDS.values():
        for key in fields:
            assert f"`{key}`" in readme, key
    for key in CONVENTIONS:
        assert f"`{key}" in readme, key
