"""docs/method.md: every citation of it points at a section it has, and what those sections
quote (the example study, the MACRS table, the cautions) matches the code.

Sources: the document itself (its headings are ``## §n Title``); IRS Publication 946,
Table A-1 for the MACRS table (through ``core.depreciation.macrs_rates``, which
tests/test_tax_depreciation.py holds to the printed table); hand calculation where noted.
"""

from __future__ import annotations

import ast
import json
import re
from pathlib import Path

import numpy as np

from core.depreciation import MACRS_CLASSES, macrs_rates
from core.jsonout import study_json
from core.memo.cautions import caution_texts, parse_cautions
from core.study import run_study
from core.studyfile import canonical_json, fingerprint, loads_study_document, parse_study_document

ROOT = Path(__file__).resolve().parents[1]
METHOD = ROOT / "docs" / "method.md"
SCANNED_DIRS = ("core", "desktop_app", "tests", "resources", "benchmarks", "installer")
SCANNED_FILES = ("README.md", "DEVELOPERS.md")
SUFFIXES = {".py", ".md", ".txt", ".toml"}

HEADING = re.compile(r"^## §(\d+) \S.*$")
# "docs/method.md §3", "§5-6", "§5/§6", "§8/§9", "§2 and §5"
CITATION = re.compile(r"docs/method\.md\s+(§\d+(?:\s*(?:-|/|,|and)\s*§?\d+)*)")


def _text() -> str:
    return METHOD.read_text(encoding="utf-8")


def _sections() -> dict[int, str]:
    """Section number -> its text (heading line excluded), from the ``## §n`` headings."""
    out: dict[int, str] = {}
    current: int | None = None
    lines: list[str] = []
    for line in _text().splitlines():
        m = HEADING.match(line)
        if m or line.startswith("## "):
            if current is not None:
                out[current] = "\n".join(lines)
            current, lines = (int(m.group(1)) if m else None), []
            continue
        if current is not None:
            lines.append(line)
    if current is not None:
        out[current] = "\n".join(lines)
    return out


def cited_sections(text: str) -> list[int]:
    """Every section number a text cites as docs/method.md §n (ranges expanded).

    >>> cited_sections("see docs/method.md §5-6 and docs/method.md §8/§9; docs/method.md §2 and §5.")
    [5, 6, 8, 9, 2, 5]
    """
    found: list[int] = []
    for m in CITATION.finditer(text):
        group = m.group(1)
        for a, b in re.findall(r"(\d+)\s*-\s*§?(\d+)", group):
            found.extend(range(int(a), int(b) + 1))
        rest = re.sub(r"\d+\s*-\s*§?\d+", "", group)
        found.extend(int(n) for n in re.findall(r"\d+", rest))
    return found


def _scanned() -> list[Path]:
    files = [ROOT / name for name in SCANNED_FILES if (ROOT / name).is_file()]
    for folder in SCANNED_DIRS:
        base = ROOT / folder
        if base.is_dir():
            files += sorted(p for p in base.rglob("*") if p.is_file() and p.suffix in SUFFIXES
                            and "__pycache__" not in p.parts)
    return files


def test_headings_are_section_1_to_15_in_order() -> None:
    # Source: docs/method.md's own rule (one heading format, sections numbered as cited).
    headings = [line for line in _text().splitlines() if line.startswith("## ")]
    bad = [h for h in headings if not HEADING.match(h)]
    assert not bad, f"headings not of the form '## §n Title': {bad}"
    numbers = [int(HEADING.match(h).group(1)) for h in headings]
    assert numbers == list(range(1, 16))


def test_every_citation_points_to_an_existing_section() -> None:
    # Source: common practice, no source (a reference must lead somewhere).
    have = set(_sections())
    missing: list[str] = []
    count = 0
    for path in _scanned():
        try:
            text = path.read_text(encoding="utf-8")
        except UnicodeDecodeError:
            continue
        for lineno, line in enumerate(text.splitlines(), 1):
            for n in cited_sections(line):
                count += 1
                if n not in have:
                    missing.append(f"{path.relative_to(ROOT)}:{lineno}: §{n}")
    assert not missing, "citations of sections docs/method.md does not have:\n" + "\n".join(missing)
    # The scan must actually find the citations the code carries (it cannot pass empty).
    assert count >= 40


def test_citation_parser_reads_every_form() -> None:
    # Source: hand calculation (the forms used in the code today).
    assert cited_sections("(docs/method.md §1: i must be > -1)") == [1]
    assert cited_sections("docs/method.md §5-6, ``uncertainty``") == [5, 6]
    assert cited_sections("docs/method.md §5/§6 ({...})") == [5, 6]
    assert cited_sections("See docs/method.md §2 and §5.") == [2, 5]
    assert cited_sections("docs/method.md (by section)") == []


def test_no_citation_of_the_outside_design_page() -> None:
    # Source: project rule (code cites docs/method.md, never a page outside the repository).
    offenders = [str(p.relative_to(ROOT)) for p in _scanned()
                 if p.suffix == ".py" and re.search(r"DESIGN\.md\s+§\d", p.read_text("utf-8"))]
    assert not offenders


