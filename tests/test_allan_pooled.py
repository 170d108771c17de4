"""The Allan variance pooled over the clean segments of a record with gaps
(:func:`sensormodel.allan.overlapping_pooled`).

Checked against the engine on one segment (the same estimator), against the segments analysed
apart (the pooled sum is their cluster-weighted mean, its EDF Satterthwaite's of theirs), and
against the same seeded process without gaps (the issue's target: the pooled deviation within
the unbroken record's 68 % interval at ≥ 90 % of τ).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from identify_records import flicker, white
from realistic_records import GYRO, RATE

from sensormodel.allan import overlapping, overlapping_pooled
from sensormodel.errors import AnalysisError


def _record(seed: int, n: int) -> np.ndarray:
    """White + flicker of the industrial MEMS gyro of tests/realistic_records.py [rad/s]."""
    rng = np.random.default_rng(seed)
    return white(rng, n, RATE, GYRO.white) + flicker(rng, n, RATE, GYRO.flicker)


def test_one_segment_is_the_engine_curve():
    y = _record(1, 200_000)
    a = overlapping(y, RATE)
    b = overlapping_pooled([y], RATE)
    np.testing.assert_allclose(b.adev, a.adev, rtol=1e-12)
    np.testing.assert_array_equal(b.noise_alpha, a.noise_alpha)
    np.testing.assert_allclose(b.edf, a.edf, rtol=1e-12)
    np.testing.assert_array_equal(b.n_clusters, a.n_clusters)
    assert b.n_samples == a.n_samples


def test_segments_apart_weighted_by_their_clusters():
    y = _record(2, 150_000)
    parts = [y[:40_000], y[41_000:100_000], y[100_100:150_000]]
    taus = [0.01, 0.1, 1.0, 10.0, 100.0]
    pooled = overlapping_pooled(parts, RATE, taus=taus, noise_type=0)
    apart = [overlapping(p, RATE, taus=taus, noise_type=0) for p in parts]
    weights = np.array([c.n_clusters for c in apart], dtype=float)
    avar = np.sum(weights * np.array([c.adev**2 for c in apart]), axis=0) / weights.sum(axis=0)
    np.testing.assert_allclose(pooled.adev, np.sqrt(avar), rtol=1e-12)
    np.testing.assert_array_equal(pooled.n_clusters, weights.sum(axis=0).astype(int))
    # Satterthwaite (1946): (Σ M)² / Σ (M²/ν), never above Σ ν
    edf = weights.sum(axis=0) ** 2 / np.sum(weights**2 / np.array([c.edf for c in apart]), axis=0)
    np.testing.assert_allclose(pooled.edf, edf, rtol=1e-12)
    assert np.all(pooled.edf <= np.sum([c.edf for c in apart], axis=0) * (1 + 1e-12))


def test_short_segments_add_no_cluster_at_long_tau():
    y = _record(3, 60_000)
    parts = [y[:50_000], y[50_050:50_150]]  # the second: 100 samples, 1 s
    pooled = overlapping_pooled(parts, RATE, taus=[0.01, 0.5, 10.0], noise_type=0)
    # the short one holds 99 clusters at m = 1, one (fewer than two: none) at m = 50
    assert pooled.n_clusters.tolist() == [50_001 - 2 + 101 - 2, 50_001 - 100, 50_001 - 2000]
    alone = overlapping(parts[0], RATE, taus=[10.0], noise_type=0)
    assert pooled.adev[-1] == pytest.approx(alone.adev[0], rel=1e-12)


def test_a_level_shift_across_a_gap_does_not_enter():
    """A bump between two segments shifts the level; no cluster spans it."""
    y = _record(4, 120_000)
    shifted = [y[:60_000], y[61_000:] + 50.0 * GYRO.floor]
    pooled = overlapping_pooled(shifted, RATE, noise_type=0)
    clean = overlapping_pooled([y[:60_000], y[61_000:]], RATE, noise_type=0)
    np.testing.assert_allclose(pooled.adev, clean.adev, rtol=1e-9)
    joined = overlapping(np.concatenate(shifted), RATE, noise_type=0)
    assert joined.adev[-3] > 3.0 * pooled.adev[-3]  # the joined record sees the step


def test_pooled_within_the_unbroken_interval():
    """Gaps of 1 s, 10 s, 1 min and 10 min cut out of 2 h records; the pooled deviation must
    lie within the unbroken record's 68 % interval at ≥ 90 % of the octave τ the segments
    reach (the issue's target), counted over four seeded records (17 τ each: one record alone
    cannot show a 90 % rate). The longest τ, where the pooled estimate keeps about half the
    clusters, are where it departs (measured: 66 of 68 inside)."""
    n = int(2 * 3600 * RATE)
    cuts = [(50_000, 50_100), (200_000, 201_000), (330_000, 336_000), (420_000, 480_000)]
    edges = [0] + [i for cut in cuts for i in cut] + [n]
    inside = []
    for seed in (11, 12, 13, 14):
        y = _record(seed, n)
        parts = [y[edges[i] : edges[i + 1]] for i in range(0, len(edges), 2)]
        pooled = overlapping_pooled(parts, RATE)
        unbroken = overlapping(y, RATE, taus=pooled.tau)
        inside.extend((pooled.adev >= unbroken.ci_low) & (pooled.adev <= unbroken.ci_high))
        # fewer EDF where clusters were lost, never fewer than the longest segment's alone
        longest = overlapping(max(parts, key=len), RATE, taus=pooled.tau)
        assert np.all(pooled.edf >= longest.edf * (1 - 1e-9))
        same = pooled.noise_alpha == unbroken.noise_alpha  # the EDF depends on the type
        assert np.all(pooled.edf[same] <= unbroken.edf[same] * 1.05)
    assert np.mean(inside) >= 0.9, (np.sum(inside), len(inside))


def test_increments_as_rates():
    y = _record(5, 30_000)
    parts = [y[:10_000], y[10_500:]]
    a = overlapping_pooled(parts, RATE, taus=[0.01, 1.0], noise_type=0)
    b = overlapping_pooled([p / RATE for p in parts], RATE, taus=[0.01, 1.0], noise_type=0,
                           increments=True)  # fmt: skip
    np.testing.assert_allclose(b.adev, a.adev, rtol=1e-10)


def test_refusals():
    y = _record(6, 5_000)
    with pytest.raises(AnalysisError, match="no segments"):
        overlapping_pooled([], RATE)
    with pytest.raises(AnalysisError, match="one array"):
        overlapping_pooled(np.zeros((3, 100)), RATE)
    with pytest.raises(AnalysisError, match="τ"):
        overlapping_pooled([y[:1000], y[2000:3000]], RATE, taus=[math.ceil(600 / RATE)])
    bad = y.copy()
    bad[10] = np.nan
    with pytest.raises(AnalysisError, match="sample 10"):
        overlapping_pooled([y[:2000], bad], RATE)
