"""The app's link to a history store (``acidbase tui --history PATH``): opt-in, never silent.

A patient's stored panels are read once per patient id (``acidbase.history.
earlier_panels``) and kept for the sitting; the panel on the form is checked against
them by the library (``acidbase.history.check_against_earlier``: the batch's serial
checks, with the site's delta limits and window).  A panel goes into the store only by
``keep`` (a key and a yes), through ``acidbase.history.keep_panel``, which records an
audit entry as a batch run does.  Nothing here hashes, compares or stores a value.
"""

from __future__ import annotations

import os
import sqlite3
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import acidbase
from acidbase import history


@dataclass
class StoreLink:
    """The store named on the command line, the site key's state, and what was read."""

    path: str
    deltas: Mapping[str, float | None] = field(default_factory=dict)
    """The site's delta limits (``config.Site.deltas``): the batch's rules."""
    window_hours: float | None = None
    """The site's serial window (``config.Site.window_hours``); None: the batch's default."""
    settings: Mapping[str, object] = field(default_factory=dict)
    """The settings recorded in the audit entry of a kept panel."""
    key_env: str = history.KEY_ENV
    problem: str = ""
    """Why the store cannot be used ("" when it can): shown, never hidden."""
    _cache: dict[str, list[dict[str, object]] | str] = field(default_factory=dict)

    def __post_init__(self) -> None:
        try:
            history.site_key(None, self.key_env)
        except history.HistoryError as e:
            self.problem = f"the history store {self.path} cannot be used: {e}"

    @property
    def usable(self) -> bool:
        return not self.problem

    def known(self, patient_id: str) -> bool:
        """The patient's stored panels were read in this sitting."""
        return patient_id in self._cache

    def earlier(self, patient_id: str) -> list[dict[str, object]] | str:
        """The patient's stored panels (oldest first), or why they could not be read."""
        if patient_id not in self._cache:
            self._cache[patient_id] = self._read(patient_id)
        return self._cache[patient_id]

    def _read(self, patient_id: str) -> list[dict[str, object]] | str:
        if not os.path.exists(self.path):
            return []  # no store yet: keeping a panel creates it
        try:
            return history.earlier_panels(self.path, patient_id,
                                          key=history.site_key(None, self.key_env))
        except (history.HistoryError, OSError, sqlite3.Error) as e:
            return f"the store could not be read: {e}"

    def check(self, panel: acidbase.Panel | None, data: Mapping[str, Any],
              read: bool = False) -> history.PanelCheck | str | None:
        """The panel against the patient's stored panels; None without a patient id or
        before they were read (``read``: read them now); a string when they could not
        be read.  Without a panel (the form holds a refused value) nothing is compared,
        but the stored panels within the window are still listed."""
        patient = str(data.get("patient_id") or "").strip()
        if not patient or not (read or self.known(patient)):
            return None
        rows = self.earlier(patient)
        if isinstance(rows, str):
            return rows
        return history.check_against_earlier(
            _values(panel) if panel is not None else {}, data.get("collected_at"), rows,
            data.get("sample_id"), self.deltas, self.window_hours)

    def keep(self, panel: acidbase.Panel, data: Mapping[str, Any]) -> str:
        """Add the panel to the store; what to tell the user."""
        patient = str(data.get("patient_id") or "").strip()
        try:
            kept = history.keep_panel(self.path, patient, _values(panel),
                                      str(data.get("collected_at") or ""),
                                      data.get("sample_id"), key_env=self.key_env,
                                      settings=self.settings)
        except (history.HistoryError, OSError, sqlite3.Error) as e:
            return f"Not kept in the store: {e}"
        self._cache.pop(patient, None)  # read again, with this panel
        if kept.already_stored:
            return ("Not kept in the store: a panel of this patient with this time and "
                    "sample id is already there.")
        if kept.too_old:
            return (f"Not kept in the store: collected before its retention period "
                    f"({kept.retention_days:g} days).")
        return (f"Kept in the store {self.path} (the patient id only as a keyed hash), "
                "with an audit record.")


