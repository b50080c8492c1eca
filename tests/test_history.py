"""The history store: serial checks across runs, idempotent, private, safe to share.

Panel values are the E3 normal panel of the methods sheet (pH 7.40, pCO2 40 mm[Hg],
HCO3- 24 mmol/L; Na+ 140 mmol/L from worked example E23); the Na+ delta limit is the
default of ``acidbase.serial.DELTA_RULES`` (10 mmol/L, common laboratory practice, no
source). Patient ids and sample ids are invented for these tests.
"""

from __future__ import annotations

import csv
import datetime as dt
import os
import sqlite3
import subprocess
import sys
from pathlib import Path

import pyarrow as pa
import pytest

from acidbase import batch, history
from acidbase.cli import main

KEY = "site-key-for-tests-only-0123456789"
HEADER = "sample_id,patient_id,collected_at,ph,pco2,hco3,na,cl,k\n"


@pytest.fixture(autouse=True)
def site_key(monkeypatch):
    monkeypatch.setenv(history.KEY_ENV, KEY)


def stamp(days_ago: float) -> str:
    """A collection time ``days_ago`` before now (inside the 30-day retention)."""
    t = dt.datetime.now(dt.UTC) - dt.timedelta(days=days_ago)
    return t.strftime("%Y-%m-%dT%H:%M:%SZ")


def panels(path: Path, rows: list[tuple[str, str, float, float]]) -> Path:
    """rows: (sample id, patient id, days ago, Na+)."""
    lines = [f"{s},{p},{stamp(d)},7.40,40,24,{na:g},104,4.0\n" for s, p, d, na in rows]
    path.write_text(HEADER + "".join(lines))
    return path


def run(capsys, src: Path, store: Path, *extra: str) -> tuple[int, list[dict], str]:
    out = src.with_suffix(".out.csv")
    rc = main(["batch", str(src), "-o", str(out), "--history", str(store), "--quiet",
               "--profile", "full", *extra])
    err = capsys.readouterr().err
    rows = list(csv.DictReader(out.open())) if rc == 0 else []
    return rc, rows, err


def count(store: Path) -> tuple[int, int]:
    s = history.Store(str(store), None, create=False)
    try:
        info = s.summary()
    finally:
        s.close()
    return info["panels"], len(info["runs"])


def test_a_delta_check_fires_against_the_previous_run(tmp_path, capsys):
    store = tmp_path / "store.db"
    rc, _, _ = run(capsys, panels(tmp_path / "day1.csv", [("S1", "MRN-ALPHA-7", 1.5, 140)]),
                   store)
    assert rc == 0
    rc, rows, err = run(capsys, panels(tmp_path / "day2.csv",
                                       [("S2", "MRN-ALPHA-7", 1.0, 155)]), store)
    assert rc == 0
    assert rows[0]["serial_codes"] == "SERIAL-DELTA-NA"
    assert "since the stored panel of" in rows[0]["serial_detail"]
    assert "(sample S1)" in rows[0]["serial_detail"]
    assert "1 earlier panels compared" in err


def test_without_the_store_the_first_panel_of_a_file_stands_alone(tmp_path, capsys):
    """The same second file without --history: nothing to compare with."""
    src = panels(tmp_path / "day2.csv", [("S2", "MRN-ALPHA-7", 1.0, 155)])
    out = tmp_path / "o.csv"
    assert main(["batch", str(src), "-o", str(out), "--quiet", "--profile", "full"]) == 0
    row = next(csv.DictReader(out.open()))
    assert row["serial_codes"] == "" and row["serial_status"].startswith("not assessable")


def test_reading_the_same_file_again_adds_nothing_and_says_so(tmp_path, capsys):
    store = tmp_path / "store.db"
    src = panels(tmp_path / "day.csv", [("S1", "P-1", 2.0, 140), ("S2", "P-1", 1.9, 128),
                                        ("S3", "P-1", 1.8, 140)])
    rc, first, _ = run(capsys, src, store)
    assert rc == 0 and count(store) == (3, 1)
    rc, again, err = run(capsys, src, store)
    assert rc == 0
    assert "0 panels added; 3 already stored" in err
    assert count(store) == (3, 2)  # the run is recorded, its panels are not added twice
    # A panel is never compared with its own stored copy: the readings are unchanged.
    assert [r["serial_codes"] for r in again] == [r["serial_codes"] for r in first]
    assert first[1]["serial_codes"].startswith("SERIAL-BREAK")


def test_refused_panels_are_not_stored(tmp_path, capsys):
    store = tmp_path / "store.db"
    src = tmp_path / "day.csv"
    src.write_text(HEADER + f"S1,P-1,{stamp(1)},7.40,40,24,140,104,4.0\n"
                            f"S2,P-2,{stamp(1)},7.40,,24,140,104,4.0\n")  # no pCO2: refused
    assert run(capsys, src, store)[0] == 0
    assert count(store) == (1, 1)


def test_a_run_that_fails_adds_nothing(tmp_path, capsys, monkeypatch):
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day1.csv", [("S1", "P-1", 2.0, 140)]), store)
    before = count(store)
    calls = []
    real = batch._process

    def failing(*a, **k):
        calls.append(1)
        if len(calls) > 1:
            raise KeyboardInterrupt  # as if stopped by the user mid-run
        return real(*a, **k)

    monkeypatch.setattr(batch, "_process", failing)
    src = panels(tmp_path / "day2.csv", [("S2", "P-1", 1.0, 141), ("S3", "P-2", 1.0, 141)])
    rc = main(["batch", str(src), "-o", str(tmp_path / "o.csv"), "--history", str(store),
               "--quiet", "--chunk-rows", "1"])
    assert rc == 130 and len(calls) > 1
    assert count(store) == before


