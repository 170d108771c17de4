"""Records of a fitted model for the parametric bootstrap, and their overlapping Allan variance.

Why the bootstrap has its own record generator beside :mod:`sensormodel.simulate`: a fit asks
for hundreds of independent records of one fitted model per call, each of which must have
the model's *exact* Allan variance at every τ = m/rate of the fit (the bases of
:mod:`._design`), so that the spread of the refits is the estimator's and nothing else.
:mod:`sensormodel.simulate` realises a sensor's state-space model sample by sample, for one
long record of any length (streamed, with a stated sampling assumption per term); here every
record is drawn at once by circulant spectral synthesis of the period means (:class:`_Simulator`),
the white, quantization and flicker terms in one FFT. The two meet in the theory they both
follow (:mod:`sensormodel.terms`: the terms' PSD and Allan variance), which the tests check
each generator against.

:class:`_Simulator` draws the period means at the record's own rate or at a coarser period
D = d/rate (d a power of two; :mod:`._bands`): the means over D of the *same* continuous
process, so that a coarse record is exactly the averages of d consecutive fine samples.

The Allan variance of each record is computed by the engine of
:func:`sensormodel.allan.overlapping` (its block sums,
:func:`sensormodel.allan.second_difference_sums`), on the phase of the record held in a
per-thread buffer (:class:`_BootstrapAllan`).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from functools import lru_cache
from typing import Any

import numpy as np
import numpy.typing as npt

from ..allan import aligned_scratch, second_difference_sums
from ..errors import AnalysisError

_FloatArray = npt.NDArray[np.float64]


# ---------------------------------------------------------------------------------------------
# Records of a fitted model
# ---------------------------------------------------------------------------------------------


class _Simulator:
    """Records of ``n`` samples at ``rate`` of a fitted model, one at a time.

    Each sample is the **mean of the continuous process over its period**, so the Allan
    variance of a record is the model's exact Allan variance at τ = m/rate (the bases of the
    fit). The stationary Gaussian terms are drawn together by spectral synthesis (random
    Gaussian Fourier coefficients; J. Timmer & M. König, Astron. Astrophys. 300:707, 1995) over
    L = 2n samples of which the first n are kept, with the one-sided PSD of the sample means
    (0 < f ≤ rate/2, dt = 1/rate):

    * white N: flat 2N² (variance N²·rate per sample; IEEE Std 952 Annex C); band-limited by
      an output filter B (bandwidth, Butterworth order): 2N² Σ_k |B(f + k·rate)|²
      sinc²((f + k·rate)·dt), the period means' spectrum folded into the band (integrate, then
      sample; for B = 1 the sum is 1);
    * quantization Q: 8Q²·rate·sin²(πf dt), the PSD of (e_{k+1} − e_k)/dt with e white of
      variance Q² (its covariance is banded, so the circular embedding is exact on n samples);
    * flicker B: (B²/(πf))·sinc²(f dt): the 1/f PSD B²/(πf) up to rate/2 (two-sided
      B²/(2πf), Annex C) times sinc², the effect of averaging over a period (the band-limited
      process does not alias). At a coarse period D = d·dt (``fine_rate`` = 1/dt, the cut-off
      of the fit's basis at fine_rate/2) the band above the coarse Nyquist frequency folds in:
      with x = f·D, Σ_k B²/(π|f + k/D|)·sinc²((f + k/D)D) over |f + k/D| < fine_rate/2, i.e.
      (B² D sin²(πx)/π³)·[x⁻³ + Σ_{k=1}^{d/2−1} (x + k)⁻³ + Σ_{k=1}^{d/2} (k − x)⁻³], the
      finite sums by the Hurwitz zeta function (:func:`_flicker_fold`); that is exactly the
      spectrum of the averages of d consecutive fine period means (the Dirichlet kernel of
      the average times sinc²(f dt) is sinc²(fD)). The power below the first bin,
      0 < f < f_L = rate/(2L), shows within the record as a slope; it is added as a random
      slope of variance
      ∫ (B²/(πf))(2πf)² df = 2π B² f_L². The Allan variance then follows the exact form of
      :meth:`sensormodel.terms.Flicker.allan_variance` within about 1 % for τ up to an
      eighth of the record (tests/test_identify.py);
    * random walk K: the mean of Brownian motion of intensity K² over a period is the mean of
      its end values plus an independent N(0, K² dt/12) (the Brownian-bridge part); the end
      values are a cumulative sum, the bridge part joins the white spectrum (flat K² dt²/6);
    * ramp R: R·t at the period mid-points (its Allan variance R²τ²/2 is the same for either
      sign of the slope);
    * Gauss-Markov σ, T: the exact joint law of the state at the period ends and its integral
      over the period, from a stationary start (:meth:`_gauss_markov`).
    """

    def __init__(
        self,
        params: Mapping[str, float],
        time_constant: float | None,
        n: int,
        rate: float,
        white_filter: tuple[Any, ...] | None = None,
        fine_rate: float | None = None,
    ) -> None:
        self.n = int(n)
        self.rate = float(rate)
        # the period means are over D = d/fine_rate; the fit's flicker basis is cut at fine_rate/2
        fold = 1 if fine_rate is None else int(round(float(fine_rate) / self.rate))
        self.dt = 1.0 / self.rate
        dt = self.dt
        self.length = 2 * self.n
        f = np.fft.rfftfreq(self.length, d=dt)
        s1 = np.zeros(f.size)
        w = params.get("white", 0.0)
        k = params.get("random_walk", 0.0)
        q = params.get("quantization", 0.0)
        b = params.get("flicker", 0.0)
        s1[1:] += k**2 * dt**2 / 6.0
        if fold > 1 and white_filter is not None and len(white_filter) > 2:
            # point-sampled output averaged over d ≥ 2 samples: at the band's τ ≥ 16·d/rate the
            # coarse means follow the period-mean spectrum at the delivered density (the point
            # basis is normalised to it); the two differ only near the coarse Nyquist frequency
            white_filter = white_filter[:2]
        s1[1:] += 2.0 * w**2 * _white_alias_sum(f[1:], self.rate, white_filter)
        s1[1:] += 8.0 * q**2 * self.rate * np.sin(np.pi * f[1:] * dt) ** 2
        if b > 0:
            s1[1:] += b**2 * _flicker_fold(f[1:] * dt, fold) * dt
        # E|Z_j|² = L·S1(f_j)/(2 dt): then Var y = Σ S1(f_j) Δf with Δf = 1/(L dt)
        self.amp = np.sqrt(s1 * self.length / (4.0 * dt))
        self.amp[-1] *= math.sqrt(2.0)  # the Nyquist bin is real: all its variance in one part
        self.amp32 = self.amp.astype(np.float32)
        self.spectral = bool(np.any(s1 > 0))
        f_low = self.rate / (2.0 * self.length)
        self.flicker_slope = b * math.sqrt(2.0 * math.pi) * f_low
        self.rw_step = k * math.sqrt(dt)
        self.mid = (np.arange(self.n) + 0.5) * dt
        self.ramp = params.get("ramp", 0.0)
        self.gm = (params.get("gauss_markov", 0.0), time_constant)

    def record(self, rng: np.random.Generator) -> _FloatArray:
        """One record [u].

        The random draws and the FFT are in single precision (relative error ~1e-7, far below
        the sampling noise of any Allan variance); the record and its phase are double.
        """
        from scipy import fft

        n = self.n
        if self.spectral:
            nb = self.amp.size
            z = rng.standard_normal(2 * nb, dtype=np.float32).view(np.complex64)
            z[-1] = z[-1].real
            z *= self.amp32
            y = fft.irfft(z, n=self.length)[:n].astype(np.float64)
        else:
            y = np.zeros(n)
        slope = self.ramp
        if self.flicker_slope > 0:
            slope = slope + self.flicker_slope * float(rng.standard_normal())
        if slope != 0.0:
            y += slope * self.mid
        if self.rw_step > 0:
            ends = np.empty(n + 1)
            ends[0] = 0.0
            np.cumsum(rng.standard_normal(n, dtype=np.float32), dtype=np.float64, out=ends[1:])
            ends *= self.rw_step
            y += 0.5 * (ends[1:] + ends[:-1])
        sigma, tc = self.gm
        if sigma > 0 and tc:
            y += self._gauss_markov(sigma, tc, rng)
        return y

    def _gauss_markov(self, sigma: float, tc: float, rng: np.random.Generator) -> _FloatArray:
        """Period means of a stationary first-order Gauss-Markov process (σ, T), exactly.

        Over one step, x_{k+1} = φ x_k + w_k and the integral I_k = T(1 − φ) x_k + v_k, with
        φ = e^(−dt/T) and (w_k, v_k) jointly Gaussian: var w = σ²(1 − φ²),
        cov(w, v) = σ² T (1 − φ)², var v = σ² T [2 dt − T (1 − φ)(3 − φ)] (the transition of
        the Ornstein-Uhlenbeck process and of its integral). The mean is I_k/dt.
        """
        from scipy.signal import lfilter

        n, dt = self.n, self.dt
        phi = math.exp(-dt / tc)
        vw = sigma**2 * (1.0 - phi**2)
        cwv = sigma**2 * tc * (1.0 - phi) ** 2
        vv = sigma**2 * tc * (2.0 * dt - tc * (1.0 - phi) * (3.0 - phi))
        g = cwv / vw if vw > 0 else 0.0
        ve = max(vv - g * cwv, 0.0)
        w = rng.standard_normal(n) * math.sqrt(vw)
        drive = np.empty(n)
        drive[0] = rng.standard_normal() * sigma  # x_0, stationary
        drive[1:] = w[:-1]
        x = lfilter([1.0], [1.0, -phi], drive)
        integral = tc * (1.0 - phi) * x + g * w + rng.standard_normal(n) * math.sqrt(ve)
        return integral / dt


def _flicker_fold(x: _FloatArray, d: int) -> _FloatArray:
    """The PSD of the means over D of 1/f noise of unit coefficient cut off at d/(2D), in units
    of D, at x = f·D in (0, ½]: (sin²(πx)/π³)·Σ_k |x + k|⁻³ over |x + k| < d/2 (``d`` = 1: the
    plain (1/(πx))·sinc²(x); d a power of two otherwise)."""
    total = x**-3.0
    if d > 1:
        from scipy.special import zeta

        half = d // 2
        total = total + (zeta(3.0, 1.0 + x) - zeta(3.0, half + x))
        total = total + (zeta(3.0, 1.0 - x) - zeta(3.0, half + 1.0 - x))
    return np.asarray(np.sin(np.pi * x) ** 2 / np.pi**3 * total, dtype=np.float64)


#: Aliases folded one by one into the band-limited white spectrum of the bootstrap (the rest
#: as an integral).
_ALIASES = 64


def _white_alias_sum(
    f: _FloatArray, rate: float, white_filter: tuple[Any, ...] | None
) -> _FloatArray:
    """Σ_k |B(f + k·rate)|² sinc²((f + k·rate)/rate) for 0 < f ≤ rate/2 (1 without a filter).

    With x = f/rate, sinc²(x + k) = sin²(πx)/(π(x + k))² for every k, so the sum is
    sin²(πx)/π² · Σ_k |B|²/(x + k)², |B(g)|² = 1/(1 + (g/bandwidth)^(2·order)) (Butterworth).
    ``white_filter`` = (bandwidth, order) or (bandwidth, order, "point"): point samples of the
    filtered output, Σ_k |B(f + k·rate)|² without the sinc², normalised to 1 at f → 0 (the white
    parameter is then the delivered density; identify._design's point basis).
    """
    if white_filter is None:
        return np.ones(f.shape)
    return _alias_sum_cached(f.size, float(f[0]), float(f[-1]), rate, white_filter).copy()


@lru_cache(maxsize=4)
def _alias_sum_cached(
    size: int, f_first: float, f_last: float, rate: float, white_filter: tuple[Any, ...]
) -> _FloatArray:
    from scipy.integrate import quad
    from scipy.interpolate import CubicSpline

    bw, order = white_filter[0], white_filter[1]
    point = len(white_filter) > 2 and white_filter[2] == "point"
    c = rate / bw
    x = np.linspace(f_first, f_last, size) / rate
    total = np.zeros(size)
    for k in range(-_ALIASES, _ALIASES + 1):
        g = x + k
        total += 1.0 / ((1.0 if point else g * g) * (1.0 + ((g * c) ** 2) ** order))

    # the aliases beyond ±K by the midpoint rule, Σ_{k>K} h(x + k) ≈ ∫_{K+½}^∞ h(x + t) dt
    # (error ~h'/24 ≈ 3e-7 of the sum at K = 64), the integral G tabulated on [K, K + 1]
    def h(u: float) -> float:
        return 1.0 / ((1.0 if point else u * u) * (1.0 + (c * u) ** (2 * order)))

    grid = np.linspace(_ALIASES, _ALIASES + 1.0, 17)
    tail = CubicSpline(grid, [quad(h, u0, np.inf, epsabs=0.0, epsrel=1e-12)[0] for u0 in grid])
    total += tail(_ALIASES + 0.5 + x) + tail(_ALIASES + 0.5 - x)
    if point:  # normalised to 1 at f → 0: the white parameter is the delivered density
        total /= 1.0 + 2.0 * sum(h(float(k)) for k in range(1, _ALIASES + 1)) + 2.0 * tail(
            _ALIASES + 0.5
        )
    else:
        total *= (np.sin(np.pi * x) / np.pi) ** 2
    total.setflags(write=False)
    return total


# ---------------------------------------------------------------------------------------------
# Their overlapping Allan variance, with sensormodel.allan's engine
# ---------------------------------------------------------------------------------------------


class _BootstrapAllan:
    """Overlapping Allan variance of records of ``n`` samples at the averaging factors ``m``.

    The estimator of :func:`sensormodel.allan.overlapping` (NIST SP 1065 section 5.2.4 eq. (11))
    on the phase x = τ0·cumsum(y − ȳ) with N = n + 1 points:
    Σ (x[i+2m] − 2x[i+m] + x[i])²/(2 m² τ0² (N − 2m)), written here with τ0 cancelled. The sums
    are that engine's block sums (:func:`sensormodel.allan.second_difference_sums`); the phase
    is built one record at a time in a preallocated buffer, which one thread reuses for all its
    records.
    """

    def __init__(self, n: int, m: npt.NDArray[np.int64]) -> None:
        self.n = int(n)
        self.m = np.asarray(m, dtype=np.int64)
        if self.m.size == 0 or np.any(np.diff(self.m) <= 0):
            raise AnalysisError("averaging factors not increasing", "increasing m", field="m")
        self.x = np.empty(self.n + 1)
        # at least the engine's block (a record's length suffices for any block size)
        self.scratch = aligned_scratch(self.n + 1)
        self.denominator = 2.0 * self.m * self.m * (self.n + 1 - 2 * self.m)

    def __call__(self, y: _FloatArray) -> _FloatArray:
        n, x = self.n, self.x
        x[0] = 0.0
        np.subtract(y, y.mean(), out=x[1:])
        np.cumsum(x[1:], out=x[1:])
        sums = second_difference_sums(x, self.m, 0, n + 1 - 2 * int(self.m[0]), self.scratch)
        return np.asarray(sums / self.denominator, dtype=np.float64)
