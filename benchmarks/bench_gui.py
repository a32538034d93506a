"""Window benchmarks (reported, not asserted): edit-to-chart latency and cold start.

    QT_QPA_PLATFORM=offscreen python benchmarks/bench_gui.py [--edits 40] [--starts 3]

* edit → chart updated: type a new defender market value into the editor and
  press Enter; time until the undo command ran, core recomputed the study, the
  results and chart panels took the new result and the event queue is drained
  (repaint included).  Median over the edits; target < 50 ms.
* cold start → window shown: a fresh Python process starts the window the way
  ``tenure`` does (window first; panels, engine and demo on the first turn of
  the event loop); wall time from process launch to the window shown, and to
  the demo loaded with results and chart.  Median over the starts; target < 2 s.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

START_SCRIPT = r"""
import os, sys
from PySide6.QtCore import QSettings
QSettings.setPath(QSettings.Format.IniFormat, QSettings.Scope.UserScope, os.environ["TENURE_STATE_DIR"])
from desktop_app.app import build_window, create_app
app = create_app(["tenure-bench"])
window = build_window(None, deferred=True)   # what `tenure` does
window.show()
app.processEvents()
sys.stdout.write("shown\n"); sys.stdout.flush()
window.finish_startup(window.startup_path)
window.wait_for_jobs()
app.processEvents()
sys.stdout.write("ready\n"); sys.stdout.flush()
window.discard_changes()
os._exit(0)
"""


def _isolate() -> Path:
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    state = Path(tempfile.mkdtemp(prefix="tenure-bench-"))
    os.environ["TENURE_STATE_DIR"] = str(state)
    return state


def bench_edits(n: int) -> list[float]:
    state = _isolate()
    sys.path.insert(0, str(ROOT))
    from PySide6.QtCore import QSettings

    QSettings.setPath(QSettings.Format.IniFormat, QSettings.Scope.UserScope, str(state))
    from desktop_app.app import build_window, create_app

    app = create_app(["tenure-bench"])
    window = build_window(None)
    window.show()
    app.processEvents()
    window.wait_for_jobs()
    # also the data path alone: edit -> new result handed to the chart (no repaint)
    edit = window.editor.editors()[0].price_edit
    base = window.current_entry().study.defender.price
    panel = window.chart_panel
    original = panel.set_result
    marks: list[float] = []

    def timed_set_result(result):
        original(result)
        marks.append(time.perf_counter())

    panel.set_result = timed_set_result
    times, data = [], []
    for k in range(n + 3):
        edit.setText(f"{base + 10 * (k + 1):,.0f}")
        marks.clear()
        t0 = time.perf_counter()
        edit.editingFinished.emit()
        app.processEvents()
        dt = time.perf_counter() - t0
        assert window.current_result.study.defender.price == base + 10 * (k + 1)
        if k >= 3:  # the first edits warm caches
            times.append(dt * 1000.0)
            data.append((marks[-1] - t0) * 1000.0)
    panel.set_result = original
    window.discard_changes()
    window.close()
    return times, data


def bench_start(n: int) -> list[float]:
    state = _isolate()
    env = {**os.environ, "TENURE_STATE_DIR": str(state), "PYTHONPATH": str(ROOT)}
    shown, ready = [], []
    for _ in range(n):
        t0 = time.perf_counter()
        proc = subprocess.Popen([sys.executable, "-c", START_SCRIPT], stdout=subprocess.PIPE,
                                stderr=subprocess.DEVNULL, env=env, text=True)
        if proc.stdout.readline().strip() == "shown":
            shown.append(time.perf_counter() - t0)
        if proc.stdout.readline().strip() == "ready":
            ready.append(time.perf_counter() - t0)
        proc.wait(timeout=120)
    return shown, ready


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--edits", type=int, default=40)
    parser.add_argument("--starts", type=int, default=3)
    args = parser.parse_args()
    edits, data = bench_edits(args.edits)
    starts, ready = bench_start(args.starts)
    print(f"edit -> chart updated: median {statistics.median(edits):.1f} ms, "
          f"p90 {sorted(edits)[int(0.9 * (len(edits) - 1))]:.1f} ms over {len(edits)} edits "
          f"(target < 50 ms)")
    print(f"edit -> chart data set (before repaint): median {statistics.median(data):.1f} ms")
    if starts:
        print(f"cold start -> window shown: median {statistics.median(starts):.2f} s over "
              f"{len(starts)} starts (target < 2 s)")
    else:
        print("cold start -> window shown: the window did not start")
    if ready:
        print(f"cold start -> demo loaded with results and chart: median "
              f"{statistics.median(ready):.2f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
