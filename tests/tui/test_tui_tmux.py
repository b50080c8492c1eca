"""End to end: the real ``acidbase tui`` in a tmux window, typed into with send-keys.

Each panel is sent in ONE ``send-keys`` call, so the keys reach the app together, as
a fast typist's keys arrive over SSH; what the form shows must be exactly what was
printed.  The form's rows are read from the screen by column: the focus mark and the
title (14 cells), the value (9), the unit (8).
"""

from __future__ import annotations

import os
import re
import shlex
import shutil
import subprocess
import sys
import time
import uuid
from pathlib import Path

import pytest

import acidbase
from tui.widgets.chrome import SHORT_CAUTION

ROOT = Path(__file__).resolve().parents[2]

pytestmark = pytest.mark.skipif(
    shutil.which("tmux") is None,
    reason="tmux is not installed (.ci/run installs it); the end-to-end tests need it")


#: A tmux server of these tests' own (its own socket): no other tmux user can disturb it.
SOCKET = f"acidbase-tests-{os.getpid()}"


def _tmux(*args: str) -> str:
    return subprocess.run(["tmux", "-L", SOCKET, *args], check=True, capture_output=True,
                          text=True).stdout


def _screen(session: str, escapes: bool = False) -> str:
    return _tmux("capture-pane", "-t", session, "-p", *(["-e"] if escapes else []))


def _wait_for(session: str, check, timeout: float = 20.0) -> str:
    """The screen once ``check(screen)`` holds (a string: once it is on the screen)."""
    test = (lambda s: check in s) if isinstance(check, str) else check
    deadline = time.monotonic() + timeout
    while True:
        screen = _screen(session)
        if test(screen):
            return screen
        if time.monotonic() > deadline:
            raise AssertionError(f"{check!r} not on the screen:\n{screen}")
        time.sleep(0.1)


def _flat(text: str) -> str:
    return " ".join(text.split())


def form_rows(screen: str) -> dict[str, tuple[str, str]]:
    """Title -> (value, unit) for every form row on the screen."""
    rows = {}
    for line in screen.splitlines():
        if "\u2595" not in line:
            continue
        left = line.split("\u2595", 1)[0]
        title, value, unit = left[2:14].strip(), left[14:23].strip(), left[23:31].strip()
        if title and not title.startswith(("check:", "refused:")):
            rows[title] = (value, unit)
    return rows


def start(tmp_path: Path, size: tuple[int, int] = (80, 24), no_color: bool = False,
          args: tuple[str, ...] = (), extra_env: dict[str, str] | None = None) -> str:
    name = f"acidbase-test-{uuid.uuid4().hex[:8]}"
    env = {k: v for k, v in os.environ.items() if k != "NO_COLOR"}
    env["XDG_CONFIG_HOME"] = str(tmp_path / "config")  # never the user's own settings
    if no_color:
        env["NO_COLOR"] = "1"
    command = " ".join([sys.executable, "-m", "acidbase", "tui", *map(shlex.quote, args)])
    extra = [x for k, v in (extra_env or {}).items() for x in ("-e", f"{k}={v}")]
    subprocess.run(["tmux", "-L", SOCKET, "new-session", "-d", "-s", name, "-x", str(size[0]),
                    "-y", str(size[1]), "-c", str(ROOT), "-e",
                    f"XDG_CONFIG_HOME={env['XDG_CONFIG_HOME']}",
                    *(["-e", "NO_COLOR=1"] if no_color else []), *extra, command],
                   check=True, env=env, capture_output=True)
    _wait_for(name, "Verdict:")
    return name


@pytest.fixture(scope="module", autouse=True)
def server():
    """One tmux server for the module, held open by an idle session (so that it does not
    shut down between tests, racing the next test's new session), closed at the end."""
    subprocess.run(["tmux", "-L", SOCKET, "new-session", "-d", "-s", "hold", "cat"],
                   check=True, capture_output=True)
    yield
    subprocess.run(["tmux", "-L", SOCKET, "kill-server"], capture_output=True, check=False)


