"""Helpers for the spec tests: small spec files and data files written in tmp_path."""

from __future__ import annotations

from pathlib import Path

import pytest

@pytest.fixture
def write_spec(tmp_path: Path):
    """write_spec(text, files=("data/harbour.csv",)) -> path of spec.yaml in tmp_path."""

    def write(text: str, files=("data/harbour.csv",), name: str = "spec.yaml") -> Path:
        for f in files:
            p = tmp_path / f
            p.parent.mkdir(parents=True, exist_ok=True)
            p.write_text("quarter,cargo,ships,jobs\n1990Q1,1,2,3\n", encoding="utf-8")
        spec = tmp_path / name
        spec.write_text(text, encoding="utf-8")
        return spec

    return write
