"""HL7 version 2 results (ORU^R01) in: a spool file of messages -> a table of text cells.

The wire format is read with the ``hl7`` package (python-hl7; optional extra
``acidbase[hl7]``); the meaning of each segment is ours, after HL7 Version 2.5.1
(Health Level Seven International, 2007), chapter 7 (observation reporting):

* one OBR group (the OBR, its OBX and SPM segments) is one panel, one row;
* OBX-3, the LOINC code (coding system ``LN``, primary or alternate triplet) gives
  the field through the one LOINC table (``acidbase.loinc``);
* OBX-5 with OBX-2 ``NM`` or ``SN`` gives the value: an SN comparator is kept
  (``<^0.3`` -> ``<0.3``), so the reader treats it as a censored value; OBX-6
  gives the unit, OBX-8 the abnormal flag (HL7 table 0078) [hl7_0078], written after the value
  (``7.21 L``) as a laboratory export would;
* OBX-11 ``X`` (cannot be obtained), ``D`` (deleted) and ``W`` (wrong) results
  are skipped and counted (HL7 table 0085);
* SPM-4 (HL7 table 0487: BLDA arterial, BLDV venous, BLDC capillary blood) gives
  the sample type, else the specimen of the gas codes (``loinc.SPECIMEN``);
* PID-3 gives ``patient_id``, SPM-17 or OBR-7 ``collected_at`` (as ISO 8601),
  SPM-2 or OBR-3 ``sample_id``.

The table goes to the same reader as a CSV file: its headers are field names with
the unit (``pco2 (kPa)``), its cells the values as text.  What the messages say
that the reader must refuse (a malformed message, two results for one field, a
unit the field does not take) travels as ``Problem`` objects by row
(``Layout.row_problems``), which the batch check puts first among the row's
reasons; the other rows are read.  MLLP framing (HL7 Version 2 Minimal Lower Layer
Protocol: start byte 0x0B, end bytes 0x1C 0x0D) is tolerated.
"""

from __future__ import annotations

import os
import re
from collections import Counter
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from typing import ClassVar

import numpy as np
import pyarrow as pa

from .. import loinc
from .. import units as _units
from ..errors import BatchInputError, Problem
from ..fields import BY_NAME, REQUIRED
from ..inputs.cells import number_hint, read_number
from ..inputs.panel import describe_value, range_problems
from .source import Source, not_a_file

FORMAT = "hl7"
CODES_COLUMN = "hl7_codes"
NOTES_COLUMN = "hl7_notes"
TEXT_COLUMNS = ("message", "message_id", "sample_id", "patient_id", "collected_at",
                "sample_type", "hco3_source")

#: OBX-11 statuses whose result is not read (HL7 table 0085).
SKIPPED_STATUS = {"X": "cannot be obtained", "D": "deleted", "W": "wrong"}
#: SPM-4 specimen codes (HL7 table 0487) -> sample type.
SPECIMEN_TYPE = {"BLDA": "arterial", "BLDV": "venous", "BLDC": "capillary"}
#: LOINC specimen (``loinc.SPECIMEN``) -> sample type; "blood" says nothing.
LOINC_SPECIMEN_TYPE = {"arterial blood": "arterial", "venous blood": "venous",
                       "capillary blood": "capillary"}
#: Bicarbonate codes that say where HCO3- came from (LOINC long common names in the
#: project's LOINC notes): blood-gas codes are the analyser's calculated value,
#: serum or plasma codes a chemistry measurement (total CO2 2028-9 included).
HCO3_SOURCE = {"1960-4": "analyser", "14627-4": "analyser", "1959-6": "analyser",
               "1963-8": "chemistry", "2028-9": "chemistry"}
NUMERIC_TYPES = ("NM", "SN")

_SEGMENT_ID = re.compile(r"^[A-Z][A-Z0-9]{2}$")
_DTM = re.compile(r"^(\d{4})(\d{2})?(\d{2})?(\d{2})?(\d{2})?(\d{2}(?:\.\d{1,4})?)?([+-]\d{4})?$")


def looks_like_hl7(path: str, given: str | None = None) -> bool:
    """True for ``--format hl7``, a ``.hl7`` name, or a file that starts with MSH."""
    if given:
        return given == FORMAT
    if path.lower().endswith((".hl7", ".oru")):
        return True
    if not os.path.isfile(path):  # a pipe would block the look (open_source says what it is)
        return False
    try:
        with open(path, "rb") as f:
            head = f.read(64)
    except OSError:
        return False
    return head.lstrip(b"\x0b\xef\xbb\xbf \t\r\n").startswith(b"MSH|")


