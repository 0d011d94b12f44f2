"""relspan.precision: one table of published digits, applied once at the output boundary."""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest

from relspan.precision import (CLOSED_FORM, ITERATIVE, canonical_document, canonical_frame, precision_for,
                               quantum, round_array, round_number)


class TestRounding:
    def test_a_number_keeps_its_significant_digits(self):
        assert round_number(0.123456789012345, 9) == 0.123456789
        assert round_number(-123456.789012, 4) == -123500.0
        assert round_number(9.99996, 5) == 10.0  # rounds up across a power of ten

    def test_negative_zero_and_non_finite_values(self):
        assert math.copysign(1.0, round_number(-0.0, 9)) == 1.0
        assert math.copysign(1.0, round_array([-1e-30, 1.0], 9)[0]) == 1.0
        assert math.isnan(round_number(float("nan"), 9))

    def test_an_array_shares_one_quantum_so_round_off_around_zero_becomes_zero(self):
        # an eigenvector's tiny entries are accurate relative to its norm, not to themselves
        v = [0.7071067811865476, -0.7071067811865475, 3.1e-17]
        assert round_array(v, 9) == [0.707106781, -0.707106781, 0.0]
        assert round_array([[1.0, 2e-12], [None, 3.0]], 9) == [[1.0, 0.0], [None, 3.0]]

    def test_quantum_is_the_last_kept_place_of_the_largest_magnitude(self):
        assert quantum(2.5, 4) == pytest.approx(1e-3)
        assert quantum(0.0, 4) == 0.0


class TestWhichPrecision:
    def test_diagonal_noise_results_and_statement_numbers_are_iterative(self):
        assert precision_for(("datasets", "full_sample", "diagonal", "corank")) is ITERATIVE
        assert precision_for(("datasets", "full_sample", "frisch_interval", "lower")) is ITERATIVE
        assert precision_for(("claims", "numbers")) is ITERATIVE
        assert precision_for(("findings", "numbers")) is ITERATIVE
        assert precision_for(("plans", "stability", "pairwise_deg"), {"assumption": "diagonal"}) is ITERATIVE

    def test_closed_forms_keep_more_digits(self):
        assert precision_for(("datasets", "full_sample", "equal", "eigenvalues")) is CLOSED_FORM
        assert precision_for(("plans", "stability", "pairwise_deg"), {"assumption": "equal"}) is CLOSED_FORM
        assert CLOSED_FORM.digits > ITERATIVE.digits


class TestCanonicalDocument:
    def test_a_solver_residual_is_rounded_on_its_siblings_scale(self):
        doc = {"diagonal": {"certificates": [{"e_norm": 7.27e-11, "eigenvalues": [7.27e-11, 0.57, 2.67]}]}}
        out = canonical_document(doc)
        assert out["diagonal"]["certificates"][0] == {"e_norm": 0.0, "eigenvalues": [0.0, 0.57, 2.67]}

    def test_canonical_document_is_idempotent_and_leaves_ints_text_and_none(self):
        doc = {"equal": {"eigenvalues": [1.23456789012, 3e-17], "corank": 2, "name": "x", "gap": None},
               "diagonal": {"value": 0.07355914656644585}}
        once = canonical_document(doc)
        assert canonical_document(once) == once
        assert once["equal"]["corank"] == 2 and once["equal"]["name"] == "x" and once["equal"]["gap"] is None
        assert once["diagonal"]["value"] == 0.07356

    def test_kernel_sized_noise_does_not_change_the_published_numbers(self):
        # noise of the size measured between two OpenBLAS kernels (relspan.precision.MEASURED):
        # 3e-13 relative for closed forms, 1.5e-6 for the iterative solve
        rng = np.random.default_rng(7)
        closed = rng.normal(size=(200, 4)).tolist()
        iterative = rng.normal(size=(200, 4)).tolist()
        a = {"equal": {"basis": closed}, "diagonal": {"relations": iterative}}
        b = {"equal": {"basis": (np.array(closed) * (1 + 3e-13 * rng.uniform(-1, 1, (200, 4)))).tolist()},
             "diagonal": {"relations": (np.array(iterative) * (1 + 1.5e-6 * rng.uniform(-1, 1, (200, 4)))).tolist()}}
        ca, cb = canonical_document(a), canonical_document(b)
        same = sum(x == y for u, v in zip(ca["equal"]["basis"], cb["equal"]["basis"]) for x, y in zip(u, v))
        assert same == 800
        same_it = sum(x == y for u, v in zip(ca["diagonal"]["relations"], cb["diagonal"]["relations"])
                      for x, y in zip(u, v))
        assert same_it >= 790  # a boundary crossing is possible, rare: at most 1 unit in the last digit


def test_canonical_frame_rounds_columns_and_diagonal_rows_with_their_own_digits():
    df = pd.DataFrame({"assumption": ["equal", "diagonal"], "coef[a]": [0.123456789123, 0.123456789123],
                       "corank": [1, 2]})
    out = canonical_frame(df)
    assert out["coef[a]"].tolist() == [0.123456789, 0.1235]
    assert out["corank"].tolist() == [1, 2]


@pytest.mark.slow
def test_built_demo_publishes_rounded_numbers_and_keeps_the_machine_out_of_the_checksums(tmp_path):
    import warnings

    from pathlib import Path

    from relspan.api import build

    spec = Path(__file__).resolve().parents[1] / "specs" / "demo.yaml"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        build(spec, out=tmp_path / "site", jobs=1, use_cache=False)
    site = tmp_path / "site"
    doc = json.loads((site / "data" / "results.json").read_text(encoding="utf-8"))
    assert canonical_document(doc["datasets"]) == doc["datasets"]
    assert doc["precision"]["classes"]["iterative"]["digits"] == ITERATIVE.digits
    env = doc["environment"]
    assert {"python", "os", "architecture", "distributions", "blas"} <= set(env)
    assert all("kernel" not in b for b in env["blas"]) and "cpu_model" not in env
    machine = json.loads((site / "build-machine.json").read_text(encoding="utf-8"))
    assert machine["blas"] and all("kernel" in b for b in machine["blas"]) and "cpu_model" in machine
    assert "pytest" in machine["installed"]  # every installed distribution, test tools included
    assert "build-machine.json" not in (site / "SHA256SUMS").read_text(encoding="utf-8")
    pins = (site / "data" / "constraints.txt").read_text(encoding="utf-8")
    assert f"numpy=={np.__version__}" in pins and "pytest" not in pins
    page = (site / "reproduce.html").read_text(encoding="utf-8")
    assert "relspan verify SITE" in page and "build-machine.json" in page and "within" in page
