"""Results of the kernel: columns for many panels, an Interpretation for one.

``interpret_many`` returns ``Results``: the frame and the fired-rule matrix, with
columnar output built on demand (``table``).  ``Results.interpretation(i)``
builds the full object for row ``i``: normalised inputs, derived values, the
consistency verdict, disorders, and findings ordered trust, process, detail,
each with its working and resolved citations.  ``interpret(panel)`` is
``interpret_many`` of a batch of one.
"""

from __future__ import annotations

import functools
from collections.abc import Collection, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import engine
from .engine import CONSISTENCY_NAMES, ROLE_NAMES, SLOTS, TIMING_NAMES, VALID_WHEN, Frame
from .fields import HCO3_SOURCES, NUMERIC, SAMPLE_TYPES
from .inputs.vocab import CHOICES
from .errors import Problem
from .inputs.panel import Screened

# The derived values and their shown precision live in ``acidbase.precision`` (the report
# reads them without importing this module: no import cycle); re-exported here.
from .precision import DECIMALS, DERIVED  # noqa: F401
from .reference import Settings
from .references import Citation, cite
from .rules import RULES, SECTIONS, render

CAUTION = (
    "Caution: acidbase supports, and does not replace, the judgement of licensed clinicians "
    "and the local laboratory's protocols. It gives no treatment or dosing advice. Check every "
    "result against the original report and the patient before acting on it."
)

@dataclass(frozen=True)
class Finding:
    code: str
    section: str
    severity: str
    title: str
    text: str
    working: str
    why: str
    citations: tuple[Citation, ...]

    def as_dict(self) -> dict[str, Any]:
        return {
            "code": self.code, "section": self.section, "severity": self.severity,
            "title": self.title, "text": self.text, "working": self.working,
            "citation": "; ".join(c.short() for c in self.citations),
            "citations": [c.as_dict() for c in self.citations],
        }


@dataclass(frozen=True)
class Disorder:
    process: str
    role: str
    timing: str | None
    anion_gap: str | None

    def as_dict(self) -> dict[str, Any]:
        return {"process": self.process, "role": self.role, "timing": self.timing,
                "anion_gap": self.anion_gap}

    def label(self) -> str:
        extra = [x for x in (self.timing, f"{self.anion_gap} gap" if self.anion_gap else None) if x]
        inner = ", ".join(extra + [self.role])
        return f"{self.process} ({inner})"


@dataclass(frozen=True)
class Consistency:
    status: str
    source: str
    hco3_entered: float | None
    hco3_calculated: float | None
    total_co2_calculated: float | None
    difference: float | None
    tolerance: float | None

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


@dataclass(frozen=True)
class Interpretation:
    status: str
    """"interpreted" or "refused"."""
    problems: tuple[Problem, ...]
    """Why the panel was refused: structured (``str(p)`` is the sentence)."""
    inputs: dict[str, dict[str, Any]]
    sample_type: str
    hco3_source: str
    consistency: Consistency | None
    disorders: tuple[Disorder, ...]
    derived: dict[str, float | None]
    findings: tuple[Finding, ...]
    caution: str = CAUTION
    settings: dict[str, Any] = field(default_factory=dict)
    qualifiers: tuple[str, ...] = ()
    """Censored values read and treated as not measured ("lactate <0.3")."""
    lab_flags: tuple[str, ...] = ()
    """Laboratory flags read off values ("ph L")."""

    def codes(self) -> list[str]:
        return [f.code for f in self.findings]

    def in_section(self, section: str) -> list[Finding]:
        return [f for f in self.findings if f.section == section]

    def to_dict(self) -> dict[str, Any]:
        from .report import as_json_dict

        return as_json_dict(self)

    def to_text(self) -> str:
        from .report import as_text

        return as_text(self)


def _value(x: Any) -> Any:
    if isinstance(x, np.generic):
        x = x.item()
    if isinstance(x, float) and not np.isfinite(x):
        return None
    return x


@dataclass(frozen=True)
class Part:
    """The kernel's output for one slice of rows (``start`` is its first row)."""

    start: int
    screened: Screened
    frame: Frame
    fired: np.ndarray


