"""Every noise assumption side by side for one window.

:func:`analyse_window` runs the method families of this package on one
window's statistics and returns a :class:`WindowAnalysis`: the full result
objects of each method plus the few derived numbers the cross-window
summaries, the findings and the report need (the corank under each
assumption, the relation basis under each assumption, and the normalised
coefficients of the reference relation).

Conventions
-----------
* Relation vectors ``a`` satisfy ``a . (x - mean) = 0`` and are stored in
  the data's own units (after the spec's transforms).
* For comparisons across windows, bases are re-expressed on one *common
  scale*: each variable divided by its full-sample standard deviation
  (``common_std``), so angles do not depend on units and every window is
  measured with the same ruler.
* A normalised coefficient ``b_k`` is the coefficient of ``x_k`` in the
  equation for the reference variable: ``x_ref = sum_k b_k x_k + c``, i.e.
  ``b_k = -a_k / a_ref``.
"""

from __future__ import annotations

import sys
import warnings
from dataclasses import dataclass, field
from typing import Mapping, Sequence

import numpy as np

from relspan.analysis._common import orthonormal_columns
from relspan.analysis.bounded import BoundedNoise, bounded_noise, tolerance_eps
from relspan.analysis.elementary import (ElementaryRegressions, choose_reference, elementary_regressions,
                                         warn_ill_conditioned)
from relspan.analysis.equal_noise import EqualNoise, equal_noise
from relspan.analysis.equal_test import SerialDependence, serial_dependence
from relspan.analysis.frisch import FrischResult, frisch_analysis
from relspan.analysis.inference import ResamplingOptions, WindowInference, equal_noise_corank_rule, window_inference
from relspan.analysis.moments import Moments

__all__ = ["WindowOptions", "WindowAnalysis", "analyse_window", "normalised_coefficients"]



@dataclass(frozen=True, slots=True)
class WindowOptions:
    """Options of the per-window analysis (from the spec's ``checks``).

    Attributes
    ----------
    assumptions : tuple of str
        Which noise assumptions to compute (``elementary`` always runs: the
        other summaries use its condition number and exact relations).
    absolute, relative : float or None
        The tolerance eps (exactly one is set), see
        :func:`relspan.analysis.bounded.tolerance_eps`.
    ref : int
        Index of the variable relations are normalised on.
    coranks : tuple of int
        Coranks whose relation bases are kept (at least the ones examined).
    shape : tuple of float or None
        Relative noise variances (data units) for the ``shaped`` assumption.
    frisch_starts, seed : int
        Starts and seed of the diagonal-noise search.
    """

    assumptions: tuple[str, ...]
    absolute: float | None
    relative: float | None
    ref: int
    coranks: tuple[int, ...]
    shape: tuple[float, ...] | None = None
    frisch_starts: int = 8
    seed: int = 0


