"""Noise records from a model: exact, chunked, seeded, per channel.

A simulated record is what the sensor would deliver if its noise were exactly the model: one
sample per period dt = 1/rate and channel, as a **rate sample** (the mean of the continuous
output over the sample period [u], default) or as an **increment** (its integral over the
period, the delta-angle [rad] / delta-velocity [m/s] many IMUs deliver, [u·s]).

Exactness
---------
Every sample is the exact mean of the continuous model over its period, so the Allan variance of
a record at τ = m/rate is the model's continuous Allan variance at that τ (the cluster mean of m
samples is the mean of the continuous output over τ), whatever the rate. Term by term:

* **state-space terms** (``random_walk``, ``gauss_markov``, ``flicker`` through its realization
  as a sum of Gauss-Markov processes, and any term with a continuous realization): the term's
  realization dx/dt = F x + G w, y = H x (:meth:`sensormodel.terms.Term.state_space`) is
  augmented with the running mean of its output, a' = H x / dt, and discretized exactly over one
  step with Van Loan's method (:func:`sensormodel.linear.van_loan`; C. F. Van Loan, IEEE Trans.
  Automatic Control AC-23(3):395-404, 1978), the mean state reset every step. The step's mean
  ȳ_k = γ x_k + v_k and the next state x_{k+1} = Φ x_k + w_k are jointly Gaussian: cov(w, v)
  from the augmented Qd. The sample is drawn as ȳ_k = γ x_k + c w_k + e_k with c = Qxx⁻¹ q_xa
  and e_k independent of w_k of variance q_aa − q_axᵀ c (the conditional Gaussian). The initial
  state is drawn from P0 (stationary for Gauss-Markov states, 0 for random walks). Stationary
  first-order states (Gauss-Markov, flicker) join the channel's white stream (next items). A
  random walk (any diagonal F not stationary from t = 0) is one first-order recursion per state
  (:func:`scipy.signal.lfilter`; a running sum for φ = 1) over a whole block with its state
  carried; a non-diagonal F (the ``shaped`` term's companion form, band-limited white) runs as
  one transfer function per noise input (exact impulse response, checked); where that form is
  not accurate to 1e-9 the step-by-step loop is used (exact, slow).
* ``white`` (density N): the mean of white noise of two-sided PSD N² over dt has variance N²/dt
  (increment variance N²·dt, IEEE Std 952 Annex C: Allan variance N²/τ). It shares one Gaussian
  stream with the e_k parts of the state-space terms (independent Gaussians add).
* **The stationary part in one stream**: white noise, the e_k residuals and every stationary
  first-order state together are one stationary Gaussian sequence. It is simulated in its
  *innovations form* (the steady-state Kalman predictor: one white innovation of variance Λ
  through a filter H(z) with the model's poles, started from its stationary state;
  :func:`innovations_filter`), which has exactly the model's autocovariance, with one normal
  deviate per sample instead of one per state; H runs as second-order sections
  (:func:`scipy.signal.sosfilt`). Built once per channel, it is checked against the model:
  spectrum and variance within :data:`INNOVATIONS_TOLERANCE` (1e-7; typically 1e-12 to 1e-8,
  the float64 rounding of the section coefficients), else the channel runs one stream per
  state. That error is far below what a record resolves: the Allan variance of 10⁹ samples has
  a relative standard error of 4·10⁻⁵ at best.
* ``quantization`` (Q): a white error e_k on the integrated output (angle / velocity), of
  variance Q², **uniform** on ±√3·Q as the rounding error of a quantizer is (Q = s/√12 for a
  quantum s). The increment carries e_{k+1} − e_k, the rate sample (e_{k+1} − e_k)/dt; the
  Allan variance is exactly 3 var(e)/τ² = 3Q²/τ² (IEEE Std 952-1997 Annex C).
* ``ramp`` (R): the term is a slope fixed over a run with E[s²] = R² (its P0). Here
  s = ±R with a random sign per run, so every record has exactly the Allan variance R²τ²/2 and
  an ensemble has the covariance of the model (mean 0, var(s) = R²). The ramp value is 0 at
  turn-on (t = 0); the sample k is its mean s·(k + ½)·dt over [k dt, (k+1) dt].
* ``random_constant`` (σ): one N(0, σ²) draw per run and channel, constant over the record.

The channel's output filter (``bandwidth``, ``filter_order``) is **not** applied (a white term
that carries its own ``bandwidth`` is simulated through its Butterworth realization): samples are
period means (equivalent noise bandwidth rate/2, per-sample variance N²·rate). The Allan variance at
τ ≫ 1/bandwidth does not depend on it.

Flicker: two methods
--------------------
``"realization"`` (default): exact simulation of the term's realization (sum of Gauss-Markov
processes, :meth:`sensormodel.terms.Flicker.realization`, built for the *channel's* sample rate,
so a record at another rate keeps the model's cut-off), whose Allan deviation follows the exact
1/f form within the realization's stated error over its τ band (up to the term's
``longest_time``). ``"power-law"``: the method of N. J. Kasdin and T. Walter, "Discrete
simulation of power law noise", Proc. 1992 IEEE Frequency Control Symposium, pp. 274-283: white
noise of variance Q_d = B² through the truncated moving-average filter h_0 = 1,
h_k = h_{k−1}(α/2 + k − 1)/k with α = 1, run as an FFT overlap-save convolution; its one-sided
PSD is 2 Q_d dt |2 sin(π f dt)|⁻¹ ≈ B²/(π f) (their eq. (39)) up to the Nyquist frequency of the
simulation rate (the term's ``cutoff`` is not applied). The filter has
L = min(⌈longest_time · rate⌉, ``max_taps``) taps (default 2^20), so the 1/f spectrum holds
down to about rate/L; the filter's history is filled before the first sample (a stationary
start).

Reproducibility
---------------
The seed becomes a :class:`numpy.random.SeedSequence`; every random stream (per run, channel and
term) has its own generator from ``SeedSequence(seed, spawn_key=(run, channel, slot, term))``,
the channel keyed by a CRC-32 of its id (so selecting channels does not change a channel's
record). Random numbers are drawn in a fixed schedule of internal blocks (FIRST_BLOCK samples,
doubling up to BLOCK), so the record is bit-for-bit the same whatever the chunk size it is read
in, and a longer record starts with the shorter one. Channels are generated in parallel
threads (``threads``); the record does not depend on their number. Normal deviates come from
the Box-Muller transform of the generator's uniforms (:class:`_Normals`: 2-3× faster than its
ziggurat ``standard_normal``).

Speed
-----
Per sample and channel: one normal deviate for the stationary part (white, Gauss-Markov,
flicker), one per random-walk or shaped-term noise input, one uniform for quantization, and an
FFT for power-law flicker. The innovations stream (in its parallel form, one first-order state
per pole) and the single-state random walks of a channel run in one block engine
(:class:`_Parallel`): the same linear recursions regrouped into small matrix products over
sub-blocks of 16 samples, each product cut below OpenBLAS's threading threshold so it stays
one single-threaded call (the record does not depend on BLAS threads). It agrees with the
sample-by-sample filters to rounding (tests); a record is bit-for-bit reproducible on one
machine (numpy's vectorized functions and the BLAS kernels are chosen per processor, so
another processor type may differ in the last bits).
``tests/benchmarks/bench_simulate.py`` prints samples per second for typical model mixes
(DEVELOPERS.md, Benchmarks).
"""

from __future__ import annotations

import math
import os
import pathlib
import threading
import zlib
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from functools import lru_cache
from typing import TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt

from .errors import AnalysisError

if TYPE_CHECKING:  # pragma: no cover
    from .model import Channel, NoiseModel
    from .terms import Term

__all__ = [
    "FLICKER_METHODS",
    "BLOCK",
    "FIRST_BLOCK",
    "DEFAULT_MAX_TAPS",
    "Simulator",
    "simulate",
    "simulate_ensemble",
    "EnsembleStatistics",
    "ensemble_statistics",
    "write_record",
    "run_path",
    "new_seed",
    "record_rate",
    "samples_for",
    "kasdin_coefficients",
    "StepModel",
    "step_model",
    "InnovationsFilter",
    "innovations_filter",
    "INNOVATIONS_TOLERANCE",
]

_FloatArray = npt.NDArray[np.float64]

#: Flicker simulation methods: the term's Gauss-Markov realization, or Kasdin-Walter power law.
FLICKER_METHODS = ("realization", "power-law")

#: Internal block length [samples]: random numbers are drawn in blocks of this size (after a
#: few shorter first blocks, FIRST_BLOCK doubling up to BLOCK).
BLOCK = 1 << 16
FIRST_BLOCK = 1 << 10
_DOUBLINGS = 6  # FIRST_BLOCK << 6 == BLOCK

#: Default largest number of taps of the Kasdin-Walter filter (2^20 ≈ 1.05 M: about 17 min of
#: 1/f memory at 1 kHz, 2.9 h at 100 Hz; some 100 MB of working memory per flicker channel
#: while a block is transformed: FFTs of 4× the filter length).
DEFAULT_MAX_TAPS = 1 << 20

# Stream slots of one channel: spawn key (run, channel key, slot, index of the term in the
# channel; 0 for the channel-wide white and quantization streams).
_WHITE_SLOT, _QUANT_SLOT, _CONST_SLOT, _RAMP_SLOT, _TERM_SLOT = 0, 1, 2, 3, 4


# -- argument checks --------------------------------------------------------------------------


def _check_count(value: Any, name: str, *, minimum: int = 1) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise AnalysisError(f"{name} = {value!r}", f"a whole number >= {minimum}")
    return int(value)


def _check_rate(rate: Any, name: str = "rate") -> float:
    try:
        r = float(rate)
    except (TypeError, ValueError):
        raise AnalysisError(f"{name} = {rate!r}", "a positive rate in Hz") from None
    if not (math.isfinite(r) and r > 0):
        raise AnalysisError(f"{name} = {rate!r}", "a positive, finite rate in Hz")
    return r


def _check_seed(seed: Any) -> int:
    if seed is None:
        return new_seed()
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise AnalysisError(f"seed = {seed!r}", "a non-negative whole number")
    return int(seed)


def _check_method(flicker: str) -> str:
    if flicker not in FLICKER_METHODS:
        raise AnalysisError(f"flicker method {flicker!r}", f"one of {', '.join(FLICKER_METHODS)}")
    return flicker


