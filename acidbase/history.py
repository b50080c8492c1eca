"""The history store: each patient's earlier panels across runs, for the serial checks.

One SQLite file (the standard library's ``sqlite3``).  Panels are kept in column
blocks: each block is an Arrow IPC stream (LZ4 frame, else zstd) of panels of one
run and one sixteenth of the patients (the first hex digit of the keyed hash), with
its time range beside it.  A run writes one block per serial-check partition (cut
along the same digits) in one transaction instead of a million rows (row-wise
inserts measured 4.5 s per million panels here, far beyond the 20 % a store may add
to a run).  Layout 2 keeps the keyed ids as their 16 bytes and, beside the blocks,
each sixteenth's ``latest`` block: every stored patient's panels at the patient's
latest time.  A run reads those (the latest panel before each of its patients' first
panel), and the blocks only for patients stored from their first panel on (a file
read again, overlapping exports).

Privacy: a patient id is stored only as its keyed hash, HMAC-SHA256 with the
site's key (RFC 2104; FIPS 198-1), never in plain; the key is never stored (only
an HMAC of a fixed label, so that a run with another key is refused rather than
silently comparing nothing).  The file is created readable and writable by its
owner only (mode 0600).  Panels collected more than ``retention_days`` ago are
pruned at every run (default 30 days; common practice, no source: a laboratory
sets its own).  Sample ids are kept as written (the run's text names them).

Concurrency: a run holds the store's write lock from before it reads the earlier
panels until it commits, so two runs against one store take turns (the second
waits up to ``BUSY_TIMEOUT_S``, then refuses with a message); a failed or
interrupted run commits nothing (SQLite rolls its journal back).
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import hmac
import itertools
import json
import os
import sqlite3
import time
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
from pyarrow import ipc

from .config import DEFAULT_HISTORY_RETENTION_DAYS
from .errors import AcidBaseError
from .serial import KEYED_BYTES, STORED_FIELDS, keyed_binary, prefix64

try:  # optional: absent when the package was installed without a C compiler
    from . import _idhash
except ImportError:  # pragma: no cover - depends on the build
    _idhash = None

#: Version of the store's layout; a store of a later version is refused.
SCHEMA_VERSION = 2
#: Environment variable that holds the site key (the site configuration may set it).
KEY_ENV = "ACIDBASE_HISTORY_KEY"
#: Shortest key accepted, in bytes (RFC 2104 section 3: at least the hash's output
#: length, 32 bytes for SHA-256, is recommended; 16 is refused below as too weak).
MIN_KEY_BYTES = 16
#: Panels collected longer ago than this are pruned (days; declared with the site
#: settings, acidbase.config, where ``[history] retention_days`` overrides it).
DEFAULT_RETENTION_DAYS = DEFAULT_HISTORY_RETENTION_DAYS
#: How long a run waits for another run to finish with the store (seconds).
BUSY_TIMEOUT_S = 600.0
_KEY_LABEL = b"acidbase history key check"
#: The page size of a new store, SQLite's largest.  A run's panels go in as a few
#: blocks of megabytes; SQLite keeps a value larger than a page as a chain of
#: overflow pages, so fewer, larger pages cost less to write and to read back.
#: Measured here (docs/performance.md, "Session 10"): 48 MB of blocks inserted in
#: 0.03 s of CPU against 0.06-0.12 s with the default 4096-byte pages, read back in
#: 0.015 s against 0.04 s.  SQLite sets it only while the file is still empty
#: (SQLite documentation, "PRAGMA page_size"): an older store keeps its own.
PAGE_BYTES = 65536
_DAY = 86400

#: What a site configuration can set (``[history]`` table): the store's path, the
#: retention and the environment variable holding the key.
SETTINGS = {"path": None, "retention_days": DEFAULT_RETENTION_DAYS, "key_env": KEY_ENV}

#: A block's columns (layout 2): the keyed patient id as its 16 bytes (layout 1 kept
#: it as 32 hex digits), the collection time (seconds; UTC when ``zoned``), the
#: sample id as written, the stored fields.
BLOCK_SCHEMA = pa.schema([("patient", pa.binary(KEYED_BYTES)), ("t", pa.int64()),
                          ("zoned", pa.bool_()), ("sample", pa.string())]
                         + [(f, pa.float64()) for f in STORED_FIELDS])

_DDL = """
CREATE TABLE meta (name TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE runs (id INTEGER PRIMARY KEY, finished_at TEXT NOT NULL, tool_version TEXT,
                   settings TEXT, input_sha256 TEXT, panels_added INTEGER,
                   panels_already_stored INTEGER, earlier_panels_used INTEGER);
CREATE TABLE blocks (id INTEGER PRIMARY KEY, run_id INTEGER NOT NULL REFERENCES runs(id),
                     bucket TEXT NOT NULL, n INTEGER NOT NULL, tmin INTEGER NOT NULL,
                     tmax INTEGER NOT NULL, data BLOB NOT NULL);
CREATE INDEX blocks_time ON blocks (tmax, tmin);
CREATE INDEX blocks_bucket ON blocks (bucket);
CREATE TABLE latest (bucket TEXT PRIMARY KEY, n INTEGER NOT NULL, tmin INTEGER NOT NULL,
                     data BLOB NOT NULL);
"""
#: Layout 2 adds ``latest``: per bucket, one block of each stored patient's panels at
#: the patient's latest collection time (all of them when several share it), in the
#: order of their ids; a run reads these instead of every block in its time range.


class HistoryError(AcidBaseError):
    """The history store cannot be used (no key, another version, in use, not a store)."""


def site_key(value: str | bytes | None = None, env: str = KEY_ENV) -> bytes:
    """The site key: ``value``, else the environment variable ``env``; refused when
    absent or shorter than ``MIN_KEY_BYTES`` (patient ids are never stored plain)."""
    key = value if value is not None else os.environ.get(env)
    if not key:
        raise HistoryError(f"the history store needs the site key: set {env} (at least "
                           f"{MIN_KEY_BYTES} bytes); patient ids are never stored without it")
    raw = key.encode("utf-8") if isinstance(key, str) else bytes(key)
    if len(raw) < MIN_KEY_BYTES:
        raise HistoryError(f"the site key in {env} is {len(raw)} bytes; give at least "
                           f"{MIN_KEY_BYTES}")
    return raw


def hash_id(patient_id: str, key: bytes) -> str:
    """The stored form of one patient id: HMAC-SHA256 truncated to its first 128 bits,
    in hex (RFC 2104 section 5 allows truncation to at least half the output; 128
    bits leave a chance of two patients colliding of about n^2 / 2^129)."""
    return hmac.digest(key, patient_id.encode("utf-8"), hashlib.sha256)[:16].hex()


def hash_ids(ids: pa.Array | pa.ChunkedArray, key: bytes) -> pa.Array:
    """Patient ids -> their stored form in hex (each distinct id hashed once); a
    missing or blank id stays empty (it takes no part in the serial checks)."""
    enc = _distinct(ids)
    raw, blank = keyed_ids(enc.dictionary, key)
    return pc.fill_null(_hex(raw, blank).take(enc.indices), "")


def _distinct(ids: pa.Array | pa.ChunkedArray) -> pa.DictionaryArray:
    """The ids dictionary-encoded (one array of text)."""
    if isinstance(ids, pa.ChunkedArray):
        ids = ids.combine_chunks()
    if not (pa.types.is_string(ids.type) or pa.types.is_large_string(ids.type)):
        ids = pc.cast(ids, pa.string())
    return pc.dictionary_encode(ids)


def keyed_ids(words: pa.Array, key: bytes, one: _Hmac | None = None
              ) -> tuple[np.ndarray, np.ndarray]:
    """Each id of an Arrow text array as stored: its HMAC-SHA256 truncated to 16
    bytes (rows of an ``(n, 16)`` uint8 array), and whether it is blank (missing,
    empty or only white space as ``str.strip`` sees it: no hash, zeros).

    The compiled edge (``acidbase._idhash``) works on the array's buffers when it is
    built and not switched off (``ACIDBASE_PURE_PYTHON=1``); the Python code below it
    (``_Hmac``, hashlib) is the fallback and the reference (tests/test_idhash.py)."""
    n = len(words)
    raw = np.zeros((n, 16), dtype=np.uint8)
    blank = np.ones(n, dtype=np.uint8)
    if n == 0:
        return raw, blank.astype(bool)
    if _idhash is not None and not os.environ.get("ACIDBASE_PURE_PYTHON"):
        bufs = words.buffers()
        _idhash.hmac16(key, n, words.offset, bufs[0] if words.null_count else None,
                       bufs[1], bufs[2] if bufs[2] is not None else b"",
                       pa.types.is_large_string(words.type), raw, blank)
        return raw, blank.view(bool)
    one = one or _Hmac(key)
    for i, w in enumerate(words.to_pylist()):
        if w and w.strip():
            raw[i] = np.frombuffer(one.raw(w), dtype=np.uint8)
            blank[i] = 0
    return raw, blank.view(bool)


def _prefix(raw: np.ndarray) -> np.ndarray:
    """The first 64 bits of 16-byte hashes as unsigned integers (big-endian, as
    ``serial.hex_prefix64`` reads the hex digits)."""
    return np.ascontiguousarray(raw[:, :8]).view(">u8").ravel().astype(np.uint64)


_HEX_PAIRS = np.frombuffer(b"".join(b"%02x" % i for i in range(256)),
                           dtype=np.uint8).reshape(256, 2)


def _hex(raw: np.ndarray, blank: np.ndarray) -> pa.Array:
    """16-byte hashes as 32 hex digits ("" where blank), without a Python object each."""
    n = len(raw)
    width = np.where(blank, 0, 32).astype(np.int32)
    offsets = np.zeros(n + 1, dtype=np.int32)
    np.cumsum(width, out=offsets[1:])
    data = _HEX_PAIRS[raw[~blank]].reshape(-1)
    return pa.StringArray.from_buffers(n, pa.py_buffer(offsets), pa.py_buffer(data.tobytes()))


def _binary(raw: np.ndarray, blank: np.ndarray) -> pa.Array:
    """16-byte hashes as an Arrow ``fixed_size_binary(16)`` array, null where blank."""
    n = len(raw)
    valid = None
    if blank.any():
        valid = pa.py_buffer(np.packbits(~blank, bitorder="little").tobytes())
    return pa.FixedSizeBinaryArray.from_buffers(pa.binary(16), n, [
        valid, pa.py_buffer(np.ascontiguousarray(raw).tobytes())])


class _Hmac:
    """``hash_id`` for many ids: HMAC-SHA256 (RFC 2104 section 2) from the key's inner
    and outer hash states, copied per id (half the time of a one-shot call each).
    The fallback of the compiled ``acidbase._idhash`` and its reference."""

    def __init__(self, key: bytes) -> None:
        if len(key) > 64:  # longer than SHA-256's block: hashed first (RFC 2104)
            key = hashlib.sha256(key).digest()
        key = key.ljust(64, b"\0")
        self.inner = hashlib.sha256(bytes(b ^ 0x36 for b in key))
        self.outer = hashlib.sha256(bytes(b ^ 0x5C for b in key))

    def raw(self, patient_id: str) -> bytes:
        """The first 16 bytes of the HMAC (RFC 2104 section 5 truncation)."""
        i = self.inner.copy()
        i.update(patient_id.encode("utf-8"))
        o = self.outer.copy()
        o.update(i.digest())
        return o.digest()[:16]

    def __call__(self, patient_id: str) -> str:
        return self.raw(patient_id).hex()


@dataclass
class RunRecord:
    """What a run adds to the store, and the audit record kept beside its panels."""
    tool_version: str
    settings: Mapping[str, object]
    input_sha256: str
    added: int = 0
    already_stored: int = 0
    too_old: int = 0
    earlier_used: int = 0
    notes: list[str] = field(default_factory=list)


def file_sha256(path: str) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


class Store:
    """An open history store.  ``begin`` takes the write lock for a run; ``commit``
    adds its panels and audit record, ``rollback`` (or ``close``) adds nothing."""

    def __init__(self, path: str, key: bytes | None, retention_days: float =
                 DEFAULT_RETENTION_DAYS, timeout: float = BUSY_TIMEOUT_S,
                 create: bool = True) -> None:
        if not retention_days > 0:
            raise HistoryError("the history retention must be a positive number of days")
        self.path = str(path)
        self.key = key
        self.retention = float(retention_days) * _DAY
        self.timeout = timeout
        new = not os.path.exists(self.path)
        if new and not create:
            raise HistoryError(f"{self.path}: no such history store")
        if new:
            # Created by us, owner only, before SQLite writes a byte (its journal
            # files take the same mode).
            try:
                os.close(os.open(self.path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600))
            except FileExistsError:  # another run made it a moment ago: use it
                new = False
        if not new and os.path.getsize(self.path) > 0:
            with open(self.path, "rb") as f:
                if f.read(16) != b"SQLite format 3\x00":
                    raise HistoryError(f"{self.path} is not a history store")
        self.db = sqlite3.connect(self.path, timeout=timeout, isolation_level=None)
        self._in_run = False
        self._seen: list[tuple[np.ndarray, np.ndarray]] = []
        """This run's patients (hash prefixes) and each one's earliest time, by chunk."""
        self._hmac: _Hmac | None = None
        try:
            self._prepare()
        except BaseException:
            self.db.close()
            raise

    # -- layout and version -----------------------------------------------------
    def _prepare(self) -> None:
        tables = {r[0] for r in self.db.execute("SELECT name FROM sqlite_master WHERE type='table'")}
        if not tables:
            if self.key is None:
                raise HistoryError(f"{self.path}: an empty history store; a run with the "
                                   "site key creates it")
            self.db.execute(f"PRAGMA page_size = {PAGE_BYTES}")  # before the first table
            self._lock()
            try:
                tables = {r[0] for r in self.db.execute(
                    "SELECT name FROM sqlite_master WHERE type='table'")}
                if not tables:  # (unless another run made it while this one waited)
                    for statement in filter(str.strip, _DDL.split(";")):
                        self.db.execute(statement)
                    self.db.executemany("INSERT INTO meta VALUES (?, ?)", [
                        ("schema_version", str(SCHEMA_VERSION)),
                        ("key_check", self._key_check()), ("created_at", _now_text())])
                self.db.execute("COMMIT")
            except BaseException:
                self.db.execute("ROLLBACK")
                raise
            if not tables:
                return
        if "meta" not in tables:
            raise HistoryError(f"{self.path} is an SQLite file but not a history store")
        meta = dict(self.db.execute("SELECT name, value FROM meta"))
        version = int(meta.get("schema_version", "0"))
        if version > SCHEMA_VERSION:
            raise HistoryError(
                f"{self.path} was written by a later version of acidbase (store version "
                f"{version}; this version reads up to {SCHEMA_VERSION}); use that version, "
                "or a new store")
        if self.key is not None and meta.get("key_check") != self._key_check():
            raise HistoryError(f"{self.path} was made with another site key; this key would "
                               "match none of its patients")
        if version < SCHEMA_VERSION:
            self._migrate(version)

    def _migrate(self, version: int) -> None:
        """Bring an older store up to this layout in one transaction (all or nothing):
        from layout 1, each block's patient ids from hex text to their 16 bytes, and
        the ``latest`` table built from the blocks."""
        if version != 1:
            raise HistoryError(f"{self.path}: store version {version} cannot be read or "
                               f"migrated by this version (store version {SCHEMA_VERSION})")
        self._lock()
        try:
            now = int(dict(self.db.execute("SELECT name, value FROM meta")).get(
                "schema_version", "0"))
            if now == 1:  # (unless another run migrated it while this one waited)
                self._migrate_1_to_2()
                self.db.execute("UPDATE meta SET value = ? WHERE name = 'schema_version'",
                                (str(SCHEMA_VERSION),))
                self.db.execute("INSERT OR REPLACE INTO meta VALUES ('migrated_at', ?)",
                                (_now_text(),))
            self.db.execute("COMMIT")
        except (sqlite3.DatabaseError, pa.ArrowException, ValueError) as e:
            self.db.execute("ROLLBACK")
            raise HistoryError(
                f"{self.path}: this store (version 1) could not be brought to store version "
                f"{SCHEMA_VERSION} ({e}); it is unchanged: read it with the acidbase version "
                "that wrote it, or start a new store") from None
        except BaseException:
            if self.db.in_transaction:
                self.db.execute("ROLLBACK")
            raise

    def _migrate_1_to_2(self) -> None:
        self.db.execute("CREATE TABLE latest (bucket TEXT PRIMARY KEY, n INTEGER NOT NULL, "
                        "tmin INTEGER NOT NULL, data BLOB NOT NULL)")
        buckets = [r[0] for r in self.db.execute("SELECT DISTINCT bucket FROM blocks")]
        for bucket in sorted(buckets):  # one bucket's latest and one block in memory
            latest = None
            for (block_id,) in self.db.execute("SELECT id FROM blocks WHERE bucket = ? "
                                               "ORDER BY id", (bucket,)).fetchall():
                (data,) = self.db.execute("SELECT data FROM blocks WHERE id = ?",
                                          (block_id,)).fetchone()
                table = _decode(data)  # layout 1's hex ids read as 16 bytes
                self.db.execute("UPDATE blocks SET data = ? WHERE id = ?",
                                (_encode(table.combine_chunks()), block_id))
                latest = _latest(table if latest is None else pa.concat_tables([latest,
                                                                                  table]))
            if latest is not None:
                self._put_latest(bucket, latest)

    def _key_check(self) -> str:
        assert self.key is not None
        return hmac.digest(self.key, _KEY_LABEL, hashlib.sha256).hex()

    def _lock(self) -> None:
        try:
            self.db.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as e:
            if "locked" in str(e) or "busy" in str(e):
                raise HistoryError(f"the history store {self.path} is in use by another run "
                                   f"(waited {self.timeout:g} s); try again when it has "
                                   "finished") from None
            raise HistoryError(f"{self.path}: {e}") from None

    # -- a run ------------------------------------------------------------------
    def begin(self) -> None:
        """Take the write lock for a run (waits for another run up to the timeout)."""
        if self.key is None:
            raise HistoryError("a run needs the site key")
        self._lock()
        self._in_run = True

    def hash_ids(self, ids: pa.Array | pa.ChunkedArray,
                 seconds: np.ndarray | None = None) -> pa.Array:
        """The ids' stored form as 16 bytes each (``fixed_size_binary(16)``, null for a
        missing or blank id), remembering the run's patients and (with ``seconds``,
        the collection times) each one's earliest time."""
        if self.key is None:
            raise HistoryError("hashing patient ids needs the site key")
        if self._hmac is None:
            self._hmac = _Hmac(self.key)
        enc = _distinct(ids)
        raw, blank = keyed_ids(enc.dictionary, self.key, self._hmac)
        m = len(raw)
        # Each distinct id's earliest time, from the indices (a missing id: the last slot).
        idx = np.asarray(pc.fill_null(enc.indices, m).to_numpy(zero_copy_only=False),
                         dtype=np.int64)
        first = np.full(m + 1, np.iinfo(np.int64).max, dtype=np.int64)
        if seconds is not None:
            np.minimum.at(first, idx, np.asarray(seconds, dtype=np.int64))
        else:
            first[:] = np.iinfo(np.int64).min
        real = ~blank
        self._seen.append((_prefix(raw[real]), first[:-1][real]))
        return _binary(raw, blank).take(enc.indices)

    def earlier(self, lo: int, hi: int) -> Iterator[pa.Table]:
        """Stored panels collected from ``lo`` to ``hi`` (seconds), a block at a time.

        When the run has hashed its patients (``hash_ids``), only what its serial
        checks can use, in one pass: of each of its patients, the stored panels from
        the patient's first panel in the run on, and of those before it, each
        block's latest (the latest of all is the one that can be a neighbour; the
        checks leave the others aside).  Patients are matched on 64 bits of the
        hash here; the checks compare whole hashes."""
        if not self._seen:
            for table in self._blocks(lo, hi):
                yield table
            return
        pref = np.concatenate([p for p, _ in self._seen])
        first = np.concatenate([f for _, f in self._seen])
        self._seen = []
        order = np.lexsort((first, pref))
        pref, first = pref[order], first[order]
        head = np.concatenate([[True], pref[1:] != pref[:-1]])
        pref, first = pref[head], first[head]  # sorted; each patient's earliest time
        if len(pref) == 0:
            return
        # Each patient's latest stored panels, from the ``latest`` table: the one
        # before the patient's first panel here, unless the store has panels of the
        # patient from then on (a file read again, overlapping exports): those
        # patients are read from the blocks.
        again: list[np.ndarray] = []
        for d in np.unique(pref >> np.uint64(60)).tolist():
            got = self.db.execute("SELECT data FROM latest WHERE bucket = ?",
                                  (_DIGITS[d],)).fetchone()
            if got is None:
                continue
            table = _decode(got[0])
            p = prefix64(table["patient"])
            t = np.asarray(table["t"].to_numpy(), dtype=np.int64)
            at = np.minimum(np.searchsorted(pref, p), len(pref) - 1)
            mine = pref[at] == p
            before = mine & (t < first[at])
            if (mine & ~before).any():
                again.append(p[mine & ~before])
            keep = before & (t >= lo) & (t <= hi)
            if keep.any():
                yield table.filter(pa.array(keep))
        if again:
            yield from self._from_blocks(np.unique(np.concatenate(again)), pref, first, lo, hi)

    def _from_blocks(self, ids: np.ndarray, pref: np.ndarray, first: np.ndarray, lo: int,
                     hi: int) -> Iterator[pa.Table]:
        """Of the patients ``ids`` (sorted hash prefixes), the stored panels in ``lo`` to
        ``hi`` from each one's first panel here (``first``, by ``pref``) on, and the
        latest before it: read from the blocks of their buckets."""
        for bucket in sorted({_DIGITS[d] for d in (ids >> np.uint64(60)).tolist()}):
            # One sixteenth at a time (a patient's panels are all in one): a file read
            # again holds only that sixteenth's panels in memory.
            cur = self.db.execute("SELECT data FROM blocks WHERE bucket = ? AND tmax >= ? "
                                  "AND tmin <= ? ORDER BY id", (bucket, int(lo), int(hi)))
            parts = []
            for (data,) in cur:
                table = _decode(data)
                p = prefix64(table["patient"])
                t = np.asarray(table["t"].to_numpy(), dtype=np.int64)
                at = np.minimum(np.searchsorted(ids, p), len(ids) - 1)
                mine = (ids[at] == p) & (t >= lo) & (t <= hi)
                if mine.any():
                    parts.append(table.filter(pa.array(mine)))
            if not parts:
                continue
            table = pa.concat_tables(parts).combine_chunks()
            del parts
            p = prefix64(table["patient"])
            t = np.asarray(table["t"].to_numpy(), dtype=np.int64)
            at = np.searchsorted(pref, p)
            before = t < first[at]
            keep = ~before
            if before.any():  # each patient's latest before its first panel here
                latest = np.full(len(pref), np.iinfo(np.int64).min, dtype=np.int64)
                np.maximum.at(latest, at[before], t[before])
                keep |= before & (t == latest[at])
            yield table.filter(pa.array(keep))

    def _blocks(self, lo: int, hi: int, filtered: bool = True) -> Iterator[pa.Table]:
        """The blocks that overlap ``lo`` to ``hi``, each cut to that range (or whole:
        ``filtered=False``)."""
        cur = self.db.execute("SELECT data FROM blocks WHERE tmax >= ? AND tmin <= ?",
                              (int(lo), int(hi)))
        for (data,) in cur:
            table = _decode(data)
            if not filtered:
                yield table
                continue
            yield table.filter(pc.and_(pc.greater_equal(table["t"], lo),
                                       pc.less_equal(table["t"], hi)))

    def commit(self, panels: Iterator[pa.Table], record: RunRecord,
               now: float | None = None, hold: bool = False) -> RunRecord:
        """Add a run's new panels (columns of ``BLOCK_SCHEMA``, identity already
        checked against the store) and its audit record; prune; commit.  With
        ``hold``, everything but the commit: ``finish`` commits (once the run's
        outputs are in place), ``rollback`` or ``close`` adds nothing.

        Each table's blocks are encoded on a thread while the table before goes into
        the store, in the order the tables came.  (Encoding two tables at once on
        two threads, as well, put a 5M-row run's peak at 314 MB, above its 300 MB
        bound: docs/performance.md.)"""
        if not self._in_run:
            raise HistoryError("commit without begin")
        cutoff = int((time.time() if now is None else now) - self.retention)
        from concurrent.futures import ThreadPoolExecutor

        try:
            cur = self.db.execute(
                "INSERT INTO runs (finished_at, tool_version, settings, input_sha256, "
                "earlier_panels_used) VALUES (?, ?, ?, ?, ?)",
                (_now_text(), record.tool_version, json.dumps(record.settings, sort_keys=True),
                 record.input_sha256, record.earlier_used))
            run_id = cur.lastrowid
            with ThreadPoolExecutor(1, thread_name_prefix="acidbase-store") as pool:
                waiting = None  # the table before: (its buckets, its encoding)
                for table in panels:
                    table = self._fresh(table, cutoff, record)
                    if table.num_rows == 0:
                        continue
                    digits = _first_digit(table["patient"])
                    buckets = [_DIGITS[d] for d in np.unique(digits).tolist()]
                    if waiting is not None and set(buckets) & waiting[0]:
                        # a bucket's latest panels are read after the table before is in
                        self._put_prepared(run_id, waiting[1].result())
                        waiting = None
                    old = {}
                    for bucket in buckets:
                        got = self.db.execute("SELECT data FROM latest WHERE bucket = ?",
                                              (bucket,)).fetchone()
                        if got is not None:
                            old[bucket] = got[0]
                    job = pool.submit(_prepared, table, digits, old)
                    del table, old
                    if waiting is not None:
                        self._put_prepared(run_id, waiting[1].result())
                    waiting = (set(buckets), job)
                if waiting is not None:
                    self._put_prepared(run_id, waiting[1].result())
            self.db.execute("UPDATE runs SET panels_added = ?, panels_already_stored = ? "
                            "WHERE id = ?", (record.added, record.already_stored, run_id))
            self._prune(cutoff)
            if not hold:
                self.db.execute("COMMIT")
        except BaseException:
            self.rollback()
            raise
        self._in_run = hold
        return record

    def finish(self) -> None:
        """Commit a run held by ``commit(..., hold=True)``."""
        if not self._in_run:
            raise HistoryError("finish without a held commit")
        try:
            self.db.execute("COMMIT")
        except sqlite3.Error as e:
            self.rollback()
            raise HistoryError(f"{self.path}: {e}") from None
        except BaseException:
            self.rollback()
            raise
        self._in_run = False

    def rollback(self) -> None:
        if self._in_run or self.db.in_transaction:
            self.db.execute("ROLLBACK")
        self._in_run = False

    @staticmethod
    def _fresh(table: pa.Table, cutoff: int, record: RunRecord) -> pa.Table:
        """A table of new panels as stored: ids as 16 bytes, panels collected before
        ``cutoff`` left out (counted in ``record``), one record batch."""
        if not pa.types.is_fixed_size_binary(table.schema.field("patient").type):
            table = table.set_column(  # (hex ids, as layout 1 kept them)
                table.schema.get_field_index("patient"), "patient",
                keyed_binary(table["patient"]))
        old = pc.less(table["t"], cutoff)
        n_old = int(pc.sum(old).as_py() or 0)
        if n_old:  # (a copy only when there is something to leave out)
            record.too_old += n_old
            table = table.filter(pc.invert(old))
        record.added += table.num_rows
        # One record batch: a block of one batch is encoded and decoded several
        # times faster than one of the many chunks a run's partition comes in.
        return table.combine_chunks()

    def _put_prepared(self, run_id: int, prepared: list[_Prepared]) -> None:
        """Insert one table's blocks and replace its buckets' latest panels."""
        for p in prepared:
            self.db.execute("INSERT INTO blocks (run_id, bucket, n, tmin, tmax, data) "
                            "VALUES (?, ?, ?, ?, ?, ?)",
                            (run_id, p.bucket, p.n, p.tmin, p.tmax, p.block))
            self.db.execute("INSERT OR REPLACE INTO latest (bucket, n, tmin, data) "
                            "VALUES (?, ?, ?, ?)", (p.bucket, *p.latest))

    def _prune(self, cutoff: int) -> int:
        """Drop panels collected before ``cutoff``: whole blocks, or rewrite a block
        that straddles it."""
        gone = 0
        for (n,) in self.db.execute("SELECT n FROM blocks WHERE tmax < ?", (cutoff,)):
            gone += n
        self.db.execute("DELETE FROM blocks WHERE tmax < ?", (cutoff,))
        straddle = self.db.execute("SELECT id, data FROM blocks WHERE tmin < ?",
                                   (cutoff,)).fetchall()
        for block_id, data in straddle:
            table = _decode(data)
            keep = table.filter(pc.greater_equal(table["t"], cutoff))
            gone += table.num_rows - keep.num_rows
            self._replace(block_id, keep)
        # A patient whose latest panel is gone has no panel left.
        for bucket, data in self.db.execute("SELECT bucket, data FROM latest WHERE tmin < ?",
                                            (cutoff,)).fetchall():
            table = _decode(data)
            self._put_latest(bucket, table.filter(pc.greater_equal(table["t"], cutoff)))
        return gone

    def _put_latest(self, bucket: str, table: pa.Table) -> None:
        """Replace one bucket's block of latest panels (``_latest``'s order)."""
        if table.num_rows == 0:
            self.db.execute("DELETE FROM latest WHERE bucket = ?", (bucket,))
        else:
            self.db.execute("INSERT OR REPLACE INTO latest (bucket, n, tmin, data) "
                            "VALUES (?, ?, ?, ?)", (bucket, table.num_rows,
                                                    pc.min(table["t"]).as_py(),
                                                    _encode(table)))

    def _replace(self, block_id: int, table: pa.Table) -> None:
        if table.num_rows == 0:
            self.db.execute("DELETE FROM blocks WHERE id = ?", (block_id,))
        else:
            self.db.execute("UPDATE blocks SET n = ?, tmin = ?, tmax = ?, data = ? WHERE id = ?",
                            (table.num_rows, pc.min(table["t"]).as_py(),
                             pc.max(table["t"]).as_py(), _encode(table), block_id))

    # -- one patient ------------------------------------------------------------
    def patient(self, patient_id: str) -> pa.Table:
        """Every stored panel of one patient, oldest first."""
        h = self._hash(patient_id)
        parts = []
        for (data,) in self.db.execute("SELECT data FROM blocks WHERE bucket = ?",
                                       (h.hex()[0],)):
            table = _decode(data)
            parts.append(table.filter(_is(table["patient"], h)))
        if not parts:
            return BLOCK_SCHEMA.empty_table()
        return pa.concat_tables(parts).sort_by([("t", "ascending")])

    def purge(self, patient_id: str) -> int:
        """Remove one patient's panels (one transaction); how many were removed."""
        h = self._hash(patient_id)
        self._lock()
        removed = 0
        try:
            bucket = h.hex()[0]
            rows = self.db.execute("SELECT id, data FROM blocks WHERE bucket = ?",
                                   (bucket,)).fetchall()
            for block_id, data in rows:
                table = _decode(data)
                keep = table.filter(pc.invert(_is(table["patient"], h)))
                if keep.num_rows != table.num_rows:
                    removed += table.num_rows - keep.num_rows
                    self._replace(block_id, keep)
            got = self.db.execute("SELECT data FROM latest WHERE bucket = ?",
                                  (bucket,)).fetchone()
            if got is not None:
                table = _decode(got[0])
                self._put_latest(bucket, table.filter(pc.invert(_is(table["patient"], h))))
            self.db.execute("COMMIT")
        except BaseException:
            self.db.execute("ROLLBACK")
            raise
        return removed

    def prune(self, now: float | None = None) -> int:
        """Apply the retention period now; how many panels were removed."""
        self._lock()
        try:
            gone = self._prune(int((time.time() if now is None else now) - self.retention))
            self.db.execute("COMMIT")
        except BaseException:
            self.db.execute("ROLLBACK")
            raise
        return gone

    def _hash(self, patient_id: str) -> bytes:
        """One patient's stored id (16 bytes)."""
        if self.key is None:
            raise HistoryError("looking up a patient needs the site key")
        if not patient_id or not patient_id.strip():
            raise HistoryError("give a patient id")
        return bytes.fromhex(hash_id(patient_id, self.key))

    # -- what is in it ----------------------------------------------------------
    def summary(self) -> dict[str, object]:
        """Counts, the collection-date range and the runs recorded."""
        panels, tmin, tmax = self.db.execute(
            "SELECT COALESCE(SUM(n), 0), MIN(tmin), MAX(tmax) FROM blocks").fetchone()
        distinct = 0  # each patient is in one bucket's latest panels
        for (data,) in self.db.execute("SELECT data FROM latest"):
            distinct += len(_decode(data).column("patient").unique())
        runs = [dict(zip(("id", "finished_at", "tool_version", "input_sha256", "panels_added",
                          "panels_already_stored"), r)) for r in self.db.execute(
            "SELECT id, finished_at, tool_version, input_sha256, panels_added, "
            "panels_already_stored FROM runs ORDER BY id")]
        return {"path": self.path, "schema_version": SCHEMA_VERSION, "panels": int(panels),
                "patients": distinct, "first_collected": _stamp(tmin),
                "last_collected": _stamp(tmax), "retention_days": self.retention / _DAY,
                "runs": runs}

    def close(self) -> None:
        try:
            self.rollback()
        finally:
            self.db.close()


