"""The review report: ``headcount report RUN_DIR --out review.pdf|review.html``, read back from the file.

The run folder is made by ``headcount corpus`` on a slice of the bundled sample
evaluation set; the PDF is read back with pypdf (page count, page sizes, text)
and the HTML file is checked for being self-contained.
"""

from __future__ import annotations

import csv
import re
from pathlib import Path

import pytest

from inspector.cli.main import main
from inspector.paths import SAMPLE_EVAL, SAMPLE_MODEL, sample_model_available

pypdf = pytest.importorskip("pypdf")
pytestmark = pytest.mark.skipif(not sample_model_available(), reason="the bundled sample model is missing")

SLICE = 64
A4 = {(595, 842), (842, 595)}
LETTER = {(612, 792), (792, 612)}


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory) -> Path:
    """A corpus run of the sample model on the first SLICE evaluation utterances (no figures)."""
    import torch

    torch.set_num_threads(1)
    folder = tmp_path_factory.mktemp("report")
    with SAMPLE_EVAL.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))[:SLICE]
    data = folder / "slice.csv"
    with data.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(["text", "label"])
        writer.writerows((r["text"], r["label"]) for r in rows)
    out = folder / "run"
    argv = ["corpus", str(SAMPLE_MODEL), str(data), "--out", str(out), "--quiet", "--no-figures"]
    assert main([*argv, "--prune-every", "6", "--batch-size", "16"]) == 0
    return out


@pytest.fixture(scope="module")
def summary(run_dir) -> dict:
    import json

    return json.loads((run_dir / "summary.json").read_text(encoding="utf-8"))


def _size(page) -> tuple[int, int]:
    box = page.mediabox
    return round(float(box.width)), round(float(box.height))


def _text(reader) -> str:
    return " ".join(" ".join((page.extract_text() or "").split()) for page in reader.pages)


def _groups(summary: dict) -> list[tuple[str, str]]:
    return sorted({(m["expected"], m["predicted"]) for m in summary["misfires"]})


def test_pdf_report_pages_sizes_and_text(run_dir, summary, tmp_path, capsys):
    """An A4 PDF: cover, scores, misfires, two explanations, importance, similarity, pruning, appendix.

    Reference: page sizes of ISO 216 A4 (210 x 297 mm = 595 x 842 pt); the pages expected from the report's
    table of contents for this run (the slice has few misfires, so they fit one page; each explained
    sentence is short, so its explanation fits one page); text read back by pypdf.
    """
    misfires = summary["misfires"]
    assert 2 <= len(misfires) <= 20 and all(len(m["text"].split()) <= 25 for m in misfires)
    out = tmp_path / "review.pdf"
    assert main(["report", str(run_dir), "--out", str(out), "--explain", "2", "--quiet"]) == 0
    assert f"review report written to {out}" in capsys.readouterr().out
    reader = pypdf.PdfReader(str(out))
    expected = 1 + 1 + 1 + 2 + 1 + 1 + 1 + 1
    assert len(reader.pages) == expected
    assert {_size(p) for p in reader.pages} <= A4
    assert _size(reader.pages[3]) == (842, 595)  # the explanations are landscape
    text = _text(reader)
    assert "ferry_intents" in text
    accuracy = f"{100 * summary['accuracy']:.1f}%"  # as the window shows it (fmt.percent)
    assert f"Accuracy {accuracy}" in text
    for expected_label, predicted in _groups(summary):
        assert f"expected {expected_label} \u2192 predicted {predicted}" in text, (expected_label, predicted)
    assert "Jain & Wallace 2019" in text and "re-validated" in text
    assert f"page {expected} of {expected}" in text


def test_run_with_chosen_pruning_steps_reads_back(run_dir, tmp_path):
    """A run whose pruning steps were chosen within the pass budget (the default) reads back whole.

    Reference: the run's own summary.json (a round trip: the steps and passes written are the ones read).
    """
    import json
    import shutil

    from inspector.figures.report.run_folder import read_run

    out = tmp_path / "run"
    data = run_dir.parent / "slice.csv"
    argv = ["corpus", str(SAMPLE_MODEL), str(data), "--out", str(out), "--quiet", "--no-figures"]
    assert main([*argv, "--batch-size", "16"]) == 0
    info = json.loads((out / "summary.json").read_text(encoding="utf-8"))["pruning"]
    assert info["measured_every"] is None and info["passes"] >= 1
    pruning = read_run(out).pruning
    assert pruning.every is None and pruning.passes == info["passes"]
    assert [list(c.steps) for c in pruning.curves] == list(info["measured_steps"].values())
    shutil.rmtree(out)


