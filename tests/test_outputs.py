"""Outputs appear whole or not at all, and never land on the input (docs/batch.md,
"Outputs and safety").

Subprocess tests run ``python -m acidbase`` on generated files (an invented scenario of
our own: panels of the E3 kind with an index in the comment); the expected outputs are
the tool's own single runs, since what is checked here is that no run loses, mixes or
truncates them.
"""

from __future__ import annotations

import csv
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from acidbase.cli import main
from acidbase.files.outputs import INCOMPLETE

ROOT = Path(__file__).resolve().parents[1]
DATA = Path(__file__).parent / "data" / "batch"
PREVIOUS = b"previous output, kept\n"


def batch(capsys, *args: object) -> tuple[int, str]:
    rc = main(["batch", *map(str, args)])
    return rc, capsys.readouterr().err


def big_file(path: Path, rows: int) -> Path:
    """Panels of 5,000 invented patients, hourly, with serial columns (so the serial
    pass makes its scratch folder)."""
    lines = ["patient_id,collected_at,sample_id,ph,pco2,hco3,na,cl,k,comment"]
    for i in range(rows):
        p, h = i % 5000, (i // 5000) % 24
        lines.append(f"P{p:05d},2026-01-01T{h:02d}:00:00Z,S{i},7.{30 + i % 15},{35 + i % 10},"
                     f"{20 + i % 8}.5,14{i % 5},10{i % 7},4.{i % 9},note {i}")
    path.write_text("\n".join(lines) + "\n")
    return path


def command(*args: object, tmp: Path | None = None) -> tuple[list[str], dict[str, str]]:
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    if tmp is not None:
        env["TMPDIR"] = str(tmp)
    return [sys.executable, "-m", "acidbase", "batch", *map(str, args)], env


def leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(INCOMPLETE))


# -- two runs, one output ---------------------------------------------------------------

def test_two_runs_writing_one_output_at_once_leave_one_complete_file(tmp_path):
    src = big_file(tmp_path / "day.csv", 40_000)
    ref = tmp_path / "ref.csv"
    argv, env = command(src, "-o", ref, "--quiet", "--chunk-rows", "2000")
    assert subprocess.run(argv, env=env, capture_output=True, timeout=300,
                          check=False).returncode == 0
    out = tmp_path / "out.csv"
    argv, env = command(src, "-o", out, "--quiet", "--chunk-rows", "2000")
    runs = [subprocess.Popen(argv, env=env, stderr=subprocess.PIPE) for _ in range(2)]
    errors = [r.communicate(timeout=300)[1] for r in runs]
    assert [r.returncode for r in runs] == [0, 0], errors
    data = out.read_bytes()
    assert b"\0" not in data
    assert data == ref.read_bytes()  # one run's whole file, not a mix
    assert leftovers(tmp_path) == []


# -- outputs that are the input by another name ----------------------------------------

def _links(tmp_path: Path) -> Path:
    day = tmp_path / "day.csv"
    day.write_bytes((DATA / "mixed.csv").read_bytes())
    (tmp_path / "sym.csv").symlink_to("day.csv")
    os.link(day, tmp_path / "hard.csv")
    return day


@pytest.mark.parametrize("input_name,output_name", [
    ("sym.csv", "day.csv"),      # input through a symbolic link, output the real name
    ("day.csv", "sym.csv"),      # output a symbolic link to the input
    ("day.csv", "hard.csv"),     # output a hard link of the input
    ("day.csv", "./day.csv"),    # the same name spelt another way
])
def test_output_that_is_the_input_by_another_name_is_refused(tmp_path, capsys, input_name,
                                                               output_name):
    day = _links(tmp_path)
    before = day.read_bytes()
    rc, err = batch(capsys, tmp_path / input_name, "-o", tmp_path / output_name)
    assert rc == 2 and "is the input" in err and "Traceback" not in err
    assert day.read_bytes() == before
    assert (tmp_path / "sym.csv").is_symlink()
    assert leftovers(tmp_path) == []


