"""Analysis core: pure numpy/scipy functions, one module (or folder) per method family.

Nothing here reads files, prints or plots. Inputs are window statistics
(:class:`~relspan.analysis.moments.Moments`) or covariance matrices; outputs
are small frozen result dataclasses. This package exports functions and
result types only; constants (defaults, labels) stay in their modules.

Bad arguments raise :class:`~relspan.errors.OptionsError` (a ``ValueError``)
naming the function's own parameter; see :mod:`relspan.errors` for the rule.
"""

from relspan.analysis.moments import Moments, merge, merge_all, moments_of
from relspan.analysis.elementary import ElementaryRegressions, choose_reference, elementary_regressions
from relspan.analysis.equal_noise import EqualNoise, EqualNoiseCorank, equal_noise
from relspan.analysis.bounded import BoundedCorank, BoundedNoise, NoiseTolerance, bounded_noise, tolerance_eps
from relspan.analysis.stability import (CoefficientSwing, CorankSequence, SubspaceStability, coefficient_swing,
                                        corank_sequence, principal_angles, subspace_stability)
from relspan.analysis.flat import ElementaryFlat, elementary_flat
from relspan.analysis.identified import CoefficientStatus, Identified, identified_quantities
from relspan.analysis.frisch import (CoefficientInterval, CorankCertificate, FailingTriple, FrischCorank,
                                     FrischIdentification, FrischResult, FrischSet, MinimumTrace,
                                     OrthantTest, SolutionSpread, TriadResult, frisch_analysis,
                                     frisch_identification, frisch_max_corank, frisch_q1,
                                     ledermann_corank, minimum_trace, one_orthant, solution_spread,
                                     triad)
from relspan.analysis.window import WindowAnalysis, WindowOptions, analyse_window
from relspan.analysis.findings import Finding, dataset_findings
from relspan.analysis.claims import ClaimVerdict, evaluate_claim, evaluate_claims
from relspan.analysis.results import AnalysisRun, DatasetResult, PlanResult

__all__ = [
    # window statistics
    "Moments", "moments_of", "merge", "merge_all",
    # one window, one noise assumption
    "ElementaryRegressions", "elementary_regressions", "choose_reference",
    "EqualNoise", "EqualNoiseCorank", "equal_noise",
    "BoundedNoise", "BoundedCorank", "NoiseTolerance", "bounded_noise", "tolerance_eps",
    "FailingTriple", "OrthantTest", "CoefficientInterval", "FrischSet", "TriadResult", "MinimumTrace",
    "CorankCertificate", "FrischCorank", "FrischIdentification", "SolutionSpread", "FrischResult",
    "one_orthant", "frisch_q1", "triad", "minimum_trace", "ledermann_corank", "frisch_max_corank",
    "frisch_identification", "solution_spread", "frisch_analysis",
    "ElementaryFlat", "elementary_flat",
    "Identified", "CoefficientStatus", "identified_quantities",
    # across windows
    "principal_angles", "SubspaceStability", "subspace_stability", "CoefficientSwing",
    "coefficient_swing", "CorankSequence", "corank_sequence",
    # every assumption for one window; statements; claims
    "WindowOptions", "WindowAnalysis", "analyse_window",
    "Finding", "dataset_findings",
    "ClaimVerdict", "evaluate_claim", "evaluate_claims",
    # the results of a run (built by relspan.run.pipeline)
    "PlanResult", "DatasetResult", "AnalysisRun",
]
