"""Exact period means of a term's realization (random walks, shaped terms, and stationary
states when the innovations form does not apply), from its :func:`~sensormodel.linear.step_model`.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt

from ..linear import StepModel, covariance_factor
from ._streams import _Normals, _Source

_FloatArray = npt.NDArray[np.float64]


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
        x0 = covariance_factor(np.asarray(ss.P0, dtype=float)) @ self._normals.normal(n)
        L = covariance_factor(sm.qxx)
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


