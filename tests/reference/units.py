"""Reference values for units, conventions and filter bandwidths, each with its source.

Tags as in the project's reference notes: [C] confirmed in the source, [N] recomputed
numerically (closed form), [M] from memory. Values are printed to the digits the source gives;
tests compare with a tolerance that matches those digits.
"""

from __future__ import annotations

__all__ = [
    "STANDARD_GRAVITY",
    "FLOOR_FACTOR",
    "FLOOR_FACTOR_SQUARED",
    "DEG_PER_RT_H",
    "DEG_PER_H",
    "DEG_PER_H_PER_RT_H",
    "UG_PER_RT_HZ_IN_M_S_PER_RT_H",
    "MG_PER_RT_HZ_IN_M_S_PER_RT_H",
    "WORKED_EXAMPLE",
    "BUTTERWORTH_ENBW",
    "STYLE_PIN",
    "GM_PEAK_TAU_OVER_T",
    "GM_PEAK_ADEV_OVER_SIGMA",
    "digits_rtol",
]

#: Standard gravity g_n [m/s²], exact by definition: 3rd CGPM (1901), Comptes Rendus p. 70;
#: NIST SP 330 (2008 ed.), p. 52; BIPM SI Brochure 8th ed. pp. 142-143. [C]
STANDARD_GRAVITY = 9.80665

#: Allan-deviation floor of flicker (bias-instability) noise per unit IEEE coefficient B,
#: sqrt(2 ln2 / pi): IEEE Std 952-1997 Annex C (bias instability); 10 digits as in the
#: reference notes, section 3 [N].
FLOOR_FACTOR = 0.6642824703
#: Its square, 2 ln2 / pi, the Allan-variance floor per B² (same source) [N].
FLOOR_FACTOR_SQUARED = 0.4412712003

#: 1 deg/sqrt(h) in rad/sqrt(s): (pi/180)/60 (1 h = 3600 s, sqrt(3600) = 60) [N].
DEG_PER_RT_H = 2.908882e-4
#: 1 deg/h in rad/s [N].
DEG_PER_H = 4.848137e-6
#: 1 deg/h/sqrt(h) in rad/s^1.5 [N].
DEG_PER_H_PER_RT_H = 8.080228e-8
#: 1 ug/sqrt(Hz) in m/s/sqrt(h): 9.80665e-6 m/s²/sqrt(Hz) = 9.80665e-6 m/s/sqrt(s) x 60 [N].
UG_PER_RT_HZ_IN_M_S_PER_RT_H = 5.88399e-4
#: 1 mg/sqrt(Hz) in m/s/sqrt(h) [N].
MG_PER_RT_HZ_IN_M_S_PER_RT_H = 0.588399

#: Worked example of the trade's rule ARW[deg/rt(h)] = ND[deg/h/rt(Hz)]/60 = ND[deg/s/rt(Hz)]*60
#: ("common practice"; [C] on a secondary web page, [N] recomputed): a white-noise Allan
#: deviation of 15 deg/h at tau = 1 s is an ARW of 0.25 deg/rt(h), i.e. a two-sided rate
#: density of 0.0042 deg/s/rt(Hz) (printed to 2 digits).
WORKED_EXAMPLE = {
    "adev_1s_deg_per_h": 15.0,
    "arw_deg_per_rt_h": 0.25,
    "density_deg_per_s_per_rt_hz": 0.0042,
}

#: Equivalent noise bandwidth of an n-th order Butterworth low-pass, as a multiple of its -3 dB
#: frequency: (pi/2n)/sin(pi/2n). S. Winder, "Analog and Digital Filter Design", 2nd ed.
#: (Newnes), Appendix A, Table A.3 "Butterworth noise bandwidth" (formula credited to
#: Carlson) [C]; the digits recomputed from the closed form [N].
BUTTERWORTH_ENBW = {1: 1.570796, 2: 1.110721, 3: 1.047198, 4: 1.026172}

#: The pin of the project's style notes (habit 4): "0.15 deg/hour**0.5" is 4.3633e-05 rad/s**0.5.
STYLE_PIN = ("0.15 deg/hour**0.5", 4.3633e-05)

#: Maximum of the Allan deviation of a first-order Gauss-Markov process, from the closed form of
#: IEEE Std 952-1997 Annex C (exponentially correlated noise): at tau = 1.8926178 T the ADEV is
#: 0.6173643 sigma. Derived with a bounded optimiser (reference notes section 2) [N]; no
#: published table prints these two constants.
GM_PEAK_TAU_OVER_T = 1.8926178
GM_PEAK_ADEV_OVER_SIGMA = 0.6173643


def digits_rtol(value: float) -> float:
    """Half a unit in the last printed digit of ``value``, relative (at most 7 significant
    digits are looked at): 2.908882e-4 -> 0.5e-6/2.908882 ≈ 1.7e-7; 0.0042 -> 1.2e-2."""
    mantissa = f"{value:e}".split("e")[0].rstrip("0").rstrip(".")
    decimals = len(mantissa.split(".")[1]) if "." in mantissa else 0
    return 0.5 * 10.0**-decimals / abs(float(mantissa))