@pytest.mark.parametrize("where", ["writing a block", "encoding a block"])
def test_a_failure_while_storing_rolls_the_whole_run_back(tmp_path, capsys, monkeypatch, where):
    """A disk that fills while the blocks go in, or an error while they are encoded
    (after other buckets' blocks went in): nothing of the run stays in the store."""
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day1.csv", [("S1", "P-1", 2.0, 140)]), store)
    before = count(store)

    calls = []

    def broken(real):
        def call(*args):
            calls.append(1)
            if len(calls) == 3:  # two tables' blocks are in by then
                raise OSError(28, "No space left on device")
            return real(*args)
        return call

    monkeypatch.setattr(batch.serial.SerialChecker, "partitions_for",
                        staticmethod(lambda size: 48))  # several tables to store
    if where == "writing a block":
        monkeypatch.setattr(history.Store, "_put_prepared", broken(history.Store._put_prepared))
    else:
        monkeypatch.setattr(history, "_prepared", broken(history._prepared))
    rows = [(f"S{i}", f"P-{i}", 1.0, 141) for i in range(2, 200)]  # several buckets
    rc, _, err = run(capsys, panels(tmp_path / "day2.csv", rows), store)
    assert rc == 2 and "No space left" in err and len(calls) == 3
    monkeypatch.undo()
    monkeypatch.setenv(history.KEY_ENV, KEY)
    assert count(store) == before


def test_a_run_whose_summary_cannot_be_written_adds_nothing(tmp_path, capsys, monkeypatch):
    """The store's commit waits for every output (the summary is written after the
    panels are added to the transaction): a summary that fails leaves the store as it
    was, as it leaves no output file."""
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day1.csv", [("S1", "P-1", 2.0, 140)]), store)
    before = count(store)

    def full_disk(*a, **k):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(batch, "summary_text", full_disk)
    src = panels(tmp_path / "day2.csv", [("S2", "P-1", 1.0, 141), ("S3", "P-2", 1.0, 141)])
    rc, _, err = run(capsys, src, store, "--summary", str(tmp_path / "s.txt"))
    assert rc == 2 and "No space left" in err and "nothing written" in err
    assert not (tmp_path / "s.txt").exists() and not src.with_suffix(".out.csv").exists()
    assert count(store) == before


def test_a_store_commit_that_fails_after_the_outputs_says_so_and_adds_nothing(
        tmp_path, capsys, monkeypatch):
    """The outputs are whole and stay; the store is left as it was; the run says both
    and does not end with 0."""
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day1.csv", [("S1", "P-1", 2.0, 140)]), store)
    before = count(store)
    real = history.Store.finish

    def failing(self):
        self.rollback()
        raise history.HistoryError(f"{self.path}: database or disk is full")

    monkeypatch.setattr(history.Store, "finish", failing)
    src = panels(tmp_path / "day2.csv", [("S2", "P-1", 1.0, 141)])
    rc, _, err = run(capsys, src, store)
    assert rc == 2
    assert "every output was written in full" in err and "disk is full" in err
    assert f"history store {store} was left as it was" in err
    assert src.with_suffix(".out.csv").exists()
    monkeypatch.setattr(history.Store, "finish", real)
    assert count(store) == before


def test_two_runs_at_once_keep_every_panel(tmp_path):
    store = tmp_path / "store.db"
    env = dict(os.environ, **{history.KEY_ENV: KEY})
    procs = []
    for day in range(2):
        rows = [(f"S{day}-{i}", f"P-{day}-{i % 40}", 1 + day + i / 1000, 140) for i in range(400)]
        src = panels(tmp_path / f"f{day}.csv", rows)
        procs.append(subprocess.Popen(
            [sys.executable, "-m", "acidbase", "batch", str(src), "-o", str(src) + ".out",
             "--history", str(store), "--quiet"], env=env, stderr=subprocess.PIPE))
    codes = [p.wait(timeout=300) for p in procs]
    for p in procs:
        p.stderr.close()
    assert codes == [0, 0]
    assert count(store) == (800, 2)
    assert sqlite3.connect(store).execute("PRAGMA integrity_check").fetchone() == ("ok",)


def test_a_run_that_cannot_wait_for_the_store_is_refused_with_a_message(tmp_path):
    path = str(tmp_path / "store.db")
    holder = history.open_for_run(path)
    try:
        with pytest.raises(history.HistoryError, match="in use by another run"):
            history.Store(path, KEY.encode(), timeout=0.2).begin()
    finally:
        holder.close()


def test_panels_older_than_the_retention_are_pruned_and_not_added(tmp_path, capsys):
    store = tmp_path / "store.db"
    src = panels(tmp_path / "day.csv", [("S1", "P-1", 40.0, 140), ("S2", "P-1", 10.0, 140),
                                        ("S3", "P-2", 2.0, 140)])
    rc, _, err = run(capsys, src, store)
    assert rc == 0 and "1 collected before the retention period (30 days)" in err
    assert count(store)[0] == 2
    # A shorter retention later prunes the 10-day-old panel from its block.
    s = history.Store(str(store), None, retention_days=5, create=False)
    try:
        assert s.prune() == 1
    finally:
        s.close()
    assert count(store)[0] == 1


