"""relspan.run.cache: content keys and the on-disk result cache."""

from __future__ import annotations

import io
import json
import os
import pickle
import subprocess
import zipfile
import sys
import textwrap
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

import numpy as np
import pytest

from relspan.errors import OutputError, RelspanNote, RelspanWarning
from relspan.run import cache as cache_module
from relspan.run import codec
from relspan.run.cache import ENTRY_FORMAT, ResultCache, canonical_json, task_key
from relspan.run.codec import CodecError

from .test_codec import same_doc

KEY = task_key(task="demo", n=1)


@codec.allow
@dataclass(frozen=True, slots=True)
class Result:
    corank: int
    angles: np.ndarray


class TestTaskKey:
    def test_is_64_hex_digits(self):
        assert len(KEY) == 64 and set(KEY) <= set("0123456789abcdef")

    def test_does_not_depend_on_argument_or_dict_order(self):
        a = task_key(spec={"width": 40, "step": 8}, task="t")
        b = task_key(task="t", spec={"step": 8, "width": 40})
        assert a == b

    def test_tuples_and_lists_with_equal_items_agree(self):
        assert task_key(cols=("a", "b")) == task_key(cols=["a", "b"])

    def test_numpy_scalars_agree_with_python_numbers(self):
        assert task_key(x=np.float64(0.1), k=np.int64(3)) == task_key(x=0.1, k=3)

    def test_minus_zero_and_zero_agree(self):
        assert task_key(x=-0.0) == task_key(x=0.0)

    def test_paths_are_normalised_to_posix_text(self):
        assert task_key(p=Path("data/./x.csv")) == task_key(p=PurePosixPath("data/x.csv"))

    def test_integer_and_float_are_kept_apart(self):
        assert task_key(width=1) != task_key(width=1.0)

    def test_a_path_is_not_the_same_as_its_text(self):
        assert task_key(p=Path("x.csv")) != task_key(p="x.csv")

    def test_any_changed_part_changes_the_key(self):
        base = dict(spec={"width": 40}, data_sha256="ab" * 32, version="0.1.0", task="frisch")
        k = task_key(**base)
        for name, value in [("spec", {"width": 41}), ("data_sha256", "cd" * 32),
                            ("version", "0.1.1"), ("task", "equal")]:
            assert task_key(**{**base, name: value}) != k

    def test_floats_use_shortest_round_trip_text(self):
        assert '"0.1"' in canonical_json(x=0.1)
        assert task_key(x=0.1 + 0.2) != task_key(x=0.3)  # 0.30000000000000004 is another float

    def test_non_finite_floats_are_allowed(self):
        assert task_key(x=float("nan")) == task_key(x=float("nan"))
        assert task_key(x=float("inf")) != task_key(x=float("-inf"))

    def test_arrays_key_on_dtype_shape_and_bytes(self):
        a = np.arange(6.0).reshape(2, 3)
        assert task_key(a=a) == task_key(a=a.copy(order="F"))
        assert task_key(a=a) != task_key(a=a.reshape(3, 2))
        assert task_key(a=a) != task_key(a=a.astype(np.float32))

    def test_dataclasses_key_on_type_and_fields(self):
        assert task_key(r=Result(1, np.zeros(2))) == task_key(r=Result(1, np.zeros(2)))
        assert task_key(r=Result(1, np.zeros(2))) != task_key(r={"corank": 1, "angles": np.zeros(2)})

    def test_unsupported_values_are_refused_by_type_name(self):
        with pytest.raises(TypeError, match="type object"):
            task_key(x=object())

    def test_is_the_same_in_other_processes_and_hash_seeds(self):
        code = textwrap.dedent("""
            from relspan.run.cache import task_key
            print(task_key(cols={"b", "a", "c", "d"}, spec={"z": 1.5, "a": [1, 2]}))
        """)
        keys = set()
        for seed in ("1", "2", "12345"):
            env = {**os.environ, "PYTHONHASHSEED": seed}
            out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True,
                                 text=True, check=True)
            keys.add(out.stdout.strip())
        keys.add(task_key(cols={"b", "a", "c", "d"}, spec={"z": 1.5, "a": [1, 2]}))
        assert len(keys) == 1


