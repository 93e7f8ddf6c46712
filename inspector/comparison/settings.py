"""The settings of a comparison run, importable without torch (the CLI builds its defaults from them)."""

from __future__ import annotations

from dataclasses import dataclass

from inspector.errors import HeadcountError

DEFAULT_MATCH_ROWS = 64
"""Real query rows per batch on which every head of B is compared with every head of A.

A batch of 32 sample-model utterances has about 500 real rows; 64 drawn ones keep the
matching within the run's time budget (``bench/bench_compare.py``) while the per-head means
stay unbiased (each drawn row stands for ``real rows / drawn rows`` rows).
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
