"""A batch of studies as padded arrays: the one batch builder of the engine.

``stack(studies)`` walks the estimates once and gives a ``Batch``: every alternative of
every study is a row (defender first per study), padded to N = the longest max_life with
a mask k <= max_life.  ``schedules(batch)`` builds the (M, N) market values S, operating
costs Op and one-off costs X from it with the kernels of ``core.cashflows``; cells past a
row's max_life hold finite filler (read them through the mask).

Speed rules (measured, keep them): the estimate dataclasses are slotted; every number is
appended to an ``array.array`` (it stores the float, not a reference), so numpy reads the
buffer without a second walk over the objects; several one-off costs in one cell are
summed here, in list order (0 + x1 + x2 ..., the steps of ``Alternative.extra_cost_array``),
so each cell is added once.
"""

from __future__ import annotations

from array import array
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from core.cashflows import declining_market_values, geometric_costs, gradient_costs
from core.estimates import Study
from core.factors import FloatArray

IntArray = NDArray[np.intp]
Explicit = tuple[IntArray, FloatArray]   # (flat index r*N + j ascending, value)


@dataclass(frozen=True)
class Batch:
    """Padded rows of a batch of studies (see the module docstring).

    Per row (M,): ``price``, ``life``, ``marr`` (the study's), ``inflation`` f and
    ``then_current`` (estimates stated in then-current money); per study (S,): ``first``
    (defender row), ``counts`` (alternatives) and ``plain`` (no study period, tax,
    uncertainty or technology block: the batch pass is all its result needs).  The schedule
    parameters: decline rate
    ``s_decline``; gradient ``o_first``/``o_gradient``; growth ``o_growth_first``/
    ``o_growth``/``o_geometric`` (rows using it); explicit S and Op values; extras X.
    """

    studies: tuple[Study, ...]
    price: FloatArray
    life: IntArray
    marr: FloatArray
    inflation: FloatArray
    then_current: NDArray[np.bool_]
    mask: NDArray[np.bool_]
    first: IntArray
    counts: IntArray
    plain: NDArray[np.bool_]
    s_decline: FloatArray
    s_values: Explicit
    o_first: FloatArray
    o_gradient: FloatArray
    o_growth_first: FloatArray
    o_growth: FloatArray
    o_geometric: NDArray[np.bool_]
    o_values: Explicit
    extras: Explicit

    @property
    def width(self) -> int:
        return int(self.mask.shape[1])

    def rows(self, s: int) -> range:
        """The rows of study ``s``."""
        start = int(self.first[s])
        return range(start, start + int(self.counts[s]))


def _buffer(values: array, dtype: type) -> NDArray:
    """A numpy view of an ``array.array`` (a copy-free read of what the loop appended)."""
    return np.frombuffer(values, dtype=dtype) if len(values) else np.zeros(0, dtype=dtype)


def _rows(values: array) -> IntArray:
    return _buffer(values, np.int64).astype(np.intp, copy=False)


def _explicit(rows: IntArray, life: IntArray, n: int) -> IntArray:
    """Flat indices r*n + j (j < life[r]) of the explicit values of each listed row."""
    k = life[rows]
    where = np.repeat(rows * n - (np.cumsum(k) - k), k)  # a running count plus a row offset
    where += np.arange(where.size)
    return where


