"""The settings of a corpus run, importable without torch (the CLI builds its defaults from them)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from inspector import formatting as fmt
from inspector.corpus.pruning import DEFAULT_PASSES, PRUNING_ORDERS
from inspector.corpus.redundancy import DEFAULT_GROUP_THRESHOLD, DEFAULT_JS_ROWS
from inspector.errors import HeadcountError

if TYPE_CHECKING:
    from inspector.checkpoint.loader import LoadedModel


@dataclass
class CorpusSettings:
    """Every knob of a corpus run (defaults are what the CLI uses)."""

    batch_size: int = 32
    js_rows: int | str | None = DEFAULT_JS_ROWS
    """Real query rows compared for redundancy: ``auto`` (every row when affordable, else a
    sample sized from a pilot), None (every row) or about this many rows."""
    js_budget: float | None = None
    """Comparisons (rows x head pairs x keys) a scan may spend before ``auto`` samples rows
    (None: :func:`inspector.corpus.redundancy.comparison_budget` for the model and set)."""
    group_threshold: float = DEFAULT_GROUP_THRESHOLD
    importance: bool = True
    orders: tuple[str, ...] = ("importance", "random")
    """Pruning orders to simulate (empty = no pruning simulation)."""
    prune_every: int | None = None
    """Measure accuracy after every this many removed heads; None: at steps chosen adaptively."""
    prune_passes: int = DEFAULT_PASSES
    """Most passes over the set an adaptive pruning simulation spends."""
    prune_subset: int | None = None
    """Evaluate pruning steps on at most this many utterances (seeded draw); None = all."""
    max_drop: float = 0.01
    """Largest accuracy drop (fraction) allowed for the exported set of heads."""
    remove: int | None = None
    """Export exactly this many heads instead (overrides ``max_drop``)."""
    mask_order: str | None = None
    """Order the exported set is taken from (default: the first of ``orders``)."""
    seed: int = 0
    mask: tuple[tuple[int, int], ...] = ()
    """Heads switched off for the whole run (layer, head); the pruning curves start from them."""

    def check(self, lm: LoadedModel) -> None:
        """Raise HeadcountError for settings that cannot work with ``lm``."""
        if self.batch_size < 1:
            raise HeadcountError("the batch size must be at least 1")
        if self.js_rows is not None and self.js_rows != "auto":
            if isinstance(self.js_rows, bool) or not isinstance(self.js_rows, int) or self.js_rows < 1:
                raise HeadcountError("the number of rows compared must be 'auto', 'all' or at least 1")
        if self.js_budget is not None and not self.js_budget >= 0:
            raise HeadcountError("the comparison budget must not be negative")
        if not 0 <= self.group_threshold <= 1:
            raise HeadcountError("the near-duplicate threshold is in bits and must lie in [0, 1]")
        for name in self.orders:
            if name not in PRUNING_ORDERS:
                raise HeadcountError(f"unknown pruning order '{name}' (use: {', '.join(PRUNING_ORDERS)})")
        if "importance" in self.orders and not self.importance:
            raise HeadcountError("the 'importance' pruning order needs the importance pass")
        if self.prune_every is not None and self.prune_every < 1:
            raise HeadcountError("pruning must evaluate every 1 or more heads")
        if self.prune_passes < 5:
            raise HeadcountError("an adaptive pruning simulation needs at least 5 passes")
        if self.prune_subset is not None and self.prune_subset < 1:
            raise HeadcountError("the pruning subset must hold at least 1 utterance")
        if not 0 <= self.max_drop <= 1:
            raise HeadcountError(
                f"the accuracy tolerance is a fraction in [0, 1] (0.01 = {fmt.points(0.01)})"
            )
        total = lm.num_layers * lm.num_heads
        if self.remove is not None and not 0 <= self.remove <= total:
            raise HeadcountError(f"can remove 0 to {total} heads, not {self.remove}")
        if self.mask_order is not None and self.mask_order not in self.orders:
            raise HeadcountError(f"the mask order '{self.mask_order}' is not among the simulated orders")
        if self.mask:
            from inspector.checkpoint.masks import HeadMask, check_mask

            check_mask(HeadMask.of(self.mask), lm.num_layers, lm.num_heads)
            off = len(set(self.mask))
            if self.remove is not None and self.remove < off:
                raise HeadcountError(
                    f"the mask already switches {off} heads off; --remove counts them too, so it must be "
                    f"at least {off}"
                )

    @property
    def chosen_mask_order(self) -> str | None:
        return self.mask_order or (self.orders[0] if self.orders else None)
