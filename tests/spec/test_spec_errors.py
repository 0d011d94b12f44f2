"""Each validation problem is reported once, located by file, line and key path, with a fix."""

from __future__ import annotations

import re

import pytest

from relspan.errors import SpecError
from relspan.spec import load_spec, parse_spec

from spec_texts import MINIMAL, WITH_TIME


def _error(write_spec, text: str, **kw) -> SpecError:
    path = write_spec(text, **kw)
    with pytest.raises(SpecError) as info:
        load_spec(path)
    err = info.value
    assert str(err).startswith(f"{path}:{err.line}: "), str(err)
    assert "\n  Fix: " in str(err)
    assert str(err).count("\n") == 1, "one paragraph plus the fix line"
    return err


def _line_of(text: str, needle: str) -> int:
    return next(i for i, s in enumerate(text.splitlines(), 1) if needle in s)


# -- schema walk: keys ------------------------------------------------------------------

def test_unknown_key_reports_line_and_nearest_valid_key(write_spec):
    text = MINIMAL.replace("      - column: jobs\n", "      - colum: jobs\n")
    with pytest.raises(SpecError, match=r"unknown key datasets\[0\]\.variables\[2\]\.colum; "
                                        r"did you mean 'column'\? Valid keys in "
                                        r"datasets\[0\]\.variables\[2\] are: column, label, "
                                        r"noise_share, transform, unit\.\n  Fix: rename 'colum' "
                                        r"to 'column'\."):
        load_spec(write_spec(text))
    err = _error(write_spec, text)
    assert err.line == _line_of(text, "colum:")
    assert err.key == "datasets[0].variables[2].colum"


def test_unknown_key_without_near_match_lists_valid_keys(write_spec):
    err = _error(write_spec, MINIMAL + "zzz: 1\n")
    assert re.search(r"unknown key 'zzz' at the top level\. Valid keys are: checks, "
                     r"claims, datasets, relspan, report, run, site, windows\.", str(err))
    assert err.line == 11


def test_missing_required_key_names_it_and_gives_an_example(write_spec):
    text = MINIMAL.replace("    source: data/harbour.csv\n", "")
    err = _error(write_spec, text)
    assert re.search(r"datasets\[0\]\.source is required but missing\.\n  Fix: add a line "
                     r"such as `source: data/harbour.csv` under datasets\[0\]\.", str(err))
    assert err.line == _line_of(text, "- id: harbour")
    assert err.key == "datasets[0].source"


def test_non_text_key_is_rejected(write_spec):
    err = _error(write_spec, MINIMAL.replace("  title: \"Harbour\"\n",
                                             "  title: \"Harbour\"\n  3: x\n"))
    assert "report has the key 3, which is not text" in str(err)


# -- schema walk: values ----------------------------------------------------------------

def test_wrong_type_says_expected_and_got(write_spec):
    text = MINIMAL.replace("      - column: jobs\n", "      - column: 3\n")
    err = _error(write_spec, text)
    assert re.search(r"datasets\[0\]\.variables\[2\]\.column must be text; got the whole number 3",
                     str(err))
    assert "put the value in quotes" in str(err)
    assert (err.expected, err.got) == ("text", "the whole number 3")
    assert err.line == _line_of(text, "column: 3")


def test_yes_read_as_boolean_suggests_quotes(write_spec):
    text = MINIMAL.replace("title: \"Harbour\"", "title: yes")
    with pytest.raises(SpecError, match=r"report\.title must be text; got the true/false value "
                                        r"true \(YAML reads yes/no/on/off as true/false"):
        load_spec(write_spec(text))


def test_enum_lists_allowed_values_and_nearest(write_spec):
    text = MINIMAL.replace("      - column: jobs\n", "      - {column: jobs, transform: logg}\n")
    err = _error(write_spec, text)
    assert re.search(r"transform must be one of: none, log, diff, logdiff, detrend, demean, standardise; "
                     r"got the text 'logg'\. Did you mean 'log'\?", str(err))
    assert "e.g. `transform: log`" in str(err)


def test_empty_section_reports_a_mapping_was_expected(write_spec):
    text = MINIMAL.replace("  title: \"Harbour\"\n", "")
    with pytest.raises(SpecError, match=r":2: report must be a mapping; got nothing"):
        load_spec(write_spec(text))


def test_wrong_format_version_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r":1: relspan must be the number 1; got the whole "
                                        r"number 2\.\n  Fix: write `relspan: 1`\."):
        load_spec(write_spec(MINIMAL.replace("relspan: 1", "relspan: 2")))


