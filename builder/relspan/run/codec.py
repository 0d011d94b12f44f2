"""A safe codec for cached results: values become JSON plus plain arrays, never pickles.

:func:`encode` turns a result (nested dataclasses, numpy arrays, tuples, dicts
with any hashable keys, pandas frames, typed warnings, bytes) into a JSON-ready
document and a list of numpy arrays; :func:`decode` turns them back. The
document says what each value was by a small tag; a class is named by its module
and qualified name and is looked up in an **allow-list**, never imported from the
name in the document:

* classes defined in relspan's own modules (the module name must be one of the
  package's modules, listed from its installed files) that are dataclasses,
  enums, :class:`~relspan.errors.RelspanWarning` subclasses, or whose
  ``__reduce__`` rebuilds them from plain arguments (``(cls, args)``);
* classes added by :func:`allow` (tests, extensions).

Dataclasses are encoded generically from :func:`dataclasses.fields`, so a
result type that gains a field needs no change here (a value's document lists
its fields' values in order, with a fingerprint of the field names; a document
whose fingerprint no longer matches its class is refused); they are rebuilt without
running ``__init__`` or ``__post_init__`` (fields are set directly), so decoding
runs no code of any class beyond an enum lookup and the constructors of
``__reduce__`` classes of relspan's own. Arrays are stored by the caller (see
:mod:`relspan.run.cache`) with ``numpy.save`` and read back with
``allow_pickle=False``; object arrays are written element by element as
documents. Anything the codec does not know raises :class:`CodecError`.

The round trip is exact: floats keep every bit (JSON's shortest round-trip
text, NaN and infinities tagged), dict order is kept, tuples stay tuples.

**Segments.** Given a ``segment`` callback, :func:`encode` writes the items of
every long sequence or dict (more than :data:`SEGMENT_ITEMS` items, outside
another segment) as *segments* of :data:`SEGMENT_ITEMS` items: each segment's
document and arrays go to the callback as soon as they exist, and the
enclosing document keeps only a ``segs`` reference. A result of many windows
is then never one document in memory (as Python lists and dicts the document
of 2,000 windows took 150 MB, measured with tracemalloc; docs/performance.md,
section 11). :func:`decode` asks a ``segments`` callback for them in the same
order. Without the callbacks nothing is split.
"""

from __future__ import annotations

import dataclasses
import enum
import hashlib
import importlib
import math
import operator
import os
import pkgutil
from math import isfinite
from pathlib import PurePath, PurePosixPath, PureWindowsPath
from typing import Any

import numpy as np

__all__ = ["CodecError", "encode", "decode", "allow", "FORMAT", "SEGMENT_ITEMS"]

#: the document format; part of every cache entry's header
FORMAT = "relspan-codec/2"

#: nesting deeper than this is refused (a crafted document cannot exhaust the stack)
MAX_DEPTH = 200

#: items per segment, and the length above which a sequence or dict is written as segments
#: (when :func:`encode` is given a ``segment`` callback): a window's result is about 10 kB of
#: JSON text, so a segment of 16 windows is about 160 kB
SEGMENT_ITEMS = 16


class CodecError(ValueError):
    """A value the codec cannot write, or a document it will not read."""


_EXTRA: dict[str, type] = {}
_PACKAGE_MODULES: frozenset[str] | None = None


def allow(cls: type) -> type:
    """Add ``cls`` (a dataclass, enum or exception class) to the allow-list; returns it.

    Usable as a decorator. Only code can extend the list; a document never can.
    """
    _EXTRA[_name_of(cls)] = cls
    _DC_FOUND.clear()   # a name allowed again may now mean another class
    return cls


def _name_of(cls: type) -> str:
    return f"{cls.__module__}:{cls.__qualname__}"


