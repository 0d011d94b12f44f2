"""Spec loading: a file or text -> validated, frozen :class:`~relspan.spec.model.Spec`.

Three stages, each stopping at the first problem with a located
:class:`~relspan.errors.SpecError` (file, line, key path, what was expected,
what was found, and a fix):

1. YAML is parsed here with ``yaml.safe_load`` semantics (no object
   construction) by a loader that records the line of every key and item and
   rejects keys written twice (:mod:`relspan.spec._yamlpos`).
2. The parsed values are checked against the one schema of the format by
   :mod:`relspan.spec.validate`.
3. Rules the schema cannot state are cross-checked and the dataclasses are
   built by :mod:`relspan.spec.rules`.

Only the spec file itself is read here; data contents are read by
:mod:`relspan.data`.
"""

from __future__ import annotations

import math

from pathlib import Path
from typing import Any

import yaml

from relspan.errors import SpecError
from relspan.spec._yamlpos import LineDict, first_duplicate, join_key, load_with_positions
from relspan.spec.model import Spec
from relspan.spec.rules import build_spec
from relspan.spec.validate import SCHEMA, Context, describe, validate

__all__ = ["load_spec", "parse_spec", "MAX_SPEC_BYTES", "MAX_EXPANDED"]

#: largest spec file read (specs are short text; data live in the data files)
MAX_SPEC_BYTES = 16 * 1024 * 1024

#: largest spec once YAML aliases (``*name``) are filled in, counted as values plus characters
#: of text; a few aliases of aliases can otherwise expand a small file a millionfold
MAX_EXPANDED = 2_000_000


def load_spec(path: str | Path) -> Spec:
    """Read and validate the spec file at ``path``.

    Parameters
    ----------
    path : str or Path
        The spec file (YAML, UTF-8). Relative paths inside it are resolved
        against its folder.

    Returns
    -------
    Spec
        The validated spec, with ``text`` holding the file's text.

    Raises
    ------
    SpecError
        If the file is missing, not UTF-8, empty, malformed YAML, or does not
        follow spec format v1. ``str(err)`` is one paragraph with the
        location and a fix.
    """
    shown = str(path)
    p = Path(path)
    try:
        if not p.exists():
            raise SpecError(
                "spec file not found.", path=shown,
                fix=f"check the path (relative paths start from the current folder, "
                    f"{Path.cwd().name!r}), or write a starter spec with `relspan new DATA.csv`.")
        if p.is_dir():
            raise SpecError(
                "this is a folder, not a spec file.", path=shown,
                fix="give the path of the YAML spec file inside it.")
        from relspan.data.sources.detect import special_file

        why = special_file(p)
        if why is not None:
            raise SpecError(f"the spec {why.replace('not a data file', 'not a spec file')}.",
                            path=shown, fix="save the spec as an ordinary YAML file and give its path.")
        size = p.stat().st_size
        if size > MAX_SPEC_BYTES:
            raise SpecError(f"the spec file is {size:,} bytes; relspan reads specs up to "
                            f"{MAX_SPEC_BYTES:,} bytes.", path=shown,
                            fix="a spec names data files and options; keep data in the data files.")
        data = p.read_bytes()
    except (OSError, ValueError) as exc:
        if isinstance(exc, SpecError):
            raise
        raise SpecError(f"the spec file cannot be read ({exc.__class__.__name__}: "
                        f"{getattr(exc, 'strerror', None) or exc}).", path=shown,
                        fix="check the path and that you may read the file.") from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise SpecError(
            f"the spec file is not UTF-8 text (byte 0x{data[exc.start]:02x} at byte "
            f"{exc.start}).", path=shown, line=line,
            fix="save the file as UTF-8 (most editors offer it under 'Save with "
                "encoding').") from None
    return parse_spec(text, p, shown=shown)


def parse_spec(text: str, path: str | Path, *, shown: str | None = None) -> Spec:
    """Validate spec ``text`` as if it were the file at ``path``.

    Parameters
    ----------
    text : str
        The YAML text of the spec.
    path : str or Path
        Where the spec lives (need not exist): relative paths inside the spec
        are resolved against its folder, and errors name it.
    shown : str, optional
        How to name the file in messages; default ``str(path)``.

    Returns
    -------
    Spec

    Raises
    ------
    SpecError
        The first problem found, located by line and key path, with a fix.
    """
    shown = str(path) if shown is None else shown
    ctx = Context(shown, Path(path))
    raw = _parse_yaml(text, ctx)
    validate(raw, SCHEMA, "", raw.line if isinstance(raw, LineDict) else 1, ctx)
    return build_spec(raw, text, ctx)


# --------------------------------------------------------------------------- context


# --------------------------------------------------------------------------- YAML


