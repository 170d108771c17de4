"""sensormodel: inertial-sensor noise models with units checked at every step.

Datasheet → noise model → theory (PSD, Allan deviation, state space), simulation, Allan analysis
of recordings, identification and acceptance. See README.md and DEVELOPERS.md.

The names here are the Python API of DESIGN §7. ``sensormodel.simulate`` is the *function*
(:func:`sensormodel.simulate.simulate`); the simulation package's other names are imported from
it by name (``from sensormodel.simulate import Simulator, write_record``).
"""

from . import errors as _errors
from ._version import __version__
from .convert import build_model
from .datasheet import load_datasheet
from .errors import *  # noqa: F403 - the exception hierarchy, re-exported whole
from .model import Channel, NoiseModel
from .recording import read_recording
from .simulate import simulate

__all__ = [
    "__version__",
    "load_datasheet",
    "build_model",
    "simulate",
    "read_recording",
    "NoiseModel",
    "Channel",
    *_errors.__all__,
]