@dataclass(frozen=True, slots=True, eq=False)
class WindowAnalysis:
    """All noise assumptions for one window.

    Attributes
    ----------
    label : str
        The window's label (e.g. ``1990Q1–1999Q4``).
    count : int
        Rows in the window.
    names : tuple of str
        Variable (column) names.
    cov : (n, n) ndarray
        Sample covariance of the window (data units).
    common_std : (n,) ndarray
        Full-sample standard deviations: the common scale for cross-window
        comparisons (see module notes).
    eps : float
        Tolerance on the analysed scale; ``scale`` says which scale.
    scale : str
        ``"correlation"`` (relative tolerance) or ``"as given"`` (absolute).
    tolerance_note : str
        The tolerance convention in words.
    ref : int
        Index of the reference (normalising) variable.
    elementary : ElementaryRegressions
    equal, shaped : EqualNoise or None
        Equal-noise (total least squares) and known-shape results, on the
        analysed scale; ``shaped`` is None without a noise shape.
    bounded : BoundedNoise or None
    diagonal : FrischResult or None
        The diagonal-noise (Frisch scheme) analysis when computed.
    coranks : mapping str -> int or None
        The corank each assumption supports in this window (None:
        undetermined at eps). ``elementary`` presupposes exactly one relation.
    bases : mapping str -> mapping int -> (q, n) ndarray
        Orthonormal relation bases on the common scale, per assumption and q.
    coefficients : mapping str -> (n,) ndarray
        Normalised coefficients (data units) of the one-relation answer of
        each assumption that gives a point: ``elementary`` (the regression of
        the reference variable on the others), ``equal``, ``shaped``.
    frisch_lower, frisch_upper : (n,) ndarray or None
        Diagonal-noise interval of each normalised coefficient (q = 1);
        +-inf where unbounded.
    notes : tuple of str
        Plain-words remarks (singular window, ill conditioning, ...).
    inference : WindowInference or None
        Intervals and corank supports from resampling the window
        (:mod:`relspan.analysis.inference`); None when resampling is off
        (``checks.resampling.resamples: 0``) or no granules were given.
    """

    label: str
    count: int
    names: tuple[str, ...]
    cov: np.ndarray
    common_std: np.ndarray
    eps: float
    scale: str
    tolerance_note: str
    ref: int
    elementary: ElementaryRegressions
    equal: EqualNoise | None
    shaped: EqualNoise | None
    bounded: BoundedNoise | None
    diagonal: FrischResult | None
    coranks: Mapping[str, int | None]
    bases: Mapping[str, Mapping[int, np.ndarray]]
    coefficients: Mapping[str, np.ndarray]
    frisch_lower: np.ndarray | None
    frisch_upper: np.ndarray | None
    notes: tuple[str, ...] = field(default=())
    inference: WindowInference | None = None

    @property
    def n(self) -> int:
        return len(self.names)

    def coefficient(self, assumption: str, normalise_on: int, variable: int) -> float | None:
        """Coefficient of ``variable`` in the one-relation equation for ``normalise_on``.

        ``elementary`` reads the least-squares regression of ``normalise_on``
        on the others (that variable alone noisy); ``equal``/``shaped`` read
        their corank-1 relation. None when the assumption was not computed or
        gives a set rather than a point (``bounded``, ``diagonal``: see
        :meth:`frisch_interval`).
        """
        if assumption == "elementary":
            if self.elementary.singular:
                return None
            return float(self.elementary.coefficients[normalise_on, variable])
        if assumption not in ("equal", "shaped"):
            return None  # bounded and diagonal noise give a set of relations, not one point
        basis = self.bases.get(assumption, {}).get(1)
        if basis is None:
            return None
        relation = basis[0] / self.common_std
        return float(normalised_coefficients(relation, normalise_on)[variable])

    def frisch_interval(self, normalise_on: int, variable: int) -> tuple[float, float] | None:
        """Diagonal-noise (q = 1) interval of one normalised coefficient, data units."""
        if self.diagonal is None:
            return None
        std = np.sqrt(np.diag(self.cov)) if self.scale == "correlation" else np.ones(self.n)
        lo, hi = _frisch_bounds(self.diagonal, normalise_on, std)
        return float(lo[variable]), float(hi[variable])

    def to_dict(self) -> dict:
        """JSON-ready summary (the full method results have their own ``to_dict``)."""
        from relspan.analysis._common import jsonable

        out = {
            "label": self.label,
            "count": self.count,
            "variables": list(self.names),
            "reference": self.names[self.ref],
            "scale": self.scale,
            "eps": self.eps,
            "covariance": self.cov,
            "coranks": dict(self.coranks),
            "bases_common_scale": {a: {str(q): b for q, b in qs.items()} for a, qs in self.bases.items()},
            "normalised_coefficients": dict(self.coefficients),
            "frisch_interval": (None if self.frisch_lower is None else
                                {"lower": self.frisch_lower, "upper": self.frisch_upper}),
            "notes": list(self.notes),
            "elementary": self.elementary.to_dict(),
            "inference": None if self.inference is None else self.inference.to_dict(),
        }
        for key in ("equal", "shaped", "bounded", "diagonal"):
            obj = getattr(self, key)
            if obj is not None and hasattr(obj, "to_dict"):
                out[key] = obj.to_dict()
        return jsonable(label_scales(out, self))


#: what each scale means, as results.json states it beside the numbers computed on it
SCALE_WORDS = {
    "correlation": ("correlation scale: each variable divided by this window's own standard deviation (ddof 1); "
                    "eigenvalues, eps and noise variances are shares of each variable's variance"),
    "as given": "the data's own units (after the spec's transforms)",
}


