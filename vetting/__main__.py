"""Entry point: `vetting` and `python -m vetting`.

This is the one place that knows both faces: it runs the CLI, and when the CLI asks for
the interface (no command, or `vetting demo`), it opens the Textual app. The CLI and the
interface never import each other.
"""

from __future__ import annotations

import sys


def main(argv: list[str] | None = None) -> int:
    from vetting.cli.main import OpenInterface, run

    result = run(argv)
    if isinstance(result, OpenInterface):
        from vetting.tui.app import run_app

        return run_app(result.url)
    return int(result)


if __name__ == "__main__":
    sys.exit(main())
