"""Reference values for the simulation tests, each with its source.

Tags as in the project's reference notes: [C] confirmed in the source, [N] recomputed
numerically (closed form), [M] from memory.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = [
    "GM_DISCRETE",
    "DOUBLE_INTEGRATOR",
    "KASDIN_FLOOR",
    "KASDIN_REFERENCE_RUNS",
    "gm_period_mean_autocov",
]

#: First-order Gauss-Markov process, exact discretization Φ = exp(−dt/T), Qd = σ²(1 − e^(−2dt/T)):
#: T = 3 s, σ² = 0.7, dt = 0.1 s (reference notes section 2, Van Loan to 1e-12) [N].
GM_DISCRETE = {"T": 3.0, "var": 0.7, "dt": 0.1, "phi": 0.9672161005, "qd": 0.0451451105}

#: Double integrator (F = [[0, 1], [0, 0]], G = [0, 1]ᵀ), Van Loan's closed form
#: Qd = q [[dt³/3, dt²/2], [dt²/2, dt]]: q = 2.5, dt = 0.1 gives
#: [[8.3333e-4, 0.0125], [0.0125, 0.25]] (C. F. Van Loan, IEEE Trans. Automatic Control
#: AC-23(3):395-404, 1978; reference notes section 5) [N]. The angle of a random walk of
#: density √q is the first state, the rate the second.
DOUBLE_INTEGRATOR = {"q": 2.5, "dt": 0.1, "qd": ((8.3333e-4, 0.0125), (0.0125, 0.25))}

#: Allan-deviation floor of Kasdin-Walter flicker (α = 1) with driving variance Q_d = B², per
#: unit B: √(2 ln2/π) = 0.6642824703 (IEEE Std 952 Annex C floor; Q_d = B² from Kasdin & Walter
#: 1992 eq. (39) in the inertial mapping, reference notes sections 3 and 9) [N].
KASDIN_FLOOR = 0.6642824703

#: Seeded study in the reference notes (section 9): 4 runs of 2^20 samples, Q_d = 1, OADEV at
#: m = 16, 256, 4096 [N] (a regression picture, not an assertion: the runs are not ours).
KASDIN_REFERENCE_RUNS = {16: 0.6660, 256: 0.6653, 4096: 0.6634}


def gm_period_mean_autocov(sigma2, T, dt, lags):
    """Autocovariance of the period means of a Gauss-Markov process (variance σ², time
    constant T) at lags j (in samples): the OU autocovariance σ²e^{−|s|/T} integrated over two
    periods (derived): C(0) = 2σ²(T/dt)²(dt/T − 1 + e^{−dt/T}),
    C(j ≥ 1) = σ²(T/dt)²(1 − e^{−dt/T})² e^{−(j−1)dt/T}."""
    r = dt / T
    j = np.asarray(lags, dtype=float)
    c0 = 2 * sigma2 * (1 / r) ** 2 * (r - 1 + math.exp(-r))
    cj = sigma2 * (1 / r) ** 2 * (-math.expm1(-r)) ** 2 * np.exp(-(j - 1) * r)
    return np.where(j == 0, c0, cj)