def _values(panel: acidbase.Panel) -> dict[str, float]:
    """The panel's values in canonical units (NaN where not measured)."""
    out = {}
    for name, value in panel.canonical().items():
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            out[name] = float(value)
        elif value is None:
            out[name] = float("nan")
    return out


def stored_line(row: Mapping[str, object]) -> str:
    """One stored panel in a line: its time, sample id and gas (for the reading pane)."""
    sample = f" (sample {row['sample_id']})" if row.get("sample_id") else ""
    gas = " ".join(f"{acidbase.fields.BY_NAME[n].title} {_shown(row.get(n), n)}"
                   for n in ("ph", "pco2", "hco3", "na", "k"))
    return f"stored {row['collected_at']}{sample}: {gas}"


def _shown(value: object, name: str = "") -> str:
    """A stored value; "-" when not stored."""
    return stored_number(value, name) or "-"


def stored_number(value: object, name: str = "") -> str:
    """A stored value ("" when not stored): pH to two decimals at least, as a pH is
    reported (``labels.reported``: 7.40, not 7.4); the others as the store keeps them."""
    if not isinstance(value, float) or value != value:
        return ""
    if name == "ph":
        from .labels import reported

        return reported("ph", value)
    return f"{value:.4g}"


def stored_reading(row: Mapping[str, object], settings: acidbase.Settings) -> str:
    """The library's reading of a stored panel's values (the store keeps the gas and a
    few electrolytes, not the sample type: the reading is of those values only)."""
    data = {k: v for k, v in row.items() if k in acidbase.fields.BY_NAME
            and isinstance(v, float) and v == v}  # NaN: not stored
    try:
        it = acidbase.interpret(acidbase.Panel.model_validate(data), settings)
    except ValueError as e:  # pydantic's ValidationError is a ValueError
        return f"refused: {e.errors()[0]['msg'] if hasattr(e, 'errors') else e}"
    labels = "; ".join(d.label() for d in it.disorders) or "none"
    status = it.consistency.status if it.consistency else "not assessable"
    return labels if status == "consistent" else f"{status}; {labels}"


def section(link: StoreLink, check: history.PanelCheck | str | None, patient: str,
            waiting: bool = False) -> tuple[str, list[str], str]:
    """What the reading pane shows of the store: (heading, lines, the verdict's words).

    ``waiting``: a patient id is being typed (the store is read when the field is left).
    """
    if not link.usable:
        return "History store: cannot be used", [link.problem], "Store: cannot be used"
    if not patient:
        return ("History store: no patient id", ["Key in the patient id (and the collection "
                "time) to compare this panel with the patient's stored panels."], "")
    if waiting or check is None:
        return ("History store: not read yet",
                ["The patient's stored panels are read when the patient field is left."], "")
    if isinstance(check, str):
        return "History store: not read", [check], "Store: not read"
    word = check.status.split(":")[0]
    lines = []
    if check.codes:
        lines.append(f"FLAGGED {check.codes}: {check.detail}")
    elif check.status != "within limits":
        lines.append(check.status)
    n = len(check.within)
    lines.append(f"{n} stored panel{'s' * (n != 1)} of this patient within "
                 f"{check.window_hours:g} h of this panel's time"
                 + (" (none)" if not n else ":"))
    lines += [stored_line(r) for r in check.within]
    if check.already_stored:
        lines.append("This panel is in the store already (same time and sample id).")
    if check.other_clock:
        lines.append(f"{check.other_clock} stored panel{'s' * (check.other_clock != 1)} "
                     "left out: their time has a time-zone offset and this panel's has "
                     "none, or the other way round.")
    lines.append("Ctrl+T: the stored panels in full; K there keeps this panel in the store.")
    verdict = f"Store: {word}" + (f" {check.codes}" if check.codes else "")
    return f"History store: {check.status}", lines, verdict