def _channel_key(channel_id: str) -> int:
    return zlib.crc32(channel_id.replace("_", ".").lower().encode("utf-8"))


def _rng(seed: int, run: int, channel_id: str, slot: int, index: int = 0) -> np.random.Generator:
    key = (run, _channel_key(channel_id), slot, index)
    return np.random.default_rng(np.random.SeedSequence(seed, spawn_key=key))


# -- exact one-step model of a state-space term -----------------------------------------------


@dataclass(frozen=True)
class StepModel:
    """The exact one-step law of a realization and the mean of its output over the step.

    ``x_{k+1} = Φ x_k + w_k``, cov(w_k) = ``qxx``; the output's mean over the step is
    ``ȳ_k = gamma · x_k + c · w_k + e_k`` with e_k independent of w_k, var(e_k) = ``residual``.

    Attributes
    ----------
    phi : ndarray, shape (n, n)
        Transition matrix e^{F dt}.
    gamma : ndarray, shape (n,)
        (1/dt) H ∫₀^dt e^{Fs} ds: the mean output over the step due to x_k.
    qxx : ndarray, shape (n, n)
        Covariance of the state noise w_k [state units²].
    c : ndarray, shape (n,)
        Regression of the step's output-mean noise on w_k (Qxx⁻¹ q_xa).
    residual : float
        Variance of the part of the output-mean noise independent of w_k [u²].
    dt : float
        Step [s].
    """

    phi: _FloatArray
    gamma: _FloatArray
    qxx: _FloatArray
    c: _FloatArray
    residual: float
    dt: float


def step_model(
    F: npt.ArrayLike, G: npt.ArrayLike, Qc: npt.ArrayLike, H: npt.ArrayLike, dt: float
) -> StepModel:
    """Exact discretization of a realization together with the mean of its output over a step.

    The system dx/dt = F x + G w (E[w wᵀ] = Qc δ, two-sided), y = H x is augmented with
    a' = H x / dt, a(0) = 0, and discretized over dt with Van Loan's method
    (:func:`sensormodel.linear.van_loan`): a(dt) is the mean of y over the step. The joint
    Gaussian law of (x_{k+1}, a) given x_k is split into the regression of a on the state noise
    and an independent residual (the conditional Gaussian).

    Parameters
    ----------
    F : array_like, shape (n, n)
        Dynamics [1/s].
    G : array_like, shape (n, m)
        Noise input matrix.
    Qc : array_like, shape (m, m)
        Two-sided spectral density of w.
    H : array_like, shape (1, n)
        Output matrix.
    dt : float
        Step [s], positive.

    Returns
    -------
    StepModel
    """
    from .linear import van_loan

    F = np.atleast_2d(np.asarray(F, dtype=float))
    G = np.atleast_2d(np.asarray(G, dtype=float))
    Qc = np.atleast_2d(np.asarray(Qc, dtype=float))
    H = np.asarray(H, dtype=float).reshape(1, -1)
    n = F.shape[0]
    Fa = np.zeros((n + 1, n + 1))
    Fa[:n, :n] = F
    Fa[n, :n] = H[0] / dt
    Ga = np.zeros((n + 1, G.shape[1]))
    Ga[:n] = G
    phi_a, qd_a = van_loan(Fa, Ga, Qc, dt)
    qxx = qd_a[:n, :n]
    qxa = qd_a[:n, n]
    qaa = float(qd_a[n, n])
    if n and np.any(qxx):
        c = np.linalg.lstsq(qxx, qxa, rcond=1e-13)[0]
        residual = qaa - float(qxa @ c)
    else:
        c = np.zeros(n)
        residual = qaa
    # The residual is a variance; rounding can leave a tiny negative value when it is ~0.
    residual = max(residual, 0.0)
    return StepModel(
        phi=phi_a[:n, :n].copy(),
        gamma=phi_a[n, :n].copy(),
        qxx=qxx,
        c=c,
        residual=residual,
        dt=float(dt),
    )


def _sqrt_psd(m: _FloatArray) -> _FloatArray:
    """A square root L (L Lᵀ = m) of a symmetric positive semi-definite matrix."""
    if m.size == 0:
        return m.copy()
    if np.count_nonzero(m - np.diag(np.diag(m))) == 0:
        return np.diag(np.sqrt(np.clip(np.diag(m), 0.0, None)))
    lam, u = np.linalg.eigh(0.5 * (m + m.T))
    return u * np.sqrt(np.clip(lam, 0.0, None))


# -- sources: each produces the period means of one contribution, in fixed blocks --------------


def _block_size(index: int) -> int:
    """Length of internal block ``index``: FIRST_BLOCK, doubling up to BLOCK, then BLOCK (a
    fixed schedule, so short records stay cheap and the partition never depends on the
    caller)."""
    return FIRST_BLOCK << index if index < _DOUBLINGS else BLOCK


class _Normals:
    """Independent standard normal deviates from one generator, by the Box-Muller transform.

    G. E. P. Box and M. E. Muller, "A note on the generation of random normal deviates", Ann.
    Math. Statist. 29(2):610-611, 1958: for independent uniforms u₁ ∈ (0, 1], u₂ ∈ [0, 1),
    r = √(−2 ln u₁) and θ = 2πu₂ give two independent N(0, 1) deviates r·cos θ and r·sin θ.
    Here u₁ is a 53-bit float64 uniform (the radius, hence the tails, to double precision:
    the largest deviate is √(2·53 ln 2) = 8.57, exceeded with probability 1e-17) and u₂ a 24-bit
    float32 uniform whose cosine and sine are taken in float32 (relative error ~1e-7 of a
    deviate, far below anything a record of 10⁹ samples resolves); the products are float64.
    Two to three times faster than :meth:`numpy.random.Generator.standard_normal` (ziggurat).

    The deviates form one fixed sequence whatever the request sizes: panels of
    :attr:`PAIRS` pairs (PAIRS float64 then PAIRS float32 uniforms from the generator; the
    cosines, then the sines), served in order. Panels small enough to stay in the processor's
    cache keep the transform fast.
    """

    PAIRS = 8192
    _TWO_PI = np.float32(2.0 * np.pi)

    def __init__(self, rng: np.random.Generator) -> None:
        self._rng = rng
        p = self.PAIRS
        self._r = np.empty(p)
        self._a = np.empty(p, dtype=np.float32)
        self._c = np.empty(p, dtype=np.float32)
        self._left = np.empty(0)

    def _panel(self, out: _FloatArray) -> None:
        p = self.PAIRS
        r, a, c = self._r, self._a, self._c
        self._rng.random(out=r)
        np.subtract(1.0, r, out=r)  # (0, 1]: the logarithm stays finite
        np.log(r, out=r)
        r *= -2.0
        np.sqrt(r, out=r)
        self._rng.random(dtype=np.float32, out=a)
        a *= self._TWO_PI
        np.cos(a, out=c)
        np.multiply(r, c, out=out[:p])
        np.sin(a, out=c)
        np.multiply(r, c, out=out[p:])

    def normal(self, n: int, scale: float = 1.0, out: _FloatArray | None = None) -> _FloatArray:
        """The next ``n`` deviates of the sequence, times ``scale`` (float64; into ``out``,
        contiguous, when given, else a fresh array)."""
        if out is None:
            out = np.empty(n)
        k = min(n, self._left.size)
        out[:k] = self._left[:k]
        self._left = self._left[k:]
        size = 2 * self.PAIRS
        while n - k >= size:
            self._panel(out[k : k + size])
            k += size
        if k < n:
            panel = np.empty(size)
            self._panel(panel)
            out[k:] = panel[: n - k]
            self._left = panel[n - k :]
        if scale != 1.0:
            out *= scale
        return out


class _Source:
    """A contribution to one channel, produced in fixed internal blocks and served in any
    chunk size (so the output does not depend on the chunking)."""

    def __init__(self) -> None:
        self._buf = np.empty(0)
        self._pos = 0
        self._index = 0

    def _block(self, size: int) -> _FloatArray:  # pragma: no cover - abstract
        raise NotImplementedError

    def _next(self) -> _FloatArray:
        size = _block_size(self._index)
        self._index += 1
        return self._block(size)

    def take(self, n: int, out: _FloatArray | None = None) -> _FloatArray:
        """The next ``n`` period means [u] (written into ``out`` when given)."""
        if out is None:
            out = np.empty(n)
        filled = 0
        while filled < n:
            if self._pos >= self._buf.size:
                self._buf = self._next()
                self._pos = 0
            k = min(n - filled, self._buf.size - self._pos)
            out[filled : filled + k] = self._buf[self._pos : self._pos + k]
            filled += k
            self._pos += k
        return out


class _White(_Source):
    def __init__(self, std: float, rng: np.random.Generator) -> None:
        super().__init__()
        self._std, self._normals = std, _Normals(rng)

    def _block(self, size: int) -> _FloatArray:
        return self._normals.normal(size, self._std)  # fresh: take() may hold the last block


class _Quantization(_Source):
    def __init__(self, q: float, dt: float, rng: np.random.Generator) -> None:
        super().__init__()
        half = math.sqrt(3.0) * q  # e = half·(2u − 1), u uniform: variance Q²
        self._gain = 2.0 * half / dt  # (e_{k+1} − e_k)/dt = gain·(u_{k+1} − u_k)
        self._rng = rng
        self._u = np.empty(1)
        self._u[0] = rng.random()

    def _block(self, size: int) -> _FloatArray:
        if self._u.size != size + 1:
            last = self._u[-1]
            self._u = np.empty(size + 1)
            self._u[-1] = last
        u = self._u
        u[0] = u[-1]
        self._rng.random(out=u[1:])
        out = np.subtract(u[1:], u[:-1])
        out *= self._gain
        return out


class _Ramp(_Source):
    def __init__(self, slope: float, dt: float) -> None:
        super().__init__()
        self._slope, self._dt, self._k = slope, dt, 0

    def _block(self, size: int) -> _FloatArray:
        k = np.arange(self._k, self._k + size, dtype=float)
        self._k += size
        return self._slope * self._dt * (k + 0.5)