class TestResultCache:
    def test_round_trips_a_result(self, tmp_path):
        c = ResultCache(tmp_path / "cache")
        value = Result(2, np.array([0.5, 1.25]))
        assert c.put(KEY, value)
        got = c.get(KEY)
        assert got.corank == 2 and np.array_equal(got.angles, value.angles)

    def test_entry_is_an_uncompressed_npz_of_a_json_header_and_plain_arrays(self, tmp_path):
        c = ResultCache(tmp_path)
        c.put(KEY, Result(2, np.array([0.5, 1.25])))
        path = c.path_for(KEY)
        assert path.suffix == ".npz" and path.parent.parent.name.startswith("env-")
        with zipfile.ZipFile(path) as zf:
            assert sorted(zf.namelist()) == ["header.npy", "p0.npy"]
            assert all(i.compress_type == zipfile.ZIP_STORED for i in zf.infolist())
        with np.load(path, allow_pickle=False) as npz:
            header = json.loads(npz["header"].tobytes())
            assert np.array_equal(npz["p0"], [0.5, 1.25])
        assert header["key"] == KEY and header["value"]["$"] == "dc"
        assert b"\x80\x05" not in path.read_bytes()  # no pickle stream anywhere

    def test_counts_hits_and_misses(self, tmp_path):
        c = ResultCache(tmp_path)
        assert c.get(KEY) is None
        c.put(KEY, 1)
        c.get(KEY)
        c.get(KEY)
        assert (c.hits, c.misses, c.stats.writes) == (2, 1, 1)

    def test_miss_returns_the_given_default(self, tmp_path):
        sentinel = object()
        assert ResultCache(tmp_path).get(KEY, sentinel) is sentinel

    def test_none_is_a_storable_value(self, tmp_path):
        c = ResultCache(tmp_path)
        c.put(KEY, None)
        assert c.get(KEY, "miss") is None

    def test_creates_the_folder_with_a_readme_saying_it_is_safe_to_delete(self, tmp_path):
        folder = tmp_path / "a" / "b"
        ResultCache(folder)
        assert "safe to delete" in (folder / "README.txt").read_text()

    def test_disabled_cache_misses_and_writes_nothing(self, tmp_path):
        c = ResultCache(None)
        assert not c.enabled
        assert c.put(KEY, 1) is False
        assert c.get(KEY, "miss") == "miss"
        assert c.misses == 1 and c.hits == 0

    def test_is_shared_by_two_instances_on_one_folder(self, tmp_path):
        ResultCache(tmp_path).put(KEY, {"x": 1.5})
        assert ResultCache(tmp_path).get(KEY) == {"x": 1.5}

    @pytest.mark.filterwarnings("ignore::relspan.errors.RelspanNote")
    @pytest.mark.parametrize("damage", ["truncate", "flip", "garbage", "empty", "other_key"])
    def test_damaged_entries_are_misses(self, tmp_path, damage):
        c = ResultCache(tmp_path)
        c.put(KEY, list(range(100)))
        path = c.path_for(KEY)
        blob = bytearray(path.read_bytes())
        if damage == "truncate":
            blob = blob[:-10]
        elif damage == "flip":
            blob[-5] ^= 0xFF
        elif damage == "garbage":
            blob = bytearray(b"not a cache entry at all")
        elif damage == "empty":
            blob = bytearray()
        else:
            other = task_key(task="other")
            c.put(other, "other")
            blob = bytearray(c.path_for(other).read_bytes())
        path.write_bytes(bytes(blob))
        assert c.get(KEY, "miss") == "miss"
        assert c.stats.corrupt == 1

    def test_entry_whose_class_is_gone_is_a_miss(self, tmp_path):
        c = ResultCache(tmp_path)
        c.put(KEY, Result(1, np.zeros(1)))
        _rewrite_header(c.path_for(KEY), lambda h: h["value"].update(c=h["value"]["c"] + "Gone"))
        with pytest.warns(RelspanNote, match="not a valid relspan cache entry"):
            assert c.get(KEY, "miss") == "miss"

    def test_failed_write_keeps_the_old_entry_and_leaves_no_temp_file(self, tmp_path, monkeypatch):
        c = ResultCache(tmp_path)
        c.put(KEY, "old")

        def refuse(src, dst):
            raise OSError(28, "No space left on device")

        monkeypatch.setattr(cache_module.os, "replace", refuse)
        with pytest.warns(RelspanWarning, match="No space left on device"):
            assert c.put(KEY, "new") is False
        monkeypatch.undo()
        assert c.get(KEY) == "old"
        assert c.stats.write_errors == 1
        assert not list(tmp_path.rglob("*.part"))

    def test_value_the_codec_cannot_store_is_a_programming_error(self, tmp_path):
        with pytest.raises(codec.CodecError):
            ResultCache(tmp_path).put(KEY, lambda: 0)
        assert not list(tmp_path.rglob("*.part"))

    def test_a_file_where_the_folder_should_be_is_an_output_error(self, tmp_path):
        f = tmp_path / "cache"
        f.write_text("x")
        with pytest.raises(OutputError, match="not a folder") as info:
            ResultCache(f)
        assert "--no-cache" in info.value.fix

    def test_uncreatable_folder_is_an_output_error(self, tmp_path):
        parent = tmp_path / "file"
        parent.write_text("x")
        with pytest.raises(OutputError, match="cannot create the cache folder"):
            ResultCache(parent / "cache")

    def test_rejects_keys_not_made_by_task_key(self, tmp_path):
        with pytest.raises(ValueError, match="64 lower-case hex"):
            ResultCache(tmp_path).get("../../etc/passwd")


