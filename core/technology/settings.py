"""Which technology settings apply: the plan horizon and each challenger's change rates.

A challenger's own ``technology`` block wins over the study's; a challenger
with neither keeps today's model (zero change).  The study file has already
checked that every horizon given agrees (docs/method.md §5, §11).
"""

from __future__ import annotations

from core.estimates import Alternative, Study


def has_technology(study: Study) -> bool:
    """True when the study or any challenger carries a ``technology`` block.

    >>> from core.estimates import Technology
    >>> a = Alternative("A", "defender", 1.0, 1)
    >>> has_technology(Study("s", 0.1, a, (a,))), has_technology(
    ...     Study("s", 0.1, a, (a,), technology=Technology(3)))
    (False, True)
    """
    if study.technology is not None:
        return True
    for c in study.challengers:  # a loop, not any(...): it runs for every study of a fleet
        if c.technology is not None:
            return True
    return False


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
    """(gP, gC) of one challenger: its own block, else the study's, else (0, 0).

    >>> from core.estimates import Technology
    >>> d = Alternative("D", "defender", 1.0, 1)
    >>> c1 = Alternative("C1", "challenger", 1.0, 1, technology=Technology(None, -0.1, -0.2))
    >>> c2 = Alternative("C2", "challenger", 1.0, 1)
    >>> s = Study("s", 0.1, d, (c1, c2), technology=Technology(5, 0.0, -0.04))
    >>> change_rates(s, c1), change_rates(s, c2)
    ((-0.1, -0.2), (0.0, -0.04))
    """
    tech = challenger.technology if challenger.technology is not None else study.technology
    if tech is None:
        return 0.0, 0.0
    return float(tech.first_cost_change), float(tech.operating_cost_change)
