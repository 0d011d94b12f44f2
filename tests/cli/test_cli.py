"""The ``relspan`` command line end to end: exit codes, printed output, pinned error wording.

Most cases call :func:`relspan.cli.main` in this process (quick); the ones
that concern the program as a whole (``--version``, exit codes of the real
process, ``serve``, the failing build) start ``python -m relspan`` in a
subprocess. Every case works on a copy of the demo in a temporary folder, so
the repository is never written to.

Outside references: the JSON Schema check uses the ``jsonschema`` reference
library (Draft 2020-12 metaschema); the demo data are the invented ones made
by specs/generate_demo.py.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
import urllib.request
from pathlib import Path

import pytest
import yaml

from relspan import __version__
from relspan.cli import main

ROOT = Path(__file__).resolve().parents[2]
SPECS = ROOT / "specs"
DEMO = SPECS / "demo.yaml"
FAILING = ROOT / "tests" / "fixtures" / "failing_claim.yaml"
SITE_DEMO = ROOT / "site_demo"
DEMO_CLAIMS = ("trio-two-relations", "trio-plane-stable", "accounts-weight-bounded",
               "accounts-weight-sign", "fares-one-relation-per-era")
SUBCOMMANDS = ("build", "check", "show", "draft", "verify", "schema")
#: the old names, hidden aliases for one release
OLD_NAMES = {"serve": "show", "new": "draft"}


# ----------------------------------------------------------------- helpers


def run_cli(*args: str, cwd: Path = ROOT, timeout: float = 900, **env: str) -> subprocess.CompletedProcess:
    """``python -m relspan ARGS`` in a subprocess, text output captured."""
    full_env = {**os.environ, **env}
    full_env.pop("RELSPAN_DEBUG", None)
    return subprocess.run([sys.executable, "-m", "relspan", *args], cwd=cwd, env=full_env,
                          capture_output=True, text=True, timeout=timeout)


def call_main(args: list[str], capsys) -> tuple[int, str, str]:
    """:func:`relspan.cli.main` in this process; returns (exit code, stdout, stderr)."""
    capsys.readouterr()
    try:
        code = main(args)
    except SystemExit as stop:  # argparse's own exits (--help, --version, usage errors)
        code = stop.code if isinstance(stop.code, int) else 0
    out, err = capsys.readouterr()
    return code, out, err


def copy_demo(folder: Path) -> Path:
    """specs/demo.yaml and its CSV files (not the cache, not the generator) into ``folder``."""
    (folder / "data").mkdir(parents=True)
    for csv in sorted((SPECS / "data").glob("*.csv")):
        shutil.copy2(csv, folder / "data" / csv.name)
    shutil.copy2(DEMO, folder / "demo.yaml")
    return folder / "demo.yaml"


def edit_text(path: Path, old: str, new: str) -> None:
    """Replace exactly one occurrence of ``old`` (fails loudly if the demo changed)."""
    text = path.read_text(encoding="utf-8")
    assert text.count(old) == 1, f"{path.name}: expected one {old!r} to edit"
    path.write_text(text.replace(old, new), encoding="utf-8")


def listing(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def assert_one_paragraph(err: str) -> None:
    """A user-facing error: no traceback, at most a message and one ``Fix:`` line."""
    assert "Traceback" not in err
    lines = [ln for ln in err.strip().splitlines() if ln.strip()]
    assert 1 <= len(lines) <= 2, err
    assert lines[-1].lstrip().startswith("Fix:"), err


# ----------------------------------------------------------- version, help


def test_version_prints_program_name_and_package_version():
    done = run_cli("--version")
    assert done.returncode == 0
    assert done.stdout.strip() == f"relspan {__version__}"


@pytest.mark.parametrize("command", SUBCOMMANDS)
def test_help_of_every_subcommand_shows_an_example(command, capsys):
    code, out, _ = call_main([command, "--help"], capsys)
    assert code == 0
    assert re.search(rf"^Example: relspan {command} \S", out, flags=re.M), out


def test_top_level_help_shows_an_example_and_every_subcommand(capsys):
    code, out, _ = call_main(["--help"], capsys)
    assert code == 0
    assert "Example: relspan build specs/demo.yaml" in out
    for command in SUBCOMMANDS:
        assert command in out


@pytest.mark.parametrize("old", sorted(OLD_NAMES))
def test_old_command_names_still_work_but_are_not_listed(old, capsys, tmp_path):
    code, out, _ = call_main(["--help"], capsys)
    assert not re.search(rf"^\s+{old}\s", out, flags=re.M), out
    assert re.search(rf"^\s+{OLD_NAMES[old]}\s", out, flags=re.M), out
    code, out, _ = call_main([old, "--help"], capsys)
    assert code == 0 and f"`{old}` is the old name of `{OLD_NAMES[old]}`" in " ".join(out.split())


def test_show_listens_on_a_free_port_unless_told(capsys):
    from relspan.cli import _parser

    assert _parser().parse_args(["show", "x"]).port == 0
    assert _parser().parse_args(["serve", "x"]).port == 0
    assert _parser().parse_args(["show", "x", "--port", "8123"]).port == 8123


def test_no_command_prints_usage_and_exits_2(capsys):
    code, _, err = call_main([], capsys)
    assert code == 2
    assert "usage: relspan" in err


def test_jobs_below_one_is_an_options_error(tmp_path, capsys):
    spec = copy_demo(tmp_path / "demo")
    code, _, err = call_main(["check", str(spec), "--jobs", "0"], capsys)
    assert code == 2
    assert "--jobs must be a whole number >= 1; got 0." in err
    assert_one_paragraph(err)


# ------------------------------------------------------------------- check


@pytest.fixture(scope="module")
def checked_demo(tmp_path_factory):
    """``relspan check demo.yaml`` on a fresh copy, with the default cache location.

    Returns (process, files before, files after) so tests can see what it wrote.
    """
    folder = tmp_path_factory.mktemp("checked") / "demo"
    spec = copy_demo(folder)
    before = listing(folder)
    done = run_cli("check", spec.name, "--jobs", "1", "-q", cwd=folder)
    return done, before, listing(folder)


def test_check_of_the_demo_exits_0_with_a_verdict_table_of_five_holding_claims(checked_demo):
    done, _, _ = checked_demo
    assert done.returncode == 0, done.stderr
    lines = done.stdout.splitlines()
    assert lines[0].split()[:4] == ["claim", "dataset", "plan", "verdict"]
    for claim in DEMO_CLAIMS:
        row = next(ln for ln in lines if ln.startswith(claim + " "))
        assert row.split()[3] == "HOLDS", row
    assert re.search(r"^5 of 5 claim\(s\) hold \(\d+\.\d s\)$", done.stdout, flags=re.M)
    assert "FAILS" not in done.stdout


def test_check_writes_no_site_only_the_result_cache(checked_demo):
    done, before, after = checked_demo
    assert done.returncode == 0, done.stderr
    new = sorted(set(after) - set(before))
    assert new and all(name.split("/")[0] == ".relspan-cache" for name in new), new
    assert set(before) <= set(after)


def test_check_with_a_bad_spec_exits_2_in_a_real_process_without_traceback(tmp_path):
    spec = copy_demo(tmp_path / "demo")
    edit_text(spec, "  max_angle_deg: 10\n", "  max_angel_deg: 10\n")
    done = run_cli("check", str(spec), "--no-cache", "-q")
    assert done.returncode == 2
    assert "did you mean 'max_angle_deg'?" in done.stderr
    assert_one_paragraph(done.stderr)
    assert done.stdout == ""


# ------------------------------------------------------ validation errors


def _unknown_key(spec: Path) -> None:
    edit_text(spec, "  max_angle_deg: 10\n", "  max_angel_deg: 10\n")


def _wrong_type(spec: Path) -> None:
    edit_text(spec, "  frisch_starts: 8\n", "  frisch_starts: eight\n")


def _missing_file(spec: Path) -> None:
    edit_text(spec, "source: data/trio.csv", "source: data/trio-2024.csv")


def _variable_not_in_data(spec: Path) -> None:
    edit_text(spec, "{column: kelp,", "{column: seaweed,")


def _non_numeric(spec: Path) -> None:
    csv = spec.parent / "data" / "trio.csv"
    lines = csv.read_text(encoding="utf-8").splitlines()
    cells = lines[5].split(",")  # data row 5 (line 6 of the file, after the header)
    cells[2] = "about 700"  # the rail column
    lines[5] = ",".join(cells)
    csv.write_text("\n".join(lines) + "\n", encoding="utf-8")


def _window_too_short(spec: Path) -> None:
    # the trio (4 variables) gets the eras plan, whose second period is cut to two quarters
    edit_text(spec, "    plans: [full, rolling, growing]\n    checks:\n      normalise_on: cargo",
              "    plans: [full, eras, rolling, growing]\n    checks:\n      normalise_on: cargo")
    edit_text(spec, 'from: "2008-01-01", to: "2025-12-31"}', 'from: "2008-01-01", to: "2008-06-30"}')


def _empty_selection(spec: Path) -> None:
    edit_text(spec, "      format: quarter\n    variables:\n      - {column: cargo",
              '      format: quarter\n      from: "2030-01-01"\n    variables:\n      - {column: cargo')


#: (case, edit, pinned wording as regular expressions over stderr); the spec's own
#: path is matched as SPEC, the data file as it is named in the spec.
VALIDATION_CASES = [
    ("unknown key names the nearest key", _unknown_key,
     [r"^SPEC:111: unknown key checks\.max_angel_deg; did you mean 'max_angle_deg'\?",
      r"Valid keys in checks are: assumptions, coranks, frisch_starts, max_angle_deg, normalise_on, "
      r"resampling, seed, tolerance\.", r"Fix: rename 'max_angel_deg' to 'max_angle_deg'\."]),
    ("wrong type names key, line and what was got", _wrong_type,
     [r"^SPEC:112: checks\.frisch_starts must be a whole number; got the text 'eight'\.",
      r"Fix: write a whole number >= 1"]),
    ("missing file names the source key and the folder", _missing_file,
     [r"^SPEC:35: datasets\[0\]\.source: data file 'data/trio-2024\.csv' not found",
      r"Fix: check the spelling; the path is relative to the folder of the spec"]),
    ("variable not in the data lists the columns that exist", _variable_not_in_data,
     [r"^data/trio\.csv: has no column 'seaweed'\. Its columns are: 'quarter', 'cargo', 'rail', "
      r"'customs', 'kelp'\.", r"variables\[3\]\.column", r"Fix: change variables\[3\]\.column"]),
    ("non-numeric value names the column and the first bad row", _non_numeric,
     [r"^data/trio\.csv: column 'rail', row 5: 'about 700' is not a number\.",
      r"Fix: correct or empty that cell"]),
    ("window with fewer rows than variables + 2", _window_too_short,
     [r"^data/trio\.csv: dataset 'trio', window plan 'eras': window 2 \(New fare formula "
      r"\(2008-2025\) from 2008-01-01 up to \S+\) has 2 analysed rows, but 4 variables need at least 6\.",
      r"Fix: widen the plan's windows \(or period\), or analyse fewer variables\."]),
    ("empty selection names the range and the key", _empty_selection,
     [r"^data/trio\.csv: no row of dataset 'trio' lies between 2030-01-01 and the end "
      r"\(all 144 rows are outside\)\.", r"time\.from", r"Fix: widen or correct the time range"]),
]


@pytest.mark.parametrize("case,edit,patterns", VALIDATION_CASES, ids=[c[0] for c in VALIDATION_CASES])
def test_bad_input_exits_2_with_its_pinned_one_paragraph_error(case, edit, patterns, tmp_path, capsys):
    spec = copy_demo(tmp_path / "demo")
    edit(spec)
    code, out, err = call_main(["check", str(spec), "--no-cache", "--jobs", "1", "-q"], capsys)
    assert code == 2, err
    assert out == ""
    assert_one_paragraph(err)
    text = err.replace(str(spec), "SPEC")
    for pattern in patterns:
        assert re.search(pattern, text, flags=re.M), f"{case}: {pattern!r} not in\n{text}"


def test_bad_input_writes_nothing_into_the_spec_folder(tmp_path, capsys):
    spec = copy_demo(tmp_path / "demo")
    _non_numeric(spec)
    before = listing(spec.parent)
    code, _, _ = call_main(["build", str(spec), "--out", str(tmp_path / "site"), "--jobs", "1", "-q"],
                           capsys)
    assert code == 2
    after = listing(spec.parent)
    # the result cache (created when the build starts) may appear; nothing else may
    assert {k: v for k, v in after.items() if not k.startswith(".relspan-cache/")} == before
    assert not any(k.endswith((".pkl", ".npz")) for k in after)
    assert not (tmp_path / "site").exists()


def test_build_into_the_spec_folder_is_refused_before_any_work(tmp_path, capsys):
    spec = copy_demo(tmp_path / "demo")
    before = listing(spec.parent)
    code, _, err = call_main(["build", str(spec), "--out", str(spec.parent), "--no-cache", "-q"], capsys)
    assert code == 2
    assert_one_paragraph(err)
    assert listing(spec.parent) == before


# --------------------------------------------------------------------- new


@pytest.fixture
def some_csv(tmp_path) -> Path:
    target = tmp_path / "some.csv"
    shutil.copy2(SPECS / "data" / "trio.csv", target)
    return target


def test_draft_prints_a_starter_spec_that_check_accepts(some_csv, capsys, monkeypatch):
    monkeypatch.chdir(some_csv.parent)
    code, out, _ = call_main(["draft", some_csv.name], capsys)
    assert code == 0
    assert yaml.safe_load(out)["relspan"] == 1
    spec = some_csv.parent / "some.yaml"
    spec.write_text(out, encoding="utf-8")
    code, out, err = call_main(["check", spec.name, "--no-cache", "--jobs", "1", "-q"], capsys)
    assert code == 0, err
    assert "no claims in the spec; analysis ran on 1 dataset(s)" in out


def test_draft_with_out_writes_the_spec_and_says_what_to_do_next(some_csv, capsys, monkeypatch):
    monkeypatch.chdir(some_csv.parent)
    code, out, _ = call_main(["draft", some_csv.name, "--out", "fresh.yaml"], capsys)
    assert code == 0
    assert "next: relspan check fresh.yaml" in out
    assert yaml.safe_load((some_csv.parent / "fresh.yaml").read_text(encoding="utf-8"))["relspan"] == 1
    assert sorted(p.name for p in some_csv.parent.iterdir()) == ["fresh.yaml", "some.csv"]


def test_draft_with_out_refuses_to_overwrite_an_existing_file(some_csv, capsys, monkeypatch):
    monkeypatch.chdir(some_csv.parent)
    existing = some_csv.parent / "mine.yaml"
    existing.write_text("# my own notes\n", encoding="utf-8")
    code, _, err = call_main(["draft", some_csv.name, "--out", "mine.yaml"], capsys)
    assert code == 2
    assert "mine.yaml already exists; relspan does not overwrite it." in err
    assert_one_paragraph(err)
    assert existing.read_text(encoding="utf-8") == "# my own notes\n"
    assert sorted(p.name for p in some_csv.parent.iterdir()) == ["mine.yaml", "some.csv"]


# ------------------------------------------------------------------ schema


def test_schema_is_a_draft_2020_12_json_schema_that_accepts_the_demo_spec():
    jsonschema = pytest.importorskip("jsonschema")  # reference library
    done = run_cli("schema")
    assert done.returncode == 0
    schema = json.loads(done.stdout)
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    jsonschema.Draft202012Validator.check_schema(schema)
    demo = yaml.safe_load(DEMO.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(schema).validate(demo)


def test_schema_rejects_a_spec_with_an_unknown_key(capsys):
    jsonschema = pytest.importorskip("jsonschema")  # reference library
    code, out, _ = call_main(["schema"], capsys)
    assert code == 0
    demo = yaml.safe_load(DEMO.read_text(encoding="utf-8"))
    demo["checks"]["max_angel_deg"] = 10
    errors = list(jsonschema.Draft202012Validator(json.loads(out)).iter_errors(demo))
    assert errors and any("max_angel_deg" in e.message for e in errors)


# ------------------------------------------------------------------- serve


def test_show_serves_a_built_folder_on_a_free_localhost_port_until_terminated():
    if not (SITE_DEMO / "index.html").is_file():
        pytest.skip("site_demo/ is not built (relspan build specs/demo.yaml --no-cache)")
    proc = subprocess.Popen([sys.executable, "-m", "relspan", "show", str(SITE_DEMO)],
                            cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        line = proc.stderr.readline()
        match = re.search(r"at http://(127\.0\.0\.1):(\d+)/", line)
        assert match, f"serve printed {line!r}"
        url = f"http://127.0.0.1:{match.group(2)}/index.html"
        with urllib.request.urlopen(url, timeout=30) as response:
            assert response.status == 200
            body = response.read()
        assert body == (SITE_DEMO / "index.html").read_bytes()
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=30)
        except subprocess.TimeoutExpired:  # pragma: no cover - a hung server
            proc.kill()
            proc.wait()
        proc.stdout.close()
        proc.stderr.close()


def test_show_of_a_folder_without_a_site_exits_2(tmp_path, capsys):
    code, _, err = call_main(["show", str(tmp_path)], capsys)
    assert code == 2
    assert "has no index.html, so it is not a built site." in err
    assert_one_paragraph(err)


# ------------------------------------------------ a failing claim, end to end


@pytest.fixture(scope="module")
def failing_build(tmp_path_factory):
    """``relspan build tests/fixtures/failing_claim.yaml`` into a temporary folder (cold cache)."""
    tmp = tmp_path_factory.mktemp("failing")
    site, cache = tmp / "site", tmp / "cache"
    done = run_cli("build", str(FAILING), "--out", str(site), "--cache-dir", str(cache),
                   "--jobs", "1", "-q")
    return done, site, cache


@pytest.mark.slow
def test_build_of_a_failing_claim_exits_1_and_still_writes_the_site(failing_build):
    done, site, _ = failing_build
    assert done.returncode == 1, done.stderr
    assert "Traceback" not in done.stderr
    assert re.search(r"^trio-plane-frozen\s+trio\s+rolling\s+FAILS\s", done.stdout, flags=re.M)
    assert "5 of 6 claim(s) hold; 1 fail" in done.stdout
    assert f"site written to {site}" in done.stdout
    assert (site / "index.html").is_file()


def _section(page: str, anchor: str) -> str:
    """The HTML from the heading with id ``anchor`` up to the next heading of any level."""
    start = page.index(f'id="{anchor}"')
    rest = page[start:]
    stop = re.search(r"<h[1-6][ >]", rest[1:])
    return rest if stop is None else rest[:stop.start() + 1]


@pytest.mark.slow
def test_claims_page_of_the_failing_build_shows_the_fails_verdict(failing_build):
    _, site, _ = failing_build
    page = (site / "claims.html").read_text(encoding="utf-8")
    failing = _section(page, "claim-trio-plane-frozen")
    assert re.search(r">\s*(?:<[^>]+>[^<]*</[^>]+>\s*)?fails\s*<", failing), failing
    assert "holds" not in re.sub(r"<[^>]+>", " ", failing).split("What the data show")[0]
    for claim in DEMO_CLAIMS:
        assert re.search(r">\s*(?:<[^>]+>[^<]*</[^>]+>\s*)?holds\s*<", _section(page, f"claim-{claim}"))
    assert "5 of 6 claims hold" in re.sub(r"<[^>]+>", "", page)  # words only: "claims" may be a glossary link


@pytest.mark.slow
def test_claims_table_shows_claim_ids_as_written(failing_build):
    """Ids sit in code spans, where Markdown escapes would show as backslashes (trio\\-plane)."""
    _, site, _ = failing_build
    page = (site / "claims.html").read_text(encoding="utf-8")
    rows = re.findall(r"<tr>.*?</tr>", page, flags=re.S)
    row = next((r for r in rows if "trio-plane-frozen" in r), None)
    assert row is not None, "no table row shows the id trio-plane-frozen as written"
    assert re.search(r">\s*(?:<[^>]+>[^<]*</[^>]+>\s*)?fails\s*<", row), row


@pytest.mark.slow
def test_check_of_a_failing_claim_exits_1_and_names_it(failing_build):
    _, _, cache = failing_build
    done = run_cli("check", str(FAILING), "--cache-dir", str(cache), "--jobs", "1", "-q")
    assert done.returncode == 1, done.stderr
    failing = [ln for ln in done.stdout.splitlines() if " FAILS " in ln]
    assert len(failing) == 1 and failing[0].startswith("trio-plane-frozen "), done.stdout
    assert "below 0.001" in failing[0]


@pytest.mark.slow
def test_a_bad_rebuild_leaves_the_previous_site_byte_for_byte(failing_build, tmp_path, capsys):
    done, site, _ = failing_build
    assert done.returncode == 1
    before = listing(site)
    spec = copy_demo(tmp_path / "demo")
    _non_numeric(spec)  # fails in the data pass, after the output folder was checked
    code, _, err = call_main(["build", str(spec), "--out", str(site), "--no-cache", "--jobs", "1", "-q"],
                             capsys)
    assert code == 2
    assert_one_paragraph(err)
    assert listing(site) == before


def test_schema_markdown_prints_the_committed_spec_reference_so_an_installed_user_has_it(capsys):
    code, out, _ = call_main(["schema", "--markdown"], capsys)
    assert code == 0
    assert out == (ROOT / "docs" / "spec.md").read_text(encoding="utf-8")
    assert "#### `datasets[].separator`" in out and "#### `datasets[].sheet`" in out


def test_draft_points_to_the_installed_reference_not_a_repository_file(tmp_path, capsys):
    data = tmp_path / "d.csv"
    data.write_text("x,y\n" + "".join(f"{i},{i * i}\n" for i in range(20)), encoding="utf-8")
    code, out, _ = call_main(["new", str(data)], capsys)
    assert code == 0
    assert "relspan schema --markdown" in out and "docs/spec.md" not in out


# ------------------------------------------------------------- --quiet / --verbose


def _tiny_spec(folder: Path) -> Path:
    rows = "".join(f"{i},{(i * 7) % 11},{(i * 7) % 11 + i + (i % 3) * 0.01}\n" for i in range(60))
    (folder / "d.csv").write_text("x,y,z\n" + rows, encoding="utf-8")
    spec = folder / "s.yaml"
    spec.write_text("relspan: 1\nreport: {title: t}\ndatasets:\n  - id: d\n    source: d.csv\n"
                    "    variables: [{column: x}, {column: y}, {column: z}]\n"
                    "windows: [{id: full, kind: full}]\nchecks: {assumptions: [elementary, equal]}\n",
                    encoding="utf-8")
    return spec


def test_verbose_draws_progress_bars_in_a_log_and_says_where_the_tasks_ran(tmp_path):
    spec = _tiny_spec(tmp_path)
    done = run_cli("check", str(spec), "--verbose", "--jobs", "1", "--no-cache")
    assert done.returncode == 0, done.stderr
    assert "analysis of d: 2/2 tasks (100%)" in done.stderr  # tqdm's bar, though not a terminal
    assert "1 dataset(s) analysed in this process; result cache: 0 reused, 1 computed" in done.stderr


def test_without_verbose_a_log_gets_no_progress_and_quiet_and_verbose_exclude_each_other(tmp_path):
    spec = _tiny_spec(tmp_path)
    done = run_cli("check", str(spec), "--jobs", "1", "--no-cache")
    assert done.returncode == 0 and done.stderr == ""
    both = run_cli("check", str(spec), "--quiet", "--verbose")
    assert both.returncode == 2 and "not allowed with argument" in both.stderr


def test_the_command_freezes_its_imports_for_the_collector_and_the_library_does_not():
    # gc.freeze keeps full collections off the modules the command imported (docs/performance.md);
    # relspan used as a library must leave its host's collector as it found it
    code = ("import gc, sys\n"
            "from relspan.cli import main\n"
            "import relspan\n"
            "if sys.argv[1] == 'cli':\n"
            "    main(['check', sys.argv[2], '--no-cache', '-q'])\n"
            "else:\n"
            "    relspan.check(sys.argv[2], use_cache=False, jobs=1)\n"
            "print(gc.get_freeze_count())\n")
    counts = {}
    for how in ("cli", "library"):
        out = subprocess.run([sys.executable, "-c", code, how, str(FAILING)], capture_output=True, text=True,
                             check=True, cwd=ROOT)
        counts[how] = int(out.stdout.strip().splitlines()[-1])
    assert counts["cli"] > 10_000 and counts["library"] == 0
