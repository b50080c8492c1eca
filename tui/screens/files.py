"""Saving and loading: the reading as a report, the series as a CSV file."""

from __future__ import annotations

from collections.abc import Callable
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


#: Saves ``kind`` to ``path`` (replacing an existing file when the third argument is True);
#: returns whether the file was written, and what to tell the user.
Saver = Callable[[str, str, bool], tuple[bool, str]]


class SaveScreen(ModalScreen[str | None]):
    """Ask what to save and where, and save it; returns what to tell the user, or None
    when closed without saving.

    The dialog closes only when the file was written: a failure (the folder, the
    permission, the disk, a report refused) is said in the dialog, with the kind and
    the path as typed, so the user corrects the path or presses Esc.  An existing file
    is replaced only after a yes to the question that names it.
    """

    def __init__(self, names: dict[str, str] | None = None, save: Saver | None = None) -> None:
        super().__init__()
        self.names = {**KINDS, **(names or {})}
        self.save = save

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "cancel", "cancel", tooltip="Close without saving.",
                id="save-cancel", priority=True),
        # Priority, as on the entry screen: in a burst ("Right Tab path Enter") the focus
        # moves when Tab is taken, so the path typed after it lands in the path box.
        Binding("tab", "next_box", "next", tooltip="Next: the kind, then the file.",
                id="save-next", show=False, priority=True),
        Binding("shift+tab", "previous_box", "previous", tooltip="Back to the kind.",
                id="save-previous", show=False, priority=True),
    ]

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-area"), Vertical(classes="dialog"):
            yield Label("Save", classes="dialog-title")
            yield ChoiceField("kind", "What", tuple(KINDS), "text")
            yield Label(KIND_WORDS["text"], id="kind-words")
            yield Label("File (Enter saves; an existing file is not replaced unasked):")
            yield PathInput(self.names["text"], id="path")
            yield Label("", id="save-problem", markup=False, classes="-empty")
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def on_mount(self) -> None:
        self.query_one(ChoiceField).focus()

    def action_next_box(self) -> None:
        self.focus_next()

    def action_previous_box(self) -> None:
        self.focus_previous()

    @property
    def problem(self) -> str:
        """What the last failed save said ("" when none)."""
        return str(self.query_one("#save-problem", Label).content)

    def _say(self, text: str) -> None:
        label = self.query_one("#save-problem", Label)
        label.update(text)
        label.set_class(not text, "-empty")

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
            self._write(kind, path, False)
            return
        from .confirm import ConfirmScreen

        def answered(yes: bool | None) -> None:
            if yes:
                self._write(kind, path, True)

        self.app.push_screen(ConfirmScreen(f"{path} exists. Replace it?", "replace it",
                                           "keep it and choose another name"), answered)

    def _write(self, kind: str, path: str, replace: bool) -> None:
        """Save; close only when written, else say why and stay (nothing typed is lost)."""
        if self.save is None:  # pragma: no cover - every caller passes its saver
            self.dismiss(None)
            return
        done, message = self.save(kind, path, replace)
        if done:
            self.dismiss(message)
            return
        self._say(message)
        self.query_one(PathInput).focus()

    def action_cancel(self) -> None:
        self.dismiss(None)


#: Loads the series file at a path; returns what to tell the user and the index of the
#: first panel added (None when nothing was added: the file is missing, unreadable or empty).
Loader = Callable[[str], tuple[str, int | None]]


class LoadScreen(ModalScreen[tuple[str, int] | None]):
    """Ask for a series file and load it; returns (what to tell the user, the index of
    the first panel added), or None when closed without loading.

    As the save dialog: it closes only when panels were added.  A file that is
    missing, unreadable or holds no panels is said in the dialog, with the path as
    typed, so the user corrects it or presses Esc.
    """

    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "cancel", "cancel", tooltip="Close without loading.",
                        id="load-cancel", priority=True)]

    def __init__(self, load: Loader | None = None) -> None:
        super().__init__()
        self.load = load

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-area"), Vertical(classes="dialog"):
            yield Label("Load a series (CSV with the columns in docs/tui.md)",
                        classes="dialog-title")
            yield Label("File (Enter loads; its panels are added after those kept):")
            yield PathInput(KINDS["csv"], id="path")
            yield Label("", id="load-problem", markup=False, classes="-empty")
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def on_mount(self) -> None:
        self.query_one(PathInput).focus()

    @property
    def problem(self) -> str:
        """What the last failed load said ("" when none)."""
        return str(self.query_one("#load-problem", Label).content)

    @on(Input.Submitted, "#path")
    def submit(self) -> None:
        path = self.query_one(PathInput).value.strip()
        if not path or self.load is None:
            return
        message, first = self.load(path)
        if first is not None:
            self.dismiss((message, first))
            return
        label = self.query_one("#load-problem", Label)  # stay: nothing typed is lost
        label.update(message)
        label.set_class(False, "-empty")
        self.query_one(PathInput).focus()

    def action_cancel(self) -> None:
        self.dismiss(None)
