"""The study file's fast paths read and fingerprint exactly as the plain per-field path does.

The fingerprint is stored in workbooks and signed memos, so it must never change: the
values pinned below were computed with the implementation before the fast paths existed
(``study_to_dict`` + ``json.dumps(sort_keys=True, separators=(",", ":"),
ensure_ascii=False)`` + SHA-256, docs/method.md §5).
Sources: docs/method.md §5 (canonical form), "common practice, no source" for the rest.
"""

from __future__ import annotations

import copy
import dataclasses
import random
from collections.abc import Callable
from typing import Any

import numpy as np
import pytest
from conftest import BASE_STUDY, parse_one
from hypothesis import given, settings
from hypothesis import strategies as st

from core.demo import demo_studies
from core.errors import StudyError
from core.estimates import Alternative, Distribution, Study, Uncertainty
from core.studyfile import (
    _NotQuick,
    _quick_study,
    canonical_json,
    canonical_text,
    fingerprint,
    parse_study,
    parse_study_fields,
)

#: A study with every optional block: study period, tax (every depreciation method),
#: inflation, uncertainty, technology (study and challenger), extra costs, notes, and text
#: that JSON must escape.
EVERY_BLOCK: dict[str, Any] = {
    "title": "Zoë's \"big\" press — Ouseburn\\Yard",
    "marr": 0.095,
    "study_period": 6,
    "defender": {"name": "Press 1998", "market_value": 42000, "max_life": 5,
                 "market_values": {"values": [36000.5, 30000, 25500.25, 21000, 18000.0]},
                 "operating_costs": {"first": 14500, "gradient": 2800.5},
                 "extra_costs": [{"year": 2, "amount": 9000, "label": "rebuild ✓"},
                                 {"year": 5, "amount": 1234.56}],
                 "depreciation": {"method": "straight_line", "basis": 80000, "years": 8,
                                  "age": 3, "salvage": 4000}},
    "challengers": [
        {"name": "Servo press", "first_cost": 96000, "max_life": 10,
         "market_values": {"decline_rate": 0.18},
         "operating_costs": {"values": [5200, 5300.5, 5400, 5500, 5600, 5700, 5800, 5900,
                                        6000, 6100.75, 6200]},
         "depreciation": {"method": "macrs", "class": 7},
         "technology": {"first_cost_change": -0.02, "operating_cost_change": -0.04}},
        {"name": "Hydraulic press", "first_cost": 71000.5, "max_life": 8,
         "market_values": {"decline_rate": 0.2},
         "operating_costs": {"first": 6100, "growth": 0.035},
         "depreciation": {"method": "declining_balance", "basis": 70000, "years": 6,
                          "rate": 0.25},
         "technology": {"horizon": 12}},
    ],
    "tax": {"rate": 0.25, "after_tax_marr": 0.06},
    "inflation": {"rate": 0.03, "estimates": "then-current"},
    "uncertainty": {"trials": 2000, "seed": 7, "inputs": {
        "Servo press.first_cost": {"triangular": [85000, 96000, 115000]},
        "Press 1998.operating_costs.first": {"uniform": [13000, 16000.5]},
        "marr": {"pert": [0.07, 0.095, 0.12]},
        "Hydraulic press.operating_costs.growth": {"normal": [0.035, 0.01]},
        "Hydraulic press.market_values.decline_rate": {"lognormal": [0.2, 0.05]}}},
    "notes": "Line one\n\tindented \"quoted\" line\r\nend",
    "technology": {"horizon": 12, "first_cost_change": 0.01, "operating_cost_change": 0},
}

#: Numbers whose canonical text is easy to get wrong: integer-valued floats (written as
#: integers), -0.0, exponents, long fractions, a negative market value (a warning).
ODD_NUMBERS: dict[str, Any] = {
    "title": "Odd numbers",
    "marr": 0,
    "defender": {"name": "Old", "market_value": -0.0, "max_life": 4,
                 "market_values": {"values": [-1500.0, 1e-7, 0.30000000000000004, 1e11,
                                              -0.0]},
                 "operating_costs": {"first": 12000.0, "growth": 1e-05}},
    "challengers": [{"name": "New", "first_cost": 999999999999.5, "max_life": 3,
                     "market_values": {"decline_rate": -0.0},
                     "operating_costs": {"values": [2.5e-05, 100, 123456789.125]},
                     "extra_costs": [{"year": 3, "amount": -0.0, "label": ""}]}],
}

