"""The schema is valid JSON Schema draft 2020-12 and agrees with the reference validator.

Reference library: ``jsonschema`` (Draft202012Validator), used in tests only.
"""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import pytest
import yaml
from hypothesis import HealthCheck, given, settings

from relspan.errors import SpecError
from relspan.spec import ChecksSpec, SiteSpec, Tolerance, VariableSpec, json_schema
from relspan.spec import validate as validate_mod
from relspan.spec.schema import EXAMPLE_SPEC, schema_json_text

from spec_strategies import example_data, mutated_specs

SCHEMA_FILE = Path(__file__).resolve().parents[2] / "builder" / "relspan" / "spec" / "spec-v1.schema.json"


def _properties(schema: dict, path: str = ""):
    for name, sub in schema.get("properties", {}).items():
        key = f"{path}.{name}" if path else name
        yield key, sub
        yield from _properties(sub, key)
        if "items" in sub:
            yield from _properties(sub["items"], key + "[]")


def test_schema_is_a_valid_draft_2020_12_schema():
    # reference: jsonschema's meta-schema check for draft 2020-12
    jsonschema.Draft202012Validator.check_schema(json_schema())
    assert json_schema()["$schema"] == "https://json-schema.org/draft/2020-12/schema"


def test_full_example_validates_against_the_schema():
    # reference: jsonschema Draft202012Validator
    jsonschema.Draft202012Validator(json_schema()).validate(example_data())


def test_every_property_has_title_description_and_examples():
    missing = [k for k, sub in _properties(json_schema())
               if not all(sub.get(a) for a in ("title", "description", "examples"))]
    assert missing == []


def test_every_property_example_validates_against_its_own_subschema():
    bad = []
    for key, sub in _properties(json_schema()):
        validator = jsonschema.Draft202012Validator(sub)  # reference: jsonschema
        bad += [(key, ex) for ex in sub["examples"] if not validator.is_valid(ex)]
    assert bad == []


def test_every_object_rejects_unknown_keys():
    def objects(s):
        if s.get("type") == "object":
            yield s
        for sub in s.get("properties", {}).values():
            yield from objects(sub)
        if isinstance(s.get("items"), dict):
            yield from objects(s["items"])
    assert all(o.get("additionalProperties") is False for o in objects(json_schema()))


def test_schema_defaults_match_the_model_defaults():
    props = json_schema()["properties"]
    checks = props["checks"]["properties"]
    model = ChecksSpec()
    assert tuple(checks["assumptions"]["default"]) == model.assumptions
    assert checks["tolerance"]["default"] == {"relative": Tolerance().relative}
    assert Tolerance().absolute is None
    assert checks["normalise_on"]["default"] == model.normalise_on
    assert checks["coranks"]["default"] == "auto" and model.coranks == ()
    assert checks["max_angle_deg"]["default"] == model.max_angle_deg
    assert checks["frisch_starts"]["default"] == model.frisch_starts
    assert checks["seed"]["default"] == model.seed
    var = props["datasets"]["items"]["properties"]["variables"]["items"]["properties"]
    v = VariableSpec("c", "c")
    assert (var["unit"]["default"], var["transform"]["default"]) == (v.unit, v.transform)
    site = props["site"]["properties"]
    s = SiteSpec()
    assert (site["out"]["default"], site["figures"]["default"], site["notes"]["default"],
            site["language"]["default"]) == (s.out, s.figures, s.notes, s.language)


def test_json_schema_returns_an_independent_deterministic_copy():
    first = json_schema()
    first["properties"].clear()
    assert json_schema()["properties"]
    assert json.dumps(json_schema(), sort_keys=True) == json.dumps(json_schema(), sort_keys=True)


def test_committed_schema_file_is_fresh():
    assert SCHEMA_FILE.read_text(encoding="utf-8") == schema_json_text(), (
        "builder/relspan/spec/spec-v1.schema.json is stale; refresh it with: python -c \"import "
        "relspan.spec as s; print(s.schema_json_text(), end='')\" > "
        "builder/relspan/spec/spec-v1.schema.json")


def _walk_accepts(data) -> bool:
    try:
        validate_mod.validate(data, validate_mod.SCHEMA, "", 1,
                              validate_mod.Context("t.yaml", Path("t.yaml")))
    except SpecError:
        return False
    return True


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(mutated_specs())
def test_schema_walk_agrees_with_jsonschema_on_mutated_specs(data):
    # reference: jsonschema Draft202012Validator decides validity; our walker must agree
    expected = jsonschema.Draft202012Validator(json_schema()).is_valid(data)
    assert _walk_accepts(data) == expected


@pytest.mark.parametrize("text", [
    EXAMPLE_SPEC.replace("relspan: 1", "relspan: true"),
    EXAMPLE_SPEC.replace("coranks: auto", "coranks: [1, 1.0]"),
    EXAMPLE_SPEC.replace("frisch_starts: 8", "frisch_starts: 8.0"),
])
def test_schema_walk_agrees_with_jsonschema_on_edge_values(text):
    data = yaml.safe_load(text)
    # reference: jsonschema Draft202012Validator
    assert _walk_accepts(data) == jsonschema.Draft202012Validator(json_schema()).is_valid(data)


def test_id_with_trailing_newline_is_rejected_as_ecma_regex_requires():
    # JSON Schema patterns are ECMA-262 regexes, where `$` (without the m flag) matches only at
    # the end of the text; Python's re (and so jsonschema) also matches before a final newline.
    data = yaml.safe_load(EXAMPLE_SPEC.replace("id: harbour", 'id: "harbour\\n"'))
    assert data["datasets"][0]["id"] == "harbour\n"
    assert not _walk_accepts(data)
