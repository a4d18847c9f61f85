"""Shared fixtures. Every test runs with its data and configuration directories in tmp_path,
so no test can touch the user's real database."""

from __future__ import annotations

import pytest


@pytest.fixture(autouse=True)
def _isolated_dirs(tmp_path, monkeypatch):
    home = tmp_path / "home"
    home.mkdir()
    monkeypatch.setenv("HOME", str(home))
    monkeypatch.setenv("XDG_DATA_HOME", str(home / ".local" / "share"))
    monkeypatch.setenv("XDG_CONFIG_HOME", str(home / ".config"))
    monkeypatch.setenv("XDG_CACHE_HOME", str(home / ".cache"))
    monkeypatch.delenv("VETTING_DB", raising=False)
    monkeypatch.setenv("VETTING_USER", "test-user")
    yield
