"""Comparing two checkpoints: identity, planted head surgery, scikit-learn and SciPy references, refusals."""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
import torch
import transformers
from scipy.spatial.distance import jensenshannon
from sklearn.metrics import accuracy_score, confusion_matrix, f1_score, precision_recall_fscore_support

from inspector.checkpoint.loader import load_checkpoint
from inspector.cli.main import main
from inspector.comparison.matching import cross_js_sum, sentence_matching
from inspector.comparison.pairing import check_comparable
from inspector.comparison.report import CHANGED_HEADER, HEAD_HEADER, INTENT_HEADER
from inspector.comparison.run import CorpusCancelled, compare_corpus
from inspector.comparison.sentence import compare_sentence
from inspector.comparison.settings import ComparisonSettings
from inspector.corpus.dataset import read_labelled
from inspector.errors import HeadcountError
from inspector.measures.metrics import METRIC_NAMES
from inspector.paths import SAMPLE_MODEL
from tests.compare_models import (
    PLANTED_LAYER,
    PLANTED_SOURCE,
    PLANTED_TARGET,
    exact_copy,
    other_shape_classifier,
    plant_copied_head,
)
from tests.corpus_models import (
    UTTERANCES,
    save_minilm_classifier,
    save_tiny_classifier,
    shared_minilm_classifier,
    write_csv,
)

EVERY_ROW = ComparisonSettings(batch_size=5, match_rows=None)
SENTENCE = "please call off the reservation I made for the 9am crossing on Friday"


@pytest.fixture(scope="module")
def folders(tmp_path_factory):
    root = tmp_path_factory.mktemp("compare")
    tiny = save_tiny_classifier(root / "tiny")
    minilm = shared_minilm_classifier()
    return {
        "root": root,
        "tiny": tiny,
        "tiny_copy": exact_copy(tiny, root / "tiny_copy"),
        "minilm": minilm,
        "minilm_other_head": save_minilm_classifier(root / "minilm_seed2", seed=2),
        "planted": plant_copied_head(minilm, root / "planted"),
        "other_shape": other_shape_classifier(root / "other_shape"),
        "csv": write_csv(root / "set.csv", UTTERANCES),
    }


def _pair(folders, a: str, b: str):
    lm_a, lm_b = load_checkpoint(folders[a]), load_checkpoint(folders[b])
    data = read_labelled(folders["csv"], known_labels=lm_a.labels)
    return lm_a, lm_b, data


def test_an_exact_copy_compares_as_identical(folders):
    """A checkpoint against a byte-for-byte copy: agreement 1, nothing fixed or broken, every change 0.

    Reference: identity (a deterministic model run twice on the same tokens gives the same
    numbers), no source needed.
    """
    lm_a, lm_b, data = _pair(folders, "tiny", "tiny_copy")
    report = compare_corpus(lm_a, lm_b, data, EVERY_ROW)
    assert report.agreement == 1.0
    assert report.fixed == [] and report.broken == []
    right = int(np.trace(report.evaluation_a.confusion))
    np.testing.assert_array_equal(report.table, [[right, 0], [0, len(data) - right]])
    m = report.matching
    assert (m.same_position == 0.0).all() and m.unchanged.all()
    assert m.rows_compared == m.rows_total == sum(len(lm_a.tokenizer(t)["input_ids"]) for t in data.texts)
    np.testing.assert_array_equal(m.best_match[..., 0], np.arange(2)[:, None].repeat(4, 1))
    np.testing.assert_array_equal(m.best_match[..., 1], np.arange(4)[None, :].repeat(2, 0))
    for name in METRIC_NAMES:
        assert (report.metric_delta(name) == 0.0).all()
    one = compare_sentence(lm_a, lm_b, SENTENCE)
    assert one.agree is True
    assert (one.matching.same_position == 0.0).all() and one.rollout_js == 0.0
    assert (one.rollout_js_by_layer == 0.0).all()
    for name in METRIC_NAMES:
        assert (one.metric_delta(name) == 0.0).all()