def test_no_plain_patient_id_is_written_and_the_file_is_the_owners_only(tmp_path, capsys):
    store = tmp_path / "store.db"
    ids = ["MRN-ZULU-0042", "Jane Q. Example 1970-01-01"]
    run(capsys, panels(tmp_path / "day.csv", [("S1", ids[0], 1, 140), ("S2", ids[1], 1, 141)]),
        store)
    data = b"".join(p.read_bytes() for p in tmp_path.glob("store.db*"))
    for pid in ids:
        assert pid.encode() not in data and pid.encode("utf-16-le") not in data
    assert os.stat(store).st_mode & 0o777 == 0o600


def test_without_a_site_key_the_run_is_refused_and_no_store_is_made(tmp_path, capsys,
                                                                   monkeypatch):
    monkeypatch.delenv(history.KEY_ENV)
    store = tmp_path / "store.db"
    rc, _, err = run(capsys, panels(tmp_path / "day.csv", [("S1", "P-1", 1, 140)]), store)
    assert rc == 2 and history.KEY_ENV in err and "never stored" in err
    assert not store.exists()


def test_a_store_made_with_another_key_is_refused(tmp_path, capsys, monkeypatch):
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day.csv", [("S1", "P-1", 1, 140)]), store)
    monkeypatch.setenv(history.KEY_ENV, "another-site-key-0123456789")
    rc, _, err = run(capsys, panels(tmp_path / "day2.csv", [("S2", "P-1", 0.5, 140)]), store)
    assert rc == 2 and "another site key" in err


def test_a_store_from_a_later_version_is_refused(tmp_path, capsys):
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day.csv", [("S1", "P-1", 1, 140)]), store)
    with sqlite3.connect(store) as db:
        db.execute("UPDATE meta SET value = ? WHERE name = 'schema_version'",
                   (str(history.SCHEMA_VERSION + 1),))
    rc, _, err = run(capsys, panels(tmp_path / "day2.csv", [("S2", "P-1", 0.5, 140)]), store)
    assert rc == 2 and "later version of acidbase" in err
    assert count_runs_raw(store) == 1


def count_runs_raw(store: Path) -> int:
    return sqlite3.connect(store).execute("SELECT COUNT(*) FROM runs").fetchone()[0]


def test_a_file_that_is_not_a_store_is_refused_and_left_alone(tmp_path, capsys):
    store = tmp_path / "notes.txt"
    store.write_text("not a database\n")
    rc, _, err = run(capsys, panels(tmp_path / "day.csv", [("S1", "P-1", 1, 140)]), store)
    assert rc == 2 and "not a history store" in err
    assert store.read_text() == "not a database\n"


def test_earlier_panels_gives_one_patients_stored_panels_oldest_first(tmp_path, capsys):
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day.csv", [("S2", "P-1", 1.0, 141), ("S1", "P-1", 2.0, 140),
                                              ("S9", "P-2", 1.5, 150)]), store)
    got = history.earlier_panels(str(store), "P-1", KEY)
    assert [p["sample_id"] for p in got] == ["S1", "S2"]
    assert [p["na"] for p in got] == [140.0, 141.0]
    assert got[0]["collected_at"].endswith("Z")
    before = history.earlier_panels(str(store), "P-1", KEY, before=stamp(1.5))
    assert [p["sample_id"] for p in before] == ["S1"]
    assert history.earlier_panels(str(store), "P-unknown", KEY) == []


def test_history_command_counts_exports_and_purges_one_patient(tmp_path, capsys):
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day.csv", [("S1", "P-1", 1.0, 140), ("S2", "P-1", 0.5, 141),
                                              ("S3", "=P-2", 0.5, 150)]), store)
    assert main(["history", str(store)]) == 0
    out = capsys.readouterr().out
    assert "panels: 3 of 2 patients" in out and "runs recorded: 1" in out and "Caution" in out
    exported = tmp_path / "p1.csv"
    assert main(["history", str(store), "--patient", "P-1", "--export", "-o", str(exported)]) == 0
    rows = list(csv.DictReader(exported.open()))
    assert [r["sample_id"] for r in rows] == ["S1", "S2"] and rows[0]["caution"]
    assert os.stat(exported).st_mode & 0o777 == 0o600
    assert main(["history", str(store), "--patient", "=P-2", "--export"]) == 0
    assert "'=P-2" in capsys.readouterr().out  # formula-escaped in CSV
    assert main(["history", str(store), "--patient", "P-1", "--purge"]) == 0
    assert "removed 2 stored panels" in capsys.readouterr().out
    assert count(store)[0] == 1


@pytest.mark.parametrize("argv", [["--export"], ["--patient", "P-1"], ["-o", "x.csv"]])
def test_history_command_refuses_incomplete_options_without_a_traceback(tmp_path, capsys, argv):
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day.csv", [("S1", "P-1", 1.0, 140)]), store)
    assert main(["history", str(store), *argv]) == 2
    err = capsys.readouterr().err
    assert err.startswith("acidbase history: could not run:") and "Traceback" not in err


