"""Scratch folders of killed runs are removed by the next run, and nothing else is
(acidbase/files/scratch.py; docs/batch.md, "Outputs and safety").

What decides "dead" is the kernel's ``flock`` (Linux flock(2); POSIX systems): a lock
held by an open file is dropped when its process ends, SIGKILL included.  The panels
are an invented scenario of our own.  Every run here has ``TMPDIR`` (a subprocess) or
``tempfile.tempdir`` (this process) inside the test's own folder: no test touches the
system's temporary folder.
"""

from __future__ import annotations

import fcntl
import os
import stat
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

from acidbase import batch
from acidbase.cli import main
from acidbase.files import scratch

ROOT = Path(__file__).resolve().parents[1]
HEADER = "patient_id,collected_at,sample_id,ph,pco2,hco3,na,cl\n"
ONE_PANEL = HEADER + "P1,2026-01-01T01:00:00Z,S1,7.40,40,24,140,104\n"
REMOVED = "left by earlier runs that were killed"


def command(tmp: Path, *args: object) -> tuple[list[str], dict[str, str]]:
    """``acidbase batch`` in a subprocess whose temporary folder is ``tmp``."""
    env = dict(os.environ, PYTHONPATH=str(ROOT), TMPDIR=str(tmp))
    return [sys.executable, "-m", "acidbase", "batch", *map(str, args)], env


def folders(tmp: Path, prefix: str = "acidbase-") -> list[Path]:
    return sorted(p for p in tmp.iterdir() if p.name.startswith(prefix))


def prefixes(tmp: Path) -> list[str]:
    """The prefixes of the folders in ``tmp`` (``mkdtemp``'s random part has no "-")."""
    return sorted(p.name[:p.name.rindex("-") + 1] for p in tmp.iterdir())


def wait_for(what, timeout: float = 120.0) -> None:
    deadline = time.monotonic() + timeout
    while not what():
        assert time.monotonic() < deadline, "timed out"
        time.sleep(0.01)


