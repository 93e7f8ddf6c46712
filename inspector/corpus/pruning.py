"""Pruning simulation: switch heads off one after another and watch accuracy.

Heads are silenced through the gates of :class:`inspector.checkpoint.capture.HeadGates`
(gate 0 removes exactly the head's contribution to the output projection); no
weight is changed and nothing is retrained. The curve therefore shows what a
pruned model would do *without* fine-tuning afterwards: a model pruned on its
strength must be re-validated (and usually fine-tuned) before it ships.

Orders (which head goes next):

``importance``
    lowest layer-normalised gate-gradient importance first (Michel et al. 2019).
``random``
    a seeded random permutation: the baseline any informed order should beat.
``duplicates``
    greedy on the redundancy matrix: repeatedly take the two remaining heads
    with the lowest mean Jensen-Shannon divergence and remove the less important
    one (the later one if no importance is known), so one head of each
    near-duplicate pair survives longest. In a corpus run only pairs that are
    near-duplicates (divergence plus twice its standard error within the cut)
    are taken; the heads left after them follow in ascending importance.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from inspector.checkpoint.masks import mask_json
from inspector.errors import HeadcountError

PRUNING_ORDERS: tuple[str, ...] = ("importance", "random", "duplicates")
CAUTION = (
    "Measured without retraining: the curve shows heads switched off in the trained model. "
    "A pruned model must be re-validated before use."
)

Head = tuple[int, int]


def importance_order(importance: np.ndarray) -> list[Head]:
    """Heads sorted by ascending importance (ties by layer, then head).

    Parameters
    ----------
    importance : ndarray of shape (layers, heads)
        Typically the layer-normalised scores.

    References
    ----------
    Michel, Levy & Neubig (2019), "Are Sixteen Heads Really Better than One?",
    section 4.2 (prune the heads with the smallest importance first).
    """
    layers, heads = importance.shape
    flat = np.lexsort((np.arange(layers * heads), importance.ravel()))
    return [(int(f // heads), int(f % heads)) for f in flat]


def random_order(num_layers: int, num_heads: int, seed: int) -> list[Head]:
    """A seeded random permutation of all heads (numpy ``default_rng(seed)``)."""
    flat = np.random.default_rng(seed).permutation(num_layers * num_heads)
    return [(int(f // num_heads), int(f % num_heads)) for f in flat]


def duplicates_order(
    js: np.ndarray,
    num_heads: int,
    importance: np.ndarray | None = None,
    *,
    bound: np.ndarray | None = None,
    threshold: float | None = None,
) -> list[Head]:
    """Greedy removal of one head of the currently most similar pair.

    Parameters
    ----------
    js : ndarray of shape (k, k)
        Mean pairwise Jensen-Shannon divergences (k = layers * heads).
    num_heads : int
    importance : ndarray of shape (layers, heads), optional
        Breaks the choice within a pair: the less important head goes.
    bound : ndarray of shape (k, k), optional
        Upper bound of each pair's divergence (``js + 2 * standard error``); default ``js``.
    threshold : float, optional
        Only pairs whose bound is within this cut are taken; the remaining heads
        then follow in ascending importance (flat order without importance).
        None takes every pair (the plain greedy order).

    Returns
    -------
    list of (layer, head), all k heads.

    Notes
    -----
    Our own heuristic (no published source): it removes redundancy before
    anything else.
    """
    k = len(js)
    score = np.zeros(k) if importance is None else np.asarray(importance, dtype=float).ravel()
    alive = list(range(k))
    order: list[int] = []
    dist = np.array(js, dtype=float)
    if threshold is not None:
        limit = np.asarray(js if bound is None else bound, dtype=float)
        dist[limit > threshold] = np.inf
    np.fill_diagonal(dist, np.inf)
    while len(alive) > 1:
        sub = dist[np.ix_(alive, alive)]
        if not np.isfinite(sub).any():
            break
        a, b = np.unravel_index(int(np.argmin(sub)), sub.shape)
        i, j = sorted((alive[a], alive[b]))
        victim = i if score[i] < score[j] else j
        order.append(victim)
        alive.remove(victim)
    order.extend(sorted(alive, key=lambda f: (score[f], f)))
    return [(f // num_heads, f % num_heads) for f in order]


def make_order(
    name: str,
    num_layers: int,
    num_heads: int,
    *,
    importance: np.ndarray | None = None,
    js: np.ndarray | None = None,
    js_bound: np.ndarray | None = None,
    threshold: float | None = None,
    seed: int = 0,
) -> list[Head]:
    """The removal order called ``name`` (one of :data:`PRUNING_ORDERS`).

    ``js_bound`` and ``threshold`` restrict the ``duplicates`` order to near-duplicate
    pairs (see :func:`duplicates_order`).
    """
    if name == "importance":
        if importance is None:
            raise HeadcountError("the 'importance' pruning order needs head importance")
        return importance_order(importance)
    if name == "random":
        return random_order(num_layers, num_heads, seed)
    if name == "duplicates":
        if js is None:
            raise HeadcountError("the 'duplicates' pruning order needs the head redundancy matrix")
        return duplicates_order(js, num_heads, importance, bound=js_bound, threshold=threshold)
    raise HeadcountError(f"unknown pruning order '{name}' (use: {', '.join(PRUNING_ORDERS)})")


def step_counts(total: int, every: int, start: int = 0) -> list[int]:
    """Numbers of removed heads at which accuracy is measured: start, start+every, ..., total.

    ``start`` is the number of heads already off before the simulation (a mask).
    """
    if every < 1:
        raise HeadcountError("pruning must evaluate every 1 or more heads")
    steps = list(range(start, total + 1, every))
    if steps[-1] != total:
        steps.append(total)
    return steps


def masked_first(order: Sequence[Head], already_off: Sequence[Head]) -> list[Head]:
    """``order`` with the heads that are already switched off moved to the front (in mask order).

    A corpus run on a masked model starts its curves with the mask in place: the
    first ``len(already_off)`` heads of every order are the mask.
    """
    off = list(dict.fromkeys((int(l), int(h)) for l, h in already_off))
    gone = set(off)
    return off + [h for h in order if h not in gone]


DEFAULT_PASSES = 10
"""Most passes over the evaluation set a pruning simulation spends when its steps are chosen adaptively."""
COARSE_FRACTIONS = (0.25, 0.5, 0.75)
"""Fractions of the heads at which every order is measured first (the same x for every curve)."""


def coarse_steps(total: int, points: int = len(COARSE_FRACTIONS)) -> list[int]:
    """``points`` step counts spread over (0, total): the quarters for three, evenly spaced otherwise."""
    fractions = (
        COARSE_FRACTIONS
        if points == len(COARSE_FRACTIONS)
        else [(i + 1) / (points + 1) for i in range(points)]
    )
    return sorted({min(total, max(1, round(f * total))) for f in fractions}) if total > 0 else []


def plan_passes(n_orders: int, budget: int = DEFAULT_PASSES) -> tuple[int, int]:
    """(coarse points for each order other than the mask's, passes left for the mask order).

    The mask order gets the three coarse points and at least two refinement passes; the
    other orders share what remains, up to three coarse points each (at least one).
    """
    others = max(0, n_orders - 1)
    if others == 0:
        return 0, budget
    each = min(len(COARSE_FRACTIONS), max(1, (budget - len(COARSE_FRACTIONS) - 2) // others))
    return each, max(len(COARSE_FRACTIONS) + 1, budget - each * others)


def measure_adaptively(
    orders: dict[str, list[Head]],
    mask_order: str,
    start: float,
    evaluate: Callable[[list[Head]], float],
    *,
    max_drop: float,
    budget: int = DEFAULT_PASSES,
    remove: int | None = None,
    first: int = 0,
) -> tuple[dict[str, dict[int, float]], int]:
    """Accuracy at a few removal counts per order: coarse far from the tolerance, fine near it.

    Parameters
    ----------
    orders : dict name -> list of (layer, head)
        Removal orders (permutations of all heads).
    mask_order : str
        The order the exported set of heads is taken from; it gets the refinement.
    start : float
        Accuracy with the first ``first`` heads of every order removed (none by default).
    evaluate : callable(removed heads) -> accuracy
        One pass over the evaluation set with those heads switched off.
    max_drop : float
        The tolerance: accuracy may fall at most this much below ``start``.
    budget : int
        Passes (calls of ``evaluate``) to spend at most, when ``remove`` is None.
    remove : int, optional
        A fixed number of heads to export: that step of the mask order is measured too.
    first : int
        Heads already off before the simulation (the same first heads of every order,
        a mask); the curves start there and the coarse steps split what remains.

    Returns
    -------
    measured : dict name -> {heads removed: accuracy}
        Including ``first`` -> ``start``. Every value is exactly what ``evaluate`` returned for
        that prefix of the order, so a measured point equals a step-by-step evaluation.
    passes : int
        Calls of ``evaluate`` made (a set of heads already measured is never measured again).

    Notes
    -----
    Every order is measured at the same coarse fractions (a quarter, half and three
    quarters of the heads; fewer points for the other orders when many are asked for).
    Along the mask order, the last coarse step within the tolerance and the first one
    below it bracket the crossing, which is then halved while passes remain (bisection),
    so the exported set is the largest measured prefix that kept accuracy, measured to
    within a few heads. When no coarse step drops below the tolerance, the bracket is the
    last coarse step and all heads. Our own procedure (no published source).
    """
    total = len(orders[mask_order])
    floor = start - max_drop - 1e-12
    cache: dict[frozenset[Head], float] = {frozenset(orders[mask_order][:first]): start}
    measured = {name: {first: start} for name in orders}
    passes = 0

    def get(name: str, k: int) -> float:
        nonlocal passes
        key = frozenset(orders[name][:k])
        if key not in cache:
            cache[key] = float(evaluate(list(orders[name][:k])))
            passes += 1
        measured[name][k] = cache[key]
        return cache[key]

    each, mask_budget = plan_passes(len(orders), budget)
    for k in coarse_steps(total - first):
        get(mask_order, first + k)
    for name in orders:
        if name != mask_order:
            for k in coarse_steps(total - first, each):
                get(name, first + k)
    if remove is not None:
        get(mask_order, remove)
    points = measured[mask_order]
    failing = [k for k in sorted(points) if points[k] < floor]
    hi = failing[0] if failing else total + 1  # the first measured step below the tolerance (none: total + 1)
    lo = max(k for k in points if k < hi)  # the last measured step before it; nothing is measured in between
    spent = len(points) - 1
    while hi - lo > 1 and spent < mask_budget:
        mid = (lo + hi) // 2
        spent += 1
        if get(mask_order, mid) < floor:
            hi = mid
        else:
            lo = mid
    return {name: dict(sorted(m.items())) for name, m in measured.items()}, passes


def gates_for(removed: Sequence[Head], num_layers: int, num_heads: int) -> np.ndarray:
    """Gate values [layers, heads]: 0 for removed heads, 1 elsewhere."""
    gates = np.ones((num_layers, num_heads), dtype=np.float32)
    for layer, head in removed:
        gates[layer, head] = 0.0
    return gates


@dataclass
class PruningCurve:
    """Accuracy of the model as heads are switched off in one order."""

    order_name: str
    order: list[Head]
    """Every head, in removal order."""
    steps: list[int]
    """Number of heads removed at each measured point (starts at 0, or at the size of the run's mask)."""
    accuracy: list[float]
    utterances: int
    """Utterances evaluated at each step (the whole set unless capped)."""

    @property
    def fractions(self) -> list[float]:
        total = len(self.order)
        return [s / total for s in self.steps]


def largest_safe_step(curve: PruningCurve, max_drop: float) -> int:
    """The most heads removable while accuracy never fell more than ``max_drop`` below the start.

    Walks the curve from 0 removed heads and stops before the first measured
    step whose accuracy is below ``accuracy[0] - max_drop``; returns the number
    of heads removed at the last step before that (0 if none qualifies).
    ``max_drop`` is a fraction (0.01 = one accuracy point).
    """
    if max_drop < 0:
        raise HeadcountError("the accuracy tolerance must not be negative")
    floor = curve.accuracy[0] - max_drop - 1e-12
    best = 0
    for removed, acc in zip(curve.steps, curve.accuracy):
        if acc < floor:
            break
        best = removed
    return best


@dataclass
class PruningResult:
    """All simulated curves and the chosen set of heads to remove."""

    curves: list[PruningCurve]
    mask_order: str
    """The order the mask was taken from."""
    removed: list[Head]
    """The heads chosen for removal (a prefix of that order)."""
    accuracy_before: float
    accuracy_after: float
    max_drop: float | None
    """The tolerance used (None when the count was fixed by the caller)."""
    every: int | None
    """Accuracy measured after every this many heads; None: steps chosen adaptively."""
    subset: int | None
    """Cap on the utterances evaluated per step (None = the whole set)."""
    caution: str = CAUTION
    passes: int = 0
    """Passes over the evaluation set the simulation spent (a pass = one accuracy measurement)."""

    @property
    def mask(self) -> dict[str, list[int]]:
        return mask_json(self.removed)

    def curve(self, name: str) -> PruningCurve:
        for c in self.curves:
            if c.order_name == name:
                return c
        raise KeyError(name)
