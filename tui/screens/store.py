"""A patient's stored panels (``--history``): the serial window around the form's panel,
the panel's check against them, and K to keep the panel in the store (asks first)."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.screen import Screen
from textual.widgets import Static

from acidbase.fields import BY_NAME

from ..store import StoreLink, stored_number, stored_reading
from ..widgets.chrome import CautionBar, KeyLine, PlainTable, TitleLine

if TYPE_CHECKING:
    from ..app import AcidBaseApp

#: The stored values shown per panel (the store keeps these and a few more).
SHOWN = ("ph", "pco2", "hco3", "na", "k", "cl")


class StoredTable(PlainTable):
    """One row per stored panel within the window, oldest first."""


class StoreScreen(Screen[None]):
    """The stored panels of the patient on the form."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("k", "keep", "keep in store", tooltip="Keep the form's panel in the history "
                "store (asks first; needs the patient id and the collection time).",
                id="store-keep", priority=True),
        Binding("escape,ctrl+t", "back", "back", tooltip="Back to the entry.", id="store-back", priority=True),
    ]

    app: AcidBaseApp

    def __init__(self, data: dict[str, Any]) -> None:
        super().__init__()
        self.data = data
        self._rows: list[dict[str, object]] = []
        self._note = ""
        self._keeping = False
        self.patient = str(data.get("patient_id") or "").strip()

    def compose(self) -> ComposeResult:
        yield TitleLine("acidbase - history store - "
                        + (f"stored panels of patient {self.patient}" if self.patient
                           else "no patient id on the form"), id="store-title")
        yield Static("", id="store-check", markup=False)
        yield StoredTable(id="stored", cursor_type="row", zebra_stripes=True)
        yield Static("", id="store-note", markup=False)
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def on_mount(self) -> None:
        table = self.query_one(StoredTable)
        table.add_columns("collected", "sample", *(BY_NAME[n].title for n in SHOWN))
        self.fill()
        table.focus()

    def fill(self, note: str = "") -> None:
        table = self.query_one(StoredTable)
        table.clear()
        link = self.app.store
        assert link is not None
        check = link.check(self.app.panel, self.data, read=True)
        if check is None:
            head = "Key in the patient id on the form first: the store is looked up by it."
        elif isinstance(check, str):
            head = check
        else:
            if self.app.panel is None:
                head = ("The form holds a refused or missing value: not compared. "
                        f"Stored panels within {check.window_hours:g} h:")
            elif check.codes:
                head = f"This panel: FLAGGED {check.codes}: {check.detail}"
            else:
                head = f"This panel: {check.status}."
            for i, row in enumerate(check.within):
                table.add_row(_time(str(row["collected_at"])), row.get("sample_id") or "",
                              *(stored_number(row.get(n), n) for n in SHOWN), key=str(i))
            self._rows = check.within
            if not check.within:
                head += f" No stored panel within {check.window_hours:g} h."
            if check.already_stored:
                head += " This panel is in the store already."
        self.query_one("#store-check", Static).update(head)
        self._note = note
        self._show_note()

    def on_data_table_row_highlighted(self, event: StoredTable.RowHighlighted) -> None:
        self._show_note()

    def _show_note(self) -> None:
        """The message of the last action, else the highlighted panel's reading."""
        table = self.query_one(StoredTable)
        text = self._note
        if not text and self._rows and table.row_count:
            row = self._rows[min(table.cursor_row, len(self._rows) - 1)]
            text = (f"{_time(str(row['collected_at']))}, read from the stored values only "
                    f"(no sample type, so it may differ from the report's): "
                    f"{stored_reading(row, self.app.settings)}")
        self.query_one("#store-note", Static).update(text)

    def action_keep(self) -> None:
        if self._keeping:
            self._note = "A panel is being kept in the store: wait for its answer."
            self._show_note()
            return
        link = self.app.store
        panel = self.app.panel
        why = ("the form holds a refused or missing value" if panel is None else
               "no patient id on the form" if not self.patient else
               "no collection time on the form" if not self.data.get("collected_at") else "")
        if why or link is None:
            self._note = f"Not kept in the store: {why}."
            self._show_note()
            return
        from .confirm import ConfirmScreen

        when = self.data.get("collected_at")
        sample = f", sample {self.data['sample_id']}" if self.data.get("sample_id") else ""
        self.app.push_screen(ConfirmScreen(
            f"Keep this panel of patient {self.patient} (collected {when}{sample}) in "
            f"{link.path}? The patient id is stored only as a keyed hash.",
            "keep it in the store", "go back, keep nothing"),
            lambda yes: self._kept(yes))

    def _kept(self, yes: bool | None) -> None:
        if not yes:
            self._note = "Nothing kept in the store."
            self._show_note()
            return
        link = self.app.store
        panel = self.app.panel
        assert link is not None and panel is not None
        # On a thread: a batch run holding the store makes the keep wait (up to
        # history.keep_panel's timeout), and the screen must answer keys meanwhile.
        self._keeping = True
        self._note = ("Keeping the panel in the store (if a batch run is writing to it, "
                      "this waits for it a few seconds)...")
        self._show_note()
        self.run_worker(lambda: self._keep_now(link, panel), thread=True, group="keep",
                        exit_on_error=False)

    def _keep_now(self, link: StoreLink, panel: Any) -> None:
        try:
            message = link.keep(panel, self.data)
        except Exception as e:  # noqa: BLE001 - said on screen, never lost in a log
            message = f"Not kept in the store: {e}"
        self.app.call_from_thread(self._after_keep, message)

    def _after_keep(self, message: str) -> None:
        self._keeping = False
        if self.is_attached:
            self.fill(message)
        elif hasattr(self.app.screen, "say"):  # left meanwhile: said on the entry screen
            self.app.screen.say(message)

    def action_back(self) -> None:
        self.dismiss(None)


def _time(text: str) -> str:
    """A stored time without its zero seconds: ``2026-12-01T08:00Z``."""
    return text.replace(":00Z", "Z") if text.count(":") == 2 and text.endswith(":00Z") else (
        text[:-3] if text.count(":") == 2 and text.endswith(":00") else text)
