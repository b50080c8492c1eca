"""Sources: an input file read in chunks of text (or native) Arrow columns, in file order.

Reading is columnar (pyarrow) and chunked, so a file larger than memory streams
through; no row is parsed by a Python loop on the CSV path.
"""

from __future__ import annotations

import io
import json
import math
import os
import re
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field

import pyarrow as pa
import pyarrow.csv as pa_csv

from .._arrow import pq
from ..errors import BatchInputError
from .formats import detect_format, refuse_utf16_marked, sniff_csv, text_codec


class _CountingReader(io.RawIOBase):
    """A binary file that counts the bytes read (for the progress bar)."""

    def __init__(self, f) -> None:
        self._f = f
        self.count = 0

    def readable(self) -> bool:
        return True

    def readinto(self, b) -> int:
        n = self._f.readinto(b)
        self.count += n or 0
        return n

    def close(self) -> None:
        self._f.close()
        super().close()


@dataclass
class Source:
    """An input file opened for chunked reading (each ``chunks`` call rereads it)."""

    path: str
    format: str
    headers: tuple[str, ...]
    delimiter: str = ","
    decimal: str = "."
    encoding: str = "utf-8"
    missing: tuple[str, ...] = ()
    multiline: bool = False
    chunk_rows: int = 1 << 18
    size: int = 0
    total_rows: int | None = None
    notes: tuple[str, ...] = ()
    """What the reader changed and the user should know (duplicate headers renamed)."""
    repeats: dict[str, str] = field(default_factory=dict)
    """A header given more than once: our name for each repeat -> the header it repeats
    (``"ph (2)"`` -> ``"ph"``), for ``map_headers``."""
    duplicates: dict[int, tuple[str, ...]] = field(default_factory=dict)
    """JSON Lines: row (from 0) -> keys its record gave more than once (filled as read)."""
    named: bool = False
    """CSV: the reader is given ``headers`` as the column names and skips the file's
    header line (a header trimmed of its spaces, or renamed, is not the file's)."""
    lead: int = 0
    """CSV: blank lines before the header line (skipped with it when ``named``)."""
    _progress: list[int] = field(default_factory=lambda: [0])

    @property
    def bytes_read(self) -> int:
        return self._progress[0]

    def estimated_rows(self) -> int:
        """Rows in the file: exact for Parquet, from the first lines' length otherwise."""
        if self.total_rows is not None:
            return self.total_rows
        try:
            with open(self.path, "rb") as f:
                head = f.read(1 << 16)
        except OSError:
            return 1
        lines = max(head.count(b"\n") - 1, 1)
        return max(1, int(self.size / (len(head) / lines)))

    def chunks(self, columns: Sequence[str] | None = None,
               on_progress: Callable[[int], None] | None = None) -> Iterator[pa.Table]:
        """Tables of ``chunk_rows`` rows (the last may be shorter), in file order."""
        cols = list(columns) if columns is not None else list(self.headers)
        if self.format == "csv":
            raw = self._csv_batches(cols, on_progress)
        elif self.format == "parquet":
            raw = self._parquet_batches(cols, on_progress)
        else:
            raw = self._jsonl_batches(cols, on_progress)
        yield from rechunk(raw, self.chunk_rows)

    def _csv_batches(self, cols: list[str], on_progress) -> Iterator[pa.RecordBatch]:
        """CSV batches in file order.  The first lines decide the block size and whether
        quoted cells may hold line breaks; when a later line proves them wrong (a cell
        larger than a block, a quoted line break after the sampled start), the file is
        read again with a larger block, or with line breaks in values, and the rows
        already given are skipped: a valid CSV is read, never refused for its shape."""
        block = int(min(max(self.chunk_rows * 96, 1 << 16), CSV_BLOCK_MAX))
        multiline = self.multiline
        given = 0
        while True:
            try:
                for batch in self._csv_pass(cols, on_progress, block, multiline, given):
                    given += batch.num_rows
                    yield batch
                return
            except pa.ArrowInvalid as e:
                text = str(e)
                if "straddling" in text and block < CSV_BLOCK_LARGEST:
                    block = min(block * 8, CSV_BLOCK_LARGEST)
                    continue
                if not multiline and ("Expected" in text or "straddling" in text):
                    multiline = True  # a quoted line break the sample did not show
                    continue
                if given == 0 and "Empty CSV file" in text:
                    # a header line with no line end after it, and nothing more
                    raise BatchInputError(f"{self.path}: no rows") from None
                raise BatchInputError(f"{self.path}: {_csv_error(text, self)}") from None

    def _csv_pass(self, cols: list[str], on_progress, block: int, multiline: bool,
                  skip: int) -> Iterator[pa.RecordBatch]:
        f = _CountingReader(open(self.path, "rb"))
        try:
            names = {}
            if self.notes or self.named:  # headers renamed or trimmed: our names, the
                # header line skipped
                names = {"column_names": list(self.headers), "skip_rows": 1 + self.lead}
            reader = pa_csv.open_csv(
                io.BufferedReader(f, 1 << 20),
                read_options=pa_csv.ReadOptions(block_size=block, encoding=self.encoding,
                                                **names),
                parse_options=pa_csv.ParseOptions(delimiter=self.delimiter,
                                                  newlines_in_values=multiline),
                convert_options=pa_csv.ConvertOptions(
                    column_types={h: pa.string() for h in self.headers},
                    include_columns=cols, strings_can_be_null=True,
                    null_values=[""] + list(self.missing), quoted_strings_can_be_null=True),
            )
            while True:
                try:
                    batch = reader.read_next_batch()
                except StopIteration:
                    break
                if on_progress:
                    on_progress(f.count)
                if skip:
                    if batch.num_rows <= skip:
                        skip -= batch.num_rows
                        continue
                    batch = batch.slice(skip)
                    skip = 0
                yield batch
        finally:
            f.close()

    def _parquet_batches(self, cols: list[str], on_progress) -> Iterator[pa.RecordBatch]:
        pf = pq.ParquetFile(self.path)
        done = 0
        names = list(pf.schema_arrow.names)
        index = [self.headers.index(c) for c in cols]
        assert len(names) == len(self.headers)
        for batch in pf.iter_batches(batch_size=self.chunk_rows):
            done += batch.num_rows
            if on_progress and self.total_rows:
                on_progress(int(self.size * done / self.total_rows))
            yield pa.RecordBatch.from_arrays([batch.column(i) for i in index], names=cols)

    def _jsonl_batches(self, cols: list[str], on_progress) -> Iterator[pa.RecordBatch]:
        # Values may be numbers in one record and text ("<5") in the next, which a
        # typed JSON reader refuses; records are read here and kept as text.
        f = _CountingReader(open(self.path, "rb"))
        try:
            lines = io.TextIOWrapper(io.BufferedReader(f), encoding=text_codec(self.encoding))
            buf: list[dict] = []
            row = 0
            for lineno, line in enumerate(lines, start=1):
                if not line.strip():
                    continue
                rec = _json_record(line, lineno, self.path)
                dups = getattr(rec, "duplicates", ())
                if dups:  # refused for that row (files.check), never silently the last
                    self.duplicates[row] = dups
                row += 1
                buf.append(rec)
                if len(buf) >= self.chunk_rows:
                    yield _records_to_batch(buf, cols, self.missing)
                    buf = []
                    if on_progress:
                        on_progress(f.count)
            if buf:
                yield _records_to_batch(buf, cols, self.missing)
            if on_progress:
                on_progress(f.count)
        finally:
            f.close()