def test_hash_ids_hashes_each_id_and_keeps_blank_ids_empty():
    key = KEY.encode()
    got = history.hash_ids(pa.array(["A", None, " ", "A", "B"]), key).to_pylist()
    assert got[0] == got[3] == history.hash_id("A", key) != got[4]
    assert got[1] == got[2] == ""
    # RFC 4231 test case 2 (HMAC-SHA256, key "Jefe"), truncated to its first 128 bits
    # as RFC 2104 section 5 allows: 5bdcc146bf60754e6a042426089575c7 5a003f08...
    assert history.hash_id("what do ya want for nothing?", b"Jefe") == (
        "5bdcc146bf60754e6a042426089575c7")


def test_a_short_key_is_refused():
    with pytest.raises(history.HistoryError, match="at least"):
        history.site_key("short")


@pytest.mark.parametrize("key", [b"Jefe", b"k" * 64, b"long-" * 40])
def test_many_ids_are_hashed_as_one_id_is(key):
    """The per-id shortcut (copied hash states) gives the standard library's HMAC,
    also for keys of one block and longer than a block (RFC 2104 section 2)."""
    ids = ["what do ya want for nothing?", "MRN-1", "é-accent"]
    assert history.hash_ids(pa.array(ids), key).to_pylist() == [
        history.hash_id(i, key) for i in ids]


def test_a_sample_listed_twice_in_one_file_is_stored_once(tmp_path, capsys):
    store = tmp_path / "store.db"
    src = tmp_path / "day.csv"
    row = f"S1,P-1,{stamp(1)},7.40,40,24,140,104,4.0\n"
    src.write_text(HEADER + row + f"S2,P-1,{stamp(0.5)},7.40,40,24,140,104,4.0\n" + row)
    assert run(capsys, src, store)[0] == 0
    assert count(store) == (2, 1)


def test_the_latest_stored_panel_is_the_one_compared(tmp_path, capsys):
    """Of a patient's several stored panels before the file's first, the latest is
    the neighbour (the earlier ones are left aside by the store's read)."""
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day1.csv", [("S1", "P-1", 1.9, 140), ("S2", "P-1", 1.8, 141),
                                               ("S3", "P-1", 1.7, 128)]), store)
    rc, rows, err = run(capsys, panels(tmp_path / "day2.csv", [("S4", "P-1", 1.5, 140)]), store)
    assert rc == 0 and rows[0]["serial_codes"] == "SERIAL-DELTA-NA"
    assert "Na+ 140 after 128" in rows[0]["serial_detail"] and "(sample S3)" in \
        rows[0]["serial_detail"]
    assert "1 earlier panels compared" in err


def test_the_command_lines_defaults_are_the_stores():
    """cli.py keeps no import of the store: its defaults are written out, and kept equal."""
    from acidbase.cli import build_parser

    args = build_parser().parse_args(["history", "x.db"])
    assert args.retention_days == history.DEFAULT_RETENTION_DAYS
    batch_help = build_parser()._subparsers._group_actions[0].choices["batch"].format_help()
    assert history.KEY_ENV in " ".join(batch_help.split())


def test_a_run_killed_while_storing_leaves_the_store_as_it_was(tmp_path, capsys):
    """SIGKILL while the run's transaction is being written (its rollback journal on
    disk): the next opener rolls it back; the store is intact and unchanged."""
    import signal
    import time

    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day1.csv", [("S1", "P-1", 2.0, 140)]), store)
    before = count(store)
    rows = [(f"S{i}", f"P-{i % 5000}", 1 + i / 100000, 140) for i in range(60000)]
    src = panels(tmp_path / "day2.csv", rows)
    env = dict(os.environ, TMPDIR=str(tmp_path), **{history.KEY_ENV: KEY})  # scratch stays here
    proc = subprocess.Popen([sys.executable, "-m", "acidbase", "batch", str(src), "-o",
                             str(tmp_path / "o.csv"), "--history", str(store), "--quiet"],
                            env=env, stderr=subprocess.DEVNULL)
    journal = Path(str(store) + "-journal")
    deadline = time.monotonic() + 300
    while proc.poll() is None and not journal.exists() and time.monotonic() < deadline:
        time.sleep(0.0005)
    caught = proc.poll() is None and journal.exists()
    if proc.poll() is None:
        proc.send_signal(signal.SIGKILL)
    proc.wait()
    if not caught:
        pytest.skip("the run finished before its transaction could be caught on disk")
    assert count(store) == before
    assert sqlite3.connect(store).execute("PRAGMA integrity_check").fetchone() == ("ok",)


def test_the_run_record_keeps_the_window_and_limits_the_configuration_set(tmp_path, capsys):
    """A window and a delta limit set by the site configuration (not by options) are
    the ones the store's run record names: the settings the checks used."""
    import json

    config = tmp_path / "site.toml"
    config.write_text("[serial]\nwindow_hours = 12\ndelta = { na = 15 }\n")
    store = tmp_path / "store.db"
    rc, _, _ = run(capsys, panels(tmp_path / "day.csv", [("S1", "P-1", 1.0, 140)]), store,
                   "--config", str(config))
    assert rc == 0
    settings = json.loads(sqlite3.connect(store).execute(
        "SELECT settings FROM runs").fetchone()[0])
    assert settings["window_hours"] == 12.0
    assert settings["delta"]["na"] == 15.0 and settings["delta"]["k"] == 1.0
    assert settings["history_retention_days"] == history.DEFAULT_RETENTION_DAYS


