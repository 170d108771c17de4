"""Seeded records built the way real sensors record, for the identification tests.

An ideal truth (white noise of density N, flicker of coefficient B, optionally a random walk of
density K: the plain-numpy generators of :mod:`tests.identify_records`) and then what a real
unit does to it before it reaches the file, each step a plain numpy/scipy operation:

* an undeclared output filter near rate/4: a 1-pole or a 2-pole Butterworth low-pass, either
  digital at the output rate (``scipy.signal.butter`` + ``lfilter`` of the samples) or
  analog and **point-sampled** (an oversampling converter whose filtered stream is decimated:
  the exact discrete-time law of the filter's state at the sample instants, by Van Loan's
  integral, C. F. Van Loan, IEEE Trans. Automat. Control 23(3), 1978). The digital filter has
  unit gain at f = 0, so the truth stays N; point samples alias the filter's power above
  rate/2 into the band, so the delivered density (the Allan line at τ ≫ 1/corner, what a
  datasheet reads) is N·√A with A = Σ_j |B(j·rate)|², computed here by its own sum
  (:func:`delivered_density`). The flicker part is not filtered in the point-sampled records
  (its power near the corner is ~1e-4 of the white noise's);
* integer coding: ``round(y/step)·step`` with a count step of about σ/7 (σ the sample standard
  deviation of the white part), or a coarse one of about σ; an offset of a third of a step
  (a zero-rate bias that is not a whole count);
* a narrow-band line (a 2 Hz sinusoid of random phase) whose power is a modest fraction of
  the white noise's sample variance;
* a mild thermal drift: a slow ramp over the record that moves the mean by a few per cent of
  the Allan floor.

The truth is what a datasheet would print for the unit: N and the flicker floor 0.6643·B.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from identify_records import flicker, random_walk, white
from scipy.linalg import expm
from scipy.signal import butter, lfilter, ss2tf, tf2ss

__all__ = ["Truth", "RATE", "GYRO", "record", "CASES"]

#: Sample rate of the records [Hz] (the rate of the industrial unit of the issue).
RATE = 100.0
#: Flicker floor factor √(2 ln2/π) (IEEE Std 952-1997 Annex C).
_FLOOR = math.sqrt(2.0 * math.log(2.0) / math.pi)


@dataclass(frozen=True)
class Truth:
    """The unit's noise [SI]: white density N [rad/s·√s], flicker coefficient B [rad/s], random
    walk density K [rad/s/√s]."""

    white: float
    flicker: float
    random_walk: float = 0.0

    @property
    def floor(self) -> float:
        """The Allan floor 0.6643·B [rad/s]."""
        return _FLOOR * self.flicker


_DEG = math.pi / 180.0
#: An industrial MEMS gyro like the measured one: 0.035 °/s/√Hz, floor 25 °/h.
GYRO = Truth(white=0.035 * _DEG, flicker=25.0 * _DEG / 3600.0 / _FLOOR)


def record(
    seed: int,
    n: int,
    truth: Truth = GYRO,
    *,
    poles: int = 0,
    corner: float = RATE / 4.0,
    point: bool = False,
    count_step: float | None = None,
    line_power: float = 0.0,
    line_frequency: float = 2.0,
    drift: float = 0.0,
) -> np.ndarray:
    """One seeded record [rad/s] of ``n`` samples at :data:`RATE`.

    Parameters
    ----------
    seed : int
        Seed of ``numpy.random.default_rng``.
    n : int
        Samples.
    truth : Truth
        The unit's noise.
    poles : int
        Order of the undeclared Butterworth output filter (0: none).
    corner : float
        Its −3 dB frequency [Hz].
    point : bool
        The filter is analog and point-sampled (of the white part); else digital.
    count_step : float, optional
        Integer coding with this step [rad/s] (as a fraction it is given by the caller, e.g.
        σ/7 with σ = N·√rate).
    line_power : float
        Power of the narrow-band line as a fraction of the white sample variance N²·rate.
    line_frequency : float
        Its frequency [Hz].
    drift : float
        The thermal ramp's total change over the record as a fraction of the floor.
    """
    rng = np.random.default_rng(seed)
    if poles and point:
        y = point_sampled(rng, n, truth.white, poles, corner)
    else:
        y = white(rng, n, RATE, truth.white)
    y = y + flicker(rng, n, RATE, truth.flicker)
    if truth.random_walk > 0.0:
        y = y + random_walk(rng, n, RATE, truth.random_walk)
    if poles and not point:
        b, a = butter(poles, corner / (RATE / 2.0))
        y = lfilter(b, a, y)
    t = np.arange(n) / RATE
    if line_power > 0.0:
        amplitude = math.sqrt(2.0 * line_power * truth.white**2 * RATE)
        y = y + amplitude * np.sin(2.0 * math.pi * line_frequency * t + rng.uniform(0, 2 * math.pi))
    if drift:
        y = y + drift * truth.floor * t / t[-1]
    if count_step is not None:
        y = (np.round(y / count_step + 1.0 / 3.0) - 1.0 / 3.0) * count_step
    return np.asarray(y, dtype=np.float64)


def _analog(poles: int, corner: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The analog Butterworth low-pass (unit DC gain) at ``corner`` [Hz] as (A, B, C)."""
    b, a = butter(poles, 2.0 * math.pi * corner, analog=True)
    am, bm, cm, _d = tf2ss(b, a)
    return am, bm, cm


