"""Spec: YAML text -> validated, frozen :class:`~relspan.spec.model.Spec`.

- :func:`load_spec` / :func:`parse_spec`: read and validate a spec (located errors).
- :func:`json_schema`: the one schema of spec format v1, as JSON Schema draft 2020-12.
- :func:`starter_spec`: a commented starter spec for a CSV file.
- :func:`spec_reference_markdown`: the reference of every key (docs/spec.md).
"""

from relspan.spec.model import *  # noqa: F401,F403
from relspan.spec.model import __all__ as _model_all
from relspan.spec.docs import spec_reference_markdown
from relspan.spec.load import load_spec, parse_spec
from relspan.spec.schema import json_schema, schema_json_text
from relspan.spec.starter import starter_spec

__all__ = list(_model_all) + [
    "load_spec",
    "parse_spec",
    "json_schema",
    "schema_json_text",
    "starter_spec",
    "spec_reference_markdown",
]
