"""The strict study file (docs/method.md §5): every refusal names its JSON path; valid files round-trip.

Sources: docs/method.md §5 (the format), "common practice, no source" for the refusals (typos and
doubtful numbers must not pass silently), RFC 8259 for what valid JSON is (NaN/Infinity are
not JSON; Python's json module accepts them unless told otherwise).
"""

from __future__ import annotations

import copy
import json
from collections.abc import Callable
from typing import Any

import pytest
from conftest import BASE_STUDY, document, parse_one

from core.errors import StudyError
from core.studyfile import (
    canonical_json,
    dump_study_document,
    fingerprint,
    load_study_file,
    loads_study_document,
    parse_study_document,
    study_to_dict,
)

Doc = dict[str, Any]


def _set(path: list[Any], value: Any) -> Callable[[Doc], None]:
    def apply(doc: Doc) -> None:
        target = doc
        for key in path[:-1]:
            target = target[key]
        target[path[-1]] = value
    return apply


def _delete(path: list[Any]) -> Callable[[Doc], None]:
    def apply(doc: Doc) -> None:
        target = doc
        for key in path[:-1]:
            target = target[key]
        del target[path[-1]]
    return apply


D = "defender"
C0 = ["challengers", 0]

#: (id, mutation of a valid document, the exact JSON path the refusal must name)
REFUSALS: list[tuple[str, Callable[[Doc], None], str]] = [
    ("unknown top key", _set(["marrr"], 0.1), "$.marrr"),
    ("unknown defender key", _set([D, "colour"], "red"), "$.defender.colour"),
    ("unknown challenger key", _set([*C0, "first_cots"], 1), "$.challengers[0].first_cots"),
    ("unknown market-values key", _set([*C0, "market_values", "decline"], 0.2),
     "$.challengers[0].market_values.decline"),
    ("unknown operating key", _set([D, "operating_costs", "gradiant"], 5),
     "$.defender.operating_costs.gradiant"),
    ("unknown extra-cost key",
     _set([D, "extra_costs"], [{"year": 1, "amount": 5, "lable": "x"}]),
     "$.defender.extra_costs[0].lable"),
    ("nan marr", _set(["marr"], float("nan")), "$.marr"),
    ("inf first cost", _set([*C0, "first_cost"], float("inf")), "$.challengers[0].first_cost"),
    ("-inf operating", _set([D, "operating_costs", "first"], float("-inf")),
     "$.defender.operating_costs.first"),
    ("nan in values", _set([D, "market_values"], {"values": [1.0, float("nan"), 3.0]}),
     "$.defender.market_values.values[1]"),
    ("life 2.5", _set([D, "max_life"], 2.5), "$.defender.max_life"),
    ("life text", _set([D, "max_life"], "3"), "$.defender.max_life"),
    ("life true", _set([*C0, "max_life"], True), "$.challengers[0].max_life"),
    ("life 0", _set([*C0, "max_life"], 0), "$.challengers[0].max_life"),
    ("life nan", _set([D, "max_life"], float("nan")), "$.defender.max_life"),
    ("life inf", _set([D, "max_life"], float("inf")), "$.defender.max_life"),
    ("market values too short", _set([D, "market_values"], {"values": [9, 8]}),
     "$.defender.market_values.values"),
    ("operating values too short", _set([*C0, "operating_costs"], {"values": [1] * 7}),
     "$.challengers[0].operating_costs.values"),
    ("extra cost past life", _set([D, "extra_costs"], [{"year": 4, "amount": 10}]),
     "$.defender.extra_costs[0].year"),
    ("extra cost year 0", _set([D, "extra_costs"], [{"year": 0, "amount": 10}]),
     "$.defender.extra_costs[0].year"),
    ("extra cost year 1.5", _set([D, "extra_costs"], [{"year": 1.5, "amount": 10}]),
     "$.defender.extra_costs[0].year"),
    ("no challenger", _set(["challengers"], []), "$.challengers"),
    ("challengers missing", _delete(["challengers"]), "$.challengers"),
    ("challengers not a list", _set(["challengers"], {"name": "x"}), "$.challengers"),
    ("bad format", _set(["format"], "tenure"), "$.format"),
    ("missing format", _delete(["format"]), "$.format"),
    ("bad version", _set(["version"], 2), "$.version"),
    ("version true", _set(["version"], True), "$.version"),
    ("version text", _set(["version"], "1"), "$.version"),
    ("challenger named as defender", _set([*C0, "name"], "Old press"),
     "$.challengers[0].name"),
    ("huge integer", _set([*C0, "first_cost"], 10**400), "$.challengers[0].first_cost"),
    ("huge integer in list", _set([D, "market_values"], {"values": [1, 10**400, 3]}),
     "$.defender.market_values.values[1]"),
    ("bool in list", _set([D, "operating_costs"], {"values": [1, True, 3]}),
     "$.defender.operating_costs.values[1]"),
    ("bool number", _set([*C0, "first_cost"], True), "$.challengers[0].first_cost"),
    ("text number", _set(["marr"], "0.1"), "$.marr"),
    ("marr -100 %", _set(["marr"], -1.0), "$.marr"),
    ("negative first cost", _set([*C0, "first_cost"], -5), "$.challengers[0].first_cost"),
    ("study period 0", _set(["study_period"], 0), "$.study_period"),
    ("study period too long", _set(["study_period"], 12), "$.study_period"),
    ("study period 2.5", _set(["study_period"], 2.5), "$.study_period"),
    ("both market-value forms", _set([D, "market_values"], {"values": [1, 2, 3],
                                                             "decline_rate": 0.1}),
     "$.defender.market_values"),
    ("empty name", _set([D, "name"], "  "), "$.defender.name"),
    ("missing name", _delete([D, "name"]), "$.defender.name"),
    ("tax without depreciation", _set(["tax"], {"rate": 0.25, "after_tax_marr": 0.06}),
     "$.defender.depreciation"),
    ("top not an object", lambda doc: None, "$"),  # replaced below by a list document
]


