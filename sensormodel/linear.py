"""State-space algebra of the noise models: stacking, exact discretization, covariance.

Every noise term of :mod:`sensormodel.terms` has a finite linear realization driven by white
noise (DESIGN §4)::

    dx/dt = F x + G w,     E[w(t) w(s)ᵀ] = Qc δ(t − s)
    y(t)  = H x + v(t),    E[v(t) v(s)]  = N² δ(t − s)      (the white term)

plus, for quantization, a component that exists only in discrete time (see :class:`StateSpace`).
``Qc`` is the *two-sided* spectral density of ``w`` (IEEE Std 952 convention, DESIGN §3), so the
output's two-sided PSD per hertz is ``S(f) = T(jω) Qc T(jω)ᴴ + N²`` with ``T(s) = H (sI − F)⁻¹ G``
and ω = 2πf (the classical result for the output of a linear system driven by white noise,
``S_out(ω) = H(−jω) W H(jω)ᵀ``).

This module provides

* :func:`stack` — a channel's terms as one block-diagonal system;
* :func:`van_loan` — exact Φ = e^{F dt} and Qd = ∫₀^dt e^{Fs} G Qc Gᵀ e^{Fᵀs} ds (C. F. Van Loan,
  "Computing integrals involving the matrix exponential", IEEE Trans. Automatic Control
  AC-23(3):395-404, 1978);
* :func:`steady_state_covariance` — the solution of F P + P Fᵀ + G Qc Gᵀ = 0;
* :func:`propagate` — P(t) of the variance equation dP/dt = F P + P Fᵀ + G Qc Gᵀ, integrated
  exactly through the discrete form P ← Φ P Φᵀ + Qd;
* :func:`discretize` — Φ, Qd, H, R, P0 of a channel at a filter step dt (:class:`DiscreteModel`);
* the PSD and exact Allan variance of a realization (:meth:`StateSpace.psd`,
  :meth:`StateSpace.allan_variance`), used to check each realization against its term;
* :func:`step_model` — the exact one-step law of a realization together with the mean of its
  output over the step (what a sampled record delivers);
* :func:`innovations_filter` — the steady-state Kalman predictor (innovations form) of a sum of
  stationary first-order states and white noise: one white innovation through a filter with
  the same autocovariance, as second-order sections and in parallel form.

The simulator (:mod:`sensormodel.simulate`) runs these forms; the drift module propagates them.

All arrays are SI: states in the channel unit u (rad/s, m/s²) or its integrals, times in s.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from typing import Any, Protocol

import numpy as np
import numpy.typing as npt

from .errors import AnalysisError
from .validate import positive_array

__all__ = [
    "StateSpace",
    "DiscreteModel",
    "Realizable",
    "R_CONVENTION",
    "R_CONVENTION_QUANTIZATION_IN_R",
    "sided_factor",
    "block_diag",
    "covariance_factor",
    "stack",
    "van_loan",
    "steady_state_covariance",
    "propagate",
    "discretize",
    "StepModel",
    "step_model",
    "InnovationsFilter",
    "innovations_filter",
    "INNOVATIONS_TOLERANCE",
]

#: The meaning of R written into every exported discrete model (DESIGN §10).
R_CONVENTION = (
    "y_k = H x_k + v_k with var(v_k) = R [unit^2]: R = N^2/dt, the variance of the channel's white "
    "term (IEEE Std 952 density N, two-sided PSD N^2) averaged over one step dt, i.e. the "
    "measurement is the sensor output averaged over the step (the white term's output filter, "
    "if any, is not carried as states: its time constant is far below a filter step; for a "
    "single raw sample use "
    "dt = 1/sample_rate). Quantization (Q) is not in R: it is carried exactly by two discrete "
    "states [e_k, e_(k-1)] (white angle/velocity error of variance Q^2) seen through "
    "H = [1/dt, -1/dt]."
)

#: R convention when quantization is folded into R (``discretize(..., quantization="r")``).
R_CONVENTION_QUANTIZATION_IN_R = (
    "y_k = H x_k + v_k with var(v_k) = R [unit^2]: R = N^2/dt + 2 Q^2/dt^2, the variance of the "
    "white term (IEEE Std 952 density N, two-sided PSD N^2) averaged over one step dt plus the "
    "variance of the quantization term (Q) seen over one step; the lag-one correlation -1/2 of the "
    "quantization part is neglected, which overstates the integrated error (conservative)."
)

_FloatArray = npt.NDArray[np.float64]


def _matrix(value: Any, name: str, shape: tuple[int | None, int | None]) -> _FloatArray:
    a = np.asarray(value, dtype=float)
    if a.ndim == 0 and shape == (1, 1):
        a = a.reshape(1, 1)
    if a.ndim != 2:
        raise AnalysisError(f"{name} has {a.ndim} dimensions", f"a 2-D matrix for {name}")
    for got, want, what in zip(a.shape, shape, ("rows", "columns"), strict=True):
        if want is not None and got != want:
            raise AnalysisError(f"{name} has {got} {what}", f"{want} {what} for {name}")
    if not np.all(np.isfinite(a)):
        raise AnalysisError(f"{name} has non-finite entries", f"finite numbers in {name}")
    return a


def _system(F: Any, G: Any, Qc: Any) -> tuple[_FloatArray, _FloatArray, _FloatArray]:
    F = _matrix(F, "F", (None, None))
    n = F.shape[0]
    if F.shape[1] != n:
        raise AnalysisError(f"F is {F.shape[0]}x{F.shape[1]}", "a square F")
    G = _matrix(G, "G", (n, None))
    m = G.shape[1]
    Qc = _matrix(Qc, "Qc", (m, m))
    if not np.allclose(Qc, Qc.T, rtol=1e-12, atol=0.0):
        raise AnalysisError("Qc is not symmetric", "a symmetric noise intensity Qc")
    return F, G, Qc


def block_diag(blocks: Sequence[_FloatArray]) -> _FloatArray:
    """The block-diagonal matrix of ``blocks`` (2-D arrays, any shapes), zeros elsewhere."""
    rows = sum(b.shape[0] for b in blocks)
    cols = sum(b.shape[1] for b in blocks)
    out = np.zeros((rows, cols))
    r = c = 0
    for b in blocks:
        out[r : r + b.shape[0], c : c + b.shape[1]] = b
        r += b.shape[0]
        c += b.shape[1]
    return out


@dataclass(frozen=True)
class StateSpace:
    """A finite realization of one term or of a channel's sum of terms.

    Attributes
    ----------
    F : ndarray, shape (n, n)
        Dynamics matrix [1/s].
    G : ndarray, shape (n, m)
        Noise input matrix.
    Qc : ndarray, shape (m, m)
        Two-sided spectral density of the driving white noise w (E[w(t) w(s)ᵀ] = Qc δ(t − s)).
    H : ndarray, shape (1, n)
        Output matrix: the channel's noise is y = H x (+ white + quantization).
    P0 : ndarray, shape (n, n)
        Covariance of x at t = 0 (turn-on): the stationary covariance for Gauss-Markov states,
        0 for random walks (they start at zero), σ² for random constants, R² for a ramp slope.
    states : tuple of str
        One name per state, e.g. ``("random_walk", "gauss_markov")``.
    white : float
        Two-sided PSD N² of white noise added to the output [u²·s] (the ``white`` term). It has
        no state; in discrete time it becomes R = N²/dt.
    quantization : float
        Q² [u²·s²] of the ``quantization`` term. Quantization is white noise on the *integral*
        of the output (angle, velocity), so its rate-domain PSD grows as f² and it has no finite
        continuous realization. It is realized exactly in discrete time (:func:`discretize`) and
        handled in closed form by :meth:`allan_variance`, :meth:`psd` and the drift module.
    sample_rate : float, optional
        The channel's output rate [Hz]; needed for the quantization PSD.
    """

    F: _FloatArray
    G: _FloatArray
    Qc: _FloatArray
    H: _FloatArray
    P0: _FloatArray
    states: tuple[str, ...] = ()
    white: float = 0.0
    quantization: float = 0.0
    sample_rate: float | None = None

    def __post_init__(self) -> None:
        F, G, Qc = _system(self.F, self.G, self.Qc)
        n = F.shape[0]
        H = _matrix(self.H, "H", (1, n)) if n else np.zeros((1, 0))
        P0 = _matrix(self.P0, "P0", (n, n)) if n else np.zeros((0, 0))
        for name, v in (("F", F), ("G", G), ("Qc", Qc), ("H", H), ("P0", P0)):
            object.__setattr__(self, name, v)
        if len(self.states) != n:
            raise AnalysisError(f"{len(self.states)} state names for {n} states", "one per state")
        object.__setattr__(self, "states", tuple(self.states))
        for name in ("white", "quantization"):
            v = float(getattr(self, name))
            if not (math.isfinite(v) and v >= 0):
                raise AnalysisError(f"{name} = {v!r}", "a finite, non-negative intensity")
            object.__setattr__(self, name, v)

    @property
    def n(self) -> int:
        """Number of continuous states."""
        return int(self.F.shape[0])

    def psd(self, f: npt.ArrayLike, *, sided: str = "two-sided") -> _FloatArray:
        """PSD of the realization's output, S(f) = T(j2πf) Qc T(j2πf)ᴴ + N² (+ quantization).

        Parameters
        ----------
        f : array_like
            Frequencies [Hz], positive.
        sided : {"two-sided", "one-sided"}
            Two-sided (IEEE Std 952 convention, default) or one-sided (= 2 × two-sided).

        Returns
        -------
        ndarray
            PSD [u²/Hz]. Random-constant and ramp states, driven by no noise, add nothing (they
            act through P0 only). Quantization adds (4Q²/τ0)·sin²(πfτ0) with τ0 = 1/sample_rate
            (IEEE Std 952 Annex C), for f below the Nyquist frequency.
        """
        f = positive_array(f, "f")
        factor = sided_factor(sided)
        s = np.full(f.shape, self.white)
        if self.n:
            w = 2.0 * np.pi * f.ravel()
            eye = np.eye(self.n)
            A = 1j * w[:, None, None] * eye[None] - self.F[None]
            X = np.linalg.solve(A, np.broadcast_to(self.G, (w.size, *self.G.shape)))
            T = np.einsum("ij,kjl->kil", self.H, X)  # (k, 1, m)
            S = np.einsum("kil,lm,kim->k", T, self.Qc, T.conj()).real
            s = s + S.reshape(f.shape)
        if self.quantization:
            if not self.sample_rate:
                raise AnalysisError(
                    "the quantization PSD needs the sample period", "a sample_rate [Hz]"
                )
            tau0 = 1.0 / self.sample_rate
            s = s + 4.0 * self.quantization / tau0 * np.sin(np.pi * f * tau0) ** 2
        return factor * s

    def allan_variance(self, tau: npt.ArrayLike) -> _FloatArray:
        """Exact Allan variance of the realization, from its covariance.

        The Allan variance is σ²(τ) = ½ E[(ȳ₂ − ȳ₁)²] with ȳ₁, ȳ₂ the means of y over
        [0, τ] and [τ, 2τ] (IEEE Std 952 Annex C definition). With an accumulator state c,
        dc/dt = −y on [0, τ] and +y on [τ, 2τ], c(2τ) = τ (ȳ₂ − ȳ₁); its variance follows
        exactly from two Van Loan steps starting from ``P0`` (stationary for Gauss-Markov
        states). Quantization adds 3Q²/τ² (discrete-only component).

        Parameters
        ----------
        tau : array_like
            Averaging times [s], positive.

        Returns
        -------
        ndarray
            Allan variance [u²].
        """
        tau = positive_array(tau, "tau")
        n = self.n
        Fa_minus = np.zeros((n + 1, n + 1))
        Fa_minus[:n, :n] = self.F
        Fa_minus[n, :n] = -self.H[0]
        Fa_plus = Fa_minus.copy()
        Fa_plus[n, :n] = self.H[0]
        Ga = block_diag([self.G, np.ones((1, 1))])
        Qa = block_diag([self.Qc, np.full((1, 1), self.white)])
        Pa = block_diag([self.P0, np.zeros((1, 1))])
        out = np.empty(tau.size)
        for i, t in enumerate(tau.ravel()):
            phi, qd = van_loan(Fa_minus, Ga, Qa, float(t))
            p1 = phi @ Pa @ phi.T + qd
            phi, qd = van_loan(Fa_plus, Ga, Qa, float(t))
            p2 = phi @ p1 @ phi.T + qd
            out[i] = 0.5 * p2[n, n] / t**2
        out = out.reshape(tau.shape)
        if self.quantization:
            out = out + 3.0 * self.quantization / tau**2
        return out


def sided_factor(sided: str) -> float:
    """The factor of a ``sided`` PSD over the two-sided one (IEEE Std 952 convention).

    Parameters
    ----------
    sided : {"two-sided", "one-sided"}
        Two-sided (1.0) or one-sided (2.0: the power of −f folded onto f, as Welch returns it).
    """
    if sided == "two-sided":
        return 1.0
    if sided == "one-sided":
        return 2.0
    raise AnalysisError(f"sided = {sided!r}", "'two-sided' or 'one-sided'")


class Realizable(Protocol):
    """Anything with a finite realization: the noise terms of :mod:`sensormodel.terms`."""

    def state_space(self, *, sample_rate: float | None = None) -> StateSpace:
        """The term's realization (F, G, Qc, H, P0) at the channel's rate [Hz]."""
        ...  # pragma: no cover


def stack(terms: Sequence[Realizable], *, sample_rate: float | None = None) -> StateSpace:
    """Stack a channel's terms into one block-diagonal system (their outputs add).

    Parameters
    ----------
    terms : sequence of Realizable
        The channel's noise terms (:mod:`sensormodel.terms`).
    sample_rate : float, optional
        The channel's output rate [Hz]; needed by flicker (realization band) and quantization.

    Returns
    -------
    StateSpace
        F, G, Qc, P0 block-diagonal (the terms are independent), H the concatenation, white and
        quantization intensities summed. Repeated state names get a ``#2``, ``#3`` suffix.
    """
    parts = [t.state_space(sample_rate=sample_rate) for t in terms]
    names: list[str] = []
    for p in parts:
        for s in p.states:
            name, k = s, 2
            while name in names:
                name, k = f"{s}#{k}", k + 1
            names.append(name)
    n = sum(p.n for p in parts)
    return StateSpace(
        F=block_diag([p.F for p in parts]) if parts else np.zeros((0, 0)),
        G=block_diag([p.G for p in parts]) if parts else np.zeros((0, 0)),
        Qc=block_diag([p.Qc for p in parts]) if parts else np.zeros((0, 0)),
        H=np.concatenate([p.H for p in parts], axis=1) if n else np.zeros((1, 0)),
        P0=block_diag([p.P0 for p in parts]) if parts else np.zeros((0, 0)),
        states=tuple(names),
        white=sum(p.white for p in parts),
        quantization=sum(p.quantization for p in parts),
        sample_rate=sample_rate,
    )


def van_loan(
    F: npt.ArrayLike, G: npt.ArrayLike, Qc: npt.ArrayLike, dt: float
) -> tuple[_FloatArray, _FloatArray]:
    """Exact discretization of dx/dt = F x + G w, E[w wᵀ] = Qc δ, over a step dt.

    Van Loan's method (C. F. Van Loan, IEEE Trans. Automatic Control AC-23(3):395-404, 1978):
    with A = [[−F, G Qc Gᵀ], [0, Fᵀ]]·h and B = expm(A), Φ(h) = B₂₂ᵀ and Qd(h) = Φ(h) B₁₂.
    To keep e^{−F h} from overflowing for stiff systems (time constants far below dt) the step
    is split into 2^k equal parts with ‖F‖₁ h ≤ 1/2 and doubled back exactly:
    Qd(2h) = Φ(h) Qd(h) Φ(h)ᵀ + Qd(h), Φ(2h) = Φ(h)². The exponential of the small-norm block
    matrix is its Taylor series (:func:`_expm_small`).

    Parameters
    ----------
    F : array_like, shape (n, n)
        Dynamics [1/s].
    G : array_like, shape (n, m)
        Noise input matrix.
    Qc : array_like, shape (m, m)
        Two-sided spectral density of w.
    dt : float
        Step [s], non-negative.

    Returns
    -------
    Phi : ndarray, shape (n, n)
        State transition matrix e^{F dt}.
    Qd : ndarray, shape (n, n)
        Covariance of the noise accumulated over the step, ∫₀^dt e^{Fs} G Qc Gᵀ e^{Fᵀs} ds.
    """
    F, G, Qc = _system(F, G, Qc)
    dt = float(dt)
    if not (math.isfinite(dt) and dt >= 0):
        raise AnalysisError(f"dt = {dt!r}", "a non-negative, finite step in s")
    n = F.shape[0]
    if n == 0:
        return np.zeros((0, 0)), np.zeros((0, 0))
    W = G @ Qc @ G.T
    parts = _components(F, W)
    if len(parts) > 1:  # independent blocks: each with its own sub-step (accuracy and speed)
        phi, qd = np.zeros((n, n)), np.zeros((n, n))
        for idx in parts:
            ix = np.ix_(idx, idx)
            phi[ix], qd[ix] = _van_loan_block(F[ix], W[ix], dt)
        return phi, qd
    return _van_loan_block(F, W, dt)


def _components(F: _FloatArray, W: _FloatArray) -> list[npt.NDArray[np.intp]]:
    """Groups of states coupled through F or W (connected components of their sparsity)."""
    n = F.shape[0]
    linked = (F != 0) | (F.T != 0) | (W != 0)
    label = -np.ones(n, dtype=int)
    groups = []
    for start in range(n):
        if label[start] >= 0:
            continue
        stack_, members = [start], []
        label[start] = len(groups)
        while stack_:
            i = stack_.pop()
            members.append(i)
            for j in np.flatnonzero(linked[i]):
                if label[j] < 0:
                    label[j] = len(groups)
                    stack_.append(j)
        groups.append(np.array(sorted(members), dtype=np.intp))
    return groups


def _van_loan_block(F: _FloatArray, W: _FloatArray, dt: float) -> tuple[_FloatArray, _FloatArray]:
    n = F.shape[0]
    w_scale = float(np.max(np.abs(W))) or 1.0
    norm = float(np.linalg.norm(F, 1)) * dt
    k = 0 if norm <= 0.5 else int(math.ceil(math.log2(norm / 0.5)))
    h = dt / 2.0**k
    A = np.zeros((2 * n, 2 * n))
    A[:n, :n] = -F * h
    A[:n, n:] = (W / w_scale) * h  # enters B₁₂ linearly: scaled back below
    A[n:, n:] = F.T * h
    B = _expm_small(A)
    phi = B[n:, n:].T.copy()
    qd = phi @ B[:n, n:] * w_scale
    for _ in range(k):
        qd = phi @ qd @ phi.T + qd
        phi = phi @ phi
    return phi, 0.5 * (qd + qd.T)


def _expm_small(A: _FloatArray) -> _FloatArray:
    """e^A by its Taylor series (Horner form, 18 terms) for the Van Loan block matrix.

    Valid here because :func:`van_loan` makes the diagonal blocks ±F h with ‖F h‖₁ <= 1/2 and
    scales the coupling block to unit size; that block enters every power linearly, so the
    truncation error is below 0.5^19/19! ≈ 1e-23 relative. (Plain matrix products: quick for
    the small matrices of noise models, and independent of scipy.linalg.expm, which the tests
    use as the reference.)"""
    eye = np.eye(A.shape[0])
    E = eye.copy()
    for k in range(18, 0, -1):
        E = eye + (A @ E) / k
    return E


def steady_state_covariance(
    F: npt.ArrayLike,
    G: npt.ArrayLike,
    Qc: npt.ArrayLike,
    *,
    states: Sequence[str] | None = None,
) -> _FloatArray:
    """Stationary covariance P of dx/dt = F x + G w: the solution of F P + P Fᵀ + G Qc Gᵀ = 0.

    Solved as the limit P = lim Qd(t), t → ∞, by squaring the exact discrete form
    (Qd(2t) = Φ(t) Qd(t) Φ(t)ᵀ + Qd(t), Φ(2t) = Φ(t)²; the "squared Smith" iteration of the
    discrete Lyapunov equation P = Φ P Φᵀ + Qd), which converges quadratically for stable F.
    Uncoupled blocks (the terms of a stack) are solved apart, each from a step matched to its
    own time scale, so slow and fast states keep full precision side by side.

    Parameters
    ----------
    F, G, Qc : array_like
        As in :func:`van_loan`.
    states : sequence of str, optional
        State names, for the error message.

    Returns
    -------
    ndarray, shape (n, n)
        The stationary covariance [state units²].

    Raises
    ------
    AnalysisError
        If F has an eigenvalue with non-negative real part: random walks, integrators, ramps and
        random constants have no (unique) steady state.
    """
    F, G, Qc = _system(F, G, Qc)
    n = F.shape[0]
    if n == 0:
        return np.zeros((0, 0))
    eig = np.linalg.eigvals(F)
    if np.max(eig.real) >= 0:
        names = list(states) if states is not None else [f"x{i}" for i in range(n)]
        # States whose own dynamics are not damped (exact for the block-diagonal stacks here).
        bad = [names[i] for i in range(n) if F[i, i] >= 0] or names
        raise AnalysisError(
            f"no steady state: states {', '.join(bad)} are not stationary "
            f"(F has an eigenvalue with real part {np.max(eig.real):.3g} >= 0)",
            "a stable system (only Gauss-Markov-type states) for a steady-state covariance",
        )
    W = G @ Qc @ G.T
    P = np.zeros((n, n))
    for idx in _components(F, W):  # independent blocks each get their own starting step
        ix = np.ix_(idx, idx)
        Fb, Wb = F[ix], W[ix]
        phi, qd = _van_loan_block(Fb, Wb, 1.0 / float(np.linalg.norm(Fb, 1)))
        for _ in range(400):
            qd = phi @ qd @ phi.T + qd
            phi = phi @ phi
            if np.max(np.abs(phi)) < 1e-18:
                break
        else:  # pragma: no cover - a stable F always converges well before this
            raise AnalysisError("the steady-state iteration did not converge", "a stable system")
        P[ix] = 0.5 * (qd + qd.T)
    return P


def propagate(
    F: npt.ArrayLike,
    G: npt.ArrayLike,
    Qc: npt.ArrayLike,
    P0: npt.ArrayLike,
    times: npt.ArrayLike,
) -> _FloatArray:
    """Covariance P(t) of the variance equation dP/dt = F P + P Fᵀ + G Qc Gᵀ, P(0) = P0.

    Integrated exactly through the discrete form: P(t_{i+1}) = Φ P(t_i) Φᵀ + Qd with Φ, Qd of
    the step t_{i+1} − t_i from :func:`van_loan`. Steps equal to 12 significant digits share
    one discretization.

    Parameters
    ----------
    F, G, Qc : array_like
        As in :func:`van_loan`.
    P0 : array_like, shape (n, n)
        Covariance at t = 0.
    times : array_like
        Non-decreasing, non-negative times [s].

    Returns
    -------
    ndarray, shape (len(times), n, n)
        P at each time.
    """
    F, G, Qc = _system(F, G, Qc)
    n = F.shape[0]
    P = _matrix(P0, "P0", (n, n)) if n else np.zeros((0, 0))
    t = np.asarray(times, dtype=float).ravel()
    if t.size == 0 or not np.all(np.isfinite(t)) or np.any(t < 0) or np.any(np.diff(t) < 0):
        raise AnalysisError("times are empty, negative or decreasing", "non-decreasing times >= 0")
    out = np.empty((t.size, n, n))
    cache: dict[str, tuple[_FloatArray, _FloatArray]] = {}
    prev = 0.0
    for i, ti in enumerate(t):
        step = float(ti - prev)
        if step > 0:
            key = f"{step:.12g}"
            if key not in cache:
                cache[key] = van_loan(F, G, Qc, step)
            phi, qd = cache[key]
            P = phi @ P @ phi.T + qd
            P = 0.5 * (P + P.T)
        out[i] = P
        prev = float(ti)
    return out


@dataclass(frozen=True)
class DiscreteModel:
    """A channel's noise model in discrete time at a filter step dt.

    ``x_{k+1} = Φ x_k + w_k``, ``cov(w_k) = Qd``; ``y_k = H x_k + v_k``, ``var(v_k) = R``
    (see :attr:`r_convention`); ``cov(x_0) = P0``.

    Attributes
    ----------
    dt : float
        Step [s].
    states : tuple of str
        State names.
    phi, qd, p0 : ndarray, shape (n, n)
        Transition matrix, process-noise covariance [state units²], initial covariance.
    h : ndarray, shape (1, n)
        Measurement matrix.
    r : float
        Measurement-noise variance [u²].
    r_convention : str
        What R means (written into export files).
    """

    dt: float
    states: tuple[str, ...]
    phi: _FloatArray
    qd: _FloatArray
    h: _FloatArray
    r: float
    p0: _FloatArray
    r_convention: str = R_CONVENTION

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready entry (without the channel id): states, phi, qd, h, r, p0."""
        return {
            "states": list(self.states),
            "phi": self.phi.tolist(),
            "qd": self.qd.tolist(),
            "h": self.h.tolist(),
            "r": float(self.r),
            "p0": self.p0.tolist(),
        }


