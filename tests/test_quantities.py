"""sensormodel.quantities: datasheet typography -> SI, checked against outside values.

Two references are used throughout:

* published constants and conversions (tests/reference/units.py, each with its source);
* pint itself as a reference library: a plain ``pint.UnitRegistry()`` (where radians are
  dimensionless and ``g`` is the gram) computes the same quantity written in pint's own syntax,
  multiplied out to SI. Agreement there checks our typography rewriting, not pint.
"""

from __future__ import annotations

import math

import pint
import pytest
import scipy.constants
from reference import units as ref

from sensormodel.errors import UnitError
from sensormodel.quantities import (
    DISPLAY_UNITS,
    KINDS,
    STANDARD_GRAVITY,
    UREG,
    convert_from_si,
    dimension_words,
    format_value,
    kind_of,
    normalize_unit,
    parse_quantity,
    parse_unit_factor,
    split_value,
)

#: pint's default registry, as shipped: the reference library.
PLAIN = pint.UnitRegistry()

#: The SI unit of each kind, in plain-pint syntax.
PLAIN_SI = {
    "angle_random_walk": "radian / second ** 0.5",
    "rate_random_walk": "radian / second ** 1.5",
    "angular_rate": "radian / second",
    "angular_rate_ramp": "radian / second ** 2",
    "velocity_random_walk": "meter / second ** 1.5",
    "acceleration": "meter / second ** 2",
    "dimensionless": "dimensionless",
}

# (datasheet text, kind, the same quantity in plain-pint syntax, reference SI value)
# Reference values: REFERENCES §10 conversions [N] and the trade rule
# ARW[deg/rt(h)] = 60 x density[deg/s/rt(Hz)] ("common practice", two-sided density).
TYPOGRAPHY = [
    ("0.15 °/√h", "angle_random_walk", "0.15 degree / hour**0.5", 0.15 * ref.DEG_PER_RT_H),
    ("0.15 deg/rt-hr", "angle_random_walk", "0.15 degree / hour**0.5", 0.15 * ref.DEG_PER_RT_H),
    ("0.15 deg/sqrt(h)", "angle_random_walk", "0.15 degree / hour**0.5", 0.15 * ref.DEG_PER_RT_H),
    # 3.5 mdps/√Hz = 0.0035 °/s/√Hz = 60 x 0.0035 = 0.21 °/√h (common practice)
    (
        "3.5 mdps/√Hz",
        "angle_random_walk",
        "3.5 millidegree / second / hertz**0.5",
        0.21 * ref.DEG_PER_RT_H,
    ),
    (
        "0.003 °/s/√Hz",
        "angle_random_walk",
        "0.003 degree / second / hertz**0.5",
        0.18 * ref.DEG_PER_RT_H,
    ),
    ("10 °/hr", "angular_rate", "10 degree / hour", 10 * ref.DEG_PER_H),
    ("10 dph", "angular_rate", "10 degree / hour", 10 * ref.DEG_PER_H),
    # 1 µg/√Hz = 5.88399e-4 m/s/√h = 5.88399e-4/60 m/s/√s (REFERENCES §10)
    (
        "60 µg/√Hz",
        "velocity_random_walk",
        "60e-6 standard_gravity / hertz**0.5",
        60 * ref.UG_PER_RT_HZ_IN_M_S_PER_RT_H / 60,
    ),
    (
        "60 ug/rtHz",
        "velocity_random_walk",
        "60e-6 standard_gravity / hertz**0.5",
        60 * ref.UG_PER_RT_HZ_IN_M_S_PER_RT_H / 60,
    ),
    ("0.03 m/s/√h", "velocity_random_walk", "0.03 meter / second / hour**0.5", 0.03 / 60),
    ("25 µg", "acceleration", "25e-6 standard_gravity", 25e-6 * ref.STANDARD_GRAVITY),
    ("2 °/h/√h", "rate_random_walk", "2 degree / hour / hour**0.5", 2 * ref.DEG_PER_H_PER_RT_H),
    ("100 ppm", "dimensionless", "100 ppm", 100e-6),
    # 1 °/h² = (1 °/h)/3600 s
    ("0.5 °/h²", "angular_rate_ramp", "0.5 degree / hour**2", 0.5 * ref.DEG_PER_H / 3600),
    ("1.5 ×10^-3 °/h", "angular_rate", "1.5e-3 degree / hour", 1.5e-3 * ref.DEG_PER_H),
    ("1.5 x 10^-3 °/h", "angular_rate", "1.5e-3 degree / hour", 1.5e-3 * ref.DEG_PER_H),
    ("1.5·10⁻³ °/h", "angular_rate", "1.5e-3 degree / hour", 1.5e-3 * ref.DEG_PER_H),
    ("1.5e-3 °/h", "angular_rate", "1.5e-3 degree / hour", 1.5e-3 * ref.DEG_PER_H),
]
TYPO_IDS = [t[0] for t in TYPOGRAPHY]


