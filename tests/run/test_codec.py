"""relspan.run.codec: results as JSON plus plain arrays, decoded only through an allow-list."""

from __future__ import annotations

import json
import os
import pickle
import shutil
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from relspan.errors import IllConditionedWarning, NumericalWarning
from relspan.run import codec
from relspan.run.cache import ENTRY_FORMAT

REPO = Path(__file__).resolve().parents[2]


def round_trip(value):
    doc, arrays = codec.encode(value)
    text = json.dumps(doc, allow_nan=False)  # the document really is JSON
    return codec.decode(json.loads(text), [np.array(a) for a in arrays])


def same_doc(a, b) -> bool:
    """Equal documents and bit-identical arrays (the strictest equality the codec can offer)."""
    da, aa = codec.encode(a)
    db, ab = codec.encode(b)
    return (json.dumps(da, sort_keys=True) == json.dumps(db, sort_keys=True) and len(aa) == len(ab)
            and all(x.dtype == y.dtype and x.shape == y.shape and x.tobytes() == y.tobytes()
                    for x, y in zip(aa, ab)))


@codec.allow
@dataclass(frozen=True, slots=True)
class Inner:
    q: int
    basis: np.ndarray


@codec.allow
@dataclass(frozen=True)
class Outer:
    name: str
    inner: Inner
    by_key: dict
    later: tuple = ()
    derived: float = field(init=False, default=0.0)

    def __post_init__(self):
        object.__setattr__(self, "derived", 1.5)


class TestRoundTrip:
    @pytest.mark.parametrize("value", [
        None, True, 0, -3, 2 ** 80, 0.1, -0.0, 1e-310, float("inf"), float("-inf"), "text",
        "lone \udcff surrogate", (1, (2, 3)), [1, [2]], {"a": 1}, {(1, "x"): 2, 3: "y"}, {1, 2},
        frozenset({"a"}), b"\x00\xff", complex(1, -2), Path("data/x.csv"),
    ])
    def test_plain_values_come_back_equal_and_of_the_same_type(self, value):
        back = round_trip(value)
        assert back == value and type(back) is type(value)

    def test_nan_comes_back_as_nan(self):
        assert np.isnan(round_trip(float("nan")))

    def test_float_bits_are_kept(self):
        x = np.random.default_rng(0).standard_normal(1000)
        back = round_trip([float(v) for v in x])
        assert np.array(back).tobytes() == x.tobytes()

    @pytest.mark.parametrize("a", [
        np.arange(12.0).reshape(3, 4), np.zeros((0, 3)), np.array([1, 2], dtype=np.int32),
        np.array(["2020-01", "2021-06"], dtype="datetime64[M]"), np.array([True, False]),
        np.asfortranarray(np.arange(6.0).reshape(2, 3)), np.array([1 + 2j]), np.array(["ab", "c"]),
    ])
    def test_arrays_keep_dtype_shape_and_bits(self, a):
        back = round_trip(a)
        assert back.dtype == a.dtype and back.shape == a.shape and np.array_equal(back, a)

    def test_read_only_arrays_stay_read_only(self):
        a = np.ones(3)
        a.setflags(write=False)
        assert not round_trip(a).flags.writeable

    def test_object_arrays_are_stored_element_by_element(self):
        a = np.array([None, "x", 1.5], dtype=object)
        back = round_trip(a)
        assert back.dtype == object and list(back) == [None, "x", 1.5]

    def test_numpy_scalars_keep_their_type(self):
        for v in (np.float64(0.25), np.int64(7), np.float32(1.5), np.bool_(True)):
            back = round_trip(v)
            assert type(back) is type(v) and back == v

    def test_dataclasses_rebuild_every_field_without_running_init(self):
        v = Outer("a", Inner(2, np.eye(2)), {("equal", 1): Inner(1, np.ones(2))})
        back = round_trip(v)
        assert isinstance(back, Outer) and back.derived == 1.5 and back.later == ()
        assert back.inner.q == 2 and np.array_equal(back.by_key[("equal", 1)].basis, np.ones(2))

    def test_typed_warnings_keep_class_message_and_fields(self):
        w = IllConditionedWarning("window 3 is nearly singular", window="1990-1999", condition=1e12)
        w.located(dataset="d", plan="r")
        back = round_trip((w, NumericalWarning("slow")))
        assert type(back[0]) is IllConditionedWarning and str(back[0]) == str(w)
        assert (back[0].window, back[0].condition, back[0].plan) == ("1990-1999", 1e12, "r")
        assert type(back[1]) is NumericalWarning and back[1].message == "slow"

    def test_pandas_frames_series_and_indexes(self):
        frame = pd.DataFrame({"a": [1.0, np.nan], "label": ["x", None],
                              "t": np.array(["2020-01-01", "2020-02-01"], dtype="datetime64[s]")},
                             index=pd.Index([10, 20], name="row"))
        back = round_trip({"f": frame, "s": frame["a"], "r": pd.RangeIndex(2, 9, 3)})
        pd.testing.assert_frame_equal(back["f"], frame)
        pd.testing.assert_series_equal(back["s"], frame["a"])
        pd.testing.assert_index_equal(back["r"], pd.RangeIndex(2, 9, 3))


