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
    attention = np.asarray(attention)
    n = attention.shape[-1]
    groups = view.groups
    sizes = np.array([len(g) for g in groups])
    out = _sum_groups(attention, groups, axis=-2)  # queries first: the rows shrink before the gathers
    multi = np.flatnonzero(sizes > 1)
    if multi.size:
        if np.shares_memory(out, attention):
            out = out.copy()
        out[..., multi, :] /= sizes[multi].astype(out.dtype)[:, None]
    out = _sum_groups(out, groups, axis=-1)
    if sizes.sum() < n:
        total = out.sum(-1, keepdims=True)
        out = np.divide(out, total, out=np.zeros_like(out), where=total > 0)
    return out


def _sum_groups(a: np.ndarray, groups: list[list[int]], axis: int) -> np.ndarray:
    """Sum ``a`` over each group's positions along ``axis`` (the ``W = Q A K`` products of :func:`apply_view`).

    Groups are visited by rank within the group: the first piece of every group, then the
    second piece of the groups that have one, and so on. Rows (any axis but the last) are
    gathered and added where they belong. Along the last axis, where scattered additions
    are slow, the groups are ordered longest first, so the groups that have an r-th piece
    are a prefix and every step is one gather and one slice addition; a final gather
    restores the groups' order. Single-piece groups
    over a contiguous run of positions are a plain slice (no copy until the division).
    Floating-point sums of a word's pieces, in piece order.
    """
    axis = axis % a.ndim
    firsts = np.array([g[0] for g in groups], dtype=np.intp)
    sizes = np.array([len(g) for g in groups], dtype=np.intp)
    before = (slice(None),) * axis
    if (
        sizes.size
        and sizes.max() == 1
        and np.array_equal(firsts, np.arange(firsts[0], firsts[0] + len(firsts)))
    ):
        out = a[(*before, slice(int(firsts[0]), int(firsts[0]) + len(firsts)))]
        return out if np.issubdtype(out.dtype, np.floating) else out.astype(np.float64)
    if axis != a.ndim - 1:  # whole rows move: add each rank's rows where they belong
        out = np.take(a, firsts, axis=axis)
        if not np.issubdtype(out.dtype, np.floating):
            out = out.astype(np.float64)
        for rank in range(1, int(sizes.max(initial=1))):
            sel = np.flatnonzero(sizes > rank)
            out[(*before, sel)] += np.take(a, [groups[w][rank] for w in sel], axis=axis)
        return out
    order = np.argsort(-sizes, kind="stable")
    out = np.take(a, firsts[order], axis=axis)
    if not np.issubdtype(out.dtype, np.floating):
        out = out.astype(np.float64)
    for rank in range(1, int(sizes.max(initial=1))):
        count = int((sizes > rank).sum())
        pieces = [groups[w][rank] for w in order[:count]]
        out[(*before, slice(0, count))] += np.take(a, pieces, axis=axis)
    if np.array_equal(order, np.arange(len(order))):
        return out
    inverse = np.empty_like(order)
    inverse[order] = np.arange(len(order))
    return np.take(out, inverse, axis=axis)
