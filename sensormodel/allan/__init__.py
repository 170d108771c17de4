"""Overlapping Allan deviation of recordings, with confidence intervals.

The estimator is the overlapping Allan variance of IEEE Std 1139-2008 and NIST SP 1065 (W. J.
Riley, "Handbook of Frequency Stability Analysis", 2008, section 5.2.4, eq. (11)), written on the
phase (integrated) form of the rate samples ``y`` taken at ``rate`` [Hz], τ0 = 1/rate::

    x[0] = 0,  x[k] = τ0 · Σ_{j<k} (y[j] − ȳ)          (N = n + 1 phase points)
    AVAR(τ = m τ0) = Σ_{i=0}^{N−2m−1} (x[i+2m] − 2 x[i+m] + x[i])² / (2 m² τ0² (N − 2m))

Subtracting the mean ȳ before integrating changes nothing in exact arithmetic (a linear phase is
annihilated by the second difference) and keeps the phase small, hence precise. The unit of the
deviation is the unit of ``y`` (rad/s for a gyro in SI, or whatever the samples are in).

Engine
------
One float64 phase array is built block by block (the only copy of the input; a
:class:`numpy.memmap` is read block by block), then every τ is evaluated block-major: for each
block of ``_BLOCK`` second differences, all τ of the grid are accumulated while the phase slices
are still in cache, so the memory traffic per τ is about one stream instead of three. The index
range is cut into fixed chunks of 2^20 second differences that worker threads share (numpy
releases the GIL in its loops; the phase array is only read); each chunk's sums are kept and the
chunks added exactly (``math.fsum``), so a result does not depend on the number of threads, to
the bit. The noise identification runs beside the chunks. Several records
(:func:`overlapping_many`) share one pool of workers: all take chunks of the earliest unfinished
record, and the next record's phase is built by the first worker that runs out of chunks; at
most one phase array per worker exists at a time, and a finished record's array is reused.
Peak memory is the phase array (8 (n+1) bytes) plus a few blocks per thread. The pages of a
read-only memory-mapped record are let go after its phase is built (:func:`release`), so a
mapped record does not stay in the process's memory after it is read.

Records larger than memory (8 bytes per sample of all records together above half the
available memory; ``SENSORMODEL_STREAM_ABOVE`` overrides) take the out-of-core path
(``_stream``): the means and the phases in two passes over row chunks, the phases to temporary
files, the sums chunk by chunk from buffered reads of the phase at the offsets each τ needs,
with the same kernel and chunks, so the numbers are those of the in-memory path to rounding.

Precision: the phase is formed exactly as ``allantools.frequency2phase`` forms it (mean removed,
sequential cumulative sum, then scaled), so the second differences are bit-for-bit the same and
results agree to the rounding of the final sums (~1e-15). Both carry the rounding of the phase,
about eps·max|x|: a record dominated by random-walk rate noise has a phase growing like n^1.5, so
at τ = τ0 over 10^7 samples the deviation keeps about 9 significant digits (far below its
statistical uncertainty).

Uncertainty
-----------
The confidence interval at each τ is the chi-square interval of SP 1065 eq. (45) with the
equivalent degrees of freedom (EDF) of C. A. Greenhall and W. J. Riley, "Uncertainty of
stability variances based on finite differences", Proc. 35th PTTI Meeting (2003), for the
overlapped, unmodified Allan variance. The EDF depends on the power-law noise type α at each τ
(one-sided PSD of the rate S_y(f) ∝ f^α: α = 2 white angle noise, 0 white rate noise, −1 flicker
rate noise, −2 random-walk rate noise), decided from the data at each τ from the record at and
around that τ alone (never copied from another τ, so independent of the requested grid): the
lag-1 autocorrelation method of W. J. Riley and C. A. Greenhall, "Power law noise
identification using the lag 1 autocorrelation", Proc. 18th EFTF (2004) where 100 decimated
points remain, else the local slope of the Allan variance on a fixed octave grid of the record,
with the type of fewest degrees of freedom (the widest interval) where the slope leaves it
undecided; or the noise type is given by the caller.

Modules (private; this package exports the public names): ``_samples`` (sample checks, the
phase, the kernel of the sums, τ grids), ``_engine`` (second-difference sums, the schedule of
records on worker threads, :func:`overlapping` and its siblings), ``_stream`` (the out-of-core
path, :func:`release`), ``_noise`` (the noise type at each τ),
``_curve`` (:class:`AllanCurve` and its JSON/CSV files), ``_pooled``
(:func:`overlapping_pooled`: the variance from every cluster wholly inside the clean segments
of a record with gaps). The degrees of freedom and intervals are
:mod:`sensormodel.confidence`'s.

Numbers of the trade: ``n_clusters`` in an :class:`AllanCurve` is the number of overlapping
second differences N − 2m = n + 1 − 2m that enter the sum (``n_independent`` gives the number of
non-overlapping clusters ⌊n/m⌋ for comparison).
"""

from ..confidence import DEFAULT_CONFIDENCE, NOISE_ALPHAS, chi2_interval
from ._curve import (
    CSV_HEADER,
    SCHEMA_FILE,
    SCHEMA_ID,
    AllanCurve,
    csv_rows,
    curves_from_csv,
    curves_from_json,
    curves_to_csv,
    curves_to_json,
)
from ._engine import (
    aligned_scratch,
    overlapping,
    overlapping_many,
    second_difference_sums,
)
from ._noise import NOISE_NAMES, noise_alpha
from ._pooled import overlapping_pooled
from ._samples import averaging_factors, tau_grid
from ._stream import release

__all__ = [
    "AllanCurve",
    "overlapping",
    "overlapping_many",
    "overlapping_pooled",
    "tau_grid",
    "averaging_factors",
    "noise_alpha",
    "second_difference_sums",
    "aligned_scratch",
    "release",
    "chi2_interval",
    "curves_to_json",
    "curves_from_json",
    "csv_rows",
    "curves_to_csv",
    "curves_from_csv",
    "CSV_HEADER",
    "SCHEMA_ID",
    "SCHEMA_FILE",
    "DEFAULT_CONFIDENCE",
    "NOISE_ALPHAS",
    "NOISE_NAMES",
]
