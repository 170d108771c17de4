"""Regenerate the schemas that are generated from code: ``python -m sensormodel._schemagen``.

``datasheet.schema.json`` comes from :data:`sensormodel.datasheet.FIELDS` and
``noise-model.schema.json`` from :data:`sensormodel.terms.TERM_TYPES`; tests/test_schemas.py fails
when a file is out of step with the code.
"""

from __future__ import annotations

import json

from ._io import SCHEMA_DIR
from .datasheet import datasheet_schema
from .model import noise_model_schema

__all__ = ["GENERATED", "render", "main"]

#: file name -> function building the schema
GENERATED = {
    "datasheet.schema.json": datasheet_schema,
    "noise-model.schema.json": noise_model_schema,
}


def render(name: str) -> str:
    """The text the schema file ``name`` must have."""
    return json.dumps(GENERATED[name](), indent=2, ensure_ascii=False) + "\n"


def main() -> None:
    """Write every generated schema into ``schemas/``."""
    for name in GENERATED:
        (SCHEMA_DIR / name).write_text(render(name), encoding="utf-8")


if __name__ == "__main__":
    main()
