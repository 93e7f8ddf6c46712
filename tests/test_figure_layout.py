"""Every exported figure, drawn: no two labels overlap, no text below 7 pt or off the page, paper sizes, one
visual language.

Figures are built from the bundled sample model (sentence views, explanation
with a rewording and a long sentence that continues over pages) and from
synthetic arrays at the standard size of the issue (12 layers x 12 heads, 128
tokens; a corpus of 16 intents). Each is drawn with matplotlib's Agg renderer
and its text artists' boxes are collected after drawing (tests/figure_checks.py).
"""

from __future__ import annotations

import numpy as np
import pytest

from inspector.figures.paper import PAPERS
from inspector.paths import SAMPLE_MODEL, sample_model_available
from tests.figure_checks import maps_used, outside, small_fonts, text_overlaps

pytestmark = pytest.mark.skipif(not sample_model_available(), reason="the bundled sample model is missing")

TEXT = "can i move my crossing to gullholm to thursday afternoon"
EDITED = "can i cancel my crossing to gullholm on thursday afternoon"
LONG = (
    "hello there, i booked the early crossing from the harbour to gullholm for two adults, one child and a "
    "small van next thursday, but my sister now says the ferry might be cancelled because of the storm, "
    "so can you tell me whether i should move the booking to friday or ask for my money back"
)
FERRY_WORDS = "the evening crossing to orlestow with my dog and two bikes on saturday please".split()
LABELS16 = [
    "book_crossing", "cancel_booking", "change_booking", "refund_request", "timetable", "disruption_status",
    "vehicle_fares", "foot_passenger_fares", "pets_on_board", "accessibility", "lost_property",
    "speak_to_agent", "luggage", "cabin_upgrade", "parking", "group_travel",
]  # fmt: skip
MAPS = {"cividis", "PRGn"}


def _fits_paper(fig) -> bool:
    """The figure is one of the paper sizes, or fits on A4 and on Letter in some orientation."""
    w, h = fig.get_size_inches()
    for pw, ph in PAPERS.values():
        if np.allclose((w, h), (pw, ph), atol=0.01) or np.allclose((w, h), (ph, pw), atol=0.01):
            return True
    short, long = sorted((w, h))
    return short <= 8.27 + 0.01 and long <= 10.9 + 0.01


def check(name: str, fig) -> list[str]:
    problems = [f"{name}: {p}" for p in text_overlaps(fig) + small_fonts(fig, 7.0) + outside(fig)]
    if not _fits_paper(fig):
        problems.append(f"{name}: {fig.get_size_inches()} in does not fit A4 and Letter")
    wrong = maps_used(fig) - MAPS
    if wrong:
        problems.append(f"{name}: colour maps outside the visual language: {sorted(wrong)}")
    return problems


@pytest.fixture(scope="module")
def sample():
    import torch

    from inspector.checkpoint.loader import load_checkpoint

    torch.set_num_threads(1)
    return load_checkpoint(SAMPLE_MODEL)


@pytest.fixture(scope="module")
def misfire(sample) -> str:
    from inspector.measures.analysis import analyze_sentence

    predicted = analyze_sentence(sample, TEXT).prediction.label
    return "cancel_booking" if predicted != "cancel_booking" else "change_booking"


def _big_attention(seed: int = 0) -> tuple[np.ndarray, list[str]]:
    """12 layers x 12 heads over 128 tokens (the issue's standard check), rows summing to 1."""
    rng = np.random.default_rng(seed)
    a = rng.random((12, 12, 128, 128)) ** 6
    labels = ["[CLS]"] + [FERRY_WORDS[i % len(FERRY_WORDS)] for i in range(126)] + ["[SEP]"]
    return (a / a.sum(-1, keepdims=True)).astype(np.float32), labels