def _unfiltered(term: Any) -> Any:
    """A band-limited white term without its output filter (others unchanged)."""
    if getattr(term, "type", "") == "white" and getattr(term, "bandwidth", None) is not None:
        return replace(term, bandwidth=None, filter_order=None)
    return term


def discretize(source: Any, dt: float, *, quantization: str = "states") -> DiscreteModel:
    """Exact discrete model of a channel (or of a :class:`StateSpace`) at step dt.

    Parameters
    ----------
    source : Channel or StateSpace
        A channel (anything with ``terms`` and ``sample_rate``) or an already stacked system.
    dt : float
        Filter step [s], positive.
    quantization : {"states", "r"}
        How the quantization term (if any) is carried. ``"states"`` (default, exact): two
        discrete states [e_k, e_(k−1)] of the integrated-output error, Φ block [[0, 0], [1, 0]],
        Qd block diag(Q², 0), H entries [1/dt, −1/dt], P0 diag(Q², Q²), so the measurement
        sees (e_k − e_(k−1))/dt. ``"r"``: no states; 2Q²/dt² is added to R (its lag-one
        correlation of −½ neglected; conservative).

    Returns
    -------
    DiscreteModel
        Φ, Qd from :func:`van_loan`; H; R = N²/dt (+ quantization with ``"r"``); P0.
    """
    dt = float(dt)
    if not (math.isfinite(dt) and dt > 0):
        raise AnalysisError(f"dt = {dt!r}", "a positive step in s")
    if quantization not in ("states", "r"):
        raise AnalysisError(f"quantization = {quantization!r}", "'states' or 'r'")
    if isinstance(source, StateSpace):
        ss = source
    else:
        # R is the white term averaged over the step; a band-limited white term's output
        # filter (time constant ~1/(2π·bandwidth), far below any filter step) is not carried
        # as states: over a step dt ≫ 1/bandwidth the average is that of unfiltered white noise.
        terms = [_unfiltered(t) for t in source.terms]
        ss = stack(terms, sample_rate=source.sample_rate)
    phi, qd = van_loan(ss.F, ss.G, ss.Qc, dt)
    h, p0, states = ss.H, ss.P0, list(ss.states)
    r = ss.white / dt
    convention = R_CONVENTION
    if ss.quantization and quantization == "states":
        q2 = ss.quantization
        phi = block_diag([phi, np.array([[0.0, 0.0], [1.0, 0.0]])])
        qd = block_diag([qd, np.diag([q2, 0.0])])
        p0 = block_diag([p0, np.diag([q2, q2])])
        h = np.concatenate([h, [[1.0 / dt, -1.0 / dt]]], axis=1)
        states += ["quantization.e[k]", "quantization.e[k-1]"]
    elif ss.quantization:
        r += 2.0 * ss.quantization / dt**2
        convention = R_CONVENTION_QUANTIZATION_IN_R
    return DiscreteModel(
        dt=dt,
        states=tuple(states),
        phi=phi,
        qd=qd,
        h=np.asarray(h, dtype=float).reshape(1, -1),
        r=float(r),
        p0=p0,
        r_convention=convention,
    )


