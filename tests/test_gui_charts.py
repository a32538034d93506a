"""ChartPanel: the plotted data match the StudyResult arrays, views, toggles, hover, export."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import dataclasses  # noqa: E402
import sys  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402

pytest.importorskip("pytestqt")
pytest.importorskip("pyqtgraph")

from PySide6.QtCore import QEvent, QObject, QPointF, Qt, Signal  # noqa: E402
from PySide6.QtGui import QMouseEvent  # noqa: E402
from PySide6.QtWidgets import QApplication  # noqa: E402

from core.estimates import (  # noqa: E402
    Alternative,
    Depreciation,
    ExtraCost,
    MarketValues,
    OperatingCosts,
    Study,
    Tax,
)
from core.study import run_study  # noqa: E402
from core.text import money as format_money  # noqa: E402
from desktop_app.charts import ChartPanel  # noqa: E402

MARR = 0.09


def make_study(period=None, marr=MARR, tax=False):
    # Invented figures for Harrowgate Fabrication Ltd., Kestrel Road compressor house.
    d = Alternative("Piston 40", "defender", 18000.0, 6, MarketValues(decline_rate=0.25),
                    OperatingCosts(first=14500.0, gradient=2800.0),
                    (ExtraCost(2, 6000.0, "rebuild"),))
    c1 = Alternative("Screw 90", "challenger", 96000.0, 12, MarketValues(decline_rate=0.18),
                     OperatingCosts(first=5200.0, gradient=900.0))
    c2 = Alternative("Scroll 55", "challenger", 71000.0, 8, MarketValues(decline_rate=0.22),
                     OperatingCosts(first=7400.0, growth=0.08))
    study = Study("Kestrel Road compressed air", marr, d, (c1, c2), study_period=period)
    if tax:
        d = dataclasses.replace(d, depreciation=Depreciation("straight_line", 80000.0, 8, 3))
        c1 = dataclasses.replace(c1, depreciation=Depreciation("macrs", macrs_class=7))
        c2 = dataclasses.replace(c2, depreciation=Depreciation("macrs", macrs_class=7))
        study = dataclasses.replace(study, defender=d, challengers=(c1, c2),
                                    tax=Tax(0.25, 0.06))
    return study


@pytest.fixture(scope="module")
def result():
    return run_study(make_study())


@pytest.fixture(scope="module")
def result_period():
    return run_study(make_study(period=8))


@pytest.fixture
def chart(qtbot):
    w = ChartPanel()
    qtbot.addWidget(w)
    w.resize(1000, 600)
    return w


def test_aw_view_plots_eac_of_every_alternative_with_its_esl(chart, result):
    chart.set_result(result)
    assert chart.view() == "aw"
    series = chart.series()
    for alt in result.alternatives:
        x, y = series[alt.name]
        np.testing.assert_array_equal(x, np.arange(1, alt.max_life + 1))
        np.testing.assert_allclose(y, -alt.annual_worth)
        ex, ey = series[f"{alt.name} ESL"]
        assert ex.tolist() == [alt.economic_life]
        assert ey[0] == pytest.approx(-alt.annual_worth_at_economic_life)
    # Hand calculation: keeping Scroll 55 one year costs P(1+i) - S_1 + C_1.
    scroll = 71000.0 * (1 + MARR) - 71000.0 * (1 - 0.22) + 7400.0
    assert series["Scroll 55"][1][0] == pytest.approx(scroll)


def test_signed_toggle_shows_aw_with_costs_negative(chart, result):
    chart.set_result(result)
    chart.set_signed(True)
    for alt in result.alternatives:
        np.testing.assert_allclose(chart.series()[alt.name][1], alt.annual_worth)
    assert "Annual worth" in chart.plot_widget().getPlotItem().getAxis("left").labelText
    chart.set_signed(False)
    assert "Equivalent annual cost" in chart.plot_widget().getPlotItem().getAxis("left").labelText


def test_parts_view_splits_eac_into_capital_recovery_and_operating(chart, result):
    chart.set_result(result)
    chart.set_view("parts")
    chart.set_alternative("Screw 90")
    alt = result.alternative("Screw 90")
    s = chart.series()
    np.testing.assert_allclose(s["Capital recovery"][1], alt.capital_recovery)
    np.testing.assert_allclose(s["Operating"][1], -alt.operating)
    np.testing.assert_allclose(s["Total"][1], -alt.annual_worth)
    np.testing.assert_allclose(s["Capital recovery"][1] + s["Operating"][1], s["Total"][1])
    assert s["ESL"][0].tolist() == [alt.economic_life]


def test_marginal_view_compares_defender_years_with_best_challenger(chart, result):
    chart.set_result(result)
    chart.set_view("marginal")
    s = chart.series()
    np.testing.assert_allclose(s["Defender marginal cost"][1], result.defender.marginal_cost)
    level = result.recommendation.one_more_year.challenger_annual_cost
    np.testing.assert_allclose(s["Best challenger"][1], [level, level])


def test_options_view_only_with_a_study_period(chart, result, result_period):
    chart.set_result(result)
    assert "options" not in chart.available_views()
    chart.set_result(result_period)
    assert "options" in chart.available_views()
    chart.set_view("options")
    s = chart.series()
    options = result_period.study_period_options
    for name in ("Screw 90", "Scroll 55"):
        mine = [o for o in options if o.challenger == name]
        x, y = s[name]
        assert x.tolist() == [o.defender_years for o in mine]
        expected = [-o.annual_worth if o.feasible else np.nan for o in mine]
        np.testing.assert_allclose(y, expected)
    # Piston 40 lasts 6 years: keeping it all 8 is listed, infeasible (NaN), with the reason.
    kx, ky = s["Keep"]
    assert kx.tolist() == [8.0] and np.isnan(ky[0])
    bar_x = [t.x for t in chart.plot_widget().targets if "infeasible" in t.text]
    assert "at most 6 years" in chart.hover_text(bar_x[0], 0.0)


def test_changing_the_result_changes_the_data_and_none_clears(chart, result):
    chart.set_result(result)
    first = chart.series()["Screw 90"][1].copy()
    other = run_study(make_study(marr=0.15))
    chart.set_result(other)
    second = chart.series()["Screw 90"][1]
    assert not np.allclose(first, second)
    np.testing.assert_allclose(second, -other.alternative("Screw 90").annual_worth)
    chart.set_result(None)
    assert chart.series() == {}


def test_hover_read_out_names_alternative_years_and_amount(chart, result):
    chart.set_result(result)
    chart.show()
    alt = result.alternative("Screw 90")
    eac6 = -alt.annual_worth[5]
    assert chart.hover_text(6, eac6) == f"Screw 90, 6 years: EAC {format_money(eac6)}"
    chart.set_currency("£")
    assert chart.hover_text(6, eac6).endswith(f"EAC £{round(eac6):,}")


def test_after_tax_toggle_switches_the_plotted_basis(chart):
    taxed = run_study(make_study(tax=True))
    chart.set_result(taxed)
    assert chart.has_after_tax() and chart.basis() == "after-tax"
    for alt in taxed.after_tax.alternatives:
        np.testing.assert_allclose(chart.series()[alt.name][1], -alt.annual_worth)
        assert chart.series()[f"{alt.name} ESL"][0][0] == alt.economic_life
    chart.set_basis("before-tax")
    for alt in taxed.alternatives:
        np.testing.assert_allclose(chart.series()[alt.name][1], -alt.annual_worth)
    untaxed = run_study(make_study())
    chart.set_result(untaxed)
    assert not chart.has_after_tax() and chart.basis() == "before-tax"
    with pytest.raises(ValueError):
        chart.set_basis("after-tax")


def test_export_png_and_svg(chart, result_period, tmp_path):
    chart.set_result(result_period)
    chart.show()
    for view in chart.available_views():
        chart.set_view(view)
        png = chart.export(tmp_path / f"{view}.png", width=800)
        svg = chart.export(tmp_path / f"{view}.svg")
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        text = svg.read_text(encoding="utf-8")
        assert "<svg" in text and "</svg>" in text
    with pytest.raises(ValueError):
        chart.export(tmp_path / "chart.pdf")


def test_set_result_reuses_plot_items(chart, result, result_period):
    # Speed is measured in benchmarks/bench_gui.py, not asserted here; this checks the
    # design that makes it fast: switching results updates the same plot items.
    chart.set_result(result_period)
    before = [id(item) for item in chart.plot_widget().getPlotItem().listDataItems()]
    chart.set_result(result)
    chart.set_result(result_period)
    after = [id(item) for item in chart.plot_widget().getPlotItem().listDataItems()]
    assert before and after == before


@pytest.mark.skipif(sys.version_info >= (3, 12), reason="bools are immortal from 3.12")
def test_many_signal_emits_do_not_exhaust_true():
    # PySide6 6.12.0 drops a reference to True on each emit; charts guards it on import.
    class Probe(QObject):
        ping = Signal()

    probe = Probe()
    for _ in range(5000):
        probe.ping.emit()
    assert sys.getrefcount(True) > 1000


def test_mouse_over_a_point_shows_the_read_out(chart, result, qtbot):
    chart.set_result(result)
    chart.show()
    qtbot.waitExposed(chart)
    qtbot.wait(20)  # let the view box settle its auto range
    plot = chart.plot_widget()
    alt = result.alternative("Scroll 55")
    vb = plot.getPlotItem().getViewBox()
    scene_pos = vb.mapViewToScene(pg_point(3.0, -alt.annual_worth[2]))
    widget_pos = plot.mapFromScene(scene_pos)
    move = QMouseEvent(QEvent.Type.MouseMove, QPointF(widget_pos),
                       QPointF(plot.viewport().mapToGlobal(widget_pos)),
                       Qt.MouseButton.NoButton, Qt.MouseButton.NoButton,
                       Qt.KeyboardModifier.NoModifier)
    QApplication.sendEvent(plot.viewport(), move)
    qtbot.waitUntil(lambda: plot.readout.isVisible(), timeout=2000)
    assert plot.readout.textItem.toPlainText().startswith("Scroll 55, 3 years: EAC ")


def test_export_button_writes_the_chosen_file(chart, result, tmp_path, monkeypatch):
    from desktop_app import charts

    chart.set_result(result)
    target = tmp_path / "chosen"
    monkeypatch.setattr(charts.QFileDialog, "getSaveFileName",
                        staticmethod(lambda *a, **k: (str(target), "PNG image (*.png)")))
    written = []
    chart.exported.connect(written.append)
    chart.export_button.click()
    assert written == [str(target) + ".png"]
    assert (tmp_path / "chosen.png").stat().st_size > 1000


def pg_point(x, y):
    return QPointF(float(x), float(y))


def test_svg_export_leaves_no_untransformed_rectangles(chart, result_period, tmp_path):
    # pyqtgraph's SVG fix-up transforms <path> and <polyline> only; charts turns rects into paths.
    from xml.dom import minidom

    chart.set_result(result_period)
    chart.set_view("options")
    doc = minidom.parse(str(chart.export(tmp_path / "options.svg")))

    def in_defs(node):
        while node is not None and getattr(node, "tagName", None):
            if node.tagName in ("pattern", "mask", "defs"):
                return True
            node = node.parentNode
        return False

    stray = [r for r in doc.getElementsByTagName("rect")
             if not in_defs(r) and r.getAttribute("width") != "100%"]
    assert stray == []
    assert all(" Z" not in p.getAttribute("d") for p in doc.getElementsByTagName("path"))


def test_marginal_view_after_tax_falls_back_to_before_tax_on_both_sides(chart):
    # hand check: the after-tax basis has no marginal costs, so the bars are the before-tax
    # MC_j and the level must be the before-tax best challenger's EAC (not the after-tax one)
    taxed = run_study(make_study(tax=True))
    chart.set_result(taxed)
    chart.set_basis("after-tax")
    chart.set_view("marginal")
    s = chart.series()
    np.testing.assert_allclose(s["Defender marginal cost"][1], taxed.defender.marginal_cost)
    level = taxed.before_tax.one_more_year.challenger_annual_cost
    np.testing.assert_allclose(s["Best challenger"][1], [level, level])
    assert level != pytest.approx(taxed.after_tax.one_more_year.challenger_annual_cost)


@pytest.mark.parametrize("signed", [False, True])
@pytest.mark.parametrize("height", [330, 600])
def test_esl_labels_stay_inside_a_short_plot(qtbot, result, signed, height):
    # At 1366x768 the chart gets about 550x330 pixels: a label under the lowest point
    # (or over the highest, signed) once fell below the axis and was cut off.
    w = ChartPanel()
    qtbot.addWidget(w)
    w.resize(550, height)
    w.show()
    QApplication.processEvents()
    w.set_signed(signed)
    w.set_result(result)
    QApplication.processEvents()
    plot = w.plot_widget()
    box = plot.getPlotItem().vb.sceneBoundingRect()
    shown = [t for t in plot.labels if t.isVisible()]
    assert len(shown) == len(result.alternatives)
    for t in shown:
        r = t.sceneBoundingRect()
        assert box.top() - 1 <= r.top() and r.bottom() <= box.bottom() + 1, (t.toPlainText(),
                                                                            r, box)


@pytest.mark.parametrize("view", ["aw", "parts", "marginal"])
def test_long_titles_and_legends_fit_a_laptop_width_pane(qtbot, view):
    # At 1366x768 the chart pane is about 550 pixels wide. A one-line title or legend row
    # wider than that made pyqtgraph lay the plot out wider than its widget, so the axis
    # and the right-hand bars were cut off; now the title wraps and the legend takes fewer
    # columns ("common practice, no source": nothing drawn outside the widget).
    study = make_study()
    long_d = dataclasses.replace(study.defender, name="Reciprocating piston compressor 40 kW "
                                                       "(2009)")
    long_c = dataclasses.replace(study.challengers[0], name="Variable-speed rotary screw "
                                                            "compressor 90 kW")
    result = run_study(dataclasses.replace(study, defender=long_d,
                                           challengers=(long_c, study.challengers[1])))
    w = ChartPanel()
    qtbot.addWidget(w)
    w.resize(550, 360)
    w.show()
    QApplication.processEvents()
    w.set_result(result)
    w.set_view(view)
    QApplication.processEvents()
    plot = w.plot_widget()
    needed = plot.getPlotItem().effectiveSizeHint(Qt.SizeHint.MinimumSize).width()
    assert needed <= plot.width(), (needed, plot.width())
    assert plot.getPlotItem().geometry().width() <= plot.width()
