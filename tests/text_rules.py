"""The display rules of inspector.formatting, as checks over text a person reads (test helper).

:func:`violations` takes ``(where, text)`` pairs (a label, a table cell, a tooltip,
a painted string, a line of command-line output) and returns one message per
broken rule:

- **one head-name form**: ``L2H3`` only; ``layer 2, head 4``, ``layer 3 head 1``,
  ``L0 H3``, ``L2-H3``, ``l2h3``, ``head 4`` or ``layer 2`` alone are flagged;
- **scores as percentages**: a probability, accuracy, F1, precision, recall or
  confidence written as a fraction (``accuracy 0.850``, ``p=0.987``) is flagged,
  and so is a percentage inside a sentence without exactly one decimal
  (``85%``, ``85.43%``; a bare tick such as ``20%`` on its own is allowed);
- **tolerances in points**: ``pts`` or ``pct`` as a unit is flagged;
- **counts agree with their noun**: ``1 utterances``, ``3 utterance``, ``(s)``.
"""

from __future__ import annotations

import html
import re
from collections.abc import Iterable

NOUNS = (
    "utterance",
    "row",
    "head",
    "layer",
    "token",
    "word",
    "misfire",
    "label",
    "step",
    "group",
    "file",
    "pair",
    "batch",
    "sentence",
    "change",
)
"""Nouns the window and the command line count."""

_NOUN = "|".join(NOUNS)
_PLURAL = "|".join(f"{n}es" if n.endswith("ch") else f"{n}s" for n in NOUNS)
_NUMBER = r"(?<![\d.,\w])(?!1\s)(\d{1,3}(?:,\d{3})+|\d+)"
_MODIFIER = r"(?:[a-z-]+\s+)?"
"""One optional word between the number and the noun (``3 bad rows``, ``2 near-duplicate groups``)."""

HEAD_FORMS: tuple[tuple[str, re.Pattern[str]], ...] = (
    ("'layer N, head M' instead of LNHM", re.compile(r"(?i)\blayer\s*\d+\s*[,;/]?\s*head\s*\d+")),
    ("'LN HM' instead of LNHM", re.compile(r"\bL\d+\s+H\d+\b")),
    ("'LN-HM' instead of LNHM", re.compile(r"(?i)\bL\d+\s*[-_.:/]\s*H\d+\b")),
    ("lower-case head name", re.compile(r"\bl\d+h\d+\b")),
    # a word "head"/"heads" then a number (not a path such as .../heads13/...)
    ("'head N' instead of a head name", re.compile(r"(?i)\bheads?(?:\s+#?|#)\s*\d+\b")),
    ("'layer N' instead of LN", re.compile(r"(?i)\blayers?\s*#?\s*\d+\b")),
)
"""Ways of naming a head (or a layer) other than the one form."""

_SCORE = r"(?:accuracy|macro-?F1|F1|precision|recall|probabilit(?:y|ies)|confidence|got|p(?:\([^)]*\))?)"
SCORE_AS_FRACTION = re.compile(
    rf"(?i)\b{_SCORE}\s*(?:[:=]|\bis\b|\bof\b|\bgot\b)?\s*\(?\s*([01]?\.\d+|[01])(?![\d.]*\s*%)\b"
)
"""A score word followed by a bare number between 0 and 1 (a fraction where a percentage belongs)."""
PERCENT_IN_TEXT = re.compile(r"(?<![\d.])(\d+(?:\.\d+)?)\s*%")
BAD_UNITS = re.compile(r"(?i)\b\d+(?:\.\d+)?\s*(pts|pct|ppt)\b")
ONE_WITH_PLURAL = re.compile(rf"(?<![\d.,\w])1\s+{_MODIFIER}({_PLURAL})\b")
MANY_WITH_SINGULAR = re.compile(rf"{_NUMBER}\s+{_MODIFIER}({_NOUN})\b(?!s|es)")
MAYBE_PLURAL = re.compile(r"\w\(s\)|\w\(es\)")


def plain(text: str) -> str:
    """Rich text as a person reads it: tags dropped, entities decoded, whitespace collapsed."""
    text = re.sub(r"<br\s*/?>|</(?:li|tr|p|div)>", "\n", text, flags=re.I)
    text = re.sub(r"<[^>]+>", " ", text)
    return re.sub(r"[ \t\u00a0]+", " ", html.unescape(text)).strip()


def violations(items: Iterable[tuple[str, str]]) -> list[str]:
    """One message per broken display rule in ``items`` (``(where, text)`` pairs)."""
    found = []
    for where, raw in items:
        text = plain(raw)
        for rule, pattern in HEAD_FORMS:
            for m in pattern.finditer(text):
                found.append(f"{where}: {rule}: {m.group(0)!r} in {text!r}")
        for m in SCORE_AS_FRACTION.finditer(text):
            found.append(f"{where}: a score as a fraction: {m.group(0)!r} in {text!r}")
        if PERCENT_IN_TEXT.fullmatch(text) is None:  # a bare tick ('20%') may be a whole percentage
            for m in PERCENT_IN_TEXT.finditer(text):
                if not re.fullmatch(r"\d+\.\d", m.group(1)):
                    found.append(
                        f"{where}: a percentage without exactly one decimal: {m.group(0)!r} in {text!r}"
                    )
        for m in BAD_UNITS.finditer(text):
            found.append(f"{where}: '{m.group(1)}' instead of points: {m.group(0)!r} in {text!r}")
        for pattern in (ONE_WITH_PLURAL, MANY_WITH_SINGULAR, MAYBE_PLURAL):
            for m in pattern.finditer(text):
                found.append(f"{where}: count and noun disagree: {m.group(0)!r} in {text!r}")
    return found


SCORE_HEADERS = frozenset({"accuracy", "precision", "recall", "f1", "macro-f1", "confidence", "probability"})
"""Table columns that hold scores: every cell must be a percentage with one decimal."""
PERCENT_CELL = re.compile(r"\d{1,3}\.\d%")


def score_cell_violations(header: str, cells: Iterable[str], where: str) -> list[str]:
    """Cells of a score column that are not ``85.4%`` (empty cells are allowed)."""
    if header.strip().lower() not in SCORE_HEADERS:
        return []
    return [
        f"{where}: column {header!r} holds {cell!r}, not a percentage with one decimal"
        for cell in cells
        if cell and not PERCENT_CELL.fullmatch(cell)
    ]
