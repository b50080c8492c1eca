"""Helpers of the interoperability tests: run the command, read its outputs."""

from __future__ import annotations

import csv
from pathlib import Path

from acidbase.cli import main

DATA = Path(__file__).resolve().parents[1] / "data" / "hl7"


def run(capsys, *args) -> tuple[int, str, str]:
    rc = main([str(a) for a in args])
    out = capsys.readouterr()
    return rc, out.out, out.err


def rows_of(path: Path) -> list[dict[str, str]]:
    with path.open(newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def obx(i: int, vtype: str, code: str, value: str, unit: str, rng: str = "", flag: str = "",
        status: str = "F") -> str:
    """An OBX segment with the fields at their HL7 v2.5.1 positions (OBX-1 to OBX-11)."""
    return f"OBX|{i}|{vtype}|{code}||{value}|{unit}|{rng}|{flag}|||{status}"


def msh(stamp: str, control_id: str) -> str:
    return (f"MSH|^~\\&|GASLAB|WARD7|ACIDBASE|LAB|{stamp}||ORU^R01^ORU_R01|{control_id}|P|"
            "2.5.1")


def write_spool(path: Path, segments: list[str], frame: bool = False, newline: str = "\r"
                ) -> Path:
    text = newline.join(segments) + newline
    if frame:  # MLLP: start block 0x0B, end block 0x1C 0x0D, around each message
        msgs = text.split("MSH|")[1:]
        text = "".join(f"\x0bMSH|{m}\x1c\r" for m in msgs)
    path.write_bytes(text.encode("utf-8"))
    return path
