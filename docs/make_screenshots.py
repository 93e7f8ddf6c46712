"""Render screenshots of the window offscreen into docs/, at a 1366 x 768 laptop size.

Run:  .venv/bin/python docs/make_screenshots.py [--sizes-only]

1. Long messages: ``window_16.png``, ``window_128.png`` and ``window_512.png`` show
   the sentence page on a randomly initialised BERT-base-sized classifier (12 layers
   x 12 heads, hidden 768, built here in a temporary folder with the MiniLM
   tokenizer; its attention is random) and messages of 16, 128 and 512 tokens made
   of the ferry evaluation set's utterances run together, like a pasted ticket
   thread. Each is one ``headcount open MODEL --text ... --screenshot FILE --size
   1366x768`` command.
2. The sample model: ``window.png`` and ``corpus.png`` with the same command, then
   panel close-ups, the explain page with a rewording, the corpus page's heads
   tab, a dark palette and a bad folder, driven in one window.

Uses the bundled sample model and a sentence from the evaluation set that it
misroutes. If the sample model has not been trained yet, a small randomly
initialised classifier with the ferry intents is built in a temporary folder
instead (its attention is random: the pictures then show the window, not a
trained model), and the file names get a ``-random`` note in the log.
"""

from __future__ import annotations

import csv
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

DOCS = ROOT / "docs"
LAPTOP = (1366, 768)
LENGTHS = (16, 128, 512)
BASE_SHAPE = {
    "hidden_size": 768,
    "num_hidden_layers": 12,
    "num_attention_heads": 12,
    "intermediate_size": 3072,
}
"""BERT-base's shape. Its random weights use initializer_range 0.08 (0.02 is BERT's default): with the
default, random attention at 128+ tokens is nearly uniform and every view looks flat grey."""
FALLBACK_SENTENCES = [
    ("is the evening sailing to Quillhaven cancelled because of the storm", "disruption_status"),
    ("can my two dogs come on the crossing with me", "pets_on_board"),
    ("how much does it cost to take a van over on saturday", "vehicle_fares"),
    ("I want to move my booking to the later sailing", "change_booking"),
]


def wait_until(app, condition, timeout: float = 120.0) -> None:
    from PySide6.QtCore import QEventLoop

    end = time.monotonic() + timeout
    while not condition():
        if time.monotonic() > end:
            raise TimeoutError("the window did not get ready in time")
        app.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 50)
        time.sleep(0.01)
    for _ in range(5):
        app.processEvents()


def screenshot(model: Path, out: Path, *args: str) -> None:
    """One ``headcount open MODEL ... --screenshot OUT --size 1366x768`` command (offscreen, settings kept apart)."""
    command = [sys.executable, "-m", "ui.launcher", "open", str(model), *args, "--screenshot", str(out)]
    command += ["--size", "x".join(map(str, LAPTOP))]
    done = subprocess.run(command, cwd=ROOT, capture_output=True, text=True, timeout=1800)
    if done.returncode != 0:
        raise RuntimeError(f"{' '.join(command[2:])} failed:\n{done.stderr}")
    print(f"wrote docs/{out.name}")


def message_with_tokens(tokenizer, n: int) -> str:
    """The evaluation set's utterances run together (a pasted thread), cut at the last word within ``n`` tokens."""
    from inspector.paths import SAMPLE_EVAL

    with SAMPLE_EVAL.open(newline="", encoding="utf-8") as fh:
        words = " ".join(f"{row['text']}." for row in csv.DictReader(fh)).split()
    lo, hi = 1, len(words)
    while lo < hi:
        mid = (lo + hi + 1) // 2
        if len(tokenizer(" ".join(words[:mid]), truncation=False)["input_ids"]) <= n:
            lo = mid
        else:
            hi = mid - 1
    return " ".join(words[:lo])


def size_shots(tmp: Path) -> None:
    """The sentence page at 1366 x 768 with 16-, 128- and 512-token messages on a BERT-base-sized model."""
    import transformers

    from bench.bench_ui import random_bert_classifier
    from inspector.paths import SAMPLE_EVAL

    with SAMPLE_EVAL.open(newline="", encoding="utf-8") as fh:
        labels = sorted({row["label"] for row in csv.DictReader(fh)})
    model = random_bert_classifier(tmp / "base_sized", labels, seed=0, initializer_range=0.08, **BASE_SHAPE)
    tokenizer = transformers.AutoTokenizer.from_pretrained(str(model), local_files_only=True)
    for n in LENGTHS:
        screenshot(model, DOCS / f"window_{n}.png", "--text", message_with_tokens(tokenizer, n))


