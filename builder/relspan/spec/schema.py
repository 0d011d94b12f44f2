"""The one schema of spec format v1, as a JSON Schema (draft 2020-12) dict.

The schema is the single source of truth for the spec format: the walker
(:mod:`relspan.spec.validate`) checks a spec against it and words its error
messages from it, :mod:`relspan.spec.docs` turns its ``title``/``description``/
``default``/``examples`` annotations into ``docs/spec.md``, and
:func:`json_schema` hands it to editors and to other validators.

Besides the standard keywords the schema carries one annotation of its own,
``x-expected``: a short phrase, in plain words, of what a value must look
like. Draft 2020-12 treats unknown keywords as annotations, so the schema
stays valid for every conforming validator.

Rules that JSON Schema cannot state (ids unique within a list, a claim that
names an existing dataset, a width in years on a dataset with a time column,
files that exist, ...) are checked by :mod:`relspan.spec.rules` after the schema
walk and are listed in the ``description`` texts so that the documentation tells
them too.

References
----------
.. [1] A. Wright, H. Andrews, B. Hutton and G. Dennis, "JSON Schema: A Media
       Type for Describing JSON Documents", draft 2020-12,
       https://json-schema.org/draft/2020-12/json-schema-core
"""

from __future__ import annotations

import copy
import json
from typing import Any

from relspan.spec.model import ASSUMPTIONS, CLAIM_KINDS, SPEC_VERSION, TRANSFORMS

__all__ = [
    "json_schema",
    "schema_json_text",
    "ID_PATTERN",
    "DATE_PATTERN",
    "SPAN_PATTERN",
    "SPAN_UNITS",
    "DATASET_FORMATS",
    "DECIMAL_MARKS",
    "SEPARATOR_PATTERN",
    "WINDOW_KINDS",
    "TIME_FORMATS",
    "MISSING_POLICIES",
    "FIGURE_FORMATS",
    "FIGURE_FILE_CHOICES",
    "SIGNS",
]

#: ids of datasets, window plans and claims
ID_PATTERN = r"^[a-z0-9][a-z0-9_-]*$"
#: a Dask scheduler address (as `--scheduler` takes it)
SCHEDULER_PATTERN = r"^(tcp|tls)://(\[[0-9a-fA-F:]+\]|[^\s/:\[\]]+)(:[0-9]{1,5})?$"
#: an ISO calendar date, YYYY-MM-DD (validity of the day is checked by the loader)
DATE_PATTERN = r"^[0-9]{4}-[0-9]{2}-[0-9]{2}$"
#: time units a width or step may be counted in (plural form, as stored in model.Span)
SPAN_UNITS = ("years", "quarters", "months", "weeks", "days")
#: a width or step in time units, e.g. "10 years" or "1 quarter"
SPAN_PATTERN = r"^ *[1-9][0-9]* +(years?|quarters?|months?|weeks?|days?) *$"
DATASET_FORMATS = ("auto", "csv", "tsv", "parquet", "excel", "stata")
#: decimal marks of text files
DECIMAL_MARKS = ("auto", ".", ",")
#: ``separator``: auto, or one character other than a quote or a line break (YAML "\t" is a tab)
SEPARATOR_PATTERN = "^(auto|[^\"\\r\\n])$"
WINDOW_KINDS = ("full", "rolling", "expanding", "periods")
TIME_FORMATS = ("auto", "year", "quarter", "month")
MISSING_POLICIES = ("drop", "fail")
FIGURE_FORMATS = ("svg", "png")
#: ``site.figure_files``: the shown format only, or SVG and PNG
FIGURE_FILE_CHOICES = ("one", "both")
SIGNS = ("positive", "negative")

_DRAFT = "https://json-schema.org/draft/2020-12/schema"


def _p(schema: dict[str, Any], title: str, description: str, examples: list[Any],
       **extra: Any) -> dict[str, Any]:
    """A property subschema with its documentation annotations."""
    out = {"title": title, "description": description, "examples": examples}
    out.update(schema)
    out.update(extra)
    return out


def _text(title: str, description: str, examples: list[Any], **extra: Any) -> dict[str, Any]:
    return _p({"type": "string"}, title, description, examples, **extra)


def _id(title: str, description: str, examples: list[str]) -> dict[str, Any]:
    return _p({"type": "string", "pattern": ID_PATTERN}, title, description, examples,
              **{"x-expected": "an id of lower-case letters, digits, '-' and '_', "
                               "starting with a letter or digit"})


def _date(title: str, description: str, examples: list[str]) -> dict[str, Any]:
    return _p({"type": "string", "pattern": DATE_PATTERN}, title, description, examples,
              **{"x-expected": "an ISO date such as \"1990-01-31\""})


