"""``check_table``: one Arrow batch of panels in, the same rows checked out.

What ``acidbase batch`` does for one chunk, as a library function with no
command line inside: any engine that maps a function over Arrow batches can call
it.  Each cell is read by the one cell reader (``acidbase.inputs``) inside
``interpret_many``, so a row's refusal is decided once, there, and travels as
``Problem`` objects until the ``reason`` column is written.
"""

from __future__ import annotations

import dataclasses
from collections import Counter
from dataclasses import dataclass
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from .. import loinc, serial
from ..api import interpret_many
from ..engine import SLOTS
from ..errors import Problem
from ..fields import BY_NAME
from ..inputs.vocab import CHOICE_BY_NAME, normalise_word
from ..reference import Settings
from ..results import CAUTION, DERIVED
from .headers import Layout, map_headers
from .writer import decoded

#: Columns ``check_table`` adds around the kernel's own (``Results.encoded``).
ROW_COLUMN = "row"
EXTRA_COLUMNS: tuple[str, ...] = ("needs_review", "qualifiers", "lab_flags",
                                  *serial.COLUMNS, "caution")


def review_rules() -> list[int]:
    """Indices of the rules that put a row up for review: the trust findings above
    "info" (the panel itself is in doubt)."""
    from ..rules import RULES

    return [j for j, r in enumerate(RULES) if r.section == "trust" and r.severity != "info"]


def labelled(indices: np.ndarray, labels: Sequence[str]) -> pa.DictionaryArray:
    """A text column as Arrow keeps a few distinct values: row i reads
    ``labels[indices[i]]`` (the CSV writer writes each label's cell once)."""
    return pa.DictionaryArray.from_arrays(pa.array(indices, type=pa.int32()),
                                          pa.array(list(labels), type=pa.string()))


def review_mask(fired: np.ndarray, refused: np.ndarray) -> np.ndarray:
    """Refused, or a trust finding above "info" (the serial flags are added later)."""
    idx = review_rules()
    trust = fired[idx].any(axis=0) if idx else np.zeros(len(refused), dtype=bool)
    return refused | trust


def _spread(rows: np.ndarray, values: list[str] | np.ndarray, n: int) -> pa.Array:
    """``n`` text cells: ``values[k]`` on row ``rows[k]``, "" elsewhere."""
    if len(rows) == 0:
        return pa.repeat(pa.scalar("", pa.string()), n)
    pos = np.full(n, -1, dtype=np.int64)
    pos[rows] = np.arange(len(rows))
    values = pa.array(values, type=pa.string())
    return pc.fill_null(pc.take(values, pa.array(pos, mask=pos < 0)), "")


def sparse_text(col: np.ndarray, where: np.ndarray) -> pa.Array:
    """Text that is "" except on the rows of ``where`` (converted only there)."""
    idx = np.flatnonzero(where)
    return _spread(idx, col[idx], len(col))


def _marks_column(marks: Mapping[int, tuple[str, ...]], n: int) -> pa.Array:
    """Per-row marks ("lactate <0.3") written as one text cell, "; " between them;
    ``marks`` holds only the rows that have any (row -> marks)."""
    rows = np.fromiter(marks, dtype=np.int64, count=len(marks))
    return _spread(rows, ["; ".join(m) for m in marks.values()], n)


def chunk_columns(table: pa.Table | pa.RecordBatch, layout: Layout) -> dict[str, Any]:
    """The input columns the kernel reads, by field name (Arrow columns, as read)."""
    return panel_columns(table, layout)[0]


def _filled(column: pa.Array | pa.ChunkedArray, missing: Sequence[str]) -> np.ndarray:
    """Rows whose cell holds something (not null, not blank, not a missing token)."""
    if isinstance(column, pa.ChunkedArray):
        column = column.combine_chunks()
    if pa.types.is_dictionary(column.type):
        column = column.dictionary_decode()
    valid = np.asarray(pc.is_valid(column).to_numpy(zero_copy_only=False), dtype=bool)
    if pa.types.is_string(column.type) or pa.types.is_large_string(column.type):
        text = pc.utf8_trim_whitespace(column)
        blank = pc.equal(text, "")
        if missing:
            blank = pc.or_(blank, pc.is_in(text, value_set=pa.array(list(missing), pa.string())))
        valid &= ~np.asarray(pc.fill_null(blank, True).to_numpy(zero_copy_only=False), dtype=bool)
    elif pa.types.is_floating(column.type):
        valid &= ~np.isnan(np.asarray(pc.fill_null(column, 0.0).to_numpy(zero_copy_only=False),
                                      dtype=np.float64))
    return valid