def _require_library():
    try:
        import hl7
    except ImportError:
        raise BatchInputError(
            "reading HL7 v2 needs the optional extra: python -m pip install 'acidbase[hl7]'"
        ) from None
    return hl7


def split_messages(text: str) -> list[tuple[int, list[str]]]:
    """``(first segment's position, segments)`` for each message of a spool.

    Line ends (CR, LF, CRLF) all end a segment; MLLP framing bytes are dropped;
    positions count segments from 1 over the whole file.
    """
    text = text.replace("\x0b", "\r").replace("\x1c", "\r")
    messages: list[tuple[int, list[str]]] = []
    pos = 0
    for line in re.split(r"\r\n|\r|\n", text):
        if not line.strip():
            continue
        pos += 1
        if line.startswith("MSH") or not messages:
            messages.append((pos, []))
        messages[-1][1].append(line)
    return messages


def hl7_time(value: str) -> str:
    """HL7 DTM ``YYYY[MM[DD[HH[MM[SS[.S]]]]]][+/-ZZZZ]`` as ISO 8601; unreadable: as is."""
    m = _DTM.match(value.strip())
    if not m or not m[3] or not m[5]:  # the serial checks need at least a minute
        return value.strip()
    y, mo, d, h, mi, s, z = m.groups()
    out = f"{y}-{mo}-{d}T{h}:{mi}" + (f":{s}" if s else "")
    return out + (f"{z[:3]}:{z[3:]}" if z else "")


@dataclass
class Hl7Problem(Problem):
    """A refusal the messages themselves carry, as data until a surface prints it."""

    text: str = ""
    """The sentence, naming the message, the segment or the field."""

    HL7_KINDS: ClassVar[dict[str, str]] = {
        "hl7_message": "HL7 message not read",
        "hl7_two_results": "two results in one order",
        "hl7_unit": "a unit the field does not take",
        "hl7_unit_missing": "no unit for a code that may be a mass concentration",
        "hl7_many_values": "more than one value in one result",
    }

    @property
    def whole_row(self) -> bool:
        """The message could not be read: its row has no cells to be refused for."""
        return self.kind == "hl7_message"

    @property
    def label(self) -> str:
        head = "HL7" if self.field == "message" else f"{self.title} ({self.field})"
        return f"{head}: {self.HL7_KINDS.get(self.kind, self.kind)}"

    def __str__(self) -> str:
        return self.text


def _problem(kind: str, name: str, text: str, hint: str = "") -> Hl7Problem:
    title = BY_NAME[name].title if name in BY_NAME else "HL7 message"
    return Hl7Problem(name, title, None, "", kind=kind, hint=hint,
                      text=text + (f" - {hint}" if hint else ""))


@dataclass
class Panel:
    """One OBR group as read: cells by field, and what the reader must know."""

    message: int
    message_id: str
    position: int
    patient_id: str = ""
    sample_id: str = ""
    collected_at: str = ""
    specimen: str = ""
    values: dict[str, tuple[str, str, str, int]] = field(default_factory=dict)
    """field -> (value text, unit, LOINC code, OBX position)."""
    problems: list[Hl7Problem] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    hco3_source: str = ""
    status: dict[str, str] = field(default_factory=dict)
    """field -> OBX-11 result status."""


@dataclass
class Reading:
    panels: list[Panel]
    messages: int
    refused_messages: int
    skipped: Counter


class _Message:
    """Field access by segment order, unescaped, through the library's parser."""

    def __init__(self, hl7mod, segments: list[str]) -> None:
        self.msg = hl7mod.parse("\r".join(segments))
        self.ids = [s[:3] for s in segments]
        self._nth = []
        seen: Counter = Counter()
        for sid in self.ids:
            seen[sid] += 1
            self._nth.append(seen[sid])

    def values(self, index: int, field_num: int) -> tuple[int, int, str]:
        """(repetitions holding a value, values in all, the field as written) of one
        field: an NM result holds one value, an SN one repetition."""
        try:
            seg = self.msg.segments(self.ids[index])[self._nth[index] - 1]
            raw = seg[field_num] if len(seg) > field_num else ""
        except (IndexError, KeyError):
            return 0, 0, ""

        def leaves(x) -> list[str]:
            if isinstance(x, str):
                return [x] if x.strip() else []
            return [leaf for y in x for leaf in leaves(y)]

        if isinstance(raw, str):
            return (1, 1, raw) if raw.strip() else (0, 0, raw)
        parts = list(raw)
        reps = parts if len(parts) > 1 and not any(isinstance(x, str) for x in parts) \
            else [raw]
        return sum(1 for r in reps if leaves(r)), len(leaves(raw)), str(raw)

    def get(self, index: int, field_num: int, comp: int = 1, rep: int = 1) -> str:
        try:
            v = self.msg.extract_field(self.ids[index], self._nth[index], field_num, rep, comp)
        except (IndexError, KeyError):
            return ""
        return (v or "").strip()


