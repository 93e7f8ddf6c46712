"""inspector.figures.sentence without Qt: layout arrays, tables, captions and file formats."""

from __future__ import annotations

import subprocess
import sys
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from inspector.errors import HeadcountError
from inspector.figures import sentence as figures


def _attention(L: int, H: int, n: int, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    a = rng.random((L, H, n, n))
    return a / a.sum(-1, keepdims=True)


def test_figures_module_never_imports_qt():
    """inspector.figures.sentence loads without any Qt module (the core stays Qt-free).

    Reference: project rule "inspector/ never imports Qt" (common practice, no source).
    """
    code = "import sys, inspector.figures.sentence; print(any(m.startswith(('PySide', 'PyQt', 'shiboken')) for m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_mosaic_array_places_each_head_scaled_to_its_max():
    """Each head's block in the mosaic equals that head divided by its own maximum; gaps are NaN.

    Reference: closed form (a / max a), checked cell by cell.
    """
    att = _attention(3, 5, 7)
    array, px, py = figures.mosaic_array(att, per_head=True)
    assert array.shape == (3 * py, 5 * px)
    for l in range(3):
        for h in range(5):
            block = array[l * py : l * py + 7, h * px : h * px + 7]
            np.testing.assert_allclose(block, att[l, h] / att[l, h].max())
            assert np.isnan(array[l * py + 7 : (l + 1) * py, h * px : h * px + 7]).all()
    shared, _, _ = figures.mosaic_array(att, per_head=False)
    np.testing.assert_allclose(shared[:7, :7], att[0, 0])


def test_tables_hold_the_numbers():
    """Matrix, mosaic and relevance tables list every value at full precision.

    Reference: the arrays themselves (identity round trip through float()).
    """
    att = _attention(2, 3, 4)
    labels = ["[CLS]", "ferry", "times", "[SEP]"]
    header, rows = figures.matrix_table(att[1, 2], labels)
    assert header == figures.MATRIX_HEADER and len(rows) == 16
    assert rows[6] == [1, "ferry", 2, "times", float(att[1, 2, 1, 2])]
    metric = att.max(axis=(-1, -2))
    header, rows = figures.mosaic_table(att, metric, "confidence", labels)
    assert header[:3] == ["layer", "head", "confidence"] and len(rows) == 2 * 3 * 16
    assert rows[-1][2] == float(metric[1, 2]) and rows[-1][-1] == float(att[1, 2, 3, 3])
    header, rows = figures.relevance_table(np.array([0.5, 0.25, 0.25, 0.0]), labels)
    assert rows[1] == [1, "ferry", 0.25]


def test_caption_names_everything_a_reader_needs():
    """The caption carries model, sentence, predicted label with probability, expected label, misfire mark,
    view, layer/head, metric, colour scale and settings, each once, with no doubled parentheses.

    Reference: the issue's caption list (model, sentence, predicted label with probability, expected label,
    misfire mark, view, layer/head, metric, colour scale, the method's settings).
    """
    cap = figures.Caption(
        "ferry_intents",
        "is the 9am sailing on time",
        "Figure sheet (mosaic, close-up, relevance)",
        "L2H5",
        "Entropy (nats)",
        "cividis, 0 to the largest value",
        predicted="timetable",
        probability=0.913,
        expected="disruption_status",
        expected_probability=0.052,
        settings="every link \u2265 0.25",
    )
    text = " ".join(cap.text(width=6.0).split())
    for part in (
        "Model: ferry_intents",
        "\u201cis the 9am sailing on time\u201d",
        "Predicted: timetable 91.3%",
        "expected: disruption_status 5.2%",
        "\u2715 misfire",
        "View: Figure sheet (mosaic, close-up, relevance); L2H5",
        "Metric: Entropy (nats)",
        "Colour: cividis, 0 to the largest value",
        "Settings: every link \u2265 0.25",
    ):
        assert part in text, part
    assert "))" not in text and text.count("ferry_intents") == 1
    same = figures.Caption("m", "s", "v", predicted="timetable", probability=0.9, expected="timetable")
    assert "\u2713 as expected" in same.text() and "misfire" not in same.text()


@pytest.mark.parametrize("suffix", [".png", ".svg", ".pdf"])
def test_every_figure_writes_each_format(tmp_path, suffix):
    """Matrix, mosaic, arcs, relevance and sheet figures render to PNG, SVG (XML) and PDF.

    Reference: PNG signature (PNG spec 5.2), SVG root element (W3C SVG 1.1), PDF header (ISO 32000-1 7.5.2).
    """
    att = _attention(4, 6, 9)
    labels = ["[CLS]", "can", "i", "bring", "my", "dog", "on", "board", "[SEP]"]
    cap = figures.Caption("tiny", " ".join(labels[1:-1]), "test", "L0H0")
    made = {
        "matrix": figures.matrix_figure(att[0, 0], labels, cap, query=2),
        "mosaic": figures.mosaic_figure(att, att.max(axis=(-1, -2)), cap, per_head=True, selected=(1, 2)),
        "arcs": figures.arcs_figure(att[0, 0], labels, [(2, 0, 0.4), (2, 5, 0.2)], cap, query=2),
        "relevance": figures.relevance_figure(att[0, 0, 0], labels, cap),
        "sheet": figures.sheet_figure(
            att,
            att.max(axis=(-1, -2)),
            att[1, 1],
            labels,
            att[0, 0, 0],
            labels,
            cap,
            per_head=False,
            selected=(0, 0),
            focus_title="f",
            relevance_title="r",
        ),
    }
    for name, fig in made.items():
        path = figures.save_figure(fig, tmp_path / f"{name}{suffix}")
        data = path.read_bytes()
        if suffix == ".png":
            assert data.startswith(b"\x89PNG\r\n\x1a\n")
        elif suffix == ".svg":
            assert ET.fromstring(data).tag.endswith("svg")
        else:
            assert data.startswith(b"%PDF")


def test_unknown_format_is_a_readable_error(tmp_path):
    """An unsupported suffix raises HeadcountError and writes nothing.

    Reference: project error convention (common practice, no source).
    """
    cap = figures.Caption("m", "s", "v", "w")
    fig = figures.relevance_figure(np.array([1.0]), ["ferry"], cap)
    with pytest.raises(HeadcountError, match="unknown figure format"):
        figures.export_figure(fig, None, tmp_path / "x.bmp")
    assert list(tmp_path.iterdir()) == []
