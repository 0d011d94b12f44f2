"""Trends and influence wired through the pipeline: findings, page words, warnings, ``check --strict``.

Outside data: statsmodels' shipped US quarterly macro data (``statsmodels.datasets.macrodata``,
1959Q1-2009Q3). Outside reference for the robust fit: scikit-learn's ``MinCovDet``.
"""

from __future__ import annotations

import textwrap
import warnings

import numpy as np
import pandas as pd
import pytest

from relspan.cli import main
from relspan.errors import InfluenceWarning, TrendWarning


def _macro_csv(path):
    from statsmodels.datasets import macrodata  # open dataset shipped with statsmodels

    d = macrodata.load_pandas().data
    out = pd.DataFrame({"quarter": [f"{int(y)}Q{int(q)}" for y, q in zip(d["year"], d["quarter"])],
                        "gdp": d["realgdp"], "cons": d["realcons"], "inv": d["realinv"]})
    out.to_csv(path, index=False)
    return out


def _spec(folder, transform: str, csv: str = "macro.csv") -> str:
    text = textwrap.dedent(f"""\
        relspan: 1
        report:
          title: "US macro (statsmodels' macrodata)"
        datasets:
          - id: macro
            title: "US real GDP, consumption and investment"
            source: {csv}
            format: csv
            time: {{column: quarter, format: quarter}}
            variables:
              - {{column: gdp, label: "Real GDP", transform: {transform}}}
              - {{column: cons, label: "Real consumption", transform: {transform}}}
              - {{column: inv, label: "Real investment", transform: {transform}}}
            missing: fail
            plans: [full]
            checks:
              assumptions: [elementary, equal, bounded]
        windows:
          - {{id: full, kind: full, title: "Full sample"}}
        """)
    path = folder / f"macro-{transform}.yaml"
    path.write_text(text, encoding="utf-8")
    return str(path)


def _run(spec_path):
    from relspan.run.pipeline import run_analysis
    from relspan.spec import load_spec

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        run = run_analysis(load_spec(spec_path), jobs=1, use_cache=False, write_cache=False, progress=False)
    return run, [w.message for w in caught]


class TestTrendsOnMacroData:
    def test_log_levels_raise_the_caution_finding_and_a_warning(self, tmp_path):
        _macro_csv(tmp_path / "macro.csv")
        run, raised = _run(_spec(tmp_path, "log"))
        res = run.dataset("macro")
        assert res.trends is not None and res.trends.spurious_caution
        assert len(res.trends.trending_levels) >= 2
        assert any(f.kind == "caution" and f.topic == "trend" for f in res.findings)
        assert any(isinstance(w, TrendWarning) and w.dataset == "macro" for w in raised)

    def test_growth_rates_raise_no_caution(self, tmp_path):
        _macro_csv(tmp_path / "macro.csv")
        run, raised = _run(_spec(tmp_path, "logdiff"))
        res = run.dataset("macro")
        assert res.trends is not None and not res.trends.spurious_caution
        assert not any(isinstance(w, TrendWarning) for w in raised)
        assert not any(f.topic == "trend" for f in res.findings)

    def test_check_strict_exits_1_on_trending_levels(self, tmp_path, capsys):
        _macro_csv(tmp_path / "macro.csv")
        assert main(["check", _spec(tmp_path, "log"), "--strict", "--no-cache"]) == 1
        assert "Granger & Newbold 1974" in capsys.readouterr().err

    def test_effective_rows_are_shown_beside_t_on_the_page(self, tmp_path):
        from relspan.report.pages.diagnostics import effective_rows_text, trend_section

        _macro_csv(tmp_path / "macro.csv")
        run, _ = _run(_spec(tmp_path, "log"))
        res = run.dataset("macro")
        words = effective_rows_text(res)
        assert f"of the {res.prepared.rows_used} tested" in words
        assert res.trends.effective_rows < res.prepared.rows_used / 4  # log levels: lag-1 near 1


