"""``acidbase history --export``: the export appears whole or not at all, never over its
store, and with the overwrite policy of ``acidbase batch -o`` (acidbase.files.outputs).

Panel values are the E3 normal panel of the methods sheet (pH 7.40, pCO2 40 mm[Hg],
HCO3- 24 mmol/L, Na+ 140 mmol/L); patient and sample ids are invented for these tests.
"""

from __future__ import annotations

import csv
import datetime as dt
import os
import stat
import subprocess
import sys
from pathlib import Path

import pytest

from acidbase import history
from acidbase.cli import main

KEY = "site-key-for-tests-only-0123456789"


@pytest.fixture(autouse=True)
def site_key(monkeypatch):
    monkeypatch.setenv(history.KEY_ENV, KEY)


def _store(tmp_path: Path, capsys, n: int = 40) -> Path:
    """A store holding ``n`` panels of patient P-1 (one batch run)."""
    now = dt.datetime.now(dt.UTC)
    lines = [f"S{i},P-1,{(now - dt.timedelta(hours=i + 1)).strftime('%Y-%m-%dT%H:%M:%SZ')},"
             "7.40,40,24,140\n" for i in range(n)]
    src = tmp_path / "day.csv"
    src.write_text("sample_id,patient_id,collected_at,ph,pco2,hco3,na\n" + "".join(lines))
    store = tmp_path / "store.db"
    assert main(["batch", str(src), "-o", str(tmp_path / "day.out.csv"), "--history",
                 str(store), "--quiet"]) == 0
    capsys.readouterr()
    return store


def _limited_file_size(limit: int):
    """For a child process: files it writes may grow to ``limit`` bytes, then each write
    fails with EFBIG ("File too large"), as on a full disk (POSIX setrlimit,
    RLIMIT_FSIZE; SIGXFSZ ignored so the write returns the error)."""
    import resource
    import signal

    def apply() -> None:
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    return apply


def test_an_export_that_fails_writing_leaves_nothing_and_says_so(tmp_path, capsys):
    """The disk fills during the export: exit 2, one line naming the export (not the
    store), and nothing at the export's path, no temporary file beside it. (The
    ``.partial`` file it wrote first was left behind, cut short.)"""
    store = _store(tmp_path, capsys)
    folder = tmp_path / "out"
    folder.mkdir()
    target = folder / "p1.csv"
    r = subprocess.run([sys.executable, "-m", "acidbase", "history", str(store), "--patient",
                        "P-1", "--export", "-o", str(target)], capture_output=True, text=True,
                       timeout=120, preexec_fn=_limited_file_size(1500),
                       env={**os.environ, history.KEY_ENV: KEY})
    assert r.returncode == 2, r.stderr
    assert r.stderr.startswith(f"acidbase history: could not run: {target}: File too large")
    assert len(r.stderr.strip().splitlines()) == 1 and "Traceback" not in r.stderr
    assert list(folder.iterdir()) == []


def test_an_export_is_staged_then_renamed_and_a_new_one_is_owner_only(tmp_path, capsys,
                                                                        monkeypatch):
    """Written beside its target as ``.p1.csv.<random>.incomplete`` and renamed: the
    target never holds part of an export."""
    from acidbase.files import outputs

    store = _store(tmp_path, capsys)
    target = tmp_path / "p1.csv"
    seen = []
    rename = outputs.Staged.rename

    def watch(self):
        seen.append((os.path.basename(self.temp), target.exists()))
        rename(self)
    monkeypatch.setattr(outputs.Staged, "rename", watch)
    assert main(["history", str(store), "--patient", "P-1", "--export", "-o", str(target)]) == 0
    assert len(seen) == 1
    temp, existed = seen[0]
    assert temp.startswith(".p1.csv.") and temp.endswith(outputs.INCOMPLETE) and not existed
    assert len(list(csv.DictReader(target.open()))) == 40
    assert stat.S_IMODE(os.stat(target).st_mode) == 0o600
    assert sorted(p.name for p in tmp_path.iterdir()) == [
        "day.csv", "day.out.csv", "p1.csv", "store.db"]


