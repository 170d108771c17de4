"""Error growth of dead-reckoned quantities over a horizon (DESIGN §10, ``drift``).

What the noise of a channel does to an open-loop navigation solution: a gyro's rate error
integrates into an **angle** error; an accelerometer's error integrates into a **velocity**
error and again into a **position** error (open loop, no Schuler feedback, no tilt coupling).

Method: the channel's terms are stacked (:func:`sensormodel.linear.stack`) and augmented with
one integrator (angle; velocity) or two (velocity, position)::

    d/dt [x; θ] = [[F, 0], [H, 0]] [x; θ] + [[G, 0], [0, 1]] [w; v],   E[v v] = N² δ

(white noise of density N enters the integrator as process noise of strength N²). The variance
equation dP/dt = F P + P Fᵀ + G Q Gᵀ is integrated exactly through its discrete form
(:func:`sensormodel.linear.propagate`, Van Loan) from P(0) = blockdiag(P0, 0). Quantization,
which has no continuous state, adds its exact discrete result: the integrated output carries
e(t) − e(0), so angle/velocity variance 2Q² (t > 0) and position variance Q²(t² + t·τ0)
(velocity held over each sample period τ0).

Closed forms beside it (REFERENCES §12; Woodman, "An introduction to inertial navigation",
Univ. Cambridge UCAM-CL-TR-696, 2007; Wall & Bevly, ION GNSS 2005), per term, variances:

=================  ===========================  ===========================================
term               angle / velocity             position
=================  ===========================  ===========================================
white N            N² t                         N² t³/3
random_walk K      K² t³/3                      K² t⁵/20
random_constant σ  σ² t²                        σ² t⁴/4
ramp R             R² t⁴/4                      R² t⁶/36
gauss_markov σ, T  2σ²T²(x − 1 + e⁻ˣ), x = t/T  2σ²T⁴(x³/3 − x²/2 + 1 − e⁻ˣ(1 + x))
flicker            sum of its Gauss-Markov realization (its integral has no closed form)
quantization Q     2Q²                          Q²(t² + t τ0)
=================  ===========================  ===========================================

The Gauss-Markov forms are derived (double integral of σ² e^(−|s|/T)). For drift, the flicker
realization's band is widened to reach the horizon (longest time = max(longest_time or the
default, horizon)), since integrated 1/f noise depends on its lowest frequency.

Every drift document carries the export caution (:data:`sensormodel.export.CAUTION`).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from .errors import AnalysisError
from .export import CAUTION
from .linear import block_diag, propagate, stack
from .terms import DEFAULT_LONGEST_TIME, TERM_TYPES, Flicker

__all__ = [
    "SCHEMA_ID",
    "CAUTION",
    "ChannelDrift",
    "DriftResult",
    "channel_drift",
    "drift",
    "closed_form",
    "default_times",
    "table_times",
]

#: Schema id of the drift JSON (``schemas/drift.schema.json``).
SCHEMA_ID = "sensormodel/drift/1"

_FloatArray = npt.NDArray[np.float64]

#: Channel quantity -> the integrated quantities reported for it.
_OUTPUTS = {"angular_rate": ("angle",), "acceleration": ("velocity", "position")}

_NICE_TIMES = (1.0, 10.0, 60.0, 600.0, 3600.0, 36000.0, 86400.0, 864000.0)


@dataclass(frozen=True)
class ChannelDrift:
    """1σ error growth of one channel.

    Attributes
    ----------
    id : str
        Channel id.
    quantity : str
        ``angular_rate`` (gives ``angle``) or ``acceleration`` (``velocity``, ``position``).
    time : ndarray
        Times since turn-on [s].
    values : dict of str to ndarray
        1σ error per integrated quantity: ``angle`` [rad] or ``velocity`` [m/s] and
        ``position`` [m] (in general: channel unit·s and ·s²), from the propagated covariance.
    closed_form : dict of str to ndarray
        The same from the sum of the per-term closed forms (module docstring).
    contributions : dict of str to dict of str to ndarray
        Per term (``white``, ``flicker``, …): its own 1σ closed-form growth.
    """

    id: str
    quantity: str
    time: _FloatArray
    values: dict[str, _FloatArray]
    closed_form: dict[str, _FloatArray] = field(default_factory=dict)
    contributions: dict[str, dict[str, _FloatArray]] = field(default_factory=dict)

    def at(self, times: Iterable[float]) -> dict[str, _FloatArray]:
        """The 1σ values at given times (times on the grid exactly; otherwise log-log
        interpolation between grid points)."""
        t = np.asarray(list(times), dtype=float)
        out = {}
        for k, v in self.values.items():
            lt, lv = np.log(self.time), np.log(np.maximum(v, np.finfo(float).tiny))
            out[k] = np.exp(np.interp(np.log(t), lt, lv))
        return out

    def largest_term(self, times: Iterable[float]) -> list[str]:
        """The term with the largest closed-form contribution to the last quantity (angle, or
        position) at each of ``times`` (nearest grid time)."""
        key = list(self.values)[-1]
        out = []
        for t in times:
            i = int(np.argmin(np.abs(self.time - t)))
            best = max(
                self.contributions, key=lambda lab: self.contributions[lab][key][i], default=""
            )
            out.append(best)
        return out

    def to_dict(self) -> dict[str, Any]:
        """Entry of the drift JSON (DESIGN §10): ``{"id", "time", "angle"}`` or
        ``{"id", "time", "velocity", "position"}``, 1σ, SI, and ``terms``: each term's own
        closed-form 1σ curves."""
        out: dict[str, Any] = {"id": self.id, "quantity": self.quantity, "time": self.time.tolist()}
        for k, v in self.values.items():
            out[k] = v.tolist()
        out["terms"] = {
            label: {k: v.tolist() for k, v in d.items()} for label, d in self.contributions.items()
        }
        return out


@dataclass(frozen=True)
class DriftResult:
    """Error growth of a model's channels over a horizon.

    Attributes
    ----------
    horizon : float
        Last time [s].
    channels : tuple of ChannelDrift
        One per gyro or accelerometer channel.
    skipped : tuple of str
        Channels not integrated (quantity ``as_recorded``).
    without : tuple of str
        Term types left out (e.g. ``random_constant``: the turn-on bias calibrated at the start).
    """

    horizon: float
    channels: tuple[ChannelDrift, ...]
    skipped: tuple[str, ...] = ()
    without: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        """The drift JSON document (``schemas/drift.schema.json``)."""
        return {
            "schema": SCHEMA_ID,
            "horizon": self.horizon,
            "sigma": 1,
            "caution": CAUTION,
            "without": list(self.without),
            "channels": [c.to_dict() for c in self.channels],
        }


def table_times(horizon: float) -> list[float]:
    """Round times for a printed table: 1 s, 10 s, 1 min, 10 min, 1 h, … below the horizon, and
    the horizon itself [s]."""
    out = [t for t in _NICE_TIMES if t < horizon * (1 - 1e-9)]
    if not out:
        out = [horizon / 10.0]
    return [*out, float(horizon)]


def default_times(
    horizon: float, *, sample_rate: float | None = None, points: int = 121
) -> _FloatArray:
    """The default time grid [s]: ``points`` log-spaced times from max(horizon·10⁻⁴, one sample
    period) to the horizon, merged with :func:`table_times`."""
    if not (math.isfinite(horizon) and horizon > 0):
        raise AnalysisError(f"horizon = {horizon!r}", "a positive time in s")
    if isinstance(points, bool) or not isinstance(points, int) or points < 2:
        raise AnalysisError(f"points = {points!r}", "a whole number of at least 2")
    t0 = horizon * 1e-4
    if sample_rate:
        t0 = max(t0, 1.0 / sample_rate)
    t0 = min(t0, horizon)
    grid = np.geomspace(t0, horizon, points)
    return np.unique(np.concatenate([grid, table_times(horizon)]))


def _outputs(channel: Any) -> tuple[str, ...]:
    """The integrated quantities of a gyro or accelerometer channel (``_OUTPUTS``)."""
    outputs = _OUTPUTS.get(channel.quantity)
    if outputs is None:
        raise AnalysisError(
            f"channel {channel.id} has quantity '{channel.quantity}'",
            "a gyro (angular_rate) or accelerometer (acceleration) channel",
        )
    return outputs


def _drift_terms(terms: Sequence[Any], horizon: float) -> list[Any]:
    out = []
    for t in terms:
        if isinstance(t, Flicker):
            t = replace(t, longest_time=max(t.longest_time or DEFAULT_LONGEST_TIME, horizon))
        if getattr(t, "type", "") == "white" and getattr(t, "bandwidth", None) is not None:
            # the output filter (time constant ~1/(2π·bandwidth)) changes the integrated error
            # by a constant ~N²/(2π·bandwidth), negligible over a navigation horizon
            t = replace(t, bandwidth=None, filter_order=None)
        out.append(t)
    return out


def _by_size(
    x: _FloatArray,
    limit: float,
    series: Callable[[_FloatArray], _FloatArray],
    closed: Callable[[_FloatArray], _FloatArray],
) -> _FloatArray:
    """``series(x)`` where x < ``limit`` (the closed form cancels there), ``closed(x)`` above."""
    out = np.empty_like(x)
    small = x < limit
    out[small] = series(x[small])
    out[~small] = closed(x[~small])
    return out


def _gm_single(x: _FloatArray) -> _FloatArray:
    """x − 1 + e^(−x), accurate for small x."""

    def series(xs: _FloatArray) -> _FloatArray:
        acc = np.zeros_like(xs)
        term = xs * xs / 2.0
        for n in range(2, 20):
            acc += term
            term = -term * xs / (n + 1)
        return acc

    return _by_size(x, 0.1, series, lambda xl: xl + np.expm1(-xl))


def _gm_double(x: _FloatArray) -> _FloatArray:
    """x³/3 − x²/2 + 1 − e^(−x)(1 + x) = Σ_{n≥4} (−1)^n (n−1) x^n / n!, accurate for small x."""

    def series(xs: _FloatArray) -> _FloatArray:
        acc = np.zeros_like(xs)
        power = xs**4 / 24.0  # x^n / n!
        for n in range(4, 40):
            acc += (-1) ** n * (n - 1) * power
            power = power * xs / (n + 1)
        return acc

    def closed(xl: _FloatArray) -> _FloatArray:
        return xl**3 / 3.0 - xl**2 / 2.0 + 1.0 - np.exp(-xl) * (1.0 + xl)

    return _by_size(x, 1.0, series, closed)


def _term_variances(
    term: Any, t: _FloatArray, sample_rate: float | None
) -> tuple[_FloatArray, _FloatArray]:
    """(single-integral variance, double-integral variance) of one term's closed form."""
    kind = term.type
    if kind == "white":
        q = term.density**2
        return q * t, q * t**3 / 3.0
    if kind == "random_walk":
        q = term.density**2
        return q * t**3 / 3.0, q * t**5 / 20.0
    if kind == "random_constant":
        q = term.sigma**2
        return q * t**2, q * t**4 / 4.0
    if kind == "ramp":
        q = term.slope**2
        return q * t**4 / 4.0, q * t**6 / 36.0
    if kind == "gauss_markov":
        s2, T = term.sigma**2, term.time_constant
        x = t / T
        return 2.0 * s2 * T**2 * _gm_single(x), 2.0 * s2 * T**4 * _gm_double(x)
    if kind == "flicker":
        real = term.realization(sample_rate=sample_rate)
        v1 = np.zeros_like(t)
        v2 = np.zeros_like(t)
        for T, s2 in zip(real.time_constants, real.variances, strict=True):
            x = t / T
            v1 += 2.0 * s2 * T**2 * _gm_single(x)
            v2 += 2.0 * s2 * T**4 * _gm_double(x)
        return v1, v2
    if kind == "quantization":
        q = term.coefficient**2
        tau0 = 1.0 / sample_rate if sample_rate else 0.0
        return np.where(t > 0, 2.0 * q, 0.0), q * (t**2 + t * tau0)
    if kind == "shaped":
        return _stationary_integrals(term.state_space(sample_rate=sample_rate), t)
    raise AnalysisError(f"no drift closed form for a '{kind}' term", "a term of DESIGN §4")


