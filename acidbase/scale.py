"""Archives beyond one process: shard by patient, check each shard anywhere.

Every panel is checked on its own except by the serial checks, which need all of
one patient's panels together.  So the path for an archive larger than one
machine's patience is:

1. ``shard``: read the input once with acidbase's own reader (every cell as the
   text it was, nothing parsed or converted) and write it as Parquet files, one per
   shard, a patient's rows always in the same shard (a stable hash of the patient
   id: CRC-32, the same on every machine and Python).  Each row keeps its number in
   the input as the column ``input_row``, so the output can be put back in order
   and no row is lost unseen.
2. ``acidbase.partitions.check_partition`` on each shard, wherever it runs: with
   Dask, ``dask.dataframe.read_parquet(folder).map_partitions(check_partition,
   meta=output_meta(folder))`` (docs/scale.md), or one ``acidbase batch`` per shard
   file on a job array.

The numbers come from the one kernel through the library's table check (the same
code as ``acidbase batch``); this module only moves rows.  Dask is optional
(``pip install 'acidbase[dask]'``); ``shard`` needs only pyarrow.
"""

from __future__ import annotations

import contextlib
import glob
import os
import zlib

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from .errors import AcidBaseError

#: The input row number each shard row carries (1 = the first row after the header).
INPUT_ROW = "input_row"


class ShardError(ValueError, AcidBaseError):
    """The input cannot be sharded (no patient id column, a bad shard count)."""


def shard_of(patient_ids: pa.Array | pa.ChunkedArray, shards: int) -> np.ndarray:
    """The shard of each row: CRC-32 of the patient id's UTF-8 bytes, modulo ``shards``.

    Stable across processes and machines (Python's own ``hash`` of text is salted per
    process).  Rows without a patient id go to shard 0: no serial check joins them
    to anything.  Computed once per distinct id.
    """
    ids = pc.cast(patient_ids, pa.string())
    if isinstance(ids, pa.ChunkedArray):
        ids = ids.combine_chunks()
    enc = ids.dictionary_encode()
    crc = np.array([zlib.crc32(v.encode("utf-8")) % shards if v is not None else 0
                    for v in enc.dictionary.to_pylist()], dtype=np.int64)
    idx = enc.indices.to_numpy(zero_copy_only=False)
    if enc.indices.null_count:
        idx = np.where(np.asarray(enc.indices.is_null()), -1, idx)
    out = np.zeros(len(ids), dtype=np.int64)
    valid = idx >= 0
    out[valid] = crc[idx[valid].astype(np.int64)] if len(crc) else 0
    return out


def shard(path: str | os.PathLike[str], folder: str | os.PathLike[str], shards: int = 16, *,
          fmt: str | None = None, delimiter: str | None = None, encoding: str = "utf-8",
          patient_column: str | None = None, chunk_rows: int = 1 << 16) -> list[str]:
    """Write ``path``'s rows into ``shards`` Parquet files in ``folder`` (created);
    the files written, ``part-00000.parquet`` onwards (a shard with no rows writes
    no file).  Cells stay text, as the batch reader hands them over.  The files
    appear together when every row is written, or not at all (a run that fails
    leaves no part file, and removes the folder if it made it).

    ``patient_column``: the header that holds the patient id (default: the one
    acidbase batch maps to ``patient_id``).
    """
    from . import fileio

    if not 1 <= shards <= 100_000:
        raise ShardError(f"shards: {shards}: give a number from 1 to 100000")
    src = fileio.open_source(path, fmt, delimiter, encoding, (), chunk_rows)
    if patient_column is None:
        patient_column = fileio.map_headers(src.headers).column_of.get("patient_id")
    if patient_column is None or patient_column not in src.headers:
        raise ShardError(f"{path}: no patient id column to shard by (headers: "
                         f"{', '.join(src.headers)})")
    if INPUT_ROW in src.headers:
        raise ShardError(f"{path}: a column is already named {INPUT_ROW!r}")
    # A folder read as one archive must hold one input's shards: fewer shards than
    # last time would leave the old higher-numbered files beside the new ones.
    old = sorted(glob.glob(os.path.join(glob.escape(os.fspath(folder)), "part-*.parquet")))
    if old:
        raise ShardError(f"{folder} holds shard files already ({os.path.basename(old[0])}"
                         f"{f' and {len(old) - 1} more' if len(old) > 1 else ''}); give a new "
                         "or empty folder, or remove them first")
    from .files.outputs import OutputSet, check_paths

    made = not os.path.isdir(folder)
    os.makedirs(folder, exist_ok=True)
    writers: dict[int, pq.ParquetWriter] = {}
    names: dict[int, str] = {}
    start = 0
    # Staged as ``acidbase batch -o`` stages its output (``files.outputs``): each part is
    # written to a temporary file beside it and every part is renamed into place only
    # when the whole input was read and written, so a failed run leaves no part file.
    try:
        with OutputSet() as outputs:
            try:
                for table in src.chunks():
                    n = table.num_rows
                    table = table.append_column(
                        INPUT_ROW, pa.array(np.arange(start + 1, start + n + 1)))
                    which = shard_of(table[patient_column], shards)
                    order = np.argsort(which, kind="stable")  # file order kept within a shard
                    bounds = np.searchsorted(which[order], np.arange(shards + 1))
                    for k in np.flatnonzero(np.diff(bounds)).tolist():
                        part = table.take(pa.array(order[bounds[k]:bounds[k + 1]]))
                        if k not in writers:
                            target = os.path.join(os.fspath(folder), f"part-{k:05d}.parquet")
                            check_paths([("INPUT", os.fspath(path))], [("FOLDER", target)])
                            staged = outputs.add("FOLDER", target)
                            names[k] = target
                            writers[k] = pq.ParquetWriter(staged.file, part.schema)
                        writers[k].write_table(part)
                    start += n
            except BaseException:
                for w in writers.values():
                    with contextlib.suppress(Exception):  # the first error is the one to say
                        w.close()
                raise
            for w in writers.values():
                w.close()
            outputs.commit()
    except BaseException:
        if made:  # the folder this run made, left empty by the failure
            with contextlib.suppress(OSError):
                os.rmdir(folder)
        raise
    return [names[k] for k in sorted(names)]


def check_arrow(table: pa.Table, settings=None) -> pa.Table:
    """One shard (or any Arrow table of text cells) checked: the batch output's rows,
    in the table's order, with ``input_row`` passed through."""
    table = pa.table([c if name == INPUT_ROW or pa.types.is_string(c.type)
                      else c.cast(pa.string())  # large_string, or a null column from pandas
                      for name, c in zip(table.column_names, table.columns)],
                     names=table.column_names)
    from .files.check import check_table

    return check_table(table, settings)


__all__ = ["INPUT_ROW", "ShardError", "check_arrow", "shard", "shard_of"]
