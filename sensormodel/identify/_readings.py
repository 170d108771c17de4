"""The classical slope readings of an Allan-deviation curve (IEEE Std 952-1997 Annex C), the
reason codes of a reading taken off its textbook point, and a reading's own interval.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

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