def _package_modules() -> frozenset[str]:
    """Names of relspan's own modules, listed from its installed files (nothing is imported)."""
    global _PACKAGE_MODULES
    if _PACKAGE_MODULES is None:
        import relspan

        # Read from the folders, not with pkgutil.walk_packages, which imports every subpackage
        # to find its path (relspan.report and matplotlib: 3.2 s of a check that read its cache).
        names = {"relspan"}
        for top in relspan.__path__:
            for info in pkgutil.iter_modules([top]):
                names.add(f"relspan.{info.name}")
            for folder, dirs, _files in os.walk(top):
                dirs[:] = sorted(d for d in dirs if os.path.isfile(os.path.join(folder, d, "__init__.py")))
                for d in dirs:
                    rel = os.path.relpath(os.path.join(folder, d), top).replace(os.sep, ".")
                    names.add(f"relspan.{rel}")
                    for info in pkgutil.iter_modules([os.path.join(folder, d)]):
                        names.add(f"relspan.{rel}.{info.name}")
        _PACKAGE_MODULES = frozenset(names)
    return _PACKAGE_MODULES


def _encodable_class(cls: type) -> bool:
    mod = getattr(cls, "__module__", "") or ""
    return _name_of(cls) in _EXTRA or mod == "relspan" or mod.startswith("relspan.")


def _lookup(name: Any) -> type:
    """The allowed class called ``name`` ("module:qualname"), or CodecError."""
    if not isinstance(name, str) or name.count(":") != 1:
        raise CodecError(f"not a class name: {name!r}")
    if name in _EXTRA:
        return _EXTRA[name]
    found = _FOUND.get(name)
    if found is not None:
        return found
    module, qualname = name.split(":")
    if module not in _package_modules():
        raise CodecError(f"class {name!r} is not one of relspan's own")
    mod = importlib.import_module(module)  # one of relspan's own modules, by its listed name
    obj: Any = mod
    for part in qualname.split("."):
        if not part.isidentifier() or part.startswith("__"):
            raise CodecError(f"not a class name: {name!r}")
        obj = getattr(obj, part, None)
    if not isinstance(obj, type) or obj.__module__ != module or obj.__qualname__ != qualname:
        raise CodecError(f"{name!r} is not a class defined in {module}")
    _FOUND[name] = obj
    return obj


#: classes of relspan's own already found by :func:`_lookup` (a cache of 1,000 windows names
#: about 17,000 classes, each found by the same checks every time)
_FOUND: dict[str, type] = {}


# --------------------------------------------------------------------------- encode

#: per class: ``(name, field names, their fingerprint)`` when its values are written as dataclasses
#: ("dc"), False when they never are (the checks of :meth:`_Encoder.value` made once per class instead of once per
#: value: a window's result holds hundreds of dataclass values)
_DC_SPECS: dict[type, tuple[str, tuple[str, ...]] | bool] = {}


def _fields_mark(names) -> str:
    """8 hex digits naming a dataclass's field names in order (a document written before a field
    was added, removed, renamed or moved no longer matches its class)."""
    return hashlib.sha256(",".join(names).encode("utf-8")).hexdigest()[:8]


def _dataclass_spec(t: type) -> tuple[str, tuple[str, ...], str] | None:
    """What :meth:`_Encoder.value` writes for a dataclass value of class ``t`` (None: not that branch).

    Only classes that reach the dataclass branch there qualify: not enums or warnings (their
    branches come first; pandas objects are not dataclasses), and allowed (``_encodable_class``;
    the allow-list only grows, so a class found allowed stays allowed). A None is looked up
    again each time (a dataclass not allowed yet), so a class allowed later is found then.
    """
    spec = _DC_SPECS.get(t)
    if spec is None:
        from relspan.errors import RelspanWarning

        if not dataclasses.is_dataclass(t) or issubclass(t, (enum.Enum, RelspanWarning)):
            spec = _DC_SPECS[t] = False            # never: this class is not a dataclass there
        elif _encodable_class(t):
            names = tuple(f.name for f in dataclasses.fields(t))
            spec = _DC_SPECS[t] = (_name_of(t), names, _fields_mark(names))
    return spec or None


