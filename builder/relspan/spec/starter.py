"""A commented starter spec for a data file (what ``relspan new DATA`` writes).

Only the head of the file is read (to list its columns and guess their kinds),
plus one streaming pass that counts the rows; nothing is held in memory but
the head.
"""

from __future__ import annotations

import json
import os
import re
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

from relspan.errors import DataError
from relspan.spec.model import ChecksSpec

__all__ = ["starter_spec", "guess_time_column", "prettify", "split_unit", "time_format", "time_widths"]

#: rows read to list columns and guess their kinds
HEAD_ROWS = 200
#: column names that usually hold dates (whole name, or a word of it)
_TIME_WORDS = ("date", "time", "year", "quarter", "period", "month", "week", "day")
_QUARTER = re.compile(r"^\d{4}[-\s]?[Qq][1-4]$")
_MONTH = re.compile(r"^\d{4}-(0[1-9]|1[0-2])$")


def prettify(column: str) -> str:
    """A reader-facing label from a column name: ``cargo_handled`` -> ``Cargo handled``."""
    words = re.sub(r"[_\-.]+", " ", str(column))
    words = re.sub(r"(?<=[a-z])(?=[A-Z][a-z])", " ", words)  # camelCase -> camel Case
    words = " ".join(words.split())
    if not words:
        return str(column)
    first, rest = words[0], words[1:]
    # keep acronyms (GDP) and already mixed case as written; lower-case only CamelCase splits
    return first.upper() + rest


_UNIT = re.compile(r"^(?P<name>.*?\S)\s*[\(\[](?P<unit>[^()\[\]]+)[\)\]]\s*$")


def split_unit(column: str) -> tuple[str, str]:
    """``("Dissolved oxygen", "mg/l")`` from ``"Dissolved oxygen (mg/l)"`` (or ``[mg/l]``).

    A name without a bracketed unit at its end gives ``(prettify(column), "")``.
    """
    m = _UNIT.match(str(column))
    if not m:
        return prettify(column), ""
    return prettify(m.group("name")), " ".join(m.group("unit").split())


_DMY = re.compile(r"^(?P<a>\d{1,2})(?P<sep>[/.\-])(?P<b>\d{1,2})(?P=sep)(?P<y>\d{4})$")


def time_format(values: pd.Series) -> tuple[str, str]:
    """``(format, why)`` for a time column: a format the reader understands, and a note.

    Whole-number years give ``year``; ``1994Q1`` ``quarter``; ``1994-03`` ``month``;
    ``31/01/1994`` (any of ``/ . -``) a strftime pattern, day first when a first
    field above 12 shows it (month first when a second field does; day first,
    said as a guess, when no value decides); anything else ``auto``.
    """
    if pd.api.types.is_numeric_dtype(values):
        return "year", "whole-number years"
    vals = values.dropna().astype(str).str.strip()
    vals = vals[vals != ""]
    if len(vals) and vals.str.match(_QUARTER).all():
        return "quarter", "quarters such as 1994Q1"
    if len(vals) and vals.str.match(_MONTH).all():
        return "month", "months such as 1994-03"
    parts = vals.str.extract(_DMY)
    if len(vals) and parts["a"].notna().all():
        a, b = parts["a"].astype(int), parts["b"].astype(int)
        sep = parts["sep"].iloc[0]
        if (parts["sep"] != sep).any():
            return "auto", "dates with mixed separators"
        day_first = "%d" + sep + "%m" + sep + "%Y"
        if (a > 12).any() and not (b > 12).any():
            return day_first, f"day first (a first field above 12, e.g. {vals[a > 12].iloc[0]})"
        if (b > 12).any() and not (a > 12).any():
            return "%m" + sep + "%d" + sep + "%Y", f"month first (a second field above 12, e.g. {vals[b > 12].iloc[0]})"
        return day_first, "day first is a guess: no date in the first rows has a field above 12; check it"
    return "auto", "recognised when read"


#: (unit word, length in days) used to propose window widths in time units
_UNITS = (("years", 365.25), ("quarters", 91.3), ("months", 30.44), ("weeks", 7.0), ("days", 1.0))


