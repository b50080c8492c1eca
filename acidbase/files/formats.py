"""Input file formats and CSV dialects: which format, which delimiter, which decimal mark.

Formats: CSV (delimiter detected among ``, ; TAB |`` or given; decimal comma
detected or given; UTF-8 with or without a byte-order mark, or another encoding
by option), JSON Lines, Parquet.
"""

from __future__ import annotations

import csv
import io
import os
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from ..errors import BatchInputError

DELIMITERS: tuple[str, ...] = (",", ";", "\t", "|")
FORMATS: tuple[str, ...] = ("csv", "jsonl", "parquet")


def detect_format(path: str | os.PathLike[str], given: str | None = None) -> str:
    """``csv``, ``jsonl`` or ``parquet``: as given, else from the name, else the bytes."""
    if given:
        if given not in FORMATS:
            raise BatchInputError(f"format {given!r} is not one of {', '.join(FORMATS)}")
        return given
    suffix = Path(path).suffix.lower()
    if suffix in (".csv", ".tsv", ".txt"):
        return "csv"
    if suffix in (".jsonl", ".ndjson", ".json"):
        return "jsonl"
    if suffix in (".parquet", ".pq"):
        return "parquet"
    with open(path, "rb") as f:
        head = f.read(4)
    if head == b"PAR1":
        return "parquet"
    if head.lstrip(b"\xef\xbb\xbf \t\r\n").startswith(b"{"):
        return "jsonl"
    return "csv"


@dataclass(frozen=True)
class Dialect:
    delimiter: str
    headers: tuple[str, ...]
    sample: tuple[tuple[str, ...], ...]
    """The first data rows (for decimal detection)."""
    multiline: bool = False
    """A quoted cell of the first rows holds a line break (slower parsing needed)."""
    padded: bool = False
    """A header has spaces around it: ``headers`` holds it trimmed, so the reader must be
    given the names (the file's own header line would not match them)."""
    lead: int = 0
    """Blank lines before the header line (a reader given the names skips them too)."""


#: The first bytes of compressed files, as their formats define them (RFC 1952 gzip;
#: PKWARE APPNOTE zip; bzip2 "BZh"; xz "\xfd7zXZ\0"; RFC 8878 Zstandard; 7z), and a
#: command that writes the text to standard output for ``acidbase batch -``.
COMPRESSED_MAGIC: tuple[tuple[bytes, str, str], ...] = (
    (b"\x1f\x8b", "gzip", "gunzip -c"), (b"PK\x03\x04", "zip", "unzip -p"),
    (b"BZh", "bzip2", "bunzip2 -c"), (b"\xfd7zXZ\x00", "xz", "unxz -c"),
    (b"\x28\xb5\x2f\xfd", "zstd", "zstd -dc"), (b"7z\xbc\xaf\x27\x1c", "7z", "7z e -so"))


def _refuse_compressed(path: str | os.PathLike[str], raw: bytes) -> None:
    for magic, kind, command in COMPRESSED_MAGIC:
        # bzip2: "BZh", the block size 1-9, then the block magic (a header could say "BZh")
        if raw.startswith(magic) and (kind != "bzip2" or raw[4:10] == b"1AY&SY"):
            raise BatchInputError(
                f"{path}: a {kind}-compressed file; decompress it first, for example "
                f"{command} {path} | acidbase batch - ...")


def text_codec(encoding: str) -> str:
    """The codec a file's text is read with: UTF-8 with or without its byte-order mark
    for ``utf-8``, else the encoding given (``--encoding``)."""
    return "utf-8-sig" if encoding.lower().replace("_", "-") in ("utf-8", "utf8") else encoding


def refuse_utf16_marked(path: str | os.PathLike[str], codec: str, head: bytes) -> None:
    """A file read as UTF-8 (``codec``) that starts (``head``) with a UTF-16 byte-order
    mark, as a spreadsheet's "Unicode text" export does: refused, naming the encoding."""
    if codec == "utf-8-sig" and head.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise BatchInputError(f"{path}: the file is UTF-16 text (it starts with a UTF-16 "
                              "byte-order mark); give --encoding utf-16")


