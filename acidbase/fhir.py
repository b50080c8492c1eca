"""FHIR R4 out: one reading as a collection Bundle (HL7 FHIR R4 4.0.1, 2019).

Per panel: the input Observations (LOINC where known [loinc], UCUM ``valueQuantity``
[ucum], the comparator of a censored value [fhir_quantity], the interpretation from
the laboratory flag), one Observation per derived value (``derivedFrom`` the inputs), one per finding (the
rule code and title in the project's code system, the statement as the value, the
working and sources as notes, interpretation A or AA by severity), a
DiagnosticReport whose conclusion holds the disorders and the caution, a Device
naming the tool and its version, and a Provenance tying the outputs to the inputs,
the input file's SHA-256 and the settings in force.  Design after the project's
FHIR notes (research/hl7-fhir.md section 2.4).

Choices:

* Machine readings (derived values, findings, the report) take the site's status
  (``fhir.observation_status``, ``preliminary`` by default, until a person signs
  them off).  Input Observations carry the status the laboratory sent (OBX-11 F, C,
  P), else ``unknown``: the tool does not know it.
* A refused panel gives a DiagnosticReport with status ``cancelled`` (R4
  DiagnosticReportStatus: "the report is unavailable") whose conclusion gives
  the reasons, and no derived values or findings.
* LOINC codes only where the input named one (a LOINC header, OBX-3), or for pH,
  pCO2, pO2 and HCO3- of a known sample type, from the codes of ``fields.py``
  verified in the project's LOINC notes; otherwise the code is text only.  No
  SNOMED CT code appears.
* HL7 table 0078 abnormal flags are the v3 ObservationInterpretation codes of the
  same letters (L, H, LL, HH, A, AA, N; FHIR R4 terminology, v3 code system
  ObservationInterpretation); ``*`` is read as A.
* Every Bundle is checked with the ``fhir.resources`` models (R4B; Observation,
  DiagnosticReport, Bundle, Device and Provenance are unchanged from R4: HL7 FHIR
  R4B 4.3.0 change notes, 2022) and its references are checked to resolve inside it.
"""

from __future__ import annotations

import json
import math
import re
import uuid
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import pyarrow as pa

from . import audit
from .codes import (
    DERIVED_INFO,
    DERIVED_SYSTEM,
    PROCESS_SYSTEM,
    READING_CODE,
    REPORT_SYSTEM,
    RULE_SYSTEM,
    process_code,
)
from .errors import AcidBaseError
from .fields import BY_NAME, NUMERIC
from .results import CAUTION

if TYPE_CHECKING:
    from .config import Site
    from .results import Interpretation

LOINC = "http://loinc.org"
UCUM = "http://unitsofmeasure.org"
INTERPRETATION = "http://terminology.hl7.org/CodeSystem/v3-ObservationInterpretation"
CATEGORY = "http://terminology.hl7.org/CodeSystem/observation-category"
REPORT_CATEGORY = "http://terminology.hl7.org/CodeSystem/v2-0074"
PARTICIPANT = "http://terminology.hl7.org/CodeSystem/provenance-participant-type"
FLAG_CODE = {"L": "L", "H": "H", "LL": "LL", "HH": "HH", "A": "A", "AA": "AA", "N": "N",
             "*": "A"}
FLAG_DISPLAY = {"L": "Low", "H": "High", "LL": "Critical low", "HH": "Critical high",
                "A": "Abnormal", "AA": "Critical abnormal", "N": "Normal"}
SEVERITY_CODE = {"caution": ("A", "Abnormal"), "critical": ("AA", "Critical abnormal")}
#: OBX-11 (HL7 table 0085) -> FHIR ObservationStatus of an input Observation.
OBX_STATUS = {"F": "final", "C": "corrected", "P": "preliminary", "R": "preliminary",
              "S": "preliminary"}

#: Specimen-specific gas codes by sample type: the codes of ``fields.py`` whose
#: specimen the project's LOINC notes verified (arterial, venous, capillary, blood).
GAS_CODES: dict[str, dict[str, str]] = {
    "ph": {"arterial": "2744-1", "venous": "2746-6", "capillary": "2745-8",
           "unknown": "11558-4"},
    "pco2": {"arterial": "2019-8", "venous": "2021-4", "unknown": "11557-6"},
    "po2": {"arterial": "2703-7", "venous": "2705-2", "unknown": "11556-8"},
    "hco3": {"arterial": "1960-4", "venous": "14627-4", "unknown": "1959-6"},
}