class TestAllowList:
    def test_a_class_outside_relspan_cannot_be_stored(self):
        @dataclass
        class Stranger:
            x: int

        with pytest.raises(codec.CodecError, match="cannot store"):
            codec.encode(Stranger(1))

    @pytest.mark.parametrize("name", ["os:system", "builtins:eval", "pickle:loads", "relspan.cli:main",
                                      "relspan.run.cache:ResultCache", "relspan:__builtins__",
                                      "relspan.errors:RelspanError.__init__", "nonsense"])
    def test_documents_naming_anything_else_are_refused(self, name):
        for tag in ("dc", "obj", "enum", "warning"):
            doc = {"$": tag, "c": name, "f": [], "args": [], "v": 0, "attrs": {"$": "dict", "v": []}}
            with pytest.raises(codec.CodecError):
                codec.decode(doc, [])

    def test_a_document_cannot_name_a_module_outside_the_package_even_if_imported(self):
        import subprocess  # noqa: F401 - imported, still not allowed

        with pytest.raises(codec.CodecError, match="not one of relspan's own"):
            codec.decode({"$": "obj", "c": "subprocess:Popen", "args": [["true"]]}, [])

    def test_changed_fields_are_a_codec_error_not_a_half_built_object(self):
        doc, arrays = codec.encode(Inner(1, np.zeros(1)))
        doc["v"] = doc["v"][:1]
        with pytest.raises(codec.CodecError, match="fields"):
            codec.decode(doc, arrays)

    def test_a_document_written_before_a_field_was_renamed_is_refused(self):
        """Values are listed without their names: the fingerprint of the names must match."""
        doc, arrays = codec.encode(Inner(1, np.zeros(1)))
        assert doc["h"] == codec._fields_mark(["q", "basis"])
        doc["h"] = codec._fields_mark(["corank", "basis"])       # same count, another name
        with pytest.raises(codec.CodecError, match="fields"):
            codec.decode(doc, arrays)

    def test_deep_nesting_is_refused(self):
        doc: object = 1
        for _ in range(codec.MAX_DEPTH + 5):
            doc = [doc]
        with pytest.raises(codec.CodecError):
            codec.decode(doc, [])


def test_a_whole_demo_analysis_round_trips_exactly(tmp_path, monkeypatch):
    """Every result type of a real run (plans, windows, findings, warnings, pandas overview),
    through the codec alone and through a cache entry written in segments: the demo's plans
    have at most 14 windows, so segments of 2 items make every longer sequence a segmented one."""
    from relspan.run.cache import ResultCache, task_key
    from relspan.run.pipeline import run_analysis
    from relspan.spec import load_spec

    run = run_analysis(load_spec(REPO / "specs" / "demo.yaml"), jobs=1, use_cache=False, progress=False)
    cache = ResultCache(tmp_path)
    monkeypatch.setattr(codec, "SEGMENT_ITEMS", 2)
    for ds in run.datasets:
        back = round_trip((ds, run.warnings))
        assert type(back[0]) is type(ds)
        assert same_doc(back, (ds, run.warnings))
        assert back[0].prepared.overview.values.equals(ds.prepared.overview.values)
        key = task_key(dataset=ds.spec.id)
        cache.put(key, (ds, run.warnings))
        with np.load(cache.path_for(key), allow_pickle=False) as npz:
            assert len(json.loads(npz["header"].tobytes())["segments"]) > 10
        cached = cache.get(key)
        assert same_doc(cached, (ds, run.warnings))
        assert cached[0].prepared.overview.values.equals(ds.prepared.overview.values)
    assert cache.stats.hits == len(run.datasets) and cache.stats.corrupt == 0