def random_classifier(folder: Path) -> Path:
    """A 4-layer x 6-head random classifier over the ferry intents of the evaluation set."""
    from bench.bench_ui import SAMPLE_SHAPE, random_bert_classifier
    from inspector.paths import SAMPLE_EVAL

    with SAMPLE_EVAL.open(newline="", encoding="utf-8") as fh:
        labels = sorted({row["label"] for row in csv.DictReader(fh)})
    return random_bert_classifier(folder, labels, seed=1, initializer_range=0.2, **SAMPLE_SHAPE)


def misrouted_sentence(model_dir: Path) -> tuple[str, str]:
    """The first evaluation sentence the model gets wrong (short enough for readable views)."""
    from inspector.checkpoint.loader import load_checkpoint
    from inspector.measures.analysis import analyze_sentence
    from inspector.paths import SAMPLE_EVAL

    lm = load_checkpoint(model_dir)
    with SAMPLE_EVAL.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    for row in rows[:400]:
        words = len(row["text"].split())
        if 7 <= words <= 14:
            pred = analyze_sentence(lm, row["text"]).prediction
            if pred is not None and pred.label != row["label"]:
                return row["text"], row["label"]
    return FALLBACK_SENTENCES[0]


def misrouted_fallback(model_dir: Path) -> tuple[str, str]:
    """The first of the invented ferry sentences the (random) model misroutes."""
    from inspector.checkpoint.loader import load_checkpoint
    from inspector.measures.analysis import analyze_sentence

    lm = load_checkpoint(model_dir)
    for text, label in FALLBACK_SENTENCES:
        if analyze_sentence(lm, text).prediction.label != label:
            return text, label
    return FALLBACK_SENTENCES[0]


def explain_with_rewording(app, window, text: str, expected: str) -> None:
    """Open the misfire on the Explain page, then compare it with a copy that lacks its most decisive word.

    The decisive word is the one whose removal lowers the predicted label's
    probability most (occlusion), so the rewording shows what that word did.
    """
    import numpy as np

    page = window.explain_page
    window.open_explanation(text, expected)
    wait_until(app, lambda: page.state.ready and not window.is_busy())
    ex = page.state.explanation
    drop = int(np.argmax(ex.predicted.occlusion))
    words = text.split() if len(text.split()) == len(ex.words) else ex.words  # keep the original casing
    page.edited.setText(" ".join(w for i, w in enumerate(words) if i != drop))
    page.run()
    wait_until(app, lambda: page.state.comparison is not None and not window.is_busy())


def corpus_run(app, window) -> None:
    """Run the Corpus page on the bundled evaluation set and shoot its heads tab."""
    from inspector.paths import SAMPLE_EVAL

    page = window.corpus_page
    window.show_page(page)
    page.path_edit.setText(str(SAMPLE_EVAL))
    page.every.setValue(2)  # a measured point every two heads keeps the screenshot run short
    page.run()
    wait_until(app, lambda: page.report is not None and not window.is_busy(), timeout=600.0)
    page.tabs.setCurrentIndex(2)
    wait_until(app, lambda: not window.is_busy())
    window.grab().save(str(DOCS / "corpus_heads.png"))
    page.tabs.setCurrentIndex(0)
    window.grab().save(str(DOCS / "corpus.png"))
    ev = page.report.evaluation
    pair = max(
        ((i, j) for i in range(len(ev.labels)) for j in range(len(ev.labels)) if i != j),
        key=lambda ij: ev.confusion[ij],
    )
    page.confusion.cell_clicked.emit(*pair)  # the largest confusable pair, as a click on its cell
    wait_until(app, lambda: not window.is_busy())
    window.grab().save(str(DOCS / "corpus_misfires.png"))
    page.clear_filter()
    page.tabs.setCurrentIndex(0)
    print("wrote docs/corpus.png, docs/corpus_misfires.png, docs/corpus_heads.png")
    report_page(page.report, window.lm)