def test_letter_report_without_the_model(run_dir, summary, tmp_path):
    """--paper letter --explain 0 needs no model: Letter pages, no explanation pages.

    Reference: ANSI/ASME Y14.1 US Letter (8.5 x 11 in = 612 x 792 pt); pypdf reads the page boxes.
    """
    out = tmp_path / "review-letter.pdf"
    argv = ["report", str(run_dir), "--out", str(out), "--paper", "letter", "--explain", "0", "--quiet"]
    argv += ["--model", str(tmp_path / "nowhere")]  # never opened with --explain 0
    assert main(argv) == 0
    reader = pypdf.PdfReader(str(out))
    assert len(reader.pages) == 7
    assert {_size(p) for p in reader.pages} <= LETTER


def test_html_report_is_one_self_contained_file(run_dir, summary, tmp_path):
    """The HTML report embeds its images as data URIs, has no script and fetches nothing.

    Reference: HTML Living Standard (script element, img src); RFC 2397 (data URLs); the issue's rule
    (no ``<script``, no http reference).
    """
    out = tmp_path / "review.html"
    assert main(["report", str(run_dir), "--out", str(out), "--explain", "1", "--quiet"]) == 0
    page = out.read_text(encoding="utf-8")
    assert "<script" not in page.lower()
    assert "http:" not in page.lower() and "https:" not in page.lower()
    sources = re.findall(r"""\b(?:src|href)\s*=\s*['"]([^'"]*)""", page)
    assert sources and all(s.startswith("data:image/png;base64,") for s in sources)
    assert "ferry_intents" in page and f"{100 * summary['accuracy']:.1f}%" in page
    import html as html_module

    plain = html_module.unescape(page)
    for expected_label, predicted in _groups(summary):
        assert f"expected {expected_label} \u2192 predicted {predicted}" in plain


def test_report_needs_a_run_folder_and_a_known_format(tmp_path, capsys):
    """A folder without summary.json and an unknown suffix are one-line errors (exit 2), nothing written.

    Reference: the project's error convention (common practice, no source).
    """
    assert main(["report", str(tmp_path), "--out", str(tmp_path / "r.pdf"), "--explain", "0"]) == 2
    assert "not a corpus run folder" in capsys.readouterr().err
    assert main(["report", str(tmp_path), "--out", str(tmp_path / "r.docx")]) == 2
    assert "must end in .pdf or .html" in capsys.readouterr().err
    assert not any(tmp_path.iterdir())


def test_sentences_file_adds_explanations(run_dir, tmp_path):
    """Sentences from a file (tab, expected label) get explanation pages of their own after the misfires'.

    Reference: the report's contents (one landscape page per short sentence); pypdf reads the pages.
    """
    sentences = tmp_path / "sentences.txt"
    sentences.write_text(
        "# sentences for the review\ncan i bring my dog on the evening crossing\tpets_on_board\n",
        encoding="utf-8",
    )
    out = tmp_path / "with-sentences.pdf"
    argv = [
        "report",
        str(run_dir),
        "--out",
        str(out),
        "--explain",
        "1",
        "--quiet",
        "--sentences",
        str(sentences),
    ]
    assert main(argv) == 0
    reader = pypdf.PdfReader(str(out))
    assert len(reader.pages) == 1 + 1 + 1 + 2 + 1 + 1 + 1 + 1
    assert "can i bring my dog on the evening crossing" in _text(reader)


@pytest.mark.parametrize("paper", ["a4", "letter"])
def test_report_pages_print_cleanly(run_dir, paper):
    """Every page of the report: no overlapping labels, no text under 7 pt or off the page, one visual language.

    Reference: matplotlib's text boxes after an Agg draw (tests/figure_checks.py); the issue's 7 pt floor.
    """
    from inspector.checkpoint.loader import load_checkpoint
    from inspector.figures.report.build import build_sections, explain_for_report
    from inspector.figures.report.run_folder import read_run
    from tests.test_figure_layout import check

    run = read_run(run_dir)
    explained = explain_for_report(load_checkpoint(SAMPLE_MODEL), run, explain=2, steps=8)
    problems = []
    for section in build_sections(run, explained, paper=paper):
        for k, fig in enumerate(section.pages + section.images):
            problems += check(f"{section.title} {k + 1}", fig)
    assert problems == [], "\n".join(problems[:30])
