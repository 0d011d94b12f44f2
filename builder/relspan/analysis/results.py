"""Result types of an analysis run: one plan, one dataset, the whole spec.

Every result is built complete, once, by the driver (:mod:`relspan.run.pipeline`):
the numbers of every window, the cross-window summaries, the findings (the one
interpreter, :mod:`relspan.analysis.findings`) and the claim verdicts
(:mod:`relspan.analysis.claims`). The report reads these and never recomputes
an analysis quantity.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from relspan.analysis._common import jsonable
from relspan.analysis.findings.records import DatasetSummary, Finding
from relspan.analysis.inference import ResamplingOptions
from relspan.analysis.stability import CorankSequence
from relspan.analysis.window import WindowAnalysis
from relspan.errors import RelspanWarning
from relspan.spec.model import DatasetSpec, Spec, WindowPlanSpec

__all__ = ["PlanResult", "DatasetResult", "AnalysisRun", "jsonable"]


@dataclass(frozen=True, slots=True, eq=False)
class PlanResult:
    """One window plan applied to one dataset.

    Attributes
    ----------
    plan : WindowPlanSpec
    windows : tuple
        The data layer's window descriptions (label, rows, first/last time).
    analyses : tuple of WindowAnalysis
        One per window, same order.
    stability : mapping assumption -> SubspaceStability
        Each window at its own corank, compared with its neighbours, the full
        sample (and every other window in small plans), a change judged
        against resampling (:func:`relspan.analysis.stability.compare_windows`);
        assumptions with a single relation basis only (not diagonal noise).
    swings : mapping assumption -> CoefficientSwing
        Normalised coefficients of the reference relation across windows.
    coranks : CorankSequence
        The corank per window under each assumption.
    flats : tuple of mapping int -> ElementaryFlat
        Per window, the flat of its elementary regressions for each examined
        corank (:func:`relspan.analysis.flat.elementary_flat`; empty when the
        window's covariance is singular). The maps draw these.
    """

    plan: WindowPlanSpec
    windows: tuple
    analyses: tuple[WindowAnalysis, ...]
    stability: dict
    swings: dict
    coranks: CorankSequence
    flats: tuple

    @property
    def labels(self) -> tuple[str, ...]:
        return tuple(a.label for a in self.analyses)

    def __repr__(self) -> str:
        return (f"<PlanResult {self.plan.id!r} ({self.plan.kind}): {len(self.analyses)} window(s), "
                f"{len(self.stability)} stability summary(ies)>")


@dataclass(frozen=True, slots=True, eq=False)
class DatasetResult:
    """Everything relspan found for one dataset.

    Attributes
    ----------
    spec : DatasetSpec
    prepared : object
        :class:`relspan.data.prepare.PreparedDataset` (summary, overview
        series, windows and their moments, input checksum).
    full : WindowAnalysis
        The full sample under every assumption (the reference for stability).
    plans : tuple of PlanResult
    examined : tuple of int
        The coranks examined (from the spec, or chosen from the evidence).
    examined_from : str
        How ``examined`` was chosen, in words.
    findings : tuple of Finding
        The findings (:func:`relspan.analysis.findings.dataset_findings`).
    summary : DatasetSummary
        The plain summary and the statements of each page section
        (:func:`relspan.analysis.findings.dataset_summary`).
    identified : mapping int -> object
        :class:`relspan.analysis.identified.Identified` per examined corank.
    flat : mapping int -> object
        :class:`relspan.analysis.flat.ElementaryFlat` per examined corank.
    threshold_deg : float
        The spec's ``checks.max_angle_deg`` (degrees): the angle a claim or a
        reader calls large; changes are decided by resampling, not by it.
    cache_key : str
        Content key of everything this result depends on ("" when not cached).
    breaks : mapping assumption -> DatasetBreak
        The scan for one break of the relation subspace at an unknown date
        (:func:`relspan.run.cross_window.dataset_breaks`), or why it did not run.
    sampling_spread : mapping assumption -> SamplingSpread
        The bootstrap spread of the full sample's relation subspace (equal and
        bounded noise), shown beside the bounded-noise population bound.
    resampling : ResamplingOptions
        How windows were resampled (``resamples`` 0: no intervals were computed).
    """

    spec: DatasetSpec
    prepared: object
    full: WindowAnalysis
    plans: tuple[PlanResult, ...]
    examined: tuple[int, ...]
    examined_from: str
    findings: tuple[Finding, ...]
    summary: DatasetSummary
    identified: dict
    flat: dict
    threshold_deg: float
    cache_key: str = ""
    trends: object = None
    influence: object = None
    breaks: dict = field(default_factory=dict)
    sampling_spread: dict = field(default_factory=dict)
    resampling: ResamplingOptions = ResamplingOptions()

    @property
    def names(self) -> tuple[str, ...]:
        return self.full.names

    @property
    def labels(self) -> tuple[str, ...]:
        return tuple(v.label for v in self.spec.variables)

    def plan(self, plan_id: str) -> PlanResult:
        for p in self.plans:
            if p.plan.id == plan_id:
                return p
        raise KeyError(plan_id)

    def __repr__(self) -> str:
        coranks = ", ".join(f"{a} {'?' if q is None else q}" for a, q in self.full.coranks.items())
        names = ", ".join(self.names)
        names = names if len(names) <= 80 else names[:79] + "\u2026"
        return (f"<DatasetResult {self.spec.id!r}: {len(self.names)} variables ({names}); "
                f"full-sample corank {coranks}; {len(self.plans)} plan(s), "
                f"{sum(len(p.analyses) for p in self.plans)} window(s); {len(self.findings)} finding(s)>")


@dataclass(frozen=True, slots=True, eq=False)
class AnalysisRun:
    """The result of analysing a whole spec (before any page is written).

    Attributes
    ----------
    spec : Spec
    datasets : tuple of DatasetResult
    verdicts : tuple
        :class:`relspan.analysis.claims.ClaimVerdict`, in the spec's order.
    warnings : tuple of RelspanWarning
        Numerical warnings raised during the analysis, typed, each with its
        dataset and plan recorded (``str(w)`` is the line users see).
    environment : mapping str -> str
        Versions of Python, relspan and the numerical libraries.
    cache_hits, cache_misses : int
        Datasets served from / written to the result cache.
    """

    spec: Spec
    datasets: tuple[DatasetResult, ...]
    verdicts: tuple
    warnings: tuple[RelspanWarning, ...]
    environment: dict
    cache_hits: int = 0
    cache_misses: int = 0

    @property
    def all_claims_hold(self) -> bool:
        return all(v.holds for v in self.verdicts)

    def dataset(self, dataset_id: str) -> DatasetResult:
        for d in self.datasets:
            if d.spec.id == dataset_id:
                return d
        raise KeyError(dataset_id)

    def __repr__(self) -> str:
        n_fail = sum(not v.holds for v in self.verdicts)
        ids = ", ".join(d.spec.id for d in self.datasets)
        ids = ids if len(ids) <= 80 else ids[:79] + "\u2026"
        return (f"<AnalysisRun: {len(self.datasets)} dataset(s) ({ids}); "
                f"{len(self.verdicts) - n_fail} of {len(self.verdicts)} claim(s) hold; "
                f"{len(self.warnings)} warning(s)>")