# -- the exact one-step law of a sampled realization ------------------------------------------


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
    (:func:`van_loan`): a(dt) is the mean of y over the step. The joint
    Gaussian law of (x_{k+1}, a) given x_k is split into the regression of a on the state noise
    and an independent residual (the conditional Gaussian).

    Parameters
    ----------
    F, G, Qc : array_like
        As in :func:`van_loan`.
    H : array_like, shape (1, n)
        Output matrix.
    dt : float
        Step [s], positive.

    Returns
    -------
    StepModel
    """
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


def covariance_factor(m: _FloatArray) -> _FloatArray:
    """A square root L (L Lᵀ = m) of a symmetric positive semi-definite matrix (a covariance).

    Diagonal matrices get the elementwise root; others the symmetric eigen-decomposition
    U √Λ, negative rounding-level eigenvalues clipped to 0 (a Cholesky factor would refuse a
    singular covariance, as random walks starting at zero have)."""
    if m.size == 0:
        return m.copy()
    if np.count_nonzero(m - np.diag(np.diag(m))) == 0:
        return np.diag(np.sqrt(np.clip(np.diag(m), 0.0, None)))
    lam, u = np.linalg.eigh(0.5 * (m + m.T))
    return u * np.sqrt(np.clip(lam, 0.0, None))


# -- the stationary part of a channel as one innovation stream --------------------------------


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
    p = np.asarray(phi, dtype=float).ravel()
    g_ = np.asarray(gamma, dtype=float).ravel()
    Q = np.asarray(qxx, dtype=float)
    cc = np.asarray(c, dtype=float).ravel()
    if p.size == 0:
        return _white_innovations(white)
    if not (np.all(p > 0) and np.all(p < 1) and np.all(np.isfinite(Q))):
        return None
    auto = _Autocovariance.of(p, g_, Q, cc, white)
    if auto is None:
        return None
    predictor = _steady_state_predictor(p, g_, Q, auto)
    if predictor is None:
        return None
    K, lam = predictor  # lam in units of C(0)
    # Equal poles (e.g. two Gauss-Markov terms of one time constant) act as one.
    poles, inv = np.unique(p, return_inverse=True)
    g = np.bincount(inv, weights=g_ * K)
    if not np.all(g > 0):
        return None
    zeros = _secular_zeros(poles, g)
    if zeros is None:
        return None
    sos = _pair_sections(poles, zeros)
    start = _stationary_start(sos, poles, g)
    if start is None:
        return None
    init, index, root, var_u = start
    # the output variance Λ(1 + Σ cov(u)/Λ) against C(0) (= 1 in these units)
    var_err = abs(lam * (1.0 + var_u) - 1.0)
    spec_err, par_err = _spectrum_errors(p, g_, auto, lam, sos, poles, g)
    tol = max(INNOVATIONS_TOLERANCE, 16 * np.finfo(float).eps / float(1.0 - poles[-1]))
    if not (spec_err <= tol and var_err <= tol and par_err <= tol):
        return None
    return InnovationsFilter(
        std=math.sqrt(lam * auto.c0),
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


def _white_innovations(white: float) -> InnovationsFilter | None:
    """White noise alone: the innovation is the output (no sections, no states)."""
    if not white > 0:
        return None
    empty = np.zeros((0, 6))
    return InnovationsFilter(
        math.sqrt(white), empty, np.zeros((0, 0)), np.zeros(0, np.intp),
        np.zeros(0), np.zeros(0), 0.0, 0.0, np.zeros(0), np.zeros((0, 0)), 0.0,
    )  # fmt: skip


@dataclass(frozen=True)
class _Autocovariance:
    """C(0) = γΣγᵀ + R and C(j) = γΦ^{j−1}M of the period means (see
    :func:`innovations_filter`), with Σ the states' stationary covariance and S = Qxx c."""

    sigma: _FloatArray
    s: _FloatArray
    r: float
    c0: float
    m: _FloatArray

    @classmethod
    def of(
        cls, p: _FloatArray, g: _FloatArray, Q: _FloatArray, c: _FloatArray, white: float
    ) -> _Autocovariance | None:
        sigma = Q / (1.0 - np.outer(p, p))
        S = Q @ c
        R = float(c @ S) + float(white)
        C0 = float(g @ sigma @ g) + R
        M = p * (sigma @ g) + S
        if not (C0 > 0 and R > 0):
            return None
        return cls(sigma=sigma, s=S, r=R, c0=C0, m=M)


