"""Published check values for the Allan-variance engine, each with its source.

Tags as in the project's reference notes: [C] confirmed in the source (or a faithful
transcription), [N] recomputed numerically, [M] from memory, [L] computed by a reference
library (not a published table).

Main source: W. J. Riley, "Handbook of Frequency Stability Analysis", NIST Special Publication
1065 (2008), hereafter SP 1065. The two test data sets come from W. J. Riley, "The Calculation
of Time Domain Frequency Stability" (IEEE UFFC educational page, revised from two IEEE IFCS
papers); SP 1065 reprints them in its validation chapter, section 12.4; "Table 31" for the
1000-point set is the table number given by several secondary citations (primary text not
read). The small set's own table number is not confirmed [M].
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "LCG_SEED",
    "LCG_MULTIPLIER",
    "LCG_MODULUS",
    "LCG_FIRST",
    "lcg_1000",
    "SET_1000",
    "SMALL_SET",
    "SMALL_SET_VALUES",
    "CHI2_CHECK",
    "EDF_SIMPLE_N1001",
    "EDF_GREENHALL_LIBRARY_N1001",
    "IEEE952_WHITE",
]

# -- 1000-point data set (SP 1065 section 12.4, Table 31 per secondary citations) [C] --------

#: n_0 of the "minimal standard" linear congruential generator (Park & Miller) used for the set.
LCG_SEED = 1234567890
#: n_(i+1) = 16807 n_i mod 2147483647.
LCG_MULTIPLIER = 16807
LCG_MODULUS = 2147483647
#: n_1 … n_3 as printed in the reference notes (a check that the generator is the right one). [N]
LCG_FIRST = (395529916, 1209410747, 633705974)


def lcg_1000() -> np.ndarray:
    """The 1000 fractional-frequency values y_i = n_i / 2147483647, i = 0 … 999 (tau0 = 1 s)."""
    n = [LCG_SEED]
    for _ in range(999):
        n.append(LCG_MULTIPLIER * n[-1] % LCG_MODULUS)
    return np.array(n, dtype=np.float64) / LCG_MODULUS


#: Published statistics of the 1000-point set, 7 significant figures. [C] [N]
#: "adev" is the non-overlapping Allan deviation, "oadev" the overlapping one, at tau = 1, 10,
#: 100 s.
SET_1000 = {
    "mean": 0.4897745,
    "sd": 0.2884664,
    "tau": (1.0, 10.0, 100.0),
    "adev": (0.2922319, 0.09965736, 0.03897804),
    "oadev": (0.2922319, 0.09159953, 0.03241343),
}

# -- 9-point data set (same sources; table number not confirmed [M]) [C] [N] ---------------

#: Fractional-frequency values, tau0 = 1 s.
SMALL_SET = (892.0, 809.0, 823.0, 798.0, 671.0, 644.0, 883.0, 903.0, 677.0)
#: Published statistics, 7 significant figures.
SMALL_SET_VALUES = {
    "mean": 788.8889,
    "sd": 100.9770,
    "adev": {1.0: 91.22945, 2.0: 115.8082},
    "oadev": {2.0: 85.95287},
}

# -- Confidence intervals -------------------------------------------------------------------

#: SP 1065 eq. (45) [C, secondary citations]: the chi-square interval factors for
#: c = 0.682689 (one sigma) and edf = 146.1788: sigma in [0.9463046, 1.0640112] x sigma_hat. [N]
CHI2_CHECK = {"confidence": 0.682689, "edf": 146.1788, "low": 0.9463046, "high": 1.0640112}

#: SP 1065 section 5.4.1, Table 5 (from Howe, Allan & Barnes 1981) [C, several secondary
#: transcriptions]: simple EDF formulas for the overlapping AVAR, evaluated at N = 1001 phase
#: points (the reference notes print them to 3 decimals) [N]. Keys: averaging factor m; values
#: in the order white PM, flicker PM, white FM, flicker FM, random-walk FM (alpha 2, 1, 0, -1,
#: -2). The flicker-FM m = 1 value keeps the square on (N - 2) (the transcriptions agree).
EDF_SIMPLE_N1001 = {
    1: (500.499, 610.414, 665.780, 868.809, 1000.003),
    10: (495.945, 326.624, 146.177, 121.484, 97.332),
    100: (445.395, 64.971, 13.002, 9.627, 7.422),
}

#: [L] Values of allantools 2024.06 ``ci.edf_greenhall(alpha, d=2, m, N=1001,
#: overlapping=True)`` — a reference library implementing C. A. Greenhall & W. J. Riley,
#: "Uncertainty of stability variances based on finite differences", Proc. 35th PTTI (2003).
#: Not a published table. Order as in EDF_SIMPLE_N1001, two decimals.
EDF_GREENHALL_LIBRARY_N1001 = {
    10: (507.17, 247.31, 135.07, 114.67, 91.04),
    100: (440.21, 53.87, 12.81, 9.95, 7.75),
}

# -- IEEE Std 952-1997, Annex C ------------------------------------------------------------

#: White rate noise of density N (angle random walk) has AVAR N^2/tau, ADEV N/sqrt(tau), read
#: at tau = 1 (in the unit of time of N). [C] for the form (IEEE Std 952-1997 Annex C; also
#: IEEE Std 1554-2005); [M] for the annex subclause number.
IEEE952_WHITE = "adev(tau) = N / sqrt(tau)"