def test_a_planted_head_copy_is_found(folders):
    """One head's Q and K replaced by another head's of the same layer (all-MiniLM-L6-v2, random head).

    Layers before it are unchanged (0 to 1e-9); in its layer it has the largest same-position
    change (the other heads of the layer keep their weights and inputs); its best match in A
    is the head whose weights it copied, at 0 to 1e-6 bits.
    Reference: construction (identical Q, K and layer input give identical
    softmax(QK^T / sqrt d) rows in transformers' BERT attention, hence JS = 0; Lin 1991).
    """
    lm_a, lm_b, data = _pair(folders, "minilm", "planted")
    for matching in (
        compare_corpus(lm_a, lm_b, data, EVERY_ROW).matching,
        compare_sentence(lm_a, lm_b, SENTENCE).matching,
    ):
        same = matching.same_position
        assert same.shape == (6, 12)
        assert (same[:PLANTED_LAYER] <= 1e-9).all() and matching.unchanged[:PLANTED_LAYER].all()
        layer = same[PLANTED_LAYER]
        assert int(np.argmax(layer)) == PLANTED_TARGET
        assert layer[PLANTED_TARGET] > 0.01  # the check can fail: the head really changed
        assert np.delete(layer, PLANTED_TARGET).max() <= 1e-9
        assert tuple(matching.best_match[PLANTED_LAYER, PLANTED_TARGET]) == (PLANTED_LAYER, PLANTED_SOURCE)
        assert matching.best_js[PLANTED_LAYER, PLANTED_TARGET] <= 1e-6
        assert not matching.unchanged[PLANTED_LAYER + 1 :].any()  # later layers see a changed input


def _plain_predictions(folder, texts: list[str]) -> list[str]:
    model = transformers.AutoModelForSequenceClassification.from_pretrained(
        str(folder), local_files_only=True
    )
    tok = transformers.AutoTokenizer.from_pretrained(str(folder), local_files_only=True)
    model.eval()
    out = []
    with torch.no_grad():
        for text in texts:
            logits = model(**tok(text, return_tensors="pt")).logits[0]
            out.append(model.config.id2label[int(logits.argmax())])
    return out


def test_scores_fixed_and_broken_match_scikit_learn_and_a_plain_loop(folders):
    """Accuracy, macro-F1, agreement, the 2 x 2 table, fixed/broken and per-intent changes.

    Reference: a plain loop over transformers' own predictions (one sentence at a time) scored
    with scikit-learn's accuracy_score, f1_score(average='macro'), confusion_matrix and
    precision_recall_fscore_support.
    """
    lm_a, lm_b, data = _pair(folders, "minilm", "minilm_other_head")
    report = compare_corpus(lm_a, lm_b, data, ComparisonSettings(batch_size=4))
    gold = list(data.labels)
    pa = _plain_predictions(folders["minilm"], data.texts)
    pb = _plain_predictions(folders["minilm_other_head"], data.texts)
    assert report.evaluation_a.accuracy == pytest.approx(accuracy_score(gold, pa), abs=1e-12)
    assert report.evaluation_b.accuracy == pytest.approx(accuracy_score(gold, pb), abs=1e-12)
    assert report.evaluation_a.macro_f1 == pytest.approx(f1_score(gold, pa, average="macro"), abs=1e-12)
    assert report.evaluation_b.macro_f1 == pytest.approx(f1_score(gold, pb, average="macro"), abs=1e-12)
    assert report.agreement == pytest.approx(np.mean(np.array(pa) == np.array(pb)), abs=1e-12)
    right_a = np.array(pa) == np.array(gold)
    right_b = np.array(pb) == np.array(gold)
    table = confusion_matrix(~right_a, ~right_b, labels=[False, True])
    np.testing.assert_array_equal(report.table, table)
    fixed = {data.rows[i] for i in np.flatnonzero(~right_a & right_b)}
    broken = {data.rows[i] for i in np.flatnonzero(right_a & ~right_b)}
    assert fixed and broken  # this pair of random heads disagrees both ways: the check can fail
    assert {c.row for c in report.fixed} == fixed
    assert {c.row for c in report.broken} == broken
    for c in report.fixed + report.broken:
        i = data.rows.index(c.row)
        assert (c.predicted_a, c.predicted_b, c.label) == (pa[i], pb[i], gold[i])
    conf = [c.confidence_a for c in report.fixed]
    assert conf == sorted(conf, reverse=True)
    labels = sorted(set(gold))
    prec_a, rec_a, f1_a, support = precision_recall_fscore_support(gold, pa, labels=labels, zero_division=0)
    prec_b, rec_b, f1_b, _ = precision_recall_fscore_support(gold, pb, labels=labels, zero_division=0)
    by_label = {c.label: c for c in report.intents}
    for k, label in enumerate(labels):
        c = by_label[label]
        assert c.support == support[k]
        assert c.recall_delta == pytest.approx(rec_b[k] - rec_a[k], abs=1e-12)
        assert c.precision_delta == pytest.approx(prec_b[k] - prec_a[k], abs=1e-12)
        assert c.f1_delta == pytest.approx(f1_b[k] - f1_a[k], abs=1e-12)


