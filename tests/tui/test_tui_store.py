"""The app and the history store (``acidbase tui --history PATH``), by the keyboard alone.

The store is used only when asked for; a patient's stored panels are read once the
patient id is typed in full; the panel is checked against them by the library with the
batch's rules (Na+ limit 10 mmol/L within 24 h: common laboratory practice, no source);
a panel is kept only after K and a yes.
"""

from __future__ import annotations

import datetime as dt
import sqlite3

import pytest
from tui_helpers import key_in

from acidbase import history
from tui.app import make_app
from tui.screens.confirm import ConfirmScreen
from tui.screens.entry import EntryScreen
from tui.screens.store import StoreScreen, StoredTable
from tui.widgets.reading import VerdictLine

KEY = "site-key-for-app-tests-0123456789"
PATIENT = "MRN-APP-0042"
#: pH, pCO2, HCO3-, Na+, Cl-: consistent by Henderson-Hasselbalch (tui_helpers.PANELS),
#: Na+ 155 against a stored 140 twelve hours before.
HIGH_NA = ("7.40", "40", "24.2", "155", "105")


def stamp(hours_ago: float) -> str:
    t = dt.datetime.now(dt.UTC) - dt.timedelta(hours=hours_ago)
    return t.strftime("%Y-%m-%dT%H:%MZ")


@pytest.fixture
def store(tmp_path, monkeypatch):
    """A store holding one panel of the patient (Na+ 140, 13 h ago)."""
    monkeypatch.setenv(history.KEY_ENV, KEY)
    path = tmp_path / "store.db"
    history.keep_panel(str(path), PATIENT, {"ph": 7.40, "pco2": 40.0, "hco3": 24.2,
                                            "na": 140.0, "cl": 105.0}, stamp(13), "S1")
    return path


async def type_into(pilot, name: str, text: str, leave: bool = True) -> None:
    pilot.app.screen.query_one(f"#{name}").focus()
    await pilot.pause()
    await pilot.press(*text)
    if leave:
        await pilot.press("tab")
    await pilot.pause()


def verdict_text(app) -> str:
    return app.screen.query_one(VerdictLine).text


async def test_without_history_no_store_is_read_or_mentioned(tmp_path, monkeypatch):
    monkeypatch.setenv(history.KEY_ENV, KEY)
    monkeypatch.chdir(tmp_path)
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, HIGH_NA)
        await type_into(pilot, "patient_id", PATIENT)
        assert app.store is None
        assert "Store" not in verdict_text(app)
        assert not any("History store" in line for line in app.screen.pane.lines())
        await pilot.press("ctrl+t")
        await pilot.pause()
        assert isinstance(app.screen, EntryScreen)
        assert "--history" in str(app.screen.query_one("#status").render())
    assert list(tmp_path.iterdir()) == []


async def test_without_the_key_the_app_says_the_store_cannot_be_used(tmp_path, monkeypatch):
    monkeypatch.delenv(history.KEY_ENV, raising=False)
    path = tmp_path / "store.db"
    app = make_app(history=str(path))
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        status = str(app.screen.query_one("#status").render())
        assert "cannot be used" in status and history.KEY_ENV in status
        await key_in(pilot, HIGH_NA)
        await type_into(pilot, "patient_id", PATIENT)
        assert verdict_text(app).endswith("| Store: cannot be used")
        await pilot.press("ctrl+t")
        await pilot.pause()
        assert isinstance(app.screen, EntryScreen)  # nothing to show, nothing kept
    assert not path.exists()


async def test_the_stored_panels_are_read_once_the_patient_id_is_typed_in_full(
        store, monkeypatch):
    reads: list[str] = []
    real = history.earlier_panels

    def counting(path, patient_id, *args, **kwargs):
        reads.append(patient_id)
        return real(path, patient_id, *args, **kwargs)

    monkeypatch.setattr(history, "earlier_panels", counting)
    app = make_app(history=str(store))
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, HIGH_NA)
        await type_into(pilot, "collected_at", stamp(1))
        await type_into(pilot, "patient_id", PATIENT, leave=False)
        assert reads == []  # not one look-up per key
        assert "not read yet" in " ".join(app.screen.pane.lines())
        await pilot.press("tab")
        await pilot.pause()
        await pilot.pause()
        assert reads == [PATIENT]
        await type_into(pilot, "sample_id", "S2")
        assert reads == [PATIENT]  # kept for the sitting


async def test_the_panel_is_flagged_against_the_stored_one_in_the_batchs_words(store):
    app = make_app(history=str(store))
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, HIGH_NA)
        await type_into(pilot, "collected_at", stamp(1))
        await type_into(pilot, "patient_id", PATIENT)
        await pilot.pause()
        assert verdict_text(app).endswith("| Store: flagged SERIAL-DELTA-NA")
        lines = app.screen.pane.lines()
        start = lines.index("History store: flagged")
        assert lines[start + 1].startswith("FLAGGED SERIAL-DELTA-NA: Na+ 155 after 140")
        assert "delta limit 10 mmol/L" in lines[start + 1]
        # the stored pH to two decimals, as a pH is reported (it showed "pH 7.4")
        assert any(line.startswith("stored ") and "(sample S1): pH 7.40 pCO2 40" in line
                   for line in lines[start:]), lines[start:]
        # a Na+ within the limit: the check follows the form
        app.screen.query_one("#na").focus()
        await pilot.pause()
        await pilot.press(*"145")
        await pilot.pause()
        assert verdict_text(app).endswith("| Store: within limits")