class _StateSpace(_Source):
    """Exact period means of a realization (see :func:`step_model`)."""

    def __init__(self, ss: Any, sm: StepModel, rng: Any) -> None:
        super().__init__()
        # ``rng``: a generator, or anything with ``normal(n)`` (a stand-in in the tests)
        self._normals = _Normals(rng) if isinstance(rng, np.random.Generator) else rng
        self.residual = sm.residual
        n = sm.phi.shape[0]
        self._n = n
        # initial state from P0 (drawn first, so the stream's layout is fixed)
        x0 = _sqrt_psd(np.asarray(ss.P0, dtype=float)) @ self._normals.normal(n)
        L = _sqrt_psd(sm.qxx)
        keep = np.flatnonzero(np.any(L != 0.0, axis=0))  # noise directions actually present
        self._L = L[:, keep]
        self._m = keep.size
        self._sm = sm
        self._x = x0  # the state, carried by the step-by-step path
        self._diagonal = np.count_nonzero(sm.phi - np.diag(np.diag(sm.phi))) == 0
        if self._diagonal:
            phi = np.diag(sm.phi).copy()
            # Period-mean contribution of state i: u_k = γ_i x_k + c_i w_k with
            # x_{k+1} = φ_i x_k + w_k, i.e. u = (c_i + (γ_i − c_i φ_i) z⁻¹)/(1 − φ_i z⁻¹) w,
            # one lfilter per state; its (transposed direct form II) state is γ_i x_k.
            self._b = np.stack([sm.c, sm.gamma - sm.c * phi], axis=1)
            self._a = np.stack([np.ones(n), -phi], axis=1)
            self._zi = sm.gamma * x0
            # With independent state noises (diagonal L: every term of the catalogue) state i
            # is driven by its own normal stream scaled into b; otherwise w = L z.
            self._independent = np.count_nonzero(L - np.diag(np.diag(L))) == 0
            if self._independent:
                self._row = {int(k): j for j, k in enumerate(keep)}
                self._bs = self._b * np.diag(L)[:, None]
        self._tf: tuple[list[_FloatArray], _FloatArray, list[int], list[_FloatArray]] | None
        self._tf = None
        if not self._diagonal and n:
            self._init_filters(x0)

    def _init_filters(self, x0: _FloatArray) -> None:
        """Transfer-function form for a non-diagonal Φ (e.g. a shaping filter in companion
        form, repeated poles included).

        The period mean is Σ_i T_i(z) z_i for the independent unit normals z_i behind w = L z,
        T_i(z) = c·L_i + γ (zI − Φ)⁻¹ L_i = b_i(z)/a(z) with a the characteristic polynomial of
        Φ and b_i = (a * h_i) truncated, h_i the exact impulse response (h_0 = c·L_i,
        h_k = γ Φ^(k−1) L_i). Each runs as one :func:`scipy.signal.lfilter` with carried
        state. The initial state adds the free response γ Φ^k x0, which obeys the same
        recursion a (Cayley-Hamilton): it is put into the first filter's initial state by
        matching its first n values. The form is kept only if the filters reproduce the exact
        impulse responses to 1e-9 over 8n samples; otherwise the step loop is used.
        """
        from scipy.signal import lfilter

        sm, n = self._sm, self._n
        a = np.real(np.poly(sm.phi))
        steps = 8 * n
        powers = [np.eye(n)]
        for _ in range(steps):
            powers.append(sm.phi @ powers[-1])
        bs, rows = [], []
        for i in range(self._m):
            li = self._L[:, i]
            h = np.array([float(sm.c @ li)] + [float(sm.gamma @ P @ li) for P in powers[:steps]])
            if not np.any(h):
                continue
            b = np.convolve(a, h)[: n + 1]
            imp = np.zeros(steps + 1)
            imp[0] = 1.0
            check = lfilter(b, a, imp)
            if np.max(np.abs(check - h)) > 1e-9 * np.max(np.abs(h)):
                return  # not accurate enough in direct form: keep the step loop
            bs.append(b)
            rows.append(i)
        free = np.array([float(sm.gamma @ powers[k] @ x0) for k in range(n)])
        zis = [np.zeros(n) for _ in bs]
        if bs and np.any(free):
            # zero-input response of lfilter is linear in its state: y[:n] = M zi
            M = np.column_stack(
                [lfilter(bs[0], a, np.zeros(n), zi=np.eye(n)[j])[0] for j in range(n)]
            )
            zis[0] = np.linalg.solve(M, free)
            if np.max(np.abs(M @ zis[0] - free)) > 1e-9 * np.max(np.abs(free)):
                return
        elif np.any(free):
            return
        self._tf = (bs, a, rows, zis)

    def _block(self, size: int) -> _FloatArray:
        from scipy.signal import lfilter

        # time-major: the m deviates of a step are consecutive in the stream
        z = self._normals.normal(self._m * size).reshape(size, self._m).T
        if self._diagonal:
            w = None if self._independent else self._L @ z
            acc: _FloatArray | None = None
            for i in range(self._n):
                if self._independent:
                    j = self._row.get(i)
                    b, x = (self._bs[i], z[j]) if j is not None else (self._b[i], None)
                else:
                    b, x = self._b[i], w[i]  # type: ignore[index]
                if not (b[0] or b[1] or self._zi[i]):
                    continue
                if x is None:
                    x = np.zeros(size)  # no noise: the free response only
                if self._a[i, 1] == -1.0:
                    # φ = 1 (random walk): the same recursion as a running sum (faster):
                    # y_k = s_k + b₀x_k, s_{k+1} = s_k + (b₀ + b₁)x_k, i.e.
                    # y = (b₀ + b₁)·cumsum(x) − b₁x + s₀ (s₀ carried in the first term).
                    gain = b[0] + b[1]
                    x0 = float(x[0])
                    if gain:
                        x[0] += self._zi[i] / gain
                    y = np.cumsum(x)
                    x[0] = x0
                    self._zi[i] = gain * y[-1] + (self._zi[i] if not gain else 0.0)
                    y *= gain
                    x *= b[1]
                    y -= x
                    if not gain:
                        y += self._zi[i]
                else:
                    y, zf = lfilter(b, self._a[i], x, zi=self._zi[i : i + 1])
                    self._zi[i] = zf[0]
                if acc is None:
                    acc = y
                else:
                    acc += y
            return np.zeros(size) if acc is None else acc
        out = np.zeros(size)
        if self._tf is not None:
            bs, a, rows, zis = self._tf
            for b, i, zi in zip(bs, rows, zis, strict=True):
                y, zi[...] = lfilter(b, a, z[i], zi=zi)
                out += y
            return out
        sm, x = self._sm, self._x
        w = self._L @ z
        for k in range(size):
            out[k] = sm.gamma @ x + sm.c @ w[:, k]
            x = sm.phi @ x + w[:, k]
        self._x = x
        return out


def kasdin_coefficients(alpha: float, n: int) -> _FloatArray:
    """Moving-average coefficients of Kasdin-Walter power-law noise S ∝ 1/f^alpha.

    h_0 = 1, h_k = h_{k−1}·(alpha/2 + k − 1)/k (N. J. Kasdin and T. Walter, "Discrete simulation
    of power law noise", Proc. 1992 IEEE Frequency Control Symposium, pp. 274-283).

    Parameters
    ----------
    alpha : float
        Spectral exponent (1 for flicker noise).
    n : int
        Number of coefficients.

    Returns
    -------
    ndarray, shape (n,)
    """
    n = _check_count(n, "n")
    k = np.arange(1, n, dtype=float)
    h = np.empty(n)
    h[0] = 1.0
    h[1:] = (alpha / 2.0 + k - 1.0) / k
    return np.cumprod(h)


class _PowerLaw(_Source):
    """Kasdin-Walter flicker (α = 1, Q_d = B²) by FFT overlap-save of the truncated filter."""

    def __init__(self, coefficient: float, taps: int, rng: Any) -> None:
        super().__init__()
        # ``rng``: a generator, or anything with ``normal(n)`` (a stand-in in the tests)
        self._normals = _Normals(rng) if isinstance(rng, np.random.Generator) else rng
        self._b, self._taps = coefficient, taps
        # An FFT of 4× the filter length: 3/4 of each transform is new output (2×: 1/2),
        # 1.2-1.3× faster per sample for 2^20 taps, measured (tests/benchmarks).
        nfft = max(1 << 15, 1 << int(math.ceil(math.log2(4 * taps))))
        self._nfft = nfft
        self._m = nfft - (taps - 1)  # new samples per block
        self._H = _kasdin_spectrum(taps, nfft)
        # fill the filter's memory: stationary start
        self._hist = self._normals.normal(taps - 1)

    def _next(self) -> _FloatArray:  # the overlap-save length fixes this source's blocks
        return self._block(self._m)

    def _block(self, size: int) -> _FloatArray:
        from scipy import fft

        seg = np.empty(self._nfft)
        seg[: self._taps - 1] = self._hist
        seg[self._taps - 1 :] = self._normals.normal(self._m)
        self._hist = seg[self._nfft - (self._taps - 1) :].copy()
        spec = fft.rfft(seg)
        spec *= self._H
        y = fft.irfft(spec, self._nfft, overwrite_x=True)[self._taps - 1 :]
        y *= self._b  # driving variance Q_d = B²: one-sided PSD B²/(πf) (Kasdin-Walter (39))
        return y


@lru_cache(maxsize=4)
def _kasdin_spectrum(taps: int, nfft: int) -> npt.NDArray[np.complex128]:
    """FFT of the Kasdin-Walter filter (α = 1), shared by the channels that use it."""
    from scipy import fft

    H = fft.rfft(kasdin_coefficients(1.0, taps), nfft)
    H.flags.writeable = False
    return H


def _kasdin_taps(term: Any, rate: float, max_taps: int) -> int:
    from .terms import DEFAULT_LONGEST_TIME

    longest = float(term.longest_time or DEFAULT_LONGEST_TIME)
    return int(max(2, min(max_taps, math.ceil(longest * rate))))


# -- the stationary part of a channel in one Gaussian stream ----------------------------------


