"""[UNK] is content: an emoji the vocabulary lacks is counted, shown and explained like any other word."""

from __future__ import annotations

import numpy as np
import pytest
import torch

from inspector.checkpoint.capture import encode
from inspector.checkpoint.loader import load_checkpoint
from inspector.checkpoint.tokens import make_view, structural_ids
from inspector.corpus.batching import encode_set
from inspector.explanation.explain import explain_sentence
from inspector.explanation.gradients import baseline_embeddings, word_embeddings
from inspector.measures.analysis import analyze_sentence
from tests.corpus_models import shared_minilm_classifier

TEXT = "is my dog allowed on the evening ferry \U0001f415"
WITHOUT = "is my dog allowed on the evening ferry"


@pytest.fixture(scope="module")
def lm():
    return load_checkpoint(shared_minilm_classifier())


def test_the_emoji_becomes_unk_and_unk_is_not_special(lm):
    """WordPiece maps the dog emoji to [UNK]; only [CLS] and [SEP] are special.

    Reference: the all-MiniLM-L6-v2 tokenizer itself (its vocab has no emoji) and its own
    cls/sep/unk token ids.
    """
    tok = lm.tokenizer
    ids = tok(TEXT)["input_ids"]
    assert tok.unk_token_id in ids
    assert structural_ids(tok) >= {tok.cls_token_id, tok.sep_token_id}
    assert tok.unk_token_id not in structural_ids(tok)
    batch = encode(lm, [TEXT])
    unk = batch.tokens[0].index(tok.unk_token)
    assert not batch.special[0][unk] and batch.word_ids[0][unk] is not None
    assert batch.special[0].sum() == 2
    encoded = encode_set(lm, [TEXT])
    padded = encoded.batch(np.arange(1))
    assert padded.special[0].tolist() == batch.special[0].tolist()
    words = make_view(batch.tokens[0], batch.special[0], batch.word_ids[0], words=True, drop_special=True)
    assert words.labels[-1] == tok.unk_token


def test_special_share_counts_structural_tokens_only(lm):
    """special_share = mean over queries of the weight on [CLS] and [SEP], [UNK] excluded.

    Reference: Clark et al. 2019, sec. 3 (attention to [CLS] and [SEP]), evaluated with numpy on
    transformers' own eager ``output_attentions`` for the sentence.
    """
    tok = lm.tokenizer
    enc = tok(TEXT, return_tensors="pt")
    with torch.no_grad():
        ref = torch.cat(lm.model(**enc, output_attentions=True).attentions).numpy()  # [layers, heads, n, n]
    ids = enc["input_ids"][0].tolist()
    structural = np.array([i in (tok.cls_token_id, tok.sep_token_id) for i in ids])
    unk = np.array([i == tok.unk_token_id for i in ids])
    expected = ref[..., structural].sum(-1).mean(-1)
    got = analyze_sentence(lm, TEXT).head_metrics.special_share
    np.testing.assert_allclose(got, expected, atol=1e-6)
    with_unk = ref[..., structural | unk].sum(-1).mean(-1)
    assert np.abs(with_unk - expected).max() > 1e-3  # counting [UNK] as special would differ


def test_the_emoji_word_is_explained_and_occluded_like_any_word(lm):
    """The [UNK] word appears in the explanation; its occlusion is the sentence without the emoji.

    Reference: leave-one-word-out by hand (Li, Monroe & Jurafsky 2016): transformers' probabilities
    for the sentence with and without the emoji, tokenised separately; Sundararajan et al. 2017 for the
    baseline (the [UNK] position takes the pad embedding like every content token).
    """
    ex = explain_sentence(lm, TEXT, steps=16)
    assert ex.words[-1] == lm.tokenizer.unk_token
    with torch.no_grad():
        full = torch.softmax(lm.model(**lm.tokenizer(TEXT, return_tensors="pt")).logits[0].double(), -1)
        without = torch.softmax(lm.model(**lm.tokenizer(WITHOUT, return_tensors="pt")).logits[0].double(), -1)
    for ev in ex.labels:
        assert len(ev.occlusion) == len(ex.words)
        assert ev.occlusion[-1] == pytest.approx(float(full[ev.index] - without[ev.index]), abs=1e-6)
        assert ev.integrated_gradients.attributions[-1] != 0.0
    batch = encode(lm, [TEXT])
    base, used = baseline_embeddings(lm, batch, "pad")
    unk = batch.tokens[0].index(lm.tokenizer.unk_token)
    pad = word_embeddings(lm, torch.tensor([lm.tokenizer.pad_token_id]))[0]
    assert (
        used == "pad"
        and torch.equal(base[unk], pad)
        and torch.equal(base[0], word_embeddings(lm, batch.input_ids)[0][0])
    )
