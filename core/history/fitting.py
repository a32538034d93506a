"""Fitting cost and resale trends to an asset's history, proposed as estimates.

Three models, all ordinary least squares on straight lines (the Gauss-Markov
estimator; the tests hold them equal to ``numpy.polyfit`` and
``scipy.stats.linregress``):

* arithmetic gradient of operating cost, money per year per year of age:
  ``C_j = a + G (j - 1)``, j = 1, 2, ... the year of age;
* geometric growth of operating cost, a fraction per year:
  ``ln C_j = ln a + (j - 1) ln(1 + g)`` (log-linear, C_j > 0);
* constant market-value decline rate d per year:
  ``ln MV_k = ln P + k ln(1 - d)`` (log-linear, MV_k > 0, k = years in service),
  with P fitted, or fixed at a known price (a line through ``ln P``).

The core functions are vectorised along the last axis (leading axes are a
batch of independent series). :class:`TrendFit` keeps one fit with its data,
R^2 and residuals (in money, observed minus fitted) and proposes it as an
``OperatingCosts`` / ``MarketValues`` estimate that the user accepts or edits.
R^2 is on the money scale for every model so the two cost models compare
fairly; the geometric fit also reports its log-scale R^2.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from core.errors import StudyError
from core.estimates import MarketValues, OperatingCosts

Model = Literal["arithmetic", "geometric", "decline"]


def _line(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares intercept and slope of y on x along the last axis."""
    xm = x.mean(axis=-1, keepdims=True)
    ym = y.mean(axis=-1, keepdims=True)
    sxx = ((x - xm) ** 2).sum(axis=-1)
    sxy = ((x - xm) * (y - ym)).sum(axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        slope = sxy / sxx
    return ym[..., 0] - slope * xm[..., 0], slope


def r_squared(y: np.ndarray, fitted: np.ndarray) -> np.ndarray:
    """Coefficient of determination R^2 = 1 - SS_res / SS_tot along the last axis.

    A constant series fitted exactly has R^2 = 1.

    >>> float(r_squared(np.array([1.0, 2.0, 3.0]), np.array([1.0, 2.0, 3.0])))
    1.0
    """
    y = np.asarray(y, dtype=float)
    ss_res = ((y - fitted) ** 2).sum(axis=-1)
    ss_tot = ((y - y.mean(axis=-1, keepdims=True)) ** 2).sum(axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        r2 = 1.0 - ss_res / ss_tot
    return np.where(ss_tot > 0, r2, np.where(ss_res <= 1e-12 * (1 + ss_res), 1.0, 0.0))


def arithmetic_fit(age: np.ndarray, cost: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Least-squares ``C_j = a + G (j - 1)``: returns (a, G, R^2), vectorised on the last axis.

    ``age`` is the year of age j (1 = first year in service), ``cost`` the
    yearly operating cost in money per year; a is money per year, G money per
    year per year of age.

    >>> a, g, r2 = arithmetic_fit(np.array([1, 2, 3, 4]), np.array([100., 112., 118., 130.]))
    >>> round(float(a), 2), round(float(g), 2), round(float(r2), 4)
    (100.6, 9.6, 0.9846)
    """
    x = np.asarray(age, dtype=float) - 1.0
    y = np.asarray(cost, dtype=float)
    x = np.broadcast_to(x, y.shape)
    a, g = _line(x, y)
    return a, g, r_squared(y, a[..., None] + g[..., None] * x)


def geometric_fit(age: np.ndarray, cost: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Log-linear ``C_j = a (1 + g)^(j - 1)``: returns (a, g, R^2 on money), last axis.

    Fits ``ln C_j = ln a + (j - 1) ln(1 + g)`` by least squares; every C_j must be > 0.

    >>> a, g, r2 = geometric_fit(np.array([1, 2, 3]), np.array([100., 110., 121.]))
    >>> round(float(a), 6), round(float(g), 6), round(float(r2), 6)
    (100.0, 0.1, 1.0)
    """
    x = np.asarray(age, dtype=float) - 1.0
    y = np.asarray(cost, dtype=float)
    x = np.broadcast_to(x, y.shape)
    b0, b1 = _line(x, np.log(y))
    a, g = np.exp(b0), np.expm1(b1)
    return a, g, r_squared(y, a[..., None] * np.power(1.0 + g[..., None], x))


def decline_fit(age: np.ndarray, value: np.ndarray, price: float | np.ndarray | None = None
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Log-linear ``MV_k = P (1 - d)^k``: returns (P, d, R^2 on money), last axis.

    ``age`` k is whole years in service (0 = new), ``value`` the market value
    (money) at that age, each > 0. With ``price`` given, P is fixed and only
    the slope is fitted (least squares of ``ln(MV_k / P) = k ln(1 - d)``
    through the origin); otherwise P is fitted too.

    >>> p, d, r2 = decline_fit(np.array([1, 2, 3]), np.array([80., 64., 51.2]))
    >>> round(float(p), 6), round(float(d), 6)
    (100.0, 0.2)
    >>> p, d, r2 = decline_fit(np.array([1, 2]), np.array([80., 64.]), price=100.0)
    >>> round(float(d), 6)
    0.2
    """
    k = np.asarray(age, dtype=float)
    y = np.asarray(value, dtype=float)
    k = np.broadcast_to(k, y.shape)
    ly = np.log(y)
    if price is None:
        b0, b1 = _line(k, ly)
        p = np.exp(b0)
    else:
        p = np.broadcast_to(np.asarray(price, dtype=float), y.shape[:-1])
        with np.errstate(invalid="ignore", divide="ignore"):
            b1 = (k * (ly - np.log(p)[..., None])).sum(axis=-1) / (k * k).sum(axis=-1)
    d = -np.expm1(b1)
    return p, d, r_squared(y, p[..., None] * np.power(1.0 - d[..., None], k))


@dataclass(frozen=True)
class TrendFit:
    """One fitted trend, its data and its quality, proposed as an estimate.

    ``params``: arithmetic {"first": a, "gradient": G}; geometric {"first": a,
    "growth": g}; decline {"price": P, "decline_rate": d}. ``ages`` and
    ``values`` are the data fitted, ``residuals`` observed minus fitted (money).
    """

    quantity: Literal["operating_costs", "market_values"]
    model: Model
    params: dict[str, float]
    r_squared: float
    ages: tuple[float, ...]
    values: tuple[float, ...]
    residuals: tuple[float, ...]
    r_squared_log: float | None = None
    tag: str = ""

    def fitted(self, ages: Iterable[float] | None = None) -> np.ndarray:
        """The fitted curve at ``ages`` (default: the ages fitted)."""
        x = np.asarray(self.ages if ages is None else list(ages), dtype=float)
        p = self.params
        if self.model == "arithmetic":
            return p["first"] + p["gradient"] * (x - 1.0)
        if self.model == "geometric":
            return p["first"] * np.power(1.0 + p["growth"], x - 1.0)
        return p["price"] * np.power(1.0 - p["decline_rate"], x)

    def operating_costs(self, age_now: int = 0) -> OperatingCosts:
        """The fit as the operating-cost estimate of an asset now ``age_now`` years old.

        Year 1 of the study is year of age ``age_now + 1``: first = C_{age_now+1}.

        >>> fit = fit_operating_costs([1, 2, 3], [100.0, 110.0, 120.0])
        >>> fit.operating_costs(age_now=2)
        OperatingCosts(values=None, first=120.0, gradient=10.0, growth=None)
        """
        if self.quantity != "operating_costs":
            raise ValueError("not an operating-cost fit")
        first = float(np.round(self.fitted([age_now + 1])[0], 2))
        if self.model == "arithmetic":
            return OperatingCosts(first=first, gradient=round(self.params["gradient"], 2))
        return OperatingCosts(first=first, growth=round(self.params["growth"], 6))

    def market_values(self) -> MarketValues:
        """The fit as a constant decline-rate market-value estimate."""
        if self.quantity != "market_values":
            raise ValueError("not a market-value fit")
        return MarketValues(decline_rate=round(self.params["decline_rate"], 6))

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "quantity": self.quantity, "model": self.model, "tag": self.tag,
            "params": {k: float(v) for k, v in self.params.items()},
            "r_squared": float(self.r_squared), "ages": list(self.ages),
            "values": list(self.values), "residuals": list(self.residuals)}
        if self.r_squared_log is not None:
            out["r_squared_log"] = float(self.r_squared_log)
        return out

    @classmethod
    def from_json(cls, obj: dict[str, Any]) -> TrendFit:
        return cls(obj["quantity"], obj["model"], dict(obj["params"]), obj["r_squared"],
                   tuple(obj["ages"]), tuple(obj["values"]), tuple(obj["residuals"]),
                   obj.get("r_squared_log"), obj.get("tag", ""))


def _data(ages: Iterable[float], values: Iterable[float], need: int, what: str,
          positive: bool) -> tuple[np.ndarray, np.ndarray]:
    x = np.asarray(list(ages), dtype=float)
    y = np.asarray(list(values), dtype=float)
    if x.shape != y.shape or x.ndim != 1:
        raise StudyError(what, "ages and values must be two lists of the same length")
    if not (np.isfinite(x).all() and np.isfinite(y).all()):
        raise StudyError(what, "ages and values must be finite numbers")
    if np.unique(x).size < need:
        raise StudyError(what, f"needs at least {need} different years of age, "
                               f"got {np.unique(x).size}")
    if positive and (y <= 0).any():
        raise StudyError(what, "a log-linear fit needs every value above zero")
    return x, y


def fit_operating_costs(ages: Iterable[float], costs: Iterable[float],
                        model: Literal["arithmetic", "geometric", "best"] = "arithmetic",
                        tag: str = "") -> TrendFit:
    """Fit yearly operating costs by year of age; ``model="best"`` keeps the higher R^2.

    >>> fit = fit_operating_costs([1, 2, 3, 4], [100., 112., 118., 130.])
    >>> fit.model, round(fit.params["gradient"], 2), round(fit.r_squared, 3)
    ('arithmetic', 9.6, 0.985)
    """
    if model == "best":
        x, y = _data(ages, costs, 2, "operating cost fit", False)
        fits = [fit_operating_costs(x, y, "arithmetic", tag)]
        if (y > 0).all():
            fits.append(fit_operating_costs(x, y, "geometric", tag))
        return max(fits, key=lambda f: f.r_squared)
    x, y = _data(ages, costs, 2, "operating cost fit", model == "geometric")
    if model == "arithmetic":
        a, g, r2 = arithmetic_fit(x, y)
        params, r2_log = {"first": float(a), "gradient": float(g)}, None
    elif model == "geometric":
        a, g, r2 = geometric_fit(x, y)
        params = {"first": float(a), "growth": float(g)}
        lx = x - 1.0
        b0, b1 = np.log(a), np.log1p(g)
        r2_log = float(r_squared(np.log(y), b0 + b1 * lx))
    else:
        raise StudyError("operating cost fit", f"unknown model '{model}'")
    fit = TrendFit("operating_costs", model, params, float(r2), tuple(x.tolist()),
                   tuple(y.tolist()), (), r2_log, tag)
    resid = y - fit.fitted()
    return TrendFit(fit.quantity, fit.model, fit.params, fit.r_squared, fit.ages, fit.values,
                    tuple(np.round(resid, 6).tolist()), r2_log, tag)


def fit_market_values(ages: Iterable[float], values: Iterable[float],
                      price: float | None = None, tag: str = "") -> TrendFit:
    """Fit a constant decline rate to resale quotes by years in service.

    >>> fit = fit_market_values([1, 2, 3], [80., 64., 51.2])
    >>> round(fit.params["decline_rate"], 4), fit.market_values()
    (0.2, MarketValues(values=None, decline_rate=0.2))
    """
    x, y = _data(ages, values, 1 if price is not None else 2, "market value fit", True)
    if price is not None and price <= 0:
        raise StudyError("market value fit", "the price must be above zero")
    if price is not None and not (x > 0).any():
        raise StudyError("market value fit", "needs a quote at least one year in service")
    p, d, r2 = decline_fit(x, y, price)
    fit = TrendFit("market_values", "decline", {"price": float(p), "decline_rate": float(d)},
                   float(r2), tuple(x.tolist()), tuple(y.tolist()), (), None, tag)
    resid = y - fit.fitted()
    return TrendFit(fit.quantity, fit.model, fit.params, fit.r_squared, fit.ages, fit.values,
                    tuple(np.round(resid, 6).tolist()), None, tag)