def sentence_figures(sample, misfire) -> dict:
    from inspector.figures import sentence as figs
    from inspector.figures.caption import Caption
    from inspector.measures.analysis import analyze_sentence

    a = analyze_sentence(sample, TEXT)
    p = a.prediction
    cap = Caption(
        a.model_name, a.text, "Close-up, head", "L2H3; pieces", "Entropy (nats)", "cividis, 0 to the largest",
        p.label, p.probabilities[p.label], misfire, p.probabilities[misfire], "links from the query",
    )  # fmt: skip
    metric = a.head_metrics.get("entropy")
    big, labels = _big_attention()
    big_metric = big.max(axis=(-1, -2))
    links = [(3, k, float(a.attention[2, 3, 3, k])) for k in range(len(a.tokens))]
    big_links = [(60, k, float(big[2, 3, 60, k])) for k in range(128)]
    made = {
        "matrix": figs.matrix_figure(a.attention[2, 3], a.tokens, cap, query=3),
        "mosaic": figs.mosaic_figure(a.attention, metric, cap, per_head=True, selected=(2, 3)),
        "arcs": figs.arcs_figure(a.attention[2, 3], a.tokens, links, cap, query=3),
        "relevance": figs.relevance_figure(a.rollout[0], a.tokens, cap),
        "matrix 128": figs.matrix_figure(big[5, 7], labels, cap, query=60),
        "mosaic 12x12x128": figs.mosaic_figure(big, big_metric, cap, per_head=False, selected=(11, 11)),
        "arcs 128": figs.arcs_figure(big[2, 3], labels, big_links, cap, query=60),
        "relevance 128": figs.relevance_figure(big[0, 0, 0], labels, cap),
    }
    for paper in PAPERS:
        made[f"sheet {paper}"] = figs.sheet_figure(
            a.attention, metric, a.attention[2, 3], a.tokens, a.rollout[0], a.tokens, cap,
            per_head=True, selected=(2, 3), focus_title="Close-up: head, L2H3",
            relevance_title="Relevance band: rollout", query=3, paper=paper,
        )  # fmt: skip
        made[f"sheet 12x12x128 {paper}"] = figs.sheet_figure(
            big, big_metric, big[5, 7], labels, big[0, 0, 0], labels, cap,
            per_head=False, selected=(5, 7), focus_title="Close-up: head, L5H7",
            relevance_title="Relevance band: rollout", query=60, paper=paper,
        )  # fmt: skip
    return made


def corpus_figures() -> dict:
    from inspector.corpus.importance import HeadImportance
    from inspector.corpus.pruning import PruningCurve, PruningResult
    from inspector.corpus.redundancy import Redundancy
    from inspector.corpus.run import Evaluation
    from inspector.figures import corpus as figs

    rng = np.random.default_rng(3)
    n = len(LABELS16)
    confusion = np.diag(rng.integers(20, 60, n)) + rng.integers(0, 4, (n, n)) * (rng.random((n, n)) < 0.2)
    ev = Evaluation(list(LABELS16), confusion, np.zeros(0, int), np.zeros(0), [])
    raw = rng.random((12, 12))
    imp = HeadImportance(raw, raw / np.linalg.norm(raw, axis=1, keepdims=True), 0.4, 500)
    js = rng.random((144, 144)) * 0.4
    js = (js + js.T) / 2
    np.fill_diagonal(js, 0)
    js[3, 4] = js[4, 3] = 0.01
    red = Redundancy(js, 12, 12, 5000, 2000)
    order = [(l, h) for l in range(12) for h in range(12)]
    curves = [
        PruningCurve(name, order, list(range(0, 145, 4)), list(np.linspace(0.9, 0.1 + 0.1 * k, 37)), 500)
        for k, name in enumerate(("importance", "random", "duplicates"))
    ]
    pr = PruningResult(curves, "importance", order[:20], 0.9, 0.89, 0.01, 4, None)
    return {
        "confusion 16": figs.confusion_figure(ev, "ferry_intents"),
        "importance 12x12": figs.importance_figure(imp, "ferry_intents"),
        "similarity 144": figs.similarity_figure(red, "ferry_intents"),
        "pruning": figs.pruning_figure(pr, "ferry_intents"),
    }


