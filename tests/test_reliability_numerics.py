"""Numerical edge cases: each gives an explained result the user sees, never a crash or a silent number.

One small build holds a dataset per case (exact relation, near-singular,
scales from 1e-8 to 1e8 and the same data unscaled, two variables, no
relation), each with a full-sample plan, a rolling plan and a plan of windows
just n + 2 rows wide. Separate small runs cover a variable constant in one
window only, ``--strict`` on an ill-conditioned window and fifteen variables.
The sentences asserted are the ones on the pages and on the command line.
"""

from __future__ import annotations

import html
import re
import warnings
from pathlib import Path

import numpy as np
import pytest

from corpus.harness import FAST, paragraph_problems, run_cli

T = 48
PLANS = """windows:
  - {id: full, kind: full}
  - {id: roll, kind: rolling, width: 16, step: 16}
  - {id: tight, kind: rolling, width: 5, step: 20}
"""
SCALES = (1e-8, 1.0, 1e8)


def _write_csv(path: Path, header, columns) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    lines = ["year," + ",".join(header)]
    lines += [f"{1970 + t}," + ",".join(repr(float(c[t])) for c in columns) for t in range(len(columns[0]))]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def _dataset(ds_id: str, columns) -> str:
    variables = ", ".join(f"{{column: {c}}}" for c in columns)
    return (f"  - {{id: {ds_id}, source: data/{ds_id}.csv, time: {{column: year, format: year}}, "
            f"variables: [{variables}], checks: {{normalise_on: {columns[-1]}}}}}\n")


def _make_project(folder: Path) -> Path:
    rng = np.random.default_rng(5)
    a = rng.integers(-50, 50, T).astype(float)
    b = rng.integers(-50, 50, T).astype(float)
    _write_csv(folder / "data/exact.csv", "abc", [a, b, a + 2 * b])  # c = a + 2 b exactly (integers)
    x, y = rng.normal(size=T), rng.normal(size=T)
    # relative noise 3e-6: smallest eigenvalue ~1e-11 of the correlation matrix, above the rank
    # tolerance (100 n eps) and below the conditioning threshold (1e10)
    _write_csv(folder / "data/near.csv", "xyz", [x, y, x + y + 3e-6 * rng.normal(size=T)])
    z = x - 0.5 * y + 0.3 * rng.normal(size=T)
    _write_csv(folder / "data/unscaled.csv", ["tiny", "mid", "huge"], [x, y, z])
    _write_csv(folder / "data/scales.csv", ["tiny", "mid", "huge"], [s * v for s, v in zip(SCALES, (x, y, z))])
    _write_csv(folder / "data/pair.csv", "pq", [x, x + 0.3 * rng.normal(size=T)])
    _write_csv(folder / "data/indep.csv", "uvw", [rng.normal(size=T) for _ in range(3)])
    spec = ('relspan: 1\nreport: {title: "Numerical edge cases"}\ndatasets:\n'
            + _dataset("exact", "abc") + _dataset("near", "xyz")
            + _dataset("unscaled", ["tiny", "mid", "huge"]) + _dataset("scales", ["tiny", "mid", "huge"])
            + _dataset("pair", "pq") + _dataset("indep", "uvw")
            + PLANS + "checks: {assumptions: [elementary, equal, bounded, diagonal]}\nsite: {out: _site}\n")
    (folder / "spec.yaml").write_text(spec, encoding="utf-8")
    return folder


@pytest.fixture(scope="module")
def project(tmp_path_factory) -> Path:
    return _make_project(tmp_path_factory.mktemp("numerics"))


@pytest.fixture(scope="module")
def built(project):
    """(site folder, CLI result) of one build of every case."""
    result = run_cli("build", "spec.yaml", *FAST, cwd=project)
    assert result.returncode == 0, result.stderr
    return project / "_site", result


@pytest.fixture(scope="module")
def datasets(project):
    """The analysis of every case, through the library (relspan.check), by dataset id."""
    from relspan.api import check

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        outcome = check(project / "spec.yaml", jobs=1, use_cache=False)
    return {r.spec.id: r for r in outcome.run.datasets}


