"""Screenshots of the fleet steps for the README ("Your own fleet"), offscreen.

    QT_QPA_PLATFORM=offscreen python installer/fleet_screenshots.py [OUT_DIR]

Builds a new workbook from ``resources/examples/`` the way a new user would (new
workbook, asset-list import, studies, a candidate edit) and grabs each dialog and
the window. Settings and files go to a temporary folder.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from installer.screenshots import _save, _settle, _setup  # noqa: E402


def render(out_dir: Path, sizes: tuple[tuple[int, int], ...] = ((1366, 768), (1920, 1080))
           ) -> list[Path]:
    state = _setup()
    from core.studyfile import load_study_file
    from core.workbook import Workbook
    from core.workbook.fleetedit import catalogue_challengers, result_snapshot
    from desktop_app.app import build_window, create_app
    from desktop_app.fleet_actions import (
        AssetDialog,
        AssetListDialog,
        CatalogueDialog,
        NewWorkbookDialog,
    )

    app = create_app(["tenure-screenshots"])
    app.setStyle("Fusion")
    out_dir.mkdir(parents=True, exist_ok=True)
    shots: list[Path] = []
    book = state / "Harrowgate own fleet.tenure"

    dialog = NewWorkbookDialog(None, "GBP", str(state))
    dialog.organisation.setText("Harrowgate Fabrication Ltd.")
    dialog.first_year.setValue(2026)
    dialog.path.setText("~/Documents/Harrowgate own fleet.tenure")  # as a user would see it
    dialog.resize(560, dialog.sizeHint().height())
    dialog.show()
    _settle(app)
    shots.append(_save(dialog, out_dir / "fleet_new_workbook.png"))
    dialog.path.setText(str(book))
    dialog.create()

    window = build_window(str(book))
    window.resize(*sizes[0])
    window.show()
    _settle(app, window)
    imp = AssetListDialog(window.fleet, window)
    os.chdir(ROOT)  # the file box shows the path relative to the repository
    imp.load_file(Path("resources") / "examples" / "equipment_list.csv")
    imp.preview()
    imp.preview_list.scrollToBottom()
    imp.show()
    _settle(app)
    shots.append(_save(imp, out_dir / "fleet_asset_list.png"))
    imp.do_import()
    _settle(app, window)

    studies = {s.title.rpartition(" — ")[2].split(" ", 1)[0]: s
               for s in load_study_file(ROOT / "resources" / "examples" /
                                        "equipment_studies.json")}
    window.close()
    with Workbook.open(book, write=True) as wb, wb.transaction():
        for asset in wb.assets():
            study = studies[asset.tag]
            catalogue_challengers(wb, study, asset)
            wb.save_study(asset.tag, wb.study_year, study, result_snapshot(study))
    window = build_window(str(book))
    window.show()
    for width, height in sizes:
        window.resize(width, height)
        window.select_asset("PB-301")
        _settle(app, window)
        shots.append(_save(window, out_dir / f"fleet_window_{width}.png"))

    window.select_asset("PB-301")
    menu = window.fleet.menus[0].parentWidget()  # the Asset menu, its Sites submenu open
    menu.popup(window.mapToGlobal(window.rect().topLeft()))
    _settle(app)
    sites = window.fleet.menus[0]
    sites.popup(menu.mapToGlobal(menu.actionGeometry(sites.menuAction()).topRight()))
    _settle(app)
    from PySide6.QtGui import QPainter, QPixmap

    canvas = QPixmap(menu.width() + sites.width(), max(menu.height(), sites.height()))
    canvas.fill(window.palette().window().color())
    painter = QPainter(canvas)
    painter.drawPixmap(0, 0, menu.grab())
    painter.drawPixmap(menu.width(), menu.actionGeometry(sites.menuAction()).top(), sites.grab())
    painter.end()
    canvas.save(str(out_dir / "fleet_asset_menu.png"), "PNG")
    shots.append(out_dir / "fleet_asset_menu.png")
    sites.hide()
    menu.hide()
    with Workbook.open(book) as wb:
        edit = AssetDialog(wb, wb.asset("PB-301"), parent=window)
    edit.description.setText("Hydraulic press brake 100 t (CNC back gauge)")
    edit.in_service.setText("2019-02-31")
    edit.check()
    edit.resize(520, edit.sizeHint().height())
    edit.show()
    _settle(app)
    shots.append(_save(edit, out_dir / "fleet_asset_edit.png"))
    edit.close()

    cat = CatalogueDialog(window.fleet, window)
    names = [c.name for c in cat.candidates]
    cat.listing.setCurrentRow(names.index("Electric servo press brake 100 t"))
    cat.first_cost.setText("168000")
    cat.preview()
    cat.show()
    _settle(app)
    shots.append(_save(cat, out_dir / "fleet_catalogue.png"))
    cat.close()
    window.discard_changes()
    window.close()
    return shots


if __name__ == "__main__":
    out = Path(sys.argv[1]) if len(sys.argv) > 1 else ROOT / "resources" / "screenshots"
    for shot in render(out):
        print(shot)
