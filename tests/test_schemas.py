"""The generated JSON Schemas in schemas/ are in step with the code that generates them."""

from __future__ import annotations

import json
import pathlib

import jsonschema
import pytest

from sensormodel._io import SCHEMA_DIR, load_schema
from sensormodel._schemagen import GENERATED, render
from sensormodel.datasheet import CONVENTIONS, FIELDS
from sensormodel.terms import TERM_TYPES

SCHEMAS = pathlib.Path(__file__).resolve().parent.parent / "schemas"


@pytest.mark.parametrize("name", sorted(GENERATED))
def test_schema_file_is_in_step_with_the_code(name):
    on_disk = (SCHEMAS / name).read_text(encoding="utf-8")
    assert on_disk == render(name), (
        f"schemas/{name} is out of step with the code; run `python -m sensormodel._schemagen` "
        "and commit the result"
    )


@pytest.mark.parametrize("name", sorted(GENERATED))
def test_schema_is_a_valid_json_schema(name):
    schema = json.loads((SCHEMAS / name).read_text(encoding="utf-8"))
    jsonschema.validators.validator_for(schema).check_schema(schema)
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"


@pytest.mark.parametrize("name", sorted(GENERATED))
def test_package_reads_the_same_files(name):
    assert (SCHEMA_DIR / name).read_text(encoding="utf-8") == (SCHEMAS / name).read_text(
        encoding="utf-8"
    )
    assert load_schema(name) == json.loads((SCHEMAS / name).read_text(encoding="utf-8"))


def test_datasheet_schema_covers_the_field_table():
    schema = load_schema("datasheet.schema.json")
    for instrument, table in FIELDS.items():
        props = schema["properties"][instrument]["properties"]
        assert set(table) | set(CONVENTIONS) <= set(props)
        for key, (allowed, default) in CONVENTIONS.items():
            assert props[key] == {"enum": list(allowed), "default": default}


def test_noise_model_schema_covers_every_term_type():
    schema = load_schema("noise-model.schema.json")
    items = schema["properties"]["channels"]["items"]["properties"]["terms"]["items"]
    assert items["properties"]["type"]["enum"] == sorted(TERM_TYPES)
    described = {v["if"]["properties"]["type"]["const"] for v in items["allOf"]}
    assert described == set(TERM_TYPES)
