"""Analysis core: pure numpy/scipy functions, one module per method family.

Nothing here reads files, prints or plots. Inputs are window statistics
(:class:`~relspan.analysis.moments.Moments`) or covariance matrices; outputs
are small frozen result dataclasses.
"""

from relspan.analysis.moments import Moments, MomentTree, merge, merge_all, moments_of

__all__ = ["Moments", "MomentTree", "merge", "merge_all", "moments_of"]

from relspan.analysis.elementary import (DEFAULT_WARN_CONDITION, ElementaryRegressions, choose_reference,
                                         elementary_regressions)
from relspan.analysis.equal_noise import EqualNoise, EqualNoiseCorank, equal_noise
from relspan.analysis.bounded import (BOUND_FORM, BoundedCorank, BoundedNoise, NoiseTolerance, bounded_noise,
                                      tolerance_eps)
from relspan.analysis.stability import (ZERO_SIGN_TOL, CoefficientSwing, CorankSequence, SubspaceStability,
                                        coefficient_swing, corank_sequence, principal_angles,
                                        subspace_stability)
from relspan.analysis.flat import DEFAULT_NEAR_ZERO, ElementaryFlat, elementary_flat
from relspan.analysis.identified import (DEFAULT_ZERO_TOL, CoefficientStatus, Identified,
                                         identified_quantities)

__all__ += [
    "ElementaryRegressions", "elementary_regressions", "choose_reference", "DEFAULT_WARN_CONDITION",
    "EqualNoise", "EqualNoiseCorank", "equal_noise",
    "BoundedNoise", "BoundedCorank", "NoiseTolerance", "bounded_noise", "tolerance_eps", "BOUND_FORM",
    "principal_angles", "SubspaceStability", "subspace_stability", "CoefficientSwing",
    "coefficient_swing", "CorankSequence", "corank_sequence", "ZERO_SIGN_TOL",
    "ElementaryFlat", "elementary_flat", "DEFAULT_NEAR_ZERO",
    "Identified", "CoefficientStatus", "identified_quantities", "DEFAULT_ZERO_TOL",
]

from relspan.analysis.frisch import (CoefficientInterval, CorankCertificate, FailingTriple, FrischCorank,
                                     FrischIdentification, FrischResult, FrischSet, MinimumTrace,
                                     OrthantTest, SolutionSpread, TriadResult, frisch_analysis,
                                     frisch_identification, frisch_max_corank, frisch_q1,
                                     ledermann_corank, minimum_trace, one_orthant, solution_spread,
                                     triad)

__all__ += [
    "FailingTriple", "OrthantTest", "CoefficientInterval", "FrischSet", "TriadResult", "MinimumTrace",
    "CorankCertificate", "FrischCorank", "FrischIdentification", "SolutionSpread", "FrischResult",
    "one_orthant", "frisch_q1", "triad", "minimum_trace", "ledermann_corank", "frisch_max_corank",
    "frisch_identification", "solution_spread", "frisch_analysis",
]

from relspan.analysis.window import WindowAnalysis, WindowOptions, analyse_window
from relspan.analysis.findings import FINDING_KINDS, Finding, dataset_findings
from relspan.analysis.claims import ClaimVerdict, evaluate_claim, evaluate_claims

__all__ += [
    "WindowOptions", "WindowAnalysis", "analyse_window",
    "Finding", "FINDING_KINDS", "dataset_findings",
    "ClaimVerdict", "evaluate_claim", "evaluate_claims",
]
