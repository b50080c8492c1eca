"""The library stands without the terminal app (common practice, no source: layering)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_the_library_imports_without_textual():
    code = ("import sys, acidbase, acidbase.cli, acidbase.batch; "
            "assert 'textual' not in sys.modules, 'acidbase imported textual'")
    r = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr


def test_the_terminal_app_holds_no_formula():
    """tui/ computes nothing: no numpy, no math module, no logarithms."""
    offenders = []
    for path in (ROOT / "tui").rglob("*.py"):
        text = path.read_text(encoding="utf-8")
        for needle in ("import numpy", "np.", "import math", "math.", "log10"):
            if needle in text:
                offenders.append(f"{path.relative_to(ROOT)}: {needle}")
    assert not offenders, offenders
