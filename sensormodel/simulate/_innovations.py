"""The stationary part of a channel from one normal stream: the innovations filter of
:func:`~sensormodel.linear.innovations_filter` as second-order sections, and the block engine
that runs it (in parallel form) together with the channel's random walks."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np
import numpy.typing as npt

from ..linear import InnovationsFilter
from ._streams import _Normals, _Source

_FloatArray = npt.NDArray[np.float64]


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

