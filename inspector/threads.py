"""How many CPU threads Headcount uses, for torch and for numpy's BLAS alike.

Two thread pools that each believe they own every core (torch's OpenMP pool and the
BLAS pool behind numpy) make each other wait on a shared or busy machine: on two cores
under load a corpus run took ten times longer with the libraries' own defaults than with
one thread. So every command and the window choose one count, never more than the
cores this process may actually run on:

* the CPU affinity mask (``os.sched_getaffinity``: what ``taskset`` or a container's
  cpuset allows), and
* the cgroup CPU quota when one is set (``cpu.max`` in cgroup v2,
  ``cpu.cfs_quota_us / cpu.cfs_period_us`` in v1, rounded up),

whichever is smaller. ``--threads N`` or the environment variable ``HEADCOUNT_THREADS``
overrides the choice. The tokenizers' own parallelism stays off
(``TOKENIZERS_PARALLELISM=false``, set in :mod:`inspector`): utterances are tokenised in
large batches by one call, and a third pool would compete with the two above.

Importing this module imports neither torch nor numpy.
"""

from __future__ import annotations

import math
import os
import sys
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path

ENV_VAR = "HEADCOUNT_THREADS"
"""Environment variable that sets the thread count (``--threads`` wins over it)."""

_LIBRARY_ENV = ("OMP_NUM_THREADS", "MKL_NUM_THREADS", "OPENBLAS_NUM_THREADS", "NUMEXPR_NUM_THREADS")
"""Read by torch's OpenMP pool and by the BLAS libraries when they start."""

CGROUP_ROOT = Path("/sys/fs/cgroup")


@dataclass(frozen=True)
class ThreadChoice:
    """The thread count and where it came from."""

    count: int
    source: str
    """``--threads``, the environment variable's name, or ``available cores``."""
    cores: int
    """Cores this process may use (affinity and cgroup quota)."""

    def describe(self) -> str:
        where = "" if self.source == "available cores" else f" (from {self.source})"
        return f"{self.count} thread{'s' if self.count != 1 else ''}{where}; {self.cores} core(s) available"


def _affinity_cores() -> int:
    getter: Callable[[int], set[int]] | None = getattr(os, "sched_getaffinity", None)
    if getter is not None:
        try:
            return max(1, len(getter(0)))
        except OSError:
            pass
    return max(1, os.cpu_count() or 1)


def cgroup_quota_cores(root: Path = CGROUP_ROOT) -> int | None:
    """Cores allowed by the cgroup CPU quota (rounded up), or None when no quota is set or readable."""
    try:
        fields = (root / "cpu.max").read_text().split()
        if fields and fields[0] != "max":
            period = float(fields[1]) if len(fields) > 1 else 100_000.0
            return max(1, math.ceil(float(fields[0]) / period))
        if fields:
            return None
    except (OSError, ValueError, IndexError):
        pass
    try:
        quota = float((root / "cpu" / "cpu.cfs_quota_us").read_text().strip())
        period = float((root / "cpu" / "cpu.cfs_period_us").read_text().strip())
    except (OSError, ValueError):
        return None
    if quota <= 0 or period <= 0:
        return None
    return max(1, math.ceil(quota / period))


def available_cores(
    affinity: Callable[[], int] = _affinity_cores, quota: Callable[[], int | None] = cgroup_quota_cores
) -> int:
    """Cores this process may use: its CPU affinity, capped by the cgroup quota if there is one."""
    cores = affinity()
    limit = quota()
    return max(1, min(cores, limit) if limit is not None else cores)


def choose_threads(
    requested: int | None = None,
    environ: Mapping[str, str] | None = None,
    cores: Callable[[], int] = available_cores,
) -> ThreadChoice:
    """The thread count: ``requested`` (``--threads``), else ``HEADCOUNT_THREADS``, else the available cores.

    Raises ValueError for a count below 1 or an environment value that is not a whole number.
    """
    env = os.environ if environ is None else environ
    n_cores = cores()
    if requested is not None:
        count, source = int(requested), "--threads"
    elif env.get(ENV_VAR, "").strip():
        text = env[ENV_VAR].strip()
        try:
            count = int(text)
        except ValueError:
            raise ValueError(f"{ENV_VAR} must be a whole number of threads, not '{text}'") from None
        source = ENV_VAR
    else:
        count, source = n_cores, "available cores"
    if count < 1:
        raise ValueError(f"the thread count must be at least 1 (got {count} from {source})")
    return ThreadChoice(count, source, n_cores)


def apply_threads(choice: ThreadChoice) -> None:
    """Use ``choice.count`` threads in torch (intra-op) and in every BLAS/OpenMP pool numpy loaded.

    Sets the libraries' environment variables too, so a library loaded later (and any child
    process) starts with the same count. Loads neither torch nor numpy itself.
    """
    n = str(choice.count)
    for name in _LIBRARY_ENV:
        os.environ[name] = n
    if "torch" in sys.modules:
        set_torch_threads(choice.count)
    if "numpy" in sys.modules:
        from threadpoolctl import threadpool_limits

        threadpool_limits(limits=choice.count)


def set_torch_threads(count: int) -> None:
    """Set torch's intra-op threads (with OpenMP this acts on the calling thread's later work)."""
    import torch

    if torch.get_num_threads() != count:
        torch.set_num_threads(count)


_configured: ThreadChoice | None = None


def configure(requested: int | None = None) -> ThreadChoice:
    """Choose the thread count (see :func:`choose_threads`) and apply it; returns the choice."""
    global _configured
    choice = choose_threads(requested)
    apply_threads(choice)
    _configured = choice
    return choice


def current() -> ThreadChoice:
    """The count :func:`configure` applied, or the one it would choose."""
    return _configured if _configured is not None else choose_threads()


INTERACTIVE_THREADS = 1
"""Torch threads of the window's per-keystroke jobs (sentence analysis, explanation): one short
sentence gains little from more, and on a 2-core laptop a second spinning thread competes with
the GUI thread (7-8 ms instead of ~700 ms per analysis of the sample model on a loaded 2-core
machine, measured with bench/bench_ui.py)."""


def background_job_threads() -> int:
    """Torch threads of a long window job (a corpus run): the chosen count less one core for the GUI thread."""
    return max(1, current().count - 1)


def help_text() -> str:
    """One paragraph for ``--help``: the count this process would use and how to change it."""
    cores = available_cores()
    return (
        f"Threads: torch and numpy's BLAS use one count, by default the cores this process may use "
        f"(CPU affinity and cgroup quota: {cores} here); --threads N or {ENV_VAR}=N overrides it. "
        "The tokenizers' own parallelism is off."
    )