class TestDifferencesAcrossGaps:
    def test_logdiff_drops_the_row_after_a_gap_and_the_trend_source_says_so(self, tmp_path):
        d = _macro_csv(tmp_path / "full.csv")
        gappy = d.drop(index=range(40, 44))  # 1969 missing
        gappy.to_csv(tmp_path / "gappy.csv", index=False)
        run, _ = _run(_spec(tmp_path, "logdiff", csv="gappy.csv"))
        res = run.dataset("macro")
        # 203 rows, 4 removed, the first row has no previous one, the row after the gap is dropped
        assert res.prepared.rows_used == 203 - 4 - 1 - 1
        assert "gaps in the time index" in res.trends.source
        # the difference across the gap is not formed: the analysed growth rates are those of the full
        # data minus the rows that would span 1969
        full_growth = np.diff(np.log(d["gdp"].to_numpy()))
        keep = np.ones(full_growth.size, dtype=bool)
        keep[39:44] = False  # growth into 1969Q1..Q4 and into 1970Q1 (across the gap)
        assert res.full.count == keep.sum()


def _outlier_frame(t: int = 300, seed: int = 1, outlier: bool = True) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    z = rng.standard_normal((t, 2))
    y = z[:, 0] + z[:, 1] + 0.2 * rng.standard_normal(t)
    x = np.column_stack([y, z])
    if outlier:
        x[150] = [300.0, -300.0, 300.0]  # one gross error (a typing slip of a few digits)
    return pd.DataFrame(x, columns=["y", "a", "b"])