def _rewrite_header(path: Path, change) -> None:
    """Rewrite an entry's JSON header in place (a forged entry with a valid container)."""
    with np.load(path, allow_pickle=False) as npz:
        members = {k: npz[k] for k in npz.files}
    header = json.loads(members["header"].tobytes())
    change(header)
    members["header"] = np.frombuffer(json.dumps(header).encode(), dtype=np.uint8)
    with open(path, "wb") as fh:
        np.savez(fh, **members)


class _Boom:
    """Unpickling this creates the file named in ``os.environ['RELSPAN_TEST_BOOM']``."""

    def __reduce__(self):
        return (open, (os.environ["RELSPAN_TEST_BOOM"], "w"))


class TestNothingInACacheRuns:
    """Planted pickles and forged headers are ignored with one note; nothing executes."""

    def test_planted_pickle_in_the_old_layout_is_ignored_with_a_note_and_never_loaded(
            self, tmp_path, monkeypatch):
        boom = tmp_path / "ran"
        monkeypatch.setenv("RELSPAN_TEST_BOOM", str(boom))
        folder = tmp_path / "cache"
        (folder / KEY[:2]).mkdir(parents=True)
        (folder / KEY[:2] / f"{KEY}.pkl").write_bytes(pickle.dumps(_Boom()))
        with pytest.warns(RelspanNote, match="older cache format .* never loaded"):
            c = ResultCache(folder)
        assert c.get(KEY, "miss") == "miss"
        assert not boom.exists()

    def test_pickle_written_at_the_entry_path_is_a_miss_with_a_note(self, tmp_path, monkeypatch):
        boom = tmp_path / "ran"
        monkeypatch.setenv("RELSPAN_TEST_BOOM", str(boom))
        c = ResultCache(tmp_path / "cache")
        path = c.path_for(KEY)
        path.parent.mkdir(parents=True)
        path.write_bytes(pickle.dumps(_Boom()))
        with pytest.warns(RelspanNote, match="not a valid relspan cache entry"):
            assert c.get(KEY, "miss") == "miss"
        assert not boom.exists()

    @pytest.mark.parametrize("forged", ["builtins:eval", "os:system", "relspan.cli:main",
                                        "relspan.run.cache:ResultCache", "subprocess:Popen"])
    def test_forged_header_naming_a_class_outside_the_allow_list_is_refused(self, tmp_path, forged):
        c = ResultCache(tmp_path / "cache")
        c.put(KEY, Result(1, np.zeros(1)))
        _rewrite_header(c.path_for(KEY), lambda h: h["value"].update(c=forged))
        with pytest.warns(RelspanNote, match="not a valid relspan cache entry"):
            assert c.get(KEY, "miss") == "miss"

    def test_forged_object_array_member_is_refused_without_unpickling(self, tmp_path, monkeypatch):
        boom = tmp_path / "ran"
        monkeypatch.setenv("RELSPAN_TEST_BOOM", str(boom))
        c = ResultCache(tmp_path / "cache")
        c.put(KEY, Result(1, np.zeros(1)))
        path = c.path_for(KEY)
        with np.load(path, allow_pickle=False) as npz:
            header = npz["header"]
        evil = np.empty(1, dtype=object)
        evil[0] = _Boom()
        with open(path, "wb") as fh:
            np.savez(fh, header=header, a0=evil)  # numpy pickles object arrays when writing
        with pytest.warns(RelspanNote, match="not a valid relspan cache entry"):
            assert c.get(KEY, "miss") == "miss"
        assert not boom.exists()

    def test_compressed_member_is_refused(self, tmp_path):
        c = ResultCache(tmp_path / "cache")
        c.put(KEY, [1, 2, 3])
        path = c.path_for(KEY)
        with np.load(path, allow_pickle=False) as npz:
            members = {k: npz[k] for k in npz.files}
        with open(path, "wb") as fh:
            np.savez_compressed(fh, **members)
        with pytest.warns(RelspanNote, match="compressed"):
            assert c.get(KEY, "miss") == "miss"

    def test_only_one_note_per_cache_for_many_bad_entries(self, tmp_path, recwarn):
        c = ResultCache(tmp_path / "cache")
        keys = [task_key(i=i) for i in range(3)]
        for k in keys:
            c.path_for(k).parent.mkdir(parents=True, exist_ok=True)
            c.path_for(k).write_bytes(b"junk")
        assert [c.get(k, "miss") for k in keys] == ["miss"] * 3
        assert len([w for w in recwarn if issubclass(w.category, RelspanNote)]) == 1


