"""Errors and warnings that relspan reports to its users.

Every error a user can cause (a bad spec, bad data, a bad option, an output
folder we must not touch) is a :class:`RelspanError`. The command line turns
these into one located paragraph on stderr and exit code 2, never a traceback.
Each error keeps its fields (``path``, ``line``, ``key``, ``expected``,
``got``, ``fix``) as attributes so that tests and notebooks can inspect them.

Numerical trouble that still yields an answer is a warning of its own class
(:class:`IllConditionedWarning`, ...), naming the window and the number, in
the spirit of SciPy's ``LinAlgWarning``.

Which class a failure raises
----------------------------
* :class:`SpecError`: the spec file cannot be read or breaks the spec format.
* :class:`DataError`: a data file cannot be read, or the data (or statistics
  derived from them) make an analysis impossible: a bad cell, a constant
  variable in a window.
* :class:`OptionsError` (also a :class:`ValueError`): a bad argument to a
  library function or a bad command-line option. A pure analysis function
  raises it for any argument it cannot accept (wrong type, shape or range;
  an asymmetric or indefinite "covariance"), naming its OWN parameter
  (``eps must be a number in (0, 1)``, ``key="eps"``), never a spec key;
  the same bad input raises the same class from every analysis function.
  Where the driver passes spec values to the analysis it adds the spec
  location (``checks.tolerance``).
* :class:`OutputError`, :class:`DependencyError`: the output folder, an
  optional dependency.
"""

from __future__ import annotations

__all__ = [
    "RelspanError",
    "SpecError",
    "DataError",
    "OptionsError",
    "OutputError",
    "DependencyError",
    "RelspanWarning",
    "IllConditionedWarning",
    "NumericalWarning",
    "FindingsConflictWarning",
    "TrendWarning",
    "InfluenceWarning",
    "RelspanNote",
]


class RelspanError(Exception):
    """A problem with the user's input that relspan explains and stops on.

    Parameters
    ----------
    message : str
        What is wrong, in one sentence, without the location.
    path : str, optional
        File the problem is in (as the user wrote it, or relative to the cwd).
    line : int, optional
        1-based line number in ``path``.
    key : str, optional
        Key path inside the spec, e.g. ``datasets[0].variables[2].column``.
    expected, got : str, optional
        What was expected and what was found.
    fix : str, optional
        What the user can do about it.
    """

    exit_code = 2

    def __init__(self, message: str, *, path: str | None = None, line: int | None = None,
                 key: str | None = None, expected: str | None = None,
                 got: str | None = None, fix: str | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.path = None if path is None else str(path)
        self.line = line
        self.key = key
        self.expected = expected
        self.got = got
        self.fix = fix

    @property
    def location(self) -> str:
        """``path:line`` (or as much of it as is known)."""
        parts = []
        if self.path:
            parts.append(self.path)
        if self.line is not None:
            parts.append(str(self.line))
        return ":".join(parts)

    def __str__(self) -> str:
        head = self.location
        text = f"{head}: {self.message}" if head else self.message
        if self.key and self.key not in self.message:
            text += f" (at {self.key})"
        if self.fix:
            text += f"\n  Fix: {self.fix}"
        return text

    def with_location(self, *, path: str | None = None, line: int | None = None,
                      key: str | None = None) -> "RelspanError":
        """Fill in location fields that are still unknown; returns self."""
        if self.path is None and path is not None:
            self.path = str(path)
        if self.line is None and line is not None:
            self.line = line
        if self.key is None and key is not None:
            self.key = key
        return self


class SpecError(RelspanError):
    """The spec file cannot be read or does not follow the spec format."""


class DataError(RelspanError):
    """A data file cannot be read or its contents cannot be analysed.

    Extra attributes: ``column`` and ``row`` (1-based data row, header not
    counted) when known.
    """

    def __init__(self, message: str, *, column: str | None = None, row: int | None = None,
                 **kwargs) -> None:
        super().__init__(message, **kwargs)
        self.column = column
        self.row = row


class OptionsError(RelspanError, ValueError):
    """A command-line option or API argument is invalid (also a :class:`ValueError`)."""


class OutputError(RelspanError):
    """The output folder is unsafe to write (or could not be written)."""


class DependencyError(RelspanError):
    """An optional dependency the user asked for is not installed."""


class RelspanWarning(UserWarning):
    """Base class of relspan's warnings (``--strict`` turns them into failures).

    Warnings stay typed from the analysis to the report: the driver records
    where one arose (:meth:`located` sets ``dataset`` and ``plan``) and the
    report renders it; ``str(w)`` is the one line users see.
    """

    dataset: str | None = None
    plan: str | None = None

    def located(self, *, dataset: str | None = None, plan: str | None = None) -> "RelspanWarning":
        """Record the dataset and window plan the warning arose in; returns self."""
        self.dataset, self.plan = dataset, plan
        return self

    @property
    def message(self) -> str:
        """The warning's own sentence, without its location."""
        return str(self.args[0]) if self.args else ""

    def __str__(self) -> str:
        where = ", ".join(part for part in (
            f"dataset {self.dataset!r}" if self.dataset else "",
            f"plan {self.plan!r}" if self.plan else "") if part)
        return f"{where}: {self.message}" if where else self.message


class IllConditionedWarning(RelspanWarning):
    """A window's covariance is nearly singular; numbers from it are fragile.

    Attributes ``window`` (label) and ``condition`` (2-norm condition number).
    """

    def __init__(self, message: str, *, window: str | None = None,
                 condition: float | None = None) -> None:
        super().__init__(message)
        self.window = window
        self.condition = condition


class NumericalWarning(RelspanWarning):
    """A computation converged poorly or hit a limit; the result says how."""


class FindingsConflictWarning(RelspanWarning):
    """Two findings of one dataset contradict each other, or one claims more than it rests on.

    An internal error of relspan's interpreter (the test suite makes it an
    error); a build still writes the site and says so. Attributes ``rule``
    (:data:`relspan.analysis.findings.consistency.RULES`) and ``statements``.
    """

    def __init__(self, message: str, *, rule: str | None = None, statements: tuple = ()) -> None:
        super().__init__(message)
        self.rule = rule
        self.statements = tuple(statements)

    def __reduce__(self):
        return (_rebuild_conflict, (self.message, self.rule, self.statements, self.dataset, self.plan))


def _rebuild_conflict(message, rule, statements, dataset, plan):
    return FindingsConflictWarning(message, rule=rule, statements=statements).located(dataset=dataset, plan=plan)


class TrendWarning(RelspanWarning):
    """Levels of two or more trending series are analysed: relations among them may be spurious.

    Attribute ``series`` (the trending series' names).
    """

    def __init__(self, message: str, *, series: tuple = ()) -> None:
        super().__init__(message)
        self.series = tuple(series)

    def __reduce__(self):
        return (_rebuild_trend, (self.message, self.series, self.dataset, self.plan))


def _rebuild_trend(message, series, dataset, plan):
    return TrendWarning(message, series=series).located(dataset=dataset, plan=plan)


class InfluenceWarning(RelspanWarning):
    """A single row or block of rows decides a headline finding."""


class RelspanNote(UserWarning):
    """Something the user should know that changes no result (``--strict`` ignores it).

    E.g. a result cache made under other library versions is not reused. The
    command line prints it as one ``note:`` line on stderr.
    """