class TestInfluence:
    def test_fast_mcd_matches_scikit_learn_on_contaminated_rows(self):
        sk = pytest.importorskip("sklearn.covariance")  # reference library: scikit-learn MinCovDet
        from relspan.analysis.influence import fast_mcd

        rng = np.random.default_rng(4)
        x = rng.multivariate_normal([0, 0, 0], [[1, .6, .3], [.6, 1, .2], [.3, .2, 1]], size=400)
        x[:40] += [8.0, -8.0, 6.0]  # 10% contamination
        ours = fast_mcd(x, rng=np.random.default_rng(0))
        ref = sk.MinCovDet(random_state=0).fit(x)
        det = lambda s: np.linalg.det(np.cov(x[s].T, ddof=0))  # noqa: E731  the MCD objective
        assert ours.support.sum() == ref.raw_support_.sum()  # the same h
        assert det(ours.support) <= det(ref.raw_support_) * (1 + 1e-9)  # an h-subset at least as good
        jaccard = np.sum(ours.support & ref.raw_support_) / np.sum(ours.support | ref.raw_support_)
        assert jaccard > 0.85
        # after reweighting both keep the same rows and agree closely
        assert np.sum(~ours.flagged & ref.support_) / np.sum(~ours.flagged | ref.support_) > 0.97
        np.testing.assert_allclose(ours.location, ref.location_, atol=0.05)
        np.testing.assert_allclose(ours.covariance, ref.covariance_, atol=0.15)
        assert set(np.flatnonzero(ours.flagged)) >= set(range(40))

    @pytest.mark.parametrize("rows, share", [(1200, 0.1), (4000, 0.3)])
    def test_fast_mcd_on_many_rows_starts_in_subsets_and_matches_scikit_learn(self, rows, share, monkeypatch):
        # Above 600 rows the starts run in random subsets of 300 rows, merged (Rousseeuw & Van
        # Driessen 1999, section 3.3). Reference library: scikit-learn MinCovDet (its own subset scheme).
        sk = pytest.importorskip("sklearn.covariance")
        from relspan.analysis import influence

        rng = np.random.default_rng(7)
        x = rng.standard_normal((rows, 5)) @ rng.standard_normal((5, 5))
        bad = int(share * rows)
        x[:bad] += 6.0  # a cluster of outliers
        calls = []
        plain = influence._random_starts

        def counted(xs, h, starts, g):
            calls.append((xs.shape[0], starts))
            return plain(xs, h, starts, g)

        monkeypatch.setattr(influence, "_random_starts", counted)
        ours = influence.fast_mcd(x, rng=np.random.default_rng(0))
        k = min(5, rows // 300)
        assert calls == [(300, 500 // k)] * k  # 500 starts, none of them on all rows
        ref = sk.MinCovDet(random_state=0).fit(x)
        det = lambda s: np.linalg.det(np.cov(x[s].T, ddof=0))  # noqa: E731  the MCD objective
        assert ours.support.sum() == ref.raw_support_.sum()
        assert det(ours.support) <= det(ref.raw_support_) * (1 + 1e-4)
        assert not ours.support[:bad].any() and ours.flagged[:bad].all()
        assert np.mean(ours.flagged == ~ref.support_) > 0.99
        # the plain algorithm (all 500 starts on all rows) finds an h-subset no better than 1e-4 below it
        monkeypatch.setattr(influence, "MCD_NESTED_ABOVE", rows)
        whole = influence.fast_mcd(x, rng=np.random.default_rng(0))
        assert len(calls) == k + 1 and calls[-1] == (rows, 500)
        assert ours.determinant <= whole.determinant * (1 + 1e-4)

    def test_an_exact_fit_in_many_rows_is_found_as_by_the_plain_algorithm(self, monkeypatch):
        # 700 of 1,000 rows on the plane x3 = x1 + x2 (more than h = 502): the minimum determinant is 0
        from relspan.analysis import influence

        rng = np.random.default_rng(9)
        x = rng.standard_normal((1000, 3))
        x[:700, 2] = x[:700, 0] + x[:700, 1]
        calls = []
        plain = influence._random_starts

        def counted(xs, h, starts, g):
            calls.append((xs.shape[0], starts))
            return plain(xs, h, starts, g)

        monkeypatch.setattr(influence, "_random_starts", counted)
        fit = influence.fast_mcd(x, rng=np.random.default_rng(0))
        assert calls[-1] == (1000, 500)  # a subset's exact fit handed the search to the plain algorithm
        assert fit.determinant == 0.0 and fit.support.sum() == fit.h == 502
        on_plane = np.abs(x[:, 2] - x[:, 0] - x[:, 1]) < 1e-12
        assert np.all(on_plane[fit.support])

    @pytest.mark.parametrize("case", ["plain", "exact fits", "ties and singular starts", "many rows, chunked"])
    def test_stacked_random_starts_give_the_one_by_one_trials_bit_for_bit(self, case, monkeypatch):
        # the starts computed together must be those computed start by start (the same draws, the same
        # subsets, the same log determinants to the bit), also where some starts are exact fits and
        # where a singular start makes the draws redo one by one (invented rows)
        from relspan.analysis import influence

        rng = np.random.default_rng({"plain": 1, "exact fits": 2, "ties and singular starts": 3}.get(case, 4))
        t, n = (260, 4) if case != "many rows, chunked" else (900, 6)
        x = rng.standard_normal((t, n)) @ rng.standard_normal((n, n))
        if case == "exact fits":
            x[: 2 * t // 3, 1:] = x[: 2 * t // 3, :1]  # two thirds of the rows on a line
        elif case == "ties and singular starts":
            x = np.round(x / 2.0)  # few distinct values: some (n + 1)-row starts are singular
        elif case == "many rows, chunked":
            monkeypatch.setattr(influence, "_STACK_VALUES", 5 * n * t)  # five starts at a time
        h = (t + n + 1) // 2
        if case == "ties and singular starts":
            drawn = np.random.default_rng(5)
            starts = np.array([drawn.choice(t, size=n + 1, replace=False) for _ in range(200)])
            assert np.any(np.linalg.matrix_rank(influence._mean_cov_many(x[starts])[1]) < n)
        g_stacked, g_alone = np.random.default_rng(5), np.random.default_rng(5)
        stacked = influence._random_starts(x, h, 200, g_stacked)
        alone = influence._random_starts_one_by_one(x, h, 200, g_alone)
        assert g_stacked.bit_generator.state == g_alone.bit_generator.state  # the nested search draws on
        assert len(stacked) == len(alone) > 0
        for (ld_a, sub_a), (ld_b, sub_b) in zip(stacked, alone):
            assert ld_a == ld_b and np.array_equal(sub_a, sub_b)
        if case == "exact fits":
            assert any(ld == -np.inf for ld, _ in stacked)

    def test_one_gross_outlier_in_300_rows_is_named_as_deciding_the_count(self):
        from relspan.api import analyse_frame

        res = analyse_frame(_outlier_frame(), columns=["y", "a", "b"]).result
        clean = analyse_frame(_outlier_frame(outlier=False), columns=["y", "a", "b"]).result
        assert res.full.coranks["equal"] != clean.full.coranks["equal"], "the outlier must flip the count"
        driven = [f for f in res.findings if f.kind == "influence"]
        assert any("single row" in f.headline and "row 151" in f.headline for f in driven)
        assert any("rows 151 to 165" in f.headline for f in driven)
        assert "rests on a single row or block" in res.summary.pinned.text
        assert res.influence.robust_coranks["equal"] == clean.full.coranks["equal"]
        assert not [f for f in clean.findings if f.kind == "influence"]
        assert clean.influence.sentence.startswith("Leaving out any one of 20 blocks")

    def test_the_build_warns_when_one_row_decides(self, tmp_path):
        _outlier_frame().assign(quarter=[f"{1900 + i // 4}Q{i % 4 + 1}" for i in range(300)]).to_csv(
            tmp_path / "o.csv", index=False)
        (tmp_path / "o.yaml").write_text(textwrap.dedent("""\
            relspan: 1
            report: {title: "One outlier"}
            datasets:
              - id: o
                title: "Three series, one gross error"
                source: o.csv
                format: csv
                time: {column: quarter, format: quarter}
                variables: [{column: y}, {column: a}, {column: b}]
                missing: fail
                plans: [full]
                checks: {assumptions: [elementary, equal, bounded]}
            windows:
              - {id: full, kind: full, title: "Full sample"}
            """), encoding="utf-8")
        _, raised = _run(str(tmp_path / "o.yaml"))
        assert any(isinstance(w, InfluenceWarning) and "row 151" in str(w) for w in raised)


class TestDetrend:
    """``transform: detrend`` removes the least-squares line in time, fitted on the time values (gaps included)."""

    @staticmethod
    def _data(seed: int = 2, t: int = 120):
        rng = np.random.default_rng(seed)
        period = np.arange(t)
        e = np.zeros((t, 2))
        for i in range(1, t):  # stationary AR(1) deviations around straight lines
            e[i] = 0.5 * e[i - 1] + rng.standard_normal(2)
        x = 10 + 0.8 * period + e[:, 0]
        y = 5 + 0.5 * period + 0.6 * e[:, 0] + 0.8 * e[:, 1]
        q = [f"{1980 + p // 4}Q{p % 4 + 1}" for p in period]
        return pd.DataFrame({"quarter": q, "x": x, "y": y}), period

    def _spec(self, folder, csv, transform):
        text = textwrap.dedent(f"""\
            relspan: 1
            report: {{title: "Trends"}}
            datasets:
              - id: tr
                title: "Two series on straight lines"
                source: {csv}
                format: csv
                time: {{column: quarter, format: quarter}}
                variables: [{{column: x, transform: {transform}}}, {{column: y, transform: {transform}}}]
                missing: fail
                plans: [full]
                checks: {{assumptions: [elementary, equal, bounded]}}
            windows:
              - {{id: full, kind: full, title: "Full sample"}}
            """)
        path = folder / f"tr-{transform}.yaml"
        path.write_text(text, encoding="utf-8")
        return str(path)

    def test_detrend_across_a_gap_matches_numpy_residuals_on_the_time_values(self, tmp_path):
        df, period = self._data()
        drop = np.arange(40, 48)  # two years missing
        keep = np.setdiff1d(np.arange(len(df)), drop)
        df.iloc[keep].to_csv(tmp_path / "gappy.csv", index=False)
        run, _ = _run(self._spec(tmp_path, "gappy.csv", "detrend"))
        res = run.dataset("tr")
        t = period[keep].astype(float)
        resid = []
        for col in ("x", "y"):
            b, a = np.polyfit(t, df[col].to_numpy()[keep], 1)  # reference: numpy least-squares line
            resid.append(df[col].to_numpy()[keep] - (a + b * t))
        ref = np.cov(np.column_stack(resid), rowvar=False)
        assert res.full.count == keep.size  # no row dropped at the gap: detrending needs no previous row
        np.testing.assert_allclose(res.full.cov, ref, rtol=1e-9)
        # against the row index instead of the time values, the answer would differ
        idx = np.arange(keep.size, dtype=float)
        wrong = np.cov(np.column_stack([df[c].to_numpy()[keep] - np.polyval(np.polyfit(idx, df[c].to_numpy()[keep], 1), idx)
                                        for c in ("x", "y")]), rowvar=False)
        assert not np.allclose(res.full.cov, wrong, rtol=1e-6)

    def test_levels_on_lines_raise_the_caution_and_detrended_series_do_not(self, tmp_path):
        df, _ = self._data()
        df.to_csv(tmp_path / "tr.csv", index=False)
        run, raised = _run(self._spec(tmp_path, "tr.csv", "none"))
        assert run.dataset("tr").trends.spurious_caution
        assert any(isinstance(w, TrendWarning) for w in raised)
        run, raised = _run(self._spec(tmp_path, "tr.csv", "detrend"))
        assert not run.dataset("tr").trends.spurious_caution
        assert not any(isinstance(w, TrendWarning) for w in raised)

    def test_detrend_without_a_time_column_is_refused(self):
        from relspan.api import analyse_frame
        from relspan.errors import DataError

        df, _ = self._data()
        with pytest.raises(DataError, match="detrend .* no time column"):
            analyse_frame(df.drop(columns="quarter"), columns=["x", "y"], transforms=["detrend", "detrend"])

    def test_detrend_in_a_data_frame_matches_the_file_path(self, tmp_path):
        from relspan.api import analyse_frame

        df, _ = self._data()
        df.to_csv(tmp_path / "tr.csv", index=False)
        run, _ = _run(self._spec(tmp_path, "tr.csv", "detrend"))
        frame = analyse_frame(df, columns=["x", "y"], time="quarter", transforms=["detrend", "detrend"]).result
        np.testing.assert_allclose(frame.full.cov, run.dataset("tr").full.cov, rtol=1e-12)


def test_influence_recounts_give_the_equality_test_the_full_samples_serial_dependence(tmp_path, monkeypatch):
    # The full-sample equal-noise count tests on effective rows under serial dependence; a leave-one-
    # block-out recount that treated the rows as independent could differ for that reason alone (a
    # contradiction on the page). Every recount must carry the time-ordered granules.
    import relspan.run.pipeline as pipeline

    seen = []
    real = pipeline.analyse_window

    def spy(*args, **kwargs):
        seen.append(kwargs.get("granules"))
        return real(*args, **kwargs)

    monkeypatch.setattr(pipeline, "analyse_window", spy)
    _macro_csv(tmp_path / "macro.csv")
    run, _ = _run(_spec(tmp_path, "logdiff"))
    assert run.dataset("macro").influence is not None
    assert len(seen) > 5
    assert all(getattr(getattr(g, "stats", g), "ordered", False) for g in seen), [type(g).__name__ for g in seen]
