"""Fixtures for the data-layer tests: write small tables, seeded frames."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from data_helpers import quarters

@pytest.fixture
def write_csv(tmp_path):
    """write_csv(text_or_frame, name="t.csv") -> Path."""

    def _write(content, name="t.csv"):
        p = tmp_path / name
        if isinstance(content, pd.DataFrame):
            content.to_csv(p, index=False, sep="\t" if name.endswith(".tsv") else ",")
        elif isinstance(content, bytes):
            p.write_bytes(content)
        else:
            p.write_text(content, encoding="utf-8")
        return p

    return _write


@pytest.fixture
def offset_frame():
    """Quarterly random data far from zero (1e8 + noise), seeded."""
    rng = np.random.default_rng(20240601)
    t = 160
    x = 1e8 + rng.normal(size=(t, 3)) @ np.array([[1.0, 0.3, 0.0], [0.0, 1.0, 0.5], [0.0, 0.0, 2.0]])
    df = pd.DataFrame({"quarter": quarters("1980Q1", t), "a": x[:, 0], "b": x[:, 1], "c": x[:, 2]})
    return df
