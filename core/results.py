"""The typed results of a replacement study: every figure a view, the memo or the CLI shows.

Nothing downstream recomputes economics; it reads these objects, and they do not format
themselves (``core.text``, ``core.jsonout`` and ``core.report`` do).  Arrays are indexed
by retention year k-1 (k = 1..n).  AW is signed (costs negative); EAC = -AW.

``StudyResult`` holds one ``BasisResult`` before tax and, when the study has tax, one
after tax; ``StudyResult.decision`` is the basis the recommendation rests on.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property
from typing import Literal

import numpy as np

from core.estimates import Distribution, Study
from core.factors import FloatArray
from core.studyfile import fingerprint

Action = Literal["keep", "replace"]
Basis = Literal["before-tax", "after-tax"]
Role = Literal["defender", "challenger"]
Favours = Literal["replacing", "keeping", "neither"]

#: Percentiles of the risk analysis' AW-difference summary.
PERCENTILES = (5, 10, 50, 90, 95)
HISTOGRAM_BINS = 40


@dataclass(frozen=True)
class OneMoreYear:
    """Keep one more year?  The defender's marginal cost next year (MC_1 = -AW_D,1) against
    the best challenger's EAC at its ESL; keep while it stays more than a cent below."""

    year: int
    defender_marginal_cost: float
    challenger_annual_cost: float
    keep_next_year: bool


@dataclass(frozen=True)
class StudyOption:
    """One study-period option: keep the defender j years, then a challenger for T-j years."""

    defender_years: int
    challenger: str | None
    challenger_years: int
    annual_worth: float | None
    feasible: bool
    reason: str = ""


@dataclass(frozen=True)
class Recommendation:
    """The decision, its one-sentence reason, and the figures that back it.

    ``replacement_value`` is the defender's market value today at which keeping and
    replacing tie (closed form, docs/method.md §3); ``planned_defender_years`` the year to
    replace under today's estimates (0 = now).
    """

    action: Action
    challenger: str | None
    defender_years: int | None
    replacement_value: float | None
    basis: Basis
    reason: str
    best_challenger: str
    planned_defender_years: int
    one_more_year: OneMoreYear
    study_period: int | None = None


@dataclass(frozen=True)
class CashFlowTable:
    """The after-tax cash flows of keeping an asset ``retention`` years, rows j = 0..k.

    Signed cash flows (outflows negative): ``before_tax`` is -P (or -MV) at year 0 and
    -(C_j + X_j) after; ``disposal`` the market value S_k at year k; ``depreciation`` the
    allowance claimed; ``taxable_income`` the change in taxable income (with the gain
    S_k - BV_k at k, and for the defender the forgone gain MV - BV_0 at year 0, negative);
    ``tax`` = -t x taxable income (positive = tax saved); ``net`` = before_tax + disposal
    + tax.
    """

    retention: int
    before_tax: FloatArray
    disposal: FloatArray
    depreciation: FloatArray
    book_value: FloatArray
    taxable_income: FloatArray
    tax: FloatArray
    net: FloatArray


@dataclass(frozen=True)
class TaxDetail:
    """The after-tax figures of one alternative besides its AW (docs/method.md §4).

    ``initial`` is the year-0 outlay after tax (P, or the defender's MV - t(MV - BV_0));
    ``allowance`` D_k, ``book_value`` BV_k at disposal in year k, ``disposal`` the after-tax
    disposal proceeds S_k - t(S_k - BV_k); ``tables`` the cash flows of keeping k years,
    k = 1..n (then-current money when the study has inflation).
    """

    method: str
    tax_basis: float
    book_value_0: float
    initial: float
    allowance: FloatArray
    book_value: FloatArray
    disposal: FloatArray
    tables: tuple[CashFlowTable, ...]


@dataclass(frozen=True)
class AlternativeResult:
    """One alternative on one basis: AW for every retention k = 1..n, its parts and its ESL.

    ``annual_worth`` is in the money the study states (constant or then-current);
    ``annual_worth_constant`` the constant-money AW that sets the ESL and the decision
    (the same numbers unless the estimates are then-current).  ``market_values``,
    ``operating_costs``, ``extra_costs`` are the estimates in the study's money.  After tax
    there is no capital-recovery / operating split and no marginal cost (None); ``tax``
    holds the after-tax detail.
    """

    name: str
    role: Role
    price: float
    max_life: int
    market_values: FloatArray
    operating_costs: FloatArray
    extra_costs: FloatArray
    annual_worth: FloatArray
    annual_worth_constant: FloatArray
    capital_recovery: FloatArray | None
    operating: FloatArray | None
    marginal_cost: FloatArray | None
    present_worth: FloatArray
    economic_life: int
    annual_worth_at_economic_life: float
    rank: int
    tax: TaxDetail | None = None

    @property
    def equivalent_annual_cost(self) -> FloatArray:
        return -self.annual_worth


