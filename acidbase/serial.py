"""Serial checks: each panel against the same patient's neighbouring panels.

Two checks, over every patient with a ``patient_id`` and a ``collected_at``:

* **delta** (``SERIAL-DELTA-<FIELD>``): the change of a value from the
  patient's previous panel within the window is larger than the field's limit.
  It is flagged on the later panel, as laboratories flag a new result against
  the previous one.  The method -- a fixed absolute limit within a fixed time
  window -- is the "delta difference" of the delta-check literature (Park SH,
  Kim SY, Lee W, Chun S, Min WK, "New decision criteria for selecting delta
  check methods...", Ann Lab Med 2012;32:345-354, doi:10.3343/alm.2012.32.5.345;
  Randell EW, Yenice S, "Delta checks in the clinical laboratory", Crit Rev Clin
  Lab Sci 2019, doi:10.1080/10408363.2018.1540536) [park_2012, randell_2019].  The limits themselves are
  common laboratory practice, no source: laboratories set their own, and can
  here (``--delta FIELD=LIMIT``).
* **series break** (``SERIAL-BREAK``): a panel whose value jumps away from the
  previous panel and back again at the next one (both changes beyond the
  limit, in opposite directions) while the panels either side agree within the
  limit.  The pattern of a sample from another patient or a contaminated
  (diluted, drip-arm) sample; common laboratory practice, no source.

The file need not be sorted.  Design (two passes over the file, memory bounded):
the first pass keeps, for each row with a patient and a time, only the row
number, the patient id, the time, the sample id and the few delta fields,
spilled to temporary Arrow files partitioned by a hash of the patient id.  Each
partition is then sorted by (patient, time, row) and checked on its own in
column operations (``finish(workers=N)``: N partitions at a time, on threads):
neighbours are compared as shifted arrays, and the text of the flagged rows is
assembled with Arrow string kernels (each distinct number is formatted once;
with ``detail_rows``, each partition sets aside what its first flagged rows need and
the file's first are worded once, after the last partition).  That text is
spilled again, to files by row range, and read back one range at a time when the
batch writes those rows.  What stays in memory for the whole file is one byte of
status per row; N partitions, and one or two row ranges of flagged text, are in
memory at a time.

Earlier panels (a history store, ``acidbase.history``) join the partitions as
rows with negative row numbers: they are neighbours of this file's panels but
are never flagged or written themselves, and one with the sample id and time of
a panel of this file is that panel stored by an earlier run, so it is left out.
"""

from __future__ import annotations

import math
import os
import threading
from collections import OrderedDict
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass

from typing import TYPE_CHECKING

import numpy as np

from .fields import BY_NAME
from .files import scratch

if TYPE_CHECKING:
    import pyarrow as pa
    import pyarrow.compute as pc
    from pyarrow import ipc
else:  # imported on first use: the batch parser reads this module's defaults
    from ._arrow import ipc, pa, pc

SOURCE_PRACTICE = "common laboratory practice, no source"


@dataclass(frozen=True)
class DeltaRule:
    field: str
    limit: float
    """Largest change (canonical unit of the field) not flagged within the window."""
    source: str = SOURCE_PRACTICE

    @property
    def code(self) -> str:
        return f"SERIAL-DELTA-{self.field.upper()}"


#: Default delta limits, canonical units; all common laboratory practice, no
#: source (each laboratory sets its own).  pH and pCO2 change within minutes
#: with ventilation, so their limits are wide and flag only gross jumps.
DELTA_RULES: tuple[DeltaRule, ...] = (
    DeltaRule("ph", 0.20),       # pH units
    DeltaRule("pco2", 20.0),     # mm[Hg]
    DeltaRule("hco3", 8.0),      # mmol/L
    DeltaRule("na", 10.0),       # mmol/L
    DeltaRule("k", 1.0),         # mmol/L
    DeltaRule("cl", 10.0),       # mmol/L
    DeltaRule("glucose", 10.0),  # mmol/L
    DeltaRule("ica", 0.30),      # mmol/L
    DeltaRule("hb", 3.0),        # g/dL
)

#: Panels further apart than this are not compared (hours); common laboratory
#: practice, no source.
DEFAULT_WINDOW_HOURS = 24.0

CODE_BREAK = "SERIAL-BREAK"

# Per-row status codes and their text in the ``serial_status`` column.
NO_ID, BAD_TIME, MIXED_ZONE, ALONE, WITHIN, FLAGGED = range(6)
STATUS_TEXT = (
    "not assessable: no patient_id or collected_at",
    "not assessable: collected_at is not an ISO 8601 date-time",
    "not assessable: collected_at has no time-zone offset while other rows have one",
    "not assessable: no other panel of this patient within the window",
    "within limits",
    "flagged",
)

COLUMNS: tuple[str, ...] = ("serial_status", "serial_codes", "serial_detail")


def rules_with(overrides: Mapping[str, float | None] | None = None) -> tuple[DeltaRule, ...]:
    """The default rules with a laboratory's own limits (None switches a field off)."""
    overrides = dict(overrides or {})
    out = []
    seen = set()
    for r in DELTA_RULES:
        seen.add(r.field)
        if r.field in overrides:
            lim = overrides[r.field]
            if lim is not None:
                out.append(DeltaRule(r.field, float(lim), "set by the laboratory (--delta)"))
        else:
            out.append(r)
    for f, lim in overrides.items():
        if f not in seen and lim is not None:
            out.append(DeltaRule(f, float(lim), "set by the laboratory (--delta)"))
    return tuple(out)


def _fmt(x: float) -> str:
    return f"{x:.3g}" if abs(x) < 10 else f"{x:.4g}"


def _hours(seconds: float) -> str:
    h = seconds / 3600.0
    return f"{h:.1f} h" if h >= 0.1 else f"{seconds / 60.0:.0f} min"


#: The fields kept for every panel with a patient and a time (the default delta
#: fields): what the history store keeps, whatever limits a run sets.
STORED_FIELDS: tuple[str, ...] = tuple(r.field for r in DELTA_RULES)

#: Text rows kept per spill file (at most ``_MAX_BUCKETS`` files).
_BUCKET_ROWS = 1 << 16
#: Rows of the first pass gathered before they are spilled to the partitions: fewer,
#: larger writes (a 1M-row file in 8 spills, not one a chunk; about 15 MB held).
_SPILL_ROWS = 1 << 17
_MAX_BUCKETS = 64