def _as_text(column: pa.Array | pa.ChunkedArray) -> pa.Array:
    if isinstance(column, pa.ChunkedArray):
        column = column.combine_chunks()
    if pa.types.is_dictionary(column.type):
        column = column.dictionary_decode()
    return column if pa.types.is_string(column.type) else column.cast(pa.string())


def field_column(table: pa.Table | pa.RecordBatch, headers: Sequence[str],
                 missing: Sequence[str] = ()) -> tuple[Any, dict[str, np.ndarray]]:
    """One field's column from its input columns (one per specimen: each row takes the
    one filled), and each column's filled rows."""
    filled = {h: _filled(table.column(h), missing) for h in headers}
    if len(headers) == 1:
        return table.column(headers[0]), filled
    merged = None
    for h in headers:
        text = _as_text(table.column(h))
        merged = text if merged is None else pc.if_else(pa.array(filled[h]), text, merged)
    return merged, filled


def field_values(table: pa.Table | pa.RecordBatch, headers: Sequence[str],
                 missing: Sequence[str] = ()) -> Any:
    """``field_column``'s column alone: a field with one input column is that column,
    as read (no cell looked at: the serial checks' first pass reads many)."""
    if len(headers) == 1:
        return table.column(headers[0])
    return field_column(table, headers, missing)[0]


def panel_columns(table: pa.Table | pa.RecordBatch, layout: Layout,
                  missing: Sequence[str] = ()) -> tuple[dict[str, Any], dict[int, list[Problem]]]:
    """The kernel's columns of one table (by field name), and the rows refused before any
    cell is read: what a LOINC-coded table's specimens imply (``acidbase.loinc``).

    * A field with one column per specimen reads, row by row, the column that is
      filled; a row with two filled is refused (``specimen_conflict``).
    * A row's sample type comes from its ``sample_type`` cell or, when that is empty
      or absent, from the specimen of the LOINC-coded columns filled on the row; a
      cell that contradicts them, or columns naming two specimens, refuse the row.
    * ``hco3_source`` is set the same way from a bicarbonate or total CO2 code.

    The columns stay Arrow (or text) for the one cell reader; this function reads
    no value.  Also the entry point for other inputs with LOINC-coded columns (HL7).
    """
    missing = tuple(missing) or layout_missing(layout)
    n = table.num_rows
    problems: dict[int, list[Problem]] = {}
    cols: dict[str, Any] = {}
    # What the filled coded columns say, as codes into each choice's words (-1: nothing).
    st_words, src_words = CHOICE_BY_NAME["sample_type"].words, CHOICE_BY_NAME["hco3_source"].words
    specimen = np.full(n, -1, dtype=np.int16)
    source = np.full(n, -1, dtype=np.int16)

    def conflict(rows: np.ndarray, name: str, title: str, value: str, hint: str) -> None:
        for i in np.flatnonzero(rows).tolist():
            problems.setdefault(i, []).append(Problem(name, title, value, "",
                                                      kind="specimen_conflict", hint=hint))

    for fld, headers in layout.columns_of.items():
        if fld not in BY_NAME and fld not in CHOICE_BY_NAME:  # every choice, pregnancy too
            continue
        if len(headers) == 1 and not any(_implies(layout, h) for h in headers):
            cols[fld] = table.column(headers[0])
            continue
        cols[fld], filled = field_column(table, headers, missing)
        if len(headers) > 1:
            count = np.sum([f for f in filled.values()], axis=0)
            title = BY_NAME[fld].title if fld in BY_NAME else fld
            conflict(count > 1, fld, title, " and ".join(headers),
                     "a row may fill one specimen's column of a field, not two")
        for h in headers:
            code = layout.code_of.get(h, "")
            st = loinc.sample_type_for(code) if code and fld in SPECIMEN_FIELDS else None
            if st is not None:
                rows, k = filled[h], st_words.index(st)
                clash = rows & (specimen >= 0) & (specimen != k)
                conflict(clash, "sample_type", "Sample type", f"{h} ({loinc.SPECIMEN[code]})",
                         "the row's LOINC-coded columns name different specimens")
                specimen[rows & (specimen < 0)] = k
            src = loinc.HCO3_SOURCE_OF_CODE.get(code)
            if src is not None:
                source[filled[h]] = src_words.index(src)
    for name, implied, title, vocab in (("sample_type", specimen, "Sample type", st_words),
                                        ("hco3_source", source, "HCO3- source", src_words)):
        has = implied >= 0
        if not has.any():
            continue
        implied_words = np.array([*vocab, None], dtype=object)[implied]  # -1 -> None
        given = cols.get(name)
        if given is None:  # no column: the codes say it
            cols[name] = implied_words
            continue
        # Column-wise: each distinct cell text is normalised once, to a code of the
        # vocabulary (-2: not one of its words, so a conflict too; the reader refuses it).
        text = _as_text(given)
        filled = _filled(text, missing)
        encoded = pc.dictionary_encode(text)
        said_of = [vocab.index(w) if (w := normalise_word(t or "")) in vocab else -2
                   for t in encoded.dictionary.to_pylist()] + [-1]
        idx = np.asarray(pc.fill_null(encoded.indices, len(said_of) - 1)
                         .to_numpy(zero_copy_only=False))
        said = np.array(said_of, dtype=np.int16)[idx]
        clash = has & filled & (said != implied) & (said != vocab.index("unknown"))
        cells = np.asarray(text.to_numpy(zero_copy_only=False), dtype=object)
        for i in np.flatnonzero(clash).tolist():
            problems.setdefault(i, []).append(Problem(
                name, title, cells[i], "", kind="specimen_conflict",
                hint=f"the row's LOINC-coded columns say {vocab[implied[i]]}; correct the "
                     f"{name} cell or the column"))
        cols[name] = np.where(filled, cells, implied_words)
    return cols, problems


