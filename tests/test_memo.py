"""Decision memo: content, attachment, signatures, verification (core/memo).

References: the memo's contents follow docs/method.md §8/§9 (our own spec); PDF
signatures and their incremental updates follow ISO 32000-1 §12.8 as
implemented by pyHanko (common practice, no further source). Expected figures
are the engine's own StudyResult values: the memo must print, not recompute.
"""

from __future__ import annotations

import dataclasses
import io
import json
import os
import stat

import pytest
from pypdf import PdfReader

from core.cli import main
from core.estimates import Alternative, ExtraCost, MarketValues, OperatingCosts, Study
from core.jsonout import risk_json
from core.memo.cautions import CAUTIONS_FILE, caution_texts, parse_cautions
from core.memo.identity import load_identity, new_identity
from core.memo.issue import issue_memo
from core.memo.render import MemoOptions, money, render_memo
from core.memo.sign import sign_memo_file, sign_pdf_bytes
from core.memo.verify import verify_memo, verify_memo_bytes
from core.study import run_study
from core.studyfile import dump_study_document, fingerprint, parse_study_document

PASS = b"kestrel-road-2026"


def _study(period: int | None = None, title: str = "Millbrook lathe L-4") -> Study:
    d = Alternative("Lathe L-4 (2009)", "defender", 18000.0, 4, MarketValues(decline_rate=0.25),
                    OperatingCosts(first=11000.0, gradient=2200.0),
                    (ExtraCost(2, 4000.0, "spindle rebuild"),))
    c1 = Alternative("CNC lathe Ouseburn-7", "challenger", 72000.0, 9,
                     MarketValues(decline_rate=0.17), OperatingCosts(first=4200.0, growth=0.05))
    c2 = Alternative("Refurbished lathe R-2", "challenger", 39000.0, 6,
                     MarketValues(values=(30000.0, 24000.0, 19000.0, 15000.0, 12000.0, 9000.0)),
                     OperatingCosts(first=7600.0, gradient=900.0))
    return Study(title, 0.08, d, (c1, c2), study_period=period)


def _text(pdf: bytes) -> str:
    r = PdfReader(io.BytesIO(pdf))
    return " ".join(" ".join((p.extract_text() or "").split()) for p in r.pages)


def _norm(s: str) -> str:
    return " ".join(s.split())


@pytest.fixture(scope="module")
def ids(tmp_path_factory):
    """Two identities (RSA 2048), made once for the module."""
    d = tmp_path_factory.mktemp("ids")
    pw = d / "pass.txt"
    pw.write_bytes(PASS + b"\n")
    bad = d / "bad.txt"
    bad.write_bytes(b"not-the-passphrase\n")
    a = d / "priya.p12"
    b = d / "tom.p12"
    new_identity("Priya Natarajan", a, PASS, organisation="Harrowgate Fabrication Ltd.")
    new_identity("Tom Ashworth", b, PASS, organisation="Harrowgate Fabrication Ltd.",
                 email="tom@example.invalid")
    return {"dir": d, "a": a, "b": b, "pw": pw, "bad": bad}


@pytest.fixture(scope="module")
def result():
    return run_study(_study())


@pytest.fixture(scope="module")
def signed(ids, result, tmp_path_factory):
    """A memo signed by the preparer (bytes)."""
    pdf = render_memo(result, MemoOptions(prepared_by="Priya Natarajan"))
    pdf, _ = sign_pdf_bytes(pdf, ids["a"], PASS, "prepared")
    return pdf


# ------------------------------------------------------------------- content
def test_text_holds_recommendation_figures_cautions_and_names(result):
    pdf = render_memo(result, MemoOptions(prepared_by="Priya Natarajan", currency="GBP"))
    text = _text(pdf)
    from core.memo.page_one import page_one_facts

    # page one states the recommendation in its own words, amounts with the currency symbol
    assert _norm(page_one_facts(result, "£").sentence) in text
    for alt in result.alternatives:
        assert alt.name in text
        assert money(alt.annual_worth_at_economic_life) in text  # AW at ESL, signed
        assert money(-alt.annual_worth_at_economic_life) in text  # EAC = -AW
    for caution in caution_texts():
        assert _norm(caution) in text
    assert "EAC = -AW" in text
    assert "Amounts in £" in text  # GBP is shown as £, as the window shows it
    assert result.fingerprint in text  # footer
    assert "page 1 of" in text
    assert "Prepared" in text and "Reviewed" in text and "Approved" in text
    assert "MARR" in text and "8%" in text
    assert "spindle rebuild" in text  # every input, extra costs too


