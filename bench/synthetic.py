"""Synthetic panels for the benchmark: seeded, a mix of normal and disordered panels.

Invented data (benchmark only).  The shapes follow the expected-compensation rules
the engine itself uses (Winter's formula, the 0.7 metabolic-alkalosis slope, the
0.1 / 0.35 respiratory-acidosis and 0.2 respiratory-alkalosis slopes; see
docs/methods.md), pH is placed by Henderson-Hasselbalch with the engine's own
constants, and a small share of rows carry what laboratory exports carry: values
outside the accepted range, text in a number cell, censored values, trailing flags.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pa_csv

from acidbase.chemistry import CO2_SOLUBILITY, PK_PRIME

#: Share of each kind of panel (invented, benchmark only).
MIX = {
    "normal": 0.55, "metabolic acidosis": 0.12, "metabolic alkalosis": 0.08,
    "acute respiratory acidosis": 0.06, "chronic respiratory acidosis": 0.06,
    "respiratory alkalosis": 0.07, "mixed": 0.06,
}
COLUMNS = ("sample_id", "patient_id", "collected_at", "ph", "pco2", "hco3", "na", "cl", "k",
           "albumin", "lactate", "sample_type", "hco3_source")
PANELS_PER_PATIENT = 5


def _patient_values(m: int, rng: np.random.Generator) -> dict[str, np.ndarray]:
    """One underlying state per patient: acid-base kind, pCO2, HCO3-, gap, Na+, K+."""
    k = rng.choice(len(MIX), size=m, p=list(MIX.values()))
    pco2 = rng.normal(40.0, 2.5, m)
    hco3 = rng.normal(24.0, 1.5, m)
    sel = k == 1
    hco3[sel] = rng.uniform(8, 20, sel.sum())
    pco2[sel] = 1.5 * hco3[sel] + 8 + rng.normal(0, 1.5, sel.sum())
    sel = k == 2
    hco3[sel] = rng.uniform(28, 40, sel.sum())
    pco2[sel] = 40 + 0.7 * (hco3[sel] - 24) + rng.normal(0, 2, sel.sum())
    sel = k == 3
    pco2[sel] = rng.uniform(50, 80, sel.sum())
    hco3[sel] = 24 + 0.1 * (pco2[sel] - 40) + rng.normal(0, 1, sel.sum())
    sel = k == 4
    pco2[sel] = rng.uniform(50, 80, sel.sum())
    hco3[sel] = 24 + 0.35 * (pco2[sel] - 40) + rng.normal(0, 1, sel.sum())
    sel = k == 5
    pco2[sel] = rng.uniform(22, 33, sel.sum())
    hco3[sel] = 24 - 0.2 * (40 - pco2[sel]) + rng.normal(0, 1, sel.sum())
    sel = k == 6
    pco2[sel] = rng.uniform(25, 70, sel.sum())
    hco3[sel] = rng.uniform(10, 38, sel.sum())
    gap = rng.normal(9, 2, m) + np.where((k == 1) & (rng.random(m) < 0.5), 10, 0)
    return {"pco2": pco2, "hco3": hco3, "gap": gap, "na": rng.normal(140, 3, m),
            "k": rng.normal(4.2, 0.4, m),
            "sample_type": rng.choice(np.array(["arterial", "venous", "unknown"]), m,
                                      p=[0.8, 0.15, 0.05])}


def panels(n: int, seed: int = 2026, start: int = 0) -> dict[str, np.ndarray]:
    """``n`` panels (rows ``start`` on) as numeric columns (canonical units) and text.

    Each patient has ``PANELS_PER_PATIENT`` panels 4 h apart around one underlying
    state, with small panel-to-panel noise; 0.2 % of panels are another patient's
    values (the wrong-blood pattern the serial checks look for).
    """
    rng = np.random.default_rng([seed, start])
    rows = np.arange(start, start + n)
    patient = rows // PANELS_PER_PATIENT
    first = patient[0]
    base = _patient_values(int(patient[-1] - first + 1), rng)
    idx = patient - first
    swap = rng.random(n) < 0.002
    idx = np.where(swap, rng.integers(0, len(base["na"]), n), idx)
    pco2 = base["pco2"][idx] + rng.normal(0, 1.5, n)
    hco3 = np.maximum(base["hco3"][idx] + rng.normal(0, 0.8, n), 3.0)
    ph = PK_PRIME + np.log10(hco3 / (CO2_SOLUBILITY * pco2)) + rng.normal(0, 0.004, n)
    na = base["na"][idx] + rng.normal(0, 1.5, n)
    cl = na - hco3 - base["gap"][idx] + rng.normal(0, 1.0, n)
    albumin = np.where(rng.random(n) < 0.5, rng.normal(40, 5, n), np.nan)
    lactate = np.where(rng.random(n) < 0.6, np.abs(rng.normal(1.2, 0.5, n)), np.nan)
    # Panels of one patient 4 h apart, patients staggered through a year.
    t0 = np.datetime64("2026-01-01T00:00:00", "s")
    secs = (patient * 7919) % (365 * 86400) + (rows % PANELS_PER_PATIENT) * 4 * 3600
    return {
        "sample_id": np.char.add("S", rows.astype(str)),
        "patient_id": np.char.add("P", patient.astype(str)),
        "collected_at": np.datetime_as_string(t0 + secs.astype("timedelta64[s]")),
        "ph": ph, "pco2": pco2, "hco3": hco3, "na": na, "cl": cl,
        "k": base["k"][idx] + rng.normal(0, 0.15, n), "albumin": albumin, "lactate": lactate,
        "sample_type": base["sample_type"][idx], "hco3_source": np.full(n, "analyser"),
    }


def _text(x: np.ndarray, decimals: int) -> pa.Array:
    arr = pa.array(np.round(x, decimals), from_pandas=True)
    return pc.cast(arr, pa.string())


def as_table(cols: dict[str, np.ndarray], seed: int = 2026, start: int = 0) -> pa.Table:
    """The panels as an export would print them: text, with faults and qualifiers."""
    n = len(cols["ph"])
    rng = np.random.default_rng([seed, start, 1])
    ph = _text(cols["ph"], 3)
    flag = rng.random(n)
    ph = pc.if_else(pa.array(flag < 0.01), pc.binary_join_element_wise(ph, "L", " "), ph)
    ph = pc.if_else(pa.array(flag > 0.995), "9.40", ph)           # outside the accepted range
    k = _text(cols["k"], 1)
    k = pc.if_else(pa.array(rng.random(n) < 0.002), "haem", k)    # text in a number cell
    lac = _text(cols["lactate"], 1)
    lac = pc.if_else(pa.array(rng.random(n) < 0.01), "<0.3", lac)  # censored optional value
    out = {
        "sample_id": pa.array(cols["sample_id"]), "patient_id": pa.array(cols["patient_id"]),
        "collected_at": pc.binary_join_element_wise(pa.array(cols["collected_at"]), "Z", ""),
        "ph": ph, "pco2": _text(cols["pco2"], 1), "hco3": _text(cols["hco3"], 1),
        "na": _text(cols["na"], 0), "cl": _text(cols["cl"], 0), "k": k,
        "albumin": _text(cols["albumin"], 0), "lactate": lac,
        "sample_type": pa.array(cols["sample_type"]), "hco3_source": pa.array(cols["hco3_source"]),
    }
    return pa.table(out)


def write_tables(path: str, tables: Iterable[pa.Table]) -> None:
    """Write tables of one schema to one CSV file, one at a time (bounded memory)."""
    writer = None
    for t in tables:
        if writer is None:
            writer = pa_csv.CSVWriter(path, t.schema,
                                      write_options=pa_csv.WriteOptions(quoting_style="none"))
        writer.write_table(t)
    if writer is not None:
        writer.close()


def write_csv(path: str, n: int, seed: int = 2026, chunk: int = 500_000) -> None:
    """Write ``n`` synthetic panels as CSV, in chunks (bounded memory)."""
    write_tables(path, (as_table(panels(min(chunk, n - start), seed, start), seed, start)
                        for start in range(0, n, chunk)))


def chunks(n: int, seed: int = 2026, chunk: int = 500_000) -> Iterator[dict[str, np.ndarray]]:
    for start in range(0, n, chunk):
        yield panels(min(chunk, n - start), seed, start)