def _refused(message: int, message_id: str, position: int, reason: str,
             known: Panel | None = None) -> Panel:
    """One refused row for a whole message, with the ids read before the fault."""
    p = Panel(message, message_id, position)
    if known is not None:
        p.patient_id, p.sample_id, p.collected_at = (known.patient_id, known.sample_id,
                                                     known.collected_at)
    p.problems.append(_problem("hl7_message", "message", f"HL7 message {message} (segment "
                               f"{position} of the file) not read: {reason}"))
    return p


def read_message(hl7mod, number: int, position: int, segments: list[str],
                 skipped: Counter) -> list[Panel]:
    """The panels of one message, or one refused row naming the position and the reason."""
    for k, seg in enumerate(segments):
        if not _SEGMENT_ID.match(seg[:3]) or (len(seg) > 3 and seg[3] != segments[0][3]):
            return [_refused(number, "", position + k,
                             f"segment {seg[:20]!r} has no valid segment id")]
    try:
        m = _Message(hl7mod, segments)
    except Exception as e:  # noqa: BLE001  the library raises ParseException, IndexError...
        return [_refused(number, "", position, f"not a readable HL7 v2 message ({e})")]
    msg_id = m.get(0, 10)
    kind = f"{m.get(0, 9, 1)}^{m.get(0, 9, 2)}"
    if kind != "ORU^R01":
        return [_refused(number, msg_id, position, f"MSH-9 is {kind!r}, not an ORU^R01 message")]
    patient = ""
    panels: list[Panel] = []
    for k, sid in enumerate(m.ids):
        where = position + k
        if sid == "PID":
            patient = m.get(k, 3)
        elif sid == "OBR":
            p = Panel(number, msg_id, where, patient_id=patient)
            p.sample_id = m.get(k, 3) or m.get(k, 2)
            p.collected_at = hl7_time(m.get(k, 7))
            panels.append(p)
        elif sid == "SPM":
            if not panels:
                return [_refused(number, msg_id, where, "SPM before any OBR")]
            p = panels[-1]
            p.sample_id = m.get(k, 2, 2) or m.get(k, 2, 1) or p.sample_id
            spec = m.get(k, 4).upper()
            if spec:
                if p.specimen and p.specimen != spec:
                    p.notes.append(f"specimens {p.specimen} and {spec} in one order")
                p.specimen = spec
            if m.get(k, 17):
                p.collected_at = hl7_time(m.get(k, 17))
        elif sid == "OBX":
            if not panels:
                return [_refused(number, msg_id, where, "OBX before any OBR")]
            status = m.get(k, 11).upper()
            if not status:
                return [_refused(number, msg_id, where,
                                 "OBX-11 (result status, required) is empty", panels[-1])]
            _read_obx(m, k, where, panels[-1], status, skipped)
    if not panels:
        return [_refused(number, msg_id, position, "no OBR segment (no order to read)")]
    return panels


def _obx_code(m: _Message, k: int) -> str:
    for code_comp, system_comp in ((1, 3), (4, 6)):
        if m.get(k, 3, system_comp).upper() == "LN":
            return m.get(k, 3, code_comp)
    return ""