def test_thousands_separators_and_minus_signs():
    # hand calculation
    assert money(-1234567.4) == "-1,234,567"
    assert money(-0.3) == "0"
    assert money(2500.0, 2) == "2,500.00"


def test_metadata_and_page_sizes(result):
    for size, width in (("A4", 595), ("Letter", 612)):  # ISO 216 / ANSI points, from memory
        pdf = render_memo(result, MemoOptions(page_size=size, prepared_by="Priya Natarajan"))
        r = PdfReader(io.BytesIO(pdf))
        assert round(float(r.pages[0].mediabox.width)) == width
        meta = r.metadata
        assert meta.title == f"Decision memo: {result.study.title}"
        assert meta.author == "Priya Natarajan"
        assert meta.creator == "Tenure"
        assert meta.subject
        assert meta["/TenureFingerprint"] == result.fingerprint


def test_study_period_options_are_listed():
    res = run_study(_study(period=5, title="Millbrook lathe L-4, 5-year period"))
    text = _text(render_memo(res))
    assert "Study-period options" in text
    feasible = [o for o in res.study_period_options if o.feasible]
    assert feasible
    for o in feasible:
        assert money(o.annual_worth) in text
    from core.memo.page_one import page_one_facts

    best = max(feasible, key=lambda o: round(o.annual_worth, 2))
    sentence = page_one_facts(res, "£").sentence
    assert f"£{money(-best.annual_worth)}" in sentence and "-" not in sentence.split("£")[1][:1]
    assert _norm(sentence).removesuffix("(Study-period options).") in text  # + its page
    # hand calculation: page one points to the page the options table starts on
    pages = [_norm(pg.extract_text() or "") for pg in PdfReader(io.BytesIO(render_memo(res))).pages]
    where = next(n for n, t in enumerate(pages, 1) if "Study-period options (5 years)" in t)
    assert f"(Study-period options, page {where})" in pages[0]


def test_after_tax_and_risk_sections_read_the_typed_result():
    # Source: the typed result itself (hand check of what the memo must print).
    from core.estimates import Depreciation, Distribution, Tax, Uncertainty

    base = _study(title="Millbrook lathe L-4, tax and risk")
    ch = base.challengers[0].name
    st = dataclasses.replace(
        base, tax=Tax(0.25, 0.06),
        defender=dataclasses.replace(base.defender, depreciation=Depreciation(
            "straight_line", basis=40000.0, years=8, age=4)),
        challengers=tuple(dataclasses.replace(c, depreciation=Depreciation("macrs", macrs_class=7))
                          for c in base.challengers),
        uncertainty=Uncertainty(300, 5, ((f"{ch}.first_cost",
                                          Distribution("uniform", (60000.0, 90000.0))),)))
    res = run_study(st)
    text = _text(render_memo(res))
    assert "After-tax results" in text and "Risk" in text
    assert f"{res.risk.probability_replace:.1%}" in text
    for alt in res.after_tax.alternatives:
        assert money(alt.tax.tax_basis) in text
    value = res.risk.breakeven[f"{ch}.first_cost"]
    assert ("does not flip within a tenfold range" in text) if value is None \
        else (money(value) in text)


def test_caution_texts_come_from_the_resource_file():
    texts = caution_texts()
    assert texts == parse_cautions(CAUTIONS_FILE.read_text(encoding="utf-8"))
    joined = " ".join(texts).lower()
    for needle in ("forecasts", "safety", "regulation", "tax adviser", "local codes",
                   "licensed engineering"):
        assert needle in joined


