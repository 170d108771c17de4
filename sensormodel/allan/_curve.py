"""The Allan-deviation curve of one channel and its files (JSON of DESIGN §5, CSV) (private to
:mod:`sensormodel.allan`)."""

from __future__ import annotations

import csv
import io
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from .. import validate
from .._io import validate as validate_schema
from ..confidence import DEFAULT_CONFIDENCE, NOISE_ALPHAS
from ..errors import AnalysisError, ModelFileError, SensorModelError

__all__ = [
    "SCHEMA_ID",
    "SCHEMA_FILE",
    "CSV_HEADER",
    "AllanCurve",
    "curves_to_json",
    "curves_from_json",
    "csv_rows",
    "curves_to_csv",
    "curves_from_csv",
]

#: Identifier written in the ``schema`` field of an Allan-curve JSON document (DESIGN §5).
SCHEMA_ID = "sensormodel/allan-curve/1"
#: The JSON Schema file of that document in ``schemas/``.
SCHEMA_FILE = "allan-curve.schema.json"


# ---------------------------------------------------------------------------------------------
# The result
# ---------------------------------------------------------------------------------------------


def _frozen(a: Any, dtype: Any, name: str) -> np.ndarray:
    try:
        arr = np.array(a, dtype=dtype)
    except (TypeError, ValueError):
        raise AnalysisError(f"got {a!r}", "a list of numbers", field=name) from None
    if arr.ndim != 1:
        raise AnalysisError(f"got shape {arr.shape}", "a 1-D list of numbers", field=name)
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True, eq=False, kw_only=True)
class AllanCurve:
    """An overlapping Allan-deviation curve of one channel, with confidence intervals.

    Attributes
    ----------
    tau : ndarray
        Averaging times [s], increasing, each a whole number of sample periods.
    adev : ndarray
        Overlapping Allan deviation [``unit``].
    ci_low, ci_high : ndarray
        Chi-square confidence interval of the deviation at ``confidence`` [``unit``].
    edf : ndarray
        Equivalent degrees of freedom used for the interval [-].
    sample_rate : float
        Sample rate of the record [Hz].
    confidence : float
        Two-sided confidence of the interval (default 0.683, one sigma).
    unit : str
        Label of the unit of the samples and of the deviations (display only; "1" when the
        record has none).
    channel : str
        Channel id (e.g. ``gyro.x``).
    n_samples : int or None
        Number of rate samples n in the record (N = n + 1 phase points).
    n_clusters : ndarray of int or None
        Number of overlapping second differences in the sum at each τ, N − 2m = n + 1 − 2m.
    noise_alpha : ndarray of int or None
        Power-law exponent α of the rate PSD used for the EDF at each τ (identified or given).
    """

    tau: npt.NDArray[np.float64]
    adev: npt.NDArray[np.float64]
    ci_low: npt.NDArray[np.float64]
    ci_high: npt.NDArray[np.float64]
    edf: npt.NDArray[np.float64]
    sample_rate: float
    confidence: float = DEFAULT_CONFIDENCE
    unit: str = "1"
    channel: str = "signal"
    n_samples: int | None = None
    n_clusters: npt.NDArray[np.int64] | None = None
    noise_alpha: npt.NDArray[np.int64] | None = None

    def __post_init__(self) -> None:
        put = object.__setattr__
        for name in ("tau", "adev", "ci_low", "ci_high", "edf"):
            put(self, name, _frozen(getattr(self, name), np.float64, name))
        for name in ("n_clusters", "noise_alpha"):
            if getattr(self, name) is not None:
                put(self, name, _frozen(getattr(self, name), np.int64, name))
        k = self.tau.shape[0]
        if k == 0:
            raise AnalysisError("got no τ", "at least one τ", field="tau")
        for name in ("adev", "ci_low", "ci_high", "edf", "n_clusters", "noise_alpha"):
            a = getattr(self, name)
            if a is not None and a.shape[0] != k:
                raise AnalysisError(
                    f"has {a.shape[0]} values for {k} τ", "one value per τ", field=name
                )
            if a is not None and not np.all(np.isfinite(a)):
                raise AnalysisError("has a non-finite value", "finite numbers", field=name)
        if not np.all(np.isfinite(self.tau)) or np.any(self.tau <= 0.0):
            raise AnalysisError("has a τ ≤ 0 or non-finite", "τ > 0 s", field="tau")
        if np.any(np.diff(self.tau) <= 0.0):
            raise AnalysisError("is not strictly increasing", "increasing τ", field="tau")
        if np.any(self.adev < 0.0):
            raise AnalysisError("has a negative value", "deviations ≥ 0", field="adev")
        if np.any(self.ci_low > self.adev) or np.any(self.ci_high < self.adev):
            raise AnalysisError(
                "does not contain the deviation", "ci_low ≤ adev ≤ ci_high", field="ci_low"
            )
        if np.any(self.edf <= 0.0):
            raise AnalysisError("has a value ≤ 0", "degrees of freedom > 0", field="edf")
        put(self, "sample_rate", validate.rate(self.sample_rate, "sample_rate"))
        put(
            self, "confidence", validate.probability(self.confidence, "confidence", example="0.683")
        )
        if not isinstance(self.unit, str) or not isinstance(self.channel, str) or not self.channel:
            raise AnalysisError(
                f"got unit={self.unit!r}, channel={self.channel!r}",
                "text labels (a non-empty channel id)",
                field="channel",
            )
        if self.n_samples is not None:
            if isinstance(self.n_samples, bool) or int(self.n_samples) != self.n_samples:
                raise AnalysisError(f"got {self.n_samples!r}", "a whole number", field="n_samples")
            put(self, "n_samples", int(self.n_samples))
            if self.n_samples < 3:
                raise AnalysisError(f"got {self.n_samples}", "at least 3", field="n_samples")
        if self.noise_alpha is not None and not set(self.noise_alpha.tolist()) <= set(NOISE_ALPHAS):
            raise AnalysisError(
                f"got {sorted(set(self.noise_alpha.tolist()))}",
                "exponents in {2, 1, 0, -1, -2}",
                field="noise_alpha",
            )

    # -- derived quantities ------------------------------------------------------------------

    @property
    def variance(self) -> npt.NDArray[np.float64]:
        """Overlapping Allan variance [``unit``²]."""
        return self.adev**2

    @property
    def m(self) -> npt.NDArray[np.int64]:
        """Averaging factors m = τ·rate [-]."""
        return np.rint(self.tau * self.sample_rate).astype(np.int64)

    @property
    def n_independent(self) -> npt.NDArray[np.int64] | None:
        """Number of non-overlapping clusters ⌊n/m⌋ at each τ (None if n is unknown)."""
        if self.n_samples is None:
            return None
        return self.n_samples // self.m

    @property
    def duration(self) -> float | None:
        """Record length n/rate [s] (None if n is unknown)."""
        return None if self.n_samples is None else self.n_samples / self.sample_rate

    # -- files -------------------------------------------------------------------------------

    def to_dict(self) -> dict[str, Any]:
        """The channel entry of the Allan-curve JSON document (DESIGN §5), SI values."""
        out: dict[str, Any] = {
            "id": self.channel,
            "unit": self.unit,
            "sample_rate": self.sample_rate,
            "confidence": self.confidence,
            "tau": self.tau.tolist(),
            "adev": self.adev.tolist(),
            "ci_low": self.ci_low.tolist(),
            "ci_high": self.ci_high.tolist(),
            "edf": self.edf.tolist(),
        }
        if self.n_samples is not None:
            out["n_samples"] = self.n_samples
        if self.n_clusters is not None:
            out["n_clusters"] = self.n_clusters.tolist()
        if self.noise_alpha is not None:
            out["noise_alpha"] = self.noise_alpha.tolist()
        return out

    @classmethod
    def from_dict(cls, data: Mapping[str, Any], *, source: str | None = None) -> AllanCurve:
        """Build a curve from a channel entry of the Allan-curve JSON (see :meth:`to_dict`)."""
        if not isinstance(data, Mapping):
            raise ModelFileError(
                f"got {type(data).__name__}", "an object with the channel's curve", source=source
            )
        missing = [k for k in _REQUIRED if k not in data]
        if missing:
            raise ModelFileError(
                f"missing {', '.join(missing)}",
                f"the keys {', '.join(_REQUIRED)}",
                source=source,
                field=str(data.get("id", "channel")),
            )
        try:
            return cls(
                channel=data["id"],
                unit=data["unit"],
                sample_rate=data["sample_rate"],
                confidence=data["confidence"],
                tau=data["tau"],
                adev=data["adev"],
                ci_low=data["ci_low"],
                ci_high=data["ci_high"],
                edf=data["edf"],
                n_samples=data.get("n_samples"),
                n_clusters=data.get("n_clusters"),
                noise_alpha=data.get("noise_alpha"),
            )
        except SensorModelError as exc:
            cid = str(data.get("id"))
            raise ModelFileError(
                exc.problem,
                exc.expected,
                source=source,
                field=f"{cid}.{exc.field}" if exc.field else cid,
            ) from None


