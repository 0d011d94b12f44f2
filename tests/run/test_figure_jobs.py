"""Figure jobs: shared content drawn once; plans beyond the window-map cap get no map per window."""

from __future__ import annotations

import shutil
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

                gallery = [j for j in draft.figure_jobs
                           if j.dataset_key == result.cache_key and j.fn is ff.gallery_figure
                           and j.args[1] is plan]
                assert len(gallery) == 1  # the plan's shared-frame figure is drawn
                for i, label in enumerate(plan.labels):
                    page = next(p for p in draft.content.pages
                                if p.path == window_path(result.spec.id, plan.plan.id, i))
                    assert "in one frame" in page.body_markdown
                    assert f"more than {ff.WINDOW_MAP_CAP} windows" in page.body_markdown
                    # each window is reachable: the page names its own panel of the shared-frame figure
                    assert ff.has_gallery_panel(plan, i)
                    assert f"the panel titled \u201c{label}\u201d" in page.body_markdown
    assert seen_big


def test_the_window_map_cap_leaves_no_demo_plan_of_more_than_three_windows_with_maps_of_its_own(demo):
    # stated on every window page of such a plan; the demo's 7-window "growing" plans are above it
    from relspan.report.figures import inputs as ff

    run, draft = demo
    assert ff.WINDOW_MAP_CAP == 3
    window_maps = [j.ident for j in draft.figure_jobs if "/w" in j.ident and j.ident.split("/")[2] == "map"]
    plans = {i.split("/")[0] for i in window_maps}
    assert plans <= {"full", "eras"}, window_maps
    growing = [p for r in run.datasets for p in r.plans if p.plan.id == "growing"]
    assert growing and all(len(p.analyses) == 7 for p in growing)


# ------------------------------------------------ both formats: SVG and PNG from one drawing (issue 14)

def test_a_second_format_is_saved_from_the_same_drawing_and_leaves_the_first_unchanged():
    CALLS.clear()
    one = rf.draw_figures([_job(0, 0.5, "alone")], "svg")[0]
    both = rf.draw_figures([_job(0, 0.5, "alone")], "svg", also=("png", "svg"))[0]
    assert CALLS == ["alone", "alone"]  # one drawing per call, however many formats
    assert one[7] == () and one[:7] == both[:7]  # the shown SVG is the same bytes either way
    assert [fmt for fmt, _ in both[7]] == ["png"]  # the shown format is not written twice
    assert both[7][0][1].startswith(b"\x89PNG\r\n\x1a\n")
    assert rf.draw_figures([_job(0, 0.5, "alone")], "svg", also=("png",))[0][7] == both[7]  # same bytes again


class _Cache(dict):
    def put(self, key, value):
        self[key] = value


def test_the_cache_keeps_figures_with_and_without_the_second_format_apart():
    cache = _Cache()
    job = FigureJob("@@0@@", _counted_figure, (0.5, "kept"), "figures", "", "job0", "dataset-key")
    rf.draw_figures([job], "svg", cache=cache)
    rf.draw_figures([job], "svg", also=("png",), cache=cache)
    assert len(cache) == 2
    CALLS.clear()
    assert rf.draw_figures([job], "svg", also=("png",), cache=cache)[0][7][0][0] == "png"
    assert CALLS == []  # the second build found both formats in the cache


def _filled(also: tuple) -> tuple:
    from relspan.report.pages.publisher import Publisher
    from relspan.site.content import Page

    pub = Publisher(fmt="svg", also=also)
    token = pub.figure(_counted_figure, (0.5, "linked"), "figures/demo", "A caption.", ident="linked")
    page = Page(path="p.html", title="P", body_markdown=f"Text.{token}More.", section="dataset")
    rendered = rf.draw_figures(pub.jobs, "svg", also=also)
    return pub, pub.fill([page], rendered)[0].body_markdown


def test_each_figure_links_its_image_files_and_numbers_under_its_caption():
    pub, body = _filled(("png",))
    assert sorted(pub.files) == ["figures/demo/linked.csv", "figures/demo/linked.png", "figures/demo/linked.svg"]
    assert ("Download: [PNG](/figures/demo/linked.png) \u00b7 [SVG](/figures/demo/linked.svg) \u00b7 "
            "[the numbers (CSV)](/figures/demo/linked.csv)") in body
    assert '<a class="fig-open" href="/figures/demo/linked.svg"><img src="/figures/demo/linked.svg"' in body
    pub, body = _filled(())
    assert "figures/demo/linked.png" not in pub.files and "[PNG]" not in body
    assert "Download: [SVG](/figures/demo/linked.svg) \u00b7 [the numbers (CSV)]" in body


def test_site_figure_files_defaults_to_one_and_both_adds_the_other_format(tmp_path):
    from relspan.errors import SpecError
    from relspan.spec import load_spec

    text = (ROOT / "specs" / "demo.yaml").read_text(encoding="utf-8")
    shutil.copytree(ROOT / "specs" / "data", tmp_path / "data")
    (tmp_path / "a.yaml").write_text(text, encoding="utf-8")
    assert load_spec(tmp_path / "a.yaml").site.figure_files == "one"
    (tmp_path / "b.yaml").write_text(text.replace("\nsite:\n", "\nsite:\n  figure_files: both\n", 1), encoding="utf-8")
    assert load_spec(tmp_path / "b.yaml").site.figure_files == "both"
    (tmp_path / "c.yaml").write_text(text.replace("\nsite:\n", "\nsite:\n  figure_files: all\n", 1), encoding="utf-8")
    with pytest.raises(SpecError, match=r"site\.figure_files"):
        load_spec(tmp_path / "c.yaml")
