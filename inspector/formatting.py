"""The one place that turns heads and numbers into text a person reads.

The window, the command line's human-readable output, the human-readable parts of
reports and every figure caption go through these functions, so the same thing is
written the same way everywhere. Machine-readable outputs (``--json``, CSV columns)
keep full-precision numbers under their stable names and do not use this module.

The rules:

- a head is ``L2H3`` (layer and head counted from 0); a layer alone is ``L2``; a head
  on the column axis of a layers-by-heads grid (whose rows say ``L2``) is ``H3``;
- probabilities, accuracies and F1 scores are percentages with one decimal
  (``85.4%``), never fractions;
- a change of such a score, and a tolerance on it, is in percentage points with one
  decimal (``1.0 point``, ``2.5 points``);
- weights and relevance print with three decimals (``0.080``); a column of values of
  mixed size prints with one number of decimals chosen for the column
  (:func:`column`), so the decimal points line up;
- signed values always carry their sign (``+0.120``, ``\u22120.045``);
- a rank correlation (Spearman rho) has two decimals and its sign (``+0.42``);
- counts agree with their noun (``1 utterance``, ``2 utterances``);
- a missing value (None, NaN) is ``n/a``.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence

MINUS = "\u2212"
"""The minus sign used in displayed numbers (the typographic one, not a hyphen)."""


def head_name(layer: int, head: int) -> str:
    """``L{layer}H{head}``, both counted from 0: the one name of a head."""
    return f"L{int(layer)}H{int(head)}"


def layer_name(layer: int) -> str:
    """``L{layer}``, counted from 0."""
    return f"L{int(layer)}"


def head_tick(head: int) -> str:
    """``H{head}``: a head on the column axis of a layers-by-heads grid whose rows are :func:`layer_name`."""
    return f"H{int(head)}"


def parse_head_name(text: str) -> tuple[int, int]:
    """Read ``L2H3`` (case and spaces ignored) back into ``(2, 3)``; ValueError otherwise."""
    t = text.replace(" ", "").upper()
    if not t.startswith("L") or "H" not in t:
        raise ValueError(f"not a head name: {text!r} (expected like L2H3)")
    layer, _, head = t[1:].partition("H")
    if not (layer.isdigit() and head.isdigit()):
        raise ValueError(f"not a head name: {text!r} (expected like L2H3)")
    return int(layer), int(head)


def _finite(value: float) -> str | None:
    if math.isnan(value):
        return "n/a"
    if math.isinf(value):
        return "\u221e" if value > 0 else f"{MINUS}\u221e"
    return None


def _minus(text: str) -> str:
    return MINUS + text[1:] if text.startswith("-") else text


def percent(fraction: float | None, decimals: int = 1) -> str:
    """A probability, accuracy or F1 score given as a fraction, shown as ``85.4%`` (None: ``n/a``)."""
    if fraction is None:
        return "n/a"
    value = float(fraction)
    return _finite(value) or _minus(f"{100.0 * value:.{decimals}f}%")


def points(fraction: float, decimals: int = 1, *, signed: bool = False) -> str:
    """A change of (or tolerance on) a percentage, given as a fraction: ``2.5 points``, ``1.0 point``.

    ``signed=True`` writes the sign: ``+2.3 points`` / ``\u22121.0 points``.
    """
    value = 100.0 * float(fraction)
    bad = _finite(value)
    if bad:
        return bad
    if round(value, decimals) == 0:
        value = 0.0  # no sign on a change that rounds to nothing (as :func:`signed`)
        signed = False
    text = f"{value:+.{decimals}f}" if signed else f"{value:.{decimals}f}"
    unit = "point" if abs(round(value, decimals)) == 1 else "points"
    return f"{_minus(text)} {unit}"


def weight(value: float, decimals: int = 3) -> str:
    """An attention weight, relevance or other non-negative measure: ``0.080``."""
    v = float(value)
    return _finite(v) or _minus(f"{v:.{decimals}f}")


def signed(value: float, decimals: int = 3) -> str:
    """A signed value with its sign always written: ``+0.120``, ``\u22120.045``, ``0.000``."""
    v = float(value)
    bad = _finite(v)
    if bad:
        return bad
    text = f"{v:+.{decimals}f}"
    if float(text) == 0.0:
        return f"{0.0:.{decimals}f}"
    return _minus(text)


def number(value: float, significant: int = 3, *, sign: bool = False) -> str:
    """A quantity of any size with ``significant`` digits: ``1.42``, ``0.0803``, ``8.01e-05``, ``1250``.

    ``sign=True`` writes the sign of a signed quantity: ``+3.1e-07``, ``\u22120.25``.
    """
    v = float(value)
    text = f"{v:+.{significant}g}" if sign and v != 0 else f"{v:.{significant}g}"
    return _finite(v) or _minus(text)


def correlation(rho: float | None) -> str:
    """A rank correlation with its sign and two decimals: ``+0.42``, ``\u22120.10``; None or NaN: ``n/a``."""
    if rho is None:
        return "n/a"
    return signed(rho, 2)


def decimals_for(values: Iterable[float], significant: int = 3, most: int = 6) -> int:
    """Decimals that give the largest finite ``abs(value)`` ``significant`` digits (at most ``most``)."""
    finite = [abs(float(v)) for v in values if math.isfinite(float(v))]
    top = max(finite, default=0.0)
    if top == 0.0:
        return significant
    digits_before = math.floor(math.log10(top)) + 1
    return int(min(most, max(0, significant - digits_before)))


def column(values: Sequence[float], significant: int = 3, *, sign: bool = False) -> list[str]:
    """A column of numbers with one number of decimals, chosen for the column's largest value.

    ``[0.0803, 0.074, 0.00563]`` becomes ``['0.0803', '0.0740', '0.0056']``: the
    decimal points line up and no entry switches to scientific notation.
    """
    d = decimals_for(values, significant)
    fmt = signed if sign else weight
    return [fmt(v, d) for v in values]


def bits(value: float, decimals: int = 3) -> str:
    """A Jensen-Shannon divergence (or other information quantity) in bits: ``0.039 bits``."""
    return f"{weight(value, decimals)} bits"


def count(n: int, noun: str, plural: str | None = None) -> str:
    """``1 utterance``, ``2 utterances``; ``plural`` for irregular nouns (``count(3, 'query', 'queries')``)."""
    n = int(n)
    word = noun if n == 1 else (plural or f"{noun}s")
    return f"{n:,} {word}"


def duration(seconds: float) -> str:
    """A time span for progress and estimates: ``0.4 s``, ``12 s``, ``3 min 05 s``, ``1 h 02 min``."""
    s = float(seconds)
    if not math.isfinite(s) or s < 0:
        return "unknown"
    if s < 10:
        return f"{s:.1f} s"
    s = int(round(s))
    if s < 60:
        return f"{s} s"
    if s < 3600:
        return f"{s // 60} min {s % 60:02d} s"
    return f"{s // 3600} h {(s % 3600) // 60:02d} min"
