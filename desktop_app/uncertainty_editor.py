"""The "Uncertainty" page of the editor: a distribution for each input that can be uncertain.

Every input the study accepts in its ``uncertainty`` block (listed by
``core.risk.labels.uncertain_inputs``: MARR, prices, decline rates, first-year
operating costs, gradients and growth rates) gets a row, named in words
("HP-4 hydraulic press: operating cost gradient"), with a choice of
distribution (none, triangular, uniform, normal, PERT, lognormal) and its
parameters.  Rates are typed as percentages and money as amounts, as in the
other fields.  Each change builds the next study, is checked by core (the
study-file parser and the risk bounds) and goes through the window's undo stack;
a refusal names the field ("MARR, high: must be ...") and the field shows its
last good value again.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace

from PySide6.QtCore import QSignalBlocker, Qt
from PySide6.QtWidgets import (
    QComboBox,
    QFormLayout,
    QGridLayout,
    QGroupBox,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QSizePolicy,
    QVBoxLayout,
    QWidget,
)

from core.errors import StudyError
from core.estimates import Distribution, Study, Uncertainty
from core.risk.labels import estimate_of, input_label, is_rate, uncertain_inputs
from desktop_app.document import check_study
from desktop_app.editor import Commit, Report, _StudyView, compact
from desktop_app.validation import (
    FieldError,
    fmt_money,
    fmt_percent,
    parse_money,
    parse_number,
    parse_percent,
)

#: (kind, words) in the order the choice lists them; None = the input is not uncertain.
KINDS: tuple[tuple[str | None, str], ...] = (
    (None, "Not uncertain"), ("triangular", "Triangular"), ("uniform", "Uniform"),
    ("normal", "Normal"), ("pert", "PERT"), ("lognormal", "Lognormal"))
PARAMETERS = {"triangular": ("low", "mode", "high"), "pert": ("low", "mode", "high"),
              "uniform": ("low", "high"), "normal": ("mean", "sd"),
              "lognormal": ("mean", "sd")}
DEFAULT_TRIALS = 10_000
DEFAULT_SEED = 1


def default_distribution(kind: str, estimate: float, rate: bool) -> Distribution:
    """A starting distribution around the estimate (the user is expected to change it):
    -10 % / +20 % of the estimate, or a fixed spread when the estimate is zero.

    >>> default_distribution("triangular", 1000.0, False).params
    (900.0, 1000.0, 1200.0)
    >>> default_distribution("normal", 0.1, True).params
    (0.1, 0.01)
    """
    spread = abs(estimate) * 0.1 or (0.01 if rate else 100.0)
    digits = 6 if rate else 2
    low, high = round(estimate - spread, digits), round(estimate + 2 * spread, digits)
    if kind in ("triangular", "pert"):
        return Distribution(kind, (low, round(estimate, digits), high))
    if kind == "uniform":
        return Distribution(kind, (low, high))
    return Distribution(kind, (round(estimate, digits), round(spread, digits)))


def checked(study: Study, label: str) -> Study:
    """``study`` if core accepts it (study file rules and the inputs' physical bounds), else
    a FieldError naming ``label``."""
    from core import risk

    try:
        check_study(study)
        risk.validate(study)
    except StudyError as exc:
        raise FieldError(label, exc.message) from None
    return study


def with_input(study: Study, address: str, dist: Distribution | None) -> Study:
    """``study`` with ``address`` given ``dist`` (None: not uncertain); the block goes when
    its last input does, and starts with a fixed seed so results can be repeated."""
    unc = study.uncertainty
    inputs = dict(unc.inputs) if unc is not None else {}
    if dist is None:
        inputs.pop(address, None)
    else:
        inputs[address] = dist
    if not inputs:
        return replace(study, uncertainty=None)
    # Sorted by address: a workbook stores the study as canonical JSON (sorted keys), and the
    # draws follow the inputs' order, so any other order would change the trials on reload.
    items = tuple(sorted(inputs.items()))
    if unc is None:
        unc = Uncertainty(trials=DEFAULT_TRIALS, seed=DEFAULT_SEED, inputs=items)
    return replace(study, uncertainty=replace(unc, inputs=items))


class InputRow:
    """One uncertain input: its name, the choice of distribution and up to three parameters."""

    def __init__(self, view: UncertaintyEditor, address: str, study: Study,
                 grid: QGridLayout, row: int) -> None:
        self.view, self.address = view, address
        self.rate = is_rate(address)
        self.words = input_label(address, study)
        self.name = QLabel(self.words)
        self.name.setWordWrap(True)
        self.name.setStyleSheet("font-weight: bold;")
        self.name.setObjectName(f"input:{address}")
        self.estimate = QLabel()
        self.estimate.setStyleSheet("color: #555f6d;")
        self.kind = compact(QComboBox(), 8)
        self.kind.setObjectName(f"kind:{address}")
        for _kind, words in KINDS:
            self.kind.addItem(words)
        self.kind.currentIndexChanged.connect(self._kind_changed)
        self.labels: list[QLabel] = []
        self.edits: list[QLineEdit] = []
        self.kind.setSizePolicy(QSizePolicy.Policy.Fixed, QSizePolicy.Policy.Fixed)
        params = QHBoxLayout()
        params.setContentsMargins(6, 0, 0, 6)
        params.setSpacing(6)
        params.addWidget(self.kind)
        for k in range(3):
            label = QLabel()
            edit = view.bind(f"{self.words}, parameter {k + 1}", self._getter(k), self._setter(k),
                             merge=("uncertainty", address, k))
            edit.setObjectName(f"param:{address}:{k}")
            edit.setMinimumWidth(44)
            self.labels.append(label)
            self.edits.append(edit)
            params.addWidget(label)
            params.addWidget(edit, 1)
        params.addStretch(0)
        head = QHBoxLayout()
        head.addWidget(self.name, 1)
        head.addWidget(self.estimate, 0, Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignTop)
        grid.addLayout(head, 2 * row, 0)
        grid.addLayout(params, 2 * row + 1, 0)
        self.widgets = [self.name, self.estimate, self.kind, *self.labels, *self.edits]

    # -- text <-> values
    def fmt(self, x: float) -> str:
        return fmt_percent(x) if self.rate else fmt_money(x)

    def unit(self) -> str:
        return "%" if self.rate else self.view.currency

    def dist(self, study: Study) -> Distribution | None:
        unc = study.uncertainty
        return None if unc is None else dict(unc.inputs).get(self.address)

    def _getter(self, k: int) -> Callable[[Study], str]:
        def get(study: Study) -> str:
            d = self.dist(study)
            return "" if d is None or k >= len(d.params) else self.fmt(d.params[k])
        return get

    def _setter(self, k: int) -> Callable[[Study, str], Study]:
        def set_(study: Study, text: str) -> Study:
            d = self.dist(study)
            if d is None or k >= len(d.params):
                raise FieldError(self.words, "choose a distribution first")
            label = f"{self.words}, {PARAMETERS[d.kind][k]}"
            if self.rate:
                value = parse_percent(text, label)
            elif PARAMETERS[d.kind][k] == "sd":
                value = parse_number(text, label, low=0.0, currency=self.view.currency)
            else:
                value = parse_money(text, label, self.view.currency)
            params = list(d.params)
            params[k] = value
            new = with_input(study, self.address, Distribution(d.kind, tuple(params)))
            return checked(new, label)
        return set_

    # -- showing and choosing
    def show(self, study: Study) -> None:
        d = self.dist(study)
        with QSignalBlocker(self.kind):
            self.kind.setCurrentIndex(0 if d is None else
                                      [k for k, _w in KINDS].index(d.kind))
        try:
            self.estimate.setText(f"estimate {self.fmt(estimate_of(self.address, study))}"
                                  f"{' %' if self.rate else ''}")
        except KeyError:
            self.estimate.setText("")
        names = () if d is None else PARAMETERS[d.kind]
        unit = f" ({self.unit()})" if self.unit() else ""
        for k, (label, edit) in enumerate(zip(self.labels, self.edits, strict=True)):
            shown = k < len(names)
            label.setVisible(shown)
            edit.setVisible(shown)
            if shown:
                label.setText(names[k])
                edit.setToolTip(f"{self.words}: {names[k]}{unit}")

    def _kind_changed(self, index: int) -> None:
        study = self.view.latest()
        if study is None:
            return
        kind = KINDS[index][0]
        old = self.dist(study)
        if kind is None:
            new = with_input(study, self.address, None)
            text = f"{self.words}: not uncertain"
        else:
            if old is not None and old.kind == kind:
                return
            try:
                estimate = estimate_of(self.address, study)
            except KeyError:
                estimate = 0.0
            dist = default_distribution(kind, estimate, self.rate)
            new = with_input(study, self.address, dist)
            text = f"{self.words}: {KINDS[index][1].lower()} distribution"
        try:
            checked(new, self.words)
        except FieldError as exc:
            self.view.report(str(exc))
            self.show(study)
            return
        if not self.view.commit(new, text, None):
            self.show(study)


class UncertaintyEditor(_StudyView):
    """Monte Carlo settings and a distribution for each input that can be uncertain."""

    def __init__(self, commit: Commit, report: Report, parent: QWidget | None = None) -> None:
        super().__init__(commit, report, parent)
        self.pending: Study | None = None
        self.rows: list[InputRow] = []
        self.addresses: tuple[str, ...] = ()
        layout = QVBoxLayout(self)
        layout.setContentsMargins(6, 6, 6, 6)
        intro = QLabel("Give a distribution to each estimate you are unsure of; the Risk tab "
                       "then draws them all in every trial. Rates in %, money in the study's "
                       "currency.")
        intro.setWordWrap(True)
        intro.setStyleSheet("color: #555f6d;")
        layout.addWidget(intro)
        settings = QFormLayout()
        settings.setFieldGrowthPolicy(QFormLayout.FieldGrowthPolicy.AllNonFixedFieldsGrow)
        self.trials_edit = self.bind("Monte Carlo trials", self._trials_text, self._set_trials)
        settings.addRow("Monte Carlo trials", self.trials_edit)
        self.seed_edit = self.bind("Seed", self._seed_text, self._set_seed,
                                   placeholder="blank: a new seed each run")
        settings.addRow("Seed", self.seed_edit)
        self.fixed = list(self.bindings)
        layout.addLayout(settings)
        self.box = QGroupBox("Uncertain inputs")
        self.grid = QGridLayout(self.box)
        self.grid.setVerticalSpacing(4)
        layout.addWidget(self.box)
        layout.addStretch(1)

    def row(self, address: str) -> InputRow:
        return next(r for r in self.rows if r.address == address)

    def set_study(self, study: Study | None) -> None:
        self.study = study
        self.pending = None
        self.setEnabled(study is not None)
        if study is None:
            return
        addresses = uncertain_inputs(study)
        words = tuple(input_label(a, study) for a in addresses)
        if (addresses, words) != (self.addresses, tuple(r.words for r in self.rows)):
            self._rebuild(study, addresses)
        has = study.uncertainty is not None
        self.trials_edit.setEnabled(has)
        self.seed_edit.setEnabled(has)
        self.show_bindings()
        for r in self.rows:
            r.show(study)

    def _rebuild(self, study: Study, addresses: tuple[str, ...]) -> None:
        for r in self.rows:
            for w in r.widgets:
                w.deleteLater()
        while self.grid.count():
            item = self.grid.takeAt(0)
            if item.layout() is not None:
                item.layout().deleteLater()
        self.rows = []
        self.bindings = list(self.fixed)
        for i, address in enumerate(addresses):
            self.rows.append(InputRow(self, address, study, self.grid, i))
        self.addresses = addresses

    # -- trials and seed
    def _trials_text(self, s: Study) -> str:
        return "" if s.uncertainty is None else f"{s.uncertainty.trials:,}"

    def _seed_text(self, s: Study) -> str:
        return "" if s.uncertainty is None or s.uncertainty.seed is None else str(
            s.uncertainty.seed)

    def _set_trials(self, s: Study, t: str) -> Study:
        label = "Monte Carlo trials"
        if s.uncertainty is None:
            raise FieldError(label, "give an input a distribution first")
        value = parse_number(t, label, low=100)
        if value != int(value) or value > 5_000_000:
            raise FieldError(label, "must be a whole number from 100 to 5,000,000")
        return checked(replace(s, uncertainty=replace(s.uncertainty, trials=int(value))), label)

    def _set_seed(self, s: Study, t: str) -> Study:
        if s.uncertainty is None:
            raise FieldError("Seed", "give an input a distribution first")
        seed = None
        if t.strip():
            value = parse_number(t, "Seed", low=0)
            if value != int(value):
                raise FieldError("Seed", "must be a whole number ≥ 0 (or blank)")
            seed = int(value)
        return checked(replace(s, uncertainty=replace(s.uncertainty, seed=seed)), "Seed")
