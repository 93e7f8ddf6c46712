"""Tokenise an evaluation set once and serve it as length-sorted, padded batches.

Token ids are kept as one flat int32 array plus offsets (about four bytes per
token), so repeated passes (importance, every pruning step) pad from memory
instead of tokenising again. Batches are cut from the utterances sorted by
token count, which keeps padding (wasted work) small. Padding is on the right.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import torch

from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.tokens import structural_ids
from inspector.errors import HeadcountError

_TOKENISE_CHUNK = 1024


def length_limit(lm: LoadedModel) -> int:
    """The longest input the model takes: its position table, at most 512 (see ``LoadedModel.max_tokens``)."""
    return lm.max_tokens


@dataclass
class PaddedBatch:
    """One padded batch of utterances and its masks."""

    index: np.ndarray
    """[batch] positions of the utterances in the set."""
    inputs: dict[str, torch.Tensor]
    """Model inputs (input_ids, attention_mask and token_type_ids when the model has them)."""
    mask: torch.Tensor
    """[batch, tokens] bool, True for real tokens."""
    special: torch.Tensor
    """[batch, tokens] bool, True for structural tokens ([CLS], [SEP] ...; not [UNK])."""


@dataclass
class EncodedSet:
    """Token ids of every utterance, ready to be batched."""

    ids: np.ndarray
    """Flat int32 token ids of all utterances, one after another."""
    offsets: np.ndarray
    """[n + 1] start of each utterance in ``ids``."""
    pad_id: int
    special_ids: torch.Tensor
    type_ids: bool
    """Whether the model takes token_type_ids (all zero for single sentences)."""

    @property
    def lengths(self) -> np.ndarray:
        return np.diff(self.offsets)

    def __len__(self) -> int:
        return len(self.offsets) - 1

    def sorted_batches(self, batch_size: int, subset: Sequence[int] | None = None) -> list[np.ndarray]:
        """Utterance indices cut into batches after a stable sort by token count."""
        if batch_size < 1:
            raise HeadcountError("the batch size must be at least 1")
        pool = np.arange(len(self)) if subset is None else np.asarray(subset, dtype=np.int64)
        order = pool[np.argsort(self.lengths[pool], kind="stable")]
        return [order[i : i + batch_size] for i in range(0, len(order), batch_size)]

    def batch(self, index: np.ndarray) -> PaddedBatch:
        """Pad the utterances at ``index`` to their longest length."""
        lengths = self.lengths[index]
        width = int(lengths.max())
        real = np.arange(width)[None, :] < lengths[:, None]
        where = np.minimum(self.offsets[index][:, None] + np.arange(width)[None, :], len(self.ids) - 1)
        ids = np.where(real, self.ids[where], self.pad_id).astype(np.int64)
        input_ids = torch.from_numpy(ids)
        mask = torch.from_numpy(real)
        inputs = {"input_ids": input_ids, "attention_mask": mask.long()}
        if self.type_ids:
            inputs["token_type_ids"] = torch.zeros_like(input_ids)
        special = torch.isin(input_ids, self.special_ids) & mask
        return PaddedBatch(index=np.asarray(index), inputs=inputs, mask=mask, special=special)


def encode_set(lm: LoadedModel, texts: Sequence[str]) -> EncodedSet:
    """Tokenise ``texts`` (truncated to the model's length limit) without padding.

    Parameters
    ----------
    lm : LoadedModel
    texts : sequence of str

    Returns
    -------
    EncodedSet
    """
    tok = lm.tokenizer
    limit = length_limit(lm)
    chunks: list[np.ndarray] = []
    lengths: list[int] = []
    type_ids = False
    for start in range(0, len(texts), _TOKENISE_CHUNK):
        enc = tok(list(texts[start : start + _TOKENISE_CHUNK]), truncation=True, max_length=limit)
        type_ids = type_ids or ("token_type_ids" in enc and "token_type_ids" in lm.input_names)
        for row in enc["input_ids"]:
            chunks.append(np.asarray(row, dtype=np.int32))
            lengths.append(len(row))
    offsets = np.zeros(len(lengths) + 1, dtype=np.int64)
    np.cumsum(lengths, out=offsets[1:])
    pad = tok.pad_token_id if tok.pad_token_id is not None else 0
    return EncodedSet(
        ids=np.concatenate(chunks) if chunks else np.zeros(0, np.int32),
        offsets=offsets,
        pad_id=int(pad),
        special_ids=torch.tensor(sorted(structural_ids(tok)), dtype=torch.long),
        type_ids=type_ids,
    )