def _example_block() -> str:
    section = _sections()[5]
    blocks = re.findall(r"```json\n(.*?)```", section, flags=re.S)
    assert len(blocks) == 1, "§5 holds exactly one json example"
    return blocks[0]


def _test_studyfile_example() -> dict:
    """The study dict of tests/test_studyfile.py's example test, read from its source."""
    tree = ast.parse((ROOT / "tests" / "test_studyfile.py").read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.FunctionDef) and node.name.startswith("test_valid_design_example"):
            for stmt in node.body:
                if isinstance(stmt, ast.Assign) and getattr(stmt.targets[0], "id", "") == "study":
                    return ast.literal_eval(stmt.value)
    raise AssertionError("tests/test_studyfile.py has no example study")


def test_section_5_example_study_is_the_one_the_tests_use() -> None:
    # Source: docs/method.md §5 example study, and tests/test_studyfile.py (same numbers).
    doc = loads_study_document(_example_block())
    assert len(doc) == 1
    theirs = parse_study_document({"format": "tenure-study", "version": 1,
                                   **_test_studyfile_example()})
    assert doc == theirs
    assert canonical_json(doc[0]) == canonical_json(theirs[0])


def test_section_5_example_figures_are_what_the_engine_gives() -> None:
    # Source: docs/method.md §5 (figures printed there); hand calculation for AW_1:
    # S_1 = 42,000 x 0.82 = 34,440; AW_1 = -(42,000 x 1.09 - 34,440) - 14,500 = -25,840.
    import dataclasses

    study = loads_study_document(_example_block())[0]
    section = _sections()[5]
    printed = re.search(r"Fingerprint `([0-9a-f]{64})`", section)
    assert printed is not None and printed.group(1) == fingerprint(study)
    result = run_study(dataclasses.replace(study, uncertainty=None))
    d, c = result.defender, result.challengers[0]
    assert d.economic_life == 1 and round(float(d.annual_worth[0]), 2) == -25840.0
    assert c.economic_life == 10 and round(c.annual_worth_at_economic_life, 2) == -19912.38
    before = result.before_tax_recommendation
    assert before.action == "replace" and round(before.replacement_value, 2) == 36561.81
    after = result.recommendation
    assert after.basis == "after-tax" and after.action == "replace"
    assert round(after.replacement_value, 2) == 35347.91
    at = result.after_tax
    assert round(at.alternative("Compressor 1998").annual_worth_at_economic_life, 2) == -19549.08
    assert round(at.alternative("Screw compressor").annual_worth_at_economic_life, 2) == -14260.66
    for figure in ("-25,840", "-19,912.38", "36,561.81", "-19,549.08", "-14,260.66",
                   "35,347.91"):
        assert figure in section


def test_section_4_macrs_table_matches_the_code() -> None:
    # Source: IRS Publication 946, Table A-1 (via core.depreciation.macrs_rates, which
    # tests/test_tax_depreciation.py holds to the printed table).
    section = _sections()[4]
    rows = [line for line in section.splitlines() if re.match(r"^\| \d+ \|", line)]
    assert len(rows) == 21
    table = [[cell.strip() for cell in row.strip("|").split("|")] for row in rows]
    for col, n in enumerate(MACRS_CLASSES, start=1):
        printed = [float(r[col]) for r in table if r[col]]
        digits = 3 if n == 20 else 2
        expected = np.round(macrs_rates(n) * 100, digits).tolist()
        assert printed == expected, n


def test_section_9_quotes_the_cautions_file() -> None:
    # Source: resources/memo/cautions.txt (the one source of the caution texts).
    section = _sections()[9]
    quoted = "\n".join(line[1:].lstrip() if line.startswith(">") else ""
                       for line in section.splitlines() if line.startswith(">"))
    assert parse_cautions(quoted) == caution_texts()
    assert len(caution_texts()) >= 4


def test_section_6_json_keys_are_the_ones_the_result_writes() -> None:
    # Source: docs/method.md §6 (keys of the --json study object), checked on a small study.
    study = loads_study_document(json.dumps({
        "format": "tenure-study", "version": 1, "title": "t", "marr": 0.1,
        "defender": {"name": "D", "market_value": 1000, "max_life": 2,
                     "market_values": {"decline_rate": 0.2},
                     "operating_costs": {"first": 500}},
        "challengers": [{"name": "C", "first_cost": 3000, "max_life": 3,
                         "market_values": {"decline_rate": 0.2},
                         "operating_costs": {"first": 100}}]}))[0]
    out = study_json(run_study(study))
    section = _sections()[6]
    for key in list(out) + list(out["alternatives"][0]) + list(out["recommendation"]):
        assert f'"{key}"' in section, key


def _subcommands() -> list[str]:
    """The subcommands ``tenure --help`` lists (its COMMAND block), in order."""
    import subprocess
    import sys

    out = subprocess.run([sys.executable, "-m", "core.cli", "--help"], cwd=ROOT,
                         capture_output=True, text=True, check=True).stdout
    block = out.split("positional arguments:", 1)[1].split("options:", 1)[0]
    return [m.group(1) for m in re.finditer(r"^ {4}([a-z][a-z-]*)(?:\s|$)", block, flags=re.M)]


