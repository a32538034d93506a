"""tenure new / add / import-assets / import-history / restudy / list, and --study TAG.

Each command is run as a child process (``python -m core.cli``). After each, the workbook
passes ``PRAGMA integrity_check``; refused inputs exit 2 with one ``error:`` line and leave
the file's SHA-256 unchanged; a child SIGKILLed at any SQL statement of add, import-assets
or restudy leaves the previous state (or, past its COMMIT, the new one).

Sources: "hand calculation" (expected registers), "SQLite documentation, atomic commit"
(a hot journal is rolled back by the next writer), "common practice, no source".
"""

from __future__ import annotations

import json
import os
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from tests.conftest import BASE_STUDY, document
from tests.workbook_support import digest, integrity

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "resources" / "examples"
TAX_STUDY = {
    **BASE_STUDY, "title": "Ouseburn Yard — PB-9 press brake",
    "tax": {"rate": 0.25, "after_tax_marr": 0.075},
    "defender": {**BASE_STUDY["defender"],
                 "depreciation": {"method": "straight_line", "basis": 90000, "years": 10,
                                  "age": 6}},
    "challengers": [{**BASE_STUDY["challengers"][0],
                     "depreciation": {"method": "macrs", "class": 7}}],
}
PERIOD_STUDY = {**BASE_STUDY, "title": "Millbrook — PU-4 cooling pump", "study_period": 4}


def cli(*args: str, check: int | None = 0) -> subprocess.CompletedProcess:
    proc = subprocess.run([sys.executable, "-m", "core.cli", *args], capture_output=True,
                          text=True, cwd=ROOT, timeout=120)
    if check is not None:
        assert proc.returncode == check, proc.stderr + proc.stdout
    return proc


def listing(p: Path) -> dict:
    return json.loads(cli("list", str(p), "--json").stdout)


@pytest.fixture()
def files(tmp_path: Path) -> dict[str, Path]:
    studies = tmp_path / "studies.json"
    studies.write_text(json.dumps({"format": "tenure-study", "version": 1, "studies": [
        {**BASE_STUDY, "title": "Kestrel Road — AC-1 press line"}, TAX_STUDY, PERIOD_STUDY]}),
        encoding="utf-8")
    one = tmp_path / "one.json"
    one.write_text(json.dumps(document()), encoding="utf-8")
    return {"studies": studies, "one": one}


@pytest.fixture()
def book(tmp_path: Path) -> Path:
    p = tmp_path / "plant.tenure"
    cli("new", str(p), "--organisation", "Harrowgate Fabrication Ltd.", "--currency", "GBP",
        "--first-year", "2026")
    return p


# --------------------------------------------------------------------------- each command
def test_new_refuses_to_overwrite(book: Path, tmp_path: Path) -> None:
    assert integrity(book) == "ok"
    data = listing(book)
    assert (data["organisation"], data["currency"], data["study_year"]) == (
        "Harrowgate Fabrication Ltd.", "GBP", 2026)
    assert data["sites"] == data["assets"] == []
    before = digest(book)
    proc = cli("new", str(book), check=2)
    assert proc.stderr == f"error: {book}: already exists; not overwritten\n"
    assert digest(book) == before
    other = tmp_path / "notes.txt"
    other.write_text("keep me")
    cli("new", str(other), check=2)
    assert other.read_text() == "keep me"
    proc = cli("new", str(tmp_path / "no" / "such" / "w.tenure"), check=2)
    assert "the folder does not exist" in proc.stderr
    proc = cli("new", str(tmp_path / "x.tenure"), "--currency", "POUNDS STERLING", check=2)
    assert proc.stderr.startswith("error: --currency: must be a short code")
    proc = cli("new", str(tmp_path / "x.tenure"), "--first-year", "26", check=2)
    assert proc.stderr.startswith("error: --first-year: must be a year from 1900 to 2200")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["notes.txt", "plant.tenure"]


