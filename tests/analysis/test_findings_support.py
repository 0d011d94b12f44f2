"""A count of relations is said with its resampling support, and says less when the support is weak.

Known answers are built by hand (a CorankSupport with chosen shares) or by replacing one window's
support in a simulated analysis of known structure (seeded); the consistency rules are checked on
statements that break them.
"""

from __future__ import annotations

import dataclasses
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from relspan.analysis.corank_support import CorankSupport
from relspan.analysis.findings import check_consistency, dataset_findings, dataset_summary
from relspan.analysis.findings.support import (SETTLED_SHARE, SUPPORT_PATTERN, count_support, count_with_support,
                                               support_words, windows_support)
from relspan.api import analyse_frame


def _support(assumption: str, shares: dict, *, resamples: int = 499, n: int = 4, admissible=None,
             undetermined: float = 0.0) -> CorankSupport:
    chosen = tuple(float(shares.get(q, 0.0)) for q in range(n + 1))
    return CorankSupport(assumption=assumption, estimate=max(shares, key=shares.get), coranks=tuple(range(n + 1)),
                         chosen_share=chosen, admissible_share=admissible, undetermined_share=undetermined,
                         resamples=resamples, rule="by hand")


def _window(coranks: dict, supports: dict | None):
    """A stand-in for a window analysis: its counts and (None: resampling off) its supports."""
    inference = None if supports is None else SimpleNamespace(coranks=supports)
    return SimpleNamespace(coranks=coranks, inference=inference)


class TestWords:
    def test_a_settled_count_says_its_share_and_resamples(self):
        w = _window({"equal": 2}, {"equal": _support("equal", {2: 1.0})})
        assert count_with_support(count_support(w, "equal")) == (
            "two relations (the count chosen in 100% of 499 resamples)")

    def test_a_split_count_says_likely_but_not_settled_and_the_runner_up(self):
        w = _window({"equal": 2}, {"equal": _support("equal", {2: 0.62, 3: 0.31, 1: 0.07})})
        cs = count_support(w, "equal")
        assert cs.weak and cs.modal
        assert support_words(cs) == ("likely but not confirmed by resampling (chosen in 62% of 499 resamples, "
                                     "3 in 31%)")

    def test_a_count_other_resamples_choose_more_often_is_not_called_likely(self):
        w = _window({"equal": 2}, {"equal": _support("equal", {2: 0.45, 3: 0.55})})
        words = support_words(count_support(w, "equal"))
        assert words.startswith("not confirmed by resampling") and "likely" not in words

    def test_the_settled_share_is_the_stated_boundary(self):
        at = _window({"equal": 1}, {"equal": _support("equal", {1: SETTLED_SHARE, 0: 1 - SETTLED_SHARE})})
        below = _window({"equal": 1}, {"equal": _support("equal", {1: SETTLED_SHARE - 0.01,
                                                                    0: 1.01 - SETTLED_SHARE})})
        assert count_support(at, "equal").settled and count_support(below, "equal").weak

    def test_resampling_off_adds_no_support_words(self):
        w = _window({"equal": 2}, None)
        assert support_words(count_support(w, "equal")) == ""
        assert count_with_support(count_support(w, "equal")) == "two relations"

    def test_independent_noise_in_a_rolling_window_says_support_was_not_computed(self):
        w = _window({"equal": 1, "diagonal": 1}, {"equal": _support("equal", {1: 1.0})})
        assert support_words(count_support(w, "diagonal")) == "support not computed for rolling or expanding windows"

    def test_bounded_noise_says_admissible_with_its_admissible_share(self):
        adm = (1.0, 1.0, 0.97, 0.1, 0.0)
        w = _window({"bounded": 2}, {"bounded": _support("bounded", {2: 0.87, 3: 0.1, 1: 0.03}, admissible=adm)})
        assert support_words(count_support(w, "bounded")) == "admissible in 97% of 499 resamples"

    def test_every_window_of_a_plan_is_judged_by_its_weakest_share(self):
        ws = [_window({"equal": 1}, {"equal": _support("equal", {1: x, 0: 1 - x})}) for x in (1.0, 0.91, 0.97)]
        cs = windows_support(ws, "equal", 1)
        assert cs.settled and cs.windows == 3
        assert support_words(cs, lead="chosen") == "chosen in at least 91% of 499 resamples in each window"


# ------------------------------------------------------------------------ a simulated analysis

