"""Regenerate the bad-input corpus folders under tests/corpus (python tests/corpus/make_corpus.py).

Each case is a small project built from one good spec and one good seeded table, with one
thing broken; the folders it writes are the corpus (reviewed and committed as files)."""
import json, shutil, textwrap
from pathlib import Path
import numpy as np

ROOT = Path(__file__).resolve().parent

def good_rows(T=40, seed=3, start=1950):
    rng = np.random.default_rng(seed)
    x = rng.normal(10, 2, T); y = rng.normal(5, 1, T); z = x + 2 * y + 0.3 * rng.normal(size=T)
    return [(start + t, round(x[t], 4), round(y[t], 4), round(z[t], 4)) for t in range(T)]

def csv_text(rows, header="year,a,b,c"):
    return header + "\n" + "".join(",".join(str(v) for v in r) + "\n" for r in rows)

GOOD_CSV = csv_text(good_rows())

def spec_text(*, source="data/d.csv", variables="[{column: a}, {column: b}, {column: c}]",
              time="{column: year, format: year}", windows=None, checks="{assumptions: [elementary, equal]}",
              claims="", site="{out: _site}", extra_ds="", title='"Corpus case"', top_extra=""):
    windows = windows or "  - {id: full, kind: full}\n"
    t = f"""relspan: 1
report: {{title: {title}}}
datasets:
  - id: d
    source: {source}
{f'    time: {time}' + chr(10) if time else ''}    variables: {variables}
{extra_ds}windows:
{windows}checks: {checks}
{claims}site: {site}
{top_extra}"""
    return t

CASES = {}

def case(name, *, command="check", fragment, spec=None, files=None, args=(), spec_arg="spec.yaml",
         prebuilt=None, note="", exit=2, links=None):
    CASES[name] = dict(command=command, fragment=fragment, spec=spec, files=files or {}, args=list(args),
                       spec_arg=spec_arg, prebuilt=prebuilt, note=note, exit=exit, links=links or {})

D = {"data/d.csv": GOOD_CSV}

# ---- YAML and spec structure
case("yaml-unclosed-bracket", fragment="spec.yaml:6",
     note="malformed YAML: an unclosed flow list; the error names the line",
     spec="relspan: 1\nreport: {title: x}\ndatasets:\n  - id: d\n    variables: [{column: a}, {column: b}\n    source: data/d.csv\nwindows: []\n", files=D)
case("yaml-tab-indent", fragment="spec.yaml:4", note="a tab used for indentation",
     spec="relspan: 1\nreport:\n  title: x\n\tsummary: y\n", files=D)
case("yaml-bad-indent", fragment="spec.yaml:", note="a key indented deeper than its siblings",
     spec=spec_text().replace("    source:", "      source:"), files=D)
case("yaml-duplicate-key", fragment="report", note="the same key written twice in one mapping",
     spec=spec_text() + "report: {title: again}\n", files=D)
case("yaml-empty-spec", fragment="spec.yaml", note="an empty spec file", spec="", files=D)
case("yaml-list-not-mapping", fragment="spec.yaml", note="the top level is a list",
     spec="- relspan: 1\n- report: {title: x}\n", files=D)
case("yaml-python-tag", fragment="spec.yaml", note="a YAML tag that would construct an object",
     spec="relspan: 1\nreport: !!python/object/apply:os.system ['echo hi']\n", files=D)
case("spec-non-utf8", fragment="spec.yaml", note="Latin-1 bytes in the spec",
     spec=spec_text(title='"Caf\udce9"'), files=D)
case("type-title-list", fragment="report.title", note="wrong type: a list where text is expected",
     spec=spec_text(title="[1, 2]"), files=D)
case("type-version", fragment="relspan", note="wrong format version",
     spec=spec_text().replace("relspan: 1", "relspan: 2"), files=D)
