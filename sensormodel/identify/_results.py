"""The results of an identification: fitted terms, the identification, a test at a limit, and
the noise model built from identifications.

Results carry numbers and reason codes; :mod:`sensormodel.report` turns them into sentences.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt

from ..errors import AnalysisError
from ..model import Channel, NoiseModel
from ..quantities import INSTRUMENT_KIND, SI_LABEL
from ..terms import Flicker, GaussMarkov, Quantization, Ramp, RandomWalk
from ._design import _basis, _white_term
from ._readings import SlopeNote

__all__ = ["FittedTerm", "Identification", "LimitTest", "to_model"]

_FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True)
class FittedTerm:
    """One fitted noise term.

    Attributes
    ----------
    term : str
        Term type: ``white``, ``flicker``, ``random_walk``, ``quantization``, ``ramp``,
        ``gauss_markov``.
    parameter : str
        The SI parameter estimated: ``density`` (white [u·√s], random walk [u/√s]),
        ``coefficient`` (flicker [u], quantization [u·s]), ``slope`` (ramp [u/s]) or ``sigma``
        (Gauss-Markov [u]); u is the channel unit.
    estimate : float
        The fitted value [SI].
    low, high : float
        The two-sided interval at ``confidence`` [SI]; ``low`` is 0 for an unsupported term.
    confidence : float
        Confidence of the interval.
    supported : bool
        Whether the data distinguish the term from zero (package notes).
    slope_reading : float or None
        The classical slope reading of the same parameter [SI] (white, flicker, random walk),
        else None.
    disagrees : bool
        The slope reading disagrees with the fit: its own chi-square interval at the same
        confidence (from the one curve point it is read at, ``details["slope_reading_low"]``
        and ``["slope_reading_high"]``) does not overlap [low, high].
    tau_range : (float, float) or None
        The τ of the curve where this term's fitted Allan variance is the largest of all terms
        [s]; None where it dominates nowhere.
    method : str
        How the interval was formed (package notes): ``ratio`` (the bootstrap ratio pivot),
        ``ratio-linear`` (ratio pivot below, the unconstrained estimate's bound above, for a
        term the refits drop in more than a fraction α of the records) or ``linear`` (an
        unsupported term: [0, upper]).
    details : dict
        More results: for ``gauss_markov`` the ``time_constant`` [s] and its interval
        (``time_constant_low``, ``time_constant_high``); ``kept_fraction``, the fraction of
        bootstrap refits that kept the term. ``time_constant_high`` is ``inf`` where the time
        constant is not resolved (reason ``time_constant_not_resolved``).
    reasons : tuple of (str, dict)
        Reason codes with their numbers (sentences in :data:`sensormodel.report.REASONS`):
        ``estimate_at_search_edge`` (``term``, ``parameter``, ``edge`` ``"upper"`` or
        ``"lower"``, ``value`` and the searched range ``low``, ``high``, SI) for an estimate at
        an edge of its search range, with what it means for a Gauss-Markov time constant:
        ``time_constant_not_resolved`` (``bound`` [s]: T ≥ bound; ``resolvable`` [s], the
        longest T the record resolves, whose Allan-deviation peak is at ``tau`` [s];
        ``sigma`` [u], then a lower bound of σ; ``unit``) or ``time_constant_at_lower_edge``
        (``bound`` [s]: T ≤ bound; ``shortest_tau`` [s] of the curve).
    """

    term: str
    parameter: str
    estimate: float
    low: float
    high: float
    confidence: float
    supported: bool
    slope_reading: float | None = None
    disagrees: bool = False
    tau_range: tuple[float, float] | None = None
    method: str = "ratio"
    details: Mapping[str, float] = field(default_factory=dict, compare=False)
    reasons: tuple[tuple[str, Mapping[str, Any]], ...] = field(default=(), compare=False)


@dataclass(frozen=True)
class Identification:
    """The noise terms identified from one channel's Allan curve.

    Attributes
    ----------
    channel : str
        Channel id.
    unit : str
        The channel's unit u (SI, or as recorded).
    sample_rate : float
        Sample rate of the record [Hz].
    n_samples : int
        Record length (samples).
    confidence : float
        Confidence of the coefficient intervals.
    terms : tuple of FittedTerm
        Every requested term, supported or not.
    slope_readings : dict
        ``white`` (N [u·√s]), ``flicker`` (B [u]), ``random_walk`` (K [u/√s]): the classical
        readings (package notes).
    notes : tuple of str
        How each slope reading was taken where it deviates from the textbook point, and any
        remark on the fit (sentences, kept for the present readers; the codes are ``reasons``).
    reasons : tuple of SlopeNote
        The same as reason codes with their numbers (:class:`SlopeNote`), one per note.
    tau : ndarray
        The τ of the whole curve [s] (the fit used ``fit_range`` of them).
    adev : ndarray
        The measured Allan deviation at ``tau`` [u].
    chi2 : float
        Σ (AVAR̂ − AVAR_fit)²/var over the τ, var = 2 AVAR_fit²/edf (a naive goodness-of-fit
        figure: the points are correlated).
    n_boot : int
        Bootstrap records used.
    seed : int or None
        The bootstrap seed.
    white_filter : (float, int) or None
        The output filter (bandwidth [Hz], Butterworth order) the white term was fitted with.
    refit_state : object or None
        What :func:`limit_test` needs to repeat the fit on new records (the checked curve, the
        design, the terms in the estimate); None for an identification not made by :func:`fit`.
    fit_range : (float, float) or None
        The τ [s] the terms were fitted over (first, last); the shortest τ where the record
        departs from the model are left out (package notes, ``_design._fit_range``).
    fit_range_reason : str
        Why that range: ``fit_range_full`` (the whole curve), ``fit_range_short_tau_departs_model``
        (shorter τ depart from the fitted model beyond their interval and the model's stated
        precision), ``fit_range_model_departs`` (no range passes the test: the whole curve).
    fit_range_departure : float
        The largest relative departure |AVAR̂/AVAR_fit − 1| of a left-out τ (0 if none).
    sampling : str
        How a sample relates to the band-limited white output: ``"average"`` (its mean over
        the sample period) or ``"point"`` (the filtered output at the sample instant, which
        aliases the power above rate/2 into the band); ``"average"`` without a filter.
    white_filter_origin : str or None
        ``"given"`` (the ``bandwidth`` argument), ``"fitted"`` (not given; the short-τ curve
        departs from white noise and the filter accounts for it) or None (no filter).
    sampling_origin : str
        ``"detected"`` (the short-τ curve tells the two samplings apart) or ``"default"``.
    count_step : float or None
        The record's count step [u] where its samples are whole multiples of one
        (:func:`sensormodel.counts.count_step`), else None.
    record_reasons : tuple of (str, dict)
        Reason codes about the record with their numbers (sentences in
        :data:`sensormodel.report.REASONS`): ``output_filter_fitted``,
        ``output_filter_not_resolved``, ``sampling_detected``, ``sampling_assumed``,
        ``count_step_white_floor``, ``count_step_quantization``, ``count_step_coarse``.
    """

    channel: str
    unit: str
    sample_rate: float
    n_samples: int
    confidence: float
    terms: tuple[FittedTerm, ...]
    slope_readings: dict[str, float]
    notes: tuple[str, ...] = ()
    reasons: tuple[SlopeNote, ...] = ()
    tau: _FloatArray = field(default_factory=lambda: np.zeros(0), compare=False)
    adev: _FloatArray = field(default_factory=lambda: np.zeros(0), compare=False)
    chi2: float = 0.0
    n_boot: int = 0
    seed: int | None = None
    white_filter: tuple[float, int] | None = None
    refit_state: Any = field(default=None, repr=False, compare=False)
    fit_range: tuple[float, float] | None = None
    fit_range_reason: str = "fit_range_full"
    fit_range_departure: float = 0.0
    sampling: str = "average"
    white_filter_origin: str | None = None
    sampling_origin: str = "default"
    count_step: float | None = None
    record_reasons: tuple[tuple[str, Mapping[str, Any]], ...] = field(default=(), compare=False)

    @property
    def term_reasons(self) -> tuple[tuple[str, Mapping[str, Any]], ...]:
        """The reason codes of every fitted term (:attr:`FittedTerm.reasons`), in order."""
        return tuple(r for t in self.terms for r in t.reasons)

    def term(self, name: str) -> FittedTerm | None:
        """The fitted term of this type, or None.

        Parameters
        ----------
        name : str
            A term type (``white``, ``flicker``, ...).
        """
        for t in self.terms:
            if t.term == name:
                return t
        return None

    @property
    def duration(self) -> float:
        """Record length [s]."""
        return self.n_samples / self.sample_rate

    def _model_terms(self, *, supported_only: bool) -> list[Any]:
        out = []
        for ft in self.terms:
            if supported_only and not ft.supported:
                continue
            meta = {
                "uncertainty": {"low": ft.low, "high": ft.high, "confidence": ft.confidence},
                "supported": bool(ft.supported),
                "origin": "identified",
            }
            if ft.term == "white":
                out.append(_white_term(ft.estimate, self.white_filter, meta=meta))
            elif ft.term == "flicker":
                out.append(Flicker(coefficient=ft.estimate, meta=meta))
            elif ft.term == "random_walk":
                out.append(RandomWalk(density=ft.estimate, meta=meta))
            elif ft.term == "quantization":
                out.append(Quantization(coefficient=ft.estimate, meta=meta))
            elif ft.term == "ramp":
                out.append(Ramp(slope=ft.estimate, meta=meta))
            elif ft.term == "gauss_markov":
                tc = float(ft.details["time_constant"])
                high = float(ft.details["time_constant_high"])
                meta["time_constant_uncertainty"] = {
                    "low": float(ft.details["time_constant_low"]),
                    "high": high if math.isfinite(high) else None,  # None: not resolved
                    "confidence": ft.confidence,
                }
                out.append(GaussMarkov(sigma=ft.estimate, time_constant=tc, meta=meta))
        return out

    def fitted_adev(self, tau: npt.ArrayLike) -> _FloatArray:
        """Allan deviation of the fitted terms (all of them, supported or not) [u].

        Parameters
        ----------
        tau : array_like
            Averaging times [s], positive.
        """
        avar = self._channel(supported_only=False).allan_deviation(tau) ** 2
        white = self.term("white")
        if self.sampling == "point" and self.white_filter is not None and white is not None:
            # the channel's white term is the period-mean form; point samples have their own
            wf = (*self.white_filter, "point")
            t = np.asarray(tau, dtype=np.float64)
            avar = avar + white.estimate**2 * (
                _basis("white", t, self.sample_rate, white_filter=wf)
                - _basis("white", t, self.sample_rate, white_filter=self.white_filter)
            )
        return np.sqrt(avar)

    def to_channel(self) -> Channel:
        """The identified channel as a :class:`sensormodel.model.Channel`.

        Supported terms only; each carries ``meta["uncertainty"] = {"low", "high",
        "confidence"}`` (SI, DESIGN §10) and ``meta["supported"]``. The flicker term has no
        explicit cut-off (the channel's Nyquist frequency, as in the fit).
        """
        return self._channel(supported_only=True)

    def _channel(self, *, supported_only: bool) -> Channel:
        return Channel(
            id=self.channel,
            quantity=_quantity(self.unit),
            unit=self.unit,
            sample_rate=self.sample_rate,
            terms=tuple(self._model_terms(supported_only=supported_only)),
        )


def _quantity(unit: str) -> str:
    """The quantity of a channel in the SI unit of a gyro or accelerometer, else as recorded."""
    u = unit.replace(" ", "").replace("**", "^").replace("/s2", "/s^2")
    for kind in INSTRUMENT_KIND.values():
        if u == SI_LABEL[kind]:
            return kind
    return "as_recorded"


@dataclass(frozen=True)
class LimitTest:
    """A parametric bootstrap test of one term's parameter at a given value.

    Attributes
    ----------
    term, parameter : str
        The term type and its SI parameter (:data:`PARAMETERS`).
    value : float
        The parameter value tested [SI].
    estimate : float
        The parameter estimated from the measured curve by the statistic of the test [SI].
    p_above : float
        Monte Carlo p-value of the estimate being this large if the parameter were ``value``:
        (1 + #{T* ≥ T})/(B + 1). Small: the parameter is above ``value``.
    p_below : float
        The same for an estimate this small: (1 + #{T* ≤ T})/(B + 1). Small: below ``value``.
    n_records : int
        Null records B.
    null_parameters : dict
        The model the null records were drawn from: the tested term at ``value``, the others
        refitted with it held there [SI].
    null_time_constant : float or None
        The Gauss-Markov time constant of that model [s] (profiled when the Gauss-Markov σ is
        the tested parameter); None without a Gauss-Markov term.
    reasons : tuple of (str, dict)
        Reason codes with their numbers: ``null_time_constant_at_search_edge`` (``edge``
        ``"upper"`` or ``"lower"``, ``value`` [s], the searched range ``low``, ``high`` [s])
        where the null model's profiled time constant sits at an end of its search range (at
        the upper end the record does not resolve it: the null is then one of many models
        with the same σ²/T, and the test's p-values are those of that one).
    """

    term: str
    parameter: str
    value: float
    estimate: float
    p_above: float
    p_below: float
    n_records: int
    null_parameters: dict[str, float]
    null_time_constant: float | None = None
    reasons: tuple[tuple[str, dict[str, Any]], ...] = ()


def to_model(
    identifications: Sequence[Identification],
    *,
    sensor: Mapping[str, Any] | None = None,
    source: str | None = None,
) -> Any:
    """A :class:`sensormodel.model.NoiseModel` of the identified channels (supported terms).

    Parameters
    ----------
    identifications : sequence of Identification
    sensor : mapping, optional
        The ``sensor`` entry (default ``{"name": "identified"}``).
    source : str, optional
        The recording file, kept in the provenance.

    Returns
    -------
    NoiseModel
        ``provenance = {"from": "recording", ...}`` with the method, confidence, bootstrap
        size and seed, and per channel the terms left out as not supported.
    """
    items = list(identifications)
    if not items:
        raise AnalysisError(
            "got no identifications", "at least one channel", field="identifications"
        )
    dropped = {
        i.channel: [t.term for t in i.terms if not t.supported]
        for i in items
        if any(not t.supported for t in i.terms)
    }
    provenance: dict[str, Any] = {
        "from": "recording",
        "method": "non-negative weighted least squares on the Allan variance; parametric "
        "bootstrap intervals",
        "confidence": items[0].confidence,
        "n_boot": items[0].n_boot,
        "seed": items[0].seed,
    }
    if source is not None:
        provenance["file"] = str(source)
    if dropped:
        provenance["not_supported"] = dropped
    notes = [f"{i.channel}: {n}" for i in items for n in i.notes]
    if notes:
        provenance["notes"] = notes
    return NoiseModel(
        sensor=dict(sensor) if sensor else {"name": "identified"},
        channels=tuple(i.to_channel() for i in items),
        provenance=provenance,
        conventions={"density": "IEEE Std 952 (two-sided PSD N²; AVAR N²/τ)"},
    )
