"""Export of the sentence views: figure (PNG/SVG/PDF) plus CSV, and the one-page figure sheet.

:func:`build_export` snapshots what a view shows into an
:class:`~ui.widgets.export.ExportJob`; the shared export controller writes it.
"""

from __future__ import annotations

from inspector import formatting as fmt
from inspector.figures import sentence as figures
from inspector.figures.sentence import Caption
from ui.sentence.state import SCALES, SentencePage, arc_links
from ui.widgets.export import ExportJob, slug

EXPORT_KINDS: dict[str, str] = {
    "mosaic": "Head mosaic",
    "closeup": "Close-up",
    "arcs": "Token arcs",
    "relevance": "Relevance band",
    "sheet": "Figure sheet",
}
"""Exportable views (key -> menu text)."""


def build_export(page: SentencePage, kind: str) -> ExportJob:
    """Snapshot the view ``kind`` of ``page`` for export."""
    if page.analysis is None:
        raise ValueError("nothing to export: no sentence analysed yet")
    a = page.analysis
    opts = page.options
    view = page.view()
    labels = list(view.labels)
    token_axis = "words" if opts.words else "pieces"
    token_axis += ", special tokens hidden" if opts.hide_special else ""
    stem = f"{slug(a.model_name, 20)}-{slug(a.text)}-{kind}"

    def caption(view_name: str, where: str, metric: str = "", scale: str = "") -> Caption:
        return Caption(a.model_name, a.text, view_name, f"{where}; {token_axis}", metric, scale)

    if kind == "mosaic":
        heads, metric = page.head_matrices(), page.metric_values()
        per_head = opts.scale == "own"
        cap = caption(
            "Head mosaic",
            f"all {fmt.count(a.num_layers, 'layer')} \u00d7 {fmt.count(a.num_heads, 'head')}, "
            f"selected {fmt.head_name(page.layer, page.head)}",
            f"{page.metric_label()} (printed under each head)",
            SCALES[opts.scale],
        )
        sel = (page.layer, page.head)
        return ExportJob(
            kind,
            lambda: figures.mosaic_figure(heads, metric, cap, per_head=per_head, selected=sel),
            lambda: figures.mosaic_table(heads, metric, opts.metric, labels),
            stem,
        )
    focus = page.focus()
    if kind in ("closeup", "arcs"):
        if focus.matrix is None:
            raise ValueError(f"{focus.view}: {focus.note or 'not available'}")
        matrix, query = focus.matrix, page.query_index()
        if kind == "closeup":
            cap = caption(f"Close-up, {focus.view}", focus.where, focus.note, "0 to the largest value shown")
            return ExportJob(
                kind,
                lambda: figures.matrix_figure(matrix, labels, cap, query=query),
                lambda: figures.matrix_table(matrix, labels),
                stem,
            )
        links = arc_links(matrix, query, opts.links, opts.threshold)
        mode = (
            f"from query \u2018{labels[query]}\u2019"
            if opts.links == "query"
            else f"every link \u2265 {fmt.weight(opts.threshold, 2)}"
        )
        cap = caption(f"Token arcs, {focus.view}", f"{focus.where}; {mode}")
        q = query if opts.links == "query" else None
        return ExportJob(
            kind,
            lambda: figures.arcs_figure(matrix, labels, links, cap, query=q),
            lambda: figures.links_table(links, labels),
            stem,
        )
    rel = page.relevance()
    if kind == "relevance":
        if rel.values is None:
            raise ValueError(f"{rel.source}: {rel.note}")
        values = rel.values
        cap = caption(f"Relevance band, {rel.source}", rel.note, "", "0 to the largest relevance")
        return ExportJob(
            kind,
            lambda: figures.relevance_figure(values, labels, cap),
            lambda: figures.relevance_table(values, labels),
            stem,
        )
    if kind == "sheet":
        if focus.matrix is None:
            raise ValueError(f"{focus.view}: {focus.note or 'not available'}")
        heads, metric = page.head_matrices(), page.metric_values()
        per_head = opts.scale == "own"
        cap = caption(
            f"Figure sheet (mosaic, close-up: {focus.view}, relevance: {rel.source})",
            f"{focus.where}",
            f"{page.metric_label()} (under each head)",
            f"mosaic {SCALES[opts.scale]}; close-up and relevance 0 to their largest value",
        )
        matrix, query, values = focus.matrix, page.query_index(), rel.values
        sel = (page.layer, page.head)
        return ExportJob(
            kind,
            lambda: figures.sheet_figure(
                heads,
                metric,
                matrix,
                labels,
                values,
                labels,
                cap,
                per_head=per_head,
                selected=sel,
                query=query,
                focus_title=f"Close-up: {focus.view}, {focus.where}",
                relevance_title=f"Relevance band: {rel.source} ({rel.note})",
            ),
            None,
            stem,
        )
    raise KeyError(kind)
