"""`tenure study` on taxed and inflated studies, and strict refusals of tax/depreciation/inflation."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest

from core.cli import main

BASE = {
    "format": "tenure-study", "version": 1,
    "title": "Kestrel Road press line", "marr": 0.10, "study_period": None,
    "defender": {"name": "Old press", "market_value": 20000, "max_life": 4,
                 "market_values": {"decline_rate": 0.25},
                 "operating_costs": {"first": 9000, "gradient": 2500},
                 "depreciation": {"method": "straight_line", "basis": 50000, "years": 8,
                                  "age": 4}},
    "challengers": [{"name": "New press", "first_cost": 60000, "max_life": 8,
                     "market_values": {"decline_rate": 0.2},
                     "operating_costs": {"first": 3000, "gradient": 500},
                     "depreciation": {"method": "macrs", "class": 7}}],
    "tax": {"rate": 0.25, "after_tax_marr": 0.07},
    "inflation": {"rate": 0.03, "estimates": "constant"},
}


def _write(tmp_path: Path, doc: dict) -> str:
    path = tmp_path / "study.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    return str(path)


def test_json_carries_after_tax_blocks(tmp_path, capsys) -> None:
    assert main(["study", _write(tmp_path, BASE), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    study = out["studies"][0]
    assert study["recommendation"]["basis"] == "after-tax"
    assert study["before_tax_recommendation"]["basis"] == "before-tax"
    for alt in study["alternatives"]:
        at = alt["after_tax"]
        assert len(at["annual_worth"]) == len(alt["annual_worth"])
        assert 1 <= at["economic_life"] <= len(at["annual_worth"])
        assert at["annual_worth_at_economic_life"] == pytest.approx(
            at["annual_worth"][at["economic_life"] - 1], abs=1e-3)
        assert len(at["cash_flows"]) == len(at["annual_worth"])


def test_text_output_has_after_tax_tables(tmp_path, capsys) -> None:
    assert main(["study", _write(tmp_path, BASE)]) == 0
    text = capsys.readouterr().out
    assert "After tax: effective tax rate 25.00%" in text
    assert "Recommendation (after-tax)" in text
    assert "MARR 10.00% is the real rate" in text


def _set(doc: dict, path: list, value) -> dict:
    out = copy.deepcopy(doc)
    node = out
    for key in path[:-1]:
        node = node[key]
    if value is _DELETE:
        del node[path[-1]]
    else:
        node[path[-1]] = value
    return out


_DELETE = object()

REFUSALS = [
    (["tax", "rate"], 1.5, "$.tax.rate"),
    (["tax", "after_tax_marr"], _DELETE, "$.tax.after_tax_marr"),
    (["tax", "surcharge"], 0.1, "$.tax.surcharge"),
    (["tax"], "25%", "$.tax"),
    (["defender", "depreciation", "method"], "sum_of_years", "$.defender.depreciation.method"),
    (["defender", "depreciation", "basis"], _DELETE, "$.defender.depreciation.basis"),
    (["defender", "depreciation", "age"], -1, "$.defender.depreciation.age"),
    (["challengers", 0, "depreciation", "class"], 4, "$.challengers[0].depreciation.class"),
    (["challengers", 0, "depreciation", "years"], 7, "$.challengers[0].depreciation.years"),
    (["challengers", 0, "depreciation", "age"], 2, "$.challengers[0].depreciation.age"),
    (["challengers", 0, "depreciation"], _DELETE, "$.challengers[0].depreciation"),
    (["inflation", "estimates"], "nominal", "$.inflation.estimates"),
    (["inflation", "rate"], -1.0, "$.inflation.rate"),
    (["inflation", "index"], "CPI", "$.inflation.index"),
    (["inflation", "rate"], True, "$.inflation.rate"),
    (["defender", "depreciation", "salvage"], 60000, "$.defender.depreciation.salvage"),
    (["defender", "depreciation", "years"], 1000, "$.defender.depreciation.years"),
    (["defender", "depreciation", "age"], 10**9, "$.defender.depreciation.age"),
]


@pytest.mark.parametrize(("path", "value", "where"), REFUSALS)
def test_strict_refusals_exit_2_with_one_line(tmp_path, capsys, path, value, where) -> None:
    assert main(["study", _write(tmp_path, _set(BASE, path, value))]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1
    assert err.startswith(f"error: {where}")
    assert "Traceback" not in err


def test_declining_balance_needs_rate(tmp_path, capsys) -> None:
    doc = _set(BASE, ["defender", "depreciation"],
               {"method": "declining_balance", "basis": 50000, "years": 8, "age": 2})
    assert main(["study", _write(tmp_path, doc)]) == 2
    assert capsys.readouterr().err.startswith("error: $.defender.depreciation.rate")


def test_challenger_salvage_above_first_cost_is_refused(tmp_path, capsys) -> None:
    doc = _set(BASE, ["challengers", 0, "depreciation"],
               {"method": "straight_line", "years": 5, "salvage": 70000})
    assert main(["study", _write(tmp_path, doc)]) == 2
    assert capsys.readouterr().err.startswith("error: $.challengers[0].depreciation.salvage")
