"""The history store as the terminal app uses it: one panel checked against a patient's
stored panels (``check_against_earlier``), and one panel kept (``keep_panel``).

The delta limits and the 24 h window are the batch's defaults (acidbase.serial): common
laboratory practice, no source.  The checks below compare the one-panel path with the
batch's own output for the same panels, so the two cannot drift apart.
"""

from __future__ import annotations

import csv
import datetime as dt
import json
import os
import sqlite3
from pathlib import Path

import pytest

from acidbase import history
from acidbase.cli import main

KEY = "site-key-for-app-tests-0123456789"
HEADER = "sample_id,patient_id,collected_at,ph,pco2,hco3,na,cl,k\n"
PATIENT = "MRN-APP-0042"
GAS = {"ph": 7.40, "pco2": 40.0, "hco3": 24.0, "cl": 104.0, "k": 4.0}


@pytest.fixture(autouse=True)
def site_key(monkeypatch):
    monkeypatch.setenv(history.KEY_ENV, KEY)


def stamp(hours_ago: float) -> str:
    t = dt.datetime.now(dt.UTC) - dt.timedelta(hours=hours_ago)
    return t.strftime("%Y-%m-%dT%H:%M:%SZ")


def batch_run(tmp_path: Path, name: str, rows: list[tuple[str, str, float]], store: Path
              ) -> list[dict[str, str]]:
    """rows: (sample id, time, Na+); a batch run with the store; its output rows."""
    src = tmp_path / f"{name}.csv"
    src.write_text(HEADER + "".join(f"{s},{PATIENT},{t},7.40,40,24,{na:g},104,4.0\n"
                                    for s, t, na in rows))
    out = tmp_path / f"{name}.out.csv"
    assert main(["batch", str(src), "-o", str(out), "--history", str(store), "--quiet",
                 "--profile", "full"]) == 0
    return list(csv.DictReader(out.open()))


def test_one_panel_is_flagged_with_the_batchs_own_words(tmp_path):
    """A Na+ jump of 15 mmol/L in 12 h (limit 10): the same status, codes and detail as
    the batch writes for the same panel read against the same store."""
    store = tmp_path / "store.db"
    first, second = stamp(13), stamp(1)
    batch_run(tmp_path, "day1", [("S1", first, 140)], store)
    earlier = history.earlier_panels(str(store), PATIENT)
    check = history.check_against_earlier({**GAS, "na": 155.0}, second, earlier, "S2")
    batch_rows = batch_run(tmp_path, "day2", [("S2", second, 155)], store)
    assert check.status == batch_rows[0]["serial_status"] == "flagged"
    assert check.codes == batch_rows[0]["serial_codes"] == "SERIAL-DELTA-NA"
    assert check.detail == batch_rows[0]["serial_detail"]
    assert "Na+ 155 after 140" in check.detail and "(sample S1)" in check.detail
    assert [r["sample_id"] for r in check.within] == ["S1"]


def test_a_change_within_the_limit_is_within_limits(tmp_path):
    store = tmp_path / "store.db"
    batch_run(tmp_path, "day1", [("S1", stamp(5), 140)], store)
    earlier = history.earlier_panels(str(store), PATIENT)
    check = history.check_against_earlier({**GAS, "na": 145.0}, stamp(1), earlier, "S2")
    assert (check.status, check.codes, check.detail) == ("within limits", "", "")


def test_the_sites_limits_and_window_are_used():
    """The site's own delta limit (20 mmol/L) quiets the flag; a 6 h window leaves a
    panel 12 h before out."""
    earlier = [{"collected_at": "2026-12-01T08:00:00Z", "sample_id": "S1", "ph": 7.4,
                "pco2": 40.0, "hco3": 24.0, "na": 140.0}]
    values = {**GAS, "na": 155.0}
    when = "2026-12-01T20:00:00Z"
    assert history.check_against_earlier(values, when, earlier).codes == "SERIAL-DELTA-NA"
    assert history.check_against_earlier(values, when, earlier,
                                         deltas={"na": 20.0}).status == "within limits"
    narrow = history.check_against_earlier(values, when, earlier, window_hours=6)
    assert narrow.status.startswith("not assessable: no other panel")
    assert narrow.within == [] and narrow.window_hours == 6


