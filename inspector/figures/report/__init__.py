"""The printable review report of a corpus run: one PDF (or one self-contained HTML file) for the review.

``run_folder`` reads a folder written by ``headcount corpus`` (or by the corpus
page) back into the core's data types; ``pages`` draws the report's pages
(cover, scores and confusion matrix, misfires grouped by confusable pair, an
explanation of the top misfires, head importance, similarity, pruning, an
appendix of definitions); ``build`` writes them as PDF or HTML, atomically. May
import every earlier stage (checkpoint, measures, corpus, explanation) and the
other figure modules; never the command line, never Qt.
"""

DEFAULT_EXPLAINED = 5
"""Top misfires the report explains by default (one page each); here so ``--help`` needs no matplotlib."""