# ------------------------------------------------------------------- attachment
def test_attachment_round_trips_to_the_same_study(result):
    pdf = render_memo(result)
    r = PdfReader(io.BytesIO(pdf))
    att = r.attachments
    assert "study.tenure.json" in att
    data = att["study.tenure.json"][0]
    studies = parse_study_document(json.loads(data.decode("utf-8")))
    assert len(studies) == 1
    assert fingerprint(studies[0]) == result.fingerprint == fingerprint(result.study)
    assert data.decode("utf-8") == dump_study_document([result.study])


# ------------------------------------------------------------------- identities
def test_identity_is_encrypted_and_private(ids):
    from cryptography.hazmat.primitives.serialization import pkcs12

    data = ids["a"].read_bytes()
    with pytest.raises(ValueError):
        pkcs12.load_key_and_certificates(data, None)
    key, cert, _ = pkcs12.load_key_and_certificates(data, PASS)
    assert key is not None and cert is not None
    assert b"PRIVATE KEY" not in data
    if os.name == "posix":
        assert stat.S_IMODE(ids["a"].stat().st_mode) == 0o600
    info = load_identity(ids["b"], PASS)
    assert (info.common_name, info.organisation, info.email) == (
        "Tom Ashworth", "Harrowgate Fabrication Ltd.", "tom@example.invalid")
    ku = cert.extensions.get_extension_for_class(__import__(
        "cryptography.x509", fromlist=["KeyUsage"]).KeyUsage).value
    assert ku.digital_signature and ku.content_commitment


def test_identity_new_cli_refuses_overwrite(ids, capsys):
    rc = main(["identity", "new", "--name", "X", "--out", str(ids["a"]),
               "--passphrase-file", str(ids["pw"])])
    err = capsys.readouterr().err
    assert rc == 2 and err.startswith("error: --out:") and err.count("\n") == 1


# ------------------------------------------------------------------- signing & verify
def test_signed_memo_verifies_intact_but_not_vouched_for(signed):
    rep = verify_memo_bytes(signed, use_user_trust=False)
    assert rep.integrity_ok and rep.attachment_matches
    assert len(rep.signatures) == 1
    s = rep.signatures[0]
    assert s.signer == "Priya Natarajan" and s.role == "prepared"
    assert s.intact and s.valid and s.changes_after == "none" and s.coverage == "entire file"
    assert not s.trusted and "not vouched for" in s.trust_state
    # intact but untrusted: exit 1, unless only integrity is asked for
    assert rep.exit_code() == 1 and rep.exit_code(integrity_only=True) == 0
    assert set(rep.empty_fields) == {"Reviewed", "Approved"}


def test_second_signature_keeps_the_first_valid(ids, signed, tmp_path, capsys):
    memo = tmp_path / "memo.pdf"
    memo.write_bytes(signed)
    rc = main(["sign", str(memo), "--sign", str(ids["b"]), "--passphrase-file", str(ids["pw"]),
               "--role", "approved"])
    assert rc == 0, capsys.readouterr().err
    assert memo.read_bytes().startswith(signed)  # incremental: the first revision is untouched
    rep = verify_memo(memo, use_user_trust=False)
    assert rep.integrity_ok
    first, second = rep.signatures
    assert first.intact and first.valid and first.changes_after == "later signatures only"
    assert second.signer == "Tom Ashworth" and second.role == "approved"
    assert second.changes_after == "none"
    # the same field cannot be signed twice
    rc = main(["sign", str(memo), "--sign", str(ids["b"]), "--passphrase-file", str(ids["pw"]),
               "--role", "approved"])
    assert rc == 2
    capsys.readouterr()
    rc = main(["verify", str(memo), "--no-user-trust", "--integrity-only"])
    out = capsys.readouterr().out
    assert rc == 0
    assert "Priya Natarajan" in out and "Tom Ashworth" in out
    assert "attached study: matches the footer fingerprint" in out


