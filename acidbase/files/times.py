"""Collection times: ISO 8601 date-times, read column-wise."""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from ..inputs.cells import _mask


_ISO = (r"^(?P<date>\d{4}-\d{2}-\d{2})[T ](?P<hm>\d{2}:\d{2})(?::(?P<s>\d{2})(?:[.,]\d+)?)?"
        r"(?P<zone>Z|[+-]\d{2}:?\d{2})?$")

#: Kinds of collection time, per row.
TIME_MISSING, TIME_NAIVE, TIME_ZONED, TIME_INVALID = 0, 1, 2, 3


def parse_times(column: pa.Array | pa.ChunkedArray) -> tuple[np.ndarray, np.ndarray]:
    """ISO 8601 date-times -> (seconds since 1970 as int64, kind per row).

    A time with an offset (``Z``, ``+01:00``) is converted to UTC; a time without
    one is read as written (wall clock).  A date without a time of day, or text
    that is not an ISO 8601 date-time, is ``TIME_INVALID``; invalid calendar
    dates (30 February) are invalid, not rolled over.
    """
    if isinstance(column, pa.ChunkedArray):
        column = column.combine_chunks()
    n = len(column)
    if pa.types.is_timestamp(column.type):
        zoned = column.type.tz is not None
        secs = pc.cast(pc.cast(column, pa.timestamp("s", tz=column.type.tz)), pa.int64())
        valid = _mask(pc.is_valid(secs))
        out = np.asarray(pc.fill_null(secs, 0).to_numpy(zero_copy_only=False), dtype=np.int64)
        kind = np.where(valid, TIME_ZONED if zoned else TIME_NAIVE, TIME_MISSING).astype(np.int8)
        return out, kind
    text = pc.cast(column, pa.string())
    fast = _times_fast(text)
    if fast is not None:
        return fast
    text = pc.utf8_trim_whitespace(text)
    present = _mask(pc.and_(pc.is_valid(text), pc.not_equal(text, "")))
    parts = pc.extract_regex(text, _ISO)
    matched = _mask(pc.is_valid(parts))
    date = pc.struct_field(parts, "date")
    hm = pc.struct_field(parts, "hm")
    s = pc.struct_field(parts, "s")
    s = pc.if_else(pc.equal(s, ""), "00", s)
    zone = pc.replace_substring(pc.struct_field(parts, "zone"), ":", "")
    zone = pc.if_else(pc.equal(zone, "Z"), "+0000", zone)
    zoned = matched & _mask(pc.not_equal(zone, ""))
    stamp = pc.binary_join_element_wise(date, "T", hm, ":", s, "")
    out = np.zeros(n, dtype=np.int64)
    ok = np.zeros(n, dtype=bool)
    for mask, fmt, arr in ((zoned, "%Y-%m-%dT%H:%M:%S%z",
                            pc.binary_join_element_wise(stamp, zone, "")),
                           (matched & ~zoned, "%Y-%m-%dT%H:%M:%S", stamp)):
        if not mask.any():
            continue
        ts = pc.strptime(arr, format=fmt, unit="s", error_is_null=True)
        secs = pc.cast(ts, pa.int64())
        # strptime rolls 30 February over to March: compare the date back.
        if fmt.endswith("%z"):
            local = pc.add(secs, _zone_seconds(zone))
            back = pc.strftime(pc.cast(local, pa.timestamp("s")), format="%Y-%m-%d")
        else:
            back = pc.strftime(ts, format="%Y-%m-%d")
        good = _mask(pc.and_(pc.is_valid(secs), pc.equal(back, date))) & mask
        out = np.where(good, np.asarray(pc.fill_null(secs, 0).to_numpy(zero_copy_only=False),
                                        dtype=np.int64), out)
        ok |= good
    kind = np.full(n, TIME_MISSING, dtype=np.int8)
    kind[present] = TIME_INVALID
    kind[ok & ~zoned] = TIME_NAIVE
    kind[ok & zoned] = TIME_ZONED
    return out, kind


def _times_fast(text: pa.Array) -> tuple[np.ndarray, np.ndarray] | None:
    """The common cases in one cast: every time with an offset, or every time without.

    Arrow's ISO 8601 cast checks the calendar (30 February fails), so only the
    rule "a date alone is no time" needs its own test; anything else, or any
    failing cell, goes the slow way with its own verdict per cell.
    """
    n = len(text)
    if text.null_count == n:
        return None
    valid = _mask(pc.is_valid(text))
    for typ, kind_code in ((pa.timestamp("s", tz="UTC"), TIME_ZONED),
                           (pa.timestamp("s"), TIME_NAIVE)):
        if kind_code == TIME_NAIVE and pc.min(pc.utf8_length(text)).as_py() < 16:
            return None  # a date alone, or something shorter than a date-time
        try:
            secs = pc.cast(pc.cast(text, typ), pa.int64())
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            continue
        out = np.asarray(pc.fill_null(secs, 0).to_numpy(zero_copy_only=False), dtype=np.int64)
        kind = np.where(valid, kind_code, TIME_MISSING).astype(np.int8)
        return out, kind
    return None


def _zone_seconds(zone: pa.Array) -> pa.Array:
    z = pc.if_else(pc.equal(zone, ""), "+0000", zone)
    sign = pc.if_else(pc.starts_with(z, "-"), -1, 1)
    hh = pc.cast(pc.utf8_slice_codeunits(z, 1, 3), pa.int64())
    mm = pc.cast(pc.utf8_slice_codeunits(z, 3, 5), pa.int64())
    return pc.multiply(sign, pc.add(pc.multiply(hh, 3600), pc.multiply(mm, 60)))