def _text(page: Path) -> str:
    body = re.sub(r"<[^>]+>", " ", page.read_text(encoding="utf-8"))
    return " ".join(html.unescape(body).split())


# ------------------------------------------------------------------ exact relation

def test_exact_relation_is_reported_on_the_dataset_page(built):
    site, _ = built
    assert "Some relations hold exactly in the data" in _text(site / "datasets/exact/index.html")


def test_exact_relation_window_page_explains_the_singular_covariance(built):
    site, _ = built
    text = _text(site / "datasets/exact/roll/window-01.html")
    assert "The covariance is singular to tolerance (rank 2 of 3): 1 exact linear relation holds" in text
    assert "the exact relations are reported instead" in text


def test_exact_relation_found_is_the_one_in_the_data(datasets):
    el = datasets["exact"].full.elementary
    assert el.singular
    rel = np.asarray(el.exact_relations, dtype=float)
    assert rel.shape == (1, 3)
    truth = np.array([1.0, 2.0, -1.0]) / np.sqrt(6.0)  # c = a + 2 b
    assert abs(abs(float(rel[0] @ truth)) / np.linalg.norm(rel[0]) - 1.0) < 1e-10


def _conditioning_lines(stderr: str, ds: str) -> list[str]:
    """Warning lines about conditioning (nearly singular covariance, lost digits) for one dataset."""
    return [line for line in stderr.splitlines() if f"dataset '{ds}'" in line
            and ("nearly singular" in line or "significant digits" in line or "condition" in line)]


def test_exact_relation_prints_no_conditioning_warning(built):
    _, result = built
    assert not _conditioning_lines(result.stderr, "exact")
    assert "contradict" not in result.stderr


# ------------------------------------------------------------------ near-singular

def test_near_singular_window_is_warned_with_dataset_plan_and_window_named(built):
    _, result = built
    assert re.search(r"warning: dataset 'near', plan 'roll': window '1970–1985': the covariance is "
                     r"nearly singular \(condition number [0-9.e+]+ on the correlation scale", result.stderr)
    assert "significant digits of the regression coefficients may be lost" in result.stderr


def test_near_singular_is_not_mistaken_for_an_exact_relation(datasets):
    assert not datasets["near"].full.elementary.singular


def test_strict_turns_the_conditioning_warning_into_exit_1(project):
    result = run_cli("check", "spec.yaml", *FAST, "--strict", cwd=project)
    assert result.returncode == 1, result.stderr
    assert re.search(r"--strict: \d+ warning\(s\) count as failure\.", result.stderr)
    assert "Traceback" not in result.stderr


# ------------------------------------------------------------------ scales 1e-8 .. 1e8

def test_rescaling_variables_changes_no_corank(datasets):
    for plain, scaled in zip((datasets["unscaled"].full, *[a for p in datasets["unscaled"].plans for a in p.analyses]),
                             (datasets["scales"].full, *[a for p in datasets["scales"].plans for a in p.analyses])):
        assert scaled.coranks == plain.coranks


def test_rescaled_coefficients_scale_by_the_ratio_of_units(datasets):
    # a relation sum_k c_k x_k = 0 normalised on x_ref: rescaling x_k by s_k turns c_k into
    # c_k s_ref / s_k (handbook algebra of linear equations; common practice)
    plain, scaled = datasets["unscaled"].full, datasets["scales"].full
    ref = plain.ref
    assert ref == scaled.ref == 2
    factor = np.array([SCALES[ref] / s for s in SCALES])
    for assumption, coef in plain.coefficients.items():
        np.testing.assert_allclose(np.asarray(scaled.coefficients[assumption]) / factor, coef,
                                   rtol=1e-8, atol=1e-12, err_msg=assumption)


def test_scales_from_1e_minus_8_to_1e8_raise_no_conditioning_warning(built):
    _, result = built
    # other warnings may name it (e.g. a count resting on a few rows); none about conditioning
    assert not _conditioning_lines(result.stderr, "scales")


# ------------------------------------------------------------------ two variables

