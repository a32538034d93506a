"""The study file (docs/method.md §5): strict parsing, canonical form and fingerprint.

Parsing refuses anything doubtful and names the JSON path of the problem, for
example ``$.challengers[0].max_life: must be a whole number of years >= 1``.
Unknown keys, NaN, infinities, booleans where numbers belong, lists too short
for the life, extra costs past the life and a study without a challenger are
all refused.  ``study_to_dict`` gives back the §5 form, so a study round-trips.

Hostile input (docs/method.md §15): a key given twice in one object is refused
with its path (two readers could take different values, and the fingerprint
would vouch for either); numbers have physical bounds (:data:`MAX_AMOUNT`,
:data:`MAX_RATE`, :data:`MAX_GROWTH`) so that no computation overflows; a
number written with more digits than Python reads is refused, not a crash;
names, titles and labels are one line of real text (no control characters, no
lone surrogates).
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import math
import types
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any, TypeVar

from core.errors import StudyError
from core.estimates import (
    Alternative,
    Depreciation,
    Distribution,
    ExtraCost,
    Inflation,
    MarketValues,
    OperatingCosts,
    Role,
    Study,
    Tax,
    Technology,
    Uncertainty,
)

FORMAT = "tenure-study"
VERSION = 1
MACRS_CLASSES = (3, 5, 7, 10, 15, 20)
DISTRIBUTION_ARITY = {"triangular": 3, "uniform": 2, "normal": 2, "pert": 3, "lognormal": 2}
#: Uncertain-input suffixes after "<alternative name>." (docs/method.md §5); "marr" stands alone.
INPUT_SUFFIXES = (
    "first_cost",
    "market_value",
    "market_values.decline_rate",
    "operating_costs.first",
    "operating_costs.gradient",
    "operating_costs.growth",
)


#: Largest amount of money anywhere in a study (|x|), in the study's currency units.
MAX_AMOUNT = 1e12
#: Largest MARR, after-tax MARR and inflation rate: 100 % a year (as a decimal, 1.0).
MAX_RATE = 1.0
#: Largest geometric growth of operating costs: 100 % a year.
MAX_GROWTH = 1.0
#: Largest random seed (numpy takes any; 64 bits is plenty and prints on one line).
MAX_SEED = 2**64 - 1
#: Longest number (in digits) the reader accepts before refusing it as absurd.
MAX_DIGITS = 400


class _TooManyDigits:
    """A JSON integer with more digits than :data:`MAX_DIGITS` (never converted to int)."""

    __slots__ = ("digits",)

    def __init__(self, text: str) -> None:
        self.digits = len(text.lstrip("-"))


class _Duplicated(dict):
    """A JSON object in which ``key`` was given more than once."""

    key: str = ""


def _parse_int(text: str) -> int | _TooManyDigits:
    return int(text) if len(text) <= MAX_DIGITS else _TooManyDigits(text)


def _first_duplicate(obj: Any, path: str) -> tuple[str, str] | None:
    """(path of the object, key) of the first object that had a duplicated key."""
    stack = [(obj, path)]
    while stack:
        value, where = stack.pop()
        if isinstance(value, _Duplicated):
            return where, value.key
        if isinstance(value, dict):
            stack.extend(reversed([(v, f"{where}.{k}") for k, v in value.items()]))
        elif isinstance(value, list):
            stack.extend(reversed([(v, f"{where}[{i}]") for i, v in enumerate(value)]))
    return None


def loads_json(text: str, where: str = "$") -> Any:
    """Strict JSON for every input Tenure reads: one refusal line, never another exception.

    Syntax errors give line and column; a key given twice in one object is
    refused with its path; NaN/Infinity literals become floats (refused later
    with their path); an integer longer than :data:`MAX_DIGITS` digits becomes
    a marker that every number check refuses; nesting deeper than the
    interpreter allows is refused.

    >>> loads_json('{"a": {"b": 1, "b": 2}}')
    Traceback (most recent call last):
    ...
    core.errors.StudyError: $.a.b: given twice in one object (remove one; readers disagree on which counts)
    """
    duplicated = False

    def pairs(items: list[tuple[str, Any]]) -> dict:
        nonlocal duplicated
        obj = dict(items)
        if len(obj) != len(items):
            seen: set[str] = set()
            for key, _ in items:
                if key in seen:
                    break
                seen.add(key)
            obj = _Duplicated(obj)
            obj.key = key
            duplicated = True
        return obj

    try:
        obj = json.loads(text, parse_constant=float, parse_int=_parse_int,
                         object_pairs_hook=pairs)
    except json.JSONDecodeError as exc:
        raise StudyError(where, f"not valid JSON: {exc.msg} at line {exc.lineno} column {exc.colno}"
                         ) from None
    except RecursionError:
        raise StudyError(where, "not valid JSON: nested too deeply") from None
    if duplicated:
        found = _first_duplicate(obj, where)
        if found is not None:
            raise StudyError(f"{found[0]}.{found[1]}", "given twice in one object (remove one; "
                                                       "readers disagree on which counts)")
    return obj


# --------------------------------------------------------------------------- helpers
def _keys(obj: Any, path: str, allowed: set[str],
          required: set[str] | frozenset[str] = frozenset()) -> dict:
    if not isinstance(obj, Mapping):
        raise StudyError(path, f"must be an object, not {_kind(obj)}")
    for key in obj:
        if key not in allowed:
            hint = ", ".join(sorted(allowed))
            raise StudyError(f"{path}.{key}", f"unknown key (allowed here: {hint})")
    for key in sorted(required):
        if key not in obj:
            raise StudyError(f"{path}.{key}", "is required")
    return dict(obj)


def _kind(value: Any) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true/false"
    if isinstance(value, str):
        return "text"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, Mapping):
        return "an object"
    if isinstance(value, _TooManyDigits):
        return f"a {value.digits}-digit number"
    return type(value).__name__


def _number(value: Any, path: str, *, low: float | None = None, low_open: bool = False,
            high: float | None = None, bound: str = "") -> float:
    """A finite number within [low, high]; ``bound`` names the limit in the refusal."""
    if isinstance(value, _TooManyDigits):
        raise StudyError(path, f"is far too large ({value.digits} digits)")
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise StudyError(path, f"must be a number, not {_kind(value)}")
    try:
        number = float(value)
    except OverflowError:  # a JSON integer with hundreds of digits
        raise StudyError(path, "is too large to be a number of this study") from None
    if not math.isfinite(number):
        raise StudyError(path, "must be a finite number (NaN and infinity are not allowed)")
    if low is not None:
        if low_open and number <= low:
            raise StudyError(path, f"must be greater than {low:g}")
        if not low_open and number < low:
            raise StudyError(path, f"must be at least {low:g}")
    if high is not None and number > high:
        raise StudyError(path, f"must be at most {high:g}{bound}")
    return number


def _amount(value: Any, path: str, *, low: float | None = None) -> float:
    """Money: finite and within +-MAX_AMOUNT (docs/method.md §5)."""
    number = _number(value, path, low=low)
    if abs(number) > MAX_AMOUNT:
        raise StudyError(path, f"{number:.6g} is beyond the largest amount Tenure accepts "
                               f"(±{MAX_AMOUNT:,.0f})")
    return number


def _integer(value: Any, path: str, *, low: int = 1, what: str = "a whole number") -> int:
    if isinstance(value, _TooManyDigits):
        raise StudyError(path, f"is far too large ({value.digits} digits)")
    if isinstance(value, bool):
        raise StudyError(path, f"must be {what}, not true/false")
    if isinstance(value, float) and value.is_integer():
        value = int(value)
    if not isinstance(value, int):
        raise StudyError(path, f"must be {what} >= {low}, not {value!r}")
    if value < low:
        raise StudyError(path, f"must be {what} >= {low}, not {value}")
    return value


def _text(value: Any, path: str, *, empty_ok: bool = False, lines: bool = False) -> str:
    """Text; one line without control characters unless ``lines`` (notes: newlines, tabs)."""
    if not isinstance(value, str):
        raise StudyError(path, f"must be text, not {_kind(value)}")
    for k, ch in enumerate(value):
        code = ord(ch)
        if 0xD800 <= code < 0xE000:
            raise StudyError(path, f"is not valid Unicode text (a lone surrogate U+{code:04X} "
                                   f"at character {k + 1})")
        if (code < 0x20 or 0x7F <= code < 0xA0) and not (lines and ch in "\n\r\t"):
            raise StudyError(path, f"must not contain control characters (U+{code:04X} at "
                                   f"character {k + 1})")
    if not empty_ok and not value.strip():
        raise StudyError(path, "must not be empty")
    return value


def _number_list(value: Any, path: str, life: int, what: str) -> tuple[float, ...]:
    if not isinstance(value, list):
        raise StudyError(path, f"must be a list of numbers, not {_kind(value)}")
    if len(value) < life:
        raise StudyError(path, f"has {len(value)} {what}, but max_life {life} needs {life}")
    out = []
    for k, v in enumerate(value):  # fast path for plain finite floats; the path only on failure
        if type(v) is float and -MAX_AMOUNT <= v <= MAX_AMOUNT:
            out.append(v)
        else:
            out.append(_amount(v, f"{path}[{k}]"))
    return tuple(out)


# --------------------------------------------------------------------------- parts
def _market_values(obj: Any, path: str, life: int, warnings: list[str]) -> MarketValues:
    data = _keys(obj, path, {"values", "decline_rate"})
    if ("values" in data) == ("decline_rate" in data):
        raise StudyError(path, "give exactly one of 'values' or 'decline_rate'")
    if "values" in data:
        values = _number_list(data["values"], f"{path}.values", life, "values")
        if any(v < 0 for v in values[:life]):
            warnings.append(f"{path}.values: negative market value (a net removal cost)")
        return MarketValues(values=values)
    rate = _number(data["decline_rate"], f"{path}.decline_rate", high=1.0,
                   bound=" (a decline rate of 1 is a 100 % loss of value in one year)")
    if rate <= -1.0:
        raise StudyError(f"{path}.decline_rate", "must be greater than -1")
    return MarketValues(decline_rate=rate)


def _operating_costs(obj: Any, path: str, life: int) -> OperatingCosts:
    data = _keys(obj, path, {"values", "first", "gradient", "growth"})
    if "values" in data:
        if len(data) > 1:
            raise StudyError(path, "'values' cannot be combined with 'first', 'gradient' or 'growth'")
        return OperatingCosts(values=_number_list(data["values"], f"{path}.values", life, "values"))
    if "first" not in data:
        raise StudyError(path, "give 'values', or 'first' with an optional 'gradient' or 'growth'")
    if "gradient" in data and "growth" in data:
        raise StudyError(path, "give 'gradient' or 'growth', not both")
    first = _amount(data["first"], f"{path}.first")
    gradient = _amount(data["gradient"], f"{path}.gradient") if "gradient" in data else None
    growth = (_number(data["growth"], f"{path}.growth", low=-1.0, low_open=True,
                      high=MAX_GROWTH, bound=" (the largest growth Tenure accepts: 100 % a year)")
              if "growth" in data else None)
    return OperatingCosts(first=first, gradient=gradient, growth=growth)


def _extra_costs(obj: Any, path: str, life: int) -> tuple[ExtraCost, ...]:
    if not isinstance(obj, list):
        raise StudyError(path, f"must be a list, not {_kind(obj)}")
    out = []
    for k, item in enumerate(obj):
        where = f"{path}[{k}]"
        data = _keys(item, where, {"year", "amount", "label"}, {"year", "amount"})
        year = _integer(data["year"], f"{where}.year", what="a whole year")
        if year > life:
            raise StudyError(f"{where}.year", f"year {year} is past max_life {life}")
        amount = _amount(data["amount"], f"{where}.amount")
        label = _text(data.get("label", ""), f"{where}.label", empty_ok=True)
        out.append(ExtraCost(year=year, amount=amount, label=label))
    return tuple(out)


def _depreciation(obj: Any, path: str, role: str) -> Depreciation:
    data = _keys(obj, path, {"method", "basis", "years", "age", "salvage", "class", "rate"},
                 {"method"})
    method = data["method"]
    if method not in ("straight_line", "macrs", "declining_balance"):
        raise StudyError(f"{path}.method",
                         "must be 'straight_line', 'macrs' or 'declining_balance'")
    basis = _amount(data["basis"], f"{path}.basis", low=0.0) if "basis" in data else None
    if role == "defender" and basis is None:
        raise StudyError(f"{path}.basis", "is required for the defender (its original tax basis)")
    age = _integer(data.get("age", 0), f"{path}.age", low=0, what="a whole number of years")
    if role == "challenger" and age:
        raise StudyError(f"{path}.age", "a challenger is new: its age must be 0")
    if age > 100:
        raise StudyError(f"{path}.age", "must be at most 100 years")
    years = macrs_class = rate = None
    salvage = 0.0
    if method == "macrs":
        for key in ("years", "rate", "salvage"):
            if key in data:
                raise StudyError(f"{path}.{key}", "does not apply to MACRS (give 'class')")
        if "class" not in data:
            raise StudyError(f"{path}.class", "is required for MACRS (3, 5, 7, 10, 15 or 20)")
        macrs_class = _integer(data["class"], f"{path}.class", what="a MACRS class")
        if macrs_class not in MACRS_CLASSES:
            raise StudyError(f"{path}.class", "must be one of 3, 5, 7, 10, 15, 20")
    else:
        if "class" in data:
            raise StudyError(f"{path}.class", "applies only to MACRS")
        if "years" not in data:
            raise StudyError(f"{path}.years", "is required (the recovery period in years)")
        years = _integer(data["years"], f"{path}.years", what="a whole number of years")
        if years > 100:
            raise StudyError(f"{path}.years", "must be at most 100 years")
        if method == "straight_line":
            if "rate" in data:
                raise StudyError(f"{path}.rate", "applies only to declining balance")
            salvage = _amount(data.get("salvage", 0.0), f"{path}.salvage", low=0.0)
            if basis is not None and salvage > basis:
                raise StudyError(f"{path}.salvage", "must not exceed the basis")
        else:
            if "salvage" in data:
                raise StudyError(f"{path}.salvage", "applies only to straight line")
            if "rate" not in data:
                raise StudyError(f"{path}.rate", "is required for declining balance (e.g. 0.25)")
            rate = _number(data["rate"], f"{path}.rate", low=0.0, low_open=True, high=1.0)
    return Depreciation(method=method, basis=basis, years=years, age=age, salvage=salvage,
                        macrs_class=macrs_class, rate=rate)


def _alternative(obj: Any, path: str, role: Role, warnings: list[str]) -> Alternative:
    price_key = "market_value" if role == "defender" else "first_cost"
    data = _keys(obj, path,
                 {"name", price_key, "max_life", "market_values", "operating_costs",
                  "extra_costs", "depreciation"} | ({"technology"} if role == "challenger" else set()),
                 {"name", price_key, "max_life", "market_values", "operating_costs"})
    name = _text(data["name"], f"{path}.name").strip()
    if role == "challenger":
        price = _amount(data[price_key], f"{path}.{price_key}", low=0.0)
    else:
        price = _amount(data[price_key], f"{path}.{price_key}")
        if price < 0:
            warnings.append(f"{path}.market_value: negative market value today (a net removal cost)")
    life = _integer(data["max_life"], f"{path}.max_life", what="a whole number of years")
    if life > 100:
        raise StudyError(f"{path}.max_life", "must be at most 100 years")
    market_values = _market_values(data["market_values"], f"{path}.market_values", life, warnings)
    if market_values.decline_rate is not None and price < 0:
        raise StudyError(f"{path}.market_values.decline_rate",
                         "a decline rate needs a market value today of at least 0")
    operating = _operating_costs(data["operating_costs"], f"{path}.operating_costs", life)
    extras = _extra_costs(data.get("extra_costs", []), f"{path}.extra_costs", life)
    depreciation = (_depreciation(data["depreciation"], f"{path}.depreciation", role)
                    if "depreciation" in data else None)
    if depreciation is not None and depreciation.basis is None and depreciation.salvage > price:
        raise StudyError(f"{path}.depreciation.salvage",
                         "must not exceed the basis (here the first cost)")
    technology = (_technology(data["technology"], f"{path}.technology", horizon_required=False)
                  if data.get("technology") is not None else None)
    return Alternative(name=name, role=role, price=price, max_life=life,
                       market_values=market_values, operating_costs=operating,
                       extra_costs=extras, depreciation=depreciation, technology=technology)


def _rate(value: Any, path: str) -> float:
    return _number(value, path, low=-1.0, low_open=True, high=MAX_RATE,
                   bound=" (the largest rate Tenure accepts: 100 % a year)")


def _uncertainty(obj: Any, path: str, study: Study) -> Uncertainty:
    data = _keys(obj, path, {"trials", "seed", "inputs"}, {"inputs"})
    trials = _integer(data.get("trials", 10000), f"{path}.trials", what="a whole number")
    if trials > 5_000_000:
        raise StudyError(f"{path}.trials", "must be at most 5,000,000")
    seed = data.get("seed")
    if seed is not None:
        seed = _integer(seed, f"{path}.seed", low=0, what="a whole number")
        if seed > MAX_SEED:
            raise StudyError(f"{path}.seed", "must be at most 2**64 - 1")
    inputs_obj = data["inputs"]
    if not isinstance(inputs_obj, Mapping) or not inputs_obj:
        raise StudyError(f"{path}.inputs", "must be a non-empty object of input: distribution")
    inputs = []
    for address, spec in inputs_obj.items():
        where = f"{path}.inputs[{json.dumps(address)}]"
        _check_address(address, where, study)
        dist = _keys(spec, where, set(DISTRIBUTION_ARITY))
        if len(dist) != 1:
            raise StudyError(where, "give exactly one distribution, e.g. {\"uniform\": [low, high]}")
        kind, params = next(iter(dist.items()))
        arity = DISTRIBUTION_ARITY[kind]
        if not isinstance(params, list) or len(params) != arity:
            raise StudyError(f"{where}.{kind}", f"must be a list of {arity} numbers")
        check = (_bounded_growth if address == "marr" or address.endswith(".growth")
                 else _number if address.endswith(".decline_rate") else _amount)
        values = tuple(check(p, f"{where}.{kind}[{k}]") for k, p in enumerate(params))
        _check_distribution(kind, values, f"{where}.{kind}")
        inputs.append((address, Distribution(kind=kind, params=values)))
    return Uncertainty(trials=trials, seed=seed, inputs=tuple(inputs))


def _bounded_growth(value: Any, path: str) -> float:
    """A MARR or growth in a distribution: at most 100 % (the lower end is the risk check's)."""
    return _number(value, path, high=max(MAX_GROWTH, MAX_RATE),
                   bound=" (the largest rate Tenure accepts: 100 % a year)")


def _check_distribution(kind: str, p: tuple[float, ...], where: str) -> None:
    if kind in ("triangular", "pert") and not p[0] <= p[1] <= p[2]:
        raise StudyError(where, "needs low <= mode <= high")
    if kind == "uniform" and not p[0] <= p[1]:
        raise StudyError(where, "needs low <= high")
    if kind in ("normal", "lognormal") and p[1] < 0:
        raise StudyError(where, "standard deviation must be at least 0")
    if kind == "lognormal" and p[0] <= 0:
        raise StudyError(where, "a lognormal mean must be greater than 0")


#: Uncertain inputs that are rates (decimals per year), by address suffix; the rest is money.
RATE_SUFFIXES = ("marr", "market_values.decline_rate", "operating_costs.growth")


def is_rate_input(address: str) -> bool:
    """True when the uncertain input at ``address`` is a rate (shown as a percentage).

    >>> is_rate_input("marr"), is_rate_input("New press.first_cost")
    (True, False)
    """
    return address == "marr" or address.endswith(tuple("." + s for s in RATE_SUFFIXES))


def split_address(address: str, study: Study) -> tuple[Alternative | None, str]:
    """Split an uncertain-input address into (alternative, suffix); ``(None, 'marr')`` for MARR."""
    if address == "marr":
        return None, "marr"
    for alt in sorted(study.alternatives, key=lambda a: -len(a.name)):
        prefix = alt.name + "."
        if address.startswith(prefix) and address[len(prefix):] in INPUT_SUFFIXES:
            return alt, address[len(prefix):]
    raise KeyError(address)


def check_address(address: str, where: str, study: Study) -> None:
    """Refuse (StudyError at ``where``) an uncertain-input address ``study`` does not have."""
    _check_address(address, where, study)


def _check_address(address: str, where: str, study: Study) -> None:
    try:
        alt, suffix = split_address(address, study)
    except KeyError:
        names = ", ".join(a.name for a in study.alternatives)
        raise StudyError(where, "not an input of this study: use 'marr' or '<name>.<input>' with "
                         f"a name among {names} and an input among {', '.join(INPUT_SUFFIXES)}"
                         ) from None
    if alt is None:
        return
    if suffix == "first_cost" and alt.role != "challenger":
        raise StudyError(where, "the defender has a market_value, not a first_cost")
    if suffix == "market_value" and alt.role != "defender":
        raise StudyError(where, "a challenger has a first_cost, not a market_value")
    if suffix == "market_values.decline_rate" and alt.market_values.decline_rate is None:
        raise StudyError(where, f"{alt.name} gives explicit market values, not a decline rate")
    ops = alt.operating_costs
    if suffix == "operating_costs.first" and ops.first is None:
        raise StudyError(where, f"{alt.name} gives explicit operating costs, not a first year")
    if suffix == "operating_costs.gradient" and ops.gradient is None:
        raise StudyError(where, f"{alt.name} has no operating-cost gradient")
    if suffix == "operating_costs.growth" and ops.growth is None:
        raise StudyError(where, f"{alt.name} has no operating-cost growth")


TECHNOLOGY_KEYS = {"horizon", "first_cost_change", "operating_cost_change"}
MAX_HORIZON = 60


def _technology(obj: Any, path: str, *, horizon_required: bool) -> Technology:
    """A ``technology`` block (docs/method.md §11): H in 1..60, change rates above -100 %."""
    data = _keys(obj, path, TECHNOLOGY_KEYS, {"horizon"} if horizon_required else set())
    horizon = None
    if "horizon" in data:
        horizon = _integer(data["horizon"], f"{path}.horizon", what="a whole number of years")
        if horizon > MAX_HORIZON:
            raise StudyError(f"{path}.horizon", f"must be at most {MAX_HORIZON} years, not {horizon}")
    rates = {}
    for key in ("first_cost_change", "operating_cost_change"):
        value = _number(data.get(key, 0.0), f"{path}.{key}")
        if value <= -1.0:
            raise StudyError(f"{path}.{key}", "must be greater than -1 (a change of -100 % or "
                             "less would make the machine free or negative)")
        rates[key] = value
    return Technology(horizon=horizon, **rates)


def _check_horizons(study: Study, path: str) -> None:
    """Every horizon given must agree, and a plan with per-challenger blocks needs one."""
    given = [(f"{path}.technology.horizon", study.technology.horizon)] \
        if study.technology is not None else []
    given += [(f"{path}.challengers[{k}].technology.horizon", c.technology.horizon)
              for k, c in enumerate(study.challengers)
              if c.technology is not None and c.technology.horizon is not None]
    if not given:
        k = next(k for k, c in enumerate(study.challengers) if c.technology is not None)
        raise StudyError(f"{path}.challengers[{k}].technology.horizon",
                         "is required when the study has no technology block of its own")
    first_where, first = given[0]
    for where, horizon in given[1:]:
        if horizon != first:
            raise StudyError(where, f"{horizon} years differs from {first} years at {first_where}; "
                             "the plan has one horizon")


# --------------------------------------------------------------------------- studies
STUDY_KEYS = {"title", "marr", "study_period", "defender", "challengers", "tax", "inflation",
              "uncertainty", "notes", "technology"}


def parse_study(obj: Any, path: str = "$", warnings: list[str] | None = None) -> Study:
    """Parse one study object (docs/method.md §5), refusing anything doubtful with a StudyError.

    The common shapes are read by :func:`_quick_study`; anything it leaves (a refusal, a
    warning, an unusual but valid form) goes through the per-field path, which names the
    problem.  Both give the same Study for what they both accept.
    """
    warnings = [] if warnings is None else warnings
    try:
        return _quick_study(obj)
    except (_NotQuick, StudyError):
        pass
    return parse_study_fields(obj, path, warnings)


def parse_study_fields(obj: Any, path: str = "$", warnings: list[str] | None = None) -> Study:
    """``parse_study`` field by field: every check in order, the first problem refused with
    its JSON path; the reference the quick reader is tested against."""
    warnings = [] if warnings is None else warnings
    data = _keys(obj, path, STUDY_KEYS, {"title", "marr", "defender", "challengers"})
    title = _text(data["title"], f"{path}.title").strip()
    marr = _rate(data["marr"], f"{path}.marr")
    period = data.get("study_period")
    if period is not None:
        period = _integer(period, f"{path}.study_period", what="a whole number of years")
    defender = _alternative(data["defender"], f"{path}.defender", "defender", warnings)
    challengers_obj = data["challengers"]
    if not isinstance(challengers_obj, list):
        raise StudyError(f"{path}.challengers", f"must be a list, not {_kind(challengers_obj)}")
    if not challengers_obj:
        raise StudyError(f"{path}.challengers", "a study needs at least one challenger")
    challengers = tuple(_alternative(c, f"{path}.challengers[{k}]", "challenger", warnings)
                        for k, c in enumerate(challengers_obj))
    seen = {defender.name}
    for k, alt in enumerate(challengers):
        if alt.name in seen:
            raise StudyError(f"{path}.challengers[{k}].name", f"'{alt.name}' is used twice")
        seen.add(alt.name)
    tax = None
    if "tax" in data and data["tax"] is not None:
        tdata = _keys(data["tax"], f"{path}.tax", {"rate", "after_tax_marr"},
                      {"rate", "after_tax_marr"})
        tax = Tax(rate=_number(tdata["rate"], f"{path}.tax.rate", low=0.0, high=0.99,
                               bound=" (a tax rate is below 100 %)"),
                  after_tax_marr=_rate(tdata["after_tax_marr"], f"{path}.tax.after_tax_marr"))
    inflation = None
    if "inflation" in data and data["inflation"] is not None:
        idata = _keys(data["inflation"], f"{path}.inflation", {"rate", "estimates"}, {"rate"})
        basis = idata.get("estimates", "constant")
        if basis not in ("constant", "then-current"):
            raise StudyError(f"{path}.inflation.estimates", "must be 'constant' or 'then-current'")
        inflation = Inflation(rate=_rate(idata["rate"], f"{path}.inflation.rate"), estimates=basis)
    notes = _text(data.get("notes", ""), f"{path}.notes", empty_ok=True, lines=True)
    technology = (_technology(data["technology"], f"{path}.technology", horizon_required=True)
                  if data.get("technology") is not None else None)
    study = Study(title=title, marr=marr, study_period=period, defender=defender,
                  challengers=challengers, tax=tax, inflation=inflation, notes=notes,
                  technology=technology)
    if technology is not None or any(c.technology is not None for c in challengers):
        _check_horizons(study, path)
    if period is not None:
        longest = defender.max_life + max(c.max_life for c in challengers)
        if period > longest:
            raise StudyError(f"{path}.study_period",
                             f"{period} years cannot be filled: the defender lasts at most "
                             f"{defender.max_life} and the longest challenger {longest - defender.max_life}")
    if tax is not None:
        for alt_path, alt in [(f"{path}.defender", defender)] + [
                (f"{path}.challengers[{k}]", c) for k, c in enumerate(challengers)]:
            if alt.depreciation is None:
                raise StudyError(f"{alt_path}.depreciation",
                                 "is required when the study has 'tax'")
    if "uncertainty" in data and data["uncertainty"] is not None:
        study = dataclasses.replace(
            study, uncertainty=_uncertainty(data["uncertainty"], f"{path}.uncertainty", study))
    return study


def parse_study_document(obj: Any) -> list[Study]:
    """Parse a whole study file: one study object, or ``{"studies": [...]}``, with format and version."""
    if not isinstance(obj, Mapping):
        raise StudyError("$", f"must be an object, not {_kind(obj)}")
    if obj.get("format") != FORMAT:
        raise StudyError("$.format", f"must be \"{FORMAT}\"")
    version = obj.get("version")
    if isinstance(version, bool) or version != VERSION:
        raise StudyError("$.version", f"must be {VERSION}")
    body = {k: v for k, v in obj.items() if k not in ("format", "version")}
    if "studies" in body:
        if set(body) != {"studies"}:
            extra = sorted(set(body) - {"studies"})[0]
            raise StudyError(f"$.{extra}", "unknown key beside 'studies'")
        items = body["studies"]
        if not isinstance(items, list) or not items:
            raise StudyError("$.studies", "must be a non-empty list of studies")
        studies = [parse_study(s, f"$.studies[{k}]") for k, s in enumerate(items)]
        seen: set[str] = set()
        for k, study in enumerate(studies):  # a set: a list scan was quadratic in the fleet size
            if study.title in seen:
                raise StudyError(f"$.studies[{k}].title", f"'{study.title}' is used twice")
            seen.add(study.title)
        return studies
    return [parse_study(body, "$")]


def loads_study_document(text: str, where: str = "$") -> list[Study]:
    """Parse study-file text; JSON syntax errors become a StudyError with line and column.

    The literals NaN, Infinity and -Infinity are read as floats so that the strict
    parser refuses them with the JSON path of the value (every number, whole number
    and text check refuses a non-finite float).
    """
    obj = loads_json(text, where)
    return parse_study_document(obj)


def load_study_file(path: str | Path) -> list[Study]:
    """Read and parse a study file from disk."""
    file = Path(path)
    try:
        raw = file.read_bytes()
    except OSError as exc:
        raise StudyError(str(file), f"cannot read ({exc.strerror or exc})") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise StudyError(str(file), "not UTF-8 text") from None
    return loads_study_document(text)


# --------------------------------------------------------------------------- quick reader
_T = TypeVar("_T")


class _NotQuick(Exception):
    """The quick reader leaves this study to the per-field path (a refusal, a warning or an
    unusual form: it never decides a refusal itself)."""


_STUDY_REQUIRED = frozenset({"title", "marr", "defender", "challengers"})
_DEFENDER_KEYS = frozenset({"name", "market_value", "max_life", "market_values",
                            "operating_costs", "extra_costs", "depreciation"})
_DEFENDER_REQUIRED = frozenset({"name", "market_value", "max_life", "market_values",
                                "operating_costs"})
_CHALLENGER_KEYS = _DEFENDER_KEYS - {"market_value"} | {"first_cost", "technology"}
_CHALLENGER_REQUIRED = _DEFENDER_REQUIRED - {"market_value"} | {"first_cost"}
_COST_FORMULA_KEYS = frozenset({"first", "gradient", "growth"})
_EXTRA_KEYS = frozenset({"year", "amount", "label"})
_EXTRA_REQUIRED = frozenset({"year", "amount"})
_INFLATION_KEYS = frozenset({"rate", "estimates"})
_TAX_KEYS = frozenset({"rate", "after_tax_marr"})
_NUMBER_TYPES = frozenset({float, int})


def _slot_builder(cls: type[_T]) -> Callable[..., _T]:
    """A positional constructor of the frozen, slotted dataclass ``cls`` that stores each field
    straight into its slot, for the quick reader.

    A frozen dataclass's generated ``__init__`` assigns through ``object.__setattr__``, which
    is about twice as slow; the estimates have no ``__post_init__`` and every field is passed,
    so ``builder(*values) == cls(*values)`` (tests/test_studyfile_fast.py compares them).
    Generated with ``exec`` as dataclasses generates ``__init__``: a loop over the setters
    would cost what it saves.
    """
    names = [f.name for f in dataclasses.fields(cls)]  # type: ignore[arg-type]
    slots = [cls.__dict__[name] for name in names]
    if hasattr(cls, "__post_init__") or not all(
            isinstance(slot, types.MemberDescriptorType) for slot in slots):
        raise TypeError(f"{cls.__name__} is not a plain frozen, slotted dataclass")
    source = (f"def build({', '.join(names)}):\n    obj = _new(_cls)\n"
              + "".join(f"    _set_{name}(obj, {name})\n" for name in names)
              + "    return obj\n")
    namespace: dict[str, Any] = {"_new": object.__new__, "_cls": cls}
    namespace.update({f"_set_{name}": slot.__set__ for name, slot in zip(names, slots, strict=True)})
    exec(source, namespace)  # the field names of our own dataclasses only
    return namespace["build"]


_new_alternative = _slot_builder(Alternative)
_new_market_values = _slot_builder(MarketValues)
_new_operating_costs = _slot_builder(OperatingCosts)
_new_extra_cost = _slot_builder(ExtraCost)
_new_study = _slot_builder(Study)


def _quick_name(value: Any) -> str:
    """A name or title as ``_text(...).strip()`` gives it.  ``isprintable()`` is false for
    every character ``_text`` refuses (controls, lone surrogates) and for a few it accepts
    (a no-break space, a bidi mark): those names take the per-field path."""
    if type(value) is str and value.isprintable():
        name = value.strip()
        if name:
            return name
    raise _NotQuick


def _quick_number(value: Any, low: float, high: float) -> float:
    """A float or int in [low, high] as a float (NaN fails every comparison)."""
    if (type(value) is float or type(value) is int) and low <= value <= high:
        return float(value)
    raise _NotQuick


def _quick_rate(value: Any, high: float = MAX_RATE) -> float:
    """A float or int in (-1, high] as a float: ``_rate`` by default, a decline rate with
    high = 1, a growth with high = MAX_GROWTH."""
    if (type(value) is float or type(value) is int) and -1.0 < value <= high:
        return float(value)
    raise _NotQuick


def _quick_amounts(value: Any, life: int, nonnegative: bool) -> tuple[float, ...]:
    """``_number_list`` for lists of plain numbers (``nonnegative``: a negative one would warn)."""
    if type(value) is not list or len(value) < life:
        raise _NotQuick
    kinds = set(map(type, value))
    if kinds == {float}:
        out = tuple(value)
    elif kinds <= _NUMBER_TYPES:
        try:
            out = tuple(map(float, value))
        except OverflowError:
            raise _NotQuick from None
    else:
        raise _NotQuick
    total = sum(out)
    if total - total != 0.0:  # a NaN or an infinity somewhere (min and max would miss a NaN)
        raise _NotQuick
    if not (-MAX_AMOUNT <= min(out) and max(out) <= MAX_AMOUNT) or (nonnegative and min(out) < 0):
        raise _NotQuick
    return out


def _quick_alternative(obj: Any, role: Role) -> Alternative:
    """``_alternative`` for the common shapes, with no warning; ``_NotQuick`` otherwise."""
    if type(obj) is not dict:
        raise _NotQuick
    keys = obj.keys()
    if role == "defender":
        if not _DEFENDER_REQUIRED <= keys <= _DEFENDER_KEYS:
            raise _NotQuick
        price = _quick_number(obj["market_value"], 0.0, MAX_AMOUNT)  # < 0 warns
    else:
        if not _CHALLENGER_REQUIRED <= keys <= _CHALLENGER_KEYS:
            raise _NotQuick
        price = _quick_number(obj["first_cost"], 0.0, MAX_AMOUNT)
    name = _quick_name(obj["name"])
    life = obj["max_life"]
    if type(life) is not int or not 1 <= life <= 100:
        raise _NotQuick
    mv = obj["market_values"]
    if type(mv) is not dict or len(mv) != 1:
        raise _NotQuick
    if "values" in mv:
        market_values = _new_market_values(_quick_amounts(mv["values"], life, True), None)
    elif "decline_rate" in mv:
        market_values = _new_market_values(None, _quick_rate(mv["decline_rate"], 1.0))
    else:
        raise _NotQuick
    oc = obj["operating_costs"]
    if type(oc) is not dict:
        raise _NotQuick
    if "values" in oc:
        if len(oc) != 1:
            raise _NotQuick
        operating = _new_operating_costs(_quick_amounts(oc["values"], life, False), None, None,
                                         None)
    else:
        if "first" not in oc or not oc.keys() <= _COST_FORMULA_KEYS or len(oc) == 3:
            raise _NotQuick
        gradient = oc.get("gradient")
        growth = oc.get("growth")
        if (gradient is None and "gradient" in oc) or (growth is None and "growth" in oc):
            raise _NotQuick
        operating = _new_operating_costs(
            None, _quick_number(oc["first"], -MAX_AMOUNT, MAX_AMOUNT),
            None if gradient is None else _quick_number(gradient, -MAX_AMOUNT, MAX_AMOUNT),
            None if growth is None else _quick_rate(growth, MAX_GROWTH))
    extras: tuple[ExtraCost, ...] = ()
    if "extra_costs" in obj:
        items = obj["extra_costs"]
        if type(items) is not list:
            raise _NotQuick
        extras = tuple(_quick_extra(item, life) for item in items)
    depreciation = None
    if "depreciation" in obj:
        depreciation = _depreciation(obj["depreciation"], "", role)
        if depreciation.basis is None and depreciation.salvage > price:
            raise _NotQuick
    technology = obj.get("technology")
    if technology is not None:
        technology = _technology(technology, "", horizon_required=False)
    return _new_alternative(name, role, price, life, market_values, operating, extras,
                            depreciation, technology)


def _quick_extra(obj: Any, life: int) -> ExtraCost:
    if type(obj) is not dict or not _EXTRA_REQUIRED <= obj.keys() <= _EXTRA_KEYS:
        raise _NotQuick
    year = obj["year"]
    if type(year) is not int or not 1 <= year <= life:
        raise _NotQuick
    label = obj.get("label", "")
    if type(label) is not str or not label.isprintable():
        raise _NotQuick
    return _new_extra_cost(year, _quick_number(obj["amount"], -MAX_AMOUNT, MAX_AMOUNT), label)


def _quick_study(obj: Any) -> Study:
    """``parse_study_fields`` for the common shapes, or ``_NotQuick`` (a StudyError from a
    shared part also sends the study to the per-field path, which then names the first
    problem in its own order)."""
    if type(obj) is not dict or not _STUDY_REQUIRED <= obj.keys() <= STUDY_KEYS:
        raise _NotQuick
    title = _quick_name(obj["title"])
    marr = _quick_rate(obj["marr"])
    period = obj.get("study_period")
    if period is not None and (type(period) is not int or period < 1):
        raise _NotQuick
    defender = _quick_alternative(obj["defender"], "defender")
    items = obj["challengers"]
    if type(items) is not list or not items:
        raise _NotQuick
    challengers = tuple(_quick_alternative(c, "challenger") for c in items)
    if len({defender.name, *(c.name for c in challengers)}) != 1 + len(challengers):
        raise _NotQuick
    tax = obj.get("tax")
    if tax is not None:
        if type(tax) is not dict or tax.keys() != _TAX_KEYS:
            raise _NotQuick
        tax = Tax(_quick_number(tax["rate"], 0.0, 0.99), _quick_rate(tax["after_tax_marr"]))
        if defender.depreciation is None or any(c.depreciation is None for c in challengers):
            raise _NotQuick
    inflation = obj.get("inflation")
    if inflation is not None:
        if type(inflation) is not dict or not ("rate" in inflation
                                               and inflation.keys() <= _INFLATION_KEYS):
            raise _NotQuick
        estimates = inflation.get("estimates", "constant")
        if estimates not in ("constant", "then-current"):
            raise _NotQuick
        inflation = Inflation(_quick_rate(inflation["rate"]), estimates)
    notes = obj.get("notes", "")
    if type(notes) is not str or not (  # notes may hold line breaks and tabs
            notes.isprintable()
            or notes.replace("\n", "").replace("\r", "").replace("\t", "").isprintable()):
        raise _NotQuick
    technology = obj.get("technology")
    if technology is not None:
        technology = _technology(technology, "", horizon_required=True)
    if period is not None and period > defender.max_life + max(c.max_life for c in challengers):
        raise _NotQuick
    study = _new_study(title, marr, defender, challengers, period, tax, inflation, None, notes,
                       technology)
    if technology is not None or any(c.technology is not None for c in challengers):
        _check_horizons(study, "")
    uncertainty = obj.get("uncertainty")
    if uncertainty is not None:
        study = dataclasses.replace(study, uncertainty=_uncertainty(uncertainty, "", study))
    return study


# --------------------------------------------------------------------------- writing
def _num(x: float) -> float | int:
    return int(x) if float(x).is_integer() and abs(x) < 2**53 else float(x)


def alternative_to_dict(alt: Alternative) -> dict[str, Any]:
    """The §5 dictionary of one alternative."""
    out: dict[str, Any] = {"name": alt.name}
    out["market_value" if alt.role == "defender" else "first_cost"] = _num(alt.price)
    out["max_life"] = alt.max_life
    mv = alt.market_values
    out["market_values"] = ({"values": [_num(v) for v in mv.values]} if mv.values is not None
                            else {"decline_rate": _num(mv.decline_rate or 0.0)})
    oc = alt.operating_costs
    if oc.values is not None:
        out["operating_costs"] = {"values": [_num(v) for v in oc.values]}
    else:
        ops: dict[str, Any] = {"first": _num(oc.first or 0.0)}
        if oc.gradient is not None:
            ops["gradient"] = _num(oc.gradient)
        if oc.growth is not None:
            ops["growth"] = _num(oc.growth)
        out["operating_costs"] = ops
    if alt.extra_costs:
        out["extra_costs"] = [{"year": x.year, "amount": _num(x.amount), "label": x.label}
                              for x in alt.extra_costs]
    if alt.depreciation is not None:
        out["depreciation"] = _depreciation_dict(alt.depreciation)
    if alt.technology is not None:
        out["technology"] = technology_to_dict(alt.technology)
    return out


def _depreciation_dict(dep: Depreciation) -> dict[str, Any]:
    d: dict[str, Any] = {"method": dep.method}
    if dep.basis is not None:
        d["basis"] = _num(dep.basis)
    if dep.macrs_class is not None:
        d["class"] = dep.macrs_class
    if dep.years is not None:
        d["years"] = dep.years
    if dep.age:
        d["age"] = dep.age
    if dep.method == "straight_line" and dep.salvage:
        d["salvage"] = _num(dep.salvage)
    if dep.rate is not None:
        d["rate"] = _num(dep.rate)
    return d


def technology_to_dict(tech: Technology) -> dict[str, Any]:
    """The §5 ``technology`` block (the horizon only when given)."""
    out: dict[str, Any] = {} if tech.horizon is None else {"horizon": tech.horizon}
    out["first_cost_change"] = _num(tech.first_cost_change)
    out["operating_cost_change"] = _num(tech.operating_cost_change)
    return out


def study_to_dict(study: Study) -> dict[str, Any]:
    """The §5 study object (without format/version), such that ``parse_study`` gives it back."""
    out: dict[str, Any] = {"title": study.title, "marr": _num(study.marr),
                           "study_period": study.study_period,
                           "defender": alternative_to_dict(study.defender),
                           "challengers": [alternative_to_dict(c) for c in study.challengers]}
    if study.tax is not None:
        out["tax"] = {"rate": _num(study.tax.rate), "after_tax_marr": _num(study.tax.after_tax_marr)}
    if study.inflation is not None:
        out["inflation"] = {"rate": _num(study.inflation.rate),
                            "estimates": study.inflation.estimates}
    if study.uncertainty is not None:
        out["uncertainty"] = _uncertainty_dict(study.uncertainty)
    if study.notes:
        out["notes"] = study.notes
    if study.technology is not None:
        out["technology"] = technology_to_dict(study.technology)
    return out


def _uncertainty_dict(unc: Uncertainty) -> dict[str, Any]:
    u: dict[str, Any] = {"trials": unc.trials,
                         "inputs": {a: {d.kind: [_num(p) for p in d.params]}
                                    for a, d in unc.inputs}}
    if unc.seed is not None:
        u["seed"] = unc.seed
    return u


def dump_study_document(studies: list[Study] | tuple[Study, ...], indent: int | None = 2) -> str:
    """A complete study file holding ``studies`` (one study object when there is just one)."""
    head = {"format": FORMAT, "version": VERSION}
    if len(studies) == 1:
        doc = {**head, **study_to_dict(studies[0])}
    else:
        doc = {**head, "studies": [study_to_dict(s) for s in studies]}
    return json.dumps(doc, indent=indent, ensure_ascii=False, allow_nan=False) + "\n"


def canonical_json(study: Study) -> str:
    """Canonical JSON of one study: §5 form, sorted keys, no spaces, UTF-8, with format/version."""
    doc = {"format": FORMAT, "version": VERSION, **study_to_dict(study)}
    return json.dumps(doc, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False)


def fingerprint(study: Study) -> str:
    """SHA-256 (hex) of the canonical study JSON: the memo footer's study fingerprint.

    The text is :func:`canonical_text`, the same characters as :func:`canonical_json` written
    without building the dictionaries first.
    """
    return hashlib.sha256(canonical_text(study).encode("utf-8")).hexdigest()


# --------------------------------------------------------------------------- canonical text
#: ``json.dumps`` with the canonical settings (sorted keys, no spaces, UTF-8, no NaN): the
#: encoder ``json.dumps`` would build on every call, built once.
_dumps = json.JSONEncoder(sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                          allow_nan=False).encode
#: The string encoder ``json.dumps`` uses with ensure_ascii=False.
_string: Callable[[str], str] = json.encoder.encode_basestring
_WHOLE_LIMIT = 2.0**53


def _number_text(x: Any) -> str:
    """``_dumps(_num(x))``: a float by its repr, a whole one below 2**53 as an integer."""
    if type(x) is float:
        if x.is_integer():
            if -_WHOLE_LIMIT < x < _WHOLE_LIMIT:
                return str(int(x))
        elif x - x == 0.0:  # finite
            return repr(x)
    return _dumps(_num(x))


def _numbers_text(values: Any) -> str:
    """``_dumps([_num(v) for v in values])``: the reprs joined when every value is a finite
    float (a finite float's repr has no "n"; "nan" and "inf" do), the whole ones (repr "x.0",
    the only reprs ending in ".0") then written as ``_num`` writes them."""
    if set(map(type, values)) == {float}:
        texts = list(map(repr, values))
        body = ",".join(texts)
        if "n" not in body:  # no "nan", "inf": every value finite
            if ".0," in body or body.endswith(".0"):  # whole values: written without ".0"
                if ("-0.0," in body or body.endswith("-0.0")
                        or not -_WHOLE_LIMIT < min(values) <= max(values) < _WHOLE_LIMIT):
                    body = ",".join([_number_text(v) if t[-2:] == ".0" else t
                                     for v, t in zip(values, texts, strict=True)])
                else:  # no -0.0 (written "0") and none past 2**53 (kept a float)
                    body = body.replace(".0,", ",")
                    if body.endswith(".0"):
                        body = body[:-2]
            return "[" + body + "]"
    return "[" + ",".join([_number_text(v) for v in values]) + "]"


def _plain_text(value: Any) -> str:
    """``_dumps(value)`` for what ``study_to_dict`` writes as it is (whole numbers, None)."""
    if type(value) is int:
        return str(value)
    return "null" if value is None else _dumps(value)


def _text_text(value: Any) -> str:
    return _string(value) if type(value) is str else _dumps(value)


def _flat_text(block: dict[str, Any]) -> str:
    """``_dumps(block)`` for a block of plain values (depreciation, tax, inflation,
    technology): each ``json.dumps`` call costs a few microseconds of set-up."""
    parts = []
    for key in sorted(block):
        value = block[key]
        if type(value) is str:
            text = _string(value)
        elif type(value) is int:
            text = str(value)
        elif type(value) is float and value - value == 0.0:
            text = repr(value)
        else:
            text = _dumps(value)
        parts.append(_string(key) + ":" + text)
    return "{" + ",".join(parts) + "}"


def _uncertainty_text(unc: Uncertainty) -> str:
    """``_dumps(_uncertainty_dict(unc))``, keys in sorted order."""
    inputs = dict(unc.inputs)  # as _uncertainty_dict: a repeated address keeps its last value
    if not all(type(address) is str for address in inputs):
        return _dumps(_uncertainty_dict(unc))
    body = ",".join([_string(address) + ":{" + _text_text(inputs[address].kind) + ":"
                     + _numbers_text(inputs[address].params) + "}" for address in sorted(inputs)])
    seed = "" if unc.seed is None else ',"seed":' + _plain_text(unc.seed)
    return '{"inputs":{' + body + "}" + seed + ',"trials":' + _plain_text(unc.trials) + "}"


def _alternative_text(alt: Alternative) -> str:
    """``_dumps(alternative_to_dict(alt))``, keys in sorted order."""
    head = ""
    if alt.depreciation is not None:
        head = '"depreciation":' + _flat_text(_depreciation_dict(alt.depreciation)) + ","
    if alt.extra_costs:
        head += '"extra_costs":[' + ",".join([
            '{"amount":' + _number_text(x.amount) + ',"label":' + _text_text(x.label)
            + ',"year":' + _plain_text(x.year) + "}" for x in alt.extra_costs]) + "],"
    mv = alt.market_values
    if mv.values is not None:
        market_values = '{"values":' + _numbers_text(mv.values) + "}"
    else:
        market_values = '{"decline_rate":' + _number_text(mv.decline_rate or 0.0) + "}"
    oc = alt.operating_costs
    if oc.values is not None:
        operating = '{"values":' + _numbers_text(oc.values) + "}"
    else:
        operating = '{"first":' + _number_text(oc.first or 0.0)
        if oc.gradient is not None:
            operating += ',"gradient":' + _number_text(oc.gradient)
        if oc.growth is not None:
            operating += ',"growth":' + _number_text(oc.growth)
        operating += "}"
    tail = "" if alt.technology is None else (
        ',"technology":' + _flat_text(technology_to_dict(alt.technology)))
    price_key = '"market_value":' if alt.role == "defender" else '"first_cost":'
    return (f'{{{head}{price_key}{_number_text(alt.price)},"market_values":{market_values},'
            f'"max_life":{_plain_text(alt.max_life)},"name":{_text_text(alt.name)},'
            f'"operating_costs":{operating}{tail}}}')


def canonical_text(study: Study) -> str:
    """:func:`canonical_json`, character for character, written directly (keys in sorted
    order, numbers through ``_num``): the fingerprint's text, about twice as fast.

    >>> from core.estimates import Alternative, MarketValues, OperatingCosts
    >>> d = Alternative("Old", "defender", 10.0, 1, MarketValues(values=(5.5,)),
    ...                 OperatingCosts(first=2.0))
    >>> c = Alternative("New", "challenger", 20.0, 1, MarketValues(decline_rate=0.25),
    ...                 OperatingCosts(values=(1.0,)))
    >>> s = Study("Zoë", 0.1, d, (c,))
    >>> canonical_text(s) == canonical_json(s)
    True
    """
    parts = ['"challengers":[' + ",".join([_alternative_text(c) for c in study.challengers])
             + "]", '"defender":' + _alternative_text(study.defender),
             '"format":' + _string(FORMAT)]
    if study.inflation is not None:
        parts.append('"inflation":' + _flat_text({"rate": _num(study.inflation.rate),
                                              "estimates": study.inflation.estimates}))
    parts.append('"marr":' + _number_text(study.marr))
    if study.notes:
        parts.append('"notes":' + _text_text(study.notes))
    parts.append('"study_period":' + _plain_text(study.study_period))
    if study.tax is not None:
        parts.append('"tax":' + _flat_text({"rate": _num(study.tax.rate),
                                        "after_tax_marr": _num(study.tax.after_tax_marr)}))
    if study.technology is not None:
        parts.append('"technology":' + _flat_text(technology_to_dict(study.technology)))
    parts.append('"title":' + _text_text(study.title))
    if study.uncertainty is not None:
        parts.append('"uncertainty":' + _uncertainty_text(study.uncertainty))
    parts.append('"version":' + _plain_text(VERSION))
    return "{" + ",".join(parts) + "}"
