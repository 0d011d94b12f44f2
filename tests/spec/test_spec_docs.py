"""docs/spec.md is generated from the schema and its full example loads."""

from __future__ import annotations

import re
from pathlib import Path

from relspan.spec import json_schema, load_spec, spec_reference_markdown
from relspan.spec.docs import REFRESH_COMMAND
from relspan.spec.schema import EXAMPLE_SOURCES

DOC = Path(__file__).resolve().parents[2] / "docs" / "spec.md"


def test_committed_spec_reference_equals_the_generated_text():
    assert DOC.read_text(encoding="utf-8") == spec_reference_markdown(), (
        f"docs/spec.md is stale; refresh it from the repository root with: {REFRESH_COMMAND}")


def test_reference_is_deterministic():
    assert spec_reference_markdown() == spec_reference_markdown()


def test_reference_has_an_entry_for_every_key_with_type_and_example():
    text = spec_reference_markdown()

    def keys(schema, path=""):
        for name, sub in schema.get("properties", {}).items():
            key = f"{path}.{name}" if path else name
            yield key, sub
            yield from keys(sub, key)
            if isinstance(sub.get("items"), dict):
                yield from keys(sub["items"], key + "[]")

    for key, sub in keys(json_schema()):
        m = re.search(rf"^#+ `{re.escape(key)}`\n\n(.*?)(?=\n#|\n## |\Z)", text, re.S | re.M)
        assert m, key
        entry = m.group(1)
        assert sub["description"] in entry
        assert "- Type: " in entry and "- Example: " in entry
        if "default" in sub:
            assert "- Default: " in entry, key


def test_full_example_in_the_reference_loads(tmp_path):
    text = DOC.read_text(encoding="utf-8")
    block = re.search(r"```yaml\n(.*?)```", text, re.S).group(1)
    for rel in EXAMPLE_SOURCES:
        (tmp_path / rel).parent.mkdir(parents=True, exist_ok=True)
        (tmp_path / rel).write_text("quarter,cargo,ships,jobs\n1990Q1,1,2,3\n", encoding="utf-8")
    (tmp_path / "spec.yaml").write_text(block, encoding="utf-8")
    spec = load_spec(tmp_path / "spec.yaml")
    assert spec.report.title == "Harbour and hinterland"
    assert len(spec.claims) == 5  # every claim kind, no_break included


def test_reference_carries_the_interpretation_cautions():
    text = spec_reference_markdown()
    assert "association, not causation" in text
    assert "qualified statistician" in text and "institution's review" in text
