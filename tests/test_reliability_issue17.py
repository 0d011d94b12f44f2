"""Cases of the reliability issue that need more than a corpus folder: FIFOs, permissions that root
does not feel, a server, a folder of mode 555, the fork server's lifeline, linear id checks.

The bad-input cases that fit a folder are in tests/corpus (see its README); each test here names
the behaviour it pins.
"""

from __future__ import annotations

import errno
import os
import shutil
import socket
import threading
import urllib.error
import urllib.request
import warnings
from pathlib import Path

import pytest

from corpus.harness import CORPUS, paragraph_problems
from relspan.cli import main
from relspan.errors import RelspanNote

OK = CORPUS / "ok-plain" / "project"


def call(args: list[str], capsys) -> tuple[int, str, str]:
    capsys.readouterr()
    try:
        code = main(args)
    except SystemExit as stop:
        code = stop.code if isinstance(stop.code, int) else 0
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def project(tmp_path, monkeypatch):
    shutil.copytree(OK, tmp_path / "p")
    monkeypatch.chdir(tmp_path / "p")
    return tmp_path / "p"


# ------------------------------------------------------------------ non-regular files


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="named pipes")
def test_a_fifo_as_data_file_is_refused_before_it_is_opened(project, capsys):
    os.remove("data/d.csv")
    os.mkfifo("data/d.csv")
    code, out, err = call(["check", "spec.yaml", "--no-cache", "-q"], capsys)
    assert code == 2 and "data/d.csv: is a named pipe (FIFO)" in err, err
    assert paragraph_problems(err) == []


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="named pipes")
def test_a_fifo_as_the_spec_is_refused_before_it_is_opened(project, capsys):
    os.mkfifo("pipe.yaml")
    code, out, err = call(["check", "pipe.yaml", "--no-cache", "-q"], capsys)
    assert code == 2 and "pipe.yaml: the spec is a named pipe (FIFO)" in err, err


# ------------------------------------------------------------------ exit 3 -> exit 2, named


def test_an_unreadable_data_file_is_named_before_it_is_hashed(project, capsys, monkeypatch):
    from relspan.data.sources import detect

    real_open = open

    def refuse(path, *args, **kw):  # root reads every file: simulate a file mode 000
        if str(path).endswith("d.csv"):
            raise PermissionError(errno.EACCES, "Permission denied", str(path))
        return real_open(path, *args, **kw)

    monkeypatch.setattr(detect, "open", refuse, raising=False)
    code, _, err = call(["check", "spec.yaml", "--no-cache", "-q"], capsys)
    assert code == 2 and "data/d.csv: cannot be opened (Permission denied)" in err, err


def test_output_under_a_folder_that_cannot_be_written_is_named_before_the_analysis(project, capsys, monkeypatch):
    import relspan.site.writer as writer

    monkeypatch.setattr(writer.os, "access", lambda path, mode: False)  # as a non-writable parent
    code, _, err = call(["build", "spec.yaml", "--no-cache", "-q", "--out", "sub/site"], capsys)
    assert code == 2 and "is not writable" in err and paragraph_problems(err) == [], err
    assert not (project / "sub").exists()


def test_output_on_a_read_only_filesystem_is_an_output_error(project, capsys, monkeypatch):
    import relspan.site.writer as writer

    real_mkdir = os.mkdir

    def read_only(path, *a, **kw):
        if ".relspan-tmp-" in str(path):
            raise OSError(errno.EROFS, "Read-only file system", str(path))
        return real_mkdir(path, *a, **kw)

    monkeypatch.setattr(writer.os, "mkdir", read_only)
    code, _, err = call(["build", "spec.yaml", "--no-cache", "-q"], capsys)
    assert code == 2 and "Read-only file system" in err and paragraph_problems(err) == [], err
    assert not (project / "_site").exists()


def test_new_into_a_missing_folder_names_out(project, capsys):
    code, _, err = call(["new", "data/d.csv", "--out", "nothere/x.yaml"], capsys)
    assert code == 2 and "that folder does not exist" in err and "--out" in err, err
    assert not list(project.rglob("*relspan-tmp*"))


@pytest.mark.parametrize("port", ["70000", "-1"])
def test_serve_port_outside_0_to_65535_is_a_usage_error(project, capsys, port):
    code, _, err = call(["serve", ".", "--port", port], capsys)
    assert code == 2 and "from 0 (any free port) to 65535" in err, err


# ------------------------------------------------------------------ wrong diagnoses (relspan new)


def test_new_on_rows_ending_with_a_separator_lists_the_right_columns(project, capsys):
    text = (project / "data" / "d.csv").read_text().splitlines()
    (project / "t.csv").write_text(text[0] + "\n" + "".join(line + ",\n" for line in text[1:]))
    code, out, err = call(["new", "t.csv"], capsys)
    assert code == 0, err
    assert [ln.split('"')[1] for ln in out.splitlines() if ln.strip().startswith("- column:")] == ["a", "b", "c"]


def test_new_on_a_duplicated_header_name_says_so_instead_of_inventing_a_column(project, capsys):
    text = (project / "data" / "d.csv").read_text().replace("year,a,b,c", "year,a,a,c", 1)
    (project / "dup.csv").write_text(text)
    code, out, err = call(["new", "dup.csv"], capsys)
    assert code == 2 and "names the column 'a' twice (columns 2 and 3)" in err, err
    assert "a.1" not in out + err


# ------------------------------------------------------------------ minor


def _built(project, capsys) -> Path:
    code, _, err = call(["build", "spec.yaml", "--no-cache", "-q", "--jobs", "1"], capsys)
    assert code == 0, err
    return project / "_site"