def _steady_state_predictor(
    p: _FloatArray, g: _FloatArray, Q: _FloatArray, auto: _Autocovariance
) -> tuple[_FloatArray, float] | None:
    """Kalman gain K and innovation variance Λ (in units of C(0)) of the steady-state
    predictor: the stabilizing solution of the discrete algebraic Riccati equation
    (:func:`scipy.linalg.solve_discrete_are`), polished by Newton steps on the equation in
    Σ − P (its derivative is the closed-loop Lyapunov operator)."""
    import scipy.linalg as sl

    s0 = auto.c0  # scale: the Riccati equation in units of the output variance
    Ph = np.diag(p)
    try:
        P = sl.solve_discrete_are(
            Ph, g[:, None], Q / s0, np.array([[auto.r / s0]]), s=auto.s[:, None] / s0
        )
    except (np.linalg.LinAlgError, ValueError):
        return None
    Sh = auto.sigma / s0 - P  # stationary covariance of the predictor state, scaled
    Mn, C0n = auto.m / s0, auto.c0 / s0

    def faurre(sh: _FloatArray) -> tuple[_FloatArray, _FloatArray, float]:
        lam = C0n - float(g @ sh @ g)
        k = (Mn - p * (sh @ g)) / lam
        return Ph @ sh @ Ph + lam * np.outer(k, k) - sh, k, lam

    for _ in range(3):
        res, K, lam = faurre(Sh)
        A = Ph - np.outer(K, g)
        try:
            Sh = Sh + sl.solve_discrete_lyapunov(A, res)
        except (np.linalg.LinAlgError, ValueError):
            return None
        Sh = 0.5 * (Sh + Sh.T)
    _, K, lam = faurre(Sh)
    if not (lam > 0 and np.all(np.isfinite(K))):
        return None
    return K, lam