def test_trust_state(ids, signed, tmp_path, capsys):
    memo = tmp_path / "memo.pdf"
    memo.write_bytes(signed)
    cert = tmp_path / "priya.pem"
    assert main(["identity", "show", str(ids["a"]), "--passphrase-file", str(ids["pw"]),
                 "--cert-out", str(cert)]) == 0
    capsys.readouterr()
    assert main(["verify", str(memo), "--no-user-trust", "--require-trust"]) == 1
    assert "not vouched for" in capsys.readouterr().out
    assert main(["verify", str(memo), "--no-user-trust", "--require-trust",
                 "--trust", str(cert)]) == 0
    out = capsys.readouterr().out
    assert "trusted (this certificate is in your trust list)" in out
    # someone else's certificate does not vouch for Priya
    other = tmp_path / "tom.pem"
    main(["identity", "show", str(ids["b"]), "--passphrase-file", str(ids["pw"]),
          "--cert-out", str(other)])
    capsys.readouterr()
    assert main(["verify", str(memo), "--no-user-trust", "--require-trust",
                 "--trust", str(other)]) == 1


def test_one_changed_byte_fails_verification(signed, tmp_path, capsys):
    i = signed.find(b"(Decision memo: ")  # the title, in the first (signed) revision
    assert 0 < i < signed.rfind(b"/ByteRange")
    bad = bytearray(signed)
    bad[i + 1] = ord("d")  # "decision memo"
    memo = tmp_path / "tampered.pdf"
    memo.write_bytes(bytes(bad))
    rc = main(["verify", str(memo), "--no-user-trust"])
    out = capsys.readouterr().out
    assert rc == 1
    assert "BROKEN" in out and "digest mismatch" in out


def test_change_after_signing_is_reported(signed, tmp_path, capsys):
    from pyhanko.pdf_utils import generic
    from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter

    w = IncrementalPdfFileWriter(io.BytesIO(signed))
    page = w.root["/Pages"]["/Kids"][0].get_object()
    page["/Rotate"] = generic.NumberObject(90)
    w.update_container(page)
    out = io.BytesIO()
    w.write(out)
    memo = tmp_path / "changed.pdf"
    memo.write_bytes(out.getvalue())
    assert main(["verify", str(memo), "--no-user-trust"]) == 1
    assert "changed after" in capsys.readouterr().out


def test_swapped_attachment_is_caught(result, tmp_path, capsys):
    other = run_study(dataclasses.replace(_study(), marr=0.12))
    pdf = render_memo(result)
    # a memo whose metadata claims a different study than the one attached
    pdf2 = render_memo(other)
    from core.memo.verify import read_attachment
    assert read_attachment(pdf) != read_attachment(pdf2)
    rep = verify_memo_bytes(pdf.replace(result.fingerprint.encode(), other.fingerprint.encode()),
                            use_user_trust=False)
    assert not rep.attachment_matches and not rep.integrity_ok


