"""The Tenure window driven through its real widgets (pytest-qt, offscreen).

Dialogs never block: QMessageBox and QFileDialog are replaced per test.
Expected numbers are the engine's own (core.study.run_study); these tests check
that the window shows them and keeps the user's data safe.
"""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import json  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
from dataclasses import replace  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402

pytest.importorskip("pytestqt")
from PySide6.QtWidgets import QFileDialog, QMessageBox  # noqa: E402

from core.estimates import Alternative, MarketValues, OperatingCosts, Study  # noqa: E402
from core.study import run_study  # noqa: E402
from core.studyfile import dump_study_document, load_study_file  # noqa: E402
from desktop_app import recovery  # noqa: E402
from desktop_app.document import recommendation_state, this_year  # noqa: E402
from desktop_app.main_window import MainWindow  # noqa: E402
from desktop_app.prefs import Preferences  # noqa: E402
from desktop_app.sources import demo_path  # noqa: E402
from desktop_app.worker import FleetJob  # noqa: E402
from tests.gui_support import FALLBACK_DEMO, answer_questions, open_window  # noqa: E402

pytestmark = pytest.mark.usefixtures("isolated")


def chart_data(window: MainWindow):
    panel = window.chart_panel
    if hasattr(panel, "series"):
        return {k: (np.asarray(x).tolist(), np.asarray(y).tolist())
                for k, (x, y) in panel.series().items()}
    return panel.result.fingerprint if panel.result is not None else None


def alt_editor(window: MainWindow, position: int = 0):
    return window.editor.editors()[position]


def type_into(edit, text: str) -> None:
    edit.setFocus()
    edit.setText(text)
    edit.editingFinished.emit()


def press_brake_study(period: int | None = None) -> Study:
    """Kestrel Road press brake: no study period says replace now (hand-checked in the CLI)."""
    d = Alternative("PB-2", "defender", 18000.0, 5, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=21000.0, gradient=3500.0))
    c = Alternative("Servo brake", "challenger", 96000.0, 12, MarketValues(decline_rate=0.15),
                    OperatingCosts(first=8200.0, growth=0.04))
    return Study("Kestrel Road — Press brake PB-2", 0.09, d, (c,), study_period=period)


# --------------------------------------------------------------------------- opening
def test_opens_demo_with_register_and_results(qtbot):
    window = open_window(qtbot, demo_path())
    assert window.doc.entries, "the demo has assets"
    assert window.current_result is not None
    keys = window.register.visible_keys()
    assert set(keys) == set(window.doc.keys())
    studied = [k for k in keys if window.doc.entry(k).study is not None]
    states = {window.doc.state(k).recommendation for k in studied}
    assert states and "…" not in states  # the fleet worker filled every state
    assert "[*]" in window.windowTitle() and not window.isWindowModified()


def test_register_filter_sort_and_states(qtbot):
    window = open_window(qtbot)
    window.register.filter_edit.setText("Millbrook")
    keys = window.register.visible_keys()
    assert keys and all(window.doc.entry(k).site == "Millbrook" for k in keys)
    window.register.filter_edit.setText("replace now")
    assert all(window.doc.state(k).recommendation == "replace now"
               for k in window.register.visible_keys())
    window.register.filter_edit.clear()
    key = window.current_key
    window.set_year(this_year() - 2)
    assert window.doc.state(key).out_of_date
    assert "out of date" in window.register._items[key][2].text()
    window.undo_stack.undo()
    assert not window.doc.state(key).out_of_date


def test_recommendation_states_read_the_result():
    keep = press_brake_study(period=1)
    assert recommendation_state(run_study(keep), keep) == "keep"
    now = press_brake_study()
    assert recommendation_state(run_study(now), now) == "replace now"
    assert recommendation_state(None, None) == "not yet studied"


# --------------------------------------------------------------------------- editing
def test_edit_recomputes_results_and_chart_then_undo_restores(qtbot):
    window = open_window(qtbot)
    before_study = window.current_entry().study
    before_chart = chart_data(window)
    before_rv = window.current_result.recommendation.replacement_value
    price = alt_editor(window).price_edit
    type_into(price, "30,000")
    study = window.current_entry().study
    assert study.defender.price == 30000.0
    assert window.current_result.study == study  # recomputed through core
    assert window.current_result.fingerprint != run_study(before_study).fingerprint
    assert chart_data(window) != before_chart
    assert window.isWindowModified()
    window.undo_stack.undo()
    assert window.current_entry().study == before_study
    assert chart_data(window) == before_chart
    assert window.current_result.recommendation.replacement_value == before_rv
    assert price.text() == "18,000"
    assert not window.isWindowModified()
    window.undo_stack.redo()
    assert window.current_entry().study.defender.price == 30000.0