_DIGITS = "0123456789abcdef"


def _first_digit(hashes: pa.Array | pa.ChunkedArray) -> np.ndarray:
    """The first hex digit of each stored id (0 to 15): its block's bucket."""
    return (prefix64(hashes) >> np.uint64(60)).astype(np.int64)


def _is(ids: pa.ChunkedArray | pa.Array, h: bytes) -> pa.Array:
    """Which stored ids are ``h`` (16 bytes)."""
    return pc.fill_null(pc.equal(ids, pa.scalar(h, pa.binary(KEYED_BYTES))), False)


@dataclass(frozen=True)
class _Prepared:
    """One bucket's block of a run's new panels and its new latest panels, encoded."""

    bucket: str
    n: int
    tmin: int
    tmax: int
    block: memoryview
    latest: tuple[int, int, memoryview]  #: n, tmin, data


def _prepared(table: pa.Table, digits: np.ndarray,
              old: Mapping[str, bytes]) -> list[_Prepared]:
    """A table of new panels (``Store._fresh``) as one block per bucket (the first
    hex digit of the keyed id: ``digits``), each with its bucket's latest panels:
    those of ``old`` (the stored latest, by bucket) and the block's; the caller
    inserts them."""
    if not (digits[1:] >= digits[:-1]).all():  # (a run's partitions are one digit each)
        order = np.argsort(digits, kind="stable")
        table = table.take(pa.array(order))
        digits = digits[order]
    edges = np.r_[0, np.flatnonzero(np.diff(digits)) + 1, len(digits)]
    out = []
    for lo, hi in itertools.pairwise(edges):
        part = table.slice(lo, hi - lo)
        bucket = _DIGITS[digits[lo]]
        t = part["t"]
        got = old.get(bucket)
        latest = _latest(part if got is None else pa.concat_tables([_decode(got), part]))
        out.append(_Prepared(bucket, part.num_rows, pc.min(t).as_py(), pc.max(t).as_py(),
                             _encode(part), (latest.num_rows, pc.min(latest["t"]).as_py(),
                                             _encode(latest))))
    return out