@pytest.fixture
def session(tmp_path):
    names: list[str] = []

    def open_(**kwargs) -> str:
        names.append(start(tmp_path, **kwargs))
        return names[-1]

    yield open_
    for name in names:
        subprocess.run(["tmux", "-L", SOCKET, "kill-session", "-t", name], capture_output=True,
                       check=False)


#: A chronic respiratory acidosis with its oxygenation, keyed in form order (pH, pCO2,
#: pO2, HCO3-, FiO2, sample, source, Na+, K+, Cl-).  Narins & Emmett, Medicine 1980:
#: HCO3 rises about 3.5 mmol/L per 10 mm[Hg] of pCO2 when chronic; at pCO2 60, 31 +/- 2.
PRINTED = {"pH": "7.33", "pCO2": "60", "pO2": "68", "HCO3-": "31.0", "FiO2": "0.40",
           "Na+": "140", "K+": "4.1", "Cl-": "98"}
CHRONIC = "Processes: respiratory acidosis (chronic, primary)"


def test_a_panel_sent_in_one_burst_lands_exactly_as_printed(session):
    s = session(no_color=True)
    _tmux("send-keys", "-t", s, "7.33", "Tab", "60", "Tab", "68", "Tab", "31.0", "Tab",
          "0.40", "Tab", "Tab", "Tab", "140", "Tab", "4.1", "Tab", "98")
    # The reading needs only the gas: under load it was on the screen before the last
    # keys were drawn. Wait for the burst's last value too; every value is checked below.
    screen = _wait_for(s, lambda scr: CHRONIC in scr and form_rows(scr).get("Cl-", ("",))[0]
                       == PRINTED["Cl-"])
    rows = form_rows(screen)
    assert {k: rows[k][0] for k in PRINTED} == PRINTED
    assert rows["pCO2"][1] == "mmHg"  # a label for people, not the code mm[Hg]
    assert "Trust: consistent | " + CHRONIC in _flat(screen)
    assert _flat(SHORT_CAUTION) in _flat(screen)


def test_a_panel_typed_on_the_number_pad_lands_exactly_as_printed(session):
    """The number pad's digits, point and Enter (which moves on like Tab)."""
    s = session()
    pad = {".": "KP.", **{d: f"KP{d}" for d in "0123456789"}}
    keys: list[str] = []
    for value in ("7.33", "60", "68", "31.0", "0.40", None, None, "140", "4.1", "98"):
        keys += [pad[c] for c in value or ""] + ["KPEnter"]
    _tmux("send-keys", "-t", s, *keys[:-1])
    screen = _wait_for(s, CHRONIC)
    rows = form_rows(screen)
    assert {k: rows[k][0] for k in PRINTED} == PRINTED


def test_a_kpa_panel_lands_as_printed_and_reads_as_the_same_gas_in_mmhg(session):
    """F2 on the empty pCO2 and pO2 makes them kPa; 8.0 kPa = 60.0 mm[Hg] (UCUM)."""
    s = session()
    _tmux("send-keys", "-t", s, "7.33", "Tab", "F2", "8.0", "Tab", "F2", "9.1", "Tab",
          "31.0", "Tab", "0.40", "Tab", "Tab", "Tab", "140", "Tab", "4.1", "Tab", "98")
    screen = _wait_for(s, CHRONIC)
    rows = form_rows(screen)
    assert rows["pCO2"] == ("8.0", "kPa") and rows["pO2"] == ("9.1", "kPa")
    assert rows["HCO3-"] == ("31.0", "mmol/L")


