"""Leave-one-word-out occlusion: how much a label's probability (or log-odds, or lead over another label)
drops without each word."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
import torch

from inspector.checkpoint.capture import Batch
from inspector.checkpoint.loader import LoadedModel
from inspector.errors import HeadcountError
from inspector.explanation.choices import OCCLUSION_MODES
from inspector.measures.analysis import softmax

OcclusionMode = Literal["remove", "mask"]

OCCLUSION_ROWS_PER_PASS = 256
"""Most occluded copies of a sentence evaluated per forward pass."""
OCCLUSION_TOKENS_PER_PASS = 4096
"""Tokens per forward pass (copies x length): long sentences go in several passes, so the
progress of a long explanation is reported and it can be stopped between passes."""

RowsReport = Callable[[int, int], None]
"""``on_rows(done, total)``: occluded copies evaluated so far; it may raise to stop the work."""


def log_odds(logits: np.ndarray, label: int) -> np.ndarray:
    """Log-odds of one label's softmax probability, computed from the logits without rounding p.

    Parameters
    ----------
    logits : ndarray of shape (..., num_labels)
    label : int

    Returns
    -------
    ndarray of shape (...)
        ``log(p_k / (1 - p_k)) = z_k - log sum_{j != k} exp(z_j)`` with ``p = softmax(z)``;
        finite even where p_k rounds to 1 in floating point.

    References
    ----------
    Common practice, no source (the logit of a softmax probability against all other labels).
    """
    z = np.asarray(logits, dtype=np.float64)
    others = np.delete(z, label, axis=-1)
    top = others.max(-1)
    rest = top + np.log(np.exp(others - top[..., None]).sum(-1))
    return z[..., label] - rest


@dataclass
class Occlusion:
    """Logits and probabilities of the sentence and of each occluded copy."""

    mode: str
    """``remove`` or ``mask``."""
    replacement: str | None
    """The token that replaced the pieces in ``mask`` mode (None when removing)."""
    probabilities: np.ndarray
    """[num_labels] the intact sentence."""
    occluded: np.ndarray
    """[groups, num_labels] each copy with one group of pieces occluded."""
    logits: np.ndarray
    """[num_labels] logits of the intact sentence."""
    occluded_logits: np.ndarray
    """[groups, num_labels] logits of each occluded copy."""

    def drop(self, label: int) -> np.ndarray:
        """[groups] ``p(label | sentence) - p(label | sentence without group g)``."""
        return self.probabilities[label] - self.occluded[:, label]

    def log_odds_drop(self, label: int) -> np.ndarray:
        """[groups] drop of the label's log-odds ``log(p / (1 - p))`` when group g is left out.

        Unlike :meth:`drop` it does not saturate near p = 1: going from 0.999 to
        0.99 is a drop of about 2.3, as is going from 0.5 to 0.09. The ranking of
        the words is the same as :meth:`drop`'s (log-odds rise with p).
        """
        return log_odds(self.logits, label) - log_odds(self.occluded_logits, label)

    def gap_drop(self, label: int, other: int) -> np.ndarray:
        """[groups] drop of the logit gap ``z_label - z_other`` (= ``log(p_label / p_other)``) without group g."""
        gap = self.logits[label] - self.logits[other]
        return gap - (self.occluded_logits[:, label] - self.occluded_logits[:, other])


def occluded_rows(
    input_ids: torch.Tensor,
    attention_mask: torch.Tensor,
    extra: dict[str, torch.Tensor],
    groups: Sequence[Sequence[int]],
    *,
    mode: OcclusionMode,
    replacement_id: int | None = None,
    pad_id: int = 0,
) -> dict[str, torch.Tensor]:
    """Build the batch [1 + groups, n]: the sentence, then one copy per occluded group.

    Parameters
    ----------
    input_ids, attention_mask : tensor of shape (n,)
        One sentence (padding allowed; its mask values are carried along).
    extra : dict of tensors of shape (n,)
        Other per-token inputs (token_type_ids ...), occluded alongside.
    groups : sequence of sequences of int
        Piece positions forming each word.
    mode : {'remove', 'mask'}
        ``remove``: delete the pieces and shift the rest left, padding at the end
        (mask 0). ``mask``: replace every piece by ``replacement_id``.
    replacement_id : int, optional
        Needed for ``mask``.
    pad_id : int
        Id written into the freed positions when removing.

    Returns
    -------
    dict of tensors of shape (1 + len(groups), n)
        ``input_ids``, ``attention_mask`` and the extra inputs.
    """
    n = input_ids.shape[0]
    rows = 1 + len(groups)
    fields = {"input_ids": input_ids, "attention_mask": attention_mask, **extra}
    fill = {"input_ids": pad_id}
    out = {k: v.reshape(1, n).repeat(rows, 1) for k, v in fields.items()}
    if mode == "mask":
        if replacement_id is None:
            raise HeadcountError("occlusion by masking needs a mask or unknown token")
        for r, g in enumerate(groups, start=1):
            out["input_ids"][r, list(g)] = replacement_id
        return out
    if mode != "remove":
        raise HeadcountError(f"unknown occlusion mode '{mode}' (known: {', '.join(OCCLUSION_MODES)})")
    for r, g in enumerate(groups, start=1):
        keep = torch.ones(n, dtype=torch.bool)
        keep[list(g)] = False
        m = int(keep.sum())
        for k, v in fields.items():
            out[k][r, :m] = v[keep]
            out[k][r, m:] = fill.get(k, 0)
    return out


def _replacement(lm: LoadedModel) -> tuple[int, str]:
    tok = lm.tokenizer
    for attr in ("mask_token", "unk_token"):
        token = getattr(tok, attr, None)
        token_id = getattr(tok, f"{attr}_id", None)
        if token is not None and token_id is not None:
            return int(token_id), str(token)
    raise HeadcountError("this tokenizer has neither a mask nor an unknown token; use --occlusion remove")


def occlude_words(
    lm: LoadedModel,
    batch: Batch,
    groups: Sequence[Sequence[int]],
    mode: OcclusionMode = "remove",
    on_rows: RowsReport | None = None,
) -> Occlusion:
    """Leave-one-word-out occlusion of one sentence, all copies batched.

    Parameters
    ----------
    lm : LoadedModel
        A sentence classifier.
    batch : Batch
        One sentence.
    groups : sequence of sequences of int
        Piece positions of each word (see :func:`inspector.checkpoint.tokens.word_groups`).
    mode : {'remove', 'mask'}, default 'remove'
        Remove the word's pieces, or replace each by the mask token (the
        unknown token when the tokenizer has no mask token).
    on_rows : callable(done, total), optional
        Called after each forward pass with the copies evaluated so far (the intact
        sentence counts as one); an exception it raises stops the work.

    Returns
    -------
    Occlusion
        ``drop(k)[g] = p_k(x) - p_k(x without word g)``; also the drop of the
        log-odds ``log(p_k / (1 - p_k))`` and of a logit gap ``z_k - z_j``.

    References
    ----------
    Zeiler & Fergus (2014), "Visualizing and Understanding Convolutional
    Networks" (occlusion sensitivity); for words: Li, Monroe & Jurafsky (2016),
    "Understanding Neural Networks through Representation Erasure".
    """
    if batch.input_ids.shape[0] != 1:
        raise ValueError("occlusion works on one sentence at a time")
    replacement_id, replacement = _replacement(lm) if mode == "mask" else (None, None)
    pad_id = getattr(lm.tokenizer, "pad_token_id", None) or 0
    rows = occluded_rows(
        batch.input_ids[0],
        batch.attention_mask[0],
        {k: v[0] for k, v in batch.extra.items()},
        groups,
        mode=mode,
        replacement_id=replacement_id,
        pad_id=pad_id,
    )
    total, length = rows["input_ids"].shape
    per_pass = max(1, min(OCCLUSION_ROWS_PER_PASS, OCCLUSION_TOKENS_PER_PASS // max(1, length)))
    logits = []
    with torch.no_grad():
        for start in range(0, total, per_pass):
            part = {k: v[start : start + per_pass] for k, v in rows.items()}
            logits.append(lm.model(**part).logits)
            if on_rows is not None:
                on_rows(min(start + per_pass, total), total)
    z = torch.cat(logits).numpy().astype(np.float64)
    probs = softmax(z)
    return Occlusion(
        mode=mode,
        replacement=replacement,
        probabilities=probs[0],
        occluded=probs[1:],
        logits=z[0],
        occluded_logits=z[1:],
    )