def _latest(table: pa.Table) -> pa.Table:
    """Each patient's panels at the patient's latest time (all of them when several
    share it), in the order of their ids' first 64 bits (stable)."""
    if table.num_rows == 0:
        return table
    ids = table["patient"].combine_chunks()
    enc = pc.dictionary_encode(ids)
    pid = np.asarray(enc.indices.to_numpy(zero_copy_only=False), dtype=np.int64)
    t = np.asarray(table["t"].to_numpy(), dtype=np.int64)
    top = np.full(len(enc.dictionary), np.iinfo(np.int64).min, dtype=np.int64)
    np.maximum.at(top, pid, t)
    at = np.flatnonzero(t == top[pid])
    # One copy of the rows kept, taken in their final order (the memory of a store
    # commit is mostly these tables: docs/performance.md).
    order = at[np.argsort(prefix64(ids)[at], kind="stable")]
    return table.take(pa.array(order)).combine_chunks()


def _encode(table: pa.Table) -> memoryview:
    """A block's bytes (an Arrow IPC stream), handed to SQLite without a copy."""
    sink = pa.BufferOutputStream()
    opts = ipc.IpcWriteOptions(compression=_COMPRESSION)
    with ipc.new_stream(sink, table.schema, options=opts) as w:
        w.write_table(table)
    return memoryview(sink.getvalue())


