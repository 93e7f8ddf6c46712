"""Hostile inputs: every malformed file, text, option or output path ends in one line, never a traceback.

One parametrised test per kind (checkpoint folders, safetensors headers, shard
indexes, configs, tokenizers, texts, data files, output paths, usage, window
actions). Each case runs the real command line in-process and must give exit
status 2, exactly one line on stderr naming the problem, no traceback, and leave
no file behind. A socket trap spans the whole module: nothing may touch the
network while refusing hostile input.
"""

from __future__ import annotations

import builtins
import errno
import json
import os
import shutil
import struct
from collections.abc import Callable
from pathlib import Path

import pytest
import torch
from safetensors.torch import load_file, save_file

from inspector.cli.main import main
from tests.corpus_models import UTTERANCES, write_csv
from tests.families import build_checkpoint
from tests.network_trap import trap_network
from tests.unwritable import read_only_folder

TEXT = "can I take my van on the early ferry"


# ---------------------------------------------------------------------------------------------------------
# The trap, the base checkpoint and the runner
# ---------------------------------------------------------------------------------------------------------


@pytest.fixture(scope="module", autouse=True)
def socket_trap():
    """Every way out to the network raises and is recorded; at the end none may have been tried."""
    patch = pytest.MonkeyPatch()
    calls = trap_network(patch)
    yield calls
    patch.undo()
    assert calls == [], f"network used while refusing hostile input: {calls}"


@pytest.fixture(scope="module")
def base(tmp_path_factory, minilm_dir) -> Path:
    """The suite's seeded random 2-layer x 4-head BERT classifier (three ferry intents)."""
    return build_checkpoint("bert", tmp_path_factory.mktemp("hostile_base"), minilm_dir)


@pytest.fixture
def ckpt(tmp_path, base) -> Path:
    """A private copy of the base checkpoint a case may damage."""
    return Path(shutil.copytree(base, tmp_path / "ckpt"))


def files_under(root: Path) -> set[str]:
    return {str(p.relative_to(root)) for p in root.rglob("*")}


def refused(capsys, argv: list[str], root: Path, match: str) -> str:
    """Run the CLI; assert status 2, one stderr line containing ``match``, no traceback, no new file."""
    before = files_under(root)
    try:
        code = main(argv)
    except SystemExit as exc:  # argparse usage errors
        code = exc.code
    out, err = capsys.readouterr()
    assert code == 2, f"exit status {code}; stderr: {err!r}"
    assert err.count("\n") == 1 and err.endswith("\n"), f"not one line: {err!r}"
    assert "Traceback" not in err and "Traceback" not in out
    assert match.lower() in err.lower(), f"{match!r} not in {err!r}"
    assert files_under(root) == before, "a file was left behind"
    return err


def _tensors(folder: Path) -> dict[str, torch.Tensor]:
    return load_file(folder / "model.safetensors")


def _save(folder: Path, tensors: dict[str, torch.Tensor]) -> None:
    save_file(tensors, folder / "model.safetensors", metadata={"format": "pt"})


def _edit_config(folder: Path, **changes: object) -> None:
    config = json.loads((folder / "config.json").read_text())
    config.update(changes)
    (folder / "config.json").write_text(json.dumps(config))


def _header_file(folder: Path, header: bytes, data: bytes = b"") -> None:
    (folder / "model.safetensors").write_bytes(struct.pack("<Q", len(header)) + header + data)


# ---------------------------------------------------------------------------------------------------------
# Checkpoint folders
# ---------------------------------------------------------------------------------------------------------


def _unreadable(folder: Path, monkeypatch) -> None:
    """chmod 000; as root (which chmod does not stop) the same PermissionError is raised for the folder."""
    folder.chmod(0)
    if not os.access(folder, os.R_OK):
        return
    folder.chmod(0o755)
    inside = str(folder)

    def guard(fn, folder_itself: bool):
        def wrapped(path, *args, **kwargs):
            text = os.fspath(path) if isinstance(path, (str, os.PathLike)) else ""
            if (folder_itself and text == inside) or text.startswith(inside + os.sep):
                raise PermissionError(errno.EACCES, "Permission denied", text)
            return fn(path, *args, **kwargs)

        return wrapped

    # stat of the folder itself works (its parent is readable); listing it or touching anything inside does not.
    monkeypatch.setattr(os, "stat", guard(os.stat, False))
    monkeypatch.setattr(os, "listdir", guard(os.listdir, True))
    monkeypatch.setattr(os, "scandir", guard(os.scandir, True))
    monkeypatch.setattr(builtins, "open", guard(builtins.open, False))