def test_the_run_record_names_the_input_by_the_sha256_the_run_read_once(tmp_path, capsys,
                                                                      monkeypatch):
    """The store's record keeps the input's SHA-256 (NIST FIPS 180-4, computed here by
    hashlib) that the run's own audit record computed: the file is not read a third time."""
    import hashlib
    import json

    def again(path):
        raise AssertionError("the input was hashed a second time")

    monkeypatch.setattr(history, "file_sha256", again)
    src = panels(tmp_path / "day.csv", [("S1", "P-1", 1.0, 140)])
    store = tmp_path / "store.db"
    summary = tmp_path / "summary.json"
    rc, _, _ = run(capsys, src, store, "--summary", str(summary))
    assert rc == 0
    stored = sqlite3.connect(store).execute("SELECT input_sha256 FROM runs").fetchone()[0]
    assert stored == hashlib.sha256(src.read_bytes()).hexdigest()
    assert stored == json.loads(summary.read_text())["audit"]["input"]["sha256"]


def test_a_break_between_a_stored_panel_and_a_row_of_the_file_names_both(tmp_path, capsys):
    """The panels either side of a break: one from the store (by its time), one of this
    file (by its row)."""
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day1.csv", [("S1", "P-1", 1.5, 140)]), store)
    rc, rows, _ = run(capsys, panels(tmp_path / "day2.csv", [("S2", "P-1", 1.2, 160),
                                                             ("S3", "P-1", 1.0, 141)]), store)
    assert rc == 0 and rows[0]["serial_codes"].startswith("SERIAL-BREAK")
    detail = rows[0]["serial_detail"]
    assert "; panels the stored panel of " in detail
    assert "Z (sample S1) and row 2 (sample S3)):" in detail


def test_the_store_reads_only_each_patients_latest_panel_before_the_file(tmp_path, capsys):
    """Of a patient's stored panels before the patient's first panel in the run, only the
    latest is read (the others could be no panel's neighbour); those from then on all."""
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day1.csv", [("S1", "P-1", 1.9, 140), ("S2", "P-1", 1.8, 141),
                                               ("S3", "P-1", 1.7, 128), ("S4", "P-1", 1.2, 139),
                                               ("S5", "P-2", 1.8, 150)]), store)
    s = history.Store(str(store), KEY.encode(), create=False)
    try:
        now = dt.datetime.now(dt.UTC).timestamp()
        first = int(now - 1.5 * 86400)  # P-1's first panel in the (imagined) run
        s.hash_ids(pa.array(["P-1", "P-1"]), [first, first + 3600])
        got = pa.concat_tables(list(s.earlier(first - 86400 * 3, first + 86400)))
    finally:
        s.close()
    assert sorted(got["sample"].to_pylist()) == ["S3", "S4"]


def test_a_run_that_finds_the_store_just_made_by_another_uses_it(tmp_path, monkeypatch):
    """Two runs starting at once against a new store: the one that loses the race to
    create the file, or to create its tables, uses the store the other made."""
    path = str(tmp_path / "store.db")
    key = KEY.encode()
    history.Store(path, key).close()  # made by the other run...
    monkeypatch.setattr(history.os.path, "exists", lambda p: False)  # ...just after we looked
    s = history.Store(path, key)
    s.close()
    monkeypatch.undo()

    path2 = str(tmp_path / "store2.db")
    os.close(os.open(path2, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600))  # empty file
    real_lock = history.Store._lock
    raced = []

    def lock_after_the_other_run(self):
        if not raced:  # the other run creates the tables while this one waits
            raced.append(1)
            history.Store(path2, key).close()
        real_lock(self)

    monkeypatch.setattr(history.Store, "_lock", lock_after_the_other_run)
    s = history.Store(path2, key)
    s.close()
    assert raced and count(tmp_path / "store2.db") == (0, 0)


def test_the_site_file_names_the_store_when_no_option_does(tmp_path, capsys):
    """`[history] path` in the site configuration (relative to the file) is the store of
    every run without --history; the option, when given, wins; config show names it."""
    site = tmp_path / "site.toml"
    site.write_text('[history]\npath = "lab-store.db"\nretention_days = 60\n')
    for day, na in (("day1", 140), ("day2", 155)):
        src = panels(tmp_path / f"{day}.csv", [(f"S-{day}", "MRN-ALPHA-7",
                                                1.5 if day == "day1" else 1.0, na)])
        out = tmp_path / f"{day}.out.csv"
        assert main(["batch", str(src), "-o", str(out), "--quiet", "--profile", "full",
                     "--config", str(site)]) == 0
    err = capsys.readouterr().err
    assert (tmp_path / "lab-store.db").exists()
    assert "1 earlier panels compared" in err
    row = next(csv.DictReader((tmp_path / "day2.out.csv").open()))
    assert row["serial_codes"] == "SERIAL-DELTA-NA"
    assert count(tmp_path / "lab-store.db")[0] == 2
    other = tmp_path / "other.db"  # the option wins over the file
    src = panels(tmp_path / "day3.csv", [("S3", "MRN-ALPHA-7", 0.5, 141)])
    assert main(["batch", str(src), "-o", str(tmp_path / "day3.out.csv"), "--quiet",
                 "--config", str(site), "--history", str(other)]) == 0
    assert other.exists() and count(tmp_path / "lab-store.db")[0] == 2
    capsys.readouterr()
    assert main(["config", "show", "--config", str(site)]) == 0
    shown = {line.split()[0]: line for line in capsys.readouterr().out.splitlines()
             if line.startswith("history.")}
    assert str(tmp_path / "lab-store.db") in shown["history.path"]
    assert shown["history.path"].endswith(f"file {site}")
    assert float(shown["history.retention_days"].split()[1]) == 60


