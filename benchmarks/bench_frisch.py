"""The diagonal-noise (Frisch scheme) analysis beside one compiled CLARABEL minimum-trace solve.

Run (prints tables and ratios; asserts nothing)::

    python benchmarks/bench_frisch.py [window] [--quick]   # per window, n = 4..10, beside CLARABEL
    python benchmarks/bench_frisch.py resamples [--quick]  # the resampling path, stacked vs one at a time
    python benchmarks/bench_frisch.py profile [--quick]    # where one window's Newton steps go, by phase
    python benchmarks/bench_frisch.py answers PATH         # every answer on 200 cases, written to PATH
    python benchmarks/bench_frisch.py compare OLD NEW      # two such files: which cases differ, and how

Peer: cvxpy with the CLARABEL solver (both from PyPI, in the test extras),
the minimum-trace problem ``max sum(d) s.t. R - diag(d) PSD, d >= 0`` on the
window's correlation matrix, compiled once (``R`` a cvxpy Parameter, so later
solves skip the compilation) and timed on its second and later solves.

``window``: cases n = 4..10, exact factor structures ``L L^T + D`` of a true
corank ("structured") and sample covariances of unstructured data
("unstructured"), at a tolerance of 0.01 on the correlation scale. Timings
are interleaved: for each window, the relspan analysis and the peer solve run
back to back, so a slower machine moment slows both; both are timed in CPU seconds of the
process (``time.process_time``: a shared machine's load changes wall times
far more); the ratio is taken per window and its median printed per row,
per kind and over all windows.

``resamples``: the path of the inference engine (``diagonal_coranks_of``,
the diagonal-noise corank of each of 99 resamples of one window, one start)
beside one call per resample (``diagonal_corank_of``), interleaved, with a
check that both give the same coranks and certificates; per resample, the
ratio to one CLARABEL solve. Then :func:`frisch_corank_stack` (warm-started
from the estimate) per resample.

``profile``: the same windows as ``window``, each analysed with the barrier
solver and the searches wrapped by counters (the analysis itself is not
changed): per window, the lockstep Newton steps (one step of a stacked solve
counts once, however many problems it carries) and the CPU milliseconds
spent in barrier solves, by phase: the minimum-trace solve; the corank
search from its best point, from the random starts, and on ``R + eps I``;
the spread search's starts (and their ``R + eps I`` retry) and its walkers.
The counters' own cost is included in the CPU figures.

``answers`` / ``compare``: the before/after check of issue 15 (every
certificate and verdict kept). 200 seeded cases (n = 4..10; structured, some
perturbed, and unstructured; tolerances 0.001, 0.01, 0.05), each analysed by
``frisch_analysis``; every certificate (status, how found, noise shares,
``||E||``, bound), the largest certified and smallest ruled-out corank, the
minimum-trace solution and its Newton steps, the identification status, the
spread (members, distinct, widest angle, noise ranges) and every summary
sentence are written as JSON. Run ``answers`` under each version of the code
(e.g. ``PYTHONPATH=old/builder``) and ``compare`` the two files.
"""

from __future__ import annotations

import argparse
import json
import statistics
import time

import numpy as np

from relspan.analysis.frisch import frisch_analysis, frisch_corank_stack
from relspan.analysis.inference import diagonal_corank_of


