"""The data pass reads a CSV file once: the bytes pyarrow parses are the bytes that are hashed.

Data are invented for the tests (seeded). The reference hash is ``hashlib.sha256`` of the file's
bytes; the reference data pass is the pandas reader (pandas' C parser), which hashes the stream it
parses itself.
"""

from __future__ import annotations

import builtins
import hashlib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from relspan.data import prepare_dataset
from relspan.data.sources import csv as csv_engine
from relspan.data.sources.detect import SAMPLE_BYTES

from data_helpers import FULL, make_spec, rolling

pytest.importorskip("pyarrow")

PLANS = [FULL, rolling("r", 400, 100)]


@pytest.fixture
def big_csv(tmp_path) -> Path:
    """About 2.8 MB of numbers (several of pyarrow's blocks with a small block size), seeded,
    with non-ASCII text in a column that is not analysed (the UTF-8 check sees every byte)."""
    rng = np.random.default_rng(15)
    rows = 40_000
    x = rng.normal(size=(rows, 4)) * 3.0 + np.array([10.0, 20.0, 30.0, 1e6])
    df = pd.DataFrame(x, columns=["a", "b", "c", "d"])
    df.insert(2, "note", np.where(np.arange(rows) % 7 == 0, "größer – Δ", "plain"))
    p = tmp_path / "big.csv"
    df.to_csv(p, index=False, float_format="%.9g")
    return p


class _Counting:
    """A file object from ``open`` that counts the bytes read through it."""

    def __init__(self, fh, tally: list[int]) -> None:
        self._fh = fh
        self._tally = tally

    def read(self, *a):
        data = self._fh.read(*a)
        self._tally[0] += len(data)
        return data

    def readinto(self, buf):
        k = self._fh.readinto(buf)
        self._tally[0] += k or 0
        return k

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self._fh.close()

    def __getattr__(self, name):
        return getattr(self._fh, name)


def _spy(monkeypatch, path: Path):
    """Count bytes of ``path`` read through Python's ``open`` and through HashingInput."""
    python_bytes = [0]
    inputs: list = []
    real_open = builtins.open

    def counting_open(file, *a, **k):
        fh = real_open(file, *a, **k)
        if isinstance(file, (str, Path)) and Path(file).resolve() == path.resolve():
            return _Counting(fh, python_bytes)
        return fh

    class Spy(csv_engine.HashingInput):
        def __init__(self, src):
            super().__init__(src)
            inputs.append(self)

    monkeypatch.setattr(builtins, "open", counting_open)
    monkeypatch.setattr(csv_engine, "HashingInput", Spy)
    monkeypatch.setattr(csv_engine, "ARROW_BLOCK_BYTES", 1 << 18)  # several blocks
    return python_bytes, inputs


def test_the_pyarrow_pass_reads_the_file_once_through_one_hashing_input(big_csv, monkeypatch):
    python_bytes, inputs = _spy(monkeypatch, big_csv)
    size = big_csv.stat().st_size
    prep = prepare_dataset(make_spec(big_csv, ["a", "b", "c", "d"]), PLANS, engine="pyarrow")
    assert len(inputs) == 1 and inputs[0].opens == 1
    assert inputs[0].bytes_read == size          # every byte handed to the parser once
    # besides the parsed bytes, only the head is read (format, separator and header detection:
    # one sample and pandas' first buffer of the header line), whatever the file's size
    assert python_bytes[0] <= 6 * SAMPLE_BYTES < size / 4
    assert prep.rows_read == 40_000


def test_the_hash_is_that_of_the_file_bytes(big_csv):
    prep = prepare_dataset(make_spec(big_csv, ["a", "b", "c", "d"]), PLANS, engine="pyarrow")
    assert prep.sha256 == hashlib.sha256(big_csv.read_bytes()).hexdigest()  # reference: hashlib


@pytest.mark.skipif(not Path("/proc/self/io").exists(), reason="needs Linux's /proc/self/io")
def test_the_process_reads_about_one_file_size_of_bytes_during_the_pass(big_csv):
    """Counted by the kernel (``rchar``: bytes of every read call of every thread)."""
    spec = make_spec(big_csv, ["a", "b", "c", "d"])
    prepare_dataset(spec, PLANS, engine="pyarrow")   # imports and caches warmed

    def rchar() -> int:
        for line in Path("/proc/self/io").read_text().splitlines():
            if line.startswith("rchar:"):
                return int(line.split()[1])
        raise AssertionError("no rchar line")

    before = rchar()
    prepare_dataset(spec, PLANS, engine="pyarrow")
    read = rchar() - before
    size = big_csv.stat().st_size
    assert size <= read < 1.5 * size   # a second pass (a hashing re-read) would make it >= 2x


