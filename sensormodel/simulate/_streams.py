"""Random streams and the block schedule: per-stream generators, Box-Muller normal deviates, and
the sources of one channel that need no state space (white, quantization, ramp).

Every source produces the period means of one contribution in the fixed internal blocks of
:func:`_block_size` and serves them in any chunk size, so a record never depends on how it is
read (package notes, Reproducibility).
"""

from __future__ import annotations

import math
import zlib

import numpy as np
import numpy.typing as npt

_FloatArray = npt.NDArray[np.float64]

#: Internal block length [samples]: random numbers are drawn in blocks of this size (after a
#: few shorter first blocks, FIRST_BLOCK doubling up to BLOCK).
BLOCK = 1 << 16
FIRST_BLOCK = 1 << 10
_DOUBLINGS = 6  # FIRST_BLOCK << 6 == BLOCK

# Stream slots of one channel: spawn key (run, channel key, slot, index of the term in the
# channel; 0 for the channel-wide white and quantization streams).
WHITE_SLOT, QUANT_SLOT, CONST_SLOT, RAMP_SLOT, TERM_SLOT = 0, 1, 2, 3, 4


def _channel_key(channel_id: str) -> int:
    return zlib.crc32(channel_id.replace("_", ".").lower().encode("utf-8"))


def stream_rng(
    seed: int, run: int, channel_id: str, slot: int, index: int = 0
) -> np.random.Generator:
    """The generator of one random stream: ``SeedSequence(seed, spawn_key=(run, channel key,
    slot, index))``, the channel keyed by a CRC-32 of its normalized id."""
    key = (run, _channel_key(channel_id), slot, index)
    return np.random.default_rng(np.random.SeedSequence(seed, spawn_key=key))


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


