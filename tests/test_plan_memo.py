"""The plan memo (core/plan/memo.py): renders, signs and verifies like the study memo, its
attachment reproduces the plan, and the XLSX tables match the plan."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from core.memo.identity import new_identity
from core.memo.sign import sign_pdf_bytes
from core.memo.verify import read_attachment, verify_memo_bytes
from core.plan import make_plan
from core.plan.document import plan_fingerprint
from core.plan.load import load_plan_source
from core.plan.memo import PlanMemoOptions, issue_plan_memo

ROOT = Path(__file__).resolve().parents[1]
PASS = b"plan-memo-test"
BUDGETS = [200000.0, 200000.0, 120000.0] + [200000.0] * 7


@pytest.fixture(scope="module")
def setup(tmp_path_factory: pytest.TempPathFactory) -> dict:
    from core.demo import build_demo

    folder = tmp_path_factory.mktemp("planmemo")
    demo = build_demo(folder / "demo.tenure")
    ident = folder / "id.p12"
    new_identity("Priya Natarajan", ident, PASS, organisation="Harrowgate Fabrication Ltd.")
    source = load_plan_source(demo, ["PU-04"])
    plan = make_plan(source.inputs, budgets=BUDGETS, first_year=source.first_year)
    return {"folder": folder, "demo": demo, "id": ident, "source": source, "plan": plan}


def test_signed_plan_memo_verifies_and_reproduces(setup: dict) -> None:
    out = setup["folder"] / "plan.pdf"
    issued = issue_plan_memo(setup["plan"], setup["source"], out,
                             PlanMemoOptions(organisation="Harrowgate Fabrication Ltd."),
                             identity=setup["id"], passphrase=PASS)
    assert issued.signed_by == "Priya Natarajan" and issued.pages >= 2
    pdf, _ = sign_pdf_bytes(out.read_bytes(), setup["id"], PASS, "approved")
    report = verify_memo_bytes(pdf, use_user_trust=False)
    assert report.problems == () and report.attachment_matches
    assert report.footer_fingerprint == issued.fingerprint
    assert [s.role for s in report.signatures] == ["prepared", "approved"]
    assert all(s.intact and s.valid for s in report.signatures)
    # the attachment holds every input: the plan made again from it is the same plan
    doc = json.loads(read_attachment(pdf).decode("utf-8"))
    assert plan_fingerprint(doc) == issued.fingerprint
    from core.plan import plan_input
    from core.study import run_study
    from core.studyfile import parse_study

    inputs = []
    for item in doc["assets"]:
        study = parse_study(item["study"])
        inputs.append(plan_input(run_study(study), study, tag=item["tag"], site=item["site"],
                                 must=item["must"]))
    opts = doc["options"]
    again = make_plan(inputs, horizon=opts["horizon"], budgets=opts["budgets"],
                      net=opts["net"], per_site_limit=opts["per_site_limit"],
                      first_year=opts["first_year"])
    assert again.to_json() == setup["plan"].to_json()


def test_changed_plan_inputs_change_the_fingerprint(setup: dict) -> None:
    from core.memo.verify import _attachment_fingerprint
    from core.plan.document import canonical, plan_document

    src, plan = setup["source"], setup["plan"]
    doc = plan_document(plan, src.inputs, src.studies)
    fp, title, problem = _attachment_fingerprint(canonical(doc).encode())
    assert (fp, title, problem) == (plan_fingerprint(doc), "Capital plan 2026-2035", None)
    doc["options"]["budgets"][0] = 9e9            # another plan: verify reports a mismatch
    assert _attachment_fingerprint(canonical(doc).encode())[0] != fp
    doc["assets"][0]["study"]["marr"] = "ten"     # a broken study: reported, not raised
    fp2, _t, problem = _attachment_fingerprint(canonical(doc).encode())
    assert fp2 is None and problem.startswith("the attached plan does not load")


def test_cli_memo_and_xlsx(setup: dict) -> None:
    from openpyxl import load_workbook

    folder, demo = setup["folder"], setup["demo"]
    pdf, xlsx = folder / "cli.pdf", folder / "cli.xlsx"
    budgets = ",".join(str(int(b)) for b in BUDGETS)
    run = subprocess.run([sys.executable, "-m", "core.cli", "plan", str(demo), "--budgets",
                          budgets, "-o", str(pdf)], cwd=ROOT, capture_output=True, text=True,
                         timeout=180)
    assert run.returncode == 0, run.stderr
    check = subprocess.run([sys.executable, "-m", "core.cli", "plan", str(demo), "--budgets",
                            budgets, "-o", str(xlsx)], cwd=ROOT, capture_output=True, text=True,
                           timeout=180)
    assert check.returncode == 0, check.stderr
    assert pdf.read_bytes()[:5] == b"%PDF-"
    book = load_workbook(xlsx)
    assert book.sheetnames == ["summary", "by year", "assets", "deferred"]
    free = load_plan_source(demo)                   # no --must on this command line
    plan = make_plan(free.inputs, budgets=BUDGETS, first_year=free.first_year)
    rows = {r[0].value: [c.value for c in r[1:]] for r in book["by year"].iter_rows(min_row=2)}
    assert rows["capital"] == pytest.approx(list(plan.capital_by_year))
    assert rows["budget"] == pytest.approx(BUDGETS)


def test_plan_memo_shows_currency_as_the_study_memos_do(setup: dict) -> None:
    # common practice, no source: one memo set, one way of writing money. The study
    # memos write "£334,100" in sentences and "(£)" in column heads; the plan memo,
    # asked for GBP, must too, and page one must point to the cautions.
    from pypdf import PdfReader

    out = setup["folder"] / "plan-currency.pdf"
    issue_plan_memo(setup["plan"], setup["source"], out, PlanMemoOptions(currency="GBP"))
    text = " ".join((pg.extract_text() or "") for pg in PdfReader(str(out)).pages)
    total = sum(setup["plan"].capital_by_year)
    assert "GBP" not in text
    assert f"£{total:,.0f} of capital" in " ".join(text.split())
    assert "(£)" in text
    first = PdfReader(str(out)).pages[0].extract_text() or ""
    assert "read the cautions" in " ".join(first.split())