def test_invalid_entry_is_refused_with_its_message_and_old_value_kept(qtbot):
    window = open_window(qtbot)
    before = window.current_entry().study
    life = alt_editor(window).life_edit
    type_into(life, "2.5")
    assert window.last_message == "Max life: must be a whole number of years ≥ 1"
    assert window.message_label.text() == window.last_message
    assert life.text() == str(before.defender.max_life)
    assert life.toolTip() == window.last_message
    assert window.current_entry().study == before
    assert window.undo_stack.count() == 0
    type_into(alt_editor(window).price_edit, "lots")
    assert window.last_message == "Market value today: must be a number"
    type_into(window.editor.settings.marr_edit, "-150")
    assert window.last_message.startswith("MARR: must be >")
    assert window.current_entry().study == before


def test_core_refusal_is_named_and_nothing_changes(qtbot):
    window = open_window(qtbot)
    before = window.current_entry().study
    name = alt_editor(window, 1).name_edit
    type_into(name, before.defender.name)
    assert window.last_message.startswith("Name: ")
    assert "already used" in window.last_message
    assert window.current_entry().study == before


def test_table_cell_edits_merge_into_one_undo_step(qtbot):
    window = open_window(qtbot)
    ed = alt_editor(window)
    model = ed.model
    before = window.current_entry().study
    assert model.headerData(1, __import__("PySide6.QtCore").QtCore.Qt.Orientation.Horizontal) \
        == "Market value (£)"
    assert model.setData(model.index(0, 1), "15,000")
    assert model.setData(model.index(0, 1), "15,500")
    assert window.undo_stack.count() == 1
    study = window.current_entry().study
    assert study.defender.market_values.values[0] == 15500.0
    assert ed.mv_mode.currentIndex() == 1  # switched to year-by-year values
    assert not model.setData(model.index(1, 2), "x")
    assert window.last_message == "Operating cost, year 2: must be a number"
    assert model.setData(model.index(3, 3), "4,000")
    assert model.setData(model.index(3, 4), "gearbox")
    extras = {e.year: e for e in window.current_entry().study.defender.extra_costs}
    assert extras[4].amount == 4000.0 and extras[4].label == "gearbox"
    while window.undo_stack.canUndo():
        window.undo_stack.undo()
    assert window.current_entry().study == before


def test_generators_fill_the_table(qtbot):
    window = open_window(qtbot)
    ed = alt_editor(window)
    type_into(ed.decline_edit, "50")
    s = window.current_entry().study.defender
    assert ed.model.data(ed.model.index(0, 1)) == f"{s.price * 0.5:,.0f}"
    ed.oc_mode.setCurrentIndex(1)  # geometric growth
    type_into(ed.growth_edit, "10")
    first = window.current_entry().study.defender.operating_costs.first
    assert ed.model.data(ed.model.index(1, 2)) == f"{first * 1.1:,.0f}"


def test_add_rename_remove_challenger(qtbot):
    window = open_window(qtbot)
    n = len(window.current_entry().study.challengers)
    window.editor.add_challenger()
    study = window.current_entry().study
    assert len(study.challengers) == n + 1
    new_tab = window.editor.tabs.currentIndex()
    type_into(alt_editor(window, new_tab).name_edit, "Leased brake")
    assert window.current_entry().study.challengers[-1].name == "Leased brake"
    assert window.editor.tabs.tabText(new_tab) == "Leased brake"
    window.editor.remove_challenger(new_tab)
    assert len(window.current_entry().study.challengers) == n
    window.undo_stack.undo()
    assert window.current_entry().study.challengers[-1].name == "Leased brake"


