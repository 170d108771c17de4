"""Reference values for acceptance: chi-square intervals and equivalent degrees of freedom.

Tags as in the project's reference notes: [C] confirmed in the source, [N] recomputed
numerically, [M] from memory. Values from a reference library are labelled as such.
"""

from __future__ import annotations

__all__ = ["CHI2_INTERVAL", "GREENHALL_EDF_M100_N1001", "DEG_PER_H", "MICRO_G"]

#: Chi-square interval of a deviation with edf degrees of freedom (NIST SP 1065, W. J. Riley
#: 2008, eq. (45) [C, secondary]; the check value recomputed with scipy [N]):
#: (confidence, edf, low factor, high factor).
CHI2_INTERVAL = (0.682689, 146.1788, 0.9463046, 1.0640112)

#: Equivalent degrees of freedom of the overlapping Allan variance, d = 2, m = 100, N = 1001
#: phase points, by noise type alpha (Greenhall & Riley, Proc. 35th PTTI 2003, large-r form);
#: the printed values come from the reference library allantools 2024.06
#: ``ci.edf_greenhall(alpha, 2, 100, 1001, overlapping=True)`` (a reference library, not a
#: published table).
GREENHALL_EDF_M100_N1001 = {2: 440.21, 0: 12.81, -1: 9.95, -2: 7.75}

#: 1 deg/h in rad/s, (pi/180)/3600 [N].
DEG_PER_H = 4.848137e-6
#: 1 µg in m/s², standard gravity 9.80665 m/s² (3rd CGPM 1901; NIST SP 330) × 1e-6 [C].
MICRO_G = 9.80665e-6