def _read_obx(m: _Message, k: int, where: int, p: Panel, status: str, skipped: Counter) -> None:
    code = _obx_code(m, k)
    label = code or m.get(k, 3, 1) or "?"
    name = loinc.field_for(code) if code else None
    if status in SKIPPED_STATUS:
        skipped[status] += 1
        p.notes.append(f"OBX {label} status {status} ({SKIPPED_STATUS[status]}) skipped")
        return
    if name is None:
        p.notes.append(f"OBX {label} not read")
        return
    vtype = m.get(k, 2).upper()
    if vtype not in NUMERIC_TYPES:
        p.notes.append(f"OBX {label} value type {vtype or 'empty'} not read (NM or SN expected)")
        return
    reps, count, raw = m.values(k, 5)
    if reps > 1 or (vtype == "NM" and count > 1):  # "40~41", "40^41": never the first alone
        spec = BY_NAME[name]
        p.problems.append(_problem(
            "hl7_many_values", name,
            f"{spec.title} ({name}) OBX {label}: OBX-5 {raw[:40]!r} holds more than one "
            f"value ({'repetitions' if reps > 1 else 'components'}); which was meant cannot "
            "be told", "an NM result holds one number, an SN result one comparator^number"))
        return
    if vtype == "SN":
        cmp, num, sep = m.get(k, 5, 1), m.get(k, 5, 2), m.get(k, 5, 3)
        text = f"{cmp}{num}" if not sep else f"{cmp}{num}{sep}{m.get(k, 5, 4)}"
    else:
        text = m.get(k, 5)
    flag = m.get(k, 8).upper()
    if flag:
        text = f"{text} {flag}"
    spec = BY_NAME[name]
    unit = m.get(k, 6)
    if not unit:
        if code in loinc.UNIT_REQUIRED:
            p.problems.append(_problem(
                "hl7_unit_missing", name,
                f"{spec.title} ({name}) OBX {label}: no unit in OBX-6, and this LOINC code may "
                f"be a mass concentration (accepted: {', '.join(spec.units)})"))
        unit = loinc.IMPLIED_UNIT.get(code, spec.unit)
    elif _units.normalise(unit) not in spec.units:
        p.problems.append(_problem(
            "hl7_unit", name, f"{spec.title} ({name}) {text!r} OBX {label}: unit {unit!r} is "
                              f"not one of {', '.join(spec.units)}",
            _units.not_taken_hint(spec.kind, unit)))
        return
    if name in p.values:
        p.problems.append(_problem(
            "hl7_two_results", name, f"{spec.title} ({name}): two results in one order "
                                     f"(segments {p.values[name][3]} and {where})"))
        return
    p.values[name] = (text, _units.normalise(unit), code, where)
    p.status[name] = status
    if name == "hco3" and code in HCO3_SOURCE:
        p.hco3_source = HCO3_SOURCE[code]


def read_spool(path: str, encoding: str = "utf-8") -> Reading:
    """Every message of the file; a malformed one becomes one refused row."""
    hl7mod = _require_library()
    with open(path, "rb") as f:
        raw = f.read()
    try:
        text = raw.decode(encoding).lstrip("\ufeff")
    except UnicodeDecodeError as e:
        raise BatchInputError(f"{path}: not {encoding} text at byte {e.start} "
                              "(give --encoding, e.g. latin-1)") from None
    panels: list[Panel] = []
    skipped: Counter = Counter()
    messages = split_messages(text)
    refused = 0
    for number, (position, segments) in enumerate(messages, start=1):
        got = read_message(hl7mod, number, position, segments, skipped)
        refused += sum(1 for p in got if _refused_whole(p))
        panels.extend(got)
    return Reading(panels, len(messages), refused, skipped)


def _sample_type(p: Panel) -> str:
    if p.specimen:
        kind = SPECIMEN_TYPE.get(p.specimen, "unknown")
        if kind == "unknown":
            p.notes.append(f"SPM-4 {p.specimen} is not a blood-gas specimen we know")
        return kind
    kinds = {LOINC_SPECIMEN_TYPE.get(loinc.SPECIMEN.get(code, ""), "")
             for name, (_, _, code, _) in p.values.items() if name in ("ph", "pco2", "po2")}
    kinds.discard("")
    if len(kinds) == 1:
        return kinds.pop()
    if len(kinds) > 1:
        p.notes.append("the gas codes name different specimens: sample type left unknown")
    return "unknown"