@pytest.mark.parametrize("extra,words", [
    (["--summary", "{out}"], "--summary {out}: is the -o file"),
    (["--report", "{rep}", "--summary", "{rep}"], "--report {rep}: is the --summary file"),
    (["--summary", "{inp}"], "--summary {inp}: is the input"),
    (["--report", "{link}"], "--report {link}: is the input"),
])
def test_summary_or_report_on_the_output_or_the_input_is_refused(tmp_path, capsys, extra,
                                                                  words):
    inp = tmp_path / "day.csv"
    inp.write_bytes((DATA / "mixed.csv").read_bytes())
    (tmp_path / "r.md").symlink_to("day.csv")
    out, rep = tmp_path / "out.csv", tmp_path / "rep.md"
    out.write_bytes(PREVIOUS)
    names = {"out": out, "rep": rep, "inp": inp, "link": tmp_path / "r.md"}
    args = [a.format(**names) for a in extra]
    rc, err = batch(capsys, inp, "-o", out, *args)
    assert rc == 2 and words.format(**names) in err
    assert out.read_bytes() == PREVIOUS
    assert inp.read_bytes() == (DATA / "mixed.csv").read_bytes()
    assert not rep.exists() and leftovers(tmp_path) == []


def test_an_input_named_like_an_old_temporary_file_is_read_not_overwritten(tmp_path, capsys):
    src = tmp_path / "out.csv.partial"
    src.write_bytes((DATA / "mixed.csv").read_bytes())
    rc, _ = batch(capsys, src, "-o", tmp_path / "out.csv")
    assert rc == 0 and src.read_bytes() == (DATA / "mixed.csv").read_bytes()
    assert len((tmp_path / "out.csv").read_text().splitlines()) == 13


# -- folders --------------------------------------------------------------------------

def test_output_in_a_missing_folder_stops_before_any_work(tmp_path, capsys):
    rc, err = batch(capsys, DATA / "serial_unsorted.csv", "-o", tmp_path / "no" / "o.csv")
    assert rc == 2 and "the folder does not exist" in err and "Traceback" not in err
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("where,words", [("no/s.json", "the folder does not exist"),
                                         ("sub", "is a folder")])
def test_a_summary_that_cannot_be_written_keeps_the_previous_output(tmp_path, capsys, where,
                                                                    words):
    """The -o file is staged first; the summary's failure must still leave it untouched."""
    out = tmp_path / "o.csv"
    out.write_bytes(PREVIOUS)
    (tmp_path / "sub").mkdir()
    rc, err = batch(capsys, DATA / "mixed.csv", "-o", out, "--summary", tmp_path / where)
    assert rc == 2 and "--summary" in err and words in err
    assert out.read_bytes() == PREVIOUS and leftovers(tmp_path) == []


def _unwritable_folder(tmp_path: Path) -> Path:
    folder = tmp_path / "locked"
    folder.mkdir()
    folder.chmod(0o555)
    try:
        (folder / "probe").touch()
    except PermissionError:
        return folder
    (folder / "probe").unlink()
    # root writes anywhere it may chmod: sysfs refuses new files even to root
    if os.path.isdir("/sys") and not os.access("/sys/acidbase-probe", os.F_OK):
        try:
            open("/sys/acidbase-probe", "wb").close()
        except OSError:
            return Path("/sys")
        os.unlink("/sys/acidbase-probe")
    pytest.skip("no folder here refuses writing")


def test_output_in_a_folder_that_cannot_be_written_stops_before_any_work(tmp_path, capsys):
    folder = _unwritable_folder(tmp_path)
    rc, err = batch(capsys, DATA / "serial_unsorted.csv", "-o", folder / "o.csv")
    assert rc == 2 and "cannot be written" in err and "Traceback" not in err
    assert not (folder / "o.csv").exists()


# -- failing and stopped runs ------------------------------------------------------------

def test_a_run_that_fails_after_writing_rows_keeps_the_previous_output(tmp_path, capsys):
    """The ragged line comes after several chunks were written to the temporary file."""
    src = tmp_path / "late.csv"
    good = "7.40,40,24.22,140,106.78\n" * 3000
    src.write_text("ph,pco2,hco3,na,cl\n" + good + "7.40,40\n")
    out, summary = tmp_path / "o.csv", tmp_path / "s.json"
    out.write_bytes(PREVIOUS)
    rc, err = batch(capsys, src, "-o", out, "--summary", summary, "--chunk-rows", "100")
    assert rc == 2 and "2 fields where the header has 5" in err
    assert "left as they were" in err
    assert out.read_bytes() == PREVIOUS and not summary.exists()
    assert leftovers(tmp_path) == []


