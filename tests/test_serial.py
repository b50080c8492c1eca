"""Serial checks: delta limits, series breaks, windows, unsorted input.

The limits are those of ``acidbase.serial.DELTA_RULES`` (common laboratory practice, no
source); each test puts a change just inside or just outside one of them.  Base values
are the E3 normal panel of the methods sheet (Na+ 140 mmol/L from worked example E23).
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pytest

from acidbase import fileio, serial

LIMIT = {r.field: r.limit for r in serial.DELTA_RULES}
HOUR = 3600


def run(patients, hours, values, partitions=1, rules=serial.DELTA_RULES, window=24.0,
        times=None, workers=1, detail_rows=None):
    checker = serial.SerialChecker(rules, window, partitions, detail_rows=detail_rows)
    if times is None:
        secs = np.array([int(h * HOUR) for h in hours], dtype=np.int64)
        kind = np.full(len(secs), fileio.TIME_ZONED, dtype=np.int8)
    else:
        secs, kind = fileio.parse_times(pa.array(times))
    vals = {k: np.asarray(v, dtype=np.float64) for k, v in values.items()}
    checker.add(pa.array(patients, type=pa.string()), secs, kind, vals,
                pa.array([f"S{i + 1}" for i in range(len(patients))]))
    checker.finish(workers=workers)
    return checker.columns(0, len(patients))


def random_na(seed: int, n: int, patients: int, sd: float):
    """Invented panels for these tests only: ``n`` rows of ``patients`` patients over
    three days in random order, Na+ around 140 mmol/L (standard deviation ``sd``)."""
    rng = np.random.default_rng(seed)
    pats = [f"P{i}" for i in rng.integers(0, patients, n)]
    return pats, rng.uniform(0, 72, n), 140.0 + rng.normal(0, sd, n)


def test_change_above_the_limit_is_flagged_on_the_later_panel():
    na = 140.0 + LIMIT["na"] + 1
    out = run(["P", "P"], [0, 2], {"na": [140.0, na]})
    assert out["serial_codes"].tolist() == ["", "SERIAL-DELTA-NA"]
    assert out["serial_status"].tolist() == ["within limits", "flagged"]
    assert "row 1" in out["serial_detail"][1] and "sample S1" in out["serial_detail"][1]


def test_change_equal_to_the_limit_is_not_flagged():
    out = run(["P", "P"], [0, 2], {"k": [4.0, 4.0 + LIMIT["k"]]})
    assert out["serial_codes"].tolist() == ["", ""]


def test_panels_further_apart_than_the_window_are_not_compared():
    out = run(["P", "P"], [0, 24.5], {"na": [140.0, 120.0]})
    assert out["serial_codes"].tolist() == ["", ""]
    assert out["serial_status"][0] == serial.STATUS_TEXT[serial.ALONE]


def test_different_patients_are_never_compared():
    out = run(["A", "B"], [0, 1], {"na": [140.0, 120.0]})
    assert out["serial_codes"].tolist() == ["", ""]


def test_a_one_panel_spike_breaks_the_series():
    na = [140.0, 141.0, 128.0, 140.0, 139.0]
    out = run(["P"] * 5, [0, 2, 4, 6, 8], {"na": na})
    assert out["serial_codes"][2] == "SERIAL-BREAK;SERIAL-DELTA-NA"
    assert out["serial_codes"][3] == "SERIAL-DELTA-NA"  # the return to the series
    assert out["serial_codes"][[0, 1, 4]].tolist() == ["", "", ""]
    assert "another patient" in out["serial_detail"][2]


def test_a_steady_trend_below_the_limit_is_not_a_break():
    out = run(["P"] * 4, [0, 6, 12, 18], {"na": [140.0, 134.0, 128.0, 122.0]})
    assert out["serial_codes"].tolist() == ["", "", "", ""]


def test_a_step_that_stays_is_a_delta_not_a_break():
    out = run(["P"] * 3, [0, 2, 4], {"na": [140.0, 125.0, 126.0]})
    assert out["serial_codes"].tolist() == ["", "SERIAL-DELTA-NA", ""]


def test_unsorted_rows_give_the_same_flags_as_sorted_rows():
    rng = np.random.default_rng(7)
    pats = ["P"] * 5 + ["Q"] * 3
    hours = [0, 2, 4, 6, 8, 0, 1, 2]
    na = [140.0, 141.0, 128.0, 140.0, 139.0, 140.0, 152.0, 152.0]
    ref = run(pats, hours, {"na": na})
    perm = rng.permutation(len(pats))
    out = run([pats[i] for i in perm], [hours[i] for i in perm], {"na": [na[i] for i in perm]})
    assert out["serial_codes"].tolist() == ref["serial_codes"][perm].tolist()


@pytest.mark.parametrize("workers", [1, 2, 3])
def test_partitioning_does_not_change_the_result(workers):
    """Partitions checked one after the other or on threads (``workers``): the
    flags and their text are those of one partition."""
    pats, hours, na = random_na(3, 400, 40, 6)
    one = run(pats, hours, {"na": na}, partitions=1)
    many = run(pats, hours, {"na": na}, partitions=7, workers=workers)
    for key in serial.COLUMNS:
        assert one[key].tolist() == many[key].tolist()
    assert (one["serial_codes"] != "").any()


def test_missing_value_takes_no_part():
    out = run(["P", "P"], [0, 2], {"na": [140.0, np.nan]})
    assert out["serial_codes"].tolist() == ["", ""]


def test_rows_without_id_or_time_are_not_assessable():
    out = run(["P", None, "P"], None, {"na": [140.0, 150.0, 150.0]},
              times=["2026-01-01T08:00:00Z", "2026-01-01T09:00:00Z", "bad"])
    assert out["serial_status"].tolist() == [serial.STATUS_TEXT[serial.ALONE],
                                            serial.STATUS_TEXT[serial.NO_ID],
                                            serial.STATUS_TEXT[serial.BAD_TIME]]


def test_offsets_are_compared_in_utc():
    # 10:00+01:00 is 09:00Z (ISO 8601), so the 09:30Z panel is the later one.
    out = run(["P", "P"], None, {"na": [140.0, 152.0]},
              times=["2026-01-01T10:00:00+01:00", "2026-01-01T09:30:00Z"])
    assert out["serial_codes"].tolist() == ["", "SERIAL-DELTA-NA"]
    assert "0.5 h" in out["serial_detail"][1]


def test_times_without_offset_beside_times_with_one_are_not_assessable():
    out = run(["P", "P", "P"], None, {"na": [140.0, 140.0, 140.0]},
              times=["2026-01-01T08:00:00Z", "2026-01-01T09:00:00Z", "2026-01-01T10:00:00"])
    assert out["serial_status"][2] == serial.STATUS_TEXT[serial.MIXED_ZONE]


def test_laboratory_limits_replace_the_defaults():
    rules = serial.rules_with({"na": 15.0, "k": None})
    out = run(["P", "P"], [0, 2], {"na": [140.0, 152.0], "k": [4.0, 6.0]}, rules=rules)
    assert out["serial_codes"].tolist() == ["", ""]


def test_columns_answer_by_row_range_across_chunks():
    checker = serial.SerialChecker(serial.DELTA_RULES, 24.0, 3)
    for start in range(0, 6, 2):  # three chunks of two rows
        secs = np.array([(start + j) * HOUR for j in range(2)], dtype=np.int64)
        checker.add(pa.array(["P", "P"]), secs, np.full(2, fileio.TIME_ZONED, dtype=np.int8),
                    {"na": np.array([140.0, 140.0 if start != 2 else 160.0])})
    checker.finish()
    codes = sum((checker.columns(s, s + 2)["serial_codes"].tolist() for s in range(0, 6, 2)), [])
    assert codes == ["", "", "", "SERIAL-BREAK;SERIAL-DELTA-NA", "SERIAL-DELTA-NA", ""]


def test_every_rule_names_a_source_and_a_known_field():
    from acidbase.fields import BY_NAME

    for r in serial.DELTA_RULES:
        assert r.field in BY_NAME and r.limit > 0 and r.source


@pytest.mark.parametrize("bad", [0.0, -1.0])
def test_window_must_be_positive(bad):
    with pytest.raises(ValueError):
        serial.SerialChecker(window_hours=bad)


def test_flagged_text_read_back_across_spill_files_matches_one_file(monkeypatch):
    """The flagged rows' text is spilled to files by row range; ranges of two rows
    give the same columns as one range for the whole file."""
    rng = np.random.default_rng(11)
    n = 300
    pats = [f"P{i}" for i in rng.integers(0, 30, n)]
    hours = rng.uniform(0, 48, n)
    values = {"na": 140.0 + rng.normal(0, 8, n), "k": 4.0 + rng.normal(0, 0.8, n)}
    one = run(pats, hours, values, partitions=3)
    monkeypatch.setattr(serial, "_BUCKET_ROWS", 2)
    monkeypatch.setattr(serial, "_MAX_BUCKETS", 1000)
    many = run(pats, hours, values, partitions=3)
    for key in serial.COLUMNS:
        assert one[key].tolist() == many[key].tolist()
    assert (one["serial_codes"] != "").sum() > 20


def test_one_flagged_row_can_carry_a_break_and_several_deltas():
    """Every part of the detail is there, in the order break, then the rule table."""
    out = run(["P"] * 3, [0, 1, 2], {"na": [140.0, 160.0, 141.0], "k": [4.0, 6.0, 4.1]})
    assert out["serial_codes"][1] == "SERIAL-BREAK;SERIAL-DELTA-NA;SERIAL-DELTA-K"
    detail = out["serial_detail"][1]
    assert detail.startswith("breaks this patient's series (Na+ 160 between 140 and 141, "
                             "K+ 6 between 4 and 4.1; panels row 1 (sample S1) and row 3 "
                             "(sample S3))")
    assert detail.index("Na+ 160 after 140 (+20 mmol/L in 1.0 h") < detail.index("K+ 6 after 4")


@pytest.mark.parametrize("span", [86400 * 400, 2**62])
def test_the_series_order_is_numpys_lexsort_by_patient_time_and_row(span):
    """The one-key sort gives numpy's three-key lexsort (the reference), with stored
    panels' negative row numbers out of order, missing patients (-1), shared times,
    and times too far apart to share a key with the patient (the lexsort itself)."""
    rng = np.random.default_rng(5)
    n = 5000
    pid = rng.integers(-1, 300, n)
    t = rng.integers(0, 40, n) * (span // 40)
    row = np.concatenate([np.arange(n - 800), -1 - rng.permutation(800)])
    got = serial._series_order(pid, t, row)
    assert got.tolist() == np.lexsort((row, t, pid)).tolist()
    ordered = np.arange(n)
    assert serial._series_order(pid, t, ordered).tolist() == np.lexsort(
        (ordered, t, pid)).tolist()
    alone = rng.permutation(n) * (span // n)  # no patient and time shared
    assert serial._series_order(pid, alone, row).tolist() == np.lexsort(
        (row, alone, pid)).tolist()


def test_hex_prefix_reads_the_first_64_bits_as_python_int_does():
    """Read from the Arrow buffers; checked against Python's int(text, 16), for ids of
    one width (a strided view), a slice, and texts of several widths."""
    import secrets

    ids = [secrets.token_hex(16) for _ in range(200)] + ["f" * 32, "0" * 32]
    want = [int(h[:16], 16) for h in ids]
    assert serial.hex_prefix64(pa.array(ids)).tolist() == want
    assert serial.hex_prefix64(pa.array(ids).slice(7, 50)).tolist() == want[7:57]
    mixed = ids[:20] + ["0123456789abcdef" + "9" * 5]
    assert serial.hex_prefix64(pa.array(mixed)).tolist() == [int(h[:16], 16) for h in mixed]


def test_keyed_ids_in_many_partitions_give_the_plain_ids_result():
    """The history store's hex ids, partitioned by their first digits (16 or more
    partitions), flag exactly what the plain ids flag in one partition."""
    from acidbase import history

    rng = np.random.default_rng(17)
    n = 600
    pats = [f"P{i}" for i in rng.integers(0, 40, n)]
    hours = rng.uniform(0, 72, n)
    values = {"na": 140.0 + rng.normal(0, 8, n), "k": 4.0 + rng.normal(0, 0.8, n)}
    plain = run(pats, hours, values, partitions=1)
    keyed = history.hash_ids(pa.array(pats), b"k" * 32)
    checker = serial.SerialChecker(serial.DELTA_RULES, 24.0, 3, hashed_ids=True)
    assert checker.k == 16
    secs = np.array([int(h * HOUR) for h in hours], dtype=np.int64)
    checker.add(keyed, secs, np.full(n, fileio.TIME_ZONED, dtype=np.int8),
                {k: np.asarray(v) for k, v in values.items()},
                pa.array([f"S{i + 1}" for i in range(n)]))
    checker.finish(workers=2)
    got = checker.columns(0, n)
    for key in serial.COLUMNS:
        assert got[key].tolist() == plain[key].tolist()
    assert (plain["serial_codes"] != "").sum() > 30


def test_a_jump_and_a_larger_jump_back_past_the_start_is_two_deltas_not_a_break():
    """Both changes beyond the limit in opposite directions, but the panels either side
    differ by more than the limit (140 and 160 mmol/L): no break, two deltas."""
    out = run(["P"] * 3, [0, 1, 2], {"na": [140.0, 128.0, 160.0]})
    assert out["serial_codes"].tolist() == ["", "SERIAL-DELTA-NA", "SERIAL-DELTA-NA"]


def test_numbers_kept_across_partitions_read_as_formatting_each_does():
    """The formatted values kept across calls (serial._Texts) give what formatting each
    distinct value of each call gives (Python's format, the reference), over calls that
    share values, with zeros of both signs and NaN, for both formats."""
    rng = np.random.default_rng(5)
    for _ in range(200):
        n = int(rng.integers(0, 150))
        x = np.round(rng.normal(0, 30, n), int(rng.integers(0, 4)))
        x[rng.random(n) < 0.05] = 0.0
        x[rng.random(n) < 0.05] = -0.0
        x[rng.random(n) < 0.05] = np.nan
        for fmt in (serial._fmt, serial._hours):
            u, inv = np.unique(x, return_inverse=True)
            want = [fmt(float(u[i])) for i in inv.ravel()]
            assert serial._formatted(x, fmt).to_pylist() == want


@pytest.mark.parametrize("limit", [25, 150])
@pytest.mark.parametrize("partitions,workers", [(1, 1), (7, 1), (7, 2)])
def test_sentences_for_the_first_flagged_rows_only_keep_every_code(partitions, workers, limit):
    """``detail_rows=N`` (a batch that writes no ``serial_detail`` column and lists N
    rows for review): every flagged row keeps its codes and status; the first N
    flagged rows of the file keep their sentence, word for word; the others have
    none.  Whatever the partitions and threads."""
    rng = np.random.default_rng(11)
    n = 2000
    pats = [f"P{i}" for i in rng.integers(0, 120, n)]
    hours = rng.uniform(0, 96, n)
    values = {"na": 140.0 + rng.normal(0, 7, n), "k": 4.0 + rng.normal(0, 0.7, n)}
    full = run(pats, hours, values, partitions=partitions, workers=workers)
    some = run(pats, hours, values, partitions=partitions, workers=workers, detail_rows=limit)
    assert some["serial_codes"].tolist() == full["serial_codes"].tolist()
    assert some["serial_status"].tolist() == full["serial_status"].tolist()
    flagged = np.flatnonzero(full["serial_codes"] != "")
    assert len(flagged) > 200 and (full["serial_detail"][flagged] != "").all()
    first = flagged[:limit]  # (150: more than some partitions have flagged)
    assert some["serial_detail"][first].tolist() == full["serial_detail"][first].tolist()
    assert (some["serial_detail"][flagged[limit:]] == "").all()
    assert (some["serial_detail"][full["serial_codes"] == ""] == "").all()


@pytest.mark.parametrize("spill_rows", [1, 7, 1 << 17])
def test_rows_gathered_before_spilling_give_the_same_flags(monkeypatch, spill_rows):
    """The first pass gathers chunks before it spills them to the partitions: spilled
    every chunk, every few chunks or once at the end, the flags and their text are
    those of one partition read whole."""
    n = 900
    pats, hours, na = random_na(4, n, 60, 7)
    one = run(pats, hours, {"na": na}, partitions=1)
    monkeypatch.setattr(serial, "_SPILL_ROWS", spill_rows)
    checker = serial.SerialChecker(serial.DELTA_RULES, 24.0, 5)
    secs = np.array([int(h * HOUR) for h in hours], dtype=np.int64)
    for lo in range(0, n, 50):  # chunks of 50 rows, in file order
        hi = lo + 50
        checker.add(pa.array(pats[lo:hi]), secs[lo:hi],
                    np.full(hi - lo, fileio.TIME_ZONED, dtype=np.int8), {"na": na[lo:hi]},
                    pa.array([f"S{i + 1}" for i in range(lo, hi)]))
    checker.finish(workers=2)
    got = checker.columns(0, n)
    checker.close()
    for key in serial.COLUMNS:
        assert got[key].tolist() == one[key].tolist()
    assert (one["serial_codes"] != "").sum() > 50
