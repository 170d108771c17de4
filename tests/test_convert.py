"""sensormodel.convert: the conventions that turn datasheet values into noise terms."""

from __future__ import annotations

import hashlib
import math
import re
import tomllib

import numpy as np
import pytest
from reference import units as ref
from scipy import optimize

from sensormodel.convert import QUANTITY, axis_terms, build_model
from sensormodel.datasheet import load_datasheet, parse_datasheet
from sensormodel.errors import DatasheetError

BASE = '[sensor]\nsample_rate = "100 Hz"\n'


def terms_of(text: str, *, basis: str = "typ", instrument: str = "gyro", axis: str = "x"):
    ds = parse_datasheet(tomllib.loads(text), source="sheet.toml")
    terms, notes = axis_terms(ds.instruments[instrument].axes[axis], basis=basis)
    return {t.type: t for t in terms}, notes


# ---- datasheet key -> term ------------------------------------------------------------------


def test_arw_is_the_white_density():
    terms, _ = terms_of(BASE + '[gyro]\nangle_random_walk = "0.15 deg/rt-h"\n')
    assert terms["white"].density == pytest.approx(0.15 * ref.DEG_PER_RT_H, rel=5e-7)


def test_two_sided_density_is_the_white_density():
    # default density_is = "two-sided": ARW [°/√h] = 60 x density [°/s/√Hz] (common practice)
    terms, _ = terms_of(BASE + '[gyro]\nnoise_density = "0.0025 deg/s/rtHz"\n')
    assert terms["white"].density == pytest.approx(0.15 * ref.DEG_PER_RT_H, rel=5e-7)


def test_one_sided_density_is_divided_by_root_two():
    # A density read off a one-sided PSD (2 N²) is sqrt(2) larger (REFERENCES §0): D = value/√2.
    text = 'density_is = "one-sided"\n[gyro]\nnoise_density = "0.0025 deg/s/rtHz"\n'
    terms, _ = terms_of(BASE + text)
    assert terms["white"].density == pytest.approx(0.15 * ref.DEG_PER_RT_H / math.sqrt(2), rel=5e-7)
    # density_is does not touch a random-walk coefficient (defined by its Allan variance)
    terms, _ = terms_of(
        BASE + 'density_is = "one-sided"\n[gyro]\nangle_random_walk = "0.15 deg/rt-h"\n'
    )
    assert terms["white"].density == pytest.approx(0.15 * ref.DEG_PER_RT_H, rel=5e-7)
    assert terms["white"].meta["datasheet"]["convention"] == "random-walk coefficient"


@pytest.mark.parametrize(
    ("key", "text", "si"),
    [
        # 9 °/h/√Hz = 0.15 °/√h (÷60); 60 µg/√Hz = 60e-6·9.80665 m/s²/√Hz (g standard gravity)
        ("angle_random_walk", "9 deg/h/rtHz", 0.15 * ref.DEG_PER_RT_H),
        ("velocity_random_walk", "60 ug/rtHz", 60e-6 * 9.80665),
    ],
)
def test_one_sided_applies_to_a_walk_typed_as_a_density(key, text, si):
    # A value typed in a density's unit is a density, whichever key holds it: density_is =
    # "one-sided" divides it by √2 (it was once ignored there: a silent 41 % difference), and
    # the model's provenance says what was applied.
    instrument = "gyro" if key == "angle_random_walk" else "accelerometer"
    body = f'[{instrument}]\n{key} = "{text}"\n'
    one, _ = terms_of(BASE + 'density_is = "one-sided"\n' + body, instrument=instrument)
    two, _ = terms_of(BASE + body, instrument=instrument)
    assert one["white"].density == pytest.approx(si / math.sqrt(2), rel=5e-7)
    assert two["white"].density == pytest.approx(si, rel=5e-7)
    assert one["white"].meta["datasheet"]["convention"] == "one-sided"
    assert two["white"].meta["datasheet"]["convention"] == "two-sided"


def test_accelerometer_density_in_micro_g():
    text = (
        BASE
        + '[accelerometer]\nnoise_density = "60 µg/√Hz"\n'
        + 'acceleration_random_walk = "3 ug/s/rt-Hz"\n'
    )
    terms, _ = terms_of(text, instrument="accelerometer")
    # 60 µg/√Hz = 60 x 5.88399e-4 m/s/√h = 0.0353 m/s/√h (REFERENCES §10)
    assert terms["white"].density * 60 == pytest.approx(
        60 * ref.UG_PER_RT_HZ_IN_M_S_PER_RT_H, rel=ref.digits_rtol(5.88399e-4)
    )
    assert terms["random_walk"].density == pytest.approx(3e-6 * ref.STANDARD_GRAVITY, rel=1e-12)


def test_bias_instability_floor_gives_the_ieee_coefficient():
    # default bias_instability_is = "floor" (common practice): B = floor / 0.6642824703
    # (IEEE Std 952 Annex C)
    terms, _ = terms_of(BASE + '[gyro]\nbias_instability = "1 deg/h"\n')
    assert terms["flicker"].coefficient == pytest.approx(ref.DEG_PER_H / ref.FLOOR_FACTOR, rel=5e-7)


