"""The sitting's panels: a list of entries kept while the app runs, and their CSV file.

An entry holds the panel as it was keyed in (the mapping given to
``acidbase.Panel.model_validate``), so a panel the engine refuses can still be
kept, shown and corrected.  Nothing here reads a value: validation and every
number come from the library.

The CSV columns (documented in docs/tui.md) are the field names of
``acidbase.fields``, numeric fields first in their printed order, each in its
canonical unit (``Panel.canonical()``), then the answer fields (``sample_type``,
``hco3_source``, ``pregnancy``: ``acidbase.fields.CHOICES``) and the text fields.  ``acidbase batch`` reads the same columns.
"""

from __future__ import annotations

import csv
import io
import os
from dataclasses import dataclass, field
from typing import Any

from pydantic import ValidationError

import acidbase
from acidbase.fields import CHOICES, NUMERIC, TEXT_FIELDS

#: The answer fields (sample type, HCO3- source, pregnancy), as the library lists them.
CHOICE_NAMES: tuple[str, ...] = tuple(c.name for c in CHOICES)
#: The columns of a sitting file, in order.
COLUMNS: tuple[str, ...] = (*(spec.name for spec in NUMERIC), *CHOICE_NAMES, *TEXT_FIELDS)

#: Keys of an entry's mapping that are not panel fields (shown, never saved).
NOTE = "note"


@dataclass
class Entry:
    """One panel of the sitting, as keyed in."""

    data: dict[str, Any]
    """The mapping for ``Panel.model_validate``: values, ``<name>_unit``, choices, text."""
    note: str = ""
    """A free note shown beside the entry (the demo panels carry one); not saved."""
    context: dict[str, Any] | None = None
    """How its cells are read (a file's ``{"decimal": ...}``); None for a panel keyed in the
    form, whose decimal mark is that of its values as typed (``typed_decimal``)."""

    def reading_context(self) -> dict[str, Any]:
        """The validation context its cells are read with."""
        if self.context is not None:
            return self.context
        return {"decimal": typed_decimal(self.data)[0]}

    def panel(self) -> acidbase.Panel | None:
        """The validated panel, or None when the engine refuses it."""
        try:
            return acidbase.Panel.model_validate(self.data, context=self.reading_context())
        except ValidationError:
            return None

    def error(self) -> ValidationError | None:
        """What the engine refuses, as its structured error (None when accepted)."""
        try:
            acidbase.Panel.model_validate(self.data, context=self.reading_context())
        except ValidationError as e:
            return e
        return None

    def problems(self) -> list[str]:
        """The engine's messages for what it refuses (empty when accepted)."""
        error = self.error()
        return acidbase.describe(error) if error is not None else []

    def label(self) -> str:
        """How the entry is named in lists: its time, patient and sample id."""
        parts = [str(self.data[k]) for k in ("collected_at", "patient_id", "sample_id")
                 if self.data.get(k)]
        return " ".join(parts) or "no time or id"


@dataclass
class Sitting:
    """The panels kept during one run of the app, and which one the form shows."""

    entries: list[Entry] = field(default_factory=list)
    current: int | None = None
    """Index of the entry the form is linked to (its accepted edits update it), or None."""
    unsaved: bool = False
    """True when the kept panels changed since the series was last saved (or loaded)."""

    def keep(self, data: dict[str, Any], note: str = "") -> int:
        """Add a copy of ``data`` as a new entry and return its index.

        The form is left unlinked, so the next panel of a series can be keyed over
        this one without changing what was kept.
        """
        self.entries.append(Entry(dict(data), note))
        self.current = None
        self.unsaved = True
        return len(self.entries) - 1

    def update_current(self, data: dict[str, Any]) -> None:
        """The linked entry takes the form's accepted contents."""
        if self.current is not None and self.entries[self.current].data != data:
            self.entries[self.current].data = dict(data)
            self.unsaved = True

    def move(self, step: int) -> Entry | None:
        """Link the form to the entry ``step`` places away; None at either end."""
        if not self.entries:
            return None
        start = self.current if self.current is not None else (
            len(self.entries) if step < 0 else -1)
        target = start + step
        if not 0 <= target < len(self.entries):
            return None
        self.current = target
        return self.entries[target]

    def remove(self, index: int) -> Entry:
        """Take the entry out of the series and return it (for undo)."""
        entry = self.entries.pop(index)
        self.unsaved = True
        if self.current is not None:
            if self.current == index:
                self.current = None
            elif self.current > index:
                self.current -= 1
        return entry

    def insert(self, index: int, entry: Entry) -> None:
        """Put a removed entry back where it was."""
        self.entries.insert(index, entry)
        self.unsaved = True
        if self.current is not None and self.current >= index:
            self.current += 1


