"""The window's fleet editing (pytest-qt, offscreen): new workbook, sites, assets, retirement,
the candidate catalogue with its which-assets-change preview, the asset-list import and
Save As a workbook. Each action is one transaction in the workbook; Undo restores the
exact previous state (the SQL dump, save times aside); a refused entry keeps what was typed.

Sources: "hand calculation" (expected registers), "common practice, no source".
"""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import dataclasses  # noqa: E402
import json  # noqa: E402
from pathlib import Path  # noqa: E402

import pytest  # noqa: E402

pytest.importorskip("pytestqt")
from PySide6.QtWidgets import QDialog, QFileDialog, QMessageBox  # noqa: E402

from core.workbook import Asset, Workbook  # noqa: E402
from core.workbook.fleetedit import add_studied_asset  # noqa: E402
from desktop_app.fleet_actions import (  # noqa: E402
    AssetDialog,
    AssetListDialog,
    CatalogueDialog,
    NewWorkbookDialog,
    RetireDialog,
)
from desktop_app.main_window import MainWindow  # noqa: E402
from tests.conftest import BASE_STUDY, parse_one  # noqa: E402
from tests.gui_support import new_window, open_window  # noqa: E402
from tests.workbook_support import integrity, sql_dump  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "resources" / "examples"


pytestmark = pytest.mark.usefixtures("isolated")


def dump(path: Path) -> list[str]:
    return sql_dump(path, mask_times=True)


def study(title: str):
    return parse_one({**BASE_STUDY, "title": title})


@pytest.fixture()
def book(tmp_path: Path) -> Path:
    p = tmp_path / "fleet.tenure"
    with Workbook.create(p, company="Harrowgate Fabrication Ltd.", currency="GBP",
                         first_year=2026) as wb:
        for tag, site in (("PB-1", "Ouseburn Yard"), ("PB-2", "Ouseburn Yard")):
            add_studied_asset(wb, Asset(tag, "press", site, "press brake"),
                              study(f"{site} — {tag} press"))
    return p


def accept(monkeypatch, cls, setup):
    """The next ``cls`` dialog gets ``setup(dialog)`` and is accepted through its own check."""
    def exec_(self):
        setup(self)
        return self.result()

    monkeypatch.setattr(cls, "exec", exec_)


def undo_restores(window: MainWindow, book: Path, before: list[str]) -> None:
    after = dump(book)
    assert after != before
    window.undo_stack.undo()
    assert dump(book) == before and integrity(book) == "ok"
    window.undo_stack.redo()
    assert dump(book) == after and integrity(book) == "ok"


# --------------------------------------------------------------------------- new workbook
def test_new_workbook_dialog_keeps_input_on_refusal(qtbot, tmp_path, monkeypatch) -> None:
    window = new_window(qtbot)
    target = tmp_path / "plant.tenure"
    target.write_text("not mine")

    def fill(d: NewWorkbookDialog) -> None:
        d.organisation.setText("Harrowgate Fabrication Ltd.")
        d.currency.setText("GBP")
        d.first_year.setValue(2026)
        d.path.setText(str(target))
        assert not d.create()  # exists: refused, typed values kept
        assert "already exists" in d.error.text()
        assert d.organisation.text() == "Harrowgate Fabrication Ltd."
        d.path.setText(str(tmp_path / "mine.tenure"))
        assert d.create()

    accept(monkeypatch, NewWorkbookDialog, fill)
    window.fleet.new_workbook()
    assert target.read_text() == "not mine"
    assert window.doc.kind == "workbook" and window.doc.path == str(tmp_path / "mine.tenure")
    with Workbook.open(tmp_path / "mine.tenure") as wb:
        assert (wb.company, wb.currency, wb.study_year) == ("Harrowgate Fabrication Ltd.",
                                                            "GBP", 2026)
    assert window.add_asset_action.isEnabled() and window.remove_asset_action.isEnabled()


# --------------------------------------------------------------------------- sites
def test_sites_add_rename_remove_with_undo(qtbot, book, monkeypatch) -> None:
    window = open_window(qtbot, book)
    before = dump(book)
    assert window.fleet.add_site("Kestrel Road")
    model = window.register.model
    rows = {model.item(r, 0).text(): model.item(r, 1).text() for r in range(model.rowCount())}
    assert rows == {"Ouseburn Yard": "", "Kestrel Road": "no assets yet"}  # shown though empty
    undo_restores(window, book, before)
    before = dump(book)
    assert window.fleet.rename_site("Ouseburn Yard", "Ouseburn Works")
    assert {e.site for e in window.doc.entries} == {"Ouseburn Works"}
    undo_restores(window, book, before)
    before = dump(book)
    assert window.fleet.remove_site("Kestrel Road")
    undo_restores(window, book, before)
    warnings = []
    monkeypatch.setattr(QMessageBox, "warning", staticmethod(
        lambda *a, **k: warnings.append(a[2])))
    before = dump(book)
    assert not window.fleet.remove_site("Ouseburn Works")  # the rename was redone
    assert "still holds 2 assets: PB-1, PB-2" in warnings[0] and dump(book) == before