_DATETIME = re.compile(
    r"^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}(:\d{2}(\.\d+)?)?(Z|[+-]\d{2}:\d{2})$")


class FhirError(RuntimeError, AcidBaseError):
    """The FHIR output could not be made (library missing, or a Bundle that fails checks)."""


@dataclass(frozen=True)
class InputValue:
    """One input result as received."""

    name: str
    value: float
    unit: str
    comparator: str | None = None
    flag: str | None = None
    loinc: str | None = None
    status: str = "unknown"


@dataclass(frozen=True)
class Context:
    """What a Bundle says about its panel besides the reading."""

    patient_id: str = ""
    sample_id: str = ""
    collected_at: str = ""
    refused_reason: str = ""
    row: int | None = None


def fhir_datetime(text: str) -> str | None:
    """An ISO 8601 date-time as FHIR dateTime (seconds added), or None when FHIR cannot
    hold it (FHIR wants a time zone whenever a time is given)."""
    text = (text or "").strip().replace(" ", "T", 1)
    if not _DATETIME.match(text):
        return None
    if re.match(r"^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}(Z|[+-])", text):
        text = text[:16] + ":00" + text[16:]
    return text


def _quantity(value: float, unit: str, comparator: str | None = None) -> dict[str, Any]:
    q: dict[str, Any] = {"value": _number(value)}
    if comparator:
        q["comparator"] = comparator
    q.update({"unit": unit, "system": UCUM, "code": unit})
    return q


def _number(value: float) -> float | int:
    """A JSON number FHIR accepts: finite, shortest repr (no float noise added)."""
    if not math.isfinite(value):
        raise FhirError(f"a non-finite value {value!r} cannot be written to FHIR")
    return float(repr(float(value)))


class _Ids:
    """Deterministic ``urn:uuid`` ids: the same input and row give the same Bundle."""

    def __init__(self, seed: str) -> None:
        self.seed, self.k = seed, 0

    def next(self) -> str:
        self.k += 1
        return f"urn:uuid:{uuid.uuid5(uuid.NAMESPACE_URL, f'{self.seed}/{self.k}')}"


