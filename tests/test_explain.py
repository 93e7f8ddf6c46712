"""Explain one misfire on real (small) checkpoints: IG completeness, attention gradients, occlusion, rewording, CLI."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
import scipy.stats
import torch
import transformers
from PIL import Image

from inspector.checkpoint import capture
from inspector.checkpoint.loader import load_checkpoint
from inspector.checkpoint.tokens import make_view
from inspector.cli.main import main
from inspector.errors import HeadcountError
from inspector.explanation.explain import explain_sentence
from inspector.explanation.gradients import attention_gradients, grad_weighted_rollout, integrated_gradients
from inspector.explanation.occlusion import occlude_words
from inspector.explanation.rewording import compare_rewording
from inspector.measures.analysis import softmax
from inspector.measures.metrics import head_metrics
from inspector.paths import SAMPLE_EVAL, SAMPLE_MODEL
from tests.families import CONFIGS, LABELS, build_checkpoint

SENTENCES = [
    "I need to cancel my crossing to Gullholm tomorrow",
    "can my dog come on the 18:40 boat?",
    "refund for the cancelled sailing please",
]


def _spread_classifier(folder: Path, tokenizer_dir: Path) -> Path:
    """A seeded random BERT classifier with a wide initialisation, so its logits differ clearly."""
    tok = transformers.AutoTokenizer.from_pretrained(str(tokenizer_dir), local_files_only=True)
    config = CONFIGS["bert"](len(tok))
    config.initializer_range = 0.2
    config.id2label = dict(enumerate(LABELS))
    config.label2id = {v: k for k, v in config.id2label.items()}
    torch.manual_seed(1)
    transformers.BertForSequenceClassification(config).save_pretrained(str(folder))
    tok.save_pretrained(str(folder))
    return folder


@pytest.fixture(scope="module")
def classifier_dir(tmp_path_factory, minilm_dir) -> Path:
    return _spread_classifier(tmp_path_factory.mktemp("spread"), minilm_dir)


@pytest.fixture(scope="module")
def classifier(classifier_dir):
    return load_checkpoint(classifier_dir)


@pytest.fixture(scope="module")
def sample():
    if not (SAMPLE_MODEL / "config.json").is_file():
        pytest.skip("the sample model sample_models/ferry_intents is not trained yet")
    return load_checkpoint(SAMPLE_MODEL)


def _sample_sentences(n: int) -> list[str]:
    import csv

    with SAMPLE_EVAL.open(newline="", encoding="utf-8") as fh:
        return [row["text"] for _, row in zip(range(n), csv.DictReader(fh))]


# ---------------------------------------------------------------------------
# Integrated Gradients
# ---------------------------------------------------------------------------


def _check_completeness(lm, texts, min_difference: float) -> int:
    checked = 0
    for text in texts:
        batch = capture.encode(lm, [text])
        labels = list(range(len(lm.labels)))
        integral, used = integrated_gradients(lm, batch, labels, steps=64)
        assert used == "pad"
        diff = integral.output_input - integral.output_baseline
        for k in labels:
            if abs(diff[k]) < min_difference:
                continue
            assert abs(integral.completeness_error[k]) <= 0.01 * abs(diff[k]), (text, k)
            checked += 1
        # the pad baseline keeps special tokens: their attribution is exactly 0
        np.testing.assert_array_equal(integral.attributions[:, batch.special[0]], 0.0)
    return checked


def test_ig_completeness_random_classifier(classifier):
    """Reference: Sundararajan et al. 2017, completeness axiom (sec. 3, Proposition 1):
    sum_i IG_i = F(x) - F(x'); must hold within 1% at 64 steps."""
    assert _check_completeness(classifier, SENTENCES, min_difference=0.05) >= 5


def test_ig_completeness_sample_model(sample):
    """Reference: Sundararajan et al. 2017, completeness axiom, on the bundled ferry intent model."""
    assert _check_completeness(sample, _sample_sentences(4), min_difference=0.5) >= 8


def test_ig_batched_equals_step_by_step_riemann(classifier):
    """Reference: Sundararajan et al. 2017, sec. 5 (path integral as a sum over alphas), computed here one alpha
    per forward pass with torch.autograd and trapezoid weights; and transformers' own logits for the end point."""
    lm = classifier
    batch = capture.encode(lm, [SENTENCES[1]])
    integral, _ = integrated_gradients(lm, batch, [0, 2], steps=9, rule="trapezoid", baseline="zero")
    emb = lm.model.get_input_embeddings()
    x = emb(batch.input_ids).detach()
    reference = np.zeros((2, x.shape[1]))
    alphas = np.linspace(0, 1, 9)
    weights = np.full(9, 1 / 8)
    weights[[0, -1]] = 1 / 16
    for a, w in zip(alphas, weights):
        point = (a * x).requires_grad_(True)
        with torch.enable_grad():
            logits = lm.model(inputs_embeds=point, attention_mask=batch.attention_mask, **batch.extra).logits
            for row, k in enumerate([0, 2]):
                (g,) = torch.autograd.grad(logits[0, k], point, retain_graph=True)
                reference[row] += w * (x * g)[0].sum(-1).numpy()
    np.testing.assert_allclose(integral.attributions, reference, rtol=1e-4, atol=1e-6)
    with torch.no_grad():
        direct = lm.model(**batch.model_inputs()).logits[0].numpy()
    np.testing.assert_allclose(integral.output_input, direct[[0, 2]], rtol=1e-5, atol=1e-5)


# ---------------------------------------------------------------------------
# Gradient w.r.t. attention
# ---------------------------------------------------------------------------


def test_attention_gradients_match_finite_differences(classifier_dir, monkeypatch):
    """Reference: central finite differences (f(A + eps E) - f(A - eps E)) / 2 eps in float64, with the
    perturbation injected into transformers' BERT eager attention, against our autograd gradients."""
    from transformers.models.bert import modeling_bert

    lm = load_checkpoint(classifier_dir)
    lm.model.double()
    layer_of = {id(p.attention): l for l, p in enumerate(lm.parts)}
    delta: dict[int, torch.Tensor] = {}

    def eager_with_delta(module, query, key, value, attention_mask, scaling=None, dropout=0.0, **kwargs):
        scores = torch.matmul(query, key.transpose(2, 3)) * (scaling or query.size(-1) ** -0.5)
        if attention_mask is not None:
            scores = scores + attention_mask
        weights = torch.softmax(scores, dim=-1)
        layer = layer_of[id(module)]
        if layer in delta:
            weights = weights + delta[layer]
        return torch.matmul(weights, value).transpose(1, 2).contiguous(), weights

    monkeypatch.setattr(modeling_bert, "eager_attention_forward", eager_with_delta)
    batch = capture.encode(lm, [SENTENCES[0]])
    labels = [1, 2]
    grads = attention_gradients(lm, batch, labels)
    n = batch.input_ids.shape[1]
    assert grads.gradients.shape == (2, lm.num_layers, lm.num_heads, n, n)

    def logits_with(layer: int, head: int, i: int, j: int, eps: float) -> np.ndarray:
        d = torch.zeros(1, lm.num_heads, n, n, dtype=torch.float64)
        d[0, head, i, j] = eps
        delta.clear()
        delta[layer] = d
        with torch.no_grad():
            out = lm.model(**batch.model_inputs()).logits[0].numpy()
        delta.clear()
        return out

    rng = np.random.default_rng(0)
    picks = [(1, 0, 0, 3), (0, 2, 4, 1), (1, 3, 0, n - 1), (1, 1, 5, 2)]  # last: non-CLS row of the top layer
    picks += [
        tuple(
            int(v) for v in np.unravel_index(np.argmax(np.abs(grads.gradients[0])), grads.gradients[0].shape)
        )
    ]
    picks += [
        (int(rng.integers(2)), int(rng.integers(4)), int(rng.integers(n)), int(rng.integers(n)))
        for _ in range(3)
    ]
    eps = 1e-6
    for layer, head, i, j in picks:
        numeric = (logits_with(layer, head, i, j, eps) - logits_with(layer, head, i, j, -eps)) / (2 * eps)
        for row, k in enumerate(labels):
            analytic = grads.gradients[row, layer, head, i, j]
            assert math.isclose(analytic, numeric[k], rel_tol=1e-5, abs_tol=1e-8), (layer, head, i, j, k)
    # the top layer's non-classification rows cannot reach the logits
    np.testing.assert_array_equal(grads.gradients[:, -1, :, 1:, :], 0.0)


def test_grad_rollout_in_explanation_uses_recorded_gradients(classifier):
    """Reference: Chefer et al. 2021 update rule applied to the recorded attention and gradients (consistency)."""
    ex = explain_sentence(classifier, SENTENCES[0], expected=LABELS[2])
    batch = capture.encode(classifier, [SENTENCES[0]])
    grads = attention_gradients(classifier, batch, [ev.index for ev in ex.labels])
    for k, ev in enumerate(ex.labels):
        row = grad_weighted_rollout(grads.attention, grads.gradients[k])[0]
        np.testing.assert_allclose(ev.grad_rollout_tokens, row, rtol=1e-6, atol=1e-9)
        assert ev.grad_rollout_tokens[0] >= 1.0  # the identity's share of the classification token itself


# ---------------------------------------------------------------------------
# Occlusion
# ---------------------------------------------------------------------------


def test_occluding_an_invisible_piece_changes_nothing(classifier_dir):
    """Reference: masked keys get zero attention (Vaswani et al. 2017, masking) and, with position embeddings
    zeroed, BERT is permutation-equivariant, so deleting or replacing a masked-out piece anywhere must leave
    every probability unchanged, while deleting a visible piece changes them."""
    lm = load_checkpoint(classifier_dir)
    with torch.no_grad():
        lm.model.bert.embeddings.position_embeddings.weight.zero_()
    tok = lm.tokenizer
    pieces = tok.convert_tokens_to_ids(["cancel", "my", "ferry", "tomorrow", "please"])
    ids = torch.tensor([[tok.cls_token_id, *pieces, tok.sep_token_id]])
    mask = torch.tensor([[1, 1, 1, 0, 1, 1, 1]])  # "ferry" (position 3) is invisible
    batch = capture.Batch(
        input_ids=ids,
        attention_mask=mask,
        tokens=[tok.convert_ids_to_tokens(ids[0].tolist())],
        special=[np.array([True, False, False, False, False, False, True])],
        word_ids=[[None, 0, 1, 2, 3, 4, None]],
        real_index=[np.arange(7)],
        extra={"token_type_ids": torch.zeros_like(ids)},
    )
    groups = [[1], [2], [3], [4], [5]]
    for mode in ("remove", "mask"):
        occ = occlude_words(lm, batch, groups, mode)
        for k in range(len(LABELS)):
            drops = occ.drop(k)
            assert abs(drops[2]) < 1e-6, (mode, k, drops)
        visible = np.abs(np.stack([occ.drop(k) for k in range(len(LABELS))]))[:, [0, 1, 3, 4]]
        assert visible.max(0).min() > 1e-4, (mode, visible)


def test_occlusion_equals_the_model_on_the_shortened_sentence(classifier):
    """Reference: transformers' forward on the tokenizer's encoding of the sentence with the word deleted
    (remove) or written as the mask token (mask)."""
    lm = classifier
    words = "please cancel my crossing to gullholm".split()
    batch = capture.encode(lm, [" ".join(words)])
    view = make_view(batch.tokens[0], batch.special[0], batch.word_ids[0], words=True, drop_special=True)
    assert view.labels == words
    removed = occlude_words(lm, batch, view.groups, "remove")
    masked = occlude_words(lm, batch, view.groups, "mask")
    assert masked.replacement == "[MASK]"
    for g in (1, 5):
        for mode, occ, edited in (
            ("remove", removed, words[:g] + words[g + 1 :]),
            ("mask", masked, words[:g] + ["[MASK]"] * len(view.groups[g]) + words[g + 1 :]),
        ):
            enc = lm.tokenizer(" ".join(edited), return_tensors="pt")
            with torch.no_grad():
                ref = softmax(lm.model(**enc).logits[0].numpy())
            np.testing.assert_allclose(occ.occluded[g], ref, atol=1e-6, err_msg=mode)
    assert len(view.groups[5]) > 1  # "gullholm" is several pieces: all of them are occluded together


def test_occlusion_in_several_passes_reports_progress_and_equals_the_model(classifier, monkeypatch):
    """Reference: transformers' forward on the tokenizer's encoding of the sentence with each word deleted,
    when the copies go through the model two at a time (long sentences) and each pass is reported."""
    from inspector.explanation import occlusion

    lm = classifier
    words = "please cancel my crossing to gullholm".split()
    batch = capture.encode(lm, [" ".join(words)])
    view = make_view(batch.tokens[0], batch.special[0], batch.word_ids[0], words=True, drop_special=True)
    monkeypatch.setattr(occlusion, "OCCLUSION_TOKENS_PER_PASS", 2 * batch.input_ids.shape[1])
    seen: list[tuple[int, int]] = []
    occ = occlude_words(
        lm, batch, view.groups, "remove", on_rows=lambda done, total: seen.append((done, total))
    )
    total = 1 + len(words)
    assert seen == [(min(k, total), total) for k in range(2, total + 2, 2)]
    for g in range(len(words)):
        enc = lm.tokenizer(" ".join(words[:g] + words[g + 1 :]), return_tensors="pt")
        with torch.no_grad():
            ref = softmax(lm.model(**enc).logits[0].numpy())
        np.testing.assert_allclose(occ.occluded[g], ref, atol=1e-6)


def test_explanation_reports_its_stages_and_stops_when_told(classifier, monkeypatch):
    """The stages come in order and end with every word occluded; an exception raised by the callback
    stops the explanation (identity, no source needed)."""
    from inspector.explanation import occlusion
    from inspector.explanation.explain import ExplanationStopped

    monkeypatch.setattr(occlusion, "OCCLUSION_TOKENS_PER_PASS", 1)  # one copy per pass
    steps: list[tuple[str, int, int]] = []
    ex = explain_sentence(classifier, SENTENCES[0], steps=8, on_step=lambda *a: steps.append(a))
    n = len(ex.words)
    assert [s for s, _, _ in steps[:3]] == ["attention gradients", "Integrated Gradients", "occlusion"]
    assert steps[-1] == ("occlusion", n, n)
    assert [d for s, d, _ in steps if s == "occlusion"] == sorted(d for s, d, _ in steps if s == "occlusion")

    def stop_in_occlusion(stage: str, done: int, _total: int) -> None:
        if stage == "occlusion" and done >= 2:
            raise ExplanationStopped("stopped")

    with pytest.raises(ExplanationStopped):
        explain_sentence(classifier, SENTENCES[0], steps=8, on_step=stop_in_occlusion)
    stages: list[str] = []
    compare_rewording(
        classifier, SENTENCES[0], "cancel it", steps=8, on_step=lambda stage, *_: stages.append(stage)
    )
    assert stages[0] == "original: attention gradients" and stages[-1] == "reworded: occlusion"


# ---------------------------------------------------------------------------
# The explanation and the rewording comparison
# ---------------------------------------------------------------------------


def test_explanation_contents(classifier):
    """Reference: scipy.stats.spearmanr for the faithfulness table; transformers' softmax output for p."""
    ex = explain_sentence(classifier, SENTENCES[0], expected=LABELS[0], steps=32)
    assert ex.words == [w.lower() for w in SENTENCES[0].split()]
    assert ex.labels[0].label == ex.prediction.label and "predicted" in ex.labels[0].roles
    assert ex.expected_evidence is not None and "expected" in ex.expected_evidence.roles
    assert ex.misfire == (ex.prediction.label != LABELS[0])
    m = len(ex.words)
    for ev in ex.labels:
        table = ev.relevances(ex)
        assert all(v.shape == (m,) for v in table.values())
        for method, rho in ev.faithfulness.items():
            ref = scipy.stats.spearmanr(table[method], ev.occlusion).statistic
            assert math.isclose(rho, float(ref), rel_tol=1e-9, abs_tol=1e-12)
        ig = ev.integrated_gradients
        assert (ig.steps, ig.rule, ig.baseline, ig.tolerance) == (32, "clenshaw-curtis", "pad", None)
        assert math.isclose(ig.attributions.sum(), ig.token_attributions.sum(), rel_tol=1e-9, abs_tol=1e-9)
        assert ev.probability == ex.prediction.probabilities[ev.label]
    assert set(ex.timings) >= {
        "analysis",
        "attention_gradients",
        "integrated_gradients",
        "occlusion",
        "total",
    }


def test_explain_refuses_what_it_cannot_explain(classifier, minilm):
    """Reference: the issue's rule: a bare encoder (no labels) gives a one-line error."""
    with pytest.raises(HeadcountError, match="bare encoder"):
        explain_sentence(minilm, "hello")
    with pytest.raises(HeadcountError, match="unknown label"):
        explain_sentence(classifier, "hello", expected="not_a_label")
    with pytest.raises(HeadcountError, match="empty"):
        explain_sentence(classifier, "   ")


def test_rewording_comparison(classifier):
    """Reference: inspector.measures.metrics.head_metrics on capture.run's attention of each sentence (computed apart),
    and difflib for the word alignment."""
    original, edited = "please cancel my crossing", "please change my crossing tomorrow"
    cmp = compare_rewording(classifier, original, edited, expected=LABELS[1], metric="special_share", top=4)
    cap = capture.run(classifier, [original, edited])
    before = head_metrics(cap.sentence(0), cap.batch.special[0]).special_share
    after = head_metrics(cap.sentence(1), cap.batch.special[1]).special_share
    np.testing.assert_allclose(cmp.metric_before, before, atol=1e-6)
    np.testing.assert_allclose(cmp.difference, after - before, atol=1e-6)
    changes = [abs(h.change) for h in cmp.top_heads]
    assert len(changes) == 4 and changes == sorted(changes, reverse=True)
    assert changes[0] == pytest.approx(np.abs(after - before).max(), abs=1e-6)
    for label in {cmp.original.prediction.label, cmp.edited.prediction.label, LABELS[1]}:
        assert label in cmp.labels
        cmp.original.evidence(label)
        cmp.edited.evidence(label)
    ops = [(c.op, c.original, c.edited) for c in cmp.word_changes if c.op != "equal"]
    assert ops == [("replace", (1, 2), (1, 2)), ("insert", (4, 4), (4, 5))]
    assert cmp.probability_shift(LABELS[1]) == pytest.approx(
        cmp.edited.prediction.probabilities[LABELS[1]] - cmp.original.prediction.probabilities[LABELS[1]]
    )


@pytest.mark.parametrize("family", sorted(CONFIGS))
def test_explain_runs_on_every_family(family, tmp_path, minilm_dir):
    """Reference: Sundararajan et al. 2017 completeness (absolute error) on each supported family."""
    lm = load_checkpoint(build_checkpoint(family, tmp_path / family, minilm_dir))
    ex = explain_sentence(lm, "can i take my van on the 9:15 ferry", steps=16)
    assert len(ex.words) >= 8
    for ev in ex.labels:
        ig = ev.integrated_gradients
        assert abs(ig.completeness_error) <= 0.02 * abs(ig.logit_difference) + 1e-6
        assert np.all(ev.grad_rollout >= 0)


# ---------------------------------------------------------------------------
# Command line and figures
# ---------------------------------------------------------------------------


def test_cli_json_schema(classifier_dir, capsys):
    """Reference: the JSON names promised in the issue (model, text, words, prediction, expected, per label:
    grad_rollout, integrated_gradients {attributions, baseline, steps, completeness_error}, occlusion,
    faithfulness {method: spearman})."""
    argv = ["explain", str(classifier_dir), "--text", SENTENCES[0], "--expected", LABELS[2], "--steps", "16"]
    assert main([*argv, "--json", "--occlusion", "mask"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert {"model", "text", "words", "prediction", "expected", "labels"} <= set(doc)
    assert doc["expected"] == LABELS[2] and doc["text"] == SENTENCES[0]
    assert doc["occlusion_mode"] == "mask" and doc["occlusion_replacement"] == "[MASK]"
    assert doc["prediction"]["label"] in doc["labels"] and LABELS[2] in doc["labels"]
    m = len(doc["words"])
    for entry in doc["labels"].values():
        ig = entry["integrated_gradients"]
        assert {"attributions", "baseline", "steps", "completeness_error"} <= set(ig)
        assert ig["steps"] == 16 and ig["baseline"] == "pad" and len(ig["attributions"]) == m
        assert len(entry["grad_rollout"]) == m and len(entry["occlusion"]) == m
        assert set(entry["faithfulness"]) == {
            "rollout",
            "value_weighted",
            "grad_rollout",
            "integrated_gradients",
        }


def test_cli_text_compare_and_figures(classifier_dir, capsys, tmp_path):
    """Reference: PNG/PDF/SVG magic numbers (PNG spec sec. 5.2; PDF 1.7 sec. 7.5.2; SVG 1.1) and Pillow."""
    base = ["explain", str(classifier_dir), "--text", "please cancel my crossing", "--steps", "8"]
    assert main([*base, "--compare", "please change my crossing", "--figure", str(tmp_path / "f.png")]) == 0
    out = capsys.readouterr().out
    assert "== rewording ==" in out and "Jain & Wallace 2019" in out and "completeness error" in out
    with Image.open(tmp_path / "f.png") as img:
        assert img.size[0] > 500 and img.size[1] > 300
    assert main([*base, "--figure", str(tmp_path / "f.pdf")]) == 0
    assert (tmp_path / "f.pdf").read_bytes().startswith(b"%PDF")
    assert main([*base, "--figure", str(tmp_path / "f.svg")]) == 0
    svg = (tmp_path / "f.svg").read_text()
    assert "<svg" in svg and "Wiegreffe" in svg
    assert not list(tmp_path.glob(".*.part"))


def test_cli_errors_are_one_line(classifier_dir, minilm_dir, capsys, tmp_path):
    """Reference: the project rule: user problems give one line on stderr and exit status 2."""
    cases = [
        ["explain", str(minilm_dir), "--text", "hello"],
        ["explain", str(classifier_dir), "--text", "hello", "--expected", "nope"],
        ["explain", str(classifier_dir), "--text", "hello", "--figure", str(tmp_path / "f.gif")],
        ["explain", str(classifier_dir), "--text", "hello", "--steps", "1"],
    ]
    for argv in cases:
        assert main(argv) == 2, argv
        err = capsys.readouterr().err
        assert err.startswith("headcount: error:") and err.count("\n") == 1, err
    assert not (tmp_path / "f.gif").exists()
