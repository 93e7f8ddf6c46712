"""The ``headcount`` command: the window by default, headless sub-commands otherwise.

Qt is imported only when the window is asked for, so headless commands work on
machines without a display or Qt's system libraries.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Sequence

WINDOW_COMMANDS = ("open",)
HEADLESS_PLATFORMS = ("offscreen", "minimal", "vnc", "eglfs", "linuxfb")
"""Qt platform plugins that need no display server."""


def display_problem(environ: dict[str, str] | None = None, platform: str | None = None) -> str | None:
    """Why the window cannot open here (one line), or None: on Linux it needs a display server."""
    env = os.environ if environ is None else environ
    platform = sys.platform if platform is None else platform
    if not platform.startswith("linux"):
        return None
    qpa = env.get("QT_QPA_PLATFORM", "").split(":", 1)[0].strip()
    if qpa in HEADLESS_PLATFORMS:
        return None
    wants_wayland = qpa.startswith("wayland")
    if env.get("WAYLAND_DISPLAY") and (wants_wayland or not qpa):
        return None
    if env.get("DISPLAY") and not wants_wayland:
        return None
    return (
        "no display to open the window on (DISPLAY and WAYLAND_DISPLAY are not set); use the headless "
        "commands (headcount analyze, explain, corpus) or set QT_QPA_PLATFORM=offscreen"
    )


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``headcount`` console script."""
    args = list(sys.argv[1:] if argv is None else argv)
    if not args or args[0] in WINDOW_COMMANDS:
        wants_help = any(a in ("-h", "--help") for a in args)
        picture = any(a == "--screenshot" or a.startswith("--screenshot=") for a in args)  # renders offscreen
        problem = None if wants_help or picture else display_problem()
        if problem:
            print(f"headcount open: error: {problem}", file=sys.stderr)
            return 2
        try:
            from ui.app import run_window
        except ImportError as exc:
            print(
                f"headcount open: error: the window's Qt libraries cannot be loaded ({exc})", file=sys.stderr
            )
            return 2
        return run_window(args[1:] if args else [])
    from inspector.cli.main import main as cli_main

    return cli_main(args)


if __name__ == "__main__":
    raise SystemExit(main())
