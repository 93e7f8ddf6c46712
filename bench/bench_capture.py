"""Capture overhead: forward pass with hooks + metrics vs. the bare eager forward pass.

Run: .venv/bin/python -m bench.bench_capture   (or: .venv/bin/python bench/bench_capture.py)
Prints, for each model, the median time of the bare forward pass, of the captured
forward pass, and of capture + all per-head metrics, as ratios (target: capture
<= 1.10x the bare eager forward for one sentence).
"""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # also run as a script

import torch  # noqa: E402

from bench.common import interleaved_medians  # noqa: E402
from inspector.checkpoint.capture import AttentionRecorder, encode  # noqa: E402
from inspector.checkpoint.loader import load_checkpoint  # noqa: E402
from inspector.measures.metrics import head_metrics  # noqa: E402
from inspector.paths import SAMPLE_MODEL, minilm_dir, sample_model_available  # noqa: E402

SENTENCE = "hi, I booked the 07:30 crossing from Port Averly but need to move it to Friday with my van"


def bench_model(path, repeats: int = 40) -> dict[str, float]:
    lm = load_checkpoint(path)
    batch = encode(lm, [SENTENCE])
    inputs = batch.model_inputs()
    special = batch.special[0]

    def bare() -> None:
        with torch.no_grad():
            lm.model(**inputs)

    def captured() -> None:
        with torch.no_grad(), AttentionRecorder(lm) as rec:
            lm.model(**inputs)
            rec.attention()

    def captured_with_metrics() -> None:
        with torch.no_grad(), AttentionRecorder(lm) as rec:
            lm.model(**inputs)
            att = rec.attention()[0].numpy()
        head_metrics(att, special)

    t = interleaved_medians(
        {"bare": bare, "capture": captured, "capture+metrics": captured_with_metrics}, repeats=repeats
    )
    return {"tokens": len(batch.tokens[0]), **t}


def main() -> None:
    torch.set_num_threads(2)
    models = {
        "sample model": SAMPLE_MODEL if sample_model_available() else None,
        "all-MiniLM-L6-v2": minilm_dir(),
    }
    print(
        f"{'model':<18} {'tokens':>6} {'bare ms':>8} {'capture ms':>10} {'ratio':>6} {'+metrics ms':>11} {'ratio':>6}"
    )
    for name, path in models.items():
        if path is None:
            print(f"{name:<18} (not available)")
            continue
        r = bench_model(path)
        print(
            f"{name:<18} {r['tokens']:>6} {r['bare'] * 1e3:8.2f} {r['capture'] * 1e3:10.2f} "
            f"{r['capture'] / r['bare']:6.3f} {r['capture+metrics'] * 1e3:11.2f} "
            f"{r['capture+metrics'] / r['bare']:6.3f}"
        )


if __name__ == "__main__":
    main()