def test_add_list_study_by_tag(book: Path, files: dict[str, Path]) -> None:
    out = cli("add", str(book), str(files["studies"]), "--site", "Ouseburn Yard", "--tag",
              "PB-9", "--study", "Ouseburn Yard — PB-9 press brake", "--in-service",
              "2020-02-01", "--asset-class", "press brake").stdout
    assert "added PB-9 at Ouseburn Yard with its 2026 study" in out
    cli("add", str(book), str(files["studies"]), "--site", "Millbrook", "--tag", "PU-4",
        "--study", "PU-4")  # a title "Site — TAG ..." answers to its tag
    assert integrity(book) == "ok"
    data = listing(book)
    pb = data["assets"][1]
    assert (pb["tag"], pb["site"], pb["in_service"], pb["study_year"], pb["asset_class"]) == (
        "PB-9", "Ouseburn Yard", "2020-02-01", 2026, "press brake")
    assert pb["description"] == "Old press"  # the defender's name by default
    assert pb["original_cost"] == 90000  # the defender's depreciation basis
    assert pb["recommendation"] in ("keep", "replace now") or pb["recommendation"].startswith(
        "replace in")
    assert [c["name"] for c in data["candidates"]] == ["New press"]
    # --study takes an asset tag on study, export and memo too
    one = json.loads(cli("study", str(book), "--json", "--study", "PB-9").stdout)
    assert [s["title"] for s in one["studies"]] == ["Ouseburn Yard — PB-9 press brake"]
    proc = cli("study", str(book), "--study", "XX-1", check=2)
    assert proc.stderr.startswith("error: --study: no study titled 'XX-1'")
    out = book.with_name("pb9.csv")
    cli("export", str(book), "-o", str(out), "--study", "PB-9", "--table", "summary")
    assert "Ouseburn Yard — PB-9 press brake" in out.read_text(encoding="utf-8")
    assert "Millbrook — PU-4" not in out.read_text(encoding="utf-8")
    memo = book.with_name("pu4.pdf")
    text = cli("memo", str(book), "--study", "PU-4", "-o", str(memo)).stdout
    assert "study: Millbrook — PU-4 cooling pump" in text and memo.read_bytes()[:5] == b"%PDF-"
    assert integrity(book) == "ok"


def test_workbook_gives_the_figures_of_the_files(book: Path, files: dict[str, Path]) -> None:
    for tag, site in (("AC-1", "Kestrel Road"), ("PB-9", "Ouseburn Yard"), ("PU-4", "Millbrook")):
        cli("add", str(book), str(files["studies"]), "--site", site, "--tag", tag, "--study", tag)
    from_book = json.loads(cli("study", str(book), "--json").stdout)["studies"]
    from_file = json.loads(cli("study", str(files["studies"]), "--json").stdout)["studies"]
    # hand calculation: the same studies give the same figures, bit for bit
    assert sorted(from_book, key=lambda s: s["title"]) == sorted(from_file,
                                                                 key=lambda s: s["title"])
    assert len(from_book) == 3


def test_import_assets_history_restudy_list(book: Path, files: dict[str, Path]) -> None:
    lst = str(EXAMPLES / "equipment_list.csv")
    before = digest(book)
    out = cli("import-assets", str(book), lst, "--dry-run").stdout
    assert digest(book) == before and "dry run: nothing written" in out
    assert "32 rows: 30 new assets, 0 existing with changes, 0 unchanged, 2 rejected" in out
    assert "equipment_list.csv: row 19: in-service date '2019-06-31' is not a date" in out
    assert "equipment_list.csv: row 33: tag 'PU-302' is already on row 9" in out
    cli("import-assets", str(book), lst)
    assert integrity(book) == "ok"
    data = listing(book)
    assert len(data["assets"]) == 30 and [s["name"] for s in data["sites"]] == [
        "Kestrel Road", "Millbrook", "Ouseburn Yard"]
    assert {s["assets"] for s in data["sites"]} == {10}
    again = cli("import-assets", str(book), lst).stdout
    assert "0 new assets, 0 existing with changes, 30 unchanged" in again
    # a changed list: the preview names what would change; nothing merged
    changed = book.parent / "changed.csv"
    changed.write_text(Path(lst).read_text().replace("Rotary screw compressor 75 kW,Kestrel",
                                                     "Screw compressor 75 kW VSD,Kestrel", 1))
    before = digest(book)
    out = cli("import-assets", str(book), str(changed)).stdout
    assert "AC-301 exists; description 'Rotary screw compressor 75 kW' -> " \
           "'Screw compressor 75 kW VSD'" in out and "use --update-existing" in out
    assert listing(book)["assets"][0]["description"] == "Rotary screw compressor 75 kW"
    cli("import-assets", str(book), str(changed), "--update-existing")
    assert listing(book)["assets"][0]["description"] == "Screw compressor 75 kW VSD"
    assert before != digest(book) and integrity(book) == "ok"
    # studies for imported assets, cost history with fits, a restudy
    cli("add", str(book), str(EXAMPLES / "equipment_studies.json"), "--site", "Kestrel Road",
        "--tag", "AC-301", "--study", "AC-301")
    hist = str(EXAMPLES / "cost_history.csv")
    out = cli("import-history", str(book), hist, "--dry-run").stdout
    assert "180 of 180 rows imported, 0 rejected" in out and "AC-301 2026: operating cost" in out
    cli("import-history", str(book), hist)
    again = cli("import-history", str(book), hist).stdout
    assert "180 rows are already in the workbook" in again
    with sqlite3.connect(book) as conn:
        assert conn.execute("SELECT count(*) FROM history").fetchone()[0] == 180
        assert conn.execute("SELECT count(*) FROM fits").fetchone()[0] == 6
    out = cli("restudy", str(book), "--year", "2027").stdout
    assert "AC-301: 2027 study started from 2026's estimates" in out
    assert "1 studies of 2027 started, 29 skipped" in out
    ac = listing(book)["assets"][0]
    assert ac["years"] == [2026, 2027] and ac["study_year"] == 2027
    text = cli("list", str(book)).stdout
    assert "Kestrel Road: 10 assets" in text and "not yet studied" in text
    assert integrity(book) == "ok"


