"""Are two checkouts' results the same, bit for bit? A deep comparison of every field and array.

    python benchmarks/results_equal.py dump SPEC OUT.pkl [--jobs 1]   # relspan.check(SPEC), walked, pickled
    python benchmarks/results_equal.py compare A.pkl B.pkl             # every difference, by path

``dump`` runs ``relspan.check(SPEC, jobs=1, use_cache=False)`` and walks its
``AnalysisRun``: dataclasses become their type name and fields (slots too), enums their
value, tuples, lists and other sequences lists, numpy arrays arrays, other objects their ``repr``; the
walked tree is pickled with plain Python and numpy types only, so a dump made by one
checkout (put first on ``PYTHONPATH``, e.g. an exported main) is read by another.
``compare`` reports each path where the two differ: floats and arrays must be equal bit
for bit (NaN equal to NaN in the same place), a list of numbers equals an array holding
the same numbers (so a field stored as a float array instead of a list compares equal),
``cache_key`` fields are left out (they hash relspan's own code, which differs by design),
and a dict key or dataclass field present on one side only is a difference. Exit code 0
when equal, 1 otherwise.
"""

from __future__ import annotations

import argparse
import collections.abc
import dataclasses
import enum
import pickle
import sys
import warnings

import numpy as np


def walk(obj, seen=None):
    """A plain tree of ``obj`` (see the module notes)."""
    seen = set() if seen is None else seen
    if obj is None or isinstance(obj, (bool, int, str, bytes)):
        return obj
    if isinstance(obj, float):
        return obj
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return np.array(obj, copy=True)
    if isinstance(obj, enum.Enum):
        return {"__enum__": type(obj).__name__, "value": walk(obj.value, seen)}
    if id(obj) in seen:
        return {"__cycle__": type(obj).__name__}
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        seen = seen | {id(obj)}
        return {"__type__": type(obj).__qualname__,
                **{f.name: walk(getattr(obj, f.name), seen) for f in dataclasses.fields(obj)}}
    if isinstance(obj, dict):
        return {"__dict__": [[walk(k, seen), walk(v, seen)] for k, v in obj.items()]}
    if isinstance(obj, (list, tuple)):
        return [walk(v, seen) for v in obj]
    if isinstance(obj, collections.abc.Sequence):  # read-only sequences such as CoefficientIntervals
        return [walk(v, seen) for v in obj]
    if isinstance(obj, (set, frozenset)):
        return {"__set__": sorted(repr(walk(v, seen)) for v in obj)}
    if hasattr(obj, "to_dict") and type(obj).__name__ == "DataFrame":
        return {"__frame__": walk(obj.to_dict("split"), seen)}
    if isinstance(obj, BaseException):
        return {"__exc__": type(obj).__name__, "text": str(obj)}
    slots = [n for c in type(obj).__mro__ for n in getattr(c, "__slots__", ()) if n != "__weakref__"]
    if hasattr(obj, "__dict__") or slots:
        seen = seen | {id(obj)}
        attrs = dict(vars(obj)) if hasattr(obj, "__dict__") else {}
        attrs.update((n, getattr(obj, n)) for n in slots if hasattr(obj, n) and n != "__dict__")
        return {"__object__": type(obj).__qualname__, **{k: walk(v, seen) for k, v in sorted(attrs.items())}}
    return {"__repr__": type(obj).__name__, "text": repr(obj)}


def _numeric_list(x) -> bool:
    return isinstance(x, list) and all(isinstance(v, (int, float)) and not isinstance(v, bool) or
                                       isinstance(v, list) for v in x)


def _same_array(a: np.ndarray, b: np.ndarray) -> bool:
    if a.shape != b.shape:
        return False
    if a.dtype.kind in "fc" or b.dtype.kind in "fc":
        a64, b64 = np.asarray(a, dtype=complex if "c" in (a.dtype.kind, b.dtype.kind) else float), \
            np.asarray(b, dtype=complex if "c" in (a.dtype.kind, b.dtype.kind) else float)
        both_nan = np.isnan(a64) & np.isnan(b64)
        return bool(np.all((a64 == b64) | both_nan))
    return bool(np.array_equal(a, b))


def diff(a, b, path="run", out=None, limit=50):
    """Paths where ``a`` and ``b`` differ (at most ``limit``)."""
    out = [] if out is None else out
    if len(out) >= limit:
        return out
    if isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        if (isinstance(a, np.ndarray) or _numeric_list(a)) and (isinstance(b, np.ndarray) or _numeric_list(b)):
            try:
                aa, bb = np.asarray(a), np.asarray(b)
            except ValueError:
                out.append(f"{path}: ragged")
                return out
            if aa.size == 0 and bb.size == 0:
                return out
            if not _same_array(aa, bb):
                out.append(f"{path}: arrays differ")
            return out
        out.append(f"{path}: {type(a).__name__} vs {type(b).__name__}")
        return out
    if isinstance(a, float) and isinstance(b, float):
        if not (a == b or (a != a and b != b)):
            out.append(f"{path}: {a!r} vs {b!r}")
        return out
    if isinstance(a, tuple):
        a = list(a)
    if isinstance(b, tuple):
        b = list(b)
    if type(a) is not type(b):
        out.append(f"{path}: {type(a).__name__} vs {type(b).__name__}")
        return out
    if isinstance(a, dict):
        if set(a) != set(b):
            out.append(f"{path}: keys {sorted(set(a) ^ set(b))} on one side only")
        for k in a:
            if k in b and k != "cache_key":
                diff(a[k], b[k], f"{path}.{k}", out, limit)
        return out
    if isinstance(a, list):
        if len(a) != len(b):
            out.append(f"{path}: length {len(a)} vs {len(b)}")
            return out
        for i, (x, y) in enumerate(zip(a, b)):
            diff(x, y, f"{path}[{i}]", out, limit)
        return out
    same = a == b
    if not isinstance(same, bool):
        same = bool(np.all(same))
    if not same:
        out.append(f"{path}: {a!r} vs {b!r}"[:300])
    return out


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("what", choices=["dump", "compare"])
    ap.add_argument("a")
    ap.add_argument("b")
    ap.add_argument("--jobs", type=int, default=1)
    args = ap.parse_args()
    if args.what == "dump":
        import relspan

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            outcome = relspan.check(args.a, jobs=args.jobs, use_cache=False)
        with open(args.b, "wb") as fh:
            pickle.dump(walk(outcome.run), fh, protocol=pickle.HIGHEST_PROTOCOL)
        print(f"dumped {args.a} -> {args.b} ({relspan.__file__})")
        return 0
    with open(args.a, "rb") as fh:
        a = pickle.load(fh)
    with open(args.b, "rb") as fh:
        b = pickle.load(fh)
    found = diff(a, b)
    for line in found:
        print(line)
    print("equal: every field and array" if not found else f"{len(found)} differences (first 50 shown)")
    return 0 if not found else 1


if __name__ == "__main__":
    sys.exit(main())
