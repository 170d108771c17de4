"""Internal file helpers: atomic writes, no overwrite without ``force``, JSON with schemas.

Every output file of sensormodel goes through :func:`atomic_writer`: the content is written to a
temporary file in the target's folder and renamed over the target only when complete, so a
failure never leaves a partial or truncated file behind.
"""

from __future__ import annotations

import contextlib
import json
import math
import os
import pathlib
import tempfile
import threading
from collections.abc import Iterator
from functools import cache
from typing import IO, Any

from .errors import ModelFileError, SensorModelError

__all__ = [
    "atomic_writer",
    "check_writable",
    "write_json",
    "read_json",
    "load_schema",
    "validate",
    "SCHEMA_DIR",
]

#: Folder of the JSON Schemas (top-level ``schemas/``, also reachable from the package).
SCHEMA_DIR = pathlib.Path(__file__).resolve().parent / "schemas"


class OutputExistsError(SensorModelError, FileExistsError):
    """The output file exists and ``force`` was not given."""


def check_writable(path: str | os.PathLike[str], *, force: bool = False) -> pathlib.Path:
    """Refuse an existing output file unless ``force``; refuse a missing folder.

    Call it before long work so the user learns at once, not after an hour of computation.
    """
    p = pathlib.Path(path)
    if p.exists() and not force:
        raise OutputExistsError(
            "the file exists", "a new file name, or --force to overwrite it", source=str(p)
        )
    if p.is_dir():
        raise OutputExistsError("is a folder", "a file name", source=str(p))
    parent = p.parent if str(p.parent) else pathlib.Path(".")
    if not parent.is_dir():
        raise OutputExistsError(
            f"the folder '{parent}' does not exist", "an existing folder", source=str(p)
        )
    return p


_UMASK_LOCK = threading.Lock()


def _file_mode() -> int:
    """The mode a new file gets from ``open`` under the process's umask (0o666 & ~umask).

    :func:`tempfile.mkstemp` creates its file with 0o600 whatever the umask; an output renamed
    from it would stay private, so it is given this mode (colleagues read shared reports).
    """
    with _UMASK_LOCK:  # os.umask can only be read by setting it
        mask = os.umask(0o022)
        os.umask(mask)
    return 0o666 & ~mask


@contextlib.contextmanager
def atomic_writer(
    path: str | os.PathLike[str], *, force: bool = False, binary: bool = False
) -> Iterator[IO[Any]]:
    """Open a temporary file beside ``path``; rename it over ``path`` if the block succeeds.

    Parameters
    ----------
    path : path-like
        The final file.
    force : bool
        Overwrite an existing file.
    binary : bool
        Open in binary mode (default text, UTF-8, ``\\n`` newlines).
    """
    p = check_writable(path, force=force)
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".part", dir=p.parent or ".")
    try:
        os.chmod(tmp, _file_mode())
        mode = "wb" if binary else "w"
        kwargs: dict[str, Any] = {} if binary else {"encoding": "utf-8", "newline": "\n"}
        with os.fdopen(fd, mode, **kwargs) as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        if p.exists() and not force:  # appeared while we worked
            raise OutputExistsError(
                "the file appeared while writing", "--force to overwrite it", source=str(p)
            )
        os.replace(tmp, p)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike[str], *, force: bool = False) -> Iterator[pathlib.Path]:
    """Yield a temporary path beside ``path`` for libraries that write by file name
    (``numpy.savez``, ``h5py``, ``matplotlib``); rename it over ``path`` on success."""
    p = check_writable(path, force=force)
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=p.suffix, dir=p.parent or ".")
    os.close(fd)
    try:
        os.chmod(tmp, _file_mode())
        yield pathlib.Path(tmp)
        os.chmod(tmp, _file_mode())  # in case the library wrote a new file by the name
        os.replace(tmp, p)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def _json_default(obj: Any) -> Any:
    import numpy as np

    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, np.generic):
        return obj.item()
    raise TypeError(f"cannot write {type(obj).__name__} as JSON")


def write_json(
    path: str | os.PathLike[str],
    data: Any,
    *,
    force: bool = False,
    schema: str | None = None,
) -> None:
    """Validate ``data`` against ``schema`` (a file name in ``schemas/``) and write it atomically.

    Non-finite numbers are refused (JSON has none and a NaN in a result is a defect).
    """
    text = json.dumps(data, indent=2, default=_json_default, allow_nan=False)
    if schema is not None:
        validate(json.loads(text), schema, source=str(path))
    with atomic_writer(path, force=force) as fh:
        fh.write(text + "\n")


class _NonFiniteNumber(ValueError):
    pass


def _refuse_number(text: str) -> float:
    raise _NonFiniteNumber(text)


def _finite_float(text: str) -> float:
    value = float(text)
    if not math.isfinite(value):  # e.g. 1e400
        raise _NonFiniteNumber(text)
    return value


def read_json(path: str | os.PathLike[str], *, schema: str | None = None) -> Any:
    """Read a JSON file; with ``schema``, validate it and name the failing field."""
    p = pathlib.Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ModelFileError("no such file", "an existing file", source=str(p)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ModelFileError(f"cannot read ({exc})", "a UTF-8 JSON file", source=str(p)) from None
    try:
        data = json.loads(text, parse_constant=_refuse_number, parse_float=_finite_float)
    except json.JSONDecodeError as exc:
        raise ModelFileError(
            f"not valid JSON ({exc.msg})",
            "a JSON document",
            source=str(p),
            field=f"line {exc.lineno}",
        ) from None
    except _NonFiniteNumber as exc:
        line = text.count("\n", 0, max(text.find(exc.args[0]), 0)) + 1
        raise ModelFileError(
            f"the number {exc.args[0]} is not finite",
            "finite numbers (JSON has no NaN or Infinity)",
            source=str(p),
            field=f"line {line}",
        ) from None
    if schema is not None:
        validate(data, schema, source=str(p))
    return data


@cache
def load_schema(name: str) -> dict[str, Any]:
    """Load a JSON Schema from ``schemas/`` by file name."""
    return json.loads((SCHEMA_DIR / name).read_text(encoding="utf-8"))


def validate(data: Any, schema: str, *, source: str | None = None) -> None:
    """Validate ``data`` against a schema of ``schemas/``; raise naming the first failing field."""
    import jsonschema

    validator_cls = jsonschema.validators.validator_for(load_schema(schema))
    validator = validator_cls(load_schema(schema))
    errors = sorted(validator.iter_errors(data), key=lambda e: list(e.absolute_path))
    if errors:
        err = errors[0]
        where = "".join(f"[{p}]" if isinstance(p, int) else f".{p}" for p in err.absolute_path)
        raise ModelFileError(
            f"does not match {schema}: {err.message}",
            "a file as described in the schema",
            source=source,
            field=where.lstrip(".") or None,
        )