_REQUIRED = ("id", "unit", "sample_rate", "tau", "adev", "ci_low", "ci_high", "edf", "confidence")


# ---------------------------------------------------------------------------------------------
# JSON and CSV
# ---------------------------------------------------------------------------------------------


def curves_to_json(curves: AllanCurve | Iterable[AllanCurve]) -> dict[str, Any]:
    """The Allan-curve JSON document (DESIGN §5) of one or more channels.

    Write it with ``sensormodel._io.write_json(path, doc, schema=SCHEMA_FILE)``.
    """
    items = [curves] if isinstance(curves, AllanCurve) else list(curves)
    if not items:
        raise AnalysisError("got no curves", "at least one AllanCurve", field="curves")
    ids = [c.channel for c in items]
    dup = sorted({i for i in ids if ids.count(i) > 1})
    if dup:
        raise AnalysisError(
            f"channel id {dup[0]!r} appears more than once",
            "one curve per channel id",
            field="curves",
        )
    return {"schema": SCHEMA_ID, "channels": [c.to_dict() for c in items]}


def curves_from_json(data: Any, *, source: str | None = None) -> list[AllanCurve]:
    """Curves from an Allan-curve JSON document (as read by ``json.load``).

    The document is checked against ``schemas/allan-curve.schema.json``; an unknown ``schema``
    version is refused by name.
    """
    if not isinstance(data, Mapping):
        raise ModelFileError(
            f"got {type(data).__name__}",
            "a JSON object with 'schema' and 'channels'",
            source=source,
        )
    found = data.get("schema")
    if found != SCHEMA_ID:
        raise ModelFileError(
            f"unknown schema {found!r}", f"'{SCHEMA_ID}'", source=source, field="schema"
        )
    validate_schema(data, SCHEMA_FILE, source=source)
    return [AllanCurve.from_dict(ch, source=source) for ch in data["channels"]]


