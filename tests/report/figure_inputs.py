"""Small synthetic inputs for every figure function (invented numbers, fixed seeds).

Shared by tests/report/test_figures.py and by the subprocess that checks the
bytes do not depend on PYTHONHASHSEED. ``build_all()`` returns name -> FigureResult.
"""

from __future__ import annotations

import numpy as np

from relspan.report import (
    ElementaryMapData, coefficient_swing, corank_evidence, corank_timeline, data_overview,
    elementary_map, frisch_intervals, subspace_stability, window_gallery,
)

NAMES3 = ("cargo", "trucks", "rail")
NAMES5 = ("cargo", "trucks", "rail", "fuel", "wages")


def elementary_points(cov: np.ndarray, ref: int) -> np.ndarray:
    """Row j: row j of inv(cov) scaled so entry ``ref`` is 1, with entry ``ref`` dropped."""
    p = np.linalg.inv(cov)
    return np.delete(p / p[:, [ref]], ref, axis=1)


def fit_flat(points: np.ndarray, q: int):
    """Least-squares (q-1)-flat through the points: (point, directions, distances)."""
    c = points.mean(axis=0)
    if q == 1:
        return c, np.zeros((0, points.shape[1])), np.linalg.norm(points - c, axis=1)
    _, _, vt = np.linalg.svd(points - c)
    dirs = vt[: q - 1]
    r = (points - c) - ((points - c) @ dirs.T) @ dirs
    return c, dirs, np.linalg.norm(r, axis=1)


def two_relation_data(seed: int, n: int, rows: int = 300, noise: float = 0.1) -> np.ndarray:
    """Rows of n variables driven by n - 2 factors plus noise: two relations hold."""
    rng = np.random.default_rng(seed)
    f = rng.normal(size=(rows, n - 2))
    load = rng.normal(size=(n - 2, n))
    return f @ load + noise * rng.normal(size=(rows, n))


def map_data(x: np.ndarray, names, q: int = 2, simplex: bool = False) -> ElementaryMapData:
    pts = elementary_points(np.cov(x.T), 0)
    fp, fd, d = fit_flat(pts, q)
    return ElementaryMapData(pts, tuple(names), names[0], fp, fd, d, pts if simplex else None)


LABELS6 = [f"{1990 + 3 * k}-{1999 + 3 * k}" for k in range(6)]
ANGLES6 = np.array([
    [0.0, 1.2, 2.5, 0.8, 3.1, 1.9],
    [1.2, 0.0, 1.4, 2.2, 0.6, 2.7],
    [2.5, 1.4, 0.0, 1.1, 2.0, 12.5],
    [0.8, 2.2, 1.1, 0.0, 1.6, 0.9],
    [3.1, 0.6, 2.0, 1.6, 0.0, 1.3],
    [1.9, 2.7, 12.5, 0.9, 1.3, 0.0],
])
TO_FULL6 = np.array([1.1, 0.7, 3.2, 0.5, 1.8, 2.4])
COEFS6 = {"equal": np.array([0.41, 0.30, -0.12, -0.20, 0.05, 0.33]),
          "elementary": np.array([0.52, 0.44, 0.21, 0.02, 0.18, 0.40]),
          "diagonal": np.array([0.45, np.nan, 0.10, -0.05, 0.09, 0.35])}
EIGS = np.array([2.1, 0.84, 0.0031, 0.0012])
CORANKS6 = {"elementary": [2, 2, 2, 2, 2, 2], "equal": [2, 2, 1, 1, 2, 2],
            "diagonal": [2, None, 2, None, 1, 2]}


def overview_inputs():
    times = np.arange("2000-01", "2012-01", dtype="datetime64[M]")
    rng = np.random.default_rng(5)
    t = times.size
    series = {"Cargo handled": 50 + np.cumsum(rng.normal(size=t)),
              "Truck trips": 20 + np.cumsum(rng.normal(size=t))}
    series["Truck trips"][10] = np.nan
    windows = {"full": [(times[0], times[-1], "full sample")],
               "rolling": [(times[12 * k], times[12 * k + 47], f"w{k + 1}") for k in range(9)]}
    return times, series, windows


def build_all() -> dict:
    x3 = two_relation_data(1, 3)
    x5 = two_relation_data(2, 5)
    one = np.array([[1.0, 0.6, 0.5], [0.6, 1.0, 0.4], [0.5, 0.4, 1.0]])
    p1 = elementary_points(one, 0)
    fp1, fd1, d1 = fit_flat(p1, 1)
    gal = [map_data(two_relation_data(3, 3, rows=600)[60 * k: 60 * k + 240], NAMES3) for k in range(6)]
    out = {
        "overview": data_overview(*overview_inputs()),
        "map3": elementary_map(**_kw(map_data(x3, NAMES3))),
        "map3q1": elementary_map(p1, names=NAMES3, ref="cargo", flat_point=fp1, flat_dirs=fd1,
                                 distances=d1, simplex=p1),
        "map5": elementary_map(**_kw(map_data(x5, NAMES5))),
        "gallery": window_gallery(gal, LABELS6, reference=map_data(two_relation_data(3, 3, rows=600), NAMES3)),
        "stability": subspace_stability(ANGLES6, LABELS6, TO_FULL6, threshold_deg=10),
        "swing": coefficient_swing(LABELS6, COEFS6, TO_FULL6, 10, "coefficient on rail (cargo = 1)"),
        "evidence": corank_evidence(EIGS, {"5% tolerance": 0.05, "strict": 0.002}),
        "timeline": corank_timeline(LABELS6, CORANKS6),
        "frisch": frisch_intervals(["trucks", "rail", "fuel"], [0.2, -np.inf, -0.31], [0.9, 1.4, np.inf],
                                   point=[0.5, 0.8, 0.1], normalised_on="cargo",
                                   unbounded_reason="the elementary regressions do not lie in one orthant"),
    }
    return out


def _kw(m: ElementaryMapData) -> dict:
    return dict(points=m.points, names=m.names, ref=m.ref, flat_point=m.flat_point,
                flat_dirs=m.flat_dirs, distances=m.distances, simplex=m.simplex)


if __name__ == "__main__":  # used by the PYTHONHASHSEED test: print one hash per rendering
    import hashlib

    from relspan.report import render_figure, table_csv

    for key, res in build_all().items():
        for fmt in ("svg", "png"):
            print(key, fmt, hashlib.sha256(render_figure(res, fmt)).hexdigest())
        print(key, "csv", hashlib.sha256(table_csv(res)).hexdigest())
