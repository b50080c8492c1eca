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
number, the patient id, the time and the few delta fields, spilled to
temporary Arrow files partitioned by a hash of the patient id; each partition
is then sorted by (patient, time, row) and checked on its own.  What stays in
memory for the whole file is one byte of status per row and the text of the
flagged rows; one partition is in memory at a time.  The second pass (the
batch run) reads the status back by row number.
"""

from __future__ import annotations

import math
import os
import tempfile
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.ipc as ipc

from .fields import BY_NAME

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


class SerialChecker:
    """Collects rows (first pass), then checks each patient's series."""

    def __init__(self, rules: Sequence[DeltaRule] = DELTA_RULES,
                 window_hours: float = DEFAULT_WINDOW_HOURS, partitions: int = 1,
                 workdir: str | None = None) -> None:
        if not window_hours > 0:
            raise ValueError("the serial window must be a positive number of hours")
        self.rules = tuple(rules)
        self.window = float(window_hours) * 3600.0
        self.k = max(1, int(partitions))
        self._tmp = tempfile.TemporaryDirectory(prefix="acidbase-serial-", dir=workdir)
        self._schema = pa.schema(
            [("row", pa.int64()), ("patient", pa.string()), ("t", pa.int64()),
             ("zoned", pa.bool_()), ("sample", pa.string())]
            + [(r.field, pa.float64()) for r in self.rules])
        self._writers: list[ipc.RecordBatchFileWriter | None] = [None] * self.k
        self._status: list[np.ndarray] = []
        self._n = 0
        self._naive = self._zoned = 0
        self.status: np.ndarray | None = None
        self._flag_rows = np.zeros(0, dtype=np.int64)
        self._flag_codes: list[str] = []
        self._flag_detail: list[str] = []

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
        from .fileio import TIME_INVALID, TIME_NAIVE, TIME_ZONED

        n = len(patient)
        rows = np.arange(self._n, self._n + n, dtype=np.int64)
        self._n += n
        pat_all = _strings(patient)
        has_id = np.asarray(pc.fill_null(pc.not_equal(pc.utf8_trim_whitespace(pat_all), ""),
                                         False).to_numpy(zero_copy_only=False), dtype=bool)
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
        take = pa.array(idx)
        pat = pat_all.take(take)
        if self.k > 1:
            enc = pc.dictionary_encode(pat)
            buckets = np.array([hash(s) % self.k for s in enc.dictionary.to_pylist()],
                               dtype=np.int64)
            part = buckets[np.asarray(enc.indices.to_numpy(zero_copy_only=False))]
        else:
            part = np.zeros(len(idx), dtype=np.int64)
        samp = (_strings(sample).take(take) if sample is not None
                else pa.nulls(len(idx), pa.string()))
        table = pa.table(
            [pa.array(rows[idx]), pat, pa.array(seconds[idx]), pa.array(kind[idx] == TIME_ZONED),
             samp] + [pa.array(np.asarray(values.get(r.field, np.full(n, np.nan)))[idx],
                               type=pa.float64()) for r in self.rules],
            schema=self._schema)
        order = np.argsort(part, kind="stable")
        table = table.take(pa.array(order))
        part = part[order]
        bounds = np.searchsorted(part, np.arange(self.k + 1))
        for b in range(self.k):
            lo, hi = bounds[b], bounds[b + 1]
            if hi > lo:
                w = self._writers[b]
                if w is None:
                    w = ipc.new_file(os.path.join(self._tmp.name, f"p{b}.arrow"), self._schema)
                    self._writers[b] = w
                w.write_table(table.slice(lo, hi - lo))

    # -- checks -----------------------------------------------------------------
    def finish(self) -> None:
        """Check every partition; afterwards ``columns`` answers by row number."""
        status = np.concatenate(self._status) if self._status else np.zeros(0, dtype=np.uint8)
        self._status = []
        mixed = self._naive > 0 and self._zoned > 0
        rows_out: list[np.ndarray] = []
        codes_out: list[str] = []
        detail_out: list[str] = []
        for b, w in enumerate(self._writers):
            if w is None:
                continue
            w.close()
            path = os.path.join(self._tmp.name, f"p{b}.arrow")
            with pa.memory_map(path) as src:
                table = ipc.open_file(src).read_all()
            if mixed:
                naive = ~np.asarray(table["zoned"].to_numpy(zero_copy_only=False), dtype=bool)
                status[np.asarray(table["row"].to_numpy())[naive]] = MIXED_ZONE
                table = table.filter(pa.array(~naive))
            r, c, d = self._check(table, status)
            rows_out.append(r)
            codes_out += c
            detail_out += d
            del table
            os.remove(path)
        self._writers = [None] * self.k
        self.status = status
        if rows_out:
            rows = np.concatenate(rows_out)
            order = np.argsort(rows, kind="stable")
            self._flag_rows = rows[order]
            self._flag_codes = [codes_out[i] for i in order.tolist()]
            self._flag_detail = [detail_out[i] for i in order.tolist()]
        self._tmp.cleanup()

    def _check(self, table: pa.Table,
               status: np.ndarray) -> tuple[np.ndarray, list[str], list[str]]:
        n = table.num_rows
        if n == 0:
            return np.zeros(0, dtype=np.int64), [], []
        table = table.sort_by([("patient", "ascending"), ("t", "ascending"),
                               ("row", "ascending")])
        row = np.asarray(table["row"].to_numpy(), dtype=np.int64)
        t = np.asarray(table["t"].to_numpy(), dtype=np.int64)
        pid = np.asarray(pc.dictionary_encode(table["patient"]).combine_chunks().indices
                         .to_numpy(zero_copy_only=False))
        # Pair j links sorted panels j and j+1 of the same patient within the window.
        same = pid[1:] == pid[:-1]
        gap = (t[1:] - t[:-1]).astype(np.float64)
        pair = same & (gap <= self.window)
        prev_ok = np.concatenate([[False], pair])
        next_ok = np.concatenate([pair, [False]])
        status[row[prev_ok | next_ok]] = WITHIN
        vals = {r.field: np.asarray(table[r.field].to_numpy(zero_copy_only=False),
                                    dtype=np.float64) for r in self.rules}
        delta_hits: dict[str, np.ndarray] = {}
        break_hits: dict[str, np.ndarray] = {}
        for r in self.rules:
            v = vals[r.field]
            d = v[1:] - v[:-1]  # change over pair j
            with np.errstate(invalid="ignore"):
                big = pair & (np.abs(d) > r.limit)
            hit_prev = np.concatenate([[False], big])  # panel i changed from i-1
            delta_hits[r.field] = hit_prev
            # Break at i: big change in, big change out, opposite signs, and the
            # neighbours i-1 and i+1 agree within the limit.
            brk = np.zeros(n, dtype=bool)
            if n >= 3:
                d_in, d_out = d[:-1], d[1:]
                with np.errstate(invalid="ignore"):
                    around = np.abs(v[2:] - v[:-2]) <= r.limit
                    brk[1:-1] = big[:-1] & big[1:] & (np.sign(d_in) != np.sign(d_out)) & around
            break_hits[r.field] = brk
        any_delta = np.zeros(n, dtype=bool)
        for h in delta_hits.values():
            any_delta |= h
        any_break = np.zeros(n, dtype=bool)
        for h in break_hits.values():
            any_break |= h
        flagged = np.flatnonzero(any_delta | any_break)
        status[row[flagged]] = FLAGGED
        samples = table["sample"].to_pylist() if flagged.size else []
        codes: list[str] = []
        details: list[str] = []
        for i in flagged.tolist():
            c: list[str] = []
            text: list[str] = []
            broke = [r for r in self.rules if break_hits[r.field][i]]
            if broke:
                c.append(CODE_BREAK)
                parts = ", ".join(
                    f"{BY_NAME[r.field].title} {_fmt(vals[r.field][i])} between "
                    f"{_fmt(vals[r.field][i - 1])} and {_fmt(vals[r.field][i + 1])}"
                    for r in broke)
                text.append(
                    f"breaks this patient's series ({parts}; panels "
                    f"{_ref(row[i - 1], samples[i - 1])} and {_ref(row[i + 1], samples[i + 1])}): "
                    "possible sample from another "
                    "patient or contaminated sample; check identity and collection")
            for r in self.rules:
                if delta_hits[r.field][i]:
                    c.append(r.code)
                    spec = BY_NAME[r.field]
                    d = vals[r.field][i] - vals[r.field][i - 1]
                    text.append(
                        f"{spec.title} {_fmt(vals[r.field][i])} after {_fmt(vals[r.field][i - 1])} "
                        f"({'+' if d > 0 else ''}{_fmt(d)} {spec.unit} in "
                        f"{_hours(float(t[i] - t[i - 1]))}, since "
                        f"{_ref(row[i - 1], samples[i - 1])}); "
                        f"delta limit {_fmt(r.limit)} {spec.unit}")
            codes.append(";".join(c))
            details.append("; ".join(text))
        return row[flagged], codes, details

    # -- second pass ------------------------------------------------------------
    def columns(self, start: int, stop: int) -> dict[str, np.ndarray]:
        """The serial output columns for rows ``start`` to ``stop`` (file order)."""
        if self.status is None:
            raise RuntimeError("finish() first")
        st = self.status[start:stop]
        labels = np.array(STATUS_TEXT, dtype=object)[st]
        codes = np.full(stop - start, "", dtype=object)
        detail = np.full(stop - start, "", dtype=object)
        lo, hi = np.searchsorted(self._flag_rows, [start, stop])
        for j in range(lo, hi):
            k = self._flag_rows[j] - start
            codes[k] = self._flag_codes[j]
            detail[k] = self._flag_detail[j]
        return {"serial_status": labels, "serial_codes": codes, "serial_detail": detail}

    def arrow_columns(self, start: int, stop: int) -> dict[str, pa.Array]:
        """``columns`` as Arrow arrays; the status as a dictionary array of its texts."""
        if self.status is None:
            raise RuntimeError("finish() first")
        st = self.status[start:stop]
        status = pa.DictionaryArray.from_arrays(pa.array(st.astype(np.int8)),
                                                pa.array(list(STATUS_TEXT)))
        n = stop - start
        lo, hi = np.searchsorted(self._flag_rows, [start, stop])
        if hi == lo:
            empty = pa.repeat(pa.scalar(""), n)
            return {"serial_status": status, "serial_codes": empty, "serial_detail": empty}
        where = np.full(n, -1, dtype=np.int64)
        where[self._flag_rows[lo:hi] - start] = np.arange(hi - lo)
        index = pa.array(where, mask=where < 0)
        codes = pc.fill_null(pc.take(pa.array(self._flag_codes[lo:hi], type=pa.string()),
                                     index), "")
        detail = pc.fill_null(pc.take(pa.array(self._flag_detail[lo:hi], type=pa.string()),
                                      index), "")
        return {"serial_status": status, "serial_codes": codes, "serial_detail": detail}

    def close(self) -> None:
        for w in self._writers:
            if w is not None:
                w.close()
        self._tmp.cleanup()


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


def _ref(row: int, sample: str | None) -> str:
    return f"row {int(row) + 1}" + (f" (sample {sample})" if sample else "")


__all__ = ["COLUMNS", "DEFAULT_WINDOW_HOURS", "DELTA_RULES", "DeltaRule", "SerialChecker",
           "STATUS_TEXT", "rules_table", "rules_with"]
