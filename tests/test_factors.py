"""Interest factors (core.factors) against outside references.

Sources, named on each test: "numpy-financial" (pmt/pv/fv/npv as an independent
implementation), "from memory" (standard compound-interest table values, 4 decimals),
"hand calculation" (limits and arithmetic written out below).
"""

from __future__ import annotations

import numpy as np
import numpy_financial as npf
import pytest

from core import factors as f

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning:numpy_financial")

RATES = [-0.5, -0.05, 0.0, 0.03, 0.10, 0.25, 1.5]
LIVES = [1, 2, 5, 12, 30]


@pytest.mark.parametrize("i", RATES)
@pytest.mark.parametrize("n", LIVES)
def test_single_and_uniform_factors_match_numpy_financial(i: float, n: int) -> None:
    # Source: numpy-financial (pmt, pv, fv with the sign convention of a loan of 1).
    assert f.ap(i, n) == pytest.approx(npf.pmt(i, n, -1.0), rel=1e-12)
    assert f.pa(i, n) == pytest.approx(npf.pv(i, n, -1.0), rel=1e-12)
    assert f.pf(i, n) == pytest.approx(npf.pv(i, n, 0.0, -1.0), rel=1e-12)
    assert f.fp(i, n) == pytest.approx(npf.fv(i, n, 0.0, -1.0), rel=1e-12)
    assert f.fa(i, n) == pytest.approx(npf.fv(i, n, -1.0, 0.0), rel=1e-12)
    assert f.af(i, n) == pytest.approx(npf.pmt(i, n, 0.0, -1.0), rel=1e-12)


@pytest.mark.parametrize("i", RATES)
@pytest.mark.parametrize("n", LIVES)
def test_gradient_factors_match_numpy_financial_npv(i: float, n: int) -> None:
    # Source: numpy-financial npv (first value at t = 0): gradient 0, 1, ..., n-1 at ends of 1..n.
    gradient = [0.0] + [float(j - 1) for j in range(1, n + 1)]
    assert f.pg(i, n) == pytest.approx(npf.npv(i, gradient), rel=1e-10, abs=1e-12)
    assert f.ag(i, n) == pytest.approx(npf.npv(i, gradient) * npf.pmt(i, n, -1.0),
                                       rel=1e-10, abs=1e-12)


@pytest.mark.parametrize("g", [-0.3, 0.0, 0.04, 0.10, 0.2])
@pytest.mark.parametrize("i", [-0.05, 0.0, 0.10])
@pytest.mark.parametrize("n", [1, 4, 15])
def test_geometric_factor_matches_numpy_financial_npv(g: float, i: float, n: int) -> None:
    # Source: numpy-financial npv of 1, (1+g), ..., (1+g)^(n-1) at the ends of years 1..n.
    series = [0.0] + [(1.0 + g) ** (j - 1) for j in range(1, n + 1)]
    assert f.pa_geometric(g, i, n) == pytest.approx(npf.npv(i, series), rel=1e-10)


# Source: from memory (standard compound-interest tables, 4 decimals).
TABLE = {
    (0.10, 5): {"fp": 1.6105, "pf": 0.6209, "ap": 0.2638, "pa": 3.7908, "af": 0.1638,
                "fa": 6.1051, "ag": 1.8101, "pg": 6.8618},
    (0.10, 10): {"fp": 2.5937, "pf": 0.3855, "ap": 0.1627, "pa": 6.1446, "af": 0.0627,
                 "fa": 15.9374, "ag": 3.7255, "pg": 22.8913},
    (0.06, 10): {"fp": 1.7908, "pf": 0.5584, "ap": 0.1359, "pa": 7.3601, "af": 0.0759,
                 "fa": 13.1808, "ag": 4.0220, "pg": 29.6023},
    (0.06, 5): {"fp": 1.3382, "pf": 0.7473, "ap": 0.2374, "pa": 4.2124, "af": 0.1774,
                "fa": 5.6371, "ag": 1.8836, "pg": 7.9345},
}


@pytest.mark.parametrize(("key", "values"), TABLE.items(), ids=lambda v: str(v))
def test_factor_table_values_from_memory(key: tuple[float, int], values: dict) -> None:
    # Source: from memory (printed 10 % and 6 % factor tables, rounded to 4 decimals).
    i, n = key
    for name, expected in values.items():
        assert float(getattr(f, name)(i, n)) == pytest.approx(expected, abs=6e-5), name


