"""Start-up stays lean: one panel imports no file or app layer (issue 14, item 5).

The time itself is measured in bench/bench_startup.py, not here; these tests say which
modules a fresh interpreter holds after a command (common practice, no source: a
module not imported costs nothing at start).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
#: Needed by files, tables and the app only; about 100 ms for pyarrow alone.
HEAVY = ("pyarrow", "textual", "pandas", "polars")
CHECK = ["check", "--ph", "7.4", "--pco2", "40", "--hco3", "24"]


def loaded_after(code: str) -> list[str]:
    """The heavy modules in ``sys.modules`` after running ``code`` in a fresh interpreter
    (its own output goes to stdout; the list is the last line of stderr)."""
    probe = (f"import sys\n{code}\n"
             f"print(sorted(m for m in {HEAVY!r} if m in sys.modules), file=sys.stderr)")
    r = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    return json.loads(r.stderr.strip().splitlines()[-1].replace("'", '"'))


def cli(args: list[str]) -> str:
    return (f"from acidbase.cli import main\ntry:\n    main({args!r})\n"
            "except SystemExit:\n    pass")


@pytest.mark.parametrize("args", [CHECK, [*CHECK, "--json"], [*CHECK, "--na", "x"],
                                  ["--help"], ["check", "--help"], ["tui", "--help"]],
                         ids=["check", "check-json", "check-refused", "help", "check-help",
                              "tui-help"])
def test_one_panel_and_the_help_import_no_file_or_app_layer(args):
    assert loaded_after(cli(args)) == []


def test_the_library_reads_one_panel_without_arrow():
    code = ("from acidbase import Panel, interpret\n"
            "p = Panel.model_validate({'ph': '7.31', 'pco2': 30, 'hco3': 15, 'na': 140, "
            "'cl': 100, 'lactate': '<1'})\n"
            "it = interpret(p)\nprint(it.to_dict()['status'], it.to_text())")
    assert loaded_after(code) == []


def test_the_probe_sees_arrow_when_a_path_does_use_it():
    """The probe itself can fail: an Arrow column does load pyarrow."""
    code = "import pyarrow as pa\nfrom acidbase import interpret_many\n" \
           "interpret_many({'ph': pa.array(['7.4']), 'pco2': [40], 'hco3': [24]})"
    # pyarrow may bring pandas with it where pandas is installed (the test extra has it).
    assert "pyarrow" in loaded_after(code)


def test_an_arrow_column_is_still_read_as_one():
    """Deciding 'is this Arrow?' without importing pyarrow changes nothing for a caller
    that passes Arrow: the column is read, as a column, with its marks."""
    import pyarrow as pa

    from acidbase import interpret_many

    res = interpret_many({"ph": pa.chunked_array([["7.40", "7.10 L"]]), "pco2": [40, 60],
                          "hco3": pa.array([24.0, 18.0])})
    assert len(res) == 2
    assert [res.interpretation(i).status for i in range(2)] == \
        [interpret_many({"ph": [v], "pco2": [c], "hco3": [h]}).interpretation(0).status
         for v, c, h in (("7.40", 40, 24.0), ("7.10 L", 60, 18.0))]
