"""Small helpers shared by the benchmark scripts (median of warm repeats, test models, long messages)."""

from __future__ import annotations

import os
import statistics
import time
from collections.abc import Callable
from pathlib import Path


def median_seconds(fn: Callable[[], object], repeats: int = 30, warmup: int = 3) -> float:
    """Median wall time of ``fn()`` over ``repeats`` calls after ``warmup`` calls."""
    for _ in range(warmup):
        fn()
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def interleaved_medians(
    fns: dict[str, Callable[[], object]],
    repeats: int = 30,
    warmup: int = 3,
    between: Callable[[], object] | None = None,
) -> dict[str, float]:
    """Median time of each function, measured in alternation so machine noise hits all alike.

    ``between`` (untimed) runs after every call, e.g. to let background work finish.
    """
    for fn in fns.values():
        for _ in range(warmup):
            fn()
            if between is not None:
                between()
    times: dict[str, list[float]] = {k: [] for k in fns}
    for _ in range(repeats):
        for name, fn in fns.items():
            t0 = time.perf_counter()
            fn()
            times[name].append(time.perf_counter() - t0)
            if between is not None:
                between()
    return {k: statistics.median(v) for k, v in times.items()}


def load_note() -> str:
    """The machine's load average and core count, printed with every benchmark (noisy when busy)."""
    load = ", ".join(f"{x:.1f}" for x in os.getloadavg())
    return f"load average {load} on {os.cpu_count()} cores"


SAMPLE_SHAPE = {"hidden_size": 96, "num_hidden_layers": 4, "num_attention_heads": 6, "intermediate_size": 384}
"""The sample model's shape (sample_models/scripts/train.py), for stand-ins while it is not trained."""

BASE_SHAPE = {
    "hidden_size": 768,
    "num_hidden_layers": 12,
    "num_attention_heads": 12,
    "intermediate_size": 3072,
}
"""BERT-base-sized: 12 layers x 12 heads, hidden 768."""


def random_bert_classifier(folder: Path, labels: list[str], *, seed: int = 0, **config: object) -> Path:
    """Save a seeded, randomly initialised BERT classifier with the MiniLM tokenizer into ``folder``."""
    import torch
    import transformers

    from inspector.paths import minilm_dir

    tok = transformers.AutoTokenizer.from_pretrained(str(minilm_dir()), local_files_only=True)
    cfg = transformers.BertConfig(
        vocab_size=len(tok),
        id2label=dict(enumerate(labels)),
        label2id={k: i for i, k in enumerate(labels)},
        **config,
    )
    torch.manual_seed(seed)
    transformers.BertForSequenceClassification(cfg).save_pretrained(str(folder))
    tok.save_pretrained(str(folder))
    return folder


def build_base_sized(folder: Path) -> Path:
    """A random BERT-base-sized classifier (12 layers x 12 heads, hidden 768, 14 labels)."""
    labels = [f"intent_{i}" for i in range(14)]
    return random_bert_classifier(folder, labels, **BASE_SHAPE)


WORDS = (
    "please could you tell me whether the late ferry from orlestow to quillhaven is still running tonight "
    "because the weather looks rough and my car is booked on it with two bikes on the roof rack and a dog "
    "in the back who gets seasick on long crossings so I would rather change to the morning sailing if that "
    "costs nothing extra and keeps the same cabin"
).split()
"""Words of an invented ferry-operator message; repeated for long inputs."""


def sentence_with_tokens(lm, target: int, offset: int = 0) -> str:
    """A message of whole words that tokenises to at most ``target`` tokens (specials included), the longest such.

    Words are taken from :data:`WORDS` starting at ``offset`` and repeated as needed; the word
    count is found by bisection, so long targets (512 tokens) stay cheap.
    """
    pool = (WORDS[offset:] + WORDS[:offset]) * (target // len(WORDS) + 2)

    def tokens(k: int) -> int:
        return len(lm.tokenizer(" ".join(pool[:k]))["input_ids"]) if k else 0

    lo, hi = 0, min(len(pool), target)
    while lo < hi:  # largest k with tokens(k) <= target
        mid = (lo + hi + 1) // 2
        if tokens(mid) <= target:
            lo = mid
        else:
            hi = mid - 1
    return " ".join(pool[:lo])