def label_scales(out: dict, analysis: "WindowAnalysis") -> dict:
    """Label every method result in a window's JSON with the scale it was computed on.

    The equal, shaped, bounded and diagonal analyses all run on the analysed
    matrix (``scale``); their own ``scale`` field described the matrix they
    were handed, so it is replaced here by the window's analysed scale. Noise
    variances are also given in the data's units (``*_data_units``): variance
    share times the variable's variance in the window.
    """
    var = np.diag(np.asarray(analysis.cov, dtype=float))
    factor = var if analysis.scale == "correlation" else np.ones_like(var)
    out["scale_words"] = SCALE_WORDS.get(analysis.scale, analysis.scale)
    out["variances_data_units"] = var
    for key in ("equal", "shaped", "bounded", "diagonal"):
        doc = out.get(key)
        if not isinstance(doc, dict):
            continue
        doc["scale"] = analysis.scale
        doc["scale_words"] = SCALE_WORDS.get(analysis.scale, analysis.scale)
        for entry in doc.get("coranks", ()) if key in ("equal", "shaped") else ():
            if isinstance(entry, dict) and entry.get("noise_variances") is not None:
                entry["noise_variances_data_units"] = np.asarray(entry["noise_variances"], float) * factor
        if key == "diagonal":
            for cert in (doc.get("corank") or {}).get("certificates", ()):
                if isinstance(cert, dict) and cert.get("noise_variances") is not None:
                    cert["noise_variances_data_units"] = np.asarray(cert["noise_variances"], float) * factor
    return out


