"""The layers import one way only, and the engine layers import without Textual.

Layer rule (DEVELOPERS.md): psychometrics and records use nothing else of ours; appraisal uses
both; memo uses appraisal (and may read records); cli and tui use the rest, never each other.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "vetting"

ALLOWED = {
    "psychometrics": set(),
    "records": set(),
    "appraisal": {"psychometrics", "records"},
    "memo": {"appraisal", "psychometrics", "records"},
    "cli": {"appraisal", "psychometrics", "records", "memo"},
    "tui": {"appraisal", "psychometrics", "records", "memo"},
}


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            found.add(node.module)
    return found


@pytest.mark.parametrize("layer", sorted(ALLOWED))
def test_layer_imports_only_what_it_may(layer):
    offending = []
    for path in (PACKAGE / layer).rglob("*.py"):
        for name in _imports(path):
            parts = name.split(".")
            if parts[0] != "vetting" or len(parts) < 2:
                continue
            other = parts[1]
            if other in ALLOWED and other != layer and other not in ALLOWED[layer]:
                offending.append(f"{path.relative_to(PACKAGE)} imports {name}")
    assert not offending, "\n".join(offending)


@pytest.mark.parametrize("layer", ["psychometrics", "records", "appraisal", "memo"])
def test_engine_layer_imports_without_textual(layer):
    code = (
        "import importlib, pkgutil, sys\n"
        f"import vetting.{layer} as pkg\n"
        "for m in pkgutil.walk_packages(pkg.__path__, pkg.__name__ + '.'):\n"
        "    importlib.import_module(m.name)\n"
        "bad = sorted(n for n in sys.modules if n == 'textual' or n.startswith('textual.'))\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"vetting.{layer} pulled in Textual: {out.stdout}"
