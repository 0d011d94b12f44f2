"""Frozen dataclasses for a validated spec (format v1).

The loader (:mod:`relspan.spec.load`) turns YAML text into these objects
after checking it against the schema (:mod:`relspan.spec.schema`). Every other
part of relspan reads the spec only through these classes. Field names follow
the YAML keys; defaults here are the defaults of the format.

Paths are stored as written in the spec *and* resolved: ``DatasetSpec.source``
is the text from the spec, ``DatasetSpec.source_path`` the absolute path.
"""

from __future__ import annotations

from relspan.assumptions import ASSUMPTION_IDS

from dataclasses import dataclass, field
from pathlib import Path

__all__ = [
    "SPEC_VERSION",
    "TRANSFORMS",
    "ASSUMPTIONS",
    "CLAIM_KINDS",
    "ReportMeta",
    "TimeSpec",
    "VariableSpec",
    "DatasetSpec",
    "Period",
    "Span",
    "WindowPlanSpec",
    "Tolerance",
    "ChecksSpec",
    "ResamplingSpec",
    "ClaimSpec",
    "SiteSpec",
    "Spec",
]

SPEC_VERSION = 1

#: transforms a variable may get, applied in the data layer in this order of meaning
TRANSFORMS = ("none", "log", "diff", "logdiff", "detrend", "demean", "standardise")

#: noise assumptions relspan compares side by side
#:  - elementary: one variable at a time is the only noisy one (the n elementary regressions, OLS)
#:  - equal: every variable has the same noise variance (total least squares)
#:  - shaped: noise variances known up to one common factor (``noise_share`` per variable)
#:  - bounded: noise covariance of spectral norm at most eps (any shape)
#:  - diagonal: independent noise with unknown variances (Frisch scheme)
#: the noise assumptions' identifiers, from the one table (:mod:`relspan.assumptions`)
ASSUMPTIONS = ASSUMPTION_IDS

#: statements a claim can make
CLAIM_KINDS = ("corank", "subspace_stable", "sign_stable", "coefficient_bounded", "no_break")


@dataclass(frozen=True, slots=True)
class ReportMeta:
    """``report:`` - who wrote it and how to cite it."""

    title: str
    summary: str = ""
    authors: tuple[str, ...] = ()
    licence: str = ""
    cite: str = ""


@dataclass(frozen=True, slots=True)
class TimeSpec:
    """``datasets[i].time:`` - the time column and an optional date range.

    ``format`` is ``"auto"``, ``"year"`` (e.g. ``1994``), ``"quarter"``
    (``1994Q1`` / ``1994-Q1``), ``"month"`` (``1994-03``), or a ``strftime``
    pattern such as ``"%d/%m/%Y"``. ``start``/``end`` are inclusive ISO dates
    (YAML keys ``from`` and ``to``).
    """

    column: str
    format: str = "auto"
    start: str | None = None
    end: str | None = None


@dataclass(frozen=True, slots=True)
class VariableSpec:
    """``datasets[i].variables[j]:`` - one column to analyse."""

    column: str
    label: str
    unit: str = ""
    transform: str = "none"
    noise_share: float | None = None


@dataclass(frozen=True, slots=True)
class Tolerance:
    """``checks.tolerance:`` - eps for the bounded and diagonal assumptions.

    Exactly one of ``absolute`` (eps on the covariance scale of the analysed
    variables) or ``relative`` (eps as a share of each variable's variance;
    the analysis then works on the correlation scale) is set.
    """

    absolute: float | None = None
    relative: float | None = 0.05


@dataclass(frozen=True, slots=True)
class ResamplingSpec:
    """``checks.resampling:`` - the bootstrap behind every interval and corank support.

    ``resamples`` 0 turns resampling off. ``scheme`` is ``"auto"`` (stationary
    blocks with a time column, iid without), ``"stationary"``, ``"moving"`` or
    ``"iid"``. ``block_length`` is ``"auto"`` (Politis & White 2004 with the
    2009 correction) or a number of rows. ``seed`` None means ``checks.seed``.
    """

    resamples: int = 499
    level: float = 0.90
    scheme: str = "auto"
    block_length: float | str = "auto"
    seed: int | None = None
    diagonal_resamples: int = 99