case("type-width-text", fragment="windows[1].width", note="a width that is neither rows nor a time span",
     spec=spec_text(windows="  - {id: full, kind: full}\n  - {id: r, kind: rolling, width: many, step: 5}\n"), files=D)
case("type-step-zero", fragment="windows[1].step", note="a step of zero rows",
     spec=spec_text(windows="  - {id: full, kind: full}\n  - {id: r, kind: rolling, width: 20, step: 0}\n"), files=D)
case("type-tolerance-negative", fragment="checks.tolerance", note="a negative tolerance",
     spec=spec_text(checks="{assumptions: [equal], tolerance: {relative: -0.1}}"), files=D)
case("unknown-top-key", fragment="report", note="misspelt top-level key; the nearest key is suggested",
     spec=spec_text().replace("report:", "reprot:"), files=D)
case("unknown-dataset-key", fragment="source", note="misspelt dataset key",
     spec=spec_text().replace("    source:", "    sorce:"), files=D)
case("unknown-variable-key", fragment="label", note="misspelt variable key",
     spec=spec_text(variables="[{column: a, lable: A}, {column: b}, {column: c}]"), files=D)
case("duplicate-dataset-id", fragment="datasets[1].id", note="two datasets with one id",
     spec=spec_text(extra_ds="  - {id: d, source: data/d.csv, variables: [{column: a}, {column: b}]}\n"), files=D)
case("duplicate-variable-in-spec", fragment="datasets[0].variables[1].column", note="a column listed twice",
     spec=spec_text(variables="[{column: a}, {column: a}, {column: c}]"), files=D)
case("one-variable", fragment="datasets[0].variables", note="fewer than two variables",
     spec=spec_text(variables="[{column: a}]"), files=D)
case("unknown-assumption", fragment="quantum", note="an unknown check (noise assumption)",
     spec=spec_text(checks="{assumptions: [elementary, quantum]}"), files=D)
case("unknown-claim-kind", fragment="claims[0].kind", note="an unknown claim kind",
     spec=spec_text(claims="claims:\n  - {id: c, kind: corank_ish, text: t, dataset: d, plan: full, assumption: equal, equals: 1}\n"), files=D)
case("claim-unknown-dataset", fragment="claims[0].dataset", note="a claim about a dataset that does not exist",
     spec=spec_text(claims="claims:\n  - {id: c, kind: corank, text: t, dataset: harbour, plan: full, assumption: equal, equals: 1}\n"), files=D)
case("claim-unknown-plan", fragment="claims[0].plan", note="a claim about a window plan that does not exist",
     spec=spec_text(claims="claims:\n  - {id: c, kind: corank, text: t, dataset: d, plan: weekly, assumption: equal, equals: 1}\n"), files=D)
case("claim-assumption-not-checked", fragment="claims[0]", note="a claim under an assumption the dataset does not check",
     spec=spec_text(claims="claims:\n  - {id: c, kind: corank, text: t, dataset: d, plan: full, assumption: diagonal, equals: 1}\n"), files=D)
case("plan-unknown", fragment="datasets[0].plans", note="a dataset naming a plan that does not exist",
     spec=spec_text(extra_ds="    plans: [full, monthly]\n"), files=D)
case("noise-share-partial", fragment="noise_share", note="noise_share on some variables only",
     spec=spec_text(variables="[{column: a, noise_share: 1}, {column: b}, {column: c}]"), files=D)
case("time-from-after-to", fragment="datasets[0].time", note="a date range that ends before it starts",
     spec=spec_text(time='{column: year, format: year, from: "1990-01-01", to: "1960-01-01"}'), files=D)
case("normalise-on-unknown", fragment="normalise_on", note="normalising on a column that is not a variable",
     spec=spec_text(checks="{assumptions: [equal], normalise_on: zz}"), files=D)

