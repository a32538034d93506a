"""The study's results one basis at a time (before tax, after tax), decision basis first.

Every view that shows results by basis (the CLI text, the export, the memo) reads them
through :func:`basis_views`, the one place that knows where each basis lives in a study
result (docs/method.md §4: with a ``tax`` block the recommendation rests on the after-tax
study and the before-tax study is shown alongside). Nothing here computes economics;
it only regroups figures the engine produced.

AW is signed (costs negative); EAC = -AW.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal

from core.results import BasisResult, OneMoreYear, Recommendation, StudyOption, StudyResult

Basis = Literal["before-tax", "after-tax"]

LABELS: dict[str, str] = {"before-tax": "before tax", "after-tax": "after tax"}


@dataclass(frozen=True)
class BasisAlternative:
    """One alternative on one basis: AW_k for k = 1..n, its ESL and its rank.

    ``outlay`` is the year-0 outlay on this basis (before tax the price; after tax a
    challenger's first cost, the defender's forgone after-tax sale proceeds), None when
    the source does not hold it; ``market_values`` S_1..S_n as estimated.
    """

    name: str
    role: str
    annual_worth: tuple[float, ...]
    economic_life: int
    annual_worth_at_economic_life: float
    rank: int
    outlay: float | None = None
    market_values: tuple[float, ...] = ()


@dataclass(frozen=True)
class BasisView:
    """The results of one basis.

    ``decision`` is True for the basis the recommendation rests on; ``recommendation``
    is what this basis alone says; ``options`` its study-period options (empty without
    a study period, or when the source did not keep them).
    """

    basis: Basis
    decision: bool
    rate: float | None
    alternatives: tuple[BasisAlternative, ...]
    options: tuple[StudyOption, ...]
    recommendation: Recommendation

    @property
    def label(self) -> str:
        """'before tax' or 'after tax'."""
        return LABELS[self.basis]

    @property
    def title(self) -> str:
        """'After tax (decision basis)', 'Before tax (for comparison)' or 'Before tax'."""
        text = self.label.capitalize()
        if self.basis == "before-tax" and self.decision:
            return text  # a study without tax has this one basis
        return text + (" (decision basis)" if self.decision else " (for comparison)")

    @property
    def ranking(self) -> tuple[BasisAlternative, ...]:
        return tuple(sorted(self.alternatives, key=lambda a: a.rank))

    def alternative(self, name: str) -> BasisAlternative:
        for a in self.alternatives:
            if a.name == name:
                return a
        raise KeyError(name)


def _option(o: Any) -> StudyOption:
    if isinstance(o, StudyOption):
        return o
    return StudyOption(int(o["defender_years"]), o.get("challenger"),
                       int(o.get("challenger_years") or 0), o.get("annual_worth"),
                       bool(o.get("feasible")), str(o.get("reason") or ""))


def _recommendation(r: Mapping[str, Any], basis: Basis) -> Recommendation:
    action: Literal["keep", "replace"] = "replace" if r.get("action") == "replace" else "keep"
    return Recommendation(action, r.get("challenger"), r.get("defender_years"),
                          r.get("replacement_value"), basis, str(r.get("reason") or ""),
                          str(r.get("best_challenger") or ""),
                          int(r.get("planned_defender_years") or 0),
                          _one_more_year(r.get("one_more_year") or {}), r.get("study_period"))


def _one_more_year(c: Mapping[str, Any]) -> OneMoreYear:
    return OneMoreYear(int(c.get("year") or 1), float(c.get("defender_marginal_cost") or 0.0),
                       float(c.get("challenger_annual_cost") or 0.0),
                       bool(c.get("keep_next_year")))


def basis_views(result: StudyResult | Mapping[str, Any]) -> tuple[BasisView, ...]:
    """The results of each basis the study has, the decision basis first.

    ``result`` is a :class:`core.results.StudyResult` or its ``core.jsonout.study_json`` dict (the
    ``--json`` object; it does not keep the before-tax study-period options, so those
    come out empty). A study without tax has one view, before tax; with tax, two: after
    tax (the decision) then before tax.

    >>> from core.estimates import Alternative, MarketValues, OperatingCosts, Study
    >>> from core.study import run_study
    >>> d = Alternative("Old", "defender", 2000.0, 3, MarketValues(decline_rate=0.3),
    ...                 OperatingCosts(first=900.0, gradient=250.0))
    >>> c = Alternative("New", "challenger", 6000.0, 8, MarketValues(decline_rate=0.2),
    ...                 OperatingCosts(first=300.0, gradient=50.0))
    >>> [v.title for v in basis_views(run_study(Study("P", 0.10, d, (c,))))]
    ['Before tax']
    """
    if isinstance(result, StudyResult):
        return _from_result(result)
    return _from_json(result)


def _alternatives(basis: BasisResult, before: BasisResult) -> tuple[BasisAlternative, ...]:
    out = []
    for a in basis.alternatives:
        outlay = a.tax.initial if a.tax is not None else a.price
        mv = before.alternative(a.name).market_values
        out.append(BasisAlternative(a.name, a.role, tuple(float(v) for v in a.annual_worth),
                                    int(a.economic_life), float(a.annual_worth_at_economic_life),
                                    int(a.rank), float(outlay), tuple(float(v) for v in mv)))
    return tuple(out)


def _from_result(r: StudyResult) -> tuple[BasisView, ...]:
    bt = r.before_tax
    before = _alternatives(bt, bt)
    at = r.after_tax
    if at is None:
        return (BasisView("before-tax", True, float(bt.rate), before,
                          tuple(bt.study_period_options), bt.recommendation),)
    return (BasisView("after-tax", True, float(at.rate), _alternatives(at, bt),
                      tuple(at.study_period_options), at.recommendation),
            BasisView("before-tax", False, float(bt.rate), before,
                      tuple(bt.study_period_options), bt.recommendation))


def _from_json(d: Mapping[str, Any]) -> tuple[BasisView, ...]:
    alts = list(d.get("alternatives") or [])

    def view(key: str | None) -> tuple[BasisAlternative, ...]:
        out = []
        for a in alts:
            src = a if key is None else a[key]
            out.append(BasisAlternative(str(a.get("name")), str(a.get("role")),
                                        tuple(float(v) for v in src.get("annual_worth") or []),
                                        int(src.get("economic_life") or 0),
                                        float(src.get("annual_worth_at_economic_life") or 0.0),
                                        int(src.get("rank") or 0), src.get("initial_outlay"),
                                        tuple(float(v) for v in a.get("market_values") or [])))
        return tuple(out)

    rec = d.get("recommendation") or {}
    options = tuple(_option(o) for o in d.get("study_period_options") or [])
    taxed = bool(alts) and all(isinstance(a.get("after_tax"), Mapping) for a in alts)
    if not taxed:
        return (BasisView("before-tax", True, d.get("rate_used"), view(None), options,
                          _recommendation(rec, "before-tax")),)
    btr = d.get("before_tax_recommendation") or {}
    return (BasisView("after-tax", True, None, view("after_tax"), options,
                      _recommendation(rec, "after-tax")),
            BasisView("before-tax", False, d.get("rate_used"), view(None), (),
                      _recommendation(btr, "before-tax")))