@dataclass(frozen=True)
class InnovationsFilter:
    """One channel's stationary Gaussian part as a single innovation stream through a filter.

    The output is ``std · H(z) ε`` with ε unit white and H(z) = Π_k N_k(z⁻¹)/D_k(z⁻¹) the
    second-order sections ``sos`` (each b₀ = a₀ = 1); the filter's state starts from its
    stationary law (covariance factor ``init``), so the record is stationary from its first
    sample.

    Attributes
    ----------
    std : float
        √Λ, the standard deviation of the innovation [u].
    sos : ndarray, shape (n_sections, 6) or (0, 6)
        Second-order sections as :func:`scipy.signal.sosfilt` takes them (none: white only).
    init : ndarray, shape (m, m)
        A square root of the stationary covariance of the filter's state, in units of the
        innovation (the state is ``std · init @ z``, z unit normals).
    state_index : ndarray of int, shape (m,)
        Positions (in the flattened (n_sections, 2) state) of the m states that can be non-zero.
    poles, zeros : ndarray
        The poles (eigenvalues of Φ) and zeros of H (ascending).
    spectrum_error : float
        Largest relative difference between the filter's spectrum and the model's, over the
        check frequencies (from 1/100 of the slowest pole's bandwidth to Nyquist).
    variance_error : float
        Relative difference of the filter's stationary output variance and the model's.
    gains : ndarray, shape (m,)
        The same H in parallel form, H(z) = 1 + Σᵢ gᵢ/(z − pᵢ) (``poles`` pᵢ): one first-order
        state per pole, s_i' = pᵢ s_i + gᵢ ε, output ε + Σᵢ s_i (units of the innovation).
    parallel_init : ndarray, shape (m, m)
        A square root of the stationary covariance of those states, in units of the innovation
        (the states are ``std · parallel_init @ z``; ``init`` maps the same z to the sections).
    parallel_error : float
        As ``spectrum_error``, for the parallel form.
    """

    std: float
    sos: _FloatArray
    init: _FloatArray
    state_index: npt.NDArray[np.intp]
    poles: _FloatArray
    zeros: _FloatArray
    spectrum_error: float
    variance_error: float
    gains: _FloatArray
    parallel_init: _FloatArray
    parallel_error: float


#: Accepted relative error of the innovations filter's spectrum against the model's (or the
#: float64 resolution of the slowest pole, 16 ε/(1 − p), when that is coarser).
INNOVATIONS_TOLERANCE = 1e-7


def innovations_filter(
    phi: npt.ArrayLike,
    gamma: npt.ArrayLike,
    qxx: npt.ArrayLike,
    c: npt.ArrayLike,
    white: float,
) -> InnovationsFilter | None:
    """The innovations form of a sum of stationary first-order states and white noise.

    The period means of the channel's stationary terms (states with Φ = diag(p), 0 < p < 1,
    x_{k+1} = Φ x_k + w_k, ȳ_k = γ·x_k + c·w_k + e_k, cov w = Qxx, e white of variance
    ``white``: the white term and the terms' independent residuals) form a stationary Gaussian
    sequence with autocovariance C(0) = γΣγᵀ + R, C(j) = γΦ^{j−1}M (Σ = ΦΣΦ + Qxx, R = cᵀQxx c
    + white, M = ΦΣγᵀ + Qxx c). The steady-state Kalman predictor gives an innovations model
    x̂_{k+1} = Φx̂_k + Kε_k, ȳ_k = γx̂_k + ε_k, var ε = Λ, whose output has *the same*
    autocovariance when x̂ starts from its stationary covariance Σ − P, P the stabilizing
    solution of the discrete algebraic Riccati equation (B. D. O. Anderson and J. B. Moore,
    "Optimal Filtering", Prentice-Hall 1979, ch. 9; the stationary-covariance identities are
    checked here). One Gaussian stream then drives the whole stationary part instead of one
    per state. Its transfer function H(z) = 1 + Σᵢ gᵢ/(z − pᵢ), gᵢ = γᵢKᵢ, has its zeros
    between consecutive poles (gᵢ > 0); they are found one by one from the secular equation
    in the offset t = pᵢ − z (relative accuracy), and H runs as second-order sections pairing
    the slowest remaining pole with the fastest (well separated poles keep the section
    coefficients well conditioned).

    The filter is checked against the model: its spectrum Λ|H|² against the model's
    Σ_j C(j) e^{−iωj} at 200 frequencies, and its stationary output variance against C(0).

    Parameters
    ----------
    phi : array_like, shape (n,)
        Pole of each state, e^{−dt/T} (0 < p < 1).
    gamma : array_like, shape (n,)
        Mean-output gain of each state.
    qxx : array_like, shape (n, n)
        Covariance of the state noise over a step.
    c : array_like, shape (n,)
        Regression of the step's output-mean noise on the state noise.
    white : float
        Variance of the independent white part of the period mean [u²].

    Returns
    -------
    InnovationsFilter or None
        ``None`` when the construction does not apply (repeated or non-positive weights, a
        failed check): the caller then simulates state by state.
    """
    import scipy.linalg as sl
    from scipy.optimize import brentq

    p = np.asarray(phi, dtype=float).ravel()
    g_ = np.asarray(gamma, dtype=float).ravel()
    Q = np.asarray(qxx, dtype=float)
    cc = np.asarray(c, dtype=float).ravel()
    n = p.size
    empty = np.zeros((0, 6))
    if n == 0:
        if not white > 0:
            return None
        return InnovationsFilter(
            math.sqrt(white), empty, np.zeros((0, 0)), np.zeros(0, np.intp),
            np.zeros(0), np.zeros(0), 0.0, 0.0, np.zeros(0), np.zeros((0, 0)), 0.0,
        )  # fmt: skip
    if not (np.all(p > 0) and np.all(p < 1) and np.all(np.isfinite(Q))):
        return None
    Sigma = Q / (1.0 - np.outer(p, p))
    S = Q @ cc
    R = float(cc @ S) + float(white)
    C0 = float(g_ @ Sigma @ g_) + R
    M = p * (Sigma @ g_) + S
    if not (C0 > 0 and R > 0):
        return None
    s0 = C0  # scale: the Riccati equation in units of the output variance
    Ph = np.diag(p)
    try:
        P = sl.solve_discrete_are(Ph, g_[:, None], Q / s0, np.array([[R / s0]]), s=S[:, None] / s0)
    except (np.linalg.LinAlgError, ValueError):
        return None
    Sh = Sigma / s0 - P  # stationary covariance of the predictor state, scaled
    Mn, C0n = M / s0, C0 / s0

    def faurre(sh: _FloatArray) -> tuple[_FloatArray, _FloatArray, float]:
        lam = C0n - float(g_ @ sh @ g_)
        k = (Mn - p * (sh @ g_)) / lam
        return Ph @ sh @ Ph + lam * np.outer(k, k) - sh, k, lam

    # Newton steps on the Riccati equation in Σ − P (its derivative is the closed-loop
    # Lyapunov operator) polish the solver's result.
    for _ in range(3):
        res, K, lam = faurre(Sh)
        A = Ph - np.outer(K, g_)
        try:
            Sh = Sh + sl.solve_discrete_lyapunov(A, res)
        except (np.linalg.LinAlgError, ValueError):
            return None
        Sh = 0.5 * (Sh + Sh.T)
    _, K, lam = faurre(Sh)
    if not (lam > 0 and np.all(np.isfinite(K))):
        return None
    # Equal poles (e.g. two Gauss-Markov terms of one time constant) act as one.
    poles, inv = np.unique(p, return_inverse=True)
    g = np.bincount(inv, weights=g_ * K)
    m = poles.size
    if not np.all(g > 0):
        return None

    def secular(i: int) -> Callable[[float], float]:
        dp = poles[i] - poles  # exact for neighbouring poles (Sterbenz)
        others = np.arange(m) != i
        go, do = g[others], dp[others]

        def h(t: float) -> float:
            return 1.0 - g[i] / t + float(np.sum(go / (do - t)))

        return h

    zeros = np.empty(m)
    for i in range(m):
        h = secular(i)
        hi = (poles[i] - poles[i - 1]) if i else max(1.0, 4.0 * g[i])
        lo_t, hi_t = hi * 0.5, hi * 0.5
        for _ in range(1100):  # h(0+) = −∞, h(hi−) = +∞ (or 1 at −∞ for the first zero)
            if h(lo_t) < 0:
                break
            lo_t *= 0.5
        else:
            return None
        for _ in range(1100):
            if h(hi_t) > 0:
                break
            hi_t = hi - (hi - hi_t) * 0.5 if i else hi_t * 2.0
        else:
            return None
        t = brentq(h, lo_t, hi_t, xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=500)
        zeros[i] = poles[i] - t
    # Sections: the slowest remaining pole (and its zero) with the fastest one.
    sections = []
    i, j = 0, m - 1
    while i <= j:
        if i == j:
            sections.append([1.0, -zeros[i], 0.0, 1.0, -poles[i], 0.0])
        else:
            sections.append(
                [
                    1.0, -(zeros[i] + zeros[j]), zeros[i] * zeros[j],
                    1.0, -(poles[i] + poles[j]), poles[i] * poles[j],
                ]
            )  # fmt: skip
        i, j = i + 1, j - 1
    sos = np.array(sections)
    # Stationary start: the innovations model's state x̂ has the stationary covariance
    # Λ K Kᵀ/(1 − p pᵀ) (elementwise: Φ is diagonal). Its free response γΦ^k x̂ = Σ_m u_m p_m^k
    # (u_m the sum of γ_i x̂_i over the states of pole m) is given to the filter as the state
    # W u whose zero-input response it is; cov(u)/Λ = g gᵀ/(1 − p pᵀ).
    one_m = 1.0 - poles
    cauchy = 1.0 / (one_m[:, None] + poles[:, None] * one_m[None, :])  # 1/(1 − p_m p_l)
    cov_u = np.outer(g, g) * cauchy
    var_err = abs(lam * (1.0 + float(np.sum(cov_u))) / C0n - 1.0)
    mapped = _filter_state_map(sos, poles)
    if mapped is None:
        return None
    W, index = mapped
    root = _sqrt_psd(0.5 * (cov_u + cov_u.T))
    init = W @ root
    # Spectrum check.
    w = np.geomspace(max(1e-300, 0.01 * float(1.0 - poles[-1])), np.pi, 200)
    zi = np.exp(-1j * w)
    model = C0 + 2.0 * np.real(np.sum(g_ * M * zi[:, None] / (1.0 - p * zi[:, None]), axis=1))
    hz = np.ones(w.size, dtype=complex)
    for sec in sos:
        hz *= (1.0 + sec[1] * zi + sec[2] * zi**2) / (1.0 + sec[4] * zi + sec[5] * zi**2)
    spec_err = float(np.max(np.abs(lam * s0 * np.abs(hz) ** 2 / model - 1.0)))
    hp = 1.0 + np.sum(g / (1.0 / zi[:, None] - poles), axis=1)  # the parallel form
    par_err = float(np.max(np.abs(lam * s0 * np.abs(hp) ** 2 / model - 1.0)))
    tol = max(INNOVATIONS_TOLERANCE, 16 * np.finfo(float).eps / float(1.0 - poles[-1]))
    if not (spec_err <= tol and var_err <= tol and par_err <= tol):
        return None
    return InnovationsFilter(
        std=math.sqrt(lam * s0),
        sos=sos,
        init=init,
        state_index=index,
        poles=poles,
        zeros=zeros,
        spectrum_error=spec_err,
        variance_error=var_err,
        gains=g,
        parallel_init=root,
        parallel_error=par_err,
    )


