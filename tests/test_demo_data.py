"""The invented demo (specs/): the generator is deterministic and the data carry their truth.

These tests use numpy only for the numbers (the analysis library is checked
elsewhere): every estimate here is recomputed from the committed CSV files
and compared with ``specs/data/truth.json``. The formulas are the textbook
ones, named beside each use:

- total least squares / equal noise: eigenvectors of the smallest eigenvalues
  of the covariance of the standardised columns (Eckart & Young 1936);
- elementary regressions: rows of inv(S) (Frisch 1934);
- the one-orthant test for bounded diagonal-noise sets: every
  P_ij P_jk P_ki > 0 (Klepper & Leamer 1984);
- principal angles with sines from (I - Qa Qa^T) Qb and cosines from
  Qa^T Qb combined by atan2 (Bjorck & Golub 1973).
"""

from __future__ import annotations

import csv
import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import yaml

ROOT = Path(__file__).resolve().parents[1]
SPECS = ROOT / "specs"
DATA = SPECS / "data"
GENERATOR = SPECS / "generate_demo.py"
DEMO = SPECS / "demo.yaml"
FIXTURE = ROOT / "tests" / "fixtures" / "failing_claim.yaml"
FILES = ("trio.csv", "accounts.csv", "shift.csv", "truth.json")

ROLL_WIDTH, ROLL_STEP = 40, 8  # "10 years" and "2 years" of quarterly rows
#: largest angle allowed between an estimated and the true relation subspace.
#: With noise sd about 10% of the signal's and 72-144 rows the estimates land
#: within about 1 degree; 3 degrees leaves room without hiding a wrong truth.
RECOVERY_DEG = 3.0
#: an angle between two estimates may be off by both estimates' errors (the
#: angle between lines obeys the triangle inequality)
BREAK_DEG = 2 * RECOVERY_DEG


# ----------------------------------------------------------------- helpers


def principal_angles_deg(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Principal angles (degrees, ascending) between the row spaces of a and b."""
    qa, _ = np.linalg.qr(np.atleast_2d(a).T)
    qb, _ = np.linalg.qr(np.atleast_2d(b).T)
    assert qa.shape == qb.shape
    cos = np.linalg.svd(qa.T @ qb, compute_uv=False)
    sin = np.linalg.svd(qb - qa @ (qa.T @ qb), compute_uv=False)[::-1]
    return np.degrees(np.arctan2(sin, cos))


def max_angle(a: np.ndarray, b: np.ndarray) -> float:
    return float(principal_angles_deg(a, b).max())


def standardise(x: np.ndarray) -> np.ndarray:
    return (x - x.mean(axis=0)) / x.std(axis=0, ddof=1)


def tls(x: np.ndarray, q: int) -> tuple[np.ndarray, np.ndarray]:
    """(q, n) rows spanning the equal-noise relations of the standardised data; eigenvalues."""
    w, v = np.linalg.eigh(np.cov(standardise(x), rowvar=False))
    return v[:, :q].T, w


def to_observed_scale(raw_rows: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Relation rows on the raw scale, expressed on the scale of standardised ``x``."""
    return np.atleast_2d(raw_rows) * x.std(axis=0, ddof=1)


def one_orthant(cov: np.ndarray) -> bool:
    p = np.linalg.inv(cov)
    n = len(p)
    return all(p[i, j] * p[j, k] * p[k, i] > 0
               for i in range(n) for j in range(i + 1, n) for k in range(j + 1, n))


def elementary_points(cov: np.ndarray, normalise_on: int) -> np.ndarray:
    """The n elementary regressions, each normalised so entry ``normalise_on`` is 1."""
    p = np.linalg.inv(cov)
    return p / p[:, [normalise_on]]


def rolling_windows(x: np.ndarray) -> list[np.ndarray]:
    return [x[s:s + ROLL_WIDTH] for s in range(0, len(x) - ROLL_WIDTH + 1, ROLL_STEP)]


def load_table(name: str, folder: Path = DATA) -> tuple[list[str], list[str], np.ndarray]:
    with open(folder / f"{name}.csv", newline="") as fh:
        rows = list(csv.reader(fh))
    header, body = rows[0], rows[1:]
    return header[1:], [r[0] for r in body], np.array([[float(v) for v in r[1:]] for r in body])


@pytest.fixture(scope="module")
def truth() -> dict:
    return json.loads((DATA / "truth.json").read_text())


def run_generator(out: Path, *extra: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, str(GENERATOR), "--out", str(out), *extra],
                          capture_output=True, text=True, timeout=300)


