"""The headless CLI: stable JSON schema on every family, npz export, one-line errors."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

from inspector.cli.main import main
from inspector.measures.metrics import METRIC_NAMES
from tests.families import CONFIGS, LABELS, build_checkpoint

TEXT = "can i change my booking to the 9:15 ferry"
HEAD_KEYS = {"layer", "head", *METRIC_NAMES}


def _run_json(capsys, *argv) -> dict:
    assert main(list(argv)) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("family", sorted(CONFIGS))
def test_analyze_json_schema_every_family(family, tmp_path, minilm_dir, capsys):
    """Reference: the JSON schema promised in the core issue (stable names), checked key by key."""
    folder = build_checkpoint(family, tmp_path / family, minilm_dir)
    doc = _run_json(capsys, "analyze", str(folder), "--text", TEXT, "--json")
    assert doc["model"] == family
    assert doc["tokens"][0] in ("[CLS]", "<s>") and len(doc["tokens"]) > 3
    assert doc["prediction"]["label"] in LABELS
    assert set(doc["prediction"]["probabilities"]) == set(LABELS)
    assert sum(doc["prediction"]["probabilities"].values()) == pytest.approx(1.0)
    assert len(doc["heads"]) == 2 * 4
    assert all(set(h) == HEAD_KEYS for h in doc["heads"])
    assert [(h["layer"], h["head"]) for h in doc["heads"]] == [(l, h) for l in range(2) for h in range(4)]


def test_analyze_bare_encoder_and_npz(minilm_dir, tmp_path, capsys):
    """Reference: transformers' output_attentions on all-MiniLM-L6-v2 for the saved array."""
    import torch

    from inspector.checkpoint.capture import encode
    from inspector.checkpoint.loader import load_checkpoint

    out = tmp_path / "att.npz"
    doc = _run_json(
        capsys, "analyze", str(minilm_dir), "--text", TEXT, "--json", "--save-attention", str(out)
    )
    assert doc["prediction"] is None
    saved = np.load(out)["attention"]
    n = len(doc["tokens"])
    assert saved.shape == (6, 12, n, n)
    lm = load_checkpoint(minilm_dir)
    with torch.no_grad():
        ref = lm.model(**encode(lm, [TEXT]).model_inputs(), output_attentions=True).attentions
    np.testing.assert_allclose(saved, torch.cat(ref).numpy(), atol=1e-6)


def test_analyze_table_output(minilm_dir, capsys):
    """Reference: the table lists one line per head (6 x 12 = 72 for all-MiniLM-L6-v2), named L0H0 ... L5H11."""
    assert main(["analyze", str(minilm_dir), "--text", TEXT]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].startswith("model:")
    names = [line.split()[0] for line in lines if re.fullmatch(r"L\d+H\d+", (line.split() or [""])[0])]
    assert names == [f"L{layer}H{head}" for layer in range(6) for head in range(12)]


def test_errors_are_one_line_and_nonzero(tmp_path, capsys):
    """Reference: CLI convention (common practice, no source): one line on stderr, exit status 2."""
    assert main(["analyze", str(tmp_path / "nope"), "--text", "hi"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("headcount: error:")
    assert main(["analyze", str(tmp_path), "--text", "   "]) == 2
    assert "empty" in capsys.readouterr().err
