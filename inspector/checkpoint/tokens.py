"""Token views: pieces, words, and rows without special tokens.

Word view rule (documented in DEVELOPERS.md and README): when the pieces of a
word are merged, the weight a query gives to a word is the **sum** over that
word's pieces (keys), and the row of a word is the **mean** of its pieces' rows
(queries). Every merged row still sums to 1. Special tokens stay their own
"word".
"""

from __future__ import annotations

import unicodedata
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

STRUCTURAL_TOKENS = (
    "cls_token_id",
    "sep_token_id",
    "bos_token_id",
    "eos_token_id",
    "pad_token_id",
    "mask_token_id",
)
"""The tokenizer attributes naming structural tokens: classification, separator, begin/end, padding, mask."""

_CONTINUATION_PREFIX = "##"
_WORD_START_MARKS = ("\u0120", "\u2581")  # byte-level BPE and sentencepiece word starts


@dataclass(frozen=True)
class TokenView:
    """Labels and grouping of a token axis after merging or dropping."""

    labels: list[str]
    special: np.ndarray
    groups: list[list[int]]
    """For each shown position, the piece indices it stands for."""


def structural_ids(tokenizer: object) -> set[int]:
    """Ids of the structural tokens of ``tokenizer``: the only ones Headcount calls special.

    The unknown token is not among them: it stands for real content (an emoji, a
    character outside the vocabulary), so it is counted, explained and shown like
    any other word.
    """
    ids = {getattr(tokenizer, attr, None) for attr in STRUCTURAL_TOKENS}
    ids.discard(None)
    ids.discard(getattr(tokenizer, "unk_token_id", None))
    return {int(i) for i in ids}


def text_problem(text: object) -> str | None:
    """Why ``text`` cannot be analysed (one line), or None when it can.

    A text must be a string of valid Unicode (no undecodable bytes) with at least
    one visible character: text made only of spaces, control or zero-width
    characters would be analysed as an empty sentence.
    """
    if not isinstance(text, str):
        return "the text must be a string"
    try:
        text.encode("utf-8")
    except UnicodeEncodeError:
        return "the text is not valid UTF-8 (it holds bytes that are not characters)"
    if not text.strip():
        return "the text is empty"
    if not any(unicodedata.category(c)[0] not in "CZ" for c in text):
        return "the text has no visible characters (only spaces, control or zero-width characters)"
    return None


def piece_label(piece: str) -> str:
    """A readable label for one piece (strip BPE/sentencepiece markers)."""
    for mark in _WORD_START_MARKS:
        if piece.startswith(mark):
            return piece[len(mark) :] or piece
    return piece


def word_groups(word_ids: Sequence[int | None], special: np.ndarray) -> list[list[int]]:
    """Group piece positions into words; each special token is its own group."""
    groups: list[list[int]] = []
    last: int | None = None
    for i, wid in enumerate(word_ids):
        if special[i] or wid is None or wid != last:
            groups.append([i])
        else:
            groups[-1].append(i)
        last = None if special[i] else wid
    return groups


def _join(pieces: list[str]) -> str:
    text = piece_label(pieces[0])
    for p in pieces[1:]:
        text += p[len(_CONTINUATION_PREFIX) :] if p.startswith(_CONTINUATION_PREFIX) else piece_label(p)
    return text


def make_view(
    tokens: Sequence[str],
    special: np.ndarray,
    word_ids: Sequence[int | None],
    *,
    words: bool = False,
    drop_special: bool = False,
) -> TokenView:
    """Describe the token axis for the chosen view (pieces or words, specials or not)."""
    special = np.asarray(special, dtype=bool)
    groups = word_groups(word_ids, special) if words else [[i] for i in range(len(tokens))]
    if drop_special:
        groups = [g for g in groups if not special[g[0]]]
    labels = [_join([tokens[i] for i in g]) if words else piece_label(tokens[g[0]]) for g in groups]
    return TokenView(labels=labels, special=np.array([bool(special[g[0]]) for g in groups]), groups=groups)


def apply_view(attention: np.ndarray, view: TokenView) -> np.ndarray:
    """Re-express attention ``(..., n, n)`` on a view's axis.

    Parameters
    ----------
    attention : ndarray of shape (..., n, n)
    view : TokenView

    Returns
    -------
    ndarray of shape (..., m, m)
        ``W = Q A K`` where ``K[j, w] = 1`` if piece j is in word w (sum over
        keys) and ``Q[w, i] = 1/|w|`` for pieces i of w (mean over queries). If
        the view dropped tokens, each row is renormalised to sum to 1.

    References
    ----------
    Clark et al. (2019), sec. 4.1 (word-level attention maps: sum over the
    attended-to pieces, mean over the attending pieces); common practice.
    """
    n = attention.shape[-1]
    m = len(view.groups)
    keys = np.zeros((n, m), dtype=attention.dtype)
    queries = np.zeros((m, n), dtype=attention.dtype)
    for w, g in enumerate(view.groups):
        keys[g, w] = 1.0
        queries[w, g] = 1.0 / len(g)
    out = queries @ attention @ keys
    if sum(len(g) for g in view.groups) < n:
        total = out.sum(-1, keepdims=True)
        out = np.divide(out, total, out=np.zeros_like(out), where=total > 0)
    return out
