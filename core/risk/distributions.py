"""Distributions of uncertain inputs: physical bounds, quantiles and seeded draws.

Parameters as in docs/method.md §5:

- ``triangular [low, mode, high]`` and ``uniform [low, high]``;
- ``normal [mean, sd]``, truncated to the input's physical bounds (below);
- ``pert [low, mode, high]``: beta-PERT with lambda 4, i.e. ``low + (high-low) B``
  with ``B ~ Beta(1 + 4(mode-low)/(high-low), 1 + 4(high-mode)/(high-low))``;
- ``lognormal [mean, sd]`` of the variable itself: the underlying normal has
  ``sigma^2 = ln(1 + sd^2/mean^2)`` and ``mu = ln(mean) - sigma^2/2``; truncated
  to the bounds like the normal.

Physical bounds by input (``BOUNDS``): a challenger's first cost >= 0; the
defender's market value is free (it may be a removal cost); a decline rate in
(-1, 1); operating-cost first year and gradient free; growth > -1; MARR > -1.
Normal and lognormal draws are truncated to these bounds (inverse-CDF sampling
on the renormalised interval); a triangular, uniform or PERT whose support
crosses a bound is refused, because truncating it would silently change the
distribution the user wrote.

Every parameter set with zero spread (all three equal, or sd 0) is degenerate:
each draw is exactly the value.  Reference for the PERT and lognormal moment
conversion: common practice in cost risk analysis, no single source.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.special import betaincinv, ndtr, ndtri

from core.errors import StudyError
from core.estimates import Distribution

INF = math.inf


@dataclass(frozen=True)
class Bounds:
    """The physical range of one input; ``*_open`` excludes the end point itself."""

    low: float = -INF
    high: float = INF
    low_open: bool = False
    high_open: bool = False

    def contains(self, x: float) -> bool:
        above = x > self.low if self.low_open else x >= self.low
        below = x < self.high if self.high_open else x <= self.high
        return above and below

    def describe(self) -> str:
        parts = []
        if self.low > -INF:
            parts.append(f"{'>' if self.low_open else '>='} {self.low:g}")
        if self.high < INF:
            parts.append(f"{'<' if self.high_open else '<='} {self.high:g}")
        return " and ".join(parts) if parts else "any value"

    def clip(self, x: np.ndarray) -> np.ndarray:
        if self == Bounds():
            return x  # np.clip to (-inf, inf) would return the same numbers
        low = np.nextafter(self.low, INF) if self.low_open else self.low
        high = np.nextafter(self.high, -INF) if self.high_open else self.high
        return np.clip(x, low, high)


#: Physical bounds by input suffix (see the module docstring).
BOUNDS: dict[str, Bounds] = {
    "first_cost": Bounds(low=0.0),
    "market_value": Bounds(),
    "market_values.decline_rate": Bounds(-1.0, 1.0, True, True),
    "operating_costs.first": Bounds(),
    "operating_costs.gradient": Bounds(),
    "operating_costs.growth": Bounds(low=-1.0, low_open=True),
    "marr": Bounds(low=-1.0, low_open=True),
}


def bounds_for(address: str) -> Bounds:
    """Bounds of an address such as ``"Press.first_cost"`` or ``"marr"``.

    >>> bounds_for("Old press.market_values.decline_rate").describe()
    '> -1 and < 1'
    """
    if address == "marr":
        return BOUNDS["marr"]
    for suffix in sorted(BOUNDS, key=len, reverse=True):
        if address.endswith("." + suffix):
            return BOUNDS[suffix]
    raise KeyError(address)


def _lognormal_params(mean: float, sd: float) -> tuple[float, float]:
    sigma2 = math.log1p((sd / mean) ** 2)
    return math.log(mean) - sigma2 / 2.0, math.sqrt(sigma2)


def _spread(dist: Distribution) -> bool:
    p = dist.params
    if dist.kind in ("triangular", "pert"):
        return p[2] > p[0]
    if dist.kind == "uniform":
        return p[1] > p[0]
    return p[1] > 0


def point_value(dist: Distribution) -> float:
    """The value of a degenerate distribution (and the natural centre of any)."""
    p = dist.params
    return float(p[1] if dist.kind in ("triangular", "pert") else p[0])


def check(dist: Distribution, bounds: Bounds, where: str) -> None:
    """Refuse a distribution that does not fit the input's physical bounds."""
    p = dist.params
    if not _spread(dist):
        if not bounds.contains(point_value(dist)):
            raise StudyError(where, f"value {point_value(dist):g} is outside the input's "
                             f"physical range ({bounds.describe()})")
        return
    if dist.kind in ("triangular", "uniform", "pert"):
        low, high = p[0], p[-1]
        if not (bounds.contains(low) and bounds.contains(high)):
            raise StudyError(where, f"support [{low:g}, {high:g}] crosses the input's physical "
                             f"range ({bounds.describe()}); narrow it, or use a normal, which "
                             "is truncated there")
        return
    if not bounds.contains(p[0]):
        raise StudyError(where, f"mean {p[0]:g} is outside the input's physical range "
                         f"({bounds.describe()})")
    if _mass(dist, bounds) < 1e-9:
        raise StudyError(where, "almost no probability lies inside the input's physical range "
                         f"({bounds.describe()})")


