"""The noise-term catalogue (DESIGN §4): one class per term, parameters in SI.

Every term is a frozen dataclass whose fields are its SI parameters. ``meta`` carries what is not
physics: where the value came from on the datasheet (``{"field": ..., "text": ...}``) and, for
identified terms, the ``uncertainty`` object of DESIGN §10. ``to_dict`` / ``term_from_dict`` are
the JSON form used in noise-model files.

Conventions (see DESIGN §3): a channel's output ``y(t)`` is in the channel's SI unit ``u`` (rad/s
for gyros, m/s² for accelerometers); every density is the IEEE Std 952 coefficient, i.e. white
noise of density ``D`` has two-sided PSD ``D²`` and Allan variance ``D²/τ``.

Theory (DESIGN §4). Every term has three views that agree with each other:

* ``psd(f, sided=...)`` — the power spectral density [u²/Hz], **two-sided by default** (the IEEE
  Std 952 convention: white noise of density N has S = N²); ``sided="one-sided"`` gives 2×S.
* ``allan_variance(tau)`` — the exact Allan variance [u²] (IEEE Std 952-1997 Annex C forms). It
  equals σ²(τ) = 4∫₀^∞ S(f) sin⁴(πfτ)/(πfτ)² df with S two-sided (Annex C).
* ``state_space()`` — a finite realization (F, G, Qc, H) with its initial covariance P0, as a
  :class:`sensormodel.linear.StateSpace`.

Several terms need the channel's output rate (``sample_rate`` keyword): flicker for its default
cut-off (Nyquist) and the band of its realization, quantization for its PSD.

Choices made here, each documented at its class:

* ``white`` has no state: a direct output noise of two-sided PSD N² (R = N²/dt in discrete time).
* ``flicker`` is realized by a sum of first-order Gauss-Markov processes with time constants one
  decade apart between 1/(π f0) and the longest time of interest (default
  :data:`DEFAULT_LONGEST_TIME`), variances fitted (minimax) to the exact Allan variance; the
  worst Allan-deviation error over the band is computed (:meth:`Flicker.realization_error`).
* ``quantization`` is white noise on the integrated output and has no finite continuous
  realization; it is realized exactly in discrete time (:func:`sensormodel.linear.discretize`).
* ``ramp`` is a random slope fixed over a run: states [ramp value, slope], P0 = diag(0, R²).
* ``random_constant`` is one state with zero dynamics and P0 = σ².
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, fields
from fractions import Fraction
from functools import lru_cache
from typing import Any, ClassVar

import numpy as np
import numpy.typing as npt

from .errors import AnalysisError, ModelFileError
from .linear import StateSpace, sided_factor, steady_state_covariance
from .validate import positive_array

__all__ = [
    "Term",
    "White",
    "Flicker",
    "RandomWalk",
    "GaussMarkov",
    "Quantization",
    "Ramp",
    "RandomConstant",
    "Shaped",
    "TERM_TYPES",
    "term_from_dict",
    "FlickerRealization",
    "DEFAULT_LONGEST_TIME",
    "FLICKER_FLOOR",
    "FLICKER_FLOOR_FACTOR",
    "gauss_markov_peak",
    "gauss_markov_from_floor",
    "gauss_markov_allan_variance",
    "flicker_allan_variance",
    "allan_variance_from_psd",
]

_FloatArray = npt.NDArray[np.float64]

#: Default longest time of interest of a flicker realization [s] (about 2.8 h): the sum of
#: Gauss-Markov processes reproduces the 1/f Allan-deviation floor for τ up to this time.
DEFAULT_LONGEST_TIME = 1.0e4

#: Allan-variance floor of flicker noise per unit coefficient², 2 ln2/π (IEEE Std 952 Annex C).
FLICKER_FLOOR = 2.0 * math.log(2.0) / math.pi
#: Allan-deviation floor of flicker noise per unit coefficient, √(2 ln2/π) ≈ 0.6643.
FLICKER_FLOOR_FACTOR = math.sqrt(FLICKER_FLOOR)


@dataclass(frozen=True)
class Term:
    """Base class of the noise terms. Subclasses declare ``type`` and their SI parameters."""

    type: ClassVar[str] = ""
    #: Parameter name -> unit *relative to the channel unit u*, for docs and display:
    #: "u*s**0.5" means (channel unit)·√s, e.g. rad/s·√s = rad/√s for a gyro.
    units: ClassVar[dict[str, str]] = {}
    meta: dict[str, Any] = field(default_factory=dict, compare=False, kw_only=True)

    def __post_init__(self) -> None:
        for name in self.parameter_names():
            value = getattr(self, name)
            if value is None and name in self.optional_parameters():
                continue
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise ModelFileError(
                    f"{self.type}.{name} = {value!r} is not a number", "a finite number in SI"
                )
            if not math.isfinite(value) or value < 0:
                raise ModelFileError(
                    f"{self.type}.{name} = {value!r}", "a finite, non-negative number in SI"
                )
            object.__setattr__(self, name, float(value))

    @classmethod
    def parameter_names(cls) -> tuple[str, ...]:
        """The SI parameters of this term, in order."""
        return tuple(f.name for f in fields(cls) if f.name != "meta")

    @classmethod
    def optional_parameters(cls) -> tuple[str, ...]:
        """Parameters that may be ``None`` (a default derived from the channel is used)."""
        return ()

    @classmethod
    def parameter_schema(cls) -> dict[str, Any]:
        """JSON Schema of each parameter (for ``schemas/noise-model.schema.json``)."""
        optional = set(cls.optional_parameters())
        return {
            n: {"type": ["number", "null"] if n in optional else "number", "minimum": 0}
            for n in cls.parameter_names()
        }

    def parameters(self) -> dict[str, float]:
        """The SI parameters as a dict (``None`` values left out)."""
        out = {}
        for name in self.parameter_names():
            value = getattr(self, name)
            if value is not None:
                out[name] = value
        return out

    def to_dict(self) -> dict[str, Any]:
        """The JSON form of DESIGN §5: ``{"type": ..., <parameters>, **meta}``."""
        out: dict[str, Any] = {"type": self.type}
        out.update(self.parameters())
        out.update(self.meta)
        return out

    # -- theory ------------------------------------------------------------------------------

    def psd(
        self, f: npt.ArrayLike, *, sided: str = "two-sided", sample_rate: float | None = None
    ) -> _FloatArray:
        """Power spectral density of the term [u²/Hz].

        Parameters
        ----------
        f : array_like
            Frequencies [Hz], positive (the two-sided PSD is even, S(−f) = S(f)).
        sided : {"two-sided", "one-sided"}
            Two-sided, IEEE Std 952 convention (default), or one-sided = 2 × two-sided (what
            Welch's method returns).
        sample_rate : float, optional
            The channel's output rate [Hz] (flicker cut-off default, quantization).

        Returns
        -------
        ndarray
            S(f) [u²/Hz].
        """
        f = positive_array(f, "f")
        return sided_factor(sided) * self._psd2(f, sample_rate)

    def _psd2(self, f: _FloatArray, sample_rate: float | None) -> _FloatArray:
        raise NotImplementedError  # pragma: no cover

    def allan_variance(
        self, tau: npt.ArrayLike, *, sample_rate: float | None = None
    ) -> _FloatArray:
        """Exact Allan variance of the term [u²].

        The default evaluates σ²(τ) = 4∫₀^∞ S(f) sin⁴(πfτ)/(πfτ)² df (S two-sided; IEEE Std 952
        Annex C) numerically from :meth:`psd`; the terms of DESIGN §4 override it with their
        closed forms.

        Parameters
        ----------
        tau : array_like
            Averaging times [s], positive.
        sample_rate : float, optional
            The channel's output rate [Hz].
        """
        tau = positive_array(tau, "tau")
        return allan_variance_from_psd(
            lambda f: self._psd2(f, sample_rate), tau, breakpoints=self._breakpoints(sample_rate)
        )

    def allan_deviation(
        self, tau: npt.ArrayLike, *, sample_rate: float | None = None
    ) -> _FloatArray:
        """Allan deviation √σ²(τ) of the term [u] (see :meth:`allan_variance`)."""
        return np.sqrt(self.allan_variance(tau, sample_rate=sample_rate))

    def _breakpoints(self, sample_rate: float | None) -> tuple[float, ...]:
        return ()

    def state_space(self, *, sample_rate: float | None = None) -> StateSpace:
        """A finite realization (F, G, Qc, H) with initial covariance P0.

        Parameters
        ----------
        sample_rate : float, optional
            The channel's output rate [Hz] (needed by flicker).

        Returns
        -------
        StateSpace
            See :class:`sensormodel.linear.StateSpace` for the conventions (Qc two-sided).
        """
        raise NotImplementedError  # pragma: no cover


@dataclass(frozen=True)
class White(Term):
    """White noise on the output (angle / velocity random walk), optionally band-limited.

    Parameters
    ----------
    density : float
        IEEE Std 952 coefficient N [u·√s] (rad/√s for a gyro, m/s/√s for an accelerometer):
        two-sided PSD N², Allan variance N²/τ.
    bandwidth : float, optional
        -3 dB frequency [Hz] of the sensor's output filter, when the datasheet states one. The
        term is then N·B(s), B the unit-DC-gain Butterworth low-pass of order ``filter_order``:
        two-sided PSD N²·|B(j2πf)|², variance 2N²·ENBW (DESIGN §3), and an Allan deviation that
        rolls off below τ ≈ 1/bandwidth as the real sensor's does; at τ ≫ 1/bandwidth it is
        N²/τ as before.
    filter_order : int, optional
        Butterworth order n of that filter (default 1).
    """

    type: ClassVar[str] = "white"
    units: ClassVar[dict[str, str]] = {
        "density": "u*s**0.5",
        "bandwidth": "Hz",
        "filter_order": "1",
    }
    density: float
    bandwidth: float | None = None
    filter_order: float | None = None

    @classmethod
    def optional_parameters(cls) -> tuple[str, ...]:
        return ("bandwidth", "filter_order")

    def __post_init__(self) -> None:
        super().__post_init__()
        if self.bandwidth is not None and self.bandwidth <= 0:
            raise ModelFileError(
                f"white.bandwidth = {self.bandwidth!r}", "a positive frequency in Hz"
            )
        if self.filter_order is not None:
            if self.bandwidth is None:
                raise ModelFileError(
                    "white.filter_order without white.bandwidth",
                    "a bandwidth for the output filter",
                )
            if self.filter_order != int(self.filter_order) or not 1 <= self.filter_order <= 8:
                raise ModelFileError(
                    f"white.filter_order = {self.filter_order!r}", "a whole number from 1 to 8"
                )

    @classmethod
    def parameter_schema(cls) -> dict[str, Any]:
        schema = super().parameter_schema()
        schema["bandwidth"] = {"type": ["number", "null"], "exclusiveMinimum": 0}
        schema["filter_order"] = {"type": ["integer", "null"], "minimum": 1, "maximum": 8}
        return schema

    def parameters(self) -> dict[str, Any]:  # type: ignore[override]
        out: dict[str, Any] = super().parameters()
        if self.filter_order is not None:
            out["filter_order"] = int(self.filter_order)
        return out

    @property
    def band_limited(self) -> bool:
        """Whether the term carries an output filter (``bandwidth`` is set)."""
        return self.bandwidth is not None

    def shaping_filter(self) -> Shaped:
        """The band-limited term as a :class:`Shaped` filter N·B(s) (requires ``bandwidth``).

        B(s) is the analog Butterworth low-pass of scipy.signal.butter (unit DC gain)."""
        from scipy.signal import butter

        if self.bandwidth is None:
            raise AnalysisError(
                "white noise without bandwidth has no shaping filter", "a band-limited white term"
            )
        wc = 2.0 * np.pi * self.bandwidth
        b, a = butter(int(self.filter_order or 1), wc, btype="low", analog=True)
        return Shaped(numerator=tuple(self.density * np.atleast_1d(b)), denominator=tuple(a))

    def _psd2(self, f: _FloatArray, sample_rate: float | None) -> _FloatArray:
        # Two-sided S(f) = N² (IEEE Std 952 Annex C, angle random walk), times |B(j2πf)|².
        if self.bandwidth is not None:
            return self.shaping_filter()._psd2(f, sample_rate)
        return np.full(f.shape, self.density**2)

    def allan_variance(
        self, tau: npt.ArrayLike, *, sample_rate: float | None = None
    ) -> _FloatArray:
        """Allan variance N²/τ [u²] (IEEE Std 952 Annex C); band-limited: exact, from the
        filter's realization (:meth:`Shaped.allan_variance`).

        The band-limited form is computed for the filter normalized to ωc = 2π·bandwidth = 1
        rad/s and rescaled, AVAR(τ) = N²·ωc·AVAR₁(ωc·τ) (white noise through B(s/ωc) has the
        autocovariance ωc·R₁(ωc·u)): the realization of B(s/ωc) itself has coefficients up to
        ωc^order, whose steady state is ill-conditioned for high orders and bandwidths."""
        tau = positive_array(tau, "tau")
        if self.bandwidth is not None:
            wc = 2.0 * np.pi * self.bandwidth
            unit = White(density=1.0, bandwidth=1.0 / (2.0 * np.pi), filter_order=self.filter_order)
            return self.density**2 * wc * unit.shaping_filter().allan_variance(wc * tau)
        return self.density**2 / tau

    def state_space(self, *, sample_rate: float | None = None) -> StateSpace:
        """No state: white output noise of two-sided PSD N² (``StateSpace.white``); in discrete
        time it becomes R = N²/dt (:func:`sensormodel.linear.discretize`). Band-limited: the
        Butterworth states of :meth:`shaping_filter`."""
        if self.bandwidth is not None:
            # the filter normalized to ωc = 1 rad/s, then time-scaled: N·B(s/ωc) is realized by
            # (ωc·F₁, N·ωc·G₁, H₁) with P0 = N²·ωc·P₁ (the Lyapunov equation scales so): entries
            # of order ωc and states in the output's unit. The companion form of B(s/ωc) itself
            # has entries up to ωc^order and an ill-conditioned steady state for high orders and
            # bandwidths.
            wc = 2.0 * np.pi * self.bandwidth
            unit = White(density=1.0, bandwidth=1.0 / (2.0 * np.pi), filter_order=self.filter_order)
            ss = unit.shaping_filter().state_space(sample_rate=sample_rate)
            return StateSpace(
                F=wc * ss.F,
                G=(self.density * wc) * ss.G,
                Qc=ss.Qc,
                H=ss.H,
                P0=(self.density**2 * wc) * ss.P0,
                states=ss.states,
                sample_rate=sample_rate,
            )
        return _no_state(white=self.density**2, sample_rate=sample_rate)


@dataclass(frozen=True)
class Flicker(Term):
    """Flicker (1/f) noise: the bias-instability term.

    Parameters
    ----------
    coefficient : float
        IEEE Std 952 coefficient B [u]: two-sided PSD B²/(2πf) below the cut-off; Allan
        deviation floor √(2 ln2/π)·B ≈ 0.664·B.
    cutoff : float, optional
        Upper cut-off frequency f0 of the 1/f spectrum [Hz]; ``None`` means the channel's Nyquist
        frequency.
    longest_time : float, optional
        Longest time of interest [s]; the finite realization reproduces 1/f down to about
        1/(2π·longest_time). ``None`` means the default of the realization.
    """

    type: ClassVar[str] = "flicker"
    units: ClassVar[dict[str, str]] = {"coefficient": "u", "cutoff": "Hz", "longest_time": "s"}
    coefficient: float
    cutoff: float | None = None
    longest_time: float | None = None

    @classmethod
    def optional_parameters(cls) -> tuple[str, ...]:
        return ("cutoff", "longest_time")

    def effective_cutoff(self, sample_rate: float | None = None) -> float:
        """The cut-off f0 in use [Hz]: ``cutoff``, else the Nyquist frequency sample_rate/2,
        else infinity (ideal 1/f, whose Allan variance is the floor at every τ)."""
        if self.cutoff:
            return float(self.cutoff)
        if sample_rate:
            return 0.5 * float(sample_rate)
        return math.inf

    def _psd2(self, f: _FloatArray, sample_rate: float | None) -> _FloatArray:
        # Two-sided S(f) = B²/(2πf) for f <= f0, 0 above (IEEE Std 952 Annex C, bias instability).
        f0 = self.effective_cutoff(sample_rate)
        return np.where(f <= f0, self.coefficient**2 / (2.0 * np.pi * f), 0.0)

    def _breakpoints(self, sample_rate: float | None) -> tuple[float, ...]:
        f0 = self.effective_cutoff(sample_rate)
        return (f0,) if math.isfinite(f0) else ()

    def allan_variance(
        self, tau: npt.ArrayLike, *, sample_rate: float | None = None
    ) -> _FloatArray:
        """Exact Allan variance of 1/f noise with cut-off f0 [u²] (IEEE Std 952 Annex C).

        σ²(τ) = (2B²/π)·[ln2 − sin³x (sin x + 4x cos x)/(2x²) + Ci(2x) − Ci(4x)], x = π f0 τ
        (:func:`flicker_allan_variance`); it rises to the floor (2 ln2/π)·B² for τ ≫ 1/f0.
        f0 is :meth:`effective_cutoff`.
        """
        tau = positive_array(tau, "tau")
        return flicker_allan_variance(tau, self.coefficient, self.effective_cutoff(sample_rate))

    def realization(
        self, *, sample_rate: float | None = None, per_decade: int = 1
    ) -> FlickerRealization:
        """The finite realization: a sum of first-order Gauss-Markov processes.

        Design (derived; the idea of superposed first-order spectra for 1/f noise is classical,
        e.g. Keshner, Proc. IEEE 70(3), 1982 — from memory):

        * band: from the cut-off f0 (:meth:`effective_cutoff`) down to 1/(2π·longest_time);
          τ is matched over [τ_lo, longest_time] with τ_lo = max(1/sample_rate, 1/(2 f0)).
          Below 1/(2 f0) the exact form with its sharp cut-off falls as τ² (ADEV ∝ τ) while any
          finite sum of first-order processes falls as τ; that region (where the flicker term is
          already well below its floor) is not matched;
        * time constants T_k geometrically spaced, ``per_decade`` per decade, from
          T_min = 1/(π f0) to T_max = longest_time (default :data:`DEFAULT_LONGEST_TIME`);
        * variances σ_k²: the equal-variance rule σ_k² = B² ln(r)/π (r the ratio of adjacent
          T_k) makes the one-sided PSD Σ 4σ_k²T_k/(1 + (2πfT_k)²) ≈ B²/(πf) inside the band;
          the σ_k² are then refined by a minimax (Chebyshev) fit of the Allan variance to the
          exact form :meth:`allan_variance` over the τ band (a linear programme; interior σ_k²
          kept within ×[0.5, 1.5] of the rule), which corrects the ends of the band.

        The worst relative Allan-deviation error over the band is returned in
        ``worst_error`` (typically 1.5-2.5 % with one process per decade).

        Parameters
        ----------
        sample_rate : float, optional
            The channel's output rate [Hz]. Needed unless ``cutoff`` is set.
        per_decade : int
            Gauss-Markov processes per decade of time constant (default 1).

        Returns
        -------
        FlickerRealization
        """
        f0 = self.effective_cutoff(sample_rate)
        if not math.isfinite(f0):
            raise AnalysisError(
                "a flicker realization needs a band; this term has no cut-off and no sample rate",
                "the channel's sample_rate [Hz] or a flicker cutoff",
            )
        longest = float(self.longest_time or DEFAULT_LONGEST_TIME)
        tau_lo = max(1.0 / float(sample_rate), 0.5 / f0) if sample_rate else 0.5 / f0
        if isinstance(per_decade, bool) or not isinstance(per_decade, int) or per_decade < 1:
            raise AnalysisError(f"per_decade = {per_decade!r}", "a positive whole number")
        if not longest > tau_lo:
            raise AnalysisError(
                f"flicker.longest_time = {longest!r} s is not beyond the shortest time "
                f"{tau_lo:.4g} s",
                "a longest time of interest above the sample period",
            )
        T, w, err = _flicker_design(f0, tau_lo, longest, per_decade)
        return FlickerRealization(
            time_constants=np.array(T),
            variances=self.coefficient**2 * np.array(w),
            cutoff=f0,
            tau_band=(tau_lo, longest),
            worst_error=err,
        )

    def realization_error(self, sample_rate: float | None = None) -> float:
        """Worst relative Allan-deviation error of :meth:`realization` against the exact form
        over its τ band (a fraction: 0.02 means 2 %)."""
        return self.realization(sample_rate=sample_rate).worst_error

    def state_space(self, *, sample_rate: float | None = None) -> StateSpace:
        """The realization of :meth:`realization` as states ``flicker.gm0`` … (shortest time
        constant first): F = diag(−1/T_k), G = I, Qc = diag(2σ_k²/T_k), H = [1 … 1],
        P0 = diag(σ_k²) (stationary start)."""
        real = self.realization(sample_rate=sample_rate)
        T, v = real.time_constants, real.variances
        n = T.size
        return StateSpace(
            F=np.diag(-1.0 / T),
            G=np.eye(n),
            Qc=np.diag(2.0 * v / T),
            H=np.ones((1, n)),
            P0=np.diag(v),
            states=tuple(f"flicker.gm{k}" for k in range(n)),
            sample_rate=sample_rate,
        )


@dataclass(frozen=True)
class RandomWalk(Term):
    """Random walk of the output (rate / acceleration random walk).

    Parameters
    ----------
    density : float
        K [u/√s]: the output's derivative is white with two-sided PSD K²; Allan variance K²τ/3.
    """

    type: ClassVar[str] = "random_walk"
    units: ClassVar[dict[str, str]] = {"density": "u/s**0.5"}
    density: float

    def _psd2(self, f: _FloatArray, sample_rate: float | None) -> _FloatArray:
        # Two-sided S(f) = (K/(2πf))² (IEEE Std 952 Annex C, rate random walk).
        return (self.density / (2.0 * np.pi * f)) ** 2

    def allan_variance(
        self, tau: npt.ArrayLike, *, sample_rate: float | None = None
    ) -> _FloatArray:
        """Allan variance K²τ/3 [u²] (IEEE Std 952 Annex C)."""
        return self.density**2 * positive_array(tau, "tau") / 3.0

    def state_space(self, *, sample_rate: float | None = None) -> StateSpace:
        """One integrator ``random_walk``: F = 0, G = 1, Qc = K², H = 1, P0 = 0 (the walk starts
        at zero at turn-on; the turn-on value is the ``random_constant`` term's)."""
        return _one_state("random_walk", 0.0, self.density**2, 0.0, sample_rate)


@dataclass(frozen=True)
class GaussMarkov(Term):
    """First-order Gauss-Markov (exponentially correlated) process.

    Parameters
    ----------
    sigma : float
        Stationary standard deviation σ [u].
    time_constant : float
        Correlation time T [s]; autocorrelation σ²·exp(−|s|/T).
    """

    type: ClassVar[str] = "gauss_markov"
    units: ClassVar[dict[str, str]] = {"sigma": "u", "time_constant": "s"}
    sigma: float
    time_constant: float

    def __post_init__(self) -> None:
        super().__post_init__()
        if self.time_constant <= 0:
            raise ModelFileError(
                f"gauss_markov.time_constant = {self.time_constant!r}", "a positive time in s"
            )

    def _psd2(self, f: _FloatArray, sample_rate: float | None) -> _FloatArray:
        # Two-sided per hertz 2σ²T/(1 + (2πfT)²): the Fourier transform of σ² e^(−|s|/T)
        # (Brown & Hwang; IEEE Std 952 Annex C exponentially correlated noise with
        # (q_c T_c)² = 2σ²T).
        T = self.time_constant
        return 2.0 * self.sigma**2 * T / (1.0 + (2.0 * np.pi * f * T) ** 2)

    def allan_variance(
        self, tau: npt.ArrayLike, *, sample_rate: float | None = None
    ) -> _FloatArray:
        """Allan variance (IEEE Std 952 Annex C, exponentially correlated noise) [u²]:
        (2σ²T/τ)·[1 − (T/2τ)(3 − 4e^(−τ/T) + e^(−2τ/T))] (:func:`gauss_markov_allan_variance`)."""
        return gauss_markov_allan_variance(
            positive_array(tau, "tau"), self.sigma, self.time_constant
        )

    def peak(self) -> tuple[float, float]:
        """(τ [s], Allan deviation [u]) of the maximum of the Allan deviation
        (:func:`gauss_markov_peak`)."""
        ratio_tau, ratio_adev = gauss_markov_peak()
        return ratio_tau * self.time_constant, ratio_adev * self.sigma

    def state_space(self, *, sample_rate: float | None = None) -> StateSpace:
        """One state ``gauss_markov``: F = −1/T, G = 1, Qc = 2σ²/T, H = 1, P0 = σ² (stationary
        start; the steady state of F P + P F + Qc = 0)."""
        T = self.time_constant
        return _one_state(
            "gauss_markov", -1.0 / T, 2.0 * self.sigma**2 / T, self.sigma**2, sample_rate
        )


@dataclass(frozen=True)
class Quantization(Term):
    """Quantization noise of the integrated output (angle / velocity quantization).

    Parameters
    ----------
    coefficient : float
        Q [u·s] (rad for a gyro, m/s for an accelerometer); Allan variance 3Q²/τ².
    """

    type: ClassVar[str] = "quantization"
    units: ClassVar[dict[str, str]] = {"coefficient": "u*s"}
    coefficient: float

    def _psd2(self, f: _FloatArray, sample_rate: float | None) -> _FloatArray:
        # Two-sided S(f) = (4Q²/τ0) sin²(πfτ0) (IEEE Std 952 Annex C; ≈ (2πf)²τ0Q² below the
        # Nyquist frequency). Continuous-time model: y(t) = (E(t) − E(t − τ0))/τ0 with E the
        # integrated-output error, white of two-sided PSD Q²τ0 (variance Q² over a τ0 window).
        # With it the Annex C integral gives 3Q²/τ² exactly for τ >= τ0. The sampled sequence
        # y_k has the same expression as its PSD on [0, fs/2] (its Allan variance then follows
        # with the discrete averaging kernel).
        if not sample_rate:
            raise AnalysisError(
                "the quantization PSD needs the sample period", "a sample_rate [Hz]"
            )
        tau0 = 1.0 / float(sample_rate)
        return 4.0 * self.coefficient**2 / tau0 * np.sin(np.pi * f * tau0) ** 2

    def allan_variance(
        self, tau: npt.ArrayLike, *, sample_rate: float | None = None
    ) -> _FloatArray:
        """Allan variance 3Q²/τ² [u²] (IEEE Std 952 Annex C), independent of the sample period:
        the cluster-mean difference is the second difference of the integrated-output error
        e, (e₂ − 2e₁ + e₀)/τ, with var(e) = Q² (an angle quantum s gives Q = s/√12)."""
        return 3.0 * self.coefficient**2 / positive_array(tau, "tau") ** 2

    def state_space(self, *, sample_rate: float | None = None) -> StateSpace:
        """No continuous state: ``StateSpace.quantization`` = Q². Quantization is white noise
        on the integrated output, so its rate PSD grows as f² and no finite continuous
        realization exists. :func:`sensormodel.linear.discretize` realizes it exactly at a
        step dt with two discrete states [e_k, e_(k−1)] (or, on request, in R)."""
        return _no_state(quantization=self.coefficient**2, sample_rate=sample_rate)


@dataclass(frozen=True)
class Ramp(Term):
    """Deterministic-looking rate ramp (a random slope fixed over a run).

    Parameters
    ----------
    slope : float
        R [u/s]; Allan variance R²τ²/2.
    """

    type: ClassVar[str] = "ramp"
    units: ClassVar[dict[str, str]] = {"slope": "u/s"}
    slope: float

    def _psd2(self, f: _FloatArray, sample_rate: float | None) -> _FloatArray:
        # Nominal two-sided S(f) = R²/(2πf)³ as tabulated in IEEE Std 952 Annex C. A ramp has no
        # PSD in the strict sense; the Annex C integral of this form diverges at f -> 0, so the
        # Allan variance is the time-domain result below.
        return self.slope**2 / (2.0 * np.pi * f) ** 3

    def allan_variance(
        self, tau: npt.ArrayLike, *, sample_rate: float | None = None
    ) -> _FloatArray:
        """Allan variance R²τ²/2 [u²] (IEEE Std 952 Annex C): consecutive cluster means of
        y = s·t differ by s·τ, and E[s²] = R²."""
        return 0.5 * self.slope**2 * positive_array(tau, "tau") ** 2

    def state_space(self, *, sample_rate: float | None = None) -> StateSpace:
        """States ``ramp.value`` (the ramp's contribution to the output, 0 at turn-on) and
        ``ramp.slope`` (constant over a run): F = [[0, 1], [0, 0]], no driving noise,
        H = [1, 0], P0 = diag(0, R²). The turn-on offset belongs to ``random_constant``."""
        return StateSpace(
            F=np.array([[0.0, 1.0], [0.0, 0.0]]),
            G=np.zeros((2, 1)),
            Qc=np.zeros((1, 1)),
            H=np.array([[1.0, 0.0]]),
            P0=np.diag([0.0, self.slope**2]),
            states=("ramp.value", "ramp.slope"),
            sample_rate=sample_rate,
        )


@dataclass(frozen=True)
class RandomConstant(Term):
    """A bias constant over a run, random from run to run (bias repeatability).

    Parameters
    ----------
    sigma : float
        Standard deviation of the constant [u]; Allan variance 0 (initial covariance only).
    """

    type: ClassVar[str] = "random_constant"
    units: ClassVar[dict[str, str]] = {"sigma": "u"}
    sigma: float

    def _psd2(self, f: _FloatArray, sample_rate: float | None) -> _FloatArray:
        # A constant has all its power σ² in a delta at f = 0: zero at every f > 0.
        return np.zeros(f.shape)

    def allan_variance(
        self, tau: npt.ArrayLike, *, sample_rate: float | None = None
    ) -> _FloatArray:
        """Allan variance 0: a constant cancels in every cluster-mean difference."""
        return np.zeros(positive_array(tau, "tau").shape)

    def state_space(self, *, sample_rate: float | None = None) -> StateSpace:
        """One state ``random_constant``: F = 0, no driving noise, H = 1, P0 = σ²."""
        return _one_state("random_constant", 0.0, 0.0, self.sigma**2, sample_rate)


@dataclass(frozen=True)
class Shaped(Term):
    """Coloured noise: unit-intensity white noise through a shaping filter H(s).

    Parameters
    ----------
    numerator, denominator : sequence of float
        Polynomial coefficients of H(s) = numerator(s)/denominator(s), highest power of s first
        (as numpy.polyval takes them). H is strictly proper (deg numerator < deg denominator,
        so the variance is finite) and stable (every pole in the open left half-plane). The
        numerator carries the unit: H has unit [u·√s].

    Notes
    -----
    The drive w has E[w(t) w(t+s)] = δ(s): two-sided PSD 1 per hertz. The term's two-sided PSD
    per hertz is S(f) = |H(j2πf)|², its variance ∫ S df over all f, and it is stationary
    (P0 = the steady-state covariance of the Lyapunov equation). Such filters come from the
    spectral factorization of a rational PSD (:func:`sensormodel.spectrum.factorize`) or a fit to
    a measured spectrum (:func:`sensormodel.spectrum.fit_rational_psd`). The realization is the
    controllable canonical form of scipy.signal.tf2ss; the Allan variance is exact, from the
    realization's covariance (:meth:`sensormodel.linear.StateSpace.allan_variance`).
    """

    type: ClassVar[str] = "shaped"
    units: ClassVar[dict[str, str]] = {"numerator": "polynomial", "denominator": "polynomial"}
    numerator: tuple[float, ...]
    denominator: tuple[float, ...]

    def __post_init__(self) -> None:
        for name in ("numerator", "denominator"):
            value = getattr(self, name)
            if isinstance(value, (str, bytes)) or not hasattr(value, "__len__"):
                raise ModelFileError(
                    f"shaped.{name} = {value!r}", "a list of polynomial coefficients in s"
                )
            try:
                coeffs = tuple(float(v) for v in value)
            except (TypeError, ValueError):
                raise ModelFileError(
                    f"shaped.{name} = {value!r}", "a list of numbers (coefficients in s)"
                ) from None
            if not coeffs or not all(math.isfinite(c) for c in coeffs):
                raise ModelFileError(
                    f"shaped.{name} = {list(coeffs)}", "a non-empty list of finite coefficients"
                )
            coeffs = tuple(np.trim_zeros(np.array(coeffs), "f").tolist()) or (0.0,)
            object.__setattr__(self, name, coeffs)
        if self.denominator == (0.0,):
            raise ModelFileError("shaped.denominator is zero", "a non-zero polynomial in s")
        if self.numerator == (0.0,):
            raise ModelFileError("shaped.numerator is zero", "a non-zero polynomial in s")
        if len(self.numerator) >= len(self.denominator):
            raise ModelFileError(
                f"shaped filter of numerator degree {len(self.numerator) - 1} and denominator "
                f"degree {len(self.denominator) - 1}",
                "a strictly proper H(s) (deg numerator < deg denominator: finite variance)",
            )
        poles = np.roots(self.denominator)
        if np.any(poles.real >= 0):
            worst = poles[np.argmax(poles.real)]
            raise ModelFileError(
                f"shaped filter has a pole at s = {worst:.6g} (not in the left half-plane)",
                "a stable H(s): every root of the denominator with negative real part",
            )

    @classmethod
    def parameter_schema(cls) -> dict[str, Any]:
        coeffs = {"type": "array", "items": {"type": "number"}, "minItems": 1}
        return {"numerator": coeffs, "denominator": coeffs}

    def parameters(self) -> dict[str, Any]:  # type: ignore[override]
        return {"numerator": list(self.numerator), "denominator": list(self.denominator)}

    @property
    def poles(self) -> npt.NDArray[np.complex128]:
        """Roots of the denominator [1/s]."""
        return np.roots(self.denominator)

    def _psd2(self, f: _FloatArray, sample_rate: float | None) -> _FloatArray:
        s = 2j * np.pi * f
        return np.abs(np.polyval(self.numerator, s) / np.polyval(self.denominator, s)) ** 2

    def _breakpoints(self, sample_rate: float | None) -> tuple[float, ...]:
        return tuple(sorted(float(abs(p)) / (2 * np.pi) for p in self.poles))

    def variance(self) -> float:
        """Stationary variance ∫ S(f) df over all f [u²], from the Lyapunov equation."""
        ss = self.state_space()
        return float((ss.H @ ss.P0 @ ss.H.T)[0, 0])

    def allan_variance(
        self, tau: npt.ArrayLike, *, sample_rate: float | None = None
    ) -> _FloatArray:
        """Exact Allan variance [u²] from the realization's covariance."""
        return self.state_space(sample_rate=sample_rate).allan_variance(tau)

    def state_space(self, *, sample_rate: float | None = None) -> StateSpace:
        """Controllable canonical form of H(s), unit-intensity drive, stationary P0."""
        from scipy.signal import tf2ss

        a, b, c, _d = tf2ss(np.array(self.numerator), np.array(self.denominator))
        n = a.shape[0]
        qc = np.ones((1, 1))
        names = tuple(f"shaped_{i}" for i in range(n))
        p0 = steady_state_covariance(a, b, qc, states=names)
        return StateSpace(
            F=a, G=b, Qc=qc, H=c.reshape(1, n), P0=p0, states=names, sample_rate=sample_rate
        )


#: Term type name (as in the noise-model JSON) -> class.
TERM_TYPES: dict[str, type[Term]] = {
    cls.type: cls
    for cls in (White, Flicker, RandomWalk, GaussMarkov, Quantization, Ramp, RandomConstant, Shaped)
}


def term_from_dict(data: dict[str, Any], *, where: str = "term") -> Term:
    """Build a term from its JSON form (the inverse of :meth:`Term.to_dict`).

    Parameters
    ----------
    data : dict
        ``{"type": ..., <SI parameters>, <meta keys>}``.
    where : str
        Location for error messages, e.g. ``"channels[0].terms[1]"``.
    """
    kind = data.get("type")
    cls = TERM_TYPES.get(kind)  # type: ignore[arg-type]
    if cls is None:
        raise ModelFileError(
            f"unknown term type {kind!r}", f"one of {', '.join(sorted(TERM_TYPES))}", field=where
        )
    names = cls.parameter_names()
    params = {k: v for k, v in data.items() if k in names}
    meta = {k: v for k, v in data.items() if k not in names and k != "type"}
    missing = [n for n in names if n not in params and n not in cls.optional_parameters()]
    if missing:
        raise ModelFileError(
            f"{kind} term lacks {', '.join(missing)}",
            f"parameters {', '.join(names)}",
            field=where,
        )
    try:
        return cls(**params, meta=meta)
    except ModelFileError as exc:
        raise exc.located(field=where) from None


# -- theory helpers ---------------------------------------------------------------------------


def _no_state(
    *, white: float = 0.0, quantization: float = 0.0, sample_rate: float | None = None
) -> StateSpace:
    z = np.zeros((0, 0))
    return StateSpace(
        F=z,
        G=z,
        Qc=z,
        H=np.zeros((1, 0)),
        P0=z,
        states=(),
        white=white,
        quantization=quantization,
        sample_rate=sample_rate,
    )


def _one_state(name: str, f: float, qc: float, p0: float, sample_rate: float | None) -> StateSpace:
    return StateSpace(
        F=np.array([[f]]),
        G=np.ones((1, 1)),
        Qc=np.array([[qc]]),
        H=np.ones((1, 1)),
        P0=np.array([[p0]]),
        states=(name,),
        sample_rate=sample_rate,
    )


@dataclass(frozen=True)
class FlickerRealization:
    """A flicker term realized as a sum of first-order Gauss-Markov processes.

    Attributes
    ----------
    time_constants : ndarray
        T_k [s], shortest first.
    variances : ndarray
        σ_k² [u²] of each process.
    cutoff : float
        The cut-off f0 of the exact form it approximates [Hz].
    tau_band : (float, float)
        The averaging times [s] over which the Allan deviation was matched.
    worst_error : float
        max |σ_real(τ)/σ_exact(τ) − 1| over ``tau_band`` (fraction).
    """

    time_constants: _FloatArray
    variances: _FloatArray
    cutoff: float
    tau_band: tuple[float, float]
    worst_error: float

    def allan_variance(self, tau: npt.ArrayLike) -> _FloatArray:
        """Allan variance of the sum of processes [u²] (sum of the closed forms)."""
        tau = positive_array(tau, "tau")
        return np.sum(
            [
                gauss_markov_allan_variance(tau, math.sqrt(v), T)
                for T, v in zip(self.time_constants, self.variances, strict=True)
            ],
            axis=0,
        )


def _exact_series(coeffs: Sequence[Fraction], x2: _FloatArray) -> _FloatArray:
    out = np.zeros_like(x2)
    for c in reversed(coeffs):
        out = out * x2 + float(c)
    return out


@lru_cache(maxsize=1)
def _flicker_series() -> tuple[Fraction, ...]:
    """Exact Taylor coefficients (in x²) of the bracket of the flicker Allan variance,
    ln2 + Ci(2x) − Ci(4x) − sin³x (sin x + 4x cos x)/(2x²), for small x (the closed form
    cancels there). Built from Ci(z) = γ + ln z + Σ (−z²)^k / (2k (2k)!) and
    sin⁴x = (3 − 4cos2x + cos4x)/8, sin³x cos x = (2 sin2x − sin4x)/8."""
    J = 18
    c = [Fraction(0)] * (J + 1)
    fact = math.factorial
    for k in range(1, J + 1):  # ln2 + Ci(2x) − Ci(4x)
        c[k] += Fraction((-1) ** k * (4**k - 16**k), 2 * k * fact(2 * k))
    for k in range(1, J + 2):  # − (3 − 4 cos2x + cos4x)/(16 x²)
        if k - 1 <= J:
            c[k - 1] -= Fraction((-1) ** k * (16**k - 4 ** (k + 1)), 16 * fact(2 * k))
    for k in range(0, J + 1):  # − (2 sin2x − sin4x)/(4x)
        c[k] -= Fraction((-1) ** k * (2 ** (2 * k + 2) - 4 ** (2 * k + 1)), 4 * fact(2 * k + 1))
    return tuple(c)


def flicker_allan_variance(tau: npt.ArrayLike, coefficient: float, cutoff: float) -> _FloatArray:
    """Exact Allan variance of flicker noise with a sharp cut-off [u²].

    σ²(τ) = (2B²/π)·[ln2 − sin³x (sin x + 4x cos x)/(2x²) + Ci(2x) − Ci(4x)], x = π f0 τ, for the
    two-sided PSD B²/(2πf), 0 < f <= f0 (IEEE Std 952-1997 Annex C, bias instability; El-Sheimy
    et al. 2008, from memory for the equation number). For x < 0.2 an exact Taylor series is
    used (the closed form cancels); an infinite cut-off gives the floor (2 ln2/π)·B².

    Parameters
    ----------
    tau : array_like
        Averaging times [s], positive.
    coefficient : float
        B [u].
    cutoff : float
        f0 [Hz], positive (``math.inf`` allowed).
    """
    from scipy.special import sici

    tau = positive_array(tau, "tau")
    if not math.isfinite(cutoff):
        return np.full(tau.shape, FLICKER_FLOOR * coefficient**2)
    x = np.pi * cutoff * tau
    out = np.empty_like(x)
    small = x < 0.2
    if np.any(small):
        out[small] = _exact_series(_flicker_series(), x[small] ** 2)
    xl = x[~small]
    if xl.size:
        sx, cx = np.sin(xl), np.cos(xl)
        out[~small] = (
            math.log(2.0)
            - sx**3 * (sx + 4.0 * xl * cx) / (2.0 * xl**2)
            + sici(2.0 * xl)[1]
            - sici(4.0 * xl)[1]
        )
    return 2.0 * coefficient**2 / math.pi * out


@lru_cache(maxsize=1)
def _gm_series() -> tuple[Fraction, ...]:
    """Taylor coefficients of g(u) = 1 − (3 − 4e^(−u) + e^(−2u))/(2u) in powers of u:
    g(u) = −Σ_{n≥3} (−1)^n (2^n − 4) u^(n−1) / (2·n!)."""
    c = [Fraction(0)] * 2
    for n in range(3, 30):
        c.append(Fraction(-((-1) ** n) * (2**n - 4), 2 * math.factorial(n)))
    return tuple(c)


def _gm_bracket(u: _FloatArray) -> _FloatArray:
    out = np.empty_like(u)
    small = u < 0.5
    if np.any(small):
        coeffs = _gm_series()
        acc = np.zeros(np.count_nonzero(small))
        for c in reversed(coeffs):
            acc = acc * u[small] + float(c)
        out[small] = acc
    ul = u[~small]
    out[~small] = 1.0 - (3.0 - 4.0 * np.exp(-ul) + np.exp(-2.0 * ul)) / (2.0 * ul)
    return out


def gauss_markov_allan_variance(
    tau: npt.ArrayLike, sigma: float, time_constant: float
) -> _FloatArray:
    """Allan variance of a first-order Gauss-Markov process [u²].

    σ²(τ) = (2σ²T/τ)·[1 − (T/2τ)(3 − 4e^(−τ/T) + e^(−2τ/T))] (IEEE Std 952-1997 Annex C,
    exponentially correlated noise with (q_c T_c)² = 2σ²T; El-Sheimy et al. 2008). For
    τ/T < 0.5 the bracket is summed as its exact Taylor series (the closed form cancels).

    Parameters
    ----------
    tau : array_like
        Averaging times [s].
    sigma : float
        Stationary standard deviation σ [u].
    time_constant : float
        Correlation time T [s].
    """
    tau = positive_array(tau, "tau")
    T = float(time_constant)
    return 2.0 * sigma**2 * T / tau * _gm_bracket(tau / T)


@lru_cache(maxsize=1)
def gauss_markov_peak() -> tuple[float, float]:
    """Where the Allan deviation of a first-order Gauss-Markov process peaks (derived).

    The closed form of :func:`gauss_markov_allan_variance` with σ = T = 1 is maximized by a
    bounded scalar optimiser (scipy.optimize.minimize_scalar) on τ/T ∈ [0.5, 10].

    Returns
    -------
    (float, float)
        (τ_peak/T, σ_peak/σ): about (1.8926, 0.61736).
    """
    from scipy.optimize import minimize_scalar

    def neg(u: float) -> float:
        return -float(gauss_markov_allan_variance(np.array([u]), 1.0, 1.0)[0])

    res = minimize_scalar(
        neg, bounds=(0.5, 10.0), method="bounded", options={"xatol": 1e-10, "maxiter": 500}
    )
    return float(res.x), math.sqrt(-float(res.fun))


def gauss_markov_from_floor(
    floor: float, time_constant: float, *, meta: dict[str, Any] | None = None
) -> GaussMarkov:
    """A Gauss-Markov term whose Allan-deviation peak equals a bias-instability floor.

    σ = floor / (σ_peak/σ) from :func:`gauss_markov_peak` (common practice of matching the
    peak of the Markov Allan deviation to the datasheet floor; the constant is derived). The
    peak then lies at τ ≈ 1.89·T.

    Parameters
    ----------
    floor : float
        Allan-deviation floor [u].
    time_constant : float
        Correlation time T [s], positive.
    meta : dict, optional
        Provenance for the term.
    """
    if not (math.isfinite(floor) and floor >= 0):
        raise AnalysisError(f"floor = {floor!r}", "a finite, non-negative Allan deviation")
    _, ratio = gauss_markov_peak()
    return GaussMarkov(sigma=floor / ratio, time_constant=time_constant, meta=dict(meta or {}))


@lru_cache(maxsize=128)
def _flicker_design(
    f0: float, tau_lo: float, tau_hi: float, per_decade: int
) -> tuple[tuple[float, ...], tuple[float, ...], float]:
    """Time constants, variances (for B = 1) and worst ADEV error of the flicker realization
    (see :meth:`Flicker.realization`)."""
    from scipy.optimize import linprog

    t_min, t_max = 1.0 / (math.pi * f0), tau_hi
    if t_max < 10.0 * t_min:
        t_max = 10.0 * t_min
    n = max(2, int(math.ceil(per_decade * math.log10(t_max / t_min) - 1e-9)) + 1)
    T = np.geomspace(t_min, t_max, n)
    rule = math.log(T[1] / T[0]) / math.pi  # equal-variance rule, B = 1
    taus = np.geomspace(tau_lo, tau_hi, 240)
    exact = flicker_allan_variance(taus, 1.0, f0)
    A = np.stack([gauss_markov_allan_variance(taus, 1.0, t) for t in T], axis=1) / exact[:, None]
    A *= rule  # unknowns are multiples of the rule
    m = taus.size
    # minimise e subject to |A w − 1| <= e (minimax relative Allan-variance error)
    c = np.r_[np.zeros(n), 1.0]
    a_ub = np.block([[A, -np.ones((m, 1))], [-A, -np.ones((m, 1))]])
    b_ub = np.r_[np.ones(m), -np.ones(m)]
    bounds = [(0.0, 3.0)] + [(0.5, 1.5)] * (n - 2) + [(0.0, 3.0)] + [(0.0, None)]
    res = linprog(c, A_ub=a_ub, b_ub=b_ub, bounds=bounds, method="highs")
    w = res.x[:n] if res.status == 0 else np.ones(n)
    variances = w * rule
    check = np.geomspace(tau_lo, tau_hi, 1200)
    real = np.sum(
        [
            gauss_markov_allan_variance(check, math.sqrt(v), t)
            for t, v in zip(T, variances, strict=True)
        ],
        axis=0,
    )
    err = float(np.max(np.abs(np.sqrt(real / flicker_allan_variance(check, 1.0, f0)) - 1.0)))
    return tuple(T.tolist()), tuple(variances.tolist()), err


def allan_variance_from_psd(
    psd: Callable[[_FloatArray], _FloatArray],
    tau: npt.ArrayLike,
    *,
    breakpoints: Sequence[float] = (),
) -> _FloatArray:
    """Allan variance from a two-sided PSD by quadrature [u²].

    σ²(τ) = 4∫₀^∞ S(f) sin⁴(πfτ)/(πfτ)² df (IEEE Std 952-1997 Annex C; S two-sided). With
    x = πfτ it is (4/(πτ))∫₀^∞ S(x/(πτ)) sin⁴x/x² dx; the first 40 half-periods are integrated
    adaptively, the tail with sin⁴x = (3 − 4 cos2x + cos4x)/8 and QUADPACK's Fourier-weight
    rules (scipy.integrate.quad, ``weight="cos"``).

    Parameters
    ----------
    psd : callable
        S(f) [u²/Hz] on an array of positive frequencies [Hz]; two-sided.
    tau : array_like
        Averaging times [s].
    breakpoints : sequence of float
        Frequencies [Hz] where S is not smooth (e.g. a cut-off).

    Returns
    -------
    ndarray
        σ²(τ) [u²]. Diverges (and is not meaningful) for S growing as 1/f³ or faster at f → 0.
        S must be smooth beyond ``breakpoints`` (not oscillating in f, as the quantization PSD
        does; that term has its closed form).
    """
    from scipy.integrate import IntegrationWarning, quad

    tau = positive_array(tau, "tau")
    out = np.empty(tau.size)

    def s_of(x: float, t: float) -> float:
        return float(psd(np.array([x / (np.pi * t)]))[0])

    for i, t in enumerate(tau.ravel()):
        xb = sorted(np.pi * b * t for b in breakpoints if b > 0)
        x_split = 40.0 * np.pi
        head_pts = sorted({*(k * np.pi for k in range(1, 40)), *(b for b in xb if b < x_split)})

        def head(x: float, t: float = t) -> float:
            return s_of(x, t) * np.sin(x) ** 4 / x**2 if x > 0 else 0.0

        with warnings.catch_warnings():
            warnings.simplefilter("error", IntegrationWarning)
            total = quad(head, 0.0, x_split, points=head_pts, limit=2000, epsabs=0.0, epsrel=1e-11)[
                0
            ]
            edges = [x_split, *[b for b in xb if b > x_split], math.inf]
            for a, b in zip(edges[:-1], edges[1:], strict=True):

                def smooth(x: float, t: float = t) -> float:
                    return s_of(x, t) / (8.0 * x**2)

                total += 3.0 * quad(smooth, a, b, limit=2000, epsabs=0.0, epsrel=1e-11)[0]
                tol = 1e-13 * abs(total) or 1e-300  # QAWF honours only an absolute tolerance
                for wv, k in ((2.0, -4.0), (4.0, 1.0)):
                    if math.isinf(b):
                        val = quad(smooth, a, b, weight="cos", wvar=wv, limlst=200, epsabs=tol)[0]
                    else:
                        val = quad(
                            smooth,
                            a,
                            b,
                            weight="cos",
                            wvar=wv,
                            limit=2000,
                            epsabs=tol,
                            epsrel=1e-11,
                        )[0]
                    total += k * val
        out[i] = 4.0 / (np.pi * t) * total
    return out.reshape(tau.shape)