# --------------------------------------------------------------------------- assets
def test_add_asset_blank_study_edit_move_retire_with_undo(qtbot, book, monkeypatch) -> None:
    window = open_window(qtbot, book)
    before = dump(book)

    def fill(d: AssetDialog) -> None:
        d.tag.setText("PB 3")
        d.description.setText("Press brake 60 t")
        d.site.setCurrentText("Kestrel Road")
        d.asset_class.setCurrentText("press brake")
        d.in_service.setText("2018-10-15")
        d.depreciation.setText("MACRS 7")
        d.check()
        assert d.result() != QDialog.DialogCode.Accepted
        assert d.error.text() == "Tag: 'PB 3' must not contain spaces"
        assert d.description.text() == "Press brake 60 t"  # nothing typed is lost
        d.tag.setText("PB-3")
        d.check()

    accept(monkeypatch, AssetDialog, fill)
    assert window.fleet.add_asset()
    entry = window.doc.entry("PB-3")
    assert entry.site == "Kestrel Road" and entry.study is not None
    # the blank study offers the class's catalogue candidate
    assert [c.name for c in entry.study.challengers] == ["New press"]
    assert entry.study.title == "Kestrel Road — PB-3 Press brake 60 t"
    with Workbook.open(book) as wb:
        assert wb.asset("PB-3").depreciation.macrs_class == 7 and wb.years("PB-3") == [2026]
    undo_restores(window, book, before)

    before = dump(book)
    window.select_asset("PB-3")
    accept(monkeypatch, AssetDialog, lambda d: (d.tag.setText("PB-30"),
                                                d.description.setText("Press brake 60 t CNC"),
                                                d.check()))
    assert window.fleet.edit_asset()
    assert window.doc.entry("PB-30").name == "PB-30 Press brake 60 t CNC"
    undo_restores(window, book, before)

    before = dump(book)
    window.select_asset("PB-30")
    assert window.fleet.move_asset("Millbrook")
    assert window.doc.entry("PB-30").site == "Millbrook"
    undo_restores(window, book, before)

    before = dump(book)
    window.select_asset("PB-1")

    def retire(d: RetireDialog) -> None:
        d.when.setText("2026-13-01")
        d.reason.setText("sold to a dealer")
        d.check()
        assert "Retired on" in d.error.text() and d.reason.text() == "sold to a dealer"
        d.when.setText("2026-06-30")
        d.check()

    accept(monkeypatch, RetireDialog, retire)
    assert window.fleet.retire_asset()
    entry = window.doc.entry("PB-1")
    assert entry.retired == "retired 2026-06-30: sold to a dealer"
    assert window.doc.state("PB-1").recommendation == "retired"
    window.select_asset("PB-1")
    assert not window.editor.isEnabled()
    old = entry.study
    assert not window.commit(dataclasses.replace(old, marr=0.2), "MARR")  # read only
    assert "read only" in window.last_message and entry.study == old
    undo_restores(window, book, before)


def test_remove_asset_refused_when_it_holds_studies(qtbot, book, monkeypatch) -> None:
    window = open_window(qtbot, book)
    warnings = []
    monkeypatch.setattr(QMessageBox, "warning", staticmethod(
        lambda *a, **k: warnings.append(a[2])))
    window.select_asset("PB-2")
    before = dump(book)
    window.remove_asset()
    assert "retire it instead" in warnings[0] and dump(book) == before
    assert window.undo_stack.count() == 0


