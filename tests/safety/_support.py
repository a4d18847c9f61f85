"""Helpers for the process-level safety tests: run the real command, start helper processes."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]


def run_vetting(*args: str, timeout: float = 300, **kw) -> subprocess.CompletedProcess:
    """`python -m vetting ARGS...` in a real process; text output captured."""
    return subprocess.run(
        [sys.executable, "-m", "vetting", *args],
        capture_output=True,
        text=True,
        timeout=timeout,
        cwd=kw.pop("cwd", REPO),
        env=kw.pop("env", os.environ.copy()),
        stdin=subprocess.DEVNULL,
        **kw,
    )


def worker(name: str, *args: str, **kw) -> subprocess.Popen:
    """Start one of the helper scripts in this folder (`_NAME.py`) as a separate process."""
    return subprocess.Popen(
        [sys.executable, str(HERE / f"_{name}.py"), *args],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        stdin=subprocess.DEVNULL,
        text=True,
        cwd=REPO,
        env=kw.pop("env", os.environ.copy()),
        **kw,
    )


def assert_clean_failure(proc: subprocess.CompletedProcess, *, statuses=(1, 2)) -> None:
    """A refusal a person can read: exit status 1 or 2, a message on stderr, no traceback."""
    assert proc.returncode in statuses, (proc.returncode, proc.stdout, proc.stderr)
    assert "Traceback" not in proc.stderr and "Traceback" not in proc.stdout, proc.stderr
    assert proc.stderr.strip(), "the failure must be explained on stderr"
