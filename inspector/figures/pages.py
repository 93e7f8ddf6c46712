"""Writing one figure or several pages: PNG, SVG or a single PDF, atomically.

A PDF holds every page in one file; PNG and SVG write the first page under the
chosen name and the next ones beside it as ``name-2.png``, ``name-3.png`` ...
Text stays text in SVG and PDF (fonts embedded as TrueType), and the files carry
no creator link.
"""

from __future__ import annotations

import io
from collections.abc import Sequence
from pathlib import Path

from matplotlib import rc_context
from matplotlib.figure import Figure

from inspector.errors import HeadcountError
from inspector.figures.files import atomic_write

FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}
PNG_DPI = 220
RC = {"svg.fonttype": "none", "pdf.fonttype": 42}
"""Text stays text: searchable and selectable in SVG and PDF."""


def figure_format(path: Path) -> str:
    kind = FORMATS.get(Path(path).suffix.lower())
    if kind is None:
        raise HeadcountError(f"{path}: unknown figure format (use {', '.join(FORMATS)})")
    return kind


def metadata(kind: str, title: str = "") -> dict:
    """File metadata without the plotting library's web address (PNG, SVG and PDF alike)."""
    if kind == "png":
        return {"Software": None}
    if kind == "svg":
        return {"Creator": "Headcount", **({"Title": title} if title else {})}
    return {"Creator": "Headcount", "Producer": "Headcount", **({"Title": title} if title else {})}


def figure_bytes(fig: Figure, kind: str, dpi: int = PNG_DPI) -> bytes:
    """One figure rendered to PNG, SVG or PDF bytes (white background, no creator link)."""
    buf = io.BytesIO()
    with rc_context(RC):
        fig.savefig(buf, format=kind, dpi=dpi, facecolor="white", metadata=metadata(kind))
    return buf.getvalue()


def pdf_bytes(figs: Sequence[Figure], title: str = "") -> bytes:
    """Several figures as the pages of one PDF, each page the figure's own size."""
    from matplotlib.backends.backend_pdf import PdfPages

    buf = io.BytesIO()
    with rc_context(RC), PdfPages(buf, metadata=metadata("pdf", title)) as pdf:
        for fig in figs:
            pdf.savefig(fig, facecolor="white")
    return buf.getvalue()


def page_paths(path: Path, count: int) -> list[Path]:
    """``name.png``, ``name-2.png``, ... for ``count`` pages."""
    path = Path(path)
    return [path] + [path.with_name(f"{path.stem}-{k}{path.suffix}") for k in range(2, count + 1)]


def save_pages(figs: Figure | Sequence[Figure], path: Path) -> list[Path]:
    """Write one figure or several pages to ``path`` by its suffix; returns the written paths."""
    figs = [figs] if isinstance(figs, Figure) else list(figs)
    kind = figure_format(path)
    if kind == "pdf":
        data = pdf_bytes(figs)
        return [atomic_write(Path(path), lambda fh: fh.write(data))]
    written = []
    for fig, target in zip(figs, page_paths(path, len(figs))):
        data = figure_bytes(fig, kind)
        written.append(atomic_write(target, lambda fh, d=data: fh.write(d)))
    return written