@pytest.mark.parametrize(("text", "kind", "plain", "expected"), TYPOGRAPHY, ids=TYPO_IDS)
def test_typography_against_published_conversions(text, kind, plain, expected):
    # REFERENCES §10 values carry 7 significant digits: half a unit of the 7th is at most
    # 5e-7 relative. (Exact values, g_n and ppm, pass with the same bound.)
    assert parse_quantity(text, kind) == pytest.approx(expected, rel=5e-7)


@pytest.mark.parametrize(("text", "kind", "plain", "expected"), TYPOGRAPHY, ids=TYPO_IDS)
def test_typography_against_plain_pint(text, kind, plain, expected):
    # pint as the reference library: radians dimensionless there, so "deg/h" -> "rad/s" is
    # a pure scale factor; standard gravity spelled out (pint's `standard_gravity`).
    reference = PLAIN.Quantity(plain).to(PLAIN_SI[kind]).magnitude
    assert parse_quantity(text, kind) == pytest.approx(reference, rel=1e-12)


def test_reference_transcriptions_match_closed_forms():
    # The reference module's printed digits against the formulas they come from.
    assert ref.DEG_PER_RT_H == pytest.approx(math.radians(1) / 60, rel=ref.digits_rtol(2.908882e-4))
    assert ref.DEG_PER_H == pytest.approx(math.radians(1) / 3600, rel=ref.digits_rtol(4.848137e-6))
    assert ref.DEG_PER_H_PER_RT_H == pytest.approx(
        math.radians(1) / 3600**1.5, rel=ref.digits_rtol(8.080228e-8)
    )
    assert ref.UG_PER_RT_HZ_IN_M_S_PER_RT_H == pytest.approx(
        1e-6 * ref.STANDARD_GRAVITY * 60, rel=ref.digits_rtol(5.88399e-4)
    )
    assert ref.MG_PER_RT_HZ_IN_M_S_PER_RT_H == pytest.approx(
        1e-3 * ref.STANDARD_GRAVITY * 60, rel=ref.digits_rtol(0.588399)
    )


def test_style_pin_deg_per_root_hour():
    # The style notes' pin: "0.15 deg/hour**0.5" -> 4.3633e-05 rad/s**0.5 (5 digits printed).
    text, value = ref.STYLE_PIN
    assert parse_quantity(text, "angle_random_walk") == pytest.approx(
        value, rel=ref.digits_rtol(value)
    )


def test_standard_gravity_is_the_cgpm_value():
    # 3rd CGPM (1901) / NIST SP 330: g_n = 9.80665 m/s² exactly; scipy and pint agree.
    assert STANDARD_GRAVITY == ref.STANDARD_GRAVITY
    assert scipy.constants.g == ref.STANDARD_GRAVITY
    assert PLAIN.Quantity(1, "standard_gravity").to("m/s**2").magnitude == ref.STANDARD_GRAVITY
    assert parse_quantity("1 g", "acceleration") == ref.STANDARD_GRAVITY
    assert parse_quantity("1 mg", "acceleration") == pytest.approx(1e-3 * ref.STANDARD_GRAVITY)
    assert parse_quantity("2 ng", "acceleration") == pytest.approx(2e-9 * ref.STANDARD_GRAVITY)
    # pint's own names for g_n (digits inside a unit name are not stray numbers)
    assert parse_quantity("1 g0", "acceleration") == ref.STANDARD_GRAVITY
    assert parse_quantity("1 g_n", "acceleration") == ref.STANDARD_GRAVITY