def _csv_error(text: str, src: Source | None = None) -> str:
    text = text.replace("CSV parse error: ", "")
    m = re.search(r"Expected (\d+) columns, got (\d+): (.*)", text, re.S)
    if m:
        line = _ragged_line(src, int(m[1]), int(m[2])) if src is not None else None
        where = (f"line {line} has {m[2]} fields where the header has {m[1]} (line 1 is "
                 "the header)" if line is not None
                 else f"a line has {m[2]} fields where the header has {m[1]}")
        return f"{where}: {m[3].strip()[:120]!r}; fix the line, or check --delimiter"
    m = re.search(r"In CSV column #(\d+): CSV conversion error to string: invalid UTF8", text)
    if m and src is not None:  # a byte past the sampled start that is not UTF-8
        k = int(m[1])
        column = f"column {src.headers[k]!r}" if k < len(src.headers) else "a column"
        found = _undecodable_line(src.path)
        where = f"line {found[0]} (byte 0x{found[1]:02x})" if found else "a line"
        return (f"{where}, {column}: not {src.encoding} text; save the file as UTF-8 or "
                "give --encoding (for example cp1252)")
    return text


def _undecodable_line(path: str) -> tuple[int, int] | None:
    """(file line from 1, the byte) of the first line that is not UTF-8, or None."""
    try:
        with open(path, "rb") as f:
            for lineno, raw in enumerate(f, start=1):
                try:
                    raw.decode("utf-8")
                except UnicodeDecodeError as e:
                    return lineno, raw[e.start]
    except OSError:
        return None
    return None


