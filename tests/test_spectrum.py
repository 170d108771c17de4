"""Tests of the Welch PSD of recordings (sensormodel.spectrum, section 1).

References: scipy.signal.welch as a reference library (the chunked computation must equal it);
P. D. Welch (1967) and the chi-square scatter of averaged periodograms of Gaussian white noise
(each interior bin of a non-overlapped boxcar estimate from K segments is χ²(2K)/(2K) times the
true PSD); the sidedness convention of the reference notes §0 (white noise of IEEE density N has
one-sided PSD 2N²); Parseval's theorem for the one-sided scaling.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal
from scipy.stats import chi2

from sensormodel import spectrum
from sensormodel.errors import AnalysisError

DENSITY = 1e-3  # IEEE (two-sided) density N [unit/√Hz]
RATE = 100.0


def white(n: int, seed: int) -> np.ndarray:
    # per-sample standard deviation N·√fs for ideal sampling (reference notes §0)
    return np.random.default_rng(seed).normal(0.0, DENSITY * math.sqrt(RATE), n)


def test_white_noise_one_sided_psd_is_2n2_per_bin():
    # Boxcar window, no overlap: each interior bin is 2N²·χ²(2K)/(2K) for K segments, the bins
    # are independent. Every bin must lie in the χ² interval at two-sided level 1 - 1e-3/B for
    # B bins (Bonferroni: all B together fail with probability < 0.1 %).
    y = white(64 * 1024, seed=1)
    p = spectrum.welch(y, RATE, nperseg=1024, noverlap=0, window="boxcar")
    assert p.sided == "one-sided" and p.n_segments == 64
    interior = p.psd[1:-1] / (2 * DENSITY**2)
    B, K = interior.size, p.n_segments
    q = 1e-3 / B
    lo, hi = chi2.ppf(q / 2, 2 * K) / (2 * K), chi2.ppf(1 - q / 2, 2 * K) / (2 * K)
    assert np.all((interior >= lo) & (interior <= hi))
    # the mean over bins is χ²(2KB)/(2KB): its 99.99 % interval is about ±0.8 % here
    lo, hi = (chi2.ppf(p_, 2 * K * B) / (2 * K * B) for p_ in (5e-5, 1 - 5e-5))
    assert lo <= interior.mean() <= hi


def test_white_noise_default_settings():
    # Hann window, 50 % overlap: the overlapped segments are correlated, so the scatter is
    # between that of K/2 and K independent segments; take the conservative χ²(K·B)/(K·B) for
    # the mean over B bins, at 99.99 %.
    y = white(1 << 20, seed=2)
    p = spectrum.welch(y, RATE)
    assert p.nperseg == spectrum.default_nperseg(y.size) == 1 << 17
    assert p.n_segments == 15
    interior = p.psd[1:-1] / (2 * DENSITY**2)
    dof = p.n_segments * interior.size
    lo, hi = (chi2.ppf(q, dof) / dof for q in (5e-5, 1 - 5e-5))
    assert lo <= interior.mean() <= hi
    np.testing.assert_allclose(p.f, np.arange(p.nperseg // 2 + 1) * RATE / p.nperseg)


def test_parseval_one_sided():
    # One-sided scaling: Σ psd·Δf over 0 … fs/2 is the mean square of the samples used
    # (boxcar, no overlap, no detrending; exact up to rounding).
    y = white(10 * 4096 + 17, seed=3) + 0.5
    p = spectrum.welch(y, RATE, nperseg=4096, noverlap=0, window="boxcar", detrend=False)
    used = y[: p.n_segments * 4096]
    assert np.sum(p.psd) * RATE / 4096 == pytest.approx(np.mean(used**2), rel=1e-12)


@pytest.mark.parametrize(
    ("nperseg", "noverlap", "window"),
    [(None, None, "hann"), (1000, 250, "hann"), (512, 0, "boxcar"), (4096, 3072, "blackman")],
)
def test_chunked_equals_scipy_welch(monkeypatch, nperseg, noverlap, window):
    # scipy.signal.welch on the whole record is the reference; a tiny chunk size forces many
    # chunks (and a last, partial one)
    monkeypatch.setattr(spectrum, "_CHUNK_SAMPLES", 5000)
    y = np.cumsum(white(123_457, seed=4))
    p = spectrum.welch(y, RATE, nperseg=nperseg, noverlap=noverlap, window=window)
    f, s = scipy.signal.welch(
        y, fs=RATE, nperseg=p.nperseg, noverlap=noverlap, window=window, detrend="constant"
    )
    np.testing.assert_array_equal(p.f, f)
    np.testing.assert_allclose(p.psd, s, rtol=1e-12)


def test_memmap_input(tmp_path):
    y = white(200_000, seed=5)
    path = tmp_path / "y.f64"
    y.tofile(path)
    mm = np.memmap(path, dtype=np.float64, mode="r")
    np.testing.assert_allclose(
        spectrum.welch(mm, RATE).psd, spectrum.welch(y, RATE).psd, rtol=1e-14
    )


def test_default_segment_lengths():
    assert spectrum.default_nperseg(100) == 100
    assert spectrum.default_nperseg(300) == 256
    assert spectrum.default_nperseg(10**5) == 8192  # largest power of two <= n/8
    assert spectrum.default_nperseg(10**8) == 1 << 20  # capped


def test_log_bins():
    y = white(1 << 18, seed=6)
    p = spectrum.welch(y, RATE, nperseg=1 << 14)
    b = spectrum.log_bins(p, per_decade=10)
    assert b.sided == p.sided and b.n_bins is not None
    assert int(b.n_bins.sum()) == p.f.size - 1  # every positive frequency once, f = 0 dropped
    assert np.all(np.diff(b.f) > 0) and b.f[0] == pytest.approx(p.f[1], rel=1e-14)
    assert np.all(b.n_bins[:3] == 1)  # the sparse low end keeps the Welch points
    # each point is the mean of its bins: total power is kept
    assert np.sum(b.psd * b.n_bins) == pytest.approx(np.sum(p.psd[1:]), rel=1e-12)
    # at most 10 points per decade
    decades = math.log10(p.f[-1] / p.f[1])
    assert b.f.size <= 10 * decades + 1
    with pytest.raises(AnalysisError, match="per_decade"):
        spectrum.log_bins(p, per_decade=0)


@pytest.mark.parametrize(
    ("y", "kwargs", "field", "match"),
    [
        ([], {}, "y", "got 0 sample"),
        ([1.0], {}, "y", "got 1 sample"),
        ([1.0, np.nan, 2.0], {}, "y", "sample 1 is nan"),
        (np.zeros((4, 4)), {}, "y", r"shape \(4, 4\)"),
        (np.zeros(100), {"rate": 0.0}, "rate", "got 0.0 Hz"),
        (np.zeros(100), {"rate": -1.0}, "rate", "got -1.0 Hz"),
        (np.zeros(100), {"nperseg": 200}, "nperseg", "nperseg ≤ 100"),
        (np.zeros(100), {"nperseg": 50, "noverlap": 50}, "noverlap", "noverlap < nperseg = 50"),
    ],
)
def test_bad_input_is_refused_naming_the_argument(y, kwargs, field, match):
    args = {"rate": RATE, **kwargs}
    rate = args.pop("rate")
    with pytest.raises(AnalysisError, match=match) as info:
        spectrum.welch(y, rate, **args)
    assert info.value.field == field