def report_page(report, lm) -> None:
    """docs/report_page.png: the review report's explanation page of the most confident misfire (A4)."""
    from inspector.corpus.report import write_report
    from inspector.figures.report.build import build_sections, explain_for_report
    from inspector.figures.report.run_folder import read_run

    with tempfile.TemporaryDirectory() as tmp:
        write_report(report, tmp, figures=False)
        run = read_run(tmp)
        sections = build_sections(run, explain_for_report(lm, run, explain=1), paper="a4")
    page = next(s for s in sections if s.title.startswith("Explanations")).pages[0]
    page.savefig(str(DOCS / "report_page.png"), dpi=110, facecolor="white", metadata={"Software": None})
    print("wrote docs/report_page.png")


def two_heads_that_matter(lm, text: str, expected: str) -> tuple[list[tuple[int, int]], float]:
    """Greedily, the two heads whose switching off raises the expected label's probability most (and that)."""
    from inspector.checkpoint.masks import HeadMask
    from inspector.measures.analysis import predict_sentence

    chosen: list[tuple[int, int]] = []
    best = 0.0
    for _ in range(2):
        heads = [(l, h) for l in range(lm.num_layers) for h in range(lm.num_heads) if (l, h) not in chosen]
        scores = {
            lh: predict_sentence(lm, text, mask=HeadMask.of([*chosen, lh])).probabilities[expected]
            for lh in heads
        }
        head = max(scores, key=scores.get)
        chosen.append(head)
        best = scores[head]
    return chosen, best


def heads_off_case(model_dir: Path, limit: int = 12) -> tuple[str, str, list[tuple[int, int]]]:
    """Among the first misfires of the evaluation set, the one two switched-off heads move most toward its label."""
    from inspector.checkpoint.loader import load_checkpoint
    from inspector.measures.analysis import predict_sentence
    from inspector.paths import SAMPLE_EVAL

    lm = load_checkpoint(model_dir)
    with SAMPLE_EVAL.open(newline="", encoding="utf-8") as fh:
        rows = [r for r in csv.DictReader(fh) if 7 <= len(r["text"].split()) <= 14]
    cases = []
    for row in rows:
        full = predict_sentence(lm, row["text"])
        if full.label == row["label"]:
            continue
        heads, after = two_heads_that_matter(lm, row["text"], row["label"])
        cases.append((after - full.probabilities[row["label"]], row["text"], row["label"], heads))
        if len(cases) >= limit:
            break
    _gain, text, expected, heads = max(cases)
    return text, expected, heads


def heads_off(app, window, model_dir: Path) -> None:
    """A misfire on the sentence page with the two heads switched off that move it most toward its label."""
    from inspector.checkpoint.masks import HeadMask
    from inspector.formatting import head_name

    page = window.sentence_page
    window.show_page(page)
    size = window.size()
    window.resize(1366, 768)  # a laptop screen (the window may keep a larger minimum)
    text, expected, heads = heads_off_case(model_dir)
    window.open_sentence(text, expected)
    wait_until(app, lambda: page.state.analysis.text == text and not window.is_busy())
    page.set_mask(HeadMask.of(heads))
    page.select_head(*heads[0])
    wait_until(app, lambda: page.state.analysis.mask.heads == tuple(sorted(heads)) and not window.is_busy())
    window.grab().save(str(DOCS / "heads_off.png"))
    page.mosaic_panel.grab().save(str(DOCS / "heads_off_mosaic.png"))
    page.reset_mask()
    window.resize(size)
    wait_until(app, lambda: not page.state.analysis.mask and not window.is_busy())
    names = ", ".join(head_name(*h) for h in heads)
    print(f"wrote docs/heads_off.png, docs/heads_off_mosaic.png ({names} off)")


