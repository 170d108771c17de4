"""Noise records from a model: exact, chunked, seeded, per channel.

A simulated record is what the sensor would deliver if its noise were exactly the model: one
sample per period dt = 1/rate and channel, as a **rate sample** (the mean of the continuous
output over the sample period [u], default) or as an **increment** (its integral over the
period, the delta-angle [rad] / delta-velocity [m/s] many IMUs deliver, [u·s]).

Exactness
---------
Every sample is the exact mean of the continuous model over its period, so the Allan variance of
a record at τ = m/rate is the model's continuous Allan variance at that τ (the cluster mean of m
samples is the mean of the continuous output over τ), whatever the rate. Term by term:

* **state-space terms** (``random_walk``, ``gauss_markov``, ``flicker`` through its realization
  as a sum of Gauss-Markov processes, and any term with a continuous realization): the term's
  realization dx/dt = F x + G w, y = H x (:meth:`sensormodel.terms.Term.state_space`) is
  augmented with the running mean of its output, a' = H x / dt, and discretized exactly over one
  step with Van Loan's method (:func:`sensormodel.linear.step_model` over
  :func:`sensormodel.linear.van_loan`; C. F. Van Loan, IEEE Trans. Automatic Control
  AC-23(3):395-404, 1978), the mean state reset every step. The step's mean
  ȳ_k = γ x_k + v_k and the next state x_{k+1} = Φ x_k + w_k are jointly Gaussian: cov(w, v)
  from the augmented Qd. The sample is drawn as ȳ_k = γ x_k + c w_k + e_k with c = Qxx⁻¹ q_xa
  and e_k independent of w_k of variance q_aa − q_axᵀ c (the conditional Gaussian). The initial
  state is drawn from P0 (stationary for Gauss-Markov states, 0 for random walks). Stationary
  first-order states (Gauss-Markov, flicker) join the channel's white stream (next items). A
  random walk (any diagonal F not stationary from t = 0) is one first-order recursion per state
  (:func:`scipy.signal.lfilter`; a running sum for φ = 1) over a whole block with its state
  carried; a non-diagonal F (the ``shaped`` term's companion form, band-limited white) runs as
  one transfer function per noise input (exact impulse response, checked); where that form is
  not accurate to 1e-9 the step-by-step loop is used (exact, slow).
* ``white`` (density N): the mean of white noise of two-sided PSD N² over dt has variance N²/dt
  (increment variance N²·dt, IEEE Std 952 Annex C: Allan variance N²/τ). It shares one Gaussian
  stream with the e_k parts of the state-space terms (independent Gaussians add).
* **The stationary part in one stream**: white noise, the e_k residuals and every stationary
  first-order state together are one stationary Gaussian sequence. It is simulated in its
  *innovations form* (the steady-state Kalman predictor: one white innovation of variance Λ
  through a filter H(z) with the model's poles, started from its stationary state;
  :func:`sensormodel.linear.innovations_filter`), which has exactly the model's
  autocovariance, with one normal deviate per sample instead of one per state; H runs as
  second-order sections (:func:`scipy.signal.sosfilt`). Built once per channel, it is checked
  against the model: spectrum and variance within
  :data:`sensormodel.linear.INNOVATIONS_TOLERANCE` (1e-7; typically 1e-12 to 1e-8, the float64
  rounding of the section coefficients), else the channel runs one stream per
  state. That error is far below what a record resolves: the Allan variance of 10⁹ samples has
  a relative standard error of 4·10⁻⁵ at best.
* ``quantization`` (Q): a white error e_k on the integrated output (angle / velocity), of
  variance Q², **uniform** on ±√3·Q as the rounding error of a quantizer is (Q = s/√12 for a
  quantum s). The increment carries e_{k+1} − e_k, the rate sample (e_{k+1} − e_k)/dt; the
  Allan variance is exactly 3 var(e)/τ² = 3Q²/τ² (IEEE Std 952-1997 Annex C).
* ``ramp`` (R): the term is a slope fixed over a run with E[s²] = R² (its P0). Here
  s = ±R with a random sign per run, so every record has exactly the Allan variance R²τ²/2 and
  an ensemble has the covariance of the model (mean 0, var(s) = R²). The ramp value is 0 at
  turn-on (t = 0); the sample k is its mean s·(k + ½)·dt over [k dt, (k+1) dt].
* ``random_constant`` (σ): one N(0, σ²) draw per run and channel, constant over the record.

The channel's output filter (``bandwidth``, ``filter_order``) is **not** applied (a white term
that carries its own ``bandwidth`` is simulated through its Butterworth realization): samples are
period means (equivalent noise bandwidth rate/2, per-sample variance N²·rate). The Allan variance at
τ ≫ 1/bandwidth does not depend on it.

Flicker: two methods
--------------------
``"realization"`` (default): exact simulation of the term's realization (sum of Gauss-Markov
processes, :meth:`sensormodel.terms.Flicker.realization`, built for the *channel's* sample rate,
so a record at another rate keeps the model's cut-off), whose Allan deviation follows the exact
1/f form within the realization's stated error over its τ band (up to the term's
``longest_time``). ``"power-law"``: the method of N. J. Kasdin and T. Walter, "Discrete
simulation of power law noise", Proc. 1992 IEEE Frequency Control Symposium, pp. 274-283: white
noise of variance Q_d = B² through the truncated moving-average filter h_0 = 1,
h_k = h_{k−1}(α/2 + k − 1)/k with α = 1, run as an FFT overlap-save convolution; its one-sided
PSD is 2 Q_d dt |2 sin(π f dt)|⁻¹ ≈ B²/(π f) (their eq. (39)) up to the Nyquist frequency of the
simulation rate (the term's ``cutoff`` is not applied). The filter has
L = min(⌈longest_time · rate⌉, ``max_taps``) taps (default 2^20), so the 1/f spectrum holds
down to about rate/L; the filter's history is filled before the first sample (a stationary
start).

Reproducibility
---------------
The seed becomes a :class:`numpy.random.SeedSequence`; every random stream (per run, channel and
term) has its own generator from ``SeedSequence(seed, spawn_key=(run, channel, slot, term))``,
the channel keyed by a CRC-32 of its id (so selecting channels does not change a channel's
record). Random numbers are drawn in a fixed schedule of internal blocks (FIRST_BLOCK samples,
doubling up to BLOCK), so the record is bit-for-bit the same whatever the chunk size it is read
in, and a longer record starts with the shorter one. Channels are generated in parallel
threads (``threads``); the record does not depend on their number. Normal deviates come from
the Box-Muller transform of the generator's uniforms (:class:`_Normals`: 2-3× faster than its
ziggurat ``standard_normal``).

Speed
-----
Per sample and channel: one normal deviate for the stationary part (white, Gauss-Markov,
flicker), one per random-walk or shaped-term noise input, one uniform for quantization, and an
FFT for power-law flicker. The innovations stream (in its parallel form, one first-order state
per pole) and the single-state random walks of a channel run in one block engine
(:class:`_Parallel`): the same linear recursions regrouped into small matrix products over
sub-blocks of 16 samples, each product cut below OpenBLAS's threading threshold so it stays
one single-threaded call (the record does not depend on BLAS threads). It agrees with the
sample-by-sample filters to rounding (tests); a record is bit-for-bit reproducible on one
machine (numpy's vectorized functions and the BLAS kernels are chosen per processor, so
another processor type may differ in the last bits).
``tests/benchmarks/bench_simulate.py`` prints samples per second for typical model mixes
(DEVELOPERS.md, Benchmarks).

Layout
------
The package exports the names below; its modules are private: ``_streams`` (generators,
Box-Muller deviates, the block schedule, white / quantization / ramp sources), ``_statespace``
(exact period means of a realization), ``_powerlaw`` (Kasdin-Walter flicker),
``_innovations`` (the innovation stream and the block engine), ``_channel`` (one channel's
sources), ``_simulator`` (:class:`SimulationOptions`, :class:`Simulator`, :func:`simulate`,
:func:`simulate_ensemble`), ``_ensemble`` (:func:`ensemble_statistics`) and ``_records``
(:func:`write_record`). The options of a record (run, increments, flicker method, channels,
Kasdin-Walter length, threads) are :class:`SimulationOptions`' alone: the public functions take
them as keywords and pass them on. The algebra they run (the exact step, the innovations form)
is :mod:`sensormodel.linear`'s.
"""

from __future__ import annotations

from ._ensemble import EnsembleStatistics, ensemble_statistics
from ._powerlaw import DEFAULT_MAX_TAPS, kasdin_coefficients
from ._records import run_path, write_record
from ._simulator import (
    FLICKER_METHODS,
    SimulationOptions,
    Simulator,
    new_seed,
    record_rate,
    samples_for,
    simulate,
    simulate_ensemble,
)
from ._streams import BLOCK, FIRST_BLOCK

__all__ = [
    "FLICKER_METHODS",
    "BLOCK",
    "FIRST_BLOCK",
    "DEFAULT_MAX_TAPS",
    "Simulator",
    "SimulationOptions",
    "simulate",
    "simulate_ensemble",
    "EnsembleStatistics",
    "ensemble_statistics",
    "write_record",
    "run_path",
    "new_seed",
    "record_rate",
    "samples_for",
    "kasdin_coefficients",
]
