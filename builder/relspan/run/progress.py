"""Progress bars for long stages, drawn by tqdm: on a terminal, in a notebook, or when asked.

``analysis of trio: 120/300 tasks (40%) |####      | [00:02<00:03]`` is
tqdm's line, rewritten in place on a terminal; in a Jupyter notebook (when
ipywidgets is installed) it is tqdm's notebook widget. Where the stream is not
a terminal (a log file, a pipe, CI) nothing at all is written unless drawing
was asked for (``relspan build --verbose``, ``progress=True``), so logs and
captured output stay clean; ``--quiet`` (``progress=False``) silences it
everywhere. The bars use no colour, so they read the same with ``NO_COLOR``
set (https://no-color.org) as without.

References
----------
.. [1] tqdm developers, "tqdm: A Fast, Extensible Progress Bar for Python
       and CLI" (the ``tqdm`` package).
"""

from __future__ import annotations

import io
import os
import sys
from threading import Lock
from typing import TextIO

__all__ = ["Progress", "in_notebook", "should_draw"]


def _is_terminal(stream: TextIO) -> bool:
    try:
        return bool(stream.isatty()) and os.environ.get("TERM", "") != "dumb"
    except (AttributeError, ValueError, OSError):  # closed or odd streams
        return False


def in_notebook() -> bool:
    """Whether this process is a Jupyter kernel (IPython's ZMQ shell)."""
    if "IPython" not in sys.modules:
        return False
    try:
        shell = sys.modules["IPython"].get_ipython()
    except AttributeError:
        return False
    return shell is not None and type(shell).__name__ == "ZMQInteractiveShell"


def should_draw(stream: TextIO, enabled: bool | None) -> bool:
    """``enabled`` when given; else draw on a terminal (TERM not ``dumb``) or in a notebook."""
    if enabled is not None:
        return bool(enabled)
    return _is_terminal(stream) or in_notebook()


def _bar_class(stream: TextIO):
    if stream is sys.stderr and in_notebook():
        try:
            import ipywidgets  # noqa: F401, PLC0415 (tqdm's notebook widget needs it)
            from tqdm.notebook import tqdm as notebook_bar  # noqa: PLC0415

            return notebook_bar
        except ImportError:
            pass
    from tqdm import tqdm  # noqa: PLC0415

    return tqdm


class Progress:
    """Count finished tasks of one stage on a tqdm bar.

    Parameters
    ----------
    stage : str
        Name shown first, e.g. ``"analysis of trio"``.
    total : int
        Number of tasks in the stage (may be set later through :attr:`total`).
    stream : text stream, optional
        Where to draw (default ``sys.stderr`` at construction time).
    enabled : bool, optional
        Force drawing on (``--verbose``) or off (``--quiet``). Default: draw
        on a terminal or in a notebook only (:func:`should_draw`).
    min_interval : float
        Seconds between redraws (tqdm's ``mininterval``).

    Notes
    -----
    :meth:`update` is thread-safe, so executor callbacks may call it.

    Examples
    --------
    >>> with Progress("analysis", 480, enabled=False) as bar:
    ...     bar.update(120)
    >>> bar.done
    120
    """

    def __init__(self, stage: str, total: int, *, stream: TextIO | None = None,
                 enabled: bool | None = None, min_interval: float = 0.1) -> None:
        _check_count(total, "total")
        self.stage = str(stage)
        self._total = total
        self._stream = sys.stderr if stream is None else stream
        self.enabled = should_draw(self._stream, enabled)
        self._min_interval = float(min_interval)
        self._lock = Lock()
        self._done = 0
        self._bar = None
        self._closed = False
        self._note = ""

    @property
    def note(self) -> str:
        """A few words shown after the bar (e.g. where the tasks run)."""
        return self._note

    @note.setter
    def note(self, value: str) -> None:
        with self._lock:
            self._note = str(value)
            if self._bar is not None and hasattr(self._bar, "set_postfix_str"):
                try:
                    self._bar.set_postfix_str(self._note)
                except (OSError, ValueError):
                    self.enabled = False

    @property
    def done(self) -> int:
        with self._lock:
            return self._done

    @property
    def total(self) -> int:
        return self._total

    @total.setter
    def total(self, value: int) -> None:
        _check_count(value, "total")
        with self._lock:
            self._total = value
            if self._bar is not None:
                self._bar.total = value
                self._bar.refresh()

    def _open(self) -> None:
        if self._bar is not None or not self.enabled or self._closed:
            return
        bar = _bar_class(self._stream)
        kwargs = dict(total=self._total, desc=self.stage, unit="task", mininterval=self._min_interval,
                      leave=True, colour=None)
        if bar.__module__ == "tqdm.std":
            # "analysis of trio: 120/480 tasks (25%) |###   | [00:02<00:06]": the stage and the
            # count first, so a narrow terminal still shows them
            kwargs.update(file=self._stream, bar_format=_BAR_FORMAT, **_width(self._stream))
        try:
            self._bar = bar(**kwargs)
        except (OSError, ValueError):  # the stream went away: stop drawing
            self.enabled = False

    def update(self, k: int = 1) -> None:
        """Record ``k`` more finished tasks (and redraw if due)."""
        _check_count(k, "update")
        with self._lock:
            self._done += k
            if self._bar is not None and not self._closed:
                try:
                    self._bar.update(k)
                except (OSError, ValueError):
                    self.enabled = False

    def close(self) -> None:
        """Draw the final state and end the line (once; later calls do nothing)."""
        with self._lock:
            if self._closed:
                return
            self._closed = True
            if self._bar is not None:
                try:
                    self._bar.close()
                except (OSError, ValueError):
                    pass

    def __enter__(self) -> "Progress":
        with self._lock:
            self._open()
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


#: tqdm's line: stage, count, share, bar, elapsed and remaining time
_BAR_FORMAT = "{desc}: {n_fmt}/{total_fmt} tasks ({percentage:.0f}%) |{bar}| [{elapsed}<{remaining}{postfix}]"


def _width(stream: TextIO) -> dict:
    """Follow the terminal's size; 80 x 24 where it reports none (a fresh pseudo-terminal says
    0 x 0, and tqdm then draws nothing)."""
    try:
        size = os.get_terminal_size(stream.fileno())
        if size.columns > 0 and size.lines > 0:
            return {"dynamic_ncols": True}
    except (AttributeError, ValueError, OSError, io.UnsupportedOperation):
        pass
    return {"ncols": 80, "nrows": 24}


def _check_count(value: object, what: str) -> None:
    if isinstance(value, bool) or not isinstance(value, int) or value < 0:
        if what == "total":
            raise ValueError(f"total must be a whole number >= 0; got {value!r}")
        raise ValueError(f"update takes a whole number >= 0 of tasks; got {value!r}")