def bundle(it: Interpretation | None, inputs: Sequence[InputValue], site: Site,
           ctx: Context, *, input_name: str = "", input_sha256: str = "",
           seed: str | None = None) -> dict[str, Any]:
    """The collection Bundle of one panel (``it`` None or refused: a refused panel)."""
    stamp = audit.now()
    ids = _Ids(seed or f"{input_sha256}/{ctx.row}/{stamp}")
    status = site.observation_status
    subject = {"identifier": {"value": ctx.patient_id}} if ctx.patient_id else None
    when = fhir_datetime(ctx.collected_at)
    entries: list[tuple[str, dict[str, Any]]] = []

    def add(resource: dict[str, Any]) -> str:
        url = ids.next()
        entries.append((url, resource))
        return url

    def common(obs: dict[str, Any]) -> dict[str, Any]:
        if subject:
            obs["subject"] = subject
        if when:
            obs["effectiveDateTime"] = when
        return obs

    device = add({"resourceType": "Device",
                  "deviceName": [{"name": audit.TOOL, "type": "user-friendly-name"}],
                  "version": [{"value": audit.version()}],
                  "note": [{"text": CAUTION}]})
    sample_type = it.sample_type if it is not None else "unknown"
    input_refs = [add(common(_input_observation(v, sample_type))) for v in inputs]
    derived_refs: list[str] = []
    finding_refs: list[str] = []
    reading = it is not None and it.status == "interpreted"
    if reading:
        for key, value in it.derived.items():
            if value is None or key not in DERIVED_INFO:
                continue
            title, unit = DERIVED_INFO[key]
            derived_refs.append(add(common({
                "resourceType": "Observation", "status": status,
                "code": {"coding": [{"system": DERIVED_SYSTEM, "code": key, "display": title}],
                         "text": title},
                "valueQuantity": _quantity(value, unit),
                "derivedFrom": [{"reference": r} for r in input_refs],
                "device": {"reference": device}})))
        for f in it.findings:
            obs: dict[str, Any] = {
                "resourceType": "Observation", "status": status,
                "code": {"coding": [{"system": RULE_SYSTEM, "code": f.code, "display": f.title}],
                         "text": f.title},
                "valueString": f.text,
                "note": [{"text": f"Working: {f.working}"},
                         {"text": "Sources: " + "; ".join(c.full() for c in f.citations)}],
                "derivedFrom": [{"reference": r} for r in input_refs],
                "device": {"reference": device}}
            if f.severity in SEVERITY_CODE:
                code, display = SEVERITY_CODE[f.severity]
                obs["interpretation"] = [{"coding": [{"system": INTERPRETATION, "code": code,
                                                      "display": display}]}]
            finding_refs.append(add(common(obs)))
    report: dict[str, Any] = {
        "resourceType": "DiagnosticReport",
        "status": status if reading else "cancelled",
        "category": [{"coding": [{"system": REPORT_CATEGORY, "code": "LAB",
                                  "display": "Laboratory"}]}],
        "code": {"coding": [{"system": REPORT_SYSTEM, "code": READING_CODE[0],
                             "display": READING_CODE[1]}], "text": READING_CODE[1]},
        "issued": stamp,
        "conclusion": _conclusion(it, ctx),
    }
    if subject:
        report["subject"] = subject
    if when:
        report["effectiveDateTime"] = when
    if ctx.sample_id:
        report["identifier"] = [{"value": ctx.sample_id}]
    results = input_refs + derived_refs + finding_refs
    if results:
        report["result"] = [{"reference": r} for r in results]
    if reading and it.disorders:
        report["conclusionCode"] = [
            {"coding": [{"system": PROCESS_SYSTEM, "code": process_code(d.process, d.anion_gap)}],
             "text": d.label()} for d in it.disorders]
    report_ref = add(report)
    sources = [{"role": "source", "what": {"reference": r}} for r in input_refs]
    if input_name:
        sources.append({"role": "source", "what": {"display": (
            f"input {input_name}" + (f", SHA-256 {input_sha256}" if input_sha256 else "")
            + (f", row {ctx.row}" if ctx.row is not None else ""))}})
    config = f"; configuration file {site.file} (SHA-256 {site.file_sha256})" if site.file else ""
    sources.append({"role": "source", "what": {"display": (
        f"settings SHA-256 {site.sha256()}{config}")}})
    add({"resourceType": "Provenance",
         "target": [{"reference": r} for r in [report_ref, *derived_refs, *finding_refs]],
         "occurredDateTime": stamp, "recorded": stamp,
         "agent": [{"type": {"coding": [{"system": PARTICIPANT, "code": "assembler",
                                         "display": "Assembler"}]},
                    "who": {"reference": device}}],
         "entity": sources})
    return {"resourceType": "Bundle", "type": "collection", "timestamp": stamp,
            "entry": [{"fullUrl": url, "resource": res} for url, res in entries]}


def _input_observation(v: InputValue, sample_type: str) -> dict[str, Any]:
    spec = BY_NAME[v.name]
    code = v.loinc or GAS_CODES.get(v.name, {}).get(sample_type)
    concept: dict[str, Any] = {"text": spec.title}
    if code:
        concept["coding"] = [{"system": LOINC, "code": code}]
    obs: dict[str, Any] = {
        "resourceType": "Observation", "status": v.status,
        "category": [{"coding": [{"system": CATEGORY, "code": "laboratory",
                                  "display": "Laboratory"}]}],
        "code": concept, "valueQuantity": _quantity(v.value, v.unit, v.comparator)}
    if v.flag and v.flag in FLAG_CODE:
        c = FLAG_CODE[v.flag]
        obs["interpretation"] = [{"coding": [{"system": INTERPRETATION, "code": c,
                                              "display": FLAG_DISPLAY[c]}]}]
    return obs


