"""Defects a tester met in the real app (80x24, 60x20, without colour), each keyed in as
a terminal delivers keys: many keys in one burst.

The panels are tests/tui/tui_helpers.py's (consistent by Henderson-Hasselbalch, CLSI C46-A2
constants); the file paths are the tests' own.
"""

from __future__ import annotations

import csv

from textual.widgets import Input
from tui_helpers import PANELS, key_in

from tui.app import make_app
from tui.screens.files import SaveScreen
from tui.widgets.form import ChoiceField


async def _keep_two(pilot) -> None:
    await key_in(pilot, PANELS["acute respiratory acidosis"])
    await pilot.press("f5", "ctrl+n")
    await key_in(pilot, PANELS["chronic respiratory acidosis"])
    await pilot.press("f5")
    await pilot.pause()


def _status(app) -> str:
    return str(app.screen.query_one("#status").render())


# -- 3. a failed save keeps the dialog, what was typed, and says what failed -------------

async def test_a_failed_series_save_keeps_the_dialog_and_the_typed_path_and_says_why(tmp_path):
    missing = tmp_path / "no-such-folder" / "series.csv"
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await _keep_two(pilot)
        # one burst: open the dialog, choose CSV, type the path, Enter
        await pilot.press("ctrl+s", "right", "right", "tab", "ctrl+u", *str(missing), "enter")
        await pilot.pause()
        assert isinstance(app.screen, SaveScreen), "the dialog closed on a failed save"
        dialog = app.screen
        assert dialog.query_one("#path", Input).value == str(missing)
        assert dialog.query_one(ChoiceField).value == "csv"
        problem = dialog.problem
        assert str(missing) in problem and "does not exist" in problem, problem
        assert dialog.query_one("#save-problem").display
        assert app.focused is dialog.query_one("#path", Input)
        assert app.sitting.unsaved and not missing.exists()
        # corrected in place: Enter saves and the dialog closes
        good = tmp_path / "series.csv"
        await pilot.press("ctrl+u", *str(good), "enter")
        await pilot.pause()
        assert not isinstance(app.screen, SaveScreen)
        assert good.exists() and not app.sitting.unsaved
        assert f"Saved 2 panels to {good}" in _status(app)


async def test_a_series_save_that_fails_mid_write_keeps_the_dialog(tmp_path, monkeypatch):
    target = tmp_path / "series.csv"

    def full_disk(self, rows):
        raise OSError(28, "No space left on device")

    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await _keep_two(pilot)
        monkeypatch.setattr(csv.DictWriter, "writerows", full_disk)
        await pilot.press("ctrl+s", "right", "right", "tab", "ctrl+u", *str(target), "enter")
        await pilot.pause()
        assert isinstance(app.screen, SaveScreen)
        assert "No space left on device" in app.screen.problem
        assert str(target) in app.screen.problem
        assert app.screen.query_one("#path", Input).value == str(target)
        assert app.sitting.unsaved and not target.exists()
