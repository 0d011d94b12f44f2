"""relspan.run.progress: tqdm bars on terminals and in notebooks, silence elsewhere unless asked."""

from __future__ import annotations

import io
import re
import threading

import pytest

from relspan.run import progress as progress_mod
from relspan.run.progress import Progress, should_draw


class FakeTerminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_draws_a_tqdm_bar_with_stage_count_and_total_on_a_terminal(monkeypatch):
    monkeypatch.delenv("TERM", raising=False)
    out = FakeTerminal()
    with Progress("analysis", 480, stream=out, min_interval=0) as bar:
        bar.update(120)
    text = out.getvalue()
    assert "\ranalysis: 120/480 tasks (25%) |" in text  # rewritten in place (carriage return)
    assert text.endswith("\n") and text.count("\n") == 1


def test_writes_nothing_when_the_stream_is_not_a_terminal():
    out = io.StringIO()
    with Progress("analysis", 10, stream=out) as bar:
        bar.update(10)
    assert out.getvalue() == "" and bar.done == 10


def test_draws_when_asked_even_if_the_stream_is_not_a_terminal():
    out = io.StringIO()
    with Progress("figures", 4, stream=out, enabled=True, min_interval=0) as bar:
        bar.update(4)
    assert "figures: 4/4 tasks (100%)" in out.getvalue()


def test_writes_nothing_when_disabled_on_a_terminal():
    out = FakeTerminal()
    with Progress("analysis", 10, stream=out, enabled=False) as bar:
        bar.update(3)
    assert out.getvalue() == ""


def test_dumb_terminal_counts_as_no_terminal(monkeypatch):
    monkeypatch.setenv("TERM", "dumb")
    assert not should_draw(FakeTerminal(), None)


def test_a_notebook_kernel_draws_without_a_terminal(monkeypatch):
    monkeypatch.setattr(progress_mod, "in_notebook", lambda: True)
    assert should_draw(io.StringIO(), None)
    assert not should_draw(io.StringIO(), False)


def test_no_colour_codes_are_written_with_no_color_set(monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")
    monkeypatch.delenv("TERM", raising=False)
    out = FakeTerminal()
    with Progress("analysis", 5, stream=out, min_interval=0) as bar:
        bar.update(5)
    assert not re.search(r"\x1b\[[0-9;]*m", out.getvalue())  # no SGR (colour) sequences


def test_the_total_can_be_set_once_known():
    out = io.StringIO()
    with Progress("figures", 0, stream=out, enabled=True, min_interval=0) as bar:
        bar.total = 3
        bar.update(3)
    assert "3/3" in out.getvalue()


def test_updates_from_many_threads_are_all_counted():
    bar = Progress("analysis", 4000, stream=io.StringIO(), enabled=True, min_interval=0)
    with bar:
        threads = [threading.Thread(target=lambda: [bar.update(1) for _ in range(1000)])
                   for _ in range(4)]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
    assert bar.done == 4000


def test_an_error_inside_the_block_still_closes_the_bar():
    out = io.StringIO()
    with pytest.raises(RuntimeError):
        with Progress("analysis", 10, stream=out, enabled=True, min_interval=0) as bar:
            bar.update(2)
            raise RuntimeError("boom")
    assert out.getvalue().endswith("\n")


@pytest.mark.parametrize("total", [-1, 1.5, True, "3"])
def test_rejects_a_total_that_is_not_a_count(total):
    with pytest.raises(ValueError, match="total must be a whole number"):
        Progress("x", total)


def test_rejects_a_negative_update():
    with pytest.raises(ValueError, match="whole number >= 0 of tasks"):
        Progress("x", 3, enabled=False).update(-1)
