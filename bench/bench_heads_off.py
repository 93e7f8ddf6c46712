"""Heads off, live: click-to-views and keystroke-to-views of a masked re-analysis, measured offscreen.

Run:  QT_QPA_PLATFORM=offscreen .venv/bin/python -m bench.bench_heads_off

On the sample model at 32 tokens (target <= 100 ms each):

1. Click to all views: a head is switched off (or back on) on a sentence already
   shown; the sentence runs again on the masked model (the full model's
   prediction for this text is cached) and every view of the sentence page is
   updated and repainted once.
2. Keystroke to all views with heads off: a new text with a mask in place runs
   the masked model and one plain forward pass for the full model's prediction
   beside it, then every view.
3. For scale, the same keystroke with every head on (the plain path).

The job runner is bypassed (the same functions run in this thread), so the
numbers are work, not queueing. Medians of interleaved repeats after warm-up;
printed with the ratios between them and to the target.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from bench.bench_ui import sentence_with_tokens  # noqa: E402
from bench.common import interleaved_medians  # noqa: E402

TARGET_MS = 100.0
HEADS = [(1, 2), (2, 0), (3, 4), (0, 5)]
"""Heads switched off and on in turn by the click measurement."""


def bench(app) -> dict[str, float | int | str]:
    from inspector.checkpoint.loader import load_checkpoint
    from inspector.checkpoint.masks import HeadMask
    from inspector.paths import SAMPLE_MODEL
    from ui.main_window import MainWindow, analyse_with_mask

    lm = load_checkpoint(SAMPLE_MODEL)
    window = MainWindow()
    window.resize(1366, 768)
    window.show()
    window.lm = lm
    page = window.sentence_page
    page.set_model(lm)
    texts = [sentence_with_tokens(lm, 32, offset=i) for i in range(6)]
    page.apply_analysis(*analyse_with_mask(lm, texts[0], HeadMask(), None))
    tokens = len(page.state.analysis.tokens)
    counter = {"click": 0, "key": 0, "plain": 0}

    def show(text: str, mask: HeadMask) -> None:
        analysis, full = analyse_with_mask(lm, text, mask, page.state.known_full_prediction(text))
        page.apply_analysis(analysis, full)
        page.repaint()

    def click() -> None:
        i = counter["click"]
        counter["click"] += 1
        page.state.toggle_head(*HEADS[i % len(HEADS)])
        page.grid.set_off(set(page.state.mask.heads))
        show(texts[0], page.state.mask)

    def set_text(text: str) -> None:
        page.bar.entry.blockSignals(True)
        page.bar.entry.setText(text)
        page.bar.entry.blockSignals(False)

    def keystroke_masked() -> None:
        i = counter["key"]
        counter["key"] += 1
        text = texts[1 + i % (len(texts) - 1)] + ("" if i % 2 else " ok")  # never cached
        set_text(text)
        show(text, HeadMask.of(HEADS[:2]))

    def keystroke_plain() -> None:
        i = counter["plain"]
        counter["plain"] += 1
        text = texts[1 + i % (len(texts) - 1)]
        set_text(text)
        show(text, HeadMask())

    app.processEvents()
    medians = interleaved_medians(
        {"click": click, "keystroke_masked": keystroke_masked, "keystroke_plain": keystroke_plain}, repeats=30
    )
    window.close()
    out: dict[str, float | int | str] = {k: 1000.0 * v for k, v in medians.items()}
    out["tokens"] = tokens
    out["model"] = f"{lm.name}, {lm.num_layers}x{lm.num_heads}"
    return out


def main() -> int:
    import torch

    from ui.app import application

    torch.set_num_threads(1)  # as the window's analysis job does
    app = application()
    r = bench(app)
    click, masked, plain = r["click"], r["keystroke_masked"], r["keystroke_plain"]
    print(f"heads off on {r['model']}, {r['tokens']} tokens (every view repainted once):")
    print(f"  click to all views (masked re-analysis) : {click:7.2f} ms   (target <= {TARGET_MS:.0f} ms)")
    print(f"  keystroke to all views, 2 heads off     : {masked:7.2f} ms   (target <= {TARGET_MS:.0f} ms)")
    print(f"  keystroke to all views, every head on   : {plain:7.2f} ms")
    print(
        f"  ratios: click / target {click / TARGET_MS:.2f}, masked keystroke / target {masked / TARGET_MS:.2f}, "
        f"click / plain keystroke {click / plain:.2f}, masked / plain keystroke {masked / plain:.2f}"
    )
    load = ", ".join(f"{x:.1f}" for x in os.getloadavg())
    print(f"torch threads {torch.get_num_threads()}, load average {load} on {os.cpu_count()} cores")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