# ----------------------------------------------------------- the generator


class TestGenerator:
    def test_two_runs_write_identical_bytes(self, tmp_path):
        first, second = tmp_path / "a", tmp_path / "b"
        assert run_generator(first).returncode == 0
        assert run_generator(second).returncode == 0
        for name in FILES:
            assert (first / name).read_bytes() == (second / name).read_bytes(), name

    def test_output_is_byte_identical_to_the_committed_data(self, tmp_path):
        result = run_generator(tmp_path)
        assert result.returncode == 0, result.stderr
        for name in FILES:
            assert (tmp_path / name).read_bytes() == (DATA / name).read_bytes(), (
                f"specs/data/{name} is stale: run python specs/generate_demo.py")
        assert sorted(p.name for p in tmp_path.iterdir()) == sorted(FILES)  # no leftovers

    def test_a_file_given_as_out_folder_is_refused_with_exit_2_and_one_paragraph(self, tmp_path):
        target = tmp_path / "not_a_folder"
        target.write_text("keep me")
        result = run_generator(target)
        assert result.returncode == 2
        assert "is a file, not a folder" in result.stderr and "Fix:" in result.stderr
        assert "Traceback" not in result.stderr
        assert target.read_text() == "keep me"

    def test_a_seed_that_misses_the_design_writes_nothing_and_exits_2(self, tmp_path):
        # seed 1 gives no sign change in trio (found by the generator's own design check)
        out = tmp_path / "out"
        result = run_generator(out, "--seed", "1")
        assert result.returncode == 2
        assert "Nothing was written" in result.stderr and "Traceback" not in result.stderr
        assert not out.exists() or not any(out.iterdir())

    def test_truth_json_has_sorted_keys_and_fixed_six_decimal_floats(self):
        text = (DATA / "truth.json").read_text()
        data = json.loads(text)

        def walk(value):
            if isinstance(value, dict):
                assert list(value) == sorted(value)
                for v in value.values():
                    walk(v)
            elif isinstance(value, list):
                for v in value:
                    walk(v)

        walk(data)
        outside_strings = re.sub(r'"(?:[^"\\]|\\.)*"', '""', text)  # numbers only
        floats = re.findall(r"-?\d+\.\d+", outside_strings)
        assert len(floats) > 100
        assert all(len(f.split(".")[1]) == 6 for f in floats)
        assert "-0.000000" not in outside_strings


# ------------------------------------------------------------- the tables


class TestTables:
    @pytest.mark.parametrize("name", ["trio", "accounts", "shift"])
    def test_every_table_has_144_quarters_from_1990q1_to_2025q4_and_no_gaps(self, name, truth):
        columns, quarters, x = load_table(name)
        expected = [f"{1990 + i // 4}Q{i % 4 + 1}" for i in range(144)]
        assert quarters == expected
        assert columns == truth["datasets"][name]["variables"]
        assert x.shape == (144, len(columns)) and np.all(np.isfinite(x))

    def test_truth_records_the_seed_and_time_layout(self, truth):
        assert truth["seed"] == 58
        assert truth["time"] == {"column": "quarter", "first": "1990Q1", "format": "quarter",
                                 "frequency": "quarterly", "last": "2025Q4", "rows": 144}

    @pytest.mark.parametrize("name", ["trio", "accounts"])
    def test_standardised_truth_is_the_raw_truth_rescaled(self, name, truth):
        d = truth["datasets"][name]
        raw = np.array(d["relations_raw"]) * np.array(d["clean_sd"])
        assert max_angle(raw, np.array(d["relations_standardised"])) < 1e-3

    def test_measured_noise_is_about_ten_percent_of_the_signal(self, truth):
        for name in ("trio", "accounts", "shift"):
            rel = np.array(truth["datasets"][name]["noise_sd_measured_relative"])
            assert np.all((rel > 0.05) & (rel < 0.15)), name


# ------------------------------------------------------------------- trio


