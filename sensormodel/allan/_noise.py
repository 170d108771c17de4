"""Noise identification at each τ (private to :mod:`sensormodel.allan`; :func:`noise_alpha` is
public there).

The noise type α behind the degrees of freedom at a τ = m τ0 is decided from the record at and
around that τ only, never copied from another τ, so it does not depend on which other τ were
requested:

* **Lag-1 autocorrelation** (W. J. Riley and C. A. Greenhall, "Power law noise identification
  using the lag 1 autocorrelation", Proc. 18th EFTF (2004)) where the phase decimated by m
  keeps at least ``_ID_MIN_POINTS`` (100) points: its answer is taken where the local slope
  (below) admits it; where the slope excludes it (its μ = −α − 1 further than half a step plus
  one standard error from the slope's), the type is undecided: the lag-1 answer and the
  slope's candidates go to the conservative choice. The lag-1 estimate can go astray where
  the slope cannot (a seeded 2^23-sample white rate noise record: flicker angle noise, estimate
  0.57, at m = 65 536 with 129 points, where the slope is −1.11 ± 0.06).
* **Local slope of the Allan variance** at every τ; alone where fewer than 100 points remain.
  AVAR ∝ τ^μ with μ = −α − 1 for −2 ≤ α ≤ 0 and μ ≈ −2 for both white (α = 2) and flicker
  (α = 1) angle noise (J. A. Barnes et al., "Characterization of frequency stability",
  IEEE Trans. Instrum. Meas. IM-20 (1971); NIST SP 1065, W. J. Riley, "Handbook of Frequency
  Stability Analysis", 2008; IEEE Std 952-1997 Annex C). μ is the least-squares slope of ln AVAR
  over ln τ on a FIXED octave grid of the record (m_j = 2^j, the octaves from m/4 to 2m that fit
  in the record), so it is the same whatever grid was requested. Every α whose μ lies within
  half a step plus one standard error of the estimate is a candidate (the slope cannot separate
  white from flicker angle noise at all). Between ``_ID_LOW_POINTS`` (30, about the least Riley
  & Greenhall suggest for the lag-1 method) and 100 points the lag-1 answer decides between
  white and flicker angle noise when both are candidates (white or flicker phase:
  δ = r1/(1 + r1) of the undifferenced phase near 0 against near 1/2, told apart well from 30
  points, where white against flicker rate noise is not yet); a lag-1 answer the slope excludes
  joins the candidates.
* **The conservative choice** where the candidates remain undecided: the α with the fewest
  degrees of freedom at that τ (:func:`sensormodel.confidence.edf_cached`), i.e. the widest
  interval. A record too short for any slope takes the fewest over all five types.

Everything is computed in the one thread of the ``identify`` task from the phase array alone,
so the result is the same to the bit whatever the number of workers.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import numpy.typing as npt

from ..confidence import NOISE_ALPHAS, edf_cached
from ..errors import AnalysisError
from ._samples import _as_samples, _check_finite_mean, _phase

__all__ = ["NOISE_NAMES", "noise_alpha"]

#: Names of the power-law types as inertial engineers say them (the exponent α of the rate's
#: PSD ∝ f^α; in time-and-frequency metrology, where the estimators come from, they are white
#: PM, flicker PM, white FM, flicker FM and random-walk FM: IEEE Std 1139, NIST SP 1065 §5).
NOISE_NAMES = {
    2: "quantization (white angle)",
    1: "flicker angle noise",
    0: "angle/velocity random walk",
    -1: "bias instability (flicker)",
    -2: "rate/acceleration random walk",
}

#: Fewest decimated phase points for the lag-1 autocorrelation noise identification. Riley &
#: Greenhall (2004) suggest about 30 (from memory); seeded simulations here (300 records per
#: case) identified white rate noise correctly in 77 % of records at 33 points, 89 % at 50 and
#: 97 % at 100 (white angle and random-walk rate noise ≥ 97 % throughout), and a white record
#: taken for angle noise gets a far too large EDF, so 100 points are required for the lag-1
#: answer alone; with fewer the local Allan-variance slope decides (module notes).
_ID_MIN_POINTS = 100
#: Fewest decimated phase points at which the lag-1 answer still picks among the slope's
#: candidates (about the least Riley & Greenhall 2004 suggest for the method).
_ID_LOW_POINTS = 30
#: Octaves below (2) and above (1) τ on the fixed grid that enter the local slope.
_SLOPE_OCTAVES = (2, 1)
#: The second differences of an octave point m of the slope grid are taken every
#: max(1, m // 16) samples: differences that close overlap strongly, so little precision is
#: lost, and the slope's cost stays far below one pass over the record.
_SLOPE_STEP_DIVISOR = 16
#: Most second differences per octave point of the slope grid (spread evenly over the record):
#: the slope's cost stays bounded on long records, where its error is far below the half step
#: of the candidate band anyway. Only octaves with m < 16 n / 2^18 are thinned by it, never
#: those of the τ with fewer than 100 decimated points.
_SLOPE_MAX_DIFFERENCES = 1 << 18
#: White and flicker angle noise: the same Allan-variance slope (μ = −2).
_ANGLE_PAIR = (2, 1)
#: μ of the Allan variance for each power law α of the rate PSD.
_AVAR_SLOPE = {2: -2, 1: -2, 0: -1, -1: 0, -2: 1}
#: Decision bounds on the unrounded estimate after two differences when m > 1 (block-averaged
#: rate): (random walk | flicker, flicker | white). Averaging over m biases the lag-1
#: autocorrelation of the differenced block means: for random-walk rate noise r1 → 1/4
#: (estimate −2.4), for flicker rate noise r1 → −0.2169 (estimate −1.446), both derived here from
#: the generalized autocovariances |t|³ and t² ln|t| of the phase, and seen in seeded
#: simulations (−2.37…−2.44 and −1.40…−1.44 at m = 4…256). Plain rounding puts the
#: flicker/random-walk bound at −1.5, right beside the flicker value, so the bounds are set at
#: the midpoints −1.92 (between −1.446 and −2.4) and −0.72 (between −1.446 and 0, white noise
#: differenced once too often). For m = 1 there is no averaging and plain rounding is kept.
_AVERAGED_BOUNDS = (-1.92, -0.72)
#: Most decimated phase points used for the identification (in 4 spread segments beyond it);
#: the lag-1 autocorrelation then has a standard error of about 1/sqrt(65536) = 0.004.
_ID_MAX_POINTS = 1 << 16


def _noise_types(noise_type: Any, k: int) -> np.ndarray | None:
    """None for "auto", else one α per τ (checked)."""
    if isinstance(noise_type, str):
        if noise_type == "auto":
            return None
        raise AnalysisError(
            f"got {noise_type!r}",
            "'auto', or α in {2, 1, 0, -1, -2} (one, or one per τ)",
            field="noise_type",
        )
    a = np.asarray(noise_type)
    if a.ndim == 0:
        a = np.full(k, a)
    if a.shape != (k,) or not all(
        float(v).is_integer() and int(v) in NOISE_ALPHAS for v in a.tolist()
    ):
        raise AnalysisError(
            f"got {noise_type!r}",
            f"'auto', or α in {{2, 1, 0, -1, -2}} (one value, or {k}: one per τ)",
            field="noise_type",
        )
    return a.astype(np.int64)


def _detrend_quadratic(z: np.ndarray) -> np.ndarray:
    """z minus its least-squares quadratic in t ∈ [−1, 1] (normal equations; no BLAS)."""
    t = np.linspace(-1.0, 1.0, z.shape[0])
    t2 = t * t
    moments = [float(np.einsum("i->", t2 ** (k / 2))) if k % 2 == 0 else 0.0 for k in range(5)]
    gram = np.array([[moments[i + j] for j in range(3)] for i in range(3)])
    rhs = np.array(
        [
            float(np.einsum("i->", z)),
            float(np.einsum("i,i->", t, z)),
            float(np.einsum("i,i->", t2, z)),
        ]
    )
    c = np.linalg.solve(gram, rhs)
    return z - (c[0] + c[1] * t + c[2] * t2)


def _lag1(segments: list[np.ndarray]) -> float:
    """Pooled lag-1 autocorrelation r1 of the segments (each about its own mean).

    Sums by ``einsum``, not BLAS: a threaded BLAS dot is slow and erratic beside other work.
    """
    num = 0.0
    den = 0.0
    for z in segments:
        c = z - z.mean()
        num += float(np.einsum("i,i->", c[:-1], c[1:]))
        den += float(np.einsum("i,i->", c, c))
    return num / den if den > 0.0 else 0.0


def _alpha_from_phase_segments(segments: list[np.ndarray], m: int) -> tuple[int, float]:
    """Riley & Greenhall (2004) on phase segments decimated by m, for the Allan variance.

    Detrend the phase (quadratic), then difference until δ = r1/(1 + r1) < 0.25 or d = 2
    differences were taken; p = −2(δ + d) is the exponent of the PSD of the phase, and the
    estimate of α (rate PSD) is p + 2. Rounding it gives α, with one correction for m > 1 (see
    ``_AVERAGED_BOUNDS``). Returns (α in −2…2, the unrounded estimate).
    """
    z = [_detrend_quadratic(s) for s in segments]
    d = 0
    while True:
        r1 = _lag1(z)
        delta = r1 / (1.0 + r1) if r1 > -1.0 else -0.5
        if delta < 0.25 or d >= 2:
            estimate = -2.0 * (delta + d) + 2.0
            if d == 2 and m > 1 and estimate <= _AVERAGED_BOUNDS[1]:
                alpha = -2 if estimate <= _AVERAGED_BOUNDS[0] else -1
            else:
                alpha = int(min(2, max(-2, round(estimate))))
            return alpha, estimate
        z = [np.diff(s) for s in z]
        d += 1


def _phase_segments(
    x: np.ndarray, m: int, minimum: int = _ID_MIN_POINTS
) -> list[np.ndarray] | None:
    """Phase decimated by m (x[0], x[m], …), or up to 4 spread segments of it; None if fewer
    than ``minimum`` points."""
    k_total = (x.shape[0] - 1) // m + 1
    if k_total < minimum:
        return None
    if k_total <= _ID_MAX_POINTS:
        return [np.array(x[: (k_total - 1) * m + 1 : m], dtype=np.float64)]
    seg = _ID_MAX_POINTS // 4
    starts = np.rint(np.linspace(0, k_total - seg, 4)).astype(np.int64)
    return [np.array(x[int(a) * m : (int(a) + seg - 1) * m + 1 : m]) for a in starts]


def _octave_avar(x: np.ndarray, j: int) -> float | None:
    """Allan variance (up to the factor 1/τ0², which a slope ignores) at m = 2^j from the
    ``count`` second differences of the record taken every max(1, m // 16, count // 2^18)
    samples (summed in pieces of at most 65 536, so the scratch memory is bounded); None where
    the record has fewer than two (the least any τ of a curve has)."""
    m = 1 << j
    count = x.shape[0] - 2 * m
    if count < 2:
        return None
    step = max(1, m // _SLOPE_STEP_DIVISOR, count // _SLOPE_MAX_DIFFERENCES)
    total = 0.0
    used = 0
    # in pieces of at most _ID_MAX_POINTS differences: bounded scratch memory on long records
    span = step * _ID_MAX_POINTS
    for start in range(0, count, span):
        stop = min(count, start + span)
        d = x[2 * m + start : 2 * m + stop : step] - 2.0 * x[m + start : m + stop : step]
        d += x[start:stop:step]
        total += float(np.einsum("i,i->", d, d))
        used += d.shape[0]
    return total / (2.0 * m * m * used)


def _local_slope(
    x: np.ndarray, m: int, cache: dict[int, float | None]
) -> tuple[float, float] | None:
    """Weighted least-squares slope μ of ln AVAR over ln τ on the fixed octaves 2^j around m
    (from ``_SLOPE_OCTAVES`` below to above ⌊log2 m⌋) and its standard error; None with fewer
    than two usable octaves.

    Each octave's ln AVAR has variance about 2/ν (the chi-square model with ν degrees of
    freedom behind the intervals, NIST SP 1065 eq. (45)); ν is taken as white rate noise's
    (:func:`sensormodel.confidence.edf_cached`, α = 0) as a nominal weight: the error is needed
    to its order only. Octaves are treated as independent, which understates the error a little.
    """
    n_phase = int(x.shape[0])
    top = m.bit_length() - 1
    t_list: list[float] = []
    v_list: list[float] = []
    w_list: list[float] = []
    for j in range(max(0, top - _SLOPE_OCTAVES[0]), top + _SLOPE_OCTAVES[1] + 1):
        if j not in cache:
            cache[j] = _octave_avar(x, j)
        value = cache[j]
        if value is not None and value > 0.0:
            t_list.append(j * math.log(2.0))
            v_list.append(math.log(value))
            w_list.append(0.5 * edf_cached(0, 1 << j, n_phase))
    if len(t_list) < 2:
        return None
    t, v, w = np.array(t_list), np.array(v_list), np.array(w_list)
    t -= float(np.einsum("i,i->", w, t)) / float(np.einsum("i->", w))
    sxx = float(np.einsum("i,i,i->", w, t, t))
    return float(np.einsum("i,i,i->", w, t, v)) / sxx, 1.0 / math.sqrt(sxx)


def _slope_candidates(slope: tuple[float, float] | None) -> tuple[int, ...]:
    """Every α whose Allan-variance slope lies within half a step plus the estimate's standard
    error of μ (the nearest end of the range beyond it); all five types when there is no slope.
    """
    if slope is None:
        return NOISE_ALPHAS
    mu, error = slope
    mu = min(max(mu, -2.0), 1.0)
    return tuple(a for a in NOISE_ALPHAS if abs(_AVAR_SLOPE[a] - mu) < 0.5 + error)


def _alpha_at(x: np.ndarray, m: int, octaves: dict[int, float | None]) -> int:
    """The noise type at m (module notes): with ≥ 100 points the lag-1 answer where the local
    slope admits it; else the fewest EDF among the slope's candidates, which a lag-1 answer
    the slope excludes joins; from 30 to 99 points the lag-1 answer also decides between white
    and flicker angle noise where the slope admits both."""
    segs = _phase_segments(x, m, minimum=_ID_LOW_POINTS)
    lag1 = _alpha_from_phase_segments(segs, m)[0] if segs is not None else None
    candidates = _slope_candidates(_local_slope(x, m, octaves))
    if lag1 is not None and (x.shape[0] - 1) // m + 1 >= _ID_MIN_POINTS:
        if lag1 in candidates:
            return lag1
        # the slope excludes the lag-1 answer: undecided, both kinds of answer are candidates
        candidates = tuple(a for a in NOISE_ALPHAS if a in candidates or a == lag1)
    elif lag1 is not None:
        if lag1 in _ANGLE_PAIR and set(_ANGLE_PAIR) <= set(candidates):
            # the one pair the slope cannot separate: the lag-1 answer decides it
            candidates = tuple(a for a in candidates if a == lag1 or a not in _ANGLE_PAIR)
        elif lag1 not in candidates:
            candidates = tuple(a for a in NOISE_ALPHAS if a in candidates or a == lag1)
    n_phase = int(x.shape[0])
    # the fewest degrees of freedom; equal ones (never seen) go to the larger α, as ordered
    return min(candidates, key=lambda a: edf_cached(int(a), m, n_phase))


def _identify_all(x: np.ndarray, ms: np.ndarray) -> np.ndarray:
    """α at each m, each decided from the record at and around that m alone (module notes)."""
    octaves: dict[int, float | None] = {}  # octave AVAR values, shared only as a cache
    return np.array([_alpha_at(x, int(m), octaves) for m in ms], dtype=np.int64)


def noise_alpha(y: npt.ArrayLike, m: int) -> tuple[int, float]:
    """Power-law noise type of rate samples ``y`` at averaging factor ``m`` (lag-1 method).

    W. J. Riley and C. A. Greenhall, "Power law noise identification using the lag 1
    autocorrelation", Proc. 18th European Frequency and Time Forum (2004): the phase
    (integrated ``y``) decimated by ``m`` is detrended and differenced until its lag-1
    autocorrelation r1 gives δ = r1/(1 + r1) < 0.25 (at most twice, for the Allan variance);
    then p = −2(δ + d) and α = p + 2. At most 65 536 decimated points are used (in 4 spread
    segments), which leaves a standard error of about 0.004 on r1.

    Parameters
    ----------
    y : array_like
        Rate samples (any unit; the scale does not matter).
    m : int
        Averaging factor (τ = m τ0), m ≥ 1.

    Returns
    -------
    alpha : int
        Exponent of the rate PSD S_y(f) ∝ f^α, rounded and clipped to −2…2
        (2 white angle noise, 1 flicker angle noise, 0 white rate noise, −1 flicker rate noise,
        −2 random-walk rate noise).
    alpha_estimate : float
        The unrounded estimate p + 2.

    Raises
    ------
    AnalysisError
        If fewer than 100 decimated points remain (n/m < 99).
    """
    arr = _as_samples(y, "y")
    m = int(m)
    if m < 1:
        raise AnalysisError(f"got m = {m}", "an averaging factor m ≥ 1", field="m")
    mean = _check_finite_mean(arr, "y")
    segs = _phase_segments(_phase(arr, mean, 1.0), m)
    if segs is None:
        raise AnalysisError(
            f"{arr.shape[0]} samples give only {arr.shape[0] // m + 1} points at m = {m}",
            f"at least {_ID_MIN_POINTS} points (n/m ≥ {_ID_MIN_POINTS - 1})",
            field="m",
        )
    return _alpha_from_phase_segments(segs, m)
