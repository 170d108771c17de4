"""The quality of imperfect static records: warm-up, temperature, steps and spikes.

Real static records are not the stationary noise the Allan analysis assumes: the bias settles
after power-on, follows the temperature, jumps when the table is bumped, and spikes. This
package finds each with a stated rule, gives its numbers and reason codes, and prepares the
record for the Allan analysis on request (a trim, the linear temperature effect removed, spikes
and steps excluded as short gaps, to be pooled by :func:`sensormodel.allan.overlapping_pooled`).

* :func:`detect_settling` / :func:`settling_trim`: window means against the final level,
  judged with σ_A(window) of the noise model (or of the record's second half), Bonferroni
  threshold, exponential fit; the settling time is where the fitted transient falls to
  ``criterion``·σ_A (``_settling``).
* :func:`temperature_sensitivity` / :func:`remove_temperature`: least-squares slope of the
  channel's window means on the temperature's, its interval from the noise model's variogram
  (exact for correlated noise) or the variogram estimated from the record (``_temperature``).
* :func:`detect_events` / :func:`exclusion_mask` / :func:`clean_segments`: a jump and a
  jump back (robust scale of the first differences) for spikes, the two-window mean test
  (normalized by the Allan deviation at the window) for steps, Bonferroni thresholds
  (``_events``).
* :func:`assess` → :class:`RecordQuality`: all three on one channel (``_record``).

Computation is in the channel's unit (SI from a :class:`~sensormodel.recording.Recording`);
temperatures in °C or K (a sensitivity per K is per °C). Results carry numbers and reason
codes, never sentences (:data:`sensormodel.report.REASONS` has them).
"""

from ._events import (
    DEFAULT_STEP_WINDOW,
    SPIKE_HALF_WIDTH,
    Event,
    Events,
    clean_segments,
    detect_events,
    exclusion_mask,
)
from ._record import RecordQuality, assess
from ._settling import DEFAULT_SETTLING_WINDOW, Settling, detect_settling, settling_trim
from ._temperature import (
    DEFAULT_TEMPERATURE_WINDOWS,
    TemperatureEffect,
    remove_temperature,
    temperature_sensitivity,
    window_variogram,
)
from ._windows import MAD_TO_SIGMA

__all__ = [
    "assess",
    "RecordQuality",
    "detect_settling",
    "settling_trim",
    "Settling",
    "temperature_sensitivity",
    "remove_temperature",
    "window_variogram",
    "TemperatureEffect",
    "detect_events",
    "exclusion_mask",
    "clean_segments",
    "Event",
    "Events",
    "DEFAULT_SETTLING_WINDOW",
    "DEFAULT_STEP_WINDOW",
    "DEFAULT_TEMPERATURE_WINDOWS",
    "SPIKE_HALF_WIDTH",
    "MAD_TO_SIGMA",
]
