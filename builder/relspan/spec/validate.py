"""The schema walker: checks parsed spec values against the one schema of the format.

The schema (:mod:`relspan.spec.schema`, JSON Schema draft 2020-12) is walked by
the small interpreter of its keywords below, so the ``jsonschema`` package is
not needed at run time (tests check that both agree). The first problem stops
the walk with a located :class:`~relspan.errors.SpecError`: the file, the line,
the key path, what was expected, what was found, and a fix (for an unknown key,
the nearest valid key).

Also here, because the rules and the loader word their messages the same way:
:class:`Context` (the spec file's name and folder; builds located errors),
:func:`describe` (a value in words) and :func:`inline_yaml` (a value as short
YAML, for examples in fixes and in docs/spec.md).
"""

from __future__ import annotations

import difflib
import math
import reprlib
import re
from pathlib import Path
from typing import Any

from relspan.errors import SpecError
from relspan.spec._yamlpos import LineDict, LineList, join_key
from relspan.spec.schema import json_schema

__all__ = ["SCHEMA", "Context", "validate", "describe", "inline_yaml"]

SCHEMA = json_schema()  # private copy; never changed after import

_repr = reprlib.Repr()
_repr.maxstring = 40
_repr.maxother = 40
_repr.maxlist = 4
_repr.maxdict = 3
_repr.maxlevel = 2


# --------------------------------------------------------------------------- context


class Context:
    """The spec file being checked: its name in messages, its resolved path and folder.

    :meth:`error` builds the located :class:`~relspan.errors.SpecError` that the
    walker, the rules and the loader raise.
    """

    __slots__ = ("shown", "path", "folder")

    def __init__(self, shown: str, path: Path) -> None:
        self.shown = shown
        try:
            self.path = path.resolve()
        except (OSError, ValueError, RuntimeError):
            self.path = Path.cwd() / path
        self.folder = self.path.parent

    def error(self, message: str, *, line: int | None, key: str | None = None,
              fix: str, expected: str | None = None, got: str | None = None) -> SpecError:
        return SpecError(message, path=self.shown, line=line, key=key or None, fix=fix,
                         expected=expected, got=got)


# --------------------------------------------------------------------------- wording


def describe(value: Any) -> str:
    """What a value is, in words, for `got ...` in messages."""
    if value is None:
        return "nothing (an empty value)"
    if isinstance(value, bool):
        return f"the true/false value {'true' if value else 'false'}"
    if isinstance(value, int):
        return f"the whole number {_repr.repr(value)}"
    if isinstance(value, float):
        return f"the number {value!r}"
    if isinstance(value, str):
        return "empty text" if value == "" else f"the text {_repr.repr(value)}"
    if isinstance(value, dict):
        return "a mapping"
    if isinstance(value, list):
        return f"a list of {len(value)} item{'s' if len(value) != 1 else ''}"
    return f"a value of YAML type {type(value).__name__}"


_TYPE_WORDS = {
    "string": "text",
    "integer": "a whole number",
    "number": "a number",
    "boolean": "true or false",
    "array": "a list",
    "object": "a mapping",
    "null": "nothing",
}


def _is_type(value: Any, t: str) -> bool:
    if t == "string":
        return isinstance(value, str)
    if t == "boolean":
        return isinstance(value, bool)
    if t == "integer":
        if isinstance(value, bool):
            return False
        return isinstance(value, int) or (isinstance(value, float) and value.is_integer())
    if t == "number":
        return isinstance(value, (int, float)) and not isinstance(value, bool)
    if t == "array":
        return isinstance(value, list)
    if t == "object":
        return isinstance(value, dict)
    if t == "null":
        return value is None
    return False


def _leaf(key: str) -> str:
    """Last part of a key path (``datasets[0].id`` -> ``id``)."""
    leaf = key.rsplit(".", 1)[-1]
    return re.sub(r"\[\d+\]$", "", leaf) or key


