"""Replacement under technological change: a multi-year plan by dynamic programming.

One concept per module: ``settings`` (which horizon and change rates apply),
``vintages`` (present worth of every machine, vintage and retention from the
study's kernels), ``induction`` (Bellman's backward induction over plan year,
machine, vintage and age), ``plan`` (the result and how it is made).
``analyse(study, result)`` is the ``run_study`` hook.  docs/method.md §11.
Reference: R. Bellman (1955), "Equipment replacement policy", J. SIAM 3(3).
"""

from __future__ import annotations

import dataclasses
from typing import TypeVar

from core.estimates import Study
from core.technology.plan import PlanSegment, PlanStep, TechnologyPlan, technology_plan
from core.technology.settings import has_technology

R = TypeVar("R")

__all__ = ["PlanSegment", "PlanStep", "TechnologyPlan", "analyse", "has_technology",
           "technology_plan"]


def analyse(study: Study, result: R) -> R:
    """Attach the plan to a study result (its ``technology`` field) when the study asks for one."""
    if not has_technology(study):
        return result
    return dataclasses.replace(result, technology=technology_plan(study))  # type: ignore[type-var]
