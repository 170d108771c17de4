"""sensormodel: inertial-sensor noise models with units checked at every step.

Datasheet → noise model → theory (PSD, Allan deviation, state space), simulation, Allan analysis
of recordings, identification and acceptance. See README.md and DEVELOPERS.md.
"""

from .datasheet import load_datasheet
from .errors import (
    AnalysisError,
    DatasheetError,
    ModelFileError,
    RecordingError,
    SensorModelError,
    UnitError,
)
from .model import Channel, NoiseModel

__version__ = "0.1.0"

__all__ = [
    "__version__",
    "load_datasheet",
    "NoiseModel",
    "Channel",
    "SensorModelError",
    "UnitError",
    "DatasheetError",
    "ModelFileError",
    "RecordingError",
    "AnalysisError",
]
