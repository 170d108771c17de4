"""Error growth over a horizon: the propagated covariance against the closed forms of the
inertial-error literature (REFERENCES §12: Var ∫W = t³/3, Var ∫∫W = t⁵/20; Woodman,
UCAM-CL-TR-696, 2007) and against seeded simulations."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from sensormodel import NoiseModel, build_model
from sensormodel._io import validate
from sensormodel.drift import channel_drift, closed_form, default_times, drift, table_times
from sensormodel.errors import AnalysisError
from sensormodel.model import Channel
from sensormodel.terms import (
    DEFAULT_LONGEST_TIME,
    Flicker,
    GaussMarkov,
    Quantization,
    Ramp,
    RandomConstant,
    RandomWalk,
    White,
)

T = np.array([0.5, 3.0, 60.0, 600.0, 3600.0])


def _gyro(*terms, rate=100.0):
    return Channel(
        id="gyro.x", quantity="angular_rate", unit="rad/s", sample_rate=rate, terms=tuple(terms)
    )


def _accel(*terms, rate=100.0):
    return Channel(
        id="accelerometer.x",
        quantity="acceleration",
        unit="m/s^2",
        sample_rate=rate,
        terms=tuple(terms),
    )


# --- closed forms of REFERENCES §12 -----------------------------------------------------------


@pytest.mark.parametrize(
    ("term", "angle"),
    [
        (White(3e-6), lambda t: 3e-6 * np.sqrt(t)),  # ARW: N √t
        (RandomWalk(2e-8), lambda t: 2e-8 * t**1.5 / math.sqrt(3)),  # RRW: K t^(3/2)/√3
        (RandomConstant(5e-6), lambda t: 5e-6 * t),  # constant gyro bias: b t
        (Ramp(1e-9), lambda t: 1e-9 * t**2 / 2),  # ramp: R t²/2 (derived)
    ],
    ids=lambda x: getattr(x, "type", ""),
)
def test_gyro_angle_growth_closed_forms(term, angle):
    d = channel_drift(_gyro(term), 3600.0, times=T)
    assert_allclose(d.values["angle"], angle(T), rtol=1e-9)


@pytest.mark.parametrize(
    ("term", "velocity", "position"),
    [
        # VRW: σ_v = VRW √t, σ_p = VRW t^(3/2)/√3
        (White(3e-4), lambda t: 3e-4 * np.sqrt(t), lambda t: 3e-4 * t**1.5 / math.sqrt(3)),
        # acceleration random walk: K t^(3/2)/√3 and K t^(5/2)/√20 (Var ∫∫W = t⁵/20)
        (
            RandomWalk(1e-6),
            lambda t: 1e-6 * t**1.5 / math.sqrt(3),
            lambda t: 1e-6 * t**2.5 / math.sqrt(20),
        ),
        # constant accelerometer bias: b t and b t²/2
        (RandomConstant(2e-3), lambda t: 2e-3 * t, lambda t: 2e-3 * t**2 / 2),
    ],
    ids=lambda x: getattr(x, "type", ""),
)
def test_accelerometer_velocity_position_closed_forms(term, velocity, position):
    d = channel_drift(_accel(term), 3600.0, times=T)
    assert_allclose(d.values["velocity"], velocity(T), rtol=1e-9)
    assert_allclose(d.values["position"], position(T), rtol=1e-9)


def test_gauss_markov_growth_against_double_quadrature():
    # Derived closed forms checked independently: Var ∫₀ᵗ x = ∫∫ σ² e^(−|u−v|/T) du dv and
    # Var ∫₀ᵗ (t − u) x(u) du, by scipy quadrature, and against the propagated covariance.
    from scipy.integrate import dblquad

    sigma, tc = 2e-4, 50.0
    ch = _accel(GaussMarkov(sigma, tc))
    t = np.array([5.0, 80.0, 400.0])
    d = channel_drift(ch, 400.0, times=t)

    def cov(u, v):
        return sigma**2 * math.exp(-abs(u - v) / tc)

    for i, ti in enumerate(t):
        # the integrand has a kink on u = v: integrate the triangle u < v and double it
        v1 = 2 * dblquad(cov, 0, ti, 0, lambda v: v, epsrel=1e-11)[0]
        weight = lambda u, v, ti=ti: (ti - u) * (ti - v) * cov(u, v)  # noqa: E731
        v2 = 2 * dblquad(weight, 0, ti, 0, lambda v: v, epsrel=1e-11)[0]
        assert d.values["velocity"][i] ** 2 == pytest.approx(v1, rel=1e-9)
        assert d.values["position"][i] ** 2 == pytest.approx(v2, rel=1e-9)
        assert d.closed_form["position"][i] == pytest.approx(d.values["position"][i], rel=1e-9)


def test_flicker_drift_uses_a_band_reaching_the_horizon():
    # Integrated 1/f noise depends on its lowest frequency: the realization's longest time is
    # widened to the horizon; propagated covariance and the sum of its GM closed forms agree.
    horizon = 10 * DEFAULT_LONGEST_TIME
    ch = _gyro(Flicker(1e-6))
    d = channel_drift(ch, horizon, points=40)
    assert_allclose(d.values["angle"], d.closed_form["angle"], rtol=1e-9)
    wide = Flicker(1e-6, longest_time=horizon).realization(sample_rate=100.0)
    assert wide.time_constants[-1] == pytest.approx(horizon)
    per_term = closed_form(ch, d.time, horizon=horizon)["flicker"]["angle"]
    assert_allclose(np.sqrt(per_term), d.values["angle"], rtol=1e-9)


# --- seeded simulations ----------------------------------------------------------------------


def test_angle_from_white_rate_samples_simulated():
    # REFERENCES §12 discrete check: white rate samples of std N·√fs, summed × dt, give
    # var(θ_k) = N² k dt. M independent runs: (M−1) s²/σ² ~ χ²(M−1); two-sided 1e-4 bounds.
    rng = np.random.default_rng(12)
    N, fs, k, M = 3e-6, 100.0, 50, 4000
    samples = rng.normal(0.0, N * math.sqrt(fs), size=(M, k))
    theta = np.cumsum(samples, axis=1) / fs
    expected = channel_drift(_gyro(White(N), rate=fs), k / fs, times=[k / fs]).values["angle"][0]
    assert expected**2 == pytest.approx(N**2 * k / fs, rel=1e-12)
    s2 = np.var(theta[:, -1], ddof=1)
    lo, hi = stats.chi2.ppf([5e-5, 1 - 5e-5], M - 1) / (M - 1)
    assert lo < s2 / expected**2 < hi


def test_quantization_angle_error_simulated():
    # Angle from summed quantized increments carries e(t) − e(0): variance 2Q² (Q = s/√12),
    # bounded in time (derived). Seeded: M runs, χ² bounds as above.
    rng = np.random.default_rng(13)
    s, M, n = 1e-6, 4000, 30
    theta = np.cumsum(rng.uniform(0, 100 * s, size=(M, n)), axis=1)
    quantized = np.round(theta / s) * s
    err = (quantized[:, -1] - quantized[:, 0]) - (theta[:, -1] - theta[:, 0])
    q = Quantization(s / math.sqrt(12))
    expected = channel_drift(_gyro(q), 10.0, times=[0.0, 1.0, 10.0]).values["angle"]
    assert expected[0] == 0.0
    assert_allclose(expected[1:] ** 2, 2 * q.coefficient**2, rtol=1e-12)
    lo, hi = stats.chi2.ppf([5e-5, 1 - 5e-5], M - 1) / (M - 1)
    assert lo < np.var(err, ddof=1) / expected[-1] ** 2 < hi


# --- every example model -----------------------------------------------------------------------


def test_drift_on_example_models(example_datasheet):
    model = build_model(example_datasheet)
    result = drift(model, 3600.0, points=30)
    assert [c.id for c in result.channels] == model.channel_ids
    for c in result.channels:
        assert set(c.values) == (
            {"angle"} if c.quantity == "angular_rate" else {"velocity", "position"}
        )
        for k, v in c.values.items():
            assert np.all(np.diff(v) >= 0) and np.all(np.isfinite(v))
            assert_allclose(v, c.closed_form[k], rtol=1e-8)
        assert set(table_times(3600.0)) <= set(c.time.tolist())
    doc = result.to_dict()
    validate(doc, "drift.schema.json")
    assert doc["schema"] == "sensormodel/drift/1" and "customer's contract" in doc["caution"]


def test_time_grid_and_refusals():
    assert table_times(3600.0) == [1.0, 10.0, 60.0, 600.0, 3600.0]
    assert table_times(0.5) == [0.05, 0.5]
    t = default_times(10.0, sample_rate=400.0, points=11)  # starts at one sample period
    assert t[0] == pytest.approx(1 / 400.0) and t[-1] == 10.0 and np.all(np.diff(t) > 0)
    assert default_times(100.0, sample_rate=400.0, points=11)[0] == pytest.approx(0.01)
    with pytest.raises(AnalysisError, match="horizon"):
        drift(NoiseModel(sensor={}, channels=(_gyro(White(1.0)),)), -1.0)
    recorded = Channel(
        id="col", quantity="as_recorded", unit="1", sample_rate=10.0, terms=(White(1.0),)
    )
    with pytest.raises(AnalysisError, match="no gyro or accelerometer"):
        drift(NoiseModel(sensor={}, channels=(recorded,)), 10.0)
    both = drift(NoiseModel(sensor={}, channels=(recorded, _gyro(White(1.0)))), 10.0, points=5)
    assert both.skipped == ("col",)
    # the grid keywords are channel_drift's, passed through unchanged
    grid = [0.0, 1.0, 5.0, 10.0]
    given = drift(NoiseModel(sensor={}, channels=(_gyro(White(1.0)),)), 10.0, times=grid)
    alone = channel_drift(_gyro(White(1.0)), 10.0, times=grid)
    assert given.channels[0].time.tolist() == grid
    assert_allclose(given.channels[0].values["angle"], alone.values["angle"], rtol=0, atol=0)
    with pytest.raises(AnalysisError, match="channel col has quantity 'as_recorded'"):
        closed_form(recorded, grid)
    with pytest.raises(TypeError, match="points_per_decade"):
        drift(NoiseModel(sensor={}, channels=(_gyro(White(1.0)),)), 10.0, points_per_decade=3)


def test_a_term_left_out(examples_dir):
    # The turn-on bias calibrated at the start: left out, the angle error is the other terms'
    # alone. Hand check (closed forms, REFERENCES §12): a random constant σ grows as σ·t, so
    # with it the 10 min angle of a bias repeatability of 0.2 °/s is ≥ 120°.
    model = build_model(examples_dir / "bw-m200.toml")
    full = drift(model, 600.0, times=[600.0])
    calibrated = drift(model, 600.0, times=[600.0], without=["random_constant"])
    assert calibrated.without == ("random_constant",)
    g_full = full.channels[0].values["angle"][0]
    g_cal = calibrated.channels[0].values["angle"][0]
    assert math.degrees(g_full) >= 0.2 * 600.0
    rest = [t for t in model.channels[0].terms if t.type != "random_constant"]
    alone = channel_drift(replace(model.channels[0], terms=tuple(rest)), 600.0, times=[600.0])
    assert g_cal == pytest.approx(alone.values["angle"][0], rel=1e-12)
    assert g_cal < g_full / 50
    doc = calibrated.to_dict()
    validate(doc, "drift.schema.json")
    assert doc["without"] == ["random_constant"]
    # the per-term curves are in the JSON: each term's own closed-form 1σ
    terms = doc["channels"][0]["terms"]
    assert "random_constant" not in terms and "white" in terms
    white = calibrated.channels[0].contributions["white"]["angle"]
    assert terms["white"]["angle"] == white.tolist()
    with pytest.raises(AnalysisError, match="unknown term 'bias'"):
        drift(model, 600.0, without=["bias"])


def test_drift_figure_has_no_empty_panel(examples_dir):
    # one panel per integrated quantity, flowing over the columns: 3 gyros (angle) and
    # 3 accelerometers (velocity, position) make 9 panels in 3 × 3, none empty
    from sensormodel import plots

    model = build_model(examples_dir / "bw-m200.toml")
    fig = plots.drift_figure(drift(model, 60.0, points=5))
    axes = fig.get_axes()
    assert len(axes) == 9 and all(ax.axison and ax.lines for ax in axes)
    gyro_only = drift(model.select(["gyro.x", "gyro.y"]), 60.0, points=5)
    axes = plots.drift_figure(gyro_only).get_axes()
    assert len(axes) == 2 and all(ax.lines for ax in axes)