def test_study_period_selector_changes_the_recommendation(qtbot, tmp_path):
    path = tmp_path / "brake.json"
    path.write_text(dump_study_document([press_brake_study()]), encoding="utf-8")
    window = open_window(qtbot, path)
    assert window.current_result.recommendation.action == "replace"
    settings = window.editor.settings
    settings.period_mode.setCurrentIndex(1)
    settings.period_years.setValue(1)
    assert window.current_entry().study.study_period == 1
    rec = window.current_result.recommendation
    assert rec.action == "keep" and rec.study_period == 1
    assert window.doc.state(window.current_key).recommendation == "keep"
    settings.period_mode.setCurrentIndex(0)
    assert window.current_result.recommendation.action == "replace"


def test_tax_and_inflation_settings_go_through_core(qtbot):
    window = open_window(qtbot)
    settings = window.editor.settings
    settings.tax_mode.setCurrentIndex(1)
    study = window.current_entry().study
    assert study.tax is not None and all(a.depreciation for a in study.alternatives)
    assert window.current_result.recommendation.basis == "after-tax"
    type_into(settings.tax_rate, "30")
    assert window.current_entry().study.tax.rate == pytest.approx(0.30)
    settings.infl_mode.setCurrentIndex(2)
    assert window.current_entry().study.inflation.estimates == "then-current"
    type_into(settings.infl_rate, "abc")
    assert window.last_message == "Inflation rate: must be a percentage, e.g. 9 or 9.5"


# --------------------------------------------------------------------------- files
def test_save_and_reopen_round_trips(qtbot, tmp_path, monkeypatch):
    window = open_window(qtbot)
    type_into(alt_editor(window).price_edit, "21,500")
    target = tmp_path / "saved.json"
    monkeypatch.setattr(QFileDialog, "getSaveFileName",
                        staticmethod(lambda *a, **k: (str(target), "")))
    assert window.save_as()
    assert not window.isWindowModified()
    assert str(target) in window.windowTitle() or "saved.json" in window.windowTitle()
    saved = load_study_file(target)
    assert saved == window.doc.studies()
    other = open_window(qtbot, target)
    assert other.doc.studies() == window.doc.studies()
    assert Preferences().recent()[0] == str(target)


def test_closing_with_unsaved_changes_asks(qtbot, monkeypatch):
    window = open_window(qtbot)
    window.show()
    type_into(alt_editor(window).price_edit, "19,000")
    asked = answer_questions(monkeypatch, QMessageBox.StandardButton.Cancel)
    assert not window.close()
    assert window.isVisible() and asked
    answer_questions(monkeypatch, QMessageBox.StandardButton.Discard, asked)
    assert window.close()
    assert len(asked) == 2


def test_autosave_and_recovery_after_a_crash(qtbot, monkeypatch):
    window = open_window(qtbot)
    type_into(alt_editor(window).price_edit, "12,345")
    written = window.autosave()
    assert written is not None and written.exists()
    answer_questions(monkeypatch, QMessageBox.StandardButton.Yes)
    again = open_window(qtbot)
    assert again.isWindowModified()
    assert again.current_entry().study.defender.price == 12345.0


def test_unexpected_error_is_logged_saved_and_reported(qtbot, monkeypatch):
    window = open_window(qtbot)
    type_into(alt_editor(window).price_edit, "17,000")
    shown = []
    monkeypatch.setattr(QMessageBox, "exec", lambda self: shown.append(self.informativeText()))
    old_hook = sys.excepthook
    try:
        recovery.install_excepthook(window.handle_unexpected)
        try:
            raise RuntimeError("boom")
        except RuntimeError:
            sys.excepthook(*sys.exc_info())
    finally:
        sys.excepthook = old_hook
    assert shown and "RuntimeError: boom" in shown[0]
    assert "RuntimeError: boom" in recovery.log_file().read_text(encoding="utf-8")
    assert recovery.read_recovery(window.doc.path) is not None


def test_preferences_currency_shows_in_headers(qtbot):
    prefs = Preferences()
    prefs.currency = "$"
    window = open_window(qtbot)
    ed = alt_editor(window)
    from PySide6.QtCore import Qt

    assert ed.model.headerData(1, Qt.Orientation.Horizontal) == "Market value ($)"
    assert ed.price_label.text() == "Market value today ($)"


def test_fleet_job_reports_and_cancels(qtbot):
    studies = [("a", press_brake_study()), ("b", press_brake_study(period=1))]
    job = FleetJob(studies)
    got = []
    job.signals.result.connect(lambda k, r: got.append((k, r.recommendation.action)))
    with qtbot.waitSignal(job.signals.finished, timeout=5000) as blocker:
        job.run()
    assert blocker.args == [False]
    assert got == [("a", "replace"), ("b", "keep")]
    job2 = FleetJob(studies)
    job2.cancel()
    with qtbot.waitSignal(job2.signals.finished, timeout=5000) as blocker:
        job2.run()
    assert blocker.args == [True]