def _filter_state_map(
    sos: _FloatArray, poles: _FloatArray
) -> tuple[_FloatArray, npt.NDArray[np.intp]] | None:
    """The states of ``sosfilt(sos, ·)`` whose zero-input responses are p_m^k, one per pole.

    The filter's state map z' = A z + B ε, y = C z + D ε is read off single filter steps
    (exact: no accumulation); states that stay zero (the second state of a first-order
    section) are dropped. Column m of W solves A w = p_m w, C w = 1 (a bordered least-squares
    problem, accurate to ε/gap with the exact pole, where a general eigen-solver would move
    close poles by ~ε·cond). Checked: A W = W diag(p) and C W = 1.

    Returns
    -------
    (W, index) or None
        W, shape (live states, poles); index: their positions in the flattened state.
    """
    from scipy.signal import sosfilt

    ns = sos.shape[0]
    dim = 2 * ns
    A = np.zeros((dim, dim))
    C = np.zeros(dim)
    for j in range(dim):
        z = np.zeros(dim)
        z[j] = 1.0
        y, zf = sosfilt(sos, [0.0], zi=z.reshape(ns, 2))
        A[:, j], C[j] = zf.ravel(), y[0]
    _, zf = sosfilt(sos, [1.0], zi=np.zeros((ns, 2)))
    B = zf.ravel()
    live = np.flatnonzero(np.any(A != 0.0, axis=1) | (B != 0.0))
    A, B, C = A[np.ix_(live, live)], B[live], C[live]
    k = live.size
    if k != poles.size:
        return None
    W = np.empty((k, k))
    rhs = np.zeros(k + 1)
    rhs[-1] = 1.0
    for m, pm in enumerate(poles):
        bordered = np.vstack([A - pm * np.eye(k), C[None, :]])
        W[:, m] = np.linalg.lstsq(bordered, rhs, rcond=None)[0]
    scale = float(np.max(np.abs(W)))
    # (B = W g holds to the rounding of the section coefficients; what that rounding does to
    # the output is what the caller's spectrum check measures.)
    err = max(float(np.max(np.abs(A @ W - W * poles))) / scale, float(np.max(np.abs(C @ W - 1.0))))
    if not (np.all(np.isfinite(W)) and err <= 1e-9):
        return None
    return W, live


class _Innovations(_Source):
    """The stationary part of a channel from one normal stream (:func:`innovations_filter`)."""

    def __init__(self, design: InnovationsFilter, rng: Any) -> None:
        super().__init__()
        self._normals = _Normals(rng) if isinstance(rng, np.random.Generator) else rng
        self._std = design.std
        self.innovations = design
        # The innovation's scale goes into the first section's numerator (the filter is
        # linear: its states scale with it), so the unit deviates enter unscaled.
        self._sos = design.sos.copy()
        self._sos[:1, :3] *= design.std
        self._zi: _FloatArray | None = None
        self._e = np.empty(0)
        self.parallel_state = np.zeros(0)
        if design.sos.shape[0]:
            # initial state from the filter's stationary law (drawn first: fixed layout)
            z = np.zeros(design.sos.shape[0] * 2)
            u = self._normals.normal(design.init.shape[0])
            z[design.state_index] = design.init @ u
            self._zi = (z * design.std).reshape(-1, 2)
            # the same start in parallel form (what a channel's _Parallel source runs)
            self.parallel_state = design.std * (design.parallel_init @ u)

    def _block(self, size: int) -> _FloatArray:
        from scipy.signal import lfilter, sosfilt

        if self._zi is None:
            return self._normals.normal(size, self._std)
        if self._e.size < size:
            self._e = np.empty(size)
        e = self._normals.normal(size, out=self._e[:size])  # scratch: the filter copies it
        if self._sos.shape[0] == 1:
            # one section: lfilter runs the same transposed direct form II, faster
            sec = self._sos[0]
            k = 2 if (sec[2] or sec[5]) else 1  # the order of the section
            y, zf = lfilter(sec[: k + 1], sec[3 : 4 + k], e, zi=self._zi[0, :k])
            self._zi[0, :k] = zf
            return y  # type: ignore[no-any-return]
        y, self._zi = sosfilt(self._sos, e, zi=self._zi)
        return y  # type: ignore[no-any-return]


#: Below this size a matrix product is one single-threaded BLAS call (OpenBLAS threads a
#: product of m·k·n > 2^18: its interface/gemm.c, from memory; here products of 10^6 ran
#: threaded and 3x slower): the block engine cuts its products into such pieces, so its
#: results do not depend on the BLAS thread count and other threads' cores stay free.
_BLAS_PIECE = 1 << 18


