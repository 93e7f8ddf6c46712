"""Run and Cancel for a long job over a labelled set, with one progress bar per phase and a status line.

Shared by the corpus page (scan, head importance, pruning simulation) and the comparison tab (one
pass through both models). :class:`RunControls` owns the widgets (the pages lay them out) and the
wiring of a background run:

* :meth:`RunControls.start` submits the job on the page's :class:`ui.widgets.worker.JobRunner`
  channel with fresh :class:`RunHooks`: a stop check, and callbacks for the phase, its progress
  (:class:`inspector.corpus.run.PhaseProgress`: units done, planned and the elapsed time), the
  results of a phase that ended and whether the run holds the window's model. The job calls them on
  its own thread; they reach the GUI thread through queued signals, tagged with the run's number so
  a late message of an earlier run is dropped.
* The bars count the phase's own unit and say the time left at the phase's pace so far (the page's
  ``step_text``); the status line names the phase running.
* :meth:`RunControls.cancel` sets the stop event the job polls before every batch (the core raises
  :class:`inspector.corpus.run.CorpusCancelled`, which the job's wrapper turns into
  :data:`CANCELLED`), so the run stops within one batch; :meth:`RunControls.mark_cancelled` labels
  the phases that did not finish.
"""

from __future__ import annotations

import threading
from collections.abc import Callable
from dataclasses import dataclass

from PySide6.QtCore import QObject, Signal
from PySide6.QtWidgets import QHBoxLayout, QLabel, QProgressBar, QPushButton, QWidget

from inspector.corpus.run import CorpusCancelled, PhaseProgress
from ui.widgets.worker import JobRunner

CANCELLED = "cancelled"
"""What a job returns when Cancel stopped it."""
BAR_STEPS = 1000
"""Resolution of the phase bars (pruning steps advance by fractions)."""
STOPPING = "Stopping after the current batch\u2026"
FAILED = "Failed \u2014 see the message above"


class _Bridge(QObject):
    """Carries a run's messages from the worker thread to the GUI thread (queued signals)."""

    step = Signal(int, object)
    """run number, PhaseProgress."""
    phase = Signal(int, str)
    result = Signal(int, str, object)
    """run number, phase that ended, the results so far."""
    held = Signal(int, bool)
    """run number, whether the run holds the window's model."""


@dataclass(frozen=True)
class RunHooks:
    """What a running job may call, from its own thread."""

    should_stop: Callable[[], bool]
    on_phase: Callable[[str], None]
    on_step: Callable[[PhaseProgress], None]
    on_result: Callable[[str, object], None]
    on_held: Callable[[bool], None]