def stack(studies: Sequence[Study]) -> Batch:
    """Read every estimate of ``studies`` once into a ``Batch``.

    >>> from core.estimates import Alternative, MarketValues, OperatingCosts, Study
    >>> d = Alternative("D", "defender", 100.0, 2, MarketValues(decline_rate=0.5))
    >>> c = Alternative("C", "challenger", 300.0, 3, operating_costs=OperatingCosts(first=5.0))
    >>> b = stack([Study("s", 0.1, d, (c,))])
    >>> b.mask.tolist(), schedules(b)[0][0, :2].tolist()
    ([[True, True, False], [True, True, True]], [50.0, 25.0])
    """
    counts_b, marr_b, infl_b, tc_b = array("q"), array("d"), array("d"), array("q")
    plain_b = array("b")
    price_b, life_b = array("d"), array("q")
    sv_r, sv_v, ov_r, ov_v = array("q"), array("d"), array("q"), array("d")
    x_r, x_c, x_v = array("q"), array("q"), array("d")
    dec_r, dec_d = array("q"), array("d")
    grad_r, grad_f, grad_g = array("q"), array("d"), array("d")
    grow_r, grow_f, grow_g = array("q"), array("d"), array("d")
    # Bound appends: the loop runs once per alternative of the fleet, so each lookup counts.
    counts_a, marr_a, infl_a, tc_a = counts_b.append, marr_b.append, infl_b.append, tc_b.append
    plain_a = plain_b.append
    life_a, price_a = life_b.append, price_b.append
    sv_ra, sv_ve, ov_ra, ov_ve = sv_r.append, sv_v.extend, ov_r.append, ov_v.extend
    dec_ra, dec_da = dec_r.append, dec_d.append
    grad_ra, grad_fa, grad_ga = grad_r.append, grad_f.append, grad_g.append
    grow_ra, grow_fa, grow_ga = grow_r.append, grow_f.append, grow_g.append
    r = 0
    for study in studies:
        challengers = study.challengers
        counts_a(1 + len(challengers))
        marr_a(study.marr)
        inflation = study.inflation
        if inflation is None:
            infl_a(0.0)
            tc_a(0)
        else:
            infl_a(inflation.rate)
            tc_a(1 if inflation.estimates == "then-current" else 0)
        plain = (study.study_period is None and study.tax is None
                 and study.uncertainty is None and study.technology is None)
        for a in (study.defender, *challengers):
            k = a.max_life
            life_a(k)
            price_a(a.price)
            mv = a.market_values
            values = mv.values
            if values is not None:
                sv_ra(r)
                sv_ve(values if len(values) == k else values[:k])
            else:
                dec_ra(r)
                dec_da(mv.decline_rate or 0.0)
            oc = a.operating_costs
            values = oc.values
            if values is not None:
                ov_ra(r)
                ov_ve(values if len(values) == k else values[:k])
            else:
                growth = oc.growth
                if growth is not None:
                    grow_ra(r)
                    grow_fa(oc.first or 0.0)
                    grow_ga(growth)
                else:
                    grad_ra(r)
                    grad_fa(oc.first or 0.0)
                    grad_ga(oc.gradient or 0.0)
            if a.technology is not None:
                plain = False
            extras = a.extra_costs
            if extras:
                for extra in extras:
                    year = extra.year
                    if 1 <= year <= k:
                        x_r.append(r)
                        x_c.append(year - 1)
                        x_v.append(extra.amount)
            r += 1
        plain_a(plain)
    m = r
    life = _rows(life_b)
    n = int(life.max()) if m else 1
    counts = _rows(counts_b)

    def column(rows_b: array, values_b: array) -> FloatArray:
        col = np.zeros(m)
        col[_rows(rows_b)] = _buffer(values_b, np.float64)
        return col

    geometric = np.zeros(m, dtype=bool)
    geometric[_rows(grow_r)] = True
    cells = _rows(x_r) * n + _rows(x_c)
    keys, where = np.unique(cells, return_inverse=True)
    amounts = np.zeros(keys.size)
    np.add.at(amounts, where, _buffer(x_v, np.float64))
    first = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(np.intp)
    return Batch(
        studies=tuple(studies), price=_buffer(price_b, np.float64), life=life,
        marr=np.repeat(_buffer(marr_b, np.float64), counts),
        inflation=np.repeat(_buffer(infl_b, np.float64), counts),
        then_current=np.repeat(_rows(tc_b) == 1, counts),
        mask=np.arange(1, n + 1)[None, :] <= life[:, None], first=first, counts=counts,
        plain=_buffer(plain_b, np.int8).astype(bool),
        s_decline=column(dec_r, dec_d),
        s_values=(_explicit(_rows(sv_r), life, n), _buffer(sv_v, np.float64)),
        o_first=column(grad_r, grad_f), o_gradient=column(grad_r, grad_g),
        o_growth_first=column(grow_r, grow_f), o_growth=column(grow_r, grow_g),
        o_geometric=geometric,
        o_values=(_explicit(_rows(ov_r), life, n), _buffer(ov_v, np.float64)),
        extras=(keys.astype(np.intp), amounts))


def _put(target: FloatArray, explicit: Explicit) -> None:
    where, values = explicit
    if where.size:
        target.ravel()[where] = values


def schedules(batch: Batch) -> tuple[FloatArray, FloatArray, FloatArray]:
    """The (M, N) market values S, operating costs Op and one-off costs X (zero where there
    are none), in the money each study states, built with the ``core.cashflows`` kernels.

    Dense formulas over every row (SIMD, faster than masked loops): a row of another kind
    holds parameters that give finite filler (decline 0, first 0, gradient 0), which the
    explicit values or the growth formula then overwrite.
    """
    n = batch.width
    years = np.arange(1, n + 1, dtype=float)
    ages = years - 1.0
    S = declining_market_values(batch.price[:, None], batch.s_decline[:, None], years)
    _put(S, batch.s_values)
    Op = gradient_costs(batch.o_first[:, None], batch.o_gradient[:, None], ages)
    geo = batch.o_geometric
    if geo.any():
        Op[geo] = geometric_costs(batch.o_growth_first[geo, None], batch.o_growth[geo, None], ages)
    _put(Op, batch.o_values)
    X = np.zeros(S.shape)
    keys, amounts = batch.extras
    if keys.size:
        X.ravel()[keys] = amounts
    return S, Op, X
