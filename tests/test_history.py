"""Cost-history import (CSV/XLSX, column mapping, rejected rows) and trend fitting.

References named on each test: "numpy.polyfit" and "scipy.stats.linregress" (independent
least-squares implementations), "hand calculation" (small cases worked out in comments),
"synthetic data" (known parameters with seeded noise, recovered within stated tolerances).
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from core.errors import StudyError
from core.estimates import MarketValues, OperatingCosts
from core.history import (
    ColumnMapping,
    TrendFit,
    arithmetic_fit,
    decline_fit,
    fit_market_values,
    fit_operating_costs,
    geometric_fit,
    import_file,
    import_history,
    parse_amount,
    read_table,
    yearly_totals,
)
from core.history.importing import years_between

IN_SERVICE = {"AC-101": dt.date(2018, 4, 16), "FL-07": dt.date(2020, 1, 1), "NODATE": None}

CSV = """Asset,Date,Kind,Amount,Note
AC-101,2018-05-01,operating,"1,200.50",first month
AC-101,2019-04-15,maintenance,£300,last day of year 1
AC-101,2019-04-16,Repair,450,first day of year 2
AC-101,2017-12-31,operating,99,before service
,2019-01-01,operating,10,no tag
ZZ-9,2019-01-01,operating,10,unknown
AC-101,not a date,operating,10,bad date
AC-101,2019-01-01,operating,ten,bad amount
AC-101,2019-01-01,operating,,no amount
AC-101,2019-01-01,refund,10,bad kind
AC-101,2019-01-01,operating,-25,negative
NODATE,2019-01-01,operating,10,no in-service date
,,,,
FL-07,2023-07-10,Quote,"18,000",resale at 3.5 years rounds to 4
"""


@pytest.fixture()
def csv_file(tmp_path: Path) -> Path:
    p = tmp_path / "work_orders.csv"
    p.write_text(CSV, encoding="utf-8")
    return p


MAPPING = ColumnMapping(tag="Asset", date="Date", amount="Amount", kind="Kind")


def test_csv_import_accepts_and_reports_every_rejected_row(csv_file: Path) -> None:
    report = import_file(csv_file, MAPPING, IN_SERVICE)
    # hand calculation: 14 data rows (spreadsheet rows 2..15), header is row 1
    assert report.rows == 14
    accepted = [(r.tag, r.age, r.amount, r.kind, r.source_row) for r in report.accepted]
    assert accepted == [("AC-101", 1, 1200.5, "operating", 2),
                        ("AC-101", 1, 300.0, "maintenance", 3),
                        ("AC-101", 2, 450.0, "maintenance", 4),
                        ("FL-07", 4, 18000.0, "resale", 15)]
    reasons = {r.row: r.reason for r in report.rejected}
    assert reasons == {
        5: "date 2017-12-31 is before 'AC-101' entered service (2018-04-16)",
        6: "no asset tag",
        7: "unknown asset tag 'ZZ-9'",
        8: "date 'not a date' is not a date",
        9: "amount 'ten' is not a number",
        10: "no amount",
        11: "kind 'refund' is not operating, maintenance or resale",
        12: "negative operating cost -25 (a credit is not a cost)",
        13: "asset 'NODATE' has no in-service date to turn dates into age",
        14: "empty row",
    }
    assert report.lines()[0] == ("work_orders.csv: row 5: date 2017-12-31 is before 'AC-101' "
                                 "entered service (2018-04-16)")
    assert report.summary() == "work_orders.csv: 4 of 14 rows imported, 10 rejected"


def test_xlsx_import_with_real_dates_and_year_column(tmp_path: Path) -> None:
    p = tmp_path / "costs.xlsx"
    frame = pd.DataFrame({"Tag": ["AC-101", "AC-101", "AC-101", "AC-101"],
                          "Year": [2018, 2019, "2020.5", None],
                          "Cost": [5000, 5600.0, 6100, 7000],
                          "When": [dt.datetime(2018, 6, 1), dt.datetime(2020, 4, 15),
                                   dt.datetime(2021, 4, 16), dt.datetime(2022, 1, 1)]})
    frame.to_excel(p, index=False)
    by_year = import_file(p, ColumnMapping(tag="Tag", year="Year", amount="Cost"), IN_SERVICE)
    # calendar year 2018 (the in-service year) is year of age 1
    assert [(r.age, r.amount) for r in by_year.accepted] == [(1, 5000.0), (2, 5600.0)]
    assert [(r.row, r.reason) for r in by_year.rejected] == [
        (4, "Year '2020.5' is not a whole number"), (5, "no year")]
    by_date = import_file(p, ColumnMapping(tag="Tag", date="When", amount="Cost"), IN_SERVICE)
    assert [r.age for r in by_date.accepted] == [1, 2, 4, 4]
    assert by_date.accepted[2].date == "2021-04-16"


def test_age_column_and_fixed_tag() -> None:
    t = pd.DataFrame({"Age": ["1", "2", "0", "x"], "Cost": ["10", "20", "30", "40"]},
                     index=[2, 3, 4, 5])
    r = import_history(t, ColumnMapping(amount="Cost", age="Age", default_tag="FL-07",
                                        default_kind="maintenance"), IN_SERVICE, "sheet")
    assert [(h.tag, h.age, h.kind) for h in r.accepted] == [("FL-07", 1, "maintenance"),
                                                            ("FL-07", 2, "maintenance")]
    assert [str(x) for x in r.rejected] == [
        "row 4: year of age 0 is before the asset entered service",
        "row 5: Age 'x' is not a whole number"]


def test_mapping_errors_name_the_problem(csv_file: Path) -> None:
    with pytest.raises(StudyError, match="no column 'Cost'"):
        import_file(csv_file, ColumnMapping(tag="Asset", date="Date", amount="Cost"), IN_SERVICE)
    with pytest.raises(StudyError, match="exactly one of a date, year or age"):
        import_file(csv_file, ColumnMapping(tag="Asset", amount="Amount"), IN_SERVICE)
    with pytest.raises(StudyError, match="asset tag column"):
        import_file(csv_file, ColumnMapping(date="Date", amount="Amount"), IN_SERVICE)


def test_read_table_refuses_bad_files(tmp_path: Path) -> None:
    with pytest.raises(StudyError, match="no such file"):
        read_table(tmp_path / "none.csv")
    bad = tmp_path / "bad.xlsx"
    bad.write_bytes(b"not a zip")
    with pytest.raises(StudyError, match="cannot read the table"):
        read_table(bad)
    with pytest.raises(StudyError, match="cannot import"):
        read_table(bad.rename(tmp_path / "x.pdf"))


def test_years_between_and_yearly_totals() -> None:
    # hand calculation: half a (non-leap) year after an anniversary
    assert years_between(dt.date(2020, 1, 1), dt.date(2022, 7, 2)) == pytest.approx(2.5, abs=0.01)
    assert years_between(dt.date(2020, 2, 29), dt.date(2021, 2, 28)) == pytest.approx(1.0)
    from core.workbook import HistoryRow

    rows = [HistoryRow("A", 2, 5.0, "maintenance"), HistoryRow("A", 1, 10.0),
            HistoryRow("A", 2, 7.0), HistoryRow("A", 3, 900.0, "resale"),
            HistoryRow("A", 3, 1100.0, "resale")]
    ages, totals = yearly_totals(rows)
    assert ages.tolist() == [1, 2] and totals.tolist() == [10.0, 12.0]
    ages, quotes = yearly_totals(rows, ("resale",))
    assert ages.tolist() == [3] and quotes.tolist() == [1000.0]  # quotes averaged


# --------------------------------------------------------------------------- fits
RNG = np.random.default_rng(20260)


def test_arithmetic_fit_matches_polyfit_and_linregress() -> None:
    j = np.arange(1, 11)
    c = 12000 + 850 * (j - 1) + RNG.normal(0, 400, j.size)
    a, g, r2 = arithmetic_fit(j, c)
    slope, intercept = np.polyfit(j - 1, c, 1)  # reference: numpy.polyfit
    assert (float(a), float(g)) == pytest.approx((intercept, slope), rel=1e-10)
    ref = stats.linregress(j - 1, c)  # reference: scipy.stats.linregress
    assert float(r2) == pytest.approx(ref.rvalue ** 2, rel=1e-10)


def test_geometric_and_decline_fits_match_polyfit_on_logs() -> None:
    j = np.arange(1, 9)
    c = 9000 * 1.06 ** (j - 1) * np.exp(RNG.normal(0, 0.03, j.size))
    a, g, _ = geometric_fit(j, c)
    b1, b0 = np.polyfit(j - 1, np.log(c), 1)  # reference: numpy.polyfit on ln C
    assert float(a) == pytest.approx(np.exp(b0), rel=1e-10)
    assert float(g) == pytest.approx(np.exp(b1) - 1, rel=1e-10)
    k = np.arange(1, 8)
    mv = 64000 * 0.86 ** k * np.exp(RNG.normal(0, 0.04, k.size))
    p, d, _ = decline_fit(k, mv)
    ref = stats.linregress(k, np.log(mv))  # reference: scipy.stats.linregress on ln MV
    assert float(p) == pytest.approx(np.exp(ref.intercept), rel=1e-10)
    assert float(d) == pytest.approx(1 - np.exp(ref.slope), rel=1e-10)
    # with the price fixed: slope through the point (0, ln P), numpy.linalg.lstsq as reference
    p2, d2, _ = decline_fit(k, mv, price=64000.0)
    (slope,), *_ = np.linalg.lstsq(k[:, None].astype(float), np.log(mv / 64000.0), rcond=None)
    assert float(p2) == 64000.0 and float(d2) == pytest.approx(1 - np.exp(slope), rel=1e-10)


@pytest.mark.parametrize("seed", range(5))
def test_fits_recover_known_parameters_from_noisy_data(seed: int) -> None:
    # synthetic data: 12 years, 3 % noise; tolerances from the standard error at this noise
    rng = np.random.default_rng(seed)
    j = np.arange(1, 13)
    c = (15000 + 1200 * (j - 1)) * (1 + rng.normal(0, 0.03, j.size))
    fit = fit_operating_costs(j, c)
    assert fit.params["first"] == pytest.approx(15000, rel=0.05)
    assert fit.params["gradient"] == pytest.approx(1200, rel=0.10)
    assert fit.r_squared > 0.95
    assert np.allclose(np.asarray(fit.values) - fit.fitted(), fit.residuals, atol=1e-5)
    g = fit_operating_costs(j, 8000 * 1.07 ** (j - 1) * np.exp(rng.normal(0, 0.03, j.size)),
                            "geometric")
    assert g.params["growth"] == pytest.approx(0.07, abs=0.01)
    assert g.r_squared_log is not None and g.r_squared_log > 0.95
    k = np.arange(1, 9)
    mv = fit_market_values(k, 50000 * 0.82 ** k * np.exp(rng.normal(0, 0.04, k.size)))
    assert mv.params["decline_rate"] == pytest.approx(0.18, abs=0.015)
    assert mv.params["price"] == pytest.approx(50000, rel=0.10)


def test_exact_data_and_best_model_choice() -> None:
    j = np.arange(1, 7)
    geo = fit_operating_costs(j, 1000 * 1.25 ** (j - 1), "best")
    assert geo.model == "geometric" and geo.params["growth"] == pytest.approx(0.25, rel=1e-12)
    assert geo.r_squared == pytest.approx(1.0) and max(map(abs, geo.residuals)) < 1e-6
    ari = fit_operating_costs(j, 1000 + 300.0 * (j - 1), "best")
    assert ari.model == "arithmetic" and ari.params["gradient"] == pytest.approx(300.0)
    # costs with a zero cannot be fitted on logs: "best" falls back to arithmetic
    assert fit_operating_costs([1, 2, 3], [0.0, 10.0, 20.0], "best").model == "arithmetic"


def test_vectorised_fits_equal_one_at_a_time() -> None:
    j = np.arange(1, 9)
    batch = 5000 + RNG.normal(0, 1, (4, 3, 1)) * 100 * (j - 1) + RNG.normal(0, 50, (4, 3, 8))
    a, g, r2 = arithmetic_fit(j, batch)
    assert a.shape == g.shape == r2.shape == (4, 3)
    for idx in np.ndindex(4, 3):
        one = arithmetic_fit(j, batch[idx])
        assert (a[idx], g[idx], r2[idx]) == pytest.approx(tuple(float(x) for x in one))
    p, d, _ = decline_fit(j, np.abs(batch), price=np.full((4, 3), 9000.0))
    assert p.shape == d.shape == (4, 3)


def test_proposals_are_estimates_for_today() -> None:
    # hand calculation: C_j = 100 + 10(j-1); a defender aged 4 starts at C_5 = 140
    fit = fit_operating_costs([1, 2, 3, 4], [100.0, 110.0, 120.0, 130.0])
    assert fit.operating_costs(age_now=4) == OperatingCosts(first=140.0, gradient=10.0)
    geo = fit_operating_costs([1, 2, 3], [100.0, 110.0, 121.0], "geometric")
    assert geo.operating_costs(age_now=3).first == pytest.approx(133.1)
    assert geo.operating_costs().growth == pytest.approx(0.1)
    mv = fit_market_values([1, 2], [80.0, 64.0])
    assert mv.market_values() == MarketValues(decline_rate=0.2)
    with pytest.raises(ValueError):
        mv.operating_costs()
    assert TrendFit.from_json(fit.to_json()) == fit


def test_fit_refusals() -> None:
    with pytest.raises(StudyError, match="at least 2 different years"):
        fit_operating_costs([3, 3], [1.0, 2.0])
    with pytest.raises(StudyError, match="above zero"):
        fit_operating_costs([1, 2], [0.0, 2.0], "geometric")
    with pytest.raises(StudyError, match="above zero"):
        fit_market_values([1, 2], [10.0, -5.0])
    with pytest.raises(StudyError, match="same length"):
        fit_operating_costs([1, 2, 3], [1.0, 2.0])
    with pytest.raises(StudyError, match="finite"):
        fit_operating_costs([1, 2], [1.0, float("nan")])
    # one quote is enough when the price is known
    assert fit_market_values([2], [64.0], price=100.0).params["decline_rate"] == pytest.approx(0.2)


# ---------------------------------------------------------------- decimal marks
# Common practice, no source: continental European spreadsheets write 1.234,50 (comma
# decimal, point or space thousands); English ones 1,234.50.
@pytest.mark.parametrize(("text", "decimal", "value"), [
    ("1,234.50", ".", 1234.5), ("1 234.50", ".", 1234.5), ("1'234.5", ".", 1234.5),
    ("(1,200)", ".", -1200.0), ("-£45.10", ".", -45.1), ("0.5", ".", 0.5), (".5", ".", 0.5),
    ("1.234,50", ",", 1234.5), ("1 234,50", ",", 1234.5), ("12,5", ",", 12.5),
    ("1.234.567", ",", 1234567.0), ("€ 980,00", ",", 980.0), ("(250,5)", ",", -250.5),
    ("1\u202f234,5", ",", 1234.5), ("2000", ",", 2000.0), ("2000", ".", 2000.0),
])
def test_parse_amount_with_either_decimal_mark(text: str, decimal: str, value: float) -> None:
    assert parse_amount(text, decimal) == value


@pytest.mark.parametrize(("text", "decimal"), [
    ("1.234,50", "."), ("1,234.50", ","), ("12,5", "."), ("1234.5", ","), ("1,23,456", "."),
    ("1.2.3", ","), ("12,34", "."), ("", "."), ("1e3", "."),
])
def test_parse_amount_refuses_rather_than_misreads(text: str, decimal: str) -> None:
    with pytest.raises(ValueError):
        parse_amount(text, decimal)


def test_import_detects_a_decimal_comma_column(tmp_path: Path) -> None:
    p = tmp_path / "kosten.csv"
    p.write_text("Asset;Date;Amount\nAC-101;2018-05-01;1.234,50\nAC-101;2019-05-01;980\n"
                 "AC-101;2019-06-01;12,5\nAC-101;2019-07-01;1,234.50\n", encoding="utf-8")
    report = import_file(p, ColumnMapping(tag="Asset", date="Date", amount="Amount"), IN_SERVICE)
    assert [r.amount for r in report.accepted] == [1234.5, 980.0, 12.5]
    assert report.decimal == "," and report.decimal_settled
    assert [str(r) for r in report.rejected] == [
        "row 5: amount '1,234.50' is not a number (read with a decimal comma)"]
    assert "decimal comma" in report.decimal_note()


def test_import_with_a_chosen_decimal_mark_and_an_unsettled_column(tmp_path: Path) -> None:
    p = tmp_path / "costs.csv"
    p.write_text("Asset,Date,Amount\nAC-101,2018-05-01,\"1,234\"\nAC-101,2019-05-01,\"2,000\"\n",
                 encoding="utf-8")
    auto = import_file(p, ColumnMapping(tag="Asset", date="Date", amount="Amount"), IN_SERVICE)
    assert [r.amount for r in auto.accepted] == [1234.0, 2000.0]
    assert auto.decimal == "." and not auto.decimal_settled
    assert "check the amounts" in auto.decimal_note()
    comma = import_file(p, ColumnMapping(tag="Asset", date="Date", amount="Amount",
                                         decimal=","), IN_SERVICE)
    assert [r.amount for r in comma.accepted] == [1.234, 2.0]
    with pytest.raises(StudyError, match="decimal mark"):
        import_file(p, ColumnMapping(tag="Asset", date="Date", amount="Amount", decimal=";"),
                    IN_SERVICE)