def time_widths(times: pd.Series, fmt: str, rows: int, n_vars: int) -> tuple[str, str, str] | None:
    """``(width, step, why)`` in time units for a rolling plan, or None when the dates cannot be read.

    The spacing of the rows is the median gap between consecutive dates in the
    head; the span is that spacing times the rows. The width is about a quarter
    of the span (at least the variables + 2 rows), the step about a fifth of the
    width, both in whole years when the span covers 8 years or more, else in the
    data's own unit.
    """
    vals = times.dropna()
    try:
        if fmt == "year":
            t = pd.to_datetime(vals.astype(int).astype(str), format="%Y")
        elif fmt == "quarter":
            t = pd.PeriodIndex(vals.astype(str).str.replace(r"[-\s]", "", regex=True), freq="Q").to_timestamp()
        elif fmt == "month":
            t = pd.to_datetime(vals.astype(str), format="%Y-%m")
        elif fmt.startswith("%"):
            t = pd.to_datetime(vals.astype(str), format=fmt)
        else:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                t = pd.to_datetime(vals.astype(str), format="mixed")
    except (ValueError, TypeError, OverflowError):
        return None
    t = pd.Series(pd.DatetimeIndex(t)).dropna().sort_values()
    if len(t) < 3:
        return None
    gap = float(t.diff().dropna().dt.total_seconds().median()) / 86400.0
    if not gap > 0:
        return None
    span_days = gap * rows
    own = min(_UNITS, key=lambda u: abs(np.log(gap / u[1])))
    unit, days = ("years", 365.25) if span_days >= 8 * 365.25 else own
    min_width = (n_vars + 2) * gap
    width = max(round(span_days / 4 / days), int(np.ceil(min_width / days)), 1)
    step = max(round(width / 5), 1)
    why = (f"rows about {_spacing_word(gap)} apart, about {span_days / days:.0f} {unit} in all")
    def n_units(k: int) -> str:
        return f"{k} {unit if k != 1 else unit[:-1]}"

    return n_units(width), n_units(step), why


def _spacing_word(gap_days: float) -> str:
    word, days = min(_UNITS, key=lambda u: abs(np.log(gap_days / u[1])))
    return "one " + word[:-1]


def _slug(text: str) -> str:
    s = re.sub(r"[^a-z0-9_-]+", "-", text.lower()).strip("-_")
    return s or "data"


def _looks_like_dates(values: pd.Series) -> bool:
    """Do (nearly) all non-empty values of a text column read as dates?"""
    vals = values.dropna().astype(str).str.strip()
    vals = vals[vals != ""]
    if len(vals) == 0:
        return False
    if vals.str.match(_QUARTER).mean() >= 0.9 or vals.str.match(_MONTH).mean() >= 0.9:
        return True
    if not vals.str.contains(r"\d").all():
        return False
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            parsed = pd.to_datetime(vals, errors="coerce", format="mixed")
        except (ValueError, TypeError, OverflowError):
            return False
    return bool(parsed.notna().mean() >= 0.9)


def _could_be_time(values: pd.Series) -> bool:
    """A column named like a time really holds times: text dates, or whole-number years."""
    if pd.api.types.is_bool_dtype(values):
        return False
    if pd.api.types.is_numeric_dtype(values):
        v = values.dropna()
        return bool(len(v)) and bool(((v % 1 == 0) & (v >= 1000) & (v <= 3000)).all())
    return _looks_like_dates(values)


def guess_time_column(head: pd.DataFrame) -> str | None:
    """The column that most likely dates the rows, or None.

    A column named like a time (``date``, ``Year``, ``quarter_end``, ...)
    wins; otherwise the first text column whose values parse as dates.
    """
    for col in head.columns:
        name = str(col).strip().lower()
        tokens = [t.rstrip("s") if t != "s" else t for t in re.split(r"[^a-z]+", name) if t]
        if name in _TIME_WORDS:
            return str(col)
        if any(t in _TIME_WORDS for t in tokens) and _could_be_time(head[col]):
            return str(col)
    for col in head.columns:
        s = head[col]
        if pd.api.types.is_numeric_dtype(s) or pd.api.types.is_bool_dtype(s):
            continue
        if _looks_like_dates(s):
            return str(col)
    return None


def _why_skipped(values: pd.Series) -> str:
    """Why a column is not a variable, in a few words."""
    if values.isna().all():
        return "empty in the first rows"
    if pd.api.types.is_bool_dtype(values):
        return "yes/no values"
    return "text, not numbers"


def _q(text: str) -> str:
    """A YAML double-quoted scalar (JSON strings are valid YAML)."""
    return json.dumps(str(text), ensure_ascii=False)


