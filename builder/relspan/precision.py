"""The one table of published precision: how many digits of each number the site stands behind.

Every number relspan writes to ``results.json`` and to the CSV downloads passes
through :func:`canonical_document` / :func:`canonical_frame` exactly once, at the
output boundary; the figures read :func:`precision_for` for their plotted data,
and ``relspan verify`` (:mod:`relspan.verify`) compares a rebuild with a
published site within the same precision.

Why round at all
----------------
The maths library (OpenBLAS) picks a CPU-specific kernel at run time; two
kernels sum in different orders, so the last bits of a result differ from one
machine to the next (measured on the demo, ``OPENBLAS_CORETYPE=Haswell`` against
``SkylakeX``: see :data:`MEASURED`). Rounding every published number to the
accuracy its method supports makes the published bytes the same on any kernel
and says, at the same time, how far a reader may trust each digit.

How a number is rounded
-----------------------
* A number on its own keeps ``digits`` significant digits.
* The numbers of one array (a covariance matrix, an eigenvector, a basis, a
  list of angles across windows) share one quantum: ``digits`` significant
  digits of the array's largest magnitude. This matches the error bounds of
  the methods, which are normwise (an eigenvector's small entries are accurate
  relative to its norm, not to themselves; a tiny angle is accurate to an
  absolute amount), and it sends round-off around zero to exactly 0.
* Negative zero is written as 0.

Two classes of quantity (:data:`CLOSED_FORM`, :data:`ITERATIVE`):

* closed forms (moments, elementary regressions, eigen-decompositions, total
  least squares, bounded-noise perturbation bounds, principal angles): backward
  stable dense linear algebra, accurate to a small multiple of machine epsilon
  times a condition number;
* iterative results (the diagonal-noise (Frisch scheme) minimum-trace search
  and everything computed from it: certificates, identified intervals, the
  spread of the identified set) and the numbers quoted in findings and claim
  verdicts (which may come from either): accurate to the solver's tolerance.

Two published numbers are *the same within precision* when they differ by at
most one quantum (rounding on either side of a boundary moves a number by one
unit in its last digit).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterable, Mapping

__all__ = ["Precision", "CLOSED_FORM", "ITERATIVE", "precision_for", "round_number", "round_array",
           "canonical_document", "canonical_frame", "reference_scale", "quantum", "within", "precision_table", "MEASURED"]


@dataclass(frozen=True, slots=True)
class Precision:
    """How many significant digits a class of quantities is published with, and why.

    Attributes
    ----------
    name : str
        Short id (``closed_form``, ``iterative``), written into results.json.
    digits : int
        Significant digits kept (of the number, or of an array's largest magnitude).
    basis : str
        What the precision rests on, in words (shown on the reproduce page).
    """

    name: str
    digits: int
    basis: str

    def to_dict(self) -> dict:
        return {"digits": self.digits, "basis": self.basis}


#: closed forms: dense, backward-stable linear algebra
CLOSED_FORM = Precision(
    "closed_form", 9,
    "closed forms (moments, elementary regressions, eigen-decompositions, total least squares, "
    "perturbation bounds, principal angles): backward-stable dense linear algebra; two CPU kernels of "
    "the maths library were measured to disagree by at most 3e-13 of an array's largest magnitude, "
    "so 9 significant digits leave a margin of over 3,000 before kernel noise can move a published digit")

#: iterative solves and the numbers quoted in statements
ITERATIVE = Precision(
    "iterative", 4,
    "the diagonal-noise (Frisch scheme) minimum-trace search and what is computed from it "
    "(certificates, identified intervals, spread of the identified set), and every number quoted "
    "in findings and claim verdicts: an iterative solver stops at a tolerance; two CPU kernels were "
    "measured to disagree by up to 1.5e-6 of a relation vector's largest entry and, for its residual "
    "eigenvalue (zero in exact arithmetic), by up to 1.2e-4 of that residual's own size (1e-14 of the "
    "eigenvalues' scale, on which it is therefore rounded); 4 significant digits are what it supports")

#: keys whose values (at any depth) are results of the iterative diagonal-noise solver, or
#: numbers quoted in statements that may come from it
_ITERATIVE_KEYS = frozenset({"diagonal", "frisch_interval", "findings", "claims", "min_trace",
                             "certificates", "spread", "triad"})

#: scalars whose true value is (near) zero, a solver's residual: rounded on the scale of a sibling
#: (the largest magnitude of that sibling array or number), not on their own magnitude
_SCALE_OF = {"e_norm": "eigenvalues", "min_eigenvalue": "value"}

#: what was measured when the digits above were chosen (the demo, two OpenBLAS kernels)
MEASURED = {
    "setup": "specs/demo.yaml built with OPENBLAS_CORETYPE=Haswell and =SkylakeX on one machine "
             "(same library versions, x86-64 with AVX-512); the 24,849 numbers of results.json "
             "compared before rounding",
    "closed_form_max_relative": 3.0e-13,    # to the largest magnitude of the array holding the number
    "iterative_max_relative": 1.5e-6,       # relation vectors and bases of the diagonal-noise solve
    "residual_max_relative_to_scale": 9.1e-15,  # e_norm, min_eigenvalue on their sibling's scale
    "residual_max_relative_to_itself": 1.2e-4,  # the same residuals on their own (near-zero) size
    "numbers_differing_after_rounding": 0,
}


#: (container key, key) of values not published at all: an arbitrary member of a set of equally valid
#: answers, or a solver's step count. Where the noise variances certify more near-zero directions than
#: the corank, the diagonal-noise relations of a certificate and the minimum-trace basis are one choice
#: inside a larger near-null space: two CPU kernels of the maths library chose members up to 5.5e-4
#: apart on the demo (measured), and no statement on the site rests on which member was chosen.
UNPUBLISHED = frozenset({("certificates", "relations"), ("bases_common_scale", "diagonal"),
                         ("min_trace", "newton_steps")})


def precision_for(path: Iterable[str], context: Mapping[str, Any] | None = None) -> Precision:
    """The precision of the number at ``path`` (the keys leading to it in results.json or a CSV column).

    ``context`` is the innermost mapping that holds the number: a record naming
    ``"assumption": "diagonal"`` is iterative too.
    """
    for key in path:
        if key in _ITERATIVE_KEYS:
            return ITERATIVE
        if key.startswith("diagonal") or key.startswith("frisch"):
            return ITERATIVE
    if context is not None and context.get("assumption") == "diagonal":
        return ITERATIVE
    return CLOSED_FORM


def _exponent(x: float) -> int:
    """Decimal exponent of |x| (x != 0), robust at powers of ten."""
    e = math.floor(math.log10(abs(x)))
    if abs(x) >= 10.0 ** (e + 1):
        e += 1
    return e


def quantum(scale: float, digits: int) -> float:
    """The last kept decimal place for numbers whose largest magnitude is ``scale`` (0 for scale 0)."""
    if not scale or not math.isfinite(scale):
        return 0.0
    return 10.0 ** (_exponent(scale) - digits + 1)


def _round_to(x: float, places: int) -> float:
    v = float(round(x, places))  # correctly rounded decimal (Python rounds via the exact value)
    return 0.0 if v == 0 else v


def round_number(x: float, digits: int) -> float:
    """``x`` to ``digits`` significant digits (NaN and infinities unchanged; -0.0 -> 0.0)."""
    if x == 0 or not math.isfinite(x):
        return 0.0 if x == 0 else x
    return _round_to(x, digits - 1 - _exponent(x))


def round_array(values, digits: int, *, scale: float | None = None):
    """Nested lists of numbers rounded to one shared quantum (``digits`` of the largest magnitude,
    or of ``scale`` when given).

    ``None`` (JSON for NaN) and non-numbers are left as they are.
    """
    if scale is None:
        flat = [abs(v) for v in _numbers(values) if math.isfinite(v)]
        scale = max(flat, default=0.0)
    if scale == 0:
        return _map(values, lambda v: 0.0 if v == 0 else v)
    places = digits - 1 - _exponent(scale)
    return _map(values, lambda v: _round_to(v, places) if math.isfinite(v) else v)


def _is_num(v) -> bool:
    return isinstance(v, float) or (isinstance(v, int) and not isinstance(v, bool))


def _numbers(values):
    if isinstance(values, list):
        for v in values:
            yield from _numbers(v)
    elif isinstance(values, float):
        yield values


def _map(values, fn):
    if isinstance(values, list):
        return [_map(v, fn) for v in values]
    if isinstance(values, float):
        return fn(values)
    return values


def _numeric_array(v) -> bool:
    """A (nested) list holding floats and nothing but numbers, None and such lists."""
    if not isinstance(v, list):
        return False
    has_float = False
    stack = list(v)
    while stack:
        x = stack.pop()
        if isinstance(x, list):
            stack.extend(x)
        elif isinstance(x, float):
            has_float = True
        elif x is None or _is_num(x):
            continue
        else:
            return False
    return has_float


def reference_scale(key: str, context) -> float | None:
    """The scale a solver residual named ``key`` is rounded on (its sibling's largest magnitude), or None."""
    ref = _SCALE_OF.get(key)
    if ref is None or not isinstance(context, dict) or context.get(ref) is None:
        return None
    value = context[ref]
    return max((abs(v) for v in _numbers(value if isinstance(value, list) else [float(value)])
                if math.isfinite(v)), default=0.0)


def canonical_document(doc: Any, path: tuple[str, ...] = ()) -> Any:
    """A JSON-ready document with every float rounded to its published precision.

    Integers, strings, booleans and ``None`` are unchanged; keys are kept. Apply
    once, at the output boundary (already rounded numbers stay as they are).
    """
    return _canon(doc, path, None)


def _canon(x, path, context):
    if isinstance(x, dict):
        parent = path[-1] if path else ""
        return {k: _canon(v, path + (str(k),), x) for k, v in x.items() if (parent, str(k)) not in UNPUBLISHED}
    if isinstance(x, list):
        if _numeric_array(x):
            return round_array(x, precision_for(path, context).digits)
        return [_canon(v, path, context) for v in x]
    if isinstance(x, float):
        digits = precision_for(path, context).digits
        scale = reference_scale(path[-1] if path else "", context)
        if scale is not None and scale > abs(x):
            return round_array([x], digits, scale=scale)[0]
        return round_number(x, digits)
    return x


def canonical_frame(df, *, context: Iterable[str] = ()):
    """A copy of a table whose float columns are rounded, each column as one array.

    The column's name (and ``context``, e.g. ``("windows",)``) chooses the precision;
    a row whose ``assumption`` column says ``diagonal`` is rounded as iterative.
    """
    import numpy as np
    import pandas as pd

    out = df.copy()
    ctx = tuple(context)
    diag = (out["assumption"] == "diagonal").to_numpy() if "assumption" in out.columns else None
    for col in out.columns:
        if not pd.api.types.is_float_dtype(out[col].dtype):
            continue
        values = out[col].to_numpy(dtype=float)
        groups = [np.ones(len(values), dtype=bool)] if diag is None else [~diag, diag]
        result = values.copy()
        for g, mask in enumerate(groups):
            if not mask.any():
                continue
            p = precision_for(ctx + (str(col),), {"assumption": "diagonal"} if diag is not None and g == 1
                              else None)
            sub = [float(v) for v in values[mask]]
            result[mask] = np.array(round_array(sub, p.digits), dtype=float)
        out[col] = result
    return out


def within(a: float, b: float, scale: float, digits: int) -> bool:
    """Do two published numbers agree within one quantum of ``digits`` at ``scale``?"""
    q = quantum(scale, digits)
    return abs(a - b) <= q * 1.000001


def precision_table() -> dict:
    """What results.json records about its own rounding (docs/results.md, "precision")."""
    return {
        "rule": "each float keeps the stated significant digits; the numbers of one array share one "
                "quantum, those digits of the array's largest magnitude; two builds agree within "
                "precision when every number differs by at most one quantum",
        "classes": {p.name: p.to_dict() for p in (CLOSED_FORM, ITERATIVE)},
        "iterative_keys": sorted(_ITERATIVE_KEYS),
        "not_published": [f"{a}.{b}" for a, b in sorted(UNPUBLISHED)],
    }