def _decode(data: bytes) -> pa.Table:
    table = ipc.open_stream(pa.py_buffer(data)).read_all()
    if not pa.types.is_fixed_size_binary(table.schema.field("patient").type):
        # layout 1 (hex text), read once while migrating
        at = table.schema.get_field_index("patient")
        table = table.set_column(at, "patient", keyed_binary(table["patient"]))
    # Fields added to STORED_FIELDS later are missing from older blocks: NaN.
    for name in BLOCK_SCHEMA.names:
        if name not in table.column_names:
            table = table.append_column(name, pa.nulls(table.num_rows, pa.float64()))
    return table.select(BLOCK_SCHEMA.names)


def _codec() -> str | None:
    # LZ4 frame: about 2.4 times smaller blocks than none and decoded ten times
    # faster than zstd here (a 12,500-panel block: 0.8 ms against 4 ms).
    for name in ("lz4", "zstd"):
        if pa.Codec.is_available(name):
            return name
    return None


_COMPRESSION = _codec()


def _now_text() -> str:
    return _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def _stamp(t: int | None) -> str | None:
    if t is None:
        return None
    return _dt.datetime.fromtimestamp(int(t), _dt.UTC).strftime("%Y-%m-%dT%H:%MZ")


def earlier_panels(store: str, patient_id: str, key: str | bytes | None = None,
                   before: str | _dt.datetime | None = None) -> list[dict[str, object]]:
    """One patient's stored panels, oldest first, as dictionaries (``collected_at``
    as ISO 8601, ``sample_id``, then the stored fields; NaN where not measured);
    only those collected before ``before`` when given.  Read-only: for the app."""
    s = Store(store, site_key(key), create=False)
    try:
        table = s.patient(patient_id)
    finally:
        s.close()
    if before is not None:
        when = before if isinstance(before, _dt.datetime) else _dt.datetime.fromisoformat(
            str(before))
        if when.tzinfo is None:  # a time without an offset is read as UTC
            when = when.replace(tzinfo=_dt.UTC)
        table = table.filter(pc.less(table["t"], int(when.timestamp())))
    return table_rows(table)


