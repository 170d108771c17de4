"""Published noise-term forms and check values, each with its source.

Sources (tags as in the project's reference notes: [C] confirmed, [N] recomputed numerically
from the closed form, [M] from memory):

* IEEE Std 952-1997, "IEEE Standard Specification Format Guide and Test Procedure for
  Single-Axis Interferometric Fiber Optic Gyros", Annex C "Allan variance" — the Allan-variance
  forms of quantization, angle random walk, bias instability, rate random walk, rate ramp and
  exponentially correlated noise, and the PSD-to-Allan-variance integral
  σ²(τ) = 4∫₀^∞ S(f) sin⁴(πfτ)/(πfτ)² df with S two-sided [C for the forms as transcribed in
  the reference notes; M for subclause and equation numbers]. The same table is in El-Sheimy,
  Hou & Niu, IEEE Trans. Instrum. Meas. 57(1):140-149, 2008 [M for its numbering].
* C. F. Van Loan, "Computing integrals involving the matrix exponential", IEEE Trans.
  Automatic Control AC-23(3):395-404, 1978 — exact Φ and Qd [C]; the closed forms below are
  the classical results for the first-order Markov process and the white-driven integrators
  (Brown & Hwang, "Introduction to Random Signals and Applied Kalman Filtering", from memory
  for the section) [N].
* Error growth (REFERENCES §12): Var ∫₀ᵗ W = t³/3 and Var ∫∫ W = t⁵/20 for a unit Wiener process;
  Woodman, "An introduction to inertial navigation", Univ. Cambridge UCAM-CL-TR-696, 2007 [C,
  exists; M for equation numbers].

The functions here are written independently of ``sensormodel`` (plain numpy/scipy), to serve
as the oracle.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = [
    "avar_quantization",
    "avar_white",
    "avar_random_walk",
    "avar_ramp",
    "avar_markov",
    "FLICKER_FLOOR",
    "FLICKER_REGRESSION",
    "MARKOV_REGRESSION",
    "MARKOV_ASYMPTOTES",
    "GM_PEAK_TAU_OVER_T",
    "GM_PEAK_ADEV_OVER_SIGMA",
    "EQUAL_VARIANCE_SUM",
    "VAN_LOAN_GM",
    "VAN_LOAN_DOUBLE_INTEGRATOR",
    "VAN_LOAN_ARW_RRW",
    "triple_integrator_qd",
    "LYAPUNOV_GM",
    "FIRST_ORDER_LAG",
    "quantization_avar_continuous_kernel",
]

# --- IEEE Std 952-1997 Annex C Allan-variance forms --------------------------------------------


def avar_quantization(tau, q):
    """Quantization: 3 Q² / τ² (IEEE Std 952-1997 Annex C)."""
    return 3.0 * q**2 / np.asarray(tau, dtype=float) ** 2


def avar_white(tau, n):
    """Angle random walk: N² / τ (IEEE Std 952-1997 Annex C)."""
    return n**2 / np.asarray(tau, dtype=float)


def avar_random_walk(tau, k):
    """Rate random walk: K² τ / 3 (IEEE Std 952-1997 Annex C)."""
    return k**2 * np.asarray(tau, dtype=float) / 3.0


def avar_ramp(tau, r):
    """Rate ramp: R² τ² / 2 (IEEE Std 952-1997 Annex C)."""
    return r**2 * np.asarray(tau, dtype=float) ** 2 / 2.0


def avar_markov(tau, qc, tc):
    """Exponentially correlated (Markov) noise of strength q_c and correlation time T_c
    (IEEE Std 952-1997 Annex C; El-Sheimy et al. 2008):
    (q_c T_c)²/τ · [1 − T_c/(2τ) (3 − 4 e^(−τ/T_c) + e^(−2τ/T_c))].
    Evaluated in extended precision (numpy.longdouble) to push back the cancellation at
    τ ≪ T_c; use it for τ/T_c >= 1e-3."""
    t = np.asarray(tau, dtype=np.longdouble)
    T = np.longdouble(tc)
    val = (
        (np.longdouble(qc) * T) ** 2
        / t
        * (1 - T / (2 * t) * (3 - 4 * np.exp(-t / T) + np.exp(-2 * t / T)))
    )
    return val.astype(float)


#: Allan-variance floor of flicker noise per B²: 2 ln2 / π (IEEE Std 952-1997 Annex C) [N].
FLICKER_FLOOR = 0.4412712003

#: Exact flicker Allan variance with cut-off f0, B = 1 (IEEE Std 952-1997 Annex C form, values
#: recomputed and checked by quadrature to 1e-15 in the reference notes, §3) [N]:
#: (f0 [Hz], tau [s], AVAR).
FLICKER_REGRESSION = (
    (1.0, 0.1, 0.0304025162),
    (1.0, 1.0, 0.4308026104),
    (1.0, 10.0, 0.4411504856),
    (0.1, 3.0, 0.2122609841),
)

#: First-order Gauss-Markov Allan variance, σ = T = 1 (reference notes §2, matches the Annex C
#: Markov row and its quadrature to 1e-12) [N]: (tau, AVAR).
MARKOV_REGRESSION = ((0.1, 0.0618919066), (1.0, 0.3361824814), (5.0, 0.2810762555))

#: Markov asymptotes at σ = T = 1 (reference notes §1) [N]: (tau, AVAR, asymptote): τ ≪ T gives
#: q_c² τ/3, τ ≫ T gives (q_c T)²/τ, with q_c² = 2σ²/T = 2.
MARKOV_ASYMPTOTES = ((1e-3, 6.6617e-4, 6.6667e-4), (1e4, 1.99970e-4, 2e-4))

#: Peak of the Markov Allan deviation (derived with a bounded optimiser; no published source
#: prints these constants; reference notes §2, trap 1) [N].
GM_PEAK_TAU_OVER_T = 1.8926178
GM_PEAK_ADEV_OVER_SIGMA = 0.6173643

#: Sum of Markov processes for 1/f (reference notes §3, derived from the superposition of
#: first-order spectra): one process per decade, σ_k = 0.8561 B (= sqrt(ln10/π) B),
#: T_k = 1e-3 … 1e6 s, gives an Allan deviation of 0.6617-0.6669 B for τ = 1 … 1e3 s [N].
EQUAL_VARIANCE_SUM = {
    "sigma_over_b": 0.8561,
    "t_min": 1e-3,
    "t_max": 1e6,
    "tau": (1.0, 1e3),
    "adev_over_b": (0.6617, 0.6669),
}

# --- Van Loan closed forms and Lyapunov values (reference notes §5, §6) ------------------------

#: First-order Markov: Φ = e^(−dt/T), Qd = σ²(1 − e^(−2dt/T)); T = 3, σ² = 0.7, dt = 0.1 [N].
VAN_LOAN_GM = {"T": 3.0, "var": 0.7, "dt": 0.1, "phi": 0.9672161005, "qd": 0.0451451105}

#: White-driven double integrator: Qd = q [[dt³/3, dt²/2], [dt²/2, dt]]; q = 2.5, dt = 0.1 [N].
VAN_LOAN_DOUBLE_INTEGRATOR = {
    "q": 2.5,
    "dt": 0.1,
    "qd": ((8.333333333e-4, 0.0125), (0.0125, 0.25)),
}

#: ARW + RRW, states [θ, b], θ' = b + w_N, b' = w_K: Qd = [[N²dt + K²dt³/3, K²dt²/2],
#: [K²dt²/2, K²dt]]; N² = 0.3, K² = 0.05, dt = 0.2 [N].
VAN_LOAN_ARW_RRW = {
    "n2": 0.3,
    "k2": 0.05,
    "dt": 0.2,
    "qd": ((0.0601333, 0.001), (0.001, 0.01)),
}


def triple_integrator_qd(q, dt):
    """White-driven triple integrator: q [[dt⁵/20, dt⁴/8, dt³/6], [dt⁴/8, dt³/3, dt²/2],
    [dt³/6, dt²/2, dt]] (reference notes §5) [N]."""
    return q * np.array(
        [
            [dt**5 / 20, dt**4 / 8, dt**3 / 6],
            [dt**4 / 8, dt**3 / 3, dt**2 / 2],
            [dt**3 / 6, dt**2 / 2, dt],
        ]
    )


#: Scalar GM steady state P = q T / 2: T = 3, q = 1.4/3 gives P = 0.7 (reference notes §6) [N].
LYAPUNOV_GM = {"T": 3.0, "q": 1.4 / 3.0, "P": 0.7}

#: First-order lag 1/(s + 1) driven by unit-strength white noise: steady-state variance 1/2 and
#: PSD |H(jω)|² = 1/(1 + ω²) (classical result for linear systems driven by white noise).
FIRST_ORDER_LAG = {"variance": 0.5}


# --- Quantization: the Annex C integral of its PSD, evaluated numerically ----------------------


def quantization_avar_continuous_kernel(tau, q, tau0):
    """4∫₀^∞ S(f) sin⁴(πfτ)/(πfτ)² df for S = (4Q²/τ0) sin²(πfτ0) (IEEE Std 952 Annex C),
    by numerical quadrature.

    With x = πfτ and b = τ0/τ the integral is (16Q²/(π τ τ0)) ∫₀^∞ sin²(bx) sin⁴x / x² dx. The
    head [0, X] is integrated adaptively; the tail is written, by product-to-sum, as
    Σ c_j cos(a_j x)/x² and integrated with QUADPACK's Fourier rule (scipy quad, weight="cos").
    """
    from scipy.integrate import quad

    b = tau0 / tau
    X = 60.0 * math.pi
    pts = [k * math.pi / 2 for k in range(1, 120)]

    def f(x):
        return math.sin(b * x) ** 2 * math.sin(x) ** 4 / x**2 if x > 0 else 0.0

    head = quad(f, 0.0, X, points=pts, limit=4000, epsabs=0.0, epsrel=1e-12)[0]
    # sin²(bx) sin⁴x = (1/16)(1 − cos2bx)(3 − 4cos2x + cos4x), expanded
    parts = [
        (3.0, 0.0),
        (-4.0, 2.0),
        (1.0, 4.0),
        (-3.0, 2 * b),
        (2.0, 2 * (1 - b)),
        (2.0, 2 * (1 + b)),
        (-0.5, 2 * (2 - b)),
        (-0.5, 2 * (2 + b)),
    ]
    tail = 0.0
    for c, a in parts:
        if a == 0.0:
            tail += c / X
        else:
            tail += c * quad(lambda x: 1.0 / x**2, X, np.inf, weight="cos", wvar=a)[0]
    integral = head + tail / 16.0
    return 16.0 * q**2 / (math.pi * tau * tau0) * integral
