"""The app's small settings file: the unit chosen for each field, kept for the next sitting.

``$XDG_CONFIG_HOME/acidbase/tui.json`` (``~/.config/acidbase/tui.json`` when the
variable is unset).  A missing or unreadable file means "no choices yet"; a unit
the field does not accept is dropped on reading.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

from acidbase.fields import BY_NAME


def path() -> Path:
    base = os.environ.get("XDG_CONFIG_HOME") or str(Path.home() / ".config")
    return Path(base) / "acidbase" / "tui.json"


def load_units() -> dict[str, str]:
    """The remembered unit per field (only units the field accepts)."""
    try:
        data = json.loads(path().read_text(encoding="utf-8"))
        units = data.get("units", {}) if isinstance(data, dict) else {}
    except (OSError, ValueError):
        return {}
    return {k: v for k, v in units.items()
            if k in BY_NAME and isinstance(v, str) and v in BY_NAME[k].units}


def save_units(units: dict[str, str]) -> str:
    """Write the units (non-canonical ones only); returns "" or why it could not."""
    target = path()
    chosen = {k: v for k, v in sorted(units.items()) if v != BY_NAME[k].unit}
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        temp = target.with_suffix(".tmp")
        temp.write_text(json.dumps({"units": chosen}, indent=1) + "\n", encoding="utf-8")
        os.replace(temp, target)
    except OSError as e:
        return f"units not remembered for the next sitting: {e}"
    return ""