FOLDER_CASES: dict[str, tuple[Callable[[Path, object], Path], str]] = {
    "missing": (lambda c, mp: c / "nope", "not a folder"),
    "a file": (lambda c, mp: c / "config.json", "not a folder"),
    "no config": (lambda c, mp: ((c / "config.json").unlink(), c)[1], "no config.json"),
    "unreadable": (lambda c, mp: (_unreadable(c, mp), c)[1], "permission denied"),
    "pickle only": (
        lambda c, mp: (
            torch.save(_tensors(c), c / "pytorch_model.bin"),
            (c / "model.safetensors").unlink(),
            c,
        )[2],
        "BertForSequenceClassification.from_pretrained",
    ),
    "no weights": (lambda c, mp: ((c / "model.safetensors").unlink(), c)[1], "no model weights"),
    "weights file is a folder": (
        lambda c, mp: ((c / "model.safetensors").unlink(), (c / "model.safetensors").mkdir(), c)[2],
        "no model weights",
    ),
    "empty training run": (
        lambda c, mp: ((c.parent / "run" / "checkpoint-x").mkdir(parents=True), c.parent / "run")[1],
        "no config.json",
    ),
}


@pytest.mark.parametrize("case", sorted(FOLDER_CASES))
def test_checkpoint_folders(case, ckpt, capsys, monkeypatch):
    """Reference: the transformers checkpoint layout (config.json, weights, tokenizer files) and the
    project's CLI convention: one stderr line, exit status 2 (common practice, no source)."""
    make, match = FOLDER_CASES[case]
    folder = make(ckpt, monkeypatch)
    refused(capsys, ["analyze", str(folder), "--text", TEXT], ckpt.parent, match)


# ---------------------------------------------------------------------------------------------------------
# Safetensors headers and contents
# ---------------------------------------------------------------------------------------------------------


def _sparse_huge_header(c: Path) -> None:
    """A header length of 3 GB in a (sparse) file big enough to hold it: refused before it is read."""
    path = c / "model.safetensors"
    claimed = 3_000_000_000
    with path.open("wb") as fh:
        fh.write(struct.pack("<Q", claimed))
        fh.seek(8 + claimed + 16)
        fh.write(b"\0")


def _drop(name: str):
    def make(c: Path) -> None:
        t = _tensors(c)
        t.pop(name)
        _save(c, t)

    return make


def _replace(name: str, value: Callable[[torch.Tensor], torch.Tensor]):
    def make(c: Path) -> None:
        t = _tensors(c)
        t[name] = value(t[name])
        _save(c, t)

    return make


def _add(name: str):
    def make(c: Path) -> None:
        t = _tensors(c)
        t[name] = torch.zeros(3)
        _save(c, t)

    return make


QUERY = "bert.encoder.layer.1.attention.self.query.weight"
HEADER_CASES: dict[str, tuple[Callable[[Path], None], str]] = {
    "empty file": (lambda c: (c / "model.safetensors").write_bytes(b""), "damaged safetensors"),
    "truncated": (
        lambda c: (c / "model.safetensors").write_bytes((c / "model.safetensors").read_bytes()[:5000]),
        "damaged safetensors",
    ),
    "header claims 3 GB": (_sparse_huge_header, "format's limit"),
    "header longer than file": (
        lambda c: (c / "model.safetensors").write_bytes(struct.pack("<Q", 1000) + b"{}"),
        "header longer than the file",
    ),
    "header is a list": (lambda c: _header_file(c, b"[1, 2, 3]"), "not an object"),
    "header not json": (lambda c: _header_file(c, b"\xff\xfe{garbage"), "damaged safetensors"),
    "entry not an object": (lambda c: _header_file(c, b'{"a": [1]}'), "not an object"),
    "unknown dtype": (
        lambda c: _header_file(
            c, b'{"a": {"dtype": "F99", "shape": [1], "data_offsets": [0, 4]}}', b"\0" * 4
        ),
        "unknown dtype",
    ),
    "offsets past the end": (
        lambda c: _header_file(
            c, b'{"a": {"dtype": "F32", "shape": [4], "data_offsets": [0, 16]}}', b"\0" * 4
        ),
        "truncated",
    ),
    "no tensors": (lambda c: _header_file(c, b"{}"), "holds no tensors"),
    "no classifier": (_drop("classifier.weight"), "classifier.weight"),
    "no query of layer 1": (_drop(QUERY), QUERY),
    "mis-shaped query": (_replace(QUERY, lambda t: torch.zeros(3, 3)), QUERY),
    "unexpected tensor": (_add("bert.encoder.layer.0.attention.self.extra"), "no place for"),
    "NaN weight": (
        _replace(QUERY, lambda t: t.index_fill(0, torch.tensor([0]), float("nan"))),
        "NaN or infinite",
    ),
    "infinite weight": (
        _replace(QUERY, lambda t: t.index_fill(0, torch.tensor([1]), float("inf"))),
        "NaN or infinite",
    ),
}


