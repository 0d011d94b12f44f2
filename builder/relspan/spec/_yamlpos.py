"""YAML with positions: ``yaml.safe_load`` semantics, plus the line of every key and item.

:class:`PositionLoader` is a :class:`yaml.SafeLoader` subclass. It builds the
same Python values as ``yaml.safe_load`` except that

- mappings are :class:`LineDict` (a ``dict`` that also knows its own line and
  the line of each of its keys) and sequences are :class:`LineList` (a
  ``list`` that knows the line of each item);
- a key written twice in one mapping is recorded (``LineDict.duplicates``)
  instead of silently keeping the last value; keys brought in by a merge key
  (``<<``) may be overridden as YAML intends;
- timestamps stay the text they were written as (``from: 1990-01-01`` gives
  ``"1990-01-01"``), which is what the spec format expects and which avoids
  ``ValueError`` from impossible dates such as ``2021-02-30``.

Lines are 1-based, as editors show them.
"""

from __future__ import annotations

from collections.abc import Hashable
from typing import Any

import yaml

__all__ = ["PositionLoader", "LineDict", "LineList", "load_with_positions", "first_duplicate"]

_MERGE_TAG = "tag:yaml.org,2002:merge"


class LineDict(dict):
    """A mapping from YAML that remembers where it and its keys were written."""

    __slots__ = ("line", "key_lines", "duplicates")

    def __init__(self, line: int) -> None:
        super().__init__()
        self.line = line
        #: key -> 1-based line of the key
        self.key_lines: dict[Any, int] = {}
        #: (key, first line, second line) for each key written twice
        self.duplicates: list[tuple[Any, int, int]] = []


class LineList(list):
    """A sequence from YAML that remembers where it and its items were written."""

    __slots__ = ("line", "item_lines")

    def __init__(self, line: int) -> None:
        super().__init__()
        self.line = line
        #: 1-based line of each item
        self.item_lines: list[int] = []


class PositionLoader(yaml.SafeLoader):
    """SafeLoader that records lines of keys and items and flags duplicate keys."""


def _construct_map(loader: PositionLoader, node: yaml.MappingNode):
    data = LineDict(node.start_mark.line + 1)
    yield data
    explicit = {id(k) for k, _ in node.value if k.tag != _MERGE_TAG}
    loader.flatten_mapping(node)
    explicit_lines: dict[Any, int] = {}
    for key_node, value_node in node.value:
        key = loader.construct_object(key_node, deep=False)
        if not isinstance(key, Hashable):
            raise yaml.constructor.ConstructorError(
                "while constructing a mapping", node.start_mark,
                "found unhashable key", key_node.start_mark)
        value = loader.construct_object(value_node, deep=False)
        key_line = key_node.start_mark.line + 1
        if id(key_node) in explicit:
            if key in explicit_lines:
                data.duplicates.append((key, explicit_lines[key], key_line))
            else:
                explicit_lines[key] = key_line
        data[key] = value
        data.key_lines[key] = key_line


def _construct_seq(loader: PositionLoader, node: yaml.SequenceNode):
    data = LineList(node.start_mark.line + 1)
    yield data
    for item in node.value:
        data.append(loader.construct_object(item, deep=False))
        data.item_lines.append(item.start_mark.line + 1)


def _construct_timestamp(loader: PositionLoader, node: yaml.ScalarNode) -> str:
    return str(loader.construct_scalar(node))


PositionLoader.add_constructor("tag:yaml.org,2002:map", _construct_map)
PositionLoader.add_constructor("tag:yaml.org,2002:seq", _construct_seq)
PositionLoader.add_constructor("tag:yaml.org,2002:timestamp", _construct_timestamp)


def load_with_positions(text: str) -> Any:
    """Parse one YAML document like ``yaml.safe_load``, keeping positions.

    Raises
    ------
    yaml.YAMLError
        For malformed YAML (with ``problem_mark`` where PyYAML knows it).
    """
    loader = PositionLoader(text)
    try:
        return loader.get_single_data()
    finally:
        loader.dispose()


def first_duplicate(data: Any, key: str = "") -> tuple[str, Any, int, int] | None:
    """The first key written twice in one mapping, in document order.

    Returns ``(key path of the mapping, key, first line, second line)`` or
    None. Safe on self-referencing structures made with anchors.
    """
    seen: set[int] = set()
    stack: list[tuple[Any, str]] = [(data, key)]
    while stack:
        node, where = stack.pop()
        if id(node) in seen:
            continue
        seen.add(id(node))
        if isinstance(node, LineDict):
            if node.duplicates:
                k, a, b = node.duplicates[0]
                return where, k, a, b
            children = [(v, join_key(where, k)) for k, v in node.items()]
        elif isinstance(node, list):
            children = [(v, f"{where}[{i}]") for i, v in enumerate(node)]
        else:
            continue
        stack.extend(reversed(children))
    return None


def join_key(where: str, key: Any) -> str:
    """Key path of ``key`` inside the mapping at ``where`` (``a.b``)."""
    name = key if isinstance(key, str) else repr(key)
    return f"{where}.{name}" if where else str(name)
