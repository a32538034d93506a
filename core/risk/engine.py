"""The replacement decision for a whole batch of input values at once.

``Model(study)`` holds the study's estimates; ``Model.evaluate(values, size)``
takes, for any subset of the uncertain-input addresses (docs/method.md §5), an array
of ``size`` values each (the rest stay at their estimates) and returns every
alternative's AW schedule, every ESL and the decision for each of the ``size``
cases, without a Python loop over them.

How an input moves the cash flows:

- ``<name>.first_cost`` / ``<name>.market_value`` set the price P.  When that
  alternative's market values come from a decline rate d they follow it,
  S_k = P(1-d)^k; explicit market values stay as estimated.
- ``<name>.market_values.decline_rate`` sets d in S_k = P(1-d)^k.
- ``<name>.operating_costs.first`` / ``.gradient`` / ``.growth`` set C_1, G or g
  in C_j = C_1 + (j-1)G or C_j = C_1(1+g)^(j-1); extra costs stay as estimated.
- ``marr`` sets the interest rate (through ``core.inflation`` when the study has
  inflation; see ``_AfterTax`` for the after-tax MARR).

When the study has ``tax`` the decision rests on after-tax AW (in constant money
at the after-tax MARR), computed for the whole batch by
``core.aftertax.after_tax_annual_worth``, as the engine's after-tax study does;
otherwise on before-tax AW.  ``Model.basis`` says which.

The decision is that of ``core.decision`` (the rules every basis uses): without a study period, replace
when the best challenger's AW at its ESL beats the defender's AW at its ESL by
more than a cent (challengers ranked on AW at ESL, ties to the first listed).
With a study period T, every "keep the defender j years, then challenger c for
T-j years" option is valued, AW = [PW_D(j) + (P/F,i,j) PW_c(T-j)](A/P,i,T),
the best feasible option wins (ties to the earlier option, as in ``decide``)
and "replace" means the winner starts the challenger now (j = 0).

``difference`` is the figure the risk analysis reports: without a study period
the best challenger's AW at its ESL minus the defender's AW at its ESL; with a
study period the best "replace now" option's AW minus the best "keep at least a
year" option's AW.  Replace exactly when it is above a cent (up to the rounding
to cents of the two sides).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace

import numpy as np

from core import aftertax, depreciation
from core import inflation as infl
from core.annual_worth import annual_worth_parts
from core.cashflows import declining_market_values, geometric_costs, gradient_costs
from core.decision import (
    economic_life,
    first_best,
    option_grid,
    period_options,
    replaces,
)
from core.estimates import Alternative, MarketValues, OperatingCosts, Study
from core.factors import FactorTable, ap, factor_table
from core.results import Basis
from core.studyfile import split_address


@dataclass(frozen=True)
class Outcome:
    """The batch result: every array has ``size`` rows."""

    annual_worth: dict[str, np.ndarray]        # name -> (size, n)
    economic_life: dict[str, np.ndarray]       # name -> (size,) ints 1..n
    annual_worth_at_esl: dict[str, np.ndarray]  # name -> (size,)
    best_challenger: np.ndarray                 # (size,) index into study.challengers
    replace: np.ndarray                         # (size,) bool
    difference: np.ndarray                      # (size,) see module docstring (NaN if undefined)


class _Inflation:
    """The study's inflation conversion, applied to batches.

    ``core.inflation.before_tax_arrays`` (before tax) or ``then_current_arrays``
    (after tax) is probed with unit cash flows to get the year-by-year factors
    it applies to P, S_k and C_j + X_j (it is linear in them), and checked
    against the real estimates; the before-tax rate comes from
    ``core.inflation.before_tax_rate`` for each MARR value.
    """

    def __init__(self, study: Study, after_tax: bool) -> None:
        inflation = infl
        self.study = study
        self.module = inflation
        convert = inflation.then_current_arrays if after_tax else inflation.before_tax_arrays
        self.factors: dict[str, tuple[float, np.ndarray, np.ndarray]] = {}
        for alt in study.alternatives:
            n = alt.max_life
            probe = replace(alt, price=1.0, market_values=MarketValues(values=(1.0,) * n),
                            operating_costs=OperatingCosts(values=(1.0,) * n), extra_costs=(),
                            depreciation=None)
            fp_, fs, fc = convert(study, probe)
            self.factors[alt.name] = (float(fp_), np.asarray(fs, float), np.asarray(fc, float))
            price, s, c = convert(study, alt)
            ok = (np.isclose(price, alt.price * float(fp_))
                  and np.allclose(s, alt.market_value_array() * fs, rtol=1e-9, atol=1e-6)
                  and np.allclose(c, alt.cost_array() * fc, rtol=1e-9, atol=1e-6))
            if not ok:
                raise NotImplementedError(
                    "the inflation conversion is not a year-by-year scaling; the risk "
                    "analysis cannot vectorise it")
        self._base_rate = float(inflation.before_tax_rate(study))
        marr_probe = study.marr + 0.0123
        self._identity = (self._base_rate == study.marr and float(
            inflation.before_tax_rate(replace(study, marr=marr_probe))) == marr_probe)

    def rate(self, marr: np.ndarray | float) -> np.ndarray | float:
        if self._identity:
            return marr
        if np.ndim(marr) == 0 and float(marr) == self.study.marr:
            return self._base_rate
        flat = np.atleast_1d(np.asarray(marr, dtype=float))
        unique, inverse = np.unique(flat, return_inverse=True)
        rates = np.array([float(self.module.before_tax_rate(replace(self.study, marr=float(m))))
                          for m in unique])
        out = rates[inverse]
        return out.reshape(np.shape(marr)) if np.ndim(marr) else float(out[0])


class _AfterTax:
    """After-tax AW of a batch through ``core.aftertax.after_tax_annual_worth``.

    Flows in then-current money discounted at the after-tax (market) rate, AW for
    the decision in constant money at the after-tax MARR, exactly as
    the after-tax basis of ``core.study.run_studies``.  A challenger whose depreciation has no explicit
    basis is depreciated on its (sampled) first cost.  A ``marr`` input moves the
    after-tax MARR in proportion (after-tax MARR x sampled MARR / MARR; by the same
    difference when MARR is 0), since the study states both.
    """

    def __init__(self, study: Study) -> None:
        assert study.tax is not None
        self.study = study
        self.module = aftertax
        self.depreciation = depreciation
        self.tax_rate = float(study.tax.rate)
        self.after_tax_marr = float(study.tax.after_tax_marr)
        self.fixed = {a.name: depreciation.alternative_schedule(a) for a in study.alternatives}

    def rates(self, marr: np.ndarray | float) -> tuple[np.ndarray | float, np.ndarray | float]:
        """(decision rate, discount rate of the then-current flows)."""
        m0 = self.study.marr
        m = np.asarray(marr, dtype=float)
        i: np.ndarray | float = ((self.after_tax_marr * m / m0) if m0 != 0
                                 else self.after_tax_marr + (m - m0))
        if np.ndim(marr) == 0 and float(marr) == m0:
            i = self.after_tax_marr
        if self.study.inflation is None:
            return i, i
        return i, infl.market_rate(i, self.study.inflation.rate)

    def annual_worth(self, alt: Alternative, price: np.ndarray | float, s: np.ndarray,
                     c: np.ndarray, marr: np.ndarray | float) -> np.ndarray:
        dep = alt.depreciation
        if alt.role == "challenger" and dep is not None and dep.basis is None \
                and np.ndim(price) > 0:
            sched = self.depreciation.schedule(dep, np.asarray(price, float), alt.max_life)
        else:
            sched = self.fixed[alt.name]
        decision, discount = self.rates(marr)
        out = self.module.after_tax_annual_worth(
            price, s, c, sched.allowance, sched.book_value_0, self.tax_rate, discount,
            disposal_fraction=sched.disposal_fraction, defender=alt.role == "defender")
        years = np.arange(1, alt.max_life + 1, dtype=float)
        return out.present_worth * ap(np.asarray(decision, float)[..., None], years)


class Workspace:
    """Memory for the (size, n) batch arrays of ``Model.evaluate``, laid out trial-contiguous
    (each year a contiguous run of the trials) and kept from one call to the next (a new large
    array costs page faults on every chunk of trials).  Each call overwrites what the previous
    one left there: one workspace serves one thread, and an outcome is read before the next
    call with the same workspace."""

    def __init__(self) -> None:
        self._kept: dict[str, np.ndarray] = {}

    def get(self, key: str, size: int, n: int) -> np.ndarray:
        array = self._kept.get(key)
        if array is None or array.shape[0] < size or array.shape[1] < n:
            rows = max(size, 0 if array is None else array.shape[0])
            cols = max(n, 0 if array is None else array.shape[1])
            array = self._kept[key] = np.empty((cols, rows)).T
        return array[:size, :n]


class _Fresh(Workspace):
    """New trial-contiguous arrays on every request (an evaluation without a workspace)."""

    def get(self, key: str, size: int, n: int) -> np.ndarray:
        return np.empty((n, size)).T


class Model:
    """A study prepared for batch evaluation (see the module docstring).

    The batch arrays are laid out trial-contiguous (each year a contiguous run of the
    trials), so per-trial amounts broadcast over contiguous runs and the running sums add
    whole columns; the values do not depend on the layout.  What does not move with the
    inputs given to ``evaluate`` (the factor table at the study's MARR, the AW schedule of
    an alternative none of whose inputs is given) is computed once, when the model is made:
    after that ``evaluate`` only reads the model and writes into fresh arrays or the caller's
    ``Workspace``, so several threads may evaluate one model at once, each with its own
    workspace.
    """

    def __init__(self, study: Study) -> None:
        self.study = study
        self.names = [a.name for a in study.alternatives]
        self.after_tax = _AfterTax(study) if study.tax is not None else None
        self.basis: Basis = "after-tax" if self.after_tax is not None else "before-tax"
        self.inflation = (_Inflation(study, self.after_tax is not None)
                          if study.inflation is not None else None)
        self._extras = {a.name: a.extra_cost_array() for a in study.alternatives}
        self._years = {a.name: np.arange(1, a.max_life + 1, dtype=float)
                       for a in study.alternatives}
        self._width = max([a.max_life for a in study.alternatives] + [study.study_period or 0])
        self._inputs = {a.name: _addresses(a) for a in study.alternatives}
        self._base_factors = factor_table(self._rate(study.marr), self._width)
        self._fixed_rows = {a.name: self._schedule(a, {}, study.marr, self._base_factors, 1,
                                                   _Fresh())
                            for a in study.alternatives}

    # ------------------------------------------------------------------ inputs
    def estimate(self, address: str) -> float:
        """The study's own value of an uncertain input."""
        alt, suffix = split_address(address, self.study)
        if alt is None:
            return float(self.study.marr)
        return float(_get(alt, suffix))

    def _arrays(self, alt: Alternative, values: Mapping[str, np.ndarray], size: int,
                buffers: Workspace) -> tuple[np.ndarray | float, np.ndarray, np.ndarray]:
        """(P, S_k, C_j + X_j) of one alternative: (n,) or (size, n) trial-contiguous."""
        name = alt.name
        n = alt.max_life
        price_key = f"{name}.{'market_value' if alt.role == 'defender' else 'first_cost'}"
        price = values.get(price_key, alt.price)
        years = self._years[name]
        mv = alt.market_values
        if mv.values is not None:
            s = alt.market_value_array()
        else:
            d = values.get(f"{name}.market_values.decline_rate", mv.decline_rate or 0.0)
            batch = np.ndim(d) > 0 or np.ndim(price) > 0
            s = declining_market_values(np.asarray(price, float)[..., None],
                                        np.asarray(d, float)[..., None], years,
                                        out=buffers.get("S", size, n) if batch else None)
        oc = alt.operating_costs
        if oc.values is not None:
            c = alt.operating_cost_array() + self._extras[name]
        else:
            first = values.get(f"{name}.operating_costs.first", oc.first or 0.0)
            if oc.growth is not None:
                g = values.get(f"{name}.operating_costs.growth", oc.growth)
                batch = np.ndim(g) > 0 or np.ndim(first) > 0
                c = geometric_costs(np.asarray(first, float)[..., None],
                                    np.asarray(g, float)[..., None], years - 1.0,
                                    out=buffers.get("C", size, n) if batch else None)
            else:
                grad = values.get(f"{name}.operating_costs.gradient", oc.gradient or 0.0)
                batch = np.ndim(grad) > 0 or np.ndim(first) > 0
                c = gradient_costs(np.asarray(first, float)[..., None],
                                   np.asarray(grad, float)[..., None], years - 1.0,
                                   out=buffers.get("C", size, n) if batch else None)
            if batch:
                c += self._extras[name]
            else:
                c = c + self._extras[name]
        if self.inflation is not None:
            fp_, fs, fc = self.inflation.factors[name]
            price, s, c = np.asarray(price, float) * fp_, s * fs, c * fc
        return price, s, c

    # ------------------------------------------------------------------ decision
    def _rate(self, marr: np.ndarray | float) -> np.ndarray | float:
        """The rate the decision discounts at, for each MARR value."""
        if self.after_tax is not None:
            return self.after_tax.rates(marr)[0]
        return self.inflation.rate(marr) if self.inflation is not None else marr

    def _factors(self, values: Mapping[str, np.ndarray], rate: np.ndarray | float, size: int,
                 buffers: Workspace) -> FactorTable:
        """The factor table at the decision rate(s): once per model at the study's MARR."""
        if "marr" not in values:
            return self._base_factors
        if np.ndim(rate) == 0:
            return factor_table(rate, self._width)
        out = FactorTable(*(buffers.get(key, size, self._width)
                            for key in ("P/F", "P/A", "A/P", "A/F")))
        return factor_table(rate, self._width, out=out)

    def _annual_worth(self, alt: Alternative, values: Mapping[str, np.ndarray],
                      marr: np.ndarray | float, factors: FactorTable, size: int,
                      buffers: Workspace) -> np.ndarray:
        """AW_k of one alternative: (n,) when nothing of it moves, else (size, n)."""
        if "marr" not in values and not any(k in values for k in self._inputs[alt.name]):
            return self._fixed_rows[alt.name]
        return self._schedule(alt, values, marr, factors, size, buffers)

    def _schedule(self, alt: Alternative, values: Mapping[str, np.ndarray],
                  marr: np.ndarray | float, factors: FactorTable, size: int,
                  buffers: Workspace) -> np.ndarray:
        """AW_k of one alternative computed from the values: (n,) or (size, n)."""
        price, s, c = self._arrays(alt, values, size, buffers)
        if self.after_tax is not None:
            return self.after_tax.annual_worth(alt, price, s, c, marr)
        n = alt.max_life
        head = factors.head(n)
        batch = np.ndim(price) > 0 or s.ndim > 1 or c.ndim > 1 or head.discount.ndim > 1
        out = ((buffers.get(f"AW {alt.name}", size, n), buffers.get("CR", size, n),
                buffers.get("OP", size, n)) if batch else None)
        return annual_worth_parts(price, s, c, head, out=out)[0]

    def evaluate(self, values: Mapping[str, np.ndarray], size: int,
                 workspace: Workspace | None = None) -> Outcome:
        """Every AW, ESL and the decision for ``size`` cases (inputs not in ``values`` fixed).

        The AW kernels of ``core.annual_worth`` / ``core.aftertax`` and the rules of
        ``core.decision``, with the trials as the batch axis.  With a ``workspace`` the
        (size, n) arrays, the AW schedules of the outcome among them, live in its memory,
        which the next call with that workspace overwrites: for a loop over chunks of trials
        that reads each outcome before the next (one workspace per thread).
        """
        values = {k: np.asarray(v, dtype=float) for k, v in values.items()}
        buffers = _Fresh() if workspace is None else workspace
        marr = values.get("marr", self.study.marr)
        rate = self._rate(marr)
        study = self.study
        factors = self._factors(values, rate, size, buffers)
        aw: dict[str, np.ndarray] = {}
        esl: dict[str, np.ndarray] = {}
        at_esl: dict[str, np.ndarray] = {}
        rows = np.arange(size)
        for alt in study.alternatives:
            raw = self._annual_worth(alt, values, marr, factors, size, buffers)
            n = alt.max_life
            if raw.shape == (size, n):
                schedule, work = raw, buffers.get("CR", size, n)
            else:
                schedule, work = np.broadcast_to(raw, (size, n)), None
            life = economic_life(schedule, work=work)
            aw[alt.name] = schedule
            esl[alt.name] = life
            at_esl[alt.name] = schedule[rows, life - 1]
        d_name = study.defender.name
        ch_aw = np.empty((len(study.challengers), size)).T  # trial-contiguous, as above
        for j, c in enumerate(study.challengers):
            ch_aw[:, j] = at_esl[c.name]
        best = first_best(ch_aw)
        c_best = ch_aw[rows, best]
        if study.study_period is None:
            replace_now = replaces(c_best, at_esl[d_name])
            difference = c_best - at_esl[d_name]
        else:
            replace_now, difference = self._period_decision(aw, factors, size)
        return Outcome(aw, esl, at_esl, best, replace_now, difference)

    def _period_decision(self, aw: dict[str, np.ndarray], factors: FactorTable,
                         size: int) -> tuple[np.ndarray, np.ndarray]:
        """Replace now when the best feasible option starts a challenger today; the AW
        difference is the best such option minus the best option keeping the defender."""
        study = self.study
        grid = option_grid(int(study.study_period or 0),
                           (study.defender.name, study.defender.max_life),
                           [(c.name, c.max_life) for c in study.challengers])
        table = np.broadcast_to(period_options(
            grid, aw[study.defender.name], [aw[c.name] for c in study.challengers], factors),
            (size, grid.feasible.size))
        top = first_best(table, grid.feasible)
        now = grid.replace_now & grid.feasible
        keep = ~grid.replace_now & grid.feasible
        if now.any() and keep.any():
            difference = table[:, now].max(axis=-1) - table[:, keep].max(axis=-1)
        else:
            difference = np.full(size, np.nan)
        return grid.replace_now[top], difference