@pytest.fixture
def project(tmp_path):
    shutil.copytree(REPO / "tests" / "corpus" / "ok-plain" / "project", tmp_path / "p")
    return tmp_path / "p"


def test_cached_rebuild_gives_identical_site_bytes(project):
    """The codec's round trip through the real command: cold build, then a build served by the cache."""
    from corpus.harness import run_cli, snapshot

    first = run_cli("build", "spec.yaml", "--jobs", "1", "--quiet", "--out", "a", cwd=project)
    assert first.returncode == 0, first.stderr
    second = run_cli("build", "spec.yaml", "--jobs", "1", "--quiet", "--out", "b", cwd=project)
    assert second.returncode == 0, second.stderr
    assert list((project / ".relspan-cache").rglob("*.npz"))
    assert snapshot(project / "a") == snapshot(project / "b")


class _Planted:
    def __reduce__(self):
        return (os.system, (f"touch {os.environ['RELSPAN_TEST_MARK']}",))


def test_planted_pickle_and_forged_entry_in_a_sent_project_run_nothing(project, tmp_path, monkeypatch):
    """A project folder someone sent, with a cache full of pickles: ignored with a note; exit 0."""
    from corpus.harness import run_cli

    mark = tmp_path / "EXECUTED"
    monkeypatch.setenv("RELSPAN_TEST_MARK", str(mark))
    from relspan.run.cache import ResultCache

    import hashlib

    from relspan.data.sources import file_sha256
    from relspan.run.pipeline import _dataset_key
    from relspan.spec import load_spec

    spec = load_spec(project / "spec.yaml")
    ds = spec.datasets[0]
    key = _dataset_key(spec, ds, spec.plans_for(ds), file_sha256(ds.source_path))
    cache = project / ".relspan-cache"
    payload = pickle.dumps(_Planted())
    # the old format, with a valid (unsigned) header, at the very key this build looks up
    (cache / key[:2]).mkdir(parents=True)
    (cache / key[:2] / f"{key}.pkl").write_bytes(
        b"RSPC\x01\n" + key.encode() + hashlib.sha256(payload).digest() + payload)
    # and a forged entry in the new layout at the same key: an npz whose array member is a pickle
    env_folder = ResultCache(tmp_path / "probe").environment_folder.name
    (cache / env_folder / key[:2]).mkdir(parents=True)
    evil = np.empty(1, dtype=object)
    evil[0] = _Planted()
    header = json.dumps({"format": ENTRY_FORMAT, "key": key, "environment": env_folder[4:],
                         "packs": 1, "arrays": [[0, 0, [1]]], "value": {"$": "array", "i": 0}}).encode()
    with open(cache / env_folder / key[:2] / f"{key}.npz", "wb") as fh:
        np.savez(fh, header=np.frombuffer(header, dtype=np.uint8), p0=evil)
    for command in ("check", "build"):
        result = run_cli(command, "spec.yaml", "--jobs", "1", "--quiet", cwd=project)
        assert result.returncode == 0, result.stderr
        assert not mark.exists(), "code from the cache ran"
        assert "Traceback" not in result.stderr
        notes = [line for line in result.stderr.splitlines() if line.startswith("note:")]
        if command == "check":
            assert any("older cache format" in n for n in notes), result.stderr
            assert any("not a valid relspan cache entry" in n for n in notes), result.stderr
    assert not list(cache.rglob("*.pkl")), "the build prunes the old-format files"


def _forget_classes(codec) -> None:
    """Empty the encoder's per-class memories (the next values take the full checks)."""
    codec._DC_SPECS.clear()
    codec._FAST_DC.clear()
    codec._FAST_OBJ.clear()