class Results:
    """The kernel's output for ``n`` panels, computed in slices.

    Columns are joined on demand (``table``, ``finding_codes``); one row is read
    from its slice (``interpretation``).
    """

    def __init__(self, parts: list[Part], settings: Settings):
        self.parts = parts
        self.settings = settings
        self.n = sum(p.screened.n for p in parts)
        self.refused = _join([p.screened.refused for p in parts])
        self._starts = np.array([p.start for p in parts])

    # -- the sequence protocol: one Interpretation per panel --------------------
    def __len__(self) -> int:
        return self.n

    def __getitem__(self, i: int) -> Interpretation:
        if isinstance(i, (bool, np.bool_)) or not isinstance(i, (int, np.integer)):
            raise TypeError(f"Results index must be an integer, not {type(i).__name__}")
        i = int(i)
        if i < 0:
            i += self.n
        return self.interpretation(i)

    def __iter__(self):
        return (self.interpretation(i) for i in range(self.n))

    def __repr__(self) -> str:
        refused = int(np.count_nonzero(self.refused))
        return f"<Results: {self.n} panel(s), {self.n - refused} interpreted, {refused} refused>"

    # -- what the reader found, structured ------------------------------------
    def problems(self) -> dict[int, list[Problem]]:
        """Refused row -> its problems (row numbers over the whole input)."""
        return {p.start + i: plist for p in self.parts for i, plist in p.screened.problems.items()}

    def problem_counts(self) -> dict[str, int]:
        """How many times each kind of problem refused a row, by ``Problem.label``."""
        out: dict[str, int] = {}
        for p in self.parts:
            for plist in p.screened.problems.values():
                for prob in plist:
                    out[prob.label] = out.get(prob.label, 0) + 1
        return out

    def qualifiers(self) -> list[tuple[str, ...]]:
        """Per row: censored values read and treated as not measured ("lactate <0.3")."""
        return [q for p in self.parts for q in p.screened.qualifiers()]

    def lab_flags(self) -> list[tuple[str, ...]]:
        """Per row: laboratory flags read off values ("ph L")."""
        return [f for p in self.parts for f in p.screened.lab_flags()]

    def marked_rows(self, which: str) -> dict[int, tuple[str, ...]]:
        """Only the rows with marks (row -> marks, as ``qualifiers`` or ``lab_flags``
        give them; ``which`` is "qualifiers" or "lab_flags"): for a file's columns and
        counts, without a tuple for every row."""
        with_text = {"qualifiers": True, "lab_flags": False}[which]
        return {p.start + i: m for p in self.parts
                for i, m in p.screened.marked_rows(with_text).items()}

    def has_marks(self) -> bool:
        """True when some value carried a comparator or a laboratory flag."""
        return any(p.screened.readings for p in self.parts)

    def values(self, name: str) -> np.ndarray:
        """A numeric input in its canonical unit (NaN where not measured or refused)."""
        return _join([p.screened.values[name] for p in self.parts])

    @property
    def plain(self) -> frozenset[str]:
        """Input fields read in full as bare numbers or allowed words (every part)."""
        sets = [p.screened.plain for p in self.parts]
        return frozenset.intersection(*sets) if sets else frozenset()

    @functools.cached_property
    def reasons(self) -> np.ndarray:
        """Object array: "" for accepted rows, the refusal reasons otherwise."""
        return _join([p.screened.reasons for p in self.parts])

    def _locate(self, i: int) -> tuple[Part, int]:
        if not 0 <= i < self.n:
            raise IndexError(i)
        k = int(np.searchsorted(self._starts, i, side="right")) - 1
        part = self.parts[k]
        return part, i - part.start

    @property
    def frame(self) -> Frame:
        """The whole frame, joined (for inspection; the surfaces do not need it)."""
        keys = self.parts[0].frame.keys()
        return {k: _join([p.frame[k] for p in self.parts], p0=self.parts[0].frame[k])
                for k in keys}

    @property
    def fired(self) -> np.ndarray:
        """Boolean matrix (rules x rows); one slice's own matrix when there is one."""
        if len(self.parts) == 1:
            return self.parts[0].fired
        return np.concatenate([p.fired for p in self.parts], axis=1)

    # -- one row --------------------------------------------------------------
    def row(self, i: int) -> dict[str, Any]:
        part, j = self._locate(i)
        out: dict[str, Any] = {}
        for key, col in part.frame.items():
            out[key] = col.item() if np.ndim(col) == 0 else col[j].item()
        for key, mask in VALID_WHEN.items():
            if not out[mask]:
                out[key] = float("nan")
        return out

    def interpretation(self, i: int) -> Interpretation:
        part, j = self._locate(i)
        r = self.row(i)
        inputs = {s.name: {"value": _value(r[s.name]), "unit": s.unit}
                  for s in NUMERIC if _value(r[s.name]) is not None}
        st, src = SAMPLE_TYPES[r["sample_type"]], HCO3_SOURCES[r["hco3_source"]]
        settings = dict(self.settings.__dict__)
        marks = {"qualifiers": part.screened.qualifiers()[j] if part.screened.readings else (),
                 "lab_flags": part.screened.lab_flags()[j] if part.screened.readings else ()}
        if part.screened.refused[j]:
            probs = tuple(part.screened.problems.get(j, []))
            return Interpretation("refused", probs, inputs, st, src, None, (), {}, (),
                                  settings=settings, **marks)
        consistency = Consistency(
            CONSISTENCY_NAMES[r["consistency"]], src, _value(r["hco3"]),
            _value(r["hco3_calculated"]), _value(r["total_co2_calculated"]),
            _value(r["consistency_difference"]), _value(r["consistency_tolerance"]))
        disorders = self._disorders(r)
        derived = {k: _value(r[k]) for k in DERIVED}
        findings = []
        for section in SECTIONS:
            for k, rule in enumerate(RULES):
                if rule.section == section and part.fired[k, j]:
                    findings.append(Finding(
                        rule.code, rule.section, rule.severity, rule.title,
                        render(rule, rule.text, r), render(rule, rule.working, r), rule.why,
                        cite(*rule.refs)))
        return Interpretation("interpreted", (), inputs, st, src, consistency, disorders,
                              derived, tuple(findings), settings=settings, **marks)

    @staticmethod
    def _disorders(r: Mapping[str, Any]) -> tuple[Disorder, ...]:
        out = []
        for slot, process, gap in SLOTS:
            role = r[f"role_{slot}"]
            if role == 0:
                continue
            timing = TIMING_NAMES[r["timing_resp"]] if slot.startswith("resp") else None
            if slot.startswith("resp") and role == engine.ADDITIONAL:
                timing = "indeterminate"
            out.append(Disorder(process, ROLE_NAMES[role], timing, gap))
        out.sort(key=lambda d: d.role != "primary")
        return tuple(out)

    # -- columns ----------------------------------------------------------------
    def finding_codes(self) -> np.ndarray:
        """Object array: the codes fired on each row, joined by ";"."""
        return _materialise(*self._encoded_codes())

    def disorder_labels(self) -> np.ndarray:
        """Object array: the disorders of each row as text ("" for none)."""
        return _materialise(*self._encoded_disorders())

    def _encoded_codes(self, severities: tuple[str, ...] | None = None
                       ) -> tuple[np.ndarray, list[str]]:
        names = [r.code for r in RULES]
        if severities is None:
            return _merge([_combine(p.fired, names) for p in self.parts])
        # the other rules' rows cleared, the names kept (``_combine`` caches by bits)
        keep = np.array([r.severity in severities for r in RULES])[:, None]
        return _merge([_combine(p.fired & keep, names) for p in self.parts])

    def _encoded_disorders(self) -> tuple[np.ndarray, list[str]]:
        return _merge([self._labels(p.frame) for p in self.parts])

    def _labels(self, f: Frame) -> tuple[np.ndarray, list[str]]:
        key = np.zeros(f["ph"].shape[0], dtype=np.int64)
        for slot, _, _ in SLOTS:
            key = key * 3 + f[f"role_{slot}"]
        key = key * 4 + f["timing_resp"]
        # np.unique's (sorted uniques, inverse) by a table over the few possible keys
        # (3 roles a slot, 4 timings): no sort of the rows.
        seen = np.zeros(4 * 3 ** len(SLOTS), dtype=bool)
        seen[key] = True
        uniques = np.flatnonzero(seen)
        remap = np.zeros(seen.size, dtype=np.int32)
        remap[uniques] = np.arange(uniques.size, dtype=np.int32)
        inverse = remap[key]
        labels = []
        for u in uniques.tolist():
            timing = u % 4
            rest = u // 4
            roles = []
            for _ in SLOTS:
                roles.append(rest % 3)
                rest //= 3
            roles.reverse()
            row = {f"role_{s}": roles[k] for k, (s, _, _) in enumerate(SLOTS)}
            row["timing_resp"] = timing
            labels.append("; ".join(d.label() for d in self._disorders(row)))
        return inverse.reshape(-1).astype(np.int32), labels

    def encoded(self, severities: tuple[str, ...] | None = None, difference: bool = False,
                derived: Collection[str] | None = None
                ) -> dict[str, np.ndarray | tuple[np.ndarray, list[str]]]:
        """The output columns of ``table``, with every text column except ``reason`` as
        ``(indices, labels)``: row i reads ``labels[indices[i]]``.

        The batch writer turns these into dictionary arrays without converting text
        cell by cell; ``table`` materialises the same columns as object arrays.
        ``severities``: only those findings' codes in ``finding_codes`` (None: all);
        ``difference``: also ``hco3_difference`` (the frame's consistency difference,
        measured minus calculated HCO3- or total CO2), after ``hco3_calculated``;
        ``derived``: only these derived values (None: all).
        """
        refused = self.refused

        def col(key: str) -> np.ndarray:
            mask = VALID_WHEN.get(key)
            return _join([
                _full(p.frame[key], p.screened.n) if mask is None
                else np.where(p.frame[mask], p.frame[key], np.nan) for p in self.parts])

        def blanked(indices: np.ndarray, labels: list[str]) -> tuple[np.ndarray, list[str]]:
            """Refused rows read "" (an extra label)."""
            if not refused.any():
                return indices.astype(np.int32), list(labels)
            out = np.where(refused, len(labels), indices).astype(np.int32)
            return out, [*labels, ""]

        cols: dict[str, np.ndarray | tuple[np.ndarray, list[str]]] = {}
        cols["status"] = (refused.astype(np.int32), ["interpreted", "refused"])
        cols["reason"] = self.reasons
        cols["consistency"] = blanked(col("consistency"), list(CONSISTENCY_NAMES))
        cols["disorders"] = blanked(*self._encoded_disorders())
        for slot, _, _ in SLOTS:
            cols[f"role_{slot}"] = (col(f"role_{slot}").astype(np.int32),
                                      [w or "" for w in ROLE_NAMES])
        cols["timing_respiratory"] = (col("timing_resp").astype(np.int32),
                                      [w or "" for w in TIMING_NAMES])
        cols["finding_codes"] = self._encoded_codes(severities)
        for k in DERIVED:
            if derived is None or k in derived:
                cols[k] = col(k)
            if difference and k == "hco3_calculated":
                cols["hco3_difference"] = col("consistency_difference")
        return cols

    def to_arrow(self):
        """The results as a ``pyarrow.Table``, one row per panel, typed: every text
        category (status, consistency, disorders, roles, timing, sample type, HCO3-
        source, finding codes) a dictionary column, ``reason`` text, one boolean per
        process (``has_<slot>``), derived values float64 (null where not computed)."""
        import pyarrow as pa

        enc = self.encoded()
        cols: dict[str, Any] = {}

        def dictionary(indices: np.ndarray, labels: list[str]):
            return pa.DictionaryArray.from_arrays(pa.array(indices, type=pa.int32()),
                                                  pa.array(labels, type=pa.string()))

        refused = np.asarray(self.refused, dtype=bool)
        for key, col in enc.items():
            if key == "reason":
                cols[key] = pa.array(col, type=pa.string())
            elif isinstance(col, tuple):
                cols[key] = dictionary(*col)
            elif col.dtype.kind == "f":
                cols[key] = pa.array(col, mask=np.isnan(col))
            else:
                cols[key] = pa.array(col)
            if key == "status":
                for choice in CHOICES:
                    codes = _join([p.screened.choices[choice.name] for p in self.parts])
                    cols[choice.name] = dictionary(codes.astype(np.int32), list(choice.words))
        for slot, _, _ in SLOTS:
            role = enc[f"role_{slot}"][0]
            cols[f"has_{slot}"] = pa.array((role != 0) & ~refused)
        return pa.table(cols)

    def to_pandas(self):
        """``to_arrow()`` as a pandas DataFrame (categoricals for the dictionary columns);
        pandas is an optional dependency, imported here."""
        try:
            import pandas  # noqa: F401  (pyarrow's own message would not say what to do)
        except ImportError:
            raise ImportError("Results.to_pandas needs pandas (python -m pip install pandas); "
                              "Results.to_arrow gives the same table with what acidbase "
                              "installs") from None
        return self.to_arrow().to_pandas()

    def table(self) -> dict[str, np.ndarray]:
        """Output columns for the batch file, in their documented order."""
        return {k: (_materialise(*v) if isinstance(v, tuple) else v)
                for k, v in self.encoded().items()}