@pytest.mark.parametrize("case", sorted(HEADER_CASES))
def test_safetensors_headers(case, ckpt, capsys):
    """Reference: the safetensors format (u64 header length, JSON object of dtype/shape/data_offsets,
    100 MB header limit); transformers' loading report (missing, unexpected, mismatched keys)."""
    make, match = HEADER_CASES[case]
    make(ckpt)
    refused(capsys, ["analyze", str(ckpt), "--text", TEXT], ckpt.parent, match)


def test_too_many_layers_is_refused_before_the_model_is_built(ckpt, capsys, monkeypatch):
    """A config claiming 3,000 layers is refused from the weights' header, before transformers builds anything.

    Reference: the safetensors header lists two layers (encoder.layer.0 and .1); transformers'
    from_config / from_pretrained are spied on and must never be called.
    """
    import transformers

    built: list[str] = []
    for cls in (transformers.AutoModelForSequenceClassification, transformers.AutoModel):
        for name in ("from_pretrained", "from_config"):
            original = getattr(cls, name)
            monkeypatch.setattr(
                cls, name, lambda *a, _o=original, _n=name, **k: (built.append(_n), _o(*a, **k))[1]
            )
    _edit_config(ckpt, num_hidden_layers=3000)
    err = refused(capsys, ["analyze", str(ckpt), "--text", TEXT], ckpt.parent, "3000 layers")
    assert "hold 2" in err and built == []


# ---------------------------------------------------------------------------------------------------------
# Shard indexes
# ---------------------------------------------------------------------------------------------------------


def _index(c: Path, doc: object) -> None:
    (c / "model.safetensors").rename(c / "model-00001-of-00001.safetensors")
    (c / "model.safetensors.index.json").write_text(json.dumps(doc))


SHARD_CASES: dict[str, tuple[Callable[[Path], None], str]] = {
    "index is a list": (lambda c: _index(c, ["model-00001-of-00001.safetensors"]), "not an object"),
    "weight_map is a list": (lambda c: _index(c, {"weight_map": ["a", "b"]}), "weight_map"),
    "weight_map empty": (lambda c: _index(c, {"weight_map": {}}), "weight_map"),
    "names a missing shard": (
        lambda c: _index(c, {"weight_map": {"a": "model-00002.safetensors"}}),
        "missing",
    ),
    "escapes the folder": (
        lambda c: _index(c, {"weight_map": {"a": "../other.safetensors"}}),
        "not a .safetensors",
    ),
    "shard name not text": (lambda c: _index(c, {"weight_map": {"a": 7}}), "not a .safetensors"),
    "not json": (
        lambda c: (_index(c, {}), (c / "model.safetensors.index.json").write_text("{weight_map:"))[0],
        "unreadable shard index",
    ),
    "nested too deeply": (
        lambda c: (_index(c, {}), (c / "model.safetensors.index.json").write_text("[" * 100_000))[0],
        "shard index",
    ),
}


@pytest.mark.parametrize("case", sorted(SHARD_CASES))
def test_shard_indexes(case, ckpt, capsys):
    """Reference: transformers' sharded checkpoint index (``{"metadata": ..., "weight_map": {tensor: file}}``)."""
    make, match = SHARD_CASES[case]
    make(ckpt)
    refused(capsys, ["analyze", str(ckpt), "--text", TEXT], ckpt.parent, match)


