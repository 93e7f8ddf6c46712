"""Build the review report of a corpus run: one PDF, or one self-contained HTML file, written atomically.

:func:`write_review` reads the run folder, explains the top misfires (and any
sentences given) with the model the run used, draws every page and writes the
file. The PDF holds the pages at the chosen paper size (A4 or US Letter; the
explanation pages landscape, the rest portrait). The HTML file carries the same
text and tables as text and the graphics as PNG images embedded as data URIs:
no script, no external fetch, one file to send round.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
from collections.abc import Callable, Sequence
from pathlib import Path

from inspector import formatting as fmt
from inspector.errors import HeadcountError
from inspector.explanation.explain import SentenceExplanation
from inspector.figures.files import atomic_write
from inspector.figures.pages import figure_bytes, pdf_bytes
from inspector.figures.paper import DEFAULT_PAPER, check_paper
from inspector.figures.report import DEFAULT_EXPLAINED
from inspector.figures.report import pages as P
from inspector.figures.report.run_folder import RunFolder, read_run

REPORT_FORMATS = (".pdf", ".html")
Progress = Callable[[int, int, str], None]


def read_sentences(path: str | Path) -> list[tuple[str, str | None]]:
    """Sentences to explain, with their expected labels.

    ``.csv`` (columns ``text`` and ``label``) and ``.jsonl`` are read as labelled
    sets; any other file has one sentence per line, optionally followed by a tab
    and the expected label; blank lines and lines starting with ``#`` are skipped.
    """
    path = Path(path)
    if not path.is_file():
        raise HeadcountError(f"{path}: no such file of sentences")
    if path.suffix.lower() in (".csv", ".jsonl", ".ndjson"):
        from inspector.corpus.dataset import read_labelled

        data = read_labelled(path)
        return list(zip(data.texts, data.labels))
    out: list[tuple[str, str | None]] = []
    for line in path.read_text(encoding="utf-8").splitlines():
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        text, _, label = line.partition("\t")
        out.append((text.strip(), label.strip() or None))
    return out


def explain_for_report(
    lm,
    run: RunFolder,
    *,
    explain: int = DEFAULT_EXPLAINED,
    sentences: Sequence[tuple[str, str | None]] = (),
    steps: int = 32,
    on_progress: Progress | None = None,
) -> list[tuple[str, SentenceExplanation]]:
    """(page title, explanation) of the top misfires and of the given sentences, with the run's model."""
    from inspector.explanation.explain import explain_sentence

    wanted = [
        (f"Misfire, line {m.row}: {P.pair_name(m.expected, m.predicted)}", m.text, m.expected)
        for m in P.top_misfires(run.evaluation.misfires, explain)
    ]
    wanted += [(f"Sentence: expected {label or 'not given'}", text, label) for text, label in sentences]
    out = []
    for k, (title, text, expected) in enumerate(wanted):
        if on_progress is not None:
            on_progress(k, len(wanted), f"Explaining {k + 1} of {fmt.count(len(wanted), 'sentence')}")
        out.append((title, explain_sentence(lm, text, expected=expected, steps=steps)))
    return out


def build_sections(
    run: RunFolder,
    explained: Sequence[tuple[str, SentenceExplanation]] = (),
    *,
    paper: str = DEFAULT_PAPER,
    date: str | None = None,
) -> list[P.Section]:
    """Every section of the report, the cover first (its contents list gives each section's first page)."""
    paper = check_paper(paper)
    date = date or _dt.datetime.now().strftime("%Y-%m-%d %H:%M")
    body = [P.scores(run, paper), P.misfires(run.evaluation, paper)]
    if explained:
        body.append(P.explanations(explained, paper))
    body += [P.heads(run, paper), P.similarity(run, paper), P.pruning(run, paper), P.appendix(paper)]
    contents, page = [], 2
    for section in body:
        contents.append((section.title, page))
        page += len(section.pages)
    sections = [P.cover(run, date, contents, paper), *body]
    P.footers([fig for s in sections for fig in s.pages], run.model)
    return sections


STYLE = """
body { font-family: sans-serif; max-width: 60em; margin: 2em auto; padding: 0 1em; color: #222; line-height: 1.4; }
h1 { margin-bottom: 0.2em; } h2 { border-bottom: 1px solid #bbb; margin-top: 2em; }
table { border-collapse: collapse; margin: 0.6em 0; } th, td { padding: 0.15em 0.7em; text-align: left;
vertical-align: top; } thead th { border-bottom: 1px solid #888; } td.num { text-align: right; }
tbody tr:nth-child(even) { background: #f3f3f3; } img { max-width: 100%; border: 1px solid #ddd; margin: 0.5em 0; }
.facts th { width: 9em; }
"""


def report_html(run: RunFolder, sections: Sequence[P.Section]) -> str:
    """One self-contained HTML document: text and tables as text, graphics as embedded PNG data URIs."""
    parts = []
    for section in sections:
        images = "".join(
            f"<img alt='{html.escape(section.title)}, figure {k + 1}' "
            f"src='data:image/png;base64,{base64.b64encode(figure_bytes(fig, 'png', dpi=110)).decode('ascii')}'>"
            for k, fig in enumerate(section.images)
        )
        title = "Review report" if section.title == "Cover" else section.title
        tag = "h1" if section.title == "Cover" else "h2"
        parts.append(f"<section><{tag}>{html.escape(title)}</{tag}>{section.html}{images}</section>")
    return (
        "<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
        f"<title>Review report: {html.escape(run.model)}</title><style>{STYLE}</style></head><body>"
        + "".join(parts)
        + "</body></html>\n"
    )


def write_review(
    run_dir: str | Path,
    out: str | Path,
    *,
    lm=None,
    sentences: Sequence[tuple[str, str | None]] = (),
    paper: str = DEFAULT_PAPER,
    explain: int = DEFAULT_EXPLAINED,
    on_progress: Progress | None = None,
    date: str | None = None,
) -> Path:
    """Write the review report of ``run_dir`` to ``out`` (``.pdf`` or ``.html``), atomically.

    ``lm`` is the model that made the run (needed only for the explanation
    pages: without it, or with ``explain=0`` and no sentences, there are none).
    """
    out = Path(out)
    kind = out.suffix.lower()
    if kind not in REPORT_FORMATS:
        raise HeadcountError(f"{out}: the report must end in .pdf or .html")
    paper = check_paper(paper)
    run = read_run(run_dir)
    explained = []
    if lm is not None and (explain > 0 or sentences):
        explained = explain_for_report(lm, run, explain=explain, sentences=sentences, on_progress=on_progress)
    if on_progress is not None:
        on_progress(1, 2, "Drawing the pages")
    sections = build_sections(run, explained, paper=paper, date=date)
    if kind == ".pdf":
        data = pdf_bytes([fig for s in sections for fig in s.pages], title=f"Review report: {run.model}")
    else:
        data = report_html(run, sections).encode("utf-8")
    written = atomic_write(out, lambda fh: fh.write(data))
    if on_progress is not None:
        on_progress(2, 2, "Written")
    return written


def page_count(sections: Sequence[P.Section]) -> int:
    return sum(len(s.pages) for s in sections)


__all__ = ["build_sections", "read_sentences", "report_html", "write_review"]
