"""The Risk view (offscreen Qt, pytest-qt): shows a result, runs and cancels a simulation."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import pytest  # noqa: E402
from test_risk import make  # noqa: E402  (tests/ is on sys.path: pytest rootdir insertion)

from core.study import run_study  # noqa: E402

pytest.importorskip("pytestqt")
from desktop_app.risk_view import RiskView  # noqa: E402


@pytest.fixture
def view(qtbot):
    widget = RiskView()
    qtbot.addWidget(widget)
    yield widget
    widget.shutdown()


def test_shows_the_engine_risk_result(view):
    result = run_study(make(trials=500))
    view.set_result(result)
    assert view.risk() is result.risk
    assert view.breakeven_table.rowCount() == len(result.risk.inputs)
    assert "Replace wins in" in view.summary.text()
    image = view.map_image_array()
    assert image is not None and image.shape[:2] == (41, 41)
    assert view.run_button.isEnabled() and not view.cancel_button.isEnabled()
    view.cumulative.setChecked(True)   # the CDF draws from the same result
    assert view.trials.value() == 500 and view.seed.value() == 7


def test_no_uncertainty_disables_run(view):
    from core import risk

    study = risk.perturbed_study(make(trials=100), {})
    view.set_result(run_study(study))
    assert not view.run_button.isEnabled()
    assert "no uncertainty block" in view.status.text()
    assert view.risk() is None


def test_run_in_the_worker(view, qtbot):
    view.set_result(run_study(make(trials=200)))
    view.trials.setValue(3000)
    view.seed.setValue(5)
    with qtbot.waitSignal(view.risk_ready, timeout=20000) as blocker:
        view.run()
        assert view.is_running() and view.cancel_button.isEnabled()
    risk = blocker.args[0]
    assert risk.simulation.trials == 3000 and risk.simulation.seed == 5
    assert view.risk() is risk and not view.is_running()
    assert view.progress.value() == 100


def test_cancel(view, qtbot):
    view.set_result(run_study(make(trials=200)))
    view.trials.setValue(5_000_000)
    view.run()
    job = view._job
    with qtbot.waitSignal(job.signals.cancelled, timeout=20000):
        view.cancel()
    assert not view.is_running()
    assert "Cancelled" in view.status.text()
    assert view.run_button.isEnabled()


def test_shows_a_study_period_without_a_difference(view):
    result = run_study(make(trials=200, study_period=14))
    view.set_result(result)
    assert "Replace wins in 0.0%" in view.summary.text()


def test_currency_in_axis_titles(view):
    view.set_currency("£")
    assert view.currency() == "£"
    # the same unit words as the Results charts' axes ("EAC = -AW (£/year)")
    assert "(£/year)" in view.tornado_plot.getAxis("bottom").labelText


def test_charts_say_their_basis_and_amounts_carry_the_currency(view):
    # An after-tax study: the summary already said "after-tax"; every chart title must
    # say it too, and the summary's amounts read like the rest of the window ("£351").
    import dataclasses

    from core.estimates import Depreciation, Tax
    from core.text import money

    study = make(trials=300)

    def taxed(alt):
        return dataclasses.replace(alt, depreciation=Depreciation("macrs", macrs_class=7))

    study = dataclasses.replace(study, defender=taxed(study.defender),
                                challengers=tuple(taxed(c) for c in study.challengers),
                                tax=Tax(0.25, 0.075))
    result = run_study(study)
    view.set_currency("£")
    view.set_result(result)
    risk = view._risk
    assert risk is not None and risk.basis == "after-tax"
    for plot in (view.tornado_plot, view.histogram_plot, view.map_plot):
        assert "after tax" in plot.plotItem.titleLabel.text
    assert money(risk.base_difference, "£") in view.status.text()
    assert money(risk.difference_summary()["p50"], "£") in view.summary.text()


def test_shows_the_risk_notes(view):
    result = run_study(make({"marr": {"normal": [0.05, 0.6]}}, trials=300))
    view.set_result(result)
    assert "Note: " in view.summary.text() and "narrow the MARR distribution" in \
        view.summary.text()
