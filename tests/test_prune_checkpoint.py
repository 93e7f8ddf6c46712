"""``headcount prune``: the written checkpoint loads in plain transformers and equals the gated model."""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pytest
import torch
import transformers

from inspector.checkpoint.capture import encode
from inspector.checkpoint.loader import load_checkpoint
from inspector.checkpoint.masks import HeadMask, masked
from inspector.checkpoint.pruned import NOTE_FILE, write_pruned_checkpoint
from inspector.cli.main import main
from inspector.errors import HeadcountError
from inspector.paths import SAMPLE_MODEL
from tests.corpus_models import shared_minilm_classifier
from tests.families import CONFIGS, build_checkpoint

TEXTS = [
    "can I take my bike on the 7:15 to Orlestow",
    "the evening sailing was cancelled, I want my money back",
    "move my booking to Tuesday please",
]


def _plain_logits(folder: Path, texts: list[str]) -> np.ndarray:
    """The reference: transformers' own classes, default settings, no Headcount code."""
    model = transformers.AutoModelForSequenceClassification.from_pretrained(str(folder)).eval()
    tok = transformers.AutoTokenizer.from_pretrained(str(folder))
    with torch.no_grad():
        return model(**tok(texts, padding=True, return_tensors="pt")).logits.numpy()


def _gated_logits(lm, mask: HeadMask, texts: list[str]) -> np.ndarray:
    with torch.no_grad(), masked(lm, mask):
        return lm.model(**encode(lm, texts).model_inputs()).logits.numpy()