def test_micro_g_is_not_micrograms():
    # The pitfall: pint's default registry reads "25 ug" as 25 micrograms (a mass).
    assert PLAIN.Quantity("25 ug").dimensionality == PLAIN.Quantity("1 kg").dimensionality
    assert PLAIN.Quantity("25 ug").to("kg").magnitude == pytest.approx(25e-9)
    # A datasheet means 25 micro-g (standard gravity) in an acceleration field ...
    assert parse_quantity("25 µg", "acceleration") == pytest.approx(
        25e-6 * ref.STANDARD_GRAVITY, rel=1e-12
    )
    assert parse_quantity("60 µg/√Hz", "velocity_random_walk") == pytest.approx(
        60e-6 * ref.STANDARD_GRAVITY, rel=1e-12
    )
    # ... and grams stay grams elsewhere, so they fail the dimension check, saying why.
    with pytest.raises(
        UnitError, match=r"gyro\.bias_instability: got 'µg' \(mass\) \('g' is read as grams"
    ):
        parse_quantity("25 µg", "angular_rate", field="gyro.bias_instability")
    # A pint quantity in micrograms (plain registry) is refused, not re-read as micro-g.
    with pytest.raises(
        UnitError, match=r"accelerometer\.bias_instability: got the quantity 25 µg \(mass\)"
    ):
        parse_quantity(
            PLAIN.Quantity(25, "ug"), "acceleration", field="accelerometer.bias_instability"
        )


def test_angle_is_a_dimension():
    # In pint's default registry, deg/s converts to Hz without complaint (radian = []) ...
    assert PLAIN.Quantity(1, "deg/s").to("Hz").magnitude == pytest.approx(math.pi / 180)
    # ... in ours, angle is a base dimension, so a rate is not a frequency.
    assert UREG.Quantity(1, "rad").dimensionality == {"[angle]": 1}
    with pytest.raises(
        UnitError, match=r"sensor\.sample_rate: got 'deg/s' \(angle / time\)"
    ):
        parse_quantity("1 deg/s", "frequency", field="sensor.sample_rate")
    with pytest.raises(UnitError, match=r"got 'Hz' \(1 / time\)"):
        parse_quantity("0.1 Hz", "angular_rate")


def test_trade_rule_arw_is_60_times_density():
    # "ARW [°/√h] = 60 x density [°/s/√Hz]" and "= density [°/h/√Hz] / 60" (common practice,
    # two-sided density; REFERENCES §0/§10).
    arw = parse_quantity("0.15 deg/rt-h", "angle_random_walk")
    assert parse_quantity("0.0025 deg/s/rtHz", "angle_random_walk") == pytest.approx(arw, rel=1e-12)
    assert parse_quantity("9 deg/h/rtHz", "angle_random_walk") == pytest.approx(arw, rel=1e-12)


def test_worked_example_adev_to_arw():
    # REFERENCES §10 worked example ("common practice"): white noise with ADEV(1 s) = 15 °/h
    # has N = ADEV(1 s)·√(1 s) (IEEE Std 952 Annex C: sigma(tau) = N/√tau), i.e. 0.25 °/√h,
    # i.e. 0.0042 °/s/√Hz as printed (2 digits).
    ex = ref.WORKED_EXAMPLE
    n = parse_quantity(f"{ex['adev_1s_deg_per_h']} deg/h", "angular_rate") * math.sqrt(1.0)
    assert convert_from_si(n, "angle_random_walk", "deg/rt-h") == pytest.approx(
        ex["arw_deg_per_rt_h"], rel=1e-12
    )
    density = ex["density_deg_per_s_per_rt_hz"]
    assert convert_from_si(n, "angle_random_walk", "deg/s/rtHz") == pytest.approx(
        density, rel=ref.digits_rtol(density)
    )


# ---- refusals -------------------------------------------------------------------------------

WHERE = r"sheet\.toml:gyro\.angle_random_walk: "
REFUSALS = [
    (
        "0.1 1/sqrt(h)",
        WHERE + r"got '1/sqrt\(h\)' \(1 / √time\); expected an angle random walk",
    ),
    ("0.1 deg/s", WHERE + r"got 'deg/s' \(angle / time\); expected an angle random walk"),
    (0.15, WHERE + r"got the bare number 0\.15 with no unit; expected an angle random walk"),
    (15, WHERE + r"got the bare number 15 with no unit"),
    ("0.15", WHERE + r"'0\.15' has no unit; expected an angle random walk .* with its unit"),
    ("1e-3", WHERE + r"'1e-3' has no unit"),
    ("-0.15 deg/rt-h", WHERE + r"'-0\.15 deg/rt-h' is negative; expected a non-negative"),
    ("1e999 deg/rt-h", WHERE + r"'1e999 deg/rt-h' is not finite; expected a finite value"),
    ("nan deg/rt-h", WHERE + r"'nan deg/rt-h' is not finite"),
    ("-inf deg/rt-h", WHERE + r"'-inf deg/rt-h' is not finite"),
    ("0.15 blorp/rt-h", WHERE + r"cannot read the unit 'blorp/rt-h' \(unknown unit 'blorp'\)"),
    ("0.15 deg/rt-h/", WHERE + r"cannot read the unit 'deg/rt-h/' \(not a unit expression\)"),
    ("0.15 deg/rt-h3", WHERE + r"cannot read the unit 'deg/rt-h3' \(unknown unit 'h3'\)"),
    ("0.15 (deg/rt-h", WHERE + r"cannot read the unit '\(deg/rt-h' \(not a unit expression\)"),
    # stray numbers or operators would otherwise be silent arithmetic in pint
    ("0.15 3 deg/rt-h", WHERE + r"cannot read the unit '3 deg/rt-h' \(unexpected '3'\)"),
    ("0.15 deg/rt-h + 1", WHERE + r"cannot read the unit 'deg/rt-h \+ 1' \(unexpected '\+'\)"),
    ("0.15 deg/rt-h = 2", WHERE + r"cannot read the unit 'deg/rt-h = 2' \(unexpected '='\)"),
    ("1,500 deg/rt-h", WHERE + r"cannot read the unit ',500 deg/rt-h' \(unexpected ','\)"),
    ("", WHERE + r"cannot read '' as a number followed by a unit"),
    ("deg/rt-h", WHERE + r"cannot read 'deg/rt-h' as a number followed by a unit"),
    (None, WHERE + r"got NoneType None; expected a text such as '0\.15 deg/rt-h'"),
    (True, WHERE + r"got bool True"),
]


