"""relspan.run.progress: a one-line counter on terminals, silence elsewhere."""

from __future__ import annotations

import io
import threading

import pytest

from relspan.run.progress import Progress


class FakeTerminal(io.StringIO):
    def isatty(self) -> bool:
        return True


class Clock:
    def __init__(self) -> None:
        self.now = 0.0

    def __call__(self) -> float:
        return self.now


def test_draws_one_line_rewritten_in_place_on_a_terminal(monkeypatch):
    monkeypatch.delenv("TERM", raising=False)
    out = FakeTerminal()
    with Progress("analysis", 480, stream=out, min_interval=0) as bar:
        bar.update(120)
    text = out.getvalue()
    assert "\ranalysis: 120/480 tasks (25%)" in text
    assert text.endswith("\n") and text.count("\n") == 1


def test_writes_nothing_when_the_stream_is_not_a_terminal():
    out = io.StringIO()
    with Progress("analysis", 10, stream=out, min_interval=0) as bar:
        bar.update(10)
    assert out.getvalue() == ""


def test_writes_nothing_when_disabled_on_a_terminal():
    out = FakeTerminal()
    with Progress("analysis", 10, stream=out, enabled=False) as bar:
        bar.update(3)
    assert out.getvalue() == "" and bar.done == 3


def test_dumb_terminal_counts_as_no_terminal(monkeypatch):
    monkeypatch.setenv("TERM", "dumb")
    assert not Progress("analysis", 1, stream=FakeTerminal()).enabled


def test_close_draws_the_final_count_once():
    out = FakeTerminal()
    bar = Progress("figures", 4, stream=out, enabled=True, min_interval=1e9)
    bar.update(1)
    bar.update(1)  # within the interval: counted, not drawn
    bar.close()
    bar.close()
    assert out.getvalue().endswith("\rfigures: 2/4 tasks (50%)\n")
    assert out.getvalue().count("\n") == 1


def test_a_shorter_line_blanks_what_the_longer_one_left():
    out = FakeTerminal()
    clock = Clock()
    bar = Progress("analysis", 10, stream=out, enabled=True, min_interval=0, clock=clock)
    clock.now = 10.0
    bar.update(1)  # long line with a time estimate
    long_line = out.getvalue().split("\r")[-1]
    bar.update(9)  # finished: no estimate, shorter
    last = out.getvalue().split("\r")[-1]
    assert "left" in long_line
    assert len(last) == len(long_line) and last.rstrip() == "analysis: 10/10 tasks (100%)"


def test_estimates_the_time_left_from_the_rate_so_far():
    clock = Clock()
    bar = Progress("analysis", 400, enabled=False, clock=clock)
    clock.now = 30.0
    bar.update(100)
    assert bar.text() == "analysis: 100/400 tasks (25%), about 1 min 30 s left"


def test_updates_from_many_threads_are_all_counted():
    out = FakeTerminal()
    bar = Progress("analysis", 8000, stream=out, enabled=True, min_interval=0)

    def work():
        for _ in range(1000):
            bar.update()

    threads = [threading.Thread(target=work) for _ in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    bar.close()
    assert bar.done == 8000
    assert out.getvalue().rstrip().endswith("analysis: 8000/8000 tasks (100%)")


def test_an_error_inside_the_block_still_ends_the_line():
    out = FakeTerminal()
    with pytest.raises(KeyError):
        with Progress("analysis", 3, stream=out, enabled=True, min_interval=0) as bar:
            bar.update()
            raise KeyError("boom")
    assert out.getvalue().endswith("\n")


@pytest.mark.parametrize("total", [-1, 2.5, True])
def test_rejects_a_total_that_is_not_a_count(total):
    with pytest.raises(ValueError, match="total"):
        Progress("analysis", total)


def test_rejects_a_negative_update():
    with pytest.raises(ValueError, match="whole number"):
        Progress("analysis", 3, enabled=False).update(-1)