# --------------------------------------------------------------------------- refusals
REFUSALS = [
    (["add", "{book}", "{one}", "--site", "Millbrook", "--tag", "P 1"], "error: --tag: "),
    (["add", "{book}", "{one}", "--site", "", "--tag", "P1"], "error: --site: must not be empty"),
    (["add", "{book}", "{one}", "--site", "M", "--tag", "P1", "--in-service", "2020-13-01"],
     "error: --in-service: '2020-13-01' is not a date YYYY-MM-DD"),
    (["add", "{book}", "{one}", "--site", "M", "--tag", "P1", "--year", "20"],
     "error: --year: must be a year"),
    (["add", "{book}", "{studies}", "--site", "M", "--tag", "P1"], "error: --study: "),
    (["add", "{book}", "{studies}", "--site", "M", "--tag", "P1", "--study", "nope"],
     "error: --study: no study titled 'nope'"),
    (["add", "{book}", "{missing}", "--site", "M", "--tag", "P1"], "error: {missing}: "),
    (["add", "{book}", "{one}", "--site", "Millbrook", "--tag", "AC-301"],
     "error: --site: asset AC-301 exists with site 'Kestrel Road'"),
    (["add", "{book}", "{one}", "--site", "M", "--tag", "P1", "--depreciation", "MACRS 4"],
     "error: --depreciation: "),
    (["import-assets", "{book}", "{missing}"], "error: {missing}: no such file"),
    (["import-assets", "{book}", "{one}"], "error: {one}: cannot import '.json' files"),
    (["import-assets", "{book}", "{list}", "--map", "Tag=tags"], "error: --map: "),
    (["import-assets", "{book}", "{list}", "--map", "Nope=tag"], "error: equipment_list.csv: "
                                                                 "no column 'Nope'"),
    (["import-history", "{book}", "{list}"], "error: equipment_list.csv: "),
    (["import-history", "{book}", "{hist}", "--map", "Asset=tag", "--map", "Asset=date"],
     "error: "),
    (["restudy", "{book}", "--tag", "NOPE"], "error: --tag: no asset 'NOPE'"),
    (["restudy", "{book}", "--year", "99999"], "error: --year: "),
    (["restudy", "{book}", "--tag", "AC-302", "--year", "2027"],
     "error: --tag: AC-302 has no study before 2027"),
    (["list", "{missing}"], "error: {missing}: no such file"),
    (["add", "{one}", "{one}", "--site", "M", "--tag", "P1"], "error: {one}: not a Tenure "
                                                              "workbook"),
]