def test_a_panel_without_a_time_is_not_assessable():
    earlier = [{"collected_at": "2026-12-01T08:00:00Z", "sample_id": "S1", "ph": 7.4,
                "pco2": 40.0, "hco3": 24.0, "na": 140.0}]
    check = history.check_against_earlier({**GAS, "na": 155.0}, None, earlier)
    assert check.status == "not assessable: no patient_id or collected_at"
    assert check.codes == ""


def test_stored_panels_on_the_other_clock_are_left_out_and_counted():
    """A time without an offset is not compared with stored times that had one (as in
    one batch file)."""
    earlier = [{"collected_at": "2026-12-01T08:00:00Z", "sample_id": "S1", "ph": 7.4,
                "pco2": 40.0, "hco3": 24.0, "na": 140.0}]
    check = history.check_against_earlier({**GAS, "na": 155.0}, "2026-12-01T20:00", earlier)
    assert check.codes == "" and check.other_clock == 1 and check.within == []


def test_a_kept_panel_is_stored_hashed_owner_only_with_an_audit_record(tmp_path):
    store = tmp_path / "store.db"
    kept = history.keep_panel(str(store), PATIENT, {**GAS, "na": 140.0}, stamp(2), "S9",
                              settings={"surface_test": 1})
    assert kept.added and not kept.already_stored
    assert os.stat(store).st_mode & 0o777 == 0o600
    data = b"".join(p.read_bytes() for p in tmp_path.glob("store.db*"))
    assert PATIENT.encode() not in data and PATIENT.encode("utf-16-le") not in data
    rows = history.earlier_panels(str(store), PATIENT)
    assert [(r["sample_id"], r["na"]) for r in rows] == [("S9", 140.0)]
    db = sqlite3.connect(store)
    try:
        (version, settings, digest, added), = db.execute(
            "SELECT tool_version, settings, input_sha256, panels_added FROM runs").fetchall()
    finally:
        db.close()
    assert version and added == 1 and len(digest) == 64
    assert json.loads(settings) == {"surface": "acidbase tui", "surface_test": 1}


def test_keeping_the_same_panel_twice_adds_it_once(tmp_path):
    store = tmp_path / "store.db"
    when = stamp(2)
    assert history.keep_panel(str(store), PATIENT, GAS, when, "S9").added
    again = history.keep_panel(str(store), PATIENT, GAS, when, "S9")
    assert not again.added and again.already_stored
    assert len(history.earlier_panels(str(store), PATIENT)) == 1


def test_a_kept_panel_is_a_neighbour_for_the_next_batch_run(tmp_path):
    store = tmp_path / "store.db"
    history.keep_panel(str(store), PATIENT, {**GAS, "na": 140.0}, stamp(10), "S1")
    rows = batch_run(tmp_path, "day2", [("S2", stamp(1), 155)], store)
    assert rows[0]["serial_codes"] == "SERIAL-DELTA-NA"


@pytest.mark.parametrize("patient,when,words", [
    (PATIENT, "", "collection time"),
    (PATIENT, "yesterday", "collection time"),
    ("  ", "2026-12-01T08:00Z", "patient id"),
])
def test_a_panel_without_id_or_time_is_not_kept(tmp_path, patient, when, words):
    store = tmp_path / "store.db"
    with pytest.raises(history.HistoryError, match=words):
        history.keep_panel(str(store), patient, GAS, when)
    assert not store.exists()


def test_without_the_site_key_nothing_is_kept_and_no_store_is_made(tmp_path, monkeypatch):
    monkeypatch.delenv(history.KEY_ENV)
    store = tmp_path / "store.db"
    with pytest.raises(history.HistoryError, match=history.KEY_ENV):
        history.keep_panel(str(store), PATIENT, GAS, stamp(1))
    assert not store.exists()


def test_a_panel_older_than_the_retention_is_not_kept(tmp_path):
    store = tmp_path / "store.db"
    kept = history.keep_panel(str(store), PATIENT, GAS, stamp(24 * 40), retention_days=30)
    assert not kept.added and kept.too_old
    assert history.earlier_panels(str(store), PATIENT) == []