def _conclusion(it: Interpretation | None, ctx: Context) -> str:
    if it is None or it.status != "interpreted":
        reasons = ctx.refused_reason or "; ".join(it.problems if it is not None else ())
        return f"Refused, nothing was interpreted: {reasons}. {CAUTION}"
    labels = "; ".join(d.label() for d in it.disorders) or "no acid-base disorder named"
    consistency = it.consistency.status if it.consistency else "not assessable"
    return f"{labels}. Consistency: {consistency}. {CAUTION}"


# ---------------------------------------------------------------------------
# Checks


def _models():
    try:
        from fhir.resources.R4B.bundle import Bundle
    except ImportError:
        raise FhirError("FHIR output needs the optional extra: "
                        "python -m pip install 'acidbase[fhir]'") from None
    return Bundle


def require() -> None:
    """Fail early, before any work, when the FHIR library is missing."""
    _models()


def dangling(doc: Mapping[str, Any]) -> list[str]:
    """References inside the Bundle that point to no entry (the models do not check)."""
    urls = {e["fullUrl"] for e in doc.get("entry", [])}
    out: list[str] = []

    def walk(x: Any) -> None:
        if isinstance(x, dict):
            ref = x.get("reference")
            if isinstance(ref, str) and ref not in urls:
                out.append(ref)
            for v in x.values():
                walk(v)
        elif isinstance(x, list):
            for v in x:
                walk(v)

    walk(doc.get("entry", []))
    return out


def checked(doc: dict[str, Any]) -> dict[str, Any]:
    """``doc`` validated by the FHIR models, with every reference resolving."""
    from pydantic import ValidationError

    Bundle = _models()
    try:
        Bundle.model_validate(doc)
    except ValidationError as e:
        raise FhirError(f"the FHIR Bundle failed validation: {e.errors()[0]['loc']}: "
                        f"{e.errors()[0]['msg']}") from None
    bad = dangling(doc)
    if bad:
        raise FhirError(f"the FHIR Bundle has references to nothing: {', '.join(bad[:3])}")
    return doc


def dumps(doc: Mapping[str, Any], indent: int | None = None) -> str:
    return json.dumps(doc, indent=indent, ensure_ascii=False, allow_nan=False)


def check_bundle_json(panel, it: Interpretation, site: Site, started: str) -> str:
    """``acidbase check --fhir``: the panel's Bundle as indented JSON."""
    require()
    columns, units = panel.columns()
    inputs = []
    for spec in NUMERIC:
        v = columns[spec.name][0]
        if math.isfinite(v):
            inputs.append(InputValue(spec.name, float(v), units[spec.name]))
    ctx = Context(patient_id=panel.patient_id or "", sample_id=panel.sample_id or "",
                  collected_at=panel.collected_at or "")
    doc = bundle(it, inputs, site, ctx, seed=f"check/{started}/{json.dumps(panel.model_dump(mode='json'), sort_keys=True)}")
    return dumps(checked(doc), indent=2)


__all__ = ["Context", "FhirError", "InputValue", "bundle", "check_bundle_json", "checked",
           "dangling", "dumps", "fhir_datetime", "require"]


# ---------------------------------------------------------------------------
# Batch: one Bundle per row, one per line (newline-delimited JSON)


LINE_SCHEMA = pa.schema([("bundle", pa.string())])
_CENSORED = re.compile(r"(<=|>=|<|>)\s*([+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?)")


def _row_codes(cell: str | None) -> dict[str, tuple[str, str, str]]:
    """``hl7_codes`` cell ``ph=2744-1/F/[pH];pco2=2019-8/F/kPa`` -> field -> (LOINC code,
    OBX-11 status, unit as sent)."""
    out: dict[str, tuple[str, str, str]] = {}
    for item in (cell or "").split(";"):
        name, _, rest = item.partition("=")
        code, _, rest = rest.partition("/")
        status, _, unit = rest.partition("/")
        if name:
            out[name] = (code, status, unit)
    return out


def _as_sent(name: str, value: float, column_unit: str, sent_unit: str) -> float:
    """A value the reader took in the column's unit, back in the unit it was sent in
    (HL7 panels of one field in mixed units share a column in the canonical unit)."""
    from .units import factor

    if not sent_unit or sent_unit == column_unit:
        return value
    kind = BY_NAME[name].kind
    back = value * factor(name, kind, column_unit) / factor(name, kind, sent_unit)
    return float(f"{back:.10g}")  # the round trip's last-digit noise, not the data