def test_refusals_exit_2_and_leave_the_file_byte_identical(book: Path,
                                                           files: dict[str, Path]) -> None:
    cli("import-assets", str(book), str(EXAMPLES / "equipment_list.csv"))
    cli("add", str(book), str(EXAMPLES / "equipment_studies.json"), "--site", "Kestrel Road",
        "--tag", "AC-301", "--study", "AC-301")
    names = {"book": str(book), "one": str(files["one"]), "studies": str(files["studies"]),
             "missing": str(book.parent / "missing.json"),
             "list": str(EXAMPLES / "equipment_list.csv"),
             "hist": str(EXAMPLES / "cost_history.csv")}
    before = digest(book)
    for args, expected in REFUSALS:
        proc = cli(*[a.format(**names) for a in args], check=None)
        lines = proc.stderr.splitlines()
        assert proc.returncode == 2, (args, proc.stderr, proc.stdout)
        assert len(lines) == 1 and lines[0].startswith(expected.format(**names)), (args, lines)
        assert "Traceback" not in proc.stderr
        assert digest(book) == before, args
    assert integrity(book) == "ok"


# --------------------------------------------------------------------------- SIGKILL
KILL_DRIVER = """
import json, os, re, shutil, signal, sqlite3, sys, time
args, points = json.loads(sys.argv[1]), json.loads(sys.argv[2])
book, pristine, log = sys.argv[3:6]
import core.cli, core.fleet_cli, core.study, core.workbook.assetlist, core.workbook.fleetedit
from core.workbook import Workbook, check_file
from core.demo import demo_studies
from core.study import run_study
from core.tables import read_table
core.cli.build_parser()  # warm every lazy import once, so each forked run is quick
for study in demo_studies()[:2]:
    run_study(study)
read_table(os.path.join("resources", "examples", "equipment_list.csv"))
real = sqlite3.connect

def run(kill_at):
    # a forked child runs the command and SIGKILLs itself as SQL statement kill_at starts
    pid = os.fork()
    if pid == 0:
        count, seen = [0], []

        def connect(*a, **k):
            conn = real(*a, **k)

            def trace(sql):
                count[0] += 1
                seen.append((sql.split(None, 1) or ["?"])[0].upper())
                if count[0] == kill_at:
                    os.kill(os.getpid(), signal.SIGKILL)

            conn.set_trace_callback(trace)
            return conn

        sqlite3.connect = connect
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, 1)
        os.dup2(null, 2)
        rc = core.cli.main(args)
        if kill_at == 0:
            with open(log, "w") as fh:
                fh.write("\\n".join(seen))
        os._exit(rc)
    return os.waitpid(pid, 0)[1]

def state():
    # the next writer rolls a hot journal back and takes over the dead writer's lock
    check_file(book)
    with Workbook.open(book, write=True) as wb:
        ok = wb.integrity_check()
    conn = real(book)
    # the save times differ from run to run; everything else must be equal
    dump = [re.sub(r"'\\d{4}-\\d\\d-\\d\\dT[0-9:.]+\\+00:00'", "'T'", line)
            for line in conn.iterdump()]
    conn.close()
    return ok, dump

shutil.copy(book, pristine)
before = state()
status = run(0)
after = state()
out = {"clean": status, "before": before, "after": after, "points": []}
statements = open(log).read().split()
if not points:
    begin = statements.index("BEGIN") + 1
    points = list(range(max(1, begin - 2), len(statements) + 1))
for at in points:
    shutil.copy(pristine, book)
    for extra in (book + "-journal", book + ".lock"):
        if os.path.exists(extra):
            os.unlink(extra)
    status = run(at)
    ok, dump = state()
    out["points"].append([at, statements[at - 1] if at <= len(statements) else "",
                          os.WIFSIGNALED(status) and os.WTERMSIG(status) == signal.SIGKILL,
                          ok, "before" if dump == before[1] else
                          "after" if dump == after[1] else "other"])
out["statements"] = statements
shutil.copy(pristine, book)
json.dump(out, sys.stdout)
"""


