"""Time to explain one misfire: the whole explanation of one sentence and its parts.

Run: .venv/bin/python -m bench.bench_explain [--minilm] [--repeats N] [--steps N|auto] [--threads N] [--model DIR]
 or: .venv/bin/python bench/bench_explain.py ...

Model: the bundled sample model when it exists, else a seeded random classifier
of the same shape (4 layers x 6 heads, hidden 96, MiniLM tokenizer); ``--minilm``
adds all-MiniLM-L6-v2's encoder (6 x 12 heads, hidden 384) under a seeded
classifier head. Targets from the tracker issues: the whole explanation
(predicted + expected label: analysis, gradients w.r.t. attention, Integrated
Gradients with adaptive steps (or ``--steps N``), occlusion, faithfulness) under
1 s on 2 CPU cores on the sample model, and under 0.5 s on MiniLM. Printed: the
median of warm repeats of each part and of the total, the total against the
budget, the total as a multiple of one plain forward pass measured in the same
run, the process CPU time (on a shared machine wall time inflates, CPU time much
less), the steps Integrated Gradients used and its completeness error.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # also run as a script

import torch  # noqa: E402

from bench.common import load_note, median_seconds  # noqa: E402
from inspector.checkpoint.capture import encode  # noqa: E402
from inspector.checkpoint.loader import load_checkpoint  # noqa: E402
from inspector.explanation.explain import explain_sentence  # noqa: E402
from inspector.paths import SAMPLE_MODEL, minilm_dir, sample_model_available  # noqa: E402

SENTENCES = [
    ("I need to cancel my crossing to Gullholm tomorrow", "change_booking"),
    (
        "hi, I booked the 07:30 crossing from Port Averly but need to move it to Friday with my van",
        "vehicle_fares",
    ),
]
BUDGET_SECONDS = 1.0
MINILM_BUDGET_SECONDS = 0.5
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


def bench_model(path: Path, note: str, steps: int | None, repeats: int, budget: float) -> None:
    lm = load_checkpoint(path)
    shown = "auto" if steps is None else steps
    print(
        f"\nmodel: {lm.name} ({note}), {lm.num_layers} layers x {lm.num_heads} heads, "
        f"{len(lm.labels)} labels; torch threads {torch.get_num_threads()}; IG steps {shown}"
    )
    for text, expected in SENTENCES:
        expected = expected if expected in lm.labels else lm.labels[-1]
        batch = encode(lm, [text])
        bare = median_seconds(_plain_forward(lm, batch.model_inputs()), repeats=50)
        runs, cpu = [], []
        for _ in range(2):  # warm-up
            explain_sentence(lm, text, expected=expected, steps=steps)
        for _ in range(repeats):
            t0 = time.process_time()
            runs.append(explain_sentence(lm, text, expected=expected, steps=steps))
            cpu.append(time.process_time() - t0)
        total = statistics.median(r.timings["total"] for r in runs)
        print(f"\nsentence ({len(batch.tokens[0])} tokens): {text}")
        print(f"  prediction {runs[0].prediction.label}, expected {expected}")
        for part in PARTS:
            print(f"  {part:<22} {1e3 * statistics.median(r.timings[part] for r in runs):8.1f} ms")
        print(f"  {'total':<22} {1e3 * total:8.1f} ms   = {total / budget:.2f} of the {budget:g} s budget")
        print(f"  {'CPU time (all threads)':<22} {1e3 * statistics.median(cpu):8.1f} ms")
        print(
            f"  plain forward pass     {1e3 * bare:8.2f} ms   -> explanation = {total / bare:.0f} x forward"
        )
        for ev in runs[0].labels:
            ig = ev.integrated_gradients
            print(
                f"  IG {ev.label:<16} {ig.steps_text()}: completeness error {ig.completeness_error:+.2e} "
                f"(relative {ig.completeness_relative:.1e}, logit difference {ig.logit_difference:+.3f})"
            )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=15)
    parser.add_argument("--steps", default="auto", help="Integrated Gradients steps, or 'auto' (default)")
    parser.add_argument("--threads", type=int, default=2)
    parser.add_argument("--model", type=Path, help="another classifier folder to time instead")
    parser.add_argument(
        "--minilm", action="store_true", help="also time all-MiniLM-L6-v2 under a seeded head"
    )
    args = parser.parse_args()
    torch.set_num_threads(args.threads)
    steps = None if args.steps == "auto" else int(args.steps)
    with tempfile.TemporaryDirectory() as tmp:
        if args.model is not None:
            path, note = args.model, "given with --model"
        elif sample_model_available():
            path, note = SAMPLE_MODEL, "sample model"
        else:
            path, note = _stand_in(Path(tmp) / "stand_in"), "random stand-in (sample model not trained yet)"
        bench_model(path, note, steps, args.repeats, BUDGET_SECONDS)
        if args.minilm:
            from tests.corpus_models import save_minilm_classifier

            mini = save_minilm_classifier(Path(tmp) / "minilm")
            bench_model(mini, "real encoder, seeded head", steps, args.repeats, MINILM_BUDGET_SECONDS)
    print(f"\n{load_note()}")


if __name__ == "__main__":
    main()