def _stationary_integrals(ss: Any, t: _FloatArray) -> tuple[_FloatArray, _FloatArray]:
    """Variances of the single and double integral of a stationary process, by quadrature of
    its autocovariance R(s) = H e^{Fs} P0 Hᵀ (no closed form for a general shaping filter):
    Var ∫₀ᵗ y = 2∫₀ᵗ (t − s) R(s) ds and Var ∫₀ᵗ∫₀ᵘ y = 2∫₀ᵗ (t³/3 − s t²/2 + s³/6) R(s) ds
    (derived from the double integral of R(a − b) over the square). R is evaluated on a grid
    of step h = (slowest decay time)/400 out to 60 decay times (beyond, R < e⁻⁶⁰ R(0)) by
    repeated multiplication with e^{Fh}, and the moments ∫ sᵏ R ds by the trapezoidal rule
    (relative error ~ 1e-6)."""
    from scipy.integrate import cumulative_trapezoid
    from scipy.linalg import expm

    h_row, p0, f = ss.H[0], ss.P0, ss.F
    decay = 1.0 / max(float(np.min(-np.linalg.eigvals(f).real)), 1e-300)
    t_max = float(np.max(t)) if t.size else 0.0
    end = min(t_max, 60.0 * decay)
    n = int(min(max(np.ceil(end / (decay / 400.0)), 16), 2_000_000))
    s_grid = np.linspace(0.0, end, n + 1)
    step = expm(f * (end / n))
    g = p0 @ h_row
    r = np.empty(n + 1)
    for k in range(n + 1):
        r[k] = h_row @ g
        g = step @ g
    moments = {k: cumulative_trapezoid(s_grid**k * r, s_grid, initial=0.0) for k in (0, 1, 3)}

    def moment(k: int, ti: float) -> float:
        return float(np.interp(min(ti, end), s_grid, moments[k]))

    v1 = np.zeros_like(t)
    v2 = np.zeros_like(t)
    for i, ti in enumerate(t):
        if ti <= 0:
            continue
        i0, i1, i3 = moment(0, ti), moment(1, ti), moment(3, ti)
        v1[i] = 2.0 * (ti * i0 - i1)
        v2[i] = 2.0 * (ti**3 / 3 * i0 - ti**2 / 2 * i1 + i3 / 6)
    return v1, v2


