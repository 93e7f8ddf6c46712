"""The headless job of ``make start`` on a machine with no display.

On the bundled sample model: analyse one sentence (``headcount analyze``), then
run the whole evaluation split (``headcount corpus``) into ``runs/sample_corpus``.
Until the sample model exists it falls back to analysing one sentence with the
open MiniLM checkpoint, if installed.
"""

from __future__ import annotations

import sys

from inspector.cli.main import main as cli_main
from inspector.paths import PROJECT_ROOT, SAMPLE_EVAL, SAMPLE_MODEL, minilm_dir, sample_model_available

DEMO_TEXT = "don't cancel it, just move my booking to the Tuesday sailing"
CORPUS_OUT = PROJECT_ROOT / "runs" / "sample_corpus"


def _step(argv: list[str]) -> int:
    print(f"\n== headcount {' '.join(repr(a) if ' ' in a else a for a in argv)}", flush=True)
    return cli_main(argv)


def main() -> int:
    if sample_model_available():
        model = str(SAMPLE_MODEL)
        status = _step(["analyze", model, "--text", DEMO_TEXT])
        if status == 0 and SAMPLE_EVAL.is_file():
            status = _step(["corpus", model, str(SAMPLE_EVAL), "--out", str(CORPUS_OUT)])
            if status == 0:
                print(
                    f"\nResults written to {CORPUS_OUT} (summary.json, heads.csv, similar_pairs.csv, "
                    "pruning.csv, prune_mask.json and figures)."
                )
        return status
    fallback = minilm_dir()
    if fallback is None:
        print("headcount: error: no sample model found", file=sys.stderr)
        return 2
    print("The sample model is not trained yet; analysing one sentence with all-MiniLM-L6-v2 instead.")
    return _step(["analyze", str(fallback), "--text", DEMO_TEXT])


if __name__ == "__main__":
    raise SystemExit(main())