def test_not_a_pdf_and_not_a_memo_exit_2(tmp_path, capsys):
    junk = tmp_path / "junk.pdf"
    junk.write_text("hello")
    assert main(["verify", str(junk)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and "Traceback" not in err
    from reportlab.pdfgen import canvas

    plain = tmp_path / "plain.pdf"
    c = canvas.Canvas(str(plain))
    c.drawString(72, 720, "An ordinary PDF")
    c.save()
    assert main(["verify", str(plain)]) == 2
    assert "not a Tenure memo" in capsys.readouterr().err
    assert main(["verify", str(tmp_path / "missing.pdf")]) == 2


def test_wrong_passphrase_is_one_clear_line(ids, tmp_path, capsys):
    study = tmp_path / "s.json"
    study.write_text(dump_study_document([_study()]), encoding="utf-8")
    out = tmp_path / "m.pdf"
    rc = main(["memo", str(study), "-o", str(out), "--sign", str(ids["a"]),
               "--passphrase-file", str(ids["bad"])])
    err = capsys.readouterr().err
    assert rc == 2
    assert err.startswith("error: --passphrase-file: ") and err.count("\n") == 1
    assert "Traceback" not in err
    assert not out.exists()
    with pytest.raises(Exception, match="passphrase"):
        sign_memo_file(out, ids["a"], b"nope")


def test_memo_cli_renders_and_signs(ids, tmp_path, capsys):
    study = tmp_path / "two.json"
    study.write_text(dump_study_document([_study(), _study(5, "Millbrook lathe L-4, period")]),
                     encoding="utf-8")
    out = tmp_path / "m.pdf"
    assert main(["memo", str(study), "-o", str(out)]) == 2  # two studies, none chosen
    assert "--study" in capsys.readouterr().err
    rc = main(["memo", str(study), "-o", str(out), "--study", "Millbrook lathe L-4",
               "--sign", str(ids["a"]), "--passphrase-file", str(ids["pw"]),
               "--page-size", "Letter", "--reviewed-by", "Tom Ashworth",
               "--approved-by", "Dana Whitfield"])
    assert rc == 0, capsys.readouterr().err
    capsys.readouterr()
    text = _text(out.read_bytes())
    assert "Tom Ashworth" in text and "Dana Whitfield" in text and "Priya Natarajan" in text
    assert main(["verify", str(out), "--json", "--no-user-trust", "--integrity-only"]) == 0
    rep = json.loads(capsys.readouterr().out)
    assert rep["integrity_ok"] and rep["signatures"][0]["signer"] == "Priya Natarajan"
    assert rep["attachment_matches"]


def test_issue_memo_reports_progress(ids, result, tmp_path):
    seen = []
    issued = issue_memo(result, tmp_path / "m.pdf", identity=ids["b"], passphrase=PASS,
                        role="reviewed", progress=lambda p, t: seen.append(p))
    assert issued.signed_by == "Tom Ashworth" and issued.role == "reviewed"
    assert seen[0] < seen[-1] == 100
    assert verify_memo(issued.path, use_user_trust=False).integrity_ok


def test_unsigned_metadata_change_after_signing_fails(signed, tmp_path, capsys):
    from pyhanko.pdf_utils import generic
    from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter

    w = IncrementalPdfFileWriter(io.BytesIO(signed))
    ref = w.trailer.raw_get("/Info")
    ref.get_object()["/Title"] = generic.TextStringObject("Decision memo: something else")
    w.mark_update(ref)
    out = io.BytesIO()
    w.write(out)
    memo = tmp_path / "meta.pdf"
    memo.write_bytes(out.getvalue())
    assert main(["verify", str(memo), "--no-user-trust"]) == 1
    assert "unsigned changes were appended after the last signature" in capsys.readouterr().out


def test_after_tax_memo_prints_after_tax_figures():
    from core.estimates import Depreciation, Tax

    st = dataclasses.replace(
        _study(title="Millbrook lathe L-4, after tax"), tax=Tax(0.25, 0.06),
        defender=dataclasses.replace(_study().defender, depreciation=Depreciation(
            "straight_line", basis=40000.0, years=8, age=4)),
        challengers=tuple(dataclasses.replace(c, depreciation=Depreciation("macrs", macrs_class=7))
                          for c in _study().challengers))
    res = run_study(st)
    assert res.recommendation.basis == "after-tax"
    text = _text(render_memo(res))
    assert "After-tax results" in text
    from core.memo.page_one import page_one_facts

    assert _norm(page_one_facts(res, "£").sentence) in text
    for alt in res.after_tax.alternatives:
        assert money(-alt.annual_worth_at_economic_life) in text  # after-tax EAC at ESL
    assert "25%" in text and "6%" in text


def _org_identity(tmp_path):
    """An organisation CA and a signer certificate it issued, as PKCS#12 with the chain."""
    import datetime as dt

    from cryptography import x509
    from cryptography.hazmat.primitives import hashes, serialization
    from cryptography.hazmat.primitives.asymmetric import rsa
    from cryptography.hazmat.primitives.serialization import pkcs12
    from cryptography.x509.oid import NameOID

    now = dt.datetime.now(dt.UTC)
    ca_key = rsa.generate_private_key(public_exponent=65537, key_size=2048)
    ca_name = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, "Harrowgate Signing CA"),
                         x509.NameAttribute(NameOID.ORGANIZATION_NAME,
                                            "Harrowgate Fabrication Ltd.")])
    ca = (x509.CertificateBuilder().subject_name(ca_name).issuer_name(ca_name)
          .public_key(ca_key.public_key()).serial_number(x509.random_serial_number())
          .not_valid_before(now - dt.timedelta(days=1)).not_valid_after(now + dt.timedelta(days=30))
          .add_extension(x509.BasicConstraints(ca=True, path_length=0), critical=True)
          .add_extension(x509.KeyUsage(False, False, False, False, False, True, True, False, False),
                         critical=True)
          .sign(ca_key, hashes.SHA256()))
    key = rsa.generate_private_key(public_exponent=65537, key_size=2048)
    name = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, "Ravi Kestrel"),
                      x509.NameAttribute(NameOID.ORGANIZATION_NAME, "Harrowgate Fabrication Ltd.")])
    cert = (x509.CertificateBuilder().subject_name(name).issuer_name(ca_name)
            .public_key(key.public_key()).serial_number(x509.random_serial_number())
            .not_valid_before(now - dt.timedelta(days=1)).not_valid_after(now + dt.timedelta(days=30))
            .add_extension(x509.KeyUsage(True, True, False, False, False, False, False, False, False),
                           critical=True)
            .sign(ca_key, hashes.SHA256()))
    p12 = tmp_path / "ravi.p12"
    p12.write_bytes(pkcs12.serialize_key_and_certificates(
        b"ravi", key, cert, [ca], serialization.BestAvailableEncryption(PASS)))
    ca_pem = tmp_path / "ca.pem"
    ca_pem.write_bytes(ca.public_bytes(serialization.Encoding.PEM))
    return p12, ca_pem