def comparison_figures(sample) -> dict:
    """The head change and matching maps: the sample model against its retrained copy on one sentence, and a
    12 x 12 pair (with unchanged heads) over a set; also B with fewer heads per layer than A."""
    from inspector.checkpoint.loader import load_checkpoint
    from inspector.comparison.matching import HeadMatching
    from inspector.comparison.sentence import compare_sentence
    from inspector.figures import comparison as figs
    from inspector.paths import SAMPLE_RETRAINED

    retrained = load_checkpoint(SAMPLE_RETRAINED)
    pair = compare_sentence(sample, retrained, TEXT)
    rng = np.random.default_rng(5)
    identical = np.zeros((12, 12), bool)
    identical[:2] = True
    big = HeadMatching(rng.random((144, 144)) * 0.5, 12, 12, 12, 12, identical, 60000, 8000)
    narrow = HeadMatching(rng.random((24, 36)) * 0.3, 6, 6, 6, 4, np.zeros((6, 4), bool), 900, 900)
    where = f"the sentence \u201c{TEXT}\u201d"
    made = {}
    for name, matching, a, b, over in (
        ("sample", pair.matching, sample.name, retrained.name, where),
        (
            "12x12",
            big,
            "ferry_intents",
            "ferry_intents_pruned_and_retrained",
            "512 utterances of ferry_eval.csv",
        ),
        (
            "6x4 against 6x6",
            narrow,
            "ferry_intents",
            "ferry_intents_small",
            "40 utterances of ferry_eval.csv",
        ),
    ):
        made[f"change map {name}"] = figs.change_map_figure(matching, a, b, over)
        made[f"matching map {name}"] = figs.matching_figure(matching, a, b, over)
    return made


def test_sentence_figures_print_cleanly(sample, misfire):
    """Close-up, mosaic, arcs, relevance band and the sheet (A4 and Letter), sample and 12x12x128 sizes.

    Reference: matplotlib's Text.get_window_extent after an Agg draw (the boxes as printed); paper sizes
    ISO 216 (A4, 210 x 297 mm) and ANSI/ASME Y14.1 (Letter, 8.5 x 11 in); the 7 pt floor of the issue.
    """
    problems = []
    for name, fig in sentence_figures(sample, misfire).items():
        problems += check(name, fig)
    assert problems == [], "\n".join(problems[:30])


def test_explanation_pages_print_cleanly(sample, misfire):
    """The explanation (misfire with a rewording; a long sentence over several pages) on A4 and Letter.

    Reference: as above; the page counts follow from the row height and the page size (the long sentence
    cannot fit one landscape page at 0.17 in per word).
    """
    from inspector.explanation.explain import explain_sentence
    from inspector.explanation.rewording import compare_rewording
    from inspector.figures.explanation import explanation_pages

    cmp = compare_rewording(sample, TEXT, EDITED, expected=misfire, steps=4)
    long = explain_sentence(sample, LONG, expected=misfire, steps=4)
    problems = []
    for paper in PAPERS:
        pages = explanation_pages(cmp.original, cmp, paper=paper)
        assert len(pages) == 3  # original, reworded, heads
        long_pages = explanation_pages(long, paper=paper)
        assert len(long.words) > 40 and len(long_pages) >= 2
        for k, fig in enumerate(pages + long_pages):
            problems += check(f"explanation {paper} page {k + 1}", fig)
            w, h = fig.get_size_inches()
            assert np.allclose(sorted((w, h)), sorted(PAPERS[paper]), atol=0.01)
    assert problems == [], "\n".join(problems[:30])


def test_corpus_figures_print_cleanly():
    """Confusion matrix (16 intents), importance (12 x 12), similarity (144 heads), pruning curve.

    Reference: as above; colour maps must be the project's cividis / PRGn only (issue: one visual language).
    """
    problems = []
    for name, fig in corpus_figures().items():
        problems += check(name, fig)
    assert problems == [], "\n".join(problems[:30])


def test_comparison_figures_print_cleanly(sample):
    """Head change map and head matching map: the sample pair on a sentence, 12 x 12 heads, B narrower than A.

    Reference: as above; the maps hold divergences (never negative), so only the sequential map may appear
    (DEVELOPERS.md, visual language).
    """
    problems = []
    for name, fig in comparison_figures(sample).items():
        problems += check(name, fig)
        assert maps_used(fig) == {"cividis"}, name
    assert problems == [], "\n".join(problems[:30])


def test_the_checks_catch_an_overlap_and_a_small_font():
    """Two labels drawn on top of each other and a 5 pt label are both reported.

    Reference: common practice, no source (a self-check of the helper).
    """
    from matplotlib.figure import Figure

    fig = Figure(figsize=(3, 2))
    fig.text(0.1, 0.5, "layer 3, head 5", fontsize=9)
    fig.text(0.15, 0.5, "key token", fontsize=9)
    fig.text(0.1, 0.1, "tiny", fontsize=5)
    assert len(text_overlaps(fig)) == 1
    assert small_fonts(fig, 7.0) == ["'tiny' at 5.0 pt"]
    fig.text(0.95, 0.9, "runs off the right edge", fontsize=9)
    fig._headcount_drawn_texts = None  # drawn again with the new label
    assert outside(fig)
