"""The flat of elementary regressions.

Normalised on a reference variable ``r`` (``a[r] = 1``), the n elementary
relations are n points in R^(n-1) (the coordinates other than ``r``). If q
relations hold and the noise is small, every elementary relation lies close to
the relation subspace, whose normalised vectors form a (q-1)-dimensional flat
(a point for q = 1, a line for q = 2); the distance of the points from the
best-fitting flat grows with the noise variance (Frisch 1934).

When some relation has a near-zero coefficient on ``r`` its normalised point
runs off to infinity. The projective form avoids this: scale each relation to
unit length instead (on the correlation scale, so units do not weigh in), fit
the best q-dimensional linear subspace by the singular value decomposition
(Eckart & Young 1936), and measure each relation's residual sine.

References
----------
.. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
       Regression Systems, University Institute of Economics, Oslo, 1934.
.. [2] C. Eckart and G. Young, "The approximation of one matrix by another of
       lower rank", Psychometrika 1(3), 211-218, 1936.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from relspan.analysis._common import fix_signs, orthonormal_rows
from relspan.analysis._export import jsonable
from relspan.analysis.elementary import ElementaryRegressions
from relspan.errors import OptionsError

__all__ = ["ElementaryFlat", "elementary_flat", "elementary_flats", "DEFAULT_NEAR_ZERO"]

#: below this smallest |coefficient of ref| in a unit-length (correlation-scale) relation,
#: the affine form is numerically unsafe (a point is > 1000 unit lengths out) and the projective form is used
DEFAULT_NEAR_ZERO = 1e-3


@dataclass(frozen=True, slots=True, eq=False)
class ElementaryFlat:
    """Elementary relations as points, and the (q-1)-flat (or q-subspace) that best fits them.

    Method: Frisch (1934), *Statistical Confluence Analysis by Means of
    Complete Regression Systems*; best fit by the SVD (Eckart & Young 1936,
    *The approximation of one matrix by another of lower rank*).

    Attributes
    ----------
    names : tuple of str
        Variable names.
    q : int
        Corank whose flat is fitted.
    ref : int
        Index of the reference variable (``a[ref] = 1`` in the affine form).
    form : str
        ``"affine"`` or ``"projective"``: which form ``basis`` and the headline indicator come from.
    form_reason : str
        Why that form was used.
    ref_strength : float
        Smallest ``|u_j[ref]|`` over the unit-length correlation-scale relations ``u_j``.
    point_names : tuple of str
        Names of the coordinates of ``points`` (all variables but ``ref``).
    points : (n, n-1) ndarray
        Row j: elementary relation j normalised on ``ref``, without the ref
        coordinate (may hold inf when ``form`` is projective).
    center : (n-1,) ndarray or None
        Mean of the points (a point of the fitted flat), affine form only.
    directions : (q-1, n-1) ndarray or None
        Orthonormal directions of the fitted flat, affine form only.
    distances : (n,) ndarray or None
        Euclidean distance of each point from the fitted flat (affine form).
    rms_distance : float
        Root mean square of ``distances`` (NaN when the affine form is unavailable):
        the noise indicator of the affine form.
    unit_relations : (n, n) ndarray
        Row j: relation j on the correlation scale scaled to unit length.
    projective_basis : (q, n) ndarray
        Orthonormal rows (original units) of the best q-dimensional subspace of the unit relations.
    residual_sines : (n,) ndarray
        Sine of the angle between each unit relation and that subspace.
    rms_sine : float
        Root mean square of ``residual_sines``: the noise indicator of the projective form.
    basis : (q, n) ndarray
        Orthonormal rows (original units): the relation subspace estimated by the form used.
    """

    names: tuple[str, ...]
    q: int
    ref: int
    form: str
    form_reason: str
    ref_strength: float
    point_names: tuple[str, ...]
    points: np.ndarray
    center: np.ndarray | None
    directions: np.ndarray | None
    distances: np.ndarray | None
    rms_distance: float
    unit_relations: np.ndarray
    projective_basis: np.ndarray
    residual_sines: np.ndarray
    rms_sine: float
    basis: np.ndarray

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return jsonable({"names": list(self.names), "q": self.q, "ref": self.ref, "form": self.form,
                         "form_reason": self.form_reason, "ref_strength": self.ref_strength,
                         "point_names": list(self.point_names), "points": self.points,
                         "center": self.center, "directions": self.directions,
                         "distances": self.distances, "rms_distance": self.rms_distance,
                         "unit_relations": self.unit_relations, "projective_basis": self.projective_basis,
                         "residual_sines": self.residual_sines, "rms_sine": self.rms_sine,
                         "basis": self.basis})

    def to_frame(self) -> pd.DataFrame:
        """One row per elementary relation: its point coordinates, distance and residual sine."""
        df = pd.DataFrame(self.points, index=pd.Index(self.names, name="regression of"),
                          columns=list(self.point_names))
        df["distance"] = np.nan if self.distances is None else self.distances
        df["residual_sine"] = self.residual_sines
        return df


def elementary_flat(er: ElementaryRegressions, *, q: int, ref: int | str,
                    near_zero: float = DEFAULT_NEAR_ZERO) -> ElementaryFlat:
    """Fit the (q-1)-flat through the elementary relations normalised on ``ref``.

    Parameters
    ----------
    er : ElementaryRegressions
        The window's elementary regressions (not singular).
    q : int
        Corank, 1 .. n-1.
    ref : int or str
        Reference variable for the affine form (see
        :func:`~relspan.analysis.elementary.choose_reference`).
    near_zero : float, default 1e-3
        When some unit-length relation has ``|u[ref]|`` below this, the
        projective form is used.

    Returns
    -------
    ElementaryFlat

    References
    ----------
    .. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
           Regression Systems, 1934.
    .. [2] C. Eckart and G. Young, Psychometrika 1(3), 211-218, 1936.

    Examples
    --------
    >>> import numpy as np
    >>> from relspan.analysis import elementary_regressions
    >>> S = np.array([[4.0, 2.0, 1.0], [2.0, 3.0, 1.0], [1.0, 1.0, 2.0]])
    >>> er = elementary_regressions(S, names=["a", "b", "c"])
    >>> fl = elementary_flat(er, q=2, ref="a")
    >>> fl.form, fl.point_names, np.round(fl.points[0], 3).tolist()
    ('affine', ('b', 'c'), [-0.6, -0.2])
    >>> round(fl.rms_distance, 3)
    0.51
    """
    return elementary_flats([er], q=q, ref=ref, near_zero=near_zero)[0]


def elementary_flats(ers: Sequence[ElementaryRegressions], *, q: int, ref: int | str,
                     near_zero: float = DEFAULT_NEAR_ZERO) -> list[ElementaryFlat]:
    """:func:`elementary_flat` of many windows at once (one per item of ``ers``, in order).

    The windows' decompositions are batched (one SVD call for the stack of each
    shape); each window's numbers are those :func:`elementary_flat` gives it alone
    (the same LAPACK calls and reductions, matrix by matrix). Every item must have
    the same variables; each is checked as :func:`elementary_flat` checks one.
    """
    ers = list(ers)
    if not ers:
        return []
    n = ers[0].n
    for er in ers:
        if er.singular:
            raise OptionsError("the window's covariance is singular, so its elementary regressions are not "
                               "unique and have no flat.", key="er",
                               fix="Use er.exact_relations (the relations that hold exactly) instead.")
        if er.n != n:
            raise OptionsError(f"every window must have the same {n} variables; one has {er.n}.", key="ers",
                               fix="Pass the windows of one dataset.")
    if isinstance(q, bool) or not isinstance(q, (int, np.integer)) or not 1 <= q <= n - 1:
        raise OptionsError(f"q must be a corank from 1 to {n - 1}; got {q!r}.", key="q",
                           fix=f"Pass q between 1 and {n - 1}.")
    q = int(q)
    refs = [er.index(ref) for er in ers]
    out: list[ElementaryFlat | None] = [None] * len(ers)
    for r in sorted(set(refs)):
        group = [i for i, ri in enumerate(refs) if ri == r]
        for start in range(0, len(group), _BATCH):       # a few MB of stacked arrays at a time
            part = group[start:start + _BATCH]
            for i, flat in zip(part, _flats_at(r, [ers[i] for i in part], q, near_zero)):
                out[i] = flat
    return out


#: windows decomposed together by :func:`elementary_flats` (their numbers do not depend on it)
_BATCH = 512


def _flats_at(r: int, ers: list[ElementaryRegressions], q: int, near_zero: float) -> list[ElementaryFlat]:
    """The flats of windows normalised on the same variable ``r`` (the body of :func:`elementary_flats`)."""
    n = ers[0].n
    others = [k for k in range(n) if k != r]
    relations = np.stack([er.relations for er in ers])            # (W, n, n)
    std = np.stack([er.std for er in ers])                          # (W, n)

    # projective form on the correlation scale
    a_corr = relations * std[:, None, :]
    u = a_corr / np.linalg.norm(a_corr, axis=2, keepdims=True)
    _, _, vt = np.linalg.svd(u)
    vq = vt[:, :q]
    resid = u - (u @ np.swapaxes(vq, 1, 2)) @ vq
    sines = np.linalg.norm(resid, axis=2)
    strength = np.min(np.abs(u[:, :, r]), axis=1)

    with np.errstate(divide="ignore", invalid="ignore"):
        norm = relations / relations[:, :, [r]]                     # ElementaryRegressions.normalised
    points = norm[:, :, others]
    finite = np.all(np.isfinite(points), axis=(1, 2))
    affine = [i for i in range(len(ers)) if strength[i] >= near_zero and finite[i]]
    center = dev = wt = None
    if affine:
        center = points[affine].mean(axis=1)
        dev = points[affine] - center[:, None, :]
        if q > 1:
            _, _, wt = np.linalg.svd(dev, full_matrices=False)
    at = {i: k for k, i in enumerate(affine)}

    out = []
    for i, er in enumerate(ers):
        u_i, s_i, v_i = u[i].copy(), sines[i].copy(), vq[i]
        rms_sine = float(np.sqrt(np.mean(s_i**2)))
        proj_basis = orthonormal_rows(v_i / er.std[None, :])
        st = float(strength[i])
        p_i = points[i].copy()
        c_i = directions = distances = None
        rms = float("nan")
        if i in at:
            k = at[i]
            c_i, d_i = center[k].copy(), dev[k]
            if q > 1:
                directions = fix_signs(wt[k, :q - 1])
                off = d_i - (d_i @ directions.T) @ directions
            else:
                directions = np.zeros((0, n - 1))
                off = d_i
            distances = np.linalg.norm(off, axis=1)
            rms = float(np.sqrt(np.mean(distances**2)))
            lift = np.zeros((q, n))
            lift[0, others] = c_i
            lift[0, r] = 1.0
            for j in range(q - 1):
                lift[j + 1, others] = directions[j]
            basis = orthonormal_rows(lift)
            form = "affine"
            reason = (f"Every elementary relation has a clear coefficient on {er.names[r]} "
                      f"(smallest unit-length share {st:.3g}), so the relations normalised on it "
                      "are finite points and the affine flat is used.")
        else:
            basis = proj_basis
            form = "projective"
            reason = (f"Some elementary relation has a near-zero coefficient on {er.names[r]} (smallest "
                      f"unit-length share {st:.3g} < {near_zero:g}); normalising on it would send "
                      "that point towards infinity, so the projective form (unit-length relations, best "
                      "subspace) is used.")
        out.append(ElementaryFlat(names=er.names, q=q, ref=r, form=form, form_reason=reason, ref_strength=st,
                                  point_names=tuple(er.names[k] for k in others), points=p_i, center=c_i,
                                  directions=directions, distances=distances, rms_distance=rms,
                                  unit_relations=u_i, projective_basis=proj_basis, residual_sines=s_i,
                                  rms_sine=rms_sine, basis=basis))
    return out