def table_rows(table: pa.Table) -> list[dict[str, object]]:
    """Stored panels as dictionaries: ``collected_at`` (ISO 8601; ``Z`` when the time
    had an offset, compared in UTC), ``sample_id``, the stored fields (NaN where not
    measured)."""
    out = []
    for r in table.to_pylist():
        stamp = _dt.datetime.fromtimestamp(r["t"], _dt.UTC)
        text = stamp.strftime("%Y-%m-%dT%H:%M:%S") + ("Z" if r["zoned"] else "")
        row: dict[str, object] = {"collected_at": text, "sample_id": r["sample"]}
        row.update({f: (float("nan") if r[f] is None else r[f]) for f in STORED_FIELDS})
        out.append(row)
    return out


# -- the batch run's use of the store (kept here so that batch.py only calls) --------
def open_for_run(path: str, retention_days: float = DEFAULT_RETENTION_DAYS,
                 key: str | bytes | None = None, key_env: str = KEY_ENV) -> Store:
    """Open (or create) the store for a batch run and take its write lock; the key is
    ``key``, else the environment variable ``key_env`` (a site configuration's
    ``[history]`` settings map onto these arguments: see ``SETTINGS``)."""
    store = Store(path, site_key(key, key_env), retention_days)
    try:
        store.begin()
    except BaseException:
        store.close()
        raise
    return store


