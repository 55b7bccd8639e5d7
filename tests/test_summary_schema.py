"""summary.json against its JSON Schema (draft 2020-12): every field documented, nothing extra."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest

jsonschema = pytest.importorskip("jsonschema")

ROOT = Path(__file__).resolve().parents[1]
SCHEMA = ROOT / "courseplan" / "schema" / "summary.schema.json"
DOCS_SCHEMA = ROOT / "docs" / "summary.schema.json"


@pytest.fixture(scope="module")
def schema():
    s = json.loads(SCHEMA.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(s)
    return s


@pytest.fixture(scope="module")
def summary(tmp_path_factory):
    from courseplan.api import plan

    out = tmp_path_factory.mktemp("schema") / "plan"
    plan(ROOT / "sample-geodata" / "plan.toml", out)
    return json.loads((out / "summary.json").read_text(encoding="utf-8"))


def validate(schema, doc):
    jsonschema.Draft202012Validator(schema, format_checker=jsonschema.FormatChecker()).validate(doc)


def test_docs_copy_is_identical():
    assert DOCS_SCHEMA.read_bytes() == SCHEMA.read_bytes()


def test_schema_is_shipped_as_package_data():
    import tomllib

    py = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    assert "schema/*.json" in py["tool"]["setuptools"]["package-data"]["courseplan"]


def test_demo_summary_validates(schema, summary):
    assert summary["schema_version"] == "1.2"
    assert "schedule" in summary and "passes" in summary and summary["passes"]
    validate(schema, summary)


def test_undocumented_fields_fail(schema, summary):
    top = copy.deepcopy(summary)
    top["surprise"] = 1
    with pytest.raises(jsonschema.ValidationError, match="surprise"):
        validate(schema, top)
    zone = copy.deepcopy(summary)
    zone["zones"][0]["surprise_col"] = 1.0
    with pytest.raises(jsonschema.ValidationError, match="surprise_col"):
        validate(schema, zone)
    old = copy.deepcopy(summary)
    old["schema_version"] = "0.9"
    with pytest.raises(jsonschema.ValidationError):
        validate(schema, old)


def test_zone_and_pass_records_follow_the_column_declarations(schema):
    from courseplan.columns import ALL, PASSES

    kinds = {"float": ["number", "null"], "int": "integer", "str": ["string", "null"], "bool": "boolean"}
    for name, cols in (("zone", ALL), ("pass", PASSES)):
        props = schema["$defs"][name]["properties"]
        assert list(props) == [c.name for c in cols], name
        for c in cols:
            assert props[c.name]["type"] == kinds[c.kind], c.name


def test_every_top_level_field_is_documented(schema):
    import re

    text = (ROOT / "docs" / "outputs.md").read_text(encoding="utf-8")
    section = text.split("## `summary.json`", 1)[1].split("\n## ", 1)[0]
    documented = re.findall(r"^\| `(\w+)` \|", section, flags=re.M)
    assert documented == list(schema["properties"])
