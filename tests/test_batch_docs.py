"""docs/batch.md stays in step with the code it documents."""

from __future__ import annotations

import argparse
from pathlib import Path

from acidbase import cli, loinc, serial
from acidbase.results import CAUTION

DOC = (Path(__file__).resolve().parents[1] / "docs" / "batch.md").read_text(encoding="utf-8")


def test_loinc_header_table_is_current():
    """The table is acidbase.loinc.header_table(), built from acidbase.fields."""
    assert loinc.header_table() in DOC


def test_delta_limits_table_is_current():
    """Every default delta limit appears with its source (acidbase.serial.rules_table())."""
    assert serial.rules_table() in DOC


def test_every_batch_option_is_documented():
    p = argparse.ArgumentParser()
    cli.configure_batch_parser(p)
    options = [o for a in p._actions for o in a.option_strings if o.startswith("--")]
    missing = [o for o in options if o != "--help" and f"`{o}" not in DOC]
    assert not missing, missing


def test_every_serial_status_is_documented():
    for text in serial.STATUS_TEXT:
        assert f"`{text}`" in DOC.replace("\n", " ").replace("`not\nassessable", "`not assessable")


def test_doc_carries_the_caution():
    assert " ".join(CAUTION.split()) in " ".join(DOC.replace("> ", "").split())
