"""Per-phase progress of a corpus run, results handed over as each phase ends, and the private model copy."""

from __future__ import annotations

import numpy as np
import pytest
import torch

from inspector.checkpoint.capture import HeadGates
from inspector.checkpoint.copies import copy_fits, model_bytes, private_copy
from inspector.checkpoint.loader import load_checkpoint
from inspector.corpus.dataset import read_labelled
from inspector.corpus.run import CorpusCancelled, PhaseProgress, Progress, run_corpus
from inspector.corpus.settings import CorpusSettings
from tests.corpus_models import UTTERANCES, save_tiny_classifier, write_csv


@pytest.fixture(scope="module")
def tiny(tmp_path_factory):
    folder = save_tiny_classifier(tmp_path_factory.mktemp("tiny_progress"))
    lm = load_checkpoint(folder)
    data = read_labelled(write_csv(folder / "ferry.csv", UTTERANCES), known_labels=lm.labels)
    return lm, data


def test_each_phase_counts_in_its_own_unit_and_hands_over_its_results(tiny):
    """Scan and importance count utterances, pruning counts accuracy measurements; each phase ends at its
    total, and the report so far is handed over as each phase ends, in order.

    Reference: the pruning curves' own measured points (one measurement per point after the shared start, plus
    the baseline when the pruning set is a subset); common practice, no source.
    """
    lm, data = tiny
    settings = CorpusSettings(batch_size=5, prune_every=4, prune_subset=10)
    steps: list[PhaseProgress] = []
    results: list[tuple[str, object]] = []
    report = run_corpus(
        lm, data, settings, on_step=steps.append, on_result=lambda phase, r: results.append((phase, r))
    )
    assert [p for p, _ in results] == ["scan", "importance", "pruning"]
    scan, importance, pruning = (r for _, r in results)
    assert scan.evaluation.accuracy == report.evaluation.accuracy
    assert scan.importance is None and scan.pruning is None
    assert importance.importance is not None and importance.pruning is None
    assert pruning.pruning is not None
    by_phase = {name: [p for p in steps if p.phase == name] for name in ("scan", "importance", "pruning")}
    assert [p.unit for p in (by_phase["scan"][0], by_phase["pruning"][0])] == ["utterance", "step"]
    for seen in by_phase.values():
        done = [p.done for p in seen]
        assert done == sorted(done) and seen[0].done == 0
        assert seen[-1].finished and seen[-1].done == pytest.approx(seen[-1].total)
    assert by_phase["scan"][-1].total == len(data) == by_phase["importance"][-1].total
    measured = sum(len(c.steps) - 1 for c in report.pruning.curves) + 1  # + the baseline on the subset
    assert by_phase["pruning"][-1].total == pytest.approx(measured)
    assert by_phase["pruning"][1].done == pytest.approx(5 / 10)  # one batch of 5 of the 10 utterances


def test_cancel_after_the_scan_keeps_the_scan_handed_over(tiny):
    """A run stopped during the importance pass has already delivered the scan's results.

    Reference: common practice, no source (cooperative cancellation between batches).
    """
    lm, data = tiny
    results = []
    with pytest.raises(CorpusCancelled):
        run_corpus(
            lm,
            data,
            CorpusSettings(batch_size=5),
            on_result=lambda phase, r: results.append(phase),
            should_stop=lambda: bool(results),
        )
    assert results == ["scan"]


def test_time_left_follows_the_phase_pace():
    """After 3 of 10 units in 6 s, 14 s are left; nothing is estimated before the first unit.

    Reference: closed form, time left = elapsed x (total - done) / done.
    """
    now = [100.0]
    seen: list[PhaseProgress] = []
    progress = Progress(0, on_step=seen.append, clock=lambda: now[0])
    progress.phase("scan", 10)
    assert seen[-1].seconds_left() is None
    now[0] += 6.0
    progress.advance(3)
    assert seen[-1].done == 3 and seen[-1].seconds_left() == pytest.approx(14.0)
    progress.phase("pruning", 4, per_unit=8)
    progress.advance(4)
    assert seen[-1].done == pytest.approx(0.5) and seen[-1].unit == "step"


def test_phase_text_names_the_unit_and_the_time_left():
    """The bar text counts in the phase's unit, with the time left, and the total time when done.

    Reference: the project's formatting rules (counts agree with their noun; durations as in formatting.duration).
    """
    from ui.corpus.state import cancel_text, phase_text

    assert phase_text(PhaseProgress("scan", 256, 513, 10.0)) == "Scan: 256 of 513 utterances, about 10 s left"
    assert phase_text(PhaseProgress("pruning", 1, 36, 2.0)).startswith(
        "Pruning: 1 of 36 steps, about 1 min 10 s"
    )
    assert phase_text(PhaseProgress("importance", 513, 513, 4.2)) == "Importance: 513 utterances in 4.2 s"
    text = cancel_text(["scan", "importance"], "pruning", had_previous=False)
    assert "during the pruning simulation" in text and "the scan and head importance" in text


def test_private_copy_matches_the_original_and_is_independent(minilm):
    """The copy gives the original's attention; switching a head off in the copy leaves the original alone.

    Reference: the transformers library's own forward pass of the original all-MiniLM-L6-v2.
    """
    copy = private_copy(minilm)
    assert copy.model is not minilm.model and copy.parts[0] is not minilm.parts[0]
    enc = minilm.tokenizer(["when does the last ferry leave"], return_tensors="pt")
    with torch.inference_mode():
        reference = minilm.model(**enc, output_attentions=True).attentions
        gates = torch.ones(copy.num_layers, copy.num_heads)
        gates[0, 0] = 0.0
        with HeadGates(copy, gates):
            gated = copy.model(**enc, output_attentions=True).last_hidden_state
        again = minilm.model(**enc, output_attentions=True)
        plain = copy.model(**enc, output_attentions=True).attentions
    for a, b, c in zip(reference, again.attentions, plain):
        np.testing.assert_allclose(a.numpy(), b.numpy(), atol=0)
        np.testing.assert_allclose(a.numpy(), c.numpy(), atol=1e-6)
    assert not torch.allclose(gated, again.last_hidden_state)


def test_a_copy_is_made_only_when_it_fits(minilm):
    """Weights are counted as parameters x bytes per value; a copy needs at most half the available memory.

    Reference: closed form (float32 = 4 bytes per value, torch.Tensor.element_size).
    """
    params = sum(p.numel() for p in minilm.model.parameters())
    size = model_bytes(minilm)
    assert size >= 4 * params
    assert copy_fits(minilm, available=int(3 * size))
    assert not copy_fits(minilm, available=int(2 * size))