def test_one_pass_gives_the_reference_readers_numbers_bit_for_bit(big_csv):
    spec = make_spec(big_csv, ["a", "b", "c", "d"])
    fast = prepare_dataset(spec, PLANS, engine="pyarrow")
    ref = prepare_dataset(spec, PLANS, engine="pandas")   # reference: pandas' C reader
    assert fast.sha256 == ref.sha256 and fast.rows_read == ref.rows_read
    assert fast.full == ref.full
    for a, b in zip(fast.plans, ref.plans, strict=True):
        assert a.moments == b.moments
    for name in ("counts", "means", "comoments"):
        assert np.array_equal(getattr(fast.granules.table, name), getattr(ref.granules.table, name))


def test_bytes_that_are_not_utf8_hand_the_file_to_the_reference_reader(big_csv):
    data = bytearray(big_csv.read_bytes())
    at = data.index(b"plain", len(data) // 2)
    data[at:at + 1] = b"\xff"                      # one stray byte deep in the file
    big_csv.write_bytes(bytes(data))
    spec = make_spec(big_csv, ["a", "b", "c", "d"])
    with pytest.raises(csv_engine.FastPathDeclined):
        prepare_dataset(spec, PLANS, engine="pyarrow")
    with pytest.raises(Exception, match="UTF-8"):
        prepare_dataset(spec, PLANS)               # auto: the pandas reader names the byte


def test_reads_after_close_return_the_end(tmp_path):
    """When the parser stops early, pyarrow's read-ahead may still call back; after close every
    read is the end at once (no read of a closed file), so the read-ahead finishes."""
    from types import SimpleNamespace

    path = tmp_path / "x.csv"
    path.write_text("a,b\n1,2\n", encoding="utf-8")
    src = SimpleNamespace(resolved=path, path=path)
    h = csv_engine.HashingInput(src)
    assert h.read_buffer(4).to_pybytes() == b"a,b\n"
    h.close()
    assert h.closed and h.read_buffer(4).size == 0 and h.read() == b""
    with pytest.raises(csv_engine.FastPathDeclined):
        h.sha256()  # not read to its end: no hash is claimed


def test_loans_wait_until_every_lent_object_is_freed():
    import pyarrow as pa

    loans = csv_engine._Loans()
    assert loans.wait(0.0)                     # nothing lent
    a, b = loans.lend(pa.py_buffer(b"ab")), loans.lend(pa.py_buffer(b"cd"))
    assert not loans.wait(0.01)
    del a
    assert not loans.wait(0.01)                # b is still out
    del b
    assert loans.wait(0.0)


@pytest.mark.parametrize("bad_line", [12, 30_000])  # in pyarrow's first block, and deep in the file
def test_a_reader_stopped_early_has_let_go_of_every_block_when_the_pass_returns(big_csv, monkeypatch,
                                                                                 bad_line):
    """The process may end right after the slower reader has taken over; pyarrow's I/O threads
    must have released every object of ours by then (each release takes the interpreter lock;
    during shutdown that aborts the process: 'terminate called without an active exception')."""
    lines = big_csv.read_text(encoding="utf-8").splitlines(keepends=True)
    lines[bad_line - 1] = lines[bad_line - 1].rstrip("\n") + ",1,2\n"   # a ragged row
    big_csv.write_text("".join(lines), encoding="utf-8")
    made: list = []

    class Watched(csv_engine._Loans):
        def __init__(self):
            super().__init__()
            made.append(self)

        def lend(self, obj):
            self.lent = getattr(self, "lent", 0) + 1
            return super().lend(obj)

    monkeypatch.setattr(csv_engine, "_Loans", Watched)
    monkeypatch.setattr(csv_engine, "ARROW_BLOCK_BYTES", 1 << 16)  # many blocks read ahead
    with pytest.raises(csv_engine.FastPathDeclined):
        prepare_dataset(make_spec(big_csv, ["a", "b", "c", "d"]), PLANS, engine="pyarrow")
    assert len(made) == 1 and made[0].lent >= 2     # the file object and at least one block
    assert made[0].wait(0.0)                        # all freed before the pass returned