def typed_decimal(data: dict[str, Any]) -> tuple[str, bool]:
    """The decimal mark of the values keyed in the form, and whether they mix two marks.

    The form is a source like any file: its decimal mark is found from its values by the
    library's detection for a CSV file's first rows (``formats.detect_decimal``): ","
    when the values use a decimal comma ("7,21"), else "."; the one reader then reads
    every value with it.  Values with a comma and with a point: "." (the values with a
    comma are then refused by the reader) and True.
    """
    from acidbase.errors import BatchInputError
    from acidbase.files.formats import detect_decimal

    cells = [data[spec.name] for spec in NUMERIC if isinstance(data.get(spec.name), str)]
    try:
        # one row of the typed values; the form has no delimiter (a tab stands in for one)
        return detect_decimal([cells], range(len(cells)), "\t"), False
    except BatchInputError:
        return ".", True


def typed_number(text: str, decimal: str) -> float | None:
    """The number a field's text holds, as the one reader reads it (None: none)."""
    from acidbase.inputs.cells import read_number

    cell = read_number(text, decimal)
    return None if cell.bad or cell.comparator is not None else cell.value


def demo_entries() -> list[Entry]:
    """The library's demo panels as entries (their notes kept for display)."""
    from acidbase.demo import DEMO_PANELS

    out = []
    for panel in DEMO_PANELS:
        data = {k: v for k, v in panel.items() if k != NOTE}
        out.append(Entry(data, str(panel.get(NOTE, ""))))
    return out


# ---------------------------------------------------------------------------
# The file


def _cell(value: Any) -> str:
    if value is None:
        return ""
    return repr(value) if isinstance(value, float) else str(value)


def _as_reported(value: Any, typed: Any, decimal: str) -> str:
    """A value keyed in the file's unit, with the decimals it was typed with ("7.40",
    "24.0"; a decimal comma written as a point), when that text reads back as the very
    same number; else the number as it is (``_cell``)."""
    if not isinstance(value, float):
        return _cell(value)
    from acidbase.rules import number_text

    from .labels import typed_decimals

    if not isinstance(typed, str) or typed_number(typed.strip(), decimal) != value:
        return _cell(value)  # not typed (a demo's number), or typed as another number
    text = number_text(value, f".{typed_decimals(typed, value, decimal)}f")
    return text if float(text) == value else _cell(value)


def row_of(entry: Entry) -> dict[str, str] | None:
    """One CSV row: canonical units for an accepted panel.

    A refused entry is written as keyed in when every unit it names is the
    canonical one (the batch run then refuses it with the same message);
    otherwise it cannot be written in the file's units and None is returned.
    """
    panel = entry.panel()
    row: dict[str, str] = {}
    if panel is not None:
        canonical = panel.canonical()
        decimal = entry.reading_context().get("decimal", ".")
        for spec in NUMERIC:
            value = canonical[spec.name]
            keyed_in_canonical = getattr(panel, f"{spec.name}_unit") == spec.unit
            row[spec.name] = (_as_reported(value, entry.data.get(spec.name), decimal)
                              if keyed_in_canonical else _cell(value))
        for name in (*CHOICE_NAMES, *TEXT_FIELDS):
            row[name] = _cell(getattr(panel, name))
        return row
    for spec in NUMERIC:
        unit = entry.data.get(f"{spec.name}_unit")
        if unit is not None and unit != spec.unit:
            return None
        row[spec.name] = _cell(entry.data.get(spec.name))
    for name in (*CHOICE_NAMES, *TEXT_FIELDS):
        row[name] = _cell(entry.data.get(name))
    return row


