"""The replacement study (docs/method.md §3): orchestration of kernels and decision rules.

``run_studies(studies)`` is the one entry point; ``run_study(s)`` is
``run_studies([s])[0]``.  A fleet is a batch of studies: every study goes through the same
path, so a study's figures do not depend on what else is in the batch.

A fleet is run in chunks of ``CHUNK`` studies (for the CPU cache; no figure depends on it).

1. ``core.batch.stack`` pads every alternative of every study into (M, N) arrays with a
   mask; ``core.batch.schedules`` builds S, Op and X (``core.cashflows`` kernels).
2. Before tax, in one numpy pass over the batch: estimates stated in then-current money
   are deflated (``core.inflation.to_constant``), the factor tables (``core.factors``) and
   AW / CR / operating / MC (``core.annual_worth``) are computed at the real MARR, and
   ``core.decision.decide_batch`` applies every rule.
3. Per study: the typed result (``core.results``), the study-period options
   (``core.decision.period_options``), AW restated in then-current money when the
   estimates are stated so (``core.inflation.reporting_factor``); with ``tax`` the
   after-tax basis (``core.aftertax`` and ``core.depreciation`` kernels, the same
   decision functions); with ``uncertainty`` the risk analysis (``core.risk``).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from core import aftertax, inflation
from core import depreciation as dep
from core.annual_worth import annual_worth_parts, marginal_cost
from core.batch import Batch, schedules, stack
from core.decision import (
    BatchDecision,
    decide_batch,
    market_value_favours,
    no_period_recommendation,
    option_grid,
    period_options,
    period_recommendation,
)
from core.errors import StudyError
from core.estimates import Study
from core.factors import FactorTable, FloatArray, ap, factor_table
from core.results import (
    AlternativeResult,
    Basis,
    BasisResult,
    OneMoreYear,
    Recommendation,
    RiskResult,
    StudyOption,
    StudyResult,
    TaxDetail,
    TaxTerms,
)
from core.technology import has_technology, technology_plan


@dataclass(frozen=True)
class _Views:
    """The before-tax arrays only the views read (not the decision), for a whole batch."""

    marginal_cost: FloatArray
    present_worth: FloatArray
    negative_s: list[bool]
    negative_c: list[bool]


@dataclass(frozen=True)
class _BeforeTax:
    """The before-tax arrays of a whole batch (rows as in ``Batch``): what the decision
    needs, computed by the batch pass; ``views`` on first read."""

    batch: Batch
    S: FloatArray            # market values, study money
    Op: FloatArray            # operating costs, study money
    X: FloatArray            # one-off costs, study money
    C: FloatArray            # Op + X
    S_c: FloatArray           # market values and yearly costs in constant money
    C_c: FloatArray
    annual_worth: FloatArray  # constant money at the real MARR
    capital_recovery: FloatArray
    operating: FloatArray
    factors: FactorTable      # per row (M, N), or per study (S, 1, N) when each has K rows
    decision: BatchDecision

    @cached_property
    def lists(self) -> dict[str, list]:
        """The per-row and per-study figures as Python lists (indexing numpy scalars one by
        one costs more than the numpy pass itself)."""
        dec, b = self.decision, self.batch
        return {
            "esl": dec.economic_life.tolist(), "at": dec.at_esl.tolist(),
            "rank": dec.rank.tolist(), "best": dec.best.tolist(), "target": dec.target.tolist(),
            "replace": dec.replace.tolist(), "planned": dec.planned.tolist(),
            "mc": dec.marginal_cost_next.tolist(), "keep": dec.keep_next_year.tolist(),
            "rv": dec.replacement_value.tolist(), "marr": b.marr.tolist(),
            "price": b.price.tolist()}

    @cached_property
    def views(self) -> _Views:
        b, S, C = self.batch, self.S, self.C
        mask = b.mask
        aw = self.annual_worth
        cap = self.factors.capital_recovery   # per row, or per study over (studies, K, years)
        return _Views(marginal_cost(b.price, self.S_c, self.C_c, b.marr),
                      (aw.reshape(cap.shape[0], -1, aw.shape[-1]) / cap).reshape(aw.shape)
                      if cap.ndim == 3 else aw / cap,
                      np.any(mask & (S < 0), axis=1).tolist(),
                      np.any(mask & (C < 0), axis=1).tolist())


def _repeat(table: FactorTable, counts: np.ndarray) -> FactorTable:
    return FactorTable(*(np.repeat(a, counts, axis=0) for a in (
        table.discount, table.annuity, table.capital_recovery, table.sinking_fund)))


def _before_tax(batch: Batch) -> _BeforeTax:
    S, Op, X = schedules(batch)
    C = Op + X
    S_c, C_c = S, C
    tc = batch.then_current
    if tc.any():  # constant money: the decision basis (docs/method.md §4)
        S_c, C_c = S.copy(), C.copy()
        S_c[tc] = inflation.to_constant(S[tc], batch.inflation[tc])
        C_c[tc] = inflation.to_constant(C[tc], batch.inflation[tc])
    study_rate = batch.marr[batch.first]     # core.inflation.before_tax_rate: the real MARR
    table = factor_table(study_rate, batch.width)
    counts = batch.counts
    if (counts == counts[0]).all():
        # Every study has K alternatives: the rows are a (studies, K, years) block, so each
        # study's factors broadcast over its rows instead of being copied to every row.
        n_studies, k, n = counts.size, int(counts[0]), batch.width
        rows = FactorTable(*(a[:, None, :] for a in (table.discount, table.annuity,
                                                      table.capital_recovery,
                                                      table.sinking_fund)))
        parts = annual_worth_parts(batch.price.reshape(n_studies, k),
                                   S_c.reshape(n_studies, k, n), C_c.reshape(n_studies, k, n),
                                   rows)
        aw, cr, op = (a.reshape(-1, n) for a in parts)
    else:
        rows = _repeat(table, counts)
        aw, cr, op = annual_worth_parts(batch.price, S_c, C_c, rows)
    decision = decide_batch(aw, batch.mask, batch.first, counts, table.annuity,
                            table.capital_recovery, batch.price[batch.first])
    return _BeforeTax(batch, S, Op, X, C, S_c, C_c, aw, cr, op, rows, decision)


def _warnings(study: Study, S: FloatArray, rows: range, views: _Views) -> tuple[str, ...]:
    negative_s, negative_c = views.negative_s, views.negative_c
    notes = []
    for alt, r in zip(study.alternatives, rows, strict=True):
        if alt.role == "defender" and alt.price < 0:
            notes.append(f"{alt.name}: market value today is negative (a net removal cost).")
        if negative_s[r]:
            negative = np.flatnonzero(S[r, :alt.max_life] < 0)
            notes.append(f"{alt.name}: market value is negative in year(s) "
                         f"{', '.join(str(int(j) + 1) for j in negative)} (a net removal cost).")
        if negative_c[r]:
            notes.append(f"{alt.name}: some yearly costs are negative (net income).")
    if study.marr < 0:
        notes.append("MARR is negative.")
    return tuple(notes)


def _recommend(study: Study, aw: Sequence[FloatArray], esl: Sequence[int],
               at_esl: Sequence[float], best: int, replace: bool, rv: float,
               planned: int, check: OneMoreYear, rate: float, basis: Basis,
               ) -> tuple[Recommendation, tuple[StudyOption, ...], int | None]:
    """The recommendation of one study on one basis (``aw`` per alternative, in order), its
    study-period options and the index of the best option."""
    names = [a.name for a in study.alternatives]
    best_name = names[best]
    value = None if np.isnan(rv) else rv
    period = study.study_period
    if period is None:
        return no_period_recommendation(
            names[0], best_name, dict(zip(names, esl, strict=True)),
            dict(zip(names, at_esl, strict=True)), replace, value, planned, check, basis), (), None
    d = study.defender
    grid = option_grid(period, (d.name, d.max_life),
                       [(c.name, c.max_life) for c in study.challengers])
    table = factor_table(rate, max(period, *(a.max_life for a in study.alternatives)))
    values = period_options(grid, aw[0], aw[1:], table)
    return period_recommendation(d.name, d.max_life, names[1:], grid, values, best_name, value,
                                 check, basis)


def _before_tax_basis(study: Study, s: int, bt: _BeforeTax) -> BasisResult:
    batch, lists = bt.batch, bt.lists
    rows = batch.rows(s)
    dec = bt.decision
    views = bt.views
    esl = lists["esl"][rows.start:rows.stop]
    at = lists["at"][rows.start:rows.stop]
    rank = lists["rank"][rows.start:rows.stop]
    rate = lists["marr"][rows.start]
    aw_rows = [bt.annual_worth[r, :alt.max_life]
               for r, alt in zip(rows, study.alternatives, strict=True)]
    check = OneMoreYear(1, lists["mc"][s], -lists["target"][s], lists["keep"][s])
    rec, options, best_option = _recommend(study, aw_rows, esl, at, lists["best"][s] - rows.start,
                              lists["replace"][s], lists["rv"][s], lists["planned"][s], check,
                              rate, "before-tax")
    then_current = study.inflation is not None and study.inflation.estimates == "then-current"
    alts = []
    for j, (alt, r) in enumerate(zip(study.alternatives, rows, strict=True)):
        k = alt.max_life
        aw, cr, op = aw_rows[j], bt.capital_recovery[r, :k], bt.operating[r, :k]
        mc = views.marginal_cost[r, :k]
        at_j = at[j]
        if then_current:  # report in the money the study states (docs/method.md §4)
            assert study.inflation is not None
            factor = inflation.reporting_factor(study, rate, k)
            aw_rep, cr, op = aw * factor, cr * factor, op * factor
            mc = inflation.to_then_current(mc, study.inflation.rate)
            at_j = float(at_j * factor[esl[j] - 1])
        else:
            aw_rep = aw
        alts.append(AlternativeResult(
            name=alt.name, role=alt.role, price=lists["price"][r], max_life=k,
            market_values=bt.S[r, :k], operating_costs=bt.Op[r, :k], extra_costs=bt.X[r, :k],
            annual_worth=aw_rep, annual_worth_constant=aw, capital_recovery=cr, operating=op,
            marginal_cost=mc, present_worth=views.present_worth[r, :k], economic_life=esl[j],
            annual_worth_at_economic_life=at_j, rank=rank[j]))
    return BasisResult(basis="before-tax", rate=rate, money=inflation.money_label(study),
                       alternatives=tuple(alts), recommendation=rec, one_more_year=check,
                       study_period_options=options, best_option=best_option,
                       keep_values=dec.keep_values[s, :study.defender.max_life + 1],
                       replacement_value_favours=market_value_favours(
                           study.defender.price, rec.replacement_value), tax=None)


def _after_tax_basis(study: Study) -> BasisResult:
    """The after-tax basis of one study (docs/method.md §4): flows in then-current money
    at the after-tax market rate, ESLs and the decision in constant money at the real
    after-tax MARR, AW reported in the money the study states."""
    assert study.tax is not None
    t = float(study.tax.rate)
    decision_rate, discount, report = aftertax.rates(study)
    alts = study.alternatives
    n = max(a.max_life for a in alts)
    aw_dec = np.zeros((len(alts), n))
    parts = []
    for j, alt in enumerate(alts):
        price, S, C = inflation.then_current_arrays(study, alt)
        sched = dep.alternative_schedule(alt)
        defender = alt.role == "defender"
        s = aftertax.after_tax_annual_worth(
            price, S, C, sched.allowance, sched.book_value_0, t, discount,
            disposal_fraction=sched.disposal_fraction, defender=defender)
        k = np.arange(1, alt.max_life + 1)
        aw_decision = s.present_worth * ap(decision_rate, k)
        aw_dec[j, :alt.max_life] = aw_decision
        tables = tuple(aftertax.cash_flow_table(y, price, S, C, sched, t, defender)
                       for y in range(1, alt.max_life + 1))
        detail = TaxDetail(method=alt.depreciation.method if alt.depreciation else "",
                           tax_basis=float(sched.basis), book_value_0=float(sched.book_value_0),
                           initial=float(s.initial), allowance=sched.allowance,
                           book_value=s.book_value, disposal=s.disposal, tables=tables)
        parts.append((price, aw_decision, s.present_worth * ap(report, k), s.present_worth,
                      detail))
    lives = np.array([a.max_life for a in alts])
    mask = np.arange(1, n + 1)[None, :] <= lives[:, None]
    table = factor_table(decision_rate, n)
    dec = decide_batch(aw_dec, mask, np.array([0], dtype=np.intp),
                       np.array([len(alts)], dtype=np.intp), table.annuity[None, :],
                       (1.0 - t) * table.capital_recovery[None, :],
                       np.array([float(study.defender.price)]))
    esl = dec.economic_life.tolist()
    at = dec.at_esl.tolist()
    target = float(dec.target[0])
    mc_next = float(dec.marginal_cost_next[0])
    check = OneMoreYear(1, mc_next, -target, bool(dec.keep_next_year[0]))
    rec, options, best_option = _recommend(study, [p[1] for p in parts], esl, at, int(dec.best[0]),
                              bool(dec.replace[0]), float(dec.replacement_value[0]),
                              int(dec.planned[0]), check, decision_rate, "after-tax")
    results = []
    for j, (alt, (price, aw_decision, aw_report, pw, detail)) in enumerate(
            zip(alts, parts, strict=True)):
        results.append(AlternativeResult(
            name=alt.name, role=alt.role, price=float(price), max_life=alt.max_life,
            market_values=alt.market_value_array(), operating_costs=alt.operating_cost_array(),
            extra_costs=alt.extra_cost_array(), annual_worth=aw_report,
            annual_worth_constant=aw_decision, capital_recovery=None, operating=None,
            marginal_cost=None, present_worth=pw, economic_life=esl[j],
            annual_worth_at_economic_life=float(aw_report[esl[j] - 1]),
            rank=int(dec.rank[j]), tax=detail))
    terms = TaxTerms(tax_rate=t, after_tax_marr=float(study.tax.after_tax_marr),
                     discount_rate=discount, conventions=aftertax.conventions(study))
    return BasisResult(basis="after-tax", rate=decision_rate, money=inflation.money_label(study),
                       alternatives=tuple(results), recommendation=rec, one_more_year=check,
                       study_period_options=options, best_option=best_option,
                       keep_values=dec.keep_values[0, :study.defender.max_life + 1],
                       replacement_value_favours=market_value_favours(
                           study.defender.price, rec.replacement_value), tax=terms)


def _risk(study: Study, best_challenger: str) -> RiskResult:
    # Imported here, not at the top: the risk analysis loads scipy, which most of a
    # one-study run's start-up would otherwise be (it imports nothing of this module).
    from core.risk.analysis import run_risk

    return run_risk(study, best_challenger=best_challenger)


class _BatchStudyResult(StudyResult):
    """A ``StudyResult`` whose before-tax basis and warnings are built from the batch arrays
    when first read, then kept.

    Only studies whose remaining work cannot fail take this form (no study period, tax,
    uncertainty or technology block: building their objects is reading and formatting
    figures already computed), so a fleet pays for the objects a caller reads, not for
    every study's.  Everything else about it is a ``StudyResult``: equal, typed and frozen.
    ``run_studies`` makes it with ``study``, ``_before`` (the batch's ``_BeforeTax``) and
    ``_index`` (the study's place in the batch) in its ``__dict__``.
    """

    after_tax = None
    risk = None
    technology = None

    @cached_property
    def before_tax(self) -> BasisResult:
        return _before_tax_basis(self.study, self.__dict__["_index"], self.__dict__["_before"])

    @cached_property
    def warnings(self) -> tuple[str, ...]:
        bt: _BeforeTax = self.__dict__["_before"]
        return _warnings(self.study, bt.S, bt.batch.rows(self.__dict__["_index"]), bt.views)


_new = object.__new__

#: Studies per batch pass.  A fleet runs in chunks whose (rows, years) tables stay in the
#: CPU cache: measured with benchmarks/bench_engine.py, chunks of 512-1,024 studies run a
#: 5,000-study fleet about a quarter faster than one pass.  Every row is computed on its
#: own, so the figures do not depend on the chunking.
CHUNK = 1024


def run_studies(studies: Sequence[Study]) -> list[StudyResult]:
    """Every AW, ESL, the recommendation, study-period options and the replacement value of
    each study, in order (the module docstring gives the steps).

    >>> from core.estimates import Alternative, MarketValues, OperatingCosts, Study
    >>> d = Alternative("Old press", "defender", 20000.0, 3, MarketValues(decline_rate=0.3),
    ...                 OperatingCosts(first=9000.0, gradient=2500.0))
    >>> c = Alternative("New press", "challenger", 60000.0, 8, MarketValues(decline_rate=0.2),
    ...                 OperatingCosts(first=3000.0, gradient=500.0))
    >>> (r,) = run_studies([Study("Press line", 0.10, d, (c,))])
    >>> r.recommendation.action, r.defender.economic_life, r.challengers[0].economic_life
    ('replace', 1, 8)
    >>> round(r.recommendation.replacement_value, 2)
    18062.4
    """
    out: list[StudyResult] = []
    for start in range(0, len(studies), CHUNK):
        out.extend(_run_chunk(studies[start:start + CHUNK]))
    return out


def _run_chunk(studies: Sequence[Study]) -> list[StudyResult]:
    """``run_studies`` of at most ``CHUNK`` studies: one batch pass."""
    batch = stack(studies)
    if (batch.counts < 2).any():
        raise StudyError("challengers", "a study needs at least one challenger")
    bt = _before_tax(batch)
    out: list[StudyResult] = []
    plain = batch.plain.tolist()
    for s, study in enumerate(studies):
        if plain[s]:
            # A _BatchStudyResult, made without an __init__ call: this loop runs once per
            # study of a fleet, and a call would cost more than the numpy pass per study.
            lazy = _new(_BatchStudyResult)
            attributes = lazy.__dict__
            attributes["study"] = study
            attributes["_before"] = bt
            attributes["_index"] = s
            out.append(lazy)
            continue
        before = _before_tax_basis(study, s, bt)
        after = _after_tax_basis(study) if study.tax is not None else None
        decision = after if after is not None else before
        risk = (_risk(study, decision.recommendation.best_challenger)
                if study.uncertainty is not None else None)
        plan = technology_plan(study) if has_technology(study) else None
        out.append(StudyResult(
            study=study, before_tax=before, after_tax=after,
            risk=risk, warnings=_warnings(study, bt.S, batch.rows(s), bt.views),
            technology=plan))
    return out


def run_study(study: Study) -> StudyResult:
    """``run_studies([study])[0]``."""
    return run_studies([study])[0]