def test_two_variables_build_and_the_page_says_why_no_map_is_shown(built):
    site, _ = built
    text = _text(site / "datasets/pair/index.html")
    assert "No map of the elementary regressions is shown: a map needs at least three variables." in text
    assert not list((site / "figures/pair").rglob("*-map.svg"))


def test_two_variables_window_pages_say_why_no_map_is_shown(built):
    site, _ = built
    for page in sorted((site / "datasets/pair/roll").glob("window-*.html")):
        assert "a map needs at least three variables" in _text(page)


# ------------------------------------------------------------------ no relation (q = 0)

def test_no_relation_is_said_in_plain_words(built):
    site, _ = built
    text = _text(site / "datasets/indep/index.html")
    assert "Under equal noise no linear relation ties the three series together at a tolerance of" in text


def test_no_relation_under_equal_and_bounded_noise(datasets):
    coranks = datasets["indep"].full.coranks
    assert coranks["equal"] == 0 and coranks["bounded"] == 0


# ------------------------------------------------------------------ windows of n + 2 rows

def test_windows_of_n_plus_2_rows_are_analysed_and_say_their_size(built, datasets):
    site, _ = built
    tight = next(p for p in datasets["exact"].plans if p.plan.id == "tight")
    assert [a.count for a in tight.analyses] == [5, 5, 5]
    assert "This window covers 1970 to 1974, 5 rows." in _text(site / "datasets/exact/tight/window-01.html")


# ------------------------------------------------------------------ constant in one window only

def test_variable_constant_in_one_window_only_names_the_window_and_column(tmp_path):
    rng = np.random.default_rng(9)
    x, k = rng.normal(size=T), rng.normal(size=T)
    k[:16] = 4.0  # a price fixed for the first sixteen years
    _write_csv(tmp_path / "data/flat.csv", "xks", [x, k, x + k + 0.2 * rng.normal(size=T)])
    (tmp_path / "spec.yaml").write_text(
        'relspan: 1\nreport: {title: "Flat"}\ndatasets:\n' + _dataset("flat", "xks") + PLANS
        + "checks: {assumptions: [elementary, equal, diagonal]}\n", encoding="utf-8")
    result = run_cli("check", "spec.yaml", *FAST, cwd=tmp_path)
    assert result.returncode == 2, result.stderr
    assert ("data/flat.csv: dataset 'flat', window plan 'roll': column 'k' is constant in window 1 "
            "(1970–1985, 16 rows, value 4)") in result.stderr
    assert paragraph_problems(result.stderr) == []


# ------------------------------------------------------------------ fifteen variables

def test_fifteen_variables_with_three_relations_check_cleanly(tmp_path):
    # timing of this case is recorded by the benchmark, not asserted here
    rng = np.random.default_rng(15)
    n, q, rows = 15, 3, 160
    data = rng.normal(size=(rows, n - q)) @ rng.normal(size=(n - q, n)) + 0.05 * rng.normal(size=(rows, n))
    names = [f"v{j:02d}" for j in range(n)]
    _write_csv(tmp_path / "data/w.csv", names, list(data.T))
    (tmp_path / "spec.yaml").write_text(
        'relspan: 1\nreport: {title: "Fifteen"}\ndatasets:\n' + _dataset("w", names)
        + "windows:\n  - {id: full, kind: full}\n  - {id: roll, kind: rolling, width: 80, step: 40}\n"
        + "claims:\n  - {id: three, kind: corank, text: Three relations., dataset: w, plan: full, "
          "assumption: equal, equals: 3}\n", encoding="utf-8")
    result = run_cli("check", "spec.yaml", *FAST, cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    assert "1 of 1 claim(s) hold" in result.stdout


def test_near_singular_windows_are_listed_as_numerical_warnings_on_the_dataset_page(built):
    # the reader sees the caveat on the site, not only the builder on the command line
    text = _text(built[0] / "datasets/near/index.html")
    assert "Numerical warnings" in text
    assert "nearly singular" in text
    assert "1970–1985" in text


def test_well_conditioned_dataset_page_carries_no_numerical_warning(built):
    text = _text(built[0] / "datasets/unscaled/index.html")
    assert "Numerical warnings" not in text