def _one_relation(seed: int = 7, t: int = 400) -> pd.DataFrame:
    """One relation among four series (y = 0.5 p + 0.3 q + 0.2 r) with small noise on every series."""
    rng = np.random.default_rng(seed)
    z = rng.standard_normal((t, 3))
    x0 = 0.5 * z[:, 0] + 0.3 * z[:, 1] + 0.2 * z[:, 2]
    x = np.column_stack([x0, z]) + 0.05 * rng.standard_normal((t, 4))
    return pd.DataFrame(x, columns=["y", "p", "q", "r"])


@pytest.fixture(scope="module")
def one():
    df = _one_relation()
    return analyse_frame(df, columns=list(df.columns)).result


def _rebuild(res, full):
    findings = tuple(dataset_findings(full=full, plans=res.plans, examined=res.examined,
                                      identified=res.identified, labels=res.labels))
    summary = dataset_summary(full=full, plans=res.plans, examined=res.examined, identified=res.identified,
                              labels=res.labels, findings=findings)
    return findings, summary


def _weakened(res, share: float = 0.6):
    """The same analysis with the equal-noise count chosen in only ``share`` of resamples (the rest: one more)."""
    full = res.full
    q = full.coranks["equal"]
    s = full.inference.coranks["equal"]
    chosen = [0.0] * len(s.chosen_share)
    chosen[q], chosen[q + 1] = share, 1.0 - share
    weak = dataclasses.replace(s, chosen_share=tuple(chosen))
    inference = dataclasses.replace(full.inference, coranks={**full.inference.coranks, "equal": weak})
    return dataclasses.replace(full, inference=inference)


class TestSentences:
    def test_the_plain_summary_says_the_support_of_its_count(self, one):
        assert one.full.inference is not None and one.full.coranks["equal"] == 1
        pinned = one.summary.pinned
        assert "one relation (the count chosen in 100% of" in pinned.text
        assert SUPPORT_PATTERN.search(pinned.short), pinned.short
        assert pinned.settled

    def test_weak_support_gives_the_weaker_sentence(self, one):
        findings, summary = _rebuild(one, _weakened(one))
        pinned = summary.pinned
        assert "likely but not confirmed by resampling" in pinned.text
        assert "60% of" in pinned.text and "2 in 40%" in pinned.text
        assert "one relation ties" not in pinned.text          # never the plain claim
        assert "not confirmed" in pinned.short and not pinned.settled
        corank = next(f for f in findings if f.topic == "corank")
        assert corank.kind != "pinned_down" and "not confirmed by resampling" in corank.headline
        assert check_consistency(findings, summary, coranks=one.full.coranks) == ()

    def test_resampling_off_states_the_count_without_support_words(self, one):
        full = dataclasses.replace(one.full, inference=None)
        findings, summary = _rebuild(one, full)
        assert "resamples" not in summary.pinned.text.replace("bootstrap resamples", "")
        assert "one relation ties" in summary.pinned.text
        assert check_consistency(findings, summary, coranks=one.full.coranks) == ()

    def test_every_corank_headline_states_its_support(self, one):
        for f in one.findings:
            if f.topic == "corank" and f.kind in ("pinned_down", "no_relation", "depends"):
                assert SUPPORT_PATTERN.search(f.headline), f.headline


class TestRules:
    def test_a_bare_count_beside_recorded_supports_is_caught(self, one):
        pinned = dataclasses.replace(one.summary.pinned,
                                     text="Under equal noise, at a tolerance of 5%, one relation ties the series.")
        summary = dataclasses.replace(one.summary, pinned=pinned)
        rules = [c.rule for c in check_consistency(one.findings, summary, coranks=one.full.coranks)]
        assert rules == ["count-without-support"]

    def test_a_corank_headline_without_its_support_is_caught(self, one):
        bare = [dataclasses.replace(f, headline="One linear relation among the 4 variables.", numbers={})
                if f.topic == "corank" else f for f in one.findings]
        rules = [c.rule for c in check_consistency(bare, one.summary, coranks=one.full.coranks)]
        assert "count-without-support" in rules

    def test_a_weak_count_said_plainly_is_caught(self, one):
        findings, summary = _rebuild(one, _weakened(one))
        plain = dataclasses.replace(summary.pinned, text="Under equal noise one relation (chosen in 60% of 499 "
                                                         "resamples) ties the four series together.")
        rules = [c.rule for c in check_consistency(findings, dataclasses.replace(summary, pinned=plain),
                                                   coranks=one.full.coranks)]
        assert rules == ["count-unsettled"]