def held_run(tmp_path: Path, tmp: Path) -> subprocess.Popen:
    """A run reading standard input that has not ended: it waits, alive, with its
    stdin copy's scratch folder made and locked."""
    argv, env = command(tmp, "-", "-o", tmp_path / "held.csv", "--quiet")
    proc = subprocess.Popen(argv, env=env, stdin=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdin.write(ONE_PANEL.encode())
    proc.stdin.flush()
    wait_for(lambda: any((d / scratch.LOCK).exists() for d in folders(tmp, scratch.STDIN))
             or proc.poll() is not None)
    assert proc.poll() is None, proc.stderr.read().decode()
    return proc


def next_run(tmp_path: Path, tmp: Path) -> str:
    """A whole run on a one-panel file; its summary (standard error)."""
    src = tmp_path / "day.csv"
    src.write_text(ONE_PANEL)
    argv, env = command(tmp, src, "-o", tmp_path / "next.csv")
    done = subprocess.run(argv, env=env, capture_output=True, timeout=300, check=False)
    assert done.returncode == 0, done.stderr.decode()
    return done.stderr.decode()


def dead_folder(where: Path, name: str = "acidbase-serial-dead") -> Path:
    """A folder as a killed run leaves it: private, with a lock file nobody holds."""
    folder = where / name
    folder.mkdir(mode=0o700)
    (folder / scratch.LOCK).write_bytes(b"")
    (folder / "p0.arrow").write_bytes(b"P1,2026-01-01T01:00:00Z")
    (folder / "sub").mkdir()
    (folder / "sub" / "t0.arrow").write_bytes(b"x")
    return folder


@pytest.fixture
def tmp(tmp_path: Path) -> Path:
    folder = tmp_path / "tmp"
    folder.mkdir()
    return folder


# -- runs killed, runs alive ---------------------------------------------------------------

def test_a_killed_run_leaves_its_folder_and_the_next_run_removes_it_and_says_so(tmp_path, tmp):
    proc = held_run(tmp_path, tmp)
    proc.kill()  # SIGKILL: no clean-up runs
    proc.wait()
    assert prefixes(tmp) == [scratch.STDIN]
    err = next_run(tmp_path, tmp)
    assert f"removed 1 temporary folder {REMOVED}" in err
    assert os.listdir(tmp) == []


def test_a_run_killed_in_its_serial_pass_leaves_two_folders_and_the_next_run_removes_both(
        tmp_path, tmp):
    """Killed while its serial partitions are on disk: the stdin copy and the serial
    folder (patient ids and times) are both left, and both removed."""
    lines = [HEADER] + [f"P{i % 5000:05d},2026-01-01T{(i // 5000) % 24:02d}:00:00Z,S{i},"
                        f"7.{30 + i % 15},{35 + i % 10},{20 + i % 8}.5,14{i % 5},10{i % 7}\n"
                        for i in range(150_000)]
    argv, env = command(tmp, "-", "-o", tmp_path / "o.csv", "--quiet", "--chunk-rows", "500")
    proc = subprocess.Popen(argv, env=env, stdin=subprocess.PIPE, stderr=subprocess.DEVNULL)
    proc.stdin.write("".join(lines).encode())
    proc.stdin.close()
    wait_for(lambda: any(any(d.glob("*.arrow")) for d in folders(tmp, scratch.SERIAL))
             or proc.poll() is not None)
    assert proc.poll() is None, "the run ended before it could be killed"
    proc.kill()
    proc.wait()
    assert prefixes(tmp) == [scratch.SERIAL, scratch.STDIN]
    err = next_run(tmp_path, tmp)
    assert f"removed 2 temporary folders {REMOVED}" in err
    assert os.listdir(tmp) == []


def test_the_folder_of_a_live_run_is_left_by_another_run(tmp_path, tmp):
    proc = held_run(tmp_path, tmp)
    try:
        held = folders(tmp)
        err = next_run(tmp_path, tmp)
        assert REMOVED not in err
        assert folders(tmp) == held and (held[0] / scratch.LOCK).exists()
    finally:
        proc.stdin.close()  # the held run reads its end of input and finishes
        assert proc.wait(timeout=300) == 0
    assert os.listdir(tmp) == []  # removed by its own run


def test_a_folder_whose_lock_is_held_in_this_process_is_left(tmp):
    folder = scratch.ScratchFolder(scratch.SERIAL, str(tmp))
    assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept()
    assert os.path.isdir(folder.name)
    folder.cleanup()
    assert os.listdir(tmp) == []


def test_a_folder_whose_lock_is_held_by_an_open_flock_is_left(tmp):
    folder = dead_folder(tmp)
    with open(folder / scratch.LOCK, "rb") as f:
        fcntl.flock(f, fcntl.LOCK_EX | fcntl.LOCK_NB)
        assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept()
    assert folder.is_dir()
    assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept(removed=1)


# -- what a sweep removes, and what it leaves ------------------------------------------

def test_a_dead_folder_is_removed_with_everything_in_it(tmp):
    dead_folder(tmp, "acidbase-serial-a")
    dead_folder(tmp, "acidbase-stdin-b")
    assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept(removed=2)
    assert os.listdir(tmp) == []


def test_a_folder_without_the_lock_file_is_left(tmp):
    """Made by an older version, or by a run between its folder and its lock: not ours
    to judge."""
    folder = dead_folder(tmp)
    (folder / scratch.LOCK).unlink()
    assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept()
    assert sorted(os.listdir(folder)) == ["p0.arrow", "sub"]


def test_folders_and_files_of_other_names_are_left(tmp):
    dead_folder(tmp, "acidbase-other-a")
    dead_folder(tmp, "x-acidbase-serial-b")
    (tmp / "acidbase-serial-file").write_bytes(b"not a folder")
    assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept()
    assert scratch.sweep((scratch.STDIN,), str(tmp)) == scratch.Swept()
    assert sorted(os.listdir(tmp)) == ["acidbase-other-a", "acidbase-serial-file",
                                       "x-acidbase-serial-b"]
    assert (tmp / "acidbase-other-a" / "p0.arrow").exists()


@pytest.mark.parametrize("theirs", [("folder", "lock"), ("folder",), ("lock",)])
def test_another_users_folder_is_left(tmp, monkeypatch, theirs):
    folder = dead_folder(tmp)
    if os.geteuid() == 0:
        for p in [{"folder": folder, "lock": folder / scratch.LOCK}[t] for t in theirs]:
            os.chown(p, 65534, 65534)  # conventionally "nobody"
    else:
        me = os.geteuid()
        monkeypatch.setattr(scratch.os, "geteuid", lambda: me + 1)
    assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept()
    assert (folder / "p0.arrow").exists()


def test_a_link_named_like_a_scratch_folder_is_not_followed(tmp, tmp_path):
    outside = dead_folder(tmp_path, "elsewhere")
    (tmp / "acidbase-serial-link").symlink_to(outside, target_is_directory=True)
    assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept()
    assert (outside / "p0.arrow").exists() and (outside / scratch.LOCK).exists()
    assert (tmp / "acidbase-serial-link").is_symlink()


def test_links_inside_a_dead_folder_are_removed_not_followed(tmp, tmp_path):
    outside = tmp_path / "elsewhere"
    outside.mkdir()
    (outside / "keep.csv").write_text("kept")
    folder = dead_folder(tmp)
    (folder / "to-folder").symlink_to(outside, target_is_directory=True)
    (folder / "sub" / "to-file").symlink_to(outside / "keep.csv")
    assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept(removed=1)
    assert os.listdir(tmp) == [] and (outside / "keep.csv").read_text() == "kept"


def test_a_lock_file_that_is_a_link_is_not_taken(tmp, tmp_path):
    folder = dead_folder(tmp)
    (folder / scratch.LOCK).unlink()
    (tmp_path / "other.lock").write_bytes(b"")
    (folder / scratch.LOCK).symlink_to(tmp_path / "other.lock")
    assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept()
    assert (folder / "p0.arrow").exists()


def test_a_folder_that_cannot_be_removed_is_named_and_a_later_sweep_finishes_it(
        tmp, monkeypatch):
    """The lock file goes last: a sweep that fails half-way leaves a folder the next
    sweep still knows as a killed run's."""
    folder = dead_folder(tmp)

    def refuse(*args, **kwargs):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(scratch.shutil, "rmtree", refuse)
    assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept(stuck=(str(folder),))
    assert (folder / scratch.LOCK).exists() and (folder / "sub").is_dir()
    monkeypatch.undo()
    assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept(removed=1)
    assert os.listdir(tmp) == []


def test_a_run_whose_sweep_fails_goes_on_and_names_the_folder(tmp, tmp_path, capsys,
                                                               monkeypatch):
    folder = dead_folder(tmp)
    monkeypatch.setattr(tempfile, "tempdir", str(tmp))
    remove = scratch._remove

    def refuse(parent: int, name: str) -> None:  # the killed run's folder only
        if name == folder.name:
            raise PermissionError(13, "Permission denied")
        remove(parent, name)

    monkeypatch.setattr(scratch, "_remove", refuse)
    src = tmp_path / "day.csv"
    src.write_text(ONE_PANEL)
    assert main(["batch", str(src), "-o", str(tmp_path / "o.csv")]) == 0
    err = capsys.readouterr().err
    assert "could not remove temporary folders left by runs that were killed" in err
    assert str(folder) in err and (tmp_path / "o.csv").exists()
    assert os.listdir(tmp) == [folder.name]  # the run's own folder went


def test_a_shard_checked_for_dask_goes_through_a_marked_scratch_folder(tmp, monkeypatch):
    """Its folder holds the shard's rows: marked while the check runs, removed after."""
    import pyarrow as pa

    from acidbase import cli, partitions

    monkeypatch.setattr(tempfile, "tempdir", str(tmp))
    seen = []
    real = cli.main

    def watched(argv):
        folder = Path(argv[1]).parent
        seen.append((folder.name, sorted(os.listdir(folder))))
        return real(argv)

    monkeypatch.setattr(cli, "main", watched)
    shard = pa.table({"sample_id": ["S1"], "ph": ["7.40"], "pco2": ["40"], "hco3": ["24"]})
    assert partitions.check_shard(shard, ("--no-serial",)).num_rows == 1
    assert seen[0][0].startswith(scratch.SHARD) and scratch.LOCK in seen[0][1]
    assert os.listdir(tmp) == []


# -- the folder itself -----------------------------------------------------------------

def test_a_scratch_folder_is_private_locked_while_alive_and_removed_whole(tmp):
    folder = scratch.ScratchFolder(scratch.STDIN, str(tmp))
    path = Path(folder.name)
    assert path.parent == tmp and path.name.startswith(scratch.STDIN)
    assert stat.S_IMODE(path.stat().st_mode) == 0o700
    assert os.listdir(path) == [scratch.LOCK]
    with open(path / scratch.LOCK, "rb") as f:  # a second open file: the lock is held
        with pytest.raises(BlockingIOError):
            fcntl.flock(f, fcntl.LOCK_EX | fcntl.LOCK_NB)
    (path / "stdin").write_bytes(b"panels")
    folder.cleanup()
    folder.cleanup()  # once only
    assert os.listdir(tmp) == []


def test_without_flock_a_folder_is_made_and_removed_as_before_and_nothing_is_swept(
        tmp, monkeypatch):
    dead = dead_folder(tmp)
    monkeypatch.setattr(scratch, "fcntl", None)
    with scratch.ScratchFolder(scratch.SERIAL, str(tmp)) as name:
        assert os.listdir(name) == []
        assert scratch.sweep(scratch.PREFIXES, str(tmp)) == scratch.Swept()
    assert os.listdir(tmp) == [dead.name]


def test_docs_batch_quotes_the_note_and_names_the_lock_file():
    doc = " ".join((ROOT / "docs" / "batch.md").read_text(encoding="utf-8").split())
    note = batch._swept_notes(scratch.Swept(removed=2))[0]
    assert f"`{note}`" in doc
    assert f"`{scratch.LOCK}`" in doc and all(f"`{p}*`" in doc for p in scratch.PREFIXES)