# ---------------------------------------------------------------------------------------------------------
# Configs
# ---------------------------------------------------------------------------------------------------------


CONFIG_CASES: dict[str, tuple[Callable[[Path], None], str]] = {
    "not json": (lambda c: (c / "config.json").write_text("{model_type: bert"), "not a readable JSON"),
    "a list": (lambda c: (c / "config.json").write_text("[]"), "no model_type"),
    "nested too deeply": (lambda c: (c / "config.json").write_text("[" * 100_000), "not a readable JSON"),
    "not utf-8": (
        lambda c: (c / "config.json").write_bytes(b'{"model_type": "\xff"}'),
        "not a readable JSON",
    ),
    "no model_type": (
        lambda c: _edit_config(c, model_type=None) or (c / "config.json").write_text("{}"),
        "no model_type",
    ),
    "unknown family": (lambda c: _edit_config(c, model_type="my-encoder"), "not supported"),
    "family without attention": (lambda c: _edit_config(c, model_type="fnet"), "Fourier"),
    "layers as text": (lambda c: _edit_config(c, num_hidden_layers="two"), "num_hidden_layers"),
    "fewer layers than stored": (lambda c: _edit_config(c, num_hidden_layers=1), "1 layers"),
    "negative hidden size": (lambda c: _edit_config(c, hidden_size=-5), "hidden_size"),
    "zero heads": (lambda c: _edit_config(c, num_attention_heads=0), "num_attention_heads"),
    "wider than the weights": (
        lambda c: _edit_config(c, hidden_size=4096, intermediate_size=16384),
        "parameters",
    ),
    "heads do not divide": (lambda c: _edit_config(c, num_attention_heads=5), "could not load"),
    "labels not a mapping": (lambda c: _edit_config(c, id2label=["a", "b", "c"]), "id2label"),
}


@pytest.mark.parametrize("case", sorted(CONFIG_CASES))
def test_configs(case, ckpt, capsys):
    """Reference: transformers' config.json fields (model_type, num_hidden_layers, hidden_size,
    num_attention_heads, id2label) and the header's two stored layers."""
    make, match = CONFIG_CASES[case]
    make(ckpt)
    refused(capsys, ["analyze", str(ckpt), "--text", TEXT], ckpt.parent, match)


# ---------------------------------------------------------------------------------------------------------
# Tokenizers
# ---------------------------------------------------------------------------------------------------------


def _no_tokenizer(c: Path) -> None:
    for name in ("tokenizer.json", "vocab.txt", "tokenizer_config.json", "special_tokens_map.json"):
        (c / name).unlink(missing_ok=True)


def _small_vocabulary(c: Path) -> None:
    """Weights and config for a 1,000-token vocabulary beside the 30,522-token tokenizer."""
    t = _tensors(c)
    t["bert.embeddings.word_embeddings.weight"] = t["bert.embeddings.word_embeddings.weight"][:1000].clone()
    _save(c, t)
    _edit_config(c, vocab_size=1000)


TOKENIZER_CASES: dict[str, tuple[Callable[[Path], None], str]] = {
    "no tokenizer files": (_no_tokenizer, "no tokenizer files"),
    "tokenizer.json garbage": (
        lambda c: ((c / "vocab.txt").unlink(missing_ok=True), (c / "tokenizer.json").write_text("{not json"))[
            0
        ],
        "could not load",
    ),
    "tokenizer larger than the embeddings": (_small_vocabulary, "embedding table"),
}


@pytest.mark.parametrize("case", sorted(TOKENIZER_CASES))
def test_tokenizers(case, ckpt, capsys):
    """Reference: transformers' tokenizer files (tokenizer.json, vocab.txt, tokenizer_config.json)."""
    make, match = TOKENIZER_CASES[case]
    make(ckpt)
    refused(capsys, ["analyze", str(ckpt), "--text", TEXT], ckpt.parent, match)


# ---------------------------------------------------------------------------------------------------------
# Texts
# ---------------------------------------------------------------------------------------------------------


