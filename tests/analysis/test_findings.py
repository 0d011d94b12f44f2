"""The interpreter says only what holds, names what it rests on, and never contradicts itself.

Simulated datasets of known structure (seeded); each test pins one defect of the findings layer.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest

from relspan.analysis.findings import check_consistency, dataset_findings, dataset_summary, why_assumptions_differ
from relspan.analysis.findings.records import Finding, Statement, Tolerance
from relspan.api import analyse_frame


def _frame(x: np.ndarray, names) -> pd.DataFrame:
    return pd.DataFrame(x, columns=list(names))


def _trio_like(seed: int = 3, t: int = 400) -> pd.DataFrame:
    """Two exact relations among three series plus a fourth series of pure noise (like the demo's trio)."""
    rng = np.random.default_rng(seed)
    f = rng.standard_normal(t)
    x1 = f
    x2 = 0.8 * f
    x3 = 1.2 * f
    noise = 0.15 * rng.standard_normal((t, 3))
    kelp = rng.standard_normal(t)
    return _frame(np.column_stack([x1, x2, x3]) + noise, ["a", "b", "c"]).assign(d=kelp)


def _weak(seed: int = 5, t: int = 300) -> pd.DataFrame:
    """y = a + b with noise large enough that equal noise at 5% finds no relation (smallest eigenvalue 0.063)."""
    rng = np.random.default_rng(seed)
    z = rng.standard_normal((t, 2))
    y = z[:, 0] + z[:, 1] + 0.5 * rng.standard_normal(t)
    return _frame(np.column_stack([y, z]), ["y", "a", "b"])


def _one_relation(seed: int = 7, t: int = 400) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    z = rng.standard_normal((t, 3))
    x0 = 0.5 * z[:, 0] + 0.3 * z[:, 1] + 0.2 * z[:, 2]
    x = np.column_stack([x0, z]) + 0.05 * rng.standard_normal((t, 4))
    return _frame(x, ["y", "p", "q", "r"])


def _result(df, **kw):
    return analyse_frame(df, columns=list(df.columns), **kw).result


def _all_texts(res) -> list[str]:
    sm = res.summary
    texts = [f.headline for f in res.findings]
    for key in ("pinned", "open", "depends", "unstable"):
        st = getattr(sm, key)
        if st is not None:
            texts += [st.text, st.short]
    return texts


def _rebuild(res, full=None, plans=None):
    full = full or res.full
    plans = res.plans if plans is None else plans
    labels = res.labels
    findings = tuple(dataset_findings(full=full, plans=plans, examined=res.examined,
                                      identified=res.identified, labels=labels))
    summary = dataset_summary(full=full, plans=plans, examined=res.examined, identified=res.identified,
                              labels=labels, findings=findings)
    return findings, summary


@pytest.fixture(scope="module")
def trio():
    return _result(_trio_like())


@pytest.fixture(scope="module")
def indep():
    return _result(_weak())


@pytest.fixture(scope="module")
def one():
    return _result(_one_relation(), rolling=100, step=50)


class TestOverclaims:
    def test_every_assumption_is_not_said_when_one_assumption_is_undetermined(self, one):
        coranks = dict(one.full.coranks, diagonal=None)
        full = dataclasses.replace(one.full, coranks=coranks)
        findings, _ = _rebuild(one, full=full)
        corank = [f for f in findings if f.topic == "corank" and f.kind in ("pinned_down", "no_relation")]
        assert corank, "the agreeing assumptions still give a corank finding"
        assert all("every noise assumption" not in f.headline for f in corank)
        assert any("undetermined" in f.headline for f in corank)

    def test_whatever_the_noise_always_comes_with_within_the_tolerance(self, trio):
        for text in _all_texts(trio):
            if "whatever" in text:
                assert "tolerance" in text, text

    def test_diagonal_corank_one_is_named_as_no_evidence(self, indep):
        assert indep.full.coranks["equal"] == 0 and indep.full.coranks["diagonal"] == 1
        corank = next(f for f in indep.findings if f.topic == "corank")
        assert "always reachable" in corank.headline and "no evidence" in corank.headline
        assert "can always be fitted" in why_assumptions_differ(indep.full, indep.labels)

    def test_bounded_noise_count_is_admissible_not_shown_to_hold(self, one):
        corank = next(f for f in one.findings if f.topic == "corank")
        assert "bounded noise the count is admissible" in corank.headline

    def test_reduced_form_says_it_rests_on_equal_noise(self, trio):
        rf = next(f for f in trio.findings if f.topic == "reduced_form")
        assert rf.headline.startswith("Under equal noise")
        assert "under equal noise" in trio.summary.open.text

    def test_ledermann_caution_stays_when_the_count_exceeds_the_bound(self, trio):
        full = trio.full
        dg = full.coranks["diagonal"]
        assert dg is not None and dg > full.diagonal.corank.ledermann, "the case must exceed the bound"
        text = why_assumptions_differ(full, trio.labels)
        assert "chance variation alone" in text and "weak evidence" in text

    def test_family_spread_is_not_called_exact(self, trio):
        from types import SimpleNamespace

        # members of the family are certified within the tolerance: approximate, not exact solutions
        diag = dataclasses.replace(trio.full.diagonal, spread=SimpleNamespace(q=2, max_angle_deg=12.0))
        findings, _ = _rebuild(trio, full=dataclasses.replace(trio.full, diagonal=diag))
        family = [f for f in findings if f.topic == "subspace" and "family" in f.headline]
        assert family and "12 degrees" in family[0].headline
        assert all("exact" not in f.headline.replace("not exactly", "") for f in family)

    def test_no_relation_statement_names_its_assumption_when_counts_differ(self, indep):
        pinned = indep.summary.pinned
        assert "under equal noise" in pinned.text.lower() and "other assumptions differ" in pinned.text
        assert "under equal noise" in pinned.short.lower()

    def test_every_corank_and_stability_finding_names_assumption_and_tolerance(self, one, trio, indep):
        for res in (one, trio, indep):
            for f in res.findings:
                if f.topic in ("corank", "subspace", "stability"):
                    assert f.assumptions and f.tolerance is not None, f.headline
                    assert "tolerance" in f.headline, f.headline

    def test_stability_is_not_judged_where_a_window_does_not_support_the_relation(self, one):
        plan = next(p for p in one.plans if p.plan.id == "rolling")
        seq = plan.coranks
        fake = dict(seq.coranks)
        fake["equal"] = (0,) + tuple(fake["equal"][1:])
        plan2 = dataclasses.replace(plan, coranks=dataclasses.replace(seq, coranks=fake))
        plans = tuple(plan2 if p is plan else p for p in one.plans)
        findings, summary = _rebuild(one, plans=plans)
        mine = [f for f in findings if f.plan == "rolling" and f.topic == "stability"]
        assert [f.kind for f in mine] == ["cannot_be_judged"]
        assert "1 of the" in mine[0].headline
        assert "steady" not in summary.pinned.short
        assert check_consistency(findings, summary, coranks=one.full.coranks) == ()

    def test_undetermined_windows_are_not_a_change_of_count(self, one):
        plan = next(p for p in one.plans if p.plan.id == "rolling")
        seq = plan.coranks
        fake = dict(seq.coranks)
        fake["diagonal"] = (None,) + tuple(fake["diagonal"][1:])
        plan2 = dataclasses.replace(plan, coranks=dataclasses.replace(
            seq, coranks=fake, constant=dict(seq.constant, diagonal=False)))
        plans = tuple(plan2 if p is plan else p for p in one.plans)
        findings, _ = _rebuild(one, plans=plans)
        assert not [f for f in findings if f.kind == "unstable" and f.topic == "corank"]
        assert any("undetermined in 1 of" in f.headline for f in findings)


def test_a_count_chosen_in_the_spec_is_not_stated_as_found():
    # one true relation; the spec asks to examine two (checks.coranks)
    res = _result(_one_relation(), coranks=[2])
    assert res.examined == (2,) and res.full.coranks["equal"] == 1
    pinned = res.summary.pinned
    assert "two relations tie" not in pinned.text.lower()
    assert "the spec asks for two relations" in pinned.text.lower()
    assert "not found by any assumption" in pinned.short


class TestDigits:
    def test_a_narrow_range_never_prints_as_the_same_number_twice(self):
        from relspan.words import digits_for, fmt_range, num_range

        assert fmt_range(2.0012, 2.0041, minus="-") == "2.0012 to 2.0041"
        assert num_range(2.0012, 2.0041) == "2.0012 to 2.0041"
        assert fmt_range(0.422, 0.456) == "0.422 to 0.456"  # wide enough: the usual three digits
        assert digits_for(1.0, 1.0) == 3

    def test_findings_and_summary_show_narrow_independent_noise_ranges(self, one):
        assert one.examined == (1,)
        lo = np.where(np.isfinite(one.full.frisch_lower), 2.0012, 0.0)
        hi = np.where(np.isfinite(one.full.frisch_upper), 2.0041, 0.0)
        lo[one.full.ref] = hi[one.full.ref] = 0.0
        full = dataclasses.replace(one.full, frisch_lower=lo, frisch_upper=hi)
        findings, summary = _rebuild(one, full=full)
        ranges = next(f for f in findings if f.topic == "coefficient" and f.kind == "set_only")
        assert "2.0012 and 2.0041" in ranges.headline and "between 2 and 2," not in ranges.headline
        assert "2.0012 to 2.0041" in summary.open.text


@pytest.fixture(scope="module")
def demo():
    from pathlib import Path

    from relspan.run.pipeline import run_analysis
    from relspan.spec import load_spec

    spec = load_spec(Path(__file__).resolve().parents[2] / "specs" / "demo.yaml")
    return run_analysis(spec, jobs=1, use_cache=False, write_cache=False, progress=False)


class TestDemo:
    def test_demo_findings_have_no_conflict(self, demo):
        for d in demo.datasets:
            assert check_consistency(d.findings, d.summary, coranks=d.full.coranks) == (), d.spec.id

    def test_trio_features_no_sign_of_an_unidentified_coefficient(self, demo):
        trio = demo.dataset("trio")
        assert trio.examined == (2,)
        assert not [f for f in trio.findings if f.kind == "depends" and f.topic == "coefficient"]

    def test_trio_pinned_count_names_equal_noise_beside_independent_three(self, demo):
        trio = demo.dataset("trio")
        assert trio.full.coranks["diagonal"] == 3
        assert "Under equal noise" in trio.summary.pinned.text
        assert "whatever form the noise takes" not in trio.summary.pinned.text

    def test_trio_search_keeps_ledermanns_caution_past_the_bound_and_says_approximately(self, demo):
        trio = demo.dataset("trio")
        assert trio.full.coranks["diagonal"] > trio.full.diagonal.corank.ledermann
        text = trio.summary.diagonal_search
        assert "Ledermann's bound" in text and "approximately" in text
        assert "exact linear relation" not in text

    def test_accounts_count_does_not_change_across_windows(self, demo):
        # true corank 1 throughout (specs/data/truth.json); undetermined windows are not a change
        acc = demo.dataset("accounts")
        assert not [f for f in acc.findings if f.kind == "unstable" and f.topic == "corank"]


class TestConsistency:
    @pytest.mark.parametrize("res_name", ["one", "trio", "indep"])
    def test_simulated_cases_have_no_conflict(self, res_name, request):
        res = request.getfixturevalue(res_name)
        assert check_consistency(res.findings, res.summary, coranks=res.full.coranks) == ()

    def test_trio_two_relations_whatever_the_noise_beside_independent_three_is_caught(self):
        # the trio headline of old: a count "whatever form the noise takes" with no tolerance
        tol = Tolerance(0.05, "correlation")
        summary = _summary("Two relations tie the four series together: fixed to within 2.9 degrees, "
                           "whatever form the noise takes.", ("equal", "bounded"), tol)
        found = check_consistency([], summary, coranks={"equal": 2, "bounded": 2, "diagonal": 3})
        assert {c.rule for c in found} >= {"whatever-noise", "count-unqualified"}

    def test_accounts_steady_beside_count_changes_is_caught(self):
        tol = Tolerance(0.05, "correlation")
        stable = Finding("stable", "stability", "the relation stays within 2.8 degrees", "", plan="rolling",
                         assumptions=("equal",), tolerance=tol)
        moving = Finding("unstable", "corank", "the number of relations changes across the windows",
                         "", plan="rolling", assumptions=("equal",), tolerance=tol)
        found = check_consistency([stable, moving], None, coranks={"equal": 1})
        assert [c.rule for c in found] == ["steady-vs-changes"]

    def test_every_assumption_beside_an_undetermined_one_is_caught(self):
        tol = Tolerance(0.05, "correlation")
        f = Finding("pinned_down", "corank", "1 linear relation holds under every noise assumption checked.",
                    "", assumptions=("equal",), tolerance=tol)
        found = check_consistency([f], None, coranks={"equal": 1, "bounded": 1, "diagonal": None})
        assert [c.rule for c in found] == ["every-assumption"]

    def test_sign_of_an_unidentified_coefficient_is_caught(self):
        tol = Tolerance(0.05, "correlation")
        un = Finding("not_identified", "coefficient", "No single coefficient is pinned down.", "",
                     assumptions=("equal",), tolerance=tol)
        sign = Finding("depends", "coefficient", "The sign of the coefficient of x depends on the assumption.",
                       "", assumptions=("elementary", "equal"))
        assert [c.rule for c in check_consistency([un, sign], None)] == ["sign-unidentified"]

    def test_pinned_down_beside_cannot_be_judged_is_caught(self):
        tol = Tolerance(0.05, "correlation")
        a = Finding("pinned_down", "stability", "pinned", "", assumptions=("equal",), tolerance=tol)
        b = Finding("cannot_be_judged", "stability", "cannot be judged", "", assumptions=("equal",),
                    tolerance=tol)
        assert [c.rule for c in check_consistency([a, b], None)] == ["pinned-vs-cannot"]

    def test_a_corank_finding_without_grounds_is_caught(self):
        f = Finding("pinned_down", "corank", "Two relations hold.", "")
        assert [c.rule for c in check_consistency([f], None)] == ["grounds"]

    def test_the_pipeline_raises_a_located_warning_for_a_conflict(self, monkeypatch):
        import warnings

        from relspan.analysis.findings import consistency
        from relspan.errors import FindingsConflictWarning
        from relspan.run import pipeline

        bad = consistency.Conflict("steady-vs-changes", "a", "b", "forced")
        monkeypatch.setattr(consistency, "check_consistency", lambda *a, **k: (bad,))
        sink: list = []
        res = _result(_one_relation(t=120))
        pipeline._check_findings(res.spec, res.findings, res.summary, res.full, sink)
        assert len(sink) == 1 and isinstance(sink[0], FindingsConflictWarning)
        assert sink[0].dataset == res.spec.id and "steady-vs-changes" in str(sink[0])
        with warnings.catch_warnings():
            warnings.simplefilter("error", FindingsConflictWarning)
            with pytest.raises(FindingsConflictWarning):
                warnings.warn(sink[0])


def _summary(text, rests, tol):
    from relspan.analysis.findings.records import DatasetSummary

    st = Statement(text, text, "corank", rests, tol)
    return DatasetSummary(pinned=st, open=Statement("", "", "", (), tol), depends=None, unstable=None,
                          single_coefficient=False, cards={}, rows=(), windowed=(), plans={}, windows={})