def feed_earlier(store: Store, checker) -> int:
    """Give the checker the stored panels of its time range, widened by the window
    before it; how many were read."""
    if checker.tmin is None:
        return 0
    read = 0
    for table in store.earlier(int(checker.tmin - checker.window), int(checker.tmax)):
        read += table.num_rows
        checker.add_earlier(table)
    return read


def run_settings(settings: Mapping[str, object], checker, store: Store) -> dict[str, object]:
    """The run's settings for its record, with the window, the delta limits and the
    retention the run used, wherever they were set (option, site configuration or
    default): an option left unset is None in ``settings``."""
    used = dict(settings)
    used["window_hours"] = checker.window / 3600.0
    delta: dict[str, float | None] = {f: None for f in STORED_FIELDS}  # None: switched off
    delta.update({r.field: r.limit for r in checker.rules})
    used["delta"] = delta
    used["history_retention_days"] = store.retention / _DAY
    return used


def commit_run(store: Store, checker, input_path: str, settings: Mapping[str, object],
               input_sha256: str | None = None, hold: bool = False) -> str:
    """Add the run's new panels with its audit record; the summary's line.
    ``input_sha256``: the input's SHA-256 when the run has it already (read again
    otherwise).  ``hold``: as ``Store.commit``'s (``store.finish()`` commits)."""
    from . import __version__

    known = checker.known & checker.interpreted
    record = RunRecord(tool_version=__version__, settings=run_settings(settings, checker, store),
                       input_sha256=input_sha256 or file_sha256(input_path),
                       already_stored=int(np.count_nonzero(known)),
                       earlier_used=checker.earlier_used)
    store.commit(checker.new_panels(), record, hold=hold)
    line = (f"history store: {record.earlier_used:,} earlier panels compared; "
            f"{record.added:,} panels added; {record.already_stored:,} already stored "
            "(same patient, time and sample id), not added again")
    if record.too_old:
        line += (f"; {record.too_old:,} collected before the retention period "
                 f"({store.retention / _DAY:g} days), not added")
    return line