def _kill_points(book: Path, args: list[str], count: int | None) -> None:
    """Run ``args`` once to list its SQL statements, then kill a fresh copy at many of them."""
    def drive(points: list[int]) -> dict:
        proc = subprocess.run([sys.executable, "-c", KILL_DRIVER, json.dumps(args),
                               json.dumps(points), str(book), str(book.with_name("pristine")),
                               str(book.with_name("statements.log"))],
                              capture_output=True, text=True, cwd=ROOT, timeout=600,
                              env={**os.environ, "PYTHONPATH": str(ROOT)})
        assert proc.returncode == 0, proc.stderr
        return json.loads(proc.stdout)

    if count is None:
        result = drive([])  # every statement from just before the first BEGIN
    else:
        statements = drive([10 ** 6])["statements"]  # past the end: only lists the statements
        begin = statements.index("BEGIN") + 1
        span = list(range(max(1, begin - 2), len(statements) + 1))
        commit = len(statements) - statements[::-1].index("COMMIT")
        step = (len(span) - 1) / (count - 1)
        points = sorted({span[round(k * step)] for k in range(count)} | {commit - 1, commit})
        result = drive(points)
    assert result["clean"] == 0 and result["before"][0] == result["after"][0] == "ok"
    assert result["before"][1] != result["after"][1]
    statements = result["statements"]
    commit = len(statements) - statements[::-1].index("COMMIT")
    assert statements[commit - 1] == "COMMIT"
    killed = 0
    for at, sql, was_killed, ok, which in result["points"]:
        assert ok == "ok", (at, sql)
        if was_killed:
            killed += 1
            # killed before its last COMMIT has run: the previous state, exactly
            assert which == ("before" if at <= commit else "after"), (at, sql, which)
        else:
            assert which == "after"
    assert killed >= len(result["points"]) - 1


def _prepared(book: Path, files: dict[str, Path]) -> list[str]:
    cli("import-assets", str(book), str(EXAMPLES / "equipment_list.csv"))
    for tag, site in (("AC-301", "Kestrel Road"), ("FL-301", "Millbrook")):
        cli("add", str(book), str(EXAMPLES / "equipment_studies.json"), "--site", site,
            "--tag", tag, "--study", tag)
    return [str(book)]


COMMANDS = {
    "add": lambda b, f: ["add", str(b), str(f["studies"]), "--site", "Ouseburn Yard", "--tag",
                         "PB-9", "--study", "PB-9"],
    "import-assets": lambda b, f: ["import-assets", str(b), str(f["list"])],
    "restudy": lambda b, f: ["restudy", str(b), "--year", "2027"],
}


def _kill_setup(book: Path, files: dict[str, Path], command: str) -> list[str]:
    _prepared(book, files)
    lst = book.with_name("more.csv")
    lst.write_text("Tag,Description,Site,Class,In service,Original cost\n" + "".join(
        f"XX-{k},Spare machine {k},Site {k % 4},pump,2019-01-0{1 + k % 9},{1000 + k}\n"
        for k in range(40)))
    return COMMANDS[command](book, {**files, "list": lst})


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs SIGKILL")
@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_sigkill_mid_command_leaves_previous_state(book: Path, files: dict[str, Path],
                                                   command: str) -> None:
    _kill_points(book, _kill_setup(book, files, command), 20)


@pytest.mark.slow
@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs SIGKILL")
@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_sigkill_at_every_statement(book: Path, files: dict[str, Path], command: str) -> None:
    _kill_points(book, _kill_setup(book, files, command), None)  # every statement


def test_import_history_leaves_out_duplicates_and_future_rows(book: Path, files: dict[str, Path],
                                                               tmp_path: Path) -> None:
    # Source: common practice, no source: an exact repeat of a work-order row is a double
    # count, and a cost dated after today has not happened; both are reported and left out
    # unless the user keeps them.
    cli("add", str(book), str(files["one"]), "--site", "Kestrel Road", "--tag", "PR-1",
        "--in-service", "2019-03-01")
    rows = ["Asset,Date,Kind,Amount"]
    rows += [f"PR-1,{y}-06-01,operating,{1000 + 100 * (y - 2019)}" for y in range(2019, 2025)]
    rows += ["PR-1,2024-06-01,operating,1500", "PR-1,2099-06-01,operating,90000"]
    hist = tmp_path / "history.csv"
    hist.write_text("\n".join(rows) + "\n", encoding="utf-8")
    out = cli("import-history", str(book), str(hist), "--dry-run").stdout
    assert "6 of 8 rows imported, 0 rejected, 2 flagged (2 left out, 0 kept)" in out
    warnings = [line for line in out.splitlines() if ": warning: " in line]
    assert len(warnings) == 2 and all(line.endswith("(left out)") for line in warnings)
    kept = cli("import-history", str(book), str(hist), "--dry-run", "--keep-duplicates",
               "--keep-future").stdout
    assert "8 of 8 rows imported" in kept and "2 flagged (0 left out, 2 kept)" in kept
