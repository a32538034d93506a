"""What the capital plan reads from one study result (docs/method.md §10).

``plan_input`` is the ONE place the plan reads a study result: the decision basis
(after tax when the study has tax), its rate, the defender's AW, the best
challenger at its ESL, first costs, market values and the study-period options.
Everything after it works from :class:`AssetInput` alone.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from core.estimates import Study
from core.results import Basis, StudyResult


@dataclass(frozen=True)
class PeriodOption:
    """One feasible study-period option: keep the defender j years, then ``challenger``."""

    defender_years: int
    challenger: str | None
    annual_worth: float


@dataclass(frozen=True)
class AssetInput:
    """One asset as the plan sees it (money in the study's money, AW signed).

    ``defender_aw`` AW_D,k for k = 1..n_D on the decision basis (constant money);
    ``market_values`` S_0..S_n (S_0 = market value today); ``prices`` each challenger's
    first cost; ``growth`` (1+f) when first costs rise with then-current inflation, else 1.
    """

    title: str
    tag: str | None
    site: str | None
    fingerprint: str
    basis: Basis
    rate: float
    defender: str
    defender_aw: np.ndarray
    challenger: str
    challenger_aw: float
    prices: tuple[tuple[str, float], ...]
    growth: float
    market_values: np.ndarray
    defender_life: int
    study_period: int | None
    period_options: tuple[PeriodOption, ...]
    planned_year: int
    must: bool = False
    must_reason: str = ""

    def price(self, challenger: str) -> float:
        return dict(self.prices)[challenger]


def plan_input(result: StudyResult, study: Study, *, tag: str | None = None,
               site: str | None = None, must: bool = False, must_reason: str = ""
               ) -> AssetInput:
    """The plan's view of one study result, read on its decision basis (``result.decision``).

    The AW arrays are the basis's constant-money AW (``annual_worth_constant``) at the
    basis's rate; nothing is recomputed.
    """
    dec = result.decision
    rec = dec.recommendation
    d_res = result.before_tax.alternative(study.defender.name)
    basis: Basis = dec.basis
    rate = float(dec.rate)
    aw = {a.name: np.asarray(a.annual_worth_constant, dtype=float) for a in dec.alternatives}
    esl = {a.name: int(a.economic_life) for a in dec.alternatives}
    best = rec.best_challenger
    c_aw = float(aw[best][esl[best] - 1])
    then_current = study.inflation is not None and study.inflation.estimates == "then-current"
    growth = 1.0 + study.inflation.rate if then_current and study.inflation is not None else 1.0
    options = tuple(PeriodOption(o.defender_years, o.challenger, float(o.annual_worth))
                    for o in dec.study_period_options
                    if o.feasible and o.annual_worth is not None)
    s = np.concatenate([[float(study.defender.price)],
                        np.asarray(d_res.market_values, dtype=float)])
    return AssetInput(
        title=study.title, tag=tag, site=site, fingerprint=result.fingerprint, basis=basis,
        rate=rate, defender=study.defender.name, defender_aw=aw[study.defender.name],
        challenger=best, challenger_aw=c_aw,
        prices=tuple((c.name, float(c.price)) for c in study.challengers), growth=growth,
        market_values=s, defender_life=int(study.defender.max_life),
        study_period=study.study_period, period_options=options,
        planned_year=int(rec.planned_defender_years), must=must, must_reason=must_reason)