def _cdf(dist: Distribution, x: float) -> float:
    """CDF of the untruncated normal or lognormal."""
    mean, sd = dist.params
    if dist.kind == "normal":
        return float(ndtr((x - mean) / sd)) if math.isfinite(x) else (0.0 if x < 0 else 1.0)
    if x <= 0:
        return 0.0
    if not math.isfinite(x):
        return 1.0
    mu, sigma = _lognormal_params(mean, sd)
    return float(ndtr((math.log(x) - mu) / sigma))


def _mass(dist: Distribution, bounds: Bounds) -> float:
    return _cdf(dist, bounds.high) - _cdf(dist, bounds.low)


def ppf(dist: Distribution, q: np.ndarray | Sequence[float] | float,
        bounds: Bounds = Bounds()) -> np.ndarray:
    """Quantile function (inverse CDF) at probabilities ``q`` in [0, 1], truncation included.

    >>> ppf(Distribution("triangular", (0.0, 0.0, 1.0)), [0.0, 0.75, 1.0]).tolist()
    [0.0, 0.5, 1.0]
    >>> round(float(ppf(Distribution("normal", (0.0, 1.0)), 0.5, Bounds(low=0.0))), 4)
    0.6745
    """
    u = np.asarray(q, dtype=float)
    p = dist.params
    if not _spread(dist):
        return np.full(u.shape, point_value(dist))
    if dist.kind == "uniform":
        return p[0] + u * (p[1] - p[0])
    if dist.kind == "triangular":
        low, mode, high = p
        width = high - low
        split = (mode - low) / width
        left = low + np.sqrt(u * width * (mode - low))
        right = high - np.sqrt((1.0 - u) * width * (high - mode))
        return np.where(u < split, left, right)
    if dist.kind == "pert":
        low, mode, high = p
        a, b = _pert_shape(p)
        return low + (high - low) * betaincinv(a, b, u)
    lo, hi = _cdf(dist, bounds.low), _cdf(dist, bounds.high)
    share = u if lo == 0.0 and hi == 1.0 else lo + u * (hi - lo)  # untruncated: u itself
    z = ndtri(np.clip(share, 1e-300, 1.0 - 1e-16))
    if dist.kind == "normal":
        x = p[0] + p[1] * z
    else:
        mu, sigma = _lognormal_params(*p)
        x = np.exp(mu + sigma * z)
    return bounds.clip(x)


def share_below(dist: Distribution, x: float, bounds: Bounds = Bounds()) -> float:
    """P(X < x) for the (truncated) distribution, read off its quantile function to 1e-4.

    >>> round(share_below(Distribution("uniform", (-0.02, 0.08)), 0.0), 3)
    0.2
    """
    q = np.linspace(0.0, 1.0, 10001)
    values = ppf(dist, q, bounds)
    return float(q[np.searchsorted(values, x, side="left")]) if x <= values[-1] else 1.0


def _pert_shape(p: Sequence[float]) -> tuple[float, float]:
    low, mode, high = p
    return 1.0 + 4.0 * (mode - low) / (high - low), 1.0 + 4.0 * (high - mode) / (high - low)


def mean(dist: Distribution, bounds: Bounds = Bounds()) -> float:
    """Mean of the (truncated) distribution: closed form where there is one, else quadrature.

    >>> mean(Distribution("triangular", (1.0, 2.0, 6.0)))
    3.0
    >>> mean(Distribution("pert", (0.0, 1.0, 8.0)))
    2.0
    """
    p = dist.params
    if not _spread(dist):
        return point_value(dist)
    if dist.kind == "triangular":
        return float(sum(p) / 3.0)
    if dist.kind == "uniform":
        return float((p[0] + p[1]) / 2.0)
    if dist.kind == "pert":
        return float((p[0] + 4.0 * p[1] + p[2]) / 6.0)
    if _mass(dist, bounds) > 1.0 - 1e-12:
        return float(p[0])
    grid = (np.arange(20000) + 0.5) / 20000.0
    return float(np.mean(ppf(dist, grid, bounds)))


def draw(dist: Distribution, rng: np.random.Generator, size: int,
         bounds: Bounds = Bounds()) -> np.ndarray:
    """``size`` seeded draws.  Successive calls on one generator continue one stream, so
    drawing in chunks gives exactly the numbers of one big draw.

    >>> g = np.random.default_rng(1)
    >>> x = draw(Distribution("uniform", (2.0, 4.0)), g, 5)
    >>> bool(((x >= 2) & (x <= 4)).all())
    True
    """
    if not _spread(dist):
        return np.full(size, point_value(dist))
    if dist.kind == "pert":
        a, b = _pert_shape(dist.params)
        low, _, high = dist.params
        return low + (high - low) * rng.beta(a, b, size)
    return ppf(dist, rng.random(size), bounds)
