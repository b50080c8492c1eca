"""Snapshots of the main views at 80x24, with colour and without (NO_COLOR).

Kept few on purpose: they break on any rendering change of Textual.  Update
with ``python -m pytest tests/tui --snapshot-update`` and look at each SVG.
"""

from __future__ import annotations

from textual.widgets import Input

from tui.app import make_app

#: An acute respiratory acidosis, keyed in form order: pH, pCO2, (pO2), HCO3-, (FiO2,
#: sample, source), Na+, (K+), Cl- (see tui_helpers.PANELS).
KEYS = ("7.25", "tab", "60", "tab", "tab", "25.7", "tab", "tab", "tab", "tab", "140",
        "tab", "tab", "104")


def _typing(*extra: str, field: str | None = None):
    async def run_before(pilot) -> None:
        await pilot.pause()  # the form is mounted and pH has the focus
        for inp in pilot.app.screen.query(Input):
            inp.cursor_blink = False
        for key in KEYS:
            await pilot.press(*([key] if key == "tab" else key))
        await pilot.pause()
        for key in extra:
            if key.startswith("#"):  # focus a field (its text is selected: typing replaces it)
                pilot.app.screen.query_one(key).focus()
                await pilot.pause()
            else:
                await pilot.press(key)
        await pilot.pause()
    return run_before


def test_entry_with_a_reading(snap_compare):
    """The form on the left, gas first (pH, pCO2, pO2, HCO3-), '>' and reversed colours (SGR 7) on Cl-;
    the reading on the right from 'Trust: consistency consistent', each finding led by its
    severity word; pinned under them the verdict line 'Trust: consistent | Processes:
    respiratory acidosis (acute, primary)', then the caution in two lines, then the keys."""
    assert snap_compare(make_app(), run_before=_typing(), terminal_size=(80, 24))


def test_entry_stale_without_colour(snap_compare, monkeypatch):
    """NO_COLOR: pCO2 retyped as 6 is refused; under it 'refused: not in 8-250 mmHg; press F2
    for kPa', the reading starts 'STALE:' and the verdict line too."""
    monkeypatch.setenv("NO_COLOR", "1")
    app = make_app()
    assert snap_compare(app, run_before=_typing("#pco2", "6"), terminal_size=(80, 24))


def test_plane_without_colour(snap_compare, monkeypatch):
    """NO_COLOR: the bands drawn with digits 1-6, the pH lines with : . ', the panel as @
    inside band 3 (acute respiratory acidosis), and the legend in words."""
    monkeypatch.setenv("NO_COLOR", "1")
    assert snap_compare(make_app(), run_before=_typing("f4"), terminal_size=(80, 24))


def test_compare_two_kept_panels(snap_compare):
    """Two kept panels (the second with HCO3- 31 instead of 25.7, so not consistent): all
    five columns fit in 80 (label, A, B, B - A, unit); the processes of each below in words."""
    assert snap_compare(make_app(), run_before=_typing(
        "f5", "#hco3", "3", "1", "f5", "f8"), terminal_size=(80, 24))
