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


def declining_market_values(price: ArrayLike, decline_rate: ArrayLike,
                            years: ArrayLike) -> FloatArray:
    """S_k = P (1 - d)^k for the given years k.

    >>> declining_market_values(100.0, 0.5, [1.0, 2.0, 3.0]).tolist()
    [50.0, 25.0, 12.5]
    >>> declining_market_values([[100.0], [10.0]], [[0.5], [0.0]], [1.0, 2.0]).tolist()
    [[50.0, 25.0], [10.0, 10.0]]
    """
    return np.multiply(price, np.power(np.subtract(1.0, decline_rate), years))


def gradient_costs(first: ArrayLike, gradient: ArrayLike, ages: ArrayLike) -> FloatArray:
    """C_j = C_1 + (j - 1) G, with ``ages`` = j - 1.

    >>> gradient_costs(100.0, 10.0, [0.0, 1.0, 2.0]).tolist()
    [100.0, 110.0, 120.0]
    """
    return np.add(first, np.multiply(ages, gradient))


def geometric_costs(first: ArrayLike, growth: ArrayLike, ages: ArrayLike) -> FloatArray:
    """C_j = C_1 (1 + g)^(j - 1), with ``ages`` = j - 1.

    >>> [round(c, 2) for c in geometric_costs(100.0, 0.1, [0.0, 1.0, 2.0]).tolist()]
    [100.0, 110.0, 121.0]
    """
    return np.multiply(first, np.power(np.add(1.0, growth), ages))