def _ragged_line(src: Source, expected: int, got: int) -> int | None:
    """The file line (from 1, the header's) where the first record of ``got`` fields
    begins, read again with Python's CSV reader (the file's delimiter, quoted line
    breaks read as the Arrow reader read them when it stopped): the Arrow reader's
    message gives the record, not its line.  None when it cannot be told."""
    import csv

    encoding = text_codec(src.encoding)
    try:
        with open(src.path, encoding=encoding, errors="replace", newline="") as f:
            reader = csv.reader(f, delimiter=src.delimiter)
            start = 1
            for record in reader:
                if record and len(record) == got != expected and start > 1:
                    return start
                start = reader.line_num + 1
    except (OSError, csv.Error, LookupError):
        return None
    return None


class _Record(dict):
    """A JSON Lines record, with the keys it gave more than once."""

    duplicates: tuple[str, ...] = ()


def _pairs(pairs: list[tuple[str, object]]) -> _Record:
    rec = _Record()
    dups = []
    for k, v in pairs:
        if k in rec:
            dups.append(k)
        rec[k] = v
    if dups:
        rec.duplicates = tuple(dict.fromkeys(dups))
    return rec


class _Written(str):
    """A JSON number kept as the text the file wrote: one beyond the floating-point range
    (``1e999``, which Python reads as infinity) or a ``NaN``/``Infinity`` token, so a
    refusal shows the value as written (it showed ``'inf'``)."""


def _json_float(text: str) -> float | _Written:
    value = float(text)
    return value if math.isfinite(value) else _Written(text)


def _json_record(line: str, lineno: int, path: str) -> dict:
    try:
        rec = json.loads(line, object_pairs_hook=_pairs, parse_float=_json_float,
                         parse_constant=_Written)
    except json.JSONDecodeError as e:
        raise BatchInputError(f"{path} line {lineno}: not JSON ({e.msg})") from None
    if not isinstance(rec, dict):
        raise BatchInputError(f"{path} line {lineno}: a JSON Lines record must be an object")
    return rec


def _json_text(v: object) -> str | None:
    if v is None:
        return None
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(v)
    if isinstance(v, str):
        return v
    return json.dumps(v)


def _records_to_batch(records: list[dict], cols: list[str],
                      missing: tuple[str, ...]) -> pa.RecordBatch:
    arrays = []
    for c in cols:
        vals = [_json_text(r.get(c)) for r in records]
        if missing:
            vals = [None if v in missing else v for v in vals]
        arrays.append(pa.array(vals, type=pa.string()))
    return pa.RecordBatch.from_arrays(arrays, names=cols)


def jsonl_headers(path: str | os.PathLike[str], encoding: str = "utf-8") -> tuple[str, ...]:
    """Keys of a JSON Lines file, in order of first appearance (one pass).  The text is
    read in ``encoding`` (``--encoding``, as a CSV file's); bytes it cannot decode stop
    the run naming the byte, its position and the encoding to try."""
    keys: dict[str, None] = {}
    codec = text_codec(encoding)
    try:
        with open(path, encoding=codec) as f:
            for lineno, line in enumerate(f, start=1):
                if line.strip():
                    for k in _json_record(line, lineno, str(path)):
                        keys.setdefault(k, None)
    except LookupError:
        raise BatchInputError(f"encoding {encoding!r} is not known") from None
    except UnicodeDecodeError as e:
        with open(path, "rb") as f:
            head = f.read(2)
        refuse_utf16_marked(path, codec, head)
        raise BatchInputError(
            f"{path}: a byte (0x{e.object[e.start]:02x}) is not {encoding} text; save the "
            "file as UTF-8 or give --encoding (for example cp1252)") from None
    if not keys:
        raise BatchInputError(f"{path}: no records")
    return tuple(keys)