# --------------------------------------------------------------------------- catalogue
def test_catalogue_preview_then_apply_with_undo(qtbot, book, monkeypatch) -> None:
    window = open_window(qtbot, book)
    monkeypatch.setattr(QDialog, "exec", lambda self: 0)
    dialog = CatalogueDialog(window.fleet, window)
    assert dialog.listing.count() == 1 and dialog.name.text() == "New press"
    dialog.first_cost.setText("65000")
    before = dump(book)
    changes = dialog.preview()
    assert [c.tag for c in changes] == ["PB-1", "PB-2"] and dump(book) == before
    assert dialog.changes.item(0).text() == "PB-1 2026: price 60,000 -> 65,000"
    dialog.max_life.setText("2.5")
    assert dialog.preview() is None and "Max life" in dialog.error.text()
    assert dialog.first_cost.text() == "65000"  # kept
    dialog.max_life.setText("8")
    assert dialog.apply()
    assert window.doc.entry("PB-1").study.challengers[0].price == 65000.0
    with Workbook.open(book) as wb:
        assert wb.study("PB-2").challengers[0].price == 65000.0
    undo_restores(window, book, before)
    window.undo_stack.undo()
    assert window.doc.entry("PB-1").study.challengers[0].price == 60000.0


# --------------------------------------------------------------------------- asset list
def test_asset_list_import_preview_rejected_rows_and_undo(qtbot, book, monkeypatch) -> None:
    window = open_window(qtbot, book)
    dialog = AssetListDialog(window.fleet, window)
    assert dialog.load_file(EXAMPLES / "equipment_list.csv")
    assert dialog.combos["depreciation"].currentText() == "Tax depreciation"
    before = dump(book)
    plan = dialog.preview()
    assert dump(book) == before and len(plan.new) == 30
    texts = [dialog.preview_list.item(i).text() for i in range(dialog.preview_list.count())]
    assert "row 19: in-service date '2019-06-31' is not a date" in texts
    assert "row 33: tag 'PU-302' is already on row 9" in texts
    dialog.set_column("site", None)
    assert dialog.preview() is None and "needs the site column" in dialog.error.text()
    dialog.set_column("site", "Site")
    assert dialog.do_import()
    assert len(window.doc.entries) == 32 and integrity(book) == "ok"
    undo_restores(window, book, before)


# --------------------------------------------------------------------------- Save As
def test_save_as_turns_a_study_file_into_a_workbook(qtbot, tmp_path, monkeypatch) -> None:
    src = tmp_path / "one.json"
    src.write_text(json.dumps({"format": "tenure-study", "version": 1, **BASE_STUDY,
                               "title": "Kestrel Road — PB-5 press line"}))
    window = open_window(qtbot, src)
    out = tmp_path / "one.tenure"
    monkeypatch.setattr(QFileDialog, "getSaveFileName",
                        staticmethod(lambda *a, **k: (str(out), "Workbooks (*.tenure)")))
    assert window.save_as()
    assert window.doc.kind == "workbook" and window.doc.path == str(out)
    with Workbook.open(out) as wb:
        (asset,) = wb.assets()
        assert (asset.tag, asset.site) == ("PB-5", "Kestrel Road")
        assert wb.study("PB-5").title == "Kestrel Road — PB-5 press line"
        assert wb.record("PB-5").result_json is not None and wb.integrity_check() == "ok"
    assert [e.key for e in window.doc.entries] == ["PB-5"]


def test_add_asset_from_a_study_file_then_remove_with_undo(qtbot, book, tmp_path,
                                                           monkeypatch) -> None:
    window = open_window(qtbot, book)
    src = tmp_path / "two.json"
    src.write_text(json.dumps({"format": "tenure-study", "version": 1, "studies": [
        {**BASE_STUDY, "title": "first"}, {**BASE_STUDY, "title": "Kestrel Road — second"}]}))
    before = dump(book)

    def from_file(d: AssetDialog) -> None:
        d.tag.setText("PB-7")
        d.site.setCurrentText("Kestrel Road")
        d.from_file.setChecked(True)
        d.study_file.setText(str(src))
        d._read_titles()
        d.study_title.setCurrentIndex(1)
        d.check()

    accept(monkeypatch, AssetDialog, from_file)
    assert window.fleet.add_asset()
    assert window.doc.entry("PB-7").study.title == "Kestrel Road — second"
    undo_restores(window, book, before)
    window.undo_stack.undo()
    assert dump(book) == before

    def empty(d: AssetDialog) -> None:
        d.tag.setText("PB-8")
        d.site.setCurrentText("Ouseburn Yard")
        d.no_study.setChecked(True)
        d.check()

    accept(monkeypatch, AssetDialog, empty)
    assert window.fleet.add_asset()
    assert window.doc.entry("PB-8").study is None
    before = dump(book)
    window.select_asset("PB-8")
    window.remove_asset()  # nothing recorded yet: removed
    with pytest.raises(KeyError):
        window.doc.entry("PB-8")
    undo_restores(window, book, before)