def _mutated(mutate: Callable[[Doc], None]) -> Any:
    doc = document()
    if mutate is REFUSALS[-1][1]:
        return [doc]
    mutate(doc)
    return doc


@pytest.mark.parametrize(("mutate", "path"), [(m, p) for _, m, p in REFUSALS],
                         ids=[i for i, _, _ in REFUSALS])
def test_refusal_names_json_path(mutate: Callable[[Doc], None], path: str) -> None:
    # Source: docs/method.md §5 / common practice, no source (strict input, exact path).
    with pytest.raises(StudyError) as info:
        parse_study_document(_mutated(mutate))
    assert info.value.path == path
    assert str(info.value).startswith(path + ": ")
    assert "\n" not in str(info.value)


def test_duplicate_challenger_names_and_study_titles() -> None:
    # Source: common practice, no source (names address uncertain inputs and rows; must be unique).
    doc = document()
    doc["challengers"].append(copy.deepcopy(doc["challengers"][0]))
    with pytest.raises(StudyError) as info:
        parse_study_document(doc)
    assert info.value.path == "$.challengers[1].name"
    fleet = {"format": "tenure-study", "version": 1,
             "studies": [copy.deepcopy(BASE_STUDY), copy.deepcopy(BASE_STUDY)]}
    with pytest.raises(StudyError) as info:
        parse_study_document(fleet)
    assert info.value.path == "$.studies[1].title"


def test_errors_inside_a_fleet_name_the_study() -> None:
    # Source: docs/method.md §5 ({"studies": [...]}).
    second = copy.deepcopy(BASE_STUDY)
    second["title"] = "Millbrook"
    second["defender"]["max_life"] = "4"
    fleet = {"format": "tenure-study", "version": 1, "studies": [copy.deepcopy(BASE_STUDY), second]}
    with pytest.raises(StudyError) as info:
        parse_study_document(fleet)
    assert info.value.path == "$.studies[1].defender.max_life"
    for bad, path in (({"studies": []}, "$.studies"), ({"studies": [], "marr": 1}, "$.marr")):
        with pytest.raises(StudyError) as info:
            parse_study_document({"format": "tenure-study", "version": 1, **bad})
        assert info.value.path == path


@pytest.mark.parametrize(("literal", "where"), [
    ('"marr": NaN', "$.marr"), ('"marr": Infinity', "$.marr"), ('"marr": -Infinity', "$.marr")])