def _span(title: str, description: str, examples: list[Any]) -> dict[str, Any]:
    return _p({"anyOf": [{"type": "integer", "minimum": 1},
                         {"type": "string", "pattern": SPAN_PATTERN}]},
              title, description, examples,
              **{"x-expected": "a whole number of rows >= 1, or text such as \"10 years\" "
                               "(units: years, quarters, months, weeks, days)"})


def _checks_schema() -> dict[str, Any]:
    """``checks:`` (shared by the top level and by each dataset's override)."""
    return {
        "type": "object",
        "title": "Checks",
        "description": (
            "Which noise assumptions are compared and with which options. At the top level "
            "these apply to every dataset; a dataset's own `checks:` overrides them key by key."
        ),
        "examples": [{"assumptions": ["elementary", "equal", "diagonal"],
                      "tolerance": {"relative": 0.05}}],
        "additionalProperties": False,
        "properties": {
            "assumptions": _p(
                {"type": "array", "minItems": 1, "uniqueItems": True,
                 "items": {"type": "string", "enum": list(ASSUMPTIONS),
                           "title": "Assumption",
                           "description": "One noise assumption.",
                           "examples": ["equal"]}},
                "Noise assumptions",
                "The noise assumptions to analyse each window under, side by side: "
                "`elementary` (one variable at a time is the only noisy one: the elementary "
                "regressions), `equal` (equal noise variances: total least squares), `shaped` "
                "(noise variances known up to one factor, from `noise_share`), `bounded` "
                "(noise covariance of norm at most the tolerance), `diagonal` (independent "
                "noise of unknown variances: the Frisch scheme). Default: all five, where "
                "`shaped` is left out for datasets whose variables have no `noise_share`; "
                "listing `shaped` explicitly requires `noise_share` on every variable.",
                [["elementary", "equal", "diagonal"]],
                default=list(ASSUMPTIONS),
            ),
            "tolerance": _p(
                {"type": "object", "additionalProperties": False,
                 "minProperties": 1, "maxProperties": 1,
                 "properties": {
                     "absolute": _p({"type": "number", "exclusiveMinimum": 0},
                                    "Absolute tolerance",
                                    "Noise bound eps on the covariance scale of the analysed "
                                    "(transformed) variables.", [0.01]),
                     "relative": _p({"type": "number", "exclusiveMinimum": 0, "maximum": 1},
                                    "Relative tolerance",
                                    "Noise bound eps as a share of each variable's variance; "
                                    "the analysis then works on the correlation scale.",
                                    [0.05], default=0.05),
                 },
                 "x-expected": "a mapping with exactly one of `absolute` or `relative`"},
                "Tolerance",
                "How much noise the `bounded` and `diagonal` assumptions allow. Give exactly "
                "one of `absolute` or `relative`, each a number > 0.",
                [{"relative": 0.05}, {"absolute": 0.01}],
                default={"relative": 0.05},
            ),
            "normalise_on": _text(
                "Normalise on",
                "The variable whose coefficient is set to 1 when relations are reported as "
                "coefficients, or `auto` to choose one that keeps the coefficients finite. "
                "Must be one of the dataset's variable columns.",
                ["auto", "cargo"], default="auto", minLength=1,
            ),
            "coranks": _p(
                {"anyOf": [{"const": "auto"},
                           {"type": "array", "minItems": 1, "uniqueItems": True,
                            "items": {"type": "integer", "minimum": 1}}]},
                "Coranks",
                "The numbers of relations to examine: `auto` for the corank the evidence "
                "suggests, or a list of whole numbers >= 1, each below the number of "
                "variables of the dataset.",
                ["auto", [1, 2]], default="auto",
                **{"x-expected": "`auto` or a list of whole numbers >= 1 such as [1, 2]"},
            ),
            "max_angle_deg": _p(
                {"type": "number", "exclusiveMinimum": 0, "maximum": 90},
                "Largest stable angle",
                "Stability threshold in degrees: relation subspaces of two windows whose "
                "largest principal angle is below it count as the same.",
                [10, 5.5], default=10.0,
            ),
            "frisch_starts": _p(
                {"type": "integer", "minimum": 1, "maximum": 10000},
                "Frisch starts",
                "Number of starting points for the search of diagonal-noise (Frisch scheme) "
                "solutions; more starts explore the family of solutions better.",
                [8], default=8,
            ),
            "seed": _p(
                {"type": "integer", "minimum": 0, "maximum": 2**63 - 1},
                "Random seed",
                "Seed of the random number generator used for starting points; recorded in "
                "the output so that a build can be repeated exactly.",
                [0, 2026], default=0,
            ),
            "resampling": _resampling_schema(),
        },
    }


