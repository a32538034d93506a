"""Depreciation allowances: MACRS against IRS Publication 946 Table A-1, SL and DB by hand."""

from __future__ import annotations

import numpy as np
import pytest

from core.depreciation import (
    declining_balance,
    macrs,
    macrs_rates,
    schedule,
    straight_line,
)
from core.estimates import Depreciation

# IRS Publication 946, Appendix A, Table A-1: "3-, 5-, 7-, 10-, 15-, and 20-Year Property,
# Half-Year Convention" (GDS; 200% DB for 3-10 years, 150% DB for 15 and 20), percentages by
# recovery year.  Hardcoded here only, to check the rule-generated rates in core.depreciation.
TABLE_A1 = {
    3: [33.33, 44.45, 14.81, 7.41],
    5: [20.00, 32.00, 19.20, 11.52, 11.52, 5.76],
    7: [14.29, 24.49, 17.49, 12.49, 8.93, 8.92, 8.93, 4.46],
    10: [10.00, 18.00, 14.40, 11.52, 9.22, 7.37, 6.55, 6.55, 6.56, 6.55, 3.28],
    15: [5.00, 9.50, 8.55, 7.70, 6.93, 6.23, 5.90, 5.90, 5.91, 5.90, 5.91, 5.90, 5.91, 5.90,
         5.91, 2.95],
    20: [3.750, 7.219, 6.677, 6.177, 5.713, 5.285, 4.888, 4.522, 4.462, 4.461, 4.462, 4.461,
         4.462, 4.461, 4.462, 4.461, 4.462, 4.461, 4.462, 4.461, 2.231],
}


@pytest.mark.parametrize("cls", sorted(TABLE_A1))
def test_macrs_matches_publication_946_table_a1(cls: int) -> None:
    # IRS Publication 946 Table A-1, to 0.01 percentage point (the table prints rounded values)
    table = np.array(TABLE_A1[cls])
    for exact in (False, True):
        ours = macrs_rates(cls, exact=exact) * 100.0
        assert len(ours) == cls + 1 == len(table)
        assert np.all(np.abs(ours - table) <= 0.01 + 1e-9), (exact, ours.round(3), table)
        assert ours.sum() == pytest.approx(100.0, abs=1e-9)
    # the rounded generation (the default) gives the printed table digit for digit
    assert np.all(np.abs(macrs_rates(cls) * 100.0 - table) < 1e-9)


def test_macrs_vectorised_over_bases() -> None:
    # hand calculation: 10,000 x 20% = 2,000 and 20,000 x 32% = 6,400 (Table A-1, 5-year)
    d = macrs([10000.0, 20000.0], 5)
    assert d.shape == (2, 6)
    assert d[0, 0] == pytest.approx(2000.0)
    assert d[1, 1] == pytest.approx(6400.0)
    with pytest.raises(ValueError):
        macrs_rates(4)


def test_straight_line_full_year_with_salvage() -> None:
    # hand calculation: (B - SV)/N = (50,000 - 5,000)/9 = 5,000 a year for 9 years
    d = straight_line(50000.0, 9, 5000.0, horizon=11)
    assert d.tolist() == [5000.0] * 9 + [0.0, 0.0]


def test_declining_balance_switches_to_straight_line() -> None:
    # hand calculation, 30% DB on 10,000 over 5 years:
    # y1 3,000 (BV 7,000); y2 2,100 (BV 4,900); y3 max(1,470, 4,900/3 = 1,633.33) -> SL:
    # y3..y5 1,633.33 each, BV 0 at year 5
    d = declining_balance(10000.0, 5, 0.30)
    assert d.round(2).tolist() == [3000.0, 2100.0, 1633.33, 1633.33, 1633.33]
    assert d.sum() == pytest.approx(10000.0)


def test_defender_schedule_continues_from_its_age() -> None:
    # hand calculation: 7-year MACRS on 100,000, 3 years claimed (14.29+24.49+17.49 = 56.27%
    # by Table A-1), so BV_0 = 43,730; the next allowance is year 4's 12.49% = 12,490
    s = schedule(Depreciation("macrs", basis=100000.0, age=3, macrs_class=7), 100000.0, 6)
    assert float(s.book_value_0) == pytest.approx(43730.0, abs=1e-6)
    assert s.allowance[0] == pytest.approx(12490.0, abs=1e-6)
    # tax years 4..9: years 4..7 are < N+1 = 8 (half-year rule on disposal), 8 is N+1, 9 is past
    assert s.disposal_fraction.tolist() == [0.5, 0.5, 0.5, 0.5, 1.0, 1.0]
    assert s.allowance[5] == 0.0
    # fully depreciated by the end of tax year 8 whichever way it leaves
    assert s.book_value_at_disposal()[4] == pytest.approx(0.0, abs=1e-6)


def test_macrs_half_year_rule_in_disposal_year() -> None:
    # IRS Publication 946 (half-year convention, year of disposal): sold in recovery year 2 of a
    # 3-year asset, only half of year 2's 44.45% is allowed.  Hand calculation on 10,000:
    # D_1 = 3,333, D_2 = 4,445 / 2 = 2,222.50, BV_2 = 10,000 - 5,555.50 = 4,444.50;
    # sold in year 1: half of 3,333, BV_1 = 8,333.50
    s = schedule(Depreciation("macrs", macrs_class=3), 10000.0, 4)
    bv = s.book_value_at_disposal()
    assert bv[1] == pytest.approx(4444.50, abs=1e-6)
    assert bv[0] == pytest.approx(8333.50, abs=1e-6)
    # disposal in year N+1 = 4 takes the whole (already half-year) allowance: BV 0
    assert bv[3] == pytest.approx(0.0, abs=1e-9)


def test_straight_line_defender_past_recovery_holds_salvage() -> None:
    # hand calculation: basis 20,000, SV 2,000, N = 6 -> 3,000/yr; age 8 > N: BV_0 = 2,000, D = 0
    s = schedule(Depreciation("straight_line", basis=20000.0, years=6, age=8, salvage=2000.0),
                 20000.0, 3)
    assert float(s.book_value_0) == pytest.approx(2000.0)
    assert s.allowance.tolist() == [0.0, 0.0, 0.0]
