"""Bad uncertainty blocks are refused by `tenure study` with exit 2 and one error line."""

from __future__ import annotations

import copy
import json

import pytest
from test_risk import BASE  # tests/ is on sys.path (pytest rootdir insertion)

from core.cli import main


def _write(tmp_path, uncertainty):
    doc = {"format": "tenure-study", "version": 1, **copy.deepcopy(BASE),
           "uncertainty": uncertainty}
    path = tmp_path / "study.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    return str(path)


BAD = [
    ({"inputs": {"Nope.first_cost": {"uniform": [1, 2]}}}, "not an input of this study"),
    ({"inputs": {"Old press.first_cost": {"uniform": [1, 2]}}}, "market_value"),
    ({"inputs": {"New press.first_cost": {"triangular": [3, 2, 1]}}}, "low <= mode <= high"),
    ({"inputs": {"New press.first_cost": {"normal": [1000, -5]}}}, "standard deviation"),
    ({"inputs": {"New press.first_cost": {"uniform": [1000]}}}, "list of 2 numbers"),
    ({"inputs": {"New press.first_cost": {"gamma": [1, 2]}}}, "unknown key"),
    ({"inputs": {}}, "non-empty"),
    ({"trials": 0, "inputs": {"marr": {"uniform": [0.05, 0.1]}}}, "trials"),
    ({"inputs": {"Servo press.market_values.decline_rate": {"uniform": [0.1, 0.2]}}},
     "explicit market values"),
    # physical bounds (core.risk.distributions.BOUNDS)
    ({"inputs": {"New press.first_cost": {"uniform": [-1000, 5000]}}}, "physical range"),
    ({"inputs": {"Old press.market_values.decline_rate": {"triangular": [0.2, 0.5, 1.2]}}},
     "physical range"),
    ({"inputs": {"New press.first_cost": {"normal": [-500, 100]}}}, "physical range"),
    ({"inputs": {"marr": {"uniform": [-1.5, 0.1]}}}, "physical range"),
    ({"inputs": {"Servo press.operating_costs.growth": {"pert": [-1, 0.0, 0.1]}}},
     "physical range"),
]


@pytest.mark.parametrize(("uncertainty", "message"), BAD)
def test_bad_uncertainty_exits_2(tmp_path, capsys, uncertainty, message):
    rc = main(["study", _write(tmp_path, uncertainty), "--json"])
    err = capsys.readouterr().err
    assert rc == 2
    assert err.startswith("error: ") and err.count("\n") == 1 and "Traceback" not in err
    assert "uncertainty" in err and message in err


def test_good_uncertainty_runs(tmp_path, capsys):
    rc = main(["study", _write(tmp_path, {"trials": 500, "seed": 3, "inputs": {
        "marr": {"normal": [0.1, 0.02]}}}), "--json"])
    out = json.loads(capsys.readouterr().out)
    assert rc == 0
    assert 0.0 <= out["studies"][0]["risk"]["probability_replace"] <= 1.0
