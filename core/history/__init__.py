"""Cost history: import (CSV/XLSX, column mapping, every rejected row reported) and trend fits.

    from core.history import ColumnMapping, import_file, yearly_totals, fit_operating_costs

    report = import_file("work_orders.xlsx",
                         ColumnMapping(tag="Asset", date="Closed", amount="Cost", kind="Type"),
                         {a.tag: a.in_service for a in wb.assets()})
    report.lines()                      # "work_orders.xlsx: row 17: amount 'n/a' is not a number"
    wb.add_history(report.accepted)
    ages, costs = yearly_totals(wb.history("AC-101"))
    fit = fit_operating_costs(ages, costs, model="best")   # arithmetic or geometric, R^2, residuals
    fit.operating_costs(age_now=6)      # -> OperatingCosts proposal for the defender
    wb.save_fit("AC-101", 2026, fit)    # the fit and its data kept with the study
"""

from core.history.fitting import (
    TrendFit,
    arithmetic_fit,
    decline_fit,
    fit_market_values,
    fit_operating_costs,
    geometric_fit,
    r_squared,
)
from core.history.importing import (
    DECIMAL_MARKS,
    HISTORY_HINTS,
    ColumnMapping,
    FlaggedRow,
    ImportReport,
    RejectedRow,
    detect_decimal,
    guess_history_columns,
    import_file,
    import_history,
    parse_amount,
    parse_date,
    read_table,
    yearly_totals,
)

__all__ = ["DECIMAL_MARKS", "HISTORY_HINTS", "guess_history_columns", "ColumnMapping", "FlaggedRow", "ImportReport", "RejectedRow", "TrendFit",
           "arithmetic_fit", "decline_fit", "detect_decimal", "fit_market_values", "fit_operating_costs", "geometric_fit",
           "import_file", "import_history", "parse_amount", "parse_date", "r_squared",
           "read_table", "yearly_totals"]
