"""The sitting's panels: keep, move, compare, save and load, by the keyboard alone."""

from __future__ import annotations

import csv
import re
from datetime import datetime

import pytest
from textual.widgets import Input
from tui_helpers import PANELS, keep_two, key_in, processes_line, replace_value

import acidbase
from acidbase.demo import DEMO_PANELS
from acidbase.fields import NUMERIC, TEXT_FIELDS
from tui.app import make_app
from tui.screens.compare import CompareScreen, CompareTable
from tui.screens.series import SeriesScreen, SeriesTable
from tui.sitting import COLUMNS, Entry, read_csv, write_csv
from tui.widgets.reading import ReadingPane


async def test_keeping_adds_the_panel_and_moving_shows_each_in_turn():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await keep_two(pilot)
        assert len(app.sitting.entries) == 2 and app.sitting.current is None
        await pilot.press("f6", "f6")  # the last kept, then the one before it
        await pilot.pause()
        assert app.sitting.current == 0
        assert app.screen.query_one("#pco2", Input).value == "60"
        assert app.screen.query_one("#hco3", Input).value == "25.7"
        # Narins & Emmett 1980: HCO3 25.7 at pCO2 60 is in the acute band (26 +/- 2)
        assert processes_line(app) == "Processes: respiratory acidosis (acute, primary)"
        await pilot.press("f7")
        await pilot.pause()
        assert app.screen.query_one("#hco3", Input).value == "31.0"
        assert processes_line(app) == "Processes: respiratory acidosis (chronic, primary)"
        await pilot.press("f7")  # past the last: stays, and says so
        await pilot.pause()
        assert app.sitting.current == 1
        assert "No panel that way" in str(app.screen.query_one("#status").render())


async def test_keying_over_a_kept_panel_leaves_it_as_kept():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])
        await pilot.press("f5")
        await replace_value(pilot, "na", "142")
        assert app.sitting.entries[0].data["na"] == "140"


async def test_an_accepted_edit_updates_an_opened_kept_panel_a_refused_one_does_not():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])
        await pilot.press("f5", "f6")  # keep it, then open it
        await replace_value(pilot, "ph", "7.41")
        assert app.sitting.entries[0].data["ph"] == "7.41"
        # pH is required (clearing it on the way is refused too) and 9.9 is beyond the accepted
        # range: refused.  (Na+ would not do: emptying it on the way is a valid bare gas.)
        await replace_value(pilot, "ph", "9.9")
        assert app.sitting.entries[0].data["ph"] == "7.41"
        assert app.screen.query_one(ReadingPane).stale


async def test_compare_shows_two_panels_side_by_side_with_their_differences():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await keep_two(pilot)
        await pilot.press("f8")
        await pilot.pause()
        assert isinstance(app.screen, CompareScreen)
        table = app.screen.query_one(CompareTable)
        rows = {str(table.get_row_at(i)[0]): [str(c) for c in table.get_row_at(i)[1:]]
                for i in range(table.row_count)}
        assert rows["pH"] == ["7.25", "7.33", "+0.08", ""]  # pH has no unit to show
        # typed "31.0" (tui_helpers.PANELS): shown as reported, trailing zero included
        assert rows["HCO3-"] == ["25.7", "31.0", "+5.3", "mmol/L"]
        assert rows["consistency"] == ["consistent", "consistent", "same", ""]
        words = str(app.screen.query_one("#compare-processes").render())
        assert "A processes: respiratory acidosis (acute, primary)" in words
        assert "B processes: respiratory acidosis (chronic, primary)" in words
        await pilot.press("escape")
        assert not isinstance(app.screen, CompareScreen)


async def test_compare_shows_ph_to_two_decimals_as_reported():
    """7.40 and 7.30, not 7.4 and 7.3 (pH is reported to two decimals at least:
    chemistry.PH_MIN_DECIMALS), and their difference to two decimals."""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, ("7.40", "40", "24.2", "140", "104"))
        await pilot.press("f5", "ctrl+n")
        await key_in(pilot, ("7.30", "40", "19.2", "140", "104"))
        await pilot.press("f5")
        await pilot.pause()
        await pilot.press("f8")
        await pilot.pause()
        table = app.screen.query_one(CompareTable)
        rows = {str(table.get_row_at(i)[0]): [str(c) for c in table.get_row_at(i)[1:]]
                for i in range(table.row_count)}
        assert rows["pH"] == ["7.40", "7.30", "-0.10", ""]


async def test_compare_needs_two_panels_and_says_so():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])
        await pilot.press("f5", "f8")
        await pilot.pause()
        assert not isinstance(app.screen, CompareScreen)
        assert "two kept panels" in str(app.screen.query_one("#status").render())