# ---- files and paths
case("spec-missing", fragment="nothere.yaml", note="the spec file does not exist", spec_arg="nothere.yaml", files=D)
case("spec-is-folder", fragment="specdir", note="a folder given where the spec file is expected",
     spec_arg="specdir", files={**D, "specdir/keep.txt": "x\n"})
case("data-missing", fragment="data/missing.csv", note="the data file does not exist",
     spec=spec_text(source="data/missing.csv"), files=D)
case("data-is-folder", fragment="data/folder.csv", note="a folder where the data file is expected",
     spec=spec_text(source="data/folder.csv"), files={**D, "data/folder.csv/keep.txt": "x\n"})
case("source-escapes-project", fragment="allow_outside", note="a source outside the spec's folder without allow_outside",
     spec=spec_text(source="../outside.csv"), files={**D, "../outside.csv": GOOD_CSV})
case("source-absolute", fragment="allow_outside", note="an absolute source path without allow_outside",
     spec=spec_text(source="/etc/hostname"), files=D)
case("out-is-spec-folder", command="build", fragment="site.out '.' is the spec's own folder", note="site.out is the spec's own folder",
     spec=spec_text(site="{out: .}"), files=D)
case("out-holds-data", command="build", fragment="refusing to write the site", note="site.out is the data folder",
     spec=spec_text(site="{out: data}"), files=D)
case("out-is-a-file", command="build", fragment="a file of that name exists", note="--out names an existing file",
     spec=spec_text(), files={**D, "report.txt": "my notes\n"}, args=["--out", "report.txt"])
case("out-not-ours", command="build", fragment="was not made by relspan", note="--out is a non-empty folder relspan did not write",
     spec=spec_text(), files={**D, "mine/notes.txt": "keep me\n"}, args=["--out", "mine"])
case("parquet-format-on-csv", fragment="data/d.csv", note="format: parquet on a CSV file",
     spec=spec_text(extra_ds="    format: parquet\n"), files=D)

# ---- columns and cells
rows = good_rows()
case("column-misspelt", fragment="'b'", note="a variable column that is not in the header (nearest suggested)",
     spec=spec_text(variables="[{column: a}, {column: bb}, {column: c}]"), files=D)
case("time-column-missing", fragment="yr", note="the time column is not in the header",
     spec=spec_text(time="{column: yr, format: year}"), files=D)
case("header-duplicate-column", fragment="duplicate", note="the header names one column twice",
     spec=spec_text(), files={"data/d.csv": csv_text(rows, "year,a,b,b")})
bad = [list(r) for r in rows]; bad[6][2] = "n/a?"
case("cell-non-numeric", fragment="row 7", note="a non-numeric cell; the first bad row is named",
     spec=spec_text(), files={"data/d.csv": csv_text(bad)})
allm = [(r[0], r[1], "", r[3]) for r in rows]
case("column-all-missing", fragment="'b'", note="a column with no values at all",
     spec=spec_text(), files={"data/d.csv": csv_text(allm)})
const = [(r[0], r[1], 7.0, r[3]) for r in rows]
case("column-constant", fragment="'b'", note="a column with one value throughout",
     spec=spec_text(), files={"data/d.csv": csv_text(const)})
bad = [list(r) for r in rows]; bad[3][1] = ""
case("missing-fail", fragment="row 4", note="a blank cell with missing: fail",
     spec=spec_text(extra_ds="    missing: fail\n"), files={"data/d.csv": csv_text(bad)})
case("data-empty", fragment="empty", note="a 0-byte data file", spec=spec_text(), files={"data/d.csv": ""})
case("data-header-only", fragment="data/d.csv", note="a header and no rows", spec=spec_text(),
     files={"data/d.csv": "year,a,b,c\n"})
lat = [list(r) for r in rows]; lat[19][1] = "12\udce9"
case("data-non-utf8", fragment="UTF-8", note="a Latin-1 byte in a cell of the data",
     spec=spec_text(), files={"data/d.csv": csv_text(lat)})