class SerialChecker:
    """Collects rows (first pass), then checks each patient's series.

    ``keep=True`` keeps the first pass's files until ``close`` so that the run's
    panels can be read back (``panels``) to be stored for later runs;
    ``hashed_ids=True`` says the patient ids given are the store's keyed hashes:
    16 bytes each (``fixed_size_binary(16)``, null for no id), or their hex text.
    """

    def __init__(self, rules: Sequence[DeltaRule] = DELTA_RULES,
                 window_hours: float = DEFAULT_WINDOW_HOURS, partitions: int = 1,
                 workdir: str | None = None, keep: bool = False,
                 hashed_ids: bool = False, detail_rows: int | None = None) -> None:
        if not window_hours > 0:
            raise ValueError("the serial window must be a positive number of hours")
        self.detail_rows = detail_rows
        """None: every flagged row's detail sentence.  A number N: the sentence only
        for the first N flagged rows of the file (by row number), "" for the others,
        whose codes are still given: what a batch needs when it writes no
        ``serial_detail`` column and lists at most N rows for review.  (Every
        flagged row needs review, so the first N rows listed are among the first N
        flagged ones.  Each partition sets aside what its own first N need, a set
        that holds them, and ``finish`` words the file's first N in one go.)"""
        self._to_word: list[_Neighbours] = []  # (detail_rows) set aside by partitions
        self._worded: tuple[np.ndarray, pa.Array] | None = None  # rows, their sentences
        self.rules = tuple(rules)
        self.window = float(window_hours) * 3600.0
        self.k = max(1, int(partitions))
        self.fields = tuple(dict.fromkeys([*STORED_FIELDS, *(r.field for r in self.rules)]))
        self.keep = keep
        self.hashed_ids = hashed_ids
        """Patient ids are the history store's keyed hashes: kept as 16 bytes,
        partitioned by their first 64 bits, with no Python call per id, into a
        multiple of 16 partitions."""
        if hashed_ids:
            self.k = 16 * -(-self.k // 16)
        # Marked as in use for the run's life: a later run removes it if this one is
        # killed (SIGKILL) before its clean-up (acidbase.files.scratch).
        self._tmp = scratch.ScratchFolder(scratch.SERIAL, workdir)
        self.schema = pa.schema(
            [("row", pa.int64()), ("patient", pa.binary(KEYED_BYTES) if hashed_ids
                                         else pa.string()),
             ("t", pa.int64()),
             ("zoned", pa.bool_()), ("sample", pa.string())]
            + [(f, pa.float64()) for f in self.fields])
        # This file's rows ("p") and earlier panels ("e"), each by partition.
        self._writers: dict[tuple[str, int], ipc.RecordBatchFileWriter] = {}
        self._gathered: list[pa.Table] = []  # this file's rows not yet spilled (``add``)
        self._gathered_rows = 0
        self._status: list[np.ndarray] = []
        self._n = 0
        self._naive = self._zoned = 0
        self._earlier = 0
        self.tmin: int | None = None
        self.tmax: int | None = None
        """Earliest and latest collection time of this file's usable panels (seconds)."""
        self.interpreted: np.ndarray | None = None
        """Per row, set by the second pass: the panel was interpreted (not refused)."""
        self.status: np.ndarray | None = None
        self.known: np.ndarray | None = None
        """Per row: a panel with this patient, time and sample id was already stored."""
        self.earlier_used = 0
        """Earlier panels (``add_earlier``) that took part in the checks."""
        self._bucket_rows = _BUCKET_ROWS
        self._texts: dict[int, str] = {}
        self._cache: OrderedDict[int, tuple[np.ndarray, pa.Array, pa.Array]] = OrderedDict()
        self._lock = threading.Lock()

    @staticmethod
    def partitions_for(size_bytes: int) -> int:
        """About 16 MB of input per partition (at most 256 partitions)."""
        return int(min(256, max(1, math.ceil(size_bytes / (16 << 20)))))

    # -- first pass -----------------------------------------------------------
    def add(self, patient: pa.Array | np.ndarray, seconds: np.ndarray, kind: np.ndarray,
            values: Mapping[str, np.ndarray], sample: pa.Array | np.ndarray | None = None) -> None:
        """Add the next chunk of rows (in file order).

        ``patient`` object array (None when absent); ``seconds`` and ``kind`` from
        ``fileio.parse_times``; ``values`` in canonical units, NaN when not usable.
        """
        from .files.times import TIME_INVALID, TIME_NAIVE, TIME_ZONED

        n = len(patient)
        first = self._n
        self._n += n
        if self.hashed_ids:
            pat_all = keyed_binary(patient)
            has_id = _mask(pc.is_valid(pat_all))
        else:
            pat_all = _strings(patient)
            has_id = _mask(pc.not_equal(pc.utf8_trim_whitespace(pat_all), ""))
        status = np.full(n, NO_ID, dtype=np.uint8)
        status[has_id & (kind == TIME_INVALID)] = BAD_TIME
        usable = has_id & ((kind == TIME_NAIVE) | (kind == TIME_ZONED))
        status[usable] = ALONE
        self._status.append(status)
        self._naive += int(np.count_nonzero(usable & (kind == TIME_NAIVE)))
        self._zoned += int(np.count_nonzero(usable & (kind == TIME_ZONED)))
        if not usable.any():
            return
        idx = np.flatnonzero(usable)
        lo, hi = int(seconds[idx].min()), int(seconds[idx].max())
        self.tmin = lo if self.tmin is None else min(self.tmin, lo)
        self.tmax = hi if self.tmax is None else max(self.tmax, hi)
        take = pa.array(idx)
        samp = (_strings(sample).take(take) if sample is not None
                else pa.nulls(len(idx), pa.string()))
        cols = [pa.array(idx + first), pat_all.take(take), pa.array(seconds[idx]),
                pa.array(kind[idx] == TIME_ZONED), samp]
        for f in self.fields:
            v = values.get(f)
            cols.append(pa.array(np.asarray(v, dtype=np.float64)[idx]) if v is not None
                        else pa.nulls(len(idx), pa.float64()))
        self._gathered.append(pa.table(cols, schema=self.schema))
        self._gathered_rows += len(idx)
        if self._gathered_rows >= _SPILL_ROWS:
            self._spill_gathered()

    def _spill_gathered(self) -> None:
        """Spill the rows ``add`` has gathered, in file order."""
        if self._gathered:
            table = pa.concat_tables(self._gathered).combine_chunks()
            self._gathered, self._gathered_rows = [], 0
            self._spill(table, "p")

    def add_earlier(self, table: pa.Table) -> None:
        """Add panels stored by earlier runs: columns ``patient``, ``t``, ``zoned``,
        ``sample`` and any of ``fields`` (a field not given is missing).  They are
        neighbours of this file's panels, never flagged or written."""
        n = table.num_rows
        if n == 0:
            return
        rows = -1 - (self._earlier + np.arange(n, dtype=np.int64))
        self._earlier += n
        names = set(table.column_names)
        cols = [pa.array(rows)]
        for name, typ in zip(self.schema.names[1:], self.schema.types[1:]):
            cols.append(table[name].cast(typ) if name in names else pa.nulls(n, typ))
        self._spill(pa.table(cols, schema=self.schema), "e")

    def _spill(self, table: pa.Table, kind: str) -> None:
        """Append rows to the partition files, by a hash of the patient."""
        if self.k > 1:
            if self.hashed_ids:
                part = self._hash_partition(prefix64(table["patient"]))
            else:
                enc = pc.dictionary_encode(table["patient"]).combine_chunks()
                buckets = np.array([hash(s) % self.k for s in enc.dictionary.to_pylist()],
                                   dtype=np.int64)
                part = buckets[np.asarray(enc.indices.to_numpy(zero_copy_only=False))]
            if not (part[1:] >= part[:-1]).all():  # (a stored block: one partition)
                order = np.argsort(part, kind="stable")
                table = table.take(pa.array(order))
                part = part[order]
            bounds = np.searchsorted(part, np.arange(self.k + 1))
        else:
            bounds = np.array([0, table.num_rows])
        for b in range(self.k):
            lo, hi = bounds[b], bounds[b + 1]
            if hi > lo:
                w = self._writers.get((kind, b))
                if w is None:
                    w = ipc.new_file(self._part_path(b, kind), self.schema)
                    self._writers[kind, b] = w
                w.write_table(table.slice(lo, hi - lo))

    def _hash_partition(self, prefix: np.ndarray) -> np.ndarray:
        """The partition of keyed ids from their first 64 bits: with 16 or more
        partitions, a partition holds ids of one first hex digit only (the history
        store's block bucket), so that its panels are stored without a re-sort."""
        if self.k >= 16:
            per = self.k // 16  # partitions per digit
            return ((prefix >> np.uint64(60)) * np.uint64(per)
                    + prefix % np.uint64(per)).astype(np.int64)
        return (prefix % np.uint64(self.k)).astype(np.int64)

    def _part_path(self, b: int, kind: str = "p") -> str:
        return os.path.join(self._tmp.name, f"{kind}{b}.arrow")

    def _read_part(self, b: int, kind: str) -> pa.Table | None:
        path = self._part_path(b, kind)
        if not os.path.exists(path):
            return None
        with pa.memory_map(path) as src:
            return ipc.open_file(src).read_all()

    # -- checks -----------------------------------------------------------------
    def finish(self, workers: int = 1) -> None:
        """Check every partition; afterwards ``columns`` answers by row number.

        ``workers`` > 1 checks that many partitions at a time on threads (numpy's
        sorts and Arrow's kernels let go of the interpreter lock); a patient is in
        one partition, so each writes rows of its own, and their flagged text is
        spilled here, in partition order: the same files whatever the workers."""
        status = np.concatenate(self._status) if self._status else np.zeros(0, dtype=np.uint8)
        self._status = []
        self.known = np.zeros(len(status), dtype=bool)
        self.twins = np.zeros(len(status), dtype=bool)
        self._bucket_rows = max(_BUCKET_ROWS, -(-self._n // _MAX_BUCKETS))
        spill: dict[int, ipc.RecordBatchFileWriter] = {}
        self._spill_gathered()
        for w in self._writers.values():
            w.close()
        self._writers = {}
        pool = None
        try:
            if workers > 1 and self.k > 1:
                from concurrent.futures import ThreadPoolExecutor

                pool = ThreadPoolExecutor(workers, thread_name_prefix="acidbase-serial")
                # ``workers`` partitions in hand at a time: memory stays bounded.
                found = _ahead(pool, self._check_partition, range(self.k), status, workers)
            else:
                found = (self._check_partition(b, status) for b in range(self.k))
            for got in found:
                if got is not None:
                    self._spill_text(*got, spill)
        finally:
            if pool is not None:
                pool.shutdown(wait=True, cancel_futures=True)
            for w in spill.values():
                w.close()
        self.status = status
        self.interpreted = np.zeros(len(status), dtype=bool)
        if self._to_word and self.detail_rows:
            self._worded = _word_first(self.rules, self._to_word, self.detail_rows)
        self._to_word = []

    def _check_partition(self, b: int, status: np.ndarray
                         ) -> tuple[np.ndarray, pa.Array, pa.Array] | None:
        """Check partition ``b`` (this file's rows and the earlier panels that join
        them): its rows' status set in ``status``; its flagged rows and their text."""
        parts = [t for t in (self._read_part(b, "p"), self._read_part(b, "e"))
                 if t is not None]
        if not parts:
            return None
        table = pa.concat_tables(parts) if len(parts) > 1 else parts[0]
        del parts
        row = np.asarray(table["row"].to_numpy(), dtype=np.int64)
        pid = _codes(table["patient"])
        if (row < 0).any() or self.keep:
            keep = self._identities(table, pid, row)
            if keep is not None:
                table, row, pid = table.filter(pa.array(keep)), row[keep], pid[keep]
        zoned = np.asarray(table["zoned"].to_numpy(zero_copy_only=False), dtype=bool)
        earlier = row < 0
        drop = earlier & (zoned != (self._zoned > 0))  # other clock: not comparable
        if earlier.any():  # patients with no panel in this file: not needed
            mine = np.zeros(pid.max() + 2, dtype=bool)
            mine[pid[~earlier]] = True
            drop |= earlier & ~mine[pid]
        if self._naive > 0 and self._zoned > 0:  # mixed clocks
            naive = ~zoned & ~earlier
            status[row[naive]] = MIXED_ZONE
            drop |= naive
        if drop.any():
            table, pid = table.filter(pa.array(~drop)), pid[~drop]
        found = self._check(table, pid, status)
        del table
        for kind in ("p", "e"):
            if (kind == "e" or not self.keep) and os.path.exists(self._part_path(b, kind)):
                os.remove(self._part_path(b, kind))
        return found

    def _check(self, table: pa.Table, pid: np.ndarray, status: np.ndarray
               ) -> tuple[np.ndarray, pa.Array, pa.Array] | None:
        """Flag one partition's rows (``pid``: equal codes for equal patients); the
        flagged rows with their codes and detail."""
        if table.num_rows == 0:
            return None
        row = np.asarray(table["row"].to_numpy(), dtype=np.int64)
        t = np.asarray(table["t"].to_numpy(), dtype=np.int64)
        order = _series_order(pid, t, row)
        pid, row, t = pid[order], row[order], t[order]
        ours = row >= 0
        n = len(row)
        # Pair j links sorted panels j and j+1 of the same patient within the window.
        pair = (pid[1:] == pid[:-1]) & ((t[1:] - t[:-1]).astype(np.float64) <= self.window)
        prev_ok = np.concatenate([[False], pair])
        next_ok = np.concatenate([pair, [False]])
        status[row[(prev_ok | next_ok) & ours]] = WITHIN
        # An earlier panel "used" is a neighbour of one of this file's panels.
        near = np.zeros(n, dtype=bool)
        near[:-1] |= pair & ours[1:]
        near[1:] |= pair & ours[:-1]
        used = int(np.count_nonzero(near & ~ours))
        with self._lock:  # (partitions may be checked on threads)
            self.earlier_used += used
        vals = {r.field: np.asarray(table[r.field].to_numpy(zero_copy_only=False),
                                    dtype=np.float64)[order] for r in self.rules}
        delta, brk = {}, {}
        for r in self.rules:
            v = vals[r.field]
            d = v[1:] - v[:-1]  # change over pair j
            with np.errstate(invalid="ignore"):
                big = pair & (np.abs(d) > r.limit)
            delta[r.field] = np.concatenate([[False], big])  # panel i changed from i-1
            # Break at i: big change in, big change out, opposite signs, and the
            # neighbours i-1 and i+1 agree within the limit (tested only where both
            # changes are big: few panels).
            b = np.zeros(n, dtype=bool)
            if n >= 3:
                j = np.flatnonzero(big[:-1] & big[1:])  # panel j + 1 is between two
                b[j + 1] = ((np.sign(d[j]) != np.sign(d[j + 1]))
                            & (np.abs(v[j + 2] - v[j]) <= r.limit))
            brk[r.field] = b
        hit = np.zeros(n, dtype=bool)
        for h in (*delta.values(), *brk.values()):
            hit |= h
        flagged = np.flatnonzero(hit & ours)
        if flagged.size == 0:
            return None
        status[row[flagged]] = FLAGGED
        zoned = np.asarray(table["zoned"].to_numpy(zero_copy_only=False), dtype=bool)[order]
        samples = table["sample"].combine_chunks()
        by_row = np.argsort(row[flagged], kind="stable")  # the order the text is spilled in
        limit = self.detail_rows
        if limit is None:
            codes, detail = _texts(self.rules, flagged, row, t, zoned,
                                   lambda at: samples.take(pa.array(order[at])), vals, delta,
                                   brk, by_row)
            return row[flagged][by_row], codes, detail
        # The codes of every flagged row.  What the sentences of this partition's first
        # ``limit`` flagged rows need (each panel and the ones before and after it) is
        # set aside: ``finish`` words the file's first ``limit`` in one go.
        codes = _code_names(self.rules, flagged, delta, brk, by_row)
        at = flagged[by_row[:limit]]
        around = np.minimum(np.stack([at - 1, at, at + 1], axis=1).ravel(), len(row) - 1)
        middle = np.zeros(len(around), dtype=bool)
        middle[1::3] = True
        aside = _Neighbours(
            row[around], t[around], zoned[around], samples.take(pa.array(order[around])),
            {f: v[around] for f, v in vals.items()},
            {f: middle & d[around] for f, d in delta.items()},
            {f: middle & b[around] for f, b in brk.items()})
        with self._lock:  # (partitions may be checked on threads)
            self._to_word.append(aside)
        return row[flagged][by_row], codes, pa.repeat(pa.scalar("", pa.string()), len(flagged))

    def _identities(self, table: pa.Table, pid: np.ndarray,
                    row: np.ndarray) -> np.ndarray | None:
        """``_drop_stored_copies`` over the rows that share a patient and a time with
        another (few, unless a file is read again); None when none do."""
        t = np.asarray(table["t"].to_numpy(), dtype=np.int64)
        o = _series_order(pid, t, row)
        same = (pid[o][1:] == pid[o][:-1]) & (t[o][1:] == t[o][:-1])
        if not same.any():
            return None
        shared = np.zeros(len(row), dtype=bool)
        shared[o[1:][same]] = True
        shared[o[:-1][same]] = True
        at = np.flatnonzero(shared)
        keep = np.ones(len(row), dtype=bool)
        keep[at] = self._drop_stored_copies(pid[at], t[at], _codes(table["sample"].take(
            pa.array(at))), row[at])
        return keep

    def _drop_stored_copies(self, pid: np.ndarray, t: np.ndarray, sid: np.ndarray,
                            row: np.ndarray) -> np.ndarray:
        """Rows to keep: an earlier panel with the patient, time and sample id of one of
        this file's panels is that panel stored by an earlier run (a re-run), so it is
        dropped and the panel is marked ``known`` (not stored again)."""
        o = np.lexsort((row, sid, t, pid))
        p, tt, s, early = pid[o], t[o], sid[o], row[o] < 0
        new = np.concatenate([[True], (p[1:] != p[:-1]) | (tt[1:] != tt[:-1]) | (s[1:] != s[:-1])])
        gid = np.cumsum(new) - 1
        has_early = np.zeros(gid[-1] + 1, dtype=bool)
        has_early[gid[early]] = True
        has_ours = np.zeros(gid[-1] + 1, dtype=bool)
        has_ours[gid[~early]] = True
        dup = has_early[gid] & has_ours[gid]
        self.known[row[o][dup & ~early]] = True
        if self.keep:  # this file's rows sharing an identity: stored once (new_panels)
            size = np.bincount(gid[~early], minlength=gid[-1] + 1)
            self.twins[row[o][~early & (size[gid] > 1)]] = True
        keep = np.ones(len(row), dtype=bool)
        keep[o[dup & early]] = False
        return keep

    def _spill_text(self, rows: np.ndarray, codes: pa.Array, detail: pa.Array,
                    spill: dict[int, ipc.RecordBatchFileWriter]) -> None:
        """Write flagged rows' text (``rows`` ascending) to the spill file of their
        row range."""
        table = pa.table({"row": rows, "codes": codes, "detail": detail})
        bucket = rows // self._bucket_rows
        edges = np.flatnonzero(np.diff(bucket)) + 1
        for lo, hi in zip(np.r_[0, edges], np.r_[edges, len(rows)]):
            b = int(bucket[lo])
            w = spill.get(b)
            if w is None:
                w = spill[b] = ipc.new_file(self._text_path(b), table.schema)
            w.write_table(table.slice(lo, hi - lo))

    def _text_path(self, b: int) -> str:
        return os.path.join(self._tmp.name, f"t{b}.arrow")

    def _bucket(self, b: int) -> tuple[np.ndarray, pa.Array, pa.Array] | None:
        """One row range's flagged text, sorted by row (the last few kept)."""
        with self._lock:
            if b in self._cache:
                self._cache.move_to_end(b)
                return self._cache[b]
            path = self._text_path(b)
            if not os.path.exists(path):
                return None
            with pa.memory_map(path) as src:
                table = ipc.open_file(src).read_all()
            rows = np.asarray(table["row"].to_numpy(), dtype=np.int64)
            order = np.argsort(rows, kind="stable")
            take = pa.array(order)
            got = (rows[order], table["codes"].take(take).combine_chunks(),
                   table["detail"].take(take).combine_chunks())
            self._cache[b] = got
            while len(self._cache) > 3:
                self._cache.popitem(last=False)
            return got

    # -- second pass ------------------------------------------------------------
    def panels(self) -> Iterator[pa.Table]:
        """This file's panels with a patient and a time (``keep=True``), one partition
        at a time: columns ``row``, ``patient``, ``t``, ``zoned``, ``sample`` and
        ``fields``."""
        if not self.keep or self.status is None:
            raise RuntimeError("panels() needs keep=True and finish()")
        for b in range(self.k):
            table = self._read_part(b, "p")
            if table is not None:
                yield table

    def new_panels(self, fields: Sequence[str] = STORED_FIELDS) -> Iterator[pa.Table]:
        """This file's interpreted panels not already stored (``known``), each identity
        (patient, time, sample id) once: columns ``patient``, ``t``, ``zoned``,
        ``sample`` and ``fields``, one partition at a time (``keep=True``)."""
        names = ["patient", "t", "zoned", "sample", *fields]
        for table in self.panels():
            row = np.asarray(table["row"].to_numpy(), dtype=np.int64)
            new = self.interpreted[row] & ~self.known[row]
            twin = new & self.twins[row]
            if twin.any():  # rare: rows sharing an identity; the first interpreted one
                sub = table.filter(pa.array(twin))
                pid, sid = _codes(sub["patient"]), _codes(sub["sample"])
                t = np.asarray(sub["t"].to_numpy(), dtype=np.int64)
                o = np.lexsort((row[twin], sid, t, pid))
                first = np.concatenate([[True], (pid[o][1:] != pid[o][:-1])
                                        | (t[o][1:] != t[o][:-1]) | (sid[o][1:] != sid[o][:-1])])
                new[np.flatnonzero(twin)[o[~first]]] = False
            if new.all():  # (no copy)
                yield table.select(names)
            elif new.any():  # (one copy, in one chunk: the rows taken)
                yield table.select(names).take(pa.array(np.flatnonzero(new)))

    def arrow_columns(self, start: int, stop: int) -> dict[str, pa.Array]:
        """The serial output columns for rows ``start`` to ``stop`` (file order); the
        status as a dictionary array of its texts."""
        if self.status is None:
            raise RuntimeError("finish() first")
        st = self.status[start:stop]
        status = pa.DictionaryArray.from_arrays(pa.array(st.astype(np.int8)),
                                                pa.array(list(STATUS_TEXT)))
        n = stop - start
        parts = []
        if n > 0 and (st == FLAGGED).any():
            for b in range(start // self._bucket_rows, (stop - 1) // self._bucket_rows + 1):
                got = self._bucket(b)
                if got is not None:
                    rows, codes, detail = got
                    lo, hi = np.searchsorted(rows, [start, stop])
                    if hi > lo:
                        parts.append((rows[lo:hi], codes.slice(lo, hi - lo),
                                      detail.slice(lo, hi - lo)))
        if not parts:
            empty = pa.repeat(pa.scalar(""), n)
            return {"serial_status": status, "serial_codes": empty, "serial_detail": empty}
        rows = np.concatenate([p[0] for p in parts])
        where = np.full(n, -1, dtype=np.int64)
        where[rows - start] = np.arange(len(rows))
        index = pa.array(where, mask=where < 0)
        codes = pc.fill_null(pc.take(pa.concat_arrays([p[1] for p in parts]), index), "")
        detail = pc.fill_null(pc.take(pa.concat_arrays([p[2] for p in parts]), index), "")
        if self._worded is not None:  # (detail_rows) the first rows' sentences
            worded, said = self._worded
            lo, hi = np.searchsorted(worded, [start, stop])
            if hi > lo:
                put = np.full(n, -1, dtype=np.int64)
                put[worded[lo:hi] - start] = np.arange(lo, hi)
                detail = pc.if_else(pa.array(put >= 0), pc.take(said, pa.array(
                    put, mask=put < 0)), detail)
        return {"serial_status": status, "serial_codes": codes, "serial_detail": detail}

    def columns(self, start: int, stop: int) -> dict[str, np.ndarray]:
        """``arrow_columns`` as numpy object arrays of text."""
        cols = self.arrow_columns(start, stop)
        return {k: np.array(v.cast(pa.string()).to_pylist(), dtype=object)
                for k, v in cols.items()}

    def close(self) -> None:
        """Close and remove the temporary files (also after a failed run)."""
        for w in self._writers.values():
            try:
                w.close()
            except (OSError, pa.ArrowException):
                pass
        self._writers = {}
        self._gathered = []
        self._cache.clear()
        self._tmp.cleanup()


@dataclass(frozen=True)
class _Neighbours:
    """Flagged panels set aside to be worded later (``detail_rows``), each with the
    panels before and after it in its patient's series: entries ``3j``, ``3j + 1``
    (the flagged panel) and ``3j + 2``; its changes and breaks on the middle entry."""

    row: np.ndarray
    t: np.ndarray
    zoned: np.ndarray
    sample: pa.Array
    vals: dict[str, np.ndarray]
    delta: dict[str, np.ndarray]
    brk: dict[str, np.ndarray]


def _word_first(rules: Sequence[DeltaRule], parts: Sequence[_Neighbours],
                limit: int) -> tuple[np.ndarray, pa.Array]:
    """The first ``limit`` flagged rows of the file (by row number) among those the
    partitions set aside, and their sentences (``_texts``, called once)."""
    row = np.concatenate([p.row for p in parts])
    mid = row[1::3]
    pick = np.sort(np.argsort(mid, kind="stable")[:limit])
    take = (3 * pick[:, None] + np.arange(3)).ravel()

    def cat(name: str) -> dict[str, np.ndarray]:
        return {f: np.concatenate([getattr(p, name)[f] for p in parts])[take]
                for f in getattr(parts[0], name)}

    samples = pa.concat_arrays([p.sample for p in parts]).take(pa.array(take))
    flagged = 3 * np.arange(len(pick)) + 1
    row = row[take]
    by_row = np.argsort(row[flagged], kind="stable")
    _, said = _texts(rules, flagged, row, np.concatenate([p.t for p in parts])[take],
                     np.concatenate([p.zoned for p in parts])[take],
                     lambda at: samples.take(pa.array(at)), cat("vals"), cat("delta"),
                     cat("brk"), by_row)
    return row[flagged][by_row], said


def _texts(rules: Sequence[DeltaRule], flagged: np.ndarray, row: np.ndarray, t: np.ndarray,
           zoned: np.ndarray, samples: Callable[[np.ndarray], pa.Array],
           vals: Mapping[str, np.ndarray], delta: Mapping[str, np.ndarray],
           brk: Mapping[str, np.ndarray],
           out_order: np.ndarray | None = None) -> tuple[pa.Array, pa.Array]:
    """The codes and the detail of the flagged rows (positions ``flagged`` of the
    sorted partition), assembled column-wise: the same words as one panel at a time.
    Each piece of text is built only for the rows it is about.  The result is in
    the order ``out_order`` of the flagged rows (their own order when None)."""

    any_break = np.zeros(len(flagged), dtype=bool)
    for r in rules:
        any_break |= brk[r.field][flagged]
    # Every panel a text names (the one before each flagged panel, the one after a
    # break), its reference built once.
    named = np.unique(np.concatenate([flagged - 1, flagged[any_break] + 1]))
    named_refs = _refs(row[named], samples(named), t[named], zoned[named])

    def ref(at: np.ndarray) -> pa.Array:
        return named_refs.take(pa.array(np.searchsorted(named, at)))

    parts: list[tuple[str, np.ndarray, pa.Array]] = []  # (code, rows of flagged, text)
    if any_break.any():
        sel = np.flatnonzero(any_break)
        at = flagged[sel]
        pieces = []
        for r in rules:
            on = brk[r.field][at]
            if on.any():
                i = at[on]
                v = vals[r.field]
                pieces.append((r.field, np.flatnonzero(on), pc.binary_join_element_wise(
                    BY_NAME[r.field].title, " ", _numbers(v[i]), " between ",
                    _numbers(v[i - 1]), " and ", _numbers(v[i + 1]), "")))
        text = pc.binary_join_element_wise(
            "breaks this patient's series (", _joined(pieces, len(at), ", ")[1], "; panels ",
            ref(at - 1), " and ", ref(at + 1), "): possible sample from another patient or "
            "contaminated sample; check identity and collection", "")
        parts.append((CODE_BREAK, sel, text))
    for r in rules:
        sel = np.flatnonzero(delta[r.field][flagged])
        if sel.size == 0:
            continue
        i = flagged[sel]
        spec = BY_NAME[r.field]
        v = vals[r.field]
        d = v[i] - v[i - 1]
        parts.append((r.code, sel, pc.binary_join_element_wise(
            spec.title, " ", _numbers(v[i]), " after ", _numbers(v[i - 1]), " (",
            pc.if_else(pa.array(d > 0), "+", ""), _numbers(d), f" {spec.unit} in ",
            _formatted((t[i] - t[i - 1]).astype(np.float64), _hours), ", since ",
            ref(i - 1), f"); delta limit {_fmt(r.limit)} {spec.unit}", "")))
    return _joined(parts, len(flagged), "; ", ";", out_order)


def _joined(parts: Sequence[tuple[str, np.ndarray, pa.Array]], n: int, sep: str,
            code_sep: str = ";", out_order: np.ndarray | None = None
            ) -> tuple[pa.Array, pa.Array]:
    """Rows 0..n-1, each the join of the parts that cover it, in the order of
    ``parts`` (each part: a name, the sorted rows it covers, a text per such row):
    the joined names and the joined texts, in the order ``out_order`` of the rows
    (their own order when None).  The texts are put in that order (by row, then
    part) in one take and joined as lists, so each text is copied twice at most;
    the names are joined once per combination of parts (there are few)."""
    rank = np.arange(n) if out_order is None else np.argsort(out_order)
    names = _names(parts, n, code_sep, out_order)
    at = np.concatenate([rank[rows] for _, rows, _ in parts])
    piece = np.argsort(at, kind="stable")  # by output row, then by part (stable)
    texts = pa.concat_arrays([p[2] for p in parts]).take(pa.array(piece))
    offsets = np.zeros(n + 1, dtype=np.int32)
    np.cumsum(np.bincount(at, minlength=n), out=offsets[1:])
    lists = pa.ListArray.from_arrays(pa.array(offsets), texts)
    return names, pc.binary_join(lists, sep)


def _names(parts: Sequence[tuple], n: int, code_sep: str,
           out_order: np.ndarray | None) -> pa.Array:
    """Rows 0..n-1, each the names of the parts (name, sorted rows covered, ...) that
    cover it, in the order of ``parts``, joined by ``code_sep``; in the order
    ``out_order`` of the rows (their own when None).  Joined once per combination of
    parts (there are few)."""
    key = np.zeros(n, dtype=np.int64)
    for j, part in enumerate(parts):
        key[part[1]] |= 1 << j
    combos, inverse = np.unique(key if out_order is None else key[out_order],
                                return_inverse=True)
    names = pa.array([code_sep.join(p[0] for j, p in enumerate(parts) if c >> j & 1)
                      for c in combos.tolist()], pa.string())
    return names.take(pa.array(inverse.ravel()))


def _code_names(rules: Sequence[DeltaRule], flagged: np.ndarray, delta: Mapping[str, np.ndarray],
                brk: Mapping[str, np.ndarray], out_order: np.ndarray) -> pa.Array:
    """``_texts``'s codes alone (no sentence built): a break first, then the delta
    codes in the order of ``rules``, as ``_texts`` puts its parts."""
    any_break = np.zeros(len(flagged), dtype=bool)
    for r in rules:
        any_break |= brk[r.field][flagged]
    parts = [(CODE_BREAK, np.flatnonzero(any_break))] if any_break.any() else []
    for r in rules:
        sel = np.flatnonzero(delta[r.field][flagged])
        if sel.size:
            parts.append((r.code, sel))
    return _names(parts, len(flagged), ";", out_order)


def _ahead(pool, fn: Callable, items: Iterator, arg, depth: int) -> Iterator:
    """``fn(item, arg)`` for each item on ``pool``, yielded in order, with at most
    ``depth`` submitted and not yet yielded."""
    from collections import deque

    pending: deque = deque()
    for item in items:
        pending.append(pool.submit(fn, item, arg))
        if len(pending) >= depth:
            yield pending.popleft().result()
    while pending:
        yield pending.popleft().result()


def _series_order(pid: np.ndarray, t: np.ndarray, row: np.ndarray) -> np.ndarray:
    """The order by patient, then time, then row: ``np.lexsort((row, t, pid))``.
    One stable sort of an integer key that holds the patient above the time does it
    (many times faster on a partition) when the rows are in row order or no two
    share a patient and a time; else with the rows put in row order first.  The
    lexsort is kept for keys that do not fit in 63 bits."""
    if len(row) == 0:
        return np.zeros(0, dtype=np.int64)
    span = int(t.max()) - int(t.min())
    top = int(pid.max()) + 1  # pid >= -1: shifted to >= 0
    bits = span.bit_length()
    if top.bit_length() + bits > 62:
        return np.lexsort((row, t, pid))
    key = ((pid + 1).astype(np.int64) << bits) | (t - t.min())
    order = np.argsort(key, kind="stable")
    if (row[1:] > row[:-1]).all():
        return order
    k = key[order]
    if not (k[1:] == k[:-1]).any():  # no shared patient and time: the rows decide nothing
        return order
    # (earlier panels, numbered below this file's rows, sharing a time with another)
    by_row = np.argsort(row, kind="stable")
    return by_row[np.argsort(key[by_row], kind="stable")]


def _formatted(x: np.ndarray, fmt: Callable[[float], str]) -> pa.Array:
    """``fmt`` of each value, each distinct value formatted once: once a process
    (``_Texts``), apart from zeros and NaN (formatted each time, as ``np.unique``
    gives them: -0.0 and 0.0 are one value to it)."""
    if len(x) == 0:
        return pa.array([], pa.string())
    u, inv = np.unique(x, return_inverse=True)
    memo = _MEMOS.get(fmt)
    if memo is None:
        memo = _MEMOS.setdefault(fmt, _Texts(fmt))
    return memo.texts(u).take(pa.array(inv.ravel()))


class _Texts:
    """Formatted values kept across partitions (sorted values, their texts), so that a
    value seen in an earlier partition is not formatted again."""

    def __init__(self, fmt: Callable[[float], str]) -> None:
        self.fmt = fmt
        self.keys = np.zeros(0, dtype=np.float64)
        self.words = pa.array([], pa.string())
        self.lock = threading.Lock()

    def texts(self, u: np.ndarray) -> pa.Array:
        """The texts of ``u`` (sorted distinct values, NaN last)."""
        plain = (u != 0) & ~np.isnan(u)  # kept values
        with self.lock:
            keys, words = self.keys, self.words
            pos = np.minimum(np.searchsorted(keys, u), max(len(keys) - 1, 0))
            known = plain & (keys[pos] == u) if len(keys) else np.zeros(len(u), dtype=bool)
            new = plain & ~known
            if new.any():
                keys = np.concatenate([keys, u[new]])
                words = pa.concat_arrays([words, pa.array(
                    [self.fmt(float(v)) for v in u[new]], pa.string())])
                order = np.argsort(keys, kind="stable")
                keys, words = keys[order], words.take(pa.array(order))
                if len(keys) <= _MEMO_SIZE:
                    self.keys, self.words = keys, words
                pos = np.minimum(np.searchsorted(keys, u), len(keys) - 1)
        out = words.take(pa.array(pos))
        if plain.all():
            return out
        odd = np.flatnonzero(~plain)  # zeros and NaN: as np.unique gave them
        at = np.arange(len(u))
        at[odd] = len(u) + np.arange(len(odd))
        extra = pa.array([self.fmt(float(v)) for v in u[odd]], pa.string())
        return pa.concat_arrays([out, extra]).take(pa.array(at))


#: Formatted values kept per format (at most ``_MEMO_SIZE`` values each).
_MEMOS: dict[Callable[[float], str], _Texts] = {}
_MEMO_SIZE = 1 << 20


def _numbers(x: np.ndarray) -> pa.Array:
    return _formatted(x, _fmt)


def _refs(row: np.ndarray, sample: pa.Array, t: np.ndarray, zoned: np.ndarray) -> pa.Array:
    """"row 3 (sample S3)"; an earlier run's panel by its collection time instead."""
    ours = row >= 0
    if ours.all():
        name = pc.binary_join_element_wise("row ", pc.cast(pa.array(row + 1), pa.string()), "")
    else:  # each kind of name built only for its own panels
        own, other = np.flatnonzero(ours), np.flatnonzero(~ours)
        mine = pc.binary_join_element_wise("row ", pc.cast(pa.array(row[own] + 1), pa.string()),
                                           "")
        stamp = pc.strftime(pc.cast(pa.array(t[other]), pa.timestamp("s")),
                            format="%Y-%m-%dT%H:%M")
        stored = pc.binary_join_element_wise("the stored panel of ", stamp, pc.if_else(
            pa.array(zoned[other]), "Z", ""), "")
        where = np.empty(len(row), dtype=np.int64)
        where[own] = np.arange(len(own))
        where[other] = len(own) + np.arange(len(other))
        name = pa.concat_arrays([mine, stored]).take(pa.array(where))
    has = pc.fill_null(pc.not_equal(sample, ""), False)
    suffix = pc.binary_join_element_wise(" (sample ", sample, ")", "")
    return pc.binary_join_element_wise(name, pc.if_else(has, suffix, ""), "")


def rules_table() -> str:
    """The Markdown table of the default delta limits (docs/batch.md)."""
    lines = ["| field | default limit | unit | source |", "|---|---|---|---|"]
    for r in DELTA_RULES:
        lines.append(f"| {r.field} | {r.limit:g} | {BY_NAME[r.field].unit} | {r.source} |")
    lines.append(f"| window | {DEFAULT_WINDOW_HOURS:g} | h | {SOURCE_PRACTICE} |")
    return "\n".join(lines)


def _strings(x: pa.Array | pa.ChunkedArray | np.ndarray) -> pa.Array:
    if isinstance(x, pa.ChunkedArray):
        x = x.combine_chunks()
    if isinstance(x, pa.Array):
        return x if pa.types.is_string(x.type) else pc.cast(x, pa.string())
    return pa.array(x, type=pa.string(), from_pandas=True)


def _codes(x: pa.ChunkedArray | pa.Array) -> np.ndarray:
    """Equal texts (or keyed ids) get equal integers (missing or empty is -1): for
    grouping, not ordering."""
    if pa.types.is_fixed_size_binary(x.type):  # keyed ids: no id is null
        enc = pc.dictionary_encode(x)
    else:
        enc = pc.dictionary_encode(pc.if_else(pc.equal(x, ""), pa.scalar(None, x.type), x))
    if isinstance(enc, pa.ChunkedArray):
        enc = enc.combine_chunks()
    return np.asarray(pc.fill_null(enc.indices, -1).to_numpy(zero_copy_only=False),
                      dtype=np.int64)


_HEX = np.zeros(256, dtype=np.uint8)
_HEX[np.frombuffer(b"0123456789abcdef", dtype=np.uint8)] = np.arange(16, dtype=np.uint8)
_IS_HEX = np.zeros(256, dtype=bool)
_IS_HEX[np.frombuffer(b"0123456789abcdef", dtype=np.uint8)] = True


def hex_prefix64(hashes: pa.Array | pa.ChunkedArray) -> np.ndarray:
    """The first 64 bits of each hex hash (the history store's keyed ids), as unsigned
    integers, read from the Arrow buffers (no Python object per value)."""
    if isinstance(hashes, pa.ChunkedArray):
        hashes = hashes.combine_chunks()
    n = len(hashes)
    if n == 0:
        return np.zeros(0, dtype=np.uint64)
    offsets = np.frombuffer(hashes.buffers()[1], dtype=np.int32)[hashes.offset:
                                                                  hashes.offset + n + 1]
    if hashes.null_count or not (np.diff(offsets) >= 16).all():
        return np.array([int(h[:16], 16) for h in hashes.to_pylist()], dtype=np.uint64)
    data = np.frombuffer(hashes.buffers()[2], dtype=np.uint8)
    width = int(offsets[1] - offsets[0])
    if int(offsets[-1] - offsets[0]) == width * n and (np.diff(offsets) == width).all():
        # one width (the store's ids): a strided view, no gather of indices
        digits = data[offsets[0]:offsets[-1]].reshape(n, width)[:, :16]
    else:
        digits = data[offsets[:-1, None] + np.arange(16, dtype=np.int32)]
    nibbles = _HEX[digits]
    packed = (nibbles[:, 0::2] << 4) | nibbles[:, 1::2]  # 8 bytes, most significant first
    return np.ascontiguousarray(packed).view(">u8").ravel().astype(np.uint64)


#: Bytes of the history store's keyed patient ids (HMAC-SHA256 truncated to 16 bytes;
#: an Arrow ``fixed_size_binary(16)``).
KEYED_BYTES = 16


def keyed_binary(ids: pa.Array | pa.ChunkedArray) -> pa.Array:
    """Keyed ids as 16 bytes each: as given when they are (``fixed_size_binary(16)``),
    else from their 32 hex digits (an empty or missing text: null, no id)."""
    if isinstance(ids, pa.ChunkedArray):
        ids = ids.combine_chunks()
    if pa.types.is_fixed_size_binary(ids.type):
        return ids
    texts = _strings(ids)
    n = len(texts)
    blank = ~_mask(pc.greater(pc.utf8_length(texts), 0))
    raw = np.zeros((n, 16), dtype=np.uint8)
    real = np.flatnonzero(~blank)
    if real.size:
        offsets = np.frombuffer(texts.buffers()[1], dtype=np.int32)[texts.offset:
                                                                    texts.offset + n + 1]
        data = np.frombuffer(texts.buffers()[2], dtype=np.uint8)
        start = offsets[real]
        if not (offsets[real + 1] - start == 32).all():
            raise ValueError("a keyed id is not 32 hex digits")
        digits = data[start[:, None] + np.arange(32, dtype=np.int32)]
        if not _IS_HEX[digits].all():
            raise ValueError("a keyed id is not 32 hex digits")
        nib = _HEX[digits]
        raw[real] = (nib[:, 0::2] << 4) | nib[:, 1::2]
    valid = pa.py_buffer(np.packbits(~blank, bitorder="little").tobytes())
    return pa.FixedSizeBinaryArray.from_buffers(pa.binary(16), n, [valid, pa.py_buffer(
        raw.tobytes())])


def prefix64(ids: pa.Array | pa.ChunkedArray) -> np.ndarray:
    """The first 64 bits of each keyed id (16 bytes, or hex text: ``hex_prefix64``) as
    unsigned integers, read from the Arrow buffers; 0 for a null."""
    if isinstance(ids, pa.ChunkedArray):
        ids = ids.combine_chunks()
    if not pa.types.is_fixed_size_binary(ids.type):
        return hex_prefix64(ids)
    n = len(ids)
    if n == 0:
        return np.zeros(0, dtype=np.uint64)
    data = np.frombuffer(ids.buffers()[1], dtype=np.uint8)[16 * ids.offset:16 * (ids.offset + n)]
    return np.ascontiguousarray(data.reshape(n, 16)[:, :8]).view(">u8").ravel().astype(np.uint64)


def _mask(x: pa.Array | pa.ChunkedArray) -> np.ndarray:
    return np.asarray(pc.fill_null(x, False).to_numpy(zero_copy_only=False), dtype=bool)


__all__ = [
    "COLUMNS",
    "DEFAULT_WINDOW_HOURS",
    "DELTA_RULES",
    "STATUS_TEXT",
    "STORED_FIELDS",
    "DeltaRule",
    "SerialChecker",
    "rules_table",
    "rules_with",
]