#: resampling schemes a spec may name (``auto``: stationary blocks with a time column, iid without)
RESAMPLING_SCHEMES = ("auto", "stationary", "moving", "iid")


def _resampling_schema() -> dict[str, Any]:
    """``checks.resampling:`` (the bootstrap behind every interval and corank support)."""
    return _p(
        {"type": "object", "additionalProperties": False,
         "properties": {
             "resamples": _p(
                 {"type": "integer", "minimum": 0, "maximum": 100000},
                 "Resamples",
                 "Bootstrap resamples per window behind every interval and every corank "
                 "support. 0 turns resampling off: the site then says that intervals were not "
                 "computed.", [499, 0], default=499),
             "level": _p(
                 {"type": "number", "exclusiveMinimum": 0.5, "exclusiveMaximum": 1},
                 "Interval level",
                 "Nominal coverage of every interval, e.g. 0.90 for 90% intervals.",
                 [0.90, 0.95], default=0.90),
             "scheme": _p(
                 {"type": "string", "enum": list(RESAMPLING_SCHEMES)},
                 "Resampling scheme",
                 "How rows are drawn: `stationary` (blocks of random length, Politis & Romano "
                 "1994), `moving` (blocks of fixed length, Kuensch 1989), `iid` (single rows, "
                 "Efron 1979), or `auto`: `stationary` when the dataset has a time column, "
                 "`iid` otherwise.", ["auto", "moving"], default="auto"),
             "block_length": _p(
                 {"anyOf": [{"const": "auto"}, {"type": "number", "minimum": 1}]},
                 "Block length",
                 "Mean block length (stationary) or block length (moving), in rows: `auto` for "
                 "the rule of Politis & White (2004) with the correction of Patton, Politis & "
                 "White (2009), or a number >= 1. Ignored by `iid`.", ["auto", 8],
                 default="auto",
                 **{"x-expected": "`auto` or a number of rows >= 1 such as 8"}),
             "seed": _p(
                 {"type": "integer", "minimum": 0, "maximum": 2**63 - 1},
                 "Resampling seed",
                 "Seed of the resampling streams (each window's stream is derived from it, the "
                 "dataset, the plan and the window's position). Default: `checks.seed`.",
                 [0, 20240501]),
             "diagonal_resamples": _p(
                 {"type": "integer", "minimum": 0, "maximum": 100000},
                 "Diagonal-noise resamples",
                 "Resamples behind the diagonal-noise (Frisch scheme) corank support and its "
                 "noise variances: the first this many of `resamples`, because each needs a "
                 "search of its own. 0 leaves the diagonal-noise support out.", [99, 0],
                 default=99),
         }},
        "Resampling",
        "The bootstrap behind every interval and corank support. A dataset's own "
        "`checks.resampling` overrides the top-level one key by key.",
        [{"resamples": 499, "level": 0.9, "scheme": "auto"}, {"resamples": 0}],
        default={"resamples": 499, "level": 0.9, "scheme": "auto", "block_length": "auto",
                 "diagonal_resamples": 99},
    )


