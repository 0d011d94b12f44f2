"""Tests of relspan.site.writer: atomic swap, marker, protected folders, killed builds."""

from __future__ import annotations

import errno
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from relspan.errors import OutputError
from relspan.site import writer
from relspan.site.writer import MARKER, write_site

OLD = {"index.html": b"<p>old</p>", "a/b.csv": b"1,2\n", "a/c/d.json": b"{}"}
NEW = {"index.html": b"<p>new</p>", "x/y.svg": b"<svg/>"} | {
    f"many/f{i:03d}.txt": bytes([i % 256]) * 100 for i in range(60)}


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _leftovers(parent: Path) -> list[str]:
    return sorted(p.name for p in parent.iterdir() if ".relspan-" in p.name)


class TestWrite:
    def test_new_folder_gets_exactly_the_files_and_the_marker(self, tmp_path):
        out = write_site(OLD, tmp_path / "deep" / "site")
        assert out == (tmp_path / "deep" / "site").resolve()
        snap = _snapshot(out)
        assert snap.pop(MARKER).startswith(b"This folder was written by relspan")
        assert snap == OLD

    def test_marked_folder_is_replaced_and_old_files_vanish(self, tmp_path):
        write_site(OLD, tmp_path / "site")
        write_site(NEW, tmp_path / "site")
        snap = _snapshot(tmp_path / "site")
        snap.pop(MARKER)
        assert snap == NEW
        assert _leftovers(tmp_path) == []

    def test_replacement_works_without_the_atomic_exchange_call(self, tmp_path, monkeypatch):
        write_site(OLD, tmp_path / "site")
        monkeypatch.setattr(writer, "_load_renameat2", lambda: None)
        write_site(NEW, tmp_path / "site")
        assert (tmp_path / "site" / "x" / "y.svg").read_bytes() == b"<svg/>"
        assert _leftovers(tmp_path) == []

    def test_empty_unmarked_folder_may_be_used(self, tmp_path):
        (tmp_path / "site").mkdir()
        write_site(OLD, tmp_path / "site")
        assert (tmp_path / "site" / MARKER).is_file()

    def test_folder_permissions_follow_the_umask_not_0700(self, tmp_path):
        mask = os.umask(0o022)
        try:
            out = write_site(OLD, tmp_path / "site")
        finally:
            os.umask(mask)
        assert (out.stat().st_mode & 0o777) == 0o755
        assert ((out / "a").stat().st_mode & 0o777) == 0o755


class TestRefusals:
    def test_non_empty_folder_without_marker_is_left_alone(self, tmp_path):
        mine = tmp_path / "thesis"
        mine.mkdir()
        (mine / "chapter1.tex").write_text("precious")
        with pytest.raises(OutputError, match="not made by relspan") as err:
            write_site(OLD, mine)
        assert str(mine) in str(err.value) and "Fix:" in str(err.value)
        assert _snapshot(mine) == {"chapter1.tex": b"precious"}
        assert _leftovers(tmp_path) == []

    @pytest.mark.parametrize("which", ["equal", "ancestor_of_spec", "ancestor_of_data"])
    def test_output_may_not_be_or_contain_a_protected_path(self, tmp_path, which):
        project = tmp_path / "project"
        (project / "data").mkdir(parents=True)
        spec = project / "spec.yaml"
        spec.write_text("relspan: 1\n")
        data = project / "data" / "a.csv"
        data.write_text("x\n1\n")
        out = {"equal": project, "ancestor_of_spec": project,
               "ancestor_of_data": project / "data"}[which]
        protected = [project] if which == "equal" else [spec, data]
        with pytest.raises(OutputError, match="refusing to write the site to") as err:
            write_site(OLD, out, protected=protected)
        assert "choose an output folder of its own" in str(err.value)
        assert spec.read_text() == "relspan: 1\n" and data.read_text() == "x\n1\n"

    def test_output_inside_the_spec_folder_is_fine(self, tmp_path):
        spec = tmp_path / "spec.yaml"
        spec.write_text("relspan: 1\n")
        write_site(OLD, tmp_path / "_site", protected=[tmp_path, spec])
        assert (tmp_path / "_site" / "index.html").is_file()

    def test_a_file_in_the_way_is_refused(self, tmp_path):
        (tmp_path / "site").write_text("x")
        with pytest.raises(OutputError, match="a file of that name exists"):
            write_site(OLD, tmp_path / "site")

    def test_a_symlinked_output_is_refused(self, tmp_path):
        (tmp_path / "real").mkdir()
        (tmp_path / "link").symlink_to(tmp_path / "real")
        with pytest.raises(OutputError, match="symbolic link"):
            write_site(OLD, tmp_path / "link")

    @pytest.mark.parametrize("bad", ["/abs.html", "a/../b.html", "a//b", MARKER, "a\\b"])
    def test_bad_file_paths_are_refused_before_anything_is_written(self, tmp_path, bad):
        with pytest.raises(OutputError, match="cannot write site file"):
            write_site({**OLD, bad: b"x"}, tmp_path / "site")
        assert not (tmp_path / "site").exists() and _leftovers(tmp_path) == []

    def test_a_failed_write_keeps_the_old_site_and_removes_the_temporary_folder(self, tmp_path):
        write_site(OLD, tmp_path / "site")
        before = _snapshot(tmp_path / "site")

        def disk_full(path: str) -> None:
            if path.startswith("many/f010"):
                raise OSError(errno.ENOSPC, "No space left on device", path)

        with pytest.raises(OutputError, match="No space left on device") as err:
            write_site(NEW, tmp_path / "site", _after_each_file=disk_full)
        assert "previous site, if any, is unchanged" in str(err.value)
        assert _snapshot(tmp_path / "site") == before
        assert _leftovers(tmp_path) == []


