"""The 200 seeded random cases whose diagonal-noise verdicts are recorded in
tests/fixtures/frisch_verdicts.json (the implementation of commit 7d40cc3).

Run ``python tests/analysis/frisch_cases.py --record`` only to record anew
after an intended change of verdicts (and say which in the commit message).
Each case is invented here from its seed: exact factor structures
``L L^T + D`` (a true corank), the same with a small perturbation, and
sample covariances of unstructured data, for n = 3..10.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np

FIXTURE = Path(__file__).resolve().parents[1] / "fixtures" / "frisch_verdicts.json"
EPS = (1e-3, 0.01, 0.05)


def case(i: int) -> tuple[np.ndarray, float, str]:
    """Covariance, tolerance (correlation scale) and kind of case ``i``."""
    rng = np.random.default_rng(10_000 + i)
    n = 3 + i % 8
    kind = ("factor", "perturbed", "sample")[(i // 8) % 3]
    eps = EPS[(i // 24) % 3]
    if kind == "sample":
        x = rng.standard_normal((3 * n + 5, n)) @ rng.uniform(0.5, 2.0, (n, n))
        s = np.cov(x.T)
    else:
        q = int(rng.integers(1, max(2, n - 1)))
        lo = rng.standard_normal((n, n - q))
        s = lo @ lo.T + np.diag(rng.uniform(0.2, 1.0, n))
        if kind == "perturbed":
            e = rng.standard_normal((n, n)) * 0.02
            s = s + e @ e.T
    sd = rng.uniform(0.3, 30.0, n)
    return s * sd[:, None] * sd[None, :], eps, kind


def verdicts(fr) -> dict:
    """What must not change: per-corank statuses and the headline counts."""
    return {
        "status": [c.status for c in fr.corank.certificates],
        "max_certified": fr.corank.max_certified,
        "min_ruled_out": fr.corank.min_ruled_out,
        "spread": fr.spread is not None,
        "spread_distinct_gt1": bool(fr.spread is not None and fr.spread.distinct > 1),
        "max_angle_deg": None if fr.spread is None else fr.spread.max_angle_deg,
        "mintrace_value": fr.corank.min_trace.value,
    }


def record() -> None:
    from relspan.analysis.frisch import frisch_analysis

    out = []
    for i in range(200):
        s, eps, kind = case(i)
        fr = frisch_analysis(s, eps=eps)
        out.append({"case": i, "n": s.shape[0], "kind": kind, "eps": eps, **verdicts(fr)})
    FIXTURE.write_text(json.dumps(out, indent=1, sort_keys=True) + "\n")


if __name__ == "__main__":
    if "--record" in sys.argv:
        record()
