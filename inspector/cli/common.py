"""What every command shares: the exit status for user errors, the model argument, opening the model."""

from __future__ import annotations

import argparse

EXIT_USER_ERROR = 2


def load_model(args: argparse.Namespace):
    """Open the checkpoint named by a command's ``MODEL_DIR`` argument."""
    from inspector.checkpoint.loader import load_checkpoint

    return load_checkpoint(args.model, allow_pickle=args.allow_pickle)


def add_model_command(sub: argparse._SubParsersAction, name: str, help_text: str) -> argparse.ArgumentParser:
    """Add a sub-command whose first argument is a checkpoint folder."""
    p = sub.add_parser(name, help=help_text, description=help_text)
    p.add_argument("model", metavar="MODEL_DIR", help="checkpoint folder (config.json + safetensors)")
    p.add_argument(
        "--allow-pickle",
        action="store_true",
        help="read *.bin weights with torch's weights-only loader when no safetensors exist",
    )
    return p
