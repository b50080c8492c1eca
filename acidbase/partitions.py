"""Shards checked by ``acidbase batch`` itself, for Dask's ``map_partitions``.

Apart from acidbase.scale (which the command line imports for ``acidbase shard``)
because these run the command line: see docs/scale.md.
"""

from __future__ import annotations

import os
from collections.abc import Sequence

import pyarrow as pa
import pyarrow.parquet as pq

from .scale import INPUT_ROW, ShardError


def check_shard(table: pa.Table, options: Sequence[str] = ()) -> pa.Table:
    """One shard checked by ``acidbase batch`` itself, serial checks included (a
    patient's panels are all in the shard): the output rows, in the shard's order,
    with ``input_row`` passed through.  ``options``: more ``acidbase batch`` options
    (``--profile full``, ``--window-hours 12``, laboratory settings...).

    The shard goes through a temporary Parquet file, so the run is exactly the
    command's, with its checks and its refusals; a run that cannot finish raises
    ``ShardError`` with the command's message."""
    import contextlib
    import io

    from .cli import main
    from .files import scratch

    # Marked as in use: a later batch run removes it if this process is killed.
    with scratch.ScratchFolder(scratch.SHARD) as tmp:
        src, out = os.path.join(tmp, "in.parquet"), os.path.join(tmp, "out.parquet")
        pq.write_table(table, src)
        err = io.StringIO()
        with contextlib.redirect_stderr(err):
            rc = main(["batch", src, "-o", out, "--quiet", "--summary",
                       os.path.join(tmp, "summary.txt"), *options])
        if rc != 0:
            raise ShardError(err.getvalue().strip() or f"acidbase batch ended with {rc}")
        return pq.read_table(out)


def check_partition(frame, options: Sequence[str] = ()):
    """A Dask partition (a pandas DataFrame of one shard's rows) checked by
    ``check_shard``: the output rows as a DataFrame.  For ``map_partitions``."""
    table = pa.Table.from_pandas(frame, preserve_index=False)
    table = pa.table([c if name == INPUT_ROW or pa.types.is_string(c.type)
                      else c.cast(pa.string()) for name, c in zip(table.column_names,
                                                                  table.columns)],
                     names=table.column_names)
    return check_shard(table, options).to_pandas()


def output_meta(folder: str | os.PathLike[str], options: Sequence[str] = ()):
    """The empty DataFrame ``map_partitions`` needs as ``meta``: the output of the
    first row of the first shard file in ``folder``, emptied."""
    files = sorted(f for f in os.listdir(folder) if f.endswith(".parquet"))
    if not files:
        raise ShardError(f"{folder}: no shard files")
    first = pq.ParquetFile(os.path.join(os.fspath(folder), files[0])).read_row_group(0)
    return check_shard(first.slice(0, 1), options).to_pandas().iloc[:0]


__all__ = ["check_partition", "check_shard", "output_meta"]