@dataclass(frozen=True)
class TaxTerms:
    """The rates of an after-tax basis: effective tax rate t, the after-tax MARR, the rate
    the then-current flows are discounted at, and the conventions sentence."""

    tax_rate: float
    after_tax_marr: float
    discount_rate: float
    conventions: str


@dataclass(frozen=True)
class BasisResult:
    """Everything decided on one basis (before or after tax).

    ``rate`` is the rate the decision discounts at (constant money); ``money`` says the
    money ``annual_worth`` is reported in; ``keep_values`` V_j (j = 0..n_D) the worth of
    keeping the defender j years and then the best challenger repeated, against replacing
    now (V_0 = 0).
    """

    basis: Basis
    rate: float
    money: str
    alternatives: tuple[AlternativeResult, ...]
    recommendation: Recommendation
    one_more_year: OneMoreYear
    study_period_options: tuple[StudyOption, ...]
    keep_values: FloatArray
    replacement_value_favours: Favours | None
    best_option: int | None = None
    tax: TaxTerms | None = None

    @property
    def defender(self) -> AlternativeResult:
        return self.alternatives[0]

    @property
    def challengers(self) -> tuple[AlternativeResult, ...]:
        return self.alternatives[1:]

    @property
    def ranking(self) -> list[AlternativeResult]:
        return sorted(self.alternatives, key=lambda a: a.rank)

    def alternative(self, name: str) -> AlternativeResult:
        for alt in self.alternatives:
            if alt.name == name:
                return alt
        raise KeyError(name)


# --------------------------------------------------------------------------- risk
@dataclass(frozen=True)
class Simulation:
    """Per-trial results of a Monte Carlo run (arrays of length ``trials``)."""

    trials: int
    seed: int
    replace: np.ndarray
    difference: FloatArray
    economic_life: dict[str, np.ndarray]
    best_challenger: np.ndarray

    @property
    def probability_replace(self) -> float:
        return float(np.mean(self.replace))

    @property
    def probability_standard_error(self) -> float:
        p = self.probability_replace
        return math.sqrt(p * (1.0 - p) / self.trials)


@dataclass(frozen=True)
class TornadoBar:
    """One input swept from its distribution's 10th to 90th percentile, the rest fixed."""

    address: str
    low_value: float
    high_value: float
    difference_at_low: float
    difference_at_high: float

    @property
    def swing(self) -> float:
        return abs(self.difference_at_high - self.difference_at_low)


@dataclass(frozen=True)
class TwoWayMap:
    """Where replacing wins over a grid of two inputs (rows: y, columns: x)."""

    x_input: str
    x_values: FloatArray
    y_input: str
    y_values: FloatArray
    difference: FloatArray   # (len(y), len(x))
    replace: np.ndarray      # (len(y), len(x)) bool
    x_estimate: float = math.nan
    y_estimate: float = math.nan


@dataclass(frozen=True)
class InputSummary:
    address: str
    distribution: Distribution
    estimate: float
    mean: float
    p10: float
    p90: float
    bounds: str


@dataclass(frozen=True)
class RiskResult:
    """Monte Carlo, tornado, breakevens and two-way map of one study (docs/method.md §12)."""

    basis: Basis
    decision_rule: str
    alternatives: tuple[tuple[str, int], ...]        # (name, max_life)
    challengers: tuple[str, ...]
    simulation: Simulation
    base_difference: float
    base_action: Action
    inputs: tuple[InputSummary, ...]
    tornado: tuple[TornadoBar, ...]
    breakeven: dict[str, float | None]
    breakeven_ranges: dict[str, tuple[float, float]]
    two_way: TwoWayMap | None
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def probability_replace(self) -> float:
        return self.simulation.probability_replace

    def difference_summary(self) -> dict[str, float | None]:
        """Percentiles, mean (with its standard error), standard deviation, min and max of
        the finite AW differences (None when there are none)."""
        d = self.simulation.difference
        d = d[np.isfinite(d)]
        if d.size == 0:
            empty: dict[str, float | None] = {f"p{p}": None for p in PERCENTILES}
            return empty | {
                "mean": None, "mean_standard_error": None, "standard_deviation": None,
                "min": None, "max": None}
        q = np.percentile(d, PERCENTILES)
        sd = float(np.std(d, ddof=1)) if d.size > 1 else 0.0
        out: dict[str, float | None] = {f"p{p}": float(v) for p, v in zip(PERCENTILES, q,
                                                                          strict=True)}
        out |= {"mean": float(np.mean(d)), "mean_standard_error": sd / math.sqrt(d.size),
                "standard_deviation": sd, "min": float(d.min()), "max": float(d.max())}
        return out

    def histogram(self, bins: int = HISTOGRAM_BINS) -> tuple[np.ndarray, FloatArray]:
        d = self.simulation.difference
        d = d[np.isfinite(d)]
        if d.size == 0:
            return np.zeros(0, dtype=int), np.zeros(0)
        lo, hi = float(d.min()), float(d.max())
        if hi - lo < 0.01:
            lo, hi = lo - 0.5, hi + 0.5
        counts, edges = np.histogram(d, bins=bins, range=(lo, hi))
        return counts, edges

    def economic_life_counts(self) -> dict[str, list[int]]:
        """Per alternative: how many trials had ESL 1, 2, ..., max_life."""
        return {name: np.bincount(self.simulation.economic_life[name],
                                  minlength=life + 1)[1:].tolist()
                for name, life in self.alternatives}

    def best_challenger_counts(self) -> dict[str, int]:
        counts = np.bincount(self.simulation.best_challenger, minlength=len(self.challengers))
        return {name: int(c) for name, c in zip(self.challengers, counts, strict=True)}


