"""The terminal-app tests: small apps from ``tui.app.make_app``, driven by the keyboard."""

import pytest


@pytest.fixture(autouse=True)
def _colour(monkeypatch):
    """Tests start with colour on, whatever the shell that runs them says."""
    monkeypatch.delenv("NO_COLOR", raising=False)
