"""The explanation stage: evidence for one prediction beyond attention.

Gradient-weighted rollout and Integrated Gradients (``gradients``), word
occlusion (``occlusion``), agreement between methods (``faithfulness``),
``explain.explain_sentence`` that runs them all, and the side-by-side comparison
of a sentence with an edited copy (``rewording``). May import the checkpoint and
measures stages; never the corpus, figures or command-line stages.
"""

from __future__ import annotations


def __getattr__(name: str):
    if name in ("explain_sentence", "SentenceExplanation"):
        from inspector.explanation import explain

        return getattr(explain, name)
    raise AttributeError(name)