def _build_schema() -> dict[str, Any]:
    variable = {
        "type": "object",
        "title": "Variable",
        "description": "One numeric column to analyse.",
        "examples": [{"column": "cargo", "label": "Cargo handled", "unit": "kt"}],
        "additionalProperties": False,
        "required": ["column"],
        "properties": {
            "column": _text("Column", "Name of the column in the data file, as in its header. "
                            "Each column may be listed once per dataset.", ["cargo"], minLength=1),
            "label": _text("Label", "Name shown to readers. Default: the column name.",
                           ["Cargo handled"]),
            "unit": _text("Unit", "Unit of measurement shown beside the label.",
                          ["kt", "EUR million"], default=""),
            "transform": _p({"type": "string", "enum": list(TRANSFORMS)}, "Transform",
                            "Applied to the column before analysis: `none`, `log` (natural "
                            "logarithm; values must be > 0), `diff` (first difference), "
                            "`logdiff` (difference of logarithms; differences are taken only "
                            "between consecutive years, quarters or months, so a gap in the time "
                            "index drops the row after it), `detrend` (the residual from a "
                            "least-squares straight line in time, fitted on the time values so "
                            "gaps are respected; needs a time column), `demean`, `standardise` "
                            "(zero mean, unit variance). Levels of two or more trending series "
                            "raise a warning (spurious regression); diff, logdiff or detrend "
                            "avoid it.",
                            ["log"], default="none"),
            "noise_share": _p({"type": "number", "minimum": 0}, "Noise share",
                              "Relative noise variance of this variable, for the `shaped` "
                              "assumption; only ratios between variables matter. Give it on "
                              "every variable of the dataset or on none, and not all zero.",
                              [1.0, 0.5]),
        },
    }
    time = {
        "type": "object",
        "title": "Time",
        "description": ("The column that dates each row, and an optional date range. Needed "
                        "for window widths in time units and for `periods` plans."),
        "examples": [{"column": "quarter", "format": "quarter", "from": "1990-01-01"}],
        "additionalProperties": False,
        "required": ["column"],
        "properties": {
            "column": _text("Time column", "Name of the column holding the dates.",
                            ["quarter", "date"], minLength=1),
            "format": _p({"anyOf": [{"type": "string", "enum": list(TIME_FORMATS)},
                                    {"type": "string", "pattern": "%"}]},
                         "Time format",
                         "How the dates are written: `auto` (guessed), `year` (1994), "
                         "`quarter` (1994Q1 or 1994-Q1), `month` (1994-03), or a strftime "
                         "pattern such as \"%d/%m/%Y\".",
                         ["auto", "quarter", "%d/%m/%Y"], default="auto",
                         **{"x-expected": "one of auto, year, quarter, month, or a strftime "
                                          "pattern containing %"}),
            "from": _date("From", "First date to keep (inclusive). Default: the first row.",
                          ["1990-01-01"]),
            "to": _date("To", "Last date to keep (inclusive), not before `from`. Default: the "
                        "last row.", ["2024-12-31"]),
        },
    }
    dataset = {
        "type": "object",
        "title": "Dataset",
        "description": "One table of data and what to analyse in it.",
        "examples": [{"id": "harbour", "source": "data/harbour.csv",
                      "variables": [{"column": "cargo"}, {"column": "ships"}]}],
        "additionalProperties": False,
        "required": ["id", "source", "variables"],
        "properties": {
            "id": _id("Dataset id", "Short name of the dataset, used in claims and in the "
                      "addresses of its pages. Unique among datasets.", ["harbour"]),
            "title": _text("Dataset title", "Title shown to readers. Default: the id.",
                           ["Harbour activity"]),
            "description": _text("Dataset description", "A paragraph on where the data come "
                                 "from and what they measure.",
                                 ["Monthly counts from the harbour office."], default=""),
            "source": _text("Source file", "Path of the data file, relative to the folder of "
                            "the spec. It must exist, be a file, and lie inside the spec's "
                            "folder unless `allow_outside` is true.",
                            ["data/harbour.csv"], minLength=1),
            "allow_outside": _p({"type": "boolean"}, "Allow outside",
                                "Allow `source` to lie outside the spec's folder (or be an "
                                "absolute path). A spec whose data live elsewhere cannot be "
                                "rebuilt from its folder alone.", [False], default=False),
            "format": _p({"type": "string", "enum": list(DATASET_FORMATS)}, "File format",
                         "Format of the data file: `csv` (any separator), `tsv`, `parquet`, "
                         "`excel` (.xlsx/.xlsm, needs `pip install 'relspan[excel]'`) or `stata` "
                         "(.dta). `auto` decides by the file's first bytes (so Parquet or gzip "
                         "data named .csv are read as what they are), then by its extension. "
                         "Text files compressed with gzip, bzip2, xz or zip (one file in the "
                         "archive) are read as they are; the checksum on the reproduce page is "
                         "of the file as published (compressed). What was detected is said in "
                         "error messages and on the reproduce page.",
                         ["auto", "parquet", "excel"], default="auto"),
            "separator": _p({"type": "string", "pattern": SEPARATOR_PATTERN,
                             "x-expected": "auto, or one character such as ',', ';', '|' or a tab"},
                            "Field separator",
                            "Character between the fields of a text file. `auto` takes the one a "
                            "`sep=` first line names (as some spreadsheet programs write), else the "
                            "one of comma, semicolon, tab and vertical bar that splits every "
                            "sampled line into the same number of fields. Write a tab as "
                            "`\"\\t\"`.", ["auto", ";", "|"], default="auto"),
            "decimal": _p({"type": "string", "enum": list(DECIMAL_MARKS)}, "Decimal mark",
                          "Decimal mark of the numbers in a text file. `auto` takes `,` when the "
                          "separator is not a comma and the sampled numbers use decimal commas "
                          "(`1,5`) and none a decimal point; else `.`.", ["auto", ","],
                          default="auto"),
            "encoding": _p({"type": "string", "minLength": 1,
                            "x-expected": "auto, or an encoding name such as utf-8, utf-16 or cp1252"},
                           "Text encoding",
                           "Character encoding of a text file, as Python names it (`utf-8`, "
                           "`utf-16`, `cp1252`, `latin-1`, ...). `auto` reads a byte-order mark "
                           "(UTF-8, UTF-16, UTF-32), recognises UTF-16 without one by its NUL "
                           "bytes, and otherwise reads UTF-8; text in another encoding is refused "
                           "with the place of the first byte that is not UTF-8, never guessed.",
                           ["auto", "cp1252"], default="auto"),
            "sheet": _p({"anyOf": [{"type": "string", "minLength": 1},
                                   {"type": "integer", "minimum": 0}],
                         "x-expected": "a sheet name, or its position counted from 0"},
                        "Sheet", "The worksheet of an Excel workbook to read: its name, or its "
                        "position counted from 0. Default: the first sheet. The header is the "
                        "sheet's first non-empty row.", ["Data", 0]),
            "time": time,
            "variables": _p({"type": "array", "minItems": 2, "items": variable},
                            "Variables", "The numeric columns to analyse, at least two. "
                            "Column names must be unique within the dataset.",
                            [[{"column": "cargo"}, {"column": "ships", "transform": "log"}]]),
            "missing": _p({"type": "string", "enum": list(MISSING_POLICIES)}, "Missing values",
                          "What to do with rows that miss a value in a listed column: `drop` "
                          "them, or `fail` with an error naming the first such row.",
                          ["drop"], default="drop"),
            "plans": _p({"type": "array", "uniqueItems": True,
                         "items": _id("Plan id", "Id of a window plan.", ["rolling"])},
                        "Window plans", "Ids of the window plans (under `windows:`) to use for "
                        "this dataset. Default: all of them.", [["full", "rolling"]]),
            "checks": {**_checks_schema(), "title": "Dataset checks",
                       "description": "Overrides of the top-level `checks:` for this dataset, "
                                      "key by key.",
                       "examples": [{"assumptions": ["equal", "diagonal"]}]},
        },
    }
    period = {
        "type": "object",
        "title": "Period",
        "description": "A named stretch of time with inclusive bounds.",
        "examples": [{"label": "Before the new quay", "from": "1990-01-01",
                      "to": "2007-12-31"}],
        "additionalProperties": False,
        "required": ["label", "from", "to"],
        "properties": {
            "label": _text("Period label", "Name of the period shown to readers; unique "
                           "within the plan.", ["Before the new quay"], minLength=1),
            "from": _date("Period start", "First day of the period (inclusive).",
                          ["1990-01-01"]),
            "to": _date("Period end", "Last day of the period (inclusive), not before `from`.",
                        ["2007-12-31"]),
        },
    }
    window = {
        "type": "object",
        "title": "Window plan",
        "description": ("How to cut a dataset into windows: `full` (the whole sample), "
                        "`rolling` (windows of `width` moved by `step`), `expanding` (a first "
                        "window of `width` grown by `step`) or `periods` (named stretches of "
                        "time)."),
        "examples": [{"id": "rolling", "kind": "rolling", "width": "10 years",
                      "step": "2 years"}],
        "additionalProperties": False,
        "required": ["id", "kind"],
        "properties": {
            "id": _id("Plan id", "Short name of the plan, used by datasets and claims. Unique "
                      "among plans.", ["rolling"]),
            "kind": _p({"type": "string", "enum": list(WINDOW_KINDS)}, "Plan kind",
                       "`full`, `rolling`, `expanding` or `periods`.", ["rolling"]),
            "title": _text("Plan title", "Title shown to readers.", ["Ten-year windows"],
                           default=""),
            "width": _span("Width", "Rolling: the size of each window; expanding: the size of "
                           "the first window. Required for `rolling` and `expanding`, not "
                           "allowed otherwise. Widths in time units need a dataset with a "
                           "`time` column.", [40, "10 years"]),
            "step": _span("Step", "How far each window moves (rolling) or grows (expanding). "
                          "Required with `width`, in the same kind of unit (rows or time).",
                          [8, "2 years"]),
            "periods": _p({"type": "array", "minItems": 1, "items": period}, "Periods",
                          "The named periods of a `periods` plan (required there, not allowed "
                          "otherwise); needs a dataset with a `time` column.",
                          [[{"label": "Early", "from": "1990-01-01", "to": "1999-12-31"}]]),
        },
    }
    claim = {
        "type": "object",
        "title": "Claim",
        "description": (
            "A statement the authors make about a dataset, re-checked on every build. Kinds "
            "and their fields: `corank` (`assumption` and at least one of `equals`, "
            "`at_least`, `at_most`: holds when the corank in every window satisfies it); "
            "`subspace_stable` (`corank`, optional `assumption` (default `equal`) and "
            "`below_deg` (default `checks.max_angle_deg`): the windows are compared with each "
            "other (every pair, or neighbours in plans of more than 40 windows); holds when every "
            "window has that corank and every angle is below `below_deg`; cannot be judged when a "
            "window's corank is undetermined or zero, or when sampling alone moves the subspaces by "
            "`below_deg` or more); `sign_stable` "
            "(`normalise_on`, `variable`, optional `sign` and `assumption` (default "
            "`elementary`): holds when the coefficient keeps one sign in every window); "
            "`coefficient_bounded` (`normalise_on`, `variable`: holds when the diagonal-noise "
            "interval of the coefficient is finite in every window); `no_break` (optional "
            "`assumption` (default `equal`), no `plan`: holds when the scan of the whole sample "
            "finds no break of the relation subspace at any date, fails when it finds one). A "
            "claim that the data cannot decide gets the verdict \"cannot be judged\", with why; "
            "`relspan check` then exits 1, as for a failed claim. Fields a kind does not use are "
            "rejected."),
        "examples": [{"id": "two-relations", "kind": "corank", "dataset": "harbour",
                      "plan": "rolling", "assumption": "equal", "equals": 2}],
        "additionalProperties": False,
        "required": ["id", "kind", "dataset"],
        "properties": {
            "id": _id("Claim id", "Short name of the claim; unique among claims.",
                      ["two-relations"]),
            "kind": _p({"type": "string", "enum": list(CLAIM_KINDS)}, "Claim kind",
                       "What the claim states: `corank`, `subspace_stable`, `sign_stable`, "
                       "`coefficient_bounded` or `no_break`.", ["corank"]),
            "text": _text("Claim text", "The claim in the authors' words, shown with its "
                          "verdict.", ["Two relations hold among the three indicators."],
                          default=""),
            "dataset": _id("Claim dataset", "Id of the dataset the claim is about.",
                           ["harbour"]),
            "plan": _id("Claim plan", "Id of a window plan used by that dataset. Required for every "
                        "kind except `no_break`, which takes none (its scan covers the whole "
                        "sample).", ["rolling"]),
            "assumption": _p({"type": "string", "enum": list(ASSUMPTIONS)}, "Claim assumption",
                             "Noise assumption the claim is made under; it must be among the "
                             "dataset's `checks.assumptions`. Default: none for `corank` (required "
                             "there); `equal` for `subspace_stable` and `no_break`; `elementary` "
                             "for `sign_stable`; `diagonal` for `coefficient_bounded` (the only "
                             "one it takes).", ["equal"]),
            "corank": _p({"type": "integer", "minimum": 1}, "Claim corank",
                         "`subspace_stable`: the number of relations whose subspace is "
                         "compared; below the number of variables.", [2]),
            "equals": _p({"type": "integer", "minimum": 0}, "Corank equals",
                         "`corank`: the corank in every window equals this.", [2]),
            "at_least": _p({"type": "integer", "minimum": 0}, "Corank at least",
                           "`corank`: the corank in every window is at least this.", [1]),
            "at_most": _p({"type": "integer", "minimum": 0}, "Corank at most",
                          "`corank`: the corank in every window is at most this; not below "
                          "`at_least`.", [2]),
            "below_deg": _p({"type": "number", "exclusiveMinimum": 0, "maximum": 90},
                            "Angle below", "`subspace_stable`: the largest principal angle "
                            "between two windows, in degrees, that still counts as stable. "
                            "Default: the dataset's `checks.max_angle_deg`.", [5]),
            "normalise_on": _text("Claim normalise on", "`sign_stable`, "
                                  "`coefficient_bounded`: the variable (column) whose "
                                  "coefficient is set to 1.", ["cargo"], minLength=1),
            "variable": _text("Claim variable", "`sign_stable`, `coefficient_bounded`: the "
                              "variable (column) whose coefficient is examined; not the "
                              "`normalise_on` one.", ["ships"], minLength=1),
            "sign": _p({"type": "string", "enum": list(SIGNS)}, "Sign",
                       "`sign_stable`: the sign the coefficient must keep. Default: either, "
                       "as long as it never changes.", ["negative"]),
        },
    }
    report = {
        "type": "object",
        "title": "Report",
        "description": "What the site is called, who wrote it and how to cite it.",
        "examples": [{"title": "Harbour and hinterland", "authors": ["A. Writer"]}],
        "additionalProperties": False,
        "required": ["title"],
        "properties": {
            "title": _text("Report title", "Title of the site.", ["Harbour and hinterland"],
                           minLength=1),
            "summary": _text("Summary", "One paragraph in plain words, shown on the home page.",
                             ["How cargo, ships and jobs moved together."], default=""),
            "authors": _p({"type": "array",
                           "items": {"type": "string", "minLength": 1, "title": "Author",
                                     "description": "One author's name.",
                                     "examples": ["A. Writer"]}},
                          "Authors", "The authors' names, in order.",
                          [["A. Writer", "B. Analyst"]], default=[]),
            "licence": _text("Licence", "Licence of the text and figures, e.g. an SPDX id.",
                             ["CC-BY-4.0"], default=""),
            "cite": _text("How to cite", "The citation readers should use.",
                          ["Writer & Analyst (2026), Harbour and hinterland."], default=""),
        },
    }
    site = {
        "type": "object",
        "title": "Site",
        "description": "Where and how the site is written.",
        "examples": [{"out": "relspan-site", "figures": "svg"}],
        "additionalProperties": False,
        "properties": {
            "out": _text("Output folder", "Folder the site is written to, relative to the "
                         "spec's folder; not the spec's folder itself nor one above it.",
                         ["relspan-site"], default="relspan-site", minLength=1),
            "figures": _p({"type": "string", "enum": list(FIGURE_FORMATS)}, "Figure format",
                          "Image format of the figures.", ["svg"], default="svg"),
            "figure_files": _p({"type": "string", "enum": list(FIGURE_FILE_CHOICES)}, "Figure files",
                               "Which image files each figure is offered as, linked under it beside its "
                               "numbers (CSV): `one`, only the format of `figures`; `both`, SVG and PNG "
                               "(the PNG 760 px wide, for slides and documents). The second format is "
                               "saved from the same drawing, so it adds the time of one more save per "
                               "figure (on the demo the figure stage took about 1.4 times as long, "
                               "and the site grew by 2.8 MB); hence off by default.", ["both"], default="one"),
            "notes": _text("Notes", "A note for readers shown on the home page.",
                           ["Figures for 2024 are provisional."], default=""),
            "language": _p({"type": "string", "pattern": "^[a-z]{2,3}(-[A-Za-z0-9]{1,8})*$"},
                           "Language", "Language of the pages, as a BCP 47 tag.",
                           ["en", "en-GB"], default="en",
                           **{"x-expected": "a language tag such as \"en\" or \"en-GB\""}),
        },
    }
    run = {
        "type": "object",
        "title": "Run",
        "description": ("Where the window tasks run. Leave it out to use a local process pool "
                        "with one worker per available core. The command line's `--jobs` and "
                        "`--scheduler` override this section. Results are identical wherever "
                        "the tasks run, so this section does not affect the result cache."),
        "examples": [{"jobs": 2}, {"scheduler": "tcp://10.0.0.5:8786"}],
        "additionalProperties": False,
        "maxProperties": 1,
        "x-expected": "a mapping with at most one of `jobs` or `scheduler`",
        "properties": {
            "jobs": _p({"type": "integer", "minimum": 1}, "Worker processes",
                       "Local worker processes for window tasks; 1 runs everything in the "
                       "building process. Default: the cores available to it.", [1, 4],
                       **{"x-expected": "a whole number >= 1"}),
            "scheduler": _p({"type": "string", "pattern": SCHEDULER_PATTERN},
                            "Dask scheduler", "Address of a running Dask scheduler (package "
                            "`distributed`, installed with `relspan[cluster]`); window tasks "
                            "then run on that cluster's workers.", ["tcp://10.0.0.5:8786"],
                            **{"x-expected": "an address such as tcp://host:8786"}),
        },
    }
    return {
        "$schema": _DRAFT,
        "title": "relspan spec, format v1",
        "description": (
            "A relspan spec names the datasets to analyse, how to cut them into windows, which "
            "noise assumptions to compare, the claims to re-check and where to write the site. "
            "Unknown keys are rejected everywhere."),
        "examples": [],  # filled with the full example below
        "type": "object",
        "additionalProperties": False,
        "required": ["relspan", "report", "datasets"],
        "properties": {
            "relspan": _p({"const": SPEC_VERSION}, "Format version",
                          f"Version of the spec format; this relspan reads version "
                          f"{SPEC_VERSION}.", [SPEC_VERSION],
                          **{"x-expected": f"the number {SPEC_VERSION}"}),
            "report": report,
            "datasets": _p({"type": "array", "minItems": 1, "items": dataset}, "Datasets",
                           "The datasets to analyse, at least one; ids unique.",
                           [[dataset["examples"][0]]]),
            "windows": _p({"type": "array", "minItems": 1, "items": window}, "Window plans",
                          "How datasets are cut into windows; ids unique. Default: one `full` "
                          "plan with id `full`.",
                          [[{"id": "full", "kind": "full"},
                            {"id": "rolling", "kind": "rolling", "width": 40, "step": 8}]],
                          default=[{"id": "full", "kind": "full"}]),
            "checks": _checks_schema(),
            "claims": _p({"type": "array", "items": claim}, "Claims",
                         "Statements re-checked on every build; ids unique.",
                         [[claim["examples"][0]]], default=[]),
            "site": site,
            "run": run,
        },
    }


