"""The result of a replacement study: everything a view, the memo or the CLI shows.

Nothing downstream recomputes economics; it reads these objects.  Arrays are
indexed by retention year k-1 (k = 1..n).  AW is signed (costs negative);
EAC = -AW.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from core.estimates import Study

Action = Literal["keep", "replace"]
Basis = Literal["before-tax", "after-tax"]


def _r(x: float | None, digits: int = 4) -> float | None:
    return None if x is None else round(float(x), digits)


def _list(a: np.ndarray, digits: int = 4) -> list[float]:
    """``[round(float(v), digits) for v in a]``, vectorised.

    np.round (x * 10^d, rint, / 10^d) gives the same double as Python's correctly rounded
    ``round`` unless x * 10^d lies within a few ulps of a half (or beyond 2^52), so those
    few elements are rounded by Python.

    >>> _list(np.array([41943.78005, -29413.33365, 0.123456, 2.5e12]))
    [41943.7801, -29413.3337, 0.1235, 2500000000000.0]
    """
    x = np.asarray(a, dtype=float).ravel()
    scaled = x * 10.0**digits
    values = np.round(x, digits).tolist()
    tolerance = 4.0 * np.abs(np.spacing(scaled))
    risky = ~(np.abs(scaled - np.floor(scaled) - 0.5) > tolerance) | ~(np.abs(scaled) < 2.0**52)
    for k in np.flatnonzero(risky).tolist():
        values[k] = round(float(x[k]), digits)
    return values


@dataclass(frozen=True)
class AlternativeResult:
    """One alternative's AW for every retention k = 1..n, its parts and its ESL."""

    name: str
    role: Literal["defender", "challenger"]
    price: float
    max_life: int
    market_values: np.ndarray
    operating_costs: np.ndarray
    extra_costs: np.ndarray
    annual_worth: np.ndarray
    capital_recovery: np.ndarray
    operating: np.ndarray
    marginal_cost: np.ndarray
    economic_life: int
    annual_worth_at_economic_life: float
    rank: int = 0
    after_tax: Any = None

    @property
    def equivalent_annual_cost(self) -> np.ndarray:
        return -self.annual_worth

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "name": self.name,
            "role": self.role,
            "annual_worth": _list(self.annual_worth),
            "economic_life": int(self.economic_life),
            "annual_worth_at_economic_life": _r(self.annual_worth_at_economic_life),
            "rank": self.rank,
            "capital_recovery": _list(self.capital_recovery),
            "operating_annual_worth": _list(self.operating),
            "marginal_cost": _list(self.marginal_cost),
            "market_values": _list(self.market_values),
            "operating_costs": _list(self.operating_costs),
            "extra_costs": _list(self.extra_costs),
        }
        if self.after_tax is not None:
            out["after_tax"] = self.after_tax.to_json()
        return out


@dataclass(frozen=True)
class StudyOption:
    """One study-period option: keep the defender j years, then a challenger for T-j years."""

    defender_years: int
    challenger: str | None
    challenger_years: int
    annual_worth: float | None
    feasible: bool
    reason: str = ""

    def to_json(self) -> dict[str, Any]:
        return {"defender_years": self.defender_years, "challenger": self.challenger,
                "challenger_years": self.challenger_years,
                "annual_worth": _r(self.annual_worth), "feasible": self.feasible,
                "reason": self.reason}


@dataclass(frozen=True)
class Recommendation:
    """The decision, its one-sentence reason, and the figures that back it."""

    action: Action
    challenger: str | None
    defender_years: int | None
    replacement_value: float | None
    basis: Basis
    reason: str
    best_challenger: str
    planned_defender_years: int
    one_more_year: dict[str, Any] = field(default_factory=dict)
    study_period: int | None = None

    def to_json(self) -> dict[str, Any]:
        return {"action": self.action, "challenger": self.challenger,
                "defender_years": self.defender_years,
                "replacement_value": _r(self.replacement_value, 2),
                "basis": self.basis, "reason": self.reason,
                "best_challenger": self.best_challenger,
                "planned_defender_years": self.planned_defender_years,
                "study_period": self.study_period,
                "one_more_year": {k: (_r(v, 2) if isinstance(v, float) else v)
                                  for k, v in self.one_more_year.items()}}


@dataclass(frozen=True)
class StudyResult:
    """Everything computed for one study."""

    study: Study
    rate: float
    alternatives: tuple[AlternativeResult, ...]
    recommendation: Recommendation
    before_tax_recommendation: Recommendation
    study_period_options: tuple[StudyOption, ...]
    warnings: tuple[str, ...]
    fingerprint: str
    after_tax: Any = None
    risk: Any = None
    technology: Any = None

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

    def to_json(self) -> dict[str, Any]:
        """The docs/method.md §6 object of one study (plus a few extra, clearly named keys)."""
        out: dict[str, Any] = {
            "title": self.study.title,
            "fingerprint": self.fingerprint,
            "marr": self.study.marr,
            "rate_used": _r(self.rate, 10),
            "study_period": self.study.study_period,
            "alternatives": [a.to_json() for a in self.alternatives],
            "recommendation": self.recommendation.to_json(),
            "study_period_options": [o.to_json() for o in self.study_period_options],
            "warnings": list(self.warnings),
        }
        if self.after_tax is not None:
            out["before_tax_recommendation"] = self.before_tax_recommendation.to_json()
        if self.risk is not None:
            out["risk"] = self.risk.to_json()
        if self.technology is not None:
            out["technology_plan"] = self.technology.to_json()
        return out