TEXT_CASES: dict[str, tuple[list[str], str]] = {
    "empty": (["analyze", "--text", ""], "empty"),
    "spaces": (["analyze", "--text", "   \t "], "empty"),
    "zero-width only": (["analyze", "--text", "\u200b\u200c\u200d\ufeff"], "no visible characters"),
    "control only": (["analyze", "--text", "\x01\x02\x7f"], "no visible characters"),
    "invalid utf-8": (["analyze", "--text", "ferry \udcff\udcfe"], "not valid UTF-8"),
    "explain invalid utf-8": (["explain", "--text", "\udcff"], "not valid UTF-8"),
    "explain compare zero-width": (["explain", "--text", TEXT, "--compare", "\u200b"], "--compare"),
}


@pytest.mark.parametrize("case", sorted(TEXT_CASES))
def test_texts(case, base, tmp_path, capsys):
    """Reference: Unicode character categories (Cc control, Cf format such as zero-width space, Z* space
    separators; unicodedata), and Python's surrogateescape for undecodable command-line bytes (PEP 383)."""
    argv, match = TEXT_CASES[case]
    refused(capsys, [argv[0], str(base), *argv[1:]], tmp_path, match)


# ---------------------------------------------------------------------------------------------------------
# Labelled data files
# ---------------------------------------------------------------------------------------------------------


def _write(name: str, content: bytes | str):
    def make(d: Path) -> Path:
        path = d / name
        path.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
        return path

    return make


DATA_CASES: dict[str, tuple[Callable[[Path], Path], str]] = {
    "csv header only": (_write("set.csv", "text,label\n"), "no usable utterance"),
    "csv empty": (_write("set.csv", ""), "empty"),
    "csv blank rows": (_write("set.csv", "text,label\n,\n , \n\n"), "no usable utterance"),
    "csv zero-width texts": (_write("set.csv", "text,label\n\u200b,timetable\n"), "no visible characters"),
    "csv missing column": (_write("set.csv", "utterance,label\nhi,timetable\n"), "no column"),
    "jsonl empty": (_write("set.jsonl", ""), "no usable utterance"),
    "jsonl nested 100,000 deep": (_write("set.jsonl", "[" * 100_000 + "\n"), "nested too deeply"),
    "jsonl 5,000-digit number": (
        _write("set.jsonl", '{"text": "hi", "label": ' + "9" * 5000 + "}\n"),
        "not valid JSON",
    ),
    "not utf-8": (_write("set.csv", b"text,label\n\xff\xfe,timetable\n"), "not UTF-8"),
    "unknown suffix": (_write("set.txt", "text,label\nhi,timetable\n"), "suffix"),
    "a folder": (lambda d: ((d / "set.csv").mkdir(), d / "set.csv")[1], "is a folder"),
    "missing file": (lambda d: d / "nope.csv", "no such data file"),
}


@pytest.mark.parametrize("case", sorted(DATA_CASES))
def test_data_files(case, base, tmp_path, capsys):
    """Reference: RFC 4180 (CSV with a header row), JSON Lines (one JSON value per line), UTF-8 (RFC 3629);
    Python's int-string conversion limit (sys.set_int_max_str_digits, 4300 digits by default)."""
    make, match = DATA_CASES[case]
    data = make(tmp_path)
    argv = ["corpus", str(base), str(data), "--out", str(tmp_path / "report"), "--quiet", "--no-figures"]
    refused(capsys, argv, tmp_path, match)


# ---------------------------------------------------------------------------------------------------------
# Output paths
# ---------------------------------------------------------------------------------------------------------


def _good_data(d: Path) -> Path:
    return write_csv(d / "set.csv", UTTERANCES[:6])


OUTPUT_CASES: dict[str, tuple[Callable[[Path, Path], list[str]], str]] = {
    "--save-attention names a folder": (
        lambda b, d: ["analyze", str(b), "--text", TEXT, "--save-attention", str(d)],
        "is a folder",
    ),
    "--save-attention under a file": (
        lambda b, d: ["analyze", str(b), "--text", TEXT, "--save-attention", str(_good_data(d) / "x.npz")],
        "not a folder",
    ),
    "--save-attention read-only": (
        lambda b, d: [
            "analyze",
            str(b),
            "--text",
            TEXT,
            "--save-attention",
            str(read_only_folder(d) / "a.npz"),
        ],
        "cannot write",
    ),
    "--figure names a folder": (
        lambda b, d: [
            "explain",
            str(b),
            "--text",
            TEXT,
            "--figure",
            str((d / "f.png").mkdir() or d / "f.png"),
        ],
        "is a folder",
    ),
    "--figure read-only": (
        lambda b, d: ["explain", str(b), "--text", TEXT, "--figure", str(read_only_folder(d) / "f.png")],
        "cannot write",
    ),
    "--out is a file": (
        lambda b, d: ["corpus", str(b), str(_good_data(d)), "--out", str(_good_data(d))],
        "is a file",
    ),
    "--out holds other files": (
        lambda b, d: ["corpus", str(b), str(_good_data(d)), "--out", str(d)],
        "not a Headcount report",
    ),
    "--out read-only": (
        lambda b, d: ["corpus", str(b), str(_good_data(d)), "--out", str(read_only_folder(d) / "r")],
        "cannot write",
    ),
}


