"""Many replacement studies at once (a fleet): one numpy pass instead of one pass per study.

``run_fleet(studies)`` returns exactly what ``[run_study(s) for s in studies]`` returns
(the tests hold the two equal), but computes the AW schedules, ESLs, replacement values
and the no-study-period decisions of every plain before-tax study in a handful of numpy
calls over padded arrays:

    alternatives stacked to shape (M, N), N = the longest max_life, a mask k <= max_life
    (``stack`` reads the estimates; ``compute`` writes S, C and AW a block of studies at a
    time, with ``annual_worth_schedule``'s floating-point steps; factor tables once per
    study; MC and the full S, O, X only for the result objects);
    ESL_m = first argmax of round(AW_m, 2) over the valid k (ties to the shorter life);
    RV = max_k [AW_D,k + P_D (A/P,i,k) - AW_c*] / (A/P,i,k)

The RV line is the closed form of docs/method.md §3: AW_D,k(P) = b_k - P (A/P,i,k) is linear
and decreasing in the defender's market value P, so max_k AW_D,k(P) = AW_c* exactly where
P = max_k (b_k - AW_c*)/(A/P,i,k) (``run_study`` finds the same P with a root finder, to
1e-6).  Studies with tax, inflation or uncertainty, and the study-period options, go
through ``core.study`` unchanged (their hooks are per study).
"""

from __future__ import annotations

import json
import os
import sys
from array import array
from collections.abc import Callable, Sequence
from typing import Any, TypeVar

import numpy as np

from core.estimates import Study
from core.results import AlternativeResult, StudyResult, _list, _r
from core.study import CENT, decide, no_period_recommendation, run_study
from core.studyfile import fingerprint
from core.technology.settings import has_technology

#: Studies per block in ``compute``: the block's S, C and temporaries stay near 300 kB each,
#: so they are reused from the allocator's free lists and stay in cache, instead of being
#: fresh (page-faulting) multi-megabyte arrays over the whole fleet.
BLOCK_STUDIES = 500

#: Fleets at least this large are split over two processes where fork() is available.
PARALLEL_MIN = 1000


def _plain(study: Study) -> bool:
    return study.tax is None and study.inflation is None and study.uncertainty is None \
        and not has_technology(study)


def _buffer(values: array, dtype: type) -> np.ndarray:
    """A numpy view of an ``array.array`` (a copy-free read of what the loop appended)."""
    return np.frombuffer(values, dtype=dtype) if len(values) else np.zeros(0, dtype=dtype)


def _rows(values: array) -> np.ndarray:
    """An ``array("q")`` of counts or row numbers as numpy indices."""
    return _buffer(values, np.int64).astype(np.intp, copy=False)


def _explicit(rows: np.ndarray, life: np.ndarray, n: int) -> np.ndarray:
    """Flat indices r*n + j (j < life[r]) of the explicit values of each listed row."""
    k = life[rows]
    where = np.repeat(rows * n - (np.cumsum(k) - k), k)  # a running count plus a row offset
    where += np.arange(where.size)
    return where


def _put(target: np.ndarray, explicit: tuple[np.ndarray, np.ndarray], r0: int, r1: int) -> None:
    """Write the explicit values of rows r0..r1-1 into ``target`` (those rows, from row r0)."""
    where, values = explicit
    n = target.shape[1]
    a, b = np.searchsorted(where, (r0 * n, r1 * n))
    if b > a:
        target.ravel()[where[a:b] - r0 * n] = values[a:b]


