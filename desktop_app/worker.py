"""Slow work off the GUI thread: the fleet recompute across the register.

A :class:`FleetJob` (QRunnable) runs ``core.study.run_studies`` once for the
studies it was given (one batch) and reports each result through
:class:`FleetSignals`; a study the engine refuses is reported on its own, the rest
still come through.  ``cancel()`` stops the reporting.  Results are plain frozen
objects, handed to the document on the GUI thread.
"""

from __future__ import annotations

import threading

from PySide6.QtCore import QObject, QRunnable, Signal

from core.estimates import Study
from core.results import StudyResult


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
        from core.study import run_studies  # imported off the GUI thread (numpy)

        total = len(self.items)
        studies = [study for _, study in self.items]
        try:
            outcomes: list[StudyResult | str] = list(run_studies(studies))
        except Exception:  # a bad study must not stop the fleet: find it, run the rest
            outcomes = []
            for study in studies:
                try:
                    outcomes.append(run_studies([study])[0])
                except Exception as exc:  # noqa: BLE001 - reported, not raised
                    outcomes.append(f"{type(exc).__name__}: {exc}")
        for done, ((key, _), outcome) in enumerate(zip(self.items, outcomes, strict=True),
                                                   start=1):
            if self._cancel.is_set():
                break
            if isinstance(outcome, str):
                self.signals.failed.emit(key, outcome)
            else:
                self.signals.result.emit(key, outcome)
            self.signals.progress.emit(done, total)
        self.signals.finished.emit(self._cancel.is_set())
