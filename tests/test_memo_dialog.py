"""The Issue memo dialog: renders and signs on a worker, records in the workbook.

References: behaviour from the memo brief (our own spec); no outside source.
"""

from __future__ import annotations

import os
import sys
import types

import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
pytest.importorskip("PySide6")

from core.estimates import Alternative, MarketValues, OperatingCosts, Study  # noqa: E402
from core.memo.identity import new_identity  # noqa: E402
from core.memo.verify import verify_memo  # noqa: E402
from core.study import run_study  # noqa: E402


@pytest.fixture(scope="module")
def result():
    d = Alternative("Saw S-1", "defender", 9000.0, 3, MarketValues(decline_rate=0.3),
                    OperatingCosts(first=6000.0, gradient=1500.0))
    c = Alternative("Band saw B-9", "challenger", 30000.0, 8, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=2500.0, gradient=300.0))
    return run_study(Study("Ouseburn Yard saw", 0.1, d, (c,)))


def test_dialog_issues_and_signs(qtbot, tmp_path, result, monkeypatch):
    from desktop_app import memo_dialog

    ident = tmp_path / "me.p12"
    new_identity("Dana Whitfield", ident, b"pw-123456")
    recorded = {}
    fake = types.ModuleType("core.workbook")

    def record_memo(workbook, *, memo_path, fingerprint, signer=None, role=None):
        recorded.update(workbook=workbook, memo_path=memo_path, fingerprint=fingerprint,
                        signer=signer, role=role)

    fake.record_memo = record_memo
    monkeypatch.setitem(sys.modules, "core.workbook", fake)
    import core
    monkeypatch.setattr(core, "workbook", fake, raising=False)
    opened = []
    monkeypatch.setattr(memo_dialog.QDesktopServices, "openUrl", lambda url: opened.append(url))

    dlg = memo_dialog.IssueMemoDialog(result, workbook_path=str(tmp_path / "plant.tenure"))
    qtbot.addWidget(dlg)
    dlg.out_edit.setText(str(tmp_path / "memo.pdf"))
    dlg.names["reviewed"].setText("Tom Ashworth")
    dlg.page_size.setCurrentText("Letter")
    dlg.sign_box.setChecked(True)
    dlg.identity_edit.setText(str(ident))
    dlg.passphrase.setText("pw-123456")
    with qtbot.waitSignal(dlg.memoIssued, timeout=30000):
        dlg.start()
    assert dlg.issued.signed_by == "Dana Whitfield"
    assert dlg.passphrase.text() == ""  # not kept in the widget
    rep = verify_memo(dlg.issued.path, use_user_trust=False)
    assert rep.integrity_ok
    assert recorded["fingerprint"] == result.fingerprint
    assert recorded["signer"] == "Dana Whitfield" and recorded["role"] == "prepared"
    assert opened and opened[0].toLocalFile() == dlg.issued.path


def test_dialog_wrong_passphrase_shows_error(qtbot, tmp_path, result):
    from desktop_app.memo_dialog import IssueMemoDialog

    ident = tmp_path / "me.p12"
    new_identity("Dana Whitfield", ident, b"pw-123456")
    dlg = IssueMemoDialog(result)
    qtbot.addWidget(dlg)
    dlg.open_after.setChecked(False)
    dlg.out_edit.setText(str(tmp_path / "memo.pdf"))
    dlg.sign_box.setChecked(True)
    dlg.identity_edit.setText(str(ident))
    dlg.passphrase.setText("wrong")
    dlg.start()
    qtbot.waitUntil(lambda: dlg.error is not None, timeout=30000)
    assert "passphrase" in dlg.error
    assert not (tmp_path / "memo.pdf").exists()
    assert dlg.issue_button.isEnabled()
