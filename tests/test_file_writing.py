"""Nothing written half-way, nothing lost: `--fix`, `--output` and the store through one writer.

Links are written through to their target (or refused when that would break them), special
files are written directly, a file edited while chainlint works on it is left alone, and
temporaries left by a killed run are cleaned up on the next one.
"""

from __future__ import annotations

import os
import stat
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from chainlint.cli import main

DEMO = Path(__file__).parent.parent / "examples"
ROOT = hasattr(os, "geteuid") and os.geteuid() == 0


def _check(*args: str):
    return CliRunner().invoke(main, ["check", "--jobs", "1", *args])


def _fixed(text: str) -> bool:
    """Whether the demo's first chain is in its planned form (the rare status first, then the
    other two steps as one mask)."""
    return '"damaged"' in text and text.index('"damaged"') < text.find('(d["weight_kg"] > 0.5) & (d["depot"] == "WEST")')


def _dead_pid() -> int:
    child = subprocess.Popen([sys.executable, "-c", "pass"])
    child.wait()
    return child.pid


# -- --output -------------------------------------------------------------------------------
def test_diff_and_fix_together_is_a_usage_error(project: Path) -> None:
    before = (project / "pipeline.py").read_bytes()
    result = _check("--diff", "--fix", "pipeline.py")
    assert result.exit_code == 2 and "--diff" in result.output and "--fix" in result.output
    assert (project / "pipeline.py").read_bytes() == before


def test_output_that_is_an_analysed_file_is_refused(project: Path) -> None:
    before = (project / "pipeline.py").read_bytes()
    result = _check("--output", "pipeline.py", ".")
    assert result.exit_code == 2 and "is one of the files analysed" in result.output
    assert (project / "pipeline.py").read_bytes() == before


def test_output_that_is_an_analysed_file_is_refused_before_fixing(project: Path) -> None:
    before = (project / "pipeline.py").read_bytes()
    result = _check("--fix", "--output", "./pipeline.py", "pipeline.py")
    assert result.exit_code == 2 and (project / "pipeline.py").read_bytes() == before


def test_output_through_a_symlink_writes_its_target(project: Path) -> None:
    (project / "reports").mkdir()
    os.symlink("reports/latest.txt", project / "report.txt")
    result = _check("--output", "report.txt", "pipeline.py")
    assert result.exit_code == 1
    assert (project / "report.txt").is_symlink()
    assert "reorder:" in (project / "reports" / "latest.txt").read_text()


def test_output_to_a_fifo_is_written_into_the_pipe(project: Path) -> None:
    fifo = project / "report.pipe"
    os.mkfifo(fifo)
    reader = os.open(fifo, os.O_RDONLY | os.O_NONBLOCK)
    try:
        result = _check("--output", str(fifo), "pipeline.py")
        assert stat.S_ISFIFO(os.lstat(fifo).st_mode)
        assert result.exit_code == 1
        assert b"reorder:" in os.read(reader, 1 << 16)
    finally:
        os.close(reader)


def test_output_to_a_fifo_without_a_reader_is_refused(project: Path) -> None:
    fifo = project / "report.pipe"
    os.mkfifo(fifo)
    result = _check("--output", str(fifo), "pipeline.py")
    assert result.exit_code == 2 and "no reader" in result.output
    assert stat.S_ISFIFO(os.lstat(fifo).st_mode)


@pytest.mark.skipif(not ROOT, reason="making a device node needs root")
def test_output_to_a_device_node_keeps_the_device(project: Path) -> None:
    device = project / "null"
    os.mknod(device, 0o666 | stat.S_IFCHR, os.makedev(1, 3))  # the null device, as /dev/null
    result = _check("--output", str(device), "pipeline.py")
    assert result.exit_code == 1
    assert stat.S_ISCHR(os.lstat(device).st_mode) and os.lstat(device).st_rdev == os.makedev(1, 3)


# -- --fix through links, and the file's metadata ------------------------------------------
def test_fix_through_a_symlink_to_a_module_outside_the_tree(project: Path, tmp_path: Path) -> None:
    outside = tmp_path / "shared"
    outside.mkdir()
    (project / "pipeline.py").rename(outside / "pipeline.py")
    os.symlink(outside / "pipeline.py", project / "pipeline.py")
    result = _check("--fix", ".")
    assert "fixed: reorder" in result.output
    assert (project / "pipeline.py").is_symlink()
    assert _fixed((outside / "pipeline.py").read_text())


def test_fix_of_a_module_and_a_link_to_it_inside_the_tree(project: Path) -> None:
    os.symlink("pipeline.py", project / "alias.py")
    result = _check("--fix", ".")
    assert "not rewritten" not in result.output and "fixed: reorder" in result.output
    assert (project / "alias.py").is_symlink() and _fixed((project / "pipeline.py").read_text())
    assert _check(".").output.count("reorder:") == 0


def test_fix_refuses_a_hard_linked_module(project: Path, tmp_path: Path) -> None:
    other = tmp_path / "copy.py"
    os.link(project / "pipeline.py", other)
    before = other.read_bytes()
    result = _check("--fix", "pipeline.py")
    assert "not rewritten" in result.output and "hard links" in result.output
    assert os.path.samefile(other, project / "pipeline.py") and other.read_bytes() == before