def test_boolean_is_not_the_format_version(write_spec):
    with pytest.raises(SpecError, match=r"relspan must be the number 1; got the true/false"):
        load_spec(write_spec(MINIMAL.replace("relspan: 1", "relspan: true")))


def test_bad_id_pattern_is_explained(write_spec):
    with pytest.raises(SpecError, match=r"datasets\[0\]\.id must be an id of lower-case letters, "
                                        r"digits, '-' and '_'.*got the text 'Harbour'"):
        load_spec(write_spec(MINIMAL.replace("id: harbour", "id: Harbour")))


def test_too_few_variables_is_rejected(write_spec):
    text = MINIMAL.replace("      - column: ships\n      - column: jobs\n", "")
    with pytest.raises(SpecError, match=r"datasets\[0\]\.variables must list at least 2 items; "
                                        r"got 1"):
        load_spec(write_spec(text))


def test_width_with_unknown_unit_explains_the_forms(write_spec):
    text = WITH_TIME + "windows:\n  - {id: r, kind: rolling, width: 10 yrs, step: 2}\n"
    with pytest.raises(SpecError, match=r"windows\[0\]\.width must be a whole number of rows >= 1, "
                                        r"or text such as \"10 years\" \(units: years, quarters, "
                                        r"months, weeks, days\); got the text '10 yrs'"):
        load_spec(write_spec(text))


def test_zero_width_is_rejected(write_spec):
    text = MINIMAL + "windows:\n  - {id: r, kind: rolling, width: 0, step: 2}\n"
    with pytest.raises(SpecError, match=r"windows\[0\]\.width must be >= 1; got the whole number 0"):
        load_spec(write_spec(text))


def test_coranks_accepts_auto_or_list_of_positive_integers(write_spec):
    with pytest.raises(SpecError, match=r"checks\.coranks\[0\] must be >= 1; got the whole number 0"):
        load_spec(write_spec(MINIMAL + "checks: {coranks: [0]}\n"))
    with pytest.raises(SpecError, match=r"checks\.coranks must be `auto` or a list of whole numbers"):
        load_spec(write_spec(MINIMAL + "checks: {coranks: all}\n"))


def test_tolerance_needs_exactly_one_of_absolute_or_relative(write_spec):
    with pytest.raises(SpecError, match=r"checks\.tolerance must be a mapping with exactly one of "
                                        r"`absolute` or `relative`; got 2 \(absolute, relative\)"):
        load_spec(write_spec(MINIMAL + "checks: {tolerance: {absolute: 1, relative: 0.1}}\n"))
    with pytest.raises(SpecError, match=r"got 0 \(none\)"):
        load_spec(write_spec(MINIMAL + "checks: {tolerance: {}}\n"))


def test_tolerance_must_be_positive(write_spec):
    with pytest.raises(SpecError, match=r"checks\.tolerance\.absolute must be > 0; got the whole "
                                        r"number 0"):
        load_spec(write_spec(MINIMAL + "checks: {tolerance: {absolute: 0}}\n"))


def test_non_finite_number_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r"checks\.max_angle_deg must be a finite number"):
        load_spec(write_spec(MINIMAL + "checks: {max_angle_deg: .inf}\n"))


def test_repeated_assumption_is_reported_with_both_lines(write_spec):
    text = MINIMAL + "checks:\n  assumptions:\n    - equal\n    - equal\n"
    with pytest.raises(SpecError, match=r"checks\.assumptions lists the text 'equal' twice "
                                        r"\(items 0 and 1, lines 13 and 14\)"):
        load_spec(write_spec(text))


# -- cross-checks -----------------------------------------------------------------------

def test_duplicate_dataset_ids_are_rejected(write_spec):
    extra = MINIMAL.split("datasets:\n", 1)[1]
    text = MINIMAL + extra
    err = _error(write_spec, text)
    assert re.search(r"datasets\[1\]\.id is 'harbour', but another dataset in datasets already has "
                     r"this id \(line 5\)", str(err))
    assert err.line == 11


def test_duplicate_window_ids_are_rejected(write_spec):
    text = MINIMAL + "windows:\n  - {id: full, kind: full}\n  - {id: full, kind: full}\n"
    with pytest.raises(SpecError, match=r":13: windows\[1\]\.id is 'full', but another window plan"):
        load_spec(write_spec(text))


def test_duplicate_claim_ids_are_rejected(write_spec):
    claim = "  - {id: c, kind: corank, dataset: harbour, plan: full, assumption: equal, equals: 1}\n"
    with pytest.raises(SpecError, match=r"claims\[1\]\.id is 'c', but another claim in claims"):
        load_spec(write_spec(MINIMAL + "claims:\n" + claim + claim))


