"""The editor's Uncertainty page (pytest-qt, offscreen): choose distributions, type their
parameters, refusals that name the field, undo, and the round trip editor -> study JSON ->
editor.  Expected values are hand calculations written beside each check."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import json  # noqa: E402

import pytest  # noqa: E402

from core.estimates import (  # noqa: E402
    Alternative,
    Distribution,
    MarketValues,
    OperatingCosts,
    Study,
)
from core.risk.labels import input_label, uncertain_inputs  # noqa: E402
from core.studyfile import dump_study_document, load_study_file  # noqa: E402
from desktop_app.main_window import MainWindow  # noqa: E402
from desktop_app.uncertainty_editor import KINDS, default_distribution  # noqa: E402
from tests.gui_support import open_window  # noqa: E402

GRADIENT = "PB-2.operating_costs.gradient"
PRICE = "Servo brake.first_cost"


pytestmark = pytest.mark.usefixtures("isolated")


def press_brake_study() -> Study:
    d = Alternative("PB-2", "defender", 18000.0, 5, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=21000.0, gradient=3500.0))
    c = Alternative("Servo brake", "challenger", 96000.0, 12, MarketValues(decline_rate=0.15),
                    OperatingCosts(first=8200.0, growth=0.04))
    return Study("Kestrel Road — Press brake PB-2", 0.09, d, (c,))


def open_uncertainty(qtbot, path) -> MainWindow:
    window = open_window(qtbot, path, offer_recovery=False)
    window.editor.pages.setCurrentWidget(window.editor.uncertainty)
    return window


@pytest.fixture
def study_file(tmp_path):
    path = tmp_path / "brake.json"
    path.write_text(dump_study_document([press_brake_study()]), encoding="utf-8")
    return path


def study_of(window: MainWindow) -> Study:
    return window.current_entry().study


def choose(window: MainWindow, address: str, kind: str | None) -> None:
    row = window.editor.uncertainty.row(address)
    row.kind.setCurrentIndex([k for k, _w in KINDS].index(kind))


def type_param(window: MainWindow, address: str, k: int, text: str) -> None:
    edit = window.editor.uncertainty.row(address).edits[k]
    edit.setText(text)
    edit.editingFinished.emit()


def test_inputs_named_in_words_and_listed_from_core(qtbot, study_file):
    window = open_uncertainty(qtbot, study_file)
    ed = window.editor.uncertainty
    # The defender has a gradient, the challenger a growth rate: core decides which apply.
    assert ed.addresses == uncertain_inputs(press_brake_study()) == (
        "marr", "PB-2.market_value", "PB-2.market_values.decline_rate",
        "PB-2.operating_costs.first", "PB-2.operating_costs.gradient", "Servo brake.first_cost",
        "Servo brake.market_values.decline_rate", "Servo brake.operating_costs.first",
        "Servo brake.operating_costs.growth")
    assert ed.row(GRADIENT).name.text() == "PB-2: operating cost gradient"
    assert input_label("HP-4 hydraulic press.operating_costs.gradient") == \
        "HP-4 hydraulic press: operating cost gradient"
    assert all(not e.isEnabled() for e in (ed.trials_edit, ed.seed_edit))


def test_choose_type_undo_and_round_trip(qtbot, study_file, tmp_path):
    window = open_uncertainty(qtbot, study_file)
    choose(window, GRADIENT, "triangular")
    unc = study_of(window).uncertainty
    # hand calculation: 3500 - 10 % = 3150, + 20 % = 4200
    assert dict(unc.inputs)[GRADIENT] == Distribution("triangular", (3150.0, 3500.0, 4200.0))
    assert unc.trials == 10_000 and unc.seed == 1
    assert window.editor.uncertainty.trials_edit.isEnabled()
    type_param(window, GRADIENT, 0, "3,000")
    type_param(window, GRADIENT, 2, "5000")
    choose(window, "marr", "normal")
    type_param(window, "marr", 0, "9")
    type_param(window, "marr", 1, "1.5 %")
    choose(window, PRICE, "pert")
    type_param(window, PRICE, 0, "90,000")
    type_param(window, PRICE, 2, "£120,000")
    ed = window.editor.uncertainty
    ed.trials_edit.setText("2000")
    ed.trials_edit.editingFinished.emit()
    ed.seed_edit.setText("7")
    ed.seed_edit.editingFinished.emit()
    want = {GRADIENT: Distribution("triangular", (3000.0, 3500.0, 5000.0)),
            "marr": Distribution("normal", (0.09, 0.015)),
            PRICE: Distribution("pert", (90000.0, 96000.0, 120000.0))}
    unc = study_of(window).uncertainty
    assert dict(unc.inputs) == want and (unc.trials, unc.seed) == (2000, 7)
    assert [a for a, _d in unc.inputs] == sorted(want)  # the order a workbook keeps
    assert window.isWindowModified()
    # one undo step takes back the seed, the next the trials
    window.undo_stack.undo()
    assert study_of(window).uncertainty.seed == 1
    window.undo_stack.redo()

    # editor -> study JSON: the file keeps the addresses as paths
    out = tmp_path / "saved.json"
    assert window._save_to(str(out))
    data = json.loads(out.read_text(encoding="utf-8"))
    assert data["uncertainty"] == {
        "trials": 2000, "seed": 7,
        "inputs": {"PB-2.operating_costs.gradient": {"triangular": [3000, 3500, 5000]},
                   "Servo brake.first_cost": {"pert": [90000, 96000, 120000]},
                   "marr": {"normal": [0.09, 0.015]}}}
    assert load_study_file(out)[0] == study_of(window)
    # study JSON -> editor: a new window shows the same distributions in the same words
    again = open_uncertainty(qtbot, out)
    ed2 = again.editor.uncertainty
    row = ed2.row(GRADIENT)
    assert row.kind.currentText() == "Triangular"
    assert [e.text() for e in row.edits[:3]] == ["3,000", "3,500", "5,000"]
    assert [lab.text() for lab in row.labels[:3]] == ["low", "mode", "high"]
    marr = ed2.row("marr")
    assert marr.kind.currentText() == "Normal" and [e.text() for e in marr.edits[:2]] == [
        "9", "1.5"]
    assert not marr.edits[2].isVisibleTo(ed2)
    assert ed2.row(PRICE).kind.currentText() == "PERT"
    assert ed2.trials_edit.text() == "2,000" and ed2.seed_edit.text() == "7"
    assert ed2.row("PB-2.market_value").kind.currentText() == "Not uncertain"
    # Not uncertain again removes the input; the last one removes the block
    for address in want:
        choose(again, address, None)
    assert study_of(again).uncertainty is None


@pytest.mark.parametrize(("address", "kind", "k", "text", "words"), [
    (GRADIENT, "triangular", 2, "abc", "PB-2: operating cost gradient, high: must be a number"),
    # core's own rule (docs/method.md §5): low <= mode <= high
    (GRADIENT, "triangular", 2, "3200", "PB-2: operating cost gradient, high: needs low <= mode"),
    # core's physical bounds: a first cost is never below zero (96,000 + 20 % = 115,200)
    (PRICE, "uniform", 0, "-1000", "Servo brake: first cost, low: support [-1000, 115200] "
                                   "crosses the input's physical range"),
    (PRICE, "normal", 1, "-5", "Servo brake: first cost, sd: must be ≥ 0"),
    ("marr", "pert", 0, "-120", "MARR, low: must be > -100 %"),
])
def test_refusals_name_the_field(qtbot, study_file, address, kind, k, text, words):
    window = open_uncertainty(qtbot, study_file)
    choose(window, address, kind)
    before = study_of(window)
    type_param(window, address, k, text)
    assert study_of(window) == before  # nothing changed
    assert window.last_message.startswith(words), window.last_message
    edit = window.editor.uncertainty.row(address).edits[k]
    assert "border" in edit.styleSheet() and edit.text() != text  # the last good value again


def test_switching_a_generator_drops_an_input_it_no_longer_has(qtbot, study_file):
    window = open_uncertainty(qtbot, study_file)
    choose(window, GRADIENT, "uniform")
    assert study_of(window).uncertainty is not None
    window.editor.pages.setCurrentIndex(0)
    defender = window.editor.editors()[0]
    defender.oc_mode.setCurrentIndex(1)  # geometric growth: no gradient any more
    study = study_of(window)
    assert study.defender.operating_costs.growth is not None and study.uncertainty is None
    window.undo_stack.undo()
    assert dict(study_of(window).uncertainty.inputs)[GRADIENT].kind == "uniform"


def test_default_distributions_fit_their_inputs():
    # hand calculation: a rate of 10 % with -10 % / +20 %: 9 % to 12 %
    assert default_distribution("uniform", 0.10, True).params == (0.09, 0.12)
    # a zero estimate gets a fixed spread (100 in money, one point in rates)
    assert default_distribution("pert", 0.0, False).params == (-100.0, 0.0, 200.0)
    assert default_distribution("lognormal", 500.0, False).params == (500.0, 50.0)
