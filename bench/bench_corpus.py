"""Corpus analysis speed and memory, as ratios measured within one run.

Run: .venv/bin/python -m bench.bench_corpus [--minilm] [--at-size] [--repeats N] [--threads N]
 or: .venv/bin/python bench/bench_corpus.py ...

Model: the bundled sample model on its evaluation set when it exists, else a
seeded random 4-layer x 6-head BERT classifier (MiniLM tokenizer) on the same
set. ``--minilm`` adds all-MiniLM-L6-v2's encoder (6 x 12 heads) under a seeded
classifier head, on the first 128 utterances.

Printed (targets from the tracker issue):

* scan throughput / bare batched forward throughput (>= 0.8): the full streaming
  scan (predictions, all per-head metrics, pairwise JS on sampled rows) against
  ``model(**batch)`` on the same pre-padded, length-sorted batches;
  also the scan without redundancy and with every row compared, for reference;
* importance pass time / bare forward time (<= 3.5);
* memory: peak while scanning 1x and 10x the set, each in a fresh process
  (tracemalloc peak of Python-side allocations during the scan, and the process's
  maximum resident set size); growth must stay below 10%.

``--at-size`` times a whole corpus run (scan, importance, pruning simulation with its
default steps) of a random BERT-base-sized classifier (12 x 12 heads, hidden 768) over
1,000 utterances of the ferry training set, in bare passes: the run's time divided by
one bare batched forward pass over the same set (target: under 15 in all; the pruning
simulation at most 10).

Torch runs on one thread by default (``--threads``): on a shared 2-core machine
two threads make every timing swing by several times, one thread keeps the
ratios steady. Timings are medians of interleaved repeats.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # also run as a script

import torch  # noqa: E402

from bench.common import BASE_SHAPE, interleaved_medians, load_note, random_bert_classifier  # noqa: E402
from inspector.checkpoint.loader import load_checkpoint  # noqa: E402
from inspector.corpus.batching import encode_set  # noqa: E402
from inspector.corpus.dataset import read_labelled  # noqa: E402
from inspector.corpus.run import CorpusSettings, importance_pass, label_indices, run_corpus, scan  # noqa: E402
from inspector.paths import PROJECT_ROOT, SAMPLE_EVAL, SAMPLE_MODEL, sample_model_available  # noqa: E402

SAMPLE_TRAIN = SAMPLE_EVAL.with_name("ferry_train.csv")

BATCH = 32


def random_classifier(folder: Path, labels: list[str]) -> Path:
    """A seeded random 4 x 6-head BERT classifier (hidden 96) with the MiniLM tokenizer."""
    from transformers import AutoTokenizer, BertConfig, BertForSequenceClassification

    from tests.corpus_models import MINILM

    torch.manual_seed(0)
    tok = AutoTokenizer.from_pretrained(str(MINILM), local_files_only=True)
    config = BertConfig(
        vocab_size=tok.vocab_size,
        hidden_size=96,
        num_hidden_layers=4,
        num_attention_heads=6,
        intermediate_size=384,
        max_position_embeddings=64,
        num_labels=len(labels),
        id2label=dict(enumerate(labels)),
        label2id={lab: i for i, lab in enumerate(labels)},
    )
    BertForSequenceClassification(config).eval().save_pretrained(folder)
    tok.save_pretrained(folder)
    return folder


def data_labels(path: Path) -> list[str]:
    return sorted(set(read_labelled(path).labels))


def speed(model_dir: Path, data_path: Path, repeats: int, limit: int | None = None) -> dict[str, float]:
    lm = load_checkpoint(model_dir)
    data = read_labelled(data_path, known_labels=lm.labels)
    if limit is not None:
        data = data.subset(range(min(limit, len(data))))
    encoded = encode_set(lm, data.texts)
    gold = label_indices(lm, data)
    padded = [encoded.batch(i) for i in encoded.sorted_batches(BATCH)]

    def bare() -> None:
        with torch.inference_mode():
            for b in padded:
                lm.model(**b.inputs)

    fns = {
        "bare": bare,
        "scan": lambda: scan(lm, data, encoded=encoded, batch_size=BATCH),
        "scan_no_js": lambda: scan(lm, data, encoded=encoded, batch_size=BATCH, redundancy=False),
        "scan_all_rows": lambda: scan(lm, data, encoded=encoded, batch_size=BATCH, js_rows=None),
        "importance": lambda: importance_pass(lm, encoded, gold, batch_size=BATCH),
    }
    t = interleaved_medians(fns, repeats=repeats, warmup=1)
    return {"utterances": len(data), "tokens": int(encoded.lengths.sum()), **t}


_MEMORY_CHILD = r"""
import json, resource, sys, tracemalloc
import torch
from inspector.corpus.run import scan
from inspector.corpus.batching import encode_set
from inspector.corpus.dataset import read_labelled
from inspector.checkpoint.loader import load_checkpoint
model, path, times = sys.argv[1], sys.argv[2], int(sys.argv[3])
lm = load_checkpoint(model)
base = read_labelled(path, known_labels=lm.labels)
data = base.subset(list(range(len(base))) * times)
encoded = encode_set(lm, data.texts)
scan(lm, base.subset(range(64)), batch_size=32)  # warm
tracemalloc.start()
scan(lm, data, encoded=encoded, batch_size=32)
_, peak = tracemalloc.get_traced_memory()
tracemalloc.stop()
print(json.dumps({"n": len(data), "trace_peak": peak, "maxrss_kb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss}))
"""


def memory(model_dir: Path, data_path: Path) -> dict[str, dict]:
    out = {}
    for times in (1, 10):
        res = subprocess.run(
            [sys.executable, "-c", _MEMORY_CHILD, str(model_dir), str(data_path), str(times)],
            capture_output=True,
            text=True,
            cwd=PROJECT_ROOT,
            check=True,
        )
        out[f"{times}x"] = json.loads(res.stdout.strip().splitlines()[-1])
    return out


def report(name: str, r: dict[str, float]) -> None:
    bare = r["bare"]
    print(
        f"\n{name}: {r['utterances']} utterances, {r['tokens']} tokens, batches of {BATCH} sorted by length"
    )
    print(f"  bare forward           {bare * 1e3:9.1f} ms   {r['utterances'] / bare:8.0f} utt/s")
    for key, label in (
        ("scan", "scan (metrics + JS)"),
        ("scan_no_js", "scan without JS"),
        ("scan_all_rows", "scan, JS on all rows"),
    ):
        print(f"  {label:<22} {r[key] * 1e3:9.1f} ms   throughput ratio {bare / r[key]:.3f}")
    print(
        f"  importance pass        {r['importance'] * 1e3:9.1f} ms   time ratio {r['importance'] / bare:.3f}"
    )
    ok_scan = bare / r["scan"] >= 0.8
    ok_imp = r["importance"] / bare <= 3.5
    print(
        f"  targets: scan >= 0.8x bare: {'met' if ok_scan else 'MISSED'}; importance <= 3.5x: {'met' if ok_imp else 'MISSED'}"
    )


def at_size(folder: Path, utterances: int = 1000) -> None:
    """A whole corpus run of a BERT-base-sized random model, in bare passes over the same set."""
    labels = sorted(set(read_labelled(SAMPLE_TRAIN).labels))
    lm = load_checkpoint(random_bert_classifier(folder, labels, **BASE_SHAPE))
    data = read_labelled(SAMPLE_TRAIN, known_labels=lm.labels)
    data = data.subset(range(min(utterances, len(data))))
    encoded = encode_set(lm, data.texts)
    padded = [encoded.batch(i) for i in encoded.sorted_batches(BATCH)]

    def bare() -> float:
        t0 = time.perf_counter()
        with torch.inference_mode():
            for b in padded:
                lm.model(**b.inputs)
        return time.perf_counter() - t0

    bare()  # warm
    before = bare()
    phases: dict[str, float] = {}
    marks = {"t": time.perf_counter(), "name": ""}

    def on_phase(name: str) -> None:
        now = time.perf_counter()
        if marks["name"]:
            phases[marks["name"]] = now - marks["t"]
        marks.update(t=now, name=name)

    t0 = time.perf_counter()
    report = run_corpus(lm, data, CorpusSettings(batch_size=BATCH), on_phase=on_phase)
    total = time.perf_counter() - t0
    phases[marks["name"]] = time.perf_counter() - marks["t"]
    after = bare()
    unit = (before + after) / 2
    print(
        f"\ncorpus run at size: random 12 x 12 BERT-base-sized classifier, {len(data)} utterances, "
        f"{int(encoded.lengths.sum())} tokens, batches of {BATCH}"
    )
    print(f"  bare pass over the set     {unit:8.1f} s   (before {before:.1f} s, after {after:.1f} s)")
    for name, seconds in phases.items():
        print(f"  {name:<26} {seconds:8.1f} s = {seconds / unit:5.2f} bare passes")
    print(f"  whole run                  {total:8.1f} s = {total / unit:5.2f} bare passes (target < 15)")
    pr = report.pruning
    if pr is not None:
        print(
            f"  pruning: {pr.passes} accuracy measurements (target <= 10 passes); "
            f"steps {dict((c.order_name, c.steps) for c in pr.curves)}"
        )


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=7)
    ap.add_argument("--minilm", action="store_true", help="also bench the MiniLM-sized classifier")
    ap.add_argument("--no-memory", action="store_true")
    ap.add_argument("--at-size", action="store_true", help="only the whole run of a BERT-base-sized model")
    ap.add_argument("--threads", type=int, default=1, help="torch intra-op threads (default: 1)")
    args = ap.parse_args()
    torch.set_num_threads(args.threads)
    from threadpoolctl import threadpool_limits

    threadpool_limits(args.threads)
    import transformers

    transformers.utils.logging.set_verbosity_error()
    transformers.utils.logging.disable_progress_bar()
    print(f"torch threads: {torch.get_num_threads()}; JS rows compared: {CorpusSettings().js_rows}")
    if args.at_size:
        with tempfile.TemporaryDirectory() as tmp:
            at_size(Path(tmp) / "base_sized")
        print(load_note())
        return
    with tempfile.TemporaryDirectory() as tmp:
        if sample_model_available():
            model, name = SAMPLE_MODEL, "sample model (ferry_intents)"
        else:
            model = random_classifier(Path(tmp) / "random", data_labels(SAMPLE_EVAL))
            name = "random 4x6 BERT classifier (sample model not available yet)"
        report(name, speed(model, SAMPLE_EVAL, args.repeats))
        if args.minilm:
            from tests.corpus_models import save_minilm_classifier

            mini = save_minilm_classifier(Path(tmp) / "minilm", labels=data_labels(SAMPLE_EVAL))
            report(
                "all-MiniLM-L6-v2 + seeded head (6x12)",
                speed(mini, SAMPLE_EVAL, max(3, args.repeats // 2), limit=128),
            )
        if not args.no_memory:
            m = memory(model, SAMPLE_EVAL)
            a, b = m["1x"], m["10x"]
            print(f"\nmemory ({name}), fresh process per size:")
            for key, r in m.items():
                print(
                    f"  {key:>3}: {r['n']:6d} utterances  tracemalloc peak {r['trace_peak'] / 1e6:7.2f} MB  "
                    f"max RSS {r['maxrss_kb'] / 1e3:7.1f} MB"
                )
            growth = (b["maxrss_kb"] - a["maxrss_kb"]) / a["maxrss_kb"]
            print(
                f"  max RSS growth for 10x utterances: {growth:+.1%} (target < 10%): {'met' if growth < 0.10 else 'MISSED'}"
            )
            print(
                f"  tracemalloc peak growth: {(b['trace_peak'] - a['trace_peak']) / 1e6:+.2f} MB "
                "(per-utterance prediction arrays and the misfire list)"
            )


if __name__ == "__main__":
    main()