#: The fields whose LOINC specimen sets the row's sample type: the blood-gas values,
#: whose reference intervals depend on it.  Electrolytes, lactate, haemoglobin...
#: keep their own specimens (a serum sodium beside an arterial gas is ordinary).
SPECIMEN_FIELDS: tuple[str, ...] = ("ph", "pco2", "po2", "hco3")


@dataclass(frozen=True)
class PanelTable:
    """A table of cells under field or LOINC headers, made ready for ``interpret_many``."""

    columns: dict[str, Any]
    """The kernel's columns by field name (cells as given: the reader reads them)."""
    units: dict[str, str]
    """Field -> unit, where not the field's canonical unit."""
    problems: dict[int, list[Problem]]
    """Row -> problems found before any cell is read (specimen conflicts)."""
    layout: Layout
    """Which column feeds which field, in which unit, and the notes."""

    def interpret(self, settings: Settings | None = None, *, decimal: str = "."):
        """``interpret_many`` of these columns (the ``Results``)."""
        return interpret_many(self.columns, self.units or None, settings, decimal=decimal,
                              missing=self.layout.missing, row_problems=self.problems)


def panel_table(table: pa.Table | pa.RecordBatch,
                mapping: Mapping[str, tuple[str, str | None]] | None = None,
                units: Mapping[str, str] | None = None,
                missing: Sequence[str] = ()) -> PanelTable:
    """Headers mapped (field names, LOINC codes with their specimens, a mapping) and the
    kernel's columns built: the entry point for any input that arrives as a table of text
    cells (an HL7 v2 message turned into one row per panel, for example).  Raises
    ``BatchInputError`` when the headers cannot be read as panels."""
    if isinstance(table, pa.RecordBatch):
        table = pa.Table.from_batches([table])
    layout = map_headers(table.schema.names, mapping, units)
    if missing:
        layout = dataclasses.replace(layout, missing=tuple(missing))
    columns, problems = panel_columns(table, layout)
    unit_map = {k: v for k, v in layout.units.items() if v != BY_NAME[k].unit}
    return PanelTable(columns, unit_map, problems, layout)