def test_zero_rate_limits() -> None:
    # Source: hand calculation (limits as i -> 0): P/A = n, A/P = 1/n, P/G = n(n-1)/2,
    # A/G = (n-1)/2, F/P = P/F = 1, geometric P/A = sum (1+g)^(j-1).
    n = np.arange(1, 11)
    assert np.allclose(f.pa(0.0, n), n)
    assert np.allclose(f.fa(0.0, n), n)
    assert np.allclose(f.ap(0.0, n), 1.0 / n)
    assert np.allclose(f.af(0.0, n), 1.0 / n)
    assert np.allclose(f.pg(0.0, n), n * (n - 1) / 2)
    assert np.allclose(f.ag(0.0, n), (n - 1) / 2)
    assert np.allclose(f.fp(0.0, n), 1.0) and np.allclose(f.pf(0.0, n), 1.0)
    assert float(f.pa_geometric(0.1, 0.0, 3)) == pytest.approx(1 + 1.1 + 1.21)
    assert float(f.pa_geometric(0.0, 0.0, 7)) == pytest.approx(7.0)
    assert np.all(np.isfinite(f.pg(np.zeros(4), 5)))


@pytest.mark.parametrize("name", ["pa", "ap", "fa", "af", "pg", "ag"])
def test_factors_are_continuous_through_zero(name: str) -> None:
    # Source: hand calculation (the i = 0 limit must join the formula for small |i|).
    fn = getattr(f, name)
    at_zero = float(fn(0.0, 10))
    for i in (1e-9, 1e-7, -1e-7, 1e-5):
        assert float(fn(i, 10)) == pytest.approx(at_zero, rel=1e-4)


@pytest.mark.parametrize("i", [1e-11, 1e-9, 1e-7, -1e-7, 5e-5, 9.9e-5, 1.01e-4, -3e-4])
@pytest.mark.parametrize("n", [3, 10, 60, 100])
def test_gradient_factors_accurate_for_tiny_rates(i: float, n: int) -> None:
    # Source: numpy-financial npv of the gradient series (direct summation, no cancellation).
    # Regression: (P/G,1e-9,10) used to come out as 927 instead of 45.
    gradient = [0.0] + [float(j - 1) for j in range(1, n + 1)]
    assert float(f.pg(i, n)) == pytest.approx(npf.npv(i, gradient), rel=1e-6)


@pytest.mark.parametrize("bad", [-1.0, -1.5, -100.0, float("nan"), float("inf")])
@pytest.mark.parametrize("name", ["fp", "pf", "pa", "ap", "fa", "af", "pg", "ag"])
def test_rates_at_or_below_minus_100_percent_are_refused(name: str, bad: float) -> None:
    # Source: common practice, no source (docs/method.md §1: i must be > -1 and finite).
    with pytest.raises(ValueError):
        getattr(f, name)(bad, 5)
    with pytest.raises(ValueError):
        getattr(f, name)(np.array([0.1, bad]), 5)


def test_geometric_refuses_bad_rates() -> None:
    # Source: common practice, no source.
    with pytest.raises(ValueError):
        f.pa_geometric(0.05, -1.0, 5)
    with pytest.raises(ValueError):
        f.pa_geometric(-1.0, 0.05, 5)


def test_broadcasting_shapes() -> None:
    # Source: numpy-financial, element by element, for a (3, 1) x (4,) grid.
    i = np.array([[0.0], [0.05], [0.12]])
    n = np.array([1, 3, 7, 20])
    for name in ("fp", "pf", "pa", "ap", "fa", "af", "pg", "ag"):
        table = getattr(f, name)(i, n)
        assert table.shape == (3, 4), name
    table = f.ap(i, n)
    for r in range(3):
        for c in range(4):
            assert table[r, c] == pytest.approx(npf.pmt(i[r, 0], n[c], -1.0), rel=1e-12)
    assert f.pa_geometric(np.array([0.0, 0.05, 0.1, 0.2]), i, n).shape == (3, 4)
    assert np.asarray(f.pf(0.1, 3)).shape == ()


def test_zero_and_nonzero_rates_in_one_array() -> None:
    # Source: numpy-financial; a mixed array must not leak the i = 0 branch into others.
    i = np.array([0.0, 0.08, 0.0, -0.2])
    got = f.ag(i, 6)
    want = [npf.npv(r, [0, 0, 1, 2, 3, 4, 5]) * npf.pmt(r, 6, -1.0) for r in i]
    assert np.allclose(got, want, rtol=1e-10)


def test_capital_recovery_factors_refuse_zero_periods() -> None:
    # Source: common practice, no source ((A/P,i,0) is undefined).
    for name in ("ap", "af", "ag"):
        with pytest.raises(ValueError):
            getattr(f, name)(0.1, 0)
