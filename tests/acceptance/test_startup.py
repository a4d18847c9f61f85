"""`vetting --help` must start quickly: no terminal-interface or numeric/database stack loaded
just to print usage (command modules import heavy modules inside their functions)."""

from __future__ import annotations

import json
import subprocess
import sys

from tests.acceptance.conftest import isolated_env

HEAVY = ["textual", "scipy", "sqlalchemy", "alembic", "sqlmodel", "numpy", "matplotlib", "docx"]

PROBE = f"""
import json, runpy, sys
sys.argv = ["vetting", "--help"]
try:
    runpy.run_module("vetting", run_name="__main__")
except SystemExit as exc:
    code = exc.code
else:
    code = 0
sys.stdout.flush()
sys.stderr.write(json.dumps({{"code": code, "loaded": [m for m in {HEAVY!r} if m in sys.modules]}}))
"""


def test_help_does_not_import_heavy_modules(tmp_path):
    proc = subprocess.run(
        [sys.executable, "-c", PROBE], capture_output=True, text=True, env=isolated_env(tmp_path / "h"), timeout=120
    )
    report = json.loads(proc.stderr.strip().splitlines()[-1])
    assert report["code"] == 0
    assert "usage: vetting" in proc.stdout
    # textual must never be loaded for --help; the others are avoidable too (lazy imports).
    assert "textual" not in report["loaded"]
    assert report["loaded"] == [], f"--help loaded {report['loaded']}"
    # Every command named as binding in the issues is listed in the help.
    for command in ["init", "import", "export", "list", "show", "demo", "calc", "rank", "plan", "gaps",
                    "alternatives", "policy", "memo", "verify", "log", "backup", "restore"]:
        assert command in proc.stdout, command
