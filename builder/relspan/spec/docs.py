"""docs/spec.md, generated from the schema: every key with description, type, default, example.

Refresh the committed files with::

    python -c "import relspan.spec as s; print(s.spec_reference_markdown(), end='')" > docs/spec.md
    python -c "import relspan.spec as s; print(s.schema_json_text(), end='')" > builder/relspan/spec/spec-v1.schema.json
"""

from __future__ import annotations

from typing import Iterator

from relspan.spec.schema import EXAMPLE_SPEC, json_schema
from relspan.spec.validate import inline_yaml as _inline  # one YAML renderer for fixes and docs

__all__ = ["spec_reference_markdown", "REFRESH_COMMAND"]

#: shell command that rewrites docs/spec.md from the schema
REFRESH_COMMAND = ("python -c \"import relspan.spec as s; print(s.spec_reference_markdown(), end='')\" "
                   "> docs/spec.md")

_TYPE = {"string": "text", "integer": "whole number", "number": "number",
         "boolean": "true / false", "array": "list", "object": "mapping"}


def _type_words(schema: dict) -> str:
    if "x-expected" in schema:
        return schema["x-expected"]
    if "const" in schema:
        return f"the number {schema['const']}"
    t = schema.get("type")
    if "enum" in schema:
        return "one of " + ", ".join(f"`{v}`" for v in schema["enum"])
    if t == "array":
        items = schema.get("items", {})
        inner = "mappings" if items.get("type") == "object" else _type_words(items)
        if items.get("enum"):
            inner = "values from " + ", ".join(f"`{v}`" for v in items["enum"])
        words = f"list of {inner}"
        if schema.get("minItems"):
            words += f", at least {schema['minItems']}"
        return words
    words = _TYPE.get(t, "value")
    bounds = []
    for kw, sym in (("minimum", ">="), ("exclusiveMinimum", ">"), ("maximum", "<="),
                    ("exclusiveMaximum", "<")):
        if kw in schema:
            bounds.append(f"{sym} {schema[kw]}")
    if bounds:
        words += " " + ", ".join(bounds)
    if schema.get("minLength"):
        words += ", not empty"
    return words


def _walk(schema: dict, path: str, depth: int) -> Iterator[tuple[str, dict, bool, int]]:
    """(key path, subschema, required, depth) for every property, depth first."""
    props = schema.get("properties", {})
    required = set(schema.get("required", ()))
    for name, sub in props.items():
        key = f"{path}.{name}" if path else name
        yield key, sub, name in required, depth
        if sub.get("type") == "object" and "properties" in sub:
            yield from _walk(sub, key, depth + 1)
        elif sub.get("type") == "array" and sub.get("items", {}).get("type") == "object":
            yield from _walk(sub["items"], key + "[]", depth + 1)


def spec_reference_markdown() -> str:
    """The reference of spec format v1 as Markdown (the text of docs/spec.md).

    Generated from :func:`relspan.spec.schema.json_schema`: one entry per key
    with its description, type, whether it is required, its default and an
    example; then a full example spec.

    Returns
    -------
    str
        Markdown text ending in one newline; deterministic.
    """
    schema = json_schema()
    out: list[str] = []
    add = out.append
    add("# The relspan spec, format v1")
    add("")
    add("<!-- Generated from builder/relspan/spec/schema.py by relspan.spec.docs.spec_reference_markdown();")
    add("     do not edit by hand. Refresh with:")
    add(f"     {REFRESH_COMMAND} -->")
    add("")
    add(schema["description"])
    add("")
    add("The same rules are available as a JSON Schema (draft 2020-12) for editors: "
        "`relspan.spec.json_schema()`, also stored as `builder/relspan/spec/spec-v1.schema.json`.")
    add("")
    add("Paths are written as key paths: `datasets[].variables[].column` is the `column` key "
        "of an item of the `variables` list of an item of `datasets`. Errors name the line and "
        "the key path, e.g. `datasets[0].variables[2].column`.")
    add("")
    add("## Keys")
    for key, sub, required, depth in _walk(schema, "", 0):
        add("")
        add(f"{'#' * min(3 + depth, 6)} `{key}`")
        add("")
        add(f"**{sub['title']}.** {sub['description']}")
        add("")
        add(f"- Type: {_type_words(sub)}")
        add(f"- Required: {'yes' if required else 'no'}")
        if "default" in sub:
            add(f"- Default: `{_inline(sub['default'])}`")
        leaf = key.rsplit(".", 1)[-1]
        examples = ", ".join(f"`{leaf}: {_inline(e)}`" for e in sub.get("examples", []))
        add(f"- Example: {examples}")
    add("")
    add("## Full example")
    add("")
    add("Every key in use (the data file is invented):")
    add("")
    add("```yaml")
    add(EXAMPLE_SPEC.rstrip("\n"))
    add("```")
    add("")
    add("## Reading the results")
    add("")
    add("A spec states assumptions; the results hold only under them and are only as good as "
        "the data. Relations found in data describe association, not causation. For decisions "
        "that rest on these results, consult a qualified statistician and follow your own "
        "institution's review procedures.")
    return "\n".join(out) + "\n"

