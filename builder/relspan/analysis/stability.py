"""Stability across windows: principal angles between relation subspaces, coefficient swings, coranks.

A relation subspace can stay put to hundredths of a degree while a single
normalised coefficient inside it changes sign between windows (when q >= 2,
any vector of the subspace is a relation). So stability is judged on
subspaces by principal angles, and coefficient swings are reported beside it,
never instead of it.

References
----------
.. [1] Å. Björck and G. H. Golub, "Numerical methods for computing angles
       between linear subspaces", Mathematics of Computation 27(123),
       579-594, 1973.
.. [2] A. V. Knyazev and M. E. Argentati, "Principal angles between subspaces
       in an A-based scalar product: algorithms and perturbation estimates",
       SIAM Journal on Scientific Computing 23(6), 2008-2040, 2002.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np
import pandas as pd

from relspan.analysis._common import EPS, check_names_len
from relspan.analysis._export import jsonable
from relspan.analysis.intervals import extreme_cos_sin, largest_angle_stack, orth_columns_stack
from relspan.errors import OptionsError

__all__ = ["principal_angles", "SubspaceStability", "subspace_stability", "compare_windows",
           "StabilityStream", "direct_rotation_stack", "null_angle_stack", "SamplingSpread", "sampling_spread", "TEST_LEVEL", "PAIRWISE_CAP", "CoefficientSwing",
           "coefficient_swing", "CorankSequence", "corank_sequence", "ZERO_SIGN_TOL"]

#: a coefficient within this distance of 0 has no sign (it neither starts nor ends a sign change)
ZERO_SIGN_TOL = 1e-12


def _orth_columns(basis: np.ndarray, what: str) -> np.ndarray:
    """Orthonormal columns (n, k) spanning the columns of ``basis`` (n, k), rank checked."""
    if basis.shape[1] == 0:
        return basis
    q, r = np.linalg.qr(basis)
    dr = np.abs(np.diag(r))
    if dr.size and (dr.min() <= max(basis.shape) * EPS * dr.max() or dr.max() == 0):
        raise OptionsError(f"{what} does not have full rank: its {basis.shape[1]} basis vectors are "
                           "linearly dependent.", key=what,
                           fix="Pass independent basis vectors (e.g. the rows of a relation basis).")
    return q


def principal_angles(a, b, *, layout: str = "rows") -> np.ndarray:
    """Principal angles (degrees, ascending) between the subspaces spanned by two bases.

    Parameters
    ----------
    a, b : array_like
        Bases of the two subspaces of R^n. With ``layout="rows"`` (default,
        relspan's convention for relation bases) each row is a basis vector:
        shapes (p, n) and (r, n); with ``layout="columns"`` shapes (n, p) and (n, r).
    layout : {"rows", "columns"}

    Returns
    -------
    (min(p, r),) ndarray
        Angles in degrees, ascending. Sines at rounding level (below
        ``4 n eps``) are reported as exactly 0.

    Notes
    -----
    Orthonormalise both bases by QR (``Q_a``, ``Q_b``, with ``dim b <= dim a``
    after swapping). Cosines are the singular values of ``Q_a^T Q_b``, sines
    those of ``(I - Q_a Q_a^T) Q_b``; the k-th angle is
    ``atan2(sin_k, cos_k)`` with sines ascending and cosines descending. The
    cosine alone (``arccos``) cannot resolve angles below about 1e-8 rad,
    the sine alone loses accuracy near 90 degrees; the pair keeps both.

    References
    ----------
    .. [1] Å. Björck and G. H. Golub, Math. Comp. 27(123), 579-594, 1973.
    .. [2] A. V. Knyazev and M. E. Argentati, SIAM J. Sci. Comput. 23(6), 2008-2040, 2002.

    Examples
    --------
    >>> import numpy as np
    >>> a = np.array([[1.0, 0.0, 0.0], [0.0, 1.0, 0.0]])   # the x-y plane (rows span it)
    >>> b = np.array([[1.0, 0.0, 0.0], [0.0, 1.0, 1.0]])
    >>> np.round(principal_angles(a, b), 6).tolist()
    [0.0, 45.0]
    """
    if layout not in ("rows", "columns"):
        raise OptionsError(f"layout must be 'rows' or 'columns'; got {layout!r}.", key="layout",
                           fix="Use layout='rows' when each row is a basis vector.")
    mats = []
    for name, m in (("a", a), ("b", b)):
        x = np.asarray(m, dtype=float)
        if x.ndim == 1:
            x = x[None, :] if layout == "rows" else x[:, None]
        if x.ndim != 2 or not np.all(np.isfinite(x)):
            raise OptionsError(f"basis {name} must be a finite 2-D array; got shape {x.shape}.", key=name,
                               fix="Pass a (q, n) array of basis rows.")
        mats.append(x.T if layout == "rows" else x)
    ca, cb = mats
    if ca.shape[0] != cb.shape[0]:
        raise OptionsError(f"the bases live in spaces of different dimension ({ca.shape[0]} and "
                           f"{cb.shape[0]}).", key="b", fix="Compare subspaces over the same variables.")
    n = ca.shape[0]
    qa = _orth_columns(ca, "a")
    qb = _orth_columns(cb, "b")
    if qa.shape[1] < qb.shape[1]:
        qa, qb = qb, qa
    k = qb.shape[1]
    if k == 0:
        return np.zeros(0)
    cos = np.linalg.svd(qa.T @ qb, compute_uv=False)  # descending
    resid = qb - qa @ (qa.T @ qb)
    sin = np.sort(np.linalg.svd(resid, compute_uv=False))  # ascending
    sin = np.where(sin <= 4.0 * n * EPS, 0.0, sin)
    cos = np.clip(cos[:k], 0.0, 1.0)
    ang = np.degrees(np.arctan2(sin[:k], cos))
    return np.sort(ang)


#: decisions (a change between windows, a break) are taken at this quantile of the resampled
#: null: a 5% family-wise level; intervals use the spec's own level
TEST_LEVEL = 0.95
#: below this many comparable windows every pair is compared (a w x w matrix); above it only
#: neighbours in sequence and each window against the reference, so cost grows linearly
PAIRWISE_CAP = 40
#: comparisons whose resampled null draws are held at once (bounds memory)
_CHUNK = 256


def direct_rotation_stack(bases_from, bases_to) -> np.ndarray:
    """Batched :func:`relspan.analysis.intervals.direct_rotation`: ``(P, n, n)`` rotations.

    ``R_p`` turns ``span(bases_from[p])`` onto ``span(bases_to[p])`` in the
    planes of their principal vector pairs only (Davis & Kahan 1970) and is the
    identity elsewhere. ``bases_from``, ``bases_to``: ``(P, q, n)``.
    """
    a = np.asarray(bases_from, dtype=float)
    b = np.asarray(bases_to, dtype=float)
    p, q, n = a.shape
    qa, _ = np.linalg.qr(np.swapaxes(a, 1, 2))
    qb, _ = np.linalg.qr(np.swapaxes(b, 1, 2))
    u, _, vt = np.linalg.svd(np.swapaxes(qa, 1, 2) @ qb)
    v_from = qa @ u
    u_to = qb @ np.swapaxes(vt, 1, 2)
    r = np.broadcast_to(np.eye(n), (p, n, n)).copy()
    for i in range(q):
        e1 = v_from[:, :, i]
        ut = u_to[:, :, i]
        c = np.einsum("pi,pi->p", ut, e1)
        w = ut - c[:, None] * e1
        sn = np.linalg.norm(w, axis=1)
        ok = sn > 4.0 * n * EPS
        e2 = np.where(ok[:, None], w / np.where(ok, sn, 1.0)[:, None], 0.0)
        c = np.where(ok, np.clip(c, -1.0, 1.0), 1.0)
        sn = np.where(ok, sn, 0.0)
        o11 = e1[:, :, None] * e1[:, None, :]
        o22 = e2[:, :, None] * e2[:, None, :]
        o21 = e2[:, :, None] * e1[:, None, :]
        r = r + (c - 1.0)[:, None, None] * (o11 + o22) + sn[:, None, None] * (o21 - np.swapaxes(o21, 1, 2))
    return r


def _largest_angles(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Largest principal angle (degrees) between paired ``(P, q, n)`` bases; one relation by a dot product.

    For q = 1 the angle is ``atan2(|b - (a.b) a|, |a.b|)`` on unit vectors (the
    sine and cosine pair of Björck & Golub, without a batched QR and SVD);
    otherwise :func:`relspan.analysis.intervals.largest_angle_stack`.
    """
    if a.shape[1] != 1:
        return largest_angle_stack(a, b)
    u = a[:, 0, :] / np.linalg.norm(a[:, 0, :], axis=1, keepdims=True)
    v = b[:, 0, :] / np.linalg.norm(b[:, 0, :], axis=1, keepdims=True)
    c = np.einsum("pi,pi->p", u, v)
    sn = np.linalg.norm(v - c[:, None] * u, axis=1)
    sn = np.where(sn <= 4.0 * u.shape[1] * EPS, 0.0, sn)
    return np.degrees(np.arctan2(sn, np.abs(c)))


def _largest_angles_to_fixed(draws: np.ndarray, fixed: np.ndarray) -> np.ndarray:
    """:func:`_largest_angles` of ``draws`` ``(P, B, q, n)`` against ``fixed[p]`` ``(P, q, n)``, ``(P, B)``.

    The arithmetic of :func:`relspan.analysis.intervals.largest_angle_stack` on
    the broadcast pairs, with the fixed basis orthonormalised once per
    comparison instead of once per resample (the same orthonormalisation of the same matrix,
    copied: the same bits).
    """
    p, nb, q, n = draws.shape
    a = draws.reshape(p * nb, q, n)
    if q == 1:
        return _largest_angles(a, np.broadcast_to(fixed[:, None], draws.shape).reshape(p * nb, q, n)
                               ).reshape(p, nb)
    qa = orth_columns_stack(np.swapaxes(a, 1, 2))
    qb = np.repeat(orth_columns_stack(np.swapaxes(fixed, 1, 2)), nb, axis=0)
    m = np.swapaxes(qa, 1, 2) @ qb
    cos, sin = extreme_cos_sin(m, qb - qa @ m)
    sin = np.where(sin <= 4.0 * n * EPS, 0.0, sin)
    return np.degrees(np.arctan2(sin, np.clip(cos, 0.0, 1.0))).reshape(p, nb)


def null_angle_stack(est_a, draws_a, est_b, draws_b) -> np.ndarray:
    """Angles sampling alone produces between two windows that share one subspace, batched.

    For each comparison ``p`` the draws of window B are carried onto window A's
    estimate by the direct rotation from B's estimate to A's, and paired with
    A's draws (the rule of :func:`relspan.analysis.intervals.angle_change_test`).
    ``draws_b`` may be None: B is then treated as fixed (a reference estimated
    from many more rows) and the null is the angle between A's draws and A's
    estimate.

    Parameters
    ----------
    est_a, est_b : (P, q, n) arrays
    draws_a, draws_b : (P, B, q, n) arrays

    Returns
    -------
    (P, B) ndarray of degrees
    """
    ea = np.asarray(est_a, dtype=float)
    da = np.asarray(draws_a, dtype=float)
    p, nb, q, n = da.shape
    if draws_b is None:
        return _largest_angles_to_fixed(da, ea)
    else:
        rot = direct_rotation_stack(est_b, ea)
        moved = np.asarray(draws_b, dtype=float) @ np.swapaxes(rot, 1, 2)[:, None]
    return _largest_angles(da.reshape(p * nb, q, n), np.reshape(moved, (p * nb, q, n))).reshape(p, nb)


@dataclass(frozen=True, slots=True, eq=False)
class SubspaceStability:
    """Whether the relation subspace of one noise assumption changes across the windows of a plan.

    Each window is taken at its own corank. Two windows are compared when both
    have a determined corank >= 1 and the same one (windows whose corank is
    undetermined, or zero, cannot be compared and are no evidence of change;
    a different determined corank is a change in the number of relations,
    judged in :class:`CorankSequence`, not an angle). Compared: neighbours in
    sequence (each comparable window with the previous comparable one), every
    window with the reference (the full sample, at its own corank), and every
    pair when at most :data:`PAIRWISE_CAP` windows are comparable.

    Rule (one sentence in :attr:`rule`): a comparison's null draws are the
    angles sampling alone produces between two estimates of one subspace
    (:func:`null_angle_stack`: paired resamples, B's carried onto A's
    estimate by the direct rotation; the reference is treated as fixed). Each
    comparison is standardised by the ``level`` quantile of its own null, and
    the family of comparisons is judged by the max-T rule (Westfall & Young
    1993, *Resampling-Based Multiple Testing*): a change is declared where the
    standardised angle exceeds the ``level`` quantile, over resamples, of the
    largest standardised null draw of the whole family. So a plan of many
    windows raises a false alarm with probability about ``1 - level``, not
    once per comparison.

    Attributes
    ----------
    assumption : str
    labels : tuple of str
    dims : tuple of (int or None)
        Each window's own corank (None: undetermined at the tolerance).
    reference_dim : int or None
        The reference's corank (None: undetermined or no reference).
    neighbour_pairs : (m, 2) int ndarray
        Window indices of the neighbour comparisons, in sequence.
    neighbour_deg, neighbour_threshold_deg : (m,) ndarray
        Largest principal angle of each neighbour comparison, and the
        family-adjusted angle it had to exceed to count as a change.
    neighbour_change : (m,) bool ndarray
    to_reference_deg, reference_threshold_deg : (w,) ndarray
        Per window, the angle to the reference and its threshold (NaN where
        the window cannot be compared with the reference).
    reference_change : (w,) bool ndarray
    pairwise_deg : (w, w) ndarray or None
        Largest angle between every comparable pair (NaN where not comparable);
        None above :data:`PAIRWISE_CAP` comparable windows.
    pairwise_change : (w, w) bool ndarray or None
    pairwise_threshold_deg : (w, w) ndarray or None
        The family-adjusted threshold of each pair (NaN where not comparable).
    max_to_reference_deg, max_neighbour_deg, max_pairwise_deg : float or None
        Largest observed angle of each kind (None when there is none).
    family_critical : float or None
        The max-T critical ratio (None without comparisons).
    compared : int
        Comparisons made.
    not_comparable : tuple of str
        Labels of windows that could not be compared, each with why.
    level : float
    resamples : int
    stable : bool or None
        True: no comparison shows a change; False: at least one does; None:
        cannot be judged (no two windows, or no window and the reference, comparable).
    rule : str
    verdict : str
        One sentence: the verdict with the assumption and the rule it rests on.
    """

    assumption: str
    labels: tuple[str, ...]
    dims: tuple[int | None, ...]
    reference_dim: int | None
    neighbour_pairs: np.ndarray
    neighbour_deg: np.ndarray
    neighbour_threshold_deg: np.ndarray
    neighbour_change: np.ndarray
    to_reference_deg: np.ndarray
    reference_threshold_deg: np.ndarray
    reference_change: np.ndarray
    pairwise_deg: np.ndarray | None
    pairwise_change: np.ndarray | None
    pairwise_threshold_deg: np.ndarray | None
    max_to_reference_deg: float | None
    max_neighbour_deg: float | None
    max_pairwise_deg: float | None
    family_critical: float | None
    compared: int
    not_comparable: tuple[str, ...]
    level: float
    resamples: int
    stable: bool | None
    rule: str
    verdict: str

    @property
    def status(self) -> str:
        """``"steady"``, ``"changes"`` or ``"cannot be judged"``."""
        return "cannot be judged" if self.stable is None else ("steady" if self.stable else "changes")

    @property
    def changes_at(self) -> tuple[tuple[str, str], ...]:
        """(before, after) labels of the neighbour comparisons that show a change."""
        return tuple((self.labels[i], self.labels[j])
                     for (i, j), c in zip(self.neighbour_pairs.tolist(), self.neighbour_change) if c)

    def to_dict(self) -> dict:
        """JSON-ready dict (see docs/results.md)."""
        return jsonable({
            "assumption": self.assumption, "labels": list(self.labels), "dims": list(self.dims),
            "reference_dim": self.reference_dim,
            "neighbours": [{"before": self.labels[i], "after": self.labels[j], "angle_deg": a,
                            "threshold_deg": t, "change": bool(c)}
                           for (i, j), a, t, c in zip(self.neighbour_pairs.tolist(), self.neighbour_deg,
                                                      self.neighbour_threshold_deg, self.neighbour_change)],
            "to_reference_deg": self.to_reference_deg, "reference_threshold_deg": self.reference_threshold_deg,
            "reference_change": self.reference_change, "pairwise_deg": self.pairwise_deg,
            "pairwise_change": self.pairwise_change, "pairwise_threshold_deg": self.pairwise_threshold_deg,
            "max_to_reference_deg": self.max_to_reference_deg,
            "max_neighbour_deg": self.max_neighbour_deg, "max_pairwise_deg": self.max_pairwise_deg,
            "family_critical": self.family_critical, "compared": self.compared,
            "not_comparable": list(self.not_comparable), "level": self.level, "resamples": self.resamples,
            "status": self.status, "rule": self.rule, "verdict": self.verdict})

    def to_frame(self) -> pd.DataFrame:
        """One row per window: own corank, angle to the reference, its threshold, change."""
        return pd.DataFrame({"corank": pd.array(list(self.dims), dtype="Int64"),
                             "to_reference_deg": self.to_reference_deg,
                             "reference_threshold_deg": self.reference_threshold_deg,
                             "reference_change": self.reference_change},
                            index=pd.Index(self.labels, name="window"))


@dataclass(frozen=True, slots=True)
class SamplingSpread:
    """How far one window's relation subspace moves under resampling: the bootstrap spread of its angle.

    Attributes
    ----------
    assumption : str
    q : int
    angle_deg : float
        The ``level`` quantile of the largest principal angle between the
        estimate and its resampled subspaces (degrees).
    level : float
    resamples : int
    rule : str
    """

    assumption: str
    q: int
    angle_deg: float
    level: float
    resamples: int
    rule: str

    def to_dict(self) -> dict:
        return jsonable({"assumption": self.assumption, "q": self.q, "angle_deg": self.angle_deg,
                         "level": self.level, "resamples": self.resamples, "rule": self.rule})


def sampling_spread(basis, draws, *, assumption: str, level: float) -> SamplingSpread:
    """:class:`SamplingSpread` of one estimate from its resampled bases ``(B, q, n)``.

    Examples
    --------
    >>> import numpy as np
    >>> a = np.array([[1.0, 0.0, 0.0]])
    >>> d = np.tile(a, (99, 1, 1)); d[:, 0, 1] = np.linspace(-0.1, 0.1, 99)
    >>> round(sampling_spread(a, d, assumption="equal", level=0.9).angle_deg, 1)
    5.2
    """
    b = np.atleast_2d(np.asarray(basis, dtype=float))
    d = np.asarray(draws, dtype=float)
    ang = largest_angle_stack(b, d)
    val = float(np.quantile(ang, level))
    rule = (f"the {level:.0%} quantile of the largest principal angle between the estimate and its "
            f"{d.shape[0]} bootstrap resamples")
    return SamplingSpread(assumption=assumption, q=int(b.shape[0]), angle_deg=val, level=float(level),
                          resamples=int(d.shape[0]), rule=rule)


def _as_basis(b) -> np.ndarray | None:
    if b is None:
        return None
    m = np.atleast_2d(np.asarray(b, dtype=float))
    return m if m.shape[0] >= 1 else None


def _max_or_none(x: np.ndarray) -> float | None:
    x = np.asarray(x, dtype=float)
    x = x[np.isfinite(x)]
    return float(x.max()) if x.size else None


def compare_windows(bases: Sequence, *, labels: Sequence[str], resampled, reference=None,
                    coranks: Sequence[int | None] | None = None, assumption: str = "equal",
                    level: float = TEST_LEVEL, pairwise_cap: int = PAIRWISE_CAP,
                    chunk: int | None = None) -> SubspaceStability:
    """Compare the relation subspaces of a plan's windows against their sampling spread.

    Parameters
    ----------
    bases : sequence of ((q_i, n) array_like or None)
        Each window's relation basis at its own corank (None: no basis, e.g.
        the corank is undetermined or zero).
    labels : sequence of str
    resampled : callable
        ``resampled(i)`` returns window ``i``'s resampled bases ``(B, q_i, n)``
        (same B for every window). Called for comparable windows only, in
        window order, at most twice per window above the pairwise cap.
    reference : (q, n) array_like, optional
        The full sample's basis at its own corank (treated as fixed).
    coranks : sequence of (int or None), optional
        Each window's corank, to say why a window without a basis is not
        compared (default: the basis dimension, None without a basis).
    assumption : str
        Recorded on the result and named in its sentences.
    level : float
        Quantile of the family's null for a change (0.95: 5% family-wise).
    pairwise_cap : int
        Compare every pair when at most this many windows are comparable.
    chunk : int, optional
        Comparisons per batched null computation (memory bound; default :data:`_CHUNK`).

    Returns
    -------
    SubspaceStability

    References
    ----------
    .. [1] Å. Björck and G. H. Golub, Math. Comp. 27(123), 579-594, 1973.
    .. [2] C. Davis and W. M. Kahan, SIAM J. Numer. Anal. 7(1), 1-46, 1970.
    .. [3] P. H. Westfall and S. S. Young, Resampling-Based Multiple Testing,
           Wiley, 1993.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> a = np.array([[1.0, 0.0, 0.0]])
    >>> b = np.array([[np.cos(0.5), np.sin(0.5), 0.0]])   # about 29 degrees away
    >>> est = [a, a, b]
    >>> def draws(i):  # each window's estimate jitters by about 1 degree
    ...     d = np.tile(est[i], (199, 1, 1)) + rng.normal(scale=0.02, size=(199, 1, 3))
    ...     return d / np.linalg.norm(d, axis=2, keepdims=True)
    >>> st = compare_windows(est, labels=["w1", "w2", "w3"], resampled=draws)
    >>> st.stable, st.changes_at
    (False, (('w2', 'w3'),))
    """
    mats = [_as_basis(b) for b in bases]
    w = len(mats)
    labels_t = check_names_len(labels, w, key="labels")
    dims_given = list(coranks) if coranks is not None else [None if m is None else m.shape[0] for m in mats]
    if len(dims_given) != w:
        raise OptionsError(f"coranks has {len(dims_given)} entries for {w} windows.", key="coranks",
                           fix="Give one corank (or None) per window.")
    stream = StabilityStream(w, reference=reference, assumption=assumption, level=level,
                             pairwise_cap=pairwise_cap, chunk=chunk)
    for i in range(w):
        stream.add(mats[i], dims_given[i], lambda i=i: resampled(i), label=labels_t[i])
    return stream.finish()


class StabilityStream:
    """:func:`compare_windows` fed one window at a time, in window order, holding few windows' draws.

    A plan's windows arrive as their tasks finish; each brings its relation
    basis, its corank and its resampled bases (an array, or a callable that
    gives them when first needed). Up to ``pairwise_cap`` comparable windows
    every pair is compared, so their draws are held until :meth:`finish`; past
    it only neighbours and each window against the reference are compared
    (:class:`SubspaceStability`), and these need only the previous comparable
    window's draws: comparisons are processed ``chunk`` at a time as they
    become complete (the same batches, in the same order, as when every
    window is given at once), then the draws no later comparison needs are let
    go. What is kept between windows is each comparison's null quantile and
    the family's running maximum over resamples, so memory does not grow
    with the plan beyond one basis and a few numbers per window.

    Parameters
    ----------
    windows : int
        Windows of the plan (all of them are :meth:`add`-ed before :meth:`finish`).
    reference, assumption, level, pairwise_cap, chunk
        As :func:`compare_windows`.
    """

    __slots__ = ("w", "ref", "ref_dim", "assumption", "level", "cap", "chunk", "mats", "dims", "labels",
                 "usable", "draws", "streaming", "pending", "last", "q_level", "fam", "resamples")

    def __init__(self, windows: int, *, reference=None, assumption: str = "equal", level: float = TEST_LEVEL,
                 pairwise_cap: int = PAIRWISE_CAP, chunk: int | None = None) -> None:
        if not 0.5 <= float(level) < 1.0:
            raise OptionsError(f"level must be in [0.5, 1); got {level!r}.", key="level",
                               fix="Use 0.95 (a change declared at the 5% level).")
        self.w = int(windows)
        self.ref = _as_basis(reference)
        self.ref_dim = None if self.ref is None else int(self.ref.shape[0])
        self.assumption, self.level = assumption, float(level)
        self.cap, self.chunk = int(pairwise_cap), int(_CHUNK if chunk is None else chunk)
        self.mats: list = []
        self.dims: list = []
        self.labels: list[str] = []
        self.usable: list[int] = []
        self.draws: dict = {}           # window -> its draws (or the callable giving them), while needed
        self.streaming = False          # past the pairwise cap: neighbours and reference only
        self.pending: list[tuple[int, int]] = []   # comparisons not yet processed (streaming)
        self.last: int | None = None    # the last comparable window emitted (streaming)
        self.q_level: dict = {}         # comparison -> its null's level quantile
        self.fam: np.ndarray | None = None
        self.resamples = 0

    def add(self, basis, dim: int | None, draws, *, label: str) -> None:
        """The next window: its basis ``(q, n)`` (or None), corank, resampled bases ``(B, q, n)``, label.

        ``draws`` may be None for a window that cannot be compared (no basis).
        """
        i = len(self.mats)
        if i >= self.w:
            raise ValueError(f"the plan has {self.w} windows; window {label!r} is one too many")
        m = _as_basis(basis)
        d = None if dim is None else int(dim)
        self.mats.append(m)
        self.dims.append(d)
        self.labels.append(str(label))
        if m is None or d in (None, 0) or m.shape[0] != d:
            return
        self.usable.append(i)
        self.draws[i] = draws
        if self.streaming:
            self._emit(i)
        elif len(self.usable) > self.cap:
            self.streaming = True
            for x in self.usable:       # replay the windows held so far, in order
                self._emit(x)

    def _emit(self, b: int) -> None:
        """Window ``b``'s comparisons (with the previous comparable window, with the reference)."""
        prev, self.last = self.last, b
        if prev is not None and self.dims[prev] == self.dims[b]:
            self.pending.append((prev, b))
        if self.ref_dim is not None and self.dims[b] == self.ref_dim and self.w >= 2:
            self.pending.append((b, -1))
        if len(self.pending) >= self.chunk:
            part, self.pending = self.pending[:self.chunk], self.pending[self.chunk:]
            self._process(part)
            keep = {x for c in self.pending for x in c if x >= 0}
            keep.add(b)
            for x in [x for x in self.draws if x <= b and x not in keep]:
                del self.draws[x]

    def _fetch(self, x: int) -> np.ndarray:
        d = self.draws[x]
        if not isinstance(d, np.ndarray):
            d = np.asarray(d() if callable(d) else d, dtype=float)
            if d.ndim != 3 or d.shape[1:] != self.mats[x].shape:
                raise OptionsError(f"resampled bases of window {self.labels[x]!r} have shape {d.shape}; "
                                   f"expected (B, {self.mats[x].shape[0]}, {self.mats[x].shape[1]}).",
                                   key="resampled", fix="Resample at the window's own corank.")
            self.draws[x] = d
        return d

    def _process(self, part: list[tuple[int, int]]) -> None:
        """Null draws of a batch of comparisons: their level quantiles, and the family's running maximum."""
        held = {x: self._fetch(x) for x in sorted({x for c in part for x in c if x >= 0})}
        groups: dict[tuple[int, bool], list[tuple[int, int]]] = {}
        for c in part:
            groups.setdefault((self.dims[c[0]], c[1] < 0), []).append(c)
        for (_, to_ref), cs in groups.items():
            nb = min(held[x].shape[0] for c in cs for x in c if x >= 0)
            ea = np.stack([self.mats[c[0]] for c in cs])
            da = np.stack([held[c[0]][:nb] for c in cs])
            if to_ref:
                null = null_angle_stack(ea, da, None, None)
            else:
                eb = np.stack([self.mats[c[1]] for c in cs])
                db = np.stack([held[c[1]][:nb] for c in cs])
                null = null_angle_stack(ea, da, eb, db)
            ql = np.quantile(null, self.level, axis=1)
            for c, v in zip(cs, ql):
                self.q_level[c] = v
            ratio = null / np.maximum(ql, 1e-12)[:, None]
            mx = ratio.max(axis=0)
            if self.fam is None:
                self.fam = mx
            else:
                m = min(self.fam.size, mx.size)
                self.fam = np.maximum(self.fam[:m], mx[:m])
            self.resamples = nb if self.resamples == 0 else min(self.resamples, nb)

    def finish(self) -> SubspaceStability:
        """The plan's :class:`SubspaceStability` once every window has been added."""
        if len(self.mats) != self.w:
            raise ValueError(f"the plan has {self.w} windows; {len(self.mats)} were added")
        w, mats, dims, usable, level = self.w, self.mats, tuple(self.dims), self.usable, self.level
        labels_t = tuple(self.labels)
        ref, ref_dim = self.ref, self.ref_dim
        not_comp = []
        usable_set = set(usable)
        for i in range(w):
            if i in usable_set:
                continue
            why = ("its corank is undetermined at the tolerance" if dims[i] is None else
                   "no relation holds in it" if dims[i] == 0 else "it has no relation basis")
            not_comp.append(f"{labels_t[i]}: {why}")
        # the comparisons: (i, j) with j = -1 for the reference
        neigh = [(a, b) for a, b in zip(usable, usable[1:]) if dims[a] == dims[b]]
        pairwise = not self.streaming
        pairs = ([(a, b) for k, a in enumerate(usable) for b in usable[k + 1:] if dims[a] == dims[b]]
                 if pairwise else list(neigh))
        # a single window is the whole plan: comparing it with the full sample compares nothing
        refc = [(i, -1) for i in usable if ref_dim is not None and dims[i] == ref_dim and w >= 2]
        comps = pairs + refc
        if pairwise:   # every draw is held: the comparisons in window order, chunk by chunk
            order = sorted(comps, key=lambda c: (max(c), c[0]))
            for s0 in range(0, len(order), self.chunk):
                self._process(order[s0:s0 + self.chunk])
        elif self.pending:
            part, self.pending = self.pending, []
            self._process(part)
        self.draws.clear()
        # observed angles: one batched call per dimension
        obs = np.full(len(comps), np.nan)
        by_q: dict[int, list[int]] = {}
        for k, (i, _) in enumerate(comps):
            by_q.setdefault(dims[i], []).append(k)
        for q, ks in by_q.items():
            a = np.stack([mats[comps[k][0]] for k in ks])
            b = np.stack([ref if comps[k][1] < 0 else mats[comps[k][1]] for k in ks])
            obs[ks] = _largest_angles(a, b)
        q_level = np.array([self.q_level.get(c, np.nan) for c in comps], dtype=float)
        fam, resamples, assumption = self.fam, self.resamples, self.assumption
        crit = float(np.quantile(fam, level)) if fam is not None else None
        thr = q_level * crit if crit is not None else np.full(len(comps), np.nan)
        change = obs > thr if crit is not None else np.zeros(len(comps), dtype=bool)
        index = {c: k for k, c in enumerate(comps)}
        npairs = np.array(neigh, dtype=int).reshape(-1, 2)
        n_deg = np.array([obs[index[c]] for c in neigh], dtype=float)
        n_thr = np.array([thr[index[c]] for c in neigh], dtype=float)
        n_chg = np.array([bool(change[index[c]]) for c in neigh], dtype=bool)
        r_deg = np.full(w, np.nan)
        r_thr = np.full(w, np.nan)
        r_chg = np.zeros(w, dtype=bool)
        for (i, _), k in ((c, index[c]) for c in refc):
            r_deg[i], r_thr[i], r_chg[i] = obs[k], thr[k], change[k]
        p_deg = p_chg = p_thr = None
        if pairwise:
            p_deg = np.full((w, w), np.nan)
            p_thr = np.full((w, w), np.nan)
            p_chg = np.zeros((w, w), dtype=bool)
            for i in usable:
                p_deg[i, i] = 0.0
            for (i, j) in pairs:
                k = index[(i, j)]
                p_deg[i, j] = p_deg[j, i] = obs[k]
                p_thr[i, j] = p_thr[j, i] = thr[k]
                p_chg[i, j] = p_chg[j, i] = change[k]
        stable = None if not comps else not bool(change.any())
        name = _assumption_name(assumption)
        lvl = f"{1 - float(level):.0%}"
        rule = (f"Each window is taken at its own corank under {name}; two subspaces count as different only "
                f"where their largest principal angle exceeds what resampling produces when nothing changes "
                f"(paired bootstrap resamples, {resamples} per window, carried onto one common subspace; the "
                f"full sample treated as fixed), judged for all {len(comps)} comparisons together at the {lvl} "
                f"level (max-T rule, Westfall & Young 1993).")
        what = ("every pair of windows and each window against the full sample" if pairwise else
                "neighbouring windows and each window against the full sample")
        if stable is None:
            verdict = (f"Cannot be judged under {name}: " + ("a single window has nothing to be compared with."
                       if w < 2 else "no two windows (nor a window and the full sample) have the same determined "
                       "number of relations, so no relation subspaces can be compared."))
        elif stable:
            verdict = (f"No change under {name}: comparing {what} ({len(comps)} comparisons), no angle exceeds "
                       f"what sampling alone produces at the {lvl} level; largest angle "
                       f"{float(np.nanmax(obs)):.3g} degrees.")
        else:
            k = int(np.nanargmax(np.where(change, obs / np.maximum(thr, 1e-12), -np.inf)))
            i, j = comps[k]
            other = "the full sample" if j < 0 else labels_t[j]
            verdict = (f"Changes under {name}: {int(change.sum())} of {len(comps)} comparisons exceed what "
                       f"sampling alone produces at the {lvl} level; e.g. {labels_t[i]} against {other}: "
                       f"{obs[k]:.3g} degrees, above the threshold of {thr[k]:.3g} degrees.")
        return SubspaceStability(
            assumption=assumption, labels=labels_t, dims=dims, reference_dim=ref_dim, neighbour_pairs=npairs,
            neighbour_deg=n_deg, neighbour_threshold_deg=n_thr, neighbour_change=n_chg, to_reference_deg=r_deg,
            reference_threshold_deg=r_thr, reference_change=r_chg, pairwise_deg=p_deg, pairwise_change=p_chg,
            pairwise_threshold_deg=p_thr,
            max_to_reference_deg=_max_or_none(r_deg), max_neighbour_deg=_max_or_none(n_deg),
            max_pairwise_deg=None if p_deg is None else _max_or_none(p_deg[np.triu_indices(w, 1)]),
            family_critical=crit, compared=len(comps), not_comparable=tuple(not_comp), level=float(level),
            resamples=int(resamples), stable=stable, rule=rule, verdict=verdict)


def _assumption_name(aid: str) -> str:
    try:
        from relspan.assumptions import assumption
        return f"the {assumption(aid).adjective} assumption"
    except Exception:  # an id outside the table (tests, notebooks): say it as given
        return f"the {aid} assumption"


def subspace_stability(bases: Sequence, *, labels: Sequence[str], draws: Sequence, reference=None,
                       assumption: str = "equal", level: float = TEST_LEVEL,
                       pairwise_cap: int = PAIRWISE_CAP) -> SubspaceStability:
    """:func:`compare_windows` with every window's resampled bases given up front (small plans, tests).

    ``draws[i]`` is window i's ``(B, q_i, n)`` stack (None where ``bases[i]`` is None).

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(1)
    >>> a = np.array([[0.0, 0.0, 1.0]])
    >>> jitter = lambda: np.tile(a, (199, 1, 1)) + rng.normal(scale=0.05, size=(199, 1, 3))
    >>> st = subspace_stability([a, a], labels=["early", "late"], draws=[jitter(), jitter()])
    >>> st.stable, st.compared     # one pair; the plan has no reference here
    (True, 1)
    """
    return compare_windows(bases, labels=labels, resampled=lambda i: draws[i], reference=reference,
                           assumption=assumption, level=level, pairwise_cap=pairwise_cap)


@dataclass(frozen=True, slots=True, eq=False)
class CoefficientSwing:
    """Range and sign changes of each coefficient across windows.

    Attributes
    ----------
    labels : tuple of str
        Window labels, in order.
    names : tuple of str
        Coefficient names (flattened in C order when the values had more
        than one trailing axis).
    values : (w, m) ndarray
        The values, windows by coefficients (NaN where a window has none).
    minimum, maximum : (m,) ndarray
        Smallest and largest finite value (NaN when a coefficient has none).
    argmin, argmax : tuple of (str or None)
        Label of the window where the minimum / maximum occurs.
    sign_changes : (m,) ndarray of int
        Number of sign changes between successive signed values (values within
        :data:`ZERO_SIGN_TOL` of 0, and missing values, have no sign and are skipped).
    changes_at : tuple of tuple of (str, str)
        For each coefficient, the (before, after) window labels of each change.
    missing : (m,) ndarray of int
        Windows with no finite value.
    sign_stable : (m,) ndarray of bool
        No sign change.
    """

    labels: tuple[str, ...]
    names: tuple[str, ...]
    values: np.ndarray
    minimum: np.ndarray
    maximum: np.ndarray
    argmin: tuple[str | None, ...]
    argmax: tuple[str | None, ...]
    sign_changes: np.ndarray
    changes_at: tuple[tuple[tuple[str, str], ...], ...]
    missing: np.ndarray
    sign_stable: np.ndarray

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return jsonable({"labels": list(self.labels), "names": list(self.names), "values": self.values,
                         "minimum": self.minimum, "maximum": self.maximum, "argmin": list(self.argmin),
                         "argmax": list(self.argmax), "sign_changes": self.sign_changes,
                         "changes_at": [[list(p) for p in c] for c in self.changes_at],
                         "missing": self.missing, "sign_stable": self.sign_stable})

    def to_frame(self) -> pd.DataFrame:
        """One row per coefficient: min, max, where, sign changes."""
        return pd.DataFrame({
            "minimum": self.minimum, "argmin": list(self.argmin), "maximum": self.maximum,
            "argmax": list(self.argmax), "sign_changes": self.sign_changes,
            "changes_at": ["; ".join(f"{a} -> {b}" for a, b in c) for c in self.changes_at],
            "missing": self.missing, "sign_stable": self.sign_stable,
        }, index=pd.Index(self.names, name="coefficient"))


def coefficient_swing(values, *, labels: Sequence[str], names) -> CoefficientSwing:
    """Per coefficient: min/max across windows and where the sign changes.

    Parameters
    ----------
    values : (w, ...) array_like
        One row per window; trailing axes are flattened in C order.
    labels : sequence of str
        One label per window.
    names : sequence of str, or nested sequence matching the trailing shape
        One name per (flattened) coefficient.
    """
    v = np.asarray(values, dtype=float)
    if v.ndim < 2:
        raise OptionsError(f"values must have shape (windows, coefficients...); got {v.shape}.",
                           key="values", fix="Stack one row of coefficients per window.")
    w = v.shape[0]
    v = v.reshape(w, -1)
    m = v.shape[1]
    labels_t = check_names_len(labels, w, key="labels")
    flat_names = list(np.asarray(names, dtype=object).reshape(-1)) if not isinstance(names, str) else [names]
    names_t = check_names_len([str(x) for x in flat_names], m, key="names")
    finite = np.isfinite(v)
    missing = (~finite).sum(axis=0).astype(int)
    mins = np.full(m, np.nan)
    maxs = np.full(m, np.nan)
    amin: list[str | None] = [None] * m
    amax: list[str | None] = [None] * m
    changes = np.zeros(m, dtype=int)
    where: list[tuple[tuple[str, str], ...]] = []
    for k in range(m):
        col = v[:, k]
        ok = np.flatnonzero(finite[:, k])
        if ok.size:
            i_min = ok[np.argmin(col[ok])]
            i_max = ok[np.argmax(col[ok])]
            mins[k], maxs[k] = col[i_min], col[i_max]
            amin[k], amax[k] = labels_t[i_min], labels_t[i_max]
        prev_sign, prev_i = 0, -1
        pairs = []
        for i in ok:
            x = col[i]
            sgn = 0 if abs(x) <= ZERO_SIGN_TOL else (1 if x > 0 else -1)
            if sgn == 0:
                continue
            if prev_sign and sgn != prev_sign:
                pairs.append((labels_t[prev_i], labels_t[i]))
            prev_sign, prev_i = sgn, i
        changes[k] = len(pairs)
        where.append(tuple(pairs))
    return CoefficientSwing(labels=labels_t, names=names_t, values=v, minimum=mins, maximum=maxs,
                            argmin=tuple(amin), argmax=tuple(amax), sign_changes=changes,
                            changes_at=tuple(where), missing=missing, sign_stable=changes == 0)


@dataclass(frozen=True, slots=True, eq=False)
class CorankSequence:
    """Corank per window under each noise assumption.

    Attributes
    ----------
    labels : tuple of str
        Window labels.
    assumptions : tuple of str
        Noise assumptions, in the order given.
    coranks : dict of str to tuple of (int or None)
        Corank per window for each assumption (None: undetermined in that window).
    constant : dict of str to bool
        True when every window has the same determined corank.
    values : dict of str to tuple of int
        Distinct determined coranks, ascending.
    changes_at : dict of str to tuple of (str, str)
        (before, after) labels of successive windows with a determined corank
        whose coranks differ *and* count as a change (see ``changes``).
        Undetermined windows are skipped: they are no evidence of a change.
    changes : dict of str to bool or None
        True when the number of relations changes: two successive determined
        windows differ (and, where resampling support is known, their sets of
        plausible coranks do not overlap); False when every window has the same
        determined corank, or differences stay within resampling support; None
        (cannot be judged) when no window's corank is determined.
    undetermined : dict of str to int
        Windows whose corank is undetermined at the tolerance.
    plausible : dict of str to tuple of (frozenset or None)
        Per window, the coranks with at least 5% resampling support under the
        window's own rule (only for assumptions where it was computed).
    """

    labels: tuple[str, ...]
    assumptions: tuple[str, ...]
    coranks: Mapping[str, tuple[int | None, ...]]
    constant: Mapping[str, bool]
    values: Mapping[str, tuple[int, ...]]
    changes_at: Mapping[str, tuple[tuple[str, str], ...]]
    changes: Mapping[str, bool | None] = None
    undetermined: Mapping[str, int] = None
    plausible: Mapping[str, tuple] = None

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return jsonable({"labels": list(self.labels), "assumptions": list(self.assumptions),
                         "coranks": {a: list(c) for a, c in self.coranks.items()},
                         "constant": dict(self.constant),
                         "values": {a: list(c) for a, c in self.values.items()},
                         "changes_at": {a: [list(p) for p in c] for a, c in self.changes_at.items()},
                         "changes": dict(self.changes or {}), "undetermined": dict(self.undetermined or {}),
                         "plausible": {a: [None if p is None else sorted(p) for p in seq]
                                       for a, seq in (self.plausible or {}).items()}})

    def to_frame(self) -> pd.DataFrame:
        """Windows by assumptions (nullable integers)."""
        return pd.DataFrame({a: pd.array(list(self.coranks[a]), dtype="Int64") for a in self.assumptions},
                            index=pd.Index(self.labels, name="window"))


def corank_sequence(coranks: Mapping[str, Sequence[int | None]], *, labels: Sequence[str],
                    plausible: Mapping[str, Sequence] | None = None) -> CorankSequence:
    """Corank per window per assumption, and whether the number of relations changes.

    Parameters
    ----------
    coranks : mapping of assumption to sequence of int or None
        For each noise assumption, the corank found in each window (None
        where it could not be determined, e.g. "undetermined at eps").
    labels : sequence of str
        One label per window.
    plausible : mapping of assumption to sequence of (set or None), optional
        Per window, the coranks with resampling support. Where given for both
        of two successive determined windows, their coranks count as different
        only when the two sets do not overlap (a stated rule, not a bare count).

    Notes
    -----
    An undetermined window is not a change: successive *determined* windows
    are compared, skipping undetermined ones.
    """
    if not coranks:
        raise OptionsError("corank_sequence needs at least one assumption.", key="coranks",
                           fix="Pass {assumption: [corank per window]}.")
    labels_t = check_names_len(labels, len(list(labels)), key="labels")
    plausible = dict(plausible or {})
    out, const, vals, chg, changes, undet, plaus = {}, {}, {}, {}, {}, {}, {}
    for a, seq in coranks.items():
        seq_t = tuple(None if c is None else int(c) for c in seq)
        if len(seq_t) != len(labels_t):
            raise OptionsError(f"coranks[{a!r}] has {len(seq_t)} entries for {len(labels_t)} windows.",
                               key=f"coranks.{a}", fix="Give one corank (or None) per window.")
        if any(c is not None and c < 0 for c in seq_t):
            raise OptionsError(f"coranks[{a!r}] contains a negative corank.", key=f"coranks.{a}",
                               fix="Coranks are whole numbers >= 0.")
        pl = plausible.get(a)
        if pl is not None:
            pl = tuple(None if p is None else frozenset(int(x) for x in p) for p in pl)
            if len(pl) != len(seq_t):
                raise OptionsError(f"plausible[{a!r}] has {len(pl)} entries for {len(seq_t)} windows.",
                                   key=f"plausible.{a}", fix="Give one set (or None) per window.")
            plaus[a] = pl
        det = [(i, c) for i, c in enumerate(seq_t) if c is not None]
        out[a] = seq_t
        vals[a] = tuple(sorted({c for _, c in det}))
        const[a] = len(vals[a]) == 1 and len(det) == len(seq_t)
        undet[a] = len(seq_t) - len(det)

        def differs(i0, c0, i1, c1, pl=pl):
            if c0 == c1:
                return False
            if pl is not None and pl[i0] is not None and pl[i1] is not None:
                return not (pl[i0] & pl[i1])
            return True

        chg[a] = tuple((labels_t[i0], labels_t[i1]) for (i0, c0), (i1, c1) in zip(det, det[1:])
                       if differs(i0, c0, i1, c1))
        changes[a] = None if not det else bool(chg[a])
    return CorankSequence(labels=labels_t, assumptions=tuple(coranks), coranks=out, constant=const,
                          values=vals, changes_at=chg, changes=changes, undetermined=undet, plausible=plaus)