#: the exact types :meth:`_Encoder.value` writes as themselves without a test of the value (a float
#: also needs to be finite)
_SELF_TYPES = frozenset({str, int, bool, type(None)})

#: per dataclass: ``(name, fingerprint, field values getter)``, recorded the first time one of its values
#: reaches the dataclass branch of :meth:`_Encoder.value` (every test before it depends on the type
#: alone, so each later value of the class goes straight there)
_FAST_DC: dict[type, tuple] = {}

#: dtypes of arrays already found plain (written by reference; not object, structured or void)
_PLAIN_DTYPES: set = set()


#: per class rebuilt from its ``__reduce__`` arguments: its name, recorded as for :data:`_FAST_DC`
_FAST_OBJ: dict[type, str] = {}


def _cannot_store(t: type) -> CodecError:
    return CodecError(f"cannot store a value of type {t.__module__}.{t.__qualname__} in the "
                      "result cache; teach relspan.run.codec about it")


def _field_getter(names: tuple[str, ...]):
    """A function giving the values of fields ``names`` of an object, as a tuple (one C call)."""
    if not names:
        return lambda v: ()
    if len(names) == 1:
        name = names[0]
        return lambda v: (getattr(v, name),)
    return operator.attrgetter(*names)


def _as_itself(x) -> bool:
    """True when :meth:`_Encoder.value` writes ``x`` as itself (the test it makes first, inlined
    by the hot loops: a window's result holds hundreds of such values)."""
    t = type(x)
    return t is str or t is int or t is bool or x is None or (t is float and math.isfinite(x))


#: the types json.loads returns for scalars; a document's scalar is its own value
_JSON_SCALARS = frozenset({str, int, float, bool, type(None)})


def _plain(items) -> bool:
    """True when every item is written as itself (:func:`_as_itself`): such a sequence is kept
    inline however long it is (its JSON is compact, and it is never split into segments)."""
    return all(map(_as_itself, items))


