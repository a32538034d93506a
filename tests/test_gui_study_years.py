"""The read-only "Study years" dialog (desktop_app.study_years) on the demo workbook.

Expected decisions are the result snapshots stored in the workbook by core.demo
(the dialog must show them, not its own numbers); "hand calculation" is not needed.
"""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import pytest  # noqa: E402

from core.demo import build_demo  # noqa: E402
from core.workbook import Workbook  # noqa: E402
from desktop_app.study_years import COLUMNS, StudyYearsDialog, differences  # noqa: E402
from tests.gui_support import open_window  # noqa: E402

pytestmark = pytest.mark.usefixtures("isolated")


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = tmp_path_factory.mktemp("sy") / "d.tenure"
    build_demo(path)
    with Workbook.open(path, write=False) as wb:
        tag = next(a.tag for a in wb.assets() if len(wb.years(a.tag)) >= 2)
        years = wb.years(tag)
        actions = [wb.result_json(tag, y)["recommendation"]["action"] for y in years]
    return path, tag, years, actions


def test_rows_actions_and_differences(qtbot, demo):
    path, tag, years, actions = demo
    dialog = StudyYearsDialog(path, tag)
    qtbot.addWidget(dialog)
    assert dialog.error == ""
    assert dialog.table.rowCount() == len(years)
    decision = COLUMNS.index("Decision")
    shown = [dialog.table.item(r, decision).text().lower() for r in range(len(years))]
    assert shown == actions  # stored snapshots, not recomputed
    assert [int(dialog.table.item(r, 0).text()) for r in range(len(years))] == years
    dialog.table.selectRow(len(years) - 1)
    text = dialog.differences_text.toPlainText()
    assert f"{years[-1]} against {years[-2]}" in text
    assert "Defender market value today" in text or "Defender operating costs" in text
    dialog.table.selectRow(0)
    assert "first stored study" in dialog.differences_text.toPlainText()
    dialog.resize(1150, 520)
    dialog.show()
    qtbot.waitExposed(dialog)
    dialog.table.selectRow(len(years) - 1)
    dialog.grab().save("/tmp/study_years.png")


def test_memo_matched_by_fingerprint(qtbot, demo, tmp_path):
    path, tag, years, _ = demo
    copy = tmp_path / "m.tenure"
    copy.write_bytes(path.read_bytes())
    with Workbook.open(copy, write=True) as wb:
        fp = wb.record(tag, years[0]).fingerprint
        wb.record_memo(None, None, fp, "R. Planner", tmp_path / "memo.pdf",
                       time="2025-03-01T10:00:00")
        # a later signature of the same memo is its own row, shown with its role
        wb.record_memo(None, None, fp, "T. Reviewer", tmp_path / "memo.pdf",
                       time="2025-03-02T10:00:00", role="reviewed")
    dialog = StudyYearsDialog(copy, tag)
    qtbot.addWidget(dialog)
    memos = COLUMNS.index("Memos")
    assert "R. Planner" in dialog.table.item(0, memos).text()
    assert "T. Reviewer (reviewed) 2025-03-02" in dialog.table.item(0, memos).text()
    assert dialog.table.item(len(years) - 1, memos).text() == "none"


def test_unreadable_workbook_is_a_message(qtbot, tmp_path):
    bad = tmp_path / "bad.tenure"
    bad.write_text("not a workbook")
    dialog = StudyYearsDialog(bad, "X-1")
    qtbot.addWidget(dialog)
    assert dialog.table.rowCount() == 0
    assert "could not be read" in dialog.intro.text()


def test_differences_words_challengers():
    # hand-made study_to_dict forms (common practice, no source)
    before = {"marr": 0.1, "defender": {"name": "D"}, "challengers": [{"name": "A"}]}
    after = {"marr": 0.1, "defender": {"name": "D"}, "challengers": [{"name": "B"}]}
    assert differences(before, after) == ["Challenger removed: A", "Challenger added: B"]


def test_window_menu_action(qtbot, demo, monkeypatch, tmp_path):
    from desktop_app import study_years

    path, tag, years, _ = demo
    copy = tmp_path / "w.tenure"
    copy.write_bytes(path.read_bytes())
    window = open_window(qtbot, copy)
    window.select_asset(tag)
    assert window.study_years_action.isEnabled()
    opened = []
    monkeypatch.setattr(study_years.StudyYearsDialog, "exec",
                        lambda self: opened.append(self.table.rowCount()) or 0)
    window.study_years_action.trigger()
    assert opened == [len(years)]


def test_year_without_snapshot_is_recomputed(qtbot, demo, tmp_path):
    from core.study import run_study

    path, tag, years, _ = demo
    copy = tmp_path / "r.tenure"
    copy.write_bytes(path.read_bytes())
    with Workbook.open(copy, write=True) as wb:
        study = wb.study(tag, years[-1])
        wb.save_study(tag, years[-1] + 1, study)  # no result snapshot
    dialog = StudyYearsDialog(copy, tag)
    qtbot.addWidget(dialog)
    last = dialog.table.rowCount() - 1
    assert last == len(years)
    expected = run_study(study).recommendation.action  # core's own result
    assert dialog.table.item(last, 1).text() == f"{expected.capitalize()} (recomputed)"
    assert "No estimate changed" in dialog.differences_for(last)