def test_focus_is_visible_without_colour(session):
    """NO_COLOR: the focused row's title is drawn in reversed colours (SGR 7) and marked with '>'."""
    s = session(no_color=True)
    _tmux("send-keys", "-t", s, "7.40", "Tab", "40")

    def marked_row(screen: str) -> list[str]:
        return [line for line in screen.splitlines() if line.startswith("> ")]

    screen = _wait_for(s, lambda sc: [r[:6] for r in marked_row(sc)] == ["> pCO2"])
    assert marked_row(screen)[0][14:23].strip() == "40"
    # the cell attributes: SGR 7 (reverse) is set on the focused title, on no other title
    deadline = time.monotonic() + 10
    while True:
        lines = _screen(s, escapes=True).splitlines()
        focused = [ln for ln in lines if "> pCO2" in ln]
        others = [ln for ln in lines if re.search(r"m {2}(pH|pO2|HCO3-)\b", ln)]
        reverse = re.compile(r"\x1b\[(?:[0-9;]*;)?7(?:;[0-9;]*)?m")
        if focused and reverse.search(focused[0].split("> pCO2")[0] + "> pCO2"):
            break
        assert time.monotonic() < deadline, f"no reversed colours (SGR 7) on the focused row: {focused}"
        time.sleep(0.2)
    assert others and not any(reverse.search(ln.split("\u2595")[0][:60]) for ln in others)


def test_the_short_caution_is_on_screen_and_f1_shows_it_in_full(session):
    s = session(no_color=True)
    screen = _screen(s)
    assert _flat(SHORT_CAUTION) in _flat(screen)
    _tmux("send-keys", "-t", s, "F1")
    screen = _wait_for(s, "every key")
    assert _flat(acidbase.CAUTION) in _flat(screen)
    _tmux("send-keys", "-t", s, "Escape")
    _tmux("send-keys", "-t", s, "C-q")


def test_a_patient_id_and_a_panel_in_one_burst_are_checked_against_the_store(session, tmp_path):
    """``--history``: the panel, its time and the patient id sent in ONE send-keys; the
    verdict line names the store's flag (Na+ 155 after 140 twelve hours before: the
    batch's limit of 10 mmol/L, common laboratory practice, no source), every value
    lands as typed, and the caution stays on screen at 80x24 without colour."""
    import datetime as dt

    from acidbase import history
    from tui.labels import ELECTROLYTES, rest
    from tui.widgets.form import MORE_CHOICES

    key = "site-key-for-tmux-tests-0123456789"
    store = tmp_path / "store.db"
    now = dt.datetime.now(dt.UTC)
    earlier, when = (f"{now - dt.timedelta(hours=h):%Y-%m-%dT%H:%M}Z" for h in (13, 1))
    history.keep_panel(str(store), "MRN-TMUX-7", {"ph": 7.33, "pco2": 60.0, "hco3": 31.0,
                                                  "na": 140.0, "cl": 98.0}, earlier, "S1",
                       key=key)
    s = session(no_color=True, args=("--history", str(store)),
                extra_env={history.KEY_ENV: key})
    to_time = len(ELECTROLYTES) - ELECTROLYTES.index("cl") + len(rest()) + len(MORE_CHOICES)
    _tmux("send-keys", "-t", s, "7.33", "Tab", "60", "Tab", "68", "Tab", "31.0", "Tab",
          "0.40", "Tab", "Tab", "Tab", "155", "Tab", "4.1", "Tab", "98", *["Tab"] * to_time,
          when, "Tab", "MRN-TMUX-7", "Tab", "S2")
    def texts(screen: str) -> dict[str, str]:
        return {line[2:14].strip(): line[14:31].strip() for line in screen.splitlines()
                if "\u2595" in line}

    screen = _wait_for(s, lambda sc: "Store: flagged SERIAL-DELTA-NA" in _flat(sc)
                       and texts(sc).get("Sample id") == "S2")
    texts = texts(screen)
    assert (texts["Collected"][-16:], texts["Patient"], texts["Sample id"]) == (
        when[-16:], "MRN-TMUX-7", "S2")  # the time is longer than its box: its end shows
    assert _flat(SHORT_CAUTION) in _flat(screen)
    _tmux("send-keys", "-t", s, "C-r")  # to the reading, and back to the form's pH
    _wait_for(s, lambda sc: not any(line.startswith("> ") for line in sc.splitlines()))
    _tmux("send-keys", "-t", s, "C-r")
    screen = _wait_for(s, lambda sc: form_rows(sc).get("pH", ("",))[0] == "7.33")
    rows = form_rows(screen)
    assert {k: rows[k][0] for k in PRINTED} == {**PRINTED, "Na+": "155"}
    assert _flat(SHORT_CAUTION) in _flat(screen)
    _tmux("send-keys", "-t", s, "C-t")
    screen = _wait_for(s, "This panel: FLAGGED SERIAL-DELTA-NA")
    assert "Na+ 155 after 140" in _flat(screen) and _flat(SHORT_CAUTION) in _flat(screen)
    _tmux("send-keys", "-t", s, "k")
    _wait_for(s, "keep it in the store")
    _tmux("send-keys", "-t", s, "y")
    _wait_for(s, "Kept in the store")
    assert [r["sample_id"] for r in history.earlier_panels(str(store), "MRN-TMUX-7",
                                                           key=key)] == ["S1", "S2"]


