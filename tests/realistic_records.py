"""Seeded records built the way real sensors record, for the identification tests.

An ideal truth (white noise of density N, flicker of coefficient B, optionally a random walk of
density K: the plain-numpy generators of :mod:`tests.identify_records`) and then what a real
unit does to it before it reaches the file, each step a plain numpy/scipy operation:

* an undeclared output filter near rate/4: a 1-pole or a 2-pole Butterworth low-pass
  (``scipy.signal.butter`` + ``lfilter`` of the samples). It changes the white spectrum only
  above its corner, so the truth stays N for the white density and 0.6643·B for the floor;
* integer coding: ``round(y/step)·step`` with a count step of about σ/7 (σ the sample standard
  deviation of the white part);
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
from scipy.signal import butter, lfilter

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
    y = white(rng, n, RATE, truth.white) + flicker(rng, n, RATE, truth.flicker)
    if truth.random_walk > 0.0:
        y = y + random_walk(rng, n, RATE, truth.random_walk)
    if poles:
        b, a = butter(poles, corner / (RATE / 2.0))
        y = lfilter(b, a, y)
    t = np.arange(n) / RATE
    if line_power > 0.0:
        amplitude = math.sqrt(2.0 * line_power * truth.white**2 * RATE)
        y = y + amplitude * np.sin(2.0 * math.pi * line_frequency * t + rng.uniform(0, 2 * math.pi))
    if drift:
        y = y + drift * truth.floor * t / t[-1]
    if count_step is not None:
        y = np.round(y / count_step) * count_step
    return np.asarray(y, dtype=np.float64)


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
}