def _rows(m: int, k: int, n: int) -> int:
    """Rows per piece of an (m, k) @ (k, n) product: the largest power of two dividing m
    with rows·k·n <= _BLAS_PIECE."""
    cap = max(1, _BLAS_PIECE // (k * n))
    return math.gcd(m, 1 << (cap.bit_length() - 1))


def _powers(q: _FloatArray, k: npt.ArrayLike) -> _FloatArray:
    """q_i^k_j as an array (len(q), len(k)); powers below 1e-150 (which add nothing to a
    float64 sum) are set to 0, so no denormal numbers slow the products down."""
    w = np.power(q[:, None], np.asarray(k, dtype=float)[None, :])
    w[w < 1e-150] = 0.0
    return w


def _decay_matrix(q: _FloatArray, size: int) -> _FloatArray:
    """A[i, j, l] = q_i^(j−1−l) for l < j, else 0 (j = 0 … size, l < size): the zero-start
    state of x_(j) = q x_(j−1) + u_(j−1) is (A_i @ u)_j."""
    lag = np.arange(size + 1)[:, None] - 1 - np.arange(size)[None, :]
    a = _powers(q, np.maximum(lag, 0).ravel()).reshape(q.size, size + 1, size)
    a[:, lag < 0] = 0.0
    return a


class _Parallel(_Source):
    """A sum of first-order recursions driven by independent unit normal streams, evaluated
    block by block with matrix products.

    y_k = Σ_s d_s ε_s[k] + Σ_i x_i[k],  x_i[k+1] = p_i x_i[k] + g_i ε_(s(i))[k]  (0 < p_i ≤ 1):
    the channel's innovations stream in parallel form (:attr:`InnovationsFilter.gains`) and
    its random walks (p = 1). This is the linear map of running the recursions sample by
    sample (:func:`scipy.signal.lfilter`), regrouped (D. Blelloch's "prefix sums and their
    applications", CMU-CS-90-190, 1990, for first-order recurrences): in sub-blocks of
    :attr:`SUB` samples the output is the deviates times the sub-block's impulse responses (a
    Toeplitz matrix) plus the free response p_i^k of the states entering the sub-block; those
    states follow from each sub-block's zero-start increments by the same recursion over
    sub-blocks (q_i = p_i^SUB), solved in chunks of :attr:`CHUNK` the same way, level by
    level. Rounding: sums of at most SUB or CHUNK terms per level instead of one long
    recursion. The partition is the fixed block schedule, so the record does not depend on
    the chunking.
    """

    SUB = 16
    CHUNK = 16

    def __init__(
        self,
        normals: Sequence[Any],
        direct: Sequence[float],
        stream: Sequence[int],
        poles: npt.ArrayLike,
        gains: npt.ArrayLike,
        state: npt.ArrayLike,
    ) -> None:
        super().__init__()
        L, c = self.SUB, self.CHUNK
        self._normals = list(normals)
        p = np.asarray(poles, dtype=float)
        g = np.asarray(gains, dtype=float)
        st = np.asarray(stream, dtype=np.intp)
        x0 = np.asarray(state, dtype=float)
        if p.size and np.any(np.diff(st) < 0):
            raise AssertionError("poles must be grouped by stream")  # pragma: no cover
        if p.size == 1:
            # A second, idle state (gain 0, state 0: it adds exact zeros): products with an
            # inner dimension of 1 are 10x slower than with 2 in numpy's matmul.
            p, g, st, x0 = (
                np.append(v, e) for v, e in ((p, 0.5), (g, 0.0), (st, st[0]), (x0, 0.0))
            )
        self._x = x0.copy()
        self._n, self._ns = p.size, len(self._normals)
        lag = np.arange(L)[:, None] - 1 - np.arange(L)[None, :]  # [k, l]
        pw = _powers(p, np.maximum(lag, 0).ravel()).reshape(p.size, L, L)
        tail = _powers(p, L - 1 - np.arange(L))  # (n, L): p^(L−1−l)
        self._T: list[_FloatArray] = []  # per stream, (L, L): deviate l → output k, as [l, k]
        self._V: list[tuple[int, slice, _FloatArray]] = []  # stream, its states, (n_s, L)
        for s in range(self._ns):
            mine = np.flatnonzero(st == s)
            T = np.diag(np.full(L, float(direct[s])))
            if mine.size:
                T += np.where(lag >= 0, np.einsum("i,ikl->kl", g[mine], pw[mine]), 0.0)
                rows = slice(int(mine[0]), int(mine[-1]) + 1)
                self._V.append((s, rows, g[mine, None] * tail[mine]))
            self._T.append(T.T.copy())
        self._O = _powers(p, np.arange(L))  # (n, L): free response of an entering state
        self._F = _powers(p, np.arange(c * L))  # (n, c·L): of a chunk's entering state
        self._q = _powers(p, [L])[:, 0]
        self._scans: dict[tuple[int, int], tuple[_FloatArray, ...]] = {}
        self._D = np.empty((self._ns, 0))
        self._U = self._tmp = np.empty(0)

    def _level(self, q: _FloatArray, m: int, level: int) -> tuple[_FloatArray, ...]:
        """The matrices of one level of :meth:`_scan` (cached)."""
        key = (level, m)
        if key not in self._scans:
            a = _decay_matrix(q, m)  # (n, m + 1, m)
            pw = _powers(q, np.arange(m + 1))
            inner = a[:, :m, :].transpose(0, 2, 1).copy()  # (n, m, m): u → entering states
            end = a[:, m, :, None].copy()  # (n, m, 1): u → the state after the last
            self._scans[key] = (inner, end, pw[:, None, :m].copy(), pw[:, m].copy())
        return self._scans[key]

    def _scan(
        self, u: _FloatArray, q: _FloatArray, x0: _FloatArray, level: int
    ) -> tuple[_FloatArray, _FloatArray]:
        """The states x_(j) entering steps j = 0 … M − 1 of x_(j+1) = q x_(j) + u_(j),
        x_(0) = x0, and x_(M); pole-major: u (n, M) → (n, M), (n,). In chunks of CHUNK
        steps: from a zero start within each chunk (a matrix product), the chunks' entering
        states by the same recursion one level up (q^CHUNK), plus their free response."""
        n, m = u.shape
        c = self.CHUNK
        if m <= c or m % c:
            inner, end, pw, pw_end = self._level(q, m, level)
            x = (u[:, None, :] @ inner)[:, 0, :]
            x += pw[:, 0, :] * x0[:, None]
            return x, (u[:, None, :] @ end)[:, 0, 0] + pw_end * x0
        inner, end, pw, pw_end = self._level(q, c, level)
        u3 = u.reshape(n, m // c, c)
        start, last = self._scan((u3 @ end)[:, :, 0], pw_end, x0, level + 1)
        x = u3 @ inner
        x += start[:, :, None] * pw
        return x.reshape(n, m), last

    def _block(self, size: int) -> _FloatArray:
        out = np.empty(size)
        self._block_into(size, out)
        return out

    def _block_into(self, size: int, out: _FloatArray) -> None:
        """The next block's output into ``out`` (contiguous, length ``size``)."""
        L, c, n = self.SUB, self.CHUNK, self._n
        m = size // L
        if m * L != size:  # pragma: no cover - the schedule's blocks are multiples of SUB
            raise AssertionError(f"block {size} is not a multiple of {L}")
        if self._D.shape[1] < size:
            self._D = np.empty((self._ns, size))
            self._U, self._tmp = np.empty(n * m), np.empty(size)
        D = self._D[:, :size]
        for s, normals in enumerate(self._normals):
            normals.normal(size, out=D[s])
        r = _rows(m, L, L)
        y, tmp = out.reshape(m // r, r, L), self._tmp[:size].reshape(m // r, r, L)
        for s in range(self._ns):  # the sub-blocks' own responses
            np.matmul(D[s].reshape(m // r, r, L), self._T[s], out=y if s == 0 else tmp)
            if s:
                y += tmp
        if not n:
            return
        # each sub-block's zero-start state increments, pole-major (n, m)
        U = self._U[: n * m].reshape(n, m)
        r = _rows(m, L, max(v.shape[0] for _, _, v in self._V))
        for s, rows, v in self._V:
            np.matmul(
                v,
                D[s].reshape(m // r, r, L).transpose(0, 2, 1),
                out=U[rows].reshape(v.shape[0], m // r, r).transpose(1, 0, 2),
            )
        # states entering each sub-block: within chunks of c sub-blocks from zero, and the
        # chunks' own entering states (one level up), whose free response is added via F
        if m % c:
            x, self._x = self._scan(U, self._q, self._x, 0)
            start = None
        else:
            inner, end, _, pw_end = self._level(self._q, c, 0)
            u3 = U.reshape(n, m // c, c)
            start, self._x = self._scan((u3 @ end)[:, :, 0], pw_end, self._x, 1)
            x = (u3 @ inner).reshape(n, m)
        r = _rows(m, n, L)
        np.matmul(x.T.reshape(m // r, r, n), self._O, out=tmp.reshape(m // r, r, L))
        out += self._tmp[:size]
        if start is not None:
            k = m // c
            r = _rows(k, n, c * L)
            full = self._tmp[:size].reshape(k // r, r, c * L)
            np.matmul(start.T.reshape(k // r, r, n), self._F, out=full)
            out += self._tmp[:size]


def _is_stationary_diagonal(ss: Any, sm: StepModel) -> bool:
    """A realization whose states are first-order and stationary from t = 0 (Gauss-Markov,
    flicker): Φ diagonal with 0 < p < 1, P0 the stationary covariance of the step."""
    n = sm.phi.shape[0]
    if n == 0 or np.count_nonzero(sm.phi - np.diag(np.diag(sm.phi))):
        return False
    p = np.diag(sm.phi)
    if not (np.all(p > 0) and np.all(p < 1)):
        return False
    sigma = sm.qxx / (1.0 - np.outer(p, p))
    P0 = np.asarray(ss.P0, dtype=float)
    return bool(np.allclose(P0, sigma, rtol=1e-9, atol=1e-12 * float(np.max(np.abs(sigma)))))


@lru_cache(maxsize=256)
def _channel_innovations(
    terms: tuple[Term, ...], sample_rate: float, dt: float, white: float
) -> InnovationsFilter | None:
    """:func:`innovations_filter` of the stationary terms of a channel (cached: the runs of an
    ensemble and the channels with the same terms share it)."""
    if not terms:
        return innovations_filter(np.zeros(0), np.zeros(0), np.zeros((0, 0)), np.zeros(0), white)
    sms = [_term_step(t, sample_rate, dt)[1] for t in terms]
    from .linear import _block_diag

    return innovations_filter(
        np.concatenate([np.diag(sm.phi) for sm in sms]),  # type: ignore[union-attr]
        np.concatenate([sm.gamma for sm in sms]),  # type: ignore[union-attr]
        _block_diag([sm.qxx for sm in sms]),  # type: ignore[union-attr]
        np.concatenate([sm.c for sm in sms]),  # type: ignore[union-attr]
        white,
    )


# -- one channel ------------------------------------------------------------------------------


@lru_cache(maxsize=256)
def _term_step(term: Term, sample_rate: float, dt: float) -> tuple[Any, StepModel | None]:
    """The term's realization (at the channel's rate) and its exact step model at dt; cached so
    that the runs of an ensemble share them."""
    ss = term.state_space(sample_rate=sample_rate)
    return ss, (step_model(ss.F, ss.G, ss.Qc, ss.H, dt) if ss.n else None)


class _ChannelGenerator(_Source):
    """One channel: the sum of its sources, block by block on the shared schedule."""

    def __init__(
        self, channel: Channel, rate: float, *, seed: int, run: int, flicker: str, max_taps: int
    ) -> None:
        from .terms import Flicker, Quantization, Ramp, RandomConstant, White

        super().__init__()
        dt = 1.0 / rate
        cid = channel.id
        self.sources: list[_Source] = []  # on the shared block schedule
        self.own: list[_Source] = []  # with their own block length (power-law flicker)
        self.offset = 0.0  # random constants
        white_var = 0.0
        quant = 0.0
        stationary: list[tuple[int, Term]] = []
        for i, term in enumerate(channel.terms):
            if isinstance(term, White) and not term.band_limited:
                white_var += term.density**2 / dt
            elif isinstance(term, Quantization):
                quant += term.coefficient**2
            elif isinstance(term, RandomConstant):
                if term.sigma:
                    self.offset += term.sigma * float(
                        _rng(seed, run, cid, _CONST_SLOT, i).standard_normal()
                    )
            elif isinstance(term, Ramp):
                if term.slope:
                    sign = 1.0 if _rng(seed, run, cid, _RAMP_SLOT, i).random() < 0.5 else -1.0
                    self.sources.append(_Ramp(sign * term.slope, dt))
            elif isinstance(term, Flicker) and flicker == "power-law":
                if term.coefficient:
                    taps = _kasdin_taps(term, rate, max_taps)
                    self.own.append(
                        _PowerLaw(term.coefficient, taps, _rng(seed, run, cid, _TERM_SLOT, i))
                    )
            else:
                ss, sm = _term_step(term, channel.sample_rate, dt)
                if ss.white or ss.quantization:
                    white_var += ss.white / dt
                    quant += ss.quantization
                if ss.n:
                    assert sm is not None
                    white_var += sm.residual
                    if _is_stationary_diagonal(ss, sm):
                        stationary.append((i, term))
                    else:
                        self.sources.append(
                            _StateSpace(ss, sm, _rng(seed, run, cid, _TERM_SLOT, i))
                        )
        if quant:
            self.sources.append(
                _Quantization(math.sqrt(quant), dt, _rng(seed, run, cid, _QUANT_SLOT))
            )
        # White noise, the terms' independent residuals and the stationary Gauss-Markov and
        # flicker states: one innovation stream (module notes), or state by state if the
        # innovations form does not apply.
        design = None
        if white_var or stationary:
            design = _channel_innovations(
                tuple(t for _, t in stationary), channel.sample_rate, dt, white_var
            )
        if design is not None:
            self.sources.append(_Innovations(design, _rng(seed, run, cid, _WHITE_SLOT)))
        else:
            for i, term in stationary:
                ss, sm = _term_step(term, channel.sample_rate, dt)
                self.sources.append(
                    _StateSpace(ss, sm, _rng(seed, run, cid, _TERM_SLOT, i))  # type: ignore[arg-type]
                )
            if white_var:
                self.sources.append(_White(math.sqrt(white_var), _rng(seed, run, cid, _WHITE_SLOT)))
        self.innovations = design
        self._store = np.empty(0)
        if design is not None:
            self._fuse()

    def _fuse(self) -> None:
        """Run the innovations stream and the single-state random walks (each its own normal
        stream) as one :class:`_Parallel` source, when the innovations stream has poles (white
        noise and random walks alone are as fast as a scaled stream and a running sum)."""
        normals: list[Any] = []
        direct: list[float] = []
        stream: list[int] = []
        poles: list[float] = []
        gains: list[float] = []
        state: list[float] = []
        rest: list[_Source] = []
        coloured = False
        for src in self.sources:
            if isinstance(src, _Innovations) and isinstance(src._normals, _Normals):
                d = src.innovations
                if src._zi is not None:
                    coloured = True
                    stream += [len(normals)] * d.poles.size
                    poles += d.poles.tolist()
                    gains += (d.std * d.gains).tolist()
                    state += src.parallel_state.tolist()
                normals.append(src._normals)
                direct.append(d.std)
            elif (
                isinstance(src, _StateSpace)
                and isinstance(src._normals, _Normals)
                and src._diagonal
                and src._n == 1
                and src._m == 1
                and src._independent
                and 0.0 < -src._a[0, 1] <= 1.0
            ):
                # y_k = b₀ε_k + x_k, x_(k+1) = φ x_k + (b₁ + b₀φ) ε_k (its lfilter, regrouped)
                (b0, b1), phi = src._bs[0], -float(src._a[0, 1])
                stream.append(len(normals))
                poles.append(phi)
                gains.append(float(b1 + b0 * phi))
                state.append(float(src._zi[0]))
                normals.append(src._normals)
                direct.append(float(b0))
            else:
                rest.append(src)
        if coloured:
            self.sources = [_Parallel(normals, direct, stream, poles, gains, state), *rest]

    def _block(self, size: int) -> _FloatArray:
        out = np.empty(size)
        self._block_into(size, out)
        return out

    def _block_into(self, size: int, out: _FloatArray) -> None:
        if not self.sources:
            out[...] = 0.0
        else:
            first = self.sources[0]
            if isinstance(first, _Parallel):
                first._block_into(size, out)
            else:
                out[...] = first._block(size)
            for src in self.sources[1:]:
                out += src._block(size)
        for src in self.own:
            out += src.take(size)
        if self.offset:
            out += self.offset

    def take(self, n: int, out: _FloatArray | None = None) -> _FloatArray:
        """The next ``n`` samples [u] (into ``out`` when given): whole blocks straight into a
        contiguous ``out``, the rest through one reused buffer (the same values either way)."""
        if out is None:
            out = np.empty(n)
        direct = out.flags.c_contiguous
        filled = 0
        while filled < n:
            if self._pos >= self._buf.size:
                size = _block_size(self._index)
                self._index += 1
                if direct and n - filled >= size:
                    self._block_into(size, out[filled : filled + size])
                    filled += size
                    self._buf, self._pos = self._store[:0], 0
                    continue
                if self._store.size < size:
                    self._store = np.empty(BLOCK)
                self._buf, self._pos = self._store[:size], 0
                self._block_into(size, self._buf)
            k = min(n - filled, self._buf.size - self._pos)
            out[filled : filled + k] = self._buf[self._pos : self._pos + k]
            filled += k
            self._pos += k
        return out


# -- public API -------------------------------------------------------------------------------


def new_seed() -> int:
    """A fresh 32-bit seed from the operating system's entropy (print it to repeat the
    record)."""
    return int(np.random.SeedSequence().entropy) % 2**32  # type: ignore[arg-type]


def record_rate(model: NoiseModel, rate: float | None = None) -> float:
    """The rate a record of ``model`` is simulated at [Hz].

    Parameters
    ----------
    model : NoiseModel
        The model.
    rate : float, optional
        An explicit rate [Hz]; without it the channels' common sample rate (an
        :class:`~sensormodel.errors.AnalysisError` when they differ).

    Returns
    -------
    float
    """
    return _common_rate(model, rate)


def samples_for(duration: float, rate: float) -> int:
    """The number of samples of a record (duration × rate, rounded; at least one).

    Parameters
    ----------
    duration : float
        Record length [s].
    rate : float
        Sample rate [Hz].

    Returns
    -------
    int
    """
    rate = _check_rate(rate)
    d = float(duration)
    n = round(d * rate) if math.isfinite(d) else 0
    if n < 1:
        raise AnalysisError(
            f"duration {duration!r} s at {rate:g} Hz is {n} samples",
            f"at least one sample period ({1.0 / rate:g} s)",
        )
    return int(n)


def _common_rate(model: NoiseModel, rate: float | None) -> float:
    if rate is not None:
        return _check_rate(rate)
    rates = sorted({c.sample_rate for c in model.channels})
    if len(rates) != 1:
        raise AnalysisError(
            f"the channels have different sample rates {rates} Hz",
            "a simulation rate (rate=..., or --rate) shared by the record",
        )
    return _check_rate(rates[0], "sample_rate")


#: Reads shorter than this many rows run the channels one after the other (thread overhead).
_THREADED_READ = 4096
_EXECUTOR: Any = None
_EXECUTOR_LOCK = threading.Lock()


def _available_cores() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not on Linux
        return os.cpu_count() or 1


def _executor() -> Any:
    """The module's worker threads (one per available core), created on first use."""
    global _EXECUTOR
    with _EXECUTOR_LOCK:
        if _EXECUTOR is None:
            from concurrent.futures import ThreadPoolExecutor

            _EXECUTOR = ThreadPoolExecutor(
                max_workers=_available_cores(), thread_name_prefix="sensormodel-simulate"
            )
        return _EXECUTOR


class Simulator:
    """A streaming noise generator for the channels of a model (one run).

    Parameters
    ----------
    model : NoiseModel
        The model; its channels are simulated in file order (or ``channels``).
    rate : float, optional
        Simulation rate [Hz]; default the channels' common sample rate.
    seed : int, optional
        Seed of the record; ``None`` draws fresh entropy (read it back from :attr:`seed`).
    run : int
        Run index for Monte Carlo ensembles: run r of a seed is independent of every other run.
    increments : bool
        Deliver increments (integral over each sample period, [u·s]) instead of rate samples
        (period means, [u]).
    flicker : {"realization", "power-law"}
        Flicker method (module notes).
    channels : sequence of str, optional
        Channel ids to simulate (default all).
    max_taps : int
        Largest Kasdin-Walter filter length (``flicker="power-law"``).
    threads : int, optional
        Channels generated at once, in threads (default: one per available core, at most one
        per channel). The record does not depend on it: every channel has its own streams.

    Attributes
    ----------
    channel_ids : list of str
    units : list of str
        The channels' SI units of the *rate* samples (an increment is that unit times s).
    rate : float
        [Hz].
    seed : int
    threads : int
        Channels generated at once.
    position : int
        Samples delivered so far.
    """

    def __init__(
        self,
        model: NoiseModel,
        rate: float | None = None,
        *,
        seed: int | None = None,
        run: int = 0,
        increments: bool = False,
        flicker: str = "realization",
        channels: Sequence[str] | None = None,
        max_taps: int = DEFAULT_MAX_TAPS,
        threads: int | None = None,
    ) -> None:
        model = model.select(list(channels) if channels else None)
        self.rate = _common_rate(model, rate)
        self.seed = _check_seed(seed)
        self.run = _check_count(run, "run", minimum=0)
        self.increments = bool(increments)
        self.flicker = _check_method(flicker)
        max_taps = _check_count(max_taps, "max_taps", minimum=2)
        self.channel_ids = [c.id for c in model.channels]
        self.units = [c.unit for c in model.channels]
        self.position = 0
        self._gens = [
            _ChannelGenerator(
                c, self.rate, seed=self.seed, run=self.run, flicker=self.flicker, max_taps=max_taps
            )
            for c in model.channels
        ]
        cores = _available_cores() if threads is None else _check_count(threads, "threads")
        self.threads = max(1, min(cores, len(self._gens)))

    @property
    def dt(self) -> float:
        """Sample period [s]."""
        return 1.0 / self.rate

    def read(self, n: int) -> _FloatArray:
        """The next ``n`` samples of every channel.

        Returns
        -------
        ndarray, shape (n, n_channels)
            Rate samples [u] or increments [u·s] (SI), float64.
        """
        n = _check_count(n, "n", minimum=0)
        out = np.empty((n, len(self._gens)))
        if self.threads > 1 and n >= _THREADED_READ:
            # numpy's generators, its ufuncs and scipy's filters release the GIL: channels
            # run in parallel; each is gathered into the (row-major) record by this thread.
            jobs = [_executor().submit(g.take, n) for g in self._gens]
            for j, job in enumerate(jobs):
                out[:, j] = job.result()
        else:
            for j, g in enumerate(self._gens):
                g.take(n, out[:, j])
        if self.increments:
            out *= self.dt
        self.position += n
        return out

    def chunks(self, n: int, *, chunk: int = BLOCK) -> Iterator[_FloatArray]:
        """Yield the next ``n`` samples in blocks of at most ``chunk`` rows."""
        n = _check_count(n, "n", minimum=0)
        chunk = _check_count(chunk, "chunk")
        done = 0
        while done < n:
            k = min(chunk, n - done)
            yield self.read(k)
            done += k


def simulate(
    model: NoiseModel,
    n: int,
    rate: float | None = None,
    seed: int | None = None,
    *,
    run: int = 0,
    increments: bool = False,
    flicker: str = "realization",
    channels: Sequence[str] | None = None,
    max_taps: int = DEFAULT_MAX_TAPS,
    threads: int | None = None,
) -> _FloatArray:
    """A noise record of ``n`` samples per channel, in memory.

    Parameters
    ----------
    model : NoiseModel
        The noise model.
    n : int
        Samples per channel.
    rate : float, optional
        Sample rate [Hz] (default: the channels' common sample rate).
    seed : int, optional
        Seed; the same seed gives the same record (``None``: fresh entropy).
    run : int
        Run index of a Monte Carlo ensemble: runs of one seed are independent records.
    increments : bool
        Increments per sample period [u·s] instead of rate samples (period means) [u].
    flicker : {"realization", "power-law"}
        Flicker method (module notes).
    channels : sequence of str, optional
        Channel ids to simulate (default all, in model order).
    max_taps : int
        Largest Kasdin-Walter filter length (``flicker="power-law"``).
    threads : int, optional
        Channels generated at once (default: one per available core); the record does not
        depend on it.

    Returns
    -------
    ndarray, shape (n, n_channels)
        Rate samples [u] (period means; rad/s, m/s²) or increments [u·s] (rad, m/s), channels in
        model order (or ``channels`` order).

    Examples
    --------
    >>> from sensormodel.model import Channel, NoiseModel
    >>> from sensormodel.terms import White
    >>> m = NoiseModel(sensor={}, channels=(Channel("gyro.z", "angular_rate", "rad/s", 100.0,
    ...                                             (White(1e-4),)),))
    >>> y = simulate(m, 1000, seed=1)
    >>> y.shape
    (1000, 1)
    """
    n = _check_count(n, "n")
    sim = Simulator(
        model,
        rate,
        seed=seed,
        run=run,
        increments=increments,
        flicker=flicker,
        channels=channels,
        max_taps=max_taps,
        threads=threads,
    )
    return sim.read(n)


def simulate_ensemble(
    model: NoiseModel,
    n: int,
    rate: float | None = None,
    *,
    runs: int,
    seed: int | None = None,
    increments: bool = False,
    flicker: str = "realization",
    channels: Sequence[str] | None = None,
    max_taps: int = DEFAULT_MAX_TAPS,
) -> _FloatArray:
    """``runs`` independent records (Monte Carlo), in memory.

    Run r is the record of :func:`simulate` with ``run=r`` and the same seed. For long records
    use :func:`ensemble_statistics` (streamed) or :func:`write_record` per run.

    Parameters
    ----------
    model : NoiseModel
        The noise model.
    n : int
        Samples per channel and run.
    rate : float, optional
        Sample rate [Hz] (default: the channels' common sample rate).
    runs : int
        Number of runs.
    seed : int, optional
        Seed of the ensemble.
    increments : bool
        Increments per sample period [u·s] instead of rate samples [u].
    flicker : {"realization", "power-law"}
        Flicker method (module notes).
    channels : sequence of str, optional
        Channel ids to simulate (default all).
    max_taps : int
        Largest Kasdin-Walter filter length.

    Returns
    -------
    ndarray, shape (runs, n, n_channels)
        SI, as in :func:`simulate`.
    """
    runs = _check_count(runs, "runs")
    seed = _check_seed(seed)
    out = np.empty(
        (
            runs,
            _check_count(n, "n"),
            len(model.select(list(channels) if channels else None).channels),
        )
    )
    for r in range(runs):
        out[r] = simulate(
            model,
            n,
            rate,
            seed,
            run=r,
            increments=increments,
            flicker=flicker,
            channels=channels,
            max_taps=max_taps,
        )
    return out


@dataclass(frozen=True)
class EnsembleStatistics:
    """Across-run statistics of the integrated output (angle [rad], velocity [m/s]).

    Attributes
    ----------
    time : ndarray, shape (k,)
        Instants t_i [s] (multiples of the sample period).
    mean : ndarray, shape (k, n_channels)
        Ensemble mean of the integrated output ∫₀^t y dt at each instant [u·s].
    variance : ndarray, shape (k, n_channels)
        Unbiased ensemble variance (divisor runs − 1) [u²·s²].
    runs : int
    channel_ids : list of str
    seed : int
    """

    time: _FloatArray
    mean: _FloatArray
    variance: _FloatArray
    runs: int
    channel_ids: list[str]
    seed: int


def ensemble_statistics(
    model: NoiseModel,
    duration: float,
    rate: float | None = None,
    *,
    runs: int,
    seed: int | None = None,
    times: npt.ArrayLike | None = None,
    flicker: str = "realization",
    channels: Sequence[str] | None = None,
    max_taps: int = DEFAULT_MAX_TAPS,
    progress: Callable[[int], None] | None = None,
) -> EnsembleStatistics:
    """Monte Carlo: the ensemble mean and variance of the integrated output at given instants.

    Each run is streamed (constant memory); the integrated output θ(t_k) = Σ_{j<k} Δ_j of the
    increments Δ_j is sampled at the requested instants and accumulated across runs (Welford).
    Compare the variance with the propagated covariance of the variance equation
    (:func:`sensormodel.linear.propagate` of the realization augmented with an integrator); a
    quantization term adds var(e_k − e_0) = 2Q² at every instant.

    Parameters
    ----------
    model : NoiseModel
        The noise model.
    duration : float
        Length of each run [s].
    rate : float, optional
        Sample rate [Hz]; default the channels' common sample rate.
    runs : int
        Number of independent runs (≥ 2).
    seed : int, optional
        Seed of the ensemble (run r is the record of :func:`simulate` with ``run=r``).
    times : array_like, optional
        Instants [s] in (0, duration], rounded to whole samples; default 40 instants spaced
        logarithmically from one sample period to ``duration``.
    flicker : {"realization", "power-law"}
        Flicker method (module notes).
    channels : sequence of str, optional
        Channel ids (default all).
    max_taps : int
        Largest Kasdin-Walter filter length.
    progress : callable, optional
        Called with the number of samples generated after each chunk.

    Returns
    -------
    EnsembleStatistics
    """
    runs = _check_count(runs, "runs", minimum=2)
    seed = _check_seed(seed)
    sel = model.select(list(channels) if channels else None)
    r = _common_rate(sel, rate)
    duration = float(duration)
    n = samples_for(duration, r)
    if times is None:
        idx = np.unique(np.round(np.geomspace(1.0, n, 40)).astype(np.int64))
    else:
        t = np.asarray(times, dtype=float).ravel()
        if t.size == 0 or not np.all(np.isfinite(t)) or np.any(t <= 0) or np.any(t > duration):
            raise AnalysisError("times outside (0, duration]", "instants within the run, in s")
        idx = np.unique(np.clip(np.round(t * r).astype(np.int64), 1, n))
    k = len(sel.channels)
    mean = np.zeros((idx.size, k))
    m2 = np.zeros((idx.size, k))
    for run in range(runs):
        sim = Simulator(
            sel, r, seed=seed, run=run, increments=True, flicker=flicker, max_taps=max_taps
        )
        theta = np.zeros(k)
        start = 0
        values = np.empty((idx.size, k))
        for block in sim.chunks(int(idx[-1])):
            cum = np.cumsum(block, axis=0) + theta
            stop = start + block.shape[0]
            sel_i = (idx > start) & (idx <= stop)
            values[sel_i] = cum[idx[sel_i] - start - 1]
            theta = cum[-1]
            start = stop
            if progress is not None:
                progress(block.shape[0])
        delta = values - mean
        mean += delta / (run + 1)
        m2 += delta * (values - mean)
    return EnsembleStatistics(
        time=idx / r,
        mean=mean,
        variance=m2 / (runs - 1),
        runs=runs,
        channel_ids=[c.id for c in sel.channels],
        seed=seed,
    )


def run_path(path: str | os.PathLike[str], run: int, runs: int) -> pathlib.Path:
    """The file name of run ``run`` of an ensemble of ``runs`` written to ``path``.

    One run: ``path`` itself. Several: ``name-run007.ext`` (zero-padded to the width of
    ``runs − 1``, at least three digits); a ``{run}`` in the name is replaced instead.

    Parameters
    ----------
    path : path-like
        The name given for the record(s).
    run : int
        Run index (0-based).
    runs : int
        Number of runs.

    Returns
    -------
    pathlib.Path
    """
    p = pathlib.Path(path)
    if runs == 1 and "{run}" not in p.name:
        return p
    width = max(3, len(str(runs - 1)))
    tag = f"{run:0{width}d}"
    if "{run}" in p.name:
        return p.with_name(p.name.replace("{run}", tag))
    suffixes = "".join(p.suffixes[-1:])
    stem = p.name[: len(p.name) - len(suffixes)] if suffixes else p.name
    return p.with_name(f"{stem}-run{tag}{suffixes}")


def write_record(
    path: str | os.PathLike[str],
    model: NoiseModel,
    n: int,
    rate: float | None = None,
    *,
    seed: int | None = None,
    run: int = 0,
    increments: bool = False,
    flicker: str = "realization",
    channels: Sequence[str] | None = None,
    max_taps: int = DEFAULT_MAX_TAPS,
    force: bool = False,
    chunk: int = 4 * BLOCK,
    progress: Callable[[int], None] | None = None,
    threads: int | None = None,
    **writer_options: Any,
) -> Simulator:
    """Stream a simulated record to a file (CSV, NPY, NPZ or HDF5 by extension), atomically.

    Written chunk by chunk through :func:`sensormodel.recording.open_writer`, so memory stays
    constant whatever ``n``.

    Parameters
    ----------
    path : path-like
        Output file; its extension chooses the format (see :mod:`sensormodel.recording`).
    model : NoiseModel
        The noise model.
    n : int
        Samples per channel.
    rate : float, optional
        Sample rate [Hz] (default: the channels' common sample rate).
    seed : int, optional
        Seed (``None``: fresh entropy; read it back from the returned simulator).
    run : int
        Run index of a Monte Carlo ensemble: runs of one seed are independent records.
    increments : bool
        Increments per sample period [u·s] instead of rate samples (period means) [u].
    flicker : {"realization", "power-law"}
        Flicker method (module notes).
    channels : sequence of str, optional
        Channel ids to simulate (default all, in model order).
    max_taps : int
        Largest Kasdin-Walter filter length (``flicker="power-law"``).
    force : bool
        Overwrite an existing file.
    chunk : int
        Rows per write.
    progress : callable, optional
        Called with the number of rows written after each chunk.
    threads : int, optional
        Channels generated at once (default: one per available core); the record does not
        depend on it.
    **writer_options
        Passed on to :func:`sensormodel.recording.open_writer` (``time_column``,
        ``start_time``).

    Returns
    -------
    Simulator
        The exhausted generator (its ``seed``, ``rate``, ``channel_ids``, ``units``).
    """
    from . import recording

    # The writer takes period means (SI rates) and writes increments itself when asked.
    sim = Simulator(
        model,
        rate,
        seed=seed,
        run=run,
        flicker=flicker,
        channels=channels,
        max_taps=max_taps,
        threads=threads,
    )
    n = _check_count(n, "n")
    with recording.open_writer(
        path,
        sim.channel_ids,
        None,
        sim.rate,
        increments=increments,
        force=force,
        n_samples=n,
        **writer_options,
    ) as writer:
        for block in sim.chunks(n, chunk=chunk):
            writer.write(block)
            if progress is not None:
                progress(block.shape[0])
    return sim
