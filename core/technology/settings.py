"""Which technology settings apply: the plan horizon and each challenger's change rates.

A challenger's own ``technology`` block wins over the study's; a challenger
with neither keeps today's model (zero change).  The study file has already
checked that every horizon given agrees (docs/method.md §5, §11).
"""

from __future__ import annotations

from core.estimates import Alternative, Study


def has_technology(study: Study) -> bool:
    """True when the study or any challenger carries a ``technology`` block."""
    return study.technology is not None or any(c.technology is not None
                                               for c in study.challengers)


def horizon(study: Study) -> int:
    """The plan horizon H in years (the study's block, else the first challenger's that gives one).

    >>> from core.estimates import Technology
    >>> a = Alternative("A", "defender", 1.0, 1)
    >>> horizon(Study("s", 0.1, a, (a,), technology=Technology(7)))
    7
    """
    if study.technology is not None and study.technology.horizon is not None:
        return int(study.technology.horizon)
    for ch in study.challengers:
        if ch.technology is not None and ch.technology.horizon is not None:
            return int(ch.technology.horizon)
    raise ValueError(f"{study.title}: no technology horizon")


def change_rates(study: Study, challenger: Alternative) -> tuple[float, float]:
    """(gP, gC) of one challenger: its own block, else the study's, else (0, 0)."""
    tech = challenger.technology if challenger.technology is not None else study.technology
    if tech is None:
        return 0.0, 0.0
    return float(tech.first_cost_change), float(tech.operating_cost_change)
