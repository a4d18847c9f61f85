"""Helpers for the acceptance suite: run the real `python -m vetting` in a subprocess, with
isolated HOME/XDG directories and a temporary SQLite database, the way an outside checker would."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "catalogues" / "demo.yaml"


@dataclass
class Result:
    code: int
    out: str
    err: str

    def json(self):
        return json.loads(self.out)


def isolated_env(home: Path, **extra: str) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if k != "VETTING_DB"}
    home.mkdir(parents=True, exist_ok=True)
    env.update(
        HOME=str(home),
        XDG_DATA_HOME=str(home / ".local" / "share"),
        XDG_CONFIG_HOME=str(home / ".config"),
        XDG_CACHE_HOME=str(home / ".cache"),
        VETTING_USER="acceptance-checker",
        PYTHONIOENCODING="utf-8",
    )
    env.update(extra)
    return env


def run_cli(args: list[str], home: Path, db: str | None = None, **env_extra: str) -> Result:
    """`python -m vetting [--db URL] ARGS...` in a subprocess; returns exit status and output."""
    argv = [sys.executable, "-m", "vetting"]
    if db is not None:
        argv += ["--db", db]
    argv += [str(a) for a in args]
    proc = subprocess.run(
        argv, capture_output=True, text=True, env=isolated_env(home, **env_extra), timeout=300, cwd=str(home)
    )
    return Result(proc.returncode, proc.stdout, proc.stderr)


def run_inproc(args: list[str], capsys, db: str | None = None) -> Result:
    """The same command through vetting.cli.main.run in this process (cheaper than a subprocess)."""
    from vetting.cli.main import run

    argv = ([] if db is None else ["--db", db]) + [str(a) for a in args]
    capsys.readouterr()
    try:
        code = run(argv)
    except SystemExit as exc:  # argparse usage errors
        code = exc.code if isinstance(exc.code, int) else 2
    cap = capsys.readouterr()
    return Result(int(code), cap.out, cap.err)


def sqlite_url(path: Path) -> str:
    return f"sqlite:///{path}"


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    """A database with the demo catalogue imported once per module (through the real CLI).
    Tests using it must not change it."""
    base = tmp_path_factory.mktemp("demo_db")
    url = sqlite_url(base / "demo.sqlite")
    res = run_cli(["import", DEMO], base / "home", db=url)
    assert res.code == 0, res.err
    return url
