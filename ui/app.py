"""Start the window: ``headcount`` (sample model) or ``headcount open MODEL_DIR``.

With ``QT_QPA_PLATFORM=offscreen`` the window runs without a display (tests,
screenshots); ``--screenshot FILE`` renders it offscreen at ``--size`` once the
chosen ``--page`` is ready, saves the picture and exits (see :mod:`ui.screenshot`).
A start-up window shows at once while torch and transformers load (:mod:`ui.startup`);
``--threads`` sets the thread count (:mod:`inspector.threads`).
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
from collections.abc import Sequence
from pathlib import Path

from PySide6.QtCore import QSettings
from PySide6.QtWidgets import QApplication

from inspector import threads
from inspector.cli.common import OneLineParser
from inspector.cli.window import add_window_arguments
from inspector.errors import HeadcountError
from inspector.figures.files import check_output_file
from inspector.paths import default_model
from ui.binding_check import binding_warning
from ui.startup import show_while_loading


def build_parser() -> argparse.ArgumentParser:
    parser = OneLineParser(prog="headcount open", description="Open a checkpoint folder in the window.")
    return add_window_arguments(parser)


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
    """Create the window (at ``--size`` if given) and start opening the requested (or default) model."""
    from ui.main_window import MainWindow

    window = MainWindow(settings)
    if getattr(args, "size", None):
        window.resize(*args.size)
    if args.text:
        window.open_sentence(args.text, args.expected)
    model = args.model if args.model else default_model()
    if model is None:
        window.show_error(
            "No sample model found; open a checkpoint folder with File \u203a Open model folder (Ctrl+O)."
        )
    else:
        window.open_model(model, allow_pickle=args.allow_pickle, checkpoint=args.checkpoint)
    return window


def run_window(argv: Sequence[str]) -> int:
    """Entry point used by ``ui.launcher``: returns the process exit status."""
    args = build_parser().parse_args(list(argv))
    if args.screenshot:
        try:
            check_output_file(args.screenshot)
        except HeadcountError as exc:
            print(f"headcount open: error: --screenshot: {exc}", file=sys.stderr)
            return 2
    if args.screenshot and QApplication.instance() is None:
        os.environ["QT_QPA_PLATFORM"] = "offscreen"  # a picture needs no display
    app = application()
    warning = binding_warning()
    if warning:
        print(warning, file=sys.stderr)
    try:
        threads.configure(args.threads)
    except ValueError as exc:
        print(f"headcount: error: {exc}", file=sys.stderr)
        return 2
    scratch = tempfile.TemporaryDirectory() if args.screenshot else None
    # A picture run leaves the user's settings (recent models, folders) alone.
    settings = (
        QSettings(str(Path(scratch.name) / "settings.ini"), QSettings.Format.IniFormat) if scratch else None
    )
    model = Path(args.model) if args.model else default_model()
    window = show_while_loading(app, model, lambda: build_window(args, settings))
    if args.size and (window.width(), window.height()) != tuple(args.size):
        print(
            f"headcount: the window cannot be {args.size[0]}x{args.size[1]}; "
            f"it is {window.width()}x{window.height()} (its smallest usable size)",
            file=sys.stderr,
        )
    status = {"code": 0}
    if args.screenshot:
        from ui.screenshot import Shooter

        def finished(ok: bool) -> None:
            status["code"] = 0 if ok else 2
            if not Path(args.screenshot).is_file():
                print(
                    f"headcount open: error: --screenshot: could not save {args.screenshot}", file=sys.stderr
                )
                status["code"] = 2
            window.close()
            app.quit()

        Shooter(window, Path(args.screenshot), finished, page=args.page, data=args.data)
    code = app.exec()
    if scratch is not None:
        scratch.cleanup()
    return status["code"] or code
