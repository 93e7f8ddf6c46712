"""Start the window: ``headcount`` (sample model) or ``headcount open MODEL_DIR``.

With ``QT_QPA_PLATFORM=offscreen`` the window runs without a display (tests,
screenshots); ``--screenshot FILE`` saves a picture of it once the first
sentence is shown and exits.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path

from PySide6.QtCore import QSettings
from PySide6.QtWidgets import QApplication

from inspector.paths import default_model
from ui.binding_check import binding_warning


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="headcount open", description="Open a checkpoint folder in the window."
    )
    parser.add_argument("model", nargs="?", help="checkpoint folder (default: the bundled sample model)")
    parser.add_argument(
        "--allow-pickle", action="store_true", help="read *.bin weights with the weights-only loader"
    )
    parser.add_argument("--text", help="sentence to analyse first")
    parser.add_argument("--expected", help="expected label of that sentence")
    parser.add_argument(
        "--screenshot", metavar="PNG", help="save a picture of the window once ready, then exit"
    )
    return parser


def application() -> QApplication:
    """The running QApplication, created with Headcount's names if there is none."""
    app = QApplication.instance()
    if app is None:
        app = QApplication(sys.argv[:1])
        app.setOrganizationName("Headcount")
        app.setApplicationName("Headcount")
        app.setApplicationDisplayName("Headcount")
    return app


def build_window(args: argparse.Namespace, settings: QSettings | None = None):
    """Create the window and start opening the requested (or default) model."""
    from ui.main_window import MainWindow

    window = MainWindow(settings)
    if args.text:
        window.open_sentence(args.text, args.expected)
    model = Path(args.model) if args.model else default_model()
    if model is None:
        window.show_error(
            "No sample model found; open a checkpoint folder with File \u203a Open model folder (Ctrl+O)."
        )
    else:
        window.open_model(model, allow_pickle=args.allow_pickle)
    return window


def run_window(argv: Sequence[str]) -> int:
    """Entry point used by ``ui.launcher``: returns the process exit status."""
    args = build_parser().parse_args(list(argv))
    app = application()
    warning = binding_warning()
    if warning:
        print(warning, file=sys.stderr)
    window = build_window(args)
    window.show()
    status = {"code": 0}
    if args.screenshot:
        from ui.main_window import grab_when_ready

        def finished(ok: bool) -> None:
            status["code"] = 0 if ok else 2
            window.close()
            app.quit()

        grab_when_ready(window, Path(args.screenshot), finished)
    code = app.exec()
    return status["code"] or code
