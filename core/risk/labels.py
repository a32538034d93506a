"""Uncertain inputs in words, and the inputs a study can make uncertain.

A study file names an uncertain input by its address (docs/method.md §5):
``"marr"`` or ``"<alternative name>.<input>"``, e.g.
``"HP-4 hydraulic press.operating_costs.gradient"``.  The JSON keeps these
paths; wherever a person reads them (the window, the memo, the CLI's text)
:func:`input_label` gives the words instead:
``"HP-4 hydraulic press: operating cost gradient"``.

:func:`uncertain_inputs` lists the addresses a study accepts today, in the
order the editor shows them: MARR, then each alternative (defender first) with
its price and the generators it uses (a decline rate, a first-year operating
cost with a gradient or a growth rate); year-by-year values cannot be made
uncertain.
"""

from __future__ import annotations

from core.errors import StudyError
from core.estimates import Study
from core.studyfile import INPUT_SUFFIXES, check_address

#: The words for each input after "<alternative name>." ("marr" stands alone).
INPUT_WORDS: dict[str, str] = {
    "marr": "MARR",
    "first_cost": "first cost",
    "market_value": "market value today",
    "market_values.decline_rate": "market-value decline rate",
    "operating_costs.first": "first-year operating cost",
    "operating_costs.gradient": "operating cost gradient",
    "operating_costs.growth": "operating cost growth rate",
}

#: Inputs that are rates (shown as percentages); the others are money.
RATE_INPUTS = frozenset({"marr", "market_values.decline_rate", "operating_costs.growth"})


def split(address: str, study: Study | None = None) -> tuple[str | None, str]:
    """(alternative name, input) of an address; ``(None, "marr")`` for the MARR.

    With a study the name is one of its alternatives (a name may hold dots);
    without one the longest known input ending decides.

    >>> split("HP-4 hydraulic press.operating_costs.gradient")
    ('HP-4 hydraulic press', 'operating_costs.gradient')
    >>> split("marr")
    (None, 'marr')
    """
    if address == "marr":
        return None, "marr"
    if study is not None:
        for alt in sorted(study.alternatives, key=lambda a: -len(a.name)):
            prefix = alt.name + "."
            if address.startswith(prefix) and address[len(prefix):] in INPUT_SUFFIXES:
                return alt.name, address[len(prefix):]
    for suffix in sorted(INPUT_SUFFIXES, key=len, reverse=True):
        if address.endswith("." + suffix):
            return address[: -len(suffix) - 1], suffix
    return None, address


def input_label(address: str, study: Study | None = None) -> str:
    """An uncertain input's address in words (unknown addresses come back unchanged).

    >>> input_label("HP-4 hydraulic press.operating_costs.gradient")
    'HP-4 hydraulic press: operating cost gradient'
    >>> input_label("New press.first_cost")
    'New press: first cost'
    >>> input_label("marr")
    'MARR'
    """
    name, suffix = split(address, study)
    words = INPUT_WORDS.get(suffix)
    if words is None:
        return address
    return words if name is None else f"{name}: {words}"


def is_rate(address: str) -> bool:
    """True when the input is a rate (a decimal fraction, shown as a percentage).

    >>> is_rate("marr"), is_rate("Old press.operating_costs.growth"), is_rate("X.first_cost")
    (True, True, False)
    """
    return split(address)[1] in RATE_INPUTS


def uncertain_inputs(study: Study) -> tuple[str, ...]:
    """Every address ``study`` accepts in an uncertainty block, in the editor's order.

    >>> from core.estimates import Alternative, MarketValues, OperatingCosts, Study
    >>> d = Alternative("Old", "defender", 5000.0, 4, MarketValues(decline_rate=0.2),
    ...                 OperatingCosts(first=9000.0, gradient=800.0))
    >>> c = Alternative("New", "challenger", 40000.0, 10, MarketValues(values=(30000.0,) * 10),
    ...                 OperatingCosts(first=4000.0, growth=0.03))
    >>> uncertain_inputs(Study("T", 0.1, d, (c,)))  # doctest: +NORMALIZE_WHITESPACE
    ('marr', 'Old.market_value', 'Old.market_values.decline_rate',
     'Old.operating_costs.first', 'Old.operating_costs.gradient', 'New.first_cost',
     'New.operating_costs.first', 'New.operating_costs.growth')
    """
    out = ["marr"]
    for alt in study.alternatives:
        for suffix in INPUT_SUFFIXES:
            address = f"{alt.name}.{suffix}"
            try:
                check_address(address, "$", study)
            except StudyError:
                continue
            out.append(address)
    return tuple(out)


def estimate_of(address: str, study: Study) -> float:
    """The estimate an address stands for in ``study`` (KeyError if it has none).

    >>> from core.estimates import Alternative, MarketValues, OperatingCosts, Study
    >>> d = Alternative("Old", "defender", 5000.0, 4, MarketValues(decline_rate=0.2),
    ...                 OperatingCosts(first=9000.0, gradient=800.0))
    >>> estimate_of("Old.operating_costs.gradient", Study("T", 0.1, d, (d,)))
    800.0
    """
    name, suffix = split(address, study)
    if name is None:
        if suffix != "marr":
            raise KeyError(address)
        return float(study.marr)
    alt = next((a for a in study.alternatives if a.name == name), None)
    if alt is None:
        raise KeyError(address)
    value = {"first_cost": alt.price, "market_value": alt.price,
             "market_values.decline_rate": alt.market_values.decline_rate,
             "operating_costs.first": alt.operating_costs.first,
             "operating_costs.gradient": alt.operating_costs.gradient,
             "operating_costs.growth": alt.operating_costs.growth}.get(suffix)
    if value is None:
        raise KeyError(address)
    return float(value)
