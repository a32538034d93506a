"""Render docs-ready screenshots of the main views from the demo, offscreen.

    QT_QPA_PLATFORM=offscreen python installer/screenshots.py [OUT_DIR]

Writes PNGs (default ``resources/screenshots/``) with QWidget.grab(); settings,
recovery files and logs go to a temporary folder, never the user's own.
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _setup() -> Path:
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    state = Path(tempfile.mkdtemp(prefix="tenure-shots-"))
    os.environ["TENURE_STATE_DIR"] = str(state)
    sys.path.insert(0, str(ROOT))
    from PySide6.QtCore import QSettings

    QSettings.setPath(QSettings.Format.IniFormat, QSettings.Scope.UserScope, str(state))
    return state


def _settle(app, window=None) -> None:
    for _ in range(5):
        app.processEvents()
    if window is not None:
        window.wait_for_jobs()
        for _ in range(5):
            app.processEvents()


def _save(widget, path: Path, scale_to: int | None = None, height: int | None = None) -> Path:
    from PySide6.QtCore import QRect, Qt

    pixmap = widget.grab(QRect(0, 0, widget.width(), height)) if height else widget.grab()
    if scale_to and pixmap.width() > scale_to:
        pixmap = pixmap.scaledToWidth(scale_to, Qt.TransformationMode.SmoothTransformation)
    pixmap.save(str(path), "PNG")
    return path


def make_icon(path: Path, size: int = 128) -> Path:
    """The window icon: a rising annual-cost curve with its lowest point marked."""
    from PySide6.QtCore import QPointF, QRectF, Qt
    from PySide6.QtGui import QColor, QImage, QPainter, QPainterPath, QPen

    image = QImage(size, size, QImage.Format.Format_ARGB32)
    image.fill(Qt.GlobalColor.transparent)
    p = QPainter(image)
    p.setRenderHint(QPainter.RenderHint.Antialiasing)
    p.setBrush(QColor("#0b4f6c"))
    p.setPen(Qt.PenStyle.NoPen)
    p.drawRoundedRect(QRectF(4, 4, size - 8, size - 8), size * 0.18, size * 0.18)
    s = size / 128.0
    curve = QPainterPath(QPointF(24 * s, 40 * s))
    curve.cubicTo(QPointF(40 * s, 96 * s), QPointF(72 * s, 96 * s), QPointF(104 * s, 44 * s))
    p.setPen(QPen(QColor("#f2f2f2"), 9 * s, Qt.PenStyle.SolidLine, Qt.PenCapStyle.RoundCap))
    p.setBrush(Qt.BrushStyle.NoBrush)
    p.drawPath(curve)
    p.setPen(Qt.PenStyle.NoPen)
    p.setBrush(QColor("#f5a623"))
    p.drawEllipse(QPointF(60 * s, 82 * s), 11 * s, 11 * s)
    p.end()
    path.parent.mkdir(parents=True, exist_ok=True)
    image.save(str(path), "PNG")
    return path


def render(out_dir: Path) -> list[Path]:
    state = _setup()
    from core.demo import build_demo
    from desktop_app.app import build_window, create_app

    app = create_app(["tenure-screenshots"])
    app.setStyle("Fusion")
    icon = ROOT / "resources" / "icons" / "tenure.png"
    if not icon.exists():
        make_icon(icon)
    # A fresh demo, not the user's own copy (which may hold their edits or an older demo).
    window = build_window(str(build_demo(state / "Harrowgate demo fleet.tenure")))
    window.resize(1920, 1080)
    window.show()
    _settle(app, window)
    out_dir.mkdir(parents=True, exist_ok=True)
    shots = []
    keys = window.doc.keys()
    # 1. the whole window on the first asset
    window.select_asset(keys[0])
    _settle(app, window)
    shots.append(_save(window, out_dir / "window.png"))
    # 2. the register alone
    # the register with every state: one asset studied last year, one not yet studied
    from desktop_app.commands import SetStudyCommand, SetYearCommand
    from desktop_app.document import this_year

    doc = window.doc
    if len(keys) > 3:
        old_key, new_key = keys[2], keys[-1]
        window.undo_stack.push(SetYearCommand(doc, old_key, doc.entry(old_key).study_year,
                                              this_year() - 1))
        window.undo_stack.push(SetStudyCommand(doc, new_key, doc.entry(new_key).study, None,
                                               "screenshot"))
        window.undo_stack.push(SetYearCommand(doc, new_key, doc.entry(new_key).study_year, None))
        window.select_asset(keys[0])
        _settle(app)
    shots.append(_save(window.register, out_dir / "register.png", height=340))
    while window.undo_stack.canUndo():
        window.undo_stack.undo()
    window.select_asset(keys[0])
    _settle(app)
    # 3. the editor of a challenger (year table)
    ed = window.editor
    ed.tabs.setCurrentIndex(1)
    _settle(app)
    shots.append(_save(ed, out_dir / "editor.png"))
    ed.tabs.setCurrentIndex(0)
    # 4. results and chart of an asset with a study period
    with_period = next((k for k in keys if window.doc.entry(k).study is not None
                        and window.doc.entry(k).study.study_period), keys[-1])
    window.select_asset(with_period)
    _settle(app, window)
    shots.append(_save(window.right_tabs, out_dir / "results.png"))
    # 5. a refused entry: the message names the field and the old value stays
    window.select_asset(keys[0])
    _settle(app)
    life = ed.editors()[0].life_edit
    life.setText("2.5")
    life.editingFinished.emit()
    _settle(app)
    shots.append(_save(window, out_dir / "validation.png"))
    window.undo_stack.clear()
    window._forced_dirty = False
    ed.clear_errors()
    window.report("")
    shots += render_sizes(app, window, out_dir)
    shots += render_signoff(app, window, out_dir, state)
    window.close()
    return shots


#: The screen sizes the README shows: a common laptop and a common desktop.
SIZES = ((1366, 768), (1920, 1080))


def _wait_for_risk(app, view, seconds: float = 60.0) -> None:
    import time

    end = time.monotonic() + seconds
    while view.is_running() and time.monotonic() < end:
        app.processEvents()
        time.sleep(0.02)
    _settle(app)


def render_sizes(app, window, out_dir: Path) -> list[Path]:
    """At each of ``SIZES``: the main window, the Risk tab after a run (on the demo asset
    whose decision is closest to the line) and the editor's Uncertainty page."""
    shots = []
    doc = window.doc
    risky = [k for k in doc.keys() if doc.entry(k).study is not None
             and doc.entry(k).study.uncertainty is not None]
    close = next((k for k in risky if "FL-07" in doc.entry(k).name), risky[0] if risky else None)
    for width, height in SIZES:
        window.resize(width, height)
        _settle(app, window)
        window.reset_layout()
        window.right_tabs.setCurrentIndex(0)
        window.editor.pages.setCurrentIndex(0)
        window.select_asset(doc.keys()[0])
        _settle(app, window)
        shots.append(_save(window, out_dir / f"window-{width}x{height}.png"))
        if close is None:
            continue
        window.select_asset(close)
        _settle(app, window)
        window.right_tabs.setCurrentWidget(window.risk_view)
        _settle(app)
        window.risk_view.run()
        _wait_for_risk(app, window.risk_view)
        window.risk_view.charts.setCurrentIndex(0)
        _settle(app)
        shots.append(_save(window, out_dir / f"risk-{width}x{height}.png"))
        window.editor.pages.setCurrentWidget(window.editor.uncertainty)
        _settle(app)
        shots.append(_save(window, out_dir / f"uncertainty-{width}x{height}.png"))
        window.editor.pages.setCurrentIndex(0)
        window.right_tabs.setCurrentIndex(0)
    return shots


