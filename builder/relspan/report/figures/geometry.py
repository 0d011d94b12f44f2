"""The drawing plane of an elementary-regression map (display geometry only).

A map of n > 3 variables is drawn in a 2-D projection of the n - 1
coefficients, chosen for legibility; the angle between two fitted flats is
described beside the gallery. Nothing here is an analysis result: no
statement of the site's findings rests on these numbers, which is why this
is the one module of report/ that uses numpy.linalg (tests/report/test_report_imports.py).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

__all__ = ["fix_sign", "norm", "independent_rows", "main_direction", "residuals", "top_direction", "Frame",
           "frame_for", "line_angle_deg", "normalised_set", "distances"]


def norm(v: np.ndarray) -> float:
    """Euclidean length of a vector."""
    return float(np.linalg.norm(v))


def independent_rows(fd: np.ndarray) -> bool:
    """True when the rows of ``fd`` (directions of a flat) are linearly independent."""
    sv = np.linalg.svd(fd, compute_uv=False)
    return not sv[-1] <= 1e-10 * max(sv[0], 1e-300)


def main_direction(points: np.ndarray, flat_point: np.ndarray, flat_dirs: np.ndarray) -> np.ndarray | None:
    """Unit direction inside the flat along which the points spread most (None for a point flat)."""
    if flat_dirs.shape[0] == 0:
        return None
    qf, _ = np.linalg.qr(flat_dirs.T)
    c = (points - flat_point) @ qf
    c = c - c.mean(axis=0)
    if flat_dirs.shape[0] == 1 or not np.any(c):
        m = qf[:, 0]
    else:
        _, _, vt = np.linalg.svd(c, full_matrices=False)
        m = qf @ vt[0]
    return fix_sign(m / np.linalg.norm(m))


def residuals(points: np.ndarray, flat_point: np.ndarray, flat_dirs: np.ndarray) -> np.ndarray:
    """Points minus their orthogonal projections on the flat."""
    p = points - flat_point
    if flat_dirs.shape[0] == 0:
        return p
    qf, _ = np.linalg.qr(flat_dirs.T)
    return p - (p @ qf) @ qf.T


def distances(points: np.ndarray, flat_point: np.ndarray, flat_dirs: np.ndarray) -> np.ndarray:
    """Euclidean distance of each point from the flat (display geometry of a drawn set)."""
    return np.linalg.norm(residuals(points, flat_point, flat_dirs), axis=1)


def fix_sign(v: np.ndarray) -> np.ndarray:
    """Deterministic sign: the entry of largest magnitude is positive."""
    i = int(np.argmax(np.abs(v)))
    return v if v[i] >= 0 else -v


def top_direction(rows: np.ndarray, orth: list[np.ndarray]) -> tuple[np.ndarray, float]:
    """Unit vector of largest spread of ``rows`` (about 0) orthogonal to ``orth``,
    and the share of the squared norm it carries."""
    d = rows.shape[1]
    basis = np.eye(d)
    if orth:
        o = np.array(orth).T
        qo, _ = np.linalg.qr(o)
        rows = rows - (rows @ qo) @ qo.T
        basis = basis - qo @ qo.T
    total = float(np.sum(rows ** 2))
    if total <= 1e-300:
        # no spread: any unit vector orthogonal to orth (deterministic: first usable basis vector)
        for j in range(d):
            v = basis[:, j]
            if np.linalg.norm(v) > 1e-8:
                return fix_sign(v / np.linalg.norm(v)), 0.0
    _, s, vt = np.linalg.svd(rows, full_matrices=False)
    return fix_sign(vt[0]), float(s[0] ** 2 / total)


@dataclass(frozen=True, slots=True)
class Frame:
    """The plane a map is drawn in: natural coefficients (d = 2) or a projection."""

    origin: np.ndarray
    axes: np.ndarray | None  # (2, d) rows e1, e2, or None for natural coordinates
    share: float  # share of squared distances carried by the vertical axis (projections)

    def coords(self, x: np.ndarray) -> np.ndarray:
        x = np.atleast_2d(x)
        return x.copy() if self.axes is None else (x - self.origin) @ self.axes.T

    def direction(self, v: np.ndarray) -> np.ndarray:
        return v.copy() if self.axes is None else self.axes @ v


def frame_for(maps: Sequence) -> Frame:
    """One common drawing plane for one or more maps of the same variables."""
    d = maps[0].points.shape[1]
    origin = np.mean([m.flat_point for m in maps], axis=0)
    if d == 2:
        return Frame(origin, None, 1.0)
    mains = [m.main_direction() for m in maps]
    mains = [v for v in mains if v is not None]
    if mains:
        # direction closest to all windows' main directions (top eigenvector of the summed projectors)
        acc = sum(np.outer(v, v) for v in mains)
        w, vecs = np.linalg.eigh(acc)
        e1 = fix_sign(vecs[:, -1])
        e2, share = top_direction(np.vstack([m.residuals() for m in maps]), [e1])
    else:
        spread = np.vstack([m.points - m.flat_point for m in maps])
        e1, _ = top_direction(spread, [])
        e2, _ = top_direction(spread, [e1])
        total = float(np.sum(spread ** 2))
        share = float(np.sum((spread @ np.vstack([e1, e2]).T) ** 2) / total) if total > 0 else 1.0
    return Frame(origin, np.vstack([e1, e2]), share)


def line_angle_deg(u: np.ndarray, v: np.ndarray) -> float:
    """Angle between two lines (directions up to sign), in degrees, via atan2 (accurate near 0)."""
    u = u / np.linalg.norm(u)
    v = v / np.linalg.norm(v)
    c = abs(float(u @ v))
    s = float(np.linalg.norm(v - (u @ v) * u))
    return math.degrees(math.atan2(s, c))


def normalised_set(basis: np.ndarray, ref: int) -> tuple[np.ndarray, np.ndarray] | None:
    """The relations spanned by ``basis`` normalised on variable ``ref`` (``a[ref] = 1``), as the
    flat of their other coefficients: ``(point, directions)`` with ``q - 1`` orthonormal
    directions (none for q = 1), in the coordinates of the elementary-regression map.

    ``basis`` is (q, n) in the data's units. Returns None when no relation of the span gives
    ``ref`` a coefficient clearly away from 0 (the set then lies at infinity on the map).
    """
    b = np.atleast_2d(np.asarray(basis, dtype=float))
    q, n = b.shape
    br = b[:, ref]
    if not np.all(np.isfinite(b)) or float(br @ br) <= 1e-24 * float(np.sum(b * b)):
        return None
    point = (br / float(br @ br)) @ b  # the member of the span with a[ref] = 1 nearest the origin
    keep = [k for k in range(n) if k != ref]
    if q == 1:
        return point[keep], np.zeros((0, n - 1))
    _, _, vt = np.linalg.svd(br[None, :])
    dirs = (vt[1:] @ b)[:, keep]  # members of the span with a[ref] = 0
    qd, _ = np.linalg.qr(dirs.T)
    return point[keep], np.array([fix_sign(v) for v in qd.T[: q - 1]])