__all__ = [
    "DEFAULT_RETENTION_DAYS",
    "KEY_ENV",
    "SCHEMA_VERSION",
    "SETTINGS",
    "HistoryError",
    "RunRecord",
    "Store",
    "commit_run",
    "earlier_panels",
    "feed_earlier",
    "hash_id",
    "hash_ids",
    "open_for_run",
    "site_key",
    "table_rows",
]


# --- the terminal app's use of the store ---------------------------------------------
# ``acidbase tui --history PATH``, one panel at a time: the app reads a patient's
# stored panels with ``earlier_panels``, checks the panel on its form against them
# with ``check_against_earlier`` (the batch's own ``SerialChecker``: the panel is a
# file of one row, the stored panels its earlier neighbours, so the rules, limits
# and words are the batch's), and keeps a panel with ``keep_panel`` (one
# transaction with its audit record, as a batch run's).
from .serial import DEFAULT_WINDOW_HOURS as _WINDOW_HOURS  # noqa: E402

@dataclass(frozen=True)
class PanelCheck:
    """The serial checks of one panel against a patient's stored panels."""

    status: str
    """The batch's ``serial_status`` text ("within limits", "flagged", "not assessable: ...")."""
    codes: str
    """The batch's ``serial_codes`` (``SERIAL-DELTA-NA;SERIAL-BREAK``), "" when none."""
    detail: str
    """The batch's ``serial_detail``: each flag in words, the stored panel named by time."""
    within: list[dict[str, object]]
    """The stored panels within the serial window of the panel's time (before or after
    it; of the window before now when the panel has no usable time), oldest first, in
    ``earlier_panels``' form; those on the other clock (offset or none) left out."""
    already_stored: bool = False
    """A stored panel has this panel's time and sample id: it is this panel, kept before."""
    other_clock: int = 0
    """Stored panels left out: their time has an offset and the panel's has none, or the
    other way round (not comparable, as within one batch file)."""
    window_hours: float = _WINDOW_HOURS


