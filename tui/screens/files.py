"""Saving and loading: the reading as a report, the series as a CSV file."""

from __future__ import annotations

from pathlib import Path
from typing import ClassVar

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label

from ..keys import OwnKeys
from ..widgets.chrome import CautionBar, KeyLine
from ..widgets.form import ChoiceField

#: What can be saved, and a file name offered for it when none is given.
KINDS: dict[str, str] = {
    "text": "acidbase-reading.txt",
    "markdown": "acidbase-reading.md",
    "csv": "acidbase-series.csv",
}
KIND_WORDS = {
    "text": "the report for the chart, plain text",
    "markdown": "the report for the chart, Markdown",
    "csv": "the series as CSV (the columns in docs/tui.md)",
}


class PathInput(OwnKeys, Input):
    """Where to write or read the file."""


class SaveScreen(ModalScreen[tuple[str, str, bool] | None]):
    """Ask what to save and where; returns (kind, path, replace) or None.

    An existing file is replaced only after a yes to the question that names it.
    """

    def __init__(self, names: dict[str, str] | None = None) -> None:
        super().__init__()
        self.names = {**KINDS, **(names or {})}

    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "cancel", "cancel", tooltip="Close without saving.",
                        id="save-cancel", priority=True)]

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-area"), Vertical(classes="dialog"):
            yield Label("Save", classes="dialog-title")
            yield ChoiceField("kind", "What", tuple(KINDS), "text")
            yield Label(KIND_WORDS["text"], id="kind-words")
            yield Label("File (Enter saves; an existing file is not replaced unasked):")
            yield PathInput(self.names["text"], id="path")
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def on_mount(self) -> None:
        self.query_one(ChoiceField).focus()

    @on(ChoiceField.Changed)
    def kind_changed(self, event: ChoiceField.Changed) -> None:
        kind = event.field.value
        path = self.query_one(PathInput)
        if path.value in self.names.values():
            path.value = self.names[kind]
        self.query_one("#kind-words", Label).update(KIND_WORDS[kind])

    @on(Input.Submitted, "#path")
    def submit(self) -> None:
        path = self.query_one(PathInput).value.strip()
        if not path:
            return
        kind = self.query_one(ChoiceField).value
        if not Path(path).expanduser().exists():
            self.dismiss((kind, path, False))
            return
        from .confirm import ConfirmScreen

        def answered(yes: bool | None) -> None:
            if yes:
                self.dismiss((kind, path, True))

        self.app.push_screen(ConfirmScreen(f"{path} exists. Replace it?", "replace it",
                                           "keep it and choose another name"), answered)

    def action_cancel(self) -> None:
        self.dismiss(None)


class LoadScreen(ModalScreen[str | None]):
    """Ask for a series file; returns its path or None."""

    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "cancel", "cancel", tooltip="Close without loading.",
                        id="load-cancel", priority=True)]

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
