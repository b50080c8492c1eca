"""End to end: the real ``acidbase tui`` in an 80x24 tmux window, typed into with send-keys."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import time
import uuid
from pathlib import Path

import pytest

import acidbase

ROOT = Path(__file__).resolve().parents[2]

pytestmark = pytest.mark.skipif(
    shutil.which("tmux") is None,
    reason="tmux is not installed (.ci/run installs it); the end-to-end test needs it")


def _tmux(*args: str) -> str:
    return subprocess.run(["tmux", *args], check=True, capture_output=True, text=True).stdout


def _screen(session: str) -> str:
    return _tmux("capture-pane", "-t", session, "-p")


def _wait_for(session: str, text: str, timeout: float = 20.0) -> str:
    deadline = time.monotonic() + timeout
    while True:
        screen = _screen(session)
        if text in screen:
            return screen
        if time.monotonic() > deadline:
            raise AssertionError(f"{text!r} not on the screen:\n{screen}")
        time.sleep(0.2)


@pytest.fixture
def session():
    name = f"acidbase-test-{uuid.uuid4().hex[:8]}"
    env = {k: v for k, v in os.environ.items() if k != "NO_COLOR"}
    command = f"{sys.executable} -m acidbase tui"
    subprocess.run(["tmux", "new-session", "-d", "-s", name, "-x", "80", "-y", "24",
                    "-c", str(ROOT), command], check=True, env=env)
    try:
        yield name
    finally:
        subprocess.run(["tmux", "kill-session", "-t", name], capture_output=True, check=False)


def test_a_typed_panel_is_read_with_the_caution_on_screen(session):
    _wait_for(session, "No reading yet")
    # An acute respiratory acidosis (Narins & Emmett, Medicine 1980: HCO3 rises about
    # 1 mmol/L per 10 mm[Hg] of pCO2 when acute; at pCO2 60, 26 +/- 2, and 25.7 is in it).
    for i, value in enumerate(("7.25", "60", "25.7", "140", "104")):
        if i:
            _tmux("send-keys", "-t", session, "Tab")
            time.sleep(0.2)  # a person types slower than send-keys; let the focus move
        _tmux("send-keys", "-t", session, "-l", value)
        time.sleep(0.2)
    screen = _wait_for(session, "Processes:")
    # the reading is the right-hand column, right of the form's edge
    reading = " ".join(line.split("\u2595", 1)[1].strip() for line in screen.splitlines()
                       if "\u2595" in line)
    assert "Processes: respiratory acidosis (acute, primary)" in reading
    assert "Trust: consistency consistent" in reading
    assert " ".join(acidbase.CAUTION.split()) in " ".join(screen.split())
    _tmux("send-keys", "-t", session, "F4")
    screen = _wait_for(session, "@ this panel")
    assert " ".join(acidbase.CAUTION.split()) in " ".join(screen.split())
    _tmux("send-keys", "-t", session, "Escape")
    _tmux("send-keys", "-t", session, "C-q")
