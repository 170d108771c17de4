"""Which terms the data support: backward elimination with generalized least squares on the
covariance of bootstrap Allan variances (:class:`_Gls`), and the bootstrap's quantiles.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import numpy.typing as npt

_FloatArray = npt.NDArray[np.float64]

#: Terms the selection tests first (the rarer of two nearly collinear pairs; common practice),
#: at the stricter level α/_RARE_LEVEL_DIVISOR (1 % one-sided for 90 % intervals): a spurious
#: ramp or quantization term takes its share from the random walk or the white noise.
_TESTED_FIRST = ("ramp", "quantization")
_RARE_LEVEL_DIVISOR = 5.0


def _quantile(x: _FloatArray, q: float) -> float:
    """The (B + 1)q-th order statistic of B bootstrap values (Weibull plotting position)."""
    return float(np.quantile(x, q, method="weibull"))


def _z(p: float) -> float:
    """The standard normal quantile of ``p``."""
    from scipy.stats import norm

    return float(norm.ppf(p))


class _Gls:
    """Term selection by backward elimination with generalized least squares.

    The covariance of the Allan-variance estimates across τ is taken from bootstrap records
    (``av``, drawn from a model with Allan variance ``model``), on the relative scale
    e = AVAR̂/model − 1, with its correlations shrunk toward zero by the Schäfer-Strimmer rule
    (J. Schäfer & K. Strimmer, Stat. Appl. Genet. Mol. Biol. 4(1):32, 2005, target "D"): a
    bootstrap of a few dozen records gives a usable, well-conditioned matrix. With it,

        χ²(S) = min_{c ≥ 0} (â − Φ_S c)ᵀ Σ⁻¹ (â − Φ_S c)

    and a term k of the set S is dropped when χ²(S \\ k) − χ²(S) < z²_{1−α}, the one-sided
    test of c_k = 0 at level α (the statistic of a parameter on its bound, ½χ²₀ + ½χ²₁; Self &
    Liang, J. Am. Stat. Assoc. 82:605, 1987). The least significant term goes first; the
    elimination stops when every remaining term is significant. Unlike a test of each
    coefficient in the full model, this keeps one of two nearly collinear terms (random walk and
    ramp over the last octaves) when the data need one of them. The terms ``first`` (ramp,
    then quantization: the rarer ones, common practice) are tested before the others and at the
    stricter critical value ``z_first``, so that where the data cannot tell a ramp from a random
    walk, or quantization from white noise, the common term is kept.
    """

    def __init__(
        self,
        av: _FloatArray,
        model: _FloatArray,
        phi: _FloatArray,
        *,
        z_crit: float,
        first: Sequence[int] = (),
        z_first: float | None = None,
    ) -> None:
        self._first = tuple(int(k) for k in first)
        self._crit_first = (z_crit if z_first is None else z_first) ** 2
        e = av / model[None, :] - 1.0
        nb = e.shape[0]
        sd = e.std(axis=0, ddof=1)
        sd = np.where(sd > 0, sd, 1e-12)
        w = (e - e.mean(axis=0)) / sd
        r = (w.T @ w) / (nb - 1)
        # Schäfer-Strimmer shrinkage intensity toward the identity correlation
        wij = w[:, :, None] * w[:, None, :]
        var_r = nb / (nb - 1) ** 3 * np.sum((wij - wij.mean(axis=0)) ** 2, axis=0)
        off = ~np.eye(r.shape[0], dtype=bool)
        denom = float(np.sum(r[off] ** 2))
        lam = 1.0 if denom == 0 else min(1.0, max(0.0, float(np.sum(var_r[off])) / denom))
        while True:  # fewer records than τ leave the plain estimate singular: shrink more
            rs = np.where(off, (1.0 - lam) * r, 1.0)
            try:
                chol = np.linalg.cholesky(rs * sd[:, None] * sd[None, :])
                break
            except np.linalg.LinAlgError:
                lam = min(1.0, max(2.0 * lam, 0.01))
        self._whiten = np.linalg.inv(chol)
        self._model = model
        self._phi_w = self._whiten @ (phi / model[:, None])
        self._crit = z_crit**2
        self.shrinkage = lam

    def _chi2(self, b: _FloatArray, mask: npt.NDArray[np.bool_]) -> float:
        from scipy.optimize import nnls

        a = self._phi_w[:, mask]
        scale = np.sqrt(np.sum(a * a, axis=0))
        scale[scale == 0] = 1.0
        _x, res = nnls(a / scale, b, maxiter=50 * a.shape[1])
        return float(res) ** 2

    def select(
        self, avar: _FloatArray, *, rare_only: bool = False
    ) -> tuple[npt.NDArray[np.bool_], npt.NDArray[np.bool_]]:
        """The terms kept for this Allan-variance vector.

        Returns ``(after_rare, kept)``: the terms left once the rare terms (``first``) have
        been tested, and those left at the end of the backward elimination (``kept`` is
        ``after_rare`` with ``rare_only``).
        """
        b = self._whiten @ (avar / self._model)
        mask = np.ones(self._phi_w.shape[1], dtype=bool)
        current = self._chi2(b, mask)
        for k in self._first:
            if np.sum(mask) <= 1:
                break
            trial = mask.copy()
            trial[k] = False
            reduced = self._chi2(b, trial)
            if reduced - current < self._crit_first:
                mask, current = trial, reduced
        after_rare = mask.copy()
        if rare_only:
            return after_rare, mask
        while np.sum(mask) > 1:
            best_k, best_delta = -1, math.inf
            for k in np.flatnonzero(mask):
                trial = mask.copy()
                trial[k] = False
                delta = self._chi2(b, trial) - current
                if delta < best_delta:
                    best_k, best_delta = int(k), delta
            if best_delta >= self._crit:
                break
            mask[best_k] = False
            current += best_delta
        return after_rare, mask