def test_new_document_and_not_yet_studied_asset(qtbot):
    window = open_window(qtbot)
    window.new_document()
    assert len(window.doc.entries) == 1 and window.doc.path is None
    entry = window.current_entry()
    window.undo_stack.push(__import__("desktop_app.commands").commands.SetStudyCommand(
        window.doc, entry.key, entry.study, None, "clear"))
    assert window.doc.state(entry.key).recommendation == "not yet studied"
    assert window.editor.placeholder.isVisibleTo(window.editor)
    window.editor.start_button.click()
    assert window.current_entry().study is not None
    assert window.current_entry().study_year == this_year()


def test_tenure_opens_the_window_offscreen_and_keeps_running(tmp_path):
    exe = Path(sys.executable).with_name("tenure")
    if not exe.exists():
        pytest.skip("tenure console script not installed")
    env = {**os.environ, "QT_QPA_PLATFORM": "offscreen", "TENURE_STATE_DIR": str(tmp_path),
           "XDG_CONFIG_HOME": str(tmp_path / "config"), "HOME": str(tmp_path)}
    proc = subprocess.run(["timeout", "4", str(exe)], env=env, capture_output=True, text=True,
                          timeout=30)
    assert proc.returncode == 124, proc.stderr
    assert "Traceback" not in proc.stderr


def test_missing_file_is_a_one_line_error(tmp_path):
    exe = Path(sys.executable).with_name("tenure")
    if not exe.exists():
        pytest.skip("tenure console script not installed")
    env = {**os.environ, "QT_QPA_PLATFORM": "offscreen", "TENURE_STATE_DIR": str(tmp_path)}
    proc = subprocess.run([str(exe), "--open", str(tmp_path / "nope.json")], env=env,
                          capture_output=True, text=True, timeout=30)
    assert proc.returncode == 2
    assert proc.stderr.strip().startswith("error: ") and "Traceback" not in proc.stderr


def test_demo_fallback_is_a_valid_study_file():
    studies = load_study_file(FALLBACK_DEMO)
    assert len(studies) >= 3
    assert json.loads(FALLBACK_DEMO.read_text(encoding="utf-8"))["format"] == "tenure-study"
    assert replace(studies[0]) == studies[0]


def test_export_tables_to_csv_and_xlsx(qtbot, tmp_path, monkeypatch):
    window = open_window(qtbot)
    for name in ("tables.csv", "tables.xlsx"):
        target = tmp_path / name
        monkeypatch.setattr(QFileDialog, "getSaveFileName",
                            staticmethod(lambda *a, t=target, **k: (str(t), "")))
        window.export_tables()
        assert target.exists() and target.stat().st_size > 0, window.last_message
    text = (tmp_path / "tables.csv").read_text(encoding="utf-8-sig")
    assert window.current_entry().study.defender.name in text


def test_workbook_edit_save_reopen(qtbot, tmp_path):
    pytest.importorskip("core.workbook")
    demo = pytest.importorskip("core.demo")
    book = tmp_path / "fleet.tenure"
    demo.build_demo(book)
    window = open_window(qtbot, book)
    assert window.doc.kind == "workbook" and len(window.doc.sites()) >= 2
    key = window.current_key
    type_into(alt_editor(window).price_edit, "4,321")
    assert window.save()
    again = open_window(qtbot, book)
    assert again.doc.entry(key).study.defender.price == 4321.0
    assert again.doc.entry(key).study == window.doc.entry(key).study


def test_untitled_work_is_offered_back_at_start(qtbot, monkeypatch):
    window = open_window(qtbot)
    window.new_document()
    type_into(alt_editor(window).price_edit, "23,456")
    assert window.autosave() is not None
    answer_questions(monkeypatch, QMessageBox.StandardButton.Yes)
    again = MainWindow(Preferences(), deferred=True)
    qtbot.addWidget(again, before_close_func=lambda w: w.discard_changes())
    again.finish_startup(str(FALLBACK_DEMO))
    assert again.isWindowModified() and again.doc.path is None
    assert again.current_entry().study.defender.price == 23456.0