def test_bias_instability_coefficient_is_taken_as_is():
    terms, _ = terms_of(
        BASE + 'bias_instability_is = "coefficient"\n[gyro]\nbias_instability = "1 deg/h"\n'
    )
    assert terms["flicker"].coefficient == pytest.approx(ref.DEG_PER_H, rel=5e-7)


def _gm_avar(tau, sigma, T):
    # IEEE Std 952-1997 Annex C, exponentially correlated noise, written in sigma and T
    # (REFERENCES §2): 2 sigma² T / tau [1 - T/(2 tau) (3 - 4 e^(-tau/T) + e^(-2 tau/T))]
    u = tau / T
    return 2 * sigma**2 * T / tau * (1 - (3 - 4 * np.exp(-u) + np.exp(-2 * u)) / (2 * u))


def test_gm_closed_form_regression_values():
    # Our transcription of the closed form against REFERENCES §2 regression values (sigma = T = 1).
    for tau, value in [(0.1, 0.0618919066), (1.0, 0.3361824814), (5.0, 0.2810762555)]:
        assert _gm_avar(tau, 1.0, 1.0) == pytest.approx(value, rel=1e-9)


def test_bias_instability_with_correlation_time_is_gauss_markov():
    # bias_instability + correlation_time -> a Gauss-Markov bias whose Allan-deviation peak
    # equals the datasheet floor (common practice). Reference: the IEEE 952 closed form above,
    # maximized here with scipy; the peak sits at 1.8926 T with 0.6173643 sigma (REFERENCES §2).
    floor = 10e-6 * ref.STANDARD_GRAVITY
    terms, _ = terms_of(
        BASE + '[accelerometer]\nbias_instability = "10 ug"\ncorrelation_time = "600 s"\n',
        instrument="accelerometer",
    )
    gm = terms["gauss_markov"]
    assert "flicker" not in terms
    assert gm.time_constant == 600.0
    res = optimize.minimize_scalar(
        lambda t: -_gm_avar(t, gm.sigma, gm.time_constant),
        bounds=(0.5 * 600, 10 * 600),
        method="bounded",
        options={"xatol": 1e-6},
    )
    assert math.sqrt(-res.fun) == pytest.approx(floor, rel=1e-6)
    assert res.x / 600 == pytest.approx(ref.GM_PEAK_TAU_OVER_T, rel=1e-5)
    assert gm.sigma == pytest.approx(floor / ref.GM_PEAK_ADEV_OVER_SIGMA, rel=1e-6)
    assert gm.meta["datasheet"]["correlation_time"] == "600 s"


def test_coefficient_with_correlation_time_uses_the_floor():
    terms, _ = terms_of(
        BASE + '[gyro]\nbias_instability = "1 deg/h"\nbias_instability_is = "coefficient"\n'
        'correlation_time = "100 s"\n'
    )
    assert terms["gauss_markov"].sigma == pytest.approx(
        ref.DEG_PER_H * ref.FLOOR_FACTOR / ref.GM_PEAK_ADEV_OVER_SIGMA, rel=1e-6
    )


def test_quantization_coefficient_and_step():
    terms, _ = terms_of(BASE + '[gyro]\nquantization = "0.3 urad"\n')
    assert terms["quantization"].coefficient == pytest.approx(0.3e-6, rel=1e-12)
    # a quantum s of uniform error gives Q = s/sqrt(12) (IEEE Std 952 Annex C, from memory;
    # REFERENCES §1 derives it: AVAR = 3 var(e)/tau²)
    terms, _ = terms_of(BASE + '[gyro]\nquantization = "0.3 urad"\nquantization_is = "step"\n')
    assert terms["quantization"].coefficient == pytest.approx(0.3e-6 / math.sqrt(12), rel=1e-12)


def test_other_terms():
    terms, _ = terms_of(
        BASE + '[gyro]\nrate_random_walk = "2 °/h/√h"\nrate_ramp = "0.5 °/h²"\n'
        'bias_repeatability = "10 dph"\n'
    )
    assert terms["random_walk"].density == pytest.approx(2 * ref.DEG_PER_H_PER_RT_H, rel=5e-7)
    assert terms["ramp"].slope == pytest.approx(0.5 * ref.DEG_PER_H / 3600, rel=5e-7)
    assert terms["random_constant"].sigma == pytest.approx(10 * ref.DEG_PER_H, rel=5e-7)


def test_zero_term_is_left_out_with_a_note():
    terms, notes = terms_of(
        BASE + '[gyro]\nangle_random_walk = "0 deg/rt-h"\nbias_instability = "1 deg/h"\n'
    )
    assert set(terms) == {"flicker"}
    assert notes == ["gyro.x: gyro.angle_random_walk is zero; no term"]


