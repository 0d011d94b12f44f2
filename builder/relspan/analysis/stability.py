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
from relspan.errors import OptionsError

__all__ = ["principal_angles", "SubspaceStability", "subspace_stability", "CoefficientSwing",
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


def _largest_angle(a: np.ndarray, b: np.ndarray) -> float:
    ang = principal_angles(a, b)
    return float(ang[-1]) if ang.size else 0.0


@dataclass(frozen=True, slots=True, eq=False)
class SubspaceStability:
    """How far the relation subspaces of several windows lie from each other and from the full sample.

    Method: principal angles (Björck & Golub 1973, *Numerical methods for
    computing angles between linear subspaces*); the distance between two
    subspaces is their largest principal angle.

    Attributes
    ----------
    labels : tuple of str
        Window labels, in order.
    dims : tuple of int
        Dimension (corank) of each window's subspace.
    pairwise_deg : (w, w) ndarray
        Largest principal angle between windows i and j (degrees); 90 where
        the dimensions differ.
    to_reference_deg : (w,) ndarray or None
        Largest principal angle of each window to the reference (full sample).
    max_pairwise_deg, median_pairwise_deg : float
        Over pairs i < j (0 with a single window).
    max_to_reference_deg, median_to_reference_deg : float or None
        Over windows, when a reference is given.
    threshold_deg : float
        Largest angle accepted as stable.
    dimension_mismatch : bool
        True when the windows (or the reference) do not all have the same dimension.
    stable : bool
        True when dimensions agree and the judged angle (the largest angle to
        the reference when given, else the largest pairwise angle) is at
        most ``threshold_deg``.
    verdict : str
        One sentence stating the verdict, the angle judged and the threshold.
    """

    labels: tuple[str, ...]
    dims: tuple[int, ...]
    pairwise_deg: np.ndarray
    to_reference_deg: np.ndarray | None
    max_pairwise_deg: float
    median_pairwise_deg: float
    max_to_reference_deg: float | None
    median_to_reference_deg: float | None
    threshold_deg: float
    dimension_mismatch: bool
    stable: bool
    verdict: str

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return jsonable({"labels": list(self.labels), "dims": list(self.dims),
                         "pairwise_deg": self.pairwise_deg, "to_reference_deg": self.to_reference_deg,
                         "max_pairwise_deg": self.max_pairwise_deg,
                         "median_pairwise_deg": self.median_pairwise_deg,
                         "max_to_reference_deg": self.max_to_reference_deg,
                         "median_to_reference_deg": self.median_to_reference_deg,
                         "threshold_deg": self.threshold_deg,
                         "dimension_mismatch": self.dimension_mismatch, "stable": self.stable,
                         "verdict": self.verdict})

    def to_frame(self) -> pd.DataFrame:
        """Pairwise largest angles (degrees), windows by windows, plus a column to the reference."""
        df = pd.DataFrame(self.pairwise_deg, index=pd.Index(self.labels, name="window"),
                          columns=list(self.labels))
        if self.to_reference_deg is not None:
            df["to_reference"] = self.to_reference_deg
        return df


def subspace_stability(bases: Sequence, *, labels: Sequence[str], reference=None,
                       threshold_deg: float) -> SubspaceStability:
    """Compare the relation subspaces of several windows.

    Parameters
    ----------
    bases : sequence of (q_i, n) array_like
        One relation basis (rows) per window.
    labels : sequence of str
        One label per window.
    reference : (q, n) array_like, optional
        Basis of the full-sample subspace.
    threshold_deg : float
        Largest principal angle (degrees) still called stable; in (0, 90].

    Returns
    -------
    SubspaceStability

    Examples
    --------
    >>> import numpy as np
    >>> a = np.array([[1.0, 0.0, 0.0], [0.0, 1.0, 0.0]])
    >>> b = np.array([[1.0, 0.0, 0.0], [0.0, 1.0, 1.0]])
    >>> st = subspace_stability([a, b, a], labels=["w1", "w2", "w3"], threshold_deg=10.0)
    >>> st.stable, round(st.max_pairwise_deg, 6)
    (False, 45.0)
    """
    mats = [np.atleast_2d(np.asarray(b, dtype=float)) for b in bases]
    if not mats:
        raise OptionsError("subspace_stability needs at least one window basis.", key="bases",
                           fix="Pass one relation basis per window.")
    labels_t = check_names_len(labels, len(mats), key="labels")
    if not (isinstance(threshold_deg, (int, float, np.floating, np.integer))
            and 0 < float(threshold_deg) <= 90):
        raise OptionsError(f"threshold_deg must be a number of degrees in (0, 90]; got {threshold_deg!r}.",
                           key="max_angle_deg", fix="Use a threshold such as 10 (degrees).")
    thr = float(threshold_deg)
    w = len(mats)
    dims = tuple(int(m.shape[0]) for m in mats)
    pair = np.zeros((w, w))
    for i in range(w):
        for j in range(i + 1, w):
            ang = 90.0 if dims[i] != dims[j] else _largest_angle(mats[i], mats[j])
            pair[i, j] = pair[j, i] = ang
    iu = np.triu_indices(w, 1)
    offd = pair[iu]
    max_p = float(offd.max()) if offd.size else 0.0
    med_p = float(np.median(offd)) if offd.size else 0.0
    to_ref = None
    max_r = med_r = None
    mismatch = len(set(dims)) > 1
    if reference is not None:
        ref = np.atleast_2d(np.asarray(reference, dtype=float))
        mismatch = mismatch or any(d != ref.shape[0] for d in dims)
        to_ref = np.array([90.0 if m.shape[0] != ref.shape[0] else _largest_angle(m, ref) for m in mats])
        max_r = float(to_ref.max())
        med_r = float(np.median(to_ref))
    judged = max_r if max_r is not None else max_p
    what = "to the full sample" if max_r is not None else "between any two windows"
    stable = (not mismatch) and judged <= thr
    if mismatch:
        verdict = (f"Unstable: the number of relations differs across windows (dimensions "
                   f"{sorted(set(dims))}), so the subspaces cannot agree; threshold {thr:g} degrees.")
    elif stable:
        verdict = (f"Stable: the largest principal angle {what} is {judged:.3g} degrees, within the "
                   f"threshold of {thr:g} degrees.")
    else:
        verdict = (f"Unstable: the largest principal angle {what} is {judged:.3g} degrees, above the "
                   f"threshold of {thr:g} degrees.")
    return SubspaceStability(labels=labels_t, dims=dims, pairwise_deg=pair, to_reference_deg=to_ref,
                             max_pairwise_deg=max_p, median_pairwise_deg=med_p,
                             max_to_reference_deg=max_r, median_to_reference_deg=med_r,
                             threshold_deg=thr, dimension_mismatch=mismatch, stable=stable,
                             verdict=verdict)


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
        (before, after) labels where the determined corank changes.
    """

    labels: tuple[str, ...]
    assumptions: tuple[str, ...]
    coranks: Mapping[str, tuple[int | None, ...]]
    constant: Mapping[str, bool]
    values: Mapping[str, tuple[int, ...]]
    changes_at: Mapping[str, tuple[tuple[str, str], ...]]

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return jsonable({"labels": list(self.labels), "assumptions": list(self.assumptions),
                         "coranks": {a: list(c) for a, c in self.coranks.items()},
                         "constant": dict(self.constant),
                         "values": {a: list(c) for a, c in self.values.items()},
                         "changes_at": {a: [list(p) for p in c] for a, c in self.changes_at.items()}})

    def to_frame(self) -> pd.DataFrame:
        """Windows by assumptions (nullable integers)."""
        return pd.DataFrame({a: pd.array(list(self.coranks[a]), dtype="Int64") for a in self.assumptions},
                            index=pd.Index(self.labels, name="window"))


def corank_sequence(coranks: Mapping[str, Sequence[int | None]], *, labels: Sequence[str]) -> CorankSequence:
    """Corank per window per assumption, and whether it stays the same.

    Parameters
    ----------
    coranks : mapping of assumption to sequence of int or None
        For each noise assumption, the corank found in each window (None
        where it could not be determined, e.g. "undetermined at eps").
    labels : sequence of str
        One label per window.
    """
    if not coranks:
        raise OptionsError("corank_sequence needs at least one assumption.", key="coranks",
                           fix="Pass {assumption: [corank per window]}.")
    labels_t = check_names_len(labels, len(list(labels)), key="labels")
    out, const, vals, chg = {}, {}, {}, {}
    for a, seq in coranks.items():
        seq_t = tuple(None if c is None else int(c) for c in seq)
        if len(seq_t) != len(labels_t):
            raise OptionsError(f"coranks[{a!r}] has {len(seq_t)} entries for {len(labels_t)} windows.",
                               key=f"coranks.{a}", fix="Give one corank (or None) per window.")
        if any(c is not None and c < 0 for c in seq_t):
            raise OptionsError(f"coranks[{a!r}] contains a negative corank.", key=f"coranks.{a}",
                               fix="Coranks are whole numbers >= 0.")
        det = [(i, c) for i, c in enumerate(seq_t) if c is not None]
        out[a] = seq_t
        vals[a] = tuple(sorted({c for _, c in det}))
        const[a] = len(vals[a]) == 1 and len(det) == len(seq_t)
        chg[a] = tuple((labels_t[i0], labels_t[i1]) for (i0, c0), (i1, c1) in zip(det, det[1:]) if c0 != c1)
    return CorankSequence(labels=labels_t, assumptions=tuple(coranks), coranks=out, constant=const,
                          values=vals, changes_at=chg)