@dataclass(frozen=True, slots=True)
class ChecksSpec:
    """``checks:`` - which analyses run and with which options.

    ``coranks`` is ``()`` for "auto" (examine the corank the evidence
    suggests) or the coranks to examine. ``normalise_on`` is ``"auto"`` or a
    column name. ``max_angle_deg`` and ``sign_share`` are the stability
    thresholds (largest principal angle between windows, in degrees).
    """

    assumptions: tuple[str, ...] = ASSUMPTIONS
    tolerance: Tolerance = field(default_factory=Tolerance)
    normalise_on: str = "auto"
    coranks: tuple[int, ...] = ()
    max_angle_deg: float = 10.0
    frisch_starts: int = 8
    seed: int = 0
    resampling: ResamplingSpec = field(default_factory=ResamplingSpec)


@dataclass(frozen=True, slots=True)
class DatasetSpec:
    """``datasets[i]:`` - one table and what to analyse in it."""

    id: str
    title: str
    source: str
    source_path: Path
    variables: tuple[VariableSpec, ...]
    format: str = "auto"
    description: str = ""
    time: TimeSpec | None = None
    separator: str = "auto"
    decimal: str = "auto"
    encoding: str = "auto"
    sheet: str | int | None = None
    missing: str = "drop"
    plans: tuple[str, ...] = ()
    checks: ChecksSpec = field(default_factory=ChecksSpec)

    @property
    def columns(self) -> tuple[str, ...]:
        return tuple(v.column for v in self.variables)

    @property
    def noise_shape(self) -> tuple[float, ...] | None:
        """Relative noise variances, when every variable has ``noise_share``."""
        shares = [v.noise_share for v in self.variables]
        if any(s is None for s in shares):
            return None
        return tuple(float(s) for s in shares)


@dataclass(frozen=True, slots=True)
class Span:
    """A width or step: whole rows, or a count of time units.

    ``unit`` is ``"rows"`` or one of ``"years"``, ``"quarters"``,
    ``"months"``, ``"weeks"``, ``"days"``. YAML: ``40`` or ``"10 years"``.
    """

    count: int
    unit: str = "rows"


@dataclass(frozen=True, slots=True)
class Period:
    """A named period with inclusive ISO date bounds."""

    label: str
    start: str
    end: str


@dataclass(frozen=True, slots=True)
class WindowPlanSpec:
    """``windows[k]:`` - how to cut each dataset into windows.

    ``kind`` is ``full``, ``rolling`` (``width``, ``step``), ``expanding``
    (``width`` is the first window, ``step`` the growth) or ``periods``.
    """

    id: str
    kind: str
    title: str = ""
    width: Span | None = None
    step: Span | None = None
    periods: tuple[Period, ...] = ()


@dataclass(frozen=True, slots=True)
class ClaimSpec:
    """``claims[m]:`` - a statement the authors make, re-checked on every build.

    kinds and the fields they use:

    - ``corank``: ``assumption``, one of ``equals`` / ``at_least`` / ``at_most``;
      holds when the corank in every window of ``plan`` satisfies it.
    - ``subspace_stable``: ``corank``, ``assumption`` (default equal), ``below_deg``
      (default ``checks.max_angle_deg``); holds when every window has that corank
      and the largest principal angle between windows (every pair, or neighbours
      in large plans) is below ``below_deg``; cannot be judged where a window's
      corank is undetermined or zero, or sampling alone moves the subspaces by
      ``below_deg`` or more.
    - ``no_break``: ``assumption`` (default equal); no ``plan`` (``plan`` is "");
      holds when the scan of the whole sample finds no break of the relation
      subspace at any date, fails when it finds one.
    - ``sign_stable``: ``assumption`` (default elementary), ``normalise_on``,
      ``variable``, optional ``sign`` (``positive``/``negative``); holds when
      the coefficient of ``variable`` in the relation normalised on
      ``normalise_on`` keeps one sign (the given one) in every window.
    - ``coefficient_bounded``: ``normalise_on``, ``variable``; holds when the
      diagonal-noise (Frisch) interval of the coefficient is finite in every window.

    ``assumption`` defaults: none for ``corank`` (it must be given), ``equal``
    for ``subspace_stable`` and ``no_break``, ``elementary`` for ``sign_stable``,
    ``diagonal`` for ``coefficient_bounded`` (the only one it takes).
    """

    id: str
    kind: str
    dataset: str
    plan: str
    text: str = ""
    assumption: str | None = None
    corank: int | None = None
    equals: int | None = None
    at_least: int | None = None
    at_most: int | None = None
    below_deg: float | None = None
    normalise_on: str | None = None
    variable: str | None = None
    sign: str | None = None
    line: int | None = None


