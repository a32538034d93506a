"""Cost-history import checks: exact duplicate rows and rows dated after today (issue 17).

Both are warnings: left out by default, kept when the caller asks; never silent.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

from core.history import ColumnMapping, fit_operating_costs, import_history, yearly_totals

IN_SERVICE = {"PB-3": dt.date(2018, 6, 1)}
TODAY = dt.date(2026, 3, 1)  # PB-3 is in its year of age 8 (2025-06-01 .. 2026-06-01)
MAPPING = ColumnMapping(tag="Asset", date="Date", amount="Amount", kind="Kind")


def _frame(rows: list[tuple[str, str, str, str]]) -> pd.DataFrame:
    t = pd.DataFrame(rows, columns=["Asset", "Date", "Kind", "Amount"])
    t.index = np.arange(2, len(t) + 2)  # spreadsheet rows, header = 1
    return t


def _yearly(first: float, gradient: float, ages: range = range(1, 9)
            ) -> list[tuple[str, str, str, str]]:
    # one operating-cost row per complete year of age, dated 2018-12-01 + (age - 1) years
    return [("PB-3", f"{2017 + j}-12-01", "operating", f"{first + gradient * (j - 1):.2f}")
            for j in ages]


def test_a_future_dated_row_is_left_out_and_does_not_flip_the_gradient() -> None:
    # the records kept since year of age 5 (2022-06-01), then a mistyped date
    rows = _yearly(5208.0, 2448.0, range(5, 9)) + [("PB-3", "2026-07-01", "operating", "1500")]
    table = _frame(rows)
    default = import_history(table, MAPPING, IN_SERVICE, "wo.csv", today=TODAY)
    # hand calculation: 2026-07-01 is 8.08 years after 2018-06-01, so year of age 9,
    # which has not begun on 2026-03-01
    assert [(f.row, f.reason, f.kept) for f in default.flagged] == [
        (6, "dated 2026-07-01, after today (2026-03-01)", False)]
    assert len(default.accepted) == 4 and default.rows == 5
    assert default.summary() == ("wo.csv: 4 of 5 rows imported, 0 rejected, "
                                 "1 flagged (1 left out, 0 kept)")
    assert default.warning_lines() == [
        "wo.csv: warning: row 6: dated 2026-07-01, after today (2026-03-01) (left out)"]
    fit = fit_operating_costs(*yearly_totals(default.accepted), "arithmetic")
    # exact line through the four points (ages 5..8): gradient +2,448 (hand calculation)
    assert abs(fit.params["gradient"] - 2448.0) < 1e-6

    kept = import_history(table, MAPPING, IN_SERVICE, "wo.csv", today=TODAY, keep_future=True)
    assert len(kept.accepted) == 5 and kept.flagged[0].kept and kept.accepted[-1].age == 9
    flipped = fit_operating_costs(*yearly_totals(kept.accepted), "arithmetic")
    ages, totals = yearly_totals(kept.accepted)
    # numpy.polyfit on the same five points; hand calculation: the slope weights are
    # (x - 7)/10, so 1,500 instead of 24,792 at age 9 moves it by 0.2 x -23,292 = -4,658.4
    assert abs(flipped.params["gradient"] - np.polyfit(ages, totals, 1)[0]) < 1e-6
    assert abs(flipped.params["gradient"] - (2448.0 - 4658.4)) < 1e-6
    assert flipped.params["gradient"] < 0 < fit.params["gradient"]


def test_an_exact_duplicate_row_is_left_out_unless_kept() -> None:
    rows = _yearly(9000.0, 2448.0)
    rows.insert(3, rows[2])  # the year-3 row pasted twice
    rows.append(("PB-3", "2020-12-01", "maintenance", "11448.00"))  # same date, other kind
    table = _frame(rows)
    report = import_history(table, MAPPING, IN_SERVICE, "wo.csv", today=TODAY)
    assert [(f.row, f.reason, f.kept) for f in report.flagged] == [
        (5, "exact duplicate of row 4", False)]
    ages, totals = yearly_totals(report.accepted)
    # hand calculation: year 3 = 13,896 operating + 11,448 maintenance, not 2 x 13,896
    assert totals[2] == 13896.0 + 11448.0
    assert report.rows == 10 and len(report.accepted) == 9
    kept = import_history(table, MAPPING, IN_SERVICE, "wo.csv", today=TODAY,
                          keep_duplicates=True)
    assert len(kept.accepted) == 10 and kept.flagged[0].kept
    assert yearly_totals(kept.accepted)[1][2] == 2 * 13896.0 + 11448.0
    assert str(kept.flagged[0]) == "row 5: exact duplicate of row 4 (kept)"


def test_a_repeated_amount_on_another_date_is_not_a_duplicate() -> None:
    # common practice, no source: two identical monthly charges are two charges
    rows = [("PB-3", "2020-01-01", "operating", "500"), ("PB-3", "2020-02-01", "operating", "500")]
    report = import_history(_frame(rows), MAPPING, IN_SERVICE, "wo.csv", today=TODAY)
    assert report.flagged == () and len(report.accepted) == 2


def test_future_calendar_years_and_years_of_age() -> None:
    by_year = pd.DataFrame({"Asset": ["PB-3"] * 3, "Year": ["2025", "2026", "2027"],
                            "Amount": ["1", "2", "3"]}, index=[2, 3, 4])
    report = import_history(by_year, ColumnMapping(tag="Asset", year="Year", amount="Amount"),
                            IN_SERVICE, "y.csv", today=TODAY)
    assert [(f.row, f.reason) for f in report.flagged] == [
        (4, "year 2027 is after this year (2026)")]
    assert [h.amount for h in report.accepted] == [1.0, 2.0]
    by_age = pd.DataFrame({"Age": ["8", "9"], "Amount": ["1", "2"]}, index=[2, 3])
    report = import_history(by_age, ColumnMapping(amount="Amount", age="Age",
                                                  default_tag="PB-3"),
                            IN_SERVICE, "a.csv", today=TODAY, keep_future=True)
    # hand calculation: year of age 9 begins on the 8th anniversary, 2026-06-01
    assert [(f.row, f.reason, f.kept) for f in report.flagged] == [
        (3, "year of age 9 begins 2026-06-01, after today (2026-03-01)", True)]
    assert [h.age for h in report.accepted] == [8, 9]


def test_today_defaults_to_the_computer_date() -> None:
    tomorrow = dt.date.today() + dt.timedelta(days=1)
    rows = [("PB-3", "2020-01-01", "operating", "5"),
            ("PB-3", tomorrow.isoformat(), "operating", "6")]
    report = import_history(_frame(rows), MAPPING, IN_SERVICE, "wo.csv")
    assert [f.row for f in report.flagged] == [3] and len(report.accepted) == 1