def inline_yaml(value: Any) -> str:
    """A value as short flow-style YAML, for examples in fixes."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if value is None:
        return "null"
    if isinstance(value, (int, float)):
        return repr(value)
    if isinstance(value, str):
        if re.fullmatch(r"[A-Za-z_][A-Za-z0-9_./ -]*", value) and value.lower() not in {
                "yes", "no", "true", "false", "on", "off", "null", "y", "n"} \
                and not value.endswith(" "):
            return value
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, list):
        return "[" + ", ".join(inline_yaml(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{k}: {inline_yaml(v)}" for k, v in value.items()) + "}"
    return str(value)


def _example_fix(schema: dict, key: str) -> str:
    ex = schema.get("examples")
    if ex:
        return f", e.g. `{_leaf(key)}: {inline_yaml(ex[0])}`"
    return ""


def _expected_words(schema: dict, hint: str | None) -> str:
    if "x-expected" in schema:
        return schema["x-expected"]
    if hint:
        return hint
    t = schema.get("type")
    if "enum" in schema:
        return "one of " + ", ".join(str(v) for v in schema["enum"])
    words = _TYPE_WORDS.get(t, "a value") if isinstance(t, str) else "a value"
    bounds = []
    if "minimum" in schema:
        bounds.append(f">= {schema['minimum']}")
    if "exclusiveMinimum" in schema:
        bounds.append(f"> {schema['exclusiveMinimum']}")
    if "maximum" in schema:
        bounds.append(f"<= {schema['maximum']}")
    if "exclusiveMaximum" in schema:
        bounds.append(f"< {schema['exclusiveMaximum']}")
    if bounds:
        words += " " + " and ".join(bounds)
    return words


def _basic_type_ok(value: Any, schema: dict) -> bool:
    """Does ``value`` have the basic type of this alternative (ignoring finer rules)?"""
    if "const" in schema:
        return type(schema["const"]) is type(value)
    t = schema.get("type")
    return t is None or _is_type(value, t)


def validate(value: Any, schema: dict, key: str, line: int, ctx: Context,
              hint: str | None = None) -> None:
    """Check ``value`` against ``schema``; raise a located SpecError on the first problem."""
    expected = _expected_words(schema, hint)
    name = key or "the spec"

    def fail(what: str, fix: str | None = None) -> SpecError:
        return ctx.error(f"{name} {what}", line=line, key=key, expected=expected,
                         got=describe(value),
                         fix=fix or f"write {expected}{_example_fix(schema, key)}.")

    if "anyOf" in schema:
        alts = schema["anyOf"]
        for alt in alts:
            try:
                validate(value, alt, key, line, ctx, hint=expected)
                return
            except SpecError:
                pass
        typed = [alt for alt in alts if _basic_type_ok(value, alt)]
        if len(typed) == 1:
            # the value has the right shape for one alternative: its detailed message helps most
            merged = {k: v for k, v in {**schema, **typed[0]}.items() if k != "anyOf"}
            validate(value, merged, key, line, ctx, hint=expected)
        raise fail(f"must be {expected}; got {describe(value)}.")

    if "const" in schema:
        c = schema["const"]
        if not _same(value, c):
            raise fail(f"must be {expected}; got {describe(value)}.",
                       fix=f"write `{_leaf(key)}: {inline_yaml(c)}`.")

    t = schema.get("type")
    if isinstance(t, str) and not _is_type(value, t):
        extra = ""
        if t == "string" and isinstance(value, (bool, int, float)):
            extra = " (YAML reads yes/no/on/off as true/false and bare digits as numbers)"
        fix = f"write {expected}{_example_fix(schema, key)}"
        if t == "string" and (isinstance(value, (bool, int, float))):
            fix += "; put the value in quotes to keep it as text"
        if t == "object" and value is None:
            fix += "; indent its keys below it"
        raise fail(f"must be {_TYPE_WORDS[t]}; got {describe(value)}{extra}.", fix=fix + ".")

    if "enum" in schema and not any(_same(value, e) for e in schema["enum"]):
        allowed = ", ".join(str(v) for v in schema["enum"])
        near = difflib.get_close_matches(str(value), [str(v) for v in schema["enum"]], n=1)
        hint_txt = f" Did you mean '{near[0]}'?" if near else ""
        raise fail(f"must be one of: {allowed}; got {describe(value)}.{hint_txt}",
                   fix=f"use one of {allowed}" + (f", e.g. `{_leaf(key)}: {near[0]}`."
                                                  if near else "."))

    if isinstance(value, str):
        if len(value) < schema.get("minLength", 0):
            raise fail("must not be empty.")
        pat = schema.get("pattern")
        if pat is not None and not _search(pat, value):
            raise fail(f"must be {expected}; got {describe(value)}.")

    if _is_type(value, "number") and t in ("number", "integer"):
        try:
            finite = math.isfinite(float(value))
        except OverflowError:
            finite = False
        if not finite:
            raise fail(f"must be a finite number of ordinary size; got {describe(value)}.")
        if "minimum" in schema and value < schema["minimum"]:
            raise fail(f"must be >= {schema['minimum']}; got {describe(value)}.")
        if "exclusiveMinimum" in schema and value <= schema["exclusiveMinimum"]:
            raise fail(f"must be > {schema['exclusiveMinimum']}; got {describe(value)}.")
        if "maximum" in schema and value > schema["maximum"]:
            raise fail(f"must be <= {schema['maximum']}; got {describe(value)}.")
        if "exclusiveMaximum" in schema and value >= schema["exclusiveMaximum"]:
            raise fail(f"must be < {schema['exclusiveMaximum']}; got {describe(value)}.")

    if isinstance(value, list) and t == "array":
        lines = value.item_lines if isinstance(value, LineList) else [line] * len(value)
        n_min = schema.get("minItems", 0)
        if len(value) < n_min:
            raise fail(f"must list at least {n_min} item{'s' if n_min != 1 else ''}; got "
                       f"{len(value)}.")
        items = schema.get("items")
        for i, item in enumerate(value):
            if items is not None:
                validate(item, items, f"{key}[{i}]", lines[i], ctx)
        if schema.get("uniqueItems"):
            first: dict = {}  # one pass: equal items (as JSON Schema means it) share a key
            for i, item in enumerate(value):
                j = first.setdefault(_identity(item), i)
                if j != i:
                    raise ctx.error(
                        f"{key} lists {describe(item)} twice (items {j} and {i}, lines "
                        f"{lines[j]} and {lines[i]}).", line=lines[i], key=f"{key}[{i}]",
                        fix="remove the repeated item.")

    if isinstance(value, dict) and t == "object":
        _validate_object(value, schema, key, line, ctx)


def _identity(v: Any) -> Any:
    """A hashable key such that two values share it iff :func:`_same` holds between them."""
    if isinstance(v, bool):
        return ("bool", v)
    if isinstance(v, (int, float)):
        return ("number", v)  # 1 and 1.0 are equal and hash alike
    if isinstance(v, (list, tuple)):
        return ("array", tuple(_identity(x) for x in v))
    if isinstance(v, dict):
        return ("object", frozenset((k, _identity(x)) for k, x in v.items()))
    return (type(v).__name__, v)


def _same(a: Any, b: Any) -> bool:
    """Equality as JSON Schema means it: true is not 1, but 1 is 1.0."""
    if isinstance(a, bool) or isinstance(b, bool):
        return isinstance(a, bool) and isinstance(b, bool) and a == b
    if isinstance(a, (int, float)) and isinstance(b, (int, float)):
        return a == b
    return type(a) is type(b) and a == b


def _search(pattern: str, text: str) -> bool:
    """ECMA-262 reading of a schema pattern: ``$`` ends the text (Python's allows a newline)."""
    if pattern.endswith("$") and not pattern.endswith("\\$"):
        pattern = pattern[:-1] + r"\Z"
    return re.search(pattern, text) is not None


def _validate_object(value: dict, schema: dict, key: str, line: int, ctx: Context) -> None:
    props: dict = schema.get("properties", {})
    key_lines = value.key_lines if isinstance(value, LineDict) else {}
    valid = sorted(props)
    name = key or "the top level of the spec"
    for k in value:
        if k in props:
            continue
        kline = key_lines.get(k, line)
        if not isinstance(k, str):
            raise ctx.error(
                f"{name} has the key {k!r}, which is not text; keys here are: "
                f"{', '.join(valid)}.", line=kline, key=key,
                fix="write keys as plain words from the list above.")
        near = difflib.get_close_matches(k, valid, n=1, cutoff=0.6)
        what = f"unknown key {key}.{k}" if key else f"unknown key '{k}' at the top level"
        here = f"Valid keys in {key} are" if key else "Valid keys are"
        if near:
            msg = f"{what}; did you mean '{near[0]}'? {here}: {', '.join(valid)}."
            fix = f"rename '{k}' to '{near[0]}'."
        else:
            msg = f"{what}. {here}: {', '.join(valid)}."
            fix = f"remove '{k}', or use one of the valid keys."
        raise ctx.error(msg, line=kline, key=join_key(key, k), fix=fix, got=k,
                        expected=", ".join(valid))
    for req in schema.get("required", ()):
        if req not in value:
            sub = props.get(req, {})
            ex = sub.get("examples")
            example = f" such as `{req}: {inline_yaml(ex[0])}`" if ex else ""
            raise ctx.error(
                f"{join_key(key, req)} is required but missing.", line=line,
                key=join_key(key, req),
                fix=f"add a line{example}{' under ' + key if key else ''}.")
    n = len(value)
    lo, hi = schema.get("minProperties"), schema.get("maxProperties")
    if (lo is not None and n < lo) or (hi is not None and n > hi):
        expected = schema.get("x-expected", f"between {lo} and {hi} keys")
        given = ", ".join(str(k) for k in value) or "none"
        raise ctx.error(f"{name} must be {expected}; got {n} ({given}).", line=line, key=key,
                        fix=f"write {expected}{_example_fix(schema, key)}.")
    for k, v in value.items():
        validate(v, props[k], join_key(key, k), key_lines.get(k, line), ctx)


