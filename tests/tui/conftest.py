"""The terminal-app tests: small apps from ``tui.app.make_app``, driven by the keyboard."""

import pytest


@pytest.fixture(autouse=True)
def _colour(monkeypatch):
    """Tests start with colour on, whatever the shell that runs them says."""
    monkeypatch.delenv("NO_COLOR", raising=False)


@pytest.fixture(autouse=True)
def config_home(monkeypatch, tmp_path_factory):
    """Each test has its own settings directory: the user's own file is never read or written."""
    home = tmp_path_factory.mktemp("config")
    monkeypatch.setenv("XDG_CONFIG_HOME", str(home))
    return home