def _reading_keys(src) -> list[str]:
    """Spec lines that pin down what ``auto`` detected (so a reader of the spec sees it)."""
    out = []
    if src.format in ("excel", "stata") or (src.format == "parquet" and not src.plain):
        out += ["    # File format (detected).", f"    format: {src.format}"]
    if src.format == "excel" and src.sheet is not None:
        out += ["    # The worksheet to read.", f"    sheet: {_q(src.sheet)}"]
    if src.format in ("csv", "tsv"):
        if src.delimiter not in (",", "\t"):
            out += ["    # Field separator (detected).", f"    separator: {_q(src.delimiter)}"]
        if src.decimal != ".":
            out += ["    # Decimal mark (detected).", f"    decimal: {_q(src.decimal)}"]
        if src.encoding != "utf-8":
            out += ["    # Text encoding (detected).", f"    encoding: {src.encoding}"]
    return out


def starter_spec(csv_path: str | Path, spec_path: str | Path) -> str:
    """YAML text of a commented starter spec for the CSV file ``csv_path``.

    Parameters
    ----------
    csv_path : str or Path
        The data file: CSV/TSV (compressed or not, in any detected encoding,
        separator and decimal mark), Parquet, Excel or Stata; read as
        ``relspan build`` reads it, with the detected reading written into the
        spec as keys.
    spec_path : str or Path
        Where the spec will be written; the data path in it is relative to
        this file's folder (with ``allow_outside: true`` when the data lie
        outside that folder).

    Returns
    -------
    str
        The spec text. Numeric columns become variables (label = prettified
        column name); a time column is guessed; a ``full`` and a ``rolling``
        plan (width about a quarter of the rows, step a fifth of the width, in
        rows) are set up with the default checks and no claims. Every key has
        a ``#`` comment above it. The text loads with
        :func:`relspan.spec.load_spec` once written to ``spec_path``.

    Raises
    ------
    DataError
        If the file cannot be read as a table or has fewer than two numeric
        columns.
    """
    from relspan.data.sources import open_source, read_head

    csv_path, spec_path = Path(csv_path), Path(spec_path)
    shown = str(csv_path)
    if not csv_path.is_file():
        raise DataError("data file not found." if not csv_path.exists()
                        else "this is a folder, not a data file.", path=shown,
                        fix="give the path of a CSV, TSV, Parquet, Excel or Stata file.")
    src = open_source(shown, csv_path)  # special files, empty files, encodings, the header
    names = [str(h) for h in src.header]
    for j, name in enumerate(names):
        if name in names[:j]:
            raise DataError(
                f"the header names the column {name!r} twice (columns {names.index(name) + 1} and "
                f"{j + 1}), so a spec could not say which one it means.", path=shown, column=name,
                fix="give every column of the header its own name.")
    head, rows = read_head(src, HEAD_ROWS)
    time_col = guess_time_column(head)
    numeric = [str(c) for c in head.columns
               if str(c) != time_col and pd.api.types.is_numeric_dtype(head[c])
               and not pd.api.types.is_bool_dtype(head[c])]
    if len(numeric) < 2:
        raise DataError(
            f"the file has {len(numeric)} numeric column{'s' if len(numeric) != 1 else ''} "
            f"besides the time column; relations need at least two "
            f"(columns: {', '.join(map(str, head.columns))}).", path=shown,
            fix=f"check how the file was read ({src.read_as or 'plain CSV'}) and set the "
                "dataset's separator, decimal or sheet in the spec if that is wrong.")

    skipped = [(str(c), _why_skipped(head[c])) for c in head.columns
               if str(c) != time_col and str(c) not in numeric]
    fmt, fmt_why = time_format(head[time_col]) if time_col is not None else ("auto", "")
    widths = time_widths(head[time_col], fmt, rows, len(numeric)) if time_col is not None else None

    folder = spec_path.resolve().parent
    data_abs = csv_path.resolve()
    outside = not data_abs.is_relative_to(folder)
    source = data_abs.as_posix() if outside else Path(os.path.relpath(data_abs, folder)).as_posix()
    n = len(numeric)
    width = max(round(rows / 4), n + 2)
    step = max(round(width / 5), 1)
    defaults = ChecksSpec()
    assumptions = [a for a in defaults.assumptions if a != "shaped"]
    tol = defaults.tolerance
    tol_text = (f"{{relative: {tol.relative}}}" if tol.absolute is None
                else f"{{absolute: {tol.absolute}}}")
    ds_id = _slug(csv_path.stem)

    out: list[str] = []
    add = out.append
    add(f"# Draft spec for {csv_path.name} ({rows} rows, {n} numeric columns).")
    add("# Edit it, then build the site. Every key is described by `relspan schema --markdown`.")
    if src.read_as:
        add(f"# The file was read as {src.read_as}.")
    if skipped:
        add(f"# Columns left out ({len(skipped)}): "
            + "; ".join(f"{_q(c)} ({why})" for c, why in skipped) + ".")
    add("")
    add("# Version of the spec format this file follows.")
    add("relspan: 1")
    add("# What the site is called and who wrote it.")
    add("report:")
    add("  # Title of the site.")
    add(f"  title: {_q(prettify(csv_path.stem))}")
    add("  # One paragraph in plain words for the home page.")
    add('  summary: ""')
    add("  # The authors' names, in order.")
    add("  authors: []")
    add("# The tables to analyse.")
    add("datasets:")
    add("  # Short name used in claims and page addresses.")
    add(f"  - id: {ds_id}")
    add("    # Title shown to readers.")
    add(f"    title: {_q(prettify(csv_path.stem))}")
    add("    # The data file, relative to this spec's folder.")
    add(f"    source: {_q(source)}")
    if outside:
        add("    # The data lie outside this spec's folder; copy them in to make it portable.")
        add("    allow_outside: true")
    for line in _reading_keys(src):
        add(line)
    if time_col is not None:
        add("    # The column that dates each row (guessed; check it).")
        add("    time:")
        add("      # Name of the time column.")
        add(f"      column: {_q(time_col)}")
        add(f"      # How dates are written: auto, year, quarter, month or a strftime pattern ({fmt_why}).")
        add(f"      format: {_q(fmt) if fmt.startswith('%') else fmt}")
    add("    # The numeric columns to analyse (remove any that do not belong).")
    add("    variables:")
    for col in numeric:
        add("      # Column in the file.")
        add(f"      - column: {_q(col)}")
        label, unit = split_unit(col)
        add("        # Name readers see.")
        add(f"        label: {_q(label)}")
        if unit:
            add("        # Unit of measurement (split from the column name).")
            add(f"        unit: {_q(unit)}")
    add("    # Rows with a missing value: drop them, or fail.")
    add("    missing: drop")
    add("# How each dataset is cut into windows.")
    add("windows:")
    add("  # The whole sample as one window.")
    add("  - id: full")
    add("    # Kind of plan: full, rolling, expanding or periods.")
    add("    kind: full")
    add("  # Windows moved along the rows.")
    add("  - id: rolling")
    add("    # Kind of plan: full, rolling, expanding or periods.")
    add("    kind: rolling")
    if widths is not None:
        w_text, s_text, w_why = widths
        add(f"    # Length of each window, in time ({w_why}; about a quarter of that).")
        add(f"    width: {_q(w_text)}")
        add("    # How far each window moves on (about a fifth of the width).")
        add(f"    step: {_q(s_text)}")
    else:
        add(f"    # Rows in each window (about a quarter of the {rows} rows).")
        add(f"    width: {width}")
        add("    # Rows each window moves on (about a fifth of the width).")
        add(f"    step: {step}")
    add("# Which noise assumptions to compare, with which options.")
    add("checks:")
    add("  # 'shaped' also needs noise_share on every variable.")
    add(f"  assumptions: [{', '.join(assumptions)}]")
    add("  # Noise allowed by the bounded and diagonal assumptions.")
    add(f"  tolerance: {tol_text}")
    add("  # Variable whose coefficient is set to 1 (auto chooses).")
    add(f"  normalise_on: {defaults.normalise_on}")
    add("  # Numbers of relations to examine (auto, or a list such as [1, 2]).")
    add("  coranks: auto")
    add("  # Largest principal angle (degrees) between windows that counts as stable.")
    add(f"  max_angle_deg: {defaults.max_angle_deg:g}")
    add("  # Starting points for the Frisch scheme search.")
    add(f"  frisch_starts: {defaults.frisch_starts}")
    add("  # Random seed, recorded in the output.")
    add(f"  seed: {defaults.seed}")
    add("# Statements to re-check on every build (none yet).")
    add("claims: []")
    add("# An example claim: remove the '# ' in front of the next lines (and 'claims: []' above) to")
    add("# re-check it on every build. It says at least one linear relation holds among the")
    add("# variables in every rolling window when all of them carry noise of the same size.")
    add("# claims:")
    add("#   - id: a-relation-holds")
    add("#     kind: corank")
    add(f"#     text: {_q('At least one linear relation holds among ' + ', '.join(split_unit(c)[0] for c in numeric[:4]) + (' and the rest' if n > 4 else '') + ' in every window.')}")
    add(f"#     dataset: {ds_id}")
    add("#     plan: rolling")
    add("#     assumption: equal")
    add("#     at_least: 1")
    add("# Where the site is written, relative to this spec's folder.")
    add("site:")
    add("  # Output folder.")
    add("  out: relspan-site")
    add("  # Figure format: svg or png.")
    add("  figures: svg")
    return "\n".join(out) + "\n"
