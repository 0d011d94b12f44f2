"""A one-line progress counter for long stages, shown only on a terminal.

``analysis: 120/480 tasks (25%)`` is rewritten in place (carriage return)
while work advances, and ends with a newline on close. When the stream is not
a terminal (a log file, a pipe, CI) or the user asked for quiet, nothing at
all is written, so logs and captured output stay clean.
"""

from __future__ import annotations

import os
import shutil
import sys
import time
from threading import Lock
from typing import Callable, TextIO

__all__ = ["Progress"]


def _is_terminal(stream: TextIO) -> bool:
    try:
        return bool(stream.isatty()) and os.environ.get("TERM", "") != "dumb"
    except (AttributeError, ValueError, OSError):  # closed or odd streams
        return False


def _duration(seconds: float) -> str:
    seconds = int(round(seconds))
    if seconds < 60:
        return f"{seconds} s"
    minutes, seconds = divmod(seconds, 60)
    if minutes < 60:
        return f"{minutes} min {seconds:02d} s"
    hours, minutes = divmod(minutes, 60)
    return f"{hours} h {minutes:02d} min"


class Progress:
    """Count finished tasks of one stage, drawing ``stage: done/total tasks``.

    Parameters
    ----------
    stage : str
        Name shown first, e.g. ``"analysis"``.
    total : int
        Number of tasks in the stage.
    stream : text stream, optional
        Where to draw (default ``sys.stderr`` at construction time).
    enabled : bool, optional
        Force drawing on or off (``False`` for ``--quiet``). Default: draw
        only when ``stream`` is a terminal (and ``TERM`` is not ``dumb``).
    min_interval : float
        Seconds between redraws; updates in between only count. The final
        state is always drawn on close.
    clock : callable
        Monotonic clock in seconds (for tests).

    Notes
    -----
    :meth:`update` is thread-safe, so executor callbacks may call it. Once
    a few seconds have passed, the line also estimates the time left from the
    average rate so far.

    Examples
    --------
    >>> with Progress("analysis", 480, enabled=False) as bar:
    ...     bar.update(120)
    >>> bar.done
    120
    """

    def __init__(self, stage: str, total: int, *, stream: TextIO | None = None,
                 enabled: bool | None = None, min_interval: float = 0.1,
                 clock: Callable[[], float] = time.monotonic) -> None:
        if isinstance(total, bool) or not isinstance(total, int) or total < 0:
            raise ValueError(f"total must be a whole number >= 0; got {total!r}")
        self.stage = str(stage)
        self.total = total
        self._stream = sys.stderr if stream is None else stream
        self.enabled = _is_terminal(self._stream) if enabled is None else bool(enabled)
        self._min_interval = float(min_interval)
        self._clock = clock
        self._lock = Lock()
        self._done = 0
        self._start = clock()
        self._last_draw: float | None = None
        self._width = 0
        self._closed = False

    @property
    def done(self) -> int:
        with self._lock:
            return self._done

    def text(self) -> str:
        """The line as it would be drawn now."""
        with self._lock:
            return self._text(self._clock())

    def _text(self, now: float) -> str:
        done, total = self._done, self.total
        line = f"{self.stage}: {done}/{total} tasks"
        if total:
            line += f" ({100 * min(done, total) // total}%)"
        elapsed = now - self._start
        if 0 < done < total and elapsed >= 2.0:
            line += f", about {_duration(elapsed * (total - done) / done)} left"
        return line

    def update(self, k: int = 1) -> None:
        """Record ``k`` more finished tasks (and redraw if due)."""
        if isinstance(k, bool) or not isinstance(k, int) or k < 0:
            raise ValueError(f"update takes a whole number >= 0 of tasks; got {k!r}")
        with self._lock:
            self._done += k
            if not self.enabled or self._closed:
                return
            now = self._clock()
            due = (self._last_draw is None or now - self._last_draw >= self._min_interval
                   or self._done >= self.total)
            if due:
                self._draw(now)

    def _draw(self, now: float) -> None:
        line = self._text(now)
        columns = shutil.get_terminal_size(fallback=(80, 24)).columns
        if columns > 1 and len(line) > columns - 1:
            line = line[:columns - 1]
        pad = " " * max(0, self._width - len(line))
        try:
            self._stream.write("\r" + line + pad)
            self._stream.flush()
        except (OSError, ValueError):  # the terminal went away: stop drawing
            self.enabled = False
            return
        self._width = len(line)
        self._last_draw = now

    def close(self) -> None:
        """Draw the final state and end the line (once; later calls do nothing)."""
        with self._lock:
            if self._closed:
                return
            self._closed = True
            if not self.enabled:
                return
            self._draw(self._clock())
            try:
                self._stream.write("\n")
                self._stream.flush()
            except (OSError, ValueError):
                pass

    def __enter__(self) -> "Progress":
        if self.enabled:
            with self._lock:
                self._draw(self._clock())
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