def test_a_bad_history_table_in_the_site_file_is_refused_naming_the_key(tmp_path, capsys):
    site = tmp_path / "site.toml"
    site.write_text("[history]\nretention_days = -3\n")
    src = panels(tmp_path / "day1.csv", [("S1", "P-1", 1.0, 140)])
    rc = main(["batch", str(src), "-o", str(tmp_path / "o.csv"), "--quiet",
               "--config", str(site)])
    err = capsys.readouterr().err
    assert rc == 2 and "history.retention_days" in err and "Traceback" not in err
    assert not (tmp_path / "o.csv").exists()


def test_the_app_takes_the_site_files_store_and_the_option_wins(tmp_path, monkeypatch):
    """`acidbase tui` opens the store the site file names, or the one --history names."""
    import tui.app

    site = tmp_path / "site.toml"
    site.write_text('[history]\npath = "ward.db"\n')
    seen = {}

    class _App:
        def run(self):
            return None

    def fake_make_app(**kw):
        seen.update(kw)
        return _App()

    monkeypatch.setattr(tui.app, "make_app", fake_make_app)
    assert main(["tui", "--config", str(site)]) == 0
    assert seen["history"] == str(tmp_path / "ward.db")
    assert main(["tui", "--config", str(site), "--history", str(tmp_path / "own.db")]) == 0
    assert seen["history"] == str(tmp_path / "own.db")
    monkeypatch.delenv("ACIDBASE_CONFIG", raising=False)
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path / "no-config-here"))
    assert main(["tui"]) == 0
    assert seen["history"] is None  # no site file in reach, no option: no store


# -- layout 2: each patient's latest panels; a layout-1 store migrated ----------------
def _v1_store(path: Path, rows: list[tuple[str, int, str, float]], data: bytes | None = None
              ) -> None:
    """A store as layout 1 wrote it (this test encodes that layout on purpose): blocks
    of Arrow IPC with the keyed ids as 32 hex digits, no ``latest`` table.  rows:
    (patient id, time in seconds, sample id, Na+)."""
    import hashlib
    import hmac

    from pyarrow import ipc

    key = KEY.encode()
    ids = [hmac.digest(key, p.encode(), hashlib.sha256)[:16].hex() for p, *_ in rows]
    fields = list(history.STORED_FIELDS)
    cols = {"patient": pa.array(ids, pa.string()), "t": pa.array([r[1] for r in rows], pa.int64()),
            "zoned": pa.array([True] * len(rows)), "sample": pa.array([r[2] for r in rows])}
    for f in fields:
        cols[f] = pa.array([r[3] if f == "na" else None for r in rows], pa.float64())
    table = pa.table(cols)
    db = sqlite3.connect(path)
    db.executescript("""
        CREATE TABLE meta (name TEXT PRIMARY KEY, value TEXT NOT NULL);
        CREATE TABLE runs (id INTEGER PRIMARY KEY, finished_at TEXT NOT NULL, tool_version TEXT,
                           settings TEXT, input_sha256 TEXT, panels_added INTEGER,
                           panels_already_stored INTEGER, earlier_panels_used INTEGER);
        CREATE TABLE blocks (id INTEGER PRIMARY KEY, run_id INTEGER NOT NULL REFERENCES runs(id),
                             bucket TEXT NOT NULL, n INTEGER NOT NULL, tmin INTEGER NOT NULL,
                             tmax INTEGER NOT NULL, data BLOB NOT NULL);
        CREATE INDEX blocks_time ON blocks (tmax, tmin);
        CREATE INDEX blocks_bucket ON blocks (bucket);""")
    check = hmac.digest(key, b"acidbase history key check", hashlib.sha256).hex()
    db.executemany("INSERT INTO meta VALUES (?, ?)", [("schema_version", "1"),
                                                      ("key_check", check),
                                                      ("created_at", "2026-12-01T00:00:00Z")])
    db.execute("INSERT INTO runs (id, finished_at, panels_added) VALUES (1, 'x', ?)",
               (len(rows),))
    for digit in sorted({h[0] for h in ids}):
        part = table.filter(pa.array([h[0] == digit for h in ids]))
        sink = pa.BufferOutputStream()
        with ipc.new_stream(sink, part.schema) as w:
            w.write_table(part)
        t = part["t"].to_pylist()
        db.execute("INSERT INTO blocks (run_id, bucket, n, tmin, tmax, data) VALUES "
                   "(1, ?, ?, ?, ?, ?)", (digit, part.num_rows, min(t), max(t),
                                          data if data is not None else
                                          sink.getvalue().to_pybytes()))
    db.commit()
    db.close()


def _secs(days_ago: float) -> int:
    return int(dt.datetime.strptime(stamp(days_ago), "%Y-%m-%dT%H:%M:%SZ")
               .replace(tzinfo=dt.UTC).timestamp())


