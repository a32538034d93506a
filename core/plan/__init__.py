"""The fleet capital plan (docs/method.md §10): which assets are replaced in which year,
the capital each year needs, and the best plan under a budget.

    inputs   plan_input(result, study, tag=, site=, must=)  -> AssetInput (reads results)
    options  option_table(inputs, horizon)                  -> OptionTable (assets x options)
    solve    solve(table, budgets, net=, per_site_limit=, pins=)  (scipy.optimize.milp, HiGHS)
    rule     simple_rule(...)                               the comparison rule
    build    make_plan(inputs, horizon=, budgets=, ...)     -> CapitalPlan (result.py)
    load     load_plan_source(path, must=)                  workbook or study file
    memo     issue_plan_memo(plan, source, out, ...)        the signed plan memo (document.py)
"""

from core.plan.build import DEFAULT_HORIZON, make_plan
from core.plan.inputs import AssetInput, plan_input
from core.plan.options import AFTER, OptionTable, option_table
from core.plan.result import CapitalPlan, PlannedAsset, SiteCapital

# ``solve`` is not re-exported: the name would hide the module core.plan.solve.
__all__ = ["AFTER", "DEFAULT_HORIZON", "AssetInput", "CapitalPlan", "OptionTable",
           "PlannedAsset", "SiteCapital", "make_plan", "option_table", "plan_input"]