def _materialise(indices: np.ndarray, labels: list[str]) -> np.ndarray:
    return np.array(labels, dtype=object)[indices]


def _merge(parts: list[tuple[np.ndarray, list[str]]]) -> tuple[np.ndarray, list[str]]:
    """One (indices, labels) pair from several, with one label list."""
    if len(parts) == 1:
        return parts[0]
    labels: dict[str, int] = {}
    out = []
    for indices, names in parts:
        remap = np.array([labels.setdefault(x, len(labels)) for x in names], dtype=np.int32)
        out.append(remap[indices] if len(names) else indices.astype(np.int32))
    return np.concatenate(out), list(labels)


def _full(col: np.ndarray, n: int) -> np.ndarray:
    return np.full(n, col) if np.ndim(col) == 0 else col


def _join(arrays: list[np.ndarray], p0: np.ndarray | None = None) -> np.ndarray:
    if len(arrays) == 1:
        return arrays[0]
    if p0 is not None and np.ndim(p0) == 0:
        return p0
    return np.concatenate(arrays)


def _combine(mask: np.ndarray, names: list[str]) -> tuple[np.ndarray, list[str]]:
    """The names whose mask is set, joined by ";", per column of ``mask`` (rules x rows),
    as (indices, labels).

    The packing and grouping run in the compiled edge when it is built
    (``csvtext.packed_rules``, ``csvtext.grouped_words``); the numpy code below is the
    reference, and ``tests/test_compiled_edges.py`` holds the two to the same indices
    and labels, in the same order."""
    n = mask.shape[1]
    if n == 0:
        return np.zeros(0, dtype=np.int32), []
    from .csvtext import grouped_words, packed_rules  # no pyarrow import (one panel)

    # One 64-bit word per 64 names: bit r of word r // 64 is name r (a shift and an or
    # per name; packbits along the short axis costs several times more).
    words = packed_rules(mask)
    if words is None:
        cols = []
        for w in range(0, mask.shape[0], 64):
            word = np.zeros(n, dtype=np.uint64)
            for r in range(w, min(w + 64, mask.shape[0])):
                word |= mask[r].astype(np.uint64) << np.uint64(r - w)
            cols.append(word)
        words = np.stack(cols, axis=1)  # (n, k)
    grouped = grouped_words(words[:, 0]) if words.shape[1] == 1 else None
    if grouped is not None:  # the distinct words in increasing order, as numpy.unique
        inverse, keys, first_rows = grouped
    elif words.shape[1] == 1:
        uniques, inverse = np.unique(words[:, 0], return_inverse=True)
        first = np.empty(len(uniques), dtype=np.int64)
        first[inverse[::-1]] = np.arange(n)[::-1]
        keys, first_rows = uniques.tolist(), first.tolist()
    else:
        view = words.view(np.dtype((np.void, words.shape[1] * 8))).reshape(-1)
        uniques, first, inverse = np.unique(view, return_index=True, return_inverse=True)
        keys, first_rows = [u.tobytes() for u in uniques], first.tolist()
    if len(_LABELS) > 100_000:  # bounded: a pathological file cannot grow it for ever
        _LABELS.clear()
    labels = []
    for key, j in zip(keys, first_rows):
        label = _LABELS.get(key)
        if label is None:
            label = ";".join(name for name, on in zip(names, mask[:, j]) if on)
            _LABELS[key] = label
        labels.append(label)
    return inverse.reshape(-1).astype(np.int32, copy=False), labels


#: Packed fired-rule pattern -> its codes joined, shared by every call (the rule
#: table is fixed for the life of the process).
_LABELS: dict[object, str] = {}
