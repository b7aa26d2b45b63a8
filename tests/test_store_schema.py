"""The checked-in DDL and JSON Schema agree with the code and with real exports."""

from __future__ import annotations

import csv
import importlib.resources
import io
import json

import matcher.store


def test_checked_in_ddl_matches_models():
    shipped = importlib.resources.files("matcher.schemas").joinpath("store.sql").read_text(encoding="utf-8")
    assert shipped == matcher.store.ddl(), "schema/store.sql drifted: regenerate it with matcher.store.ddl()"


def test_ddl_compiles_for_postgresql():
    pg = matcher.store.ddl("postgresql")
    assert "CREATE TABLE observations" in pg and "BOOLEAN" in pg


def test_export_rows_validate_against_json_schema(library_url, demo_csv):
    import jsonschema

    from matcher.store.library_io import export_library, import_library

    schema = json.loads(importlib.resources.files("matcher.schemas").joinpath("library-csv.schema.json").read_text())
    jsonschema.Draft202012Validator.check_schema(schema)
    import_library(library_url, demo_csv)
    rows = list(csv.DictReader(io.StringIO(export_library(library_url))))
    assert len(rows) > 700
    validator = jsonschema.Draft202012Validator(schema)
    for r in rows:
        validator.validate(r)
    bad = dict(rows[0], cas="7732185")
    assert list(validator.iter_errors(bad))


def test_probe_knows_the_latest_schema_version():
    # the opening check (standard library only) must know the same newest version as the migrations
    from matcher.store.database import latest_version
    from matcher.store.probe import KNOWN_VERSION

    assert KNOWN_VERSION == latest_version()