class TestEnvironment:
    """Cache keys include the library versions and the maths-library kernel (issue 13, item 5)."""

    def test_environment_names_numeric_libraries_and_the_blas_kernel(self):
        env = cache_module.cache_environment()
        for name in ("numpy", "scipy", "pandas", "matplotlib", "pyarrow"):
            assert name in env["libraries"]
        assert env["libraries"]["numpy"] == np.__version__
        assert env["blas"] and {"internal_api", "version", "architecture"} <= set(env["blas"][0])

    def test_cache_written_under_other_library_versions_is_not_reused(self, tmp_path, monkeypatch):
        folder = tmp_path / "cache"
        real = cache_module.cache_environment()
        older = {**real, "libraries": {**real["libraries"], "numpy": "1.26.4", "matplotlib": "3.8.4"}}
        monkeypatch.setattr(cache_module, "_ENVIRONMENT", older)
        ResultCache(folder).put(KEY, "from numpy 1.26.4")
        monkeypatch.setattr(cache_module, "_ENVIRONMENT", real)
        with pytest.warns(RelspanNote, match=r"numpy 1\.26\.4 \(now " + np.__version__.replace(".", r"\.")):
            c = ResultCache(folder)
        assert c.get(KEY, "miss") == "miss"

    def test_every_library_that_parses_dates_or_draws_text_is_part_of_the_key(self):
        env = cache_module.cache_environment()
        for name in ("pyparsing", "cycler", "python-dateutil", "tzdata", "threadpoolctl"):
            assert name in env["libraries"], name
        changed = {**env, "libraries": {**env["libraries"], "pyparsing": "0.0.1"}}
        assert cache_module.environment_id(changed) != cache_module.environment_id(env)

    def test_cache_written_under_another_blas_kernel_is_not_reused(self, tmp_path, monkeypatch):
        folder = tmp_path / "cache"
        real = cache_module.cache_environment()
        other = {**real, "blas": [{"internal_api": "openblas", "version": "0.3.27", "architecture": "Haswell"}]}
        monkeypatch.setattr(cache_module, "_ENVIRONMENT", other)
        ResultCache(folder).put(KEY, "from Haswell")
        monkeypatch.setattr(cache_module, "_ENVIRONMENT", real)
        with pytest.warns(RelspanNote, match="Haswell"):
            c = ResultCache(folder)
        assert c.get(KEY, "miss") == "miss"

    def test_forged_environment_field_in_the_header_is_a_miss(self, tmp_path):
        c = ResultCache(tmp_path / "cache")
        c.put(KEY, 1)
        _rewrite_header(c.path_for(KEY), lambda h: h.update(environment="0" * 16))
        with pytest.warns(RelspanNote):
            assert c.get(KEY, "miss") == "miss"