def _implies(layout: Layout, header: str) -> bool:
    """True when the header's LOINC code sets a sample type or an HCO3- source."""
    code = layout.code_of.get(header)
    if not code:
        return False
    return (layout.field_of.get(header) in SPECIMEN_FIELDS
            and loinc.sample_type_for(code) is not None) or code in loinc.HCO3_SOURCE_OF_CODE


def check_chunk(table: pa.Table | pa.RecordBatch, layout: Layout, decimal: str,
                settings: Settings | None, checker: serial.SerialChecker | None, start: int,
                keep: tuple[str, ...] = DERIVED, missing: Sequence[str] = (),
                severities: tuple[str, ...] | None = None, keep_results: bool = False,
                wanted: Callable[[str], bool] | None = None
                ) -> tuple[dict[str, pa.Array], dict]:
    """The output columns of one chunk (kernel, review, marks, serial, caution) and what
    the summary needs (``meta``: refused and review masks, fired rules, counts; with
    ``keep_results``, the chunk's ``Results`` for a per-row surface such as FHIR).

    ``keep``: the derived values written (``hco3_difference`` among them adds that
    column); ``severities``: the findings whose codes ``finding_codes`` lists (None:
    all; acidbase/profile.py); ``wanted``: which of the kernel's text columns are
    built at all (None: every one; the batch passes its profile's ``keeps``).  The
    role columns' codes travel in ``meta["roles"]`` whether built or not (counted
    for the summary)."""
    n = table.num_rows
    units = {k: v for k, v in layout.units.items() if v != BY_NAME[k].unit}
    missing = tuple(missing) or layout_missing(layout)
    columns, row_problems = panel_columns(table, layout, missing)
    for row, keys in getattr(layout, "duplicates", {}).items():
        if start <= row < start + n:
            row_problems.setdefault(row - start, []).insert(0, Problem(
                "record", "JSON record", ", ".join(keys), "", kind="duplicate_key",
                hint="a record gives each key once; which value was meant cannot be told"))
    for row, found in getattr(layout, "row_problems", {}).items():  # e.g. an HL7 message
        if start <= row < start + n:
            row_problems.setdefault(row - start, [])[:0] = found
    res = interpret_many(columns, units or None, settings, decimal=decimal, missing=missing,
                         row_problems=row_problems)
    # text columns as (indices, labels): no cell-by-cell conversion
    tab = res.encoded(severities, "hco3_difference" in keep, keep)
    refused = np.asarray(res.refused, dtype=bool)
    counts = {"reasons": Counter(res.problem_counts())}
    marks = res.has_marks()
    quals = res.marked_rows("qualifiers") if marks else {}
    flags = res.marked_rows("lab_flags") if marks else {}
    counts["qualifiers"] = _qualifier_counts(res) if marks else Counter()
    counts["lab_flags"] = Counter(f for row in flags.values() for f in row)
    fired = res.fired
    pco2, hco3 = res.values("pco2"), res.values("hco3")
    plain_fields = res.plain
    results = res if keep_results else None
    del res  # the kernel's frame (about 150 columns) is not needed past here
    review = review_mask(fired, refused)
    out: dict[str, pa.Array] = {}
    engine_cols = [k for k in tab if not (k in DERIVED and k not in keep)]
    roles = {slot: tab[f"role_{slot}"] for slot, _, _ in SLOTS}
    for key in engine_cols:
        col = tab.pop(key)  # each numpy column is let go once it is an Arrow one
        if wanted is not None and not wanted(key):
            continue
        if key == "reason":
            arr = sparse_text(col, refused)
        elif isinstance(col, tuple):  # kept as labels and indices: the writers decode
            arr = labelled(*col)
        elif col.dtype == object:
            arr = pa.array(col, type=pa.string())
        elif col.dtype.kind == "f":
            arr = pa.array(col, mask=np.isnan(col))
        else:
            arr = pa.array(col)
        out[key] = arr
    if checker is not None:
        scols = checker.arrow_columns(start, start + n)
        review = review | (checker.status[start:start + n] == serial.FLAGGED)
        checker.interpreted[start:start + n] = ~refused  # what a history store keeps
    else:
        scols = {"serial_status": pa.repeat(pa.scalar("not run"), n),
                 "serial_codes": pa.repeat(pa.scalar(""), n),
                 "serial_detail": pa.repeat(pa.scalar(""), n)}
    out["needs_review"] = labelled(review.astype(np.int32), ["no", "yes"])
    out["qualifiers"] = _marks_column(quals, n)
    out["lab_flags"] = _marks_column(flags, n)
    for k in serial.COLUMNS:
        out[k] = scols[k]
    first = CAUTION if start == 0 else None
    out["caution"] = pa.concat_arrays([pa.array([first], type=pa.string()),
                                       pa.nulls(n - 1, pa.string())]) if n else \
        pa.array([], type=pa.string())
    # Input columns read in full as numbers (or as allowed words) carry nothing a
    # spreadsheet would run: their escaping is skipped (it would change no cell).
    col_of = layout.column_of
    plain = frozenset(col_of[f] for f in plain_fields if f in col_of)
    meta = {"engine_cols": engine_cols, "plain": plain, "refused": refused, "review": review,
            "fired": fired, "pco2": pco2, "hco3": hco3, "counts": counts, "results": results,
            "roles": roles}
    return out, meta