def test_metric_deltas_match_transformers_attention(folders):
    """Mean per-head entropy change over the set, against transformers' own attention weights.

    Reference: transformers ``output_attentions=True`` (one sentence at a time, no padding) and
    the Shannon entropy -sum p ln p averaged over query rows (Shannon 1948), in NumPy.
    """
    lm_a, lm_b, data = _pair(folders, "minilm", "planted")
    report = compare_corpus(lm_a, lm_b, data, ComparisonSettings(batch_size=4))

    def mean_entropy(folder):
        model = transformers.AutoModelForSequenceClassification.from_pretrained(
            str(folder), local_files_only=True, attn_implementation="eager"
        )
        tok = transformers.AutoTokenizer.from_pretrained(str(folder), local_files_only=True)
        total = 0.0
        with torch.no_grad():
            for text in data.texts:
                att = np.stack(
                    [
                        a[0].numpy()
                        for a in model(**tok(text, return_tensors="pt"), output_attentions=True).attentions
                    ]
                )
                p = att.astype(np.float64)
                total = total + (-(p * np.log(np.where(p > 0, p, 1))).sum(-1)).mean(-1)
        return total / len(data)

    expected = mean_entropy(folders["planted"]) - mean_entropy(folders["minilm"])
    np.testing.assert_allclose(report.metric_delta("entropy"), expected, atol=1e-5)
    assert np.abs(expected).max() > 1e-3  # the planted head really moved the entropy


def test_divergences_match_scipy():
    """cross_js_sum and the sentence matching against scipy's Jensen-Shannon distance squared.

    Reference: ``scipy.spatial.distance.jensenshannon(p, q, base=2) ** 2`` (Lin 1991).
    """
    rng = np.random.default_rng(4)
    rows_a = rng.dirichlet(np.ones(9) * 0.4, size=(7, 3)).astype(np.float32)
    rows_b = rng.dirichlet(np.ones(9) * 0.4, size=(7, 5)).astype(np.float32)
    rows_b[:, 4] = rows_a[:, 1]  # identical rows: exactly 0
    sums = cross_js_sum(torch.from_numpy(rows_a), torch.from_numpy(rows_b)).numpy()
    expected = np.array(
        [
            [sum(jensenshannon(rows_b[r, j], rows_a[r, i], base=2) ** 2 for r in range(7)) for i in range(3)]
            for j in range(5)
        ]
    )
    np.testing.assert_allclose(sums, expected, atol=2e-6)
    assert sums[4, 1] == 0.0

    n = 6
    att_a = rng.dirichlet(np.ones(n), size=(2, 3, n)).astype(np.float32)
    att_b = rng.dirichlet(np.ones(n), size=(3, 2, n)).astype(np.float32)
    m = sentence_matching(att_a, att_b)
    for lb, hb, la, ha in ((0, 0, 0, 0), (2, 1, 1, 2), (1, 0, 0, 2)):
        want = np.mean([jensenshannon(att_b[lb, hb, i], att_a[la, ha, i], base=2) ** 2 for i in range(n)])
        assert m.js[lb * 2 + hb, la * 3 + ha] == pytest.approx(want, abs=2e-6)
    assert np.isnan(m.same_position[2]).all() and m.same_position.shape == (3, 2)


def test_different_tokenizers_are_refused_in_one_line(folders, capsys):
    """The sample model (its own WordPiece vocabulary) against a MiniLM-vocabulary model.

    Reference: the tracker issue's rule (same vocabulary and special tokens, else a one-line error).
    """
    lm_a, lm_b = load_checkpoint(SAMPLE_MODEL), load_checkpoint(folders["tiny"])
    with pytest.raises(HeadcountError) as err:
        check_comparable(lm_a, lm_b)
    text = str(err.value)
    assert "\n" not in text and "vocabularies differ" in text and "tokenizer" not in text.split(":")[0]
    code = main(["compare", str(SAMPLE_MODEL), str(folders["tiny"]), "--text", SENTENCE])
    assert code == 2
    lines = capsys.readouterr().err.strip().splitlines()
    assert len(lines) == 1 and "cannot compare" in lines[0] and "same vocabulary" in lines[0]


