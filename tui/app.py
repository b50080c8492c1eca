"""The keyboard-only terminal app: key in a panel and see, as you type, what it shows.

A surface over the library: it builds a panel, calls ``acidbase.interpret`` and
shows the findings.  ``make_app`` is the one factory, used by ``acidbase tui``
and by the tests.
"""

from __future__ import annotations

from pathlib import Path
from typing import ClassVar

from textual.app import App
from textual.binding import Binding, BindingType

import acidbase
from acidbase.report import as_markdown, as_text

from .screens.entry import EntryScreen
from .sitting import Sitting, SittingFileError, demo_entries, read_csv, write_csv


class AcidBaseApp(App[None]):
    """Holds the sitting and the settings; the screens do the showing."""

    CSS_PATH = "app.tcss"
    TITLE = "acidbase"
    ENABLE_COMMAND_PALETTE = False
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("f1", "help", "help", tooltip="Show every key.", id="help", priority=True),
        Binding("ctrl+q", "quit", "quit", tooltip="Quit (the series is not saved unless you "
                "saved it).", id="quit", priority=True),
    ]

    def __init__(self, panel: acidbase.Panel | None = None, demo: bool = False,
                 settings: acidbase.Settings | None = None) -> None:
        super().__init__()
        self.settings = settings or acidbase.Settings()
        """The laboratory's settings, passed to every interpretation."""
        self.initial_panel = panel
        """A panel given on the command line, shown first."""
        self.sitting = Sitting()
        """The panels kept while the app runs."""
        self.panel: acidbase.Panel | None = None
        """The panel the form holds now, when the engine accepts it."""
        if demo:
            self.sitting.entries = demo_entries()
            self.sitting.current = 0

    def get_default_screen(self) -> EntryScreen:
        return EntryScreen()

    def action_help(self) -> None:
        from .screens.help import HelpScreen

        if not isinstance(self.screen, HelpScreen):
            self.push_screen(HelpScreen())

    # -- files -----------------------------------------------------------------
    def save(self, kind: str, path: str, reading: acidbase.Interpretation | None) -> str:
        """Write a report of ``reading`` or the series; returns what to tell the user."""
        target = Path(path).expanduser()
        try:
            if kind == "csv":
                written, left_out = write_csv(target, self.sitting.entries)
                note = (f"; left out (refused, in a unit other than the file's): "
                        f"{', '.join(map(str, left_out))}" if left_out else "")
                return f"Saved {written} panels to {target}{note}."
            if reading is None:
                return "Nothing to save yet: no reading."
            text = as_markdown(reading) if kind == "markdown" else as_text(reading)
            target.write_text(text, encoding="utf-8")
        except OSError as e:
            return f"Not saved: {e}"
        stale = " (the last accepted reading: the form holds a refused value)" \
            if self.panel is None else ""
        return f"Saved the reading to {target}{stale}."

    def load(self, path: str) -> tuple[str, int | None]:
        """Add a series file's panels; returns (message, index of the first one added)."""
        target = Path(path).expanduser()
        try:
            entries, notes = read_csv(target)
        except SittingFileError as e:
            return f"Not loaded: {e}", None
        if not entries:
            return f"{target} holds no panels.", None
        first = len(self.sitting.entries)
        self.sitting.entries.extend(entries)
        refused = sum(1 for e in entries if e.panel() is None)
        extra = [f"{refused} refused by the engine"] if refused else []
        return (f"Loaded {len(entries)} panels from {target}"
                + "".join(f"; {n}" for n in extra + notes) + "."), first


def make_app(panel: acidbase.Panel | None = None, demo: bool = False,
             settings: acidbase.Settings | None = None) -> AcidBaseApp:
    """The app, opened on ``panel`` or on the demo panels."""
    return AcidBaseApp(panel=panel, demo=demo, settings=settings)