def layout_missing(layout: Layout) -> tuple[str, ...]:
    return tuple(getattr(layout, "missing", ()) or ())


def _qualifier_counts(res) -> Counter:
    """Censored values by field and comparator ("lactate <#"), from the structured reading."""
    out: Counter = Counter()
    for part in res.parts:
        for name, p in part.screened.readings.items():
            if p.comparator is None:
                continue
            marks = p.comparator  # only the censored cells are converted
            cells = marks.tolist() if isinstance(marks, np.ndarray) else \
                marks.drop_null().to_pylist()
            out.update(f"{name} {cmp}#" for cmp in cells if cmp is not None)
    return out


def output_names(headers: Sequence[str], engine_cols: Sequence[str]) -> dict[str, str]:
    """Input header -> output name (renamed only when it collides with ours)."""
    ours = {ROW_COLUMN, *engine_cols, *EXTRA_COLUMNS}
    return {h: (f"{h} (input)" if h in ours else h) for h in headers}


def check_table(table: pa.Table | pa.RecordBatch, settings: Settings | None = None, *,
                units: Mapping[str, str] | None = None,
                mapping: Mapping[str, tuple[str, str | None]] | None = None,
                decimal: str = ".", missing: Sequence[str] = (),
                derived: Sequence[str] = DERIVED, start: int = 0) -> pa.Table:
    """Check every panel of one Arrow batch: the batch file's rows for it.

    Headers are read as ``acidbase batch`` reads them (field names, LOINC codes with
    their specimen, ``mapping``: header -> (field, unit)); ``units`` as ``--unit``.
    The result has one row per input row, in order: ``row`` (``start`` + 1 onwards),
    every input column passed through (renamed "<name> (input)" where it collides
    with ours), then status, reason, the reading, derived values, review, marks,
    serial columns ("not run": they need the whole file) and the caution.

    Raises ``BatchInputError`` when the headers cannot be read as panels (a required
    field without a column, two columns for one field...).
    """
    if isinstance(table, pa.RecordBatch):
        table = pa.Table.from_batches([table])
    if not isinstance(table, pa.Table):
        raise TypeError(
            f"check_table takes a pyarrow Table or RecordBatch, not {type(table).__name__}: "
            "pyarrow.table(columns) or pyarrow.Table.from_pylist(rows) makes one; for a "
            "file, acidbase batch; for columns of panels, interpret_many")
    layout = map_headers(table.schema.names, mapping, units)
    out, meta = check_chunk(table, layout, decimal, settings, None, start,
                            tuple(derived), missing)
    names = output_names(layout.headers, meta["engine_cols"])
    cols: dict[str, Any] = {ROW_COLUMN: pa.array(np.arange(start + 1, start + table.num_rows + 1))}
    for h in layout.headers:
        cols[names[h]] = table.column(h)
    cols.update(out)
    return decoded(pa.table(cols))  # every text column as text


__all__ = ["EXTRA_COLUMNS", "PanelTable", "ROW_COLUMN", "check_chunk", "check_table",
           "field_column", "field_values",
           "output_names", "panel_columns", "panel_table", "review_mask", "review_rules"]