def closed_form(
    channel: Any, times: npt.ArrayLike, *, horizon: float | None = None
) -> dict[str, dict[str, _FloatArray]]:
    """Per-term closed-form error growth of a channel (variances, not 1σ).

    Parameters
    ----------
    channel : Channel
        A gyro (``angular_rate``) or accelerometer (``acceleration``) channel.
    times : array_like
        Times [s], non-negative.
    horizon : float, optional
        Widen the flicker band to this time (as :func:`channel_drift` does); default the last
        time.

    Returns
    -------
    dict
        {term label: {"angle": var} or {"velocity": var, "position": var}} [SI²].
    """
    outputs = _outputs(channel)
    t = np.asarray(times, dtype=float).ravel()
    horizon = float(horizon if horizon is not None else np.max(t))
    out: dict[str, dict[str, _FloatArray]] = {}
    for term in _drift_terms(channel.terms, horizon):
        v1, v2 = _term_variances(term, t, channel.sample_rate)
        label, k = term.type, 2
        while label in out:
            label, k = f"{term.type}#{k}", k + 1
        out[label] = {outputs[0]: v1} if len(outputs) == 1 else {outputs[0]: v1, outputs[1]: v2}
    return out


def channel_drift(
    channel: Any,
    horizon: float,
    *,
    times: npt.ArrayLike | None = None,
    points: int = 121,
) -> ChannelDrift:
    """1σ angle (gyro) or velocity and position (accelerometer) error of one channel.

    Parameters
    ----------
    channel : Channel
        With quantity ``angular_rate`` or ``acceleration``.
    horizon : float
        Last time [s].
    times : array_like, optional
        Times [s] (default :func:`default_times`).
    points : int
        Number of log-spaced times of the default grid.

    Returns
    -------
    ChannelDrift
    """
    outputs = _outputs(channel)
    horizon = float(horizon)
    t = (
        default_times(horizon, sample_rate=channel.sample_rate, points=points)
        if times is None
        else np.asarray(times, dtype=float).ravel()
    )
    if t.size == 0 or np.any(t < 0) or np.any(np.diff(t) < 0) or not np.all(np.isfinite(t)):
        raise AnalysisError(
            "drift times are empty, negative or decreasing", "non-decreasing times >= 0 in s"
        )
    ss = stack(_drift_terms(channel.terms, horizon), sample_rate=channel.sample_rate)
    n, k = ss.n, len(outputs)
    F = np.zeros((n + k, n + k))
    F[:n, :n] = ss.F
    F[n, :n] = ss.H[0]
    if k == 2:
        F[n + 1, n] = 1.0  # position' = velocity
    G = block_diag([ss.G, np.zeros((k, 1))])
    G[n, -1] = 1.0  # white noise enters the first integrator
    Q = block_diag([ss.Qc, np.full((1, 1), ss.white)])
    P0 = block_diag([ss.P0, np.zeros((k, k))])
    P = propagate(F, G, Q, P0, t)
    variances = {name: P[:, n + i, n + i].copy() for i, name in enumerate(outputs)}
    if ss.quantization:
        q = ss.quantization
        tau0 = 1.0 / channel.sample_rate
        variances[outputs[0]] += np.where(t > 0, 2.0 * q, 0.0)
        if k == 2:
            variances[outputs[1]] += q * (t**2 + t * tau0)
    per_term = closed_form(channel, t, horizon=horizon)
    total = {
        name: np.sum([v[name] for v in per_term.values()], axis=0) if per_term else np.zeros_like(t)
        for name in outputs
    }

    def sd(v: _FloatArray) -> _FloatArray:
        return np.sqrt(np.maximum(v, 0.0))

    return ChannelDrift(
        id=channel.id,
        quantity=channel.quantity,
        time=t,
        values={k_: sd(v) for k_, v in variances.items()},
        closed_form={k_: sd(v) for k_, v in total.items()},
        contributions={lab: {k_: sd(v) for k_, v in d.items()} for lab, d in per_term.items()},
    )


