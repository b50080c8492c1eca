"""Every key, read from the bindings themselves so the list cannot drift."""

from __future__ import annotations

import textwrap
from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import VerticalScroll
from textual.screen import Screen
from textual.widgets import Static

import acidbase

from ..widgets.chrome import CautionBar, KeyLine, TitleLine, key_words
from ..widgets.form import ChoiceField
from .compare import CompareScreen
from .confirm import ConfirmScreen, UnitScreen
from .entry import EntryScreen
from .files import LoadScreen, SaveScreen
from .finding import FindingScreen
from .plane import PlaneScreen
from .series import SeriesScreen
from .store import StoreScreen

#: Keys that Textual's own widgets give (not bindings of ours), per place.
MOVING: dict[str, list[tuple[str, str]]] = {
    "Entry": [
        ("Enter", "in the reading: open the highlighted finding"),
        ("Up / Down", "in the reading: move between findings"),
    ],
    "Series": [("Up / Down", "move between panels")],
    "Compare": [("Up / Down", "move between rows")],
    "History store": [("Up / Down", "move between stored panels")],
    "Finding": [("Up / Down / Page keys", "scroll")],
}

PLACES: tuple[tuple[str, list[Binding]], ...] = (
    (("Entry (the form: pH, pCO2, pO2, HCO3-, FiO2, sample, HCO3- source, electrolytes, "
      "more values, time and ids)"), EntryScreen.BINDINGS),
    ("Sample, HCO3- source and other answer fields", ChoiceField.BINDINGS),
    ("Finding", FindingScreen.BINDINGS),
    ("Plane", PlaneScreen.BINDINGS),
    ("Series", SeriesScreen.BINDINGS),
    ("Compare", CompareScreen.BINDINGS),
    ("History store (acidbase tui --history PATH; Ctrl+T)", StoreScreen.BINDINGS),
    ("Save", SaveScreen.BINDINGS),
    ("Load", LoadScreen.BINDINGS),
    ("Questions (quit, replace a file)", ConfirmScreen.BINDINGS),
    ("Switching the unit of a filled value", UnitScreen.BINDINGS),
)


def _row(keys: str, text: str, width: int) -> list[str]:
    return textwrap.wrap(f"  {keys:<16} {text}", width=width, subsequent_indent=" " * 19)


def help_lines(everywhere: list[Binding], width: int = 76) -> list[str]:
    """The key list: everywhere first, then each place."""
    lines = ["Everywhere"]
    for b in everywhere:
        lines += _row(key_words(b.key), b.tooltip or b.description, width)
    for place, bindings in PLACES:
        lines += ["", *textwrap.wrap(place, width=width)]
        for b in bindings:
            lines += _row(key_words(b.key), b.tooltip or b.description, width)
        for keys, text in MOVING.get(place.split(" (")[0], []):
            lines += _row(keys, text, width)
    return lines


class HelpScreen(Screen[None]):
    """Every key of the app."""

    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape,f1", "app.pop_screen", "back", tooltip="Close the help.",
                        id="help-back", priority=True)]

    def compose(self) -> ComposeResult:
        yield TitleLine("acidbase - help - the caution and every key")
        with VerticalScroll(id="help"):
            yield Static(acidbase.CAUTION, markup=False, id="full-caution",
                         classes="finding-title")
            yield Static("\n".join(help_lines(self.app.BINDINGS)), markup=False, id="help-text")
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def on_mount(self) -> None:
        self.query_one("#help").focus()
