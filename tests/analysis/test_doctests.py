"""The Examples sections of the public analysis functions run and print what they say.

Examples round every printed number, so they hold on any BLAS kernel.
"""

from __future__ import annotations

import doctest
import importlib

import pytest

MODULES = [
    "relspan.analysis.moments",
    "relspan.analysis.elementary",
    "relspan.analysis.equal_noise",
    "relspan.analysis.bounded",
    "relspan.analysis.stability",
    "relspan.analysis.flat",
    "relspan.analysis.identified",
    "relspan.analysis.frisch.orthant",
    "relspan.analysis.frisch.triad",
    "relspan.analysis.frisch.mintrace",
    "relspan.analysis.frisch.analysis",
]

# Each of these must carry a doctested Examples section.
DOCUMENTED = {
    "relspan.analysis.moments": ["moments_of", "merge"],
    "relspan.analysis.elementary": ["elementary_regressions"],
    "relspan.analysis.equal_noise": ["equal_noise"],
    "relspan.analysis.bounded": ["bounded_noise"],
    "relspan.analysis.stability": ["principal_angles", "subspace_stability"],
    "relspan.analysis.flat": ["elementary_flat"],
    "relspan.analysis.identified": ["identified_quantities"],
    "relspan.analysis.frisch.orthant": ["one_orthant"],
    "relspan.analysis.frisch.triad": ["triad"],
    "relspan.analysis.frisch.mintrace": ["minimum_trace"],
    "relspan.analysis.frisch.analysis": ["frisch_analysis"],
}


@pytest.mark.parametrize("name", MODULES)
def test_examples_in_docstrings_pass(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE, verbose=False)
    assert result.failed == 0, f"{result.failed} of {result.attempted} doctest example(s) failed in {name}"


@pytest.mark.parametrize("name, func", [(m, f) for m, fs in DOCUMENTED.items() for f in fs])
def test_public_function_has_an_examples_section(name, func):
    obj = getattr(importlib.import_module(name), func)
    doc = obj.__doc__ or ""
    assert "Examples\n    --------" in doc and ">>> " in doc.split("Examples", 1)[1]
