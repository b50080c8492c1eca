"""The sitting's panels as a list: open one, remove one, compare two."""

from __future__ import annotations

from typing import TYPE_CHECKING, ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.screen import Screen
from textual.widgets import Static

import acidbase

from ..keys import after_typed_keys
from ..widgets.chrome import CautionBar, KeyLine, PlainTable, TitleLine

if TYPE_CHECKING:
    from ..app import AcidBaseApp

SHOWN = ("ph", "pco2", "hco3")


class SeriesTable(PlainTable):
    """One row per kept panel, in the order kept."""



class SeriesScreen(Screen[int | None]):
    """Returns the index of the panel to open, or None."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("enter", "open", "open", tooltip="Open the highlighted panel in the entry "
                "form.", id="series-open", priority=True),
        Binding("f8", "compare", "compare", tooltip="Compare the highlighted panel with the "
                "one before it.", id="series-compare", priority=True),
        Binding("delete", "remove", "remove", tooltip="Remove the highlighted panel from the "
                "series (Ctrl+Z puts it back).", id="series-remove", priority=True),
        Binding("ctrl+z", "undo", "undo", tooltip="Put back the panel removed last.",
                id="series-undo", priority=True),
        Binding("escape,f9", "back", "back", tooltip="Back to the entry.", id="series-back", priority=True),
    ]

    app: AcidBaseApp

    def __init__(self) -> None:
        super().__init__()
        self._removed: list[tuple[int, object]] = []

    def compose(self) -> ComposeResult:
        yield TitleLine("acidbase - series - the panels kept in this sitting")
        yield SeriesTable(id="series", cursor_type="row", zebra_stripes=True)
        yield Static("", id="series-note", markup=False)
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def on_mount(self) -> None:
        table = self.query_one(SeriesTable)
        table.add_columns("#", "collected", "patient", "sample",
                          *(acidbase.fields.BY_NAME[n].title for n in SHOWN), "reading")
        self.fill()
        table.focus()

    def fill(self) -> None:
        table = self.query_one(SeriesTable)
        table.clear()
        s = self.app.sitting
        for i, entry in enumerate(s.entries):
            panel = entry.panel()
            if panel is None:
                values = [str(entry.data.get(n, "")) for n in SHOWN]
                reading = "refused: " + "; ".join(entry.problems())
            else:
                canonical = panel.canonical()
                values = [f"{canonical[n]:.4g}" for n in SHOWN]
                it = acidbase.interpret(panel, self.app.settings)
                reading = "; ".join(d.label() for d in it.disorders) or "none"
                if it.consistency and it.consistency.status != "consistent":
                    reading = f"{it.consistency.status}; {reading}"
            mark = ">" if i == s.current else " "
            table.add_row(f"{mark}{i + 1}", entry.data.get("collected_at", ""),
                          entry.data.get("patient_id", ""), entry.data.get("sample_id", ""),
                          *values, reading, key=str(i))
        if s.current is not None and s.entries:
            table.move_cursor(row=s.current)
        self.query_one("#series-note", Static).update(
            "The series is empty: F5 on the entry screen keeps the current panel."
            if not s.entries else "> marks the panel the entry form shows.")

    def _row(self) -> int | None:
        table = self.query_one(SeriesTable)
        return table.cursor_row if table.row_count else None

    @after_typed_keys
    def action_open(self) -> None:
        self.dismiss(self._row())

    def action_back(self) -> None:
        self.dismiss(None)

    @after_typed_keys
    def action_remove(self) -> None:
        row = self._row()
        if row is not None:
            self._removed.append((row, self.app.sitting.remove(row)))
            self.fill()
            self.query_one("#series-note", Static).update(
                f"Panel {row + 1} removed: Ctrl+Z puts it back.")

    def action_undo(self) -> None:
        if not self._removed:
            self.query_one("#series-note", Static).update("Nothing to put back.")
            return
        row, entry = self._removed.pop()
        self.app.sitting.insert(row, entry)  # type: ignore[arg-type]
        self.fill()
        self.query_one(SeriesTable).move_cursor(row=row)
        self.query_one("#series-note", Static).update(f"Panel {row + 1} is back.")

    @after_typed_keys
    def action_compare(self) -> None:
        from .compare import CompareScreen

        row = self._row()
        if row is None or len(self.app.sitting.entries) < 2:
            self.query_one("#series-note", Static).update("Compare needs two kept panels.")
            return
        self.app.push_screen(CompareScreen(row - 1 if row > 0 else 1, row))