@pytest.mark.parametrize(("value", "match"), REFUSALS, ids=[repr(v) for v, _ in REFUSALS])
def test_refusals_name_the_field(value, match):
    with pytest.raises(UnitError, match=match) as info:
        parse_quantity(
            value, "angle_random_walk", field="gyro.angle_random_walk", source="sheet.toml"
        )
    assert "\n" not in str(info.value)
    assert info.value.field == "gyro.angle_random_walk"
    assert info.value.source == "sheet.toml"


def test_negative_and_zero_options():
    assert parse_quantity("-2 deg/h", "angular_rate", allow_negative=True) == pytest.approx(
        -2 * ref.DEG_PER_H, rel=ref.digits_rtol(ref.DEG_PER_H)
    )
    assert parse_quantity("0 Hz", "frequency") == 0.0
    with pytest.raises(
        UnitError, match=r"sensor\.sample_rate: '0 Hz' is zero; expected a positive"
    ):
        parse_quantity("0 Hz", "frequency", field="sensor.sample_rate", allow_zero=False)


def test_dimensionless_accepts_a_bare_number():
    assert parse_quantity(100, "dimensionless") == 100.0
    assert parse_quantity("5 %", "dimensionless") == pytest.approx(0.05, rel=1e-12)


def test_pint_quantity_input():
    q = UREG.Quantity(0.15, "deg/hour**0.5")
    assert parse_quantity(q, "angle_random_walk") == pytest.approx(
        0.15 * ref.DEG_PER_RT_H, rel=2e-7
    )


def test_unknown_kind_is_a_programming_error():
    with pytest.raises(ValueError, match="unknown quantity kind 'speed'"):
        parse_quantity("1 m/s", "speed")


# ---- the smaller helpers --------------------------------------------------------------------


@pytest.mark.parametrize(
    ("printed", "pint_text"),
    [
        ("°/√h", "degree / hour ** 0.5"),
        ("deg/rt-hr", "degree / hour ** 0.5"),
        ("deg/sqrt(h)", "degree / hour ** 0.5"),
        ("mdps/√Hz", "millidegree / second / hertz ** 0.5"),
        ("°/h/√h", "degree / hour ** 1.5"),
        ("°/h²", "degree / hour ** 2"),
        ("deg/hr/sqrt(hr)", "degree / hour ** 1.5"),
        ("°/(h·√Hz)", "degree / hour / hertz ** 0.5"),
        ("dph", "degree / hour"),
        ("°/√h²", "degree / hour"),  # a power after a root applies to the root
    ],
)
def test_normalize_unit_reads_as_pint_would(printed, pint_text):
    ours = UREG.parse_expression(normalize_unit(printed)).to_base_units()
    theirs = UREG.parse_expression(pint_text).to_base_units()
    assert ours.units == theirs.units
    assert ours.magnitude == pytest.approx(theirs.magnitude, rel=1e-12)


def test_normalize_unit_gee_only_in_acceleration_fields():
    accel = UREG.parse_expression(normalize_unit("µg/rtHz", acceleration=True))
    mass = UREG.parse_expression(normalize_unit("µg/rtHz"))
    assert "[mass]" not in str(accel.dimensionality)
    assert "[mass]" in str(mass.dimensionality)
    assert accel.to("m/s**1.5").magnitude == pytest.approx(1e-6 * ref.STANDARD_GRAVITY, rel=1e-12)


