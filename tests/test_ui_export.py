"""Exports from the window: every view as PNG, SVG and PDF plus CSV; the figure sheet; failures."""

from __future__ import annotations

import csv
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from matplotlib.figure import Figure  # noqa: E402
from PIL import Image  # noqa: E402
from PySide6.QtCore import QSettings  # noqa: E402

from inspector.checkpoint.loader import load_checkpoint  # noqa: E402
from inspector.measures.analysis import analyze_sentence  # noqa: E402
from tests.families import build_checkpoint  # noqa: E402

TEXT = "do dogs travel free on the ferry"
WAIT_MS = 60_000


@pytest.fixture(scope="module")
def tiny(tmp_path_factory, minilm_dir):
    return load_checkpoint(build_checkpoint("bert", tmp_path_factory.mktemp("tiny_export"), minilm_dir))


@pytest.fixture(scope="module")
def core(tiny):
    return analyze_sentence(tiny, TEXT)


@pytest.fixture
def page(core):
    from ui.sentence.state import SentencePage

    state = SentencePage()
    state.set_analysis(core)
    state.select(1, 2)
    return state


def read_csv(path: Path) -> list[dict[str, str]]:
    with path.open(newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def check_figure_file(path: Path) -> None:
    data = path.read_bytes()
    assert len(data) > 0
    if path.suffix == ".png":
        with Image.open(path) as img:
            img.verify()
        with Image.open(path) as img:
            assert img.size[0] > 200 and img.size[1] > 100
    elif path.suffix == ".svg":
        root = ET.fromstring(data)
        assert root.tag.endswith("svg")
    else:
        assert data.startswith(b"%PDF")


@pytest.mark.parametrize("kind", ["mosaic", "closeup", "arcs", "relevance"])
def test_each_view_exports_png_svg_pdf(page, tmp_path, kind):
    """Each view writes a readable PNG (PIL), well-formed SVG (XML parser) and PDF (%PDF header), plus CSV.

    Reference: PNG/SVG/PDF file signatures (PNG spec, W3C SVG, ISO 32000 header); parsed by Pillow and ElementTree.
    """
    from ui.sentence.export import build_export
    from ui.widgets.export import run_export

    job = build_export(page, kind)
    for suffix in (".png", ".svg", ".pdf"):
        target = tmp_path / f"{kind}{suffix}"
        written = run_export(job, target)
        assert written == [target, target.with_suffix(".csv")]
        check_figure_file(target)
    assert read_csv(tmp_path / f"{kind}.csv")


def test_csv_numbers_equal_the_core(page, core, tmp_path):
    """The CSV beside each figure holds the core's numbers.

    Reference: analyze_sentence attention, head metrics and attention rollout (Abnar & Zuidema 2020) from the core.
    """
    from ui.sentence.export import build_export
    from ui.widgets.export import run_export

    run_export(build_export(page, "closeup"), tmp_path / "c.png")
    rows = read_csv(tmp_path / "c.csv")
    n = len(core.tokens)
    got = np.array([float(r["weight"]) for r in rows]).reshape(n, n)
    np.testing.assert_allclose(got, core.attention[1, 2], rtol=0, atol=1e-7)
    assert [r["key"] for r in rows[:n]] == core.tokens

    run_export(build_export(page, "mosaic"), tmp_path / "m.svg")
    rows = read_csv(tmp_path / "m.csv")
    L, H = core.num_layers, core.num_heads
    weights = np.array([float(r["weight"]) for r in rows]).reshape(L, H, n, n)
    np.testing.assert_allclose(weights, core.attention, atol=1e-7)
    metric = page.options.metric
    by_head = {(int(r["layer"]), int(r["head"])): float(r[metric]) for r in rows}
    for (l, h), v in by_head.items():
        assert v == pytest.approx(core.head_metrics.get(metric)[l, h], abs=1e-12)

    run_export(build_export(page, "relevance"), tmp_path / "r.pdf")
    rel = np.array([float(r["relevance"]) for r in read_csv(tmp_path / "r.csv")])
    np.testing.assert_allclose(rel, core.rollout[0], atol=1e-12)

    page.set_query(3)
    run_export(build_export(page, "arcs"), tmp_path / "a.png")
    rows = read_csv(tmp_path / "a.csv")
    assert rows and all(int(r["query_index"]) == 3 for r in rows)
    for r in rows:
        assert float(r["weight"]) == pytest.approx(core.attention[1, 2, 3, int(r["key_index"])], abs=1e-7)


def test_figure_sheet_is_one_pdf_page(page, tmp_path):
    """The figure sheet is a single-page PDF.

    Reference: ISO 32000 page objects ("/Type /Page"), counted in the uncompressed object headers.
    """
    from ui.sentence.export import build_export
    from ui.widgets.export import run_export

    target = tmp_path / "sheet.pdf"
    assert run_export(build_export(page, "sheet"), target) == [target]
    data = target.read_bytes()
    assert data.startswith(b"%PDF")
    assert data.count(b"/Type /Page\n") + data.count(b"/Type /Page ") + data.count(b"/Type /Page>") == 1


def test_failed_export_leaves_no_partial_file(page, tmp_path, monkeypatch):
    """A writer that fails half-way leaves neither the figure, nor its CSV, nor a temporary file.

    Reference: write-to-temporary-then-rename (POSIX rename(2) atomicity); common practice, no source.
    """
    import inspector.figures.files as files
    from ui.sentence.export import build_export
    from ui.widgets.export import run_export

    def broken_fsync(fd):
        raise OSError("disk full")  # the bytes were written to the temporary file, then the disk gave out

    monkeypatch.setattr(files.os, "fsync", broken_fsync)
    target = tmp_path / "out" / "closeup.pdf"
    from inspector.errors import HeadcountError

    with pytest.raises(
        HeadcountError, match="cannot write .*closeup.pdf: disk full"
    ):  # one line for the user
        run_export(build_export(page, "closeup"), target)
    assert not target.exists()
    assert not target.with_suffix(".csv").exists()
    assert list(target.parent.iterdir()) == []


def test_window_export_runs_in_background_and_reports(qtbot, tmp_path, tiny, monkeypatch):
    """The window's exporter writes off the GUI thread and reports success; a failure reaches the message bar.

    Reference: file signatures as above; common practice, no source, for the reporting.
    """
    from ui.main_window import MainWindow

    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.lm = tiny
    win.sentence_page.set_model(tiny)
    win.analyse(TEXT)
    qtbot.waitUntil(lambda: win.sentence_page.state.ready, timeout=WAIT_MS)
    target = tmp_path / "grid.png"
    with qtbot.waitSignal(win.exporter.finished, timeout=WAIT_MS) as blocker:
        win.exporter.export("mosaic", target)
    assert blocker.args[0] == [target, target.with_suffix(".csv")]
    check_figure_file(target)

    def broken_savefig(self, fh, **kwargs):
        fh.write(b"half")
        raise OSError("device went away")

    monkeypatch.setattr(Figure, "savefig", broken_savefig)
    bad = tmp_path / "bad.svg"
    with qtbot.waitSignal(win.exporter.failed, timeout=WAIT_MS):
        win.exporter.export("closeup", bad)
    assert "device went away" in win.message_bar.text()
    assert not bad.exists() and not list(tmp_path.glob(".bad.svg*"))
    win.runner.wait(30_000)