#: The panel above as one burst of keys, in form order.
PANEL_KEYS = ("7.33", "Tab", "60", "Tab", "68", "Tab", "31.0", "Tab", "0.40", "Tab", "Tab",
              "Tab", "140", "Tab", "4.1", "Tab", "98")


def test_f5_ctrl_n_and_f6_in_the_panels_burst_keep_it_exactly_as_typed(session):
    """F5 right after the last key keeps the whole panel (not the keys handled so far),
    Ctrl+N clears it, F6 opens the kept panel again: all in ONE send-keys."""
    s = session(no_color=True)
    _tmux("send-keys", "-t", s, *PANEL_KEYS, "F5", "C-n", "F6")
    screen = _wait_for(s, "kept 1 of 1")
    screen = _wait_for(s, CHRONIC)
    rows = form_rows(screen)
    assert {k: rows[k][0] for k in PRINTED} == PRINTED


def test_ctrl_n_in_a_burst_clears_the_keys_before_it_and_the_new_panel_takes_those_after(
        session):
    s = session(no_color=True)
    _tmux("send-keys", "-t", s, *PANEL_KEYS, "C-n", "7.2", "Tab", "50")
    screen = _wait_for(s, "Ctrl+Z brings the cleared one back")
    screen = _wait_for(s, lambda sc: form_rows(sc).get("pCO2", ("",))[0] == "50")
    rows = form_rows(screen)
    assert {k: rows[k][0] for k in PRINTED} == {k: "" for k in PRINTED} | {"pH": "7.2",
                                                                           "pCO2": "50"}
    _tmux("send-keys", "-t", s, "C-z")
    screen = _wait_for(s, CHRONIC)
    rows = form_rows(screen)
    assert {k: rows[k][0] for k in PRINTED} == PRINTED


def test_f2_right_after_a_value_asks_about_that_value(session):
    """F2 on a filled pCO2 offers to convert it: 60 mm[Hg] = 7.999 kPa (UCUM: 1 mm[Hg] =
    133.322 Pa), or to read the number in kPa; typed in one burst with the value."""
    s = session(no_color=True)
    _tmux("send-keys", "-t", s, "Tab", "60", "F2")
    screen = _wait_for(s, "switch to kPa?")
    assert "pCO2 60 mmHg: switch to kPa?" in screen and "convert: 7.999 kPa" in screen