@pytest.mark.parametrize(
    ("unit", "kind", "factor", "rel"),
    [
        ("deg/s", "angular_rate", math.pi / 180, 1e-15),
        ("deg/h", "angular_rate", ref.DEG_PER_H, 5e-7),  # REFERENCES §10, 7 digits
        ("deg/rt-h", "angle_random_walk", ref.DEG_PER_RT_H, 5e-7),  # REFERENCES §10, 7 digits
        ("mg", "acceleration", 1e-3 * ref.STANDARD_GRAVITY, 1e-15),  # CGPM 1901
        ("kHz", "frequency", 1e3, 1e-15),
        ("urad", "angle", 1e-6, 1e-15),
    ],
)
def test_parse_unit_factor(unit, kind, factor, rel):
    assert parse_unit_factor(unit, kind) == pytest.approx(factor, rel=rel)


def test_parse_unit_factor_refuses_wrong_dimension():
    with pytest.raises(UnitError, match=r"gyro\.x: got 'mg' \(mass\)"):
        parse_unit_factor("mg", "angular_rate", field="gyro.x")


@pytest.mark.parametrize(("text", "kind", "plain", "expected"), TYPOGRAPHY, ids=TYPO_IDS)
def test_convert_from_si_inverts_parse(text, kind, plain, expected):
    number, unit = split_value(text)
    si = parse_quantity(text, kind)
    assert convert_from_si(si, kind, unit) == pytest.approx(number, rel=1e-12)


@pytest.mark.parametrize(
    ("text", "number", "unit"),
    [
        ("0.15 °/√h", 0.15, "°/√h"),
        ("1.5 ×10^-3 °/h", 1.5e-3, "°/h"),
        ("1.5·10⁻³ °/h", 1.5e-3, "°/h"),
        ("−2e3 Hz", -2e3, "Hz"),
        ("25µg", 25.0, "µg"),
    ],
)
def test_split_value(text, number, unit):
    n, u = split_value(text)
    assert n == pytest.approx(number, rel=1e-15)
    assert u == unit


def test_split_value_refuses_text_without_number():
    with pytest.raises(UnitError, match="cannot read 'deg/h' as a number followed by a unit"):
        split_value("deg/h")


@pytest.mark.parametrize(
    ("unit", "kind"),
    [
        ("rad/s", "angular_rate"),
        ("(rad/s)*s**0.5", "angle_random_walk"),
        ("(rad/s)/s**0.5", "rate_random_walk"),
        ("(rad/s)*s", "angle"),
        ("(m/s^2)*s**0.5", "velocity_random_walk"),
        ("(m/s^2)/s**0.5", "acceleration_random_walk"),
        ("(m/s^2)*s", "velocity"),
        ("Hz", "frequency"),
        ("s", "time"),
    ],
)
def test_kind_of(unit, kind):
    assert kind_of(unit) == kind


def test_kind_of_refuses_unknown_dimension():
    with pytest.raises(UnitError, match="no known kind of quantity has the unit 'kg'"):
        kind_of("kg")


@pytest.mark.parametrize("kind", sorted(KINDS))
def test_every_kind_example_and_display_unit_parses(kind):
    # The examples appear in error messages and the display units in reports: both must read
    # back as their own kind.
    info = KINDS[kind]
    assert math.isfinite(parse_quantity(info.example, kind))
    unit, _label = DISPLAY_UNITS[kind]
    if unit:
        assert parse_unit_factor(unit, kind) > 0


def test_format_value():
    assert format_value(0.0, "Hz") == "0 Hz"
    assert format_value(1234.5678, "Hz") == "1235 Hz"
    assert format_value(4.3633231e-05) == "4.363e-05"


@pytest.mark.parametrize(
    ("dim", "words"),
    [
        ("[mass] * [time] ** 0.5", "mass × √time"),
        ("[angle] / [time]", "angle / time"),
        ("[angle] / [time] ** 1.5", "angle / time^1.5"),
        ("[length] / [time] ** 2", "length / time²"),
        ("1 / [time]", "1 / time"),
        ("", "a plain number"),
    ],
)
def test_dimensions_in_words(dim, words):
    # Messages once showed pint's syntax ("[mass] * [time] ** 0.5"): words instead.
    assert dimension_words(dim) == words


def test_wrong_dimension_message_in_words():
    with pytest.raises(UnitError, match=r"got 'mg/rtHz' \(mass × √time\)"):
        parse_quantity("25 mg/rtHz", "angular_rate", field="gyro.x")