_KILL_SCRIPT = """
import sys, time
from pathlib import Path
from relspan.site.writer import write_site
files = {f"p{i:03d}.html": b"new" * 1000 for i in range(200)}
def slow(path):
    print(path, flush=True)
    time.sleep(0.05)
write_site(files, Path(sys.argv[1]), _after_each_file=slow)
"""


class TestKilledBuild:
    def _kill_mid_write(self, out: Path) -> None:
        proc = subprocess.Popen([sys.executable, "-c", _KILL_SCRIPT, str(out)],
                                stdout=subprocess.PIPE, text=True)
        try:
            for _ in range(5):  # wait until several files are on disk
                assert proc.stdout.readline()
        finally:
            os.kill(proc.pid, signal.SIGKILL)
            proc.wait(timeout=30)
            proc.stdout.close()
        assert proc.returncode == -signal.SIGKILL

    def test_sigkill_mid_write_leaves_the_old_site_byte_identical(self, tmp_path):
        out = write_site(OLD, tmp_path / "site")
        before = _snapshot(out)
        self._kill_mid_write(out)
        assert _snapshot(out) == before
        visible = sorted(p.name for p in tmp_path.iterdir() if not p.name.startswith("."))
        assert visible == ["site"]

    def test_next_build_removes_what_the_killed_build_left(self, tmp_path):
        out = write_site(OLD, tmp_path / "site")
        self._kill_mid_write(out)
        assert len(_leftovers(tmp_path)) == 1
        write_site(NEW, out)
        assert _leftovers(tmp_path) == []
        assert (out / "x" / "y.svg").is_file()


class TestStaleFolders:
    def test_unmarked_look_alike_folders_are_never_deleted(self, tmp_path):
        stranger = tmp_path / ".site.relspan-tmp-notours"
        stranger.mkdir()
        (stranger / "keep.txt").write_text("keep")
        write_site(OLD, tmp_path / "site")
        assert (stranger / "keep.txt").read_text() == "keep"

    def test_a_running_builds_temporary_folder_is_left_alone(self, tmp_path):
        sleeper = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
        try:
            busy = tmp_path / ".site.relspan-tmp-busy"
            busy.mkdir()
            (busy / MARKER).write_text(
                f"written by relspan\nbuilding pid={sleeper.pid} host={os.uname().nodename}\n")
            write_site(OLD, tmp_path / "site")
            assert busy.is_dir()
        finally:
            sleeper.kill()
            sleeper.wait()
        write_site(OLD, tmp_path / "site")
        assert not busy.exists()

    def test_site_moved_aside_by_an_interrupted_swap_is_restored_first(self, tmp_path):
        aside = tmp_path / ".site.relspan-old-1234"
        aside.mkdir()
        (aside / MARKER).write_text("written by relspan\n")
        (aside / "index.html").write_bytes(b"old")
        writer._clean_stale(tmp_path, "site", tmp_path / "site")
        assert (tmp_path / "site" / "index.html").read_bytes() == b"old"
        assert not aside.exists()


class TestCheckOutput:
    def test_refuses_what_write_site_refuses_without_writing(self, tmp_path):
        spec = tmp_path / "spec.yaml"
        spec.write_text("relspan: 1\n")
        with pytest.raises(OutputError, match="refusing to write the site to"):
            writer.check_output(tmp_path, protected=[spec])
        assert writer.check_output(tmp_path / "_site", protected=[spec]) == tmp_path / "_site"
        assert not (tmp_path / "_site").exists()
