"""Adapters: analysis results -> figure inputs -> :class:`FigureResult`.

The figure functions (:mod:`relspan.report.figures`) take plain arrays; these
functions read them off a :class:`~relspan.analysis.results.DatasetResult`
so that each figure is a function of results only. They pick and reshape
stored numbers; every analysis quantity (the flats of the maps included) was
computed by the pipeline.
"""

from __future__ import annotations

import numpy as np

from relspan.assumptions import assumption

from relspan.report.figures.corank import corank_evidence, corank_timeline
from relspan.report.figures.intervals import frisch_intervals
from relspan.report.figures.maps import ElementaryMapData, elementary_map, window_gallery
from relspan.report.figures.overview import data_overview
from relspan.report.figures.windows import coefficient_swing, subspace_stability

__all__ = ["overview_figure", "map_data", "set_map_data", "map_figure", "gallery_figure", "WINDOW_MAP_CAP",
           "has_window_maps", "GALLERY_PANELS", "has_gallery_panel", "stability_figure",
           "swing_figure", "spectrum_figure", "timeline_figure", "frisch_figure"]



def _window_time_span(prepared, window):
    """(start, end) of a window in the units of the overview's time axis."""
    pos = prepared.overview.positions
    if "first_time" in pos.columns:
        first = pos["first_row"].to_numpy()
        last = pos["last_row"].to_numpy()
        i = int(np.searchsorted(last, window.first_row))
        j = int(np.searchsorted(last, window.last_row))
        i, j = min(i, len(first) - 1), min(j, len(first) - 1)
        return pos["first_time"].iloc[i], pos["last_time"].iloc[j]
    return window.first_row, window.last_row


def overview_figure(result):
    """Data overview: one panel per analysed series (spec labels and units) with the windows of each plan."""
    prepared = result.prepared
    pos = prepared.overview.positions
    if "first_time" in pos.columns:
        times = pos["first_time"].to_numpy()
    else:
        times = pos["first_row"].to_numpy()
    values = prepared.overview.values
    series = {lab: values[col].to_numpy(dtype=float) for col, lab in zip(result.names, result.labels)}
    windows = {}
    for plan in result.plans:
        if plan.plan.kind == "full":
            continue
        title = plan.plan.title or plan.plan.id
        windows[title] = [(*_window_time_span(prepared, w), w.label) for w in plan.windows]
    units = {}
    for v in result.spec.variables:
        if v.label in series and v.unit:
            units[v.label] = v.unit if v.transform == "none" else f"{v.unit}, {v.transform}"
    return data_overview(times, series, windows, units=units, name=f"{result.spec.id}-overview")


def map_data(result, analysis, flat, q: int):
    """ElementaryMapData of one window from its stored flat (None when the map cannot be drawn).

    ``flat`` is the window's :class:`~relspan.analysis.flat.ElementaryFlat` for the corank shown
    (``PlanResult.flats[i][q]``, ``DatasetResult.flat[q]``), or None.
    """
    if flat is None or analysis.elementary.singular or q < 1 or len(result.names) < 3:  # a map needs 3 variables
        return None
    if flat.form != "affine" or flat.center is None or not np.all(np.isfinite(flat.points)):
        return None
    simplex = None
    if q == 1 and analysis.frisch_lower is not None and np.all(np.isfinite(analysis.frisch_lower)):
        simplex = flat.points
    return ElementaryMapData(points=flat.points, names=tuple(result.names),
                             ref=result.names[analysis.ref], flat_point=flat.center,
                             flat_dirs=flat.directions, distances=flat.distances, simplex=simplex)


def map_figure(result, analysis, flat, q: int, name: str):
    """The map of one window (``flat``: its stored flat for corank ``q``)."""
    data = map_data(result, analysis, flat, q)
    if data is None:
        return None
    return elementary_map(data.points, names=data.names, ref=data.ref, flat_point=data.flat_point,
                          flat_dirs=data.flat_dirs, distances=data.distances, simplex=data.simplex,
                          name=name)


def _map_content_key(result, analysis, flat, q: int, name: str) -> str | None:
    """What a map shows, as a digest (its file name left out): two jobs with the same key draw the
    same figure, so the driver draws it once (the full sample's map on the dataset page and the
    one-window "full" plan's window page)."""
    import hashlib

    data = map_data(result, analysis, flat, q)
    if data is None:
        return None
    h = hashlib.sha256(repr((data.names, data.ref, q)).encode())
    for a in (data.points, data.flat_point, data.flat_dirs, data.distances, data.simplex):
        h.update(b"-" if a is None else np.ascontiguousarray(a, dtype=float).tobytes())
    return h.hexdigest()


map_figure.content_key = _map_content_key

#: a plan of more windows than this gets no map per window; its windows are all drawn in the plan's
#: shared-frame figure (the overlay, and a small panel each, labelled, up to the gallery's 24 panels).
#: Three is the plans whose small panels fit in one row of that figure (periods, eras); each map of
#: its own is a full figure (0.1-0.15 s of a build), so a plan costs at most three of them
WINDOW_MAP_CAP = 3


