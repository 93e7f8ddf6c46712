"""The ``corpus`` command and the Qt-free run API (progress, cancel, outputs with stable names)."""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest

from inspector.checkpoint.loader import load_checkpoint
from inspector.cli.main import main
from inspector.corpus.dataset import read_labelled
from inspector.corpus.report import HEADS_HEADER, PRUNING_HEADER, SIMILAR_PAIRS_HEADER
from inspector.corpus.run import CorpusCancelled, CorpusSettings, run_corpus
from inspector.measures.metrics import METRIC_NAMES
from tests.corpus_models import UTTERANCES, save_tiny_classifier, write_csv, write_jsonl

FIGURES = ("confusion_matrix", "head_importance", "head_similarity", "pruning_curve")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    root = tmp_path_factory.mktemp("corpus_cli")
    model = save_tiny_classifier(root / "model")
    rows = [*UTTERANCES, ("what does a dog ticket cost", "pets_on_board")]
    return {
        "model": model,
        "csv": write_csv(root / "set.csv", rows),
        "jsonl": write_jsonl(root / "set.jsonl", rows, keys=("utterance", "intent")),
        "root": root,
    }


def _read_csv(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.reader(fh))


def test_cli_writes_every_output_under_stable_names(files, capsys):
    """CSV run: summary.json, heads.csv, similar_pairs.csv, pruning.csv, prune_mask.json and figures.

    Reference: the file list and column names of the tracker issue; PNG and SVG magic
    numbers from their specifications (PNG signature bytes, SVG root element).
    """
    out = files["root"] / "out_csv"
    code = main(
        [
            "corpus",
            str(files["model"]),
            str(files["csv"]),
            "--out",
            str(out),
            "--batch-size",
            "4",
            "--prune-every",
            "2",
            "--quiet",
        ]
    )
    assert code == 0
    text = capsys.readouterr().out
    assert "without retraining" in text and "pets_on_board" in text and "line 20" in text
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["data"]["utterances"] == len(UTTERANCES)
    assert summary["data"]["unknown_labels"] == {"pets_on_board": 1}
    assert summary["data"]["bad_rows"][0]["row"] == 20
    cm = summary["confusion_matrix"]
    assert cm["labels"] == ["book_crossing", "cancel_booking", "timetable"]
    assert np.array(cm["matrix"]).sum() == len(UTTERANCES)
    assert set(summary["per_intent"]) == set(cm["labels"])
    assert {"precision", "recall", "support"} <= set(summary["per_intent"]["timetable"])
    assert "without retraining" in summary["pruning"]["caution"]
    assert summary["redundancy"]["log_base"] == 2

    heads = _read_csv(out / "heads.csv")
    assert tuple(heads[0]) == HEADS_HEADER
    assert {f"{n}_mean" for n in METRIC_NAMES} | {f"{n}_std" for n in METRIC_NAMES} <= set(heads[0])
    assert len(heads) == 1 + 2 * 4 and heads[1][:2] == ["0", "0"] and heads[-1][:2] == ["1", "3"]
    pairs = _read_csv(out / "similar_pairs.csv")
    assert tuple(pairs[0]) == SIMILAR_PAIRS_HEADER and len(pairs) == 1 + 8 * 7 // 2
    js = [float(r[4]) for r in pairs[1:]]
    assert js == sorted(js)
    pruning = _read_csv(out / "pruning.csv")
    assert tuple(pruning[0]) == PRUNING_HEADER
    assert [r[2] for r in pruning[1:] if r[0] == "importance"] == ["0", "2", "4", "6", "8"]
    assert {r[0] for r in pruning[1:]} == {"importance", "random"}
    mask = json.loads((out / "prune_mask.json").read_text(encoding="utf-8"))
    assert all(k in ("0", "1") and all(0 <= h < 4 for h in v) for k, v in mask.items())
    assert sum(len(v) for v in mask.values()) == summary["pruning"]["heads_removed"]
    for stem in FIGURES:
        assert (out / f"{stem}.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert b"<svg" in (out / f"{stem}.svg").read_bytes()[:2000]


def test_cli_json_on_jsonl_with_field_names(files, capsys):
    """--json prints the same summary document as summary.json; JSONL with custom keys.

    Reference: JSON Lines convention; RFC 8259 for parsing stdout.
    """
    out = files["root"] / "out_jsonl"
    code = main(
        [
            "corpus",
            str(files["model"]),
            str(files["jsonl"]),
            "--out",
            str(out),
            "--text-field",
            "utterance",
            "--label-field",
            "intent",
            "--orders",
            "random",
            "--no-importance",
            "--no-figures",
            "--json",
            "--quiet",
            "--remove",
            "3",
        ]
    )
    assert code == 0
    printed = json.loads(capsys.readouterr().out)
    assert printed == json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert printed["importance"] is None and printed["data"]["format"] == "jsonl"
    assert printed["pruning"]["heads_removed"] == 3 and printed["pruning"]["max_drop"] is None
    assert printed["data"]["bad_rows"] == [{"row": 19, "reason": "unknown label 'pets_on_board'"}]
    assert not (out / "confusion_matrix.png").exists()


@pytest.mark.parametrize(
    "argv_tail, needle",
    [
        (["--batch-size", "0"], "--batch-size"),
        (["--orders", "importance,alphabetical"], "alphabetical"),
        (["--batch-size", "many"], "whole number"),
        (["--on-bad-row", "fail"], "bad row"),
        (["--max-drop", "5"], "tolerance"),
    ],
)
def test_cli_bad_options_are_one_line_errors_with_status_2(files, capsys, argv_tail, needle):
    """Bad options, and bad rows under --on-bad-row fail, exit 2 with one line on stderr.

    Reference: the tracker issue's CLI contract (one-line error, exit status 2).
    """
    argv = ["corpus", str(files["model"]), str(files["csv"]), "--out", str(files["root"] / "x"), *argv_tail]
    try:
        code = main(argv)
    except SystemExit as exc:  # argparse's own checks exit from inside parse_args
        code = exc.code
    err = capsys.readouterr().err
    assert code == 2
    assert needle in err and err.count("\n") == 1


def test_cli_bad_model_or_missing_data(files, capsys, tmp_path):
    """A folder that is no checkpoint, and a data file that does not exist: exit 2, one line.

    Reference: the tracker issue's CLI contract.
    """
    assert main(["corpus", str(tmp_path), str(files["csv"]), "--out", str(tmp_path / "o")]) == 2
    assert (
        main(["corpus", str(files["model"]), str(tmp_path / "none.csv"), "--out", str(tmp_path / "o")]) == 2
    )
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 2 and "config.json" in err[0] and "no such data file" in err[1]


def test_run_api_reports_progress_and_can_be_cancelled(files):
    """on_progress(done, total) counts up to total; should_stop() stops the run between batches.

    Reference: common practice, no source (cooperative cancellation).
    """
    lm = load_checkpoint(files["model"])
    data = read_labelled(files["csv"], known_labels=lm.labels)
    seen, phases = [], []
    settings = CorpusSettings(batch_size=5, prune_every=4, prune_subset=10)
    report = run_corpus(
        lm, data, settings, on_progress=lambda d, t: seen.append((d, t)), on_phase=phases.append
    )
    assert phases == ["scan", "importance", "pruning"]
    done = [d for d, _ in seen]
    assert done == list(range(1, len(seen) + 1)) and seen[-1][0] == seen[-1][1]
    assert report.pruning is not None and report.pruning.subset == 10
    assert any("10 of 18" in n for n in report.notes)
    calls = []

    def stop() -> bool:
        calls.append(1)
        return len(calls) > 2

    with pytest.raises(CorpusCancelled):
        run_corpus(lm, data, settings, should_stop=stop)
    assert len(calls) == 3


def test_cli_progress_has_one_bar_per_phase_in_its_own_unit(files, capsys):
    """Without --quiet, stderr shows a scan bar and an importance bar counting utterances and a pruning
    bar counting steps, each ending at its own total (not one batch count across phases).

    Reference: the run's own record in summary.json: the utterances read (``data.utterances``, the file's
    rows less the unknown-label one) and the pruning steps (``pruning.measured_steps``: one accuracy
    measurement per measured step and order after the unpruned start, whose accuracy the scan already has).
    """
    out = files["root"] / "out_bars"
    argv = ["corpus", str(files["model"]), str(files["csv"]), "--out", str(out), "--batch-size", "4"]
    assert main([*argv, "--prune-every", "2"]) == 0
    err = capsys.readouterr().err.replace("\r", "\n")
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    rows = summary["data"]["utterances"]
    assert rows == len(UTTERANCES)
    finals = {line.split(":")[0]: line for line in err.splitlines() if "100%" in line}
    assert set(finals) == {"scan", "importance", "pruning"}
    assert f"{rows}/{rows} utterances" in finals["scan"]
    assert f"{rows}/{rows} utterances" in finals["importance"]
    steps = sum(len(s) - 1 for s in summary["pruning"]["measured_steps"].values())
    assert f"/{steps} steps" in finals["pruning"]
    assert "batch" not in err