def test_duplicate_variable_columns_are_rejected(write_spec):
    text = MINIMAL.replace("      - column: jobs\n", "      - column: cargo\n")
    err = _error(write_spec, text)
    assert re.search(r"datasets\[0\]\.variables\[2\]\.column 'cargo' is listed twice in this "
                     r"dataset \(lines 8 and 10\)", str(err))


def test_dataset_naming_unknown_plan_suggests_nearest(write_spec):
    text = MINIMAL + "    plans: [ful]\n"
    err = _error(write_spec, text)
    assert re.search(r"datasets\[0\]\.plans\[0\] is 'ful', which is not the id of a window plan\. "
                     r"Plans defined under windows: full\. Did you mean 'full'\?", str(err))
    assert err.line == 11 and err.key == "datasets[0].plans[0]"


def test_normalise_on_must_be_a_variable_of_each_dataset(write_spec):
    with pytest.raises(SpecError, match=r":12: checks\.normalise_on is 'crago', which is not a "
                                        r"variable of datasets\[0\] \('harbour'\)\. Its variables "
                                        r"are: cargo, ships, jobs\. Did you mean 'cargo'\?"):
        load_spec(write_spec(MINIMAL + "checks:\n  normalise_on: crago\n"))


def test_corank_at_or_above_the_number_of_variables_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r"checks\.coranks asks for corank 3, but datasets\[0\] "
                                        r"\('harbour'\) has 3 variables, so at most 2 relations"):
        load_spec(write_spec(MINIMAL + "checks: {coranks: [1, 3]}\n"))


def test_noise_share_on_some_variables_only_is_rejected(write_spec):
    text = MINIMAL.replace("      - column: ships\n", "      - {column: ships, noise_share: 1}\n")
    err = _error(write_spec, text)
    assert re.search(r"datasets\[0\]\.variables\[1\] has a noise_share but "
                     r"datasets\[0\]\.variables\[0\] has none", str(err))
    assert err.line == _line_of(text, "column: cargo")


def test_all_zero_noise_shares_are_rejected(write_spec):
    text = MINIMAL.replace("column: cargo", "{column: cargo, noise_share: 0}")
    text = text.replace("column: ships", "{column: ships, noise_share: 0}")
    text = text.replace("column: jobs", "{column: jobs, noise_share: 0}")
    with pytest.raises(SpecError, match=r"every noise_share in datasets\[0\]\.variables is 0"):
        load_spec(write_spec(text))


def test_shaped_listed_without_noise_shares_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r"checks\.assumptions lists 'shaped', but the variables "
                                        r"of datasets\[0\] \('harbour'\) have no noise_share"):
        load_spec(write_spec(MINIMAL + "checks: {assumptions: [equal, shaped]}\n"))


def test_periods_plan_without_periods_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r":13: windows\[0\]\.periods is missing; a periods "
                                        r"plan lists its periods\.\n  Fix"):
        load_spec(write_spec(WITH_TIME + "windows:\n  - {id: eras, kind: periods}\n"))


@pytest.mark.parametrize("missing", ["width", "step"])
def test_rolling_plan_without_width_or_step_is_rejected(write_spec, missing):
    plan = {"width": "step: 8", "step": "width: 40"}[missing]
    with pytest.raises(SpecError, match=rf"windows\[0\]\.{missing} is missing; a rolling plan "
                                         r"needs width and step\."):
        load_spec(write_spec(MINIMAL + f"windows:\n  - {{id: r, kind: rolling, {plan}}}\n"))


def test_full_plan_with_width_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r"windows\[0\] is a full plan, which takes no 'width'"):
        load_spec(write_spec(MINIMAL + "windows:\n  - {id: f, kind: full, width: 4}\n"))


def test_mixing_rows_and_time_units_is_rejected(write_spec):
    text = WITH_TIME + "windows:\n  - {id: r, kind: rolling, width: 10 years, step: 8}\n"
    with pytest.raises(SpecError, match=r"windows\[0\] mixes rows and time units"):
        load_spec(write_spec(text))


def test_time_unit_width_on_dataset_without_time_column_is_rejected(write_spec):
    text = MINIMAL + "windows:\n  - {id: decade, kind: rolling, width: 10 years, step: 2 years}\n"
    err = _error(write_spec, text)
    assert re.search(r"datasets\[0\] \('harbour'\) has no time column, but window plan 'decade' "
                     r"\(windows\[0\]\) counts its width in years, which needs dates\.", str(err))
    assert err.line == _line_of(text, "- id: harbour")


