"""One channel's generator: its terms sorted into sources (package notes, Exactness) and summed
block by block on the shared schedule."""

from __future__ import annotations

import math
from functools import lru_cache
from typing import TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt

from ..linear import InnovationsFilter, StepModel, block_diag, innovations_filter, step_model
from ..terms import Flicker, Quantization, Ramp, RandomConstant, Term, White
from ._innovations import _Innovations, _Parallel
from ._powerlaw import _kasdin_taps, _PowerLaw
from ._statespace import _StateSpace
from ._streams import (
    BLOCK,
    CONST_SLOT,
    QUANT_SLOT,
    RAMP_SLOT,
    TERM_SLOT,
    WHITE_SLOT,
    _block_size,
    _Normals,
    _Quantization,
    _Ramp,
    _Source,
    _White,
    stream_rng,
)

if TYPE_CHECKING:  # pragma: no cover
    from ..model import Channel

_FloatArray = npt.NDArray[np.float64]


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
    return innovations_filter(
        np.concatenate([np.diag(sm.phi) for sm in sms]),  # type: ignore[union-attr]
        np.concatenate([sm.gamma for sm in sms]),  # type: ignore[union-attr]
        block_diag([sm.qxx for sm in sms]),  # type: ignore[union-attr]
        np.concatenate([sm.c for sm in sms]),  # type: ignore[union-attr]
        white,
    )


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
                        stream_rng(seed, run, cid, CONST_SLOT, i).standard_normal()
                    )
            elif isinstance(term, Ramp):
                if term.slope:
                    sign = 1.0 if stream_rng(seed, run, cid, RAMP_SLOT, i).random() < 0.5 else -1.0
                    self.sources.append(_Ramp(sign * term.slope, dt))
            elif isinstance(term, Flicker) and flicker == "power-law":
                if term.coefficient:
                    taps = _kasdin_taps(term, rate, max_taps)
                    self.own.append(
                        _PowerLaw(term.coefficient, taps, stream_rng(seed, run, cid, TERM_SLOT, i))
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
                            _StateSpace(ss, sm, stream_rng(seed, run, cid, TERM_SLOT, i))
                        )
        if quant:
            self.sources.append(
                _Quantization(math.sqrt(quant), dt, stream_rng(seed, run, cid, QUANT_SLOT))
            )
        # White noise, the terms' independent residuals and the stationary Gauss-Markov and
        # flicker states: one innovation stream (package notes), or state by state if the
        # innovations form does not apply.
        design = None
        if white_var or stationary:
            design = _channel_innovations(
                tuple(t for _, t in stationary), channel.sample_rate, dt, white_var
            )
        if design is not None:
            self.sources.append(_Innovations(design, stream_rng(seed, run, cid, WHITE_SLOT)))
        else:
            for i, term in stationary:
                ss, sm = _term_step(term, channel.sample_rate, dt)
                self.sources.append(
                    _StateSpace(ss, sm, stream_rng(seed, run, cid, TERM_SLOT, i))  # type: ignore[arg-type]
                )
            if white_var:
                white_rng = stream_rng(seed, run, cid, WHITE_SLOT)
                self.sources.append(_White(math.sqrt(white_var), white_rng))
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


