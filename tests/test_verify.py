"""`relspan verify SITE`: a published site replicates from its spec and data, and any tampering is named.

The published site is the committed demo (site_demo/, built from specs/demo.yaml); the tampered
copies live in temporary folders.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from relspan.verify import Comparison, compare_documents, verify

ROOT = Path(__file__).resolve().parents[1]
SITE_DEMO = ROOT / "site_demo"
DEMO = ROOT / "specs" / "demo.yaml"


def _cli(*args, cwd=ROOT):
    return subprocess.run([sys.executable, "-m", "relspan", "verify", *map(str, args)], cwd=cwd,
                          capture_output=True, text=True, timeout=900)


@pytest.fixture(scope="module")
def demo_run():
    from relspan.run.pipeline import run_analysis
    from relspan.spec import load_spec

    return run_analysis(load_spec(DEMO), jobs=1, use_cache=False, progress=False)


@pytest.fixture()
def site_copy(tmp_path) -> Path:
    out = tmp_path / "site"
    shutil.copytree(SITE_DEMO, out)
    return out


def _edit_json(path: Path, change) -> None:
    doc = json.loads(path.read_text(encoding="utf-8"))
    change(doc)
    path.write_text(json.dumps(doc, sort_keys=True, indent=1, ensure_ascii=False) + "\n", encoding="utf-8")


def test_verify_of_the_committed_demo_exits_0_and_says_replicated():
    done = _cli("site_demo")
    assert done.returncode == 0, done.stdout + done.stderr
    assert "verdict: REPLICATED" in done.stdout
    for ds in ("trio", "accounts", "shift"):
        assert ds in done.stdout
    assert "specs/data/trio.csv" in done.stdout and "identical" in done.stdout


def test_tampered_number_in_results_json_is_named_and_exits_1(site_copy):
    def change(doc):
        doc["datasets"][0]["full_sample"]["covariance"][0][0] *= 1.001
    _edit_json(site_copy / "data" / "results.json", change)
    done = _cli(site_copy, "--spec", DEMO)
    assert done.returncode == 1, done.stdout + done.stderr
    assert "verdict: DIFFERENT" in done.stdout
    assert "datasets/trio/full_sample/covariance/0/0" in done.stdout


def test_tampered_number_in_a_dataset_file_is_found(site_copy, demo_run):
    def change(doc):
        doc["full_sample"]["elementary"]["r_squared"][0] = 0.5
    _edit_json(site_copy / "data" / "accounts" / "results.json", change)
    rep = verify(site_copy, spec=DEMO, run=demo_run)
    assert not rep.agrees
    assert rep.datasets["accounts"].different == 1
    assert "data/accounts/results.json/full_sample/elementary/r_squared/0" in rep.report()
    assert rep.datasets["trio"].different == 0


def test_changed_claim_verdict_is_named(site_copy, demo_run):
    def change(doc):
        doc["claims"][1]["holds"] = False
    _edit_json(site_copy / "data" / "results.json", change)
    rep = verify(site_copy, spec=DEMO, run=demo_run)
    assert not rep.agrees
    assert "claim trio-plane-stable: published verdict fails, rebuilt holds" in rep.verdict()


def test_changed_csv_download_is_found(site_copy, demo_run):
    path = site_copy / "data" / "trio" / "windows.csv"
    lines = path.read_text(encoding="utf-8").splitlines()
    head = lines[0].split(",")
    col = next(i for i, h in enumerate(head) if h.startswith("coef["))
    row = lines[1].split(",")
    row[col] = str(float(row[col]) + 0.5)
    lines[1] = ",".join(row)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    rep = verify(site_copy, spec=DEMO, run=demo_run)
    assert rep.datasets["trio"].different == 1
    assert "data/trio/windows.csv line 2" in rep.report()


def test_changed_input_file_is_named_by_its_checksum_and_exits_1(tmp_path):
    specs = tmp_path / "specs"
    shutil.copytree(ROOT / "specs", specs, ignore=shutil.ignore_patterns(".relspan-cache", "__pycache__"))
    data = specs / "data" / "shift.csv"
    lines = data.read_text(encoding="utf-8").splitlines()
    cells = lines[5].split(",")
    cells[-1] = str(round(float(cells[-1]) * 1.5, 3))
    lines[5] = ",".join(cells)
    data.write_text("\n".join(lines) + "\n", encoding="utf-8")
    done = _cli(SITE_DEMO, "--spec", specs / "demo.yaml")
    assert done.returncode == 1, done.stdout + done.stderr
    assert "shift.csv" in done.stdout and "is not the published" in done.stdout
    assert "verdict: DIFFERENT" in done.stdout


def test_within_precision_is_not_a_difference_but_one_quantum_more_is():
    # the iterative class keeps 4 significant digits: 0.1234 and 0.1235 are one quantum apart
    pub = {"diagonal": {"noise_variances": [0.1234, 0.5]}}
    assert compare_documents(pub, {"diagonal": {"noise_variances": [0.1235, 0.5]}}).different == 0
    assert compare_documents(pub, {"diagonal": {"noise_variances": [0.1237, 0.5]}}).different == 1
    c = compare_documents({"equal": {"eigenvalues": [1.0]}}, {"equal": {"eigenvalues": [1.0]}})
    assert (c.identical, c.within, c.different) == (1, 0, 0)


def test_a_changed_count_is_a_difference_whatever_the_precision():
    assert compare_documents({"corank": 2}, {"corank": 3}).different == 1
    assert isinstance(compare_documents({"a": "x"}, {"a": "y"}), Comparison)


def test_a_folder_that_is_not_a_site_is_bad_input_in_one_paragraph(tmp_path):
    done = _cli(tmp_path)
    assert done.returncode == 2
    assert "is not a site written by `relspan build`" in done.stderr
    assert "Traceback" not in done.stderr and "Fix:" in done.stderr


def test_a_spec_that_cannot_be_found_is_bad_input(tmp_path, site_copy):
    done = _cli(site_copy, cwd=tmp_path)
    assert done.returncode == 2
    assert "cannot find the spec demo.yaml" in done.stderr and "--spec" in done.stderr
