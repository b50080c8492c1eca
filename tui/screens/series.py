"""The sitting's panels as a list: open one, remove one, compare two."""

from __future__ import annotations

from typing import TYPE_CHECKING, ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.screen import Screen
from textual.widgets import Static

import acidbase
from acidbase.fields import BY_NAME

from ..keys import after_typed_keys
from ..labels import reported, unit_label, with_unit
from ..sitting import Entry, typed_decimal
from ..widgets.chrome import CautionBar, KeyLine, PlainTable, TitleLine
from ..words import titled_refusals

if TYPE_CHECKING:
    from ..app import AcidBaseApp

SHOWN = ("ph", "pco2", "hco3")

def shown_values(entry: Entry, panel: acidbase.Panel | None) -> list[tuple[str, str]]:
    """The series' values of an entry as (number, unit), each in the unit it was keyed in:
    an accepted panel's numbers as the reader read them, a refused one's text as typed."""
    out = []
    decimal = entry.reading_context().get("decimal", ".")
    for name in SHOWN:
        if panel is not None:
            value = getattr(panel, name)
            unit = getattr(panel, f"{name}_unit")
            out.append(("", unit) if value is None else
                       (reported(name, value, entry.data.get(name), decimal), unit))
        else:
            typed = entry.data.get(name)
            unit = entry.data.get(f"{name}_unit") or BY_NAME[name].unit
            out.append(("" if typed in (None, "") else str(typed).strip(), unit))
    return out


def unit_columns(rows: list[list[tuple[str, str]]]) -> tuple[list[str], list[list[str]]]:
    """The value columns' headings and cells: a column whose values share one unit says it
    in its heading ("pCO2 kPa"), one of mixed units beside each value ("5.3 kPa")."""
    headings, columns = [], []
    for j, name in enumerate(SHOWN):
        cells = [row[j] for row in rows]
        units = {unit for text, unit in cells if text}
        if len(units) <= 1:
            unit = next(iter(units), BY_NAME[name].unit)
            label = unit_label(unit)
            headings.append(f"{BY_NAME[name].title} {label}".strip())
            columns.append([text for text, _ in cells])
        else:
            headings.append(BY_NAME[name].title)
            columns.append([with_unit(text, unit) if text else "" for text, unit in cells])
    return headings, [list(r) for r in zip(*columns)] if rows else []


def refused_words(entry: Entry) -> str:
    """Why the engine refuses an entry, in the app's words, from its structured error."""
    error = entry.error()
    if error is None:
        return ""
    mixed = entry.context is None and typed_decimal(entry.data)[1]
    return "refused: " + "; ".join(titled_refusals(error, mixed))


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
        self._readings: list[str] = []

    def compose(self) -> ComposeResult:
        yield TitleLine("acidbase - series - the panels kept in this sitting")
        yield SeriesTable(id="series", cursor_type="row", zebra_stripes=True)
        # the highlighted panel's whole reading: the table's last column is cut at 80
        # columns and off the screen at 60
        yield Static("", id="series-reading", markup=False)
        yield Static("", id="series-note", markup=False)
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def on_mount(self) -> None:
        self.fill()
        self.query_one(SeriesTable).focus()

    def fill(self) -> None:
        table = self.query_one(SeriesTable)
        table.clear(columns=True)
        s = self.app.sitting
        values, readings = [], []
        for entry in s.entries:
            panel = entry.panel()
            values.append(shown_values(entry, panel))
            if panel is None:
                reading = refused_words(entry)
            else:
                it = acidbase.interpret(panel, self.app.settings)
                reading = "; ".join(d.label() for d in it.disorders) or "none"
                if it.consistency and it.consistency.status != "consistent":
                    reading = f"{it.consistency.status}; {reading}"
            readings.append(reading)
        self._readings = readings
        headings, cells = unit_columns(values)
        table.add_columns("#", "collected", "patient", "sample", *headings, "reading")
        for i, entry in enumerate(s.entries):
            mark = ">" if i == s.current else " "
            table.add_row(f"{mark}{i + 1}", entry.data.get("collected_at", ""),
                          entry.data.get("patient_id", ""), entry.data.get("sample_id", ""),
                          *cells[i], readings[i], key=str(i))
        if s.current is not None and s.entries:
            table.move_cursor(row=s.current)
        self._show_reading()
        self.query_one("#series-note", Static).update(
            "The series is empty: F5 on the entry screen keeps the current panel."
            if not s.entries else "> marks the panel the entry form shows.")

    def on_data_table_row_highlighted(self, event: SeriesTable.RowHighlighted) -> None:
        self._show_reading()

    def _show_reading(self) -> None:
        """The highlighted panel's reading in full, under the table."""
        row = self._row()
        text = ""
        if row is not None and row < len(self._readings):
            text = f"Panel {row + 1}: {self._readings[row]}"
        self.query_one("#series-reading", Static).update(text)

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
        # the one before it (the one after the first), the earlier as A: B - A runs forward
        self.app.push_screen(CompareScreen(row - 1, row) if row > 0 else CompareScreen(0, 1))