async def test_the_series_list_opens_and_removes_panels():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await keep_two(pilot)
        await pilot.press("f9")
        await pilot.pause()
        assert isinstance(app.screen, SeriesScreen)
        table = app.screen.query_one(SeriesTable)
        assert table.row_count == 2
        assert str(table.get_row_at(0)[-1]) == "respiratory acidosis (acute, primary)"
        await pilot.press("enter")  # the cursor starts on the first panel
        await pilot.pause()
        assert app.sitting.current == 0
        assert app.screen.query_one("#hco3", Input).value == "25.7"
        await pilot.press("f9", "delete")
        await pilot.pause()
        assert len(app.sitting.entries) == 1
        assert app.sitting.current is None


async def save_as(pilot, kind_steps: int, path) -> None:
    """Ctrl+S, step the kind with the right arrow, type the path, Enter."""
    await pilot.press("ctrl+s")
    await pilot.pause()
    for _ in range(kind_steps):
        await pilot.press("right")
    await pilot.press("tab", "ctrl+u", *str(path), "enter")
    await pilot.pause()


async def test_saving_the_series_and_loading_it_back_gives_the_same_readings(tmp_path,
                                                                          monkeypatch):
    monkeypatch.chdir(tmp_path)  # a short relative name to type
    path = tmp_path / "s.csv"
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await keep_two(pilot)
        await pilot.press("f6")  # open the second kept panel
        await replace_value(pilot, "pco2", "8")  # 8 kPa = 60.0 mm[Hg]
        await pilot.press("f2", "r")  # reinterpret: the second panel's pCO2 is read in kPa
        await pilot.pause()
        assert app.sitting.entries[1].data["pco2_unit"] == "kPa"
        before = [acidbase.interpret(e.panel()) for e in app.sitting.entries]
        await save_as(pilot, 2, "s.csv")  # text -> markdown -> csv
        assert "Saved 2 panels" in str(app.screen.query_one("#status").render())

    with path.open(newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert tuple(rows[0]) == COLUMNS
    # canonical unit: 8 kPa x 7.50062 = 60.005 mm[Hg] (UCUM: 1 mm[Hg] = 0.133322 kPa)
    assert float(rows[1]["pco2"]) == pytest.approx(60.005, abs=0.001)

    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("ctrl+o")
        await pilot.pause()
        await pilot.press("ctrl+u", *"s.csv", "enter")
        await pilot.pause()
        assert len(app.sitting.entries) == 2 and app.sitting.current == 0
        after = [acidbase.interpret(e.panel()) for e in app.sitting.entries]
        assert [a.disorders for a in after] == [b.disorders for b in before]
        assert [a.codes() for a in after] == [b.codes() for b in before]
        for a, b in zip(after, before):
            for key, value in b.derived.items():
                assert a.derived[key] == pytest.approx(value, rel=1e-12) if value is not None \
                    else a.derived[key] is None
        assert processes_line(app) == "Processes: respiratory acidosis (acute, primary)"


async def key_in_labelled(pilot) -> None:
    """The mixed panel with pCO2 in kPa, and the patient, sample and time filled in."""
    await key_in(pilot, PANELS["mixed"])
    await replace_value(pilot, "pco2", "5.33")  # 5.33 kPa = 40.0 mm[Hg] (UCUM factor)
    await pilot.press("f2")  # refused as mmHg: F2 reads the typed number in kPa, unasked
    for name, text in (("collected_at", "2026-11-30T21:40"), ("patient_id", "P-0042"),
                       ("sample_id", "S 17/a")):
        await replace_value(pilot, name, text)


@pytest.mark.parametrize(("steps", "markdown"), [(0, False), (1, True)])
async def test_the_report_for_the_chart_says_whose_when_and_with_what(tmp_path, monkeypatch,
                                                                      steps, markdown):
    monkeypatch.chdir(tmp_path)
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in_labelled(pilot)
        reading = app.screen.query_one(ReadingPane).reading
        await save_as(pilot, steps, "r")
    text = (tmp_path / "r").read_text(encoding="utf-8")
    assert all(len(line) <= 80 for line in text.splitlines() if not line.startswith("|"))
    flat = " ".join(text.split())
    for words in ("P-0042", "S 17/a", "2026-11-30T21:40", f"acidbase {acidbase.__version__}",
                  "anion_gap_high = 12.0", "pCO2 5.33 kPa", "pH 7.20 [pH]", "Na+ 140 mmol/L"):
        assert words in flat, words
    read_at = re.search(r"Read at:\W* (\S+)", text).group(1)
    assert datetime.fromisoformat(read_at).tzinfo is not None
    # the reading is the library's: every finding, and the full caution
    for f in reading.findings:
        assert f.code in flat
    assert " ".join(acidbase.CAUTION.split()) in flat.replace("> ", "")
    assert reading.inputs["pco2"]["value"] == pytest.approx(40.0, abs=0.05)


async def test_a_report_is_not_saved_while_the_form_holds_a_refused_value(tmp_path,
                                                                        monkeypatch):
    monkeypatch.chdir(tmp_path)
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["mixed"])
        await replace_value(pilot, "na", "20")  # below the accepted range: refused
        await save_as(pilot, 0, "r")
        # the dialog stays open and says why (a failed save never closes it)
        assert type(app.screen).__name__ == "SaveScreen"
        assert "Not saved" in app.screen.problem
    assert not (tmp_path / "r").exists()


