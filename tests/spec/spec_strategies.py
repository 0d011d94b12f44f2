"""Hypothesis strategies for the spec tests: YAML-ish values and mutated example specs."""

from __future__ import annotations

import copy
from typing import Any

import yaml
from hypothesis import strategies as st

from relspan.spec.schema import EXAMPLE_SPEC

#: words that occur in specs, so that mutations often hit meaningful keys and values
WORDS = ["relspan", "report", "title", "datasets", "id", "source", "variables", "column",
         "windows", "kind", "full", "rolling", "width", "step", "periods", "checks",
         "assumptions", "equal", "shaped", "tolerance", "relative", "absolute", "coranks",
         "auto", "claims", "corank", "equals", "plan", "harbour", "cargo", "jobs", "ships",
         "site", "out", "10 years", "2 quarter", "1990-01-01", "2021-02-30", "data/harbour.csv",
         "..", "/", "log", "none", "svg", "en"]

scalars = st.one_of(
    st.none(), st.booleans(), st.integers(-5, 50),
    st.floats(allow_nan=False, allow_infinity=False, min_value=-1e6, max_value=1e6),
    st.sampled_from(WORDS), st.text(alphabet="abc-_ 019.:%", max_size=8),
)
yamlish = st.recursive(
    scalars,
    lambda inner: st.one_of(st.lists(inner, max_size=4),
                            st.dictionaries(st.sampled_from(WORDS) | st.text(max_size=4), inner,
                                            max_size=4)),
    max_leaves=20,
)


def example_data() -> dict:
    """The full example spec as plain Python data (dates are quoted there, so text)."""
    return yaml.safe_load(EXAMPLE_SPEC)


def _containers(node: Any, path: tuple = ()) -> list[tuple]:
    out = [path]
    if isinstance(node, dict):
        for k, v in node.items():
            out += _containers(v, path + (k,)) if isinstance(v, (dict, list)) else [path + (k,)]
    elif isinstance(node, list):
        for i, v in enumerate(node):
            out += _containers(v, path + (i,)) if isinstance(v, (dict, list)) else [path + (i,)]
    return out


@st.composite
def mutated_specs(draw) -> dict:
    """The example spec with one to three keys replaced, added or deleted."""
    data = example_data()
    for _ in range(draw(st.integers(1, 3))):
        paths = _containers(data)
        path = draw(st.sampled_from(paths))
        if not path:
            continue
        parent = data
        for p in path[:-1]:
            parent = parent[p]
        action = draw(st.sampled_from(["replace", "delete", "add"]))
        last = path[-1]
        if action == "replace":
            parent[last] = draw(yamlish)
        elif action == "delete":
            del parent[last]
        elif isinstance(parent, dict):
            parent[draw(st.sampled_from(WORDS))] = copy.deepcopy(draw(yamlish))
        else:
            parent.append(draw(yamlish))
    return data
