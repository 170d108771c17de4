"""A coloured spectrum → a shaping filter H(s) → a noise model holding it as a ``shaped`` term.

Three sources of a spectrum, one result:

* a TOML file with a ``[spectrum]`` table, S(ω) = N(ω²)/D(ω²) (two-sided per hertz, ω in
  rad/s, coefficients highest power first), factored exactly by
  :func:`sensormodel.spectrum.factorize`;
* a CSV of frequency [Hz] and PSD [unit²/Hz], fitted by a rational PSD of given orders
  (:func:`sensormodel.spectrum.fit_rational_psd`, least squares in log scale);
* a recording: the one-sided Welch PSD (:func:`sensormodel.spectrum.welch`) of the analysed
  segment of one channel (:func:`sensormodel.pipeline.analysed_segment`, the one segment
  policy), fitted the same way.

The term is driven by unit-intensity white noise (two-sided PSD 1 per hertz), so the output's
two-sided PSD is |H(j2πf)|². :func:`shape` assembles the model (a new one-channel model with its
provenance, or the term added to a channel of a given model); the command line prints it.

References
----------
.. [1] Brown, R. G., Hwang, P. Y. C., *Introduction to Random Signals and Applied Kalman
   Filtering*, 4th ed., Wiley 2012 (shaping filters and spectral factorization).
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from .datasheet import check_keys
from .errors import AnalysisError, DatasheetError, RecordingError
from .model import Channel, NoiseModel
from .pipeline import analysed_segment
from .quantities import INSTRUMENT_KIND, SI_LABEL, parse_quantity
from .spectrum import (
    RationalFit,
    ShapingFilter,
    factorize,
    fit_rational_psd,
    omega_polynomial_to_omega2,
    shaped_term,
    welch,
)

__all__ = [
    "DEFAULT_CHANNEL",
    "SHAPED_PSD_CONVENTION",
    "SpectrumTable",
    "ShapeResult",
    "read_spectrum_table",
    "read_spectrum_csv",
    "recording_spectrum",
    "shape",
]

#: Channel id of the term when neither the caller nor the spectrum file names one.
DEFAULT_CHANNEL = "gyro.z"

#: The PSD convention written into a model made of a shaped term.
SHAPED_PSD_CONVENTION = (
    "shaped: unit-intensity white noise (two-sided PSD 1 per hertz) through H(s); output "
    "two-sided PSD |H(j2πf)|²"
)

_TABLE_KEYS = sorted(
    ["numerator", "denominator", "numerator_omega", "denominator_omega", "channel", "sample_rate",
     "name"]
)


@dataclass(frozen=True)
class SpectrumTable:
    """The ``[spectrum]`` table of a rational-PSD file.

    Attributes
    ----------
    numerator, denominator : list of float
        Coefficients of N(ω²) and D(ω²), highest power first (S(ω) = N/D, two-sided per hertz
        in the channel's SI unit²/Hz).
    channel : str or None
        Channel id the file names.
    sample_rate : float or None
        Output rate the file names [Hz].
    name : str or None
        Sensor name the file gives.
    """

    numerator: list[float]
    denominator: list[float]
    channel: str | None = None
    sample_rate: float | None = None
    name: str | None = None


@dataclass(frozen=True)
class ShapeResult:
    """What :func:`shape` made.

    Attributes
    ----------
    model : NoiseModel
        The model to save (a new one-channel model, or the given model with the term added).
    channel : str
        Channel id holding the shaped term.
    filter : ShapingFilter
        H(s), stable, minimum phase.
    term : Shaped
        The term added.
    fit : RationalFit or None
        The fit to a measured spectrum (None for an exact factorization).
    """

    model: NoiseModel
    channel: str
    filter: ShapingFilter
    term: Any
    fit: RationalFit | None


def read_spectrum_table(path: str) -> SpectrumTable:
    """Read the ``[spectrum]`` table of a rational-PSD TOML file.

    Parameters
    ----------
    path : str
        The TOML file. ``numerator`` / ``denominator`` are in ω² (highest power first);
        ``numerator_omega`` / ``denominator_omega`` are in ω (even powers only) and converted.

    Returns
    -------
    SpectrumTable

    Raises
    ------
    DatasheetError
        Not TOML, no table, an unknown key, a part missing or given twice.
    AnalysisError
        A polynomial in ω with odd powers (located at the file and key).
    """
    try:
        with open(path, "rb") as fh:
            data = tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise DatasheetError(f"not valid TOML ({exc})", "a [spectrum] table", source=path) from None
    table = data.get("spectrum")
    if not isinstance(table, dict):
        raise DatasheetError(
            "no [spectrum] table",
            "a [spectrum] table with numerator and denominator (in ω²) or numerator_omega and "
            "denominator_omega",
            source=path,
            field="spectrum",
        )
    check_keys(table, _TABLE_KEYS, "spectrum", path)
    num, den = (_table_polynomial(table, part, path) for part in ("numerator", "denominator"))
    rate = None
    if "sample_rate" in table:
        rate = parse_quantity(
            table["sample_rate"],
            "frequency",
            field="spectrum.sample_rate",
            source=path,
            allow_zero=False,
        )
    return SpectrumTable(num, den, table.get("channel"), rate, table.get("name"))


def _table_polynomial(table: dict[str, Any], part: str, path: str) -> list[float]:
    """``part`` (numerator or denominator) of the table in ω², from either of its two keys."""
    if part in table and f"{part}_omega" in table:
        raise DatasheetError(
            f"both {part} and {part}_omega", "one of the two", source=path, field=f"spectrum.{part}"
        )
    if f"{part}_omega" in table:
        try:
            return omega_polynomial_to_omega2(table[f"{part}_omega"], name=f"{part}_omega")
        except AnalysisError as exc:
            raise exc.located(source=path, field=f"spectrum.{part}_omega") from None
    if part not in table:
        raise DatasheetError(
            f"no {part}",
            f"{part} = [coefficients in ω², highest first]",
            source=path,
            field=f"spectrum.{part}",
        )
    return table[part]


def read_spectrum_csv(path: str) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """Frequency [Hz] and PSD [unit²/Hz] columns of a two-column text file.

    Commas, semicolons or tabs separate the columns; blank lines and ``#`` comments are skipped;
    lines before the first pair of numbers are a header.

    Raises
    ------
    RecordingError
        A line after the header that is not two numbers, or fewer than 3 lines of data.
    """
    rows_f, rows_p = [], []
    with open(path, encoding="utf-8") as fh:
        for lineno, line in enumerate(fh, start=1):
            text = line.strip()
            if not text or text.startswith("#"):
                continue
            parts = [p for p in text.replace(";", ",").replace("\t", ",").split(",") if p.strip()]
            try:
                f, p = float(parts[0]), float(parts[1])
            except (ValueError, IndexError):
                if not rows_f:  # a header
                    continue
                raise RecordingError(
                    f"cannot read '{text}' as frequency, PSD",
                    "two numbers per line",
                    source=path,
                    field=f"line {lineno}",
                ) from None
            rows_f.append(f)
            rows_p.append(p)
    if len(rows_f) < 3:
        raise RecordingError(
            f"{len(rows_f)} data lines", "at least 3 lines of frequency, PSD", source=path
        )
    return np.array(rows_f), np.array(rows_p)


def recording_spectrum(
    recording: Any, channel: str
) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """One-sided Welch PSD of a recording's channel, without the zero frequency.

    Parameters
    ----------
    recording : Recording
        From :func:`sensormodel.recording.read_recording`.
    channel : str
        Channel id; its analysed segment (the longest clean one) is used.

    Returns
    -------
    f : ndarray
        Frequencies [Hz] > 0.
    psd : ndarray
        One-sided PSD [unit²/Hz].
    """
    if channel not in recording.channels:
        raise AnalysisError(
            f"no channel '{channel}' in the recording",
            f"one of {', '.join(recording.channels)}",
            source=recording.source,
        )
    seg = analysed_segment(recording, channel)
    psd = welch(recording.data[channel][seg.start : seg.stop], recording.rate)
    return psd.f[1:], psd.psd[1:]


def shape(
    source: str,
    *,
    channel: str | None = None,
    rate: float | None = None,
    orders: tuple[int, int] = (0, 2),
    sided: str = "one-sided",
    recording: Any = None,
    add_to: NoiseModel | None = None,
) -> ShapeResult:
    """A noise model holding the shaped term of a spectrum.

    Parameters
    ----------
    source : str
        The spectrum file: a ``.toml`` rational PSD (factored exactly) or a CSV of frequency,
        PSD (fitted); with ``recording``, the recording's file name (for the provenance).
    channel : str, optional
        Channel id of the term (default: the file's ``channel``, the recording's first
        channel, else :data:`DEFAULT_CHANNEL`).
    rate : float, optional
        Output rate of a new channel [Hz] (default: the file's ``sample_rate`` or the
        recording's rate; not needed with ``add_to``).
    orders : (int, int)
        Numerator and denominator order of H(s) of a fit.
    sided : {"one-sided", "two-sided"}
        Sidedness of a CSV's PSD column (a recording's Welch PSD is one-sided).
    recording : Recording, optional
        Fit the Welch PSD of this recording's channel instead of reading ``source``.
    add_to : NoiseModel, optional
        Add the term to this model's channel instead of making a new model.

    Returns
    -------
    ShapeResult

    Raises
    ------
    AnalysisError
        No output rate for a new channel; a spectrum that cannot be factored or fitted.
    """
    fit = None
    name = None
    if recording is None and source.lower().endswith(".toml"):
        table = read_spectrum_table(source)
        try:
            filt = factorize(table.numerator, table.denominator)
        except AnalysisError as exc:
            raise exc.located(source=source, field="spectrum") from None
        channel = channel or table.channel
        rate = rate if rate is not None else table.sample_rate
        name = table.name
        meta: dict[str, Any] = {"origin": "spectral factorization"}
    else:
        if recording is not None:
            channel = channel or recording.channels[0]
            f, p = recording_spectrum(recording, channel)
            rate, sided = rate or recording.rate, "one-sided"
        else:
            f, p = read_spectrum_csv(source)
        fit = _fit(f, p, orders, sided, source)
        filt = fit.filter
        meta = {
            "origin": "rational fit to a measured spectrum",
            "fit": {
                "rms_db": fit.rms_db,
                "max_db": fit.max_db,
                "points": fit.n_points,
                "orders": list(orders),
            },
        }
    channel = channel or DEFAULT_CHANNEL
    term = shaped_term(filt, meta=meta)
    if add_to is not None:
        ch = add_to.channel(channel)
        model = add_to.with_channel(replace(ch, terms=(*ch.terms, term)))
    else:
        model = _new_model(term, channel, rate, name or f"shaped noise ({source})", source)
    return ShapeResult(model=model, channel=channel, filter=filt, term=term, fit=fit)


def _fit(f: Any, p: Any, orders: tuple[int, int], sided: str, source: str) -> RationalFit:
    n_ord, d_ord = orders
    try:
        return fit_rational_psd(f, p, numerator_order=n_ord, denominator_order=d_ord, sided=sided)
    except AnalysisError as exc:
        raise exc.located(source=source) from None


def _new_model(term: Any, channel: str, rate: float | None, name: str, source: str) -> NoiseModel:
    """A one-channel model of the shaped term, in the SI unit of the channel's instrument."""
    if rate is None:
        raise AnalysisError(
            "no output rate for the channel", "--rate HZ (or sample_rate in the [spectrum] table)"
        )
    quantity = INSTRUMENT_KIND.get(channel.split(".", 1)[0])
    unit = SI_LABEL[quantity] if quantity else "1"
    return NoiseModel(
        sensor={"name": name},
        channels=(
            Channel(
                id=channel,
                quantity=quantity or "as_recorded",
                unit=unit,
                sample_rate=rate,
                terms=(term,),
            ),
        ),
        provenance={"created_by": "sensormodel", "from": "spectrum", "spectrum": {"file": source}},
        conventions={"psd": SHAPED_PSD_CONVENTION},
    )