async def test_the_file_name_offered_carries_the_sample_id_and_the_time():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in_labelled(pilot)
        await pilot.press("ctrl+s")
        await pilot.pause()
        name = app.screen.query_one("#path").value
        assert re.fullmatch(r"acidbase-S-17-a-\d{8}-\d{4}\.txt", name), name


async def test_an_existing_file_is_replaced_only_after_a_yes(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "r").write_text("kept\n", encoding="utf-8")
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["mixed"])
        await save_as(pilot, 0, "r")
        assert type(app.screen).__name__ == "ConfirmScreen"
        await pilot.press("n")
        await pilot.pause()
        assert (tmp_path / "r").read_text(encoding="utf-8") == "kept\n"
        await pilot.press("enter")  # still in the save dialog: ask again, say yes
        await pilot.pause()
        await pilot.press("y")
        await pilot.pause()
    assert (tmp_path / "r").read_text(encoding="utf-8").startswith("acidbase reading")


async def test_quitting_with_unsaved_kept_panels_asks_first():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])
        await pilot.press("f5", "ctrl+q")
        await pilot.pause()
        assert type(app.screen).__name__ == "ConfirmScreen"
        # one panel: "1 panel ... is ... saves it" (it said "1 kept panels are not saved")
        assert "1 panel kept in this sitting is not saved (Ctrl+S, then CSV, saves it)" in str(
            app.screen.query_one("#question").render())
        await pilot.press("escape")
        await pilot.pause()
        assert app.is_running and app.focused.id == "cl"
        await pilot.press("ctrl+q", "y")
        await pilot.pause()
        assert not app.is_running


async def test_quitting_without_kept_panels_or_after_saving_them_asks_nothing(tmp_path,
                                                                             monkeypatch):
    monkeypatch.chdir(tmp_path)
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])
        await pilot.press("f5")
        await save_as(pilot, 2, "s.csv")
        await pilot.press("ctrl+q")
        await pilot.pause()
        assert not app.is_running


async def test_ctrl_z_brings_back_a_form_cleared_by_ctrl_n():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["chronic respiratory acidosis"])
        before = app.screen.form.data()
        await pilot.press("ctrl+n")
        await pilot.pause()
        assert app.screen.query_one("#ph", Input).value == ""
        await pilot.press("ctrl+z")
        await pilot.pause()
        assert app.screen.form.data() == before
        assert processes_line(app) == "Processes: respiratory acidosis (chronic, primary)"


async def test_ctrl_z_puts_back_a_panel_removed_from_the_series():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await keep_two(pilot)
        kept = [dict(e.data) for e in app.sitting.entries]
        await pilot.press("f9", "delete")
        await pilot.pause()
        assert len(app.sitting.entries) == 1
        await pilot.press("ctrl+z")
        await pilot.pause()
        assert [e.data for e in app.sitting.entries] == kept
        assert app.screen.query_one(SeriesTable).row_count == 2


async def test_the_demo_opens_with_the_demo_panels_kept():
    app = make_app(demo=True)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert len(app.sitting.entries) == len(DEMO_PANELS)
        assert app.sitting.current == 0
        assert app.screen.query_one("#ph", Input).value == str(DEMO_PANELS[0]["ph"])


# -- the file, without the app ---------------------------------------------------


def test_the_file_columns_are_the_field_names_then_the_choices_and_labels():
    assert COLUMNS == (*(s.name for s in NUMERIC), "sample_type", "hco3_source", "pregnancy",
                       *TEXT_FIELDS)


