"""Power-law flicker: the Kasdin-Walter moving-average filter run as an FFT overlap-save
convolution (package notes, Flicker: two methods)."""

from __future__ import annotations

import math
from functools import lru_cache
from typing import Any

import numpy as np
import numpy.typing as npt

from .. import validate
from ..terms import DEFAULT_LONGEST_TIME
from ._streams import _Normals, _Source

_FloatArray = npt.NDArray[np.float64]

#: Default largest number of taps of the Kasdin-Walter filter (2^20 ≈ 1.05 M: about 17 min of
#: 1/f memory at 1 kHz, 2.9 h at 100 Hz; some 100 MB of working memory per flicker channel
#: while a block is transformed: FFTs of 4× the filter length).
DEFAULT_MAX_TAPS = 1 << 20


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
    n = validate.whole_number(n, "n")
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
    longest = float(term.longest_time or DEFAULT_LONGEST_TIME)
    return int(max(2, min(max_taps, math.ceil(longest * rate))))


