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
  state is drawn from P0 (stationary for Gauss-Markov states, 0 for random walks). For a
  diagonal F (the Gauss-Markov, random-walk and flicker terms) each state is one first-order
  recursion run by :func:`scipy.signal.lfilter` over a whole block with its state carried; a
  non-diagonal F (the ``shaped`` term's companion form) runs as one transfer function per
  noise input (exact impulse response, checked); where that form is not accurate to 1e-9 the
  step-by-step loop is used (exact, slow).
* ``white`` (density N): the mean of white noise of two-sided PSD N² over dt has variance N²/dt
  (increment variance N²·dt, IEEE Std 952 Annex C: Allan variance N²/τ). It shares one Gaussian
  stream with the e_k parts of the state-space terms (independent Gaussians add).
* ``quantization`` (Q): a white error e_k on the integrated output (angle / velocity), of
  variance Q², **uniform** on ±√3·Q as the rounding error of a quantizer is (Q = s/√12 for a
  quantum s). The increment carries e_{k+1} − e_k, the rate sample (e_{k+1} − e_k)/dt; the
  Allan variance is exactly 3 var(e)/τ² = 3Q²/τ² (IEEE Std 952-1997 Annex C).
* ``ramp`` (R): the term is a slope fixed over a run with E[s²] = R² (its P0). Here
  s = ±R with a random sign per run, so every record has exactly the Allan variance R²τ²/2 and
  an ensemble has the covariance of the model (mean 0, var(s) = R²). The ramp value is 0 at
  turn-on (t = 0); the sample k is its mean s·(k + ½)·dt over [k dt, (k+1) dt].
* ``random_constant`` (σ): one N(0, σ²) draw per run and channel, constant over the record.

The channel's output filter (``bandwidth``, ``filter_order``) is **not** applied: samples are
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
in, and a longer record starts with the shorter one.
"""

from __future__ import annotations

import math
import os
import pathlib
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
#: 1/f memory at 1 kHz, 2.9 h at 100 Hz; some 50 MB of working memory per flicker channel).
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

    def take(self, n: int) -> _FloatArray:
        """The next ``n`` period means [u]."""
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
        self._std, self._rng = std, rng

    def _block(self, size: int) -> _FloatArray:
        z = self._rng.standard_normal(size)
        z *= self._std
        return z  # a fresh array: take() may still hold the previous block


class _Quantization(_Source):
    def __init__(self, q: float, dt: float, rng: np.random.Generator) -> None:
        super().__init__()
        self._half = math.sqrt(3.0) * q  # uniform on ±√3 Q has variance Q²
        self._dt, self._rng = dt, rng
        self._last = self._draw(1)[0]

    def _draw(self, n: int) -> _FloatArray:
        return self._half * (2.0 * self._rng.random(n) - 1.0)

    def _block(self, size: int) -> _FloatArray:
        e = np.empty(size + 1)
        e[0] = self._last
        e[1:] = self._draw(size)
        self._last = e[-1]
        return np.diff(e) / self._dt


class _Constant(_Source):
    def __init__(self, value: float) -> None:
        super().__init__()
        self._value = value

    def _block(self, size: int) -> _FloatArray:
        return np.full(size, self._value)


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

    def __init__(self, ss: Any, sm: StepModel, rng: np.random.Generator) -> None:
        super().__init__()
        self._rng = rng
        self.residual = sm.residual
        n = sm.phi.shape[0]
        self._n = n
        # initial state from P0 (drawn first, so the stream's layout is fixed)
        x0 = _sqrt_psd(np.asarray(ss.P0, dtype=float)) @ rng.standard_normal(n)
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

        z = self._rng.standard_normal((self._m, size))
        out = np.zeros(size)
        if self._diagonal:
            w = None if self._independent else self._L @ z
            zero = np.zeros(size)
            for i in range(self._n):
                if self._independent:
                    j = self._row.get(i)
                    b, x = (self._bs[i], z[j]) if j is not None else (self._b[i], zero)
                else:
                    b, x = self._b[i], w[i]  # type: ignore[index]
                if not (b[0] or b[1] or self._zi[i]):
                    continue
                y, zf = lfilter(b, self._a[i], x, zi=self._zi[i : i + 1])
                self._zi[i] = zf[0]
                out += y
            return out
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

    def __init__(self, coefficient: float, taps: int, rng: np.random.Generator) -> None:
        super().__init__()
        self._rng, self._b, self._taps = rng, coefficient, taps
        nfft = max(1 << 15, 1 << int(math.ceil(math.log2(2 * taps))))
        self._nfft = nfft
        self._m = nfft - (taps - 1)  # new samples per block
        self._H = _kasdin_spectrum(taps, nfft)
        self._hist = rng.standard_normal(taps - 1)  # fill the filter's memory: stationary start

    def _next(self) -> _FloatArray:  # the overlap-save length fixes this source's blocks
        return self._block(self._m)

    def _block(self, size: int) -> _FloatArray:
        from scipy import fft

        seg = np.empty(self._nfft)
        seg[: self._taps - 1] = self._hist
        seg[self._taps - 1 :] = self._rng.standard_normal(self._m)
        self._hist = seg[self._nfft - (self._taps - 1) :].copy()
        y = fft.irfft(fft.rfft(seg) * self._H, self._nfft)[self._taps - 1 :]
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


# -- one channel ------------------------------------------------------------------------------


@lru_cache(maxsize=256)
def _term_step(term: Term, sample_rate: float, dt: float) -> tuple[Any, StepModel | None]:
    """The term's realization (at the channel's rate) and its exact step model at dt; cached so
    that the runs of an ensemble share them."""
    ss = term.state_space(sample_rate=sample_rate)
    return ss, (step_model(ss.F, ss.G, ss.Qc, ss.H, dt) if ss.n else None)


class _ChannelGenerator:
    def __init__(
        self, channel: Channel, rate: float, *, seed: int, run: int, flicker: str, max_taps: int
    ) -> None:
        from .terms import Flicker, Quantization, Ramp, RandomConstant, White

        dt = 1.0 / rate
        cid = channel.id
        self.sources: list[_Source] = []
        white_var = 0.0
        quant = 0.0
        for i, term in enumerate(channel.terms):
            if isinstance(term, White) and not term.band_limited:
                white_var += term.density**2 / dt
            elif isinstance(term, Quantization):
                quant += term.coefficient**2
            elif isinstance(term, RandomConstant):
                if term.sigma:
                    value = term.sigma * float(
                        _rng(seed, run, cid, _CONST_SLOT, i).standard_normal()
                    )
                    self.sources.append(_Constant(value))
            elif isinstance(term, Ramp):
                if term.slope:
                    sign = 1.0 if _rng(seed, run, cid, _RAMP_SLOT, i).random() < 0.5 else -1.0
                    self.sources.append(_Ramp(sign * term.slope, dt))
            elif isinstance(term, Flicker) and flicker == "power-law":
                if term.coefficient:
                    taps = _kasdin_taps(term, rate, max_taps)
                    self.sources.append(
                        _PowerLaw(term.coefficient, taps, _rng(seed, run, cid, _TERM_SLOT, i))
                    )
            else:
                ss, sm = _term_step(term, channel.sample_rate, dt)
                if ss.white or ss.quantization:
                    white_var += ss.white / dt
                    quant += ss.quantization
                if ss.n:
                    src = _StateSpace(ss, sm, _rng(seed, run, cid, _TERM_SLOT, i))
                    white_var += src.residual
                    self.sources.append(src)
        if quant:
            self.sources.append(
                _Quantization(math.sqrt(quant), dt, _rng(seed, run, cid, _QUANT_SLOT))
            )
        if white_var:
            self.sources.append(_White(math.sqrt(white_var), _rng(seed, run, cid, _WHITE_SLOT)))

    def take(self, n: int) -> _FloatArray:
        out = np.zeros(n)
        for s in self.sources:
            out += s.take(n)
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

    Attributes
    ----------
    channel_ids : list of str
    units : list of str
        The channels' SI units of the *rate* samples (an increment is that unit times s).
    rate : float
        [Hz].
    seed : int
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
        for j, g in enumerate(self._gens):
            col = g.take(n)
            if self.increments:
                col *= self.dt
            out[:, j] = col
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
        model, rate, seed=seed, run=run, flicker=flicker, channels=channels, max_taps=max_taps
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