# --------------------------------------------------------------------------- the study
# --------------------------------------------------------------------------- technology plan
@dataclass(frozen=True)
class PlanStep:
    """One plan year: ``action`` at its start; the machine then in service and its age at its end.

    ``challenger`` and ``vintage`` are None while the defender stays in service.
    """

    year: int
    action: Action
    challenger: str | None
    vintage: int | None
    age_after: int



@dataclass(frozen=True)
class PlanSegment:
    """One machine's time in service within the plan: plan years ``start`` to ``end`` (exclusive)."""

    name: str
    role: Literal["defender", "challenger"]
    vintage: int | None
    start: int
    end: int


@dataclass(frozen=True)
class TechnologyPlan:
    """The optimal plan over the horizon and the comparisons the report needs.

    Money in the study's currency at time 0 (constant money); ``annual_worth``
    is ``present_worth`` (A/P,``rate``,H).  ``change_rates``: (name, gP, gC)
    per challenger.
    """

    horizon: int
    basis: Literal["before-tax", "after-tax"]
    rate: float
    defender: str
    present_worth: float
    annual_worth: float
    policy: tuple[PlanStep, ...]
    best_replace_now_present_worth: float
    best_wait_present_worth: float
    no_change_present_worth: float
    change_rates: tuple[tuple[str, float, float], ...]

    @property
    def first_action(self) -> Action:
        return self.policy[0].action

    @property
    def value_of_change(self) -> float:
        """Best PW with the change rates minus best PW if every future model were today's."""
        return self.present_worth - self.no_change_present_worth

    @property
    def waiting_gain(self) -> float:
        """Best plan that waits minus best plan that replaces now (positive: waiting pays)."""
        return self.best_wait_present_worth - self.best_replace_now_present_worth

    def segments(self) -> tuple[PlanSegment, ...]:
        """The machines of the plan in order, each with its years in service."""
        out: list[PlanSegment] = []
        start, name, vintage = 0, self.defender, None
        role: Literal["defender", "challenger"] = "defender"
        for step in self.policy:
            if step.action == "replace":
                if step.year > start:
                    out.append(PlanSegment(name, role, vintage, start, step.year))
                start, name, vintage = step.year, step.challenger or name, step.vintage
                role = "challenger"
        out.append(PlanSegment(name, role, vintage, start, self.horizon))
        return tuple(out)


@dataclass(frozen=True)
class StudyResult:
    """Everything computed for one study."""

    study: Study
    before_tax: BasisResult
    after_tax: BasisResult | None
    risk: RiskResult | None
    warnings: tuple[str, ...]
    technology: TechnologyPlan | None = None

    @cached_property
    def fingerprint(self) -> str:
        """SHA-256 of the study's canonical JSON (``core.studyfile.fingerprint``), computed
        when first read (a fleet's results need it only when written out)."""
        return fingerprint(self.study)

    @property
    def decision(self) -> BasisResult:
        """The basis the recommendation rests on: after tax when the study has tax."""
        return self.after_tax if self.after_tax is not None else self.before_tax

    # Shorthands for the figures most views read.
    @property
    def recommendation(self) -> Recommendation:
        return self.decision.recommendation

    @property
    def before_tax_recommendation(self) -> Recommendation:
        return self.before_tax.recommendation

    @property
    def study_period_options(self) -> tuple[StudyOption, ...]:
        return self.decision.study_period_options

    @property
    def rate(self) -> float:
        """The before-tax rate (the MARR; real when the study has inflation)."""
        return self.before_tax.rate

    @property
    def alternatives(self) -> tuple[AlternativeResult, ...]:
        """The before-tax alternatives (``decision.alternatives`` for the deciding basis)."""
        return self.before_tax.alternatives

    @property
    def defender(self) -> AlternativeResult:
        return self.before_tax.defender

    @property
    def challengers(self) -> tuple[AlternativeResult, ...]:
        return self.before_tax.challengers

    @property
    def ranking(self) -> list[AlternativeResult]:
        return self.before_tax.ranking

    def alternative(self, name: str) -> AlternativeResult:
        return self.before_tax.alternative(name)