#: the full example spec (also shown in docs/spec.md and loaded by a test)
EXAMPLE_SPEC = """\
relspan: 1
report:
  title: "Harbour and hinterland"
  summary: "How cargo, ship calls and hinterland jobs moved together."
  authors: ["A. Writer", "B. Analyst"]
  licence: "CC-BY-4.0"
  cite: "Writer & Analyst (2026), Harbour and hinterland."
datasets:
  - id: harbour
    title: "Harbour activity"
    description: "Quarterly indicators of an invented harbour."
    source: data/harbour.csv
    format: auto
    time:
      column: quarter
      format: quarter
      from: "1990-01-01"
      to: "2024-12-31"
    variables:
      - column: cargo
        label: "Cargo handled"
        unit: "kt"
        transform: log
        noise_share: 1.0
      - column: ships
        label: "Ship calls"
        transform: log
        noise_share: 0.5
      - column: jobs
        label: "Hinterland jobs"
        unit: "thousand"
        noise_share: 2.0
    missing: drop
    plans: [full, rolling, eras]
    checks:
      assumptions: [elementary, equal, shaped, bounded, diagonal]
windows:
  - {id: full, kind: full, title: "Whole sample"}
  - {id: rolling, kind: rolling, width: "10 years", step: "2 years"}
  - {id: growing, kind: expanding, width: 40, step: 8}
  - id: eras
    kind: periods
    periods:
      - {label: "Before the new quay", from: "1990-01-01", to: "2007-12-31"}
      - {label: "After the new quay", from: "2008-01-01", to: "2024-12-31"}
checks:
  assumptions: [elementary, equal, bounded, diagonal]
  tolerance: {relative: 0.05}
  normalise_on: auto
  coranks: auto
  max_angle_deg: 10
  frisch_starts: 8
  seed: 0
claims:
  - id: two-relations
    kind: corank
    text: "Two relations hold among the three harbour indicators."
    dataset: harbour
    plan: rolling
    assumption: equal
    equals: 2
  - id: plane-stable
    kind: subspace_stable
    dataset: harbour
    plan: eras
    corank: 2
    below_deg: 5
  - id: jobs-follow-cargo
    kind: sign_stable
    dataset: harbour
    plan: rolling
    normalise_on: jobs
    variable: cargo
    sign: negative
  - id: cargo-bounded
    kind: coefficient_bounded
    dataset: harbour
    plan: full
    normalise_on: jobs
    variable: ships
  - id: no-break
    kind: no_break
    text: "The relations hold throughout, with no break at any date."
    dataset: harbour
    assumption: equal
site:
  out: relspan-site
  figures: svg
  notes: "All figures are invented for this example."
  language: en
"""

