"""Whatever text parse_spec is given, it returns a Spec or raises SpecError, never another error."""

from __future__ import annotations

import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from relspan.errors import SpecError
from relspan.spec import Spec, parse_spec

from spec_strategies import WORDS, mutated_specs, yamlish

_SETTINGS = settings(max_examples=150, deadline=None,
                     suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])


def _parses_or_spec_error(text: str, path) -> None:
    try:
        result = parse_spec(text, path)
    except SpecError as err:
        assert str(err) and err.fix, "every SpecError carries a message and a fix"
        return
    assert isinstance(result, Spec)


@_SETTINGS
@given(st.text())
def test_any_text_gives_a_spec_or_a_spec_error(tmp_path, text):
    _parses_or_spec_error(text, tmp_path / "s.yaml")


@_SETTINGS
@given(st.text(alphabet=list("ab:-[]{}&*!|>'\"#%@`,? \n\t0123456789."), max_size=60))
def test_yaml_punctuation_gives_a_spec_or_a_spec_error(tmp_path, text):
    _parses_or_spec_error(text, tmp_path / "s.yaml")


@_SETTINGS
@given(yamlish)
def test_any_yaml_structure_gives_a_spec_or_a_spec_error(tmp_path, data):
    _parses_or_spec_error(yaml.safe_dump(data), tmp_path / "s.yaml")


@_SETTINGS
@given(mutated_specs(), st.booleans())
def test_mutated_example_specs_give_a_spec_or_a_spec_error(tmp_path, data, with_data):
    if with_data:
        (tmp_path / "data").mkdir(exist_ok=True)
        (tmp_path / "data" / "harbour.csv").write_text("a\n1\n", encoding="utf-8")
    _parses_or_spec_error(yaml.safe_dump(data, sort_keys=False), tmp_path / "s.yaml")


@_SETTINGS
@given(st.lists(st.sampled_from(WORDS + [": ", "\n", "  ", "- ", "&a ", "*a", "<<: *a\n"]),
                max_size=30))
def test_spec_shaped_word_soup_gives_a_spec_or_a_spec_error(tmp_path, parts):
    _parses_or_spec_error("".join(parts), tmp_path / "s.yaml")