class TestTrio:
    def test_full_sample_tls_plane_recovers_the_true_plane(self, truth):
        d = truth["datasets"]["trio"]
        _, _, x = load_table("trio")
        estimate, eig = tls(x, d["corank"])
        true_rows = to_observed_scale(np.array(d["relations_raw"]), x)
        assert max_angle(estimate, true_rows) < RECOVERY_DEG
        assert eig[1] < 0.05 < eig[2]  # a clear corank-2 gap on the correlation scale

    def test_both_true_relations_leave_kelp_out(self, truth):
        rows = np.array(truth["datasets"]["trio"]["relations_raw"])
        assert truth["datasets"]["trio"]["corank"] == 2 and rows.shape == (2, 4)
        assert np.all(rows[:, 3] == 0)

    def test_corank_two_under_equal_noise_in_every_rolling_window(self):
        # what claim trio-two-relations states: eps = 0.05 on the correlation scale
        _, _, x = load_table("trio")
        for w in rolling_windows(x):
            _, eig = tls(w, 2)
            assert eig[1] < 0.05 < eig[2]

    def test_rolling_planes_stay_within_ten_degrees_of_the_full_sample_plane(self):
        _, _, x = load_table("trio")
        full, _ = tls(x, 2)
        angles = [max_angle(tls(w, 2)[0], full) for w in rolling_windows(x)]
        assert len(angles) == 14
        assert max(angles) < 10.0

    def test_a_single_normalised_coefficient_changes_sign_across_rolling_windows(self, truth):
        design = truth["datasets"]["trio"]["design"]["sign_change"]
        columns, _, x = load_table("trio")
        k = columns.index(design["variable"])
        signs = [np.sign(elementary_points(np.cov(standardise(w), rowvar=False), 0)[0, k])
                 for w in rolling_windows(x)]
        assert set(signs) == {-1.0, 1.0}
        assert [int(s) for s in signs] == design["signs"][design["variable"]]

    def test_the_sign_changing_relations_all_lie_in_the_stable_plane(self):
        # every elementary regression of cargo is (nearly) a member of the window's plane
        _, _, x = load_table("trio")
        for w in rolling_windows(x):
            plane, _ = tls(w, 2)
            rel = elementary_points(np.cov(standardise(w), rowvar=False), 0)[0]
            rel = rel / np.linalg.norm(rel)
            outside = np.linalg.norm(rel - plane.T @ (plane @ rel))
            assert np.degrees(np.arcsin(min(outside, 1.0))) < 10.0


# --------------------------------------------------------------- accounts


class TestAccounts:
    def test_full_sample_tls_relation_recovers_the_accounting_identity(self, truth):
        d = truth["datasets"]["accounts"]
        _, _, x = load_table("accounts")
        estimate, eig = tls(x, 1)
        assert max_angle(estimate, to_observed_scale(np.array(d["relations_raw"]), x)) < RECOVERY_DEG
        assert eig[0] < 0.05 < eig[1]

    def test_full_sample_passes_the_one_orthant_test(self):
        _, _, x = load_table("accounts")
        assert one_orthant(np.cov(x, rowvar=False))

    def test_true_weights_lie_inside_the_elementary_regression_bounds(self, truth):
        d = truth["datasets"]["accounts"]
        columns, _, x = load_table("accounts")
        points = -elementary_points(np.cov(x, rowvar=False), 0)[:, 1:]  # output = b . parts
        weights = np.array([d["coefficients"]["values"][c] for c in columns[1:]])
        assert np.all(points.min(axis=0) <= weights) and np.all(weights <= points.max(axis=0))
        np.testing.assert_allclose(d["relations_raw"][0][1:], -weights)

    def test_shipping_weight_keeps_its_sign_in_every_rolling_window(self):
        # claim accounts-weight-sign; one orthant in each window means every
        # elementary regression gives the same signs, not just the first one
        _, _, x = load_table("accounts")
        for w in rolling_windows(x):
            cov = np.cov(w, rowvar=False)
            assert one_orthant(cov)
            assert np.all(elementary_points(cov, 0)[:, 2] < 0)

    def test_noise_shares_in_the_spec_match_the_generator(self, truth):
        spec = yaml.safe_load(DEMO.read_text())
        accounts = next(d for d in spec["datasets"] if d["id"] == "accounts")
        shares = np.array([v["noise_share"] for v in accounts["variables"]])
        np.testing.assert_allclose(shares / shares[0],
                                   truth["datasets"]["accounts"]["noise_share"], rtol=1e-3)