case("data-bom-header-mismatch", fragment="'Year'", note="a BOM file whose header says Year, not year",
     spec=spec_text(), files={"data/d.csv": "\ufeff" + csv_text(rows, "Year,a,b,c")})
inf = [list(r) for r in rows]; inf[9][3] = "inf"
case("cell-infinity", fragment="row 10", note="an infinite value", spec=spec_text(), files={"data/d.csv": csv_text(inf)})
big = [list(r) for r in rows]; big[2][1] = "1e300"
case("cell-absurd-magnitude", fragment="1e+300", note="a value so large its square overflows",
     spec=spec_text(), files={"data/d.csv": csv_text(big)})
neg = [list(r) for r in rows]; neg[5][2] = -1.0
case("log-of-negative", fragment="row 6", note="log transform of a negative value",
     spec=spec_text(variables="[{column: a}, {column: b, transform: log}, {column: c}]"), files={"data/d.csv": csv_text(neg)})

# ---- time index
mixed = [list(r) for r in rows]; mixed[4][0] = "1954-03"
case("dates-mixed", fragment="row 5", note="dates written two ways", spec=spec_text(time="{column: year, format: auto}"),
     files={"data/d.csv": csv_text(mixed)})
unp = [list(r) for r in rows]; unp[8][0] = "soon"
case("dates-unparseable", fragment="soon", note="a date that cannot be read",
     spec=spec_text(), files={"data/d.csv": csv_text(unp)})
uns = [list(r) for r in rows]; uns[10], uns[11] = uns[11], uns[10]
case("dates-unsorted", fragment="row 12", note="dates out of order", spec=spec_text(), files={"data/d.csv": csv_text(uns)})
dup = [list(r) for r in rows]; dup[15][0] = dup[14][0]
case("dates-duplicated", fragment="rows 15 and 16", note="one date twice", spec=spec_text(), files={"data/d.csv": csv_text(dup)})
case("strftime-mismatch", fragment="row 1", note="a strftime pattern that does not fit the dates",
     spec=spec_text(time='{column: year, format: "%d/%m/%Y"}'), files=D)

# ---- windows
case("window-wider-than-data-rows", fragment="the width is 100 rows", note="a rolling width of 100 rows on 40 rows",
     spec=spec_text(windows="  - {id: full, kind: full}\n  - {id: r, kind: rolling, width: 100, step: 5}\n"), files=D)
case("window-wider-than-data-time", fragment="the width is 60 years", note="a rolling width of 60 years on 40 years",
     spec=spec_text(windows='  - {id: full, kind: full}\n  - {id: r, kind: rolling, width: "60 years", step: "5 years"}\n'), files=D)
case("window-too-few-rows", fragment="window plan 'r'", note="a window of 4 rows for 3 variables (needs 5)",
     spec=spec_text(windows="  - {id: full, kind: full}\n  - {id: r, kind: rolling, width: 4, step: 4}\n"), files=D)
case("data-too-few-rows", fragment="data/d.csv", note="4 rows for 3 variables: fewer than variables + 2",
     spec=spec_text(), files={"data/d.csv": csv_text(rows[:4])})
case("period-outside-data", fragment="window plan 'p'", note="a named period with no rows in the data",
     spec=spec_text(windows='  - {id: full, kind: full}\n  - id: p\n    kind: periods\n    periods:\n      - {label: later, from: "2100-01-01", to: "2110-12-31"}\n'), files=D)
case("time-span-without-time", fragment="windows[1]", note="a width in years for a dataset with no time column",
     spec=spec_text(time=None, windows='  - {id: full, kind: full}\n  - {id: r, kind: rolling, width: "10 years", step: "5 years"}\n'), files=D)

# ---- options
case("jobs-zero", fragment="--jobs", note="--jobs 0", spec=spec_text(), files=D, args=["--jobs", "0"])
case("jobs-text", fragment="--jobs", note="--jobs with a word", spec=spec_text(), files=D, args=["--jobs", "many"])
case("scheduler-unreachable", fragment="could not reach the Dask scheduler", note="a scheduler address where nothing listens",
     spec=spec_text(), files=D, args=["--scheduler", "tcp://127.0.0.1:9"])
