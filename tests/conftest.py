"""Shared fixtures for the whole suite."""

from __future__ import annotations

import pytest


@pytest.fixture(autouse=True)
def _no_site_configuration(tmp_path_factory, monkeypatch):
    """No test reads the configuration of the machine it runs on: the variable is unset
    and the user's config folder is an empty one (tests that need a file give it)."""
    monkeypatch.delenv("ACIDBASE_CONFIG", raising=False)
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path_factory.mktemp("xdg-config")))