def test_a_version_1_store_is_migrated_in_place_and_keeps_working(tmp_path, capsys):
    """Layout 1's blocks (hex ids) become layout 2's (16 bytes) with the ``latest``
    table, in one transaction; the next run compares with the migrated panels, and
    export, purge and the summary read them."""
    store = tmp_path / "store.db"
    _v1_store(store, [("MRN-ALPHA-7", _secs(2.0), "S0", 139.0),
                      ("MRN-ALPHA-7", _secs(1.5), "S1", 140.0),
                      ("P-2", _secs(1.5), "S9", 150.0)])
    rc, rows, err = run(capsys, panels(tmp_path / "day2.csv",
                                       [("S2", "MRN-ALPHA-7", 1.0, 155)]), store)
    assert rc == 0 and rows[0]["serial_codes"] == "SERIAL-DELTA-NA"
    assert "(sample S1)" in rows[0]["serial_detail"] and "1 earlier panels compared" in err
    db = sqlite3.connect(store)
    meta = dict(db.execute("SELECT name, value FROM meta"))
    assert meta["schema_version"] == str(history.SCHEMA_VERSION) == "2"
    assert "migrated_at" in meta
    assert db.execute("SELECT SUM(n) FROM latest").fetchone()[0] == 2  # S2 (after S1), S9
    for (data,) in db.execute("SELECT data FROM blocks"):  # as written, not as read
        assert pa.ipc.open_stream(data).schema.field("patient").type == pa.binary(16)
    db.close()
    got = history.earlier_panels(str(store), "MRN-ALPHA-7", KEY)
    assert [p["sample_id"] for p in got] == ["S0", "S1", "S2"]
    assert count(store) == (4, 2)
    assert main(["history", str(store), "--patient", "P-2", "--purge"]) == 0
    assert count(store) == (3, 2)


def test_a_version_1_store_that_cannot_be_migrated_is_refused_and_left_as_it_was(
        tmp_path, capsys):
    store = tmp_path / "store.db"
    _v1_store(store, [("P-1", _secs(1.5), "S1", 140.0)], data=b"not an Arrow stream")
    before = store.read_bytes()
    rc, _, err = run(capsys, panels(tmp_path / "day2.csv", [("S2", "P-1", 1.0, 155)]), store)
    assert rc == 2 and "could not be brought to store version 2" in err
    assert "it is unchanged" in err and "Traceback" not in err
    assert store.read_bytes() == before


def _reference(stored: list[tuple[str, int, str]], run: dict[str, int], lo: int, hi: int
               ) -> list[tuple[str, int, str]]:
    """What ``Store.earlier`` must give (its docstring, stated over all stored panels):
    of each of the run's patients, the panels in lo..hi from its first panel here on,
    and those at the latest time before it."""
    out = []
    for p, first in run.items():
        mine = [r for r in stored if r[0] == p and lo <= r[1] <= hi]
        before = [r[1] for r in mine if r[1] < first]
        out += [r for r in mine if r[1] >= first or (before and r[1] == max(before))]
    return sorted(out)


@pytest.mark.parametrize("seed", range(12))
def test_earlier_gives_each_patients_panels_from_its_first_on_and_the_latest_before(
        tmp_path, seed):
    """Random stores of several runs (shared times, patients read again, a prune, a
    purge) against the reference over every stored panel: the ``latest`` table and
    the blocks read for patients stored from their first panel on give the same."""
    import numpy as np

    rng = np.random.default_rng(seed)
    key = KEY.encode()
    path = str(tmp_path / "store.db")
    now = 2_000_000_000
    patients = [f"P-{i}" for i in range(int(rng.integers(3, 40)))]
    stored: list[tuple[str, int, str]] = []
    s = history.Store(path, key, retention_days=3650)
    try:
        for runno in range(int(rng.integers(1, 5))):
            n = int(rng.integers(1, 60))
            pids = [patients[i] for i in rng.integers(0, len(patients), n)]
            t = (now - rng.integers(0, 40, n) * 3600 * 6).tolist()  # many shared times
            samples = [f"S{runno}-{i}" for i in range(n)]
            table = {"patient": history.hash_ids(pa.array(pids), key), "t": pa.array(t),
                     "zoned": pa.array([True] * n), "sample": pa.array(samples)}
            for f in history.STORED_FIELDS:
                table[f] = pa.array(rng.normal(140, 5, n))
            s.begin()
            s.commit(iter([pa.table(table)]), history.RunRecord("t", {}, "x"), now=now)
            stored += list(zip(pids, t, samples))
        if rng.random() < 0.5:  # a shorter retention prunes some
            cut = now - int(rng.integers(1, 40)) * 3600 * 6
            s.retention = now - cut
            s.prune(now=now)
            stored = [r for r in stored if r[1] >= cut]
        if rng.random() < 0.5:
            gone = patients[int(rng.integers(0, len(patients)))]
            s.purge(gone)
            stored = [r for r in stored if r[0] != gone]
        m = int(rng.integers(1, len(patients) + 1))
        run_ids = [patients[i] for i in rng.choice(len(patients), m, replace=False)]
        # first panels here: mostly after the store, some inside it (a file read again)
        first = {p: int(now - rng.integers(-8, 30) * 3600 * 6) for p in run_ids}
        lo, hi = min(first.values()) - 3 * 86400, max(first.values()) + 86400
        s.begin()
        s.hash_ids(pa.array(run_ids), np.array([first[p] for p in run_ids]))
        got = list(s.earlier(lo, hi))
    finally:
        s.close()
    by_hash = {history.hash_id(p, key): p for p in patients}
    rows = []
    for table in got:
        for h, t, sample in zip(table["patient"].to_pylist(), table["t"].to_pylist(),
                                table["sample"].to_pylist()):
            rows.append((by_hash[h.hex()], t, sample))
    assert sorted(rows) == _reference(stored, first, lo, hi)