def test_control_characters_of_the_title_never_reach_the_html(project, capsys):
    spec = project / "spec.yaml"
    spec.write_text(spec.read_text().replace('title: "Corpus case"', 'title: "a\\x00b\\x1bc\\x07d"'))
    site = _built(project, capsys)
    for page in site.rglob("*.html"):
        data = page.read_bytes()
        assert not any(c in data for c in (b"\x00", b"\x1b", b"\x07")), page
    assert b"abcd" in (site / "index.html").read_bytes()


@pytest.mark.skipif(os.geteuid() == 0, reason="root ignores folder permissions")
def test_a_site_folder_of_mode_555_leaves_no_hidden_copy_behind(project, capsys):
    site = _built(project, capsys)
    for folder in [site, *[p for p in site.rglob("*") if p.is_dir()]]:
        folder.chmod(0o555)
    _built(project, capsys)
    assert not [p.name for p in project.iterdir() if ".relspan-" in p.name]


def test_removal_of_a_read_only_tree_makes_it_writable_first(tmp_path, monkeypatch):
    """The writer's removal retries after restoring write permission (what mode 555 needs)."""
    import relspan.site.writer as writer

    tree = tmp_path / ".site.relspan-tmp-ab"
    (tree / "sub").mkdir(parents=True)
    (tree / "sub" / "f.html").write_text("x")
    (tree / "sub").chmod(0o555)
    refused = []
    real_unlink = os.unlink

    def unlink(path, *a, **kw):  # what a non-root user meets in a 555 folder
        if not os.access(os.path.dirname(path), os.W_OK) or not (os.stat(os.path.dirname(path)).st_mode & 0o200):
            refused.append(path)
            raise PermissionError(errno.EACCES, "Permission denied", path)
        return real_unlink(path, *a, **kw)

    monkeypatch.setattr(os, "unlink", unlink)
    writer._remove_tree(tree)
    assert refused and not tree.exists()


def _serve(site: Path):
    from relspan.site.serve import make_server

    server = make_server(site, 0)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    return server, f"http://127.0.0.1:{server.server_address[1]}"


def _status(url: str) -> int:
    try:
        with urllib.request.urlopen(url, timeout=10) as r:
            return r.status
    except urllib.error.HTTPError as e:
        return e.code


def test_serve_keeps_to_the_site_no_symlinks_out_no_listings_no_dotfiles(project, capsys, tmp_path):
    site = _built(project, capsys)
    secret = tmp_path / "secret.txt"
    secret.write_text("private")
    (site / "leak.txt").symlink_to(secret)
    (site / "empty").mkdir()
    server, base = _serve(site)
    try:
        assert _status(base + "/index.html") == 200
        assert _status(base + "/") == 200
        assert _status(base + "/leak.txt") == 404
        assert _status(base + "/.relspan-site") == 404
        assert _status(base + "/empty/") == 404
        assert _status(base + "/datasets/") == 200  # the datasets overview is its index.html, not a listing
        assert _status(base + "/figures/") == 404
    finally:
        server.shutdown()
        server.server_close()


# ------------------------------------------------------------------ scale


def test_unique_item_check_is_linear_in_the_number_of_items(monkeypatch):
    """Each item gets one identity and one dictionary lookup (no pairwise comparison)."""
    from relspan.spec import validate as v

    calls = {"same": 0, "identity": 0}
    real_same, real_identity = v._same, v._identity

    def same(a, b):
        calls["same"] += 1
        return real_same(a, b)

    def identity(x):
        calls["identity"] += 1
        return real_identity(x)

    monkeypatch.setattr(v, "_same", same)
    monkeypatch.setattr(v, "_identity", identity)
    from relspan.errors import SpecError
    from relspan.spec import parse_spec

    n = 3000
    ids = ", ".join(f"p{i}" for i in range(n)) + ", p17"
    windows = "".join(f"  - {{id: p{i}, kind: full}}\n" for i in range(n))
    text = OK.joinpath("spec.yaml").read_text().replace("    variables:", f"    plans: [{ids}]\n    variables:")
    text = text.replace("  - {id: full, kind: full}\n", windows)
    with pytest.raises(SpecError, match=r"lists the text 'p17' twice \(items 17 and 3000"):
        parse_spec(text, OK / "spec.yaml")
    assert calls["same"] < 10 and calls["identity"] <= n + 1  # pairwise would be n^2 / 2 = 4.5e6


def test_very_many_windows_get_a_note_before_the_analysis(project, monkeypatch):
    import relspan.run.pipeline as pipeline
    from relspan.spec import load_spec

    spec = project / "spec.yaml"
    spec.write_text(spec.read_text().replace("  - {id: full, kind: full}\n",
                                             "  - {id: full, kind: full}\n  - {id: r, kind: rolling, width: 6, step: 1}\n"))
    monkeypatch.setattr(pipeline, "MANY_WINDOWS", 20)
    seen_before_analysis = []
    real = pipeline.analyse_prepared

    def analyse(*a, **kw):
        seen_before_analysis.append(len(caught))
        return real(*a, **kw)

    monkeypatch.setattr(pipeline, "analyse_prepared", analyse)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        pipeline.run_analysis(load_spec(spec), jobs=1, use_cache=False, progress=False)
    notes = [w for w in caught if issubclass(w.category, RelspanNote)]
    assert len(notes) == 1 and "plan 'r': 35 windows (width 6 rows, step 1 rows)" in str(notes[0].message)
    assert "36 pages" in str(notes[0].message)
    assert seen_before_analysis and seen_before_analysis[0] >= 1  # said before the analysis ran
