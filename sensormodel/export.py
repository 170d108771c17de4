"""Export of a model's exact discrete matrices for filter teams (DESIGN §10, ``export``).

The document holds, per channel, the state names and Φ, Qd, H, R, P0 of
:func:`sensormodel.linear.discretize` at one step dt, with the meaning of R written in the file.
Three forms carry the same numbers:

* **JSON** (``schemas/discrete-model.schema.json``)::

    {"schema": "sensormodel/discrete-model/1", "dt": 0.01, "r_convention": "...",
     "state_convention": "...", "caution": "...",
     "channels": [{"id": "gyro.x", "unit": "rad/s", "states": [...], "phi": [[...]],
                   "qd": [[...]], "h": [[...]], "r": 1.2e-9, "p0": [[...]]}]}

* **NPZ** (``numpy.load``): scalars ``dt``, strings ``schema``, ``r_convention``,
  ``state_convention``, ``caution``, the array ``channels`` of ids, and per channel the arrays
  ``<id>/states``, ``<id>/phi``, ``<id>/qd``, ``<id>/h``, ``<id>/r``, ``<id>/p0``
  (e.g. ``data["gyro.x/phi"]``).
* **MAT** (MATLAB 5 format, ``scipy.io.savemat``; ``load`` in MATLAB/Simulink, Octave or
  ``scipy.io.loadmat``): ``dt``, ``schema``, ``r_convention``, ``state_convention``,
  ``caution``, ``channels`` (a cell array of ids) and one struct per channel named by its id
  with ``.`` → ``_`` (``gyro_x``), with the fields ``id``, ``states`` (cell array), ``phi``,
  ``qd``, ``h``, ``r``, ``p0`` (and ``unit``): the same names and numbers as the JSON.
* **CSV**, a long form readable by eye or any table tool: ``#`` comment lines with the schema,
  dt, conventions and caution, then one row per matrix entry with the columns
  ``channel, matrix, row, col, row_state, col_state, value`` (``matrix`` one of phi, qd, h, r,
  p0; H's row and R's row and column are named ``y``).

Caution: navigation-integrity use of these numbers follows the applicable standards and the
customer's contract.
"""

from __future__ import annotations

import csv
import io
import os
import pathlib
from collections.abc import Mapping
from typing import Any

import numpy as np

from ._io import atomic_path, atomic_writer, write_json
from .errors import AnalysisError
from .linear import DiscreteModel

__all__ = [
    "SCHEMA_ID",
    "FORMATS",
    "CAUTION",
    "STATE_CONVENTION",
    "discrete_document",
    "write_discrete",
    "mat_name",
]

#: Schema id of the exported discrete model.
SCHEMA_ID = "sensormodel/discrete-model/1"

#: The file forms :func:`write_discrete` writes.
FORMATS = ("json", "npz", "csv", "mat")

#: One-line caution written into every export and drift file.
CAUTION = (
    "Navigation-integrity use of these numbers follows the applicable standards and the "
    "customer's contract."
)

#: What the states and P0 mean (written into every export).
STATE_CONVENTION = (
    "x_(k+1) = phi x_k + w_k, cov(w_k) = qd; cov(x_0) = p0 (turn-on). States are in the channel "
    "unit, except ramp.slope (unit/s) and quantization.e[k], quantization.e[k-1] (unit*s, the "
    "error of the integrated output). Gauss-Markov and flicker.gm* states start stationary; "
    "random_walk and ramp.value start at 0; random_constant and ramp.slope carry their sigma^2."
)


def discrete_document(
    discrete: Mapping[str, DiscreteModel],
    *,
    units: Mapping[str, str] | None = None,
    sensor: Mapping[str, Any] | None = None,
) -> dict[str, Any]:
    """The JSON document of the discrete models of several channels.

    Parameters
    ----------
    discrete : mapping
        {channel id: DiscreteModel}, all at the same dt (e.g. from
        :meth:`sensormodel.NoiseModel.discretize`).
    units : mapping, optional
        {channel id: SI unit of the channel}, written beside each channel.
    sensor : mapping, optional
        The model's ``sensor`` block (name, model), written for traceability.

    Returns
    -------
    dict
        As described in the module docstring.
    """
    if not discrete:
        raise AnalysisError("no channels to export", "a model with at least one channel")
    dts = {d.dt for d in discrete.values()}
    conventions = {d.r_convention for d in discrete.values()}
    if len(dts) != 1 or len(conventions) != 1:
        raise AnalysisError(
            "channels discretized with different steps or R conventions",
            "one dt and one R convention per file",
        )
    doc: dict[str, Any] = {
        "schema": SCHEMA_ID,
        "dt": float(dts.pop()),
        "r_convention": conventions.pop(),
        "state_convention": STATE_CONVENTION,
        "caution": CAUTION,
    }
    if sensor:
        doc["sensor"] = {k: sensor[k] for k in ("name", "model") if k in sensor}
    channels = []
    for cid, d in discrete.items():
        entry: dict[str, Any] = {"id": cid}
        if units and cid in units:
            entry["unit"] = units[cid]
        entry.update(d.to_dict())
        channels.append(entry)
    doc["channels"] = channels
    return doc


