"""Sharding by patient and checking the shards on a local Dask cluster (acidbase.scale)."""

from __future__ import annotations

import csv
import random
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from acidbase import partitions, scale

DATA = Path(__file__).parent / "data" / "batch"


def _archive(path: Path, n: int = 600, seed: int = 7) -> None:
    """Invented panels for this test only: 60 patients, rows shuffled across the file,
    a few refusals (text in pH) and rows without a patient id."""
    rng = random.Random(seed)
    with path.open("w", newline="", encoding="utf-8") as f:
        w = csv.writer(f)
        w.writerow(["sample_id", "patient_id", "collected_at", "ph", "pco2", "hco3", "na", "cl"])
        for i in range(n):
            pid = "" if i % 97 == 0 else f"P{rng.randrange(60):03d}"
            ph = "high" if i % 131 == 0 else f"{rng.uniform(7.1, 7.6):.2f}"
            w.writerow([f"S{i}", pid, f"2026-01-{1 + i % 28:02d}T{i % 24:02d}:00:00Z", ph,
                        f"{rng.uniform(25, 60):.0f}", f"{rng.uniform(12, 34):.1f}",
                        f"{rng.randrange(130, 150)}", f"{rng.randrange(95, 115)}"])


def test_a_patient_never_spans_two_shards_and_no_row_is_lost(tmp_path):
    src = tmp_path / "archive.csv"
    _archive(src)
    files = scale.shard(src, tmp_path / "shards", 5)
    seen: dict[str, str] = {}
    rows = []
    for f in files:
        t = pq.read_table(f)
        rows += t[scale.INPUT_ROW].to_pylist()
        for pid in set(t["patient_id"].to_pylist()):
            assert seen.setdefault(pid, f) == f, pid
        assert t[scale.INPUT_ROW].to_pylist() == sorted(t[scale.INPUT_ROW].to_pylist())
    assert sorted(rows) == list(range(1, 601))


def test_shard_of_is_stable_crc32():
    """The CRC-32 check value of "123456789" is 0xCBF43926 (Williams, A painless guide
    to CRC error detection algorithms, 1993; the CRC catalogue's "check" for CRC-32)."""
    got = scale.shard_of(pa.array(["123456789", None, "123456789"]), 1000)
    assert got.tolist() == [0xCBF43926 % 1000, 0, 0xCBF43926 % 1000]


def test_shard_refuses_a_file_without_patient_ids(tmp_path):
    with pytest.raises(scale.ShardError, match="no patient id column"):
        scale.shard(DATA / "comma.csv", tmp_path / "s", 4)


def test_dask_cluster_gives_the_rows_of_one_batch_run(tmp_path):
    """Two workers (threads of one process: the machine has two cores) through
    read_parquet(...).map_partitions(check_partition): the same rows, cell for cell,
    serial checks included, as one ``acidbase batch`` run on the whole file."""
    dd = pytest.importorskip("dask.dataframe")
    distributed = pytest.importorskip("dask.distributed")
    pd = pytest.importorskip("pandas")
    from acidbase.cli import main

    src = tmp_path / "archive.csv"
    _archive(src)
    one = tmp_path / "one.parquet"
    assert main(["batch", str(src), "-o", str(one), "--quiet", "--profile", "full",
                 "--summary", str(tmp_path / "s.txt")]) == 0
    want = pq.read_table(one).to_pandas()
    folder = tmp_path / "shards"
    scale.shard(src, folder, 4)
    options = ("--profile", "full")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster):
        ddf = dd.read_parquet(str(folder))
        assert ddf.npartitions == 4
        got = ddf.map_partitions(partitions.check_partition, options,
                                 meta=partitions.output_meta(folder, options)).compute()
    # each shard's output carries the caution in its first row, as each batch file does
    assert got["caution"].notna().sum() == 4
    got = got.sort_values(scale.INPUT_ROW).reset_index(drop=True)
    got["row"] = got.pop(scale.INPUT_ROW)
    got, want = got.drop(columns=["caution"]), want.drop(columns=["caution"])
    assert list(got.columns) == list(want.columns)
    assert len(got) == 600 and (got["status"] == "refused").sum() >= 4
    assert (got["serial_codes"] != "").sum() > 0  # the serial checks ran and flagged rows
    # serial_detail cites earlier panels by row number in the file checked (the shard)
    # and by sample id: the ids must agree, the numbers are the shard's (docs/scale.md)
    for frame in (got, want):
        frame["serial_detail"] = frame["serial_detail"].str.replace(
            r"row \d+ \(sample", "row # (sample", regex=True)
    for col in want.columns:
        a, b = got[col].to_numpy(), want[col].to_numpy()
        if a.dtype.kind == "f":
            assert np.array_equal(a, b, equal_nan=True), col
        else:
            assert [None if pd.isna(x) else x for x in a] == \
                [None if pd.isna(x) else x for x in b], col