@dataclass(frozen=True, slots=True)
class SiteSpec:
    """``site:`` - where and how the site is written."""

    out: str = "relspan-site"
    out_path: Path | None = None
    figures: str = "svg"
    notes: str = ""
    language: str = "en"
    #: "one": each figure in the format the pages show; "both": SVG and PNG, both linked for download
    figure_files: str = "one"


@dataclass(frozen=True, slots=True)
class RunSpec:
    """``run:`` - where window tasks run (the command line's --jobs / --scheduler override it).

    ``jobs`` is the number of local worker processes (None: the cores
    available); ``scheduler`` the address of a running Dask scheduler
    (``tcp://host:port``). At most one of the two is set.
    """

    jobs: int | None = None
    scheduler: str | None = None


@dataclass(frozen=True, slots=True)
class Spec:
    """A whole validated spec. ``path`` is the spec file, ``text`` its bytes as read."""

    version: int
    report: ReportMeta
    datasets: tuple[DatasetSpec, ...]
    windows: tuple[WindowPlanSpec, ...]
    checks: ChecksSpec
    claims: tuple[ClaimSpec, ...]
    site: SiteSpec
    path: Path
    text: str
    run: RunSpec = RunSpec()

    @property
    def folder(self) -> Path:
        return self.path.parent

    def dataset(self, dataset_id: str) -> DatasetSpec:
        for d in self.datasets:
            if d.id == dataset_id:
                return d
        raise KeyError(dataset_id)

    def plan(self, plan_id: str) -> WindowPlanSpec:
        for w in self.windows:
            if w.id == plan_id:
                return w
        raise KeyError(plan_id)

    def plans_for(self, dataset: DatasetSpec) -> tuple[WindowPlanSpec, ...]:
        """Window plans that apply to ``dataset`` (all of them unless it lists some)."""
        if not dataset.plans:
            return self.windows
        return tuple(self.plan(p) for p in dataset.plans)

    def _summary(self) -> str:
        def cut(text: str, n: int = 80) -> str:
            return text if len(text) <= n else text[: n - 1] + "\u2026"

        return (f"{cut(self.path.name, 60)}: {cut(repr(self.report.title), 80)}; "
                f"{len(self.datasets)} dataset(s) ({cut(', '.join(d.id for d in self.datasets))}); "
                f"{len(self.windows)} window plan(s) ({cut(', '.join(w.id for w in self.windows))}); "
                f"{len(self.claims)} claim(s)")

    def __repr__(self) -> str:
        return f"<relspan Spec {self._summary()}>"

    def _repr_html_(self) -> str:
        import html

        rows = "".join(
            f"<tr><td>{html.escape(d.id)}</td><td>{html.escape(d.source)}</td>"
            f"<td>{html.escape(', '.join(d.columns)[:200])}</td>"
            f"<td>{html.escape(', '.join(p.id for p in self.plans_for(d)))}</td></tr>"
            for d in self.datasets[:20])
        more = (f"<p>\u2026 and {len(self.datasets) - 20} more datasets.</p>"
                if len(self.datasets) > 20 else "")
        return (f"<div><p>{html.escape(self._summary())}</p><table><thead><tr><th>dataset</th>"
                f"<th>source</th><th>variables</th><th>plans</th></tr></thead><tbody>{rows}"
                f"</tbody></table>{more}</div>")