# ------------------------------------------------------------------ shift


class TestShift:
    @staticmethod
    def periods(x: np.ndarray, truth: dict) -> list[np.ndarray]:
        row = truth["datasets"]["shift"]["break"]["row"]
        return [x[:row], x[row:]]

    def test_break_is_recorded_at_2008q1(self, truth):
        brk = truth["datasets"]["shift"]["break"]
        _, quarters, _ = load_table("shift")
        assert brk["quarter"] == "2008Q1" and quarters[brk["row"]] == "2008Q1"
        assert brk["date"] == "2008-01-01"

    def test_each_period_recovers_its_own_true_relation(self, truth):
        d = truth["datasets"]["shift"]
        _, _, x = load_table("shift")
        for part, record in zip(self.periods(x, truth), d["periods"]):
            estimate, eig = tls(part, 1)
            true_rows = to_observed_scale(np.array(record["relations_raw"]), part)
            assert max_angle(estimate, true_rows) < RECOVERY_DEG
            assert eig[0] < 0.05 < eig[1]  # corank 1 in each era: claim fares-one-relation-per-era

    def test_before_and_after_relations_differ_by_about_the_recorded_angle(self, truth):
        recorded = truth["datasets"]["shift"]["break"]["angle_deg"]["standardised_within"]
        _, _, x = load_table("shift")
        before, after = (tls(p, 1)[0] for p in self.periods(x, truth))
        assert recorded > 20.0
        assert abs(max_angle(before, after) - recorded) < BREAK_DEG
        assert max_angle(before, after) > 10.0  # unstable at the demo's threshold

    def test_on_the_common_full_sample_scale_the_angle_is_also_as_recorded(self, truth):
        # cross-window comparisons put every window's relations on one scale:
        # data units times the full-sample sd
        recorded = truth["datasets"]["shift"]["break"]["angle_deg"]["standardised_common"]
        _, _, x = load_table("shift")
        sd_full = x.std(axis=0, ddof=1)
        before, after = (tls(p, 1)[0] / p.std(axis=0, ddof=1) * sd_full
                         for p in self.periods(x, truth))
        assert abs(max_angle(before, after) - recorded) < BREAK_DEG
        assert recorded > 20.0

    def test_recorded_angle_matches_the_recorded_relations(self, truth):
        d = truth["datasets"]["shift"]
        a, b = (np.array(p["relations_standardised"]) for p in d["periods"])
        assert abs(max_angle(a, b) - d["break"]["angle_deg"]["standardised_within"]) < 1e-4
        ra, rb = (np.array(p["relations_raw"]) for p in d["periods"])
        assert abs(max_angle(ra, rb) - d["break"]["angle_deg"]["raw"]) < 1e-4
        clean_sd = np.array(truth["datasets"]["shift"]["clean_sd"])
        common = max_angle(ra * clean_sd, rb * clean_sd)
        assert abs(common - d["break"]["angle_deg"]["standardised_common"]) < 1e-4


# ------------------------------------------------------------------ specs


@pytest.fixture(scope="module")
def spec() -> dict:
    return yaml.safe_load(DEMO.read_text())


