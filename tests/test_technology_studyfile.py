"""The ``technology`` block of a study file (docs/method.md §5, §11): strict parsing with exact
JSON paths, canonical JSON and fingerprint round trip, workbook storage round trip.

Sources: docs/method.md §11 (the block and its limits: change rates above -100 %, horizon
1..60), "common practice, no source" for the refusals (typos must not pass silently).
"""

from __future__ import annotations

import copy
import dataclasses
import json
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
from conftest import BASE_STUDY, document, parse_one

from core.errors import StudyError
from core.estimates import Technology
from core.studyfile import (
    canonical_json,
    dump_study_document,
    fingerprint,
    loads_study_document,
    parse_study_document,
)

ROOT = Path(__file__).resolve().parent.parent


def _study(**tech: Any) -> dict[str, Any]:
    body = copy.deepcopy(BASE_STUDY)
    body["technology"] = tech
    return body


def _with_challenger_block(block: dict[str, Any], study_block: dict[str, Any] | None = None
                           ) -> dict[str, Any]:
    body = copy.deepcopy(BASE_STUDY)
    body["challengers"].append({"name": "Servo press", "first_cost": 75000, "max_life": 6,
                                "market_values": {"decline_rate": 0.25},
                                "operating_costs": {"first": 2000, "gradient": 400},
                                "technology": block})
    if study_block is not None:
        body["technology"] = study_block
    return body


def test_study_level_block_parses() -> None:
    # hand calculation: the numbers typed are the numbers kept; rates default to zero
    s = parse_one(_study(horizon=12, first_cost_change=0.02, operating_cost_change=-0.04))
    assert s.technology == Technology(12, 0.02, -0.04)
    assert parse_one(_study(horizon=3)).technology == Technology(3, 0.0, 0.0)
    assert parse_one(copy.deepcopy(BASE_STUDY)).technology is None


def test_challenger_block_parses_and_inherits_the_horizon() -> None:
    s = parse_one(_with_challenger_block({"operating_cost_change": -0.06},
                                         {"horizon": 10, "operating_cost_change": -0.02}))
    assert s.technology == Technology(10, 0.0, -0.02)
    assert s.challengers[0].technology is None
    assert s.challengers[1].technology == Technology(None, 0.0, -0.06)
    alone = parse_one(_with_challenger_block({"horizon": 8, "first_cost_change": -0.01}))
    assert alone.technology is None and alone.challengers[1].technology == Technology(8, -0.01)


REFUSALS: list[tuple[str, dict[str, Any], str, str]] = [
    ("gP = -1", _study(horizon=5, first_cost_change=-1.0), "$.technology.first_cost_change",
     "greater than -1"),
    ("gC < -1", _study(horizon=5, operating_cost_change=-1.5),
     "$.technology.operating_cost_change", "greater than -1"),
    ("H = 0", _study(horizon=0), "$.technology.horizon", ">= 1"),
    ("H = 61", _study(horizon=61), "$.technology.horizon", "at most 60"),
    ("H fractional", _study(horizon=2.5), "$.technology.horizon", "whole number"),
    ("H missing", _study(first_cost_change=0.01), "$.technology.horizon", "is required"),
    ("unknown key", _study(horizon=5, first_cost_chnage=0.01), "$.technology.first_cost_chnage",
     "unknown key"),
    ("rate as text", _study(horizon=5, operating_cost_change="-4%"),
     "$.technology.operating_cost_change", "must be a number"),
    ("rate true", _study(horizon=5, operating_cost_change=True),
     "$.technology.operating_cost_change", "must be a number"),
    ("challenger unknown key", _with_challenger_block({"horizon": 5, "speed": 1}),
     "$.challengers[1].technology.speed", "unknown key"),
    ("challenger gP = -2", _with_challenger_block({"horizon": 5, "first_cost_change": -2}),
     "$.challengers[1].technology.first_cost_change", "greater than -1"),
    ("challenger without any horizon", _with_challenger_block({"first_cost_change": 0.01}),
     "$.challengers[1].technology.horizon", "is required"),
    ("horizons disagree", _with_challenger_block({"horizon": 7}, {"horizon": 9}),
     "$.challengers[1].technology.horizon", "differs"),
    ("not an object", _study(), "$.technology", ""),
]
REFUSALS[-1][1]["technology"] = [5]


@pytest.mark.parametrize("body,where,what", [r[1:] for r in REFUSALS], ids=[r[0] for r in REFUSALS])
def test_refusals_name_the_exact_path(body: dict[str, Any], where: str, what: str) -> None:
    with pytest.raises(StudyError) as exc:
        parse_study_document(document(body))
    assert exc.value.path == where
    assert what in exc.value.message