def _over_window(app, window, dialog, path: Path) -> Path:
    """The window at its size with ``dialog`` centred over it, as the user sees it."""
    from PySide6.QtGui import QPainter

    dialog.adjustSize()
    dialog.resize(min(dialog.width(), window.width() - 40),
                  min(dialog.height(), window.height() - 40))
    dialog.show()
    _settle(app)
    back = window.grab()
    front = dialog.grab()
    bar = 26  # a plain title bar: offscreen grabs have no window frame
    x = (back.width() - front.width()) // 2
    y = (back.height() - front.height() - bar) // 2
    p = QPainter(back)
    p.fillRect(back.rect(), Qt_dim())
    p.fillRect(x - 1, y - 1, front.width() + 2, front.height() + bar + 2, Qt_dim(200))
    p.fillRect(x, y, front.width(), bar, Qt_dim(255, "#3c4a5a"))
    p.setPen(Qt_dim(255, "#ffffff"))
    p.drawText(x + 10, y + 18, dialog.windowTitle())
    p.drawPixmap(x, y + bar, front)
    p.end()
    dialog.hide()
    back.save(str(path), "PNG")
    return path


def Qt_dim(alpha: int = 60, colour: str = "#000000"):  # noqa: N802 - a colour, named like Qt's
    from PySide6.QtGui import QColor

    c = QColor(colour)
    c.setAlpha(alpha)
    return c


