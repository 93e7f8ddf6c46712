"""What every command shares: the exit status for user errors, the model argument, opening the model, masks,
the options of a labelled set, the progress bar on stderr and JSON on stdout."""

from __future__ import annotations

import argparse
import sys
from typing import NoReturn

EXIT_USER_ERROR = 2


class OneLineParser(argparse.ArgumentParser):
    """An argument parser whose usage errors are one line on stderr and exit status 2 (``--help`` still helps)."""

    def error(self, message: str) -> NoReturn:
        print(f"{self.prog}: error: {message} (see --help)", file=sys.stderr)
        raise SystemExit(EXIT_USER_ERROR)


def _whole_number(text: str, low: int, what: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected {what}, got {text!r}") from None
    if value < low:
        raise argparse.ArgumentTypeError(f"expected {what}, got {value}")
    return value


def positive_int(text: str) -> int:
    """argparse type: a whole number of at least 1."""
    return _whole_number(text, 1, "a whole number of at least 1")


def non_negative_int(text: str) -> int:
    """argparse type: a whole number of at least 0."""
    return _whole_number(text, 0, "a whole number of at least 0")


def load_model(args: argparse.Namespace):
    """Open the checkpoint named by a command's ``MODEL_DIR`` argument."""
    from inspector.checkpoint.loader import load_checkpoint

    return load_checkpoint(args.model, allow_pickle=args.allow_pickle, checkpoint=args.checkpoint)


def add_model_command(sub: argparse._SubParsersAction, name: str, help_text: str) -> argparse.ArgumentParser:
    """Add a sub-command whose first argument is a checkpoint folder."""
    from inspector.threads import help_text as threads_help

    p = sub.add_parser(name, help=help_text, description=help_text, epilog=threads_help())
    p.add_argument(
        "model",
        metavar="MODEL_DIR",
        help="checkpoint folder (config.json + safetensors), a training run's folder of checkpoint-N "
        "folders, or a repo id in the local Hugging Face cache",
    )
    p.add_argument(
        "--checkpoint",
        type=non_negative_int,
        metavar="N",
        help="in a training-run folder, open checkpoint-N (default: the latest)",
    )
    p.add_argument(
        "--allow-pickle",
        action="store_true",
        help="read *.bin weights with torch's weights-only loader when no safetensors exist",
    )
    add_threads_option(p)
    return p


def add_mask_option(p: argparse.ArgumentParser) -> None:
    """Add ``--mask FILE``: run the command with the heads of a mask file switched off."""
    p.add_argument(
        "--mask",
        metavar="FILE",
        help='switch off the heads of a mask file ({"layer": [head, ...]}, counted from 0, as prune_mask.json)',
    )


def load_mask(args: argparse.Namespace, lm):
    """The mask named by ``--mask``, checked against the open model; None without ``--mask``."""
    if not getattr(args, "mask", None):
        return None
    from inspector.checkpoint.masks import read_mask

    return read_mask(args.mask, lm)


def mask_record(mask) -> dict[str, list[int]] | None:
    """What a command's JSON output records under ``mask``: the mask file's document, or None."""
    return None if mask is None else mask.to_json()


def add_threads_option(p: argparse.ArgumentParser) -> None:
    """``--threads N``: the one thread count for torch and numpy's BLAS (see :mod:`inspector.threads`)."""
    from inspector.threads import ENV_VAR

    p.add_argument(
        "--threads",
        type=int,
        metavar="N",
        help=f"CPU threads for torch and numpy's BLAS (default: {ENV_VAR} if set, else the cores "
        "this process may use)",
    )


DATA_FORMATS = ("auto", "csv", "jsonl")


def add_data_options(p: argparse.ArgumentParser, batch_size: int) -> None:
    """The options that say how to read a labelled set and how to batch it (corpus and compare)."""
    from inspector.corpus.dataset import BAD_ROW_POLICIES

    p.add_argument("--text-field", default="text", help="column/key holding the utterance (default: text)")
    p.add_argument("--label-field", default="label", help="column/key holding the label (default: label)")
    p.add_argument(
        "--format", choices=DATA_FORMATS, default="auto", help="data format (default: from the suffix)"
    )
    p.add_argument(
        "--on-bad-row",
        choices=BAD_ROW_POLICIES,
        default="skip",
        help="skip bad rows and list them, or fail (default: skip)",
    )
    p.add_argument(
        "--batch-size",
        type=positive_int,
        default=batch_size,
        help=f"utterances per batch (default: {batch_size})",
    )


def add_report_options(p: argparse.ArgumentParser, json_help: str) -> None:
    """``--no-figures``, ``--json`` and ``--quiet``: the outputs of a command that writes a report folder."""
    p.add_argument("--no-figures", action="store_true", help="write no PNG/SVG figures")
    p.add_argument("--json", action="store_true", help=json_help)
    p.add_argument("--quiet", action="store_true", help="no progress bar")


class ProgressBar:
    """One tqdm bar on stderr per phase of a run, counting that phase's own unit (nothing when disabled).

    Pass :meth:`step` as a run's ``on_step``: each phase (scan, importance, pruning,
    comparison) gets its own bar in utterances or pruning steps, with tqdm's estimate
    of the time left, instead of one batch count running across phases. Use it as a
    context manager (it closes the last bar).
    """

    def __init__(self, enabled: bool) -> None:
        self.enabled = enabled
        self.bar = None
        self.name = ""

    def __enter__(self) -> ProgressBar:
        return self

    def __exit__(self, *_exc: object) -> None:
        self.close()

    def step(self, p) -> None:
        """Show ``p`` (an :class:`inspector.corpus.run.PhaseProgress`) on its phase's bar."""
        if not self.enabled:
            return
        if p.phase != self.name or self.bar is None:
            from tqdm import tqdm

            self.close()
            self.name = p.phase
            digits = (
                0 if float(p.total).is_integer() and p.unit != "step" else 1
            )  # pruning steps run in fractions
            shape = f"{{desc}}: {{percentage:3.0f}}%|{{bar}}| {{n:.{digits}f}}/{{total:.0f}} {p.unit}s"
            self.bar = tqdm(
                total=p.total,
                file=sys.stderr,
                desc=p.phase,
                leave=True,
                bar_format=shape + " [{elapsed}<{remaining}]",
            )
        self.bar.total = p.total
        # Set the count rather than adding increments: summed fractional steps drift past the total.
        self.bar.n = min(p.done, p.total)
        self.bar.update(0)  # redraws at most every tqdm mininterval

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()
            self.bar = None


def print_json(doc: object, **options: object) -> None:
    """``doc`` as one line of standard JSON on stdout: NaN and infinities become null, never bare ``NaN``
    (:func:`inspector.figures.files.json_text`)."""
    from inspector.figures.files import json_text

    sys.stdout.write(json_text(doc, **options) + "\n")