def dark_palette():
    from PySide6.QtGui import QColor, QPalette

    pal = QPalette()
    roles = {
        QPalette.ColorRole.Window: "#202124",
        QPalette.ColorRole.WindowText: "#e8e8e8",
        QPalette.ColorRole.Base: "#17181a",
        QPalette.ColorRole.AlternateBase: "#26272a",
        QPalette.ColorRole.Text: "#e8e8e8",
        QPalette.ColorRole.Button: "#2b2c2f",
        QPalette.ColorRole.ButtonText: "#e8e8e8",
        QPalette.ColorRole.Highlight: "#3d6fb4",
        QPalette.ColorRole.HighlightedText: "#ffffff",
        QPalette.ColorRole.ToolTipBase: "#2b2c2f",
        QPalette.ColorRole.ToolTipText: "#e8e8e8",
        QPalette.ColorRole.PlaceholderText: "#9a9a9a",
        QPalette.ColorRole.Mid: "#3a3b3e",
        QPalette.ColorRole.Dark: "#111111",
        QPalette.ColorRole.Light: "#444548",
    }
    for role, colour in roles.items():
        pal.setColor(role, QColor(colour))
    # A dark desktop theme greys out disabled controls too (setColor above set every group alike).
    for role in (QPalette.ColorRole.WindowText, QPalette.ColorRole.Text, QPalette.ColorRole.ButtonText):
        pal.setColor(QPalette.ColorGroup.Disabled, role, QColor("#7a7a7a"))
    return pal


def main() -> int:
    from PySide6.QtCore import QSettings

    from inspector.paths import SAMPLE_MODEL, sample_model_available
    from ui.app import application
    from ui.main_window import MainWindow

    tmp = tempfile.TemporaryDirectory()
    size_shots(Path(tmp.name))
    if "--sizes-only" in sys.argv[1:]:
        tmp.cleanup()
        return 0
    app = application()
    if sample_model_available():
        model = SAMPLE_MODEL
        text, expected = misrouted_sentence(model)
    else:
        print("sample model not found: using a random ferry-intent classifier (random attention)")
        model = random_classifier(Path(tmp.name) / "ferry_intents_random")
        text, expected = misrouted_fallback(model)
    screenshot(model, DOCS / "window.png", "--text", text, "--expected", expected)
    screenshot(model, DOCS / "corpus.png", "--page", "corpus")
    settings = QSettings(str(Path(tmp.name) / "settings.ini"), QSettings.Format.IniFormat)
    window = MainWindow(settings)
    window.resize(*LAPTOP)
    window.show()
    window.open_sentence(text, expected)
    window.open_model(model)
    page = window.sentence_page
    wait_until(app, lambda: page.state.ready and not window.is_busy())
    page.select_head(min(2, page.state.analysis.num_layers - 1), min(3, page.state.analysis.num_heads - 1))
    wait_until(app, lambda: not window.is_busy())

    shots = {
        "head_mosaic.png": page.mosaic_panel,
        "close_up.png": page.closeup_panel,
        "token_arcs.png": page.arcs_panel,
        "relevance_band.png": page.band_panel,
        "sentence_bar.png": page.bar,
    }
    for name, widget in shots.items():
        widget.grab().save(str(DOCS / name))
        print(f"wrote docs/{name}")

    page.links_box.setCurrentIndex(1)  # every link above a threshold
    page.threshold_box.setValue(0.25)
    wait_until(app, lambda: not window.is_busy())
    page.arcs_panel.grab().save(str(DOCS / "token_arcs_threshold.png"))
    page.words_action.setChecked(True)
    page.special_action.setChecked(True)
    page.source_box.setCurrentIndex(2)  # rollout
    wait_until(app, lambda: not window.is_busy())
    page.closeup_panel.grab().save(str(DOCS / "close_up_rollout_words.png"))
    print("wrote docs/token_arcs_threshold.png, docs/close_up_rollout_words.png")

    page.words_action.setChecked(False)
    page.special_action.setChecked(False)
    page.source_box.setCurrentIndex(0)
    page.links_box.setCurrentIndex(0)
    explain_with_rewording(app, window, text, expected)
    window.grab().save(str(DOCS / "explain.png"))
    print("wrote docs/explain.png")
    corpus_run(app, window)
    heads_off(app, window, model)
    window.open_sentence(text, expected)
    wait_until(app, lambda: page.state.analysis.text == text and not window.is_busy())

    window.show_page(page)
    app.setPalette(dark_palette())
    wait_until(app, lambda: not window.is_busy())
    window.grab().save(str(DOCS / "window_dark.png"))
    print("wrote docs/window_dark.png")

    bad = Path(tmp.name) / "not_a_model"
    bad.mkdir()
    app.setPalette(app.style().standardPalette())
    window.open_model(bad)
    wait_until(app, lambda: window.message_bar.text() != "")
    window.grab().save(str(DOCS / "window_bad_folder.png"))
    print("wrote docs/window_bad_folder.png")
    window.close()
    tmp.cleanup()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
