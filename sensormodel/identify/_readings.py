"""The classical slope readings of an Allan-deviation curve (IEEE Std 952-1997 Annex C), the
reason codes of a reading taken off its textbook point, and a reading's own interval.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from ..confidence import chi2_interval
from ..errors import AnalysisError
from ..terms import FLICKER_FLOOR_FACTOR

__all__ = ["SlopeNote", "slope_readings"]

_FloatArray = npt.NDArray[np.float64]

#: Reading points of the classical slope method [s] (IEEE Std 952 Annex C: σ(1) = N, σ(3) = K).
_WHITE_READ_TAU = 1.0
_RW_READ_TAU = 3.0

#: Reason codes of :class:`SlopeNote`.
CARRIED = "reading_carried"
FLOOR_UPPER_BOUND = "floor_upper_bound"
NO_FLOOR = "no_floor"


@dataclass(frozen=True)
class SlopeNote:
    """Why a slope reading was not taken at its textbook point: a reason code and its numbers.

    Attributes
    ----------
    code : str
        ``reading_carried``: the reading point (``target``) lies outside the curve; the reading
        was taken at ``tau`` and carried to ``target`` along its line. ``floor_upper_bound``:
        the Allan deviation still falls at the longest τ (``tau``), so the floor reading is an
        upper bound. ``no_floor``: the deviation is lowest at the shortest τ (``tau``).
    term : str
        The reading: ``white``, ``random_walk`` or ``flicker``.
    tau : float
        The τ of the curve point the reading was taken at [s].
    target : float or None
        The textbook reading point [s] (1 s for white noise, 3 s for the random walk); None for
        the floor.
    curve : (float, float)
        The shortest and longest τ of the curve [s].
    """

    code: str
    term: str
    tau: float
    target: float | None
    curve: tuple[float, float]


def note_text(note: SlopeNote) -> str:
    """The sentence of a :class:`SlopeNote` (kept beside the code until report owns it)."""
    lo, hi = note.curve
    if note.code == CARRIED:
        line = "−½" if note.term == "white" else "+½"
        return (
            f"{note.term}: τ = {note.target:g} s is outside the curve ({lo:.4g}-{hi:.4g} s); "
            f"read at τ = {note.tau:.4g} s and carried to {note.target:g} s along the {line} line"
        )
    if note.code == FLOOR_UPPER_BOUND:
        return (
            "flicker: the Allan deviation still falls at the longest τ; the floor reading is an "
            "upper bound"
        )
    return "flicker: the Allan deviation is lowest at the shortest τ (no floor seen)"


def slope_readings(
    tau: npt.ArrayLike, adev: npt.ArrayLike
) -> tuple[dict[str, float], tuple[str, ...]]:
    """The classical slope readings of an Allan-deviation curve (IEEE Std 952-1997 Annex C).

    * white density N [u·√s]: on the −½ line through the curve point nearest τ = 1 s,
      N = σ(τ_j)·√τ_j (σ(1 s) itself when the curve has τ = 1 s);
    * random walk K [u/√s]: on the +½ line through the point nearest τ = 3 s,
      K = σ(τ_j)·√(3/τ_j) (σ(3 s) when the curve has it);
    * flicker coefficient B [u]: the floor, min σ / √(2 ln2/π) = min σ / 0.6643.

    Parameters
    ----------
    tau : array_like
        Averaging times [s], increasing.
    adev : array_like
        Allan deviation [u].

    Returns
    -------
    readings : dict
        ``white``, ``random_walk``, ``flicker``.
    notes : tuple of str
        Where a reading point lies outside the curve, or the floor is at an end of it (the
        sentences of the fit's :class:`SlopeNote` codes).
    """
    tau, adev = _checked(tau, adev)
    points = _reading_points(tau, adev)
    values = {k: float(adev[j] * f) for k, (j, f) in points.items()}
    return values, tuple(note_text(n) for n in _notes(tau, points))


def _checked(tau: npt.ArrayLike, adev: npt.ArrayLike) -> tuple[_FloatArray, _FloatArray]:
    tau = np.asarray(tau, dtype=np.float64)
    adev = np.asarray(adev, dtype=np.float64)
    if tau.ndim != 1 or tau.shape != adev.shape or tau.size == 0:
        raise AnalysisError(
            f"got {tau.size} τ and {adev.size} deviations", "one deviation per τ", field="adev"
        )
    if not (np.all(tau > 0) and np.all(adev > 0) and np.all(np.isfinite(adev))):
        raise AnalysisError("a τ or deviation is not positive", "τ > 0 s, σ > 0", field="adev")
    return tau, adev


def _notes(tau: _FloatArray, points: dict[str, tuple[int, float]]) -> tuple[SlopeNote, ...]:
    curve = (float(tau[0]), float(tau[-1]))
    notes = []
    for term, target in (("white", _WHITE_READ_TAU), ("random_walk", _RW_READ_TAU)):
        if not tau[0] <= target <= tau[-1]:
            j = points[term][0]
            notes.append(SlopeNote(CARRIED, term, float(tau[j]), target, curve))
    j = points["flicker"][0]
    if j == tau.size - 1:
        notes.append(SlopeNote(FLOOR_UPPER_BOUND, "flicker", float(tau[j]), None, curve))
    elif j == 0:
        notes.append(SlopeNote(NO_FLOOR, "flicker", float(tau[j]), None, curve))
    return tuple(notes)


def _reading_points(tau: _FloatArray, adev: _FloatArray) -> dict[str, tuple[int, float]]:
    """Index of the curve point each slope reading uses and its factor: reading = σ_j·factor."""
    jw = int(np.argmin(np.abs(np.log(tau / _WHITE_READ_TAU))))
    jr = int(np.argmin(np.abs(np.log(tau / _RW_READ_TAU))))
    jf = int(np.argmin(adev))
    return {
        "white": (jw, math.sqrt(tau[jw])),
        "random_walk": (jr, math.sqrt(_RW_READ_TAU / tau[jr])),
        "flicker": (jf, 1.0 / FLICKER_FLOOR_FACTOR),
    }


def _reading_interval(
    point: tuple[int, float], adev: _FloatArray, edf: _FloatArray, confidence: float
) -> tuple[float, float]:
    """A slope reading's own chi-square interval at ``confidence`` [u…]: from the one curve
    point it is read at and that point's EDF (NIST SP 1065 eq. (45)), times the reading's
    factor."""
    j, factor = point
    lo_hi = chi2_interval(float(adev[j]), float(edf[j]), confidence)
    return float(lo_hi[0]) * factor, float(lo_hi[1]) * factor


# ---------------------------------------------------------------------------------------------
# Reason codes of the record: its output filter, its sampling, its count step
# ---------------------------------------------------------------------------------------------

#: The leading term of a Gaussian's characteristic function at 2π/q, exp(−2π²σ²/q²), above
#: which the quantization error is no longer uniform and independent of the signal (B. Widrow,
#: I. Kollár, M.-C. Liu, "Statistical theory of quantization", IEEE Trans. Instrum. Meas.
#: 45(2), 1996: Sheppard's q²/12 is exact when the input's characteristic function vanishes
#: at the multiples of 2π/q). 1 %: q ≳ 2.07σ.
_COARSE_LEVEL = 0.01


def _filter_reasons(choice: Any, names: tuple[str, ...]) -> tuple[tuple[str, dict[str, Any]], ...]:
    """The reason codes of the white term's band limit and sampling (``choice`` a
    :class:`._design._FilterChoice`): ``output_filter_fitted`` (bandwidth [Hz], order: the
    short-τ curve departs from white noise and this filter accounts for it),
    ``output_filter_not_resolved`` (it departs, and no fitted filter describes it: the range
    starts above), ``sampling_detected`` / ``sampling_assumed`` (the sampling assumption of a
    band-limited white term, and whether the curve told it)."""
    if "white" not in names:
        return ()
    out: list[tuple[str, dict[str, Any]]] = []
    wf = choice.white_filter
    if choice.origin == "fitted":
        out.append(("output_filter_fitted", {"bandwidth": float(wf[0]), "order": int(wf[1])}))
    elif wf is None and "start_without" in choice.details:
        out.append(("output_filter_not_resolved", {}))
    if wf is not None:
        code = "sampling_detected" if choice.sampling_origin == "detected" else "sampling_assumed"
        sampling = str(wf[2]) if len(wf) > 2 else "average"
        out.append((code, {"sampling": sampling, "origin": str(choice.sampling_origin)}))
    return tuple(out)


def _count_step_reasons(
    step: float | None, curve: Any, fitted: Any, *, increments: bool
) -> tuple[tuple[str, dict[str, Any]], ...]:
    """The reason codes of a record's count step q [u] (None: none found).

    A rate record quantized with step q carries, per sample, an error of variance q²/12
    (Sheppard; uniform and independent of the signal while the noise dithers the quantizer:
    Widrow, Kollár & Liu 1996), white, so a known white floor of density
    N_q = q/√(12·rate) [u·√s] (AVAR q²/(12·rate·τ)). It is **reported, not subtracted**: it is
    part of the delivered output that a datasheet's density describes and that a user's filter
    sees; ``count_step_white_floor`` gives N_q and its share N_q²/N̂² of the fitted white
    variance (subtract in quadrature for the sensor before coding). An increment record
    quantized with step q (angle or velocity per sample) has angle/velocity quantization noise
    Q = q/√12 [u·s] (IEEE Std 952-1997 Annex C: AVAR 3Q²/τ²): ``count_step_quantization``
    gives Q beside the fitted quantization term. ``count_step_coarse``: the step is coarse
    against the sample-to-sample noise σ (σ ≈ the Allan deviation at the first τ times √m),
    exp(−2π²σ²/q²) > :data:`_COARSE_LEVEL`: the error then follows the signal and q²/12 is
    not its variance; the estimates near the shortest τ are to be read with care.
    """
    if step is None:
        return ()
    sigma = float(curve.adev[0]) * math.sqrt(float(curve.m[0]))
    out: list[tuple[str, dict[str, Any]]] = []
    if increments:
        q_coef = step / math.sqrt(12.0)
        ft = next((t for t in fitted if t.term == "quantization"), None)
        values: dict[str, Any] = {"step": step, "unit": curve.unit, "coefficient": q_coef}
        if ft is not None:
            values["fitted"] = ft.estimate
        out.append(("count_step_quantization", values))
    else:
        floor = step / math.sqrt(12.0 * curve.rate)
        ft = next((t for t in fitted if t.term == "white"), None)
        share = (floor / ft.estimate) ** 2 if ft is not None and ft.estimate > 0 else math.nan
        out.append(
            (
                "count_step_white_floor",
                {"step": step, "unit": curve.unit, "density": floor, "share": share},
            )
        )
    lead = math.exp(-2.0 * math.pi**2 * sigma**2 / step**2)
    if lead > _COARSE_LEVEL:
        out.append(
            (
                "count_step_coarse",
                {"step": step, "sigma": sigma, "unit": curve.unit, "ratio": step / sigma},
            )
        )
    return tuple(out)