def _secular_zeros(poles: _FloatArray, g: _FloatArray) -> _FloatArray | None:
    """The zeros of H(z) = 1 + Σᵢ gᵢ/(z − pᵢ) (gᵢ > 0: one between consecutive poles), each
    from the secular equation in the offset t = pᵢ − z (bracketed, then Brent's method), to
    relative accuracy."""
    from scipy.optimize import brentq

    m = poles.size

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
    return zeros


def _pair_sections(poles: _FloatArray, zeros: _FloatArray) -> _FloatArray:
    """Second-order sections pairing the slowest remaining pole (and its zero) with the
    fastest one (well separated poles keep the coefficients well conditioned)."""
    sections = []
    i, j = 0, poles.size - 1
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
    return np.array(sections)


def _stationary_start(
    sos: _FloatArray, poles: _FloatArray, g: _FloatArray
) -> tuple[_FloatArray, npt.NDArray[np.intp], _FloatArray, float] | None:
    """The stationary start of the filter: (init, state_index, parallel_init, Σ cov(u)/Λ).

    The innovations model's state x̂ has the stationary covariance Λ K Kᵀ/(1 − p pᵀ)
    (elementwise: Φ is diagonal). Its free response γΦ^k x̂ = Σ_m u_m p_m^k (u_m the sum of
    γ_i x̂_i over the states of pole m) is given to the filter as the state W u whose
    zero-input response it is (:func:`_filter_state_map`); cov(u)/Λ = g gᵀ/(1 − p pᵀ)."""
    one_m = 1.0 - poles
    cauchy = 1.0 / (one_m[:, None] + poles[:, None] * one_m[None, :])  # 1/(1 − p_m p_l)
    cov_u = np.outer(g, g) * cauchy
    var_u = float(np.sum(cov_u))
    mapped = _filter_state_map(sos, poles)
    if mapped is None:
        return None
    W, index = mapped
    root = covariance_factor(0.5 * (cov_u + cov_u.T))
    return W @ root, index, root, var_u