class TestPrune:
    def test_prune_removes_other_environments_old_pickles_and_month_old_entries(self, tmp_path, monkeypatch):
        folder = tmp_path / "cache"
        real = cache_module.cache_environment()
        monkeypatch.setattr(cache_module, "_ENVIRONMENT", {**real, "python": "3.0.0"})
        ResultCache(folder).put(KEY, "elsewhere")
        monkeypatch.setattr(cache_module, "_ENVIRONMENT", real)
        (folder / "ab").mkdir()
        (folder / "ab" / ("ab" * 32 + ".pkl")).write_bytes(b"old")
        (folder / "mine.txt").write_text("not ours")
        with pytest.warns(RelspanNote):
            c = ResultCache(folder)
        fresh, stale = task_key(n="fresh"), task_key(n="stale")
        c.put(fresh, 1)
        c.put(stale, 2)
        month = cache_module.PRUNE_AFTER_DAYS * 86400
        os.utime(c.path_for(stale), (0, c.path_for(stale).stat().st_mtime - month - 60))
        c.prune()
        left = sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*") if p.is_file())
        own = c.environment_folder.name
        assert left == sorted(["README.txt", "mine.txt", f"{own}/ENVIRONMENT.json",
                               f"{own}/{fresh[:2]}/{fresh}.npz"])

    def test_a_hit_counts_as_use(self, tmp_path):
        c = ResultCache(tmp_path)
        c.put(KEY, 1)
        old = c.path_for(KEY).stat().st_mtime - cache_module.PRUNE_AFTER_DAYS * 86400 - 60
        os.utime(c.path_for(KEY), (old, old))
        assert c.get(KEY) == 1
        c.prune()
        assert c.get(KEY) == 1


