"""The noise-term catalogue (DESIGN §4): one class per term, parameters in SI.

Every term is a frozen dataclass whose fields are its SI parameters. ``meta`` carries what is not
physics: where the value came from on the datasheet (``{"field": ..., "text": ...}``) and, for
identified terms, the ``uncertainty`` object of DESIGN §10. ``to_dict`` / ``term_from_dict`` are
the JSON form used in noise-model files.

Conventions (see DESIGN §3): a channel's output ``y(t)`` is in the channel's SI unit ``u`` (rad/s
for gyros, m/s² for accelerometers); every density is the IEEE Std 952 coefficient, i.e. white
noise of density ``D`` has two-sided PSD ``D²`` and Allan variance ``D²/τ``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields
from typing import Any, ClassVar

from .errors import ModelFileError

__all__ = [
    "Term",
    "White",
    "Flicker",
    "RandomWalk",
    "GaussMarkov",
    "Quantization",
    "Ramp",
    "RandomConstant",
    "TERM_TYPES",
    "term_from_dict",
]


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


@dataclass(frozen=True)
class White(Term):
    """White noise on the output (angle / velocity random walk).

    Parameters
    ----------
    density : float
        IEEE Std 952 coefficient N [u·√s] (rad/√s for a gyro, m/s/√s for an accelerometer):
        two-sided PSD N², Allan variance N²/τ.
    """

    type: ClassVar[str] = "white"
    units: ClassVar[dict[str, str]] = {"density": "u*s**0.5"}
    density: float


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


#: Term type name (as in the noise-model JSON) -> class.
TERM_TYPES: dict[str, type[Term]] = {
    cls.type: cls
    for cls in (White, Flicker, RandomWalk, GaussMarkov, Quantization, Ramp, RandomConstant)
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