def _masks(layers: int, heads: int) -> list[HeadMask]:
    return [
        HeadMask.of([(0, 0)]),
        HeadMask.of([(0, 1), (layers - 1, heads - 1), (layers // 2, 2)]),
        HeadMask.of([(1, h) for h in range(heads)] + [(0, 3)]),  # a whole layer, and one more head
    ]


@pytest.mark.parametrize("which", ["sample", "minilm"])
def test_pruned_checkpoint_reproduces_the_gated_model_in_plain_transformers(which, tmp_path):
    """Reference: transformers' AutoModelForSequenceClassification loading the written folder on its own (no
    custom code); its logits must equal Headcount's gated model to 1e-5, for one head, scattered heads and a
    whole layer, on the sample model and on all-MiniLM-L6-v2 under a random classification head."""
    source = SAMPLE_MODEL if which == "sample" else shared_minilm_classifier()
    lm = load_checkpoint(source)
    full = _plain_logits(source, TEXTS)
    masks = _masks(lm.num_layers, lm.num_heads)
    for k, mask in enumerate(masks if which == "sample" else masks[1:]):
        out = write_pruned_checkpoint(lm, mask, tmp_path / f"pruned{k}")
        plain = _plain_logits(out, TEXTS)
        np.testing.assert_allclose(plain, _gated_logits(lm, mask, TEXTS), atol=1e-5, rtol=0)
        assert np.abs(plain - full).max() > 1e-4  # the heads really are gone
    # the open model itself is untouched
    np.testing.assert_allclose(_gated_logits(lm, HeadMask(), TEXTS), full, atol=1e-5, rtol=0)


def test_pruned_folder_contents(tmp_path):
    """Reference: the sample model's own folder (config.json and tokenizer files byte for byte) and the
    safetensors format read back with the safetensors library: zero columns of W_O and rows of Q/K/V for the
    masked head (Vaswani et al. 2017, sec. 3.2.2: head h owns slice h*d:(h+1)*d), untouched elsewhere."""
    from safetensors.torch import load_file

    lm = load_checkpoint(SAMPLE_MODEL)
    mask = HeadMask.of([(2, 3)])
    out = write_pruned_checkpoint(lm, mask, tmp_path / "pruned")
    names = {p.name for p in out.iterdir()}
    assert {
        "config.json",
        "model.safetensors",
        "tokenizer.json",
        "vocab.txt",
        NOTE_FILE,
        "prune_mask.json",
    } <= names
    for name in ("config.json", "tokenizer.json", "tokenizer_config.json", "vocab.txt"):
        assert (out / name).read_bytes() == (SAMPLE_MODEL / name).read_bytes()
    assert json.loads((out / "prune_mask.json").read_text()) == {"2": [3]}
    old, new = load_file(str(SAMPLE_MODEL / "model.safetensors")), load_file(str(out / "model.safetensors"))
    d = 96 // 6
    prefix = "bert.encoder.layer.2.attention."
    w_o = new[prefix + "output.dense.weight"]
    assert torch.all(w_o[:, 3 * d : 4 * d] == 0)
    assert torch.equal(w_o[:, : 3 * d], old[prefix + "output.dense.weight"][:, : 3 * d])
    for proj in ("query", "key", "value"):
        assert torch.all(new[f"{prefix}self.{proj}.weight"][3 * d : 4 * d] == 0)
        assert torch.all(new[f"{prefix}self.{proj}.bias"][3 * d : 4 * d] == 0)
        assert torch.equal(
            new[f"{prefix}self.{proj}.weight"][4 * d :], old[f"{prefix}self.{proj}.weight"][4 * d :]
        )
    changed = [k for k in old if not torch.equal(old[k], new[k])]
    assert sorted(changed) == sorted(
        [prefix + "output.dense.weight"]
        + [f"{prefix}self.{p}.{t}" for p in ("query", "key", "value") for t in ("weight", "bias")]
    )
    note = (out / NOTE_FILE).read_text()
    assert "L2H3" in note and "Re-validate" in note and "not faster" in note


def _snapshot(folder: Path) -> dict[str, tuple[bytes, int]]:
    return {p.name: (p.read_bytes(), p.stat().st_mtime_ns) for p in folder.iterdir()}


def test_prune_refuses_a_non_empty_folder_and_leaves_it_untouched(tmp_path, capsys):
    """Reference: the promise of the command (common practice, no source): without --force a non-empty target
    is refused with one line, exit 2, and every file in it keeps its bytes and modification time; --force
    replaces it, and the model's own folder is never a target."""
    mask_file = tmp_path / "m.json"
    mask_file.write_text(json.dumps({"1": [0, 2]}), encoding="utf-8")
    target = tmp_path / "busy"
    target.mkdir()
    (target / "notes.txt").write_text("keep me", encoding="utf-8")
    before = _snapshot(target)
    argv = ["prune", str(SAMPLE_MODEL), "--mask", str(mask_file), "--out", str(target)]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "not empty" in err and "--force" in err and err.strip().count("\n") == 0
    assert _snapshot(target) == before
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".busy")]  # no temporary folder left

    assert main([*argv, "--force"]) == 0
    capsys.readouterr()
    assert not (target / "notes.txt").exists() and (target / "model.safetensors").is_file()
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []

    lm = load_checkpoint(SAMPLE_MODEL)
    with pytest.raises(HeadcountError, match="model's own folder"):
        write_pruned_checkpoint(lm, HeadMask.of([(0, 0)]), SAMPLE_MODEL, force=True)
    with pytest.raises(HeadcountError, match="no head off"):
        write_pruned_checkpoint(lm, HeadMask(), tmp_path / "empty_mask")
    with pytest.raises(HeadcountError, match="not in this model"):
        write_pruned_checkpoint(lm, HeadMask.of([(4, 0)]), tmp_path / "bad_mask")
    assert not (tmp_path / "empty_mask").exists() and not (tmp_path / "bad_mask").exists()


def test_prune_reads_accuracy_from_the_corpus_report_beside_the_mask(tmp_path, capsys):
    """Reference: the summary.json schema of a corpus run (pruning.mask, accuracy_before/after), written by hand."""
    report = tmp_path / "report"
    report.mkdir()
    mask = {"0": [1], "3": [4]}
    (report / "prune_mask.json").write_text(json.dumps(mask), encoding="utf-8")
    summary = {
        "data": {"file": "ferry_eval.csv", "utterances": 513},
        "pruning": {
            "mask": mask,
            "mask_order": "importance",
            "accuracy_before": 0.854,
            "accuracy_after": 0.846,
            "utterances_per_step": 513,
        },
    }
    (report / "summary.json").write_text(json.dumps(summary), encoding="utf-8")
    out = tmp_path / "pruned"
    code = main(
        ["prune", str(SAMPLE_MODEL), "--mask", str(report / "prune_mask.json"), "--out", str(out), "--json"]
    )
    doc = json.loads(capsys.readouterr().out)
    assert code == 0 and doc["mask"] == mask and doc["accuracy_after"] == 0.846
    note = (out / NOTE_FILE).read_text()
    assert "85.4%" in note and "84.6%" in note and "\u22120.8 points" in note and "ferry_eval.csv" in note
    assert "513 utterances" in note and "importance" in note


def test_prune_json_writes_a_missing_accuracy_as_null(tmp_path, capsys):
    """A summary.json beside the mask whose accuracy is NaN (Python's json module writes and reads the bare
    constant) comes out of ``prune --json`` as null, never as a bare NaN.

    Reference: RFC 8259, section 6 (JSON has no NaN or Infinity); json.loads' parse_constant hook.
    """
    report = tmp_path / "report"
    report.mkdir()
    mask = {"1": [2]}
    (report / "prune_mask.json").write_text(json.dumps(mask), encoding="utf-8")
    summary = {"pruning": {"mask": mask, "accuracy_before": float("nan"), "accuracy_after": 0.5}}
    (report / "summary.json").write_text(json.dumps(summary), encoding="utf-8")
    assert "NaN" in (report / "summary.json").read_text(encoding="utf-8")
    code = main(
        [
            "prune",
            str(SAMPLE_MODEL),
            "--mask",
            str(report / "prune_mask.json"),
            "--out",
            str(tmp_path / "p"),
            "--json",
        ]
    )
    doc = json.loads(
        capsys.readouterr().out, parse_constant=lambda name: pytest.fail(f"bare {name} in the JSON")
    )
    assert code == 0 and doc["accuracy_before"] is None and doc["accuracy_after"] == 0.5


@pytest.mark.parametrize("family", sorted(CONFIGS))
def test_every_family_prunes_through_the_adapter_table(family, tmp_path, minilm_dir):
    """Reference: transformers' own model class of each family loading the written folder; logits equal the
    gated model (the adapter table says where Q/K/V and W_O live). ALBERT shares one block across layers, so
    only a mask that switches a head off in every layer can be written."""
    folder = build_checkpoint(family, tmp_path / family, minilm_dir)
    lm = load_checkpoint(folder)
    if family == "albert":
        with pytest.raises(HeadcountError, match="share one set of attention weights"):
            write_pruned_checkpoint(lm, HeadMask.of([(0, 1)]), tmp_path / "out_refused")
        assert not (tmp_path / "out_refused").exists()
        mask = HeadMask.of([(layer, 1) for layer in range(lm.num_layers)])
    else:
        mask = HeadMask.of([(0, 1), (1, 2), (1, 3)])
    out = write_pruned_checkpoint(lm, mask, tmp_path / "out")
    np.testing.assert_allclose(_plain_logits(out, TEXTS), _gated_logits(lm, mask, TEXTS), atol=1e-5, rtol=0)


def test_prune_leaves_no_temporary_folder_when_writing_fails(tmp_path, monkeypatch):
    """Reference: the write is a temporary folder renamed into place (common practice, no source): a failure in
    the middle leaves neither the target nor the temporary folder."""
    import inspector.checkpoint.pruned as pruned

    lm = load_checkpoint(SAMPLE_MODEL)

    def broken(*_a, **_k):
        raise OSError("disk full")

    monkeypatch.setattr(pruned, "_copy_support_files", broken)
    with pytest.raises(HeadcountError, match="disk full"):
        write_pruned_checkpoint(lm, HeadMask.of([(0, 0)]), tmp_path / "target")
    assert os.listdir(tmp_path) == []
