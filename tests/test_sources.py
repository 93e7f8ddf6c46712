"""Where checkpoints live: cached repo ids, training runs with checkpoint-N folders, symlinked files."""

from __future__ import annotations

import json
import os
import shutil

import pytest

from inspector.checkpoint.loader import load_checkpoint
from inspector.checkpoint.sources import hub_cache, resolve_source
from inspector.cli.main import main
from inspector.errors import HeadcountError
from tests.families import build_checkpoint
from tests.network_trap import trap_network

COMMIT = "0123456789abcdef0123456789abcdef01234567"
TEXT = "can i change my booking to the 9:15 ferry"


@pytest.fixture(scope="module")
def tiny(tmp_path_factory, minilm_dir):
    return build_checkpoint("bert", tmp_path_factory.mktemp("tiny"), minilm_dir)


def build_hub_cache(root, repo_id: str, source) -> None:
    """Lay ``source`` out as huggingface_hub's cache does: blobs, snapshots/<commit>/ symlinks, refs/main."""
    repo = root / ("models--" + repo_id.replace("/", "--"))
    blobs, snap = repo / "blobs", repo / "snapshots" / COMMIT
    blobs.mkdir(parents=True)
    snap.mkdir(parents=True)
    for i, f in enumerate(sorted(source.iterdir())):
        blob = blobs / f"{i:040x}"
        shutil.copyfile(f, blob)
        os.symlink(os.path.relpath(blob, snap), snap / f.name)
    (repo / "refs").mkdir()
    (repo / "refs" / "main").write_text(COMMIT)


@pytest.fixture
def no_network(monkeypatch):
    """Every way out to the network raises and is recorded."""
    return trap_network(monkeypatch)


def test_repo_id_resolves_offline_from_a_hub_cache_layout(tmp_path, tiny, monkeypatch, no_network, capsys):
    """A repo id is read from refs/main -> snapshots/<commit>/ (files are symlinks into blobs/).

    Reference: huggingface_hub's documented cache layout (models--owner--name/{blobs,refs,snapshots})
    and its HF_HUB_CACHE variable; the prediction of the same weights opened as a plain folder.
    """
    cache = tmp_path / "hub"
    build_hub_cache(cache, "tidewren/ferry-intents", tiny)
    monkeypatch.setenv("HF_HUB_CACHE", str(cache))
    assert hub_cache() == cache
    source = resolve_source("tidewren/ferry-intents")
    assert source.folder == cache / "models--tidewren--ferry-intents" / "snapshots" / COMMIT
    assert (source.folder / "model.safetensors").is_symlink()
    lm = load_checkpoint("tidewren/ferry-intents")
    assert lm.name == "tidewren/ferry-intents"
    assert main(["analyze", "tidewren/ferry-intents", "--text", TEXT, "--json"]) == 0
    cached = json.loads(capsys.readouterr().out)
    assert main(["analyze", str(tiny), "--text", TEXT, "--json"]) == 0
    plain = json.loads(capsys.readouterr().out)
    assert cached["prediction"] == plain["prediction"] and cached["model"] == "tidewren/ferry-intents"
    assert no_network == []


def test_repo_id_missing_from_the_cache_says_how_to_get_it(tmp_path, monkeypatch, no_network, capsys):
    """An uncached repo id is one line naming the cache and the download command for a connected machine.

    Reference: huggingface_hub's ``hf download`` command; the CLI convention of one stderr line, status 2.
    """
    monkeypatch.setenv("HF_HUB_CACHE", str(tmp_path / "empty-cache"))
    assert main(["analyze", "tidewren/not-here", "--text", TEXT]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "hf download tidewren/not-here" in err and "never downloads" in err
    assert no_network == []


def test_training_run_opens_the_latest_checkpoint_or_the_one_asked_for(tmp_path, tiny, capsys):
    """checkpoint-N folders: the latest by N (numeric, not alphabetical) unless --checkpoint N picks one.

    Reference: the transformers Trainer's output layout (``checkpoint-<global step>`` folders);
    numeric order by hand (200 > 30 although "200" < "30" as text).
    """
    run = tmp_path / "run"
    for step in (30, 200):
        shutil.copytree(tiny, run / f"checkpoint-{step}")
    (run / "checkpoint-7").mkdir()  # no config: not a checkpoint
    assert load_checkpoint(run).path == run / "checkpoint-200"
    lm = load_checkpoint(run, checkpoint=30)
    assert lm.path == run / "checkpoint-30" and lm.name == "run/checkpoint-30"
    assert main(["analyze", str(run), "--checkpoint", "30", "--text", TEXT, "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["model"] == "run/checkpoint-30"
    assert main(["analyze", str(run), "--checkpoint", "7", "--text", TEXT]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "checkpoints: 30, 200" in err
    with pytest.raises(HeadcountError, match="not a folder"):
        resolve_source(tmp_path / "run" / "checkpoint-30" / "config.json")


def test_window_lists_the_checkpoints_of_a_run_to_pick_from(qtbot, tmp_path, tiny, monkeypatch):
    """Opening a training-run folder in the window asks which checkpoint-N to open and opens that one.

    Reference: the Trainer's checkpoint-N layout; the window's own chooser (offered latest first).
    """
    from PySide6.QtCore import QSettings

    from ui.main_window import MainWindow

    run = tmp_path / "run"
    for step in (5, 40):
        shutil.copytree(tiny, run / f"checkpoint-{step}")
    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    offered: list[list[int]] = []

    def choose(folder, steps):
        offered.append(steps)
        return 5

    monkeypatch.setattr(win, "choose_checkpoint", choose)
    win.open_model(run)
    qtbot.waitUntil(lambda: win.lm is not None, timeout=60_000)
    qtbot.waitUntil(lambda: not win.is_busy(), timeout=60_000)
    assert offered == [[5, 40]]
    assert win.lm.path == run / "checkpoint-5" and "run/checkpoint-5" in win.windowTitle()
