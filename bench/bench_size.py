"""Speed at size: a BERT-base-sized model on messages of 16 to 512 tokens, window path included.

Run: .venv/bin/python -m bench.bench_size [--lengths 16 128 512] [--repeats N] [--threads N]
 or: .venv/bin/python bench/bench_size.py

Model: a randomly initialised BERT-base-sized classifier (12 layers x 12 heads,
hidden 768, 14 labels) built here with the MiniLM tokenizer; nothing is
downloaded. Messages: invented ferry-operator words repeated to the length.

Printed per length (medians of warm repeats, measured in alternation in one
process, same thread count for everything; targets from the tracker issue):

* ``forward``: the bare eager forward pass ``model(**inputs)`` under ``no_grad``;
* ``metrics``: every per-head metric from the captured attention, as a multiple of
  the forward (target <= 0.1x at every length);
* ``keystroke``: the window's analysis of a new text (forward with capture, metrics,
  what the shown views need) plus every view of the sentence page updated and
  painted, as a multiple of the forward (targets <= 1.3x at 128 tokens, <= 1.5x at 512);
* ``words`` / ``special``: switching the word view or the special tokens on or off
  and repainting (the slower of the two directions; target <= 100 ms at 512 tokens).

Work the window does in the background after the views are painted (getting the views
one switch away ready) is let finish between timed calls, untimed: a user reads the
views before typing on or switching.

The window is rendered offscreen at 1366 x 768.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from bench.common import build_base_sized, interleaved_medians, load_note, sentence_with_tokens  # noqa: E402

LENGTHS = (16, 32, 64, 128, 256, 512)
TARGETS = {"metrics": 0.1, "keystroke_128": 1.3, "keystroke_512": 1.5, "toggle_ms": 100.0}


def _repeats(n: int, base: int) -> int:
    """Fewer repeats for long inputs (a 512-token pass takes about a second on one thread)."""
    return max(3, base if n <= 64 else base // 2 if n <= 256 else base // 4)


def bench_length(window, lm, n_target: int, repeats: int) -> dict[str, float]:
    import torch
    from PySide6.QtWidgets import QApplication

    from inspector.checkpoint.capture import encode
    from inspector.measures.analysis import analyze_sentence
    from inspector.measures.metrics import head_metrics
    from ui.main_window import analyse_interactively

    page = window.sentence_page
    texts = [sentence_with_tokens(lm, n_target, offset=i) for i in range(3)]
    inputs = [encode(lm, [t]).model_inputs() for t in texts]
    tokens = len(encode(lm, [texts[0]]).tokens[0])
    sample = analyze_sentence(lm, texts[0])
    counter = {"i": 0}

    def next_index() -> int:
        counter["i"] += 1
        return counter["i"] % len(texts)

    def bare() -> None:
        with torch.no_grad():
            lm.model(**inputs[next_index()])

    def metrics() -> None:
        head_metrics(sample.attention, sample.special)

    def keystroke() -> None:
        text = texts[next_index()]
        page.bar.entry.blockSignals(True)
        page.bar.entry.setText(text)
        page.bar.entry.blockSignals(False)
        page.apply_analysis(analyse_interactively(lm, text))
        page.repaint()

    def toggle(option: str, on: bool):
        def run() -> None:
            page.set_option(option, on)
            page.repaint()

        return run

    def settle() -> None:
        """Untimed: let the page's background work (views one switch away) finish and report."""
        window.runner.wait()
        app.processEvents()

    app = QApplication.instance()
    times = interleaved_medians(
        {"bare": bare, "metrics": metrics, "keystroke": keystroke}, repeats=repeats, between=settle
    )
    page.apply_analysis(analyse_interactively(lm, texts[0]))
    page.repaint()
    settle()
    toggles = interleaved_medians(
        {
            "words_on": toggle("words", True),
            "words_off": toggle("words", False),
            "special_on": toggle("hide_special", True),
            "special_off": toggle("hide_special", False),
        },
        repeats=4,
        warmup=1,
        between=settle,
    )
    return {
        "tokens": tokens,
        **times,
        "words": max(toggles["words_on"], toggles["words_off"]),
        "special": max(toggles["special_on"], toggles["special_off"]),
    }


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--lengths", type=int, nargs="+", default=list(LENGTHS))
    parser.add_argument("--repeats", type=int, default=12)
    parser.add_argument("--threads", type=int, default=1, help="torch and BLAS threads (default: 1)")
    args = parser.parse_args()

    import torch
    from threadpoolctl import threadpool_limits

    from inspector.checkpoint.loader import load_checkpoint
    from ui.app import application
    from ui.main_window import MainWindow

    torch.set_num_threads(args.threads)
    threadpool_limits(args.threads)
    app = application()
    with tempfile.TemporaryDirectory() as tmp:
        lm = load_checkpoint(build_base_sized(Path(tmp) / "base_sized"))
    window = MainWindow()
    window.resize(1366, 768)
    window.show()
    window.lm = lm
    window.sentence_page.set_model(lm)
    app.processEvents()
    print(f"random BERT-base-sized classifier (12 x 12 heads, hidden 768); {args.threads} thread(s)")
    print(
        f"{'tokens':>6} {'forward ms':>10} {'metrics':>8} {'keystroke':>9} {'(ms)':>8} "
        f"{'words ms':>8} {'special ms':>10}"
    )
    for n in args.lengths:
        r = bench_length(window, lm, n, _repeats(n, args.repeats))
        bare = r["bare"]
        print(
            f"{r['tokens']:>6} {bare * 1e3:10.1f} {r['metrics'] / bare:7.3f}x {r['keystroke'] / bare:8.2f}x "
            f"{r['keystroke'] * 1e3:8.1f} {r['words'] * 1e3:8.1f} {r['special'] * 1e3:10.1f}",
            flush=True,
        )
    print(
        f"targets: metrics <= {TARGETS['metrics']}x at every length; keystroke <= {TARGETS['keystroke_128']}x "
        f"at 128 tokens and <= {TARGETS['keystroke_512']}x at 512; toggles <= {TARGETS['toggle_ms']:.0f} ms at 512"
    )
    print(load_note())
    window.close()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
