"""Reading the spec file and its YAML: duplicates, malformed text, unreadable files."""

from __future__ import annotations

import pytest

from relspan.errors import SpecError
from relspan.spec import load_spec, parse_spec

from spec_texts import MINIMAL


def test_duplicate_key_is_an_error_naming_both_lines(write_spec):
    text = MINIMAL.replace('  title: "Harbour"\n', '  title: "Harbour"\n  summary: s\n  title: "Port"\n')
    with pytest.raises(SpecError, match=r":5: report\.title is written twice in the same mapping "
                                        r"\(lines 3 and 5\); YAML would silently keep only the "
                                        r"last one\.\n  Fix: keep one of the two") as info:
        load_spec(write_spec(text))
    assert info.value.key == "report.title" and info.value.line == 5


def test_duplicate_top_level_key_is_an_error(write_spec):
    with pytest.raises(SpecError, match=r":11: key 'relspan' is written twice in the same mapping "
                                        r"at the top level \(lines 1 and 11\)"):
        load_spec(write_spec(MINIMAL + "relspan: 1\n"))


def test_duplicate_key_inside_a_list_item_is_found(write_spec):
    text = MINIMAL.replace("      - column: jobs\n", "      - {column: jobs, column: jobs2}\n")
    with pytest.raises(SpecError, match=r":10: datasets\[0\]\.variables\[2\]\.column is written "
                                        r"twice"):
        load_spec(write_spec(text))


def test_merge_key_may_be_overridden_without_a_duplicate_error(write_spec):
    text = MINIMAL.replace("      - column: cargo\n", "      - &v {column: cargo, unit: kt}\n")
    text = text.replace("      - column: ships\n", "      - {<<: *v, column: ships}\n")
    assert load_spec(write_spec(text)).datasets[0].variables[1].column == "ships"


def test_malformed_yaml_reports_line_and_column(write_spec):
    text = MINIMAL + "windows: [full\n"
    with pytest.raises(SpecError, match=r":12: the spec is not valid YAML: while parsing a flow "
                                        r"sequence expected ',' or '\]', but got '<stream end>' "
                                        r"\(column 1\)\.\n  Fix: ") as info:
        load_spec(write_spec(text))
    assert info.value.line == 12


def test_tab_indentation_gets_a_tab_specific_fix(write_spec):
    text = "relspan: 1\nreport:\n\ttitle: x\n"
    with pytest.raises(SpecError, match=r":3: the spec is not valid YAML: .*'\\t'.*\n  Fix: indent "
                                        r"with spaces; YAML does not allow tabs"):
        load_spec(write_spec(text))


def test_colon_in_plain_value_gets_a_quoting_fix(write_spec):
    text = MINIMAL.replace('title: "Harbour"', "title: Harbour: a study")
    with pytest.raises(SpecError, match=r":3: the spec is not valid YAML: mapping values are not "
                                        r"allowed here.*\n  Fix: a value contains ': '; put the "
                                        r"value in quotes"):
        load_spec(write_spec(text))


def test_undefined_alias_is_malformed_yaml(write_spec):
    with pytest.raises(SpecError, match=r":1: the spec is not valid YAML: found undefined alias"):
        load_spec(write_spec("relspan: *nowhere\n"))


def test_python_object_tags_are_refused_as_in_safe_load(write_spec):
    text = MINIMAL.replace('"Harbour"', "!!python/object/apply:os.getcwd []")
    with pytest.raises(SpecError, match=r":3: the spec is not valid YAML: could not determine a "
                                        r"constructor for the tag"):
        load_spec(write_spec(text))


def test_missing_spec_file_is_reported_with_a_fix(tmp_path):
    path = tmp_path / "nope.yaml"
    with pytest.raises(SpecError, match=r"nope\.yaml: spec file not found\.\n  Fix: check the "
                                        r"path .* or write a starter spec with `relspan new "
                                        r"DATA\.csv`\."):
        load_spec(path)


def test_folder_given_as_spec_is_reported(tmp_path):
    with pytest.raises(SpecError, match=r"this is a folder, not a spec file\.\n  Fix: give the "
                                        r"path of the YAML spec file inside it\."):
        load_spec(tmp_path)


def test_spec_that_is_not_utf8_names_the_line_of_the_bad_byte(tmp_path):
    path = tmp_path / "latin1.yaml"
    path.write_bytes(MINIMAL.replace("Harbour", "Hafen B\u00e4r").encode("latin-1"))
    with pytest.raises(SpecError, match=r"latin1\.yaml:3: the spec file is not UTF-8 text \(byte "
                                        r"0xe4 .*\n  Fix: save the file as UTF-8") as info:
        load_spec(path)
    assert info.value.line == 3


@pytest.mark.parametrize("text", ["", "   \n\n", "# only a comment\n"])
def test_empty_spec_is_reported_with_a_fix(tmp_path, text):
    path = tmp_path / "empty.yaml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(SpecError, match=r"empty\.yaml:1: the spec (is empty|has no content).*\n  "
                                        r"Fix: start from `relspan new DATA\.csv`"):
        load_spec(path)


def test_spec_that_is_a_list_is_rejected(tmp_path):
    with pytest.raises(SpecError, match=r"the spec must be a mapping of keys such as `relspan:`"):
        parse_spec("- a\n- b\n", tmp_path / "s.yaml")


def test_self_referencing_anchor_gives_a_spec_error(tmp_path):
    with pytest.raises(SpecError, match=r"unknown key 'a' at the top level"):
        parse_spec("a: &x [*x]\n", tmp_path / "s.yaml")


def test_deeply_nested_text_gives_a_spec_error(tmp_path):
    with pytest.raises(SpecError, match=r"nests lists or mappings too deeply|not valid YAML"):
        parse_spec("relspan: " + "[" * 5000 + "]" * 5000 + "\n", tmp_path / "s.yaml")