class TestPackedEntries:
    """An entry packs its arrays into one member per dtype (reading one member per array was
    quadratic in numpy's npz reader: 45,190 members took 12 s), and the round trip stays exact."""

    def test_many_arrays_of_mixed_dtypes_round_trip_bit_for_bit_in_few_members(self, tmp_path):
        rng = np.random.default_rng(5)
        value = {"f": [rng.standard_normal((i % 4, 3)) for i in range(500)],
                 "i": [np.arange(i, dtype=np.int64) for i in range(50)],
                 "b": np.array([True, False]), "u": np.array(["ab", "c"]), "e": np.empty((0, 2)),
                 "s": np.float64(-0.0), "nan": np.array([np.nan, np.inf])}
        c = ResultCache(tmp_path)
        assert c.put(KEY, value)
        with zipfile.ZipFile(c.path_for(KEY)) as zf:
            assert len(zf.namelist()) <= 7  # the header and one pack per dtype
        got = c.get(KEY)
        for a, b in zip(value["f"] + value["i"], got["f"] + got["i"]):
            assert a.dtype == b.dtype and a.shape == b.shape and a.tobytes() == b.tobytes()
        assert got["u"].tolist() == ["ab", "c"] and got["e"].shape == (0, 2)
        assert np.signbit(got["s"]) and got["nan"].tobytes() == value["nan"].tobytes()
        got["f"][1][0, 0] = 7.0  # arrays are independent copies, not views of one pack
        assert got["f"][2][0, 0] != 7.0 or value["f"][2][0, 0] == 7.0

    @pytest.mark.parametrize("place", [[0, 0, [99]], [1, 0, [1]], [0, -1, [1]], [0, 0, [-1]],
                                       [0, 0, "1"], "x", [0, 0.0, [1]]])
    def test_an_array_placed_outside_its_pack_is_not_an_entry(self, tmp_path, place):
        from relspan.run.cache import _decode

        header = json.dumps({"format": ENTRY_FORMAT, "key": KEY, "environment": "e", "packs": 1,
                             "arrays": [place], "value": {"$": "array", "i": 0}}).encode()
        buf = io.BytesIO()
        np.savez(buf, header=np.frombuffer(header, dtype=np.uint8), p0=np.zeros(3))
        with pytest.raises(CodecError):
            _decode(buf.getvalue(), KEY, "e")


def test_the_allow_list_is_read_without_importing_relspan_report():
    """pkgutil.walk_packages imported every subpackage (relspan.report, matplotlib) on every
    cache read; the list is now read from the package's folders."""
    code = ("import sys; from relspan.run import codec; names = codec._package_modules(); "
            "assert 'relspan.report.figures.maps' in names and 'relspan.run.cache' in names; "
            "assert 'relspan.report' not in sys.modules and 'matplotlib' not in sys.modules, "
            "sorted(m for m in sys.modules if m.startswith(('relspan.report', 'matplotlib')))[:5]")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr


def _long_value(n: int = 100):
    """A result-like value with long sequences (written as segments) and short ones (kept inline)."""
    rng = np.random.default_rng(11)
    return {"windows": tuple(Result(i % 3, rng.standard_normal((i % 5, 2))) for i in range(n)),
            "labels": [f"w{i}" for i in range(n)],                       # plain: never segmented
            "by_id": {(i, "x"): np.arange(i % 4, dtype=np.int32) for i in range(n)},
            "short": (Result(1, np.array([np.nan, -0.0])),),
            "nested": [[Result(j, np.ones(1)) for j in range(40)] for _ in range(20)],
            "full": Result(2, np.array([0.5, 1.25]))}


def _members(path: Path) -> dict:
    with np.load(path, allow_pickle=False) as npz:
        return {k: npz[k] for k in npz.files}


def _write_members(path: Path, members: dict) -> None:
    with open(path, "wb") as fh:
        np.savez(fh, **members)