def _spectrum_errors(
    p: _FloatArray,
    g_: _FloatArray,
    auto: _Autocovariance,
    lam: float,
    sos: _FloatArray,
    poles: _FloatArray,
    g: _FloatArray,
) -> tuple[float, float]:
    """Largest relative errors of the sections' and of the parallel form's spectrum Λ|H|²
    against the model's Σ_j C(j) e^{−iωj}, at 200 frequencies from 1/100 of the slowest
    pole's bandwidth to Nyquist."""
    w = np.geomspace(max(1e-300, 0.01 * float(1.0 - poles[-1])), np.pi, 200)
    zi = np.exp(-1j * w)
    model = auto.c0 + 2.0 * np.real(
        np.sum(g_ * auto.m * zi[:, None] / (1.0 - p * zi[:, None]), axis=1)
    )
    hz = np.ones(w.size, dtype=complex)
    for sec in sos:
        hz *= (1.0 + sec[1] * zi + sec[2] * zi**2) / (1.0 + sec[4] * zi + sec[5] * zi**2)
    spec_err = float(np.max(np.abs(lam * auto.c0 * np.abs(hz) ** 2 / model - 1.0)))
    hp = 1.0 + np.sum(g / (1.0 / zi[:, None] - poles), axis=1)  # the parallel form
    par_err = float(np.max(np.abs(lam * auto.c0 * np.abs(hp) ** 2 / model - 1.0)))
    return spec_err, par_err


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