def render_signoff(app, window, out_dir: Path, state: Path) -> list[Path]:
    """The Sign and Verify dialogs at each of ``SIZES``, over the window.

    The memo names Tom Ashworth in the Reviewed box; the preparer also signed that box,
    so Verify shows a name that does not match and one signer in two roles.
    """
    from core.memo.countersign import sign_later
    from core.memo.identity import new_identity
    from core.memo.issue import issue_memo
    from core.memo.render import MemoOptions
    from desktop_app.signoff_dialog import SignMemoDialog, VerifyMemoDialog

    folder = state / "Memos"
    folder.mkdir(exist_ok=True)
    pw = b"screenshot-pass"
    priya, tom = folder / "priya.p12", folder / "tom.p12"
    new_identity("Priya Natarajan", priya, pw)
    new_identity("Tom Ashworth", tom, pw)
    window.select_asset(window.doc.keys()[0])
    _settle(app, window)
    memo = folder / "decision memo.pdf"
    issue_memo(window.current_result, memo,
               MemoOptions(prepared_by="Priya Natarajan", reviewed_by="Tom Ashworth",
                           approved_by="Alan Greaves"),
               identity=priya, passphrase=pw, role="prepared")
    shots = []
    signed = folder / "decision memo (reviewed).pdf"
    signed.write_bytes(memo.read_bytes())
    sign_later(signed, priya, pw, "reviewed", confirmed=True)
    for width, height in SIZES:
        window.resize(width, height)
        _settle(app, window)
        window.reset_layout()
        _settle(app, window)
        sign = SignMemoDialog(window, workbook_path=window.doc.path, memo_path=str(memo))
        sign.identity_edit.setText(str(tom))
        sign.passphrase.setText("screenshot")
        shots.append(_over_window(app, window, sign, out_dir / f"sign-{width}x{height}.png"))
        sign.deleteLater()
        verify = VerifyMemoDialog(window, memo_path=str(signed))
        verify.start()
        verify.wait_for_job()
        _settle(app)
        shots.append(_over_window(app, window, verify, out_dir / f"verify-{width}x{height}.png"))
        verify.deleteLater()
    return shots


def render_signoff_only(out_dir: Path) -> list[Path]:
    """Only the Sign and Verify dialogs (``--signoff``)."""
    state = _setup()
    from core.demo import build_demo
    from desktop_app.app import build_window, create_app

    app = create_app(["tenure-screenshots"])
    app.setStyle("Fusion")
    window = build_window(str(build_demo(state / "Harrowgate demo fleet.tenure")))
    window.show()
    _settle(app, window)
    out_dir.mkdir(parents=True, exist_ok=True)
    shots = render_signoff(app, window, out_dir, state)
    window.close()
    return shots


if __name__ == "__main__":
    args = [a for a in sys.argv[1:] if a != "--signoff"]
    target = Path(args[0]) if args else ROOT / "resources" / "screenshots"
    for shot in (render_signoff_only(target) if "--signoff" in sys.argv else render(target)):
        print(shot)
