"""Market-value and operating-cost schedules from their estimate parameters (docs/method.md §2).

Pure array functions: every argument broadcasts over leading batch dimensions, the year
axis is last.  Money in currency units (costs positive), rates per year as decimals.
``core.estimates`` (one alternative) and ``core.batch`` (a padded batch of studies) both
build their schedules here, so each formula exists once.

Reference: geometric decline of resale value and arithmetic / geometric gradient series,
standard in engineering economy.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from core.factors import FloatArray


def _power_rows(base: ArrayLike, exponents: ArrayLike, out: FloatArray | None) -> FloatArray:
    """base ** exponents; into ``out`` when ``base`` moves along the batch (one base per row).

    The exponents are written into ``out`` in full first: numpy rounds x**2 and x**-1
    differently when the exponent is constant along its inner loop (``out`` may be laid
    out batch-contiguous), so the values stay those of a new array.
    """
    b = np.asarray(base, dtype=float)
    if out is None or b.size == 1:
        return np.power(b, exponents)
    np.copyto(out, exponents)
    return np.power(b, out, out=out)


def declining_market_values(price: ArrayLike, decline_rate: ArrayLike, years: ArrayLike,
                            out: FloatArray | None = None) -> FloatArray:
    """S_k = P (1 - d)^k for the given years k (into ``out`` if given, in any memory layout).

    >>> declining_market_values(100.0, 0.5, [1.0, 2.0, 3.0]).tolist()
    [50.0, 25.0, 12.5]
    >>> declining_market_values([[100.0], [10.0]], [[0.5], [0.0]], [1.0, 2.0]).tolist()
    [[50.0, 25.0], [10.0, 10.0]]
    >>> declining_market_values([[100.0], [10.0]], [[0.5], [0.0]], [1.0, 2.0],
    ...                         out=np.empty((2, 2)).T).tolist()
    [[50.0, 25.0], [10.0, 10.0]]
    """
    return np.multiply(price, _power_rows(np.subtract(1.0, decline_rate), years, out), out=out)


def gradient_costs(first: ArrayLike, gradient: ArrayLike, ages: ArrayLike,
                   out: FloatArray | None = None) -> FloatArray:
    """C_j = C_1 + (j - 1) G, with ``ages`` = j - 1 (into ``out`` if given).

    >>> gradient_costs(100.0, 10.0, [0.0, 1.0, 2.0]).tolist()
    [100.0, 110.0, 120.0]
    >>> gradient_costs([[100.0], [50.0]], 10.0, [0.0, 1.0], out=np.empty((2, 2))).tolist()
    [[100.0, 110.0], [50.0, 60.0]]
    """
    if out is None or np.size(gradient) == 1:
        return np.add(first, np.multiply(ages, gradient), out=out)
    np.multiply(ages, gradient, out=out)
    return np.add(first, out, out=out)


def geometric_costs(first: ArrayLike, growth: ArrayLike, ages: ArrayLike,
                    out: FloatArray | None = None) -> FloatArray:
    """C_j = C_1 (1 + g)^(j - 1), with ``ages`` = j - 1 (into ``out`` if given).

    >>> [round(c, 2) for c in geometric_costs(100.0, 0.1, [0.0, 1.0, 2.0]).tolist()]
    [100.0, 110.0, 121.0]
    >>> geometric_costs([[100.0], [10.0]], [[0.5], [0.0]], [0.0, 1.0],
    ...                 out=np.empty((2, 2)).T).tolist()
    [[100.0, 150.0], [10.0, 10.0]]
    """
    return np.multiply(first, _power_rows(np.add(1.0, growth), ages, out), out=out)