async def test_ctrl_t_lists_the_stored_panels_within_the_window(store):
    app = make_app(history=str(store))
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, HIGH_NA)
        await type_into(pilot, "collected_at", stamp(1))
        await type_into(pilot, "patient_id", PATIENT)
        await pilot.press("ctrl+t")
        await pilot.pause()
        assert isinstance(app.screen, StoreScreen)
        table = app.screen.query_one(StoredTable)
        assert table.row_count == 1
        row = [str(c) for c in table.get_row_at(0)]
        # pH to two decimals, as reported (it showed "7.4")
        assert row[1:5] == ["S1", "7.40", "40", "24.2"] and row[5] == "140"
        check = str(app.screen.query_one("#store-check").render())
        assert check.startswith("This panel: FLAGGED SERIAL-DELTA-NA")
        note = str(app.screen.query_one("#store-note").render())
        assert "read from the stored values only" in note
        await pilot.press("escape")
        await pilot.pause()
        assert isinstance(app.screen, EntryScreen)


def _runs(path) -> int:
    db = sqlite3.connect(path)
    try:
        return db.execute("SELECT COUNT(*) FROM runs").fetchone()[0]
    finally:
        db.close()


async def test_k_keeps_the_panel_only_after_a_yes_with_an_audit_record(store):
    app = make_app(history=str(store))
    when = stamp(1)
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, HIGH_NA)
        await type_into(pilot, "collected_at", when)
        await type_into(pilot, "patient_id", PATIENT)
        await type_into(pilot, "sample_id", "S2")
        await pilot.press("ctrl+t")
        await pilot.pause()
        await pilot.press("k")
        await pilot.pause()
        assert isinstance(app.screen, ConfirmScreen)
        assert PATIENT in str(app.screen.query_one("#question").render())
        await pilot.press("n")
        await pilot.pause()
        assert len(history.earlier_panels(str(store), PATIENT)) == 1 and _runs(store) == 1
        await pilot.press("k")
        await pilot.pause()
        await pilot.press("y")
        await app.workers.wait_for_complete()
        await pilot.pause()
        assert "Kept in the store" in str(app.screen.query_one("#store-note").render())
        assert app.screen.query_one(StoredTable).row_count == 2
    stored = history.earlier_panels(str(store), PATIENT)
    assert [(r["sample_id"], r["na"]) for r in stored] == [("S1", 140.0), ("S2", 155.0)]
    assert _runs(store) == 2  # the kept panel's audit record
    data = b"".join(p.read_bytes() for p in store.parent.glob("store.db*"))
    assert PATIENT.encode() not in data


async def test_k_without_a_collection_time_keeps_nothing_and_says_why(store):
    app = make_app(history=str(store))
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, HIGH_NA)
        await type_into(pilot, "patient_id", PATIENT)
        await pilot.press("ctrl+t")
        await pilot.pause()
        await pilot.press("k")
        await pilot.pause()
        assert isinstance(app.screen, StoreScreen)
        assert "no collection time" in str(app.screen.query_one("#store-note").render())
    assert len(history.earlier_panels(str(store), PATIENT)) == 1


async def test_keeping_while_a_batch_run_holds_the_store_waits_without_freezing_the_screen(
        store):
    """A batch run holds the store's write lock: after K and a yes the screen says it is
    waiting and still answers keys; once the run lets go, the panel is kept."""
    app = make_app(history=str(store))
    held = history.open_for_run(str(store), key=KEY)  # as a batch run does, until it commits
    try:
        async with app.run_test(size=(80, 24)) as pilot:
            await key_in(pilot, HIGH_NA)
            await type_into(pilot, "collected_at", stamp(1))
            await type_into(pilot, "patient_id", PATIENT)
            await type_into(pilot, "sample_id", "S2")
            await pilot.press("ctrl+t")
            await pilot.pause()
            await pilot.press("k", "y")
            await pilot.pause()
            note = app.screen.query_one("#store-note")
            assert "Keeping the panel in the store" in str(note.render())
            await pilot.press("k")  # the screen answers while the keep waits
            await pilot.pause()
            assert "being kept in the store" in str(note.render())
            held.close()  # the run ends without a commit: the keep goes ahead
            held = None
            await app.workers.wait_for_complete()
            await pilot.pause()
            assert "Kept in the store" in str(note.render())
    finally:
        if held is not None:
            held.close()
    assert [r["sample_id"] for r in history.earlier_panels(str(store), PATIENT)] == ["S1", "S2"]
