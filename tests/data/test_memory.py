"""Memory stays bounded: a ~50 MB CSV is read with peak Python allocation far below its size.

No timing is asserted here (speed lives in benchmarks/data_pass.py).
"""

from __future__ import annotations

import tracemalloc

import numpy as np
import pandas as pd
import pytest

from relspan.data import prepare_dataset

from data_helpers import FULL, make_spec, rolling


def _write_big_csv(path, rows=760_000, chunk=95_000, seed=42):
    """About 50 MB: an hourly time stamp and four noisy columns, written chunk by chunk."""
    rng = np.random.default_rng(seed)
    start = np.datetime64("1900-01-01T00:00", "m")
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("when,a,b,c,d\n")
        for a in range(0, rows, chunk):
            m = min(chunk, rows - a)
            stamps = np.datetime_as_string(start + np.arange(a, a + m) * np.timedelta64(60, "m"))
            x = 1e3 + rng.normal(size=(m, 4))
            body = np.column_stack([stamps] + [np.char.mod("%.6f", x[:, j]) for j in range(4)])
            fh.write("\n".join(",".join(r) for r in body.tolist()))
            fh.write("\n")
    return path


@pytest.mark.slow
def test_peak_python_allocation_stays_far_below_file_size(tmp_path):
    path = _write_big_csv(tmp_path / "big.csv")
    size = path.stat().st_size
    assert size > 45e6
    ds = make_spec(path, ["a", "b", "c", "d"], time="when")
    plans = [FULL, rolling("r", 20000, 5000), rolling("w", 8, 4, "weeks")]
    tracemalloc.start()
    try:
        prepared = prepare_dataset(ds, plans, chunk_rows=5000)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert prepared.rows_used == 760_000 and prepared.overview.kind == "bins"
    # measured: about 5.8 MB at chunk_rows=5000 for a 47.9 MB file (the pass holds one chunk,
    # the block statistics and a fixed-size overview); a fifth of the file leaves a margin
    assert peak < size / 5, f"peak {peak / 1e6:.1f} MB for a {size / 1e6:.1f} MB file"
