"""The ``open`` command's options: the window, on a checkpoint, optionally rendered to a picture.

The window itself lives in ``ui`` (the core never imports Qt); the ``headcount``
launcher sends ``open`` there. The options are declared here, once, so that
``headcount --help`` lists ``open`` with the other commands and the window's own
parser (``ui.app.build_parser``) reads exactly the same ones.
"""

from __future__ import annotations

import argparse
import re

from inspector.cli.common import add_threads_option, non_negative_int
from inspector.errors import HeadcountError
from inspector.threads import help_text as threads_help

PAGES = ("sentence", "explain", "corpus")
"""The pages ``--page`` can show in a picture."""
SIZE_PATTERN = re.compile(r"^\s*(\d+)\s*[xX\u00d7]\s*(\d+)\s*$")
HELP = "open the window on a checkpoint (default: the bundled sample model); --screenshot renders it to a PNG"


def window_size(text: str) -> tuple[int, int]:
    """Read ``WxH`` (``1366x768``) into ``(1366, 768)``; argparse type of ``--size``."""
    match = SIZE_PATTERN.match(text)
    if not match:
        raise argparse.ArgumentTypeError(f"expected WIDTHxHEIGHT in pixels, like 1366x768, not {text!r}")
    width, height = int(match.group(1)), int(match.group(2))
    if not (200 <= width <= 10000 and 200 <= height <= 10000):
        raise argparse.ArgumentTypeError(f"{width}x{height}: each side must lie between 200 and 10000 pixels")
    return width, height


def add_window_arguments(p: argparse.ArgumentParser) -> argparse.ArgumentParser:
    """The options of ``headcount open`` (shared by ``--help`` and the window's parser)."""
    p.add_argument(
        "model",
        nargs="?",
        metavar="MODEL_DIR",
        help="checkpoint folder, training-run folder or cached repo id (default: the bundled sample model)",
    )
    p.add_argument(
        "--checkpoint", type=non_negative_int, metavar="N", help="in a training-run folder, open checkpoint-N"
    )
    p.add_argument(
        "--allow-pickle", action="store_true", help="read *.bin weights with the weights-only loader"
    )
    p.add_argument("--text", help="sentence to analyse first")
    p.add_argument("--expected", help="expected label of that sentence")
    p.add_argument(
        "--screenshot",
        metavar="PNG",
        help="render the window offscreen once the page is ready, save it to PNG and exit "
        "(status 2 if the model or the page failed)",
    )
    p.add_argument(
        "--size",
        type=window_size,
        metavar="WxH",
        help="window size in pixels, e.g. 1366x768 (default: the window's own)",
    )
    p.add_argument(
        "--page",
        choices=PAGES,
        default="sentence",
        help="page to show: the sentence views, the explanation of --text, or a corpus run (default: sentence)",
    )
    p.add_argument(
        "--data",
        metavar="FILE",
        help="with --page corpus: the labelled evaluation set to run (default: the sample set for the sample model)",
    )
    add_threads_option(p)
    p.epilog = threads_help()
    return p


def register(sub: argparse._SubParsersAction) -> None:
    """List ``open`` among the commands (the launcher starts the window before this parser is reached)."""
    p = sub.add_parser("open", help=HELP, description=HELP.capitalize() + ".")
    add_window_arguments(p)
    p.set_defaults(func=_headless)


def _headless(_args: argparse.Namespace) -> int:
    raise HeadcountError("the window starts from the 'headcount' command itself: run 'headcount open ...'")
