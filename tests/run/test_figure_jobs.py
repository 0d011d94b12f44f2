"""Figure jobs: shared content drawn once; plans beyond the window-map cap get no map per window."""

from __future__ import annotations

import warnings
from pathlib import Path

import pytest

from relspan.report.pages.publisher import FigureJob
from relspan.run import figures as rf

ROOT = Path(__file__).resolve().parents[2]
CALLS: list[str] = []


def _counted_figure(value: float, name: str):
    """A tiny real figure; counts its calls."""
    from relspan.report import frisch_intervals

    CALLS.append(name)
    return frisch_intervals(["a"], [value], [value + 1.0], name=name)


_counted_figure.content_key = lambda value, name: repr(value)


def _job(i, *args):
    return FigureJob(f"@@{i}@@", _counted_figure, args, "figures", "", f"job{i}", "")


def test_jobs_that_show_the_same_content_are_drawn_once_under_their_own_names():
    CALLS.clear()
    jobs = [_job(0, 0.5, "first-map"), _job(1, 0.5, "second-map"), _job(2, 0.7, "third-map")]
    out = rf.draw_figures(jobs, "svg")
    assert CALLS == ["first-map", "third-map"]
    assert [r[0] for r in out] == ["first-map", "second-map", "third-map"]
    assert out[0][1:] == out[1][1:]  # same alt, description, bytes, table, size


@pytest.fixture(scope="module")
def demo():
    from relspan.report.site_content import site_draft
    from relspan.run.pipeline import run_analysis
    from relspan.spec import load_spec

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        run = run_analysis(load_spec(ROOT / "specs" / "demo.yaml"), jobs=1, use_cache=False, progress=False)
    return run, site_draft(run)


def test_plans_beyond_the_cap_have_no_window_maps_and_their_pages_point_to_the_shared_frame(demo):
    from relspan.report.figures import inputs as ff

    run, draft = demo
    seen_big = False
    for result in run.datasets:
        q = result.examined[0] if result.examined else None
        for plan in result.plans:
            big = len(plan.analyses) > ff.WINDOW_MAP_CAP and q is not None
            if big and not ff.has_window_maps(result, plan, q):
                seen_big = True
                assert not [j for j in draft.figure_jobs
                            if j.dataset_key == result.cache_key and j.ident.startswith(f"{plan.plan.id}/w")]
                from relspan.report.pages.addresses import window_path

                page = next(p for p in draft.content.pages
                            if p.path == window_path(result.spec.id, plan.plan.id, 0))
                assert "in one frame" in page.body_markdown
    assert seen_big