def _read_text_sample(path: str | os.PathLike[str], encoding: str, size: int = 1 << 16) -> str:
    with open(path, "rb") as f:
        raw = f.read(size)
    if not raw.strip():
        raise BatchInputError(f"{path}: the file is empty")
    _refuse_compressed(path, raw)
    codec = text_codec(encoding)
    refuse_utf16_marked(path, codec, raw)
    if codec == "utf-8-sig" and len(raw) >= 8:
        # UTF-16 without its mark decodes as UTF-8 (ASCII and NUL bytes): every other
        # byte NUL says which half; a NUL byte or two in a cell says nothing.
        for half, name in ((raw[1::2], "utf-16-le"), (raw[0::2], "utf-16-be")):
            if half.count(0) >= 0.9 * len(half):
                raise BatchInputError(
                    f"{path}: the file looks like UTF-16 text without a byte-order mark "
                    f"(every other byte is 0); give --encoding {name}")
    try:
        text = raw.decode(codec)
    except UnicodeDecodeError as e:
        if len(raw) == size and e.start >= len(raw) - 4:  # cut by the sample boundary
            text = raw[: e.start].decode(codec)
        else:
            raise BatchInputError(
                f"{path}: byte 0x{raw[e.start]:02x} at position {e.start} is not {encoding}; "
                "save the file as UTF-8 or give --encoding (for example cp1252)") from None
    except LookupError:
        raise BatchInputError(f"encoding {encoding!r} is not known") from None
    return text


def sniff_csv(path: str | os.PathLike[str], delimiter: str | None = None,
              encoding: str = "utf-8") -> Dialect:
    """The delimiter (given, or the one that splits the first rows evenly) and headers."""
    text = _read_text_sample(path, encoding)
    cut = len(text.encode("utf-8", "replace")) >= (1 << 16) - 4
    candidates = (delimiter,) if delimiter else DELIMITERS
    # The delimiter that gives the header at least two columns and most rows the
    # header's width (a ragged line is reported later, by the reader, with its text).
    best: tuple[float, int, str, list[list[str]]] | None = None
    for d in candidates:
        try:
            rows = [r for r in csv.reader(io.StringIO(text, newline=""), delimiter=d)
                    if any(c.strip() for c in r)]
        except csv.Error:
            continue
        if cut and len(rows) > 1:
            rows = rows[:-1]  # the last row of the sample may be cut
        rows = rows[:50]
        width = len(rows[0]) if rows else 0
        if width < 2:
            continue
        agree = sum(len(r) == width for r in rows) / len(rows)
        if agree >= 0.5 and (best is None or (agree, width) > best[:2]):
            best = (agree, width, d, rows)
    if best is None:
        raise BatchInputError(
            f"{path}: could not tell the delimiter (tried {_show_delims(candidates)}): the "
            "first lines do not split into the same number of columns; give --delimiter")
    _, _, d, rows = best
    headers = tuple(h.strip() for h in rows[0])
    multiline = any("\n" in c or "\r" in c for r in rows for c in r)
    lead = 0
    for line in text.splitlines():
        if line.strip():
            break
        lead += 1
    return Dialect(d, headers, tuple(tuple(r) for r in rows[1:]), multiline,
                   padded=headers != tuple(rows[0]), lead=lead)


def _show_delims(ds: Sequence[str]) -> str:
    return " ".join({"\t": "TAB"}.get(d, repr(d)) for d in ds)


def detect_decimal(sample: Sequence[Sequence[str]], numeric_columns: Sequence[int],
                   delimiter: str) -> str:
    """"," when the numeric cells of the sample use a decimal comma, else ".".

    Refuses to choose when both appear; the comma is never taken as a
    thousands separator.
    """
    comma = point = 0
    pat_comma = re.compile(r"\d,\d")
    pat_point = re.compile(r"\d\.\d")
    for row in sample:
        for j in numeric_columns:
            if j < len(row):
                cell = row[j]
                comma += bool(pat_comma.search(cell))
                point += bool(pat_point.search(cell))
    if comma and point:
        raise BatchInputError(
            "the numbers in the first rows use both a decimal comma and a decimal point; "
            "give --decimal , or --decimal .")
    if comma and delimiter == ",":
        raise BatchInputError(
            "numbers with a decimal comma in a comma-separated file are ambiguous; "
            "give --decimal ,")
    return "," if comma else "."

