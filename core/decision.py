"""The decision rules of a replacement study (docs/method.md §3), once, on arrays.

Every function works on AW arrays with a leading batch axis (rows of a padded batch of
studies, or risk trials); one study is a batch of one.  AW is signed (outflows negative;
best = largest AW); amounts are compared rounded to the cent.

- ESL: the k with the largest AW, ties (to the cent) to the shorter life.
- Best challenger: the largest AW at its ESL, ties to the first listed.
- No study period: replace now only when the best challenger's AW at its ESL beats the
  defender's AW at its ESL by more than a cent (``replaces``).
- One more year: keep next year while the defender's marginal cost next year,
  MC_1 = -AW_D,1, stays more than a cent (``CENT``) below the best challenger's EAC.
- Planned replacement year: the j maximising V_j = PW_D(j) - AW_c*(P/A,i,j), V_0 = 0
  (``keep_values``).
- Study period T: every "keep the defender j years, then challenger c for T - j years"
  option, AW = [PW_D(j) + (P/F,i,j) PW_c(T-j)](A/P,i,T) with PW_x(k) = AW_x,k (P/A,i,k);
  the best feasible option wins, ties to the earlier option (``period_options``).
- Replacement value, closed form: AW_D,k is linear and decreasing in the defender's market
  value today P, AW_D,k(P) = AW_D,k(P_0) - s_k (P - P_0) with slope s_k = (A/P,i,k) before
  tax and (1 - t)(A/P,i,k) after tax (the year-0 outlay P - t(P - BV_0)), so
  max_k AW_D,k(P) equals the best challenger's AW* exactly at
  RV = max_k [P_0 + (AW_D,k(P_0) - AW*)/s_k]  (``replacement_value``).

Reference: the keep-or-replace rules of a replacement study (ESL comparison, marginal
cost of one more year, study-period options), standard in engineering economy.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from core.errors import StudyError
from core.factors import FactorTable, FloatArray
from core.results import Basis, BasisResult, Favours, OneMoreYear, Recommendation, StudyOption
from core.text import money, years

#: Half a cent: the one-more-year check keeps only when the marginal cost is more than
#: this below the challenger's EAC (amounts equal to the cent do not count as cheaper).
CENT = 0.005

IntArray = NDArray[np.intp]


def cents(values: ArrayLike) -> FloatArray:
    """Amounts rounded to the cent (numpy's rounding), the basis of every comparison."""
    return np.round(np.asarray(values, dtype=float), 2)


def first_best(scores: ArrayLike, valid: ArrayLike | None = None, *,
               work: FloatArray | None = None) -> IntArray:
    """Index of the first largest ``scores`` rounded to the cent along the last axis,
    among the ``valid`` entries (a NaN counts as the largest, as in ``np.argmax``).

    ``work``: an array of the shape of ``scores`` to round into instead of a new one (a
    buffer reused from chunk to chunk of risk trials).

    >>> first_best([[-3.0, -2.0, -2.001]]).tolist(), int(first_best([5.0, 9.0], [True, False]))
    ([1], 0)
    >>> tall = np.asfortranarray([[-3.0, -2.0, -2.001], [1.0, np.nan, 2.0], [4.0, 4.0, 1.0],
    ...                           [0.0, -1.0, 0.004], [-np.inf, -np.inf, -np.inf]])
    >>> first_best(tall).tolist()
    [1, 1, 0, 0, 0]
    """
    # In hundredths: rint(100 x) orders and ties exactly as cents(x) = rint(100 x)/100 (numpy's
    # rounding), one pass fewer over a fleet's (rows, years) table.
    hundredths = np.multiply(np.asarray(scores, dtype=float), 100.0, out=work)
    np.rint(hundredths, out=hundredths)
    if valid is not None:
        hundredths = np.where(valid, hundredths, -np.inf)
    if hundredths.ndim == 2 and hundredths.shape[0] > hundredths.shape[1] \
            and hundredths.strides[0] == hundredths.itemsize:
        return _first_best_by_column(hundredths)
    return np.argmax(hundredths, axis=-1)


def _first_best_by_column(rounded: FloatArray) -> IntArray:
    """``np.argmax(rounded, axis=-1)`` for a tall (m, n) array laid out column by column
    (risk trials, trial-contiguous), by whole-column operations: ``np.argmax`` would copy
    it to rows first and then loop over m short rows."""
    n = rounded.shape[1]
    top = rounded.max(axis=-1)
    hits = rounded == top[:, None]
    weight = np.arange(n, 0, -1, dtype=np.int8 if n < 2**7 else np.intp)
    best = n - np.multiply(hits, weight).max(axis=-1).astype(np.intp)  # the first hit
    missing = np.isnan(top)
    if missing.any():
        best[missing] = np.argmax(rounded[missing], axis=-1)
    return best


def economic_life(annual_worth: ArrayLike, valid: ArrayLike | None = None, *,
                  work: FloatArray | None = None) -> IntArray:
    """Economic service life: the k (1-based) with the largest AW; exact ties (to the cent) go
    to the shorter life.  ``valid`` masks padded years (k > max_life) of a batch; ``work``
    as in ``first_best``.

    >>> int(economic_life([-5000.0, -4761.9, -4761.904]))
    2
    >>> economic_life([[-3.0, -2.0], [-1.0, -1.001]]).tolist()
    [2, 1]
    """
    return first_best(annual_worth, valid, work=work) + 1


def replaces(challenger_aw: ArrayLike, defender_aw: ArrayLike) -> NDArray[np.bool_]:
    """Replace now (no study period): the challenger's AW beats the defender's by a cent.

    >>> replaces([-99.99, -100.004], -100.0).tolist()
    [True, False]
    """
    return np.asarray(cents(challenger_aw) > cents(defender_aw))


def keeps_next_year(marginal_cost_next: ArrayLike, challenger_aw: ArrayLike
                    ) -> NDArray[np.bool_]:
    """One-more-year check: MC_1 more than a cent below the challenger's EAC = -AW*.

    >>> keeps_next_year([90.0, 99.999], -100.0).tolist()
    [True, False]
    """
    return np.asarray(np.asarray(marginal_cost_next, dtype=float)
                      < -np.asarray(challenger_aw, dtype=float) - CENT)


def keep_values(defender_aw: ArrayLike, challenger_aw: ArrayLike,
                annuity: ArrayLike) -> FloatArray:
    """V_j = PW_D(j) - AW_c (P/A,i,j) for j = 0..n, V_0 = 0: the worth of keeping the
    defender j years, then the challenger repeated forever, against replacing now.

    ``defender_aw`` and ``annuity`` (P/A,i,j) (..., n), ``challenger_aw`` (...).

    >>> keep_values([-100.0, -120.0], -110.0, [1.0, 2.0]).round(2).tolist()
    [0.0, 10.0, -20.0]
    """
    d = np.asarray(defender_aw, dtype=float)
    a = np.asarray(annuity, dtype=float)
    c = np.asarray(challenger_aw, dtype=float)[..., None]
    body = d * a - c * a
    return np.concatenate([np.zeros(body.shape[:-1] + (1,)), body], axis=-1)


def planned_year(values: ArrayLike, valid: ArrayLike | None = None) -> IntArray:
    """The j (0 = replace now) with the largest keep value V_j, ties to the earlier year.

    >>> int(planned_year([0.0, 10.0, -20.0])), int(planned_year([0.0, -1.0]))
    (1, 0)
    """
    return first_best(values, valid)


def replacement_value(defender_aw: ArrayLike, challenger_aw: ArrayLike, price: ArrayLike,
                      slope: ArrayLike, valid: ArrayLike | None = None) -> FloatArray:
    """RV = max_k [P_0 + (AW_D,k - AW*)/s_k]: the defender's market value today at which its
    best AW equals the best challenger's AW* (module docstring).  NaN when no slope is
    positive (AW does not fall with the market value: a tax rate of 100 % or more).

    ``defender_aw``, ``slope`` (..., n); ``challenger_aw``, ``price`` (...).

    Hand check (i = 0, so s_k = 1/k): AW_D = [-100, -90] at P_0 = 50, AW* = -95:
    k = 1: 50 + (-100 + 95)/1 = 45;  k = 2: 50 + (-90 + 95)*2 = 60;  RV = 60.

    >>> float(replacement_value([-100.0, -90.0], -95.0, 50.0, [1.0, 0.5]))
    60.0
    """
    d = np.asarray(defender_aw, dtype=float)
    s = np.asarray(slope, dtype=float)
    ok = s > 0.0 if valid is None else (np.asarray(valid) & (s > 0.0))
    safe = np.where(ok, s, 1.0)
    candidates = np.asarray(price, dtype=float)[..., None] \
        + (d - np.asarray(challenger_aw, dtype=float)[..., None]) / safe
    best = np.where(ok, candidates, -np.inf).max(axis=-1)
    return np.where(np.isfinite(best), best, np.nan)


def market_value_favours(price: float, rv: float | None) -> Favours | None:
    """What today's market value of the defender says against its replacement value: above
    it (by more than half a cent) replacing wins, below it keeping wins, else neither.

    >>> market_value_favours(100.0, 90.0), market_value_favours(100.0, 100.004)
    ('replacing', 'neither')
    """
    if rv is None:
        return None
    if price > rv + CENT:
        return "replacing"
    if price < rv - CENT:
        return "keeping"
    return "neither"


# --------------------------------------------------------------------------- study period
@dataclass(frozen=True)
class OptionGrid:
    """The study-period options of one study, in order: keep the defender j years, then
    challenger c (index into the challengers, -1 = none) for T - j years.

    Infeasible options (a life too short) are listed with their reason.
    """

    period: int
    defender_years: IntArray
    challenger: IntArray
    challenger_years: IntArray
    feasible: NDArray[np.bool_]
    reasons: tuple[str, ...]

    @property
    def replace_now(self) -> NDArray[np.bool_]:
        """Options that start a challenger today."""
        return (self.defender_years == 0) & (self.challenger >= 0)


def option_grid(period: int, defender: tuple[str, int],
                challengers: Sequence[tuple[str, int]]) -> OptionGrid:
    """Every option of a ``period``-year study; ``defender`` and ``challengers`` as
    (name, max_life).

    >>> g = option_grid(2, ("D", 1), [("C", 2)])
    >>> g.defender_years.tolist(), g.challenger.tolist(), g.feasible.tolist()
    ([0, 1, 2], [0, 0, -1], [True, True, False])
    """
    d_name, d_life = defender
    rows: list[tuple[int, int, int, bool, str]] = []
    for j in range(0, min(d_life, period) + 1):
        rest = period - j
        if rest == 0:
            rows.append((j, -1, 0, True, f"keep {d_name} for the whole study period"))
            continue
        for c, (c_name, c_life) in enumerate(challengers):
            if rest > c_life:
                rows.append((j, c, rest, False,
                             f"{c_name} lasts at most {c_life} years; {rest} are needed"))
            else:
                rows.append((j, c, rest, True, ""))
    if d_life < period:
        rows.append((period, -1, 0, False,
                     f"{d_name} lasts at most {d_life} years; {period} are needed"))
    cols = list(zip(*rows, strict=True))
    return OptionGrid(period, np.array(cols[0], dtype=np.intp), np.array(cols[1], dtype=np.intp),
                      np.array(cols[2], dtype=np.intp), np.array(cols[3], dtype=bool),
                      tuple(cols[4]))


def period_options(grid: OptionGrid, defender_aw: ArrayLike,
                   challenger_aw: Sequence[ArrayLike], factors: FactorTable) -> FloatArray:
    """AW of every option of ``grid`` (NaN where infeasible), options on the last axis.

    AW = [PW_D(j) + (P/F,i,j) PW_c(T-j)](A/P,i,T), PW_x(k) = AW_x,k (P/A,i,k), PW_D(0) = 0.
    ``defender_aw`` (..., n_D), each ``challenger_aw`` (..., n_c); ``factors`` (..., N) with
    N >= T and N >= every life.

    Hand check (i = 0): T = 2, AW_D = [-10], AW_C = [-12, -8]: replace now (-8x2)/2 = -8;
    keep 1 then C 1: (-10 - 12)/2 = -11.

    >>> from core.factors import factor_table
    >>> g = option_grid(2, ("D", 1), [("C", 2)])
    >>> period_options(g, [-10.0], [[-12.0, -8.0]], factor_table(0.0, 2)).tolist()
    [-8.0, -11.0, nan]
    """
    d = np.asarray(defender_aw, dtype=float)
    annuity, disc = factors.annuity, factors.discount
    cap_t = factors.capital_recovery[..., grid.period - 1][..., None]
    feasible = grid.feasible
    j = np.where(feasible, grid.defender_years, 0)
    rest = np.where(feasible, grid.challenger_years, 0)
    has_d = j > 0
    jd = np.maximum(j - 1, 0)
    pw_d = np.where(has_d, d[..., np.minimum(jd, d.shape[-1] - 1)] * annuity[..., jd], 0.0)
    values = pw_d * cap_t
    with_c = feasible & (grid.challenger >= 0)
    if with_c.any():
        lives = [np.shape(a)[-1] for a in challenger_aw]
        width = max(lives)
        lead = np.broadcast_shapes(*(np.shape(a)[:-1] for a in challenger_aw))
        c_all = np.full(lead + (len(challenger_aw), width), np.nan)
        for c, a in enumerate(challenger_aw):
            c_all[..., c, :lives[c]] = a
        cc = np.where(with_c, grid.challenger, 0)
        rr = np.maximum(rest - 1, 0)
        pw_c = c_all[..., cc, rr] * annuity[..., rr]
        disc_j = np.where(has_d, disc[..., jd], 1.0)
        values = np.where(with_c, (pw_d + disc_j * pw_c) * cap_t, values)
    return np.where(feasible, values, np.nan)


# --------------------------------------------------------------------------- sentences
def no_period_reason(d_name: str, best: str, esl: Mapping[str, int],
                     aw_at_esl: Mapping[str, float], replace: bool, basis: Basis,
                     currency: str = "") -> str:
    """The one-sentence reason of a decision without a study period (AW at the ESL in the
    decision's money, ``currency`` before each amount).

    >>> no_period_reason("Old", "New", {"Old": 2, "New": 6}, {"Old": -120.0, "New": -100.0},
    ...                  True, "before-tax", "$")  # doctest: +NORMALIZE_WHITESPACE
    "Replace Old now with New: its equivalent annual cost of $100 over its economic life of
    6 years is $20 a year less than the defender's best, $120 over 2 years."
    """
    c_aw, d_best = aw_at_esl[best], aw_at_esl[d_name]
    tag = " (after tax)" if basis == "after-tax" else ""
    if replace:
        return (f"Replace {d_name} now with {best}: its equivalent annual cost{tag} of "
                f"{money(-c_aw, currency)} over its economic life of {years(esl[best])} is "
                f"{money(c_aw - d_best, currency)} a year less than the defender's best, "
                f"{money(-d_best, currency)} over {years(esl[d_name])}.")
    return (f"Keep {d_name}: its equivalent annual cost{tag} of {money(-d_best, currency)} "
            f"over its best remaining life of {years(esl[d_name])} is "
            f"{money(d_best - c_aw, currency)} a year less than the best challenger, {best} "
            f"({money(-c_aw, currency)} over {years(esl[best])}); keep it next year only while "
            f"its marginal cost stays below {money(-c_aw, currency)}, and restudy each year.")


def no_period_recommendation(d_name: str, best: str, esl: Mapping[str, int],
                             aw_at_esl: Mapping[str, float], replace: bool,
                             rv: float | None, planned: int, check: OneMoreYear,
                             basis: Basis) -> Recommendation:
    """Keep or replace without a study period, with its sentence (``replace`` from
    ``replaces``)."""
    reason = no_period_reason(d_name, best, esl, aw_at_esl, replace, basis)
    if replace:
        return Recommendation("replace", best, None, rv, basis, reason, best, 0, check)
    return Recommendation("keep", None, None, rv, basis, reason, best, max(planned, 1), check)


def period_reason(d_name: str, top: StudyOption, period: int, count: int, basis: Basis,
                  currency: str = "") -> str:
    """The one-sentence reason of the best study-period option ``top`` among ``count``
    feasible ones (``currency`` before the amount).

    >>> period_reason("Old", StudyOption(0, "New", 5, -90.0, True), 5, 3, "after-tax", "EUR")
    'Replace Old now with New for the 5-year study period: annual worth (after tax) -EUR 90, the best of 3 feasible options.'
    """
    assert top.annual_worth is not None
    tag = " (after tax)" if basis == "after-tax" else ""
    aw = money(top.annual_worth, currency)
    if top.challenger is None:
        return (f"Keep {d_name} for the whole {period}-year study period: that option's "
                f"annual worth{tag} of {aw} is the best of {count} feasible options.")
    if top.defender_years == 0:
        return (f"Replace {d_name} now with {top.challenger} for the {period}-year study "
                f"period: annual worth{tag} {aw}, the best of {count} feasible options.")
    return (f"Keep {d_name} {top.defender_years} more year"
            f"{'s' if top.defender_years != 1 else ''}, then replace it with "
            f"{top.challenger} for the remaining {top.challenger_years} years of the "
            f"{period}-year study period: annual worth{tag} {aw}, "
            f"the best of {count} feasible options.")


def reason(basis: BasisResult, currency: str = "") -> str:
    """``basis.recommendation.reason`` written with ``currency`` before each amount (the
    sentence of ``no_period_recommendation`` / ``period_recommendation``, from the figures
    the basis holds).

    >>> from core.estimates import Alternative, MarketValues, OperatingCosts, Study
    >>> from core.study import run_study
    >>> d = Alternative("Old", "defender", 20000.0, 3, MarketValues(decline_rate=0.3),
    ...                 OperatingCosts(first=9000.0, gradient=2500.0))
    >>> c = Alternative("New", "challenger", 60000.0, 8, MarketValues(decline_rate=0.2),
    ...                 OperatingCosts(first=3000.0, gradient=500.0))
    >>> b = run_study(Study("Line", 0.10, d, (c,))).decision
    >>> reason(b) == b.recommendation.reason, reason(b, "$")[:60]
    (True, 'Replace Old now with New: its equivalent annual cost of $14,')
    """
    rec = basis.recommendation
    d_name = basis.defender.name
    if rec.study_period is None:
        esl = {a.name: a.economic_life for a in basis.alternatives}
        at = {a.name: float(a.annual_worth_constant[a.economic_life - 1])
              for a in basis.alternatives}
        return no_period_reason(d_name, rec.best_challenger, esl, at, rec.action == "replace",
                                rec.basis, currency)
    assert basis.best_option is not None
    options = basis.study_period_options
    return period_reason(d_name, options[basis.best_option], rec.study_period,
                         sum(o.feasible for o in options), rec.basis, currency)


def period_recommendation(d_name: str, d_life: int, challengers: Sequence[str],
                          grid: OptionGrid, values: FloatArray, best: str, rv: float | None,
                          check: OneMoreYear, basis: Basis
                          ) -> tuple[Recommendation, tuple[StudyOption, ...], int]:
    """The best feasible study-period option (ties to the earlier one), its sentence, every
    option as a ``StudyOption`` and the index of the best one.  ``values`` from
    ``period_options`` (one study)."""
    period = grid.period
    options = tuple(StudyOption(
        int(j), challengers[c] if c >= 0 else None, int(r),
        float(v) if ok else None, bool(ok), reason)
        for j, c, r, v, ok, reason in zip(grid.defender_years.tolist(), grid.challenger.tolist(),
                                          grid.challenger_years.tolist(), values.tolist(),
                                          grid.feasible.tolist(), grid.reasons, strict=True))
    count = int(grid.feasible.sum())
    if count == 0:
        raise StudyError("study_period", f"no option fills {years(period)}: the defender lasts "
                         f"at most {years(d_life)} and no challenger covers the rest")
    best_index = int(first_best(values, grid.feasible))
    top = options[best_index]
    reason = period_reason(d_name, top, period, count, basis)
    if top.challenger is None:
        rec = Recommendation("keep", None, period, rv, basis, reason, best, period, check, period)
    elif top.defender_years == 0:
        rec = Recommendation("replace", top.challenger, 0, rv, basis, reason, best, 0, check,
                             period)
    else:
        rec = Recommendation("keep", top.challenger, top.defender_years, rv, basis, reason,
                             best, top.defender_years, check, period)
    return rec, options, best_index


# --------------------------------------------------------------------------- a batch
@dataclass(frozen=True)
class BatchDecision:
    """The no-study-period decision of every study of a padded batch.

    Per row (M,): ``economic_life``, ``at_esl`` (AW at the ESL), ``rank`` (1 = best AW at
    ESL in its study, ties to the first listed).  Per study (S,): ``best`` (row of the best
    challenger), ``target`` (its AW*), ``replace``, ``keep_values`` (S, N+1; NaN past the
    defender's life), ``planned`` (the planned replacement year), ``marginal_cost_next``
    and ``keep_next_year`` (the one-more-year check), ``replacement_value`` (NaN if none).
    """

    economic_life: IntArray
    at_esl: FloatArray
    rank: IntArray
    best: IntArray
    target: FloatArray
    replace: NDArray[np.bool_]
    keep_values: FloatArray
    planned: IntArray
    marginal_cost_next: FloatArray
    keep_next_year: NDArray[np.bool_]
    replacement_value: FloatArray


def decide_batch(annual_worth: FloatArray, valid: NDArray[np.bool_], first: IntArray,
                 counts: IntArray, annuity: FloatArray, slope: FloatArray,
                 price: FloatArray) -> BatchDecision:
    """Every rule of the module docstring for a batch of studies at once.

    ``annual_worth`` and ``valid`` (M, N): one row per alternative, defender first in each
    study (``first`` its row, ``counts`` the alternatives per study); ``annuity`` (P/A,i,k)
    and the replacement-value ``slope`` s_k (S, N) per study; ``price`` (S,) the defender's
    market value today.
    """
    m = annual_worth.shape[0]
    n_studies = first.shape[0]
    esl_idx = first_best(annual_worth, valid)
    at_esl = annual_worth[np.arange(m), esl_idx]
    # Each study's alternatives as a padded (S, K) grid of rows (K the most per study).
    k_max = int(counts.max())
    in_study = np.arange(k_max)[None, :] < counts[:, None]
    grid = np.where(in_study, first[:, None] + np.arange(k_max)[None, :], first[:, None])
    scores = np.where(in_study, cents(at_esl)[grid], -np.inf)
    # Rank: 1 + the alternatives of the study ahead of this one (a larger AW at the cent,
    # or an equal one listed earlier).
    ahead = (scores[:, :, None] > scores[:, None, :]) | (
        (scores[:, :, None] == scores[:, None, :])
        & (np.arange(k_max)[:, None] < np.arange(k_max)[None, :]))
    rank = np.empty(m, dtype=np.intp)
    rank[grid[in_study]] = (1 + np.sum(ahead & in_study[:, :, None], axis=1))[in_study]
    best = grid[np.arange(n_studies), 1 + first_best(scores[:, 1:], in_study[:, 1:])]
    target = at_esl[best]
    d_aw = annual_worth[first]
    d_valid = valid[first]
    values = keep_values(d_aw, target, annuity)
    v_valid = np.concatenate([np.ones((n_studies, 1), dtype=bool), d_valid], axis=1)
    planned = planned_year(values, v_valid)
    mc_next = -d_aw[:, 0]
    return BatchDecision(
        economic_life=esl_idx + 1, at_esl=at_esl, rank=rank, best=best, target=target,
        replace=replaces(target, at_esl[first]),
        keep_values=np.where(v_valid, values, np.nan), planned=planned,
        marginal_cost_next=mc_next, keep_next_year=keeps_next_year(mc_next, target),
        replacement_value=replacement_value(d_aw, target, price, slope, d_valid))
