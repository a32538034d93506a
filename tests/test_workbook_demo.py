"""The demo workbook: consistency, outcomes, CLI, first-run copy.

Sources: "hand calculation" (counts from resources/demo/fleet.json), core.study.run_study
(the engine's own recommendation recomputed from each stored study).
"""

from __future__ import annotations

import json
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from core import demo
from core.jsonout import study_json
from core.study import run_study
from core.workbook import SCHEMA_VERSION, Workbook, studies_from_workbook

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def demo_book(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return demo.build_demo(tmp_path_factory.mktemp("demo") / "demo.tenure")


def test_demo_is_sound_and_versioned(demo_book: Path) -> None:
    conn = sqlite3.connect(f"file:{demo_book}?mode=ro", uri=True)
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    conn.close()


def test_demo_fleet_contents(demo_book: Path) -> None:
    with Workbook.open(demo_book) as wb:
        assert wb.company == "Harrowgate Fabrication Ltd."
        assert len(wb.sites()) >= 3
        assets = wb.assets()
        assert len(assets) >= 12 and len({a.asset_class for a in assets}) >= 4
        records = wb.studies()
        assert len(records) >= 12
        actions = [r.result_json["recommendation"]["action"] for r in records]
        assert "keep" in actions and "replace" in actions
        assert any(r.study.tax is not None for r in records)
        assert any(r.study.study_period is not None for r in records)
        # the snapshot is the engine's answer for the stored study
        for r in records:
            assert study_json(run_study(r.study)) == r.result_json
            assert r.study.title.startswith(wb.asset(r.tag).site + " — ")
        # a year of history: last year's studies and imported cost history with fits
        restudied = [a.tag for a in assets if len(wb.years(a.tag)) > 1]
        assert len(restudied) >= 5
        assert all(wb.record(t, 2025).result_json is not None for t in restudied)
        with_history = [a.tag for a in assets if wb.history(a.tag)]
        assert len(with_history) >= 6
        kinds = {h.kind for t in with_history for h in wb.history(t)}
        assert kinds == {"operating", "maintenance", "resale"}
        fits = [f for a in assets for f in wb.fits(a.tag)]
        assert {f["quantity"] for f in fits} == {"operating_costs", "market_values"}
        assert all(f["r_squared"] > 0.8 for f in fits)
        # a candidate model serves several assets of its class
        assert max(len(c.tags) for c in wb.candidates()) >= 3


def test_demo_estimates_are_plausible() -> None:
    fleet = demo.load_fleet()
    for a in fleet["assets"]:
        d = a["defender"]
        assert 0.05 <= d["market_values"]["decline_rate"] <= 0.35
        assert 500 <= d["market_value"] < a["original_cost"]
        assert d["operating_costs"]["first"] > 0


def test_cli_demo_and_study_json(tmp_path: Path) -> None:
    out = tmp_path / "fleet.tenure"
    cli = [sys.executable, "-m", "core.cli"]
    proc = subprocess.run([*cli, "demo", str(out)], capture_output=True, text=True, cwd=ROOT,
                          timeout=120)
    assert proc.returncode == 0, proc.stderr
    again = subprocess.run([*cli, "demo", str(out)], capture_output=True, text=True, cwd=ROOT,
                           timeout=120)
    assert again.returncode == 2 and again.stderr.startswith(f"error: {out}: already exists")
    proc = subprocess.run([*cli, "study", str(out), "--json"], capture_output=True, text=True,
                          cwd=ROOT, timeout=120)
    assert proc.returncode == 0, proc.stderr
    studies = json.loads(proc.stdout)["studies"]
    assert len(studies) == len(studies_from_workbook(out)) >= 12
    assert {s["recommendation"]["action"] for s in studies} == {"keep", "replace"}


def test_demo_workbook_path_builds_once(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    import platformdirs

    monkeypatch.setattr(platformdirs, "user_data_dir", lambda *a, **k: str(tmp_path / "data"))
    first = demo.demo_workbook_path()
    assert first.exists() and first.parent == tmp_path / "data"
    stamp = first.stat().st_mtime_ns
    assert demo.demo_workbook_path() == first and first.stat().st_mtime_ns == stamp
    first.write_bytes(b"garbage")  # a damaged copy is set aside and rebuilt
    rebuilt = demo.demo_workbook_path()
    assert rebuilt == first and rebuilt.read_bytes()[:16] == b"SQLite format 3\x00"
    assert (tmp_path / "data" / (first.name + ".damaged")).read_bytes() == b"garbage"


def test_failed_build_leaves_nothing(tmp_path: Path) -> None:
    src = tmp_path / "src"
    src.mkdir()
    for name in ("fleet.json", "resale_quotes.csv"):
        (src / name).write_bytes((demo.DEMO_DIR / name).read_bytes())
    (src / "cost_history.csv").write_text("Asset,Date,Kind,Amount\nAC-101,2020-01-01,operating,x\n")
    out = tmp_path / "d.tenure"
    with pytest.raises(Exception, match="row 2"):
        demo.build_demo(out, src)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["src"]