@pytest.mark.parametrize("error", [OSError(5, "Input/output error"), RuntimeError("boom")])
def test_a_clean_up_that_fails_after_the_outputs_are_in_place_says_they_are_whole(
        tmp_path, capsys, monkeypatch, error):
    """The scratch folder cannot be removed (a disk error, or a defect) after every
    output was renamed into place: the run says the outputs are whole, not "nothing
    written" (they are there, complete), and ends with 0 (docs/batch.md)."""
    from acidbase import serial

    real = serial.SerialChecker.close

    def close(self):
        real(self)
        raise error

    monkeypatch.setattr(serial.SerialChecker, "close", close)
    src = big_file(tmp_path / "day.csv", 300)
    out, summary = tmp_path / "o.csv", tmp_path / "s.txt"
    out.write_bytes(PREVIOUS)
    rc, err = batch(capsys, src, "-o", out, "--summary", summary, "--quiet")
    assert rc == 0
    assert "every output was written in full; then the clean-up failed" in err
    assert "nothing written" not in err and "could not run" not in err
    assert len(list(csv.DictReader(out.open()))) == 300 and summary.exists()
    assert leftovers(tmp_path) == []


def _stop_mid_run(tmp_path: Path, signum: int, stdin: bool, during: str) -> tuple[int, str]:
    """Start a run on a large file; signal it ``during`` its serial pass (the scratch
    folder exists) or its "write" (its temporary output already holds rows)."""
    src = big_file(tmp_path / "day.csv", 150_000)
    scratch = tmp_path / "tmp"
    scratch.mkdir()
    out = tmp_path / "out.csv"
    out.write_bytes(PREVIOUS)
    argv, env = command("-" if stdin else src, "-o", out, "--report", tmp_path / "r.md",
                        "--chunk-rows", "500", tmp=scratch)
    with open(src, "rb") as f:
        proc = subprocess.Popen(argv, env=env, stdin=f if stdin else subprocess.DEVNULL,
                                stderr=subprocess.PIPE)
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and proc.poll() is None:
        if during == "serial":
            if any(any(d.glob("*.arrow")) for d in scratch.glob("acidbase-serial-*")):
                break
        else:
            staged = list(tmp_path.glob(".out.csv.*" + INCOMPLETE))
            if staged and staged[0].stat().st_size > 100_000:
                break
        time.sleep(0.01)
    assert proc.poll() is None, "the run ended before it could be stopped"
    proc.send_signal(signum)
    err = proc.communicate(timeout=120)[1].decode()
    assert out.read_bytes() == PREVIOUS
    assert leftovers(tmp_path) == [] and not (tmp_path / "r.md").exists()
    assert list(scratch.iterdir()) == []  # serial scratch and the stdin copy removed
    assert "Traceback" not in err
    return proc.returncode, err


@pytest.mark.parametrize("during", ["serial", "write"])
def test_sigterm_keeps_the_previous_output_and_leaves_nothing(tmp_path, during):
    rc, err = _stop_mid_run(tmp_path, signal.SIGTERM, stdin=True, during=during)
    assert rc == 143
    assert "stopped by SIGTERM before the end: nothing written" in err


@pytest.mark.parametrize("during", ["serial", "write"])
def test_ctrl_c_says_what_was_kept_and_exits_130(tmp_path, during):
    rc, err = _stop_mid_run(tmp_path, signal.SIGINT, stdin=False, during=during)
    assert rc == 130
    assert "stopped by Ctrl-C (SIGINT) before the end: nothing written" in err
    assert "left as they were" in err


# -- escaping ---------------------------------------------------------------------------

def _csv_rows(path: Path) -> list[list[str]]:
    with path.open(newline="", encoding="utf-8") as f:
        return list(csv.reader(f))


def test_formula_headers_are_escaped_in_the_output_header(tmp_path, capsys):
    src = tmp_path / "h.csv"
    src.write_text('ph,pco2,hco3,na,cl,"=HYPERLINK(""http://x"",""y"")",@ward\n'
                   "7.40,40,24.22,140,106.78,a,b\n")
    out = tmp_path / "o.csv"
    assert batch(capsys, src, "-o", out)[0] == 0
    header = _csv_rows(out)[0]
    assert "'=HYPERLINK(\"http://x\",\"y\")" in header and "'@ward" in header
    assert not any(h[:1] in ("=", "+", "-", "@") for h in header)


