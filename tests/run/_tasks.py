"""Top-level task functions for the executor tests.

Worker processes (process pool, Dask) start fresh interpreters and import
these by module name, so they cannot live inside the test functions.
"""

from __future__ import annotations

import os

import numpy as np


def square(x: int) -> int:
    return x * x


def window_statistics(seed: int) -> tuple[float, ...]:
    """A float-heavy, deterministic task: elementary regressions of a seeded window."""
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((200, 4)) @ rng.standard_normal((4, 4))
    p = np.linalg.inv(np.cov(x, rowvar=False))
    coef = -p[0, 1:] / p[0, 0]
    return tuple(float(v) for v in np.concatenate([coef, np.linalg.eigvalsh(p)]))


def fail_on_seven(x: int) -> int:
    if x == 7:
        raise ValueError(f"task {x} failed on purpose")
    return x


def process_id(_: object) -> int:
    return os.getpid()
