"""Start-up stays lean: one panel imports no file layer, no app and no pydantic model
(issue 14, item 5).

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
#: The validated model's library: ``Panel`` needs it, one panel read from options does not.
MODEL = ("pydantic", "pydantic_core")
CHECK = ["check", "--ph", "7.4", "--pco2", "40", "--hco3", "24"]


def loaded_after(code: str, watched: tuple[str, ...] = HEAVY) -> list[str]:
    """The ``watched`` modules in ``sys.modules`` after running ``code`` in a fresh
    interpreter (its own output goes to stdout; the list is the last line of stderr)."""
    probe = (f"import sys\n{code}\n"
             f"print(sorted(m for m in {watched!r} if m in sys.modules), file=sys.stderr)")
    r = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    return json.loads(r.stderr.strip().splitlines()[-1].replace("'", '"'))


def cli(args: list[str]) -> str:
    return (f"from acidbase.cli import main\ntry:\n    main({args!r})\n"
            "except SystemExit:\n    pass")


ONE_PANEL = [CHECK, [*CHECK, "--json"], [*CHECK, "--brief"], [*CHECK, "--na", "x"],
             [*CHECK, "--pco2-unit", "bar"], [*CHECK, "--k", "<3", "--sample-type", "Venous"]]
ONE_PANEL_IDS = ["check", "check-json", "check-brief", "check-refused", "check-bad-unit",
                 "check-marks"]
HELP = [["--help"], ["check", "--help"], ["tui", "--help"]]
HELP_IDS = ["help", "check-help", "tui-help"]


@pytest.mark.parametrize("args", ONE_PANEL + HELP, ids=ONE_PANEL_IDS + HELP_IDS)
def test_one_panel_and_the_help_import_no_file_or_app_layer(args):
    assert loaded_after(cli(args)) == []


@pytest.mark.parametrize("args", ONE_PANEL + HELP, ids=ONE_PANEL_IDS + HELP_IDS)
def test_one_panel_and_the_help_import_no_pydantic(args):
    """``check`` reads its options through the cell reader and the column screen (the
    batch path), so the pydantic model is neither imported nor built."""
    assert loaded_after(cli(args), MODEL) == []


def test_importing_the_package_imports_no_pydantic_and_no_file_layer():
    assert loaded_after("import acidbase", HEAVY + MODEL) == []


def test_the_public_names_are_there_without_importing_them():
    """``dir()`` and ``__all__`` list every public name before any is used."""
    code = ("import acidbase\nmissing = set(acidbase.__all__) - set(dir(acidbase))\n"
            "assert not missing, missing\nassert 'check_table' in dir(acidbase)")
    assert loaded_after(code, HEAVY + MODEL) == []


def test_the_probe_sees_pydantic_when_panel_is_used():
    """The probe itself can fail: asking for ``Panel`` does import pydantic."""
    assert "pydantic" in loaded_after("from acidbase import Panel", MODEL)


def test_the_lazy_names_are_the_modules_own_objects():
    import acidbase
    import acidbase.model
    from acidbase import api, results
    from acidbase.inputs import panel

    assert acidbase.Panel is panel.Panel is acidbase.model.Panel
    assert acidbase.interpret is api.interpret and acidbase.Results is results.Results
    with pytest.raises(AttributeError, match="no attribute 'Panle'"):
        acidbase.Panle  # noqa: B018
    with pytest.raises(AttributeError):
        panel.Panle  # noqa: B018


def test_threads_asking_for_panel_at_once_get_one_class():
    """Built once, under a lock: two classes would make ``isinstance`` lie."""
    code = ("import threading\nfrom acidbase.inputs import panel\nseen = []\n"
            "start = threading.Barrier(4)\n"
            "def ask():\n    start.wait()\n    seen.append(id(panel.Panel))\n"
            "ts = [threading.Thread(target=ask) for _ in range(4)]\n"
            "[t.start() for t in ts]\n[t.join() for t in ts]\n"
            "assert len(set(seen)) == 1, seen")
    loaded_after(code)


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


def test_a_parser_built_for_one_command_reads_it_as_the_whole_parser_does():
    """``main`` adds only the invoked command's options; the result must not differ."""
    from acidbase.cli import build_parser

    for argv in (CHECK, [*CHECK, "--json", "--k", "4"], ["batch", "x.csv", "--no-serial"],
                 ["tui", "--demo"], ["config", "show"], ["history", "x.db"], ["demo"]):
        whole, one = build_parser().parse_args(argv), build_parser(argv[0]).parse_args(argv)
        assert vars(whole) == vars(one), argv
    for command in ("check", "batch", "tui", "config"):
        assert build_parser(command).format_help() == build_parser().format_help()