def to_table(reading: Reading) -> tuple[pa.Table, list[str], dict[int, tuple[Problem, ...]]]:
    """The panels as one table of text cells for the reader, notes for the summary, and
    the problems the messages carry, by row."""
    panels = reading.panels
    n = len(panels)
    cols: dict[str, list[str | None]] = {name: [] for name in TEXT_COLUMNS}
    for p in panels:
        cols["message"].append(str(p.message))
        cols["message_id"].append(p.message_id)
        cols["sample_id"].append(p.sample_id)
        cols["patient_id"].append(p.patient_id)
        cols["collected_at"].append(p.collected_at or None)
        cols["sample_type"].append(_sample_type(p) if not _refused_whole(p) else "unknown")
        cols["hco3_source"].append(p.hco3_source or "unknown")
    notes: list[str] = []
    present = [s.name for s in BY_NAME.values() if any(s.name in p.values for p in panels)]
    for name in [*REQUIRED, *[x for x in present if x not in REQUIRED]]:
        spec = BY_NAME[name]
        seen = Counter(p.values[name][1] for p in panels if name in p.values)
        if len(seen) <= 1:
            unit = next(iter(seen), spec.unit)
            cells = [p.values[name][0] if name in p.values else None for p in panels]
        else:
            # Mixed units for one field: one column takes one unit, so each value is
            # taken to the canonical unit with the one table of factors (units.py).
            unit = spec.unit
            cells = [_canonical_cell(p, name) for p in panels]
            notes.append(f"HL7: {spec.title} came in {', '.join(sorted(seen))}; read in {unit} "
                         "(converted with the UCUM factors)")
        cols[f"{name} ({unit})"] = cells
    cols[CODES_COLUMN] = [";".join(f"{k}={v[2]}/{p.status[k]}/{v[1]}" for k, v in p.values.items())
                          for p in panels]
    cols[NOTES_COLUMN] = ["; ".join(p.notes) for p in panels]
    table = pa.table({k: pa.array(v, type=pa.string()) for k, v in cols.items()})
    skipped = sum(reading.skipped.values())
    notes.insert(0, f"HL7: {reading.messages:,} message(s), {n:,} panel(s); "
                    f"{reading.refused_messages:,} message(s) refused as malformed; "
                    f"{skipped:,} result(s) skipped by status (X/D/W)"
                 + (" " + ", ".join(f"{k} {v}" for k, v in sorted(reading.skipped.items()))
                    if skipped else ""))
    problems = {i: tuple(p.problems) for i, p in enumerate(panels) if p.problems}
    return table, notes, problems


def _refused_whole(p: Panel) -> bool:
    return bool(p.problems) and p.problems[0].kind == "hl7_message"


def _canonical_cell(p: Panel, name: str) -> str | None:
    """The cell of ``name`` in the field's canonical unit, for a field whose results came
    in more than one unit (one column takes one unit).  The cell is read by the one cell
    reader in the unit its OBX-6 states, and only a value it reads is converted; a cell
    it refuses, or a value outside the accepted range in its own unit, is refused here
    in that unit (with the hint of the unit where it would be ordinary), as data, and
    left out of the column (never passed on unconverted)."""
    if name not in p.values:
        return None
    text, unit, _, _ = p.values[name]
    spec = BY_NAME[name]
    cell = read_number(text)
    number = cell
    if cell.comparator:  # a censored value: its limit, read by the same reader
        number = read_number(text.strip()[len(cell.comparator):])
    if cell.bad or number.bad or number.value is None:
        if cell.bad or number.bad:
            p.problems.append(Problem(name, spec.title, text, unit, kind="not_a_number",
                                      hint=number_hint(text, ".", unit, name, spec.units)))
        return None
    canonical, bad = range_problems(spec, np.array([number.value]), unit)
    if bad[0] and not cell.comparator:
        p.problems.append(describe_value(spec, number.value, unit))
        return None
    flag = number.flag
    return f"{cell.comparator or ''}{float(canonical[0])!r}" + (f" {flag}" if flag else "")


class Hl7Source(Source):
    """A spool of ORU^R01 messages, read once into a table of text cells."""

    table: pa.Table | None = None
    row_problems: dict[int, tuple[Problem, ...]] = {}  # noqa: RUF012 (set per instance)

    def estimated_rows(self) -> int:
        return self.table.num_rows if self.table is not None else 1

    def chunks(self, columns: Sequence[str] | None = None,
               on_progress=None) -> Iterator[pa.Table]:
        t = self.table if columns is None else self.table.select(list(columns))
        for start in range(0, max(t.num_rows, 1), self.chunk_rows):
            part = t.slice(start, self.chunk_rows)
            if part.num_rows:
                yield part


def open_source(path: str, encoding: str = "utf-8", chunk_rows: int = 1 << 14) -> Hl7Source:
    """Open a spool for ``acidbase batch``."""
    if not os.path.isfile(path):
        raise BatchInputError(not_a_file(path))
    reading = read_spool(path, encoding)
    if not reading.panels:
        raise BatchInputError(f"{path}: no HL7 v2 messages (a message starts with MSH|)")
    table, notes, problems = to_table(reading)
    src = Hl7Source(path, FORMAT, tuple(table.column_names), encoding=encoding,
                    chunk_rows=max(1, int(chunk_rows)), size=os.path.getsize(path),
                    total_rows=table.num_rows)
    src.table = table
    src.notes = tuple(notes)
    src.row_problems = problems
    return src


__all__ = ["FORMAT", "Hl7Source", "Reading", "hl7_time", "looks_like_hl7",
           "open_source", "read_spool", "split_messages", "to_table"]