def test_mapping_file_headers_are_escaped_in_the_output_header(tmp_path, capsys):
    src = tmp_path / "lab.csv"
    src.write_text("+pH,pco2,hco3,na,cl\n7.40,40,24.22,140,106.78\n")
    mapping = tmp_path / "map.csv"
    mapping.write_text("header,field\n+pH,ph\n")
    out = tmp_path / "o.csv"
    assert batch(capsys, src, "--map", mapping, "-o", out)[0] == 0
    rows = _csv_rows(out)
    assert rows[0][1] == "'+pH" and rows[1][1] == "7.40"


def test_dictionary_encoded_parquet_text_is_escaped(tmp_path, capsys):
    src = tmp_path / "d.parquet"
    comment = pa.array(["=1+2", "ok", "@SUM(A1)"]).dictionary_encode()
    pq.write_table(pa.table({"ph": [7.40] * 3, "pco2": [40.0] * 3, "hco3": [24.22] * 3,
                             "na": [140.0] * 3, "cl": [106.78] * 3, "comment": comment}), src)
    out = tmp_path / "o.csv"
    assert batch(capsys, src, "-o", out)[0] == 0
    rows = _csv_rows(out)
    at = rows[0].index("comment")
    assert [r[at] for r in rows[1:]] == ["'=1+2", "ok", "'@SUM(A1)"]


REPORT_SAMPLE = "<script>alert(1)</script>|[x](http://y)"


@pytest.mark.parametrize("name", ["r.md", "r.html"])
def test_reports_escape_what_they_echo(tmp_path, capsys, name):
    src = tmp_path / "s.csv"
    # a refused row (pH missing), so the report lists it with its sample id
    src.write_text(f'sample_id,ph,pco2,hco3,na,cl,<b>x</b>\n"{REPORT_SAMPLE}",,40,24,140,'
                   "104,1\n")
    report = tmp_path / name
    assert batch(capsys, src, "-o", tmp_path / "o.csv", "--report", report)[0] == 0
    text = report.read_text()
    assert "<script" not in text and "<b>" not in text
    assert "&lt;script&gt;" in text and "&lt;b&gt;" in text
    if name.endswith(".md"):
        assert "\\|\\[x\\](http://y)" in text  # no cell break, no link


def test_html_report_cells_are_formula_escaped_for_spreadsheets(tmp_path, capsys):
    """A spreadsheet opens an HTML table too: a sample id "=1+2" shows as '=1+2."""
    src = tmp_path / "s.csv"
    src.write_text("sample_id,ph,pco2,hco3,na,cl\n=1+2,,40,24,140,104\n")
    report = tmp_path / "r.html"
    assert batch(capsys, src, "-o", tmp_path / "o.csv", "--report", report)[0] == 0
    text = report.read_text()
    assert "<td>&#x27;=1+2</td>" in text and "<td>=1+2</td>" not in text


# -- closed streams and pipes -------------------------------------------------------------

def _closed_pipe_run(*args: str, stdin: bytes | None = None) -> subprocess.CompletedProcess:
    """Run with standard output a pipe whose reader has already gone (``| head`` done)."""
    r, w = os.pipe()
    os.close(r)
    try:
        return subprocess.run([sys.executable, "-m", "acidbase", *args], stdout=w,
                              stderr=subprocess.PIPE, input=stdin, timeout=300, check=False,
                              env=dict(os.environ, PYTHONPATH=str(ROOT)))
    finally:
        os.close(w)


@pytest.mark.parametrize("args", [
    ("demo",), ("demo", "--json"),
    ("check", "--json", "--ph", "7.4", "--pco2", "40", "--hco3", "24", "--na", "140",
     "--cl", "104"),
])
def test_a_closed_pipe_ends_quietly(args):
    done = _closed_pipe_run(*args)
    assert done.returncode == 141 and done.stderr == b""


@pytest.mark.parametrize("args", [("--help",), ("batch", "--help"), ("--version",),
                                  ("history", "--help")])
def test_help_into_a_closed_pipe_ends_quietly(args):
    """Help and version go through the commands' own writer (argparse dropped a failed
    write, exit 0): a closed pipe ends them quietly with 141, as for any output."""
    done = _closed_pipe_run(*args)
    assert done.returncode == 141 and done.stderr == b""


