"""The option table of a capital plan: every asset's replacement options as arrays.

Rows are assets, columns option slots (docs/method.md §10).  Without a study
period, slot y (y = 0..min(H-1, n_D)) is "replace in plan year y", worth

    V_a(0) = 0,   V_a(y) = PW_D(y) - AW_c (P/A,i,y)            (core.decision.keep_values)

and slot H, when n_D >= H, is "after the horizon", worth max_{H<=y<=n_D} V_a(y) with
no capital inside the horizon.  With a study period T, each feasible option
(j, c) is worth (AW_option - AW of the best replace-now option)(P/A,i,T); options
with j >= H (or keeping the defender the whole period) form one after-horizon slot.

Capital of an option in year y is the chosen challenger's first cost in the study's
money, P (1+f)^y for a then-current study; net capital subtracts the defender's sale
proceeds S_y (S_0 = its market value today).  Values and capital are signed as
money: a larger value is better.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from core.decision import keep_values
from core.factors import pa
from core.inflation import to_then_current
from core.plan.inputs import AssetInput

AFTER = -1  #: the year code of "after the horizon"


@dataclass(frozen=True)
class OptionTable:
    """Assets x option slots.  ``year`` is the plan year (AFTER = after the horizon);
    ``valid`` marks real options (padding is invalid); ``challenger`` names the
    challenger each option buys (None = no purchase inside the horizon)."""

    horizon: int
    value: np.ndarray
    year: np.ndarray
    capital: np.ndarray
    net_capital: np.ndarray
    valid: np.ndarray
    challenger: np.ndarray
    site: tuple[str | None, ...]
    forced: np.ndarray
    title: tuple[str, ...] = ()

    @property
    def size(self) -> int:
        return int(self.value.shape[0])

    def best(self, allowed: np.ndarray | None = None) -> np.ndarray:
        """Each asset's best allowed slot: the largest value to the cent, first on a tie
        (the same rule as the study's planned year)."""
        ok = self.valid if allowed is None else self.valid & allowed
        score = np.where(ok, np.round(np.where(ok, self.value, 0.0), 2), -np.inf)
        return np.argmax(score, axis=1)


def option_table(assets: Sequence[AssetInput], horizon: int) -> OptionTable:
    """Build the option table of ``assets`` over plan years 0..horizon-1.

    >>> from core.plan.inputs import AssetInput
    >>> a = AssetInput("Pump", None, None, "", "before-tax", 0.0, "Old", np.array([-100.0,
    ...     -120.0]), "New", -110.0, (("New", 500.0),), 1.0, np.array([50.0, 40.0, 30.0]), 2,
    ...     None, (), 1)
    >>> t = option_table([a], 2)
    >>> t.value[0, :2].tolist(), t.capital[0, :2].tolist(), t.net_capital[0, :2].tolist()
    ([0.0, 10.0], [500.0, 500.0], [450.0, 460.0])
    >>> bool(t.valid[0, 2]), t.value[0, 2].item()    # n_D = 2 >= H: after the horizon
    (True, -20.0)
    """
    h = int(horizon)
    if h < 1:
        raise ValueError("the horizon must be at least 1 year")
    n = len(assets)
    plain = [k for k, a in enumerate(assets) if a.study_period is None]
    extra = max([len(a.period_options) for a in assets if a.study_period is not None] or [0])
    width = max(h + 1, extra)
    value = np.zeros((n, width))
    year = np.full((n, width), AFTER, dtype=np.int64)
    capital = np.zeros((n, width))
    net = np.zeros((n, width))
    valid = np.zeros((n, width), dtype=bool)
    challenger = np.full((n, width), None, dtype=object)

    if plain:
        idx = np.array(plain)
        life = np.array([assets[k].defender_life for k in plain])
        top = int(life.max())
        aw = np.full((len(plain), top), np.nan)
        s = np.full((len(plain), top + 1), np.nan)
        for row, k in enumerate(plain):
            a = assets[k]
            aw[row, :a.defender_life] = a.defender_aw[:a.defender_life]
            s[row, :a.defender_life + 1] = a.market_values[:a.defender_life + 1]
        rate = np.array([assets[k].rate for k in plain])
        c_aw = np.array([assets[k].challenger_aw for k in plain])
        annuity = pa(rate[:, None], np.arange(1, top + 1))
        v = keep_values(aw, c_aw, annuity)                     # (m, top + 1), NaN past n_D
        cols = min(h, top + 1)
        years = np.arange(cols)
        inside = years[None, :] <= life[:, None]
        price = np.array([assets[k].price(assets[k].challenger) for k in plain])
        growth = np.array([assets[k].growth for k in plain])
        cap = to_then_current(price[:, None], growth - 1.0, years)   # P (1+f)^y
        value[idx, :cols] = np.where(inside, v[:, :cols], 0.0)
        year[idx, :cols] = np.where(inside, years[None, :], AFTER)
        capital[idx, :cols] = np.where(inside, cap, 0.0)
        net[idx, :cols] = np.where(inside, cap - np.nan_to_num(s[:, :cols]), 0.0)
        valid[idx, :cols] = inside
        for row, k in enumerate(plain):
            challenger[k, :cols][inside[row]] = assets[k].challenger
        later = life >= h
        if np.any(later):
            tail = np.nanmax(np.where(np.arange(top + 1)[None, :] >= h, v, -np.inf)[later], axis=1)
            value[idx[later], h] = tail
            valid[idx[later], h] = True

    for k, a in enumerate(assets):
        if a.study_period is None:
            continue
        _period_options(a, h, k, value, year, capital, net, valid, challenger)
    forced = np.array([a.must for a in assets], dtype=bool)
    return OptionTable(h, value, year, capital, net, valid, challenger,
                       tuple(a.site for a in assets), forced, tuple(a.title for a in assets))


def _period_options(a: AssetInput, h: int, k: int, value: np.ndarray, year: np.ndarray,
                    capital: np.ndarray, net: np.ndarray, valid: np.ndarray,
                    challenger: np.ndarray) -> None:
    """Fill row ``k`` with the study-period options of ``a`` (in the study's order)."""
    opts = a.period_options
    if not opts:
        return
    now = [o.annual_worth for o in opts if o.defender_years == 0 and o.challenger is not None]
    if not now:  # no replace-now option: measure from the earliest feasible one
        first = min(o.defender_years for o in opts)
        now = [o.annual_worth for o in opts if o.defender_years == first]
    ref = max(now)
    factor = float(pa(a.rate, a.study_period or 1))
    slot = 0
    after_slot = -1
    for o in opts:
        worth = (o.annual_worth - ref) * factor
        if o.challenger is None or o.defender_years >= h:
            if after_slot < 0:
                after_slot = slot
                slot += 1
                value[k, after_slot] = worth
                valid[k, after_slot] = True
            elif worth > value[k, after_slot]:
                value[k, after_slot] = worth
            continue
        j = o.defender_years
        cap = float(to_then_current([a.price(o.challenger)], a.growth - 1.0, [j])[0])
        value[k, slot], year[k, slot], capital[k, slot] = worth, j, cap
        net[k, slot] = cap - float(a.market_values[j])
        valid[k, slot] = True
        challenger[k, slot] = o.challenger
        slot += 1
