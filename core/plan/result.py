"""The capital plan as typed, frozen records (what the CLI, memo, workbook export and window read)."""

from __future__ import annotations

from dataclasses import dataclass

NO_SITE = "(no site)"


def _r(x: float | None, digits: int = 2) -> float | None:
    return None if x is None else round(float(x), digits)


@dataclass(frozen=True)
class PlannedAsset:
    """One asset in the plan.  Years are plan years (0 = the study year; None = after the
    horizon); value is relative to replacing now on the study's decision basis."""

    title: str
    tag: str | None
    site: str | None
    challenger: str | None
    year: int | None
    capital: float
    net_capital: float
    value: float
    best_year: int | None
    best_value: float
    deferral_cost: float
    forced: bool
    forced_reason: str
    pinned: bool
    rule_year: int | None
    basis: str

    @property
    def deferred(self) -> bool:
        return self.deferral_cost > 0.005 and self.year != self.best_year

    def to_json(self) -> dict[str, object]:
        return {"title": self.title, "tag": self.tag, "site": self.site,
                "challenger": self.challenger, "year": self.year,
                "capital": _r(self.capital), "net_capital": _r(self.net_capital),
                "value": _r(self.value), "best_year": self.best_year,
                "deferral_cost": _r(self.deferral_cost), "forced": self.forced}


@dataclass(frozen=True)
class SiteCapital:
    """Gross capital of one site in each plan year."""

    site: str
    capital: tuple[float, ...]


@dataclass(frozen=True)
class CapitalPlan:
    """The best plan under the budgets, and what it is compared with."""

    first_year: int
    horizon: int
    budgets: tuple[float | None, ...]
    net: bool
    per_site_limit: int | None
    basis_note: str
    status: str
    gap: float
    objective: float
    unconstrained_objective: float
    budget_cost: float
    rule_objective: float | None
    rule_gap: float | None
    capital_by_year: tuple[float, ...]
    net_capital_by_year: tuple[float, ...]
    unconstrained_capital_by_year: tuple[float, ...]
    capital_by_site: tuple[SiteCapital, ...]
    assets: tuple[PlannedAsset, ...]

    @property
    def calendar_years(self) -> list[int]:
        return [self.first_year + y for y in range(self.horizon)]

    @property
    def deferred(self) -> list[PlannedAsset]:
        return [a for a in self.assets if a.deferred]

    @property
    def forced(self) -> list[PlannedAsset]:
        return [a for a in self.assets if a.forced]

    def to_json(self) -> dict[str, object]:
        """The docs/method.md §10 object printed by ``tenure plan --json``."""
        return {"plan": {
            "first_year": self.first_year, "horizon": self.horizon,
            "budgets": [_r(b) for b in self.budgets], "basis_note": self.basis_note,
            "status": self.status, "objective": _r(self.objective),
            "unconstrained_objective": _r(self.unconstrained_objective),
            "budget_cost": _r(self.budget_cost), "rule_objective": _r(self.rule_objective),
            "rule_gap": _r(self.rule_gap),
            "capital_by_year": [_r(v) for v in self.capital_by_year],
            "net_capital_by_year": [_r(v) for v in self.net_capital_by_year],
            "capital_by_site": {s.site: [_r(v) for v in s.capital] for s in self.capital_by_site},
            "assets": [a.to_json() for a in self.assets]}}