def fill_rows(st: dict[str, Any], r0: int, r1: int) -> tuple[np.ndarray, np.ndarray]:
    """S (market values) and O (operating costs) of rows r0..r1-1 of a ``stack`` result.

    The steps of ``MarketValues.array`` and ``OperatingCosts.array``, row by row bit for
    bit: S_k = P (1 - d)^k, C_j = first + (j-1) G, C_j = first (1 + g)^(j-1), or the
    explicit values (growth, the one formula with a power of its own, only into its rows).
    """
    n = st["mask"].shape[1]
    rows = slice(r0, r1)
    years_row = np.arange(1, n + 1, dtype=float)
    ages = years_row - 1.0
    # Dense formulas over every row (SIMD, faster than masked loops): a row whose kind
    # differs holds parameters that give finite filler (decline 0, first 0, gradient 0),
    # which the explicit values or the growth formula then overwrite.
    S = np.power(np.subtract(1.0, st["s_d"][rows, None]), years_row)
    np.multiply(st["price"][rows, None], S, out=S)
    _put(S, st["s_values"], r0, r1)
    Op = np.multiply(ages, st["o_gg"][rows, None])
    np.add(st["o_gf"][rows, None], Op, out=Op)
    on = st["o_growth"][rows, None]
    if on.any():
        np.power(np.add(1.0, st["o_wg"][rows, None]), ages, out=Op, where=on)
        np.multiply(st["o_wf"][rows, None], Op, out=Op, where=on)
    _put(Op, st["o_values"], r0, r1)
    return S, Op


def stack(studies: Sequence[Study]) -> dict[str, np.ndarray]:
    """Padded (M, N) arrays of every alternative of ``studies`` (defender first per study).

    Keys: price, life, rate (M,); mask (M, N) with mask[m, k-1] = k <= max_life; counts
    (alternatives per study) and first (defender row).  The market values S and operating
    costs O are kept as what ``fill_rows`` needs to write any run of rows (per-row formula
    parameters, explicit values as flat (index r*N + j, value) arrays), and the one-off
    costs X as (flat index r*N + j ascending, amount) arrays, several in one cell summed in
    list order: ``matrices(st)`` gives the (M, N) S, O and X (cells past max_life hold
    finite filler: read them through the mask).

    One pass over the estimate objects appends every number to an ``array.array`` (which
    stores the float itself, not a reference), so the numbers are read from the objects
    once and reach numpy without a second walk over them.
    """
    counts_b, rate_b, price_b, life_b = array("q"), array("d"), array("d"), array("q")
    sv_r, sv_v, ov_r, ov_v = array("q"), array("d"), array("q"), array("d")
    x_r, x_c, x_v = array("q"), array("q"), array("d")
    dec_r, dec_d = array("q"), array("d")
    grad_r, grad_f, grad_g = array("q"), array("d"), array("d")
    grow_r, grow_f, grow_g = array("q"), array("d"), array("d")
    r = 0
    for study in studies:
        challengers = study.challengers
        counts_b.append(1 + len(challengers))
        rate_b.append(study.marr)
        for a in (study.defender, *challengers):
            k = a.max_life
            life_b.append(k)
            price_b.append(a.price)
            mv = a.market_values
            values = mv.values
            if values is not None:
                sv_r.append(r)
                sv_v.extend(values if len(values) == k else values[:k])
            else:
                dec_r.append(r)
                dec_d.append(mv.decline_rate or 0.0)
            oc = a.operating_costs
            values = oc.values
            if values is not None:
                ov_r.append(r)
                ov_v.extend(values if len(values) == k else values[:k])
            else:
                growth = oc.growth
                if growth is not None:
                    grow_r.append(r)
                    grow_f.append(oc.first or 0.0)
                    grow_g.append(growth)
                else:
                    grad_r.append(r)
                    grad_f.append(oc.first or 0.0)
                    grad_g.append(oc.gradient or 0.0)
            extras = a.extra_costs
            if extras:
                for extra in extras:
                    year = extra.year
                    if 1 <= year <= k:
                        x_r.append(r)
                        x_c.append(year - 1)
                        x_v.append(extra.amount)
            r += 1
    m = r
    life = _rows(life_b)
    n = int(life.max())
    counts = _rows(counts_b)
    rate = np.repeat(_buffer(rate_b, np.float64), counts)
    # S and O stay as per-row formula parameters plus flat explicit values: ``fill_rows``
    # writes any run of rows (compute() a block at a time, in cache).
    # Parameters are zero on rows of another kind (the filler ``fill_rows`` relies on);
    # growth, the one formula written only into its own rows, also keeps its row mask.
    params = {"s_values": (_explicit(_rows(sv_r), life, n), _buffer(sv_v, np.float64)),
              "o_values": (_explicit(_rows(ov_r), life, n), _buffer(ov_v, np.float64))}
    for rows_b, cols in ((dec_r, (("s_d", dec_d),)),
                         (grad_r, (("o_gf", grad_f), ("o_gg", grad_g))),
                         (grow_r, (("o_wf", grow_f), ("o_wg", grow_g)))):
        rows = _rows(rows_b)
        for name, values_b in cols:
            col = np.zeros(m)
            col[rows] = _buffer(values_b, np.float64)
            params[name] = col
    params["o_growth"] = np.zeros(m, dtype=bool)
    params["o_growth"][_rows(grow_r)] = True
    # X stays sparse (most cells are zero): each cell once, its amounts summed in list order
    # (0 + x1 + x2 ..., the steps of ``Alternative.extra_cost_array``).
    cells = _rows(x_r) * n + _rows(x_c)
    keys, where = np.unique(cells, return_inverse=True)
    amounts = np.zeros(keys.size)
    np.add.at(amounts, where, _buffer(x_v, np.float64))
    mask = np.arange(1, n + 1)[None, :] <= life[:, None]
    first = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(np.intp)
    return {"price": _buffer(price_b, np.float64), "life": life, "rate": rate,
            "extras": (keys, amounts), "mask": mask, "counts": counts, "first": first,
            **params}


