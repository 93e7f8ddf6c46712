"""Per-sentence measures computed from captured attention.

Per-head metrics (``metrics``), attention rollout and flow (``rollout``),
value-weighted attention (``norms``) and ``analysis.analyze_sentence``, which runs
one sentence and bundles all of them for the views. May import the checkpoint
stage; never the corpus, explanation, figures or command-line stages.
"""

from __future__ import annotations


def __getattr__(name: str):
    if name in ("analyze_sentence", "SentenceAnalysis", "Prediction"):
        from inspector.measures import analysis

        return getattr(analysis, name)
    raise AttributeError(name)