def _parse_yaml(text: str, ctx: Context) -> LineDict:
    if not isinstance(text, str):
        raise ctx.error(f"the spec must be text; got {type(text).__name__}.", line=None,
                        fix="pass the file's contents decoded as UTF-8.")
    body = text[1:] if text.startswith("\ufeff") else text
    if not body.strip():
        raise ctx.error("the spec is empty.", line=1,
                        fix="start from `relspan new DATA.csv`, or copy the example in "
                            "docs/spec.md.")
    try:
        raw = load_with_positions(body)
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = None if mark is None else mark.line + 1
        col = None if mark is None else mark.column + 1
        what = " ".join(s for s in (exc.context, exc.problem) if s)
        where = f" (column {col})" if col else ""
        raise ctx.error(
            f"the spec is not valid YAML: {what}{where}.", line=line,
            fix=_yaml_fix(exc.problem or "")) from None
    except yaml.YAMLError as exc:
        raise ctx.error(f"the spec is not valid YAML: {exc}.", line=None,
                        fix="check indentation (spaces, not tabs), colons and quotes.") from None
    except RecursionError:
        raise ctx.error("the spec nests lists or mappings too deeply to read.", line=None,
                        fix="the spec format needs at most a few levels; check for a run of "
                            "unclosed brackets.") from None
    size = expanded_size(raw)
    if size > max(MAX_EXPANDED, 2 * len(body)):
        raise ctx.error(
            f"the spec expands to more than {MAX_EXPANDED:,} values and characters once its YAML "
            f"aliases (*name) are filled in, from a file of {len(body):,} characters.", line=None,
            fix="write the repeated parts out, or reuse anchors less deeply (an alias of a list "
                "of aliases multiplies the size).")
    if raw is None:
        raise ctx.error("the spec has no content (only comments or blank lines).", line=1,
                        fix="start from `relspan new DATA.csv`, or copy the example in "
                            "docs/spec.md.")
    dup = first_duplicate(raw)
    if dup is not None:
        where, key, first, second = dup
        full = join_key(where, key)
        raise ctx.error(
            (f"{full} is written twice in the same mapping" if where and isinstance(key, str)
             else f"key {_show_key(key)} is written twice in the same mapping{_in(where)}")
            + f" (lines {first} and {second}); YAML would silently keep only the last one.",
            line=second, key=full,
            fix="keep one of the two and delete or rename the other.")
    bad = _first_unwritable_text(raw)
    if bad is not None:
        where, line, ch = bad
        raise ctx.error(
            f"{where or 'the spec'} holds the lone surrogate \\u{ord(ch):04x}, which is not a character "
            "and cannot be written to a web page or a UTF-8 file.", line=line, key=where or None,
            fix="remove the \\u escape (or write the character it was meant to be).")
    if not isinstance(raw, LineDict):
        raise ctx.error(
            f"the spec must be a mapping of keys such as `relspan:`, `report:` and "
            f"`datasets:`; got {describe(raw)}.", line=getattr(raw, "line", 1),
            fix="start the file with `relspan: 1` and write the sections as `key: value` "
                "lines (see docs/spec.md).")
    return raw


def expanded_size(raw: Any) -> float:
    """Values plus characters of text in ``raw`` with every alias filled in.

    Shared nodes (what aliases make) are counted each time they are used, but
    computed once, so the cost is linear in the file, not in the expansion.
    """
    memo: dict[int, float] = {}
    busy: set[int] = set()

    def size(node: Any) -> float:
        if isinstance(node, str):
            return 1 + len(node)
        if not isinstance(node, (dict, list)):
            return 1
        k = id(node)
        if k in memo:
            return memo[k]
        if k in busy:
            return 1  # an alias inside its own anchor: one reference (the schema refuses it later)
        busy.add(k)
        items = (list(node.keys()) + list(node.values())) if isinstance(node, dict) else node
        total = 1.0
        for item in items:
            total += size(item)
            if total > 4 * MAX_EXPANDED + 1e9:
                break
        busy.discard(k)
        memo[k] = total
        return total

    try:
        return size(raw)
    except RecursionError:
        return math.inf


def _first_unwritable_text(raw: Any) -> tuple[str, int | None, str] | None:
    """(key path, line, character) of the first text holding a lone surrogate, or None."""
    seen: set[int] = set()
    stack: list[tuple[Any, str, int | None]] = [(raw, "", getattr(raw, "line", None))]
    while stack:
        node, where, line = stack.pop()
        if isinstance(node, str):
            for ch in node:
                if "\ud800" <= ch <= "\udfff":
                    return where, line, ch
            continue
        if not isinstance(node, (dict, list)) or id(node) in seen:
            continue
        seen.add(id(node))
        if isinstance(node, dict):
            lines = getattr(node, "key_lines", {})
            for k, v in reversed(list(node.items())):
                stack.append((v, join_key(where, k), lines.get(k, line)))
                stack.append((k, join_key(where, k), lines.get(k, line)))
        else:
            lines = getattr(node, "item_lines", [])
            for i in reversed(range(len(node))):
                stack.append((node[i], f"{where}[{i}]", lines[i] if i < len(lines) else line))
    return None


def _yaml_fix(problem: str) -> str:
    p = problem.lower()
    if "tab" in p or "'\\t'" in p or "\t" in p:
        return "indent with spaces; YAML does not allow tabs for indentation."
    if "mapping values are not allowed" in p:
        return ("a value contains ': '; put the value in quotes, or check the indentation of "
                "the line.")
    if "expected <block end>" in p or "indent" in p:
        return "check the indentation: keys of one mapping must line up exactly."
    if "could not find expected ':'" in p:
        return "write each entry as `key: value`, and close any quote you opened."
    if "unhashable" in p:
        return "use plain text as keys."
    if "found undefined alias" in p:
        return "define the anchor (`&name`) before using it as `*name`."
    return "check indentation (spaces, not tabs), colons and matching quotes or brackets."


def _show_key(key: Any) -> str:
    return f"'{key}'" if isinstance(key, str) else repr(key)


def _in(where: str) -> str:
    return f" at {where}" if where else " at the top level"