def test_models_of_different_shapes_still_compare(folders):
    """2 x 4 heads against 3 x 2 heads: the matching spans every pair; same-position values exist
    only where both models have the head (NaN / empty elsewhere).

    Reference: the tracker issue's rule for models of different sizes; common practice, no source.
    """
    lm_a, lm_b, data = _pair(folders, "tiny", "other_shape")
    report = compare_corpus(lm_a, lm_b, data, EVERY_ROW)
    m = report.matching
    assert m.js.shape == (3 * 2, 2 * 4)
    assert np.isnan(m.same_position[2]).all() and np.isfinite(m.same_position[:2]).all()
    assert np.isnan(report.metric_delta("entropy")[2]).all()
    assert (m.js >= 0).all() and (m.js <= 1).all()
    assert any("same-position values exist only" in n for n in report.notes)
    one = compare_sentence(lm_a, lm_b, SENTENCE)
    assert len(one.rollout_js_by_layer) == 2


def _read_csv(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.reader(fh))


def test_cli_writes_every_file_under_stable_names(folders, capsys):
    """``headcount compare A B DATA --out DIR`` and ``--text ... --json``.

    Reference: the file list and key names of the tracker issue; RFC 8259 (JSON) for parsing;
    PNG signature bytes and the SVG root element for the figures.
    """
    out = folders["root"] / "cli_out"
    a, b = str(folders["minilm"]), str(folders["minilm_other_head"])
    assert main(["compare", a, b, str(folders["csv"]), "--out", str(out), "--quiet", "--no-figures"]) == 0
    text = capsys.readouterr().out
    assert "fixed (wrong in A, right in B)" in text and "agreement" in text
    doc = json.loads((out / "comparison.json").read_text(encoding="utf-8"))
    for key in ("model_a", "model_b", "accuracy_a", "accuracy_b", "macro_f1_a", "macro_f1_b", "agreement"):
        assert key in doc
    assert doc["fixed"] and doc["broken"]
    for item in doc["fixed"] + doc["broken"]:
        assert set(item) == set(CHANGED_HEADER)
    assert len(doc["heads"]) == 6 * 12
    for head in doc["heads"]:
        assert {
            "layer",
            "head",
            "js_same_position",
            "best_match_layer",
            "best_match_head",
            "js_best_match",
        } <= set(head)
        assert {f"{n}_delta" for n in METRIC_NAMES} <= set(head)
    fixed = _read_csv(out / "fixed.csv")
    assert tuple(fixed[0]) == CHANGED_HEADER and len(fixed) == 1 + len(doc["fixed"])
    assert tuple(_read_csv(out / "broken.csv")[0]) == CHANGED_HEADER
    heads = _read_csv(out / "head_changes.csv")
    assert tuple(heads[0]) == HEAD_HEADER and len(heads) == 1 + 72
    assert tuple(_read_csv(out / "intent_changes.csv")[0]) == INTENT_HEADER
    assert not list(out.glob("*.png"))

    assert main(["compare", a, str(folders["planted"]), "--text", SENTENCE, "--json"]) == 0
    one = json.loads(capsys.readouterr().out)
    assert one["agree"] in (True, False) and one["prediction_a"]["label"]
    row = one["heads"][PLANTED_LAYER * 12 + PLANTED_TARGET]
    assert (row["best_match_layer"], row["best_match_head"]) == (PLANTED_LAYER, PLANTED_SOURCE)
    assert one["heads"][0]["unchanged"] is True


def strict_json(text: str):
    """Parse ``text`` as standard JSON: the non-standard constants NaN, Infinity and -Infinity fail the test."""
    return json.loads(text, parse_constant=lambda name: pytest.fail(f"bare {name} in the JSON output"))