def has_window_maps(result, plan, q) -> bool:
    """Whether the window pages of ``plan`` carry a map of their own: at most :data:`WINDOW_MAP_CAP`
    windows, or a plan whose shared-frame figure cannot be drawn (then each window keeps its map)."""
    if q is None or len(plan.analyses) <= WINDOW_MAP_CAP:
        return True
    return any(set_map_data(result, a, flats.get(q), q) is None for a, flats in zip(plan.analyses, plan.flats))


#: the assumption whose relation set the shared-frame figure draws: the one the plan's
#: stability statements (principal angles) are made under on the dataset page
GALLERY_ASSUMPTION = "equal"


def set_map_data(result, analysis, flat, q: int, assumption: str = GALLERY_ASSUMPTION):
    """ElementaryMapData whose drawn set is the window's relation set under ``assumption``
    (its stored corank-``q`` basis, normalised on the reference variable) and whose points are
    the window's elementary regressions; None when either cannot be drawn."""
    from relspan.report.figures import geometry

    if flat is None or analysis.elementary.singular or q < 1 or len(result.names) < 3:
        return None
    basis = analysis.bases.get(assumption, {}).get(q)
    if basis is None or not np.all(np.isfinite(flat.points)):
        return None
    drawn = geometry.normalised_set(np.atleast_2d(basis) / analysis.common_std[None, :], analysis.ref)
    if drawn is None:
        return None
    point, dirs = drawn
    dist = geometry.distances(flat.points, point, dirs)
    return ElementaryMapData(points=flat.points, names=tuple(result.names), ref=result.names[analysis.ref],
                             flat_point=point, flat_dirs=dirs, distances=dist)


def gallery_figure(result, plan, q: int):
    """Every window of ``plan`` in one frame: the relation set under equal noise and the elementary
    regressions (overlay, then small multiples on the same axes)."""
    maps = [set_map_data(result, a, flats.get(q), q) for a, flats in zip(plan.analyses, plan.flats)]
    if not maps or any(m is None for m in maps) or len(maps) < 2:
        return None
    reference = set_map_data(result, result.full, result.flat.get(q), q)
    stab = plan.stability.get(GALLERY_ASSUMPTION)
    stab = stab if stab is not None and stab.reference_dim == q else None
    angles = None
    if stab is not None and stab.to_reference_deg is not None:
        angles = (f"the largest principal angle between a window's relation subspace and the full "
                  f"sample's ({assumption(GALLERY_ASSUMPTION).name}, common scale)", stab.to_reference_deg)
    return window_gallery(maps, list(plan.labels), reference=reference,
                          set_name=f"relation set ({assumption(GALLERY_ASSUMPTION).name})",
                          subspace_angles=angles, max_panels=GALLERY_PANELS,
                          name=f"{result.spec.id}-{plan.plan.id}-gallery")


#: at most this many small panels in a plan's shared-frame figure (the overlay shows every window)
GALLERY_PANELS = 24


def has_gallery_panel(plan, i: int) -> bool:
    """Whether window ``i`` of ``plan`` has a small panel of its own in the plan's shared-frame figure."""
    from relspan.report.figures.maps import _panel_indices

    return i in _panel_indices(len(plan.analyses), GALLERY_PANELS)


def _drawable_stability(plan, q: int):
    """The plan's stability under the first assumption that compared every window (and the full sample) at q."""
    for a in ("equal", "shaped", "bounded"):
        st = plan.stability.get(a)
        if (st is not None and st.reference_dim == q and all(d == q for d in st.dims)
                and np.all(np.isfinite(st.to_reference_deg))):
            return st
    return None


def _break_marker(result, plan) -> dict:
    """Where the breaks the scan found fall among the plan's windows (each between two window positions)."""
    br = next((b for b in getattr(result, "breaks", {}).values() if b.scan is not None and b.scan.found), None)
    if br is None:
        return {}
    starts = [int(w.first_row) - 1 for w in plan.windows]   # 0-based first row of each window
    listed = br.dated() or [(br.scan, br.date, br.date_low, br.date_high)]
    at, labels = [], []
    for b, date, _, _ in listed:
        after = next((i for i, r in enumerate(starts) if r >= b.split_row), None)
        if after is None or after == 0:
            continue
        if at and at[-1] == after - 0.5:       # two breaks between the same two windows: one line
            labels[-1] = labels[-1].replace("break from", "breaks from").replace(" (scan)", f" and {date} (scan)")
            continue
        at.append(after - 0.5)
        labels.append(f"break from {date} (scan)")
    if not at:
        return {}
    if len(at) == 1:
        return {"break_at": at[0], "break_label": labels[0]}
    return {"break_at": at, "break_label": labels}