def test_preferences_dialog_keeps_values_in_qsettings(qtbot):
    from desktop_app.prefs import PreferencesDialog

    prefs = Preferences()
    dialog = PreferencesDialog(prefs)
    qtbot.addWidget(dialog)
    dialog.marr.setValue(12.5)
    dialog.currency.setText("£")
    dialog.page.setCurrentText("Letter")
    dialog.apply()
    again = Preferences()
    assert again.default_marr == 0.125 and again.currency == "£" and again.page_size == "Letter"
    window = open_window(qtbot)
    window.new_document()
    assert window.current_entry().study.marr == 0.125
    assert alt_editor(window).price_label.text() == "Market value today (£)"


def test_register_sorts_by_recommendation(qtbot):
    from PySide6.QtCore import Qt

    window = open_window(qtbot)
    window.register.view.sortByColumn(1, Qt.SortOrder.AscendingOrder)
    states = [window.doc.state(k).sort_key for k in window.register.visible_keys()]
    by_site: dict[str, list] = {}
    for k, key in zip(window.register.visible_keys(), states, strict=True):
        by_site.setdefault(window.doc.entry(k).site, []).append(key)
    assert all(v == sorted(v) for v in by_site.values())


def test_memo_action_and_risk_tab_are_wired(qtbot, monkeypatch):
    memo = pytest.importorskip("desktop_app.memo_dialog")
    window = open_window(qtbot)
    opened = []
    monkeypatch.setattr(memo.IssueMemoDialog, "exec",
                        lambda self: opened.append(self.result.study.title) or 0)
    window.memo_action.trigger()
    assert opened == [window.current_entry().study.title]
    if window.risk_view is not None:
        tabs = [window.right_tabs.tabText(i) for i in range(window.right_tabs.count())]
        assert "Risk" in tabs


def test_study_with_risk_trials_recomputes_off_the_gui_thread(qtbot, tmp_path):
    pytest.importorskip("core.risk")
    from core.estimates import Distribution, Uncertainty

    study = replace(press_brake_study(), uncertainty=Uncertainty(
        trials=2000, seed=7, inputs=(("Servo brake.first_cost",
                                      Distribution("triangular", (80000.0, 96000.0, 120000.0))),)))
    path = tmp_path / "risky.json"
    path.write_text(dump_study_document([study]), encoding="utf-8")
    window = open_window(qtbot, path)
    assert window.current_result is not None and window.current_result.risk is not None
    type_into(alt_editor(window).price_edit, "25,000")
    qtbot.waitUntil(lambda: window.current_result is not None
                    and window.current_result.study.defender.price == 25000.0, timeout=20000)
    assert window.current_result.risk is not None


def test_add_and_remove_asset_with_undo(qtbot, monkeypatch):
    from PySide6.QtWidgets import QInputDialog

    window = open_window(qtbot)
    n = len(window.doc.entries)
    monkeypatch.setattr(QInputDialog, "getText",
                        staticmethod(lambda *a, **k: ("Millbrook — Spare compressor", True)))
    window.add_asset()
    assert len(window.doc.entries) == n + 1
    entry = window.current_entry()
    assert (entry.site, entry.name) == ("Millbrook", "Spare compressor")
    assert window.doc.state(entry.key).recommendation != "…"
    window.remove_asset()
    assert len(window.doc.entries) == n
    window.undo_stack.undo()
    assert any(e.name == "Spare compressor" for e in window.doc.entries)
    window.undo_stack.undo()
    assert len(window.doc.entries) == n


def test_a_last_file_gone_bad_falls_back_to_the_demo(qtbot, tmp_path, monkeypatch):
    from desktop_app.app import build_window

    bad = tmp_path / "broken.json"
    bad.write_text("{not json", encoding="utf-8")
    Preferences().add_recent(str(bad))
    warned = []
    monkeypatch.setattr(QMessageBox, "warning", staticmethod(lambda *a, **k: warned.append(a[2])))
    window = build_window(None)
    qtbot.addWidget(window, before_close_func=lambda w: w.discard_changes())
    window.wait_for_jobs()
    assert warned and "not valid JSON" in warned[0]
    assert window.doc.path == demo_path() and window.doc.entries


