"""The comparison stage: two checkpoints that share a tokenizer, run on the same sentences.

Checking that two models can be compared and lining up their heads (``pairing``), the
Jensen-Shannon divergence between every head of one model and every head of the other over
the same attention rows, and the head matching built from it (``matching``), one sentence
through both models (``sentence``), a whole labelled set streamed through both with progress
and cancel (``run``), its settings (``settings``) and its report files (``report``). May import
the checkpoint, measures and corpus stages and, for the report's figures, ``inspector.figures``;
never the command line.
"""

from __future__ import annotations


def __getattr__(name: str):
    if name in ("compare_corpus", "ComparisonReport"):
        from inspector.comparison import run

        return getattr(run, name)
    if name in ("compare_sentence", "SentenceComparison"):
        from inspector.comparison import sentence

        return getattr(sentence, name)
    raise AttributeError(name)