case("scheduler-malformed", fragment="--scheduler must be", note="a scheduler address that is not an address",
     spec=spec_text(), files=D, args=["--scheduler", "not an address"])

# ---- build over a previous good site: it must stay byte-identical
case("rebuild-bad-spec-keeps-site", command="build", fragment="reprot", prebuilt="_site",
     note="a previous good site in _site, then a spec with a misspelt key",
     spec=spec_text().replace("report:", "reprot:"), files=D)
bad = [list(r) for r in rows]; bad[6][2] = "x"
case("rebuild-bad-data-keeps-site", command="build", fragment="row 7", prebuilt="_site",
     note="a previous good site in _site, then a data file with a bad cell",
     spec=spec_text(), files={"data/d.csv": csv_text(bad)})
case("rebuild-bad-jobs-keeps-site", command="build", fragment="--jobs", prebuilt="_site",
     note="a previous good site, then --jobs -3", spec=spec_text(), files=D, args=["--jobs", "-3"])

# ---- more file shapes
case("data-ragged-row", fragment="data/d.csv", note="a row with more fields than the header",
     spec=spec_text(), files={"data/d.csv": csv_text(rows[:10]) + "1960,1,2,3,4,5\n" + csv_text(rows[11:], "").lstrip()})
case("data-unclosed-quote", fragment="data/d.csv", note="a quoted cell that never closes",
     spec=spec_text(), files={"data/d.csv": csv_text(rows[:10]) + '1960,"1.5,2,3\n' + csv_text(rows[11:], "").lstrip()})
case("data-binary-garbage", fragment="data/d.csv", note="an image file named .csv",
     spec=spec_text(), files={"data/d.csv": "\udc89PNG\r\n\x1a\n\x00\x00\x00\rIHDR\x00\x00"})
case("out-is-data-file", command="build", fragment="refusing to write the site", note="--out names the data file itself",
     spec=spec_text(), files=D, args=["--out", "data/d.csv"])
case("time-format-unknown", fragment="datasets[0].time.format", note="a time format that is neither a word we know nor a pattern",
     spec=spec_text(time="{column: year, format: decade}"), files=D)
case("claim-duplicate-id", fragment="claims[1].id", note="two claims with one id",
     spec=spec_text(claims="claims:\n  - {id: c, kind: corank, text: t, dataset: d, plan: full, assumption: equal, equals: 1}\n  - {id: c, kind: corank, text: u, dataset: d, plan: full, assumption: equal, equals: 1}\n"), files=D)
case("claim-corank-too-large", fragment="claims[0]", note="a claim of more relations than variables allow",
     spec=spec_text(claims="claims:\n  - {id: c, kind: corank, text: t, dataset: d, plan: full, assumption: equal, equals: 5}\n"), files=D)
case("claim-missing-field", fragment="claims[0]", note="a corank claim with no number to compare",
     spec=spec_text(claims="claims:\n  - {id: c, kind: corank, text: t, dataset: d, plan: full, assumption: equal}\n"), files=D)
case("cache-dir-is-file", command="build", fragment="is not a folder", note="--cache-dir names an existing file",
     spec=spec_text(), files={**D, "cachefile": "x\n"}, args=["--cache-dir", "cachefile"])

cw = [list(r) for r in rows]
for r in cw[:12]:
    r[2] = 4.0
case("column-constant-in-one-window", fragment="column 'b' is constant in window 1",
     note="a variable flat in the first rolling window only",
     spec=spec_text(windows="  - {id: full, kind: full}\n  - {id: r, kind: rolling, width: 12, step: 12}\n"),
     files={"data/d.csv": csv_text(cw)})
