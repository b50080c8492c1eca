"""The names of panel files' reading and writing halves, for existing callers.

The reading half moved along the flow: formats and dialects
(``acidbase.files.formats``), headers (``acidbase.files.headers``), chunked
sources (``acidbase.files.source``), collection times (``acidbase.files.times``)
and the one cell reader (``acidbase.inputs``).  Their names are re-exported here
so existing callers keep working.

* Values: a number, with a comparator (FHIR ``Quantity.comparator``
  [fhir_quantity]) or a trailing laboratory flag (HL7 v2 table 0078 [hl7_0078]):
  ``acidbase.inputs.cells``.
* Writing (CSV, JSON Lines and Parquet bytes, formula escaping) is
  ``acidbase.files.writer``; staged outputs and path guards are
  ``acidbase.files.outputs``.
"""

from __future__ import annotations

from .errors import BatchInputError
from .files.formats import (DELIMITERS, FORMATS, Dialect, _show_delims, detect_decimal,  # noqa: F401
                            detect_format, sniff_csv)
from .files.headers import (ALL_FIELDS, CHOICE_FIELDS, Layout, map_headers,  # noqa: F401
                            read_mapping, split_unit)
from .files.source import (CSV_BLOCK_MAX, Source, csv_sample, jsonl_headers,  # noqa: F401
                           open_source, rechunk)
from .files.times import (TIME_INVALID, TIME_MISSING, TIME_NAIVE, TIME_ZONED,  # noqa: F401
                          parse_times)
from .files.writer import (Writer, csv_rows, escape_danger, escape_formula,  # noqa: F401
                           escape_text, fixed_columns, format_fixed, jsonl_bytes,
                           output_format)
from .inputs.cells import (LAB_FLAGS, ParsedColumn, _mask, _parse_cells,  # noqa: F401
                           parse_choice, parse_numeric, parse_numeric_many, parse_text)


__all__ = [
    "ALL_FIELDS", "BatchInputError", "Dialect", "LAB_FLAGS", "Layout", "ParsedColumn", "Source",
    "TIME_INVALID", "TIME_MISSING", "TIME_NAIVE", "TIME_ZONED", "Writer", "csv_rows", "csv_sample",
    "detect_decimal", "detect_format", "escape_danger", "escape_formula", "escape_text", "fixed_columns",
    "format_fixed", "jsonl_bytes", "map_headers", "open_source", "output_format", "parse_choice", "parse_numeric",
    "parse_numeric_many", "parse_text", "parse_times", "read_mapping",
    "rechunk",
    "sniff_csv", "split_unit",
]