def write_csv(path: str | os.PathLike[str], entries: list[Entry]) -> tuple[int, list[int]]:
    """Write the entries; returns (rows written, 1-based numbers of entries left out).

    Raises ``OSError`` or ``acidbase.files.outputs.OutputError`` (a path that cannot be
    written); the target is then as it was."""
    left_out: list[int] = []
    rows = []
    for i, entry in enumerate(entries, start=1):
        row = row_of(entry)
        if row is None:
            left_out.append(i)
        else:
            rows.append(row)
    # Staged beside the target and renamed into place only when whole (as every output of
    # acidbase is): a failure mid-write leaves an existing file as it was, and no part file.
    from acidbase.files.outputs import OutputSet

    with OutputSet() as out:
        staged = out.add("series file", os.fspath(path))
        fh = io.TextIOWrapper(staged.file, encoding="utf-8", newline="", write_through=True)
        writer = csv.DictWriter(fh, fieldnames=COLUMNS)
        writer.writeheader()
        writer.writerows(rows)
        fh.flush()
        fh.detach()  # the staged file stays open: commit syncs, closes and renames it
        out.commit()
    return len(rows), left_out


class SittingFileError(ValueError):
    """A file that cannot be read as a sitting at all."""


def read_csv(path: str | os.PathLike[str]) -> tuple[list[Entry], list[str]]:
    """Entries from a panel file; returns (entries, notes for the user).

    The file is an ordinary batch file, opened by the library's file reader
    (``acidbase.files``): CSV with any of the delimiters ``acidbase batch`` detects
    and a decimal comma, JSON Lines or Parquet; headers as field names, LOINC codes
    or names with a unit (``pCO2 (kPa)``).  Cells are kept as written and read by
    the library's one cell reader when each entry is validated, so a refused row
    becomes an entry that shows the same message ``acidbase batch`` writes.
    """
    from acidbase.errors import AcidBaseError
    from acidbase.files import formats, headers, source

    try:
        src = source.open_source(path)
        layout = headers.map_headers(src.headers, repeats=src.repeats)
        decimal, notes = ".", []
        if src.format == "csv":
            numeric = [i for i, h in enumerate(src.headers)
                       if layout.field_of.get(h) in acidbase.fields.BY_NAME]
            try:
                decimal = formats.detect_decimal(source.csv_sample(src), numeric,
                                                 src.delimiter)
            except AcidBaseError:  # the app has no --decimal: a point, and say so
                notes.append("numbers with a decimal comma and with a point: read with a "
                             "decimal point (cells with a comma are refused)")
        tables = list(src.chunks())
    except (AcidBaseError, OSError, UnicodeDecodeError) as e:
        reason = str(e)  # the path, where the error does not name it already
        raise SittingFileError(reason if os.fspath(path) in reason else f"{path}: {reason}") from e
    if layout.unread:
        notes.append("columns not read: " + ", ".join(layout.unread))
    units = {f"{name}_unit": unit for name, unit in layout.units.items()
             if unit != acidbase.fields.BY_NAME[name].unit}
    context = {"decimal": decimal}  # the file's mark, whatever a row's cells look like
    entries = []
    for table in tables:
        columns = {fld: table.column(h).to_pylist() for h, fld in layout.field_of.items()
                   if fld in COLUMNS}
        for i in range(table.num_rows):
            data: dict[str, Any] = dict(units)
            for fld, cells in columns.items():
                cell = cells[i]
                if cell is not None and not (isinstance(cell, str) and not cell.strip()):
                    data[fld] = cell
            entries.append(Entry(data, context=context))
    return entries, notes
