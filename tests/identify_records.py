"""Independent record generators for the identification tests, written with plain numpy.

Independent of sensormodel's simulators (the bootstrap's and :mod:`sensormodel.simulate`):

* white noise of density N: independent normal samples of standard deviation N·√rate (each
  sample the mean over its period of white noise of two-sided PSD N²; IEEE Std 952-1997
  Annex C: AVAR N²/τ);
* random walk of density K: the cumulative sum of independent normal steps of standard
  deviation K·√dt (AVAR K²τ/3 + K² dt²/(6τ), the last part negligible here);
* flicker of coefficient B: spectral synthesis (random Gaussian Fourier coefficients, J. Timmer
  & M. König, Astron. Astrophys. 300:707-710, 1995) over 8 times the record length of the
  one-sided PSD B²/(πf)·sinc²(f·dt) up to the Nyquist frequency (IEEE Std 952 Annex C 1/f
  spectrum, two-sided B²/(2πf), of which each sample is the period mean); its Allan variance is
  checked in tests/test_identify.py against the exact Annex C form with the cut-off at the
  Nyquist frequency;
* band-limited white noise: white noise through a 1-pole low-pass, by its exact AR(1) steps.

Beside them, the plain overlapping Allan variance (:func:`oavar`) and the check of a mean of
independent estimates against theory (:func:`mean_within`).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.signal import lfilter
from scipy.special import sici

__all__ = [
    "white",
    "random_walk",
    "flicker",
    "flicker_avar",
    "band_limited_white",
    "oavar",
    "mean_within",
]


def white(rng: np.random.Generator, n: int, rate: float, density: float) -> np.ndarray:
    """Period means of white noise of density N [u·√s]: std N·√rate (IEEE Std 952 Annex C)."""
    return rng.standard_normal(n) * density * math.sqrt(rate)


def random_walk(rng: np.random.Generator, n: int, rate: float, density: float) -> np.ndarray:
    """A random walk of density K [u/√s]: cumulative sum of N(0, K² dt) steps."""
    return np.cumsum(rng.standard_normal(n)) * density / math.sqrt(rate)


def flicker(rng: np.random.Generator, n: int, rate: float, coefficient: float) -> np.ndarray:
    """Period means of 1/f noise of coefficient B [u] (two-sided PSD B²/(2πf) up to rate/2).

    Timmer & König (1995) spectral synthesis over L = 8n samples, the first n kept: Fourier
    coefficients with E|Z_j|² = L·S1(f_j)/(2 dt), S1 the one-sided PSD of the period means.
    """
    length = 8 * n
    dt = 1.0 / rate
    f = np.fft.rfftfreq(length, d=dt)
    s1 = np.zeros(f.size)
    s1[1:] = coefficient**2 / (np.pi * f[1:]) * np.sinc(f[1:] * dt) ** 2
    z = rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size)
    z *= np.sqrt(s1 * length / (4.0 * dt))
    z[-1] = z[-1].real * math.sqrt(2.0)
    return np.fft.irfft(z, n=length)[:n]


def flicker_avar(tau: np.ndarray, coefficient: float, cutoff: float) -> np.ndarray:
    """Exact Allan variance of 1/f noise with cut-off f0 (IEEE Std 952-1997 Annex C; reference
    notes §3): (2B²/π)[ln2 − sin³x (sin x + 4x cos x)/(2x²) + Ci(2x) − Ci(4x)], x = π f0 τ."""
    x = np.pi * cutoff * np.asarray(tau, dtype=float)
    ci2 = sici(2.0 * x)[1]
    ci4 = sici(4.0 * x)[1]
    sx, cx = np.sin(x), np.cos(x)
    bracket = math.log(2.0) - sx**3 * (sx + 4.0 * x * cx) / (2.0 * x**2) + ci2 - ci4
    return 2.0 * coefficient**2 / np.pi * bracket


def oavar(y: np.ndarray, m: np.ndarray) -> np.ndarray:
    """Overlapping AVAR of rate samples at factors m (NIST SP 1065 eq. (11), phase form)."""
    x = np.concatenate([[0.0], np.cumsum(y - y.mean())])
    out = []
    for k in m:
        d = x[2 * k :] - 2.0 * x[k:-k] + x[: -2 * k]
        out.append(np.mean(d * d) / (2.0 * k * k))
    return np.array(out)


def mean_within(samples: np.ndarray, theory: np.ndarray, extra: float = 0.0) -> None:
    """Assert the mean of R independent AVAR estimates (rows) matches theory at each τ.

    Tolerance: 4 standard errors of the mean, s/√R, from the samples themselves (two-sided
    p ≈ 6e-5 per τ, so about 1e-3 over a dozen τ), plus a stated systematic ``extra``.
    """
    r = samples.shape[0]
    mean = samples.mean(axis=0)
    se = samples.std(axis=0, ddof=1) / math.sqrt(r)
    assert np.all(np.abs(mean - theory) <= 4.0 * se + extra * theory), (mean / theory, se / theory)


def band_limited_white(
    rng: np.random.Generator, n: int, rate: float, density: float, bandwidth: float
) -> np.ndarray:
    """Period means of white noise of density N through a 1-pole low-pass at ``bandwidth``.

    That process is Gauss-Markov with T = 1/(2π·bandwidth) and σ² = N²·π·bandwidth (two-sided
    N²/(1 + (f/bandwidth)²) integrated over f). Its point samples 64 times per period follow
    the exact AR(1) step φ = e^(−h/T); each period mean is the average of its 64 points (the
    rectangle rule: a variance error of order (h/T)²/12 ≈ 1e-4 here).
    """
    sub = 64
    h = 1.0 / (rate * sub)
    t_c = 1.0 / (2.0 * math.pi * bandwidth)
    sigma = density * math.sqrt(math.pi * bandwidth)
    phi = math.exp(-h / t_c)
    drive = rng.standard_normal(n * sub) * sigma * math.sqrt(1.0 - phi**2)
    drive[0] = rng.standard_normal() * sigma  # stationary start
    x = lfilter([1.0], [1.0, -phi], drive)
    return x.reshape(n, sub).mean(axis=1)