def test_check_arrow_is_the_library_table_check_on_one_shard(tmp_path):
    """``check_arrow`` (the table check, no serial checks) and ``check_shard`` (the
    command) agree on every column the table check fills."""
    src = tmp_path / "archive.csv"
    _archive(src, n=120)
    files = scale.shard(src, tmp_path / "shards", 2)
    t = pq.read_table(files[0])
    a = scale.check_arrow(t)
    b = partitions.check_shard(t, ("--profile", "full", "--no-serial"))
    for col in ("status", "reason", "disorders", "finding_codes", "anion_gap"):
        assert a[col].to_pylist() == b[col].to_pylist(), col


def test_shard_command_writes_the_files_and_refuses_a_bad_count(tmp_path, capsys):
    from acidbase.cli import main

    src = tmp_path / "archive.csv"
    _archive(src, n=50)
    assert main(["shard", str(src), str(tmp_path / "s"), "--shards", "3"]) == 0
    files = sorted((tmp_path / "s").glob("part-*.parquet"))
    assert 1 <= len(files) <= 3
    assert sum(pq.read_metadata(f).num_rows for f in files) == 50
    assert main(["shard", str(src), str(tmp_path / "t"), "--shards", "0"]) == 2
    assert "shards" in capsys.readouterr().err


def test_a_folder_holding_shards_already_is_refused_not_mixed(tmp_path, capsys):
    """Sharding again into the same folder with fewer shards left the first run's
    higher-numbered files beside the new ones: a folder read as one archive then held
    two inputs' rows. The second run is refused and the first run's files are kept."""
    from acidbase.cli import main

    big, small = tmp_path / "big.csv", tmp_path / "small.csv"
    _archive(big, n=200)
    _archive(small, n=20)
    folder = tmp_path / "s"
    assert main(["shard", str(big), str(folder), "--shards", "8"]) == 0
    before = {f.name: f.read_bytes() for f in folder.iterdir()}
    capsys.readouterr()
    assert main(["shard", str(small), str(folder), "--shards", "2"]) == 2
    err = capsys.readouterr().err
    assert "holds shard files already" in err and "part-00000.parquet" in err
    assert {f.name: f.read_bytes() for f in folder.iterdir()} == before
    assert main(["shard", str(small), str(tmp_path / "empty-and-new"), "--shards", "2"]) == 0


def _limited_file_size(limit: int):
    """For a child process: files it writes may grow to ``limit`` bytes, then each
    write fails with EFBIG ("File too large"), as on a full disk (POSIX setrlimit,
    RLIMIT_FSIZE; SIGXFSZ ignored so the write returns the error)."""
    import resource
    import signal

    def apply() -> None:
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    return apply


def test_a_shard_run_that_fails_writing_leaves_no_part_file(tmp_path):
    """The disk fills while the parts are written: the run fails (exit 2, one line, no
    traceback) and leaves no part file, whole or cut short, and not the folder it made:
    the parts are staged as ``acidbase batch -o`` stages its output. (It left each part
    cut at the limit, a Parquet file without its footer, in a folder that looked done.)"""
    import subprocess
    import sys

    src = tmp_path / "archive.csv"
    _archive(src, n=600)
    folder = tmp_path / "s"
    r = subprocess.run([sys.executable, "-m", "acidbase", "shard", str(src), str(folder),
                        "--shards", "3"], capture_output=True, text=True, timeout=120,
                       preexec_fn=_limited_file_size(2000))
    assert r.returncode == 2, r.stderr
    assert r.stderr.startswith("acidbase shard: could not run:") and "Traceback" not in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1, r.stderr
    assert not folder.exists() or list(folder.iterdir()) == []
    assert sorted(p.name for p in tmp_path.iterdir()) == ["archive.csv"]
    # The same run with room to write gives every row, in parts renamed into place.
    assert subprocess.run([sys.executable, "-m", "acidbase", "shard", str(src), str(folder),
                           "--shards", "3"], capture_output=True, timeout=120).returncode == 0
    assert sorted(p.name for p in folder.iterdir()) == [f"part-{k:05d}.parquet" for k in range(3)]
    assert sum(pq.read_metadata(f).num_rows for f in folder.iterdir()) == 600

