"""Background jobs: model loading, analysis, attention flow and figure export.

Each *channel* ("model", "flow", "export") has its own one-thread
``QThreadPool``, so jobs of one kind run in order and a slow flow never holds
up the next keystroke's analysis. Every submitted job gets a sequence number;
a job whose number is no longer the channel's latest when it starts is
skipped, and its result is dropped if a newer job was submitted meanwhile, so
a view never shows the answer to an old request.
"""

from __future__ import annotations

import threading
from collections.abc import Callable

from PySide6.QtCore import QObject, QRunnable, QThreadPool, Signal

from inspector.errors import HeadcountError

MODEL_LOCK = threading.RLock()
"""Held by every job while it runs the open model. Capture hooks sit on the shared torch
modules, so two channels running the same model at once (a keystroke's analysis and an
explanation) would record each other's forward passes."""


class _Relay(QObject):
    """Carries a job's outcome back to the GUI thread (queued signal)."""

    finished = Signal(str, int, object, str)
    """channel, sequence number, result (or None), error text ('' on success)."""


class _Job(QRunnable):
    def __init__(
        self, runner: JobRunner, channel: str, seq: int, fn: Callable[[], object], latest_only: bool
    ) -> None:
        super().__init__()
        self.setAutoDelete(False)
        self._runner, self._channel, self._seq, self._fn = runner, channel, seq, fn
        self.latest_only = latest_only

    def run(self) -> None:
        # The callable is dropped before reporting: the binding keeps every started runnable
        # (auto-delete off) for the life of its pool, and a callable's closure can hold a whole
        # sentence analysis (150 MB at 512 tokens on a BERT-base-sized model).
        fn, self._fn = self._fn, None
        if self.latest_only and not self._runner.is_current(self._channel, self._seq):
            self._runner.relay.finished.emit(self._channel, self._seq, None, "")
            return
        try:
            result, error = fn(), ""
        except HeadcountError as exc:
            result, error = None, str(exc)
        except Exception as exc:  # a bug: shown in the message bar; the window must survive it
            first = (str(exc).strip().splitlines() or [""])[0]
            result, error = None, f"unexpected error, please report it ({type(exc).__name__}: {first})"
        del fn
        self._runner.relay.finished.emit(self._channel, self._seq, result, error)


class JobRunner(QObject):
    """Runs callables off the GUI thread and calls back on it, dropping stale results."""

    busy_changed = Signal(str, bool)
    """channel, whether a job of that channel is running or queued."""

    def __init__(self, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.relay = _Relay()
        self.relay.finished.connect(self._on_finished)
        self._pools: dict[str, QThreadPool] = {}
        self._latest: dict[str, int] = {}
        self._pending: dict[tuple[str, int], tuple[_Job, Callable, Callable]] = {}

    def submit(
        self,
        channel: str,
        fn: Callable[[], object],
        on_done: Callable[[object], None],
        on_error: Callable[[str], None],
        *,
        latest_only: bool = True,
    ) -> int:
        """Queue ``fn`` on ``channel``; ``on_done(result)`` / ``on_error(text)`` run on the GUI thread.

        With ``latest_only`` (analysis, flow) only the newest job of the channel
        counts: older ones are skipped or their results dropped. Without it
        (export) every job runs and reports.
        """
        seq = self._latest.get(channel, 0) + 1
        self._latest[channel] = seq
        job = _Job(self, channel, seq, fn, latest_only)
        self._pending[(channel, seq)] = (job, on_done, on_error)
        pool = self._pools.get(channel)
        if pool is None:
            pool = self._pools[channel] = QThreadPool(self)
            pool.setMaxThreadCount(1)
        pool.start(job)
        self.busy_changed.emit(channel, True)
        return seq

    def is_current(self, channel: str, seq: int) -> bool:
        return self._latest.get(channel) == seq

    def is_busy(self, channel: str | None = None) -> bool:
        return any(ch == channel or channel is None for ch, _ in self._pending)

    def cancel(self, channel: str) -> None:
        """Forget pending jobs of ``channel``: their results will be dropped."""
        self._latest[channel] = self._latest.get(channel, 0) + 1

    def wait(self, msecs: int = -1) -> None:
        """Block until every pool is idle (shutdown and tests)."""
        for pool in self._pools.values():
            pool.waitForDone(msecs)

    def _on_finished(self, channel: str, seq: int, result: object, error: str) -> None:
        job, on_done, on_error = self._pending.pop((channel, seq), (None, None, None))
        if not any(ch == channel for ch, _ in self._pending):
            self.busy_changed.emit(channel, False)
        if job is None or (job.latest_only and not self.is_current(channel, seq)):
            return
        if error:
            on_error(error)
        else:
            on_done(result)