def test_a_purged_patient_is_no_ones_earlier_panel(tmp_path, capsys):
    """Purge takes the patient out of the latest panels too: the next run finds none."""
    store = tmp_path / "store.db"
    run(capsys, panels(tmp_path / "day1.csv", [("S1", "P-1", 1.5, 140), ("S5", "P-2", 1.5, 140)]),
        store)
    assert main(["history", str(store), "--patient", "P-1", "--purge"]) == 0
    rc, rows, err = run(capsys, panels(tmp_path / "day2.csv", [("S2", "P-1", 1.0, 155),
                                                               ("S6", "P-2", 1.0, 155)]), store)
    assert rc == 0 and [r["serial_codes"] for r in rows] == ["", "SERIAL-DELTA-NA"]
    assert "1 earlier panels compared" in err


def test_one_commit_of_many_tables_stores_what_a_commit_of_each_stores(tmp_path):
    """``Store.commit`` encodes each table on a thread while the one before goes in:
    tables of one bucket, of several, and tables sharing a bucket with the one before
    (whose latest panels must be in before they are read) give, in one commit, the
    blocks and latest panels that a commit of each table on its own gives."""
    import numpy as np

    rng = np.random.default_rng(5)
    key = KEY.encode()
    now = 2_000_000_000
    made = []
    for j in range(8):
        n = int(rng.integers(20, 300))
        pids = [f"P-{i}" for i in rng.integers(0, 30 if j % 2 else 4000, n)]
        table = {"patient": history.hash_ids(pa.array(pids), key),
                 "t": pa.array((now - rng.integers(0, 40, n) * 3600).tolist()),
                 "zoned": pa.array([True] * n), "sample": pa.array([f"S{j}-{i}" for i in range(n)])}
        for f in history.STORED_FIELDS:
            table[f] = pa.array(rng.normal(140, 5, n))
        made.append(pa.table(table))
    dumps = []
    for together in (True, False):
        path = str(tmp_path / f"store{together}.db")
        s = history.Store(path, key, retention_days=3650)
        try:
            for group in ([made] if together else [[t] for t in made]):
                s.begin()
                s.commit(iter(group), history.RunRecord("t", {}, "x"), now=now)
        finally:
            s.close()
        db = sqlite3.connect(path)
        dumps.append([db.execute("SELECT bucket, n, tmin, tmax, data FROM blocks ORDER BY id")
                      .fetchall(),
                      db.execute("SELECT bucket, n, tmin, data FROM latest ORDER BY bucket")
                      .fetchall()])
        db.close()
    assert len(dumps[0][0]) > 40 and len(dumps[0][1]) == 16
    assert dumps[0] == dumps[1]


def test_a_new_store_has_large_pages_and_an_older_one_keeps_its_own(tmp_path, capsys):
    """The page size of a new store (history.PAGE_BYTES; SQLite documentation,
    "PRAGMA page_size": 512 to 65536, set while the file is empty).  A store made with
    SQLite's default pages, as by an earlier version, is read and added to as before."""
    def page_size(path: Path) -> int:
        with sqlite3.connect(path) as db:
            return db.execute("PRAGMA page_size").fetchone()[0]

    new = tmp_path / "new.db"
    assert run(capsys, panels(tmp_path / "a.csv", [("S1", "P-1", 1.5, 140)]), new)[0] == 0
    assert page_size(new) == history.PAGE_BYTES == 65536
    old = tmp_path / "old.db"
    s = history.Store(str(old), history.site_key())  # made as before the setting
    s.close()
    with sqlite3.connect(old) as db:  # rewritten with the default pages
        db.execute("PRAGMA page_size = 4096")
        db.execute("VACUUM")
    assert page_size(old) == 4096
    assert run(capsys, panels(tmp_path / "b.csv", [("S1", "P-1", 1.5, 140)]), old)[0] == 0
    rc, rows, err = run(capsys, panels(tmp_path / "c.csv", [("S2", "P-1", 1.0, 155)]), old)
    assert rc == 0 and rows[0]["serial_codes"] == "SERIAL-DELTA-NA"
    assert page_size(old) == 4096 and count(old) == (2, 2)


@pytest.mark.parametrize("make", ["folder", "missing folder"])
def test_a_store_path_that_cannot_be_a_file_is_refused_naming_it(tmp_path, capsys, make):
    """The path, a colon, then the system's words, as every command says it (it said
    "store.db Is a directory"); nothing written, exit 2."""
    src = panels(tmp_path / "a.csv", [("S1", "P-1", 1.5, 140)])
    store = tmp_path / ("store.db" if make == "folder" else "no-such-folder/store.db")
    if make == "folder":
        store.mkdir()
    out = tmp_path / "o.csv"
    rc = main(["batch", str(src), "-o", str(out), "--history", str(store), "--quiet"])
    err = capsys.readouterr().err
    assert rc == 2 and not out.exists()
    words = "Is a directory" if make == "folder" else "No such file or directory"
    assert f"could not run: {store}: {words}; nothing written" in err, err