case("noise-share-zero-with-shaped", fragment="datasets[0].variables[0].noise_share is 0",
     note="a zero noise share with the shaped assumption checked",
     spec=spec_text(variables="[{column: a, noise_share: 0}, {column: b, noise_share: 1}, {column: c, noise_share: 1}]",
                    checks="{assumptions: [shaped]}"), files=D)

# ---- issue 17: user mistakes that used to end in an internal error (exit 3) or a wrong diagnosis
def timed_csv(values, header="t,a,b,c"):
    return csv_text([(v, *r[1:]) for v, r in zip(values, rows)], header)

def pattern_spec(fmt):
    return spec_text(time=f'{{column: t, format: "{fmt}"}}')

case("time-format-unknown-directive", fragment="datasets[0].time.format '%YQ%Q' cannot be used",
     note="a strftime pattern with a directive Python cannot read (%Q)",
     spec=pattern_spec("%YQ%Q"), files={"data/d.csv": timed_csv([f"{1950 + i // 4}Q{i % 4 + 1}" for i in range(40)])})
case("time-format-epoch-seconds", fragment="%s (seconds since 1970)", note="a time pattern of seconds since 1970 (%s)",
     spec=pattern_spec("%s"), files={"data/d.csv": timed_csv([str(10**6 + 86400 * i) for i in range(40)])})
case("time-format-iso-week", fragment="ISO year directive", note="ISO weeks (%G-W%V) without a weekday",
     spec=pattern_spec("%G-W%V"), files={"data/d.csv": timed_csv([f"2020-W{i + 1:02d}" for i in range(40)])})
case("dates-two-digit-year-pivot", fragment="two-digit years (%y)",
     note="two-digit years crossing 68/69: the century pivot is named, not 'sort the file'",
     spec=pattern_spec("%y"), files={"data/d.csv": timed_csv([f"{(50 + i) % 100:02d}" for i in range(40)])})
case("dates-near-year-one", command="build", fragment="too close to year 1",
     note="years 1-40: the figures' date axes cannot show them (check says so too)",
     spec=pattern_spec("%Y"), files={"data/d.csv": timed_csv([f"{i + 1:04d}" for i in range(40)])})
case("title-lone-surrogate", command="build", fragment="report.title holds the lone surrogate",
     note="a \\u escape in the title that is half a character", spec=spec_text(title='"x\\udc80y"'), files=D)
case("variable-blank-name", command="build", fragment="datasets[0].variables[0].column is ' '",
     note="a column named ' ' (its label would be blank)", spec=spec_text(variables='[{column: " "}, {column: b}, {column: c}]'),
     files={"data/d.csv": csv_text(rows, "year, ,b,c")})
case("out-name-too-long", command="build", fragment="too long", note="--out with a 300-character name",
     spec=spec_text(), files=D, args=["--out", "a" * 300])
case("cache-dir-name-too-long", command="build", fragment="cache folder", note="--cache-dir with a 300-character name",
     spec=spec_text(), files=D, args=["--cache-dir", "c" * 300])
case("out-symlink-loop", command="build", fragment="symbolic links form a loop", note="--out through a symlink loop",
     spec=spec_text(), files=D, args=["--out", "loop1/site"], links={"loop1": "loop2", "loop2": "loop1"})
case("cache-dir-symlink-loop", command="build", fragment="cache folder", note="--cache-dir through a symlink loop",
     spec=spec_text(), files=D, args=["--cache-dir", "loop1/cache"], links={"loop1": "loop2", "loop2": "loop1"})
case("jobs-huge", fragment="--jobs 99999999999", note="--jobs 99999999999", spec=spec_text(), files=D,
     args=["--jobs", "99999999999"])
short = [list(r) for r in rows]; del short[7][2]
case("data-short-row", fragment="line 9 has 3 fields but the header has 4: a value is left out",
     note="a row with a value left out (not emptied): refused, naming the line", spec=spec_text(),
     files={"data/d.csv": csv_text(short)})
