"""Can two checkpoints be compared, and which of their heads sit at the same position?

A comparison runs both models on the *same tokens*, so both must share a tokenizer: the
same vocabulary (token to id), the same special tokens, and the same way of splitting text
(a vocabulary can be equal while one tokenizer lower-cases and the other does not). Anything
else (number of layers, heads per layer, labels) may differ: the head matching runs across
all heads, and per-position numbers exist only where both models have that position.
"""

from __future__ import annotations

import numpy as np

from inspector.checkpoint.loader import LoadedModel
from inspector.errors import HeadcountError

PROBE_TEXT = "Tidewren FERRIES: can't I re-book the 07:45 crossing to Orlestow? £12.50, naïve émigré"
"""A sentence with capitals, punctuation, digits, a currency sign and accents: two tokenizers
that agree on it split text alike (from the project's invented ferry scenario)."""


def tokenizer_difference(lm_a: LoadedModel, lm_b: LoadedModel) -> str | None:
    """Why the two models' tokenizers differ, in a few words, or None when they agree.

    Checks, in this order: the vocabulary (token -> id), the special tokens and their ids,
    and the ids both give :data:`PROBE_TEXT`.
    """
    tok_a, tok_b = lm_a.tokenizer, lm_b.tokenizer
    vocab_a, vocab_b = tok_a.get_vocab(), tok_b.get_vocab()
    if len(vocab_a) != len(vocab_b):
        return f"their vocabularies differ ({len(vocab_a):,} and {len(vocab_b):,} entries)"
    if vocab_a != vocab_b:
        differ = sum(1 for token, i in vocab_a.items() if vocab_b.get(token) != i)
        return f"their vocabularies differ in {differ:,} of {len(vocab_a):,} entries"
    special_a = sorted(zip(tok_a.all_special_tokens, tok_a.all_special_ids))
    special_b = sorted(zip(tok_b.all_special_tokens, tok_b.all_special_ids))
    if special_a != special_b:
        only = sorted({t for t, _ in special_a} ^ {t for t, _ in special_b}) or [t for t, _ in special_a]
        return f"their special tokens differ ({', '.join(only[:4])})"
    if tok_a(PROBE_TEXT)["input_ids"] != tok_b(PROBE_TEXT)["input_ids"]:
        return "they split the same text into different tokens (casing or normalisation differ)"
    return None


def check_comparable(lm_a: LoadedModel, lm_b: LoadedModel) -> None:
    """Raise a one-line HeadcountError unless the two models share a tokenizer."""
    why = tokenizer_difference(lm_a, lm_b)
    if why is not None:
        raise HeadcountError(
            f"cannot compare {lm_a.name} with {lm_b.name}: {why}; a comparison runs both models on the "
            "same tokens, so they need the same vocabulary and special tokens"
        )


def shared_labels(lm_a: LoadedModel, lm_b: LoadedModel) -> list[str]:
    """Labels both classifiers know, in A's order (a labelled set is scored on these)."""
    for lm in (lm_a, lm_b):
        if not lm.has_prediction or not lm.labels:
            raise HeadcountError(
                f"{lm.name}: comparing over a labelled set needs two sentence classifiers with labels "
                f"(this one is a {lm.task})"
            )
    known = set(lm_b.labels)
    shared = [lab for lab in lm_a.labels if lab in known]
    if not shared:
        raise HeadcountError(f"{lm_a.name} and {lm_b.name} have no label in common")
    return shared


def same_position(values_a: np.ndarray, values_b: np.ndarray) -> np.ndarray:
    """``values_b - values_a`` head by head, on B's grid of heads; NaN where A has no such head.

    Parameters
    ----------
    values_a : ndarray of shape (layers_a, heads_a)
    values_b : ndarray of shape (layers_b, heads_b)

    Returns
    -------
    ndarray of shape (layers_b, heads_b), float64
    """
    a = np.asarray(values_a, dtype=np.float64)
    b = np.asarray(values_b, dtype=np.float64)
    out = np.full(b.shape, np.nan)
    layers, heads = min(a.shape[0], b.shape[0]), min(a.shape[1], b.shape[1])
    out[:layers, :heads] = b[:layers, :heads] - a[:layers, :heads]
    return out
