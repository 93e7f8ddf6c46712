"""Headless command line: the same core as the window, for scripts and CI.

Every user-facing failure is one line on stderr and a non-zero exit status. Each
command lives in its own module with a ``register(sub)`` function; :data:`COMMANDS`
is the one table that lists them.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Sequence

from inspector import threads
from inspector.cli import analyze, compare, corpus, explain, prune, report, window
from inspector.cli.common import EXIT_USER_ERROR, OneLineParser
from inspector.errors import HeadcountError

COMMANDS: tuple[Callable[[argparse._SubParsersAction], None], ...] = (
    window.register,
    analyze.register,
    explain.register,
    corpus.register,
    prune.register,
    compare.register,
    report.register,
)
"""Every sub-command's registration function, in the order ``--help`` lists them."""


def build_parser() -> argparse.ArgumentParser:
    parser = OneLineParser(
        prog="headcount",
        description="Look inside transformer-encoder classifiers, head by head (CPU, offline). "
        "With no command (or 'open MODEL_DIR'), opens the window.",
        epilog=threads.help_text(),
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for register in COMMANDS:
        register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the CLI; returns the process exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_USER_ERROR
    try:
        threads.configure(getattr(args, "threads", None))
    except ValueError as exc:
        print(f"headcount: error: {exc}", file=sys.stderr)
        return EXIT_USER_ERROR
    try:
        return int(args.func(args))
    except HeadcountError as exc:
        print(f"headcount: error: {exc}", file=sys.stderr)
        return EXIT_USER_ERROR
    except KeyboardInterrupt:
        print("headcount: interrupted", file=sys.stderr)
        return 130
