"""The flats of many windows computed together are, bit for bit, those computed window by window.

``_one_window`` below is the per-window computation as it stood before the windows were batched
(relspan's own earlier code, kept here as the reference the batched path is compared with).
"""

from __future__ import annotations

import numpy as np
import pytest

from relspan.analysis._common import fix_signs, orthonormal_rows
from relspan.analysis.elementary import elementary_regressions
from relspan.analysis.flat import DEFAULT_NEAR_ZERO, elementary_flat, elementary_flats
from relspan.errors import OptionsError


def _one_window(er, q, r, near_zero=DEFAULT_NEAR_ZERO):
    """(form, reason, strength, points, center, directions, distances, rms, u, proj_basis, sines,
    rms_sine, basis) of one window, computed alone."""
    n = er.n
    others = [k for k in range(n) if k != r]
    a_corr = er.relations * er.std[None, :]
    u = a_corr / np.linalg.norm(a_corr, axis=1, keepdims=True)
    _, sv, vt = np.linalg.svd(u)
    vq = vt[:q]
    resid = u - (u @ vq.T) @ vq
    sines = np.linalg.norm(resid, axis=1)
    rms_sine = float(np.sqrt(np.mean(sines**2)))
    proj_basis = orthonormal_rows(vq / er.std[None, :])
    strength = float(np.min(np.abs(u[:, r])))
    points = er.normalised(r)[:, others]
    center = directions = distances = None
    rms = float("nan")
    if strength >= near_zero and bool(np.all(np.isfinite(points))):
        center = points.mean(axis=0)
        dev = points - center
        if q > 1:
            _, _, wt = np.linalg.svd(dev, full_matrices=False)
            directions = fix_signs(wt[:q - 1])
            off = dev - (dev @ directions.T) @ directions
        else:
            directions = np.zeros((0, n - 1))
            off = dev
        distances = np.linalg.norm(off, axis=1)
        rms = float(np.sqrt(np.mean(distances**2)))
        lift = np.zeros((q, n))
        lift[0, others] = center
        lift[0, r] = 1.0
        for i in range(q - 1):
            lift[i + 1, others] = directions[i]
        basis, form = orthonormal_rows(lift), "affine"
    else:
        basis, form = proj_basis, "projective"
    return dict(form=form, ref_strength=strength, points=points, center=center, directions=directions,
                distances=distances, rms_distance=rms, unit_relations=u, projective_basis=proj_basis,
                residual_sines=sines, rms_sine=rms_sine, basis=basis)


def _same(a, b) -> bool:
    if a is None or b is None:
        return a is None and b is None
    if isinstance(a, float):
        return (a == b and np.signbit(a) == np.signbit(b)) or (a != a and b != b)
    if isinstance(a, str):
        return a == b
    a, b = np.asarray(a), np.asarray(b)
    return a.shape == b.shape and a.dtype == b.dtype and a.tobytes() == b.tobytes()


def _windows(n: int, count: int, seed: int):
    """Covariances of ``count`` windows of ``n`` variables: q exact-ish relations plus noise, some
    with a relation that has no coefficient on variable 0 (its normalised point is infinite)."""
    rng = np.random.default_rng(seed)
    out = []
    for w in range(count):
        x = rng.normal(size=(60, n))
        q = 1 + w % (n - 1)
        mix = rng.normal(size=(n - q, q))
        x[:, n - q:] = x[:, :n - q] @ mix + rng.uniform(0.01, 0.5) * rng.normal(size=(60, q))
        s = np.cov(x, rowvar=False)
        if w % 5 == 4:                          # P[0, 1] = 0: relation 1 has no coefficient on 0
            p = np.linalg.inv(s)
            p[0, 1] = p[1, 0] = 0.0
            p += np.eye(n) * np.abs(p).sum(axis=1).max()     # diagonally dominant: positive definite
            s = np.linalg.inv(p)
            s = 0.5 * (s + s.T)
        out.append(elementary_regressions(s, names=[f"v{k}" for k in range(n)]))
    return out


@pytest.mark.parametrize("n", [3, 4, 6, 9])
def test_many_windows_at_once_give_each_window_the_numbers_it_gets_alone(n):
    ers = _windows(n, 23, seed=n)
    forms = set()
    for q in range(1, n):
        for ref in (0, n - 1):
            together = elementary_flats(ers, q=q, ref=ref)
            assert [f.ref for f in together] == [ref] * len(ers)
            for er, flat in zip(ers, together):
                alone = _one_window(er, q, ref)
                forms.add(alone["form"])
                for field, value in alone.items():
                    assert _same(getattr(flat, field), value), (n, q, ref, field)
                single = elementary_flat(er, q=q, ref=ref)
                assert single.form_reason == flat.form_reason and _same(single.basis, flat.basis)
                for name in ("points", "unit_relations", "residual_sines", "center"):
                    arr = getattr(flat, name)
                    assert arr is None or (arr.flags.owndata and arr.flags.writeable)
    assert forms == {"affine", "projective"}


def test_the_batches_do_not_change_the_numbers(monkeypatch):
    from relspan.analysis import flat as F

    ers = _windows(5, 13, seed=7)
    whole = F.elementary_flats(ers, q=2, ref=1)
    monkeypatch.setattr(F, "_BATCH", 4)
    parts = F.elementary_flats(ers, q=2, ref=1)
    for a, b in zip(whole, parts):
        for field in ("points", "center", "directions", "distances", "rms_distance", "unit_relations",
                      "projective_basis", "residual_sines", "rms_sine", "basis", "form_reason"):
            assert _same(getattr(a, field), getattr(b, field)), field


def test_the_checks_of_one_window_hold_for_each_of_many():
    ers = _windows(4, 3, seed=1)
    with pytest.raises(OptionsError, match="q must be a corank"):
        elementary_flats(ers, q=4, ref=0)
    assert elementary_flats([], q=1, ref=0) == []
    with pytest.raises(OptionsError, match="same 4 variables"):
        elementary_flats(ers + _windows(3, 1, seed=2), q=1, ref=0)