def test_batch_to_a_closed_pipe_says_the_output_is_incomplete(tmp_path):
    done = _closed_pipe_run("batch", str(DATA / "mixed.csv"), "--quiet")
    err = done.stderr.decode()
    assert done.returncode == 141 and "Traceback" not in err
    assert "standard output was closed by its reader" in err


@pytest.mark.parametrize("shell", [
    "{py} -m acidbase demo >&-",
    "{py} -m acidbase batch {src} >&-",
    "{py} -m acidbase batch - <&-",
])
def test_closed_standard_streams_give_a_message_not_a_traceback(shell):
    line = shell.format(py=sys.executable, src=DATA / "mixed.csv")
    done = subprocess.run(["sh", "-c", line], capture_output=True, timeout=120, check=False,
                          env=dict(os.environ, PYTHONPATH=str(ROOT)))
    err = done.stderr.decode()
    assert done.returncode == 2 and "Traceback" not in err
    assert "is closed" in err


def test_every_exit_status_of_batch_is_documented():
    doc = (ROOT / "docs" / "batch.md").read_text(encoding="utf-8")
    section = doc.split("## Exit status")[1].split("\n## ")[0]
    for status in (0, 2, 70, 130, 143, 141):
        assert f"\n| {status} |" in section, status
    assert "129" in section and "SIGKILL" in doc


def test_a_read_only_previous_output_is_not_replaced(tmp_path, capsys):
    out = tmp_path / "o.csv"
    out.write_bytes(PREVIOUS)
    out.chmod(0o444)
    rc, err = batch(capsys, DATA / "mixed.csv", "-o", out)
    assert rc == 2 and "is read-only" in err
    assert out.read_bytes() == PREVIOUS and leftovers(tmp_path) == []


def test_an_unexpected_error_is_one_line_with_nothing_written(tmp_path, capsys, monkeypatch):
    """A defect (here the counting of a chunk made to fail) still ends without a
    traceback and without an output."""
    import acidbase.batch as batch_module

    def broken(*args, **kwargs):
        raise TypeError("made to fail")

    monkeypatch.setattr(batch_module, "tally_chunk", broken)
    out = tmp_path / "o.csv"
    out.write_bytes(PREVIOUS)
    rc, err = batch(capsys, DATA / "mixed.csv", "-o", out)
    assert rc == 70 and err.count("\n") == 1
    assert "unexpected TypeError: made to fail" in err and "left as it was" in err
    assert out.read_bytes() == PREVIOUS and leftovers(tmp_path) == []


def test_a_signal_during_the_renames_waits_until_every_output_is_in_place(tmp_path,
                                                                          monkeypatch):
    """SIGTERM sent as the first of two outputs is renamed: both are renamed, then the
    run stops (never a data file in place without its report)."""
    from acidbase.files import outputs as out_module

    names = [tmp_path / "a.csv", tmp_path / "b.md"]
    real_rename = out_module.Staged.rename
    sent = []

    def rename_after_a_signal(self):
        if not sent:
            sent.append(True)
            os.kill(os.getpid(), signal.SIGTERM)
        real_rename(self)

    monkeypatch.setattr(out_module.Staged, "rename", rename_after_a_signal)
    outputs = out_module.OutputSet()
    with pytest.raises(out_module.Stopped) as stopped, out_module.stop_on_signals():
        for n in names:
            outputs.add("-o", str(n)).file.write(b"whole\n")
        outputs.commit()
    assert stopped.value.signum == signal.SIGTERM and outputs.committed
    assert [n.read_bytes() for n in names] == [b"whole\n", b"whole\n"]
    assert leftovers(tmp_path) == []


def test_two_outputs_that_do_not_exist_yet_are_one_file_by_another_spelling(tmp_path, capsys):
    """Neither exists yet: the folder's identity and the name decide (a folder reached
    through a symbolic link is the same folder)."""
    (tmp_path / "here").symlink_to(".")
    rc, err = batch(capsys, DATA / "mixed.csv", "-o", tmp_path / "n.csv",
                    "--summary", tmp_path / "here" / "n.csv")
    assert rc == 2 and "is the -o file" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["here"]


def test_temporary_files_left_by_a_killed_run_are_named_in_the_summary(tmp_path, capsys):
    """What SIGKILL leaves (docs/batch.md) is pointed out by the next run to that output."""
    old = tmp_path / ".o.csv.k1ll3d.incomplete"
    old.write_bytes(b"half a file")
    rc, err = batch(capsys, DATA / "mixed.csv", "-o", tmp_path / "o.csv")
    assert rc == 0 and "another run to this output" in err and str(old) in err
    assert old.read_bytes() == b"half a file"  # pointed out, not deleted


