"""Small questions asked before anything is lost or replaced, and the unit question."""

from __future__ import annotations

from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Label

from ..widgets.chrome import CautionBar, KeyLine


class ConfirmScreen(ModalScreen[bool]):
    """A yes-or-no question; Y answers yes, N or Esc no (Enter answers nothing)."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("y", "answer(True)", "yes", tooltip="Yes.", id="confirm-yes", priority=True),
        Binding("n,escape", "answer(False)", "no", tooltip="No: back, nothing changed.",
                id="confirm-no", priority=True),
    ]

    def __init__(self, question: str, yes: str, no: str = "go back") -> None:
        super().__init__()
        self.question = question
        self.yes = yes
        self.no = no

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-area"), Vertical(classes="dialog"):
            yield Label(self.question, classes="dialog-title", markup=False, id="question")
            yield Label(f"Y  {self.yes}", markup=False)
            yield Label(f"N  {self.no} (Esc too)", markup=False)
        # the caution on every screen, as the save and load dialogs carry it: the dialog's
        # area covers the screen under it
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)


class UnitScreen(ModalScreen[str | None]):
    """Switching the unit of a filled value: convert it, or read the number in the new unit.

    Shows both results before either is chosen; returns "convert", "reinterpret" or None.
    """

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("c", "answer('convert')", "convert", tooltip="Convert: the same quantity "
                "in the new unit.", id="unit-convert", priority=True),
        Binding("r", "answer('reinterpret')", "reinterpret", tooltip="Reinterpret: the "
                "number as typed, read in the new unit.", id="unit-reinterpret", priority=True),
        Binding("escape,n", "answer(None)", "keep", tooltip="Keep the value and unit as "
                "they are.", id="unit-keep", priority=True),
    ]

    def __init__(self, question: str, convert: str, reinterpret: str, keep: str) -> None:
        super().__init__()
        self.lines = (question, convert, reinterpret, keep)

    def compose(self) -> ComposeResult:
        question, convert, reinterpret, keep = self.lines
        with Vertical(classes="dialog-area"), Vertical(classes="dialog"):
            yield Label(question, classes="dialog-title", markup=False, id="question")
            yield Label(f"C  convert: {convert}", markup=False, id="convert")
            yield Label(f"R  reinterpret: {reinterpret}", markup=False, id="reinterpret")
            yield Label(f"Esc  keep {keep}", markup=False)
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def action_answer(self, answer: str | None) -> None:
        self.dismiss(answer)