class TestDemoSpec:
    def test_metadata_is_complete_and_says_the_authors_are_fictional(self, spec, truth):
        report = spec["report"]
        assert f"seed {truth['seed']}" in " ".join(report["cite"].split())
        assert spec["relspan"] == 1
        assert report["title"] and report["summary"] and report["cite"]
        assert report["licence"] == "CC-BY-4.0"
        assert report["authors"] and all("fictional" in a for a in report["authors"])

    def test_sources_exist_and_variables_match_the_csv_columns(self, spec):
        for d in spec["datasets"]:
            columns, _, _ = load_table(Path(d["source"]).stem, SPECS / Path(d["source"]).parent)
            assert [v["column"] for v in d["variables"]] == columns
            assert d["time"]["column"] == "quarter" and d["time"]["format"] == "quarter"

    def test_claims_name_known_datasets_and_plans_that_the_dataset_uses(self, spec):
        plans = {w["id"] for w in spec["windows"]}
        datasets = {d["id"]: d for d in spec["datasets"]}
        assert {"full", "rolling", "eras"} <= plans
        for claim in spec["claims"]:
            assert claim["dataset"] in datasets
            assert claim["plan"] in plans and claim["plan"] in datasets[claim["dataset"]]["plans"]

    def test_checks_use_all_five_assumptions_with_the_stated_options(self, spec):
        checks = spec["checks"]
        assert checks["assumptions"] == ["elementary", "equal", "shaped", "bounded", "diagonal"]
        assert checks["tolerance"] == {"relative": 0.05} and checks["max_angle_deg"] == 10

    def test_rolling_and_period_plans_match_the_truth(self, spec, truth):
        windows = {w["id"]: w for w in spec["windows"]}
        assert windows["rolling"]["width"] == "10 years" and windows["rolling"]["step"] == "2 years"
        periods = windows["eras"]["periods"]
        recorded = truth["datasets"]["shift"]["periods"]
        assert [(p["from"], p["to"]) for p in periods] == [
            (r["from_date"], r["to_date"]) for r in recorded]

    def test_site_goes_to_site_demo_at_the_repo_root_with_svg_figures(self, spec):
        assert spec["site"]["out"] == "../site_demo" and spec["site"]["figures"] == "svg"
        assert (SPECS / spec["site"]["out"]).resolve() == ROOT / "site_demo"
        notes = spec["site"]["notes"]
        assert "invented" in notes and "not causation" in notes and "statistician" in notes

    def test_failing_fixture_is_the_demo_plus_one_impossible_claim(self, spec):
        fixture = yaml.safe_load(FIXTURE.read_text())
        extra = [c for c in fixture["claims"] if c["id"] not in {c["id"] for c in spec["claims"]}]
        assert len(extra) == 1 and extra[0]["kind"] == "subspace_stable"
        assert extra[0]["below_deg"] < 0.01
        for d in fixture["datasets"]:
            assert d.pop("allow_outside") is True
            assert (FIXTURE.parent / d["source"]).resolve().parent == DATA
            d["source"] = "data/" + Path(d["source"]).name
        fixture["claims"] = [c for c in fixture["claims"] if c is not extra[0]]
        fixture["site"]["out"] = spec["site"]["out"]
        assert fixture == spec


@pytest.fixture(scope="module")
def load_spec():
    """``relspan.spec.load_spec``; skips while the loader is still being written."""
    try:
        import relspan.spec
    except ImportError as err:  # the spec package is mid-way through being written
        pytest.skip(f"relspan.spec does not import yet: {err}")
    fn = getattr(relspan.spec, "load_spec", None)
    if fn is None:
        pytest.skip("relspan.spec.load_spec is not written yet")
    return fn


class TestSpecLoader:
    """Once relspan.spec.load_spec exists, the demo and the fixture must load with it."""

    def test_demo_spec_loads_with_three_datasets_and_resolved_paths(self, load_spec):
        spec = load_spec(DEMO)
        assert [d.id for d in spec.datasets] == ["trio", "accounts", "shift"]
        for d in spec.datasets:
            assert Path(d.source_path) == (DATA / f"{d.id}.csv").resolve()
        assert [c.id for c in spec.claims] == ["trio-two-relations", "trio-plane-stable",
                                              "accounts-weight-bounded", "accounts-weight-sign",
                                              "fares-one-relation-per-era"]
        assert spec.dataset("accounts").noise_shape == (0.4093, 0.81, 0.49, 1.44)
        assert Path(spec.site.out_path) == ROOT / "site_demo"
        assert "shaped" in spec.dataset("accounts").checks.assumptions
        assert "shaped" not in spec.dataset("trio").checks.assumptions
        assert spec.dataset("trio").checks.normalise_on == "cargo"
        assert spec.plan("eras").periods[1].start == "2008-01-01"

    def test_failing_fixture_loads_with_data_outside_its_folder(self, load_spec):
        spec = load_spec(FIXTURE)
        assert {Path(d.source_path).parent for d in spec.datasets} == {DATA}
        assert spec.claims[-1].id == "trio-plane-frozen"
