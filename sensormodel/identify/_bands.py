"""The banded bootstrap: the joint law of a long record's Allan-variance estimates at a cost that
does not grow with the record's length.

The intervals of :func:`sensormodel.identify.fit` and the test of
:func:`sensormodel.identify.limit_test` need, of each bootstrap record, only its overlapping
Allan variance at the fit's τ = m/rate, never the record itself. Simulating a whole record at
its full rate (:class:`._synthesis._Simulator`) costs its length, hundreds of times per channel
(a 6 h record at 400 Hz is 8.64 M samples). Here the τ of the curve are split into **bands**;
each band is one simulation of at most a few 10⁵ samples, the same for any record length.

1. **Coarse periods.** A band of period D = d/rate (d a power of two dividing every m of the
   band) draws the exact means over D of the fitted model's continuous process
   (:class:`._synthesis._Simulator` with ``fine_rate``: white, random walk, ramp and
   Gauss-Markov are exact at any period; the quantization term telescopes; band-limited white
   folds its aliases at the coarse rate; flicker folds its band above the coarse Nyquist
   frequency up to the fine cut-off, so the coarse record is exactly the averages of d
   consecutive fine period means). The phase of the coarse record is the fine phase at every
   d-th point, so the Allan variance at m = d·m' computed on it with the one Allan engine
   (:func:`sensormodel.allan.second_difference_sums` through :class:`._synthesis._BootstrapAllan`)
   is the overlapping estimator at a **stride** of d instead of 1 (NIST SP 1065 section 5.2.4
   evaluates the same sum at every phase point; D. A. Howe, D. W. Allan, J. A. Barnes,
   "Properties of signal sources and measurement methods", Proc. 35th Frequency Control
   Symposium, 1981, show that overlap at a fraction of τ keeps almost all the EDF). It is
   unbiased; its variance exceeds the fully overlapped one's by a Riemann-sum error of the
   window positions, which falls as (d/m)²: with m ≥ :attr:`_BandSettings.stride_ratio` · d
   = 16·d it was measured on seeded records (the same 400 records through both) at +0.2–0.5 %
   in standard deviation for white rate noise and < 0.1 % for flicker and random walk (at
   m = 8·d: +1.1–1.8 % for white; tests/test_identify_bands.py).
2. **The full-duration band.** The longest τ: d the least power of two for which the whole
   record is at most :attr:`_BandSettings.full_samples` (2^18) coarse samples, the band holding
   every m ≥ 16·d. Its estimates keep their exact joint law (the whole duration is simulated;
   the at most d − 1 fine samples of the last incomplete coarse period are left out, a relative
   change of the count of second differences below 2^-18).
3. **Segment bands.** The shorter τ, from the top down: a band of period d holds the m from 16·d
   up (from 1 for d = 1), d the least power of two such that its longest m' = m/d is at most
   1/:attr:`_BandSettings.margin` (1/64) of :attr:`_BandSettings.segment_samples` (2^17) coarse
   samples. A **segment** of 64·m' coarse samples (at least 2^12; a power of two) is simulated,
   shorter than the record, and each estimate's deviation from the model's exact Allan variance
   E(τ) (the fit's bases, :func:`._design._basis`) is scaled to the record's length: â = E +
   s·(â_seg − E), s² = edf(N_seg)/edf(N) with the equivalent degrees of freedom of
   :func:`sensormodel.confidence.edf_cached` (C. A. Greenhall, W. J. Riley, PTTI 2003) for the
   noise type of the model's dominant term at that τ. Why this holds: the estimate is the mean
   of the squared second differences z_i of the phase, a stationary sequence whose
   autocovariance is summable for every term of the catalogue (the Allan filter's |H(f)|² ∝ f²
   at f → 0 tames 1/f and 1/f² rate noise; quantization, Gauss-Markov and band-limited white are
   short-memory; a ramp only adds a constant to z_i and its cross term is a mean of z_i), so Var
   â ∝ 1/N·(1 + O(m/N)) for any N ≫ m, the O(m/N) term being what the EDF ratio carries. With m'
   ≤ N_seg/64 the types' ratios differ by less than 1 %. Within a band the estimates keep their
   joint law. The segment generator's mean is E exactly for every term but flicker, whose 2n
   spectral synthesis is within about 1 % of E up to an eighth of the segment (m' ≤ N_seg/64
   here); that bias is shrunk by s, not grown. The scaled law keeps the segment's skewness (at
   most that of about 100 EDF, ~0.3, where the record's law is nearly Gaussian: it moves the 5 %
   and 95 % points by < 0.1 standard deviation).
4. **Band boundaries.** The bands are independent simulations, so the correlation of estimates
   on either side of a boundary is lost (neighbouring octaves correlate by 0.3–0.8 in the
   full-rate law, 0 across a boundary). With the defaults a band spans a factor 128 of τ or more
   and a 6 h or 24 h record at 400 Hz has two bands (one boundary, at m = 512|1024 and
   2048|4096), 72 h at 2 kHz three. Measured against the full-rate bootstrap
   (tests/test_identify_bands.py, deliberately small settings: three bands on a 2^16–2^17
   record): the law of each estimate and the correlations inside a band agree within Monte Carlo
   error; the spread of the unconstrained weighted least-squares estimates (a combination of all
   τ) comes out 3–9 % narrower (1000 records per path; 3–5 % with one boundary); the
   ratio-interval ends of white noise and a random walk and the p-values of the test agree.
   Where a term is read from the curvature across a boundary (a flicker term masked between
   white noise and a random walk, crossovers at 130–230 s, boundary at 26|51 s) the upper end of
   its interval came out 3.5–3.7e-3 on four seeds against 3.9–6.5e-3 at full rate; with the
   boundary at 6|13 s it agreed (3.8–5.6e-3 against 3.9–5.6e-3), at 13|26 s on two seeds of
   four. Moving the boundary below the region where a second term shows costs a longer
   full-duration band (cost ∝ its length); the defaults bound a record at about 2.7·10⁵
   coarse samples in all.

Records of fewer than :attr:`_BandSettings.min_samples` (2^19) samples stay on the full-rate
path of :mod:`._bootstrap` (exact joint law at every τ; there the banded path would cost at
least half as much).

Not adopted: the exact covariance of the estimates from the model's spectrum (they are
quadratic forms of a Gaussian process) with a draw from a matching law would keep the
cross-band correlation, but the law of the fit's refits depends on more than the covariance
(skewed χ²-like marginals at the longest τ, non-negative refits), which the simulation keeps.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from ..confidence import edf_cached
from ._checks import _Curve
from ._design import _basis
from ._synthesis import _BootstrapAllan, _Simulator

_FloatArray = npt.NDArray[np.float64]
_IntArray = npt.NDArray[np.int64]


@dataclass(frozen=True)
class _BandSettings:
    """How the τ of a curve are split into bands (module notes).

    Attributes
    ----------
    min_samples : int
        Records of fewer samples take the full-rate path.
    full_samples : int
        Most coarse samples of the full-duration band.
    segment_samples : int
        Coarse samples of a segment band.
    stride_ratio : int
        Least m/d of a band of period d > 1 (the stride of the estimator is at most m/16).
    margin : int
        Least ratio of a segment's coarse samples to its longest m' = m/d.
    """

    min_samples: int = 1 << 19
    full_samples: int = 1 << 18
    segment_samples: int = 1 << 17
    stride_ratio: int = 16
    margin: int = 64


#: The settings in use (tests replace them to force the banded path on small records).
_SETTINGS = _BandSettings()


@dataclass(frozen=True)
class _Band:
    """One simulation of a band: the indices ``index`` of the curve's τ it gives, their
    averaging factors in coarse samples ``m`` (= m/d), the coarse period ``d`` [samples], the
    coarse samples simulated ``n``, and whether they span the whole record (``full``)."""

    index: _IntArray
    m: _IntArray
    d: int
    n: int
    full: bool


#: The shortest segment simulated [coarse samples].
_MIN_SEGMENT = 1 << 12


def _two_adic(values: _IntArray) -> int:
    """The largest power of two dividing every value."""
    g = int(np.gcd.reduce(values.astype(np.int64)))
    return g & -g


def _pow2_at_least(x: float) -> int:
    return 1 if x <= 1 else 1 << int(math.ceil(math.log2(x) - 1e-12))


def _plan(m: _IntArray, n: int, settings: _BandSettings) -> tuple[_Band, ...]:
    """The bands of the averaging factors ``m`` (increasing) of an ``n``-sample record."""
    m = np.asarray(m, dtype=np.int64)
    bands = []
    d_full = _pow2_at_least(n / settings.full_samples)
    top = np.flatnonzero(m >= settings.stride_ratio * d_full) if d_full > 1 else np.arange(m.size)
    rest = m.size
    if top.size:
        d = min(d_full, _two_adic(m[top]))
        bands.append(_Band(top, m[top] // d, d, n // d, True))
        rest = int(top[0])
    while rest > 0:
        longest = int(m[rest - 1])
        d = _pow2_at_least(longest * settings.margin / settings.segment_samples)
        lo = 0 if d == 1 else int(np.searchsorted(m[:rest], settings.stride_ratio * d))
        lo = min(lo, rest - 1)
        index = np.arange(lo, rest)
        d = min(d, _two_adic(m[index]))
        mm = m[index] // d
        # the segment: as long as the band's longest m' needs (a band that did not reach up to
        # segment_samples/margin is simulated shorter), never under _MIN_SEGMENT
        seg = max(_MIN_SEGMENT, _pow2_at_least(settings.margin * int(mm[-1])))
        full = seg >= n // d
        bands.append(_Band(index, mm, d, n // d if full else seg, full))
        rest = lo
    return tuple(reversed(bands))


#: The noise type α (rate PSD ∝ f^α) whose EDF scales a term's estimates; a Gauss-Markov term
#: is a random walk below its time constant and white noise above it.
_ALPHA = {"white": 0, "flicker": -1, "random_walk": -2, "quantization": 2}


class _BandedDraw:
    """Allan variances at the curve's τ of one bootstrap record, drawn band by band.

    Built once per bootstrap (read-only, shared by threads); :meth:`worker` gives a callable
    ``rng -> avar`` with its own Allan-variance buffers for one thread.
    """

    def __init__(
        self,
        params: Mapping[str, float],
        time_constant: float | None,
        c: _Curve,
        white_filter: tuple[float, int] | None,
        settings: _BandSettings,
    ) -> None:
        self.size = c.m.size
        self.bands = _plan(c.m, c.n, settings)
        self.sims = [
            _Simulator(params, time_constant, b.n, c.rate / b.d, white_filter, fine_rate=c.rate)
            for b in self.bands
        ]
        self.samples = sum(b.n for b in self.bands)
        contributions = {
            name: p**2 * _basis(name, c.tau, c.rate, time_constant or 1.0, white_filter)
            for name, p in params.items()
            if p > 0 and (name != "gauss_markov" or time_constant)
        }
        self.expected = np.zeros(c.tau.size)
        for v in contributions.values():
            self.expected += v
        self.scale = [
            None if b.full else self._scale(b, c, contributions, time_constant) for b in self.bands
        ]

    @staticmethod
    def _scale(
        b: _Band,
        c: _Curve,
        contributions: Mapping[str, _FloatArray],
        time_constant: float | None,
    ) -> _FloatArray:
        """s = √(edf(N_seg)/edf(N)) at the band's τ: the segment's deviations scaled to the
        record's length, for the noise type of the model's dominant random term at each τ."""
        out = np.ones(b.index.size)
        random = {k: v for k, v in contributions.items() if k != "ramp"}
        if not random:
            return out
        names = list(random)
        share = np.array([random[k][b.index] for k in names])
        for i, j in enumerate(b.index):
            name = names[int(np.argmax(share[:, i]))]
            if name == "gauss_markov":
                alpha = -2 if time_constant and c.tau[j] < time_constant else 0
            else:
                alpha = _ALPHA[name]
            m = int(c.m[j])
            out[i] = math.sqrt(edf_cached(alpha, m, b.n * b.d + 1) / edf_cached(alpha, m, c.n + 1))
        return out

    def worker(self) -> _Worker:
        return _Worker(self)


class _Worker:
    """One thread's Allan-variance engines for the bands of a :class:`_BandedDraw`."""

    def __init__(self, draw: _BandedDraw) -> None:
        self.draw = draw
        self.engines = [_BootstrapAllan(b.n, b.m) for b in draw.bands]

    def __call__(self, rng: np.random.Generator) -> _FloatArray:
        draw = self.draw
        out = np.empty(draw.size)
        for band, sim, engine, s in zip(
            draw.bands, draw.sims, self.engines, draw.scale, strict=True
        ):
            a = engine(sim.record(rng))
            if s is not None:
                e = draw.expected[band.index]
                a = e + s * (a - e)
            out[band.index] = a
        return out