def point_sampled(
    rng: np.random.Generator, n: int, density: float, poles: int, corner: float
) -> np.ndarray:
    """Point samples at :data:`RATE` of white noise (two-sided PSD N²) through the analog
    Butterworth low-pass: x_{k+1} = Φ x_k + η_k, Φ = e^{A·dt}, η_k ~ N(0, Q_d) with Q_d from
    Van Loan's block exponential; y_k = C x_k, i.e. y = Σ_j C (zI − Φ)⁻¹ e_j η_j by one
    ``lfilter`` per state component. Started from zero and run :data:`_BURN` corner periods
    (the transient decays as e^(−2π·corner·t·sin(π/2n)) and is gone) before the n kept."""
    am, bm, cm = _analog(poles, corner)
    dt = 1.0 / RATE
    k = am.shape[0]
    block = np.zeros((2 * k, 2 * k))
    block[:k, :k] = -am
    block[:k, k:] = density**2 * bm @ bm.T
    block[k:, k:] = am.T
    e = expm(block * dt)
    phi = e[k:, k:].T
    qd = phi @ e[:k, k:]
    qd = 0.5 * (qd + qd.T)
    burn = int(_BURN * RATE / corner)
    drive = rng.standard_normal((n + burn, k)) @ np.linalg.cholesky(qd).T
    y = np.zeros(n + burn)
    for j in range(k):
        num, den = ss2tf(phi, np.eye(k), cm, np.zeros((1, k)), input=j)
        y += lfilter(num[0], den, drive[:, j])
    return y[burn:]


#: Corner periods run before a point-sampled record's first kept sample.
_BURN = 200


def delivered_density(density: float, poles: int, corner: float) -> float:
    """The delivered density N·√A of point samples [u·√s]: A = Σ_j |B(j·rate)|² (the discrete
    spectrum at f = 0 over N², by direct summation of the Butterworth response)."""
    j = np.arange(1, 2_000_001, dtype=np.float64) * RATE / corner
    alias = 1.0 + 2.0 * float(np.sum(1.0 / (1.0 + j ** (2 * poles))))
    return density * math.sqrt(alias)


def sample_sigma(truth: Truth = GYRO) -> float:
    """The white part's sample standard deviation N·√rate [rad/s]."""
    return truth.white * math.sqrt(RATE)


#: The realistic cases: name → keyword arguments of :func:`record` (count steps of σ/7).
CASES: dict[str, dict[str, float]] = {
    "filter_1pole": {"poles": 1},
    "filter_2pole": {"poles": 2},
    "integer_coded": {"count_step": sample_sigma() / 7.0},
    "line_2hz": {"line_power": 0.01},
    "thermal_drift": {"drift": 0.05},
    "filter_coded_line": {"poles": 2, "count_step": sample_sigma() / 7.0, "line_power": 0.01},
    "all": {"poles": 1, "count_step": sample_sigma() / 7.0, "line_power": 0.01, "drift": 0.05},
    "point_1pole": {"poles": 1, "point": True},
    "point_2pole": {"poles": 2, "point": True},
    "coarse_counts": {"count_step": sample_sigma()},
    "point_coded_line_drift": {
        "poles": 2,
        "point": True,
        "count_step": sample_sigma() / 7.0,
        "line_power": 0.01,
        "drift": 0.05,
    },
}


def white_truth(case: str, truth: Truth = GYRO) -> float:
    """The white density a datasheet prints for the case's unit [u·√s], that of the delivered
    samples: N, or for point samples N·√A (:func:`delivered_density`), with the count step's
    quantization floor q²/(12·rate) added in variance (Sheppard; white while the noise dithers
    the quantizer)."""
    kw = CASES.get(case, {})
    n_out = truth.white
    if kw.get("point"):
        n_out = delivered_density(truth.white, int(kw["poles"]), float(kw.get("corner", RATE / 4)))
    step = kw.get("count_step")
    if step is not None:
        n_out = math.sqrt(n_out**2 + step**2 / (12.0 * RATE))
    return n_out