def test_cli_json_never_carries_a_bare_nan(folders, capsys, monkeypatch, tmp_path):
    """A value that is not a number reaches ``--json`` output (one sentence and a data file) as null.

    Reference: RFC 8259, section 6 (JSON has no NaN or Infinity); Python's json.loads, whose parse_constant
    hook sees every such constant. The gaps are planted in the documents the command prints.
    """
    import inspector.comparison.report as report

    def with_gaps(make):
        def planted(*args, **kwargs):
            doc = make(*args, **kwargs)
            doc["heads"][0]["entropy_b"] = float("nan")
            doc["heads"][1]["js_best_match"] = float("inf")
            return doc

        return planted

    monkeypatch.setattr(report, "sentence_dict", with_gaps(report.sentence_dict))
    monkeypatch.setattr(report, "comparison_dict", with_gaps(report.comparison_dict))
    a, b = str(folders["tiny"]), str(folders["tiny_copy"])
    assert main(["compare", a, b, "--text", SENTENCE, "--json"]) == 0
    one = strict_json(capsys.readouterr().out)
    out = tmp_path / "out"
    assert (
        main(["compare", a, b, str(folders["csv"]), "--out", str(out), "--json", "--quiet", "--no-figures"])
        == 0
    )
    many = strict_json(capsys.readouterr().out)
    for doc in (one, many, strict_json((out / "comparison.json").read_text(encoding="utf-8"))):
        assert doc["heads"][0]["entropy_b"] is None and doc["heads"][1]["js_best_match"] is None
        assert isinstance(doc["heads"][0]["js_best_match"], float)


def test_cli_leaves_same_position_cells_empty_where_a_has_no_head(folders, capsys):
    """head_changes.csv is empty (and comparison.json null) at positions model A does not have; figures.

    Reference: the tracker issue ("same-position columns are empty where a position does not
    exist"); PNG signature bytes and the SVG root element for the figures.
    """
    out = folders["root"] / "cli_shapes"
    code = main(
        [
            "compare",
            str(folders["tiny"]),
            str(folders["other_shape"]),
            str(folders["csv"]),
            "--out",
            str(out),
            "--quiet",
        ]
    )
    assert code == 0
    capsys.readouterr()
    for stem in ("head_change_map", "head_matching"):
        assert (out / f"{stem}.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert b"<svg" in (out / f"{stem}.svg").read_bytes()[:2000]
    rows = _read_csv(out / "head_changes.csv")
    col = rows[0].index("js_same_position")
    assert [r[col] == "" for r in rows[1:]] == [False] * 4 + [True] * 2
    doc = json.loads((out / "comparison.json").read_text(encoding="utf-8"))
    assert doc["heads"][-1]["entropy_delta"] is None and doc["heads"][-1]["entropy_b"] is not None


def test_progress_counts_batches_and_cancel_stops(folders):
    """Progress reaches total batch by batch; a stop request ends the run before the next batch.

    Reference: the corpus run's progress/cancel contract (inspector.corpus.run); common practice, no source.
    """
    lm_a, lm_b, data = _pair(folders, "tiny", "tiny_copy")
    seen: list[tuple[int, int]] = []
    compare_corpus(
        lm_a, lm_b, data, ComparisonSettings(batch_size=4), on_progress=lambda d, t: seen.append((d, t))
    )
    assert seen == [(k, 5) for k in range(1, 6)]
    calls = []
    with pytest.raises(CorpusCancelled):
        compare_corpus(
            lm_a,
            lm_b,
            data,
            ComparisonSettings(batch_size=4),
            on_progress=lambda d, t: calls.append(d),
            should_stop=lambda: len(calls) >= 2,
        )
    assert calls == [1, 2]


def test_phase_progress_counts_utterances_with_the_time_left(folders):
    """The per-phase progress (what the window's bar shows) counts utterances up to the set's size, with a time.

    Reference: the number of rows of the CSV written by the test; the corpus run's PhaseProgress contract
    (time left = elapsed x (total - done) / done); common practice, no source.
    """
    from ui.compare.state import progress_text

    lm_a, lm_b, data = _pair(folders, "tiny", "tiny_copy")
    steps = []
    compare_corpus(lm_a, lm_b, data, ComparisonSettings(batch_size=4), on_step=steps.append)
    n = len(UTTERANCES)
    assert len(data) == n == 18
    assert [s.done for s in steps] == [0, 4, 8, 12, 16, 18]
    assert {s.total for s in steps} == {n} and {s.phase for s in steps} == {"compare"}
    assert all(b.elapsed >= a.elapsed for a, b in zip(steps, steps[1:]))
    assert steps[-1].finished and progress_text(steps[-1]).startswith("Comparison: 18 utterances in ")
    assert (
        progress_text(type(steps[0])("compare", 5, 20, 2.0))
        == "Comparison: 5 of 20 utterances, about 6.0 s left"
    )
