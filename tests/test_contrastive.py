"""Sharper evidence on misfires: occlusion as a change of log-odds, and the contrast predicted - expected.

Checked against the transformers library's own forward passes on the bundled
sample classifier (loaded independently of Headcount's loader), and against
the completeness axiom of Integrated Gradients.
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
import torch
import transformers

from inspector.checkpoint.loader import load_checkpoint
from inspector.cli.main import main
from inspector.explanation.explain import explain_sentence
from inspector.explanation.gradients import integrate_path
from inspector.explanation.occlusion import log_odds
from inspector.paths import SAMPLE_EVAL, SAMPLE_MODEL, sample_model_available

pytestmark = pytest.mark.skipif(not sample_model_available(), reason="the bundled sample model is missing")


@pytest.fixture(scope="module")
def sample():
    return load_checkpoint(SAMPLE_MODEL)


@pytest.fixture(scope="module")
def reference():
    """The same checkpoint, loaded by transformers itself (eager attention, CPU, eval mode)."""
    model = transformers.AutoModelForSequenceClassification.from_pretrained(
        str(SAMPLE_MODEL), local_files_only=True, attn_implementation="eager"
    )
    tok = transformers.AutoTokenizer.from_pretrained(str(SAMPLE_MODEL), local_files_only=True)
    return model.eval(), tok


@pytest.fixture(scope="module")
def misfires(reference) -> list[tuple[str, str]]:
    """The first two evaluation sentences (of the first 200) the sample model gets wrong: (text, expected)."""
    model, tok = reference
    with SAMPLE_EVAL.open(newline="", encoding="utf-8") as fh:
        rows = [row for _, row in zip(range(200), csv.DictReader(fh))]
    enc = tok([r["text"] for r in rows], padding=True, return_tensors="pt")
    with torch.no_grad():
        predicted = model(**enc).logits.argmax(-1).tolist()
    found = [
        (r["text"], r["label"]) for r, k in zip(rows, predicted) if model.config.id2label[k] != r["label"]
    ][:2]
    assert found, "the sample model has no misfire in its evaluation set"
    return found


def _probabilities(model, ids: list[int]) -> np.ndarray:
    with torch.no_grad():
        logits = model(input_ids=torch.tensor([ids])).logits[0].double()
    return torch.softmax(logits, -1).numpy()


def test_contrastive_ig_is_complete(sample, reference, misfires):
    """Contrastive IG attributions sum to gap(x) - gap(x') within 1 %, gap = logit_pred - logit_exp,
    with 24 fixed steps and with the steps chosen adaptively (the default).

    Reference: Sundararajan, Taly & Yan (2017), "Axiomatic Attribution for Deep Networks", completeness
    axiom; gap(x) and gap(x') computed here by transformers' own forward on the word embeddings of the
    input and of the pad-token baseline (special tokens kept).
    """
    model, tok = reference
    for (text, expected), steps in [(m, s) for m in misfires for s in (24, None)]:
        ex = explain_sentence(sample, text, expected=expected, steps=steps)
        c = ex.contrast
        assert c is not None and c.predicted == ex.prediction.label and c.expected == expected
        enc = tok(text, return_tensors="pt")
        ids = enc["input_ids"]
        emb = model.get_input_embeddings()
        with torch.no_grad():
            x = emb(ids)
            special = torch.tensor(
                tok.get_special_tokens_mask(ids[0].tolist(), already_has_special_tokens=True)
            )
            pad = emb(torch.tensor([[tok.pad_token_id]]))[0, 0]
            baseline = torch.where(special.bool()[None, :, None], x, pad)
            k_p, k_e = model.config.label2id[c.predicted], model.config.label2id[expected]
            z_x = model(inputs_embeds=x, attention_mask=enc["attention_mask"]).logits[0].double()
            z_b = model(inputs_embeds=baseline, attention_mask=enc["attention_mask"]).logits[0].double()
        target = float((z_x[k_p] - z_x[k_e]) - (z_b[k_p] - z_b[k_e]))
        total = float(c.integrated_gradients.token_attributions.sum())
        assert abs(target) > 0.1
        assert abs(total - target) <= 0.01 * abs(target)
        assert np.isclose(c.gap, float(z_x[k_p] - z_x[k_e]), atol=1e-4)
        # the word attributions are the token attributions summed per word
        assert np.isclose(c.integrated_gradients.attributions.sum(), total, atol=1e-6)


def test_contrastive_ig_equals_ig_of_the_gap_itself(sample, misfires):
    """IG of the difference taken as its own output equals the difference of the two labels' IG.

    Reference: Sundararajan, Taly & Yan (2017), linearity axiom (IG of a*f1 + b*f2 = a*IG(f1) + b*IG(f2)).
    """
    from inspector.checkpoint import capture
    from inspector.explanation.gradients import _embeds_inputs, baseline_embeddings, word_embeddings

    text, expected = misfires[0]
    ex = explain_sentence(sample, text, expected=expected, steps=16)
    batch = capture.encode(sample, [text])
    x = word_embeddings(sample, batch.input_ids)[0]
    x0, _ = baseline_embeddings(sample, batch, "pad")
    k_p, k_e = sample.labels.index(ex.prediction.label), sample.labels.index(expected)

    def gap(embeds: torch.Tensor) -> torch.Tensor:
        z = sample.model(**_embeds_inputs(batch, embeds)).logits
        return (z[:, k_p] - z[:, k_e])[:, None]

    direct = integrate_path(gap, x, x0, [0], steps=16)
    np.testing.assert_allclose(
        direct.attributions[0], ex.contrast.integrated_gradients.token_attributions, rtol=1e-3, atol=1e-4
    )


def test_log_odds_occlusion_matches_transformers(sample, reference, misfires):
    """Log-odds occlusion = log(p/(1-p)) of the intact sentence minus that of the sentence without the word.

    Reference: probabilities from transformers' own forward on the token ids with the word's pieces removed
    (the 'remove' occlusion), log-odds computed here as log(p / (1 - p)).
    """
    model, tok = reference
    for text, expected in misfires:
        ex = explain_sentence(sample, text, expected=expected, steps=4)
        ids = tok(text)["input_ids"]
        p0 = _probabilities(model, ids)
        for ev in ex.labels:
            k = model.config.label2id[ev.label]
            before = np.log(p0[k] / (1 - p0[k]))
            for g, pieces in enumerate(ex.word_groups):
                kept = [t for i, t in enumerate(ids) if i not in set(pieces)]
                p1 = _probabilities(model, kept)
                after = np.log(p1[k] / (1 - p1[k]))
                assert np.isclose(ev.occlusion_log_odds[g], before - after, rtol=1e-4, atol=1e-4)
                assert np.isclose(ev.occlusion[g], p0[k] - p1[k], atol=1e-5)
        # the contrast's occlusion is the drop of log(p_pred / p_exp)
        k_p, k_e = model.config.label2id[ex.prediction.label], model.config.label2id[expected]
        g = int(np.argmax(np.abs(ex.contrast.occlusion)))
        kept = [t for i, t in enumerate(ids) if i not in set(ex.word_groups[g])]
        p1 = _probabilities(model, kept)
        want = np.log(p0[k_p] / p0[k_e]) - np.log(p1[k_p] / p1[k_e])
        assert np.isclose(ex.contrast.occlusion[g], want, rtol=1e-4, atol=1e-4)


def test_log_odds_stays_finite_where_the_probability_saturates():
    """log_odds from logits keeps resolving confident predictions that a probability rounds to 1.

    Reference: closed form: for two labels log(p/(1-p)) = z_1 - z_0 exactly; float64 rounds p to 1 past
    a gap of about 37.
    """
    z = np.array([[0.0, 5.0], [0.0, 40.0], [0.0, 45.0]])
    np.testing.assert_allclose(log_odds(z, 1), [5.0, 40.0, 45.0])
    three = np.array([1.0, 2.0, 3.0])
    p = np.exp(three) / np.exp(three).sum()
    assert np.isclose(log_odds(three, 2), np.log(p[2] / (1 - p[2])))


def test_cli_json_carries_log_odds_and_the_contrast(capsys, misfires):
    """``explain --json`` on a misfire holds occlusion_log_odds per label and a complete contrast member.

    Reference: the stable JSON names documented in README (contrast: predicted, expected, logit_gap, ...);
    completeness as above (Sundararajan et al. 2017).
    """
    text, expected = misfires[0]
    argv = ["explain", str(SAMPLE_MODEL), "--text", text, "--steps", "16", "--json"]
    assert main([*argv, "--expected", expected]) == 0
    doc = json.loads(capsys.readouterr().out)
    n = len(doc["words"])
    for label in doc["labels"].values():
        assert len(label["occlusion_log_odds"]) == n
    c = doc["contrast"]
    assert (c["predicted"], c["expected"]) == (doc["prediction"]["label"], expected)
    assert (
        len(c["occlusion"]) == len(c["grad_rollout"]) == len(c["integrated_gradients"]["attributions"]) == n
    )
    ig = c["integrated_gradients"]
    assert abs(ig["completeness_error"]) <= 0.01 * abs(ig["logit_input"] - ig["logit_baseline"])
    assert set(c["faithfulness"]) == {"rollout", "value_weighted", "grad_rollout", "integrated_gradients"}
    assert main(argv) == 0
    assert json.loads(capsys.readouterr().out)["contrast"] is None  # no expected label: no contrast