def test_organisation_issued_identity_chains_to_its_ca(result, tmp_path, capsys):
    p12, ca_pem = _org_identity(tmp_path)
    pdf, res = sign_pdf_bytes(render_memo(result), p12, PASS, "approved")
    assert res.signer == "Ravi Kestrel"
    memo = tmp_path / "m.pdf"
    memo.write_bytes(pdf)
    assert main(["verify", str(memo), "--no-user-trust", "--require-trust",
                 "--trust", str(ca_pem)]) == 0
    out = capsys.readouterr().out
    assert "trusted (chains to Harrowgate Signing CA, in your trust list)" in out
    rep = verify_memo(memo, use_user_trust=False)
    assert not rep.signatures[0].trusted and "self-signed" not in rep.signatures[0].trust_state


def test_user_trust_folder(signed, ids, tmp_path, monkeypatch):
    from core.memo import verify as verify_mod
    from core.memo.identity import certificate_pem

    folder = tmp_path / "trusted"
    folder.mkdir()
    (folder / "priya.pem").write_bytes(certificate_pem(ids["a"], PASS))
    (folder / "junk.pem").write_text("not a certificate")  # skipped, not fatal
    monkeypatch.setattr(verify_mod, "user_trust_dir", lambda: folder)
    assert verify_memo_bytes(signed).all_trusted
    assert not verify_memo_bytes(signed, use_user_trust=False).all_trusted


def test_memo_of_a_workbook_study_is_recorded_in_its_register(ids, tmp_path, capsys):
    wbmod = pytest.importorskip("core.workbook")
    demo = pytest.importorskip("core.demo")
    book = tmp_path / "plant.tenure"
    demo.build_demo(book)
    studies = wbmod.studies_from_workbook(book)
    title = studies[0].title
    out = tmp_path / "m.pdf"
    rc = main(["memo", str(book), "--study", title, "-o", str(out),
               "--sign", str(ids["a"]), "--passphrase-file", str(ids["pw"])])
    captured = capsys.readouterr()
    assert rc == 0, captured.err
    assert "recorded in the memo register" in captured.out
    with wbmod.Workbook.open(book, write=False) as wb:
        memos = wb.memos()
    assert memos and memos[-1].fingerprint == fingerprint(studies[0])
    assert memos[-1].signer == "Priya Natarajan"
    assert verify_memo(out, use_user_trust=False).integrity_ok


