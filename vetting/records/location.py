"""Where the database lives: the default file, the demo file, and the URL chosen by the user."""

from __future__ import annotations

import os
from pathlib import Path

import platformdirs

APP_NAME = "vetting"
ENV_VAR = "VETTING_DB"


def data_dir() -> Path:
    """The user's data directory for vetting (platformdirs), created on demand."""
    path = Path(platformdirs.user_data_dir(APP_NAME, appauthor=False))
    path.mkdir(parents=True, exist_ok=True)
    return path


def default_url() -> str:
    """The built-in SQLite database in the user's data directory."""
    return f"sqlite:///{data_dir() / 'vetting.db'}"


def demo_url() -> str:
    """The demo's own SQLite database, kept apart from the user's main one."""
    return f"sqlite:///{data_dir() / 'demo.db'}"


def resolve_url(explicit: str | None = None) -> str:
    """`--db URL` wins, then the VETTING_DB environment variable, then the default file."""
    if explicit:
        return explicit
    env = os.environ.get(ENV_VAR)
    if env:
        return env
    return default_url()
