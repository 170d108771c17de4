"""The term types the fit knows, the SI parameter each coefficient is, and the defaults."""

from __future__ import annotations

__all__ = ["DEFAULT_TERMS", "KNOWN_TERMS", "PARAMETERS", "DEFAULT_CONFIDENCE", "DEFAULT_BOOTSTRAP"]

#: Terms fitted unless told otherwise (Gauss-Markov only on request).
DEFAULT_TERMS: tuple[str, ...] = ("quantization", "white", "flicker", "random_walk", "ramp")
#: Every term type the fit knows, in the order of their dominant τ (short to long).
KNOWN_TERMS: tuple[str, ...] = (
    "quantization",
    "white",
    "flicker",
    "gauss_markov",
    "random_walk",
    "ramp",
)
#: The SI parameter each term's coefficient is (as in the noise-model JSON).
PARAMETERS: dict[str, str] = {
    "quantization": "coefficient",
    "white": "density",
    "flicker": "coefficient",
    "gauss_markov": "sigma",
    "random_walk": "density",
    "ramp": "slope",
}
#: Default two-sided confidence of the coefficient intervals.
DEFAULT_CONFIDENCE = 0.9
#: Default number of bootstrap records.
DEFAULT_BOOTSTRAP = 200