def _add_extras(target: np.ndarray, extras: tuple[np.ndarray, np.ndarray], r0: int,
                r1: int) -> None:
    """Add the extra costs of rows r0..r1-1 into ``target`` (C-contiguous, those rows from
    row r0): each cell appears once in ``extras``, so a plain indexed add is exact."""
    keys, amounts = extras
    n = target.shape[1]
    a, b = np.searchsorted(keys, (r0 * n, r1 * n))
    if b > a:
        target.ravel()[keys[a:b] - r0 * n] += amounts[a:b]


def matrices(st: dict[str, Any]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The (M, N) S, O and X (extra costs, zero where there are none) of a ``stack`` result."""
    m = len(st["price"])
    S, Op = fill_rows(st, 0, m)
    X = np.zeros(S.shape)
    _add_extras(X, st["extras"], 0, m)
    return S, Op, X


def _warnings(study: Study, S: np.ndarray, rows: range, neg_s: np.ndarray,
              neg_c: np.ndarray) -> list[str]:
    """The same notes as ``core.study`` gives; ``neg_s``/``neg_c`` flag rows with any negative."""
    notes = []
    for alt, r in zip(study.alternatives, rows, strict=True):
        if alt.role == "defender" and alt.price < 0:
            notes.append(f"{alt.name}: market value today is negative (a net removal cost).")
        if neg_s[r]:
            negative = np.flatnonzero(S[r, :alt.max_life] < 0)
            notes.append(f"{alt.name}: market value is negative in year(s) "
                         f"{', '.join(str(int(j) + 1) for j in negative)} (a net removal cost).")
        if neg_c[r]:
            notes.append(f"{alt.name}: some yearly costs are negative (net income).")
    if study.marr < 0:
        notes.append("MARR is negative.")
    return notes


def _check_rates(rate: np.ndarray) -> None:
    """The checks of ``core.factors`` (finite, greater than -1) on every rate at once."""
    if not np.all(np.isfinite(rate)):
        raise ValueError("interest rate must be a finite number")
    if np.any(rate <= -1.0):
        raise ValueError("interest rate must be greater than -1 (-100 %)")


def _factor_tables(rate: np.ndarray, periods: np.ndarray) -> tuple[np.ndarray, ...]:
    """(P/F,i,k), (P/A,i,k), (A/P,i,k), (A/F,i,k) for k in ``periods``, one row per rate.

    The same floating-point steps as ``core.factors.pf/pa/ap/af`` (so every value is
    bit-for-bit theirs), but with two powers instead of four: for i != 0 the (1+i)^-k of
    (P/A) is the (P/F) table itself.  Rates are checked by the caller (``_check_rates``).
    """
    disc = np.power(1.0 + rate[:, None], -periods)
    zero = np.abs(rate) < 1e-12
    safe = np.where(zero, 1.0, rate)[:, None]
    annuity = np.subtract(1.0, disc)
    annuity /= safe
    fund = np.power(1.0 + safe, periods)
    fund -= 1.0
    fund /= safe
    if zero.any():
        annuity[zero] = periods
        fund[zero] = periods
    cap = np.divide(1.0, annuity)
    sink = np.divide(1.0, fund, out=fund)
    return disc, annuity, cap, sink


def _running_sum(work: np.ndarray) -> None:
    """``np.cumsum(work, axis=1, out=work)``, the same additions in the same order, one
    column at a time: a column-wise add over many short rows is about 3x faster."""
    for j in range(1, work.shape[1]):
        np.add(work[:, j - 1], work[:, j], out=work[:, j])


def _marginal_cost(price: np.ndarray, S: np.ndarray, C: np.ndarray,
                   rate: np.ndarray) -> np.ndarray:
    """MC_j = (S_{j-1} - S_j) + i S_{j-1} + C_j, S_0 = P: ``annual_worth_schedule``'s steps."""
    S_prev = np.concatenate([price[:, None], S[:, :-1]], axis=1)
    return (S_prev - S) + rate[:, None] * S_prev + C


def compute(st: dict[str, np.ndarray], full: bool = False) -> dict[str, Any]:
    """Every AW schedule, ESL, best challenger, RV and no-period decision of a stacked fleet.

    ``st`` comes from ``stack``.  Block by block of ``BLOCK_STUDIES`` studies: the factor
    tables once per study (its MARR), then AW_k = -[P(A/P) - S_k(A/F)] - [sum C_j(P/F)](A/P)
    for every alternative with the floating-point steps of ``annual_worth_schedule`` (so each
    AW is bit-for-bit run_study's), then masked reductions per alternative (ESL: first
    argmax of round(AW, 2) over k <= max_life) and per study (best challenger, RV, the
    keep-or-replace test round(AW_c*, 2) > round(AW_D*, 2), the planned replacement year).
    Only what the decision needs is kept; ``full`` also keeps the capital-recovery and
    operating parts (keys "capital_recovery", "operating") for the result objects.
    """
    price, rate, mask = st["price"], st["rate"], st["mask"]
    first, counts = st["first"], st["counts"]
    extras = st["extras"]
    m, n = mask.shape
    n_studies = len(first)
    periods = np.arange(1, n + 1, dtype=float)
    study_rate = rate[first]
    _check_rates(study_rate)
    pad = ~mask
    starts = first.tolist() + [m]
    aw = np.empty((m, n))
    cr_all = np.empty((m, n)) if full else None
    op_all = np.empty((m, n)) if full else None
    esl = np.empty(m, dtype=np.intp)
    at_esl = np.empty(m)
    best_rows = np.empty(n_studies, dtype=np.intp)
    target = np.empty(n_studies)
    rv = np.empty(n_studies)
    planned = np.empty(n_studies, dtype=np.intp)
    mc_next = np.empty(n_studies)
    replace = np.empty(n_studies, dtype=bool)
    k_max = int(counts.max()) - 1
    ch_offset = 1 + np.arange(k_max)
    for s0 in range(0, n_studies, BLOCK_STUDIES):
        s1 = min(s0 + BLOCK_STUDIES, n_studies)
        r0, r1 = starts[s0], starts[s1]
        rows = slice(r0, r1)
        disc, annuity, cap, sink = _factor_tables(study_rate[s0:s1], periods)
        per_study = counts[s0:s1]
        cap_r = np.repeat(cap, per_study, axis=0)
        cr = np.multiply(price[rows, None], cap_r)  # CR_k = P(A/P,i,k) - S_k(A/F,i,k)
        S, c = fill_rows(st, r0, r1)
        work = np.multiply(S, np.repeat(sink, per_study, axis=0))
        np.subtract(cr, work, out=cr)
        _add_extras(c, extras, r0, r1)             # C_j + X_j of the block's rows
        # OP_k = -[sum_{j<=k} (C_j + X_j) (P/F,i,j)](A/P,i,k)
        np.multiply(c, np.repeat(disc, per_study, axis=0), out=work)
        _running_sum(work)
        np.negative(work, out=work)
        np.multiply(work, cap_r, out=work)
        aw_b = aw[rows]                             # AW_k = -CR_k + OP_k
        np.negative(cr, out=aw_b)
        np.add(aw_b, work, out=aw_b)
        if full:
            cr_all[rows] = cr
            op_all[rows] = work
        # ESL: round(AW, 2) with np.round's own steps (x 100, rint, / 100), in place.
        np.round(aw_b, 2, out=c)
        mask_b = mask[rows]
        np.copyto(c, -np.inf, where=pad[rows])
        esl_b = np.argmax(c, axis=1)
        at_b = aw_b[np.arange(r1 - r0), esl_b]
        esl[rows] = esl_b + 1
        at_esl[rows] = at_b
        at_r = np.round(at_b, 2)
        # Best challenger of each study: the highest rounded AW* (first on ties).
        d_rows = first[s0:s1] - r0
        ch_valid = np.arange(k_max)[None, :] < (counts[s0:s1] - 1)[:, None]
        ch_rows = np.where(ch_valid, d_rows[:, None] + ch_offset, d_rows[:, None])
        ch_score = np.where(ch_valid, at_r[ch_rows], -np.inf)
        best = ch_rows[np.arange(s1 - s0), np.argmax(ch_score, axis=1)]
        best_rows[s0:s1] = best + r0
        tgt = at_b[best]                            # AW_c* of each study
        target[s0:s1] = tgt
        d_aw = aw_b[d_rows]
        d_mask = mask_b[d_rows]
        rv[s0:s1] = np.where(d_mask, (d_aw + price[r0 + d_rows, None] * cap - tgt[:, None]) / cap,
                             -np.inf).max(axis=1)
        keep_vals = np.where(d_mask, np.round(d_aw * annuity - tgt[:, None] * annuity, 2),
                             -np.inf)
        planned[s0:s1] = np.where(keep_vals.max(axis=1) > 0.0, np.argmax(keep_vals, axis=1) + 1,
                                  0)
        mc_next[s0:s1] = -d_aw[:, 0]
        replace[s0:s1] = np.round(tgt, 2) > at_r[d_rows]
    out = {"annual_worth": aw, "esl": esl, "at_esl": at_esl, "best_rows": best_rows,
           "target": target, "rv": rv, "planned": planned, "mc_next": mc_next,
           "replace": replace}
    if full:
        out["capital_recovery"], out["operating"] = cr_all, op_all
    return out


def _run_plain(studies: Sequence[Study], with_json: bool = False
               ) -> tuple[list[StudyResult], list[dict[str, Any]] | None]:
    st = stack(studies)
    core = compute(st, full=True)
    price, rate, life, first = st["price"], st["rate"], st["life"], st["first"]
    esl, at_esl, best_rows = core["esl"], core["at_esl"], core["best_rows"]
    rv, planned, mc_next = core["rv"], core["planned"], core["mc_next"]
    aw, cr, operating = core["annual_worth"], core["capital_recovery"], core["operating"]
    S, Op, X = matrices(st)
    C = Op + X
    mc = _marginal_cost(price, S, C, rate)
    mask = st["mask"]
    neg_s = np.any(mask & (S < 0), axis=1).tolist()
    neg_c = np.any(mask & (C < 0), axis=1).tolist()
    n_cols = aw.shape[1]
    # Python lists: indexing numpy scalars one by one costs more than the numpy pass itself.
    esl_l, at_l, best_l = esl.tolist(), at_esl.tolist(), best_rows.tolist()
    rv_l, planned_l, mc_l = rv.tolist(), planned.tolist(), mc_next.tolist()
    first_l, rate_l, price_l = first.tolist(), rate.tolist(), price.tolist()
    flat: dict[str, list[float]] = {}
    if with_json:
        # Round every list of every alternative in one pass (results._list on the whole
        # stack), then cut each alternative's cells: the values AlternativeResult.to_json gives.
        flat = {key: _list(matrix) for key, matrix in (
            ("annual_worth", aw), ("capital_recovery", cr),
            ("operating_annual_worth", operating), ("marginal_cost", mc),
            ("market_values", S), ("operating_costs", Op), ("extra_costs", X))}
    out: list[StudyResult] = []
    docs: list[dict[str, Any]] = []
    for s_i, study in enumerate(studies):
        alts = study.alternatives
        start = first_l[s_i]
        rows = range(start, start + len(alts))
        names = [a.name for a in alts]
        esl_d = dict(zip(names, esl_l[start:rows.stop], strict=True))
        at_d = dict(zip(names, at_l[start:rows.stop], strict=True))
        best = names[best_l[s_i] - start]
        c_aw = at_d[best]
        rv_i = rv_l[s_i]
        check = {"year": 1, "defender_marginal_cost": mc_l[s_i],
                 "challenger_annual_cost": -c_aw,
                 "keep_next_year": mc_l[s_i] < -c_aw - CENT}
        if study.study_period is None:
            rec = no_period_recommendation(study, best, esl_d, at_d, rv_i, planned_l[s_i], check)
            options: list = []
        else:
            aw_map = {nm: aw[r, :life[r]] for nm, r in zip(names, rows, strict=True)}
            rec, options, _ = decide(study, aw_map, rate_l[start], "before-tax",
                                     lambda _target, value=rv_i: value)
        order = sorted(names, key=lambda nm: -round(at_d[nm], 2))
        rank = {nm: order.index(nm) + 1 for nm in names}
        results = []
        if not with_json:
            for alt, r in zip(alts, rows, strict=True):
                k = alt.max_life
                results.append(AlternativeResult(
                    name=alt.name, role=alt.role, price=price_l[r], max_life=k,
                    market_values=S[r, :k], operating_costs=Op[r, :k],
                    extra_costs=X[r, :k], annual_worth=aw[r, :k],
                    capital_recovery=cr[r, :k], operating=operating[r, :k],
                    marginal_cost=mc[r, :k], economic_life=esl_d[alt.name],
                    annual_worth_at_economic_life=at_d[alt.name], rank=rank[alt.name]))
        result = StudyResult(study=study, rate=rate_l[start], alternatives=tuple(results),
                             recommendation=rec, before_tax_recommendation=rec,
                             study_period_options=tuple(options),
                             warnings=tuple(_warnings(study, S, rows, neg_s, neg_c)),
                             fingerprint=fingerprint(study))
        if not with_json:
            out.append(result)
            continue
        doc = result.to_json()
        doc_alts = []
        for alt, r in zip(alts, rows, strict=True):
            lo, hi = r * n_cols, r * n_cols + alt.max_life
            doc_alts.append({
                "name": alt.name, "role": alt.role, "annual_worth": flat["annual_worth"][lo:hi],
                "economic_life": esl_d[alt.name],
                "annual_worth_at_economic_life": _r(at_d[alt.name]),
                "rank": rank[alt.name], "capital_recovery": flat["capital_recovery"][lo:hi],
                "operating_annual_worth": flat["operating_annual_worth"][lo:hi],
                "marginal_cost": flat["marginal_cost"][lo:hi],
                "market_values": flat["market_values"][lo:hi],
                "operating_costs": flat["operating_costs"][lo:hi],
                "extra_costs": flat["extra_costs"][lo:hi]})
        doc["alternatives"] = doc_alts
        docs.append(doc)
    return out, (docs if with_json else None)


def run_fleet(studies: Sequence[Study]) -> list[StudyResult]:
    """``run_study`` for every study, vectorised across the plain before-tax ones.

    >>> from core.estimates import Alternative, MarketValues, OperatingCosts, Study
    >>> d = Alternative("Old press", "defender", 20000.0, 3, MarketValues(decline_rate=0.3),
    ...                 OperatingCosts(first=9000.0, gradient=2500.0))
    >>> c = Alternative("New press", "challenger", 60000.0, 8, MarketValues(decline_rate=0.2),
    ...                 OperatingCosts(first=3000.0, gradient=500.0))
    >>> (r,) = run_fleet([Study("Press line", 0.10, d, (c,))])
    >>> r.recommendation.action, r.defender.economic_life, round(r.recommendation.replacement_value, 2)
    ('replace', 1, 18062.4)
    """
    return _run_all(studies, with_json=False)[0]


def run_fleet_json(studies: Sequence[Study]) -> list[dict[str, Any]]:
    """``[run_study(s).to_json() for s in studies]`` (docs/method.md §6 objects), vectorised.

    The replacement value may differ from run_study's in the last rounded cent in rare cases
    (closed form here, a root finder to 1e-6 there).
    """
    return _run_all(studies, with_json=True)[1]


def _run_all(studies: Sequence[Study], with_json: bool
             ) -> tuple[list[StudyResult], list[dict[str, Any]]]:
    """Results (or, with ``with_json``, only the §6 objects) for every study, in order."""
    plain = [k for k, s in enumerate(studies) if _plain(s)]
    results: list[Any] = [None] * len(studies)
    docs: list[Any] = [None] * len(studies)
    if plain:
        got, got_docs = _run_plain([studies[k] for k in plain], with_json)
        for j, k in enumerate(plain):
            if got_docs is not None:
                docs[k] = got_docs[j]
            else:
                results[k] = got[j]
    for k, study in enumerate(studies):
        if with_json and docs[k] is None:
            docs[k] = run_study(study).to_json()
        elif not with_json and results[k] is None:
            results[k] = run_study(study)
    return results, docs


def _dumps(doc: dict[str, Any]) -> str:
    return json.dumps(doc, ensure_ascii=False, allow_nan=False)


def fleet_json_text(studies: Sequence[Study], processes: int | None = None) -> str:
    """The §6 objects of ``studies`` as compact JSON texts joined by ",\\n", in order.

    On Linux with two or more CPUs and at least ``PARALLEL_MIN`` studies, the second half
    is computed in a forked child process while this process computes the first half (the
    child only reads the already-parsed studies and writes its text to a pipe).  Any trouble
    in the child falls back to computing that half here, so the result never depends on it.

    >>> from core.estimates import Alternative, MarketValues, OperatingCosts, Study
    >>> d = Alternative("Old", "defender", 10.0, 1, MarketValues(values=(5.0,)),
    ...                 OperatingCosts(values=(2.0,)))
    >>> c = Alternative("New", "challenger", 20.0, 1, MarketValues(values=(15.0,)),
    ...                 OperatingCosts(values=(1.0,)))
    >>> text = fleet_json_text([Study("A", 0.0, d, (c,)), Study("B", 0.0, d, (c,))], processes=2)
    >>> [json.loads(line.rstrip(","))["title"] for line in text.split("\\n")]
    ['A', 'B']
    """
    if processes is None:
        processes = 2 if (len(studies) >= PARALLEL_MIN and sys.platform.startswith("linux")
                          and (os.cpu_count() or 1) >= 2) else 1
    if processes < 2 or len(studies) < 2 or not hasattr(os, "fork"):
        return ",\n".join(_dumps(d) for d in run_fleet_json(studies))
    half = (len(studies) + 1) // 2
    head, tail = studies[:half], studies[half:]

    def child() -> bytes:
        return ",\n".join(_dumps(d) for d in run_fleet_json(tail)).encode("utf-8")

    first, data = _split_work(child, lambda: ",\n".join(_dumps(d) for d in run_fleet_json(head)))
    second = data.decode("utf-8") if data is not None else child().decode("utf-8")
    return first + ",\n" + second


T = TypeVar("T")


def _split_work(child: Callable[[], bytes], parent: Callable[[], T]) -> tuple[T, bytes | None]:
    """Run ``child`` in a forked process while this one runs ``parent``.

    Returns the parent's result and the child's bytes, or None when the child failed (the
    caller then does that half itself). The child leaves with ``os._exit``, running no
    cleanup of the parent's state; if the parent's half raises, the child is killed.
    """
    read_end, write_end = os.pipe()
    pid = os.fork()
    if pid == 0:
        status = 1
        try:
            os.close(read_end)
            view = memoryview(b"1" + child())
            while view:
                view = view[os.write(write_end, view):]
            status = 0
        except BaseException:  # noqa: BLE001  (the parent redoes this half)
            pass
        finally:
            os._exit(status)
    os.close(write_end)
    data = b""
    try:
        result = parent()
        with os.fdopen(read_end, "rb") as pipe:
            data = pipe.read()
    except BaseException:
        os.kill(pid, 9)
        raise
    finally:
        _, status = os.waitpid(pid, 0)
    return result, (data[1:] if status == 0 and data[:1] == b"1" else None)


def _parse_items(items: list[Any], start: int) -> list[Study]:
    from core.studyfile import parse_study

    return [parse_study(obj, f"$.studies[{k}]") for k, obj in enumerate(items, start=start)]


def study_file_json_text(path: str | os.PathLike[str]) -> str | None:
    """Parse, run and write a large multi-study JSON file in two processes; None otherwise.

    Returns None (the caller then takes the ordinary path, which reports any problem) unless
    ``path`` is a readable UTF-8 study JSON file of the form {"format", "version",
    "studies": [...]} with at least ``PARALLEL_MIN`` studies, on Linux with two or more CPUs.
    Then a forked child parses and computes the second half while this process does the
    first; refusals come out exactly as ``parse_study_document`` gives them (the first bad
    study in file order, then a repeated title).
    """
    from pathlib import Path

    from core.errors import StudyError
    from core.studyfile import FORMAT, VERSION

    if not (sys.platform.startswith("linux") and hasattr(os, "fork")
            and (os.cpu_count() or 1) >= 2):
        return None
    file = Path(path)
    try:
        if file.suffix.lower() == ".tenure" or not file.is_file():
            return None
        raw = file.read_bytes()
        if raw.startswith(b"SQLite format 3\x00"):
            return None
        obj = json.loads(raw.decode("utf-8-sig"), parse_constant=float)
    except (OSError, ValueError, RecursionError):
        return None
    if not (isinstance(obj, dict) and set(obj) == {"format", "version", "studies"}
            and obj["format"] == FORMAT and type(obj["version"]) is int
            and obj["version"] == VERSION and isinstance(obj["studies"], list)
            and len(obj["studies"]) >= PARALLEL_MIN):
        return None
    items = obj["studies"]
    half = (len(items) + 1) // 2

    def child() -> bytes:  # parse and run the tail: E+error, or titles NUL text
        try:
            tail = _parse_items(items[half:], half)
        except StudyError as exc:
            return b"E" + json.dumps([exc.path, exc.message]).encode("utf-8")
        return (b"1" + json.dumps([s.title for s in tail]).encode("utf-8") + b"\0"
                + ",\n".join(_dumps(d) for d in run_fleet_json(tail)).encode("utf-8"))

    def parent() -> tuple[list[Study], str]:
        head = _parse_items(items[:half], 0)
        return head, ",\n".join(_dumps(d) for d in run_fleet_json(head))

    (head, first), data = _split_work(child, parent)
    if data is not None and data[:1] == b"E":
        where, message = json.loads(data[1:].decode("utf-8"))
        raise StudyError(where, message)
    if data is not None and data[:1] == b"1":
        titles_raw, _, text = data[1:].partition(b"\0")
        tail_titles = json.loads(titles_raw.decode("utf-8"))
        second = text.decode("utf-8")
    else:
        tail = _parse_items(items[half:], half)
        tail_titles = [s.title for s in tail]
        second = ",\n".join(_dumps(d) for d in run_fleet_json(tail))
    seen: set[str] = set()
    for k, title in enumerate([s.title for s in head] + tail_titles):
        if title in seen:
            raise StudyError(f"$.studies[{k}].title", f"'{title}' is used twice")
        seen.add(title)
    return first + ",\n" + second
