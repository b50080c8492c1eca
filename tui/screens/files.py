"""Saving and loading: the reading as a report, the series as a CSV file."""

from __future__ import annotations

from typing import ClassVar

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label

from ..widgets.chrome import CautionBar, KeyLine
from ..widgets.form import ChoiceField

#: What can be saved, and the file name offered for it.
KINDS: dict[str, str] = {
    "text": "acidbase-reading.txt",
    "markdown": "acidbase-reading.md",
    "csv": "acidbase-series.csv",
}
KIND_WORDS = {
    "text": "the reading as a plain-text report",
    "markdown": "the reading as a Markdown report",
    "csv": "the series as CSV (the columns in docs/tui.md)",
}


class PathInput(Input):
    """Where to write or read the file."""


class SaveScreen(ModalScreen[tuple[str, str] | None]):
    """Ask what to save and where; returns (kind, path) or None."""

    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "cancel", "cancel", tooltip="Close without saving.",
                        id="save-cancel")]

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-area"), Vertical(classes="dialog"):
            yield Label("Save", classes="dialog-title")
            yield ChoiceField("kind", "What", tuple(KINDS), "text")
            yield Label(KIND_WORDS["text"], id="kind-words")
            yield Label("File (Enter saves; an existing file is replaced):")
            yield PathInput(KINDS["text"], id="path")
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def on_mount(self) -> None:
        self.query_one(ChoiceField).focus()

    @on(ChoiceField.Changed)
    def kind_changed(self, event: ChoiceField.Changed) -> None:
        kind = event.field.value
        path = self.query_one(PathInput)
        if path.value in KINDS.values():
            path.value = KINDS[kind]
        self.query_one("#kind-words", Label).update(KIND_WORDS[kind])

    @on(Input.Submitted, "#path")
    def submit(self) -> None:
        path = self.query_one(PathInput).value.strip()
        if path:
            self.dismiss((self.query_one(ChoiceField).value, path))

    def action_cancel(self) -> None:
        self.dismiss(None)


class LoadScreen(ModalScreen[str | None]):
    """Ask for a series file; returns its path or None."""

    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "cancel", "cancel", tooltip="Close without loading.",
                        id="load-cancel")]

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-area"), Vertical(classes="dialog"):
            yield Label("Load a series (CSV with the columns in docs/tui.md)",
                        classes="dialog-title")
            yield Label("File (Enter loads; its panels are added after those kept):")
            yield PathInput(KINDS["csv"], id="path")
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def on_mount(self) -> None:
        self.query_one(PathInput).focus()

    @on(Input.Submitted, "#path")
    def submit(self) -> None:
        path = self.query_one(PathInput).value.strip()
        if path:
            self.dismiss(path)

    def action_cancel(self) -> None:
        self.dismiss(None)
