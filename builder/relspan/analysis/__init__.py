"""Analysis core: pure numpy/scipy functions, one module (or folder) per method family.

Nothing here reads files, prints or plots. Inputs are window statistics
(:class:`~relspan.analysis.moments.Moments`) or covariance matrices; outputs
are small frozen result dataclasses. This package exports functions and
result types only; constants (defaults, labels) stay in their modules.

Bad arguments raise :class:`~relspan.errors.OptionsError` (a ``ValueError``)
naming the function's own parameter; see :mod:`relspan.errors` for the rule.
"""

# Imported on first use (PEP 562): importing one module of the package (the data pass needs
# moments and _dd only) does not import every method family and SciPy with it.
# ``equal_noise`` names both a submodule and its function: imported here, so the package's
# attribute is the function whichever module imports the submodule first (as before)
from relspan.analysis.equal_noise import equal_noise  # noqa: E402

_WHERE = {
    **dict.fromkeys(('Moments', 'merge', 'merge_all', 'moments_of'), 'relspan.analysis.moments'),
    **dict.fromkeys(('ElementaryRegressions', 'choose_reference', 'elementary_regressions'), 'relspan.analysis.elementary'),
    **dict.fromkeys(('EqualNoise', 'EqualNoiseCorank'), 'relspan.analysis.equal_noise'),
    **dict.fromkeys(('BoundedCorank', 'BoundedNoise', 'NoiseTolerance', 'bounded_noise', 'tolerance_eps'), 'relspan.analysis.bounded'),
    **dict.fromkeys(('CoefficientSwing', 'CorankSequence', 'SubspaceStability', 'coefficient_swing', 'corank_sequence', 'principal_angles', 'subspace_stability'), 'relspan.analysis.stability'),
    **dict.fromkeys(('ElementaryFlat', 'elementary_flat'), 'relspan.analysis.flat'),
    **dict.fromkeys(('CoefficientStatus', 'Identified', 'identified_quantities'), 'relspan.analysis.identified'),
    **dict.fromkeys(('CoefficientInterval', 'CorankCertificate', 'FailingTriple', 'FrischCorank', 'FrischIdentification', 'FrischResult', 'FrischSet', 'MinimumTrace', 'OrthantTest', 'SolutionSpread', 'TriadResult', 'frisch_analysis', 'frisch_identification', 'frisch_max_corank', 'frisch_q1', 'ledermann_corank', 'minimum_trace', 'one_orthant', 'solution_spread', 'triad'), 'relspan.analysis.frisch'),
    **dict.fromkeys(('WindowAnalysis', 'WindowOptions', 'analyse_window'), 'relspan.analysis.window'),
    **dict.fromkeys(('Finding', 'dataset_findings'), 'relspan.analysis.findings'),
    **dict.fromkeys(('ClaimVerdict', 'evaluate_claim', 'evaluate_claims'), 'relspan.analysis.claims'),
    **dict.fromkeys(('AnalysisRun', 'DatasetResult', 'PlanResult'), 'relspan.analysis.results'),
}


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


def __getattr__(name: str):
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(__all__))