def test_fix_keeps_mode_owner_and_extended_attributes(project: Path) -> None:
    path = project / "pipeline.py"
    if ROOT:
        os.chown(path, 4321, 4322)
    os.chmod(path, 0o2754)
    try:
        os.setxattr(path, "user.reviewed", b"yes")
        has_xattrs = True
    except OSError:
        has_xattrs = False
    before = os.stat(path)
    result = _check("--fix", "pipeline.py")
    assert "fixed: reorder" in result.output and _fixed(path.read_text())
    after = os.stat(path)
    assert stat.S_IMODE(after.st_mode) == 0o2754
    assert (after.st_uid, after.st_gid) == (before.st_uid, before.st_gid)
    if has_xattrs:
        assert os.getxattr(path, "user.reviewed") == b"yes"


# -- races and leftovers --------------------------------------------------------------------
def test_an_edit_saved_just_before_the_replace_is_kept(project: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The writer checks the file again after its temporary is on disk, right before the rename."""
    path = project / "pipeline.py"
    real_fsync = os.fsync
    edited = []

    def save_an_edit(fd: int) -> None:
        real_fsync(fd)
        if not edited:
            edited.append(True)
            with open(path, "a", encoding="utf-8") as out:
                out.write("# saved by the editor meanwhile\n")

    monkeypatch.setattr(os, "fsync", save_an_edit)
    result = _check("--fix", "pipeline.py")
    assert edited and "not rewritten" in result.output and "changed" in result.output
    text = path.read_text()
    assert text.endswith("# saved by the editor meanwhile\n") and not _fixed(text)
    assert [p.name for p in project.iterdir() if p.is_file() and p.name.endswith(".chainlint")] == []


def test_stale_temporaries_are_removed_and_never_analysed(project: Path) -> None:
    stale = project / f".pipeline.py.{_dead_pid()}-5f2c91d0.chainlint"
    old_style = project / ".pipeline.py.k3j_x9qa.chainlint"
    for leftover in (stale, old_style):
        leftover.write_text((project / "pipeline.py").read_text())
    os.utime(old_style, (1, 1))
    mine = project / ".notes.chainlint"
    live = project / f".pipeline.py.{os.getpid()}-0a1b2c3d.chainlint"
    mine.write_text("keep")
    live.write_text("keep")
    explained = CliRunner().invoke(main, ["explain", "--jobs", "1", "--format", "json", "."])
    assert ".chainlint\"" not in explained.output and "k3j_x9qa" not in explained.output
    assert "fixed: reorder" in _check("--fix", ".").output
    assert not stale.exists() and not old_style.exists()
    assert mine.exists() and live.exists()


def test_the_store_writes_through_a_symlinked_profile(project: Path, tmp_path: Path) -> None:
    from chainlint.profile.store import load_document, save_profile

    store = project / ".chainlint"
    profile = store / "profiles" / "parcel_scans.json"
    shared = tmp_path / "shared_profile.json"
    profile.rename(shared)
    os.symlink(shared, profile)
    document = load_document(profile)
    document["rows"] += 1
    save_profile(store, document)
    assert profile.is_symlink() and load_document(shared)["rows"] == document["rows"]


def test_stale_temporaries_go_on_the_next_fix_even_with_nothing_to_fix(project: Path) -> None:
    assert "fixed: reorder" in _check("--fix", ".").output
    stale = project / f".pipeline.py.{_dead_pid()}-5f2c91d0.chainlint"
    stale.write_text("left by a killed run")
    assert "fixed: reorder" not in _check("--fix", ".").output
    assert not stale.exists()


def test_measure_refuses_a_picture_path_that_is_the_source(project: Path) -> None:
    before = (project / "pipeline.py").read_bytes()
    result = CliRunner().invoke(main, ["measure", "pipeline.py", "--data", "none.parquet", "--plot", "pipeline.py"])
    assert result.exit_code == 2 and "--plot" in result.output
    assert (project / "pipeline.py").read_bytes() == before


# -- a user who may not write ----------------------------------------------------------------
def test_a_folder_this_user_may_not_write_is_reported(project: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Tests run as root, whom file modes do not stop: the system's answer to another user
    (EACCES on creating a file in the project's folders) is stood in for. Every command that
    writes there says so, names the file, and leaves what was there as it was."""
    real_open = os.open
    folder = str(project)

    def denying_open(path, flags, *args, **kwargs):  # type: ignore[no-untyped-def]
        if flags & os.O_CREAT and os.path.abspath(path).startswith(folder + os.sep):
            raise PermissionError(13, "Permission denied", str(path))
        return real_open(path, flags, *args, **kwargs)

    monkeypatch.setattr(os, "open", denying_open)
    before = (project / "pipeline.py").read_bytes()
    result = _check("--fix", "pipeline.py")
    assert result.exit_code == 1 and "pipeline.py:1:1: warning: not rewritten: cannot write in " in result.output
    assert "Permission denied" in result.output and (project / "pipeline.py").read_bytes() == before
    result = _check("--output", "report.txt", "pipeline.py")
    assert result.exit_code == 2 and "report.txt" in result.output and "Permission denied" in result.output
    assert not (project / "report.txt").exists()
    (project / "scans.csv").write_text("weight_kg\n1.5\n")
    result = CliRunner().invoke(main, ["profile", "scans.csv", "--name", "scans", "--store", ".chainlint"])
    assert result.exit_code == 2 and "cannot write in" in result.output and "Permission denied" in result.output
    assert not (project / ".chainlint" / "profiles" / "scans.json").exists()
