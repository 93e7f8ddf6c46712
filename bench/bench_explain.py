"""Time to explain one misfire: the whole explanation of one sentence and its parts.

Run: .venv/bin/python -m bench.bench_explain [--repeats N] [--steps N] [--threads N] [--model DIR]

Model: the bundled sample model when it exists, else a seeded random classifier
of the same shape (4 layers x 6 heads, hidden 96, MiniLM tokenizer). Target from
the tracker issue: the whole explanation (predicted + expected label: analysis,
gradients w.r.t. attention, Integrated Gradients at 64 steps batched, occlusion,
faithfulness) under 1 s on 2 CPU cores. Printed: the median of warm repeats of
each part and of the total, the total as a fraction of the 1 s budget, the
total as a multiple of one plain forward pass measured in the same run, the
process CPU time (on a shared machine wall time inflates, CPU time much less),
and Integrated Gradients' completeness error.
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

import torch

from bench.common import median_seconds
from inspector.checkpoint.capture import encode
from inspector.checkpoint.loader import load_checkpoint
from inspector.explanation.explain import explain_sentence
from inspector.paths import SAMPLE_MODEL, minilm_dir, sample_model_available

SENTENCES = [
    ("I need to cancel my crossing to Gullholm tomorrow", "change_booking"),
    (
        "hi, I booked the 07:30 crossing from Port Averly but need to move it to Friday with my van",
        "vehicle_fares",
    ),
]
BUDGET_SECONDS = 1.0
PARTS = ("analysis", "attention_gradients", "integrated_gradients", "occlusion", "assembly")


def _stand_in(folder: Path) -> Path:
    """A seeded random classifier shaped like the sample model (used only when it is missing)."""
    import transformers

    tok = transformers.AutoTokenizer.from_pretrained(str(minilm_dir()), local_files_only=True)
    labels = [
        "book_crossing",
        "change_booking",
        "cancel_booking",
        "refund_status",
        "timetable",
        "vehicle_fares",
    ]
    config = transformers.BertConfig(
        vocab_size=len(tok),
        hidden_size=96,
        num_hidden_layers=4,
        num_attention_heads=6,
        intermediate_size=384,
        max_position_embeddings=64,
        initializer_range=0.2,
        id2label=dict(enumerate(labels)),
        label2id={v: k for k, v in enumerate(labels)},
    )
    torch.manual_seed(0)
    transformers.BertForSequenceClassification(config).save_pretrained(str(folder))
    tok.save_pretrained(str(folder))
    return folder


def _plain_forward(lm, inputs: dict):
    def run() -> None:
        with torch.no_grad():
            lm.model(**inputs)

    return run


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=15)
    parser.add_argument("--steps", type=int, default=64)
    parser.add_argument("--threads", type=int, default=2)
    parser.add_argument("--model", type=Path, help="another classifier folder to time instead")
    args = parser.parse_args()
    torch.set_num_threads(args.threads)
    with tempfile.TemporaryDirectory() as tmp:
        if args.model is not None:
            path, note = args.model, "given with --model"
        elif sample_model_available():
            path, note = SAMPLE_MODEL, "sample model"
        else:
            path, note = _stand_in(Path(tmp) / "stand_in"), "random stand-in (sample model not trained yet)"
        lm = load_checkpoint(path)
        print(
            f"model: {lm.name} ({note}), {lm.num_layers} layers x {lm.num_heads} heads, "
            f"{len(lm.labels)} labels; torch threads {torch.get_num_threads()}; IG steps {args.steps}"
        )
        for text, expected in SENTENCES:
            expected = expected if expected in lm.labels else lm.labels[-1]
            batch = encode(lm, [text])
            bare = median_seconds(_plain_forward(lm, batch.model_inputs()), repeats=50)
            runs, cpu = [], []
            for _ in range(2):  # warm-up
                explain_sentence(lm, text, expected=expected, steps=args.steps)
            for _ in range(args.repeats):
                t0 = time.process_time()
                runs.append(explain_sentence(lm, text, expected=expected, steps=args.steps))
                cpu.append(time.process_time() - t0)
            total = statistics.median(r.timings["total"] for r in runs)
            print(f"\nsentence ({len(batch.tokens[0])} tokens): {text}")
            print(f"  prediction {runs[0].prediction.label}, expected {expected}")
            for part in PARTS:
                print(f"  {part:<22} {1e3 * statistics.median(r.timings[part] for r in runs):8.1f} ms")
            print(f"  {'total':<22} {1e3 * total:8.1f} ms   = {total / BUDGET_SECONDS:.2f} of the 1 s budget")
            print(f"  {'CPU time (all threads)':<22} {1e3 * statistics.median(cpu):8.1f} ms")
            print(
                f"  plain forward pass     {1e3 * bare:8.2f} ms   -> explanation = {total / bare:.0f} x forward"
            )
            for ev in runs[0].labels:
                ig = ev.integrated_gradients
                print(
                    f"  IG completeness {ev.label:<16} error {ig.completeness_error:+.2e} "
                    f"(relative {ig.completeness_relative:.1e}, logit difference {ig.logit_difference:+.3f})"
                )


if __name__ == "__main__":
    main()