class TestSegmentedEntries:
    """Long sequences are written and read segment by segment: a 20,000-window result was one
    JSON document in memory (about 2.5 GB beside the result on writing; docs/performance.md)."""

    def test_long_sequences_round_trip_bit_for_bit_through_segments(self, tmp_path):
        value = _long_value()
        c = ResultCache(tmp_path)
        assert c.put(KEY, value)
        members = _members(c.path_for(KEY))
        assert "s" in members and any(k.startswith("q") for k in members)
        header = json.loads(members["header"].tobytes())
        # 100 windows, 100 dict items and the outer list of 20 (its inner lists stay inside
        # their segment): 7 + 7 + 2 segments of at most SEGMENT_ITEMS items
        assert len(header["segments"]) == 16
        assert header["value"]["$"] == "dict"
        got = c.get(KEY)
        assert type(got["windows"]) is tuple and type(got["nested"]) is list
        assert list(got["by_id"]) == list(value["by_id"])
        assert same_doc(got, value)
        got["windows"][1].angles[0, 0] = 7.0       # arrays own their memory
        assert got["windows"][2].angles.size == 0 or got["windows"][2].angles[0, 0] != 7.0

    def test_segment_arrays_of_every_dtype_and_byte_order_round_trip_in_their_own_packs(self, tmp_path):
        # a segment's arrays find their pack by dtype object (its text only on first sight): equal
        # dtypes made separately, other byte orders and widths must still land in the right pack
        rng = np.random.default_rng(3)
        kinds = [np.dtype("<f8"), np.dtype(">f8"), np.dtype("f8", metadata={"m": 1}), np.dtype("<f4"),
                 np.dtype(">i4"), np.dtype("u1"), np.dtype("?"), np.dtype("<c16"), np.dtype("M8[s]"),
                 np.dtype("<U3"), np.dtype("S2")]
        items = []
        for i in range(3 * codec.SEGMENT_ITEMS):
            dt = kinds[i % len(kinds)]
            if dt.kind in "fc":
                a = rng.normal(size=(2, 3)).astype(dt)
            elif dt.kind in "iub":
                a = rng.integers(0, 2 if dt.kind == "b" else 100, size=(i % 4,)).astype(dt)
            elif dt.kind == "M":
                a = np.array([i, 2 * i], dtype="int64").astype(dt)
            else:
                a = np.array(["ab", "c"][: 1 + i % 2], dtype=dt)
            items.append(Result(corank=i, angles=a))
        c = ResultCache(tmp_path)
        assert c.put(KEY, items)
        got = c.get(KEY)
        assert len(got) == len(items)
        for a, b in zip(got, items):
            assert a.angles.dtype.str == b.angles.dtype.str and a.angles.shape == b.angles.shape
            assert a.angles.tobytes() == b.angles.tobytes() and a.corank == b.corank

    def test_the_document_held_in_memory_does_not_grow_with_the_sequences(self):
        sizes = {}
        for n in (50, 2000):
            segs = []

            def segment(doc, arrays):
                segs.append((len(doc), len(arrays)))
                return len(segs) - 1

            top, arrays = codec.encode(_long_value(n), segment=segment)
            # plain lists (numbers, text) stay inline: a label per window is cheap as JSON
            sizes[n] = len(json.dumps([kv for kv in top["v"] if kv[0] != "labels"]))
            assert max(k for k, _ in segs) <= codec.SEGMENT_ITEMS
            assert len(arrays) == 2                    # "short"'s and "full"'s stay with the header
        # the same document but for the segment numbers it names
        assert abs(sizes[2000] - sizes[50]) < 30 and sizes[2000] < 2000

    def test_without_the_callback_the_documents_are_unchanged(self):
        doc, _ = codec.encode(_long_value(40))
        assert "segs" not in json.dumps(doc)

    @pytest.mark.filterwarnings("ignore::relspan.errors.RelspanNote")
    @pytest.mark.parametrize("damage", ["order", "lengths", "short_list", "nested", "pack_flip",
                                        "extra_array", "object_pack", "text_flip", "drop_segments"])
    def test_damaged_or_forged_segments_are_misses(self, tmp_path, damage, monkeypatch):
        boom = tmp_path / "ran"
        monkeypatch.setenv("RELSPAN_TEST_BOOM", str(boom))
        c = ResultCache(tmp_path / "cache")
        c.put(KEY, _long_value())
        path = c.path_for(KEY)
        if damage in ("pack_flip", "text_flip"):
            # a flipped byte inside a segment's array or text: the member's CRC no longer matches
            with zipfile.ZipFile(path) as zf:
                info = zf.getinfo("q0.npy" if damage == "pack_flip" else "s.npy")
            blob = bytearray(path.read_bytes())
            name_len, extra_len = int.from_bytes(blob[info.header_offset + 26:info.header_offset + 28], "little"), \
                int.from_bytes(blob[info.header_offset + 28:info.header_offset + 30], "little")
            start = info.header_offset + 30 + name_len + extra_len
            blob[start + info.file_size - 3] ^= 0x01
            path.write_bytes(bytes(blob))
        else:
            m = _members(path)
            header = json.loads(m["header"].tobytes())
            if damage == "order":
                header["value"]["v"][0][1]["v"][0] = 1
            elif damage == "lengths":
                header["segments"][0] += 1
            elif damage == "short_list":
                header["value"]["v"][0][1]["v"][2] -= 1
            elif damage == "nested":     # a segment that refers to further segments
                text = m["s"].tobytes()
                first = json.loads(text[:header["segments"][0]])
                first["v"][0] = {"$": "segs", "t": "list", "v": [1, 1, 1]}
                raw = json.dumps(first).encode()
                m["s"] = np.frombuffer(raw + text[header["segments"][0]:], dtype=np.uint8)
                header["segments"][0] = len(raw)
            elif damage == "extra_array":
                m["q0"] = np.concatenate([m["q0"], m["q0"][:1]])
            elif damage == "object_pack":
                evil = np.empty(1, dtype=object)
                evil[0] = _Boom()
                m["q0"] = evil                      # numpy pickles object arrays when writing
            elif damage == "drop_segments":
                del m["s"]
            m["header"] = np.frombuffer(json.dumps(header).encode(), dtype=np.uint8)
            _write_members(path, m)
        with pytest.warns(RelspanNote, match="not a valid relspan cache entry"):
            assert c.get(KEY, "miss") == "miss"
        assert c.stats.corrupt == 1 and not boom.exists()

    def test_segment_files_spill_beside_the_entry_and_leave_nothing(self, tmp_path, monkeypatch):
        monkeypatch.setattr(cache_module, "_SPOOL_BYTES", 64)   # every segment file goes to disk
        c = ResultCache(tmp_path)
        value = _long_value()
        assert c.put(KEY, value)
        assert same_doc(c.get(KEY), value)
        assert sorted(p.name for p in c.path_for(KEY).parent.iterdir()) == [f"{KEY}.npz"]

    def test_a_value_refused_halfway_leaves_no_file(self, tmp_path):
        value = {"windows": [Result(i, np.zeros(1)) for i in range(40)] + [lambda: 0]}
        c = ResultCache(tmp_path)
        with pytest.raises(CodecError):
            c.put(KEY, value)
        assert not list(tmp_path.rglob("*.part")) and not c.path_for(KEY).exists()


def test_text_is_stored_unescaped_and_a_lone_surrogate_survives(tmp_path):
    value = {"label": "rows 1\u201310", "odd": "caf\udce9", "many": [f"\u00e9{i}" for i in range(40)]}
    c = ResultCache(tmp_path)
    c.put(KEY, value)
    assert "rows 1\u201310".encode() in c.path_for(KEY).read_bytes()
    assert c.get(KEY) == value


def test_the_collector_is_paused_while_an_entry_is_read_and_restored_after(tmp_path, monkeypatch):
    import gc

    seen = []
    real = codec.decode
    monkeypatch.setattr(codec, "decode", lambda *a, **k: (seen.append(gc.isenabled()), real(*a, **k))[1])
    c = ResultCache(tmp_path)
    c.put(KEY, [1, 2])
    assert gc.isenabled()
    assert c.get(KEY) == [1, 2]
    assert seen == [False] and gc.isenabled()
    gc.disable()
    try:
        c.get(KEY)
        assert not gc.isenabled()          # left as it was found
    finally:
        gc.enable()
