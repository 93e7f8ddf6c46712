"""Corpus evaluation numbers against scikit-learn and against transformers' own predictions."""

from __future__ import annotations

import numpy as np
import pytest
import torch
from sklearn.metrics import accuracy_score, confusion_matrix, f1_score, precision_recall_fscore_support

from inspector.corpus.run import Evaluation, scan
from tests.corpus_models import INTENTS, load_with_set, shared_minilm_classifier


@pytest.fixture(scope="module")
def minilm_classifier(tmp_path_factory):
    return load_with_set(shared_minilm_classifier(), tmp_path_factory.mktemp("data"))


def _sklearn_check(ev: Evaluation, y_true: np.ndarray, y_pred: np.ndarray) -> None:
    labels = list(range(len(ev.labels)))
    assert ev.accuracy == pytest.approx(accuracy_score(y_true, y_pred), abs=1e-12)
    assert ev.macro_f1 == pytest.approx(f1_score(y_true, y_pred, average="macro", zero_division=0), abs=1e-12)
    np.testing.assert_array_equal(ev.confusion, confusion_matrix(y_true, y_pred, labels=labels))
    p, r, f, s = precision_recall_fscore_support(y_true, y_pred, labels=labels, zero_division=0)
    got = ev.per_intent
    np.testing.assert_allclose([g.precision for g in got], p, atol=1e-12)
    np.testing.assert_allclose([g.recall for g in got], r, atol=1e-12)
    np.testing.assert_allclose([g.f1 for g in got], f, atol=1e-12)
    np.testing.assert_array_equal([g.support for g in got], s)


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_scores_from_confusion_match_sklearn_on_random_predictions(seed):
    """Accuracy, macro-F1, per-label precision/recall/F1/support and the confusion matrix.

    Reference: scikit-learn's accuracy_score, f1_score(average='macro'),
    precision_recall_fscore_support and confusion_matrix on the same predictions;
    labels that never occur (seed-dependent) test the zero-division and label-set rules.
    """
    rng = np.random.default_rng(seed)
    n_labels = 6
    y_true = rng.integers(0, n_labels - 1, size=200)  # label 5 never gold
    y_pred = np.where(rng.random(200) < 0.6, y_true, rng.integers(0, n_labels - 2 + seed % 2, size=200))
    cm = np.zeros((n_labels, n_labels), dtype=np.int64)
    np.add.at(cm, (y_true, y_pred), 1)
    ev = Evaluation([f"l{i}" for i in range(n_labels)], cm, y_pred, np.ones(200), [])
    _sklearn_check(ev, y_true, y_pred)


def test_scan_predictions_match_transformers_and_scores_match_sklearn(minilm_classifier):
    """The scan's predictions are the model's, and its scores equal scikit-learn's on them.

    Reference: transformers' BertForSequenceClassification run on each sentence alone
    (all-MiniLM-L6-v2 encoder + seeded head; no padding) for the predictions and
    probabilities; scikit-learn for accuracy, macro-F1 and the confusion matrix.
    """
    lm, data = minilm_classifier
    result = scan(lm, data, batch_size=4, js_rows=16)
    ev = result.evaluation
    probs = []
    with torch.no_grad():
        for text in data.texts:
            enc = lm.tokenizer(text, return_tensors="pt")
            probs.append(torch.softmax(lm.model(**enc).logits[0].double(), -1).numpy())
    probs = np.array(probs)
    y_pred = probs.argmax(1)
    y_true = np.array([INTENTS.index(lab) for lab in data.labels])
    np.testing.assert_array_equal(ev.predicted, y_pred)
    np.testing.assert_allclose(ev.confidence, probs.max(1), atol=1e-5)
    assert len(set(y_pred)) > 1, "the seeded head should not predict one label only"
    _sklearn_check(ev, y_true, y_pred)
    wrong = np.flatnonzero(y_pred != y_true)
    assert len(ev.misfires) == len(wrong)
    conf = [m.confidence for m in ev.misfires]
    assert conf == sorted(conf, reverse=True)
    assert {m.row for m in ev.misfires} == {data.rows[i] for i in wrong}
    first = ev.misfires[0]
    assert first.predicted != first.expected and first.text in data.texts