#: SHA-256 fingerprints computed before the fast paths (see the module docstring).
PINNED = {
    "base": "bb3e1633008270dea848c5e077c9ef6888bbc5670f07f0dfda06809523561f4b",
    "every block": "5dc40611cd3f66249d71187a951da02a5cc2bb7bc128d6d73374628741d6f4fd",
    "odd numbers": "6a1d361e7b95e014c06d05b61093aa9a373875844c8ddae9ddeb205407ac0379",
}

#: The demo studies' fingerprints (title: fingerprint), computed the same way.
PINNED_DEMO: dict[str, str] = {
    "Kestrel Road — AC-101 Rotary screw compressor 75 kW":
        "1a782f74b6de72bf05fd7b134ab5db9ebaeed4f930e0cabf720b4f83ef28ac33",
    "Kestrel Road — AC-102 Rotary screw compressor 55 kW":
        "59932820f576497ae3d84d9e3df9202206918a445928309734b8657d68977441",
    "Millbrook — AC-201 Reciprocating compressor 22 kW":
        "741b1dfb582750c5f109a63b2c1110ae65efdcbdd8bc5500d2e7a7930235055d",
    "Kestrel Road — FL-07 Diesel forklift 2.5 t":
        "2b2c598dd99589f860f441f3689bf41bcbcac75a167f50574dd0ecc2fd9ca768",
    "Millbrook — FL-11 Electric forklift 1.8 t":
        "10dd1d2766b1c1e7db59bd158622d7363173ebee7f2ed7502901121179db9810",
    "Ouseburn Yard — FL-15 LPG forklift 3 t":
        "3e1a00bfdca579c1eb48667f01deda4b467d5ff97b3fe9e6b1a832712bf7f1ca",
    "Millbrook — PU-03 Cooling water pump 30 kW":
        "27bf6de2f16382ad2336a65598368c7f75f689f94be5a81b9b17e3274de0dd6f",
    "Millbrook — PU-04 Process water pump 30 kW":
        "2b48fe673e160622a7e188b15eae1a07e3ac224611eb5f262baf8cf73291f9b1",
    "Ouseburn Yard — PU-12 Wash-bay booster pump 30 kW":
        "b6860fc3c62f6efa16cf95581a6880f729e18a3783c6a0e78849c4ce23d4f4c7",
    "Kestrel Road — PK-01 Case erector and taper":
        "ea3f05487666c8cdabaf3da1bff5ca6c5a3af102d63a8139bd57c665e8677ae0",
    "Ouseburn Yard — PK-02 Stretch wrapper":
        "79f7cbbd9dccb458ec890d72d0f1b5102adc876f8bbfc094fc2a7052d200b0b6",
    "Millbrook — PK-05 Carton labelling line":
        "e1fd30267d084fd76b6b280c5717e42ed0d95f126ec49d71076fa74214087440",
    "Ouseburn Yard — PB-02 Hydraulic press brake 100 t":
        "281067a990f38875e3adb5a8316ad29074cc774bfeacf6ba43e9d8b67de96309",
    "Kestrel Road — PB-05 Hydraulic press brake 60 t":
        "d8dc94b81a76da927f1197f144a07b686f156ee527a390c56fc4af286f48db74",
}


def test_fingerprints_never_change() -> None:
    # Source: the fingerprints computed before the fast paths (module docstring).
    assert fingerprint(parse_one(BASE_STUDY)) == PINNED["base"]
    assert fingerprint(parse_one(copy.deepcopy(EVERY_BLOCK))) == PINNED["every block"]
    assert fingerprint(parse_one(copy.deepcopy(ODD_NUMBERS))) == PINNED["odd numbers"]


def test_demo_fingerprints_never_change() -> None:
    # Source: the fingerprints computed before the fast paths (module docstring).
    assert {s.title: fingerprint(s) for s in demo_studies()} == PINNED_DEMO


# --------------------------------------------------------------------------- quick reader
_ODD_VALUES: list[Any] = [None, True, False, "x", "", " ", "a\nb", "\u202e", "\ud800", [], {}, [1.0],
                          {"x": 1}, 0, -0.0, 1, -1, 2.5, 3.0, 0.99, 1.0, 1.5, -1.0, -0.5, 100,
                          101, 60, 61, 0.9900001, 1.0000001, -0.9999999, 1e12, 1e12 + 1,
                          -1e12, -1e12 - 1, 10**13, float("nan"), float("inf"),
                          -float("inf"), 10**400, 2**53 + 1]