@pytest.mark.skipif(not os.path.exists("/dev/full"), reason="no /dev/full here")
def test_a_full_disk_mid_write_is_one_clear_line(capsys):
    """/dev/full refuses every write with ENOSPC, as a full disk does."""
    rc, err = batch(capsys, DATA / "serial_unsorted.csv", "-o", "/dev/full")
    assert rc == 2 and "No space left on device" in err
    assert err.count("\n") == 1 and "Traceback" not in err


def test_a_failing_run_removes_the_serial_scratch_folder(tmp_path, capsys, monkeypatch):
    """The serial pass has spilled patient ids to its scratch folder when a ragged line
    far into the file stops the second pass."""
    import tempfile

    from acidbase import serial

    scratch = tmp_path / "tmp"
    scratch.mkdir()
    monkeypatch.setattr(tempfile, "tempdir", str(scratch))
    closed = []
    real_close = serial.SerialChecker.close

    def close(self):  # removed by the run itself, not left to garbage collection
        closed.append(list(scratch.iterdir()))
        real_close(self)

    monkeypatch.setattr(serial.SerialChecker, "close", close)
    src = big_file(tmp_path / "day.csv", 5000)
    with src.open("a") as f:
        f.write("P00001,2026-01-02T00:00:00Z,S-late,7.40\n")
    rc, err = batch(capsys, src, "-o", tmp_path / "o.csv", "--chunk-rows", "200")
    assert rc == 2 and "fields where the header has 10" in err
    assert len(closed) == 1 and closed[0]  # closed once, while its folder was there
    assert list(scratch.iterdir()) == [] and not (tmp_path / "o.csv").exists()


def test_a_failing_run_from_standard_input_removes_its_copy(tmp_path):
    scratch = tmp_path / "tmp"
    scratch.mkdir()
    argv, env = command("-", "-o", tmp_path / "o.csv", tmp=scratch)
    done = subprocess.run(argv, env=env, input=b"ph,pco2\n7.4,40\n", capture_output=True,
                          timeout=120, check=False)
    assert done.returncode == 2 and b"no column for required field" in done.stderr
    assert list(scratch.iterdir()) == [] and not (tmp_path / "o.csv").exists()


def test_a_temporary_name_that_is_the_input_is_never_opened(tmp_path, capsys, monkeypatch):
    """The input named exactly as the first temporary name the run draws: the exclusive
    creation skips it (tempfile's private name source is replaced to force the draw)."""
    import tempfile

    src = tmp_path / ".o.csv.first.incomplete"
    src.write_bytes((DATA / "mixed.csv").read_bytes())
    monkeypatch.setattr(tempfile, "_get_candidate_names", lambda: iter(["first", "second"]))
    rc, _ = batch(capsys, src, "--format", "csv", "-o", tmp_path / "o.csv")
    assert rc == 0 and src.read_bytes() == (DATA / "mixed.csv").read_bytes()
    assert len((tmp_path / "o.csv").read_text().splitlines()) == 13


def test_a_history_export_onto_its_own_store_is_refused(tmp_path, capsys, monkeypatch):
    """``acidbase history h.db --patient P1 --export -o h.db`` wrote the CSV over the
    store (every patient's stored panels lost); the store is an input of the export."""
    from acidbase import history

    monkeypatch.setenv(history.KEY_ENV, "site-key-for-tests-only-0123456789")
    src = tmp_path / "day.csv"
    src.write_text("patient_id,collected_at,ph,pco2,hco3\nP1,2026-12-01T08:00Z,7.40,40,24\n")
    store = tmp_path / "h.db"
    assert main(["batch", str(src), "-o", str(tmp_path / "out.csv"), "--history", str(store),
                 "--quiet"]) == 0
    before = store.read_bytes()
    capsys.readouterr()
    for target in (store, tmp_path / "." / "h.db"):
        rc = main(["history", str(store), "--patient", "P1", "--export", "-o", str(target)])
        assert rc == 2 and "is the input" in capsys.readouterr().err
    assert store.read_bytes() == before
    assert main(["history", str(store)]) == 0  # still a store