def test_periods_plan_on_dataset_without_time_column_is_rejected(write_spec):
    text = MINIMAL + ("    plans: [eras]\nwindows:\n  - id: eras\n    kind: periods\n    periods:\n"
                      "      - {label: A, from: 1990-01-01, to: 1999-12-31}\n")
    err = _error(write_spec, text)
    assert "window plan 'eras' (windows[0]) is a periods plan, which needs dates" in str(err)
    assert err.line == 11


def test_period_ending_before_it_starts_is_rejected(write_spec):
    text = WITH_TIME + ("windows:\n  - id: eras\n    kind: periods\n    periods:\n"
                        "      - {label: A, from: 1999-01-01, to: 1990-12-31}\n")
    with pytest.raises(SpecError, match=r"windows\[0\]\.periods\[0\]\.to \(1990-12-31\) is before "
                                        r"windows\[0\]\.periods\[0\]\.from \(1999-01-01\)"):
        load_spec(write_spec(text))


def test_impossible_calendar_date_is_rejected(write_spec):
    text = MINIMAL.replace("    source: data/harbour.csv\n",
                           "    source: data/harbour.csv\n    time: {column: q, from: 2021-02-30}\n")
    with pytest.raises(SpecError, match=r":7: datasets\[0\]\.time\.from '2021-02-30' is not a date "
                                        r"of the calendar"):
        load_spec(write_spec(text))


def _claim(**fields) -> str:
    base = {"id": "c", "kind": "corank", "dataset": "harbour", "plan": "full",
            "assumption": "equal", "equals": 1}
    base.update(fields)
    body = ", ".join(f"{k}: {v}" for k, v in base.items() if v is not None)
    return MINIMAL + "claims:\n  - {" + body + "}\n"


def test_claim_about_unknown_dataset_suggests_nearest(write_spec):
    err = _error(write_spec, _claim(dataset="harbor"))
    assert re.search(r"claims\[0\]\.dataset is 'harbor', which is not the id of a dataset\. "
                     r"Datasets: harbour\. Did you mean 'harbour'\?", str(err))
    assert err.line == 12 and err.key == "claims[0].dataset"


def test_claim_about_unknown_plan_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r"claims\[0\]\.plan is 'rolling', which is not the id of "
                                        r"a window plan\. Plans: full\."):
        load_spec(write_spec(_claim(plan="rolling")))


def test_claim_about_plan_the_dataset_does_not_use_is_rejected(write_spec):
    text = _claim(plan="r").replace("claims:", "windows:\n  - {id: full, kind: full}\n"
                                    "  - {id: r, kind: rolling, width: 4, step: 1}\nclaims:")
    text = text.replace("      - column: jobs\n", "      - column: jobs\n    plans: [full]\n")
    with pytest.raises(SpecError, match=r"claims\[0\]\.plan is 'r', but dataset 'harbour' does not "
                                        r"use that plan \(its plans: full\)"):
        load_spec(write_spec(text))


def test_claim_under_assumption_not_analysed_is_rejected(write_spec):
    text = _claim().replace("claims:", "checks: {assumptions: [elementary]}\nclaims:")
    with pytest.raises(SpecError, match=r"claims\[0\] is made under the equal assumption, which "
                                        r"is not analysed for dataset 'harbour' \(its assumptions: "
                                        r"elementary\)"):
        load_spec(write_spec(text))


def test_claim_default_assumption_must_be_analysed(write_spec):
    text = (MINIMAL + "checks: {assumptions: [equal]}\nclaims:\n"
            "  - {id: s, kind: sign_stable, dataset: harbour, plan: full, normalise_on: cargo, "
            "variable: jobs}\n")
    with pytest.raises(SpecError, match=r"made under the elementary assumption \(the default for a "
                                        r"sign_stable claim\)"):
        load_spec(write_spec(text))


def test_corank_claim_without_bound_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r"claims\[0\] is a corank claim but gives none of equals, "
                                        r"at_least, at_most\."):
        load_spec(write_spec(_claim(equals=None)))


def test_corank_claim_without_assumption_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r"claims\[0\]\.assumption is missing; a corank claim must name"):
        load_spec(write_spec(_claim(assumption=None)))


def test_corank_claim_with_equals_and_at_least_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r"claims\[0\] gives equals together with at_least"):
        load_spec(write_spec(_claim(at_least=1)))


def test_corank_claim_with_crossed_bounds_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r"claims\[0\]\.at_least \(2\) is above claims\[0\]\.at_most "
                                        r"\(1\)"):
        load_spec(write_spec(_claim(equals=None, at_least=2, at_most=1)))