class RunControls(QObject):
    """The Run and Cancel buttons, the phase bars and the status line of one page, and its background run."""

    result = Signal(str, object)
    """A phase of the current run ended: its name and the results so far."""
    held = Signal(bool)
    """The current run holds (True) the window's model: analyses on other pages wait."""

    def __init__(
        self,
        runner: JobRunner,
        channel: str,
        parent: QWidget,
        *,
        run_text: str,
        titles: dict[str, str],
        descriptions: dict[str, str],
        step_text: Callable[[PhaseProgress], str],
        ready: Callable[[], bool],
    ) -> None:
        super().__init__(parent)
        self.runner, self.channel = runner, channel
        self.titles, self.descriptions, self.step_text, self.ready = titles, descriptions, step_text, ready
        self._stop = threading.Event()
        self._run = 0
        self.planned: list[str] = []
        self.finished: list[str] = []
        """Phases of the current run whose results arrived."""
        self.current: str | None = None
        """The phase running (None between phases and once the last one finished)."""
        self._bridge = _Bridge(self)
        self._bridge.step.connect(self._step)
        self._bridge.phase.connect(self._phase)
        self._bridge.result.connect(self._result)
        self._bridge.held.connect(lambda run, held: run == self._run and self.held.emit(held))

        self.run_button = QPushButton(run_text, parent)
        self.cancel_button = QPushButton("&Cancel", parent)
        self.cancel_button.clicked.connect(self.cancel)
        self.phase_bars: dict[str, QProgressBar] = {}
        for name, title in titles.items():
            bar = QProgressBar(parent)
            bar.setAccessibleName(f"{title} progress")
            bar.setTextVisible(True)
            bar.setMinimumWidth(60)
            bar.setFormat(f"{title}: not run")
            bar.setValue(0)
            self.phase_bars[name] = bar
        self.phase_label = QLabel("", parent)
        self.phase_label.setWordWrap(True)
        runner.busy_changed.connect(self._busy_changed)

    def add_to(self, row: QHBoxLayout) -> None:
        """Run, Cancel and the phase bars, in that order, into ``row`` (the bars share the spare width)."""
        row.addWidget(self.run_button)
        row.addWidget(self.cancel_button)
        for bar in self.phase_bars.values():
            row.addWidget(bar, 1)

    # -- the run -----------------------------------------------------------------------------------
    def is_running(self) -> bool:
        return self.runner.is_busy(self.channel)

    def stopping(self) -> bool:
        """Cancel (or :meth:`stop`) was asked for the current run."""
        return self._stop.is_set()

    def start(
        self,
        job: Callable[[RunHooks], object],
        done: Callable[[object], None],
        failed: Callable[[str], None],
        phases: list[str],
        note: str,
    ) -> int:
        """Run ``job(hooks)`` in the background with bars for ``phases``; ``note`` goes in the status line.

        ``done`` gets the job's result, or :data:`CANCELLED` when it was stopped; ``failed`` the error text.
        Returns the run's number.
        """
        self._stop = threading.Event()
        self._run += 1
        run, stop, bridge = self._run, self._stop, self._bridge
        hooks = RunHooks(
            should_stop=stop.is_set,
            on_phase=lambda name: bridge.phase.emit(run, name),
            on_step=lambda p: bridge.step.emit(run, p),
            on_result=lambda phase, found: bridge.result.emit(run, phase, found),
            on_held=lambda held: bridge.held.emit(run, held),
        )

        def work() -> object:
            try:
                return job(hooks)
            except CorpusCancelled:
                return CANCELLED

        self.planned, self.finished, self.current = list(phases), [], None
        for name, bar in self.phase_bars.items():
            bar.setVisible(name in self.planned)
            bar.setRange(0, BAR_STEPS)
            bar.setValue(0)
            bar.setFormat(f"{self.titles[name]}: waiting")
        self.phase_label.setText(note)
        self.runner.submit(self.channel, work, done, failed)
        self.refresh(True)
        return run

    def status_hook(self) -> Callable[[str], None]:
        """A callable any background job may use to put a line in the status line (while no stop is asked)."""
        run, bridge = self._run, self._bridge
        return lambda text: bridge.phase.emit(run, text)

    def cancel(self) -> None:
        """Ask the running job to stop before its next batch; the results shown stay."""
        if self.is_running():
            self._stop.set()
            self.cancel_button.setEnabled(False)
            self.phase_label.setText(STOPPING)

    def stop(self) -> None:
        """Stop a running job without a word (model change, window closing)."""
        self._stop.set()

    def pending(self) -> list[str]:
        """Planned phases of the current run whose results have not arrived."""
        return [p for p in self.planned if p not in self.finished]

    def mark_cancelled(self) -> None:
        """Label the bars of the phases that did not finish as cancelled."""
        for name in self.pending():
            self.phase_bars[name].setFormat(f"{self.titles[name]}: cancelled")

    def refresh(self, running: bool | None = None) -> None:
        """Enable Run when the page is ready and nothing runs, Cancel while a run that was not stopped runs."""
        running = self.is_running() if running is None else running
        self.run_button.setEnabled(self.ready() and not running)
        self.cancel_button.setEnabled(running and not self._stop.is_set())

    # -- messages from the job ---------------------------------------------------------------------
    def _step(self, run: int, p: PhaseProgress) -> None:
        if run != self._run:
            return
        bar = self.phase_bars[p.phase]
        bar.setValue(int(BAR_STEPS * min(p.done / p.total, 1.0)) if p.total else 0)
        bar.setFormat(self.step_text(p))
        bar.setToolTip(bar.format())
        self.current = None if p.finished else p.phase

    def _phase(self, run: int, name: str) -> None:
        if run == self._run and not self._stop.is_set():
            self.phase_label.setText(self.descriptions.get(name, name))

    def _result(self, run: int, phase: str, found: object) -> None:
        if run == self._run:
            self.finished.append(phase)
            self.result.emit(phase, found)

    def _busy_changed(self, channel: str, busy: bool) -> None:
        if channel == self.channel:
            self.refresh(busy)