def test_fitted_estimates_apply_to_the_defender_with_undo(qtbot):
    window = open_window(qtbot)
    key = window.current_key
    before = window.current_entry().study
    assert window.apply_fitted_estimates(key, OperatingCosts(first=20000.0, gradient=4000.0),
                                         MarketValues(decline_rate=0.25))
    d = window.current_entry().study.defender
    assert d.operating_costs.gradient == 4000.0 and d.market_values.decline_rate == 0.25
    window.undo_stack.undo()
    assert window.current_entry().study == before


# ------------------------------------------------------------------ faults (issue 18)
def test_ctrl_c_in_the_terminal_closes_the_window_asking_about_unsaved_work(qtbot, monkeypatch):
    import os
    import signal

    from desktop_app.app import install_interrupt_handler

    window = open_window(qtbot)
    window.show()
    window._forced_dirty = True
    asked = answer_questions(monkeypatch, QMessageBox.StandardButton.Cancel)
    previous = signal.getsignal(signal.SIGINT)
    try:
        install_interrupt_handler(window)
        os.kill(os.getpid(), signal.SIGINT)
        qtbot.waitUntil(lambda: bool(asked), timeout=3000)
        assert "unsaved changes" in asked[0]
        assert window.isVisible()  # Cancel keeps it open, as the close button does
        answer_questions(monkeypatch, QMessageBox.StandardButton.Discard)
        os.kill(os.getpid(), signal.SIGINT)
        qtbot.waitUntil(lambda: not window.isVisible(), timeout=3000)
    finally:
        signal.signal(signal.SIGINT, previous)


def test_read_only_workbook_opens_read_only_and_offers_save_as(qtbot, monkeypatch, tmp_path):
    import core.workbook as wbmod
    import core.workbook.model as model
    from desktop_app import main_window as mw

    book = tmp_path / "plant.tenure"
    from core.demo import build_demo

    build_demo(book)
    monkeypatch.setattr(wbmod, "write_problem", lambda p: "the file is read-only")
    monkeypatch.setattr(model, "write_problem", lambda p: "the file is read-only")
    window = open_window(qtbot, book)
    assert "read-only: the file is read-only" in window.last_message
    assert "Save As" in window.last_message
    window._forced_dirty = True
    offered = answer_questions(monkeypatch, QMessageBox.StandardButton.No)
    before = book.read_bytes()
    window.doc.entries[0].saved = None  # something to save
    assert not window._save_to(str(book))
    assert offered and "Save them elsewhere with Save As?" in offered[0]
    assert "read-only" in offered[0]
    assert window.is_dirty() and book.read_bytes() == before
    assert mw.is_read_only_or_full(wbmod.WorkbookError(book, "disk full: x"))


def test_trust_a_colleagues_certificate_shows_its_fingerprint(qtbot, monkeypatch, tmp_path):
    from PySide6.QtWidgets import QDialog

    from core.memo import trust
    from core.memo.identity import certificate_pem, new_identity
    from desktop_app import trust_dialog

    monkeypatch.setattr(trust, "legacy_trust_dir", lambda: tmp_path / "none")
    p12 = tmp_path / "tom.p12"
    new_identity("Tom Ashworth", p12, b"kestrel-road-2026", organisation="Harrowgate Fabrication Ltd.")
    cert = tmp_path / "tom.pem"
    cert.write_bytes(certificate_pem(p12, b"kestrel-road-2026"))
    (entry,) = trust.inspect(cert)
    shown = []

    def answer(result):
        def exec_(dialog):
            shown.append(dialog.fingerprint.text())
            return result
        return exec_

    window = open_window(qtbot)
    monkeypatch.setattr(QFileDialog, "getOpenFileName", staticmethod(lambda *a, **k: (str(cert), "")))
    monkeypatch.setattr(trust_dialog.TrustCertificateDialog, "exec",
                        answer(QDialog.DialogCode.Rejected))
    window.trust_certificate()
    assert trust.trusted() == [] and window.last_message == "No certificate was trusted"
    monkeypatch.setattr(trust_dialog.TrustCertificateDialog, "exec",
                        answer(QDialog.DialogCode.Accepted))
    window.trust_certificate()
    assert [t.sha256 for t in trust.trusted()] == [entry.sha256]
    assert window.last_message.startswith("Trusted: Tom Ashworth (")
    # shown in four lines of four groups: the whole SHA-256, to compare by phone
    assert shown[-1].split() == trust.format_fingerprint(entry.sha256).split()
    assert len(shown[-1].splitlines()) == 4