#: data files the full example refers to (for tests that load it)
EXAMPLE_SOURCES = ("data/harbour.csv",)


def _with_example(schema: dict[str, Any]) -> dict[str, Any]:
    import yaml  # local: pyyaml is a runtime dependency, imported only when the schema is built

    schema["examples"] = [yaml.safe_load(EXAMPLE_SPEC)]
    return schema


_SCHEMA = _with_example(_build_schema())


def json_schema() -> dict[str, Any]:
    """The spec format v1 schema as a JSON Schema (draft 2020-12) dict.

    Returns a fresh deep copy on each call, so callers may change it freely.
    The result is deterministic and JSON-serialisable; editors can use it to
    check specs as they are typed (see :func:`schema_json_text`).

    Returns
    -------
    dict
        The schema. Every property carries ``title``, ``description`` and
        ``examples``; optional properties carry ``default``.

    References
    ----------
    .. [1] A. Wright, H. Andrews, B. Hutton and G. Dennis, "JSON Schema: A
           Media Type for Describing JSON Documents", draft 2020-12.
    """
    return copy.deepcopy(_SCHEMA)


def schema_json_text() -> str:
    """The schema as JSON text: sorted keys, two-space indent, final newline."""
    return json.dumps(_SCHEMA, indent=2, sort_keys=True, ensure_ascii=False) + "\n"

