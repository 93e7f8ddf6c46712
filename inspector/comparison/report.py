"""Write a comparison to a folder under stable file names, and the JSON documents of ``headcount compare``.

Files (all written atomically):

``comparison.json``      model_a, model_b, the data read, accuracy_a/b, macro_f1_a/b, agreement, the
                         2 x 2 right/wrong table, fixed and broken utterances, per-intent changes,
                         one object per head of B, the matching's row counts, cautions and notes
``fixed.csv``            wrong in A, right in B: line, text, label, predicted_a, predicted_b,
                         confidence_a, confidence_b (A's most confident mistakes first)
``broken.csv``           right in A, wrong in B: the same columns (B's most confident mistakes first)
``head_changes.csv``     one row per head of B: layer, head, js_same_position, unchanged,
                         best_match_layer, best_match_head, js_best_match, then ``<metric>_a``,
                         ``<metric>_b``, ``<metric>_delta`` for every metric (empty where A has no
                         head at that position)
``intent_changes.csv``   label, support, precision/recall/f1 of A and B and their deltas
figures                  head_change_map, head_matching (.png and .svg)

Layers and heads count from 0; divergences are in bits; deltas are B minus A.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from inspector.comparison.matching import HeadMatching
from inspector.comparison.run import ChangedUtterance, ComparisonReport
from inspector.comparison.sentence import SentenceComparison
from inspector.corpus.report import ATTENTION_CAUTION, data_dict
from inspector.figures.files import save_csv, save_json
from inspector.formatting import count
from inspector.measures.analysis import Prediction
from inspector.measures.metrics import METRIC_NAMES

COMPARISON = "comparison.json"
FIXED = "fixed.csv"
BROKEN = "broken.csv"
HEAD_CHANGES = "head_changes.csv"
INTENT_CHANGES = "intent_changes.csv"
FIGURES = {"change": "head_change_map", "matching": "head_matching"}
CHANGED_HEADER = ("line", "text", "label", "predicted_a", "predicted_b", "confidence_a", "confidence_b")
HEAD_HEADER: tuple[str, ...] = (
    "layer",
    "head",
    "js_same_position",
    "unchanged",
    "best_match_layer",
    "best_match_head",
    "js_best_match",
    *(f"{name}_{part}" for name in METRIC_NAMES for part in ("a", "b", "delta")),
)
INTENT_HEADER = (
    "label",
    "support",
    "precision_a",
    "precision_b",
    "precision_delta",
    "recall_a",
    "recall_b",
    "recall_delta",
    "f1_a",
    "f1_b",
    "f1_delta",
)
MATCHING_NOTE = (
    "Per head of B: js_same_position compares it with A's head at the same layer and head; the best "
    "match is the A head whose attention rows are closest (lowest mean Jensen-Shannon divergence, bits, "
    "over the same real query rows). A head with exactly the same weights in both is 'unchanged' (0)."
)


def _value(x: float) -> float | None:
    return None if np.isnan(x) else float(x)


def _on_grid(values: np.ndarray, layers: int, heads: int) -> np.ndarray:
    """``values`` [la, ha] placed on a [layers, heads] grid, NaN where it has no entry."""
    out = np.full((layers, heads), np.nan)
    la, ha = min(values.shape[0], layers), min(values.shape[1], heads)
    out[:la, :ha] = values[:la, :ha]
    return out


def head_rows(
    matching: HeadMatching, metrics_a: dict[str, np.ndarray], metrics_b: dict[str, np.ndarray]
) -> list[dict[str, object]]:
    """One dict per head of B (see :data:`HEAD_HEADER`); values A cannot supply are None.

    ``metrics_a`` and ``metrics_b`` map every metric name to a [layers, heads] array of that
    model (a sentence's values, or means over a set).
    """
    same, best, best_js, unchanged = (
        matching.same_position,
        matching.best_match,
        matching.best_js,
        matching.unchanged,
    )
    lb, hb = matching.layers_b, matching.heads_b
    a_grid = {n: _on_grid(np.asarray(metrics_a[n], dtype=np.float64), lb, hb) for n in METRIC_NAMES}
    rows = []
    for layer in range(lb):
        for head in range(hb):
            row: dict[str, object] = {
                "layer": layer,
                "head": head,
                "js_same_position": _value(same[layer, head]),
                "unchanged": bool(unchanged[layer, head]),
                "best_match_layer": int(best[layer, head, 0]),
                "best_match_head": int(best[layer, head, 1]),
                "js_best_match": float(best_js[layer, head]),
            }
            for n in METRIC_NAMES:
                a, b = a_grid[n][layer, head], float(metrics_b[n][layer, head])
                row[f"{n}_a"] = _value(a)
                row[f"{n}_b"] = b
                row[f"{n}_delta"] = _value(b - a)
            rows.append(row)
    return rows


def _changed(items: list[ChangedUtterance]) -> list[dict[str, object]]:
    return [
        {
            "line": c.row,
            "text": c.text,
            "label": c.label,
            "predicted_a": c.predicted_a,
            "predicted_b": c.predicted_b,
            "confidence_a": c.confidence_a,
            "confidence_b": c.confidence_b,
        }
        for c in items
    ]


def _matching_summary(matching: HeadMatching) -> dict[str, object]:
    return {
        "measure": "mean Jensen-Shannon divergence between attention rows (same real queries, real keys)",
        "log_base": 2,
        "unit": "bits",
        "layers_a": matching.layers_a,
        "heads_a": matching.heads_a,
        "layers_b": matching.layers_b,
        "heads_b": matching.heads_b,
        "rows_total": matching.rows_total,
        "rows_compared": matching.rows_compared,
        "unchanged_heads": int(matching.unchanged.sum()),
        "note": MATCHING_NOTE,
    }


def comparison_dict(report: ComparisonReport) -> dict:
    """The stable JSON document of ``comparison.json`` and ``headcount compare ... DATA --json``."""
    data, ev_a, ev_b = report.data, report.evaluation_a, report.evaluation_b
    return {
        "model_a": report.model_a,
        "model_b": report.model_b,
        "data": data_dict(data),
        "accuracy_a": ev_a.accuracy,
        "accuracy_b": ev_b.accuracy,
        "macro_f1_a": ev_a.macro_f1,
        "macro_f1_b": ev_b.macro_f1,
        "agreement": report.agreement,
        "right_wrong": {
            "rows": "model A right, model A wrong",
            "columns": "model B right, model B wrong",
            "counts": report.table.tolist(),
        },
        "fixed": _changed(report.fixed),
        "broken": _changed(report.broken),
        "per_intent": [
            {
                "label": c.label,
                "support": c.support,
                "precision_a": c.precision_a,
                "precision_b": c.precision_b,
                "precision_delta": c.precision_delta,
                "recall_a": c.recall_a,
                "recall_b": c.recall_b,
                "recall_delta": c.recall_delta,
                "f1_a": c.f1_a,
                "f1_b": c.f1_b,
                "f1_delta": c.f1_delta,
            }
            for c in report.intents
        ],
        "heads": head_rows(report.matching, report.heads_a.mean, report.heads_b.mean),
        "matching": _matching_summary(report.matching),
        "cautions": [ATTENTION_CAUTION],
        "notes": list(report.notes),
    }


def _prediction(p: Prediction | None) -> dict | None:
    return None if p is None else {"label": p.label, "probabilities": p.probabilities}


def sentence_dict(comparison: SentenceComparison) -> dict:
    """The stable JSON document of ``headcount compare MODEL_A MODEL_B --text ... --json``."""
    a, b = comparison.a, comparison.b
    return {
        "model_a": a.model_name,
        "model_b": b.model_name,
        "text": comparison.text,
        "tokens": comparison.tokens,
        "prediction_a": _prediction(a.prediction),
        "prediction_b": _prediction(b.prediction),
        "agree": comparison.agree,
        "rollout": {
            "js_final": comparison.rollout_js,
            "js_by_layer": [float(v) for v in comparison.rollout_js_by_layer],
            "first_token_a": [float(v) for v in a.rollout[0]],
            "first_token_b": [float(v) for v in b.rollout[0]],
            "note": "mean over tokens of the JS divergence (bits) between the two models' attention rollouts "
            "(Abnar & Zuidema 2020) after each layer; first_token_*: the classification token's row",
        },
        "heads": head_rows(comparison.matching, a.head_metrics.as_dict(), b.head_metrics.as_dict()),
        "matching": _matching_summary(comparison.matching),
        "cautions": [ATTENTION_CAUTION],
    }


def _changed_rows(items: list[ChangedUtterance]):
    return (
        [c.row, c.text, c.label, c.predicted_a, c.predicted_b, c.confidence_a, c.confidence_b] for c in items
    )


def _csv_cell(value: object) -> object:
    return "" if value is None else value


def write_comparison(
    report: ComparisonReport, folder: str | Path, *, figures: bool = True
) -> dict[str, list[Path]]:
    """Write every output file of a comparison into ``folder``; returns name -> written paths."""
    folder = Path(folder)
    doc = comparison_dict(report)
    written: dict[str, list[Path]] = {
        "comparison": [save_json(folder / COMPARISON, doc)],
        "fixed": [save_csv(folder / FIXED, CHANGED_HEADER, _changed_rows(report.fixed))],
        "broken": [save_csv(folder / BROKEN, CHANGED_HEADER, _changed_rows(report.broken))],
        "head_changes": [
            save_csv(
                folder / HEAD_CHANGES,
                HEAD_HEADER,
                ([_csv_cell(row[k]) for k in HEAD_HEADER] for row in doc["heads"]),
            )
        ],
        "intent_changes": [
            save_csv(
                folder / INTENT_CHANGES,
                INTENT_HEADER,
                ([row[k] for k in INTENT_HEADER] for row in doc["per_intent"]),
            )
        ],
    }
    if figures:
        written.update(write_figures(report.matching, report.model_a, report.model_b, folder, _where(report)))
    return written


def _where(report: ComparisonReport) -> str:
    return f"{count(len(report.data), 'utterance')} of {Path(report.data.path).name}"


def write_figures(
    matching: HeadMatching, model_a: str, model_b: str, folder: Path, where: str
) -> dict[str, list[Path]]:
    """The change map and the matching map as PNG and SVG under :data:`FIGURES` names."""
    from inspector.figures import comparison as plots
    from inspector.figures.corpus import save_figure

    return {
        "figure_change": save_figure(
            plots.change_map_figure(matching, model_a, model_b, where), folder / FIGURES["change"]
        ),
        "figure_matching": save_figure(
            plots.matching_figure(matching, model_a, model_b, where), folder / FIGURES["matching"]
        ),
    }
