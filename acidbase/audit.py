"""The audit record: which tool, version and settings made an output, from what input.

Every output carries one (``check --json``, the batch summary and report, the FHIR
Provenance), so a reading can be traced months later: the tool's version, the
settings in force and their SHA-256 (with the configuration file and its own
SHA-256), the input's SHA-256 and size, the row counts, and start and end times in
UTC (ISO 8601).  SHA-256: NIST FIPS 180-4, "Secure Hash Standard", 2015.
"""

from __future__ import annotations

import hashlib
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from .config import Site

TOOL = "acidbase"


def version() -> str:
    from . import __version__

    return __version__


def now() -> str:
    """The current time, UTC, to the second: ``2026-12-02T10:41:05Z``."""
    return datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def file_sha256(path: str, block: int = 1 << 20) -> str:
    """SHA-256 of a file's bytes, read in blocks (the input is never held whole)."""
    h = hashlib.sha256()
    with open(path, "rb") as f:
        while chunk := f.read(block):
            h.update(chunk)
    return h.hexdigest()


_NOW = object()


def record(site: Site, started: str, ended: str | None | object = _NOW, *,
           input_name: str | None = None, input_path: str | None = None,
           input_sha256: str | None = None, rows: dict[str, int] | None = None) -> dict[str, Any]:
    """The audit record as a JSON-ready dict (keys in a fixed order).

    ``ended`` defaults to now; None leaves it out (a record written before the end, as
    in a Parquet file's metadata).
    """
    doc: dict[str, Any] = {"tool": TOOL, "version": version(), "started": started}
    if ended is not None:
        doc["ended"] = now() if ended is _NOW else ended
    if input_name is not None or input_path is not None:
        item: dict[str, Any] = {"name": input_name or input_path}
        if input_path is not None:
            item["sha256"] = input_sha256 or file_sha256(input_path)
            try:
                import os

                item["bytes"] = os.path.getsize(input_path)
            except OSError:
                pass
        doc["input"] = item
    if rows is not None:
        doc["rows"] = dict(rows)
    doc["config_file"] = site.file
    doc["config_sha256"] = site.file_sha256
    doc["settings_sha256"] = site.sha256()
    doc["settings"] = site.values()
    return doc


def lines(doc: dict[str, Any]) -> list[str]:
    """The record as short text lines (the batch text summary and reports)."""
    end = doc.get("ended", "the end of the run")
    out = [f"made by {doc['tool']} {doc['version']}, {doc['started']} to {end}"]
    if "input" in doc:
        i = doc["input"]
        size = f", {i['bytes']:,} bytes" if "bytes" in i else ""
        out.append(f"input {i['name']}: SHA-256 {i.get('sha256', 'not taken')}{size}")
    if "rows" in doc:
        out.append("rows: " + ", ".join(f"{k} {v:,}" for k, v in doc["rows"].items()))
    config = (f"{doc['config_file']} (SHA-256 {doc['config_sha256']})" if doc["config_file"]
              else "none (built-in defaults and options)")
    out.append(f"configuration file: {config}")
    out.append(f"settings SHA-256: {doc['settings_sha256']} (`acidbase config show` lists them)")
    return out


__all__ = ["TOOL", "file_sha256", "lines", "now", "record", "version"]
