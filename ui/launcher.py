"""The ``headcount`` command: the window by default, headless sub-commands otherwise.

Qt is imported only when the window is asked for, so headless commands work on
machines without a display or Qt's system libraries.
"""

from __future__ import annotations

import sys
from collections.abc import Sequence

WINDOW_COMMANDS = ("open",)


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``headcount`` console script."""
    args = list(sys.argv[1:] if argv is None else argv)
    if not args or args[0] in WINDOW_COMMANDS:
        from ui.app import run_window

        return run_window(args[1:] if args else [])
    from inspector.cli.main import main as cli_main

    return cli_main(args)


if __name__ == "__main__":
    raise SystemExit(main())
