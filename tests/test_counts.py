"""counts: the count step of integer-coded records, found from the samples alone."""

from __future__ import annotations

import math

import numpy as np
import pytest

from sensormodel.counts import MAX_EMPTY_RATIO, count_step
from sensormodel.errors import AnalysisError


def _coded(rng: np.random.Generator, n: int, sigma: float, step: float, offset: float = 0.0):
    """Gaussian samples of std ``sigma`` coded as offset + k·step (k an integer)."""
    return offset + np.round((rng.standard_normal(n) * sigma - offset) / step) * step


@pytest.mark.parametrize(
    ("step", "offset"),
    [
        (0.05 * math.pi / 180.0, 0.0),  # 0.05 °/s per count, in rad/s
        (3.33e-3 * 9.80665, 0.37 * 3.33e-3 * 9.80665),  # 3.33 mg per count, offset bias
        (1.0, 1e6 + 0.25),  # large offset against the step (digits of the value lost)
        (7.0 / 3.0, -2.0),
    ],
)
def test_step_found_whatever_offset_and_scale(step, offset):
    rng = np.random.default_rng(3)
    y = _coded(rng, 50_000, 7.0 * step, step, offset)
    found = count_step(y)
    assert found is not None
    # the step from the span: relative error ~1e-16·max|y|/step over ~60 steps
    assert found.step == pytest.approx(step, rel=1e-9)
    assert 0.0 <= found.offset < found.step
    assert math.remainder(offset - found.offset, step) == pytest.approx(0.0, abs=1e-6 * step)
    assert found.levels <= found.span + 1


def test_coarse_and_single_precision_counts():
    rng = np.random.default_rng(4)
    step = 0.05 * math.pi / 180.0
    # a coarse step (about σ): few levels, all occupied
    y = _coded(rng, 20_000, step, step)
    assert count_step(y).step == pytest.approx(step, rel=1e-9)
    # counts scaled in single precision: spacings off by ~1e-7 of the values, within tolerance
    y32 = (np.round(rng.standard_normal(20_000) * 7.0) * np.float32(step)).astype(np.float32)
    assert count_step(y32).step == pytest.approx(step, rel=1e-6)


def test_no_step_claimed_off_a_lattice():
    rng = np.random.default_rng(5)
    # continuous samples: the smallest spacing is tiny, the lattice empty
    assert count_step(rng.standard_normal(10_000)) is None
    # fixed-point text (6 decimals) of a noise far above 1e-6: on a lattice, but a sparse one
    # (more than MAX_EMPTY_RATIO lattice points per distinct value), so no step is claimed
    y = np.round(rng.standard_normal(6000), 6)
    assert count_step(y) is None
    # coded values with one off-lattice value (0.37 of a step; half a step would make a finer
    # lattice of step/2, which the values are then on)
    step = 0.01
    y = _coded(rng, 5000, 0.07, step)
    y[17] += 0.37 * step
    assert count_step(y) is None
    # fewer than three distinct values: two values are always "a lattice"
    assert count_step(np.array([0.0, 1.0, 0.0, 1.0])) is None
    assert count_step(np.full(10, 2.5)) is None
    # non-finite values are ignored
    y = _coded(rng, 5000, 0.07, step)
    y[3] = np.nan
    assert count_step(y).step == pytest.approx(step, rel=1e-9)


def test_occupancy_rule_is_what_refuses_a_sparse_lattice():
    # values on the lattice 0.1·k but only every fifth point used: with spacing 0.5 the
    # smallest gap is the lattice step found, 0.5 (a coarser code of the same values)
    y = 0.1 * 5 * np.arange(-20, 21, dtype=float)
    assert count_step(y).step == pytest.approx(0.5)
    # a lattice point per distinct value beyond the ratio: refused
    k = np.concatenate([[0, 1], np.arange(2, 40) * int(2 * MAX_EMPTY_RATIO)])
    assert count_step(0.1 * k) is None


def test_bad_input_is_refused():
    with pytest.raises(AnalysisError, match="samples"):
        count_step(np.zeros((3, 3)))
    with pytest.raises(AnalysisError, match="samples"):
        count_step(["a", "b"])