def _stored_table(rows: list[Mapping[str, object]]) -> pa.Table:
    """``earlier_panels`` rows back as the checker's earlier columns (one patient)."""
    from .files.times import TIME_NAIVE, TIME_ZONED, parse_times

    secs, kind = parse_times(pa.array([str(r.get("collected_at") or "") for r in rows],
                                      pa.string()))
    ok = (kind == TIME_NAIVE) | (kind == TIME_ZONED)
    cols: dict[str, object] = {
        "patient": pa.array(["p"] * len(rows), pa.string()), "t": pa.array(secs, pa.int64()),
        "zoned": pa.array(kind == TIME_ZONED), "sample": pa.array(
            [None if r.get("sample_id") in (None, "") else str(r["sample_id"]) for r in rows],
            pa.string())}
    for f in STORED_FIELDS:
        cols[f] = pa.array([_number(r.get(f)) for r in rows], pa.float64())
    return pa.table(cols).filter(pa.array(ok))


def _number(value: object) -> float:
    try:
        return float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return float("nan")


def check_against_earlier(values: Mapping[str, object], collected_at: str | None,
                          earlier: list[Mapping[str, object]], sample_id: str | None = None,
                          deltas: Mapping[str, float | None] | None = None,
                          window_hours: float | None = None,
                          now: _dt.datetime | None = None) -> PanelCheck:
    """One panel (``values`` in canonical units, as ``Panel.canonical()`` gives them)
    against one patient's stored panels (``earlier``, as ``earlier_panels`` returns
    them), by the batch's serial checks with the laboratory's ``deltas`` and window.

    ``deltas`` and ``window_hours`` are a site's (``config.Site.deltas``,
    ``config.Site.window_hours``); the defaults are the batch's.
    """
    from . import serial
    from .files.times import TIME_NAIVE, TIME_ZONED, parse_times

    window = _WINDOW_HOURS if window_hours is None else float(window_hours)
    checker = serial.SerialChecker(serial.rules_with(deltas), window)
    try:
        secs, kind = parse_times(pa.array([collected_at or ""], pa.string()))
        usable = kind[0] in (TIME_NAIVE, TIME_ZONED)
        vals = {f: np.array([_number(values.get(f))]) for f in checker.fields}
        checker.add(np.array(["p"], dtype=object), secs, kind, vals,
                    pa.array([sample_id or None], pa.string()))
        stored = _stored_table(list(earlier))
        zoned = bool(kind[0] == TIME_ZONED) if usable else None
        if usable:
            same = np.asarray(stored["zoned"].to_numpy(zero_copy_only=False)) == zoned
            other = int(np.count_nonzero(~same))
        else:  # no time to place the panel: the window before now, on either clock
            other = 0
        checker.add_earlier(stored)
        checker.finish()
        cols = checker.columns(0, 1)
        known = bool(checker.known[0])
    finally:
        checker.close()
    t = np.asarray(stored["t"].to_numpy(), dtype=np.int64)
    z = np.asarray(stored["zoned"].to_numpy(zero_copy_only=False), dtype=bool)
    if usable:
        near = (z == zoned) & (np.abs(t - int(secs[0])) <= window * 3600.0)
    else:
        clock = now or _dt.datetime.now().astimezone()
        utc = int(clock.timestamp())
        wall = int(clock.replace(tzinfo=_dt.UTC).timestamp())  # the local wall clock
        at = np.where(z, utc, wall)
        near = (t <= at) & (at - t <= window * 3600.0)
    within = table_rows(stored.filter(pa.array(near)).sort_by([("t", "ascending")]))
    return PanelCheck(str(cols["serial_status"][0]), str(cols["serial_codes"][0]),
                      str(cols["serial_detail"][0]), within, known, other, window)


@dataclass(frozen=True)
class KeptPanel:
    """What ``keep_panel`` did."""

    added: bool
    """The panel was added (False: already stored, or collected before the retention)."""
    already_stored: bool = False
    too_old: bool = False
    retention_days: float = DEFAULT_RETENTION_DAYS


def keep_panel(path: str, patient_id: str, values: Mapping[str, object], collected_at: str,
               sample_id: str | None = None, *, key: str | bytes | None = None,
               key_env: str = KEY_ENV, settings: Mapping[str, object] | None = None,
               retention_days: float = DEFAULT_RETENTION_DAYS, timeout: float = 5.0,
               now: float | None = None) -> KeptPanel:
    """Add one panel to the store (creating it, owner-only, when new), in one
    transaction with an audit record as a batch run's: the tool version, the
    ``settings`` in force, and as ``input_sha256`` the SHA-256 of the panel as kept
    (hashed patient, time, sample id, values; no plain id).  A panel with the
    patient, time and sample id of a stored one is not added again.  Waits
    ``timeout`` seconds for a batch run that holds the store, then refuses."""
    from . import __version__
    from .files.times import TIME_NAIVE, TIME_ZONED, parse_times

    secs, kind = parse_times(pa.array([collected_at or ""], pa.string()))
    if kind[0] not in (TIME_NAIVE, TIME_ZONED):
        raise HistoryError("a panel is kept in the store only with its collection time "
                           "(ISO 8601, e.g. 2026-12-02T08:40)")
    if not patient_id or not patient_id.strip():
        raise HistoryError("a panel is kept in the store only with a patient id")
    store = Store(path, site_key(key, key_env), retention_days, timeout=timeout)
    try:
        store.begin()
        sample = sample_id or None
        mine = store.patient(patient_id)
        same = mine.filter(pc.equal(mine["t"], int(secs[0])))
        if any((s or None) == sample for s in same["sample"].to_pylist()):
            store.rollback()
            return KeptPanel(False, already_stored=True, retention_days=retention_days)
        row: dict[str, list] = {"patient": [bytes.fromhex(hash_id(patient_id, store.key))],
                                "t": [int(secs[0])], "zoned": [bool(kind[0] == TIME_ZONED)],
                                "sample": [sample]}
        row.update({f: [_number(values.get(f))] for f in STORED_FIELDS})
        table = pa.Table.from_pydict(row, schema=BLOCK_SCHEMA)
        digest = hashlib.sha256(json.dumps(  # (the patient's stored id in hex)
            {k: (None if isinstance(v[0], float) and v[0] != v[0] else
                 v[0].hex() if isinstance(v[0], bytes) else v[0])
             for k, v in row.items()}, sort_keys=True).encode("utf-8")).hexdigest()
        record = RunRecord(tool_version=__version__,
                           settings={"surface": "acidbase tui", **dict(settings or {})},
                           input_sha256=digest)
        store.commit(iter([table]), record, now=now)
    finally:
        store.close()
    return KeptPanel(record.added > 0, too_old=record.too_old > 0,
                     retention_days=retention_days)


__all__ += ["KeptPanel", "PanelCheck", "check_against_earlier", "keep_panel"]