def test_an_export_follows_the_batch_overwrite_policy(tmp_path, capsys):
    """As ``acidbase batch -o``: a read-only file is refused and left as it was, a folder
    is refused, a writable file is replaced (keeping its mode)."""
    store = _store(tmp_path, capsys)
    argv = ["history", str(store), "--patient", "P-1", "--export", "-o"]
    locked = tmp_path / "locked.csv"
    locked.write_text("kept\n")
    locked.chmod(0o444)
    assert main([*argv, str(locked)]) == 2
    assert "-o " + str(locked) + ": is read-only" in capsys.readouterr().err
    assert locked.read_text() == "kept\n"
    assert main([*argv, str(tmp_path)]) == 2
    assert "is a folder" in capsys.readouterr().err
    old = tmp_path / "old.csv"
    old.write_text("old\n")
    old.chmod(0o640)
    assert main([*argv, str(old)]) == 0
    assert len(list(csv.DictReader(old.open()))) == 40
    assert stat.S_IMODE(os.stat(old).st_mode) == 0o640


def test_an_export_over_its_store_by_another_name_is_refused(tmp_path, capsys):
    store = _store(tmp_path, capsys)
    link = tmp_path / "link.db"
    link.symlink_to(store)
    before = store.read_bytes()
    assert main(["history", str(store), "--patient", "P-1", "--export", "-o", str(link)]) == 2
    assert "is the input" in capsys.readouterr().err
    assert store.read_bytes() == before


def test_an_export_to_dash_goes_to_standard_output(tmp_path, capsys, monkeypatch):
    """``-o -`` is standard output, as for ``acidbase batch`` (it wrote a file named -)."""
    store = _store(tmp_path, capsys)
    monkeypatch.chdir(tmp_path)
    assert main(["history", str(store), "--patient", "P-1", "--export", "-o", "-"]) == 0
    assert capsys.readouterr().out.startswith("patient_id,collected_at,sample_id,")
    assert not (tmp_path / "-").exists()


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="no /dev/full here")
def test_an_export_to_a_full_standard_output_names_standard_output(tmp_path, capsys):
    """An export larger than the output buffer into a full disk: the failed write is
    standard output's, not the store's (it said "store.db: No space left on device")."""
    store = _store(tmp_path, capsys, n=300)
    with open("/dev/full", "w") as full:
        r = subprocess.run([sys.executable, "-m", "acidbase", "history", str(store),
                            "--patient", "P-1", "--export"], stdout=full, stderr=subprocess.PIPE,
                           text=True, timeout=120, env={**os.environ, history.KEY_ENV: KEY})
    assert r.returncode == 2
    assert r.stderr == ("acidbase history: standard output: No space left on device; what "
                        "was written is incomplete\n")


def test_a_retention_without_a_history_store_is_refused(tmp_path, capsys):
    """``--history-retention-days`` with no store to prune was dropped unseen (exit 0);
    refused as an option that cannot apply, with nothing written. With a store from the
    site file it applies."""
    src = tmp_path / "day.csv"
    src.write_text("sample_id,patient_id,collected_at,ph,pco2,hco3\n"
                   f"S1,P-1,{dt.datetime.now(dt.UTC):%Y-%m-%dT%H:%M:%SZ},7.40,40,24\n")
    out = tmp_path / "out.csv"
    assert main(["batch", str(src), "-o", str(out), "--history-retention-days", "5",
                 "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "--history-retention-days needs a history store" in err and "Traceback" not in err
    assert not out.exists()
    site = tmp_path / "site.toml"
    site.write_text('[history]\npath = "store.db"\n')
    assert main(["batch", str(src), "-o", str(out), "--history-retention-days", "5",
                 "--config", str(site), "--quiet"]) == 0
    assert (tmp_path / "store.db").exists() and out.exists()