tiny = [(r[0], f"{r[1] * 1e-161:.6e}", r[2], r[3]) for r in rows]
case("cell-tiny-magnitude", fragment="every value is smaller than 1e-150",
     note="a column of values near 1e-161: their squares underflow", spec=spec_text(), files={"data/d.csv": csv_text(tiny)})
case("source-dev-zero", fragment="special file of the operating system", note="/dev/zero as a source (allow_outside)",
     spec=spec_text(source="/dev/zero", extra_ds="    allow_outside: true\n"), files=D)
case("source-proc-file", fragment="special file of the operating system", note="a /proc file (size 0, not empty)",
     spec=spec_text(source="/proc/self/stat", extra_ds="    allow_outside: true\n"), files=D)
bomb = 'x: &a0 "' + "y" * 100 + '"\n' + "".join(f"x{i}: &a{i} [" + ", ".join([f"*a{i - 1}"] * 10) + "]\n" for i in range(1, 7))
case("yaml-alias-expansion", fragment="aliases", note="a small spec whose YAML aliases expand a millionfold",
     spec=spec_text(top_extra="anchors:\n" + "".join("  " + line + "\n" for line in bomb.splitlines())), files=D)
case("cache-dir-inside-site", command="build", fragment="inside the site folder", prebuilt="_site",
     note="--cache-dir inside the previous site: refused before anything is written",
     spec=spec_text(), files=D, args=["--cache-dir", "_site/cache"])

# ---- positive controls (exit 0; not counted among the bad inputs)
case("ok-bom-header", exit=0, fragment="", note="positive control: a UTF-8 BOM before a matching header reads fine",
     spec=spec_text(), files={"data/d.csv": "\ufeff" + GOOD_CSV})
case("ok-trailing-separator", exit=0, fragment="",
     note="positive control: every data row ends with a separator (read as if it were not there)",
     spec=spec_text(), files={"data/d.csv": "year,a,b,c\n" + "".join(",".join(map(str, r)) + ",\n" for r in rows)})
case("ok-mixed-utc-offsets", exit=0, fragment="",
     note="positive control: a %z pattern with two UTC offsets (times read as local wall time)",
     spec=pattern_spec("%Y-%m-%d %z"),
     files={"data/d.csv": timed_csv([f"2020-{1 + i // 28:02d}-{1 + i % 28:02d} " + ("+0100" if i % 2 else "+0200")
                                     for i in range(40)])})
case("ok-plain", command="build", exit=0, fragment="", note="positive control: the good spec every case above breaks; "
     "its site is the previous good site of the rebuild cases", spec=spec_text(), files=D)

def write():
    if ROOT.exists():
        for p in ROOT.iterdir():
            if p.is_dir() and (p / "case.yaml").exists():
                shutil.rmtree(p)
    ROOT.mkdir(parents=True, exist_ok=True)
    for name, c in CASES.items():
        folder = ROOT / name / "project"
        folder.mkdir(parents=True)
        files = dict(c["files"])
        if c["spec"] is not None:
            files["spec.yaml"] = c["spec"]
        for rel, text in files.items():
            p = (folder / rel)
            p.parent.mkdir(parents=True, exist_ok=True)
            p.write_bytes(text.encode("utf-8", "surrogateescape"))
        for rel, target in c["links"].items():
            (folder / rel).symlink_to(target)
        meta = {"command": c["command"], "spec": c["spec_arg"], "exit": c["exit"], "fragment": c["fragment"],
                "what": c["note"]}
        if c["args"]:
            meta["args"] = c["args"]
        if c["prebuilt"]:
            meta["previous_site"] = c["prebuilt"]
        import yaml
        (ROOT / name / "case.yaml").write_text(yaml.safe_dump(meta, sort_keys=False, allow_unicode=True), encoding="utf-8")
    print(len(CASES), "cases")

write()