def test_backspace_in_a_burst_edits_the_field_it_was_typed_in(session):
    """Backspace is handled in the field's own turn: before the Tab after it moves the
    focus, and before F5 keeps the panel; F6 then opens the kept panel as corrected."""
    s = session(no_color=True)
    _tmux("send-keys", "-t", s, "7.355", "BSpace", "Tab", "40", "BSpace", "1", "Tab", "68",
          "F5", "C-n", "F6")
    screen = _wait_for(s, "kept 1 of 1")
    screen = _wait_for(s, lambda sc: form_rows(sc).get("pO2", ("",))[0] == "68")
    rows = form_rows(screen)
    assert (rows["pH"][0], rows["pCO2"][0], rows["pO2"][0]) == ("7.35", "41", "68")


def test_arrows_then_enter_in_a_burst_open_the_row_the_arrows_reached(session):
    s = session(no_color=True)
    _tmux("send-keys", "-t", s, "7.31", "F5", "C-n", "7.32", "F5", "C-n", "7.33", "F5", "C-n")
    _wait_for(s, "3 kept")
    _tmux("send-keys", "-t", s, "F9", "Down", "Down", "Enter")
    screen = _wait_for(s, "kept 3 of 3")
    assert form_rows(screen)["pH"][0] == "7.33"
    _tmux("send-keys", "-t", s, "F9", "Up", "Delete", "F9")  # removes panel 2, not 3
    screen = _wait_for(s, "kept 2 of 2")
    assert form_rows(screen)["pH"][0] == "7.33"


def test_a_save_typed_in_one_burst_that_fails_keeps_the_dialog_and_the_typed_path(
        session, tmp_path):
    """Ctrl+S, the kind, Tab, the path and Enter in ONE burst: the path lands in the path
    box (Tab is the dialog's priority key), the save into a missing folder fails, and the
    dialog stays with the path as typed and why; the corrected path then saves."""
    s = session(no_color=True)
    missing = f"no-such-folder-{uuid.uuid4().hex[:6]}/s.csv"  # short: the box shows it whole
    before = sorted(p.name for p in ROOT.iterdir())
    _tmux("send-keys", "-t", s, *PANEL_KEYS, "F5", "C-s", "Right", "Right", "Tab", "C-u",
          str(missing), "Enter")
    screen = _wait_for(s, "Not saved")
    flat = _flat(screen.replace("\u2502", " "))  # the dialog's borders out
    box = next(line for line in screen.splitlines() if "s.csv" in line and "Not saved" not in line)
    assert box.split("\u258a", 1)[1].split("\u258e")[0].strip() == missing  # the path box
    assert f"Not saved: series file {missing}: the folder does not exist" in flat
    assert "the series as CSV" in flat
    assert sorted(p.name for p in ROOT.iterdir()) == before  # nothing written elsewhere
    good = tmp_path / "series.csv"
    _tmux("send-keys", "-t", s, "C-u", str(good), "Enter")
    _wait_for(s, "Saved 1 panel to")
    assert good.exists()


def test_a_long_time_and_id_typed_in_a_burst_show_their_beginning_once_left(session):
    """Typed in one burst and left with Tab, the time showed as "026-12-03T09:00Z" (its
    box scrolled to the end: a year that misreads) and a long patient id only its tail."""
    s = session(no_color=True)
    patient = "P-LONG-" + "0" * 40 + "42"
    _tmux("send-keys", "-t", s, "F3", *["Tab"] * 14, "2026-12-03T09:00Z", "Tab", patient,
          "Tab", "S3")
    def boxes(screen: str) -> dict[str, str]:
        return {line[2:14].strip(): line[14:31] for line in screen.splitlines()
                if line[2:14].strip() in ("Collected", "Patient", "Sample id")}

    # the last key drawn, then each box left shows its beginning (else: not on the screen)
    _wait_for(s, lambda scr: boxes(scr).get("Sample id", "").startswith("S3")
              and boxes(scr)["Collected"].startswith("2026-12-03T09:00Z")
              and boxes(scr)["Patient"].startswith("P-LONG-000"), timeout=10)