def _structured(n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    q = max(1, n - 2 - n // 4)
    lo = rng.standard_normal((n, n - q))
    return lo @ lo.T + np.diag(rng.uniform(0.2, 1.0, n))


def _unstructured(n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return np.cov((rng.standard_normal((3 * n + 5, n)) @ rng.uniform(0.5, 2.0, (n, n))).T)


class _Clarabel:
    """One compiled cvxpy minimum-trace problem per n (reference: cvxpy + CLARABEL)."""

    def __init__(self, n: int) -> None:
        import cvxpy as cp

        self.r = cp.Parameter((n, n), symmetric=True)
        self.d = cp.Variable(n)
        self.prob = cp.Problem(cp.Maximize(cp.sum(self.d)), [self.r - cp.diag(self.d) >> 0, self.d >= 0])
        self.r.value = np.eye(n)
        self.prob.solve(solver="CLARABEL")

    def solve(self, r: np.ndarray) -> float:
        self.r.value = r
        t0 = time.process_time()
        self.prob.solve(solver="CLARABEL")
        return time.process_time() - t0


def _corr(s: np.ndarray) -> np.ndarray:
    sd = np.sqrt(np.diag(s))
    return s / np.outer(sd, sd)


def window(quick: bool) -> None:
    """Per window, n = 4..10: relspan's whole analysis beside one CLARABEL solve, interleaved."""
    reps = 3 if quick else 9
    eps = 0.01
    print("CPU milliseconds of the process (time.process_time), medians per row; ratio per window")
    print(f"{'case':<22}{'relspan ms':>12}{'CLARABEL ms':>13}{'ratio':>8}{'q':>4}{'spread':>8}")
    all_ratios = {"structured": [], "unstructured": []}
    for n in range(4, 11):
        peer = _Clarabel(n)
        for kind, make in (("structured", _structured), ("unstructured", _unstructured)):
            ours, theirs, ratios, res = [], [], [], None
            for seed in range(reps):
                s = make(n, seed)
                t0 = time.process_time()
                res = frisch_analysis(s, eps=eps)
                t_ours = time.process_time() - t0
                t_peer = min(peer.solve(_corr(s)) for _ in range(2))
                ours.append(t_ours)
                theirs.append(t_peer)
                ratios.append(t_ours / t_peer)
            all_ratios[kind] += ratios
            print(f"{kind + ' n=' + str(n):<22}{1e3 * statistics.median(ours):>12.1f}"
                  f"{1e3 * statistics.median(theirs):>13.2f}{statistics.median(ratios):>8.2f}"
                  f"{res.corank.max_certified:>4}{'yes' if res.spread else 'no':>8}")
    for kind, r in all_ratios.items():
        print(f"median ratio, {kind}: {statistics.median(r):.2f}  (max {max(r):.2f})")
    print(f"median ratio, all: {statistics.median(all_ratios['structured'] + all_ratios['unstructured']):.2f}")


def profile(quick: bool) -> None:
    """Where the lockstep Newton steps of one window's analysis go, by phase (means per window)."""
    import collections
    from unittest import mock

    import relspan.analysis.frisch.analysis as an
    import relspan.analysis.frisch.corank as co
    import relspan.analysis.frisch.minrank as mr

    reps = 3 if quick else 9
    phase = ["?"]
    acc: dict = collections.defaultdict(lambda: [0, 0.0])
    barrier, trace, descend_many = mr._barrier_batch, co._barrier_trace, mr._descend_many
    descend, walk, spread = mr._Searcher.descend, mr._Searcher.walk, an.solution_spread

    def count(out, t0):
        a = acc[phase[0]]
        a[0] += int(np.max(out[2]))
        a[1] += time.process_time() - t0
        return out

    def c_barrier(*a, **k):
        t0 = time.process_time()
        return count(barrier(*a, **k), t0)

    def c_trace(*a, **k):
        phase[0] = "minimum trace"
        t0 = time.process_time()
        return count(trace(*a, **k), t0)

    def c_descend_many(req, q, **k):
        if phase[0] == "minimum trace" or phase[0].startswith("corank"):
            rows = sum(np.atleast_2d(d).shape[0] for _, d in req)
            phase[0] = "corank: " + ("R + eps I" if req[0][0].cert_r is not req[0][0].r
                                     else "best point" if rows == 1 else "random starts")
        return descend_many(req, q, **k)

    def c_descend(self, q, d0, **k):
        if phase[0].startswith("spread: starts"):
            phase[0] = "spread: starts" + (" (R + eps I)" if self.cert_r is not self.r else "")
        return descend(self, q, d0, **k)

    def c_walk(self, *a, **k):
        phase[0] = "spread: walkers"
        return walk(self, *a, **k)

    def c_spread(*a, **k):
        phase[0] = "spread: starts"
        return spread(*a, **k)

    order = ["minimum trace", "corank: best point", "corank: random starts", "corank: R + eps I",
             "spread: starts", "spread: starts (R + eps I)", "spread: walkers"]
    print("Lockstep Newton steps per window (CPU ms in barrier solves), means over "
          f"{reps} windows per row, tolerance 0.01:")
    print(f"{'case':<18}{'total':>13}" + "".join(f"  {p}" for p in order))
    with mock.patch.object(mr, "_barrier_batch", c_barrier), mock.patch.object(co, "_barrier_trace", c_trace), \
            mock.patch.object(mr, "_descend_many", c_descend_many), \
            mock.patch.object(co, "_descend_many", c_descend_many), \
            mock.patch.object(mr._Searcher, "descend", c_descend), mock.patch.object(mr._Searcher, "walk", c_walk), \
            mock.patch.object(an, "solution_spread", c_spread):
        for kind, make in (("structured", _structured), ("unstructured", _unstructured)):
            for n in range(4, 11):
                tot: dict = collections.defaultdict(lambda: [0, 0.0])
                cpu = 0.0
                for seed in range(reps):
                    acc.clear()
                    phase[0] = "?"
                    t0 = time.process_time()
                    frisch_analysis(make(n, seed), eps=0.01)
                    cpu += time.process_time() - t0
                    for key, (st, ms) in acc.items():
                        tot[key][0] += st
                        tot[key][1] += ms
                steps = sum(v[0] for v in tot.values()) / reps
                cells = "".join(f"  {tot[p][0] / reps:.0f} ({1e3 * tot[p][1] / reps:.0f})".rjust(len(p) + 2)
                                for p in order)
                print(f"{kind[:5] + ' n=' + str(n):<18}{steps:>6.0f} ({1e3 * cpu / reps:>4.0f})" + cells)


def _resample_stack(n: int, rows: int, b: int, rng: np.random.Generator) -> np.ndarray:
    """``b`` iid resamples (correlation scale) of ``rows`` invented rows with ``n - 2`` factors."""
    lo = rng.standard_normal((n, max(1, n - 2)))
    x = rng.standard_normal((rows, lo.shape[1])) @ lo.T + rng.standard_normal((rows, n)) * 0.5
    covs = np.stack([np.cov(x[rng.integers(0, rows, rows)].T) for _ in range(b)])
    sd = np.sqrt(np.diagonal(covs, axis1=1, axis2=2))
    return covs / (sd[:, :, None] * sd[:, None, :])


def _same(a, b) -> bool:
    (qa, ca), (qb, cb) = a, b
    return qa == qb and {k: (v.status, v.noise_share) for k, v in ca.items()} == \
        {k: (v.status, v.noise_share) for k, v in cb.items()}


def resamples(quick: bool) -> None:
    """The resampling path: 99 resamples of a window, stacked vs one call each, beside CLARABEL."""
    try:
        from relspan.analysis.inference import diagonal_coranks_of
    except ImportError:          # a version of the code without the stacked path
        diagonal_coranks_of = None
    eps = 0.05
    windows = 2 if quick else 5
    print("diagonal-noise corank of 99 resamples of one window (one start, tolerance 0.05), per resample;")
    print("'one' calls diagonal_corank_of per resample, 'stacked' diagonal_coranks_of once (interleaved):")
    print(f"{'case':<16}{'one ms':>9}{'stacked ms':>12}{'one/stacked':>13}{'CLARABEL ms':>13}"
          f"{'stacked/CLARABEL':>18}{'same':>6}")
    for n in (3, 4, 6, 8, 10):
        peer = _Clarabel(n)
        rng = np.random.default_rng(100 + n)
        t_one, t_st, t_peer, same = [], [], [], True
        for _ in range(windows):
            covs = _resample_stack(n, 60, 99, rng)
            t0 = time.process_time()
            one = [diagonal_corank_of(c, None, eps=eps, seed=0) for c in covs]
            t_one.append((time.process_time() - t0) / 99)
            if diagonal_coranks_of is not None:
                t0 = time.process_time()
                st = diagonal_coranks_of(covs, eps=eps, seed=0)
                t_st.append((time.process_time() - t0) / 99)
                same &= all(_same(a, b) for a, b in zip(one, st))
            t_peer.append(statistics.median(peer.solve(c) for c in covs[:9]))
        m_one, m_peer = statistics.median(t_one), statistics.median(t_peer)
        m_st = statistics.median(t_st) if t_st else float("nan")
        print(f"{'n=' + str(n):<16}{1e3 * m_one:>9.2f}{1e3 * m_st:>12.2f}{m_one / m_st:>13.2f}"
              f"{1e3 * m_peer:>13.2f}{m_st / m_peer:>18.2f}{'yes' if same else 'NO':>6}")

    print("\nfrisch_corank_stack on 99 resamples of one window (rows resampled iid), per resample:")
    print(f"{'case':<22}{'ms/resample':>12}{'CLARABEL ms':>13}{'ratio':>8}")
    for n in (4, 6, 8, 10):
        peer = _Clarabel(n)
        rng = np.random.default_rng(n)
        lo = rng.standard_normal((n, n - 2))
        x = rng.standard_normal((200, n - 2)) @ lo.T + rng.standard_normal((200, n)) * 0.5
        est = frisch_analysis(np.cov(x.T), eps=0.01)
        covs = np.stack([np.cov(x[rng.integers(0, 200, 200)].T) for _ in range(99)])
        t0 = time.process_time()
        frisch_corank_stack(covs, eps=0.01, warm=est)
        per = (time.process_time() - t0) / 99
        t_peer = statistics.median(peer.solve(_corr(c)) for c in covs[:9])
        print(f"{'resamples n=' + str(n):<22}{1e3 * per:>12.2f}{1e3 * t_peer:>13.2f}{per / t_peer:>8.2f}")


_EPS = (1e-3, 0.01, 0.05)


def case(i: int) -> tuple[np.ndarray, float, str]:
    """Covariance (data scale), tolerance and kind of the ``i``-th of the 200 comparison cases."""
    rng = np.random.default_rng(20_000 + i)
    n = 4 + i % 7
    kind = ("structured", "unstructured")[(i // 7) % 2]
    eps = _EPS[(i // 14) % 3]
    if kind == "unstructured":
        s = np.cov((rng.standard_normal((3 * n + 5, n)) @ rng.uniform(0.5, 2.0, (n, n))).T)
    else:
        q = int(rng.integers(1, n - 1))
        lo = rng.standard_normal((n, n - q))
        s = lo @ lo.T + np.diag(rng.uniform(0.2, 1.0, n))
        if i % 3 == 0:                      # a third of them perturbed off the exact structure
            e = rng.standard_normal((n, n)) * 0.02
            s = s + e @ e.T
    sd = rng.uniform(0.3, 30.0, n)
    return s * sd[:, None] * sd[None, :], eps, kind


def _floats(x):
    return None if x is None else [float(v) for v in np.ravel(x)]


def case_answers(fr) -> dict:
    """Everything a ``FrischResult`` answers: certificates, verdicts, spread, sentences."""
    c, sp = fr.corank, fr.spread
    return {
        "certificates": [{"q": k.q, "status": k.status, "found_by": k.found_by,
                          "noise_share": _floats(k.noise_share), "e_norm": k.e_norm,
                          "bound_eigenvalue": k.bound_eigenvalue} for k in c.certificates],
        "max_certified": c.max_certified, "min_ruled_out": c.min_ruled_out,
        "mintrace": _floats(c.min_trace.noise_variances), "newton_steps": int(c.min_trace.newton_steps),
        "identification": None if fr.identification is None else fr.identification.status,
        "spread": None if sp is None else {
            "members": sp.members, "distinct": sp.distinct, "max_angle_deg": sp.max_angle_deg,
            "noise_low": _floats(sp.noise_low), "noise_high": _floats(sp.noise_high), "summary": sp.summary},
        "summary": fr.summary,
    }


def answers(path: str) -> None:
    out, cpu = [], 0.0
    for i in range(200):
        s, eps, kind = case(i)
        t0 = time.process_time()
        fr = frisch_analysis(s, eps=eps)
        cpu += time.process_time() - t0
        out.append({"case": i, "n": s.shape[0], "kind": kind, "eps": eps, **case_answers(fr)})
    with open(path, "w", encoding="utf-8") as fh:
        json.dump(out, fh, indent=0, sort_keys=True)
    print(f"200 cases written to {path}; {cpu:.1f} s of CPU in frisch_analysis")


def _verdicts(a: dict) -> tuple:
    sp = a["spread"]
    return ([c["status"] for c in a["certificates"]], a["max_certified"], a["min_ruled_out"],
            a["identification"], None if sp is None else sp["distinct"] > 1)


def compare(old: str, new: str) -> None:
    with open(old, encoding="utf-8") as fh:
        a = json.load(fh)
    with open(new, encoding="utf-8") as fh:
        b = json.load(fh)
    same = [x == y for x, y in zip(a, b)]
    verdicts = [_verdicts(x) == _verdicts(y) for x, y in zip(a, b)]
    print(f"{len(a)} cases: {sum(same)} with every answer identical (bit for bit), "
          f"{sum(verdicts)} with the same certificates' statuses and verdicts")
    for x, y, ok in zip(a, b, same):
        if not ok:
            keys = sorted(k for k in x if x[k] != y.get(k))
            print(f"  case {x['case']} (n = {x['n']}, {x['kind']}, eps {x['eps']:g}) differs in: {', '.join(keys)}")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("what", nargs="?", default="window", choices=["window", "resamples", "profile", "answers", "compare"])
    ap.add_argument("paths", nargs="*")
    ap.add_argument("--quick", action="store_true", help="fewer windows per row")
    a = ap.parse_args()
    if a.what == "window":
        window(a.quick)
    elif a.what == "resamples":
        resamples(a.quick)
    elif a.what == "profile":
        profile(a.quick)
    elif a.what == "answers":
        answers(a.paths[0])
    else:
        compare(a.paths[0], a.paths[1])


if __name__ == "__main__":
    main()
