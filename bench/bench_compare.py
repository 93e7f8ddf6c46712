"""Comparison speed: two models over the sample evaluation set against one corpus scan, in one run.

Run: .venv/bin/python -m bench.bench_compare [--repeats N] [--threads N]

Models: the bundled sample model (A) and its retrained copy with 13 heads switched off (B), on
the sample evaluation set (513 utterances). Printed (target from the tracker issue):

* comparison time / one corpus scan time (<= 2.2): :func:`inspector.comparison.run.compare_corpus`
  (both models' predictions and per-head metrics, the head matching on the default rows per
  batch, unchanged-head checks on every row) against :func:`inspector.corpus.run.scan` of model A
  (predictions, per-head metrics, pairwise JS on its default sampled rows), both end to end
  from the labelled set (tokenising included);
* for reference: two bare batched forward passes against one scan (the floor a comparison
  cannot go below: it runs two models), the comparison matching 16 rows per batch, and
  matching every row.

Torch runs on one thread by default, as in ``bench.bench_corpus``. Timings are medians of
interleaved repeats, so machine noise hits all variants alike.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # also run as a script

import torch  # noqa: E402

from bench.common import interleaved_medians  # noqa: E402
from inspector.checkpoint.loader import load_checkpoint  # noqa: E402
from inspector.comparison.pairing import shared_labels  # noqa: E402
from inspector.comparison.run import compare_corpus  # noqa: E402
from inspector.comparison.settings import ComparisonSettings  # noqa: E402
from inspector.corpus.batching import encode_set  # noqa: E402
from inspector.corpus.dataset import read_labelled  # noqa: E402
from inspector.corpus.run import scan  # noqa: E402
from inspector.paths import SAMPLE_EVAL, SAMPLE_MODEL, SAMPLE_RETRAINED  # noqa: E402

TARGET = 2.2


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=7)
    ap.add_argument("--threads", type=int, default=1, help="torch intra-op threads (default: 1)")
    args = ap.parse_args()
    torch.set_num_threads(args.threads)
    lm_a, lm_b = load_checkpoint(SAMPLE_MODEL), load_checkpoint(SAMPLE_RETRAINED)
    data = read_labelled(SAMPLE_EVAL, known_labels=shared_labels(lm_a, lm_b))
    encoded = encode_set(lm_a, data.texts)
    padded = [encoded.batch(i) for i in encoded.sorted_batches(32)]

    def bare_pair() -> None:
        with torch.inference_mode():
            for b in padded:
                lm_a.model(**b.inputs)
                lm_b.model(**b.inputs)

    default = ComparisonSettings()
    fns = {
        "scan": lambda: scan(lm_a, data),
        "compare": lambda: compare_corpus(lm_a, lm_b, data, default),
        "bare_pair": bare_pair,
        "compare_16": lambda: compare_corpus(lm_a, lm_b, data, ComparisonSettings(match_rows=16)),
        "compare_64": lambda: compare_corpus(lm_a, lm_b, data, ComparisonSettings(match_rows=64)),
        "compare_all": lambda: compare_corpus(lm_a, lm_b, data, ComparisonSettings(match_rows=None)),
    }
    t = interleaved_medians(fns, repeats=args.repeats, warmup=1)
    scan_t = t["scan"]
    print(
        f"torch threads: {torch.get_num_threads()}; {len(data)} utterances, {int(encoded.lengths.sum())} tokens"
    )
    print(f"  one corpus scan (A)              {scan_t * 1e3:8.1f} ms")
    rows = (
        ("compare", f"comparison ({default.match_rows} rows/batch)"),
        ("bare_pair", "two bare forwards (floor)"),
        ("compare_16", "comparison (16 rows/batch)"),
        ("compare_64", "comparison (64 rows/batch)"),
        ("compare_all", "comparison (every row)"),
    )
    for key, label in rows:
        print(f"  {label:<32} {t[key] * 1e3:8.1f} ms   {t[key] / scan_t:.2f}x the scan")
    ratio = t["compare"] / scan_t
    print(
        f"  target: comparison <= {TARGET}x one scan: {'met' if ratio <= TARGET else 'MISSED'} ({ratio:.2f}x)"
    )


if __name__ == "__main__":
    main()