#: CSV columns, one row per τ and channel.
CSV_HEADER = (
    "id",
    "unit",
    "sample_rate [Hz]",
    "confidence",
    "tau [s]",
    "adev",
    "ci_low",
    "ci_high",
    "edf",
    "n_clusters",
    "noise_alpha",
)


def csv_rows(curves: AllanCurve | Iterable[AllanCurve]) -> list[list[str]]:
    """Header and one row per τ (and channel) as text fields; deviations in the ``unit`` column.

    Numbers are written with ``repr`` (shortest round-trip form); missing optional values are
    empty fields.
    """
    items = [curves] if isinstance(curves, AllanCurve) else list(curves)
    rows = [list(CSV_HEADER)]
    for c in items:
        for k in range(c.tau.shape[0]):
            rows.append(
                [
                    c.channel,
                    c.unit,
                    repr(c.sample_rate),
                    repr(c.confidence),
                    repr(float(c.tau[k])),
                    repr(float(c.adev[k])),
                    repr(float(c.ci_low[k])),
                    repr(float(c.ci_high[k])),
                    repr(float(c.edf[k])),
                    "" if c.n_clusters is None else str(int(c.n_clusters[k])),
                    "" if c.noise_alpha is None else str(int(c.noise_alpha[k])),
                ]
            )
    return rows


def curves_to_csv(curves: AllanCurve | Iterable[AllanCurve]) -> str:
    """The CSV text of :func:`csv_rows` (write it through ``sensormodel._io.atomic_writer``)."""
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerows(csv_rows(curves))
    return out.getvalue()


def curves_from_csv(text: str, *, source: str | None = None) -> list[AllanCurve]:
    """Curves from the CSV text of :func:`curves_to_csv` (``n_samples`` is not in the CSV)."""
    reader = csv.reader(io.StringIO(text))
    header = next(reader, None)
    if header is None or tuple(h.strip() for h in header) != CSV_HEADER:
        raise ModelFileError(
            f"header {header!r}",
            f"the columns {', '.join(CSV_HEADER)}",
            source=source,
            field="line 1",
        )
    groups: dict[str, list[list[str]]] = {}
    for lineno, row in enumerate(reader, start=2):
        if not row:
            continue
        if len(row) != len(CSV_HEADER):
            raise ModelFileError(
                f"{len(row)} fields",
                f"{len(CSV_HEADER)} fields",
                source=source,
                field=f"line {lineno}",
            )
        groups.setdefault(row[0], []).append(row + [str(lineno)])
    curves = []
    for cid, rows in groups.items():
        try:
            col = list(zip(*rows, strict=True))
            first = rows[0]

            def opt(j: int, col: list[Any] = col) -> list[int] | None:
                return None if any(v == "" for v in col[j]) else [int(v) for v in col[j]]

            curves.append(
                AllanCurve(
                    channel=cid,
                    unit=first[1],
                    sample_rate=float(first[2]),
                    confidence=float(first[3]),
                    tau=[float(v) for v in col[4]],
                    adev=[float(v) for v in col[5]],
                    ci_low=[float(v) for v in col[6]],
                    ci_high=[float(v) for v in col[7]],
                    edf=[float(v) for v in col[8]],
                    n_clusters=opt(9),
                    noise_alpha=opt(10),
                )
            )
        except ValueError as exc:
            raise ModelFileError(
                f"channel {cid}: {exc}",
                "numbers in the numeric columns",
                source=source,
                field=f"line {rows[0][-1]}",
            ) from None
    return curves