def test_corank_claim_at_the_number_of_variables_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r"claims\[0\]\.equals is 3, but dataset 'harbour' has 3 "
                                        r"variables"):
        load_spec(write_spec(_claim(equals=3)))


def test_claim_field_of_another_kind_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r"claims\[0\]\.variable does not apply to a corank claim, "
                                        r"which uses: assumption, equals, at_least, at_most\."):
        load_spec(write_spec(_claim(variable="cargo")))


def test_subspace_claim_without_corank_is_rejected(write_spec):
    with pytest.raises(SpecError, match=r"claims\[0\]\.corank is missing; a subspace_stable "
                                        r"claim compares"):
        load_spec(write_spec(_claim(kind="subspace_stable", equals=None)))


def test_sign_claim_about_unknown_variable_suggests_nearest(write_spec):
    text = _claim(kind="sign_stable", equals=None, assumption=None, normalise_on="cargo",
                  variable="jbos")
    with pytest.raises(SpecError, match=r"claims\[0\]\.variable is 'jbos', which is not a variable "
                                        r"of dataset 'harbour' \(its variables: cargo, ships, "
                                        r"jobs\)\. Did you mean 'jobs'\?"):
        load_spec(write_spec(text))


def test_sign_claim_on_its_own_normalising_variable_is_rejected(write_spec):
    text = _claim(kind="sign_stable", equals=None, assumption=None, normalise_on="cargo",
                  variable="cargo")
    with pytest.raises(SpecError, match=r"claims\[0\]\.variable and claims\[0\]\.normalise_on are "
                                        r"both 'cargo'"):
        load_spec(write_spec(text))


def test_bounded_coefficient_claim_is_about_diagonal_noise_only(write_spec):
    text = _claim(kind="coefficient_bounded", equals=None, normalise_on="cargo", variable="jobs")
    with pytest.raises(SpecError, match=r"a coefficient_bounded claim is about the diagonal-noise "
                                        r"\(Frisch scheme\) interval"):
        load_spec(write_spec(text))


def test_site_out_may_not_be_the_spec_folder(write_spec):
    with pytest.raises(SpecError, match=r":12: site\.out '\.' is the spec's own folder or a folder "
                                        r"above it"):
        load_spec(write_spec(MINIMAL + "site:\n  out: .\n"))


def test_time_column_listed_as_variable_is_rejected(write_spec):
    text = MINIMAL.replace("    source: data/harbour.csv\n",
                           "    source: data/harbour.csv\n    time: {column: jobs}\n")
    with pytest.raises(SpecError, match=r"datasets\[0\]\.time\.column 'jobs' is also listed as a "
                                        r"variable"):
        load_spec(write_spec(text))


# -- files ------------------------------------------------------------------------------

def test_missing_source_file_names_key_and_line(write_spec):
    err = _error(write_spec, MINIMAL, files=())
    assert re.search(r":6: datasets\[0\]\.source: data file 'data/harbour\.csv' not found \(looked "
                     r"for 'harbour\.csv' in 'data' under the spec's folder\)\.\n  Fix: check the "
                     r"spelling; the path is relative to the folder of the spec", str(err))
    assert err.key == "datasets[0].source"


def test_source_that_is_a_folder_is_rejected(write_spec, tmp_path):
    (tmp_path / "data").mkdir()
    text = MINIMAL.replace("data/harbour.csv", "data")
    with pytest.raises(SpecError, match=r":6: datasets\[0\]\.source 'data' is a folder; a data "
                                        r"file is expected"):
        load_spec(write_spec(text, files=()))


def test_source_outside_spec_folder_needs_allow_outside(write_spec, tmp_path):
    (tmp_path / "spec").mkdir()
    text = MINIMAL.replace("data/harbour.csv", "../data/harbour.csv")
    with pytest.raises(SpecError, match=r":6: datasets\[0\]\.source '\.\./data/harbour\.csv' lies "
                                        r"outside the spec's folder.*\n  Fix: .*add "
                                        r"`allow_outside: true` to datasets\[0\]\."):
        load_spec(write_spec(text, name="spec/spec.yaml"))


def test_absolute_source_path_counts_as_outside(write_spec, tmp_path):
    text = MINIMAL.replace("data/harbour.csv", str(tmp_path.parent / "elsewhere.csv"))
    with pytest.raises(SpecError, match=r"lies outside the spec's folder"):
        load_spec(write_spec(text))


def test_parse_spec_names_the_given_path(tmp_path):
    with pytest.raises(SpecError, match=r"^in-memory\.yaml:1: relspan must be"):
        parse_spec(MINIMAL.replace("relspan: 1", "relspan: 9"), "in-memory.yaml")
