"""Spec texts shared by the spec tests."""

from __future__ import annotations

#: a minimal valid spec; tests append to it or replace parts of it
MINIMAL = """\
relspan: 1
report:
  title: "Harbour"
datasets:
  - id: harbour
    source: data/harbour.csv
    variables:
      - column: cargo
      - column: ships
      - column: jobs
"""

#: the same dataset with a time column, for plans counted in time units
WITH_TIME = MINIMAL.replace("    source: data/harbour.csv\n",
                            "    source: data/harbour.csv\n    time: {column: quarter}\n")
