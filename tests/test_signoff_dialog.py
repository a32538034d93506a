"""The Sign and Verify dialogs (pytest-qt, offscreen; every dialog patched).

References: the signer checks and the register row are our own rules (docs/method.md §8;
common practice, no source); certificate fingerprints are compared with the identity's
own SHA-256 fingerprint from the `cryptography` package.
"""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import pytest  # noqa: E402

from core.cli import main  # noqa: E402
from core.memo.identity import load_identity, new_identity  # noqa: E402
from core.memo.verify import verify_memo  # noqa: E402
from tests.gui_support import Unexpected, open_window  # noqa: E402

PASS = "owl-bridge-2026"


pytestmark = pytest.mark.usefixtures("isolated")


@pytest.fixture(scope="module")
def setup(tmp_path_factory):
    """A demo workbook, two identities, and a memo of its first study signed by the preparer,
    naming Tom Ashworth in the Reviewed box."""
    from core.demo import build_demo
    from core.workbook import studies_from_workbook

    d = tmp_path_factory.mktemp("signoff")
    pw = d / "pass.txt"
    pw.write_text(PASS + "\n")
    pw.chmod(0o600)
    ids = {}
    for key, name in (("priya", "Priya Natarajan"), ("tom", "Tom Ashworth")):
        ids[key] = d / f"{key}.p12"
        new_identity(name, ids[key], PASS.encode())
    book = build_demo(d / "plant.tenure")
    title = studies_from_workbook(book)[0].title
    memo = d / "memo.pdf"
    assert main(["memo", str(book), "--study", title, "-o", str(memo), "--reviewed-by",
                 "Tom Ashworth", "--sign", str(ids["priya"]), "--passphrase-file", str(pw)]) == 0
    return {"dir": d, "book": book, "memo": memo.read_bytes(), "ids": ids}


def _fresh(setup, tmp_path):
    memo = tmp_path / "memo.pdf"
    memo.write_bytes(setup["memo"])
    book = tmp_path / "plant.tenure"
    book.write_bytes(setup["book"].read_bytes())
    return memo, book


def _fill(dlg, memo, identity, role):
    dlg.memo_edit.setText(str(memo))
    dlg.refresh_boxes()
    dlg.identity_edit.setText(str(identity))
    dlg.passphrase.setText(PASS)
    dlg.role.setCurrentText(role)


def test_sign_dialog_shows_the_boxes_and_asks_before_a_mismatched_signer(qtbot, setup,
                                                                         tmp_path):
    from desktop_app.signoff_dialog import SignMemoDialog

    memo, _ = _fresh(setup, tmp_path)
    dlg = SignMemoDialog(memo_path=str(memo))
    qtbot.addWidget(dlg)
    assert "Reviewed: Tom Ashworth, empty" in dlg.boxes.text()
    assert "Prepared: Priya Natarajan, signed" in dlg.boxes.text()
    assert dlg.role.currentText() == "reviewed"  # the first empty later box
    asked = []
    dlg.ask_confirm = lambda findings: asked.append(findings) or False  # the signer says No
    _fill(dlg, memo, setup["ids"]["priya"], "reviewed")
    dlg.start()
    qtbot.waitUntil(lambda: dlg.error is not None, timeout=30000)
    assert [f.kind for f in asked[0]] == ["name differs", "one signer in two roles"]
    assert dlg.error.startswith("Not signed:") and "names Tom Ashworth" in dlg.error
    assert memo.read_bytes() == setup["memo"]  # nothing signed
    assert dlg.passphrase.text() == ""  # not kept in the widget
    # now the signer confirms
    dlg.ask_confirm = lambda findings: asked.append(findings) or True
    dlg.passphrase.setText(PASS)
    with qtbot.waitSignal(dlg.signed, timeout=30000):
        dlg.start()
    assert len(asked) == 2
    rep = verify_memo(memo, use_user_trust=False)
    assert rep.integrity_ok and [s.role for s in rep.signatures] == ["prepared", "reviewed"]
    assert rep.signatures[1].name_matches is False


def test_sign_dialog_records_the_signature_in_the_open_workbook(qtbot, setup, tmp_path):
    # the window holds the workbook open for writing; the row goes through that connection
    from core.workbook import Workbook
    from desktop_app.signoff_dialog import SignMemoDialog

    memo, book = _fresh(setup, tmp_path)
    window = open_window(qtbot, book, offer_recovery=False)
    dlg = SignMemoDialog(window, workbook_path=window.doc.path)
    qtbot.addWidget(dlg)
    dlg.ask_confirm = lambda findings: (_ for _ in ()).throw(Unexpected("no check expected"))
    _fill(dlg, memo, setup["ids"]["tom"], "reviewed")
    with qtbot.waitSignal(dlg.signed, timeout=30000):
        dlg.start()
    assert dlg.register_note is None
    assert "Recorded in the workbook's memo register" in dlg.status.text()
    window.close()
    window.discard_changes()
    with Workbook.open(book) as wb:
        rows = wb.memos()
    later = rows[-1]
    assert (later.role, later.signer) == ("reviewed", "Tom Ashworth")
    assert later.certificate_sha256 == load_identity(setup["ids"]["tom"], PASS.encode()).sha256
    assert later.fingerprint == rows[-2].fingerprint and later.file_name == str(memo)