def test_section_6_lists_every_subcommand_the_cli_shows() -> None:
    # Source: the CLI's own --help (argparse), against the §6 command table.
    commands = _subcommands()
    assert {"study", "plan", "trust", "verify", "new", "list", "restudy"} <= set(commands)
    section = _sections()[6]
    missing = [c for c in commands if f"`tenure {c}" not in section]
    assert not missing, f"§6 does not list: {missing}"
    assert "--integrity-only" in section and "--require-trust" not in section


def test_no_planned_markers_remain() -> None:
    # Source: docs/method.md's own rule (every section describes what the code does today).
    text = _text()
    found = re.findall(r"\*\*Planned[:(]|\*\*Planned \(|Status: planned|\bplanned \(issue|\(issue \d+", text)
    assert not found, found


def test_section_5_bounds_are_the_reader_constants() -> None:
    # Source: core/studyfile.py (the constants the reader checks), against the §5 table.
    from core import studyfile

    section = _sections()[5]
    rows = {m.group(1): m.group(2) for m in
            re.finditer(r"^\| `(MAX_[A-Z]+)` \| ([^|]+) \|", section, flags=re.M)}
    assert set(rows) == {"MAX_AMOUNT", "MAX_RATE", "MAX_GROWTH", "MAX_SEED", "MAX_DIGITS",
                         "MAX_HORIZON"}
    assert float(rows["MAX_AMOUNT"].split()[0]) == studyfile.MAX_AMOUNT
    assert float(rows["MAX_RATE"].split()[0]) == studyfile.MAX_RATE
    assert float(rows["MAX_GROWTH"].split()[0]) == studyfile.MAX_GROWTH
    assert int(rows["MAX_DIGITS"]) == studyfile.MAX_DIGITS
    assert int(rows["MAX_HORIZON"]) == studyfile.MAX_HORIZON
    assert rows["MAX_SEED"].strip() == "2^64 - 1" and studyfile.MAX_SEED == 2**64 - 1
    # a duplicated key is refused with its path, as §5 says
    import pytest

    from core.errors import StudyError
    with pytest.raises(StudyError) as err:
        studyfile.loads_json('{"a": 1, "a": 2}')
    assert str(err.value).startswith("$.a: given twice in one object")


def test_section_10_solver_settings_are_the_code_ones() -> None:
    # Source: core/plan/solve.py (TIME_LIMIT, REL_GAP), against the §10 text.
    from core.plan.solve import REL_GAP, TIME_LIMIT

    section = _sections()[10]
    assert f"`TIME_LIMIT` = {TIME_LIMIT:g} s" in section
    printed = re.search(r"`REL_GAP` = ([0-9.e-]+)", section)
    assert printed is not None and float(printed.group(1)) == REL_GAP
    assert "scipy.optimize.milp" in section


def test_section_14_names_modules_that_exist() -> None:
    # Source: the repository tree (every module the layer diagram names is there).
    section = _sections()[14]
    diagram = "\n".join(line for line in section.splitlines() if line.startswith("    "))
    named: list[str] = []
    for line in diagram.splitlines():
        for m in re.finditer(r"\b(core/[a-z_/]+(?:\.py)?|[a-z_]+\.py)\b", line):
            named.append(m.group(1))
    base = "core"
    paths = []
    for name in named:
        if name.startswith("core/"):
            base = str(Path(name).parent) if name.endswith(".py") else "core"
            paths.append(ROOT / name)
        else:
            paths.append(ROOT / base / name)
    missing = [str(p.relative_to(ROOT)) for p in paths if not p.exists()]
    assert not missing, missing
    for kernel in ("factors", "cashflows", "annual_worth", "depreciation", "aftertax",
                   "inflation"):
        assert f"{kernel}.py" in diagram, kernel
    for module in ("decision.py", "batch.py", "study.py", "core/risk", "core/plan",
                   "core/technology", "jsonout.py", "text.py", "report.py", "export.py",
                   "core/memo", "cli.py", "desktop_app"):
        assert module in diagram, module


def test_section_6_technology_plan_keys_are_the_ones_written() -> None:
    # Source: docs/method.md §6 (technology_plan keys), checked on a small study.
    study = loads_study_document(json.dumps({
        "format": "tenure-study", "version": 1, "title": "t", "marr": 0.1,
        "technology": {"horizon": 4, "first_cost_change": -0.05},
        "defender": {"name": "D", "market_value": 1000, "max_life": 4,
                     "market_values": {"decline_rate": 0.2},
                     "operating_costs": {"first": 500, "gradient": 100}},
        "challengers": [{"name": "C", "first_cost": 3000, "max_life": 5,
                         "market_values": {"decline_rate": 0.2},
                         "operating_costs": {"first": 100}}]}))[0]
    plan = study_json(run_study(study))["technology_plan"]
    section = _sections()[6]
    for key in list(plan) + list(plan["policy"][0]):
        assert f"`{key}`" in section, key
