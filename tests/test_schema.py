"""The committed JSON Schema and docs field table are generated from the model, never stale."""

from __future__ import annotations

import jsonschema
import pytest

from registry.schema import DOCS_FILE, SCHEMA_FILE, docs_text, json_schema, schema_text
from registry.yamlio import load_file

from .conftest import EXAMPLES, ROOT


def test_committed_schema_is_current():
    committed = (ROOT / SCHEMA_FILE).read_text(encoding="utf-8")
    assert committed == schema_text(), "schema is stale: run `prespec schema --docs docs/spec-format.md`"


def test_docs_field_table_is_current():
    committed = (ROOT / DOCS_FILE).read_text(encoding="utf-8")
    assert committed == docs_text(committed), "field table is stale: run `prespec schema --docs docs/spec-format.md`"


def test_schema_is_valid_draft_2020_12():
    # JSON Schema 2020-12 meta-schema, through the jsonschema reference implementation
    jsonschema.Draft202012Validator.check_schema(json_schema())


@pytest.mark.parametrize("path", sorted(EXAMPLES.glob("*.yaml")), ids=lambda p: p.name)
def test_examples_validate_against_the_schema(path):
    # The published schema and the model agree on every example spec.
    data = load_file(path).data
    jsonschema.Draft202012Validator(json_schema(), format_checker=jsonschema.FormatChecker()).validate(data)


def test_schema_marks_locked_fields():
    schema = json_schema()
    assert schema["properties"]["design"]["x-locked"] is True
    assert schema["properties"]["status"]["x-locked"] is False