def _random_alternative(rng: random.Random, role: str, name: str) -> dict[str, Any]:
    life = rng.randint(1, 12)
    alt: dict[str, Any] = {"name": name,
                           "market_value" if role == "defender" else "first_cost":
                               rng.choice([rng.uniform(0, 1e5), rng.randint(0, 10**5), 0, 0.0])}
    alt["max_life"] = life
    if rng.random() < 0.5:
        alt["market_values"] = {"decline_rate": rng.choice([rng.uniform(-0.5, 1.0), 0, 1])}
    else:
        alt["market_values"] = {"values": [rng.choice([rng.uniform(0, 5e4), rng.randint(0, 9000)])
                                           for _ in range(life + rng.choice([0, 0, 2]))]}
    kind = rng.random()
    if kind < 0.2:
        alt["operating_costs"] = {"values": [rng.uniform(-100, 9000) for _ in range(life)]}
    elif kind < 0.5:
        alt["operating_costs"] = {"first": rng.uniform(0, 9000), "gradient": rng.uniform(-50, 900)}
    elif kind < 0.8:
        alt["operating_costs"] = {"first": rng.randint(0, 9000), "growth": rng.uniform(-0.5, 1.0)}
    else:
        alt["operating_costs"] = {"first": rng.uniform(0, 9000)}
    if rng.random() < 0.4:
        alt["extra_costs"] = [{"year": rng.randint(1, life), "amount": rng.uniform(-10, 9e3),
                               **({"label": rng.choice(["", "overhaul", " x "])}
                                  if rng.random() < 0.5 else {})}
                              for _ in range(rng.randint(0, 2))]
    if rng.random() < 0.2:
        alt["depreciation"] = rng.choice([
            {"method": "macrs", "class": 7},
            {"method": "straight_line", "basis": 9e4, "years": 8,
             **({"age": 2} if role == "defender" else {})},
            {"method": "declining_balance", "basis": 5e4, "years": 6, "rate": 0.25}])
    if role == "challenger" and rng.random() < 0.1:
        alt["technology"] = {"first_cost_change": -0.02, **({"horizon": 10}
                                                           if rng.random() < 0.5 else {})}
    return alt


def _random_study(rng: random.Random) -> dict[str, Any]:
    study: dict[str, Any] = {
        "title": rng.choice(["Press line", "  Zoë's pump ", "Kestrel Road — AC-101"]),
        "marr": rng.choice([rng.uniform(-0.5, 1.0), 0, 1]),
        "defender": _random_alternative(rng, "defender", "Old"),
        "challengers": [_random_alternative(rng, "challenger", f"New {k}")
                        for k in range(rng.randint(1, 3))]}
    if rng.random() < 0.3:
        study["study_period"] = rng.choice([None, rng.randint(1, 20)])
    if rng.random() < 0.2:
        study["tax"] = {"rate": rng.choice([0.25, 0, 0.99]), "after_tax_marr": 0.06}
    if rng.random() < 0.2:
        study["inflation"] = {"rate": 0.03, **({"estimates": rng.choice(["constant",
                                                                        "then-current"])}
                                               if rng.random() < 0.5 else {})}
    if rng.random() < 0.2:
        study["notes"] = rng.choice(["", "two\nlines\tand a tab", "plain"])
    if rng.random() < 0.1:
        study["technology"] = {"horizon": 10, "operating_cost_change": -0.01}
    if rng.random() < 0.1:
        study["uncertainty"] = {"trials": 100, "inputs": {"marr": {"uniform": [0.05, 0.1]}}}
    return study


def _leaves(obj: Any, path: tuple[Any, ...] = ()) -> list[tuple[Any, ...]]:
    """Every (path) to a value inside ``obj``, containers included."""
    out = [path]
    if isinstance(obj, dict):
        for key, value in obj.items():
            out += _leaves(value, (*path, key))
    elif isinstance(obj, list):
        for k, value in enumerate(obj):
            out += _leaves(value, (*path, k))
    return out


def _mutate(rng: random.Random, study: dict[str, Any]) -> None:
    """Change, delete or add one thing anywhere in ``study``."""
    path = rng.choice(_leaves(study)[1:])
    parent = study
    for key in path[:-1]:
        parent = parent[key]
    what = rng.random()
    if what < 0.6:
        parent[path[-1]] = copy.deepcopy(rng.choice(_ODD_VALUES))
    elif what < 0.8:
        del parent[path[-1]]
    elif isinstance(parent, dict):
        parent[rng.choice(["colour", "values", "growth", "gradient", "label", "horizon",
                           "decline_rate", "technology", "depreciation", "extra_costs"])] = \
            copy.deepcopy(rng.choice(_ODD_VALUES))
    else:
        parent.append(copy.deepcopy(rng.choice(_ODD_VALUES)))