def _npz_arrays(doc: Mapping[str, Any]) -> dict[str, np.ndarray]:
    arrays: dict[str, np.ndarray] = {
        "schema": np.array(doc["schema"]),
        "dt": np.array(doc["dt"], dtype=float),
        "r_convention": np.array(doc["r_convention"]),
        "state_convention": np.array(doc["state_convention"]),
        "caution": np.array(doc["caution"]),
        "channels": np.array([c["id"] for c in doc["channels"]]),
    }
    for c in doc["channels"]:
        n = len(c["states"])
        cid = c["id"]
        arrays[f"{cid}/states"] = np.array(c["states"], dtype=str)
        for key in ("phi", "qd", "p0"):
            arrays[f"{cid}/{key}"] = np.array(c[key], dtype=float).reshape(n, n)
        arrays[f"{cid}/h"] = np.array(c["h"], dtype=float).reshape(1, n)
        arrays[f"{cid}/r"] = np.array(c["r"], dtype=float)
    return arrays


def _csv_text(doc: Mapping[str, Any]) -> str:
    buf = io.StringIO()
    for key in ("schema", "dt", "r_convention", "state_convention", "caution"):
        label = "dt [s]" if key == "dt" else key
        value = repr(doc[key]) if key == "dt" else doc[key]
        buf.write(f"# {label}: {value}\n")
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(["channel", "matrix", "row", "col", "row_state", "col_state", "value"])
    for c in doc["channels"]:
        names = c["states"]
        for key in ("phi", "qd", "p0"):
            for i, row in enumerate(c[key]):
                for j, v in enumerate(row):
                    writer.writerow([c["id"], key, i, j, names[i], names[j], repr(float(v))])
        for j, v in enumerate(c["h"][0] if c["h"] else []):
            writer.writerow([c["id"], "h", 0, j, "y", names[j], repr(float(v))])
        writer.writerow([c["id"], "r", 0, 0, "y", "y", repr(float(c["r"]))])
    return buf.getvalue()


def mat_name(channel_id: str) -> str:
    """The MATLAB variable of a channel in a MAT export: its id with every character that a
    MATLAB name cannot hold replaced by ``_`` (``gyro.x`` → ``gyro_x``)."""
    name = "".join(c if c.isalnum() or c == "_" else "_" for c in channel_id)
    return name if name[:1].isalpha() else f"ch_{name}"


def _mat_variables(doc: Mapping[str, Any]) -> dict[str, Any]:
    out: dict[str, Any] = {
        key: doc[key] for key in ("schema", "dt", "r_convention", "state_convention", "caution")
    }
    ids = [c["id"] for c in doc["channels"]]
    out["channels"] = np.array(ids, dtype=object)
    names = [mat_name(cid) for cid in ids]
    if len(set(names)) != len(names) or set(names) & set(out):
        raise AnalysisError(
            f"channel ids {ids} do not make distinct MATLAB names",
            "channel ids that differ in letters or digits",
        )
    for c, name in zip(doc["channels"], names, strict=True):
        n = len(c["states"])
        entry: dict[str, Any] = {
            "id": c["id"],
            "states": np.array(c["states"], dtype=object),
            "h": np.array(c["h"], dtype=float).reshape(1, n),
            "r": float(c["r"]),
        }
        for key in ("phi", "qd", "p0"):
            entry[key] = np.array(c[key], dtype=float).reshape(n, n)
        if "unit" in c:
            entry["unit"] = c["unit"]
        out[name] = entry
    return out


def write_discrete(
    path: str | os.PathLike[str],
    doc: Mapping[str, Any],
    *,
    fmt: str | None = None,
    force: bool = False,
) -> pathlib.Path:
    """Write a discrete-model document atomically as JSON, NPZ or CSV.

    Parameters
    ----------
    path : path-like
        Output file.
    doc : mapping
        From :func:`discrete_document`.
    fmt : {"json", "npz", "csv", "mat"}, optional
        The form; default from the file suffix.
    force : bool
        Overwrite an existing file.

    Returns
    -------
    pathlib.Path
        The file written.
    """
    p = pathlib.Path(path)
    fmt = (fmt or p.suffix.lstrip(".")).lower()
    if fmt not in FORMATS:
        raise AnalysisError(
            f"cannot tell the export form of '{p.name}'",
            f"a file ending in .json, .npz, .csv or .mat, or a format among {', '.join(FORMATS)}",
        )
    if fmt == "json":
        write_json(p, dict(doc), force=force, schema="discrete-model.schema.json")
    elif fmt == "mat":
        from scipy.io import savemat

        variables = _mat_variables(doc)
        with atomic_path(p, force=force) as tmp, open(tmp, "wb") as fh:
            savemat(fh, variables, do_compression=True, oned_as="row")
    elif fmt == "npz":
        arrays = _npz_arrays(doc)
        with atomic_path(p, force=force) as tmp, open(tmp, "wb") as fh:
            np.savez(fh, **arrays)
    else:
        text = _csv_text(doc)
        with atomic_writer(p, force=force) as fh:
            fh.write(text)
    return p