def test_defender_block_is_refused() -> None:
    body = copy.deepcopy(BASE_STUDY)
    body["defender"]["technology"] = {"horizon": 5}
    with pytest.raises(StudyError) as exc:
        parse_study_document(document(body))
    assert exc.value.path == "$.defender.technology"


@pytest.mark.parametrize("body,where", [(REFUSALS[0][1], REFUSALS[0][2]),
                                         (REFUSALS[3][1], REFUSALS[3][2])])
def test_cli_refusal_is_one_line_exit_2(body: dict[str, Any], where: str, tmp_path: Path) -> None:
    path = tmp_path / "s.json"
    path.write_text(json.dumps(document(body)), encoding="utf-8")
    run = subprocess.run([sys.executable, "-m", "core.cli", "study", str(path), "--json"],
                         cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert run.returncode == 2 and run.stdout == ""
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"error: {where}: ")


def test_canonical_json_and_fingerprint_round_trip() -> None:
    # common practice, no source: parse -> canonical text -> parse gives the same study
    s = parse_one(_with_challenger_block({"operating_cost_change": -0.06},
                                         {"horizon": 10, "first_cost_change": 0.015}))
    text = canonical_json(s)
    (again,) = loads_study_document(text)
    assert again == s and fingerprint(again) == fingerprint(s)
    assert canonical_json(again) == text
    (from_dump,) = loads_study_document(dump_study_document([s]))
    assert from_dump == s
    # the block changes the fingerprint; a study without it keeps its old canonical text
    plain = parse_one(copy.deepcopy(BASE_STUDY))
    assert fingerprint(plain) != fingerprint(s)
    assert "technology" not in canonical_json(plain)


def test_workbook_storage_round_trip(tmp_path: Path) -> None:
    from core.workbook import Asset, Site, Workbook, studies_from_workbook

    s = parse_one(_with_challenger_block({"operating_cost_change": -0.06, "horizon": 10},
                                         {"horizon": 10, "operating_cost_change": -0.03}))
    with Workbook.create(tmp_path / "t.tenure", company="Harrowgate Fabrication Ltd.") as wb:
        wb.add_site(Site("Kestrel Road", "main shop"))
        wb.add_asset(Asset("PR-1", "Press", "Kestrel Road", "press", None, None))
        wb.save_study("PR-1", 2026, s)
        path = wb.path
    (back,) = studies_from_workbook(path)
    assert back == s and fingerprint(back) == fingerprint(s)
    assert back.challengers[1].technology == Technology(10, 0.0, -0.06)


def test_workbook_candidate_with_its_own_block_round_trips(tmp_path: Path) -> None:
    # a candidate's block without a horizon (its study gives one) is stored and read back
    from core.workbook import Workbook

    s = parse_one(_with_challenger_block({"operating_cost_change": -0.06},
                                         {"horizon": 10}))
    with Workbook.create(tmp_path / "c.tenure", company="Harrowgate Fabrication Ltd.") as wb:
        wb.add_candidate(s.challengers[1], "press")
        wb.add_candidate(dataclasses.replace(s.challengers[1], name="Servo press 2",
                                             technology=Technology(10, 0.01, -0.02)), "press")
        back = {c.name: c.alternative for c in wb.candidates()}
    assert back["Servo press"] == s.challengers[1]
    assert back["Servo press 2"].technology == Technology(10, 0.01, -0.02)


def test_cli_text_and_fleet_json_carry_the_plan(tmp_path: Path) -> None:
    # common practice, no source: the text has the section; a several-study file (the fleet
    # path) gives technology_plan to the study with the block and to no other
    planned = _study(horizon=6, first_cost_change=-0.05, operating_cost_change=-0.08)
    plain = copy.deepcopy(BASE_STUDY)
    plain["title"] = "Millbrook press line"
    one = tmp_path / "one.json"
    one.write_text(json.dumps(document(planned)), encoding="utf-8")
    text = subprocess.run([sys.executable, "-m", "core.cli", "study", str(one)], cwd=ROOT,
                          capture_output=True, text=True, timeout=120)
    assert text.returncode == 0 and "Technology plan over 6 years" in text.stdout
    assert "Value of waiting for better models" in text.stdout
    both = tmp_path / "both.json"
    both.write_text(json.dumps({"format": "tenure-study", "version": 1,
                                "studies": [planned, plain]}), encoding="utf-8")
    run = subprocess.run([sys.executable, "-m", "core.cli", "study", str(both), "--json"],
                         cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr
    studies = json.loads(run.stdout)["studies"]
    assert studies[0]["technology_plan"]["horizon"] == 6
    assert "technology_plan" not in studies[1]
