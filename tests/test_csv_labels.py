"""Dictionary-encoded text columns (the batch's own labels) in the compiled CSV writer.

The batch keeps its few-valued text columns (status, consistency, disorders, finding
codes, roles, needs_review) as Arrow dictionary arrays; the compiled writer writes each
label's cell once and copies it by index.  The reference is the Python writer
(``fileio.csv_rows``), which decodes the labels to plain text first and writes them as
any text column (Arrow's CSV writer, quoting "needed", and ``escape_formula``): both
must give the same bytes, for labels holding quotes, line breaks and formula starts,
null labels and null indices, several chunks with dictionaries of their own, offsets.
"""

from __future__ import annotations

import os

import pyarrow as pa
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from acidbase import csvtext, fileio
from acidbase.files.check import labelled
from acidbase.files.writer import Writer, decoded

compiled = pytest.mark.skipif(
    csvtext._csvfast is None and not os.environ.get("ACIDBASE_REQUIRE_COMPILED"),
    reason="the compiled writer is not built (no C compiler at install)")

_PIECES = ["=", "+", "-", "@", "\t", "\r", "\n", '"', ",", ";", "1", "e", " ", "é", "P-X", ""]
labels = st.lists(st.one_of(st.none(), st.lists(st.sampled_from(_PIECES), max_size=5).map("".join),
                            st.text(max_size=8)), min_size=1, max_size=6)


@st.composite
def label_columns(draw):
    """A chunked dictionary column: each chunk its own labels, indices (some null)."""
    chunks = []
    for _ in range(draw(st.integers(1, 3))):
        words = draw(labels)
        n = draw(st.integers(0, 12))
        idx = draw(st.lists(st.one_of(st.none(), st.integers(0, len(words) - 1)),
                            min_size=n, max_size=n))
        arr = pa.DictionaryArray.from_arrays(pa.array(idx, pa.int32()),
                                             pa.array(words, pa.string()))
        cut = draw(st.integers(0, len(arr)))
        chunks.append(arr.slice(cut // 2, len(arr) - cut))  # offsets as slices make them
    return pa.chunked_array(chunks, type=chunks[0].type)


@compiled
@settings(max_examples=300, deadline=None)
@given(label_columns(), st.booleans(), st.sampled_from([",", ";", "\t"]))
def test_label_columns_give_the_reference_bytes(col, escape, delimiter):
    table = pa.table({"plain_text": pa.array(["a"] * len(col)), "labels": col})
    esc = {"labels"} if escape else set()
    ref = fileio.csv_rows(table, {}, esc, frozenset(), delimiter).to_pybytes()
    got = csvtext.compiled_csv(table, {}, esc, frozenset(), delimiter)
    assert got == ref
    # the reference is the same bytes as the labels written as plain text
    plain = fileio.csv_rows(decoded(table), {}, esc, frozenset(), delimiter).to_pybytes()
    assert ref == plain


@compiled
def test_a_label_is_written_as_its_text_cell():
    """Quotes doubled, a formula start escaped when the column is escaped, a null
    index empty (what Arrow's writer and escape_formula do to the same text)."""
    col = labelled([0, 1, 2, 0], ['say "x"', "=SUM(A1)", "-5"])
    col = pa.DictionaryArray.from_arrays(pa.array([0, 1, 2, None], pa.int32()), col.dictionary)
    table = pa.table({"labels": col})
    got = csvtext.compiled_csv(table, {}, {"labels"}, frozenset(), ",")
    assert got == b'"say ""x"""\n"\'=SUM(A1)"\n"-5"\n\n'


def test_writers_other_than_csv_write_labels_as_text(tmp_path):
    """JSON Lines and Parquet files carry text columns, not dictionaries."""
    table = pa.table({"status": labelled([0, 1, 0], ["interpreted", "refused"])})
    for fmt in ("jsonl", "parquet"):
        w = Writer(str(tmp_path / f"out.{fmt}"), fmt)
        schema, payload = w.encode(table)
        assert schema.field("status").type == pa.string()
        w.put((schema, payload))
        w.close(ok=True)
    import pyarrow.parquet as pq

    assert pq.read_table(tmp_path / "out.parquet").column("status").to_pylist() == [
        "interpreted", "refused", "interpreted"]
    assert (tmp_path / "out.jsonl").read_text().splitlines()[1] == '{"status": "refused"}'