class _Encoder:
    def __init__(self, segment=None) -> None:
        self.arrays: list[np.ndarray] = []
        self.segment = segment      # callback(doc, arrays) -> segment number, or None
        self.inside = False         # encoding a segment's items (segments do not nest)

    def _segmented(self, items: list, kind: str, d: int) -> dict:
        """``items`` written as segments of SEGMENT_ITEMS; the reference that replaces them."""
        first = None
        for start in range(0, len(items), SEGMENT_ITEMS):
            outer, self.arrays, self.inside = self.arrays, [], True
            try:
                if kind == "dict":
                    doc = [[self.value(k, d), self.value(x, d)] for k, x in items[start:start + SEGMENT_ITEMS]]
                else:
                    doc = [self.value(x, d) for x in items[start:start + SEGMENT_ITEMS]]
                arrays = self.arrays
            finally:
                self.arrays, self.inside = outer, False
            number = self.segment(doc, arrays)
            first = number if first is None else first
        return {"$": "segs", "t": kind, "v": [first, -(-len(items) // SEGMENT_ITEMS), len(items)]}

    def _long(self, n: int) -> bool:
        return self.segment is not None and not self.inside and n > SEGMENT_ITEMS

    def array(self, a: np.ndarray) -> dict:
        dt = a.dtype
        if dt not in _PLAIN_DTYPES:
            if dt.hasobject:
                return {"$": "objarray", "shape": list(a.shape),
                        "items": [self.value(v, 1) for v in a.ravel(order="C").tolist()]}
            if dt.fields is not None or dt.kind not in "biufcmMSU":
                raise CodecError(f"cannot store an array of dtype {dt}")
            _PLAIN_DTYPES.add(dt)
        # not copied: the caller writes the arrays out before it changes them (relspan.run.cache
        # packs or spills them within the same call); a view of another layout becomes C order
        flags = a.flags
        arrays = self.arrays
        arrays.append(a if flags.c_contiguous else np.array(a, order="C"))
        if flags.writeable:
            return {"$": "array", "i": len(arrays) - 1}
        return {"$": "array", "i": len(arrays) - 1, "ro": True}

    def value(self, v: Any, depth: int = 0) -> Any:
        if depth > MAX_DEPTH:
            raise CodecError("value nested too deeply")
        t = type(v)
        if t is np.ndarray:                 # the commonest non-scalar, first
            return self.array(v)
        if t in _SELF_TYPES:                # str, int, bool, None (exact types: subclasses go below)
            return v
        d = depth + 1
        fast = _FAST_DC.get(t)
        if fast is not None:                # a dataclass already seen to reach its branch below
            name, mark, get = fast
            return {"$": "dc", "c": name, "h": mark,
                    "v": [x if (tx := type(x)) in _SELF_TYPES or (tx is float and isfinite(x))
                          else self.value(x, d) for x in get(v)]}
        if t is bytes:
            return {"$": "bytes", "a": self.array(np.frombuffer(v, dtype=np.uint8))}
        obj_name = _FAST_OBJ.get(t)
        if obj_name is not None:            # a class already seen to reach the last branch below
            return self._reduced(v, t, obj_name, d)
        if t is float:
            if isfinite(v):
                return v
            return {"$": "float", "v": repr(v)}
        if v is None or isinstance(v, (bool, str)):
            return v
        if isinstance(v, np.ndarray):
            return self.array(v)
        if isinstance(v, np.generic):
            return {"$": "scalar", "a": self.array(np.asarray(v))}
        if t is tuple or t is list:
            if self._long(len(v)) and not _plain(v):   # long plain sequences stay inline
                return self._segmented(list(v), t.__name__, d)
            items = [x if (tx := type(x)) in _SELF_TYPES or (tx is float and isfinite(x))
                     else self.value(x, d) for x in v]
            return {"$": "tuple", "v": items} if t is tuple else items
        if t is dict:
            if self._long(len(v)):
                return self._segmented(list(v.items()), "dict", d)
            return {"$": "dict", "v": [[k if (tk := type(k)) in _SELF_TYPES or (tk is float and isfinite(k))
                                        else self.value(k, d),
                                        x if (tx := type(x)) in _SELF_TYPES or (tx is float and isfinite(x))
                                        else self.value(x, d)] for k, x in v.items()]}
        if t in (set, frozenset):  # in a fixed order: a set's iteration order follows the string hash seed
            return {"$": t.__name__, "v": [self.value(x, d) for x in sorted(v, key=lambda x: (type(x).__name__,
                                                                                          repr(x)))]}
        spec = _dataclass_spec(t)
        if spec is not None:
            # every test above depends on the type alone, so values of this class always come here:
            # the next ones take the fast path at the top
            _FAST_DC[t] = (spec[0], spec[2], _field_getter(spec[1]))
            values = [getattr(v, n) for n in spec[1]]
            return {"$": "dc", "c": spec[0], "h": spec[2],
                    "v": [x if _as_itself(x) else self.value(x, d) for x in values]}
        if t in (bytes, bytearray):
            return {"$": t.__name__, "a": self.array(np.frombuffer(bytes(v), dtype=np.uint8))}
        if t is complex:
            return {"$": "complex", "v": [self.value(v.real, d), self.value(v.imag, d)]}
        if isinstance(v, PurePath):
            kind = "winpath" if isinstance(v, PureWindowsPath) else "path"
            return {"$": kind, "v": str(v)}
        pd_doc = self._pandas(v, d)
        if pd_doc is not None:
            return pd_doc
        if isinstance(v, enum.Enum) and _encodable_class(t):
            return {"$": "enum", "c": _name_of(t), "v": self.value(v.value, d)}
        from relspan.errors import RelspanWarning

        if isinstance(v, RelspanWarning) and _encodable_class(t):
            return {"$": "warning", "c": _name_of(t), "args": self.value(tuple(v.args), d),
                    "attrs": self.value(dict(vars(v)), d)}
        if dataclasses.is_dataclass(v) and not isinstance(v, type) and _encodable_class(t):
            names = [f.name for f in dataclasses.fields(v)]
            return {"$": "dc", "c": _name_of(t), "h": _fields_mark(names),
                    "v": [self.value(getattr(v, n), d) for n in names]}
        if _encodable_class(t) and "__reduce__" in vars(t):
            # as for dataclasses, every test above depends on the type alone: the next values of
            # this class come straight here
            _FAST_OBJ[t] = _name_of(t)
            return self._reduced(v, t, _FAST_OBJ[t], d)
        raise _cannot_store(t)

    def _reduced(self, v: Any, t: type, name: str, d: int) -> dict:
        """An allowed class rebuilt from the plain arguments of its ``__reduce__``: ``(t, args)``."""
        red = v.__reduce__()
        if isinstance(red, tuple) and len(red) == 2 and red[0] is t and isinstance(red[1], tuple):
            return {"$": "obj", "c": name, "args": [self.value(x, d) for x in red[1]]}
        raise _cannot_store(t)

    def _pandas(self, v: Any, d: int):
        import pandas as pd

        if isinstance(v, pd.DataFrame):
            return {"$": "frame", "index": self._index(v.index, d),
                    "columns": self._index(v.columns, d),
                    "data": [self._series_values(v.iloc[:, j], d) for j in range(v.shape[1])]}
        if isinstance(v, pd.Series):
            return {"$": "series", "index": self._index(v.index, d), "name": self.value(v.name, d),
                    "data": self._series_values(v, d)}
        if isinstance(v, pd.Index):
            return self._index(v, d)
        if isinstance(v, pd.Timestamp):
            if v.tz is not None:
                raise CodecError("cannot store a time-zone aware Timestamp")
            return {"$": "timestamp", "a": self.array(np.asarray(v.to_datetime64()))}
        if v is pd.NaT:
            return {"$": "nat"}
        if v is pd.NA:
            return {"$": "na"}
        return None

    def _values(self, obj) -> dict:
        """The values of a Series or Index: a numpy array, or text with its pandas dtype name."""
        import pandas as pd

        dtype = obj.dtype
        if isinstance(dtype, pd.StringDtype) and str(dtype) in _TEXT_DTYPES:
            items = np.empty(len(obj), dtype=object)
            items[:] = [None if v is pd.NA or (isinstance(v, float) and v != v) else v
                        for v in obj.tolist()]
            return {"$": "text", "dtype": str(dtype), "a": self.array(items)}
        if not isinstance(dtype, np.dtype):
            raise CodecError(f"cannot store pandas values of dtype {dtype}")
        return self.array(obj.to_numpy(copy=True))

    def _series_values(self, s, d: int):
        return self._values(s)

    def _index(self, idx, d: int):
        import pandas as pd

        if isinstance(idx, pd.MultiIndex):
            raise CodecError("cannot store a pandas MultiIndex")
        name = self.value(idx.name, d)
        if isinstance(idx, pd.RangeIndex):
            return {"$": "range", "v": [idx.start, idx.stop, idx.step], "name": name}
        return {"$": "index", "a": self._values(idx), "name": name}


def encode(value: Any, segment=None) -> tuple[Any, list[np.ndarray]]:
    """``(document, arrays)``: a JSON-ready document and the arrays it refers to by position.

    The arrays are the value's own where they are C-contiguous (not copies): store them before
    the value changes.

    ``segment(doc, arrays) -> int``, if given, receives the segments of long sequences and
    dicts in order (see the module's notes) and returns each one's number: 0, 1, 2, ...
    """
    enc = _Encoder(segment)
    try:
        doc = enc.value(value)
    except RecursionError:
        raise CodecError("value nested too deeply") from None
    return doc, enc.arrays


# --------------------------------------------------------------------------- decode

class _Decoder:
    def __init__(self, arrays, segments=None) -> None:
        self.arrays = arrays
        self.segments = segments    # callback(number) -> (doc, arrays), or None
        self.next_segment = 0

    def _segmented(self, doc: dict, d: int) -> Any:
        """The items of a ``segs`` reference, read segment by segment in the order written."""
        kind, ref = doc.get("t"), doc.get("v")
        if self.segments is None or kind not in ("tuple", "list", "dict") or not (
                isinstance(ref, list) and len(ref) == 3 and all(type(x) is int for x in ref)):
            raise CodecError("a malformed or unexpected segment reference")
        first, count, total = ref
        if first != self.next_segment or not 0 <= total <= count * SEGMENT_ITEMS \
                or count != -(-total // SEGMENT_ITEMS):
            raise CodecError("segments out of order")
        items: list = []
        for number in range(first, first + count):
            sdoc, arrays = self.segments(number)
            part = _Decoder(arrays).value(sdoc, d)   # segments do not nest
            if not isinstance(part, list):
                raise CodecError("a malformed segment")
            items.extend(part)
        self.next_segment = first + count
        if len(items) != total:
            raise CodecError("a segment of the wrong length")
        if kind == "dict":
            out = {}
            for pair in items:
                if not isinstance(pair, list) or len(pair) != 2:
                    raise CodecError("bad dict item")
                out[pair[0]] = pair[1]
            return out
        return tuple(items) if kind == "tuple" else items

    def array(self, doc: Any) -> np.ndarray:
        if not isinstance(doc, dict):
            raise CodecError("not an array reference")
        if doc.get("$") == "objarray":
            shape = tuple(int(s) for s in doc["shape"])
            items = [self.value(x, 1) for x in doc["items"]]
            out = np.empty(len(items), dtype=object)
            out[:] = items
            return out.reshape(shape)
        if doc.get("$") != "array":
            raise CodecError("not an array reference")
        i = doc["i"]
        if type(i) is not int or not 0 <= i < len(self.arrays):
            raise CodecError("array reference out of range")
        a = self.arrays[i]
        if not isinstance(a, np.ndarray) or a.dtype.hasobject:
            raise CodecError("not a plain array")
        if doc.get("ro"):
            a.setflags(write=False)
        return a

    def value(self, doc: Any, depth: int = 0) -> Any:
        if depth > MAX_DEPTH:
            raise CodecError("document nested too deeply")
        d = depth + 1
        t = type(doc)
        if t is dict:
            tag = doc.get("$")
            if tag == "array":               # the commonest tags first (a dict subclass, and every
                # other tag, take the general chain below)
                return self._plain_array(doc)
            if tag == "tuple":
                return self._tuple(doc, d)
            if tag == "dc":
                return self._dc(doc, d)
            if tag == "dict":
                return self._dict(doc, d)
        elif t is list:
            return [x if type(x) in _JSON_SCALARS else self.value(x, d) for x in doc]
        if doc is None or isinstance(doc, (bool, str, int, float)):
            return doc
        if isinstance(doc, list):
            return [x if type(x) in _JSON_SCALARS else self.value(x, d) for x in doc]
        if not isinstance(doc, dict) or not isinstance(doc.get("$"), str):
            raise CodecError("not a codec document")
        tag = doc["$"]
        if tag == "dc":
            return self._dc(doc, d)
        if tag == "float":
            text = doc["v"]
            if text not in ("nan", "inf", "-inf"):
                raise CodecError("bad float")
            return float(text)
        if tag in ("array", "objarray"):
            return self.array(doc)
        if tag == "scalar":
            a = self.array(doc["a"])
            if a.ndim != 0:
                raise CodecError("bad scalar")
            return a[()]
        if tag == "tuple":
            return self._tuple(doc, d)
        if tag == "segs":
            return self._segmented(doc, d)
        if tag == "dict":
            return self._dict(doc, d)
        if tag in ("set", "frozenset"):
            items = [self.value(x, d) for x in self._list(doc["v"])]
            return set(items) if tag == "set" else frozenset(items)
        if tag in ("bytes", "bytearray"):
            a = self.array(doc["a"])
            if a.dtype != np.uint8 or a.ndim != 1:
                raise CodecError("bad bytes")
            return bytes(a.tobytes()) if tag == "bytes" else bytearray(a.tobytes())
        if tag == "complex":
            re_, im = (self.value(x, d) for x in self._list(doc["v"]))
            return complex(re_, im)
        if tag in ("path", "winpath"):
            text = doc["v"]
            if not isinstance(text, str):
                raise CodecError("bad path")
            from pathlib import Path

            return Path(text) if tag == "path" else PureWindowsPath(text)
        if tag in ("frame", "series", "range", "index", "timestamp", "nat", "na"):
            return self._pandas(tag, doc, d)
        if tag == "enum":
            cls = _lookup(doc["c"])
            if not issubclass(cls, enum.Enum):
                raise CodecError(f"{doc['c']} is not an enum")
            return cls(self.value(doc["v"], d))
        if tag == "warning":
            from relspan.errors import RelspanWarning

            cls = _lookup(doc["c"])
            if not issubclass(cls, RelspanWarning):
                raise CodecError(f"{doc['c']} is not a relspan warning")
            w = cls.__new__(cls)
            args = self.value(doc["args"], d)
            attrs = self.value(doc["attrs"], d)
            if not isinstance(args, tuple) or not isinstance(attrs, dict) \
                    or not all(isinstance(k, str) and k.isidentifier() and not k.startswith("__")
                               for k in attrs):
                raise CodecError("bad warning")
            w.args = args
            vars(w).update(attrs)
            return w
        if tag == "obj":
            cls = _lookup(doc["c"])
            if "__reduce__" not in vars(cls) or dataclasses.is_dataclass(cls):
                raise CodecError(f"{doc['c']} is not rebuilt from arguments")
            return cls(*[self.value(x, d) for x in self._list(doc["args"])])
        raise CodecError(f"unknown tag {tag!r}")

    def _dc(self, doc: dict, d: int) -> Any:
        """A dataclass value, its fields set directly (no ``__init__`` runs)."""
        cls, names, plain = self._dataclass(doc.get("c"), doc.get("h"))
        stored = self._list(doc["v"])
        if len(stored) != len(names):
            raise CodecError(f"the fields of {doc['c']} have changed")
        obj = object.__new__(cls)
        values = [item if type(item) in _JSON_SCALARS else self.value(item, d) for item in stored]
        if plain:       # fields kept in the instance's __dict__: set together, in the same order
            obj.__dict__.update(zip(names, values))
        else:
            for name, item in zip(names, values):
                object.__setattr__(obj, name, item)
        return obj

    def _tuple(self, doc: dict, d: int) -> tuple:
        return tuple([x if type(x) in _JSON_SCALARS else self.value(x, d) for x in self._list(doc["v"])])

    def _dict(self, doc: dict, d: int) -> dict:
        out = {}
        for pair in self._list(doc["v"]):
            if type(pair) is not list and not isinstance(pair, list) or len(pair) != 2:
                raise CodecError("bad dict item")
            k, x = pair
            out[k if type(k) in _JSON_SCALARS else self.value(k, d)] = (
                x if type(x) in _JSON_SCALARS else self.value(x, d))
        return out

    def _plain_array(self, doc: dict) -> np.ndarray:
        """:meth:`array` of a reference whose tag is ``"array"``."""
        i = doc["i"]
        if type(i) is not int or not 0 <= i < len(self.arrays):
            raise CodecError("array reference out of range")
        a = self.arrays[i]
        if type(a) is not np.ndarray and not isinstance(a, np.ndarray) or a.dtype.hasobject:
            raise CodecError("not a plain array")
        if doc.get("ro"):
            a.setflags(write=False)
        return a

    @staticmethod
    def _dataclass(name: Any, mark: Any) -> tuple[type, tuple[str, ...], bool]:
        """The allowed dataclass ``name`` and its field names, if they are those the document was
        written with (``mark``); found once per class and fingerprint."""
        found = _DC_FOUND.get((name, mark))
        if found is None:
            cls = _lookup(name)
            if not dataclasses.is_dataclass(cls):
                raise CodecError(f"{name} is not a dataclass")
            names = tuple(f.name for f in dataclasses.fields(cls))
            if mark != _fields_mark(names):
                raise CodecError(f"the fields of {name} have changed")
            found = _DC_FOUND[(name, mark)] = (cls, names, _fields_in_dict(cls, names))
        return found

    @staticmethod
    def _list(v: Any) -> list:
        if not isinstance(v, list):
            raise CodecError("expected a list")
        return v

    def _values(self, doc):
        """Values stored by ``_Encoder._values``: an array, or text with its pandas dtype."""
        import pandas as pd

        if isinstance(doc, dict) and doc.get("$") == "text":
            if doc.get("dtype") not in _TEXT_DTYPES:
                raise CodecError("bad text dtype")
            return pd.array(list(self.array(doc["a"])), dtype=doc["dtype"])
        return self.array(doc)

    def _pandas(self, tag: str, doc: dict, d: int):
        import pandas as pd

        if tag == "nat":
            return pd.NaT
        if tag == "na":
            return pd.NA
        if tag == "timestamp":
            return pd.Timestamp(self.array(doc["a"])[()])
        if tag == "range":
            start, stop, step = doc["v"]
            if not all(type(x) is int for x in (start, stop, step)):
                raise CodecError("bad range")
            return pd.RangeIndex(start, stop, step, name=self.value(doc["name"], d))
        if tag == "index":
            return pd.Index(self._values(doc["a"]), name=self.value(doc["name"], d), copy=False)
        index = self.value(doc["index"], d)
        if tag == "series":
            return pd.Series(self._values(doc["data"]), index=index, name=self.value(doc["name"], d),
                             copy=False)
        columns = self.value(doc["columns"], d)
        data = [self._values(x) for x in self._list(doc["data"])]
        if len(data) != len(columns):
            raise CodecError("bad frame")
        frame = pd.DataFrame({j: a for j, a in enumerate(data)}, index=index, copy=False)
        frame.columns = columns
        return frame


#: (class name, fields' fingerprint) -> (class, field names, whether they live in the instance's
#: ``__dict__``), as checked by ``_Decoder._dataclass``
_DC_FOUND: dict[tuple[str, str], tuple[type, tuple[str, ...], bool]] = {}


def _fields_in_dict(cls: type, names: tuple[str, ...]) -> bool:
    """True when setting each field with ``object.__setattr__`` only puts it in the instance's
    ``__dict__``: the instances have one, and no class in the MRO defines a descriptor that would
    take the assignment (slots, properties) under a field's name."""
    if "__dict__" not in dir(cls) or any("__slots__" in vars(k) for k in cls.__mro__[:-1]):
        return False
    for name in names:
        for k in cls.__mro__:
            if name in vars(k):
                kind = type(vars(k)[name])
                if hasattr(kind, "__set__") or hasattr(kind, "__delete__"):
                    return False
                break
    return True


#: pandas text dtypes stored as text (``str`` is pandas 3's default, ``string`` the NA-flavoured one)
_TEXT_DTYPES = ("str", "string")


def decode(doc: Any, arrays, segments=None) -> Any:
    """The value :func:`encode` was given; raises :class:`CodecError` on anything else.

    ``segments(number) -> (doc, arrays)`` returns the segments :func:`encode` gave its
    ``segment`` callback; each is asked for once, in the order written.
    """
    try:
        return _Decoder(list(arrays), segments).value(doc)
    except CodecError:
        raise
    except (KeyError, TypeError, ValueError, AttributeError, RecursionError, ImportError) as err:
        raise CodecError(f"not a valid document ({type(err).__name__}: {err})") from None