def chunk_bundles(table: pa.Table, layout, decimal: str, out: Mapping[str, pa.Array],
                  meta: Mapping[str, Any], site: Site, start: int, input_name: str,
                  input_sha256: str) -> bytes:
    """The Bundles of one batch chunk, one JSON document per line, in row order."""
    from . import loinc
    from .fileio import split_unit
    from .files.hl7 import CODES_COLUMN

    cv, res, refused = meta.get("values"), meta["results"], meta["refused"]
    col_of = layout.column_of
    header_code = {}
    for name, header in col_of.items():
        base = split_unit(header)[0]
        if loinc.field_for(base) == name:
            header_code[name] = base
    n = table.num_rows

    def texts(name: str) -> list:
        return table[col_of[name]].to_pylist() if name in col_of else [""] * n

    ids, pids, times = texts("sample_id"), texts("patient_id"), texts("collected_at")
    codes = (table[CODES_COLUMN].to_pylist() if CODES_COLUMN in table.column_names
             else [None] * n)
    reasons = out["reason"].to_pylist()
    read = _reader_rows(cv, n) if cv is not None else None
    lines = []
    for i in range(n):
        row_codes = _row_codes(codes[i])
        reading = res.interpretation(i)
        raw = read[i] if read is not None else _interpretation_row(reading, layout)
        inputs = []
        for name, (value, comparator, flag) in raw.items():
            code, status, sent = row_codes.get(name, (header_code.get(name), "", ""))
            unit = layout.units.get(name, BY_NAME[name].unit)
            if sent:
                value, unit = _as_sent(name, value, unit, sent), sent
            inputs.append(InputValue(name, value, unit, comparator, flag, code or None,
                                     OBX_STATUS.get(status, "unknown")))
        row = start + i + 1
        it = None if refused[i] else reading
        ctx = Context(str(pids[i] or ""), str(ids[i] or ""), str(times[i] or ""),
                      reasons[i] or "", row)
        doc = bundle(it, inputs, site, ctx, input_name=input_name, input_sha256=input_sha256,
                     seed=f"{input_sha256}/{row}")
        lines.append(dumps(checked(doc)))
    return ("\n".join(lines) + "\n").encode("utf-8") if lines else b""


Raw = dict[str, tuple[float, str | None, str | None]]
"""Per field: the value in the column's unit, its comparator and its laboratory flag."""


def _censored(text: str) -> tuple[str, float] | None:
    m = _CENSORED.search(text or "")
    return (m[1], float(m[2].replace(",", "."))) if m else None


def _reader_rows(cv, n: int) -> list[Raw]:
    """The reader's parsed columns (``ChunkValues``) as one ``Raw`` per row."""
    rows: list[Raw] = [{} for _ in range(n)]
    for name, p in cv.parsed.items():
        comparators = p.comparator.to_pylist() if p.comparator is not None else [None] * n
        flags = p.flag.to_pylist() if p.flag is not None else [None] * n
        for i in range(n):
            value = float(p.values[i])
            if comparators[i]:
                got = _censored(str(p.text[i].as_py() or ""))
                value = got[1] if got else math.nan
            if math.isfinite(value):
                rows[i][name] = (value, comparators[i] or None, flags[i] or None)
    return rows


def _interpretation_row(it: Interpretation, layout) -> Raw:
    """The same from one Interpretation: canonical inputs taken back to the column's unit,
    censored values and flags from its marks ("lactate <0.3 L", "ph L")."""
    from .units import factor

    flags = dict(m.split(" ", 1) for m in getattr(it, "lab_flags", ()) if " " in m)
    raw: Raw = {}
    for name, item in it.inputs.items():
        spec = BY_NAME[name]
        unit = layout.units.get(name, spec.unit)
        value = item["value"] / factor(name, spec.kind, unit)
        raw[name] = (float(f"{value:.10g}"), None, flags.get(name))
    for mark in getattr(it, "qualifiers", ()):
        name, _, text = mark.partition(" ")
        got = _censored(text)
        if name in BY_NAME and got is not None:
            raw[name] = (got[1], got[0], flags.get(name))
    return raw
