"""Replacement under technological change: a multi-year plan by dynamic programming.

One concept per module: ``settings`` (which horizon and change rates apply),
``vintages`` (present worth of every machine, vintage and retention from the
study's kernels), ``induction`` (Bellman's backward induction over plan year,
machine, vintage and age), ``plan`` (the result and how it is made).
``core.study.run_studies`` attaches ``technology_plan(study)`` to a result whose study
has a ``technology`` block.  docs/method.md §11.
Reference: R. Bellman (1955), "Equipment replacement policy", J. SIAM 3(3).
"""

from __future__ import annotations

from core.results import PlanSegment, PlanStep, TechnologyPlan
from core.technology.plan import technology_plan
from core.technology.settings import has_technology

__all__ = ["PlanSegment", "PlanStep", "TechnologyPlan", "has_technology", "technology_plan"]