def test_worst_case_uses_max_and_notes_fallbacks():
    text = (
        BASE
        + '[gyro]\nbias_instability = { typ = "1 deg/h", max = "2 deg/h" }\n'
        + 'angle_random_walk = "0.1 deg/rt-h"\n'
    )
    typ, notes_typ = terms_of(text)
    worst, notes_max = terms_of(text, basis="max")
    assert worst["flicker"].coefficient == pytest.approx(2 * typ["flicker"].coefficient, rel=1e-12)
    assert worst["white"].density == typ["white"].density
    assert notes_typ == []
    assert notes_max == [
        "gyro.x: gyro.angle_random_walk has no 'max' value; 'typ' (0.1 deg/rt-h) used"
    ]
    assert worst["flicker"].meta["datasheet"] == {
        "field": "gyro.bias_instability",
        "text": "2 deg/h",
        "column": "max",
    }


def test_correlation_time_without_bias_instability(write_datasheet):
    path = write_datasheet(
        BASE + '[gyro]\nangle_random_walk = "0.1 deg/rt-h"\ncorrelation_time = "100 s"\n'
    )
    ds = load_datasheet(path)
    with pytest.raises(
        DatasheetError,
        match=rf"^{re.escape(str(path))}:gyro\.correlation_time: correlation_time without "
        r"bias_instability; expected a bias_instability",
    ):
        build_model(ds)


# ---- the whole model ------------------------------------------------------------------------


def test_model_channels_from_m200(examples_dir):
    path = examples_dir / "bw-m200.toml"
    model = build_model(load_datasheet(path))
    assert model.channel_ids == [
        "gyro.x",
        "gyro.y",
        "gyro.z",
        "accelerometer.x",
        "accelerometer.y",
        "accelerometer.z",
    ]
    for ch in model.channels:
        assert (ch.quantity, ch.unit) == QUANTITY[ch.instrument]
        assert (ch.sample_rate, ch.bandwidth, ch.filter_order) == (200.0, 50.0, 1)
        assert [t.type for t in ch.terms] == ["white", "flicker", "random_walk", "random_constant"]
    assert model.conventions["basis"] == "typ"
    assert model.conventions["density_is"] == ["two-sided"]
    assert model.provenance["datasheet"] == {
        "file": "bw-m200.toml",
        "sha256": hashlib.sha256(path.read_bytes()).hexdigest(),
    }
    assert model.sensor["name"] == "BW-M200"


def test_model_of_g30_one_sided_coefficient(examples_dir):
    model = build_model(examples_dir / "bw-g30.toml")
    (ch,) = model.channels
    assert ch.id == "gyro.z"
    assert (ch.bandwidth, ch.filter_order) == (None, None)
    # 5e-3 °/s/√Hz one-sided -> D = 5e-3/√2 °/s/√Hz; 3 °/h is the coefficient B itself
    assert ch.term("white").density == pytest.approx(math.radians(5e-3) / math.sqrt(2), rel=1e-12)
    assert ch.term("flicker").coefficient == pytest.approx(3 * ref.DEG_PER_H, rel=5e-7)
    assert model.conventions["density_is"] == ["one-sided"]
    assert model.conventions["bias_instability_is"] == ["coefficient"]


def test_model_of_t900_worst_case(examples_dir):
    typ = build_model(examples_dir / "bw-t900.toml")
    worst = build_model(examples_dir / "bw-t900.toml", worst_case=True)
    assert worst.conventions["basis"] == "max"
    assert worst.channel("gyro.x").term("white").density == pytest.approx(
        0.02 * ref.DEG_PER_RT_H, rel=5e-7
    )
    assert typ.channel("gyro.x").term("white").density == pytest.approx(
        0.012 * ref.DEG_PER_RT_H, rel=5e-7
    )
    # per-axis override: gyro.z has its own, larger bias instability
    bx = typ.channel("gyro.x").term("flicker").coefficient
    bz = typ.channel("gyro.z").term("flicker").coefficient
    assert bz / bx == pytest.approx(0.08 / 0.05, rel=1e-12)
    gm = worst.channel("accelerometer.y").term("gauss_markov")
    assert gm.time_constant == 600.0
    assert gm.sigma == pytest.approx(
        20e-6 * ref.STANDARD_GRAVITY / ref.GM_PEAK_ADEV_OVER_SIGMA, rel=1e-6
    )


def test_bandwidth_above_nyquist_is_noted():
    # A bandwidth above half the output rate was accepted silently: it is noted (aliasing).
    from sensormodel import build_model
    from sensormodel.datasheet import parse_datasheet

    text = '[sensor]\nsample_rate = "400 Hz"\nbandwidth = "250 Hz"\n[gyro]\n' \
        'angle_random_walk = "0.15 deg/rt-h"\n'
    notes = build_model(parse_datasheet(tomllib.loads(text), source="s.toml")).provenance["notes"]
    assert any("above the Nyquist frequency 200 Hz" in n for n in notes), notes
    ok = text.replace("250 Hz", "150 Hz")
    notes = build_model(parse_datasheet(tomllib.loads(ok), source="s.toml")).provenance["notes"]
    assert not any("Nyquist" in n for n in notes)
