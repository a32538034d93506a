"""Slow work off the GUI thread: the fleet recompute across the register.

A :class:`FleetJob` (QRunnable) runs ``core.study.run_study`` for each study
it was given and reports through :class:`FleetSignals`; ``cancel()`` stops it
between studies.  Results are plain frozen objects, handed to the document on
the GUI thread.
"""

from __future__ import annotations

import threading

from PySide6.QtCore import QObject, QRunnable, Signal

from core.estimates import Study


class FleetSignals(QObject):
    progress = Signal(int, int)          # done, total
    result = Signal(str, object)         # key, StudyResult
    failed = Signal(str, str)            # key, message
    finished = Signal(bool)              # cancelled?


class FleetJob(QRunnable):
    def __init__(self, items: list[tuple[str, Study]]) -> None:
        super().__init__()
        self.items = list(items)
        self.signals = FleetSignals()
        self._cancel = threading.Event()
        self.setAutoDelete(False)

    def cancel(self) -> None:
        self._cancel.set()

    @property
    def cancelled(self) -> bool:
        return self._cancel.is_set()

    def run(self) -> None:
        from core.study import run_study

        total = len(self.items)
        for done, (key, study) in enumerate(self.items, start=1):
            if self._cancel.is_set():
                break
            try:
                self.signals.result.emit(key, run_study(study))
            except Exception as exc:  # a bad study must not stop the fleet
                self.signals.failed.emit(key, f"{type(exc).__name__}: {exc}")
            self.signals.progress.emit(done, total)
        self.signals.finished.emit(self._cancel.is_set())
