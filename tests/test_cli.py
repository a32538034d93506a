"""The ``tenure`` command line (docs/method.md §6): output, help, and every refusal path.

Sources: docs/method.md §6 (keys, exit codes, the one-line ``error:`` rule), "hand calculation"
for the numbers of the i = 0 study below, "common practice, no source" for the rest.
"""

from __future__ import annotations

import copy
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from conftest import BASE_STUDY, document
from test_studyfile import REFUSALS, _mutated

from core.cli import main

TENURE = [sys.executable, "-m", "core.cli"]
ENV = {**os.environ, "QT_QPA_PLATFORM": "offscreen"}


def run_cli(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    rc = main(list(argv))
    out, err = capsys.readouterr()
    return rc, out, err


def assert_refused(rc: int, out: str, err: str, where: str) -> None:
    assert rc == 2
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("error: ")
    assert where in lines[0]
    assert "Traceback" not in err and "unexpected internal error" not in err
    assert out == ""


@pytest.mark.parametrize(("mutate", "path"), [(m, p) for _, m, p in REFUSALS],
                         ids=[i for i, _, _ in REFUSALS])
def test_every_refusal_via_cli(capsys, write_json, mutate, path: str) -> None:
    # Source: docs/method.md §6 (exit 2, one line "error: <where>: <what>", never a traceback).
    file = write_json(_mutated(mutate))
    for extra in ([], ["--json"]):
        rc, out, err = run_cli(capsys, "study", str(file), *extra)
        assert_refused(rc, out, err, f"error: {path}: ")


@pytest.mark.parametrize(("text", "where"), [
    (json.dumps(document()).replace('"marr": 0.1', '"marr": NaN'), "$.marr"),
    (json.dumps(document()).replace('"first_cost": 60000', '"first_cost": Infinity'),
     "$.challengers[0].first_cost"),
    (json.dumps(document()).replace('"first": 9000', '"first": -Infinity'),
     "$.defender.operating_costs.first"),
    ('{"format": "tenure-study", "version": 1, "title": ', "$: not valid JSON"),
    ("", "$: not valid JSON"),
    ("[" * 50000, "$: not valid JSON"),
    (json.dumps({"format": "tenure-study", "version": 1,
                 "studies": [BASE_STUDY, BASE_STUDY]}), "$.studies[1].title"),
])
def test_raw_text_refusals_via_cli(capsys, write_json, text: str, where: str) -> None:
    # Source: RFC 8259 (NaN/Infinity are not JSON); docs/method.md §6.
    rc, out, err = run_cli(capsys, "study", str(write_json(text)), "--json")
    assert_refused(rc, out, err, f"error: {where}")


def test_missing_file_folder_and_unknown_study(capsys, tmp_path: Path, write_json) -> None:
    # Source: docs/method.md §6.
    missing = tmp_path / "missing.json"
    assert_refused(*run_cli(capsys, "study", str(missing)), f"error: {missing}: ")
    assert_refused(*run_cli(capsys, "study", str(tmp_path)), f"error: {tmp_path}: ")
    file = write_json(document())
    assert_refused(*run_cli(capsys, "study", str(file), "--study", "Nope"), "error: --study: ")
    bad = tmp_path / "bad.json"
    bad.write_bytes(b"\xff\xfe{")
    assert_refused(*run_cli(capsys, "study", str(bad)), f"error: {bad}: ")


def test_usage_errors_are_one_line(capsys) -> None:
    # Source: docs/method.md §6 (usage errors exit 2 with one error line too).
    assert_refused(*run_cli(capsys, "study"), "error: tenure study: ")
    assert_refused(*run_cli(capsys, "study", "x.json", "--jsn"), "error: tenure")
    assert_refused(*run_cli(capsys, "frobnicate"), "error: tenure")


def test_json_output_keys_and_values(capsys, write_json) -> None:
    # Source: docs/method.md §6 (keys); hand calculation at i = 0 for the numbers:
    # defender P = 10, S = 6, 3, 1, C = 2, 4, 7 -> AW -6, -6.5, -7.3333, ESL 1;
    # challenger P = 20, S = 12, 8, 5, 3, C = 1, 1, 2, 2 -> AW -9, -7, -6.3333, -5.75, ESL 4;
    # replace; RV = 9.75.
    study = {"title": "Ouseburn Yard press", "marr": 0, "study_period": 4,
             "defender": {"name": "Old press", "market_value": 10, "max_life": 3,
                          "market_values": {"values": [6, 3, 1]},
                          "operating_costs": {"values": [2, 4, 7]}},
             "challengers": [{"name": "New press", "first_cost": 20, "max_life": 4,
                              "market_values": {"values": [12, 8, 5, 3]},
                              "operating_costs": {"values": [1, 1, 2, 2]}}]}
    rc, out, err = run_cli(capsys, "study", str(write_json(document(study))), "--json")
    assert rc == 0 and err == ""
    doc = json.loads(out)
    assert list(doc) == ["studies"] and len(doc["studies"]) == 1
    s = doc["studies"][0]
    assert {"title", "alternatives", "recommendation", "study_period_options"} <= set(s)
    assert "risk" not in s
    d, c = s["alternatives"]
    for a in (d, c):
        assert {"name", "role", "annual_worth", "economic_life",
                "annual_worth_at_economic_life"} <= set(a)
        assert "after_tax" not in a
    assert (d["role"], c["role"]) == ("defender", "challenger")
    assert d["annual_worth"] == pytest.approx([-6.0, -6.5, -7.3333], abs=1e-4)
    assert c["annual_worth"] == pytest.approx([-9.0, -7.0, -6.3333, -5.75], abs=1e-4)
    assert (d["economic_life"], c["economic_life"]) == (1, 4)
    assert c["annual_worth_at_economic_life"] == pytest.approx(-5.75)
    rec = s["recommendation"]
    assert {"action", "challenger", "defender_years", "replacement_value", "basis"} <= set(rec)
    assert rec["basis"] == "before-tax"
    # With T = 4: j=0 -> -5.75 (best), j=1 -> (-6 - 19)/4 = -6.25, j=2 -> -6.75, j=3 -> -7.75.
    assert (rec["action"], rec["challenger"], rec["defender_years"]) == ("replace", "New press", 0)
    assert rec["replacement_value"] == pytest.approx(9.75, abs=0.01)
    opts = s["study_period_options"]
    for o in opts:
        assert {"defender_years", "challenger", "challenger_years", "annual_worth",
                "feasible"} <= set(o)
    assert [o["annual_worth"] for o in opts if o["feasible"]] == pytest.approx(
        [-5.75, -6.25, -6.75, -7.75])
    assert [o["feasible"] for o in opts] == [True, True, True, True, False]


def test_multi_study_json_and_selection(capsys, write_json) -> None:
    # Source: docs/method.md §5/§6 ({"studies": [...]} in, {"studies": [...]} out, in order).
    second = copy.deepcopy(BASE_STUDY)
    second["title"] = "Millbrook press"
    second["challengers"][0]["first_cost"] = 90000
    file = write_json({"format": "tenure-study", "version": 1,
                       "studies": [copy.deepcopy(BASE_STUDY), second]})
    rc, out, _ = run_cli(capsys, "study", str(file), "--json")
    assert rc == 0
    titles = [s["title"] for s in json.loads(out)["studies"]]
    assert titles == ["Kestrel Road press line", "Millbrook press"]
    rc, out, _ = run_cli(capsys, "study", str(file), "--json", "--study", "Millbrook press")
    assert rc == 0 and [s["title"] for s in json.loads(out)["studies"]] == ["Millbrook press"]


def test_text_output(capsys, write_json) -> None:
    # Source: docs/method.md §6 (tables without --json).
    rc, out, err = run_cli(capsys, "study", str(write_json(document())))
    assert rc == 0 and err == ""
    assert "Recommendation (before-tax): REPLACE" in out
    assert "Replacement value of Old press" in out


# --------------------------------------------------------------------------- real processes
def _run(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([*TENURE, *args], capture_output=True, text=True, timeout=120, env=ENV,
                          cwd=Path(__file__).resolve().parents[1])


def test_help_exits_zero_and_documents_options() -> None:
    # Source: docs/method.md §6 (subcommands and options).
    top = _run("--help")
    assert top.returncode == 0 and "study" in top.stdout and "Exit codes" in top.stdout
    sub = _run("study", "--help")
    assert sub.returncode == 0
    for word in ("FILE", "--json", "--study", "economic service life"):
        assert word in sub.stdout


def test_subprocess_refusals_have_no_traceback(tmp_path: Path) -> None:
    # Source: docs/method.md §6 (exit 2, one line, never a traceback), through a real process.
    nan = tmp_path / "nan.json"
    nan.write_text(json.dumps(document()).replace('"marr": 0.1', '"marr": NaN'))
    life = tmp_path / "life.json"
    doc = document()
    doc["defender"]["max_life"] = 2.5
    life.write_text(json.dumps(doc))
    for args, where in (((str(nan), "--json"), "$.marr"),
                        ((str(life),), "$.defender.max_life"),
                        ((str(tmp_path / "none.json"),), "none.json"),
                        ((str(tmp_path),), str(tmp_path))):
        proc = _run("study", *args)
        assert proc.returncode == 2
        assert proc.stdout == ""
        lines = proc.stderr.splitlines()
        assert len(lines) == 1 and lines[0].startswith("error: ") and where in lines[0]


def test_subprocess_json_output(tmp_path: Path) -> None:
    # Source: docs/method.md §6.
    file = tmp_path / "one.json"
    file.write_text(json.dumps(document()))
    proc = _run("study", str(file), "--json")
    assert proc.returncode == 0, proc.stderr
    result = json.loads(proc.stdout)["studies"][0]
    assert result["recommendation"]["action"] == "replace"
    assert result["recommendation"]["replacement_value"] == pytest.approx(18062.4, abs=0.01)
