"""Simulated datasets of known structure for the stability and break tests (seeded; truth recorded).

Three variables with one exact relation plus equal noise (the design of
``tests/analysis/inference_sims.one_relation_cov``): turning the relation by
``angle`` degrees at a known row makes a break of known size and date.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np

from tests.analysis.inference_sims import one_relation_cov, rows

HALVES_PLAN = "- {id: quarters, kind: rolling, width: 75, step: 75}"


def quarters(t: int, start: int = 1960) -> list[str]:
    return [f"{start + k // 4}Q{k % 4 + 1}" for k in range(t)]


def break_rows(seed: int, *, t: int, angle: float, at: float = 0.5, noise: float = 0.3) -> np.ndarray:
    """``t`` rows; the relation turns by ``angle`` degrees after row ``round(at * t)`` (0: no break)."""
    rng = np.random.default_rng(seed)
    cut = int(round(at * t))
    before, _ = one_relation_cov(0.0, noise)
    after, _ = one_relation_cov(angle, noise)
    return np.vstack([rows(rng, before, cut), rows(rng, after, t - cut)]) + 10.0


def write_case(folder: Path, x: np.ndarray, *, plans: str, assumptions: str = "[equal, bounded]",
               tolerance: float = 0.05, claims: str = "") -> Path:
    """A CSV with a quarter column and a spec analysing it; returns the spec's path."""
    folder.mkdir(parents=True, exist_ok=True)
    lines = ["quarter,x1,x2,x3"] + [f"{q},{a:.10g},{b:.10g},{c:.10g}"
                                    for q, (a, b, c) in zip(quarters(len(x)), x)]
    (folder / "case.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    spec = textwrap.dedent(f"""\
        relspan: 1
        report: {{title: "Simulated case"}}
        datasets:
          - id: case
            source: case.csv
            time: {{column: quarter, format: quarter}}
            variables:
              - {{column: x1}}
              - {{column: x2}}
              - {{column: x3}}
        windows:
        {textwrap.indent(plans, "  ")}
        checks:
          assumptions: {assumptions}
          tolerance: {{relative: {tolerance}}}
        """) + claims
    path = folder / "spec.yaml"
    path.write_text(spec, encoding="utf-8")
    return path


def analyse(path: Path):
    """The run of a spec, serially, without cache or progress bars."""
    import warnings

    from relspan.run.pipeline import run_analysis
    from relspan.spec import load_spec

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return run_analysis(load_spec(path), jobs=1, use_cache=False, write_cache=False, progress=False)
