"""Valid specs load into the right frozen dataclasses, with the model's defaults."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest

from relspan.spec import (
    ASSUMPTIONS,
    ChecksSpec,
    ClaimSpec,
    DatasetSpec,
    Period,
    ReportMeta,
    SiteSpec,
    Span,
    Spec,
    Tolerance,
    VariableSpec,
    WindowPlanSpec,
    load_spec,
)
from relspan.spec.schema import EXAMPLE_SPEC

from spec_texts import MINIMAL, WITH_TIME


def test_minimal_spec_loads_with_model_defaults(write_spec, tmp_path):
    spec = load_spec(write_spec(MINIMAL))
    assert isinstance(spec, Spec)
    assert spec.version == 1
    assert spec.report == ReportMeta(title="Harbour")
    (ds,) = spec.datasets
    assert isinstance(ds, DatasetSpec)
    assert ds.id == "harbour" and ds.title == "harbour"
    assert ds.source == "data/harbour.csv"
    assert ds.source_path == (tmp_path / "data" / "harbour.csv").resolve()
    assert ds.variables == (VariableSpec("cargo", "cargo"), VariableSpec("ships", "ships"),
                            VariableSpec("jobs", "jobs"))
    assert (ds.format, ds.missing, ds.plans, ds.time) == ("auto", "drop", (), None)
    assert spec.windows == (WindowPlanSpec(id="full", kind="full"),)
    assert spec.checks == ChecksSpec()
    assert spec.claims == ()
    assert spec.site == SiteSpec(out="relspan-site", out_path=(tmp_path / "relspan-site").resolve())
    assert spec.path == (tmp_path / "spec.yaml").resolve()


def test_spec_text_is_the_file_text(write_spec):
    path = write_spec(MINIMAL + "# a trailing comment\n")
    assert load_spec(path).text == MINIMAL + "# a trailing comment\n"


def test_default_assumptions_leave_out_shaped_without_noise_shares(write_spec):
    (ds,) = load_spec(write_spec(MINIMAL)).datasets
    assert ds.checks.assumptions == tuple(a for a in ASSUMPTIONS if a != "shaped")


def test_default_assumptions_keep_shaped_when_every_variable_has_a_noise_share(write_spec):
    text = MINIMAL.replace("      - column: cargo\n", "      - {column: cargo, noise_share: 1}\n")
    text = text.replace("      - column: ships\n", "      - {column: ships, noise_share: 0.5}\n")
    text = text.replace("      - column: jobs\n", "      - {column: jobs, noise_share: 2}\n")
    (ds,) = load_spec(write_spec(text)).datasets
    assert ds.checks.assumptions == ASSUMPTIONS
    assert ds.noise_shape == (1.0, 0.5, 2.0)


def test_dataset_checks_override_top_level_checks_key_by_key(write_spec):
    text = MINIMAL.replace("      - column: jobs\n", "      - column: jobs\n"
                           "    checks: {tolerance: {absolute: 0.02}, seed: 7}\n")
    text += "checks:\n  seed: 3\n  max_angle_deg: 4.5\n  coranks: [1, 2]\n"
    spec = load_spec(write_spec(text))
    (ds,) = spec.datasets
    assert spec.checks.seed == 3 and spec.checks.tolerance == Tolerance()
    assert ds.checks.seed == 7
    assert ds.checks.tolerance == Tolerance(absolute=0.02, relative=None)
    assert ds.checks.max_angle_deg == 4.5
    assert ds.checks.coranks == (1, 2)


def test_widths_in_rows_and_time_units_parse_into_spans(write_spec):
    text = WITH_TIME + ("windows:\n"
                        "  - {id: rows, kind: rolling, width: 40, step: 8}\n"
                        "  - {id: years, kind: rolling, width: '10 years', step: 1 quarter}\n"
                        "  - {id: grow, kind: expanding, width: 1 year, step: '2 months'}\n")
    spec = load_spec(write_spec(text))
    rows, years, grow = spec.windows
    assert (rows.width, rows.step) == (Span(40), Span(8))
    assert (years.width, years.step) == (Span(10, "years"), Span(1, "quarters"))
    assert (grow.width, grow.step) == (Span(1, "years"), Span(2, "months"))


def test_unquoted_dates_stay_iso_text(write_spec):
    text = MINIMAL.replace("    source: data/harbour.csv\n",
                           "    source: data/harbour.csv\n"
                           "    time: {column: quarter, from: 1990-01-01, to: 2000-12-31}\n")
    text += ("windows:\n  - id: eras\n    kind: periods\n    periods:\n"
             "      - {label: Early, from: 1990-01-01, to: 1995-06-30}\n")
    spec = load_spec(write_spec(text))
    assert (spec.datasets[0].time.start, spec.datasets[0].time.end) == ("1990-01-01",
                                                                        "2000-12-31")
    assert spec.windows[0].periods == (Period("Early", "1990-01-01", "1995-06-30"),)


def test_full_example_loads_to_the_expected_objects(write_spec):
    spec = load_spec(write_spec(EXAMPLE_SPEC))
    (ds,) = spec.datasets
    assert ds.time.format == "quarter" and ds.plans == ("full", "rolling", "eras")
    assert ds.checks.assumptions == ASSUMPTIONS
    assert spec.checks.assumptions == ("elementary", "equal", "bounded", "diagonal")
    assert [w.kind for w in spec.windows] == ["full", "rolling", "expanding", "periods"]
    assert spec.report.authors == ("A. Writer", "B. Analyst")
    assert [c.kind for c in spec.claims] == ["corank", "subspace_stable", "sign_stable",
                                             "coefficient_bounded", "no_break"]
    # no_break takes no plan and defaults to the equal-noise assumption (documented in docs/spec.md)
    assert spec.claims[-1].plan == "" and spec.claims[-1].assumption == "equal"
    assert all(isinstance(c, ClaimSpec) for c in spec.claims)


def test_claim_line_is_the_line_of_its_list_item(write_spec):
    spec = load_spec(write_spec(EXAMPLE_SPEC))
    lines = EXAMPLE_SPEC.splitlines()
    for claim in spec.claims:
        assert lines[claim.line - 1].strip() == f"- id: {claim.id}"


def test_claim_defaults_fill_assumption_and_angle(write_spec):
    spec = load_spec(write_spec(EXAMPLE_SPEC))
    by_id = {c.id: c for c in spec.claims}
    assert by_id["plane-stable"].assumption == "equal"
    assert by_id["jobs-follow-cargo"].assumption == "elementary"
    assert by_id["cargo-bounded"].assumption == "diagonal"
    text = EXAMPLE_SPEC.replace("    corank: 2\n    below_deg: 5\n", "    corank: 2\n")
    spec = load_spec(write_spec(text))
    stable = next(c for c in spec.claims if c.id == "plane-stable")
    assert stable.below_deg == spec.datasets[0].checks.max_angle_deg


def test_loaded_spec_is_frozen(write_spec):
    spec = load_spec(write_spec(MINIMAL))
    with pytest.raises(dataclasses.FrozenInstanceError):
        spec.version = 2  # type: ignore[misc]


def test_anchors_and_merge_keys_work_as_in_safe_load(write_spec):
    text = MINIMAL.replace("      - column: cargo\n",
                           "      - &base {column: cargo, unit: kt, transform: log}\n")
    text = text.replace("      - column: ships\n", "      - {<<: *base, column: ships}\n")
    (ds,) = load_spec(write_spec(text)).datasets
    assert ds.variables[1] == VariableSpec("ships", "ships", unit="kt", transform="log")


def test_whole_number_written_as_float_is_accepted_as_integer(write_spec):
    spec = load_spec(write_spec(MINIMAL + "checks: {frisch_starts: 12.0}\n"))
    assert spec.checks.frisch_starts == 12 and isinstance(spec.checks.frisch_starts, int)


def test_byte_order_mark_is_tolerated(write_spec):
    path = write_spec(MINIMAL)
    path.write_bytes(b"\xef\xbb\xbf" + MINIMAL.encode())
    assert load_spec(path).report.title == "Harbour"


def test_data_outside_the_folder_loads_with_allow_outside(write_spec, tmp_path):
    outside = tmp_path.parent / f"{tmp_path.name}-outside.csv"
    outside.write_text("a,b\n1,2\n", encoding="utf-8")
    try:
        text = MINIMAL.replace("    source: data/harbour.csv\n",
                               f"    source: ../{outside.name}\n    allow_outside: true\n")
        (ds,) = load_spec(write_spec(text)).datasets
        assert ds.source_path == outside.resolve()
    finally:
        outside.unlink()


def test_default_output_folder_is_our_own_name_and_git_ignores_it():
    root = Path(__file__).resolve().parents[2]
    assert SiteSpec().out == "relspan-site"
    assert "relspan-site/" in (root / ".gitignore").read_text(encoding="utf-8").splitlines()