def normalised_coefficients(relation: np.ndarray, ref: int) -> np.ndarray:
    """``b_k = -a_k / a_ref`` (and ``b_ref = 0``): the equation for ``x_ref``."""
    a = np.asarray(relation, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        b = -a / a[ref]
    b[ref] = 0.0
    return b


def _common(basis_data_units: np.ndarray, common_std: np.ndarray) -> np.ndarray:
    """Rows ``a`` in data units -> orthonormal rows on the common scale (``a * std``)."""
    b = np.atleast_2d(basis_data_units) * common_std[None, :]
    return orthonormal_columns(b.T).T


def _corank_by_eigenvalues(eigenvalues: np.ndarray, limit: float) -> int:
    """Largest q with lambda_q <= limit (eigenvalues ascending); at most n - 1."""
    n = len(eigenvalues)
    return int(min(np.count_nonzero(eigenvalues <= limit), n - 1))


def analyse_window(moments: Moments, *, names: Sequence[str], options: WindowOptions,
                   common_std: np.ndarray, label: str = "",
                   elementary: ElementaryRegressions | None = None, granules=None,
                   resampling: ResamplingOptions | None = None, seed_key: tuple = ()) -> WindowAnalysis:
    """Run every requested noise assumption on one window.

    Parameters
    ----------
    moments : Moments
        The window's statistics (merged from blocks).
    names : sequence of str
        Variable names.
    options : WindowOptions
        Assumptions, tolerance, reference variable, coranks to keep.
    common_std : (n,) array_like
        Full-sample standard deviations (the common scale).
    label : str
        Window label, used in warnings.
    elementary : ElementaryRegressions, optional
        This window's elementary regressions when already computed (the
        pipeline computes every window's at once,
        :func:`~relspan.analysis.elementary.elementary_regressions_stack`);
        its warning is given here as if computed here.
    granules : GranuleStats, optional
        The window's granules (:meth:`relspan.data.prepare.PreparedDataset.window_granules`);
        with ``resampling`` enabled they give :attr:`WindowAnalysis.inference`.
    resampling : ResamplingOptions, optional
    seed_key : tuple
        ``(dataset, plan, window index)`` naming the window's random stream.

    Returns
    -------
    WindowAnalysis

    References
    ----------
    See the modules :mod:`~relspan.analysis.elementary`,
    :mod:`~relspan.analysis.equal_noise`, :mod:`~relspan.analysis.bounded`
    and :mod:`~relspan.analysis.frisch` for the methods and their sources.
    """
    names = tuple(names)
    n = len(names)
    common_std = np.asarray(common_std, dtype=float)
    cov, cov_lo = moments.covariance_parts()
    ref = options.ref
    notes: list[str] = []

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if elementary is None:
            er = elementary_regressions(cov, names=names, count=moments.count, mean=moments.mean,
                                        cov_lo=cov_lo, label=label or None)
        else:
            er = elementary
            warn_ill_conditioned(er, label=label or None)
    for w in caught:
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        notes.append(str(w.message))
    if er.singular:
        notes.append(er.singular_reason)

    tol = tolerance_eps(cov, absolute=options.absolute, relative=options.relative)
    mat, eps, tstd = tol.matrix, tol.eps, tol.std  # analysed matrix = D^-1 S D^-1, D = tstd

    def to_data_units(rows_on_analysed_scale: np.ndarray) -> np.ndarray:
        return np.atleast_2d(rows_on_analysed_scale) / tstd[None, :]

    keep = sorted(set(options.coranks) | {1})
    keep = [q for q in keep if 1 <= q <= n - 1]
    coranks: dict[str, int | None] = {}
    bases: dict[str, dict[int, np.ndarray]] = {}
    coefficients: dict[str, np.ndarray] = {}

    if "elementary" in options.assumptions:
        coranks["elementary"] = 1
        if not er.singular:
            coefficients["elementary"] = np.array(er.coefficients[ref], dtype=float)
            bases["elementary"] = {1: _common(er.relations[ref], common_std)}

    eq = None
    if "equal" in options.assumptions or "bounded" in options.assumptions:
        eq = equal_noise(mat, names=names)
    if "equal" in options.assumptions and eq is not None:
        # the multiplicity of the smallest eigenvalue, by test (not a count below the tolerance)
        # time-ordered rows: the test's sample size is the effective one (Bartlett 1946; equal_test)
        serial = _serial(granules)
        lam_eq, lag1 = np.sort(np.asarray(eq.eigenvalues, dtype=float)), None
        if serial is not None:
            vecs = np.linalg.eigh(mat)[1]       # columns in ascending order of eigenvalue, as lam_eq
            lag1 = serial.lag1(vecs / tstd[:, None])
        coranks["equal"] = equal_noise_corank_rule(lam_eq, eps=eps, nobs=float(moments.count), lag1=lag1)
        bases["equal"] = {q: _common(to_data_units(eq.coranks[q - 1].basis), common_std) for q in keep}
        coefficients["equal"] = normalised_coefficients(to_data_units(eq.coranks[0].basis)[0], ref)

    shaped = None
    if "shaped" in options.assumptions and options.shape is not None:
        w = np.asarray(options.shape, dtype=float) / tstd**2  # noise shape on the analysed scale
        w = w / w.mean()
        shaped = equal_noise(mat, names=names, shape=w)
        # noise s^2 * W_jj <= eps for every variable
        coranks["shaped"] = _corank_by_eigenvalues(shaped.eigenvalues, eps / float(w.max()))
        bases["shaped"] = {q: _common(to_data_units(shaped.coranks[q - 1].basis), common_std) for q in keep}
        coefficients["shaped"] = normalised_coefficients(to_data_units(shaped.coranks[0].basis)[0], ref)

    bd = None
    if "bounded" in options.assumptions:
        bd = bounded_noise(mat, names=names, eps=eps)
        coranks["bounded"] = int(min(bd.max_corank, n - 1))
        bases["bounded"] = {c.q: _common(to_data_units(c.basis), common_std)
                            for c in bd.coranks if c.q in keep}

    fr = None
    lower = upper = None
    if "diagonal" in options.assumptions:
        eps_exist, eps_impossible = tol.diagonal_eps()  # absolute tolerances converted here, once
        fr = frisch_analysis(mat, names=names, eps=eps_exist, eps_impossible=eps_impossible,
                             starts=options.frisch_starts,
                             seed=options.seed, ref=None)
        coranks["diagonal"] = _frisch_corank(fr)
        fb = {}
        for q in keep:
            cert = fr.corank.certificate(q)
            if cert.status == "certified" and cert.relations is not None:
                fb[q] = _common(to_data_units(cert.relations), common_std)
        bases["diagonal"] = fb
        lower, upper = _frisch_bounds(fr, ref, tstd)

    inference = None
    if granules is not None and resampling is not None and resampling.enabled:
        share = None
        if fr is not None and coranks.get("diagonal"):
            cert = fr.corank.certificate(coranks["diagonal"])
            share = cert.noise_share if cert.status == "certified" else None
        with warnings.catch_warnings():
            # numerical notes about single resamples are not findings about the window: not raised
            warnings.simplefilter("ignore")
            inference = _inference(granules, resampling, seed_key, tol, eps, ref, keep, coranks, eq, er, tstd,
                                   mat, share, lower, upper, names, moments)

    return WindowAnalysis(
        label=label, count=int(moments.count), names=names, cov=cov, common_std=common_std,
        eps=float(eps), scale=tol.scale, tolerance_note=sys.intern(tol.convention), ref=int(ref),
        elementary=er, equal=eq if "equal" in options.assumptions else None, shaped=shaped,
        bounded=bd, diagonal=fr, coranks=coranks, bases=bases, coefficients=coefficients,
        frisch_lower=lower, frisch_upper=upper, notes=tuple(sys.intern(t) for t in dict.fromkeys(notes)), inference=inference,
    )


def _serial(granules) -> SerialDependence | None:
    """Lag-0/lag-1 autocovariances of a time-ordered window's granule means (None: rows independent).

    Unordered rows, and windows analysed without granules, keep the row count.
    """
    if granules is None:
        return None
    stats_ = getattr(granules, "stats", granules)   # DrawnGranules carries its GranuleStats
    if not getattr(stats_, "ordered", False):
        return None
    return serial_dependence(stats_.means, rows_per_point=int(stats_.rows_per_granule))


def _frisch_corank(fr: FrischResult) -> int | None:
    """Largest certified corank, or None when a larger one is neither certified nor ruled out."""
    top = fr.corank.max_certified
    for cert in fr.corank.certificates:
        if cert.q > top and cert.status == "undetermined":
            return None
    return int(top)


def _frisch_bounds(fr: FrischResult, ref: int, std: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Frisch q = 1 intervals of the normalised coefficients b_k = -a_k (equation for ``ref``), data units."""
    n = len(fr.names)
    lower = np.full(n, np.nan)
    upper = np.full(n, np.nan)
    on = fr.names[ref]
    for iv in fr.q1.intervals:
        if iv.normalised_on != on:
            continue
        k = fr.names.index(iv.variable)
        factor = std[ref] / std[k]
        # relation form a (a_ref = 1) -> equation form b = -a, then to data units
        lower[k] = -iv.high * factor
        upper[k] = -iv.low * factor
    lower[ref] = upper[ref] = 0.0
    return lower, upper


def reference_index(cov: np.ndarray, names: Sequence[str], normalise_on: str) -> int:
    """Index of the spec's ``normalise_on`` column, or the automatic choice."""
    names = tuple(names)
    if normalise_on != "auto":
        return names.index(normalise_on)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        er = elementary_regressions(cov, names=names)
    return choose_reference(er)


def _inference(granules, resampling, seed_key, tol, eps, ref, keep, coranks, eq, er, tstd, mat, share, lower,
               upper, names, moments) -> WindowInference:
    """The window's resampling (:func:`relspan.analysis.inference.window_inference`) from its estimates."""
    return window_inference(
        granules, names=names, options=resampling, seed_key=seed_key, scale=tol.scale, eps=eps, ref=ref,
        coranks=keep, assumptions=tuple(coranks),
        estimates={"eigenvalues": np.linalg.eigvalsh(mat), "tstd": tstd,
                   "basis": {q: eq.coranks[q - 1].basis for q in keep} if eq is not None else {},
                   "elementary": None if er.singular else np.asarray(er.coefficients, dtype=float),
                   "equal_q": coranks.get("equal"), "bounded_q": coranks.get("bounded"),
                   "diagonal_q": coranks.get("diagonal"), "diagonal_share": share,
                   "serial": _serial(granules),
                   "frisch_lower": lower, "frisch_upper": upper},
        nobs=float(moments.count))