@pytest.mark.parametrize("case", sorted(OUTPUT_CASES))
def test_output_paths(case, base, tmp_path, capsys):
    """Reference: POSIX errors for writing into a folder path (EISDIR), under a file (ENOTDIR) or where
    writing is not permitted (EACCES/EPERM); each must be caught before the run starts."""
    make, match = OUTPUT_CASES[case]
    work = tmp_path / "work"
    work.mkdir()
    argv = make(base, work)
    refused(capsys, argv, tmp_path, match)


def test_disk_full_while_writing_the_report_leaves_nothing(base, tmp_path, capsys, monkeypatch):
    """ENOSPC during the report's write: one line, and neither the report folder nor a temporary file remains.

    Reference: POSIX ENOSPC ("No space left on device") raised by fsync, as a full disk reports it.
    """
    data = write_csv(tmp_path / "set.csv", UTTERANCES[:6])

    def full(fd):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(os, "fsync", full)
    argv = ["corpus", str(base), str(data), "--out", str(tmp_path / "report"), "--quiet", "--orders", "none"]
    err = refused(capsys, argv, tmp_path, "No space left on device")
    assert f"{tmp_path / 'report'}{os.sep}summary.json" in err


def test_a_second_run_replaces_the_first_report_whole(base, tmp_path, capsys):
    """Two runs into one --out: the second run's folder holds only its own files (no stale pruning files).

    Reference: the report's file list (summary.json, heads.csv, similar_pairs.csv; pruning.csv and
    prune_mask.json only when pruning ran).
    """
    data = write_csv(tmp_path / "set.csv", UTTERANCES[:6])
    out = tmp_path / "report"
    common = ["corpus", str(base), str(data), "--out", str(out), "--quiet", "--no-figures"]
    assert main([*common, "--orders", "random", "--no-importance"]) == 0
    assert (out / "pruning.csv").is_file()
    assert main([*common, "--orders", "none", "--no-importance"]) == 0
    capsys.readouterr()
    assert sorted(p.name for p in out.iterdir()) == ["heads.csv", "similar_pairs.csv", "summary.json"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report", "set.csv"]  # no temporary folder left


# ---------------------------------------------------------------------------------------------------------
# Usage
# ---------------------------------------------------------------------------------------------------------


USAGE_CASES: dict[str, tuple[list[str], str]] = {
    "unknown command": (["frobnicate"], "invalid choice"),
    "missing --text": (["analyze", "{model}"], "--text"),
    "negative --top": (["explain", "{model}", "--text", TEXT, "--compare", TEXT, "--top", "-3"], "--top"),
    "--steps 1": (["explain", "{model}", "--text", TEXT, "--steps", "1"], "--steps"),
    "--steps not a number": (["explain", "{model}", "--text", TEXT, "--steps", "many"], "--steps"),
    "--batch-size 0": (["corpus", "{model}", "x.csv", "--out", "r", "--batch-size", "0"], "--batch-size"),
    "--checkpoint -1": (["analyze", "{model}", "--text", TEXT, "--checkpoint", "-1"], "--checkpoint"),
    "--checkpoint of a plain folder": (
        ["analyze", "{model}", "--text", TEXT, "--checkpoint", "3"],
        "checkpoint-3",
    ),
    "--js-rows words": (["corpus", "{model}", "x.csv", "--out", "r", "--js-rows", "some"], "auto, all or"),
    "unknown option": (["analyze", "{model}", "--text", TEXT, "--colour", "red"], "unrecognized"),
}


@pytest.mark.parametrize("case", sorted(USAGE_CASES))
def test_usage(case, base, tmp_path, capsys):
    """Reference: argparse's usage errors, rewritten by the CLI to one line (common practice, no source)."""
    argv, match = USAGE_CASES[case]
    refused(capsys, [a.replace("{model}", str(base)) for a in argv], tmp_path, match)


# ---------------------------------------------------------------------------------------------------------
# Window actions
# ---------------------------------------------------------------------------------------------------------


def _launch(argv: list[str], capsys, root: Path, match: str) -> None:
    from ui.launcher import main as launch

    before = files_under(root)
    code = launch(argv)
    out, err = capsys.readouterr()
    assert code == 2 and err.count("\n") == 1 and "Traceback" not in err, err
    assert match.lower() in err.lower(), err
    assert files_under(root) == before


WINDOW_CASES = ("open without a display", "--screenshot read-only", "--screenshot names a folder")


@pytest.mark.parametrize("case", WINDOW_CASES)
def test_window_actions(case, base, tmp_path, capsys, monkeypatch):
    """Reference: the X11/Wayland environment (DISPLAY, WAYLAND_DISPLAY) and Qt's QT_QPA_PLATFORM
    plugins; POSIX write errors for the screenshot path."""
    if case == "open without a display":
        for name in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM"):
            monkeypatch.delenv(name, raising=False)
        monkeypatch.setattr("sys.platform", "linux")
        _launch(["open", str(base)], capsys, tmp_path, "no display")
    elif case == "--screenshot read-only":
        _launch(
            ["open", str(base), "--screenshot", str(read_only_folder(tmp_path) / "s.png")],
            capsys,
            tmp_path,
            "cannot write",
        )
    else:
        _launch(["open", str(base), "--screenshot", str(tmp_path)], capsys, tmp_path, "is a folder")


# ---------------------------------------------------------------------------------------------------------
# Numbers at the edges
# ---------------------------------------------------------------------------------------------------------


def test_a_short_position_table_cuts_long_messages(tmp_path, minilm_dir, capsys):
    """A RoBERTa-family model with 16 positions analyses a long message cut to the positions it has.

    Reference: transformers' RoBERTa position ids, which start after the padding id (pad_token_id + 1),
    so 16 positions with pad id 0 hold 15 tokens; the weights equal transformers' output_attentions
    on the same cut input.
    """
    import numpy as np

    from inspector.checkpoint.capture import encode
    from inspector.checkpoint.loader import load_checkpoint

    folder = build_checkpoint("roberta", tmp_path / "short", minilm_dir, max_position_embeddings=16)
    long_text = " ".join(["the evening ferry to Orlestow leaves from pier four"] * 5)
    assert main(["analyze", str(folder), "--text", long_text, "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert len(doc["tokens"]) == 15
    lm = load_checkpoint(folder)
    with torch.no_grad():
        ref = lm.model(**encode(lm, [long_text]).model_inputs(), output_attentions=True).attentions
    got = np.array([h["entropy"] for h in doc["heads"]]).reshape(2, 4)
    rows = torch.cat(ref).numpy()
    want = -(rows * np.log(np.where(rows > 0, rows, 1))).sum(-1).mean(-1)
    np.testing.assert_allclose(got, want, atol=1e-5)


def test_overflowing_outputs_are_reported_and_json_has_no_bare_nan(ckpt, tmp_path, capsys):
    """Finite but huge classifier weights overflow the logits: one line saying so, not NaN numbers.

    Reference: IEEE 754 float32 overflow (3e38 x 3e38 = inf; inf - inf = NaN in the softmax);
    RFC 8259 (JSON has no NaN or Infinity literals).
    """
    from inspector.figures.files import json_text

    t = _tensors(ckpt)
    t["classifier.weight"] = torch.full_like(t["classifier.weight"], 3e38)
    _save(ckpt, t)
    refused(
        capsys,
        ["analyze", str(ckpt), "--text", TEXT, "--json"],
        tmp_path,
        "NaN or infinite values on this text",
    )

    def strict(name):
        raise AssertionError(f"bare {name} in JSON")

    doc = {"a": float("nan"), "b": [float("inf"), 1.5], "c": {"d": -float("inf")}}
    assert json.loads(json_text(doc), parse_constant=strict) == {
        "a": None,
        "b": [None, 1.5],
        "c": {"d": None},
    }