#: Largest block the CSV reader parses at once.  The reader's memory grows with its
#: block (about 40 MB more at 1.5 MB than at 768 KB, reading the benchmark file),
#: while larger chunks need only more blocks, which ``rechunk`` joins.
CSV_BLOCK_MAX = 768 << 10
#: Largest block a CSV is read again with when one cell is larger than a block.
CSV_BLOCK_LARGEST = 1 << 30


def rechunk(batches: Iterator[pa.RecordBatch], rows: int) -> Iterator[pa.Table]:
    """Regroup batches into tables of exactly ``rows`` rows (the last may be shorter)."""
    pending: list[pa.RecordBatch] = []
    have = 0
    for b in batches:
        if b.num_rows == 0:
            continue
        pending.append(b)
        have += b.num_rows
        while have >= rows:
            t = pa.Table.from_batches(pending)
            yield t.slice(0, rows)
            rest = t.slice(rows)
            pending = rest.to_batches()
            have = rest.num_rows
    if have:
        yield pa.Table.from_batches(pending)


def open_source(path: str | os.PathLike[str], fmt: str | None = None, delimiter: str | None = None,
                encoding: str = "utf-8", missing: Sequence[str] = (),
                chunk_rows: int = 1 << 18) -> Source:
    """Open INPUT: format, delimiter and headers (decimal is set after mapping)."""
    p = str(path)
    if not os.path.isfile(p):
        raise BatchInputError(not_a_file(p))
    fmt = detect_format(p, fmt)
    size = os.path.getsize(p)
    if fmt == "csv":
        d = sniff_csv(p, delimiter, encoding)
        headers, notes = unique_headers(d.headers)
        src = Source(p, fmt, headers, d.delimiter, encoding=encoding, multiline=d.multiline,
                     notes=notes, repeats=_repeats(d.headers, headers), named=d.padded,
                     lead=d.lead)
        src._sample = d.sample  # type: ignore[attr-defined]
    elif fmt == "parquet":
        try:
            pf = pq.ParquetFile(p)
        except (pa.ArrowInvalid, OSError) as e:
            raise BatchInputError(f"{p}: not a readable Parquet file ({e})") from None
        schema = pf.schema_arrow
        nested = [f"{f.name!r} ({f.type})" for f in schema if pa.types.is_nested(f.type)]
        if nested:
            raise BatchInputError(
                f"{p}: column(s) {', '.join(nested)} hold lists or records, not one value per "
                "cell; write them as text or drop them before the run")
        headers, notes = unique_headers(schema.names)
        src = Source(p, fmt, headers, total_rows=pf.metadata.num_rows, notes=notes,
                     repeats=_repeats(schema.names, headers))
    else:
        src = Source(p, fmt, jsonl_headers(p, encoding), encoding=encoding)
    src.size = size
    src.missing = tuple(missing)
    src.chunk_rows = max(1, int(chunk_rows))
    return src


def not_a_file(path: str) -> str:
    """Why ``path`` cannot be read as an input file: no such file, a folder, or something
    that is not a regular file (a pipe, a device: read once, while a run reads its file
    more than once)."""
    if os.path.isdir(path):
        return f"{path}: is a folder; name a file"
    if os.path.exists(path):
        return (f"{path}: is not a regular file (a pipe or a device); give - to read "
                "standard input")
    return f"{path}: no such file"


def unique_headers(headers: Sequence[str]) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """Headers with repeats renamed ``"n (2)"``, and a note naming each renaming."""
    out: list[str] = []
    used: set[str] = set()
    renamed = []
    for h in headers:
        name, k = h, 1
        while name in used:
            k += 1
            name = f"{h} ({k})"
        used.add(name)
        out.append(name)
        if name != h:
            renamed.append(f"{h!r} -> {name!r}")
    notes = ("repeated column names renamed: " + ", ".join(renamed),) if renamed else ()
    return tuple(out), notes


def _repeats(given: Sequence[str], ours: Sequence[str]) -> dict[str, str]:
    """Our name -> the header as given, for each header ``unique_headers`` renamed."""
    return {o: g for g, o in zip(given, ours) if o != g}


def csv_sample(src: Source) -> tuple[tuple[str, ...], ...]:
    return getattr(src, "_sample", ())