def _addresses(alt: Alternative) -> tuple[str, ...]:
    """Every input address that moves ``alt``'s cash flows."""
    price = "market_value" if alt.role == "defender" else "first_cost"
    return tuple(f"{alt.name}.{suffix}" for suffix in (
        price, "market_values.decline_rate", "operating_costs.first",
        "operating_costs.gradient", "operating_costs.growth"))


def _get(alt: Alternative, suffix: str) -> float:
    if suffix in ("first_cost", "market_value"):
        return alt.price
    if suffix == "market_values.decline_rate":
        return float(alt.market_values.decline_rate or 0.0)
    oc = alt.operating_costs
    return float({"operating_costs.first": oc.first, "operating_costs.gradient": oc.gradient,
                  "operating_costs.growth": oc.growth}[suffix] or 0.0)


def perturbed_study(study: Study, values: Mapping[str, float]) -> Study:
    """A copy of ``study`` with some inputs set (addresses as in docs/method.md §5), without its
    uncertainty block (with ``tax``, a new MARR moves the after-tax MARR as in
    ``_AfterTax``).  The scalar, one-study counterpart of ``Model.evaluate``, used by the
    tests' naive reference loop and to check breakevens with ``core.study.run_study``.
    """
    alts = {a.name: a for a in study.alternatives}
    marr = study.marr
    for address, value in values.items():
        alt, suffix = split_address(address, study)
        value = float(value)
        if alt is None:
            marr = value
            continue
        current = alts[alt.name]
        if suffix in ("first_cost", "market_value"):
            current = replace(current, price=value)
        elif suffix == "market_values.decline_rate":
            current = replace(current, market_values=replace(current.market_values,
                                                             decline_rate=value))
        else:
            oc = current.operating_costs
            field = suffix.split(".")[1]
            oc = (replace(oc, first=value) if field == "first" else
                  replace(oc, gradient=value) if field == "gradient" else
                  replace(oc, growth=value))
            current = replace(current, operating_costs=oc)
        alts[alt.name] = current
    tax = study.tax
    if tax is not None and marr != study.marr:  # the after-tax MARR follows (see _AfterTax)
        at = (tax.after_tax_marr * marr / study.marr if study.marr != 0
              else tax.after_tax_marr + marr - study.marr)
        tax = replace(tax, after_tax_marr=at)
    return replace(study, marr=marr, tax=tax, defender=alts[study.defender.name],
                   challengers=tuple(alts[c.name] for c in study.challengers), uncertainty=None)