def test_risk_memo_prints_the_simulation_results():
    from core.estimates import Distribution, Uncertainty

    base = _study(title="Millbrook lathe L-4, risk")
    ch = base.challengers[0].name
    st = dataclasses.replace(base, uncertainty=Uncertainty(400, 11, (
        (f"{ch}.first_cost", Distribution("triangular", (60000.0, 72000.0, 90000.0))),
        (f"{base.defender.name}.operating_costs.first",
         Distribution("uniform", (9000.0, 13000.0))))))
    res = run_study(st)
    if res.risk is None:
        pytest.skip("risk analysis not available")
    d = risk_json(res.risk)
    text = _text(render_memo(res))
    assert "Risk" in text and "400 trials" in text
    assert f"{d['probability_replace'] * 100:.1f}%" in text
    for q in ("p10", "p50", "p90"):
        assert money(d["annual_worth_difference"][q]) in text
    # inputs are named in words where a person reads them; the paths stay in the JSON
    assert f"{ch}: first cost" in _norm(text) and "first_cost" not in text


def test_chart_legend_keeps_every_esl_and_stays_inside_its_column():
    # common practice, no source: a legend label that runs into its neighbour, or
    # whose ESL is cut off, misreads the chart; long names go one per row instead.
    from reportlab.pdfbase.pdfmetrics import stringWidth

    from core.memo.chart import LEGEND_FONT_SIZE, LEGEND_KEY_W, legend_labels
    from core.memo.fonts import FR

    short = [("Pump A", [-1.0], 1), ("Pump B", [-1.0, -2.0], 2)]
    cols, labels = legend_labels(short, 400.0)
    assert cols == 2 and labels == ["Pump A (ESL 1 yr)", "Pump B (ESL 2 yrs)"]

    long = [("Reciprocating compressor 22 kW (2008)", [-1.0], 1),
            ("Electric counterbalance forklift 2.5 t", [-1.0] * 10, 10)]
    cols, labels = legend_labels(long, 300.0)
    assert cols == 1
    assert labels[1] == "Electric counterbalance forklift 2.5 t (ESL 10 yrs)"
    huge = [("A very long machine name " * 6, [-1.0] * 3, 3)]
    cols, labels = legend_labels(huge, 300.0)
    assert labels[0].endswith("... (ESL 3 yrs)")
    assert stringWidth(labels[0], FR(), LEGEND_FONT_SIZE) <= 300.0 - LEGEND_KEY_W


def test_page_one_names_a_technology_plan_that_disagrees():
    # hand calculation from the demo's FL-07 study: today's models say replace now, but
    # the technology plan's best chain waits one year; the gain of waiting is the best
    # waiting plan's PW less the best replace-now plan's PW, printed as a positive amount.
    from core.demo import demo_studies
    from core.memo.render import technology_note

    st = next(s for s in demo_studies() if "FL-07" in s.title)
    r = run_study(dataclasses.replace(st, uncertainty=None))
    plan = r.technology
    assert r.recommendation.action == "replace" and plan.first_action == "keep"
    note = technology_note(r, "£", 4)
    gain = plan.best_wait_present_worth - plan.best_replace_now_present_worth
    assert gain > 0
    assert f"waiting is worth £{gain:,.0f} more" in note and "(page 4)" in note
    assert "-£" not in note
    agree = dataclasses.replace(st, uncertainty=None, technology=None)
    assert technology_note(run_study(agree), "£") == ""


def test_histogram_share_ticks_keep_their_fraction():
    # hand calculation: shares up to 7% get ticks 0, 2.5, 5, 7.5 % (nice_ticks); printing
    # them rounded to whole percent would label 2.5% as "2%".
    from reportlab.graphics.shapes import String

    from core.memo.chart import histogram_chart

    d = histogram_chart([float(e) for e in range(-7, 9)], [1] * 15, 400.0)  # 1/15 = 6.7% each
    labels = {x.text for x in d.contents if isinstance(x, String)}
    assert {"0%", "2.5%", "5%", "7.5%"} <= labels and "2%" not in labels
