"""Window speed: head-mosaic repaint and keystroke-to-views, measured offscreen.

Run:  .venv/bin/python -m bench.bench_ui   (or: .venv/bin/python bench/bench_ui.py; offscreen by default)

1. Head mosaic repaint for a 12-layer x 12-head model at 64 tokens. The model is
   a randomly initialised BERT-base-sized config (hidden 768, 12 x 12) built
   here and saved to a temporary folder with the MiniLM tokenizer (nothing is
   downloaded). Reported: a repaint from the cached mosaic image, and a full
   rebuild for new matrices (resample + colour lookup + meters + numbers) followed by a repaint.
   Target <= 30 ms.
2. Keystroke to all views updated, on the sample model at 32 tokens (or, until
   it is trained, a random model of the same size): the time
   from a new text to analysis + every view repainted, measured directly (the
   debounce timer is bypassed and reported separately). Target <= 100 ms.

Numbers are medians of repeats after warm-up, printed with their targets.
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import numpy as np  # noqa: E402

from bench.common import (  # noqa: E402
    SAMPLE_SHAPE,
    build_base_sized,
    interleaved_medians,
    median_seconds,
    random_bert_classifier,
    sentence_with_tokens,
)

GRID_TARGET_MS = 30.0
KEYSTROKE_TARGET_MS = 100.0


def median_ms(fn, repeats: int, warmup: int = 3) -> float:
    return 1000.0 * median_seconds(fn, repeats=repeats, warmup=warmup)


def bench_grid(app) -> tuple[float, float, int]:
    from inspector.checkpoint.loader import load_checkpoint
    from inspector.measures.analysis import analyze_sentence
    from ui.sentence.head_grid import HeadGrid
    from ui.sentence.state import SentencePage, metric_range

    with tempfile.TemporaryDirectory() as tmp:
        lm = load_checkpoint(build_base_sized(Path(tmp) / "base_sized"))
        text = sentence_with_tokens(lm, 64)
        analysis = analyze_sentence(lm, text)
    n = len(analysis.tokens)
    page = SentencePage()
    page.set_analysis(analysis)
    grid = HeadGrid()
    grid.resize(900, 760)
    grid.show()
    heads, metric = page.head_matrices(), page.metric_values()
    span = metric_range(page.options.metric, metric)

    copies = [
        heads,
        heads.copy(),
    ]  # new matrices each time: every head is coloured again, as for a new sentence

    def rebuild_and_paint() -> None:
        copies.reverse()
        grid.set_data(copies[0], metric, span, per_head=True)
        grid.repaint()

    rebuild_and_paint()
    app.processEvents()
    cached = median_ms(grid.repaint, repeats=40)
    before = grid.rebuilds
    full = median_ms(rebuild_and_paint, repeats=25)
    assert grid.rebuilds > before, "the rebuild path was not exercised"
    return cached, full, n


def bench_keystroke(app) -> tuple[float, float, float, float, int, str]:
    from inspector.checkpoint.loader import load_checkpoint
    from inspector.paths import SAMPLE_MODEL, sample_model_available
    from ui.main_window import MainWindow
    from ui.main_window import analyse_interactively as analyze
    from ui.sentence.bar import DEBOUNCE_MS

    tmp = tempfile.TemporaryDirectory()
    if sample_model_available():
        folder, note = SAMPLE_MODEL, "sample model"
    else:  # same shape as sample_models/scripts/train.py builds: 4 layers x 6 heads, hidden 96
        labels = [f"intent_{i}" for i in range(16)]
        folder = random_bert_classifier(Path(tmp.name) / "sample_sized", labels, **SAMPLE_SHAPE)
        note = "random model of the sample's size; the sample model is not trained yet"
    lm = load_checkpoint(folder)
    window = MainWindow()
    window.resize(1360, 880)
    window.show()
    window.lm = lm
    page = window.sentence_page
    page.set_model(lm)
    texts = [sentence_with_tokens(lm, 32, offset=i) for i in range(6)]
    counter = {"i": 0}
    analyses = [analyze(lm, t) for t in texts]
    tokens = len(analyses[0].tokens)

    def set_text(text: str) -> None:
        page.bar.entry.blockSignals(True)
        page.bar.entry.setText(text)
        page.bar.entry.blockSignals(False)

    def show(analysis) -> None:
        page.apply_analysis(analysis)
        page.repaint()  # the sentence bar and every view, each painted once

    def keystroke() -> None:
        text = texts[counter["i"] % len(texts)]
        counter["i"] += 1
        set_text(text)
        show(analyze(lm, text))

    def analysis_only() -> None:
        analyze(lm, texts[counter["i"] % len(texts)])
        counter["i"] += 1

    def views_only() -> None:
        i = counter["i"] % len(texts)
        counter["i"] += 1
        set_text(texts[i])
        show(analyses[i])

    app.processEvents()
    medians = interleaved_medians(
        {"keystroke": keystroke, "analysis": analysis_only, "views": views_only}, repeats=30
    )
    ms, forward, views = (1000.0 * medians[k] for k in ("keystroke", "analysis", "views"))
    window.close()
    tmp.cleanup()
    return (
        ms,
        forward,
        views,
        float(DEBOUNCE_MS),
        tokens,
        f"{lm.name}, {lm.num_layers}x{lm.num_heads} ({note})",
    )


def main() -> int:
    import torch

    from ui.app import application

    torch.set_num_threads(max(1, os.cpu_count() or 1))
    app = application()
    cached, full, n = bench_grid(app)
    print(f"head mosaic 12x12 at {n} tokens, 900x760 px:")
    print(f"  repaint from cached image : {cached:7.2f} ms   (target <= {GRID_TARGET_MS:.0f} ms)")
    print(f"  rebuild + repaint         : {full:7.2f} ms   (target <= {GRID_TARGET_MS:.0f} ms)")
    ms, forward, views, debounce, tokens, model = bench_keystroke(app)
    print(f"keystroke to all views, {model}, {tokens} tokens:")
    print(f"  analysis + every view repainted : {ms:7.2f} ms   (target <= {KEYSTROKE_TARGET_MS:.0f} ms)")
    print(f"    of which core analysis        : {forward:7.2f} ms   (model forward, metrics)")
    print(f"    of which views update+repaint : {views:7.2f} ms")
    print(f"  debounce before analysis        : {debounce:7.0f} ms   (timer, not work)")
    print(f"  ratios to target: grid {full / GRID_TARGET_MS:.2f}, keystroke {ms / KEYSTROKE_TARGET_MS:.2f}")
    load = ", ".join(f"{x:.1f}" for x in os.getloadavg())
    print(
        f"numpy {np.__version__}, torch threads {torch.get_num_threads()}, load average {load} on {os.cpu_count()} cores"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