def test_sign_dialog_shows_a_wrong_passphrase(qtbot, setup, tmp_path):
    from desktop_app.signoff_dialog import SignMemoDialog

    memo, _ = _fresh(setup, tmp_path)
    dlg = SignMemoDialog()
    qtbot.addWidget(dlg)
    _fill(dlg, memo, setup["ids"]["tom"], "reviewed")
    dlg.passphrase.setText("not-it")
    dlg.start()
    qtbot.waitUntil(lambda: dlg.error is not None, timeout=30000)
    assert "wrong passphrase" in dlg.error
    assert dlg.sign_button.isEnabled()


def test_verify_dialog_lists_each_signature_and_the_checks(qtbot, setup, tmp_path):
    from desktop_app.signoff_dialog import COLUMNS, VerifyMemoDialog

    memo, _ = _fresh(setup, tmp_path)
    assert main(["sign", str(memo), "--sign", str(setup["ids"]["priya"]), "--passphrase-file",
                 str(setup["dir"] / "pass.txt"), "--role", "reviewed", "--confirm"]) == 0
    dlg = VerifyMemoDialog(memo_path=str(memo))
    qtbot.addWidget(dlg)
    with qtbot.waitSignal(dlg.verified, timeout=30000):
        dlg.start()
    t = dlg.table
    assert t.rowCount() == 2
    rows = [[t.item(r, c).text() for c in range(len(COLUMNS))] for r in range(2)]
    assert rows[0][:4] == ["prepared", "Priya Natarajan", "Priya Natarajan", "yes"]
    assert rows[1][:4] == ["reviewed", "Tom Ashworth", "Priya Natarajan", "NO"]
    assert rows[1][4] == "intact" and rows[1][5] == "not vouched for"
    assert t.item(1, 5).toolTip().startswith("not vouched for (no trusted certificate given)")
    assert rows[1][6].replace(" ", "").replace("\n", "").lower() == load_identity(
        setup["ids"]["priya"], PASS.encode()).sha256  # shown in groups of four
    assert dlg.findings.text().splitlines() == [
        "Check: the Reviewed box names Tom Ashworth, but it was signed with Priya Natarajan's "
        "certificate", "Check: Priya Natarajan signed 2 roles (prepared and reviewed) with one "
        "certificate"]
    assert dlg.result_label.text().startswith("FAILED: intact, but signed by an identity you "
                                              "have not trusted")


def test_verify_dialog_names_a_file_that_is_not_a_memo(qtbot, tmp_path):
    from desktop_app.signoff_dialog import VerifyMemoDialog

    bogus = tmp_path / "x.pdf"
    bogus.write_bytes(b"hello")
    dlg = VerifyMemoDialog(memo_path=str(bogus))
    qtbot.addWidget(dlg)
    dlg.start()
    qtbot.waitUntil(lambda: dlg.error is not None, timeout=30000)
    assert "not a PDF file" in dlg.error and dlg.table.rowCount() == 0


def test_window_menu_opens_sign_and_verify(qtbot, setup, tmp_path, monkeypatch):
    from desktop_app import signoff_dialog

    _, book = _fresh(setup, tmp_path)
    opened = []
    monkeypatch.setattr(signoff_dialog.SignMemoDialog, "exec",
                        lambda self: opened.append(("sign", self.workbook_path)) or 0)
    monkeypatch.setattr(signoff_dialog.VerifyMemoDialog, "exec",
                        lambda self: opened.append(("verify", None)) or 0)
    window = open_window(qtbot, book, offer_recovery=False)
    texts = {a.text(): a for a in window.menuBar().actions()[0].menu().actions()}
    texts["&Sign a memo…"].trigger()
    texts["&Verify a memo…"].trigger()
    assert opened == [("sign", window.doc.path), ("verify", None)]


def test_issue_memo_dialog_asks_before_signing_another_persons_box(qtbot, tmp_path,
                                                                   monkeypatch):
    from core.estimates import Alternative, MarketValues, OperatingCosts, Study
    from core.study import run_study
    from desktop_app import memo_dialog

    monkeypatch.setattr(memo_dialog.QDesktopServices, "openUrl", lambda url: None)
    d = Alternative("Saw S-1", "defender", 9000.0, 3, MarketValues(decline_rate=0.3),
                    OperatingCosts(first=6000.0, gradient=1500.0))
    c = Alternative("Band saw B-9", "challenger", 30000.0, 8, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=2500.0, gradient=300.0))
    ident = tmp_path / "dana.p12"
    new_identity("Dana Whitfield", ident, PASS.encode())
    dlg = memo_dialog.IssueMemoDialog(run_study(Study("Ouseburn Yard saw", 0.1, d, (c,))))
    qtbot.addWidget(dlg)
    out = tmp_path / "memo.pdf"
    dlg.out_edit.setText(str(out))
    dlg.names["prepared"].setText("Tom Ashworth")
    dlg.sign_box.setChecked(True)
    dlg.identity_edit.setText(str(ident))
    asked = []
    dlg.ask_confirm = lambda findings: asked.append(findings) or False
    dlg.passphrase.setText(PASS)
    dlg.start()
    qtbot.waitUntil(lambda: dlg.error is not None, timeout=30000)
    assert [f.kind for f in asked[0]] == ["name differs"]
    assert dlg.error.startswith("Not issued:") and not out.exists()
    dlg.ask_confirm = lambda findings: asked.append(findings) or True
    dlg.passphrase.setText(PASS)
    with qtbot.waitSignal(dlg.memoIssued, timeout=30000):
        dlg.start()
    assert dlg.issued.signed_by == "Dana Whitfield"
    assert verify_memo(out, use_user_trust=False).signatures[0].name_matches is False
