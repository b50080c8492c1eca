"""Snapshots of the main views at 80x24, with colour and without (NO_COLOR).

Kept few on purpose: they break on any rendering change of Textual.  Update
with ``python -m pytest tests/tui --snapshot-update`` and look at each SVG.
"""

from __future__ import annotations

from textual.widgets import Input

from tui.app import make_app

#: An acute respiratory acidosis, keyed from pH to Cl- (see tui_helpers.PANELS).
KEYS = ("7.25", "60", "25.7", "140", "104")


def _typing(*extra: str):
    async def run_before(pilot) -> None:
        await pilot.pause()  # the form is mounted and pH has the focus
        for inp in pilot.app.screen.query(Input):
            inp.cursor_blink = False
        for i, value in enumerate(KEYS):
            if i:
                await pilot.press("tab")
            await pilot.press(*value)
        await pilot.pause()
        if extra:
            await pilot.press(*extra)
            await pilot.pause()
    return run_before


def test_entry_with_a_reading(snap_compare):
    """Form on the left with the five values; the reading on the right starts with
    'Trust: consistency consistent', each finding led by its severity word; the caution
    in four lines above the footer."""
    assert snap_compare(make_app(), run_before=_typing(), terminal_size=(80, 24))


def test_entry_stale_without_colour(snap_compare, monkeypatch):
    """NO_COLOR: pCO2 retyped as 6 is refused; its message in words beside the field
    ('refused: ...'), and the reading on the right starts 'STALE:'."""
    monkeypatch.setenv("NO_COLOR", "1")
    app = make_app()
    assert snap_compare(app, run_before=_typing("shift+tab", "shift+tab", "shift+tab",
                                                "end", "ctrl+u", "6"),
                        terminal_size=(80, 24))


def test_plane_without_colour(snap_compare, monkeypatch):
    """NO_COLOR: the bands drawn with digits 1-6, the pH lines with : . ', the panel as @
    inside band 3 (acute respiratory acidosis), and the legend in words."""
    monkeypatch.setenv("NO_COLOR", "1")
    assert snap_compare(make_app(), run_before=_typing("f4"), terminal_size=(80, 24))


def test_compare_two_kept_panels(snap_compare):
    """Two kept panels (the second with HCO3- 31 instead of 25.7, so not consistent): all
    five columns fit in 80 (label, A, B, B - A, unit); the processes of each below in words."""
    assert snap_compare(make_app(), run_before=_typing(
        "f5", "shift+tab", "shift+tab", "end", "ctrl+u", "3", "1", "f5", "f8"),
        terminal_size=(80, 24))