def test_json_nan_and_infinity_literals_refused_with_path(literal: str, where: str) -> None:
    # Source: RFC 8259 (NaN and Infinity are not JSON numbers); Python's json accepts them.
    text = json.dumps(document()).replace('"marr": 0.1', literal)
    assert literal in text
    with pytest.raises(StudyError) as info:
        loads_study_document(text)
    assert info.value.path == where


def test_overflowing_number_refused() -> None:
    # Source: common practice, no source (1e999 parses to infinity in Python's json module).
    text = json.dumps(document()).replace('"first_cost": 60000', '"first_cost": 1e999')
    with pytest.raises(StudyError) as info:
        loads_study_document(text)
    assert info.value.path == "$.challengers[0].first_cost"


@pytest.mark.parametrize("text", ["{", '{"format": "tenure-study",}', "", "[1, 2", "nul"])
def test_invalid_json_syntax(text: str) -> None:
    # Source: RFC 8259.
    with pytest.raises(StudyError) as info:
        loads_study_document(text)
    assert info.value.path == "$"
    assert "not valid JSON" in info.value.message and "line" in info.value.message


def test_missing_file_and_folder_and_bad_encoding(tmp_path) -> None:
    # Source: common practice, no source.
    with pytest.raises(StudyError) as info:
        load_study_file(tmp_path / "nope.json")
    assert info.value.path.endswith("nope.json")
    with pytest.raises(StudyError):
        load_study_file(tmp_path)
    bad = tmp_path / "latin1.json"
    bad.write_bytes('{"title": "caf\xe9"}'.encode("latin-1"))
    with pytest.raises(StudyError) as info:
        load_study_file(bad)
    assert "UTF-8" in info.value.message


def test_valid_design_example_parses_and_round_trips() -> None:
    # Source: docs/method.md §5 example study (numbers as printed there; uncertainty inputs
    # addressed to this study's names).
    study = {
        "title": "Ouseburn Yard compressor", "marr": 0.09, "study_period": None,
        "defender": {"name": "Compressor 1998", "market_value": 42000, "max_life": 5,
                     "market_values": {"decline_rate": 0.18},
                     "operating_costs": {"first": 14500, "gradient": 2800},
                     "extra_costs": [{"year": 2, "amount": 9000, "label": "rebuild"}],
                     "depreciation": {"method": "straight_line", "basis": 80000, "years": 8,
                                      "age": 3}},
        "challengers": [{"name": "Screw compressor", "first_cost": 96000, "max_life": 10,
                         "market_values": {"values": [70000, 55000, 48000, 41000, 36000, 31000,
                                                      27000, 23000, 20000, 17000]},
                         "operating_costs": {"first": 5200, "growth": 0.04},
                         "depreciation": {"method": "macrs", "class": 7}}],
        "tax": {"rate": 0.25, "after_tax_marr": 0.06},
        "inflation": {"rate": 0.03, "estimates": "constant"},
        "uncertainty": {"trials": 2000, "seed": 7, "inputs": {
            "Screw compressor.first_cost": {"triangular": [85000, 96000, 115000]},
            "Compressor 1998.operating_costs.first": {"uniform": [13000, 16000]},
            "Compressor 1998.market_values.decline_rate": {"normal": [0.18, 0.03]}}},
    }
    parsed = parse_one(study)
    again = parse_study_document({"format": "tenure-study", "version": 1,
                                  **study_to_dict(parsed)})[0]
    assert again == parsed
    assert canonical_json(again) == canonical_json(parsed)
    assert fingerprint(again) == fingerprint(parsed)
    assert loads_study_document(dump_study_document([parsed]))[0] == parsed
    assert parsed.defender.extra_cost_array().tolist() == [0, 9000, 0, 0, 0]


def test_fingerprint_changes_with_any_input() -> None:
    # Source: common practice, no source (SHA-256 of canonical JSON).
    a = parse_one(BASE_STUDY)
    changed = copy.deepcopy(BASE_STUDY)
    changed["challengers"][0]["first_cost"] = 60001
    assert fingerprint(a) != fingerprint(parse_one(changed))
    assert len(fingerprint(a)) == 64 and int(fingerprint(a), 16) >= 0


def test_whole_numbers_written_as_floats_are_accepted() -> None:
    # Source: RFC 8259 (3.0 and 3 are the same JSON number).
    study = copy.deepcopy(BASE_STUDY)
    study["defender"]["max_life"] = 3.0
    assert parse_one(study).defender.max_life == 3
