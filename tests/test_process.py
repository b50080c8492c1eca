"""The command's process settings (acidbase/process.py): made for the command, before
numpy and pyarrow load, never for a program that uses the library, never over the
user's own."""

from __future__ import annotations

import importlib.util
import os
import subprocess
import sys
import tomllib
from pathlib import Path

import pyarrow as pa
import pytest

from acidbase import process

ROOT = Path(__file__).resolve().parents[1]
SHOW = ("import os, sys\n{first}\n"
        "import numpy, pyarrow as pa\n"
        "print(os.environ.get('OPENBLAS_NUM_THREADS'), os.environ.get('ARROW_DEFAULT_MEMORY_POOL'),"
        " pa.default_memory_pool().backend_name)")


def run(first: str, *argv: str, **env: str) -> list[str]:
    clean = {k: v for k, v in os.environ.items()
             if k not in ("OPENBLAS_NUM_THREADS", "ARROW_DEFAULT_MEMORY_POOL")}
    out = subprocess.run([sys.executable, "-c", SHOW.format(first=first), *argv],
                         capture_output=True, text=True, env={**clean, **env}, cwd=ROOT,
                         check=True)
    return out.stdout.split()


PREPARE = "from acidbase.process import prepare; prepare(sys.argv[1:])"


def test_the_batch_command_gets_one_blas_thread_and_one_arrow_pool():
    # pyarrow's own list of the pools it was built with is the reference
    jemalloc = "jemalloc" in pa.supported_memory_backends()
    blas, pool_env, pool = run(PREPARE, "batch", "in.csv", "-o", "out.csv")
    assert blas == "1"
    assert (pool_env, pool) == (("jemalloc", "jemalloc") if jemalloc else ("None", pool))


def test_other_commands_keep_arrows_default_pool():
    assert run(PREPARE, "check", "--ph", "7.4")[:2] == ["1", "None"]
    assert run(PREPARE, "--help")[:2] == ["1", "None"]


def test_the_users_own_settings_are_kept():
    assert run(PREPARE, "batch", "in.csv", OPENBLAS_NUM_THREADS="2",
               ARROW_DEFAULT_MEMORY_POOL="system") == ["2", "system", "system"]


def test_a_program_using_the_library_is_not_touched():
    got = run("import acidbase, acidbase.cli; acidbase.interpret; "
              "acidbase.cli.main(['check', '--ph', '7.4', '--pco2', '40', '--hco3', '24'])")
    assert got[-3:-1] == ["None", "None"]


def test_nothing_is_set_once_the_libraries_are_loaded():
    env: dict[str, str] = {}
    process.prepare(["batch", "in.csv"], env)  # numpy and pyarrow: loaded by this test
    assert env == {}


def test_jemalloc_is_told_from_the_build_header_without_loading_pyarrow(tmp_path, monkeypatch):
    assert process.arrow_has_jemalloc() == ("jemalloc" in pa.supported_memory_backends())
    header = tmp_path / "include" / "arrow" / "util" / "config.h"
    header.parent.mkdir(parents=True)
    real = importlib.util.find_spec

    def fake(name, *a):
        if name != "pyarrow":
            return real(name, *a)
        spec = importlib.util.spec_from_loader("pyarrow", loader=None, is_package=True)
        spec.submodule_search_locations = [str(tmp_path)]
        return spec

    monkeypatch.setattr(importlib.util, "find_spec", fake)
    header.write_text("#define ARROW_MIMALLOC\n/* #define ARROW_JEMALLOC */\n")
    assert process.arrow_has_jemalloc() is False
    header.write_text("#define ARROW_JEMALLOC\n#define ARROW_JEMALLOC_VENDORED\n")
    assert process.arrow_has_jemalloc() is True
    header.unlink()  # no header: cannot be told, so no pool is named (no warning)
    assert process.arrow_has_jemalloc() is False


@pytest.mark.parametrize("entry", ["console script", "python -m acidbase"])
def test_the_command_starts_in_the_process_module(entry):
    if entry == "console script":
        with open(ROOT / "pyproject.toml", "rb") as f:
            scripts = tomllib.load(f)["project"]["scripts"]
        assert scripts["acidbase"] == "acidbase.process:main"
    else:
        out = subprocess.run([sys.executable, "-m", "acidbase", "batch", "--help"],
                             capture_output=True, text=True, cwd=ROOT)
        assert out.returncode == 0 and "usage: " in out.stdout
        assert "from .process import main" in (ROOT / "acidbase" / "__main__.py").read_text()
