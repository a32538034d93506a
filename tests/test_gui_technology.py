"""The "Technology plan" tab (offscreen, pytest-qt): it draws what the plan holds, nothing more.

Sources: the engine's own plan (core.technology); "common practice, no source" for the view.
"""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import dataclasses  # noqa: E402

import pytest  # noqa: E402

pytest.importorskip("pytestqt")

from core.estimates import Technology  # noqa: E402
from core.study import run_study  # noqa: E402
from core.studyfile import dump_study_document, load_study_file  # noqa: E402
from desktop_app.technology_view import TechnologyView  # noqa: E402
from tests.gui_support import FALLBACK_DEMO, open_window  # noqa: E402

pytestmark = pytest.mark.usefixtures("isolated")


def _planned_study(horizon: int = 9):
    base = load_study_file(FALLBACK_DEMO)[0]
    return dataclasses.replace(base, technology=Technology(horizon, -0.06, -0.08))


def test_view_draws_the_plan_segments(qtbot) -> None:
    view = TechnologyView()
    qtbot.addWidget(view)
    result = run_study(_planned_study())
    view.set_result(result)
    plan = result.technology
    bars = view.timeline.bars()
    segs = plan.segments()
    assert [(b.start, b.end) for b in bars] == [(s.start, s.end) for s in segs]
    assert bars[0].start == 0 and bars[-1].end == plan.horizon
    names = [result.study.defender.name] + [c.name for c in result.study.challengers]
    assert [names[b.lane] for b in bars] == [s.name for s in segs]
    badge = "REPLACE NOW" if plan.first_action == "replace" else "WAIT: KEEP THIS YEAR"
    assert view.badge.text() == badge and view.badge.isVisibleTo(view)
    # the basis is said whichever it is (this study has no tax)
    assert plan.basis == "before-tax" and " before tax:" in view.headline.text()
    # each challenger's lane has the colour the Results charts give that machine
    from desktop_app.charts import PALETTE

    lanes = view.timeline._lanes
    assert [c for _n, c in lanes[1:]] == [PALETTE[i] for i in range(1, len(lanes))]
    view.resize(900, 600)
    view.set_currency("£")
    assert "£" in view.figures.text()
    image = view.grab()
    assert not image.isNull() and image.width() == 900


def test_view_without_a_plan_says_how_to_get_one(qtbot) -> None:
    view = TechnologyView()
    qtbot.addWidget(view)
    result = run_study(dataclasses.replace(_planned_study(), technology=None))
    view.set_result(result)
    assert "No technology plan" in view.headline.text()
    assert view.timeline.bars() == [] and not view.badge.isVisibleTo(view)
    view.set_result(None)
    assert view.timeline.bars() == []


def test_window_has_the_tab_and_shows_the_plan(qtbot, tmp_path) -> None:
    path = tmp_path / "planned.json"
    path.write_text(dump_study_document([_planned_study(7)]), encoding="utf-8")
    window = open_window(qtbot, path)
    tabs = [window.right_tabs.tabText(i) for i in range(window.right_tabs.count())]
    assert "Technology plan" in tabs
    plan = window.current_result.technology
    assert plan is not None and plan.horizon == 7
    assert [(b.start, b.end) for b in window.technology_view.timeline.bars()] == \
        [(s.start, s.end) for s in plan.segments()]
