"""The estimates of a replacement study, as frozen dataclasses.

Money is in one currency unit per study, years are whole years from today
(year 0), and every cost is a positive number (the engine applies the sign:
outflows negative).  See docs/method.md §2 and §5.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

import numpy as np

from core.cashflows import declining_market_values, geometric_costs, gradient_costs

Role = Literal["defender", "challenger"]
DepreciationMethod = Literal["straight_line", "macrs", "declining_balance"]
MoneyBasis = Literal["constant", "then-current"]
DistributionKind = Literal["triangular", "uniform", "normal", "pert", "lognormal"]


@dataclass(frozen=True, slots=True)
class MarketValues:
    """End-of-year market values S_1..S_n: explicit, or S_k = P(1-d)^k from a decline rate d.

    >>> MarketValues(decline_rate=0.5).array(100.0, 3).tolist()
    [50.0, 25.0, 12.5]
    """

    values: tuple[float, ...] | None = None
    decline_rate: float | None = None

    def array(self, price: float, life: int) -> np.ndarray:
        if self.values is not None:
            return np.asarray(self.values[:life], dtype=float)
        rate = 0.0 if self.decline_rate is None else self.decline_rate
        return declining_market_values(price, rate, np.arange(1, life + 1, dtype=float))


@dataclass(frozen=True, slots=True)
class OperatingCosts:
    """Yearly operating costs C_1..C_n (positive = cost).

    Explicit ``values``; or ``first`` with an arithmetic ``gradient``
    (C_j = first + (j-1)G); or ``first`` with geometric ``growth``
    (C_j = first(1+g)^(j-1)); or ``first`` alone (level).

    >>> OperatingCosts(first=100.0, gradient=10.0).array(3).tolist()
    [100.0, 110.0, 120.0]
    >>> [round(c, 2) for c in OperatingCosts(first=100.0, growth=0.1).array(3).tolist()]
    [100.0, 110.0, 121.0]
    """

    values: tuple[float, ...] | None = None
    first: float | None = None
    gradient: float | None = None
    growth: float | None = None

    def array(self, life: int) -> np.ndarray:
        if self.values is not None:
            return np.asarray(self.values[:life], dtype=float)
        years = np.arange(life, dtype=float)
        first = 0.0 if self.first is None else self.first
        if self.growth is not None:
            return geometric_costs(first, self.growth, years)
        return gradient_costs(first, 0.0 if self.gradient is None else self.gradient, years)


@dataclass(frozen=True, slots=True)
class ExtraCost:
    """A one-off cost (overhaul, retrofit, compliance upgrade) at the end of ``year``."""

    year: int
    amount: float
    label: str = ""


@dataclass(frozen=True, slots=True)
class Depreciation:
    """Tax depreciation of one asset (used only when the study has ``tax``).

    ``basis`` is the depreciable tax basis (a challenger's defaults to its
    first cost); ``age`` is the number of tax years already claimed (the
    defender's age today); ``years`` is the recovery period for straight line
    and declining balance; ``macrs_class`` the GDS property class; ``rate`` the
    declining-balance rate per year; ``salvage`` the straight-line tax salvage.
    """

    method: DepreciationMethod
    basis: float | None = None
    years: int | None = None
    age: int = 0
    salvage: float = 0.0
    macrs_class: int | None = None
    rate: float | None = None


@dataclass(frozen=True, slots=True)
class Technology:
    """Technological change for the multi-year plan (docs/method.md §11).

    A challenger bought in plan year t (vintage t) costs P(1+gP)^t, sells for
    S_k(1+gP)^t at age k and runs for C_j(1+gC)^t in its year of age j.
    ``horizon`` H is the plan length in years (1..60); in a challenger's own
    block it may be left out (the study's block gives it).
    """

    horizon: int | None
    first_cost_change: float = 0.0
    operating_cost_change: float = 0.0


@dataclass(frozen=True, slots=True)
class Alternative:
    """The defender (priced at today's market value) or a challenger (at first cost)."""

    name: str
    role: Role
    price: float
    max_life: int
    market_values: MarketValues = field(default_factory=MarketValues)
    operating_costs: OperatingCosts = field(default_factory=OperatingCosts)
    extra_costs: tuple[ExtraCost, ...] = ()
    depreciation: Depreciation | None = None
    technology: Technology | None = None

    def market_value_array(self) -> np.ndarray:
        """S_1..S_n for n = max_life."""
        return self.market_values.array(self.price, self.max_life)

    def operating_cost_array(self) -> np.ndarray:
        """C_1..C_n for n = max_life (positive = cost)."""
        return self.operating_costs.array(self.max_life)

    def extra_cost_array(self) -> np.ndarray:
        """X_1..X_n for n = max_life; several extra costs in one year add up."""
        out = np.zeros(self.max_life)
        for extra in self.extra_costs:
            if 1 <= extra.year <= self.max_life:
                out[extra.year - 1] += extra.amount
        return out

    def cost_array(self) -> np.ndarray:
        """C_j + X_j for j = 1..n."""
        return self.operating_cost_array() + self.extra_cost_array()


@dataclass(frozen=True, slots=True)
class Tax:
    """One effective income-tax rate and the after-tax MARR."""

    rate: float
    after_tax_marr: float


@dataclass(frozen=True, slots=True)
class Inflation:
    """General inflation rate f and the money the estimates are stated in."""

    rate: float
    estimates: MoneyBasis = "constant"


@dataclass(frozen=True, slots=True)
class Distribution:
    """A probability distribution for one uncertain input (parameters as in docs/method.md §5)."""

    kind: DistributionKind
    params: tuple[float, ...]


@dataclass(frozen=True, slots=True)
class Uncertainty:
    """Monte Carlo settings: trial count, seed, and the distribution of each addressed input."""

    trials: int
    seed: int | None
    inputs: tuple[tuple[str, Distribution], ...]


@dataclass(frozen=True, slots=True)
class Study:
    """One replacement study: a defender, one or more challengers, MARR and options."""

    title: str
    marr: float
    defender: Alternative
    challengers: tuple[Alternative, ...]
    study_period: int | None = None
    tax: Tax | None = None
    inflation: Inflation | None = None
    uncertainty: Uncertainty | None = None
    notes: str = ""
    technology: Technology | None = None

    @property
    def alternatives(self) -> tuple[Alternative, ...]:
        return (self.defender, *self.challengers)

    def alternative(self, name: str) -> Alternative:
        for alt in self.alternatives:
            if alt.name == name:
                return alt
        raise KeyError(name)
