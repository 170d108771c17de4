"""Recordings: read and write CSV/TSV, NPY, NPZ, HDF5, Parquet and Feather records, read ROS
bags; time base, gaps and units.

:func:`read_recording` turns a recording file into a :class:`Recording`: one float64 array per
channel in SI (rad/s, m/s², or the recorded unit when the file gives none), the sample rate, the
start time, the problems found (:class:`Finding`) and the clean stretches to analyse
(:class:`Segment`). :func:`open_writer` streams SI samples into any of the formats so that
:func:`read_recording` reads them back without options.

Formats
-------
CSV / TSV (``.csv``, ``.tsv``, ``.txt``)
    Comment lines starting with ``#`` may come before the header. The header names each column
    and may give its unit in brackets: ``time [s],gyro_x [deg/s],acc_z [mg]``. The delimiter
    (``,``, tab or ``;``) is found from the header and the first data row (``.tsv`` is always
    tab). A file whose first line is all numbers has no header; its columns are ``ch0``, ``ch1``…
    An empty field, ``nan`` or a blank line is a missing sample (reported, never filled). Three
    comment settings are read, as :func:`open_writer` writes them::

        # sensormodel rate = 400 Hz          (sample rate when there is no time column)
        # sensormodel increments = true      (samples are increments per sample period)
        # sensormodel start_time = 12.5 s    (time of the first sample, no time column)

NPY (``.npy``)
    A 1-D (one channel) or 2-D (samples × columns) array, memory-mapped (``mmap_mode="r"``), so
    a large record is not loaded. Column names, units and the rate travel in a JSON *sidecar*
    named after the whole file name, ``rec.npy.json``::

        {"schema": "sensormodel/recording/1", "rate": 400.0, "increments": false,
         "start_time": 0.0, "columns": [{"name": "time", "unit": "s"},
                                         {"name": "gyro.x", "unit": "rad/s"}]}

    Without a sidecar the columns are ``ch0``, ``ch1``… "as recorded" and ``rate`` is needed.
NPZ (``.npz``)
    One 1-D array per column, by name; a ``time`` array or a 0-d ``rate`` array [Hz]; the same
    JSON as the NPY sidecar may sit in a 0-d string array named ``_sensormodel``. Uncompressed
    entries are memory-mapped.
HDF5 (``.h5``, ``.hdf5``; needs the optional ``h5py``: ``pip install sensormodel[hdf5]``)
    One 1-D dataset per column (nested groups allowed; the last path part is the name), a
    ``unit`` attribute on each, a ``rate`` attribute [Hz] on the file or the datasets.
    Contiguous uncompressed float64 datasets are memory-mapped.
Parquet (``.parquet``, ``.pq``), Feather / Arrow IPC (``.feather``, ``.arrow``, ``.ipc``)
    One numeric field per column; its unit in the ``unit`` field metadata or in its name
    (``gyro_x [deg/s]``); a timestamp field is a time column (epoch nanoseconds); the metadata
    JSON in the schema metadata key ``sensormodel``, or a ``rate`` key [Hz].
ROS bags (``.bag`` ROS 1; a ROS 2 bag folder, ``.db3`` or ``.mcap``; needs the optional
``rosbags``: ``pip install sensormodel[bags]``)
    One ``sensor_msgs/Imu`` topic (``topic=`` when there are several): ``time`` from the header
    stamps, ``gyro.x/y/z`` from ``angular_velocity`` [rad/s], ``accelerometer.x/y/z`` from
    ``linear_acceleration`` [m/s²]. Messages are named by their index (``message 17``).

Channels and units (DESIGN §10)
-------------------------------
A column whose name equals a channel id (``gyro.x``, ``gyro_x``, ``GYRO_X``: ``.`` and ``_``
alike, case ignored) or is one of the common spellings of logger output (an instrument word,
the axis, optionally a unit or ``raw``: ``gx``, ``GyroX``, ``wx``, ``rate_x``, ``omega_x``,
``delta_angle_x``; ``accel_x``, ``acc_x``, ``ax``, ``dv_x``; ``gx_raw``, ``acc_z_mg``) is that
channel; ``channel_map={"COLUMN": "gyro.x"}`` maps any other (:func:`parse_channel_map` reads
it from ``COLUMN=CHANNEL_ID`` option values).

Analysed columns: those ``columns`` selects and those ``channel_map`` names; by default the
columns that map to a channel id, or, when none does (``ch0``, ``ch1`` … of a bare array),
every column that is not auxiliary by its name or unit. Every other column but time is
**auxiliary**: temperature (``temp``, ``temperature``, a unit ``degC``), status, flags,
counters, sequence numbers, and whatever ``auxiliary`` names. Auxiliary columns are read and
kept in ``Recording.auxiliary`` (values × the scale their unit carries, in that unit), never
checked for problems and never cut by ``gaps``; a text column (a status word) is left unread.

A header field gives its unit in brackets, parentheses or braces (``gyro_x [deg/s]``,
``GyroX(dps)``), a name may end in one (``acc_z_mg``), ``unit`` gives one for all analysed
columns without one, or one per column (overriding the file, noted). A unit may carry the
value of one count: ``8.75 mdps``, ``0.00875 deg/s``, ``0.00875 deg/s/LSB``, ``3.33 mg``,
``0.1 degC``; integer counts of any width are read exactly (float64 holds every integer up
to 2**53) and a note gives one count's SI value. When every instrument column's unit is an
angle or a velocity, the samples are increments (noted).
Columns that map to no channel keep their name as id. A gyro column's unit must be an angular
rate (an angle with ``increments``), an accelerometer column's an acceleration (a velocity with
``increments``); there ``g``, ``mg``, ``µg`` are standard gravity. An unmapped column's kind is
inferred from its unit among angular rate, acceleration, angle and velocity; any other unit
(``degC``, ``LSB``) and a column with no unit are kept *as recorded*: values unchanged, unit
label as written (``1`` when there is none), so results stay in that unit.

Time base and problems
----------------------
The rate comes from a time column, from the file (sidecar, attribute, comment setting) or from
``rate``; two sources must agree within a relative 1e-6. The time column is the one column named
like one (``time``, ``t``, ``ts``, ``timestamp``, ``stamp``, ``epoch`` …, optionally ending in
its unit: ``time_s``, ``ts_ms``, ``time_us``, ``timestamp_ns``), or the one ``time`` names
(``time=False``: none). Its unit: the header's, else ``time_unit``, else its name's; ``s``,
``ms``, ``us``, ``ns``, a tick (``25 us``), ``epoch`` (seconds) or ``iso8601`` (text such as
``2024-05-01T12:00:00.125Z``, also found from the first row). Integer and epoch stamps are
taken relative to the first, so their steps stay exact. From a time column the rate is the
number of regular steps over their total duration.
Problems are found and reported with their position, never filled or dropped silently:

* ``gap``: a time step larger than 1.5 × the median step;
* ``non_monotonic``: time going backwards; ``duplicate_time``: a time equal to the previous one;
* ``non_finite``: NaN, an empty field or ±inf (in the time column or a data column);
* ``constant``: at least ``constant_run`` identical consecutive samples (a stuck sensor);
* ``saturated``: at least ``saturation_run`` consecutive samples at the column's maximum or
  minimum (clipping at full scale).

With ``gaps="fail"`` (default) the first of them raises :class:`RecordingError` naming the file
and the line; with ``gaps="split"`` the recording is cut at them into clean segments per channel
(segments shorter than ``min_segment`` samples are dropped and reported).

Positions: a :class:`Finding`'s ``position`` is the 0-based sample index. Messages of text files
name **file lines as an editor shows them: 1-based, counting the header and any comment lines
above it** (with a one-line header and no comments, the first sample is line 2). Messages of
binary files name the 0-based sample ``index``.

Increments
----------
With ``increments=True`` each sample is the angle (velocity) increment over its sample period;
it is converted to the mean rate over that period by dividing by the nominal period 1/rate (not
by each time step, so timestamp jitter does not enter the data). The returned data are rates
(rad/s, m/s²); ``Recording.increments`` says that the file held increments; multiply by
``1/rate`` to get them back.

CSV speed and the cache
-----------------------
CSV text is parsed with ``pyarrow.csv`` when it is importable, in pieces of 64 MiB. A piece
pyarrow cannot read (every piece when pyarrow is missing) goes to ``numpy.loadtxt``, and a piece
that refuses too to the pure-Python reader, which decides: it accepts what the other two accept
with identical numbers (and a little more: blank lines and blank fields as missing samples,
quoted numbers), and it names the exact line and column of anything it cannot read.

Files of at least ``CACHE_MIN_BYTES`` (8 MiB) are converted once into raw float64 column files
(memory-mapped on later reads) in a cache folder keyed by the file's absolute path, size and
modification time: ``$SENSORMODEL_CACHE`` if set, else ``$XDG_CACHE_HOME/sensormodel/csv``
(default ``~/.cache/sensormodel/csv``). ``SENSORMODEL_CACHE=off`` or ``cache=False`` disables it;
``cache=True`` caches any size; the folder can be deleted at any time.

Modules
-------
Everything but the names below is private to the package: ``_formats`` (the format table,
stated-rate check), ``_sources`` (NPY, NPZ, HDF5) and ``_csv`` (text layout, the three
engines) with ``_cache``; ``_arrow`` (Parquet, Feather); ``_bags`` (ROS bags); ``_stamps``
(ISO-8601 stamps, text columns); ``_columns`` (channel names, time column, auxiliary columns,
selection, units with a scale, unit plans);
``_timebase`` (time base, findings, fail or split); ``_results`` (:class:`Recording`,
:class:`Finding`, :class:`Segment`); ``_reader`` (:func:`read_recording`, step by step);
``_writers`` (:func:`open_writer`).
"""

from __future__ import annotations

from ._cache import (
    CACHE_MAX_BYTES,
    CACHE_MIN_BYTES,
    cache_entries,
    cache_folder,
    cache_limit,
    prune_cache,
)
from ._columns import CHANNEL_IDS, TIME_COLUMN_NAMES, channel_id_for, parse_channel_map
from ._formats import RATE_RTOL, SUFFIXES, format_of
from ._reader import read_recording
from ._results import Finding, Recording, Segment
from ._timebase import GAP_FACTOR
from ._writers import RecordingWriter, open_writer

__all__ = [
    "CHANNEL_IDS",
    "TIME_COLUMN_NAMES",
    "SUFFIXES",
    "CACHE_MIN_BYTES",
    "GAP_FACTOR",
    "RATE_RTOL",
    "Finding",
    "Segment",
    "Recording",
    "read_recording",
    "channel_id_for",
    "parse_channel_map",
    "cache_folder",
    "cache_entries",
    "cache_limit",
    "prune_cache",
    "CACHE_MAX_BYTES",
    "RecordingWriter",
    "open_writer",
    "format_of",
]
