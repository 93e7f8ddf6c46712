"""Loading is safe and offline: safetensors only, no network, clear errors."""

from __future__ import annotations

import json
import os
import shutil

import pytest
import torch

from inspector.checkpoint.loader import load_checkpoint
from inspector.errors import HeadcountError
from inspector.measures.analysis import analyze_sentence
from tests.families import build_checkpoint
from tests.network_trap import trap_network


@pytest.fixture(scope="module")
def bert_dir(tmp_path_factory, minilm_dir):
    return build_checkpoint("bert", tmp_path_factory.mktemp("bert"), minilm_dir)


def _copy(src, tmp_path, name="ckpt"):
    dst = tmp_path / name
    shutil.copytree(src, dst)
    return dst


def test_pickle_only_checkpoint_is_refused_then_loaded_on_opt_in(bert_dir, tmp_path):
    """Reference: torch.load(weights_only=True) semantics; the model's own logits before conversion."""
    folder = _copy(bert_dir, tmp_path)
    reference = load_checkpoint(folder)
    state = reference.model.state_dict()
    (folder / "model.safetensors").unlink()
    torch.save(state, folder / "pytorch_model.bin")
    with pytest.raises(HeadcountError, match="pickle") as info:
        load_checkpoint(folder)
    assert "safetensors" in str(info.value) and "\n" not in str(info.value)
    opted = load_checkpoint(folder, allow_pickle=True)
    a = analyze_sentence(opted, "pets on the evening boat?")
    b = analyze_sentence(reference, "pets on the evening boat?")
    assert a.prediction.probabilities == pytest.approx(b.prediction.probabilities, abs=1e-6)


def test_truncated_safetensors_gives_clear_error(bert_dir, tmp_path):
    """Reference: the safetensors format (8-byte header length, JSON header, data offsets); common practice."""
    folder = _copy(bert_dir, tmp_path)
    weights = folder / "model.safetensors"
    data = weights.read_bytes()
    weights.write_bytes(data[: len(data) // 2])
    with pytest.raises(HeadcountError, match="damaged safetensors"):
        load_checkpoint(folder)
    weights.write_bytes(b"\x01\x02")
    with pytest.raises(HeadcountError, match="damaged safetensors"):
        load_checkpoint(folder)


def test_missing_config_and_bad_folder(bert_dir, tmp_path):
    """Reference: the standard transformers checkpoint layout needs config.json (common practice, no source)."""
    folder = _copy(bert_dir, tmp_path)
    (folder / "config.json").unlink()
    with pytest.raises(HeadcountError, match="no config.json"):
        load_checkpoint(folder)
    with pytest.raises(HeadcountError, match="not a folder"):
        load_checkpoint(tmp_path / "does-not-exist")
    (folder / "config.json").write_text("{not json")
    with pytest.raises(HeadcountError, match="not a readable JSON"):
        load_checkpoint(folder)


def test_unknown_family_and_remote_code_are_refused(bert_dir, tmp_path):
    """Reference: transformers' trust_remote_code contract (auto_map points at code in the folder)."""
    folder = _copy(bert_dir, tmp_path)
    config = json.loads((folder / "config.json").read_text())
    config["model_type"] = "my-custom-encoder"
    config["auto_map"] = {"AutoModel": "modeling_custom.CustomModel"}
    (folder / "config.json").write_text(json.dumps(config))
    (folder / "modeling_custom.py").write_text("raise SystemExit('remote code ran')\n")
    with pytest.raises(HeadcountError, match="not supported yet"):
        load_checkpoint(folder)


def test_offline_mode_is_forced():
    """Reference: huggingface_hub's HF_HUB_OFFLINE switch (documented environment variable)."""
    import inspector  # noqa: F401

    assert os.environ["HF_HUB_OFFLINE"] == "1"
    assert os.environ["TRANSFORMERS_OFFLINE"] == "1"


def test_no_socket_is_opened_during_load_and_analysis(bert_dir, monkeypatch):
    """Reference: Python's socket module: every network connection goes through socket.socket.connect/
    connect_ex or getaddrinfo; all are trapped here and must never be called."""
    calls = trap_network(monkeypatch)
    lm = load_checkpoint(bert_dir)
    result = analyze_sentence(lm, "is the ramp at Crail Haven step free?")
    result.rollout  # noqa: B018
    result.value_weighted  # noqa: B018
    result.flow(queries=[0])
    assert calls == []


def test_conversion_recipe_run_as_printed_keeps_the_classifier(bert_dir, tmp_path, capsys):
    """The refusal's recipe, run as printed, gives a folder that analyze opens with --allow-pickle's prediction.

    ``--allow-pickle`` itself prints nothing on stderr (no library warnings before the answer).

    Reference: transformers' from_pretrained/save_pretrained round trip of the class the config names
    (BertForSequenceClassification, so the classifier head is kept), checked against the prediction
    read from the original pickle file through torch's weights-only loader.
    """
    import re
    import shlex
    import subprocess
    import sys

    from inspector.cli.main import main

    original = _copy(bert_dir, tmp_path, "original")
    state = load_checkpoint(original).model.state_dict()
    (original / "model.safetensors").unlink()
    torch.save(state, original / "pytorch_model.bin")
    converted = _copy(original, tmp_path, "converted")
    with pytest.raises(HeadcountError) as info:
        load_checkpoint(converted)
    recipe = re.search(r"(python -c '[^']*')", str(info.value)).group(1)
    argv = shlex.split(recipe)
    assert argv[0] == "python" and "BertForSequenceClassification" in argv[2]
    env = dict(os.environ, HF_HUB_OFFLINE="1", TRANSFORMERS_OFFLINE="1")
    done = subprocess.run([sys.executable, *argv[1:]], capture_output=True, text=True, env=env, timeout=300)
    assert done.returncode == 0, done.stderr
    text = "is the early ferry to Gullholm running"
    code = "import sys; from ui.launcher import main; raise SystemExit(main(sys.argv[1:]))"
    argv = ["analyze", str(original), "--text", text, "--json", "--allow-pickle"]
    done = subprocess.run(
        [sys.executable, "-c", code, *argv], capture_output=True, text=True, env=env, timeout=300
    )
    assert done.returncode == 0 and done.stderr == "", done.stderr  # no library warnings before the answer
    opted = json.loads(done.stdout)
    assert main(["analyze", str(converted), "--text", text, "--json"]) == 0
    safe = json.loads(capsys.readouterr().out)
    assert safe["prediction"] is not None
    assert safe["prediction"]["label"] == opted["prediction"]["label"]
    for label, p in opted["prediction"]["probabilities"].items():
        assert safe["prediction"]["probabilities"][label] == pytest.approx(p, abs=1e-6)
