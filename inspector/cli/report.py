"""The ``report`` sub-command: the printable review report of a corpus run.

    headcount report RUN_DIR --out review.pdf|review.html [--sentences FILE] [--paper a4|letter]

RUN_DIR is a folder written by ``headcount corpus`` (or by the corpus page). The
explanation pages need the model: the run folder records its path
(``summary.json``: ``model_path``); ``--model`` names another copy.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from inspector.errors import HeadcountError
from inspector.figures.report import DEFAULT_EXPLAINED


def cmd_report(args: argparse.Namespace) -> int:
    from inspector.figures.report.build import read_sentences, write_review
    from inspector.figures.report.run_folder import read_run

    out = Path(args.out)
    if out.suffix.lower() not in (".pdf", ".html"):
        raise HeadcountError(f"{out}: the report must end in .pdf or .html")
    if args.explain < 0:
        raise HeadcountError("--explain must be 0 or more")
    run = read_run(args.run_dir)
    sentences = read_sentences(args.sentences) if args.sentences else []
    lm = None
    if args.explain > 0 or sentences:
        model = args.model or run.model_path
        if not model:
            raise HeadcountError(
                f"{args.run_dir}: the run does not record its model; pass --model DIR (or --explain 0)"
            )
        if not Path(model).is_dir():
            raise HeadcountError(
                f"the run's model folder {model} is not there; pass --model DIR (or --explain 0)"
            )
        from inspector.checkpoint.loader import load_checkpoint

        lm = load_checkpoint(model, allow_pickle=args.allow_pickle)

    def progress(done: int, total: int, what: str) -> None:
        if not args.quiet:
            print(f"{what}\u2026", file=sys.stderr)

    written = write_review(
        args.run_dir,
        out,
        lm=lm,
        sentences=sentences,
        paper=args.paper,
        explain=args.explain if lm is not None else 0,
        on_progress=progress,
    )
    print(f"review report written to {written}")
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    """Add ``report RUN_DIR --out FILE`` to the command line."""
    help_text = "the printable review report of a corpus run folder (PDF, or one self-contained HTML file)"
    p = sub.add_parser("report", help=help_text, description=help_text)
    p.add_argument("run_dir", metavar="RUN_DIR", help="a folder written by 'headcount corpus'")
    p.add_argument("--out", required=True, metavar="FILE", help="review.pdf or review.html")
    p.add_argument(
        "--sentences",
        metavar="FILE",
        help="more sentences to explain: one per line, optionally a tab and the expected label "
        "(or a .csv/.jsonl with text and label)",
    )
    p.add_argument("--paper", choices=("a4", "letter"), default="a4", help="paper size (default a4)")
    p.add_argument(
        "--explain",
        type=int,
        default=DEFAULT_EXPLAINED,
        metavar="N",
        help=f"misfires explained on pages of their own, the most confident of each confusable pair first "
        f"(default {DEFAULT_EXPLAINED}; 0: none, and the model is not needed)",
    )
    p.add_argument("--model", metavar="MODEL_DIR", help="the run's checkpoint, if it moved since the run")
    p.add_argument("--allow-pickle", action="store_true", help="as for the other commands")
    p.add_argument("--quiet", action="store_true", help="no progress lines on stderr")
    p.set_defaults(func=cmd_report)
