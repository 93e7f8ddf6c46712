"""Export of the sentence views: figure (PNG/SVG/PDF) plus CSV, and the one-page figure sheet.

:func:`build_export` snapshots what a view shows into an
:class:`~ui.widgets.export.ExportJob`; the shared export controller writes it.
Every caption carries the model, the sentence, the prediction with its
probability, the expected label and the misfire mark, the view and where it
looks, the metric, the colour scale and the view's settings; every CSV carries
the sentence and its labels on each row.
"""

from __future__ import annotations

from inspector import formatting as fmt
from inspector import palette
from inspector.figures import sentence as figures
from inspector.figures.caption import Caption
from inspector.figures.paper import DEFAULT_PAPER
from ui.sentence.state import SCALES, SentencePage, arc_links
from ui.widgets.export import ExportJob, file_stem

EXPORT_KINDS: dict[str, str] = {
    "mosaic": "Head mosaic",
    "closeup": "Close-up",
    "arcs": "Token arcs",
    "relevance": "Relevance band",
    "sheet": "Figure sheet",
}
"""Exportable views (key -> menu text)."""


def build_export(page: SentencePage, kind: str, paper: str = DEFAULT_PAPER) -> ExportJob:
    """Snapshot the view ``kind`` of ``page`` for export."""
    if page.analysis is None:
        raise ValueError("nothing to export: no sentence analysed yet")
    a = page.analysis
    opts = page.options
    view = page.view()
    labels = list(view.labels)
    token_axis = "words" if opts.words else "pieces"
    token_axis += ", special tokens hidden" if opts.hide_special else ""
    stem = file_stem(a.model_name, a.text, kind)
    pred = a.prediction
    expected = page.expected if pred is not None else None
    predicted = None if pred is None else pred.label

    def caption(view_name: str, where: str, metric: str = "", scale: str = "", settings: str = "") -> Caption:
        return Caption(
            model=a.model_name,
            sentence=a.text,
            view=view_name,
            where=f"{where}; {token_axis}",
            metric=metric,
            scale=f"{palette.SEQUENTIAL_TEXT}, {scale}" if scale else "",
            predicted=predicted,
            probability=None if pred is None else pred.probabilities[pred.label],
            expected=expected,
            expected_probability=None
            if pred is None or expected is None
            else pred.probabilities.get(expected),
            settings=settings,
        )

    def table(make):
        return lambda: figures.with_sentence(make(), a.text, predicted, expected)

    if kind == "mosaic":
        heads, metric = page.head_matrices(), page.metric_values()
        per_head = opts.scale == "own"
        cap = caption(
            "Head mosaic",
            f"all {fmt.count(a.num_layers, 'layer')} \u00d7 {fmt.count(a.num_heads, 'head')}, "
            f"selected {fmt.head_name(page.layer, page.head)} (framed)",
            f"{page.metric_label()} (printed under each head)",
            SCALES[opts.scale],
        )
        sel = (page.layer, page.head)
        return ExportJob(
            kind,
            lambda: figures.mosaic_figure(heads, metric, cap, per_head=per_head, selected=sel),
            table(lambda: figures.mosaic_table(heads, metric, opts.metric, labels)),
            stem,
        )
    focus = page.focus()
    if kind in ("closeup", "arcs"):
        if focus.matrix is None:
            raise ValueError(f"{focus.view}: {focus.note or 'not available'}")
        matrix, query = focus.matrix, page.query_index()
        if kind == "closeup":
            cap = caption(
                f"Close-up, {focus.view}",
                f"{focus.where}; query \u2018{labels[query]}\u2019 framed"
                if query is not None
                else focus.where,
                focus.note,
                "0 to the largest value shown",
            )
            return ExportJob(
                kind,
                lambda: figures.matrix_figure(matrix, labels, cap, query=query),
                table(lambda: figures.matrix_table(matrix, labels)),
                stem,
            )
        links = arc_links(matrix, query, opts.links, opts.threshold)
        mode = (
            f"links from the query \u2018{labels[query]}\u2019"
            if opts.links == "query"
            else f"every link \u2265 {fmt.weight(opts.threshold, 2)}"
        )
        cap = caption(
            f"Token arcs, {focus.view}",
            focus.where,
            "attention weight (line width and darkness)",
            settings=mode,
        )
        q = query if opts.links == "query" else None
        return ExportJob(
            kind,
            lambda: figures.arcs_figure(matrix, labels, links, cap, query=q),
            table(lambda: figures.links_table(links, labels)),
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
            table(lambda: figures.relevance_table(values, labels)),
            stem,
        )
    if kind == "sheet":
        if focus.matrix is None:
            raise ValueError(f"{focus.view}: {focus.note or 'not available'}")
        heads, metric = page.head_matrices(), page.metric_values()
        per_head = opts.scale == "own"
        cap = caption(
            "Figure sheet: head mosaic, close-up and relevance band",
            f"selected {fmt.head_name(page.layer, page.head)}; close-up {focus.view}, {focus.where}; "
            f"relevance {rel.source}",
            f"{page.metric_label()} (under each head)",
            f"mosaic {SCALES[opts.scale]}; close-up and relevance from 0 to their largest value",
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
                relevance_title=f"Relevance band: {rel.source}" + (f" \u2014 {rel.note}" if rel.note else ""),
                paper=paper,
            ),
            None,
            stem,
        )
    raise KeyError(kind)