def test_a_refused_entry_is_written_as_keyed_and_read_back_refused(tmp_path):
    refused = Entry({"ph": "7.40", "pco2": "5.3", "hco3": "24", "na": "140", "cl": "104"})
    written, left_out = write_csv(tmp_path / "f.csv", [refused])
    assert (written, left_out) == (1, [])
    entries, _ = read_csv(tmp_path / "f.csv")
    assert entries[0].panel() is None
    assert entries[0].problems() == refused.problems()


def test_a_refused_entry_in_another_unit_is_left_out_and_named(tmp_path):
    entry = Entry({"ph": "9", "pco2": "5.3", "pco2_unit": "kPa", "hco3": "24", "na": "140",
                   "cl": "104"})
    assert write_csv(tmp_path / "f.csv", [entry]) == (0, [1])


def test_columns_that_are_not_ours_are_named_and_not_read(tmp_path):
    path = tmp_path / "f.csv"
    path.write_text("ph,pco2,hco3,na,cl,ward\n7.40,40,24.2,140,105,B2\n", encoding="utf-8")
    entries, notes = read_csv(path)
    assert notes == ["columns not read: ward"]
    assert entries[0].panel() is not None


async def test_ctrl_y_copies_the_report_for_the_chart():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in_labelled(pilot)
        await pilot.press("ctrl+y")
        await pilot.pause()
        copied = app.clipboard
        assert copied.startswith("acidbase reading for the chart")
        assert "P-0042" in copied and "pCO2 5.33 kPa" in copied
        assert " ".join(acidbase.CAUTION.split()) in " ".join(copied.split())


def _fail_after_one_row(monkeypatch) -> None:
    """The disk fills up after the header and one row of the series are written."""

    def writerows(self, rows):
        rows = list(rows)
        self.writerow(rows[0])
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(csv.DictWriter, "writerows", writerows)


def test_a_failure_mid_write_leaves_the_old_series_file_whole_and_no_part_file(
        tmp_path, monkeypatch):
    """The series file is staged (acidbase.files.outputs) and renamed only when whole."""
    target = tmp_path / "series.csv"
    target.write_text("ph,pco2,hco3\n7.40,40,24.2\n", encoding="utf-8")
    before = target.read_bytes()
    entries = [Entry(dict(zip(("ph", "pco2", "hco3", "na", "cl"), PANELS[name])))
               for name in ("normal", "mixed")]
    _fail_after_one_row(monkeypatch)
    with pytest.raises(OSError):
        write_csv(target, entries)
    assert target.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["series.csv"]


async def test_the_app_says_a_series_was_not_saved_when_the_write_fails(tmp_path, monkeypatch):
    target = tmp_path / "series.csv"
    target.write_text("old\n", encoding="utf-8")
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await keep_two(pilot)
        _fail_after_one_row(monkeypatch)
        message = app.save("csv", str(target), None, replace=True)
    assert message.startswith("Not saved:") and "No space left" in message
    assert target.read_text(encoding="utf-8") == "old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["series.csv"]
    assert app.sitting.unsaved  # still to be saved


def test_a_report_file_is_written_whole_through_a_staged_file(tmp_path, monkeypatch):
    """The report for the chart is staged too: a failed write leaves no part file."""
    from acidbase.files import outputs
    from tui.app import write_text

    target = tmp_path / "report.txt"
    write_text(target, "first\n")
    assert target.read_text(encoding="utf-8") == "first\n"

    def broken(self):
        raise OSError(5, "Input/output error")

    monkeypatch.setattr(outputs.Staged, "finish", broken)
    with pytest.raises(OSError):
        write_text(target, "second\n")
    assert target.read_text(encoding="utf-8") == "first\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report.txt"]


def test_pregnancy_is_written_and_read_back(tmp_path):
    """The answer word goes to the file as the vocabulary spells it (what batch reads)."""
    entry = Entry({"ph": "7.40", "pco2": "30", "hco3": "18.5", "pregnancy": "third_trimester"})
    write_csv(tmp_path / "f.csv", [entry])
    row = next(csv.DictReader((tmp_path / "f.csv").open(encoding="utf-8")))
    assert row["pregnancy"] == "third_trimester"
    entries, _ = read_csv(tmp_path / "f.csv")
    assert entries[0].panel().pregnancy == "third_trimester"


def test_a_series_file_with_a_field_header_twice_is_refused_not_half_read(tmp_path):
    """``ph,ph``: the app's loader stops as ``acidbase batch`` does, never keeping the
    first pH and dropping the second column unread."""
    from tui.sitting import SittingFileError

    path = tmp_path / "f.csv"
    path.write_text("ph,pco2,hco3,ph\n7.40,40,24,\n,40,24,7.30\n")
    with pytest.raises(SittingFileError, match="'ph' and 'ph \\(2\\)' both map to ph"):
        read_csv(path)