def _drawn_threshold(stab) -> float:
    """One line for the figure: the largest per-window threshold (a window above it is a change)."""
    thr = np.asarray(stab.reference_threshold_deg, dtype=float)
    thr = thr[np.isfinite(thr)]
    return float(min(max(thr.max() if thr.size else 90.0, 1e-3), 90.0))


def stability_figure(result, plan, assumption: str, q: int):
    stab = plan.stability.get(assumption)
    if stab is None or len(plan.analyses) < 2 or stab.pairwise_deg is None:
        return None
    if not (stab.reference_dim == q and all(d == q for d in stab.dims)
            and np.all(np.isfinite(stab.to_reference_deg)) and np.all(np.isfinite(stab.pairwise_deg))):
        return None
    return subspace_stability(stab.pairwise_deg, list(plan.labels), stab.to_reference_deg,
                              threshold_deg=_drawn_threshold(stab),
                              name=f"{result.spec.id}-{plan.plan.id}-angles", **_break_marker(result, plan))


def swing_variable(result) -> int:
    """The coefficient shown in the swing figure: the one that changes sign most under OLS."""
    ref = result.full.ref
    best, score = None, -1.0
    for plan in result.plans:
        swing = plan.swings.get("elementary")
        if swing is None:
            continue
        for k in range(len(result.names)):
            if k == ref:
                continue
            s = float(swing.sign_changes[k]) + 1e-3 * float(swing.maximum[k] - swing.minimum[k])
            if s > score:
                best, score = k, s
    if best is None:
        best = 0 if ref != 0 else 1
    return best


def swing_figure(result, plan, q: int):
    if len(plan.analyses) < 2:
        return None
    ref = result.full.ref
    k = swing_variable(result)
    coefs = {}
    for a in ("elementary", "equal", "shaped"):  # the assumptions that give a point
        vals = [w.coefficient(a, ref, k) for w in plan.analyses]
        if all(v is None for v in vals):
            continue
        coefs[assumption(a).name] = np.array([np.nan if v is None else v for v in vals], dtype=float)
    if not coefs:
        return None
    stab = _drawable_stability(plan, q)
    if stab is None:
        return None
    label = (f"coefficient of {result.labels[k]} in the equation for {result.labels[ref]}")
    return coefficient_swing(list(plan.labels), coefs, stab.to_reference_deg, _drawn_threshold(stab), label,
                             name=f"{result.spec.id}-{plan.plan.id}-swing", **_break_marker(result, plan))


def spectrum_figure(result, analysis, name: str):
    eq = analysis.equal or None
    if eq is None:
        return None
    scale = "eigenvalue (correlation scale)" if analysis.scale == "correlation" else "eigenvalue"
    inf = analysis.inference
    ivs = None if inf is None else ([iv.low for iv in inf.eigenvalues], [iv.high for iv in inf.eigenvalues])
    return corank_evidence(eq.eigenvalues, {"tolerance": analysis.eps},
                           scale_label=scale, name=name, intervals=ivs,
                           level=None if inf is None else inf.level)


def timeline_figure(result, plan):
    if len(plan.analyses) < 1:
        return None
    coranks, support = {}, {}
    for a in ("equal", "shaped", "bounded", "diagonal"):
        seq = plan.coranks.coranks.get(a)
        if seq is not None:
            coranks[assumption(a).name] = list(seq)
            shares = []
            for w, q in zip(plan.analyses, seq):
                s = None if w.inference is None or q is None else w.inference.coranks.get(a)
                shares.append(None if s is None else s.support(q))
            support[assumption(a).name] = shares
    if not coranks:
        return None
    any_support = any(v is not None for seq in support.values() for v in seq)
    return corank_timeline(list(plan.labels), coranks, max_corank=len(result.names) - 1,
                           name=f"{result.spec.id}-{plan.plan.id}-coranks",
                           support=support if any_support else None)


def frisch_figure(result, analysis, name: str):
    if analysis.frisch_lower is None:
        return None
    ref = analysis.ref
    ks = [k for k in range(len(result.names)) if k != ref]
    lower = analysis.frisch_lower[ks]
    upper = analysis.frisch_upper[ks]
    point = analysis.coefficients.get("elementary")
    reason = None
    fr = analysis.diagonal
    if fr is not None and fr.q1.status != "bounded":
        reason = fr.q1.reason
    outer = None
    inf = analysis.inference
    if inf is not None and inf.outer:
        by = {o.variable: o for o in inf.outer}
        if all(result.names[k] in by for k in ks):
            outer = ([by[result.names[k]].low for k in ks], [by[result.names[k]].high for k in ks])
    return frisch_intervals([result.labels[k] for k in ks], lower, upper,
                            point=None if point is None else point[ks], unbounded_reason=reason,
                            point_label="least squares (reference variable noisy)",
                            normalised_on=result.labels[ref], name=name, outer=outer,
                            outer_level=None if outer is None else inf.level)

