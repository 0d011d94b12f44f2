"""What a relation subspace pins down, and what it leaves open.

With q relations the data determine (at best) a q-dimensional subspace of
relation vectors, not q particular vectors: any invertible combination of
relations is again a set of relations. What is identified is therefore:

- the subspace itself (an orthonormal basis, unique up to rotation);
- the *reduced form*: choosing q variables to solve for, the relations can be
  written uniquely as each chosen variable in terms of the others (solve the
  q x q block). Its coefficients are identified *given that choice*;
- a coefficient identified as exactly 0: if every relation vector has
  ``a_k = 0`` (column k of the basis vanishes), ``x_k`` enters no relation;
- a single coefficient of one relation normalised on ``x_r`` (``a_r = 1``):
  identified iff column k of the basis is a multiple ``c`` of column r (then
  ``a_k = c`` for every normalised relation). With q = 1 this always holds;
  with q >= 2 it generally fails, and the coefficient can be given any value
  by choosing the combination of relations.

References
----------
.. [1] T. C. Koopmans and O. Reiersøl, "The identification of structural
       characteristics", Annals of Mathematical Statistics 21(2), 165-181, 1950.
.. [2] P. Businger and G. H. Golub, "Linear least squares solutions by
       Householder transformations", Numerische Mathematik 7, 269-276, 1965
       (QR with column pivoting, used to choose the q variables).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd

from relspan.analysis._common import EPS, check_names_len, orthonormal_rows, pivot_columns, reduced_form
from relspan.analysis._export import jsonable
from relspan.errors import OptionsError

__all__ = ["Identified", "CoefficientStatus", "identified_quantities", "DEFAULT_ZERO_TOL"]

#: a basis column (unit-length rows) with norm below this counts as zero
DEFAULT_ZERO_TOL = 1e-10


@dataclass(frozen=True, slots=True)
class CoefficientStatus:
    """Whether one coefficient is pinned down by the relation subspace, and why.

    Attributes
    ----------
    form : str
        ``"reduced"`` (coefficient in the reduced form) or ``"normalised"``
        (coefficient of one relation normalised on a variable).
    relation : str
        Reduced form: the variable solved for; normalised: the variable normalised on.
    variable : str
        The variable whose coefficient this is.
    value : float
        The coefficient when identified: in the reduced form the coefficient
        ``c`` in ``x_target = ... + c x_variable`` (about the means);
        normalised: ``a_variable`` with ``a_ref = 1``. NaN when not identified.
    identified : bool
        True when the data (under the assumption that gave the subspace) fix it.
    kind : str
        ``"point"``, ``"zero"`` (identified as exactly 0), ``"not identified"``
        or ``"undefined"`` (the normalisation itself is impossible).
    why : str
        One plain-words sentence explaining the status.
    """

    form: str
    relation: str
    variable: str
    value: float
    identified: bool
    kind: str
    why: str

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return jsonable({"form": self.form, "relation": self.relation, "variable": self.variable,
                         "value": self.value, "identified": self.identified, "kind": self.kind,
                         "why": self.why})


@dataclass(frozen=True, slots=True, eq=False)
class Identified:
    """Identified quantities of a q-dimensional relation subspace.

    Method: identification of linear relations up to invertible combination
    (Koopmans & Reiersøl 1950, *The identification of structural
    characteristics*); the q variables of the reduced form are chosen by QR
    with column pivoting (Businger & Golub 1965) unless given.

    Attributes
    ----------
    names : tuple of str
        Variable names.
    q : int
        Number of relations (dimension of the subspace).
    basis : (q, n) ndarray
        Orthonormal rows spanning the relation subspace.
    targets : tuple of str
        The q variables the reduced form solves for.
    targets_chosen : str
        ``"automatic"`` (column pivoting) or ``"given"``.
    reduced_form : (q, n) ndarray
        Rows ``A_c^{-1} A``: identity in the target columns; row i reads
        ``x_{t_i} = -sum_{k not a target} reduced_form[i, k] x_k`` about the means.
    reduced_condition : float
        2-norm condition number of the q x q target block ``A_c`` (large:
        the reduced-form coefficients are fragile).
    zero_variables : tuple of str
        Variables entering no relation (their coefficient is 0 in every relation).
    normalise_on : str
        Variable used for the normalised-coefficient statuses.
    statuses : tuple of CoefficientStatus
        Reduced-form coefficients (one per target and non-target variable),
        then normalised coefficients (one per variable other than ``normalise_on``).
    summary : str
        Plain-words summary of what is and is not identified.
    """

    names: tuple[str, ...]
    q: int
    basis: np.ndarray
    targets: tuple[str, ...]
    targets_chosen: str
    reduced_form: np.ndarray
    reduced_condition: float
    zero_variables: tuple[str, ...]
    normalise_on: str
    statuses: tuple[CoefficientStatus, ...]
    summary: str

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return jsonable({"names": list(self.names), "q": self.q, "basis": self.basis,
                         "targets": list(self.targets), "targets_chosen": self.targets_chosen,
                         "reduced_form": self.reduced_form, "reduced_condition": self.reduced_condition,
                         "zero_variables": list(self.zero_variables), "normalise_on": self.normalise_on,
                         "statuses": [s.to_dict() for s in self.statuses], "summary": self.summary})

    def to_frame(self) -> pd.DataFrame:
        """One row per coefficient status."""
        return pd.DataFrame([{"form": s.form, "relation": s.relation, "variable": s.variable,
                              "value": s.value, "identified": s.identified, "kind": s.kind, "why": s.why}
                             for s in self.statuses])


def _indices(names: tuple[str, ...], vars_: Sequence[int | str], key: str) -> list[int]:
    out = []
    for v in vars_:
        if isinstance(v, (int, np.integer)) and not isinstance(v, bool) and 0 <= int(v) < len(names):
            out.append(int(v))
        elif isinstance(v, str) and v in names:
            out.append(names.index(v))
        else:
            raise OptionsError(f"{key} entry {v!r} is not one of the variables ({', '.join(names)}).",
                               key=key, fix="Use variable names (or indices) from the dataset.")
    if len(set(out)) != len(out):
        raise OptionsError(f"{key} names a variable twice.", key=key, fix="List each variable once.")
    return out


def identified_quantities(basis, *, names: Sequence[str], ref_vars: Sequence[int | str] | None = None,
                          normalise_on: int | str | None = None,
                          zero_tol: float = DEFAULT_ZERO_TOL) -> Identified:
    """Separate what a relation subspace identifies from what it leaves open.

    Parameters
    ----------
    basis : (q, n) array_like
        Any basis (rows) of the relation subspace, q >= 1.
    names : sequence of str
        One name per variable (column).
    ref_vars : sequence of str or int, optional
        The q variables to solve for in the reduced form. Default: chosen by
        QR with column pivoting (the best-conditioned q x q block).
    normalise_on : str or int, optional
        Variable for the normalised-coefficient statuses (default: the first target).
    zero_tol : float, default 1e-10
        A column of the orthonormal basis (or a residual from proportionality)
        with norm at most this counts as zero.

    Returns
    -------
    Identified

    References
    ----------
    .. [1] T. C. Koopmans and O. Reiersøl, Ann. Math. Statist. 21(2), 165-181, 1950.
    .. [2] P. Businger and G. H. Golub, Numer. Math. 7, 269-276, 1965.

    Examples
    --------
    >>> import numpy as np
    >>> iq = identified_quantities(np.array([[1.0, -2.0, 0.5]]), names=["y", "x", "z"])
    >>> iq.normalise_on, np.round(iq.reduced_form, 3).tolist()   # x = 0.5 y - 0.25 z
    ('x', [[-0.5, 1.0, -0.25]])
    >>> [(s.variable, s.kind) for s in iq.statuses if s.form == "normalised"]
    [('y', 'point'), ('z', 'point')]
    """
    b = np.atleast_2d(np.asarray(basis, dtype=float))
    if b.ndim != 2 or b.shape[0] < 1 or not np.all(np.isfinite(b)):
        raise OptionsError(f"basis must be a finite (q, n) array with q >= 1; got shape {b.shape}.",
                           key="basis", fix="Pass the relation basis rows (e.g. EqualNoiseCorank.basis).")
    q, n = b.shape
    names_t = check_names_len(names, n)
    if q >= n:
        raise OptionsError(f"a relation subspace must have fewer dimensions than variables; got q={q}, "
                           f"n={n}.", key="basis", fix="Pass at most n - 1 relation rows.")
    sv = np.linalg.svd(b, compute_uv=False)
    if sv[-1] <= max(q, n) * EPS * sv[0] * 100:
        raise OptionsError(f"the {q} basis rows are linearly dependent (rank below {q}).", key="basis",
                           fix="Pass independent relation vectors.")
    ob = orthonormal_rows(b)
    if ref_vars is None:
        tidx = list(pivot_columns(ob))
        chosen = "automatic"
    else:
        tidx = _indices(names_t, list(ref_vars), "ref_vars")
        if len(tidx) != q:
            raise OptionsError(f"ref_vars must name exactly {q} variables (one per relation); got "
                               f"{len(tidx)}.", key="ref_vars", fix=f"Name {q} variables to solve for.")
        chosen = "given"
    red, cond = reduced_form(ob, tidx)
    if not np.isfinite(cond):
        raise OptionsError(f"the relations cannot be solved for {', '.join(names_t[i] for i in tidx)}: "
                           "their block of the basis is singular.", key="ref_vars",
                           fix="Choose other variables, or leave ref_vars out for an automatic choice.")
    colnorm = np.linalg.norm(ob, axis=0)
    zero = [k for k in range(n) if colnorm[k] <= zero_tol]
    targets = tuple(names_t[i] for i in tidx)
    tlist = ", ".join(targets)
    statuses: list[CoefficientStatus] = []
    for i, t in enumerate(tidx):
        for k in range(n):
            if k in tidx:
                continue
            c = float(-red[i, k])
            if k in zero:
                statuses.append(CoefficientStatus(
                    "reduced", names_t[t], names_t[k], 0.0, True, "zero",
                    f"{names_t[k]} enters none of the relations, so its coefficient is exactly 0 "
                    "whatever combination of relations is taken."))
            elif q == 1:
                statuses.append(CoefficientStatus(
                    "reduced", names_t[t], names_t[k], c, True, "point",
                    f"With a single relation, solving it for {names_t[t]} fixes every coefficient: "
                    "the relation is identified up to scale."))
            else:
                statuses.append(CoefficientStatus(
                    "reduced", names_t[t], names_t[k], c, True, "point",
                    f"Given the choice of {tlist} as the {q} variables to solve for, the relations "
                    f"can be written in only one way as each of them in terms of the other variables; "
                    "another choice gives other, equally valid, coefficients."))
    ref = tidx[0] if normalise_on is None else _indices(names_t, [normalise_on], "normalise_on")[0]
    col_r = ob[:, ref]
    nr = float(np.linalg.norm(col_r))
    for k in range(n):
        if k == ref:
            continue
        if nr <= zero_tol:
            statuses.append(CoefficientStatus(
                "normalised", names_t[ref], names_t[k], float("nan"), False, "undefined",
                f"{names_t[ref]} enters none of the relations, so no relation can be normalised on it."))
            continue
        ratio = float(ob[:, k] @ col_r / nr**2)
        off = float(np.linalg.norm(ob[:, k] - ratio * col_r))
        if k in zero:
            statuses.append(CoefficientStatus(
                "normalised", names_t[ref], names_t[k], 0.0, True, "zero",
                f"{names_t[k]} enters none of the relations: its coefficient is exactly 0."))
        elif off <= zero_tol:
            statuses.append(CoefficientStatus(
                "normalised", names_t[ref], names_t[k], ratio, True, "point",
                ("With a single relation, normalising it on " + names_t[ref]
                 + " fixes this coefficient." if q == 1 else
                 f"In every relation of the subspace the coefficient of {names_t[k]} is the same "
                 f"multiple of that of {names_t[ref]}, so it is fixed after normalising.")))
        else:
            statuses.append(CoefficientStatus(
                "normalised", names_t[ref], names_t[k], float("nan"), False, "not identified",
                f"With {q} relations any combination of them is also a relation; normalised on "
                f"{names_t[ref]}, the coefficient of {names_t[k]} takes any value as the combination "
                "changes, so the data do not pin it down."))
    if q == 1:
        summary = (f"One relation: it is identified up to scale; normalised on {names_t[ref]}, "
                   "every coefficient is a point.")
    else:
        summary = (f"{q} relations: the data pin down the subspace they span, and the reduced form "
                   f"solving for {tlist}; a single coefficient of one relation normalised on a "
                   "variable is in general not identified.")
    if zero:
        summary += f" Variables in no relation (coefficient exactly 0): {', '.join(names_t[k] for k in zero)}."
    return Identified(names=names_t, q=q, basis=ob, targets=targets, targets_chosen=chosen,
                      reduced_form=red, reduced_condition=cond, zero_variables=tuple(names_t[k] for k in zero),
                      normalise_on=names_t[ref], statuses=tuple(statuses), summary=summary)
