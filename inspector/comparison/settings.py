"""The settings of a comparison run, importable without torch (the CLI builds its defaults from them)."""

from __future__ import annotations

from dataclasses import dataclass

from inspector.errors import HeadcountError

DEFAULT_MATCH_ROWS = 32
"""Real query rows per batch on which every head of B is compared with every head of A.

A batch of 32 sample-model utterances has about 500 real rows; 32 drawn ones (544 of the
evaluation set's 8,720) keep a comparison within 2.2 corpus scans (``bench/bench_compare.py``)
while the per-head means stay unbiased (each drawn row stands for ``real rows / drawn rows``
rows). Heads are checked for being unchanged on every row regardless, and a single sentence
is always compared on every row. ``--match-rows 0`` compares every row (about 3x a scan).
"""


@dataclass
class ComparisonSettings:
    """Every knob of a comparison run (defaults are what the CLI uses)."""

    batch_size: int = 32
    match_rows: int | None = DEFAULT_MATCH_ROWS
    """Real query rows per batch compared for the head matching (None = every row)."""
    seed: int = 0
    """Seed of the row draw."""

    def check(self) -> None:
        """Raise HeadcountError for settings that cannot work."""
        if self.batch_size < 1:
            raise HeadcountError("the batch size must be at least 1")
        if self.match_rows is not None and self.match_rows < 1:
            raise HeadcountError("the number of rows compared per batch must be at least 1")