def _outcome(parse: Callable[..., Study], obj: Any) -> tuple[Any, ...]:
    warnings: list[str] = []
    try:
        study = parse(copy.deepcopy(obj), "$.x", warnings)
    except StudyError as exc:
        return ("refused", exc.path, exc.message, warnings)
    # repr too: == would not tell 3 from 3.0 or 0.0 from -0.0
    return ("parsed", study, repr(study), fingerprint(study) if _finite(study) else None,
            warnings)


def _finite(study: Study) -> bool:
    try:
        canonical_json(study)
    except ValueError:
        return False
    return True


@settings(max_examples=400, deadline=None)
@given(st.integers(0, 2**32 - 1), st.integers(0, 3))
def test_quick_reader_matches_the_per_field_path(seed: int, mutations: int) -> None:
    # Source: the per-field path (parse_study_fields) is the reference: same Study, same
    # refusal (path and words), same warnings, for valid and damaged studies alike.
    rng = random.Random(seed)
    study = _random_study(rng)
    for _ in range(mutations):
        _mutate(rng, study)
    assert _outcome(parse_study, study) == _outcome(parse_study_fields, study)
    try:
        quick = _quick_study(copy.deepcopy(study))
    except (_NotQuick, StudyError):
        return
    warnings: list[str] = []
    reference = parse_study_fields(copy.deepcopy(study), "$", warnings)
    assert quick == reference and repr(quick) == repr(reference) and not warnings


def test_quick_reader_takes_the_common_shapes() -> None:
    # Source: common practice, no source (the fast path must actually be used).
    assert _quick_study(copy.deepcopy(BASE_STUDY)) == parse_study_fields(copy.deepcopy(BASE_STUDY))
    assert _quick_study(copy.deepcopy(EVERY_BLOCK)) == parse_study_fields(
        copy.deepcopy(EVERY_BLOCK))
    with pytest.raises(_NotQuick):  # a negative market value warns: the per-field path's job
        _quick_study(copy.deepcopy(ODD_NUMBERS))


#: EVERY_BLOCK with lists where it has rates and the other way round, for the walk below.
_SWAPPED: dict[str, Any] = copy.deepcopy(EVERY_BLOCK)
_SWAPPED["defender"]["market_values"] = {"decline_rate": 0.1}
_SWAPPED["challengers"][0]["market_values"] = {"values": [9e4 - 5e3 * k for k in range(10)]}
_SWAPPED["challengers"][0]["operating_costs"] = {"first": 5200, "gradient": 100}


@pytest.mark.parametrize("base", [BASE_STUDY, EVERY_BLOCK, ODD_NUMBERS, _SWAPPED],
                         ids=["base", "every block", "odd numbers", "swapped"])
def test_every_value_replaced_or_deleted_reads_as_the_per_field_path(base: dict[str, Any]) -> None:
    # Source: the per-field path (parse_study_fields) is the reference; every place in the
    # study gets every odd value (bounds, wrong types, NaN, huge numbers) and is deleted once.
    for path in _leaves(base)[1:]:
        for value in [*_ODD_VALUES, "delete"]:
            study = copy.deepcopy(base)
            parent = study
            for key in path[:-1]:
                parent = parent[key]
            if value == "delete":
                del parent[path[-1]]
            else:
                parent[path[-1]] = copy.deepcopy(value)
            assert _outcome(parse_study, study) == _outcome(parse_study_fields, study), path


# --------------------------------------------------------------------------- canonical text
_NUMBERS: list[Any] = [0.0, -0.0, 1.0, -1.0, 0.5, 12345.67, 12000.0, 0.1 + 0.2, 1e-7, 2.5e-05,
                       1e11, 1e15 + 0.5, 2.0**53 - 1, 2.0**53, -(2.0**53), 2.0**53 + 2, 1e16,
                       1.5e300, 7, 0, -3, 2**53, 2**60, True, np.float64(2.5), np.float64(3.0),
                       float("nan"), float("inf")]


def _canonical(study: Study) -> tuple[str, Any]:
    """canonical_json's text, or the type of what it raised."""
    try:
        return "text", canonical_json(study)
    except (ValueError, TypeError, OverflowError) as exc:
        return "raised", type(exc)