def test_the_per_class_shortcut_writes_the_documents_of_the_checks_it_replaces():
    # the encoder remembers, per class, that its values are written as dataclasses (or rebuilt from
    # their __reduce__ arguments); the documents must be those of the full checks, and a dataclass
    # allowed only later must be found then
    import dataclasses as dc
    import json

    from relspan.analysis.inference import CoefficientInterval, CoefficientIntervals
    from relspan.analysis.intervals import Interval
    from relspan.run import codec

    packed = CoefficientIntervals.from_rows(("x", "y"), [(0, 1)], [(1.5, 0.5, 2.5, 0.9, "percentile", 99)],
                                            0.9, "percentile")
    value = {"a": (CoefficientInterval("x", "y", Interval(1.0, 0.5, float("nan"), 0.9, "percentile", 99)),),
             "b": [Interval(2.0, 1.0, 3.0, 0.8, "basic", 10)], 3.5: packed, b"k": (packed, b"\x00\x01")}
    _forget_classes(codec)
    first = json.dumps(codec.encode(value)[0])
    assert Interval in codec._DC_SPECS and codec._DC_SPECS[Interval][1] == tuple(
        f.name for f in dc.fields(Interval))
    assert Interval in codec._FAST_DC and CoefficientIntervals in codec._FAST_OBJ
    assert json.dumps(codec.encode(value)[0]) == first          # from the remembered classes
    back = codec.decode(*codec.encode(value))
    assert json.dumps(codec.encode(back)[0]) == first
    assert back["a"][0].interval.high != back["a"][0].interval.high    # NaN kept
    _forget_classes(codec)
    codec._DC_SPECS.update({Interval: False, CoefficientInterval: False})   # never remembered: full checks
    slow = codec._Encoder()
    orig = codec._dataclass_spec
    try:
        codec._dataclass_spec = lambda t: None
        assert json.dumps(slow.value(value)) == first
        assert not codec._FAST_DC
    finally:
        codec._dataclass_spec = orig
        _forget_classes(codec)

    @dc.dataclass
    class Later:
        v: float

    with pytest.raises(codec.CodecError):
        codec.encode(Later(1.0))                                 # not allowed: refused
    codec.allow(Later)
    assert codec.decode(*codec.encode(Later(2.0))).v == 2.0     # allowed later: found then


def test_plain_sequences_are_written_as_the_item_by_item_walk_writes_them():
    import json

    from relspan.run import codec

    value = {"t": (1, 2.5, "x", -0.0), "l": [1.0, 3], "mixed": (1.0, float("nan"), True, np.float64(2.0), None),
             "nested": [(1.0, 2.0), [float("inf")]], "bools": [True, False],
             "dc": Inner(2, np.zeros(1)), "long": [1.5] * 40 + [None]}
    fast = codec.encode(value)
    orig = codec._as_itself
    try:
        codec._as_itself = lambda x: False         # every item through _Encoder.value
        slow = codec.encode(value)
    finally:
        codec._as_itself = orig
    assert json.dumps(fast[0]) == json.dumps(slow[0]) and len(fast[1]) == len(slow[1])
    segs = []
    seg_doc = codec.encode(value, segment=lambda doc, arrays: segs.append(doc) or len(segs) - 1)[0]
    assert not segs and json.dumps(seg_doc) == json.dumps(fast[0])   # plain long lists stay inline
    back = codec.decode(*fast)
    assert back["t"] == (1, 2.5, "x", -0.0) and type(back["mixed"][2]) is bool and np.isnan(back["mixed"][1])


class _Stored:
    """A data descriptor used as a dataclass field: the value lives under another name."""

    def __set_name__(self, owner, name):
        self.name = "_" + name

    def __get__(self, obj, typ=None):
        return 0.0 if obj is None else getattr(obj, self.name)

    def __set__(self, obj, value):
        object.__setattr__(obj, self.name, float(value))


def test_decoded_dataclasses_get_their_fields_as_a_field_by_field_assignment_would():
    # the decoder fills an instance's __dict__ in one update where that is what assigning each field
    # would do; slots and data descriptors under a field's name keep the assignment
    import dataclasses as dc

    from relspan.run import codec

    @dc.dataclass(frozen=True)
    class Plain:
        a: float
        b: tuple

    @dc.dataclass(frozen=True, slots=True)
    class Slotted:
        a: float
        b: tuple

    @dc.dataclass
    class Described:
        a: _Stored = _Stored()
        b: int = 0

    for cls in (Plain, Slotted, Described):
        codec.allow(cls)
    assert codec._fields_in_dict(Plain, ("a", "b"))
    assert not codec._fields_in_dict(Slotted, ("a", "b"))
    assert not codec._fields_in_dict(Described, ("a", "b"))
    for value in (Plain(1.5, (2, "x")), Slotted(1.5, (2, "x")), Described(3, 4)):
        back = codec.decode(*codec.encode([value, value]))
        assert back == [value, value] and type(back[0]) is type(value)
        if hasattr(value, "__dict__"):
            assert vars(back[0]) == vars(value) and list(vars(back[0])) == list(vars(value))
    assert codec.decode(*codec.encode(Described(3, 4))).a == 3.0
