"""Noise identification at each τ: the lag-1 autocorrelation method of W. J. Riley and
C. A. Greenhall, "Power law noise identification using the lag 1 autocorrelation", Proc. 18th
EFTF (2004) (private to :mod:`sensormodel.allan`; :func:`noise_alpha` is public there)."""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt

from ..confidence import NOISE_ALPHAS
from ..errors import AnalysisError
from ._samples import _as_samples, _check_finite_mean, _phase

__all__ = ["NOISE_NAMES", "noise_alpha"]

#: Names of the power-law types (time-and-frequency names; the inertial meaning in brackets).
NOISE_NAMES = {
    2: "white PM (white angle noise)",
    1: "flicker PM (flicker angle noise)",
    0: "white FM (white rate noise, angle/velocity random walk)",
    -1: "flicker FM (flicker rate noise, bias instability)",
    -2: "random-walk FM (rate/acceleration random walk)",
}

#: Fewest decimated phase points for the lag-1 autocorrelation noise identification. Riley &
#: Greenhall (2004) suggest about 30 (from memory); seeded simulations here (300 records per
#: case) identified white rate noise correctly in 77 % of records at 33 points, 89 % at 50 and
#: 97 % at 100 (white angle and random-walk rate noise ≥ 97 % throughout), and a white record
#: taken for angle noise gets a far too large EDF, so 100 points are required; longer τ keep the
#: α of the nearest τ that had them.
_ID_MIN_POINTS = 100
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
#: α assumed when no τ of the record has enough points for the identification (very short
#: records): white rate noise, the usual dominant term at short τ (common practice).
_ID_FALLBACK_ALPHA = 0


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


def _phase_segments(x: np.ndarray, m: int) -> list[np.ndarray] | None:
    """Phase decimated by m (x[0], x[m], …), or up to 4 spread segments of it; None if too few."""
    k_total = (x.shape[0] - 1) // m + 1
    if k_total < _ID_MIN_POINTS:
        return None
    if k_total <= _ID_MAX_POINTS:
        return [np.array(x[: (k_total - 1) * m + 1 : m], dtype=np.float64)]
    seg = _ID_MAX_POINTS // 4
    starts = np.rint(np.linspace(0, k_total - seg, 4)).astype(np.int64)
    return [np.array(x[int(a) * m : (int(a) + seg - 1) * m + 1 : m]) for a in starts]


def _identify_all(x: np.ndarray, ms: np.ndarray) -> np.ndarray:
    """α at each m; where too few points remain, the α of the nearest τ that had enough
    (the longest shorter τ, as the short records run out at long τ), else white rate noise."""
    found: dict[int, int] = {}
    for k, m in enumerate(ms):
        segs = _phase_segments(x, int(m))
        if segs is not None:
            found[k] = _alpha_from_phase_segments(segs, int(m))[0]
    alphas = np.empty(len(ms), dtype=np.int64)
    for k in range(len(ms)):
        if k in found:
            alphas[k] = found[k]
        elif found:
            nearest = min(found, key=lambda j: (abs(j - k), -j))
            alphas[k] = found[nearest]
        else:
            alphas[k] = _ID_FALLBACK_ALPHA
    return alphas


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