def drift(
    model: Any, horizon: float, *, without: Sequence[str] = (), **grid: Any
) -> DriftResult:
    """Error growth of every gyro and accelerometer channel of a model over a horizon.

    Parameters
    ----------
    model : NoiseModel
        The model (channels with quantity ``as_recorded`` are skipped and listed).
    horizon : float
        Last time [s], positive.
    without : sequence of str
        Term types to leave out, e.g. ``("random_constant",)`` when the turn-on bias is
        calibrated at the start (it grows as σ·t and swamps everything else).
    **grid
        The time grid of each channel, as for :func:`channel_drift`: ``times`` (times [s];
        default :func:`default_times` per channel) or ``points`` (the default grid's number of
        log-spaced times).

    Returns
    -------
    DriftResult
    """
    horizon = float(horizon)
    if not (math.isfinite(horizon) and horizon > 0):
        raise AnalysisError(f"horizon = {horizon!r}", "a positive time in s")
    left_out = tuple(dict.fromkeys(str(w).strip().lower() for w in without))
    for w in left_out:
        if w not in TERM_TYPES:
            raise AnalysisError(
                f"unknown term {w!r}", f"term types among {', '.join(TERM_TYPES)}", field="without"
            )
    done, skipped = [], []
    for c in model.channels:
        if c.quantity in _OUTPUTS:
            kept = tuple(t for t in c.terms if t.type not in left_out)
            done.append(channel_drift(replace(c, terms=kept), horizon, **grid))
        else:
            skipped.append(c.id)
    if not done:
        raise AnalysisError(
            "the model has no gyro or accelerometer channel",
            "channels with quantity angular_rate or acceleration",
        )
    return DriftResult(
        horizon=horizon, channels=tuple(done), skipped=tuple(skipped), without=left_out
    )