def _canonical_fast(study: Study) -> tuple[str, Any]:
    try:
        return "text", canonical_text(study)
    except (ValueError, TypeError, OverflowError) as exc:
        return "raised", type(exc)


@settings(max_examples=300, deadline=None)
@given(st.integers(0, 2**32 - 1))
def test_canonical_text_is_canonical_json(seed: int) -> None:
    # Source: canonical_json (study_to_dict + json.dumps, sorted keys) is the definition;
    # random studies with every number the writer treats specially, built directly (not
    # through the parser, so ints, bools, numpy floats and NaN reach the writer too).
    rng = random.Random(seed)
    study = parse_one(_random_valid_study(rng))

    def odd(x: Any) -> Any:
        return rng.choice(_NUMBERS) if rng.random() < 0.3 else x

    def alternative(alt: Alternative) -> Alternative:
        mv, oc = alt.market_values, alt.operating_costs
        mv = (dataclasses.replace(mv, values=tuple(odd(v) for v in mv.values))
              if mv.values is not None else dataclasses.replace(mv, decline_rate=odd(mv.decline_rate)))
        oc = (dataclasses.replace(oc, values=tuple(odd(v) for v in oc.values))
              if oc.values is not None else dataclasses.replace(
                  oc, first=odd(oc.first), gradient=oc.gradient and odd(oc.gradient)))
        extras = tuple(dataclasses.replace(x, amount=odd(x.amount)) for x in alt.extra_costs)
        return dataclasses.replace(alt, price=odd(alt.price), market_values=mv,
                                   operating_costs=oc, extra_costs=extras,
                                   max_life=rng.choice([alt.max_life, alt.max_life, 3.0, True]))

    study = dataclasses.replace(study, marr=odd(study.marr),
                                defender=alternative(study.defender),
                                challengers=tuple(alternative(c) for c in study.challengers),
                                study_period=rng.choice([None, study.study_period, 4.0]))
    if rng.random() < 0.5:  # addresses repeated, unsorted, with characters JSON escapes
        inputs = tuple((rng.choice(["marr", "b", "a", 'Zoë "x"\\.first_cost']),
                        Distribution(rng.choice(["uniform", "normal"]),
                                     tuple(odd(x) for x in (0.5, 1.0, 2.5))))
                       for _ in range(rng.randint(1, 4)))
        study = dataclasses.replace(study, uncertainty=Uncertainty(
            rng.choice([10, 2000]), rng.choice([None, 7, 2**64 - 1]), inputs))
    assert _canonical_fast(study) == _canonical(study)


def _random_valid_study(rng: random.Random) -> dict[str, Any]:
    while True:
        study = _random_study(rng)
        try:
            parse_one(copy.deepcopy(study))
        except StudyError:
            continue
        return study


def test_canonical_text_of_the_pinned_studies() -> None:
    # Source: canonical_json is the definition (docs/method.md §5).
    for body in (BASE_STUDY, EVERY_BLOCK, ODD_NUMBERS, _SWAPPED):
        study = parse_one(copy.deepcopy(body))
        assert canonical_text(study) == canonical_json(study)
    for study in demo_studies():
        assert canonical_text(study) == canonical_json(study)


def test_slot_builders_make_what_the_constructors_make() -> None:
    # Source: common practice, no source (every field distinct, so a field stored in the
    # wrong slot or left out would show in ==, hash or repr).
    from core.estimates import ExtraCost, MarketValues, OperatingCosts
    from core.studyfile import (
        _new_alternative,
        _new_extra_cost,
        _new_market_values,
        _new_operating_costs,
        _new_study,
    )
    mv, oc = MarketValues((1.0, 2.0), 0.1), OperatingCosts((3.0,), 4.0, 5.0, 6.0)
    extra = ExtraCost(2, 7.0, "x")
    assert _new_market_values((1.0, 2.0), 0.1) == mv
    assert _new_operating_costs((3.0,), 4.0, 5.0, 6.0) == oc
    assert _new_extra_cost(2, 7.0, "x") == extra
    args = ("a", "challenger", 8.0, 9, mv, oc, (extra,), None, None)
    alt = _new_alternative(*args)
    assert alt == Alternative(*args) and hash(alt) == hash(Alternative(*args))
    assert repr(alt) == repr(Alternative(*args))
    study_args = ("t", 0.1, alt, (alt,), 3, None, None, None, "n", None)
    assert _new_study(*study_args) == Study(*study_args)
    with pytest.raises(dataclasses.FrozenInstanceError):
        alt.name = "b"  # type: ignore[misc]
