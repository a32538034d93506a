"""Who signs a memo: printed name against certificate name, one signer in two roles, --strict,
and the register row of a later signature (docs/method.md §8).

References: the checks are our own rules (docs/method.md §8; common practice, no source);
certificate fingerprints are SHA-256 of the DER certificate (RFC 5280 encoding, compared
with the `cryptography` package's own fingerprint of the identity).
"""

from __future__ import annotations

import datetime as dt
import json

import pytest

from core.cli import main
from core.estimates import Alternative, MarketValues, OperatingCosts, Study
from core.memo.countersign import SignerNotConfirmed, sign_later
from core.memo.identity import certificate_pem, load_identity, new_identity
from core.memo.render import MemoOptions, render_memo
from core.memo.sign import sign_pdf_bytes
from core.memo.signers import printed_names
from core.memo.verify import verify_memo
from core.study import run_study

PASS = b"harrier-lane-2026"


@pytest.fixture(scope="module")
def ids(tmp_path_factory):
    """Two identities, made once for the module, and their certificates."""
    d = tmp_path_factory.mktemp("ids")
    pw = d / "pass.txt"
    pw.write_bytes(PASS + b"\n")
    pw.chmod(0o600)  # else sign warns that the passphrase file is readable by all
    out = {"pw": pw}
    for key, name in (("priya", "Priya Natarajan"), ("tom", "Tom Ashworth")):
        p12 = d / f"{key}.p12"
        new_identity(name, p12, PASS, organisation="Harrowgate Fabrication Ltd.")
        cert = d / f"{key}.pem"
        cert.write_bytes(certificate_pem(p12, PASS))
        out[key], out[key + "_cert"] = p12, cert
    return out


@pytest.fixture(scope="module")
def prepared(ids):
    """A memo naming Priya (prepared) and Tom (reviewed), signed by Priya as preparer."""
    d = Alternative("Press P-2 (2011)", "defender", 15000.0, 4, MarketValues(decline_rate=0.3),
                    OperatingCosts(first=9000.0, gradient=1800.0))
    c = Alternative("Press P-9", "challenger", 52000.0, 8, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=3500.0, gradient=400.0))
    res = run_study(Study("Millbrook press P-2", 0.09, d, (c,)))
    pdf = render_memo(res, MemoOptions(prepared_by="Priya Natarajan", reviewed_by="Tom Ashworth"))
    pdf, _ = sign_pdf_bytes(pdf, ids["priya"], PASS, "prepared")
    return pdf


def _sign(memo, who, ids, role, *extra):
    return main(["sign", str(memo), "--sign", str(ids[who]), "--passphrase-file",
                 str(ids["pw"]), "--role", role, *extra])


def test_printed_names_are_kept_in_the_memo(prepared):
    # what the sign-off block prints, read back from the /TenureSignOff Info key
    assert printed_names(prepared) == {"prepared": "Priya Natarajan", "reviewed": "Tom Ashworth"}


def test_preparer_signing_the_reviewed_box_warns_and_needs_confirm(ids, prepared, tmp_path,
                                                                   capsys):
    memo = tmp_path / "memo.pdf"
    memo.write_bytes(prepared)
    rc = _sign(memo, "priya", ids, "reviewed")
    err = capsys.readouterr().err
    assert rc == 1
    assert "the Reviewed box names Tom Ashworth, but the certificate is Priya Natarajan's" in err
    assert "already signed as prepared" in err
    assert "error: --confirm:" in err
    assert memo.read_bytes() == prepared  # nothing signed
    rc = _sign(memo, "priya", ids, "reviewed", "--confirm")
    captured = capsys.readouterr()
    assert rc == 0, captured.err
    assert "warning (confirmed)" in captured.err
    rep = verify_memo(memo, use_user_trust=False)
    assert rep.integrity_ok
    reviewed = rep.signatures[1]
    assert (reviewed.role, reviewed.printed_name, reviewed.signer) == (
        "reviewed", "Tom Ashworth", "Priya Natarajan")
    assert reviewed.name_matches is False and rep.signatures[0].name_matches is True
    assert sorted(f.kind for f in rep.signer_findings) == ["name differs",
                                                           "one signer in two roles"]
    # verify prints both names and the match, and notes one signer in two roles
    rc = main(["verify", str(memo), "--no-user-trust", "--integrity-only"])
    out = capsys.readouterr().out
    assert rc == 0  # the checks are notes without --strict
    assert ("printed name: Tom Ashworth; certificate name: Priya Natarajan; match: NO") in out
    assert ("printed name: Priya Natarajan; certificate name: Priya Natarajan; match: yes") in out
    assert "signer check: Priya Natarajan signed 2 roles (prepared and reviewed)" in out
    rc = main(["verify", str(memo), "--no-user-trust", "--integrity-only", "--strict"])
    out = capsys.readouterr().out
    assert rc == 1 and "result: FAILED (strict)" in out
    rc = main(["verify", str(memo), "--no-user-trust", "--integrity-only", "--strict", "--json"])
    data = json.loads(capsys.readouterr().out)
    assert rc == 1 and data["exit_code"] == 1
    assert [s["name_matches"] for s in data["signatures"]] == [True, False]
    assert len(data["signer_findings"]) == 2


def test_strict_fails_a_trusted_memo_with_one_signer_in_two_roles(ids, prepared, tmp_path,
                                                                  capsys):
    # the trust rules stay: trusted and intact is exit 0; --strict adds the signer checks
    memo = tmp_path / "memo.pdf"
    memo.write_bytes(prepared)
    assert _sign(memo, "priya", ids, "approved") == 1  # no name printed, same signer twice
    assert "already signed as prepared" in capsys.readouterr().err
    assert _sign(memo, "priya", ids, "approved", "--confirm") == 0
    capsys.readouterr()
    trust = ["--no-user-trust", "--trust", str(ids["priya_cert"])]
    assert main(["verify", str(memo), *trust]) == 0
    out = capsys.readouterr().out
    assert "match: nothing printed to compare" in out  # the Approved box printed no name
    assert main(["verify", str(memo), *trust, "--strict"]) == 1
    assert "signer check: Priya Natarajan signed 2 roles" in capsys.readouterr().out


def test_the_named_reviewer_signs_without_a_warning(ids, prepared, tmp_path, capsys):
    memo = tmp_path / "memo.pdf"
    memo.write_bytes(prepared)
    rc = _sign(memo, "tom", ids, "reviewed")
    captured = capsys.readouterr()
    assert rc == 0 and "warning" not in captured.err
    trust = ["--no-user-trust", "--trust", str(ids["priya_cert"]), "--trust", str(ids["tom_cert"])]
    assert main(["verify", str(memo), *trust, "--strict"]) == 0
    out = capsys.readouterr().out
    assert "signer check" not in out
    assert "printed name: Tom Ashworth; certificate name: Tom Ashworth; match: yes" in out


def test_core_check_raises_with_typed_findings(ids, prepared, tmp_path):
    memo = tmp_path / "memo.pdf"
    memo.write_bytes(prepared)
    with pytest.raises(SignerNotConfirmed) as e:
        sign_later(memo, ids["priya"], PASS, "reviewed")
    assert [(f.kind, f.role) for f in e.value.findings] == [
        ("name differs", "reviewed"), ("one signer in two roles", "reviewed")]
    assert memo.read_bytes() == prepared


def test_later_signature_is_recorded_in_the_workbook_register(ids, tmp_path, capsys):
    from core.demo import build_demo
    from core.workbook import Workbook, studies_from_workbook

    book = tmp_path / "plant.tenure"
    build_demo(book)
    title = studies_from_workbook(book)[0].title
    memo = tmp_path / "m.pdf"
    assert main(["memo", str(book), "--study", title, "-o", str(memo), "--reviewed-by",
                 "Tom Ashworth", "--sign", str(ids["priya"]), "--passphrase-file",
                 str(ids["pw"])]) == 0
    capsys.readouterr()
    before = dt.datetime.now(dt.UTC).replace(microsecond=0)
    rc = _sign(memo, "tom", ids, "reviewed", "--workbook", str(book))
    captured = capsys.readouterr()
    assert rc == 0, captured.err
    assert "recorded in the memo register" in captured.out
    with Workbook.open(book) as wb:
        rows = wb.memos()
    issued, later = rows[-2], rows[-1]
    assert (issued.role, issued.signer) == ("prepared", "Priya Natarajan")
    assert (later.role, later.signer) == ("reviewed", "Tom Ashworth")
    # the identity's own fingerprint (cryptography's SHA-256 of the certificate)
    assert later.certificate_sha256 == load_identity(ids["tom"], PASS).sha256
    assert issued.certificate_sha256 == load_identity(ids["priya"], PASS).sha256
    assert later.fingerprint == issued.fingerprint and later.title == issued.title
    assert later.file_name == str(memo)
    assert before <= dt.datetime.fromisoformat(later.signed_at) <= dt.datetime.now(dt.UTC)


def test_sign_refuses_a_file_that_is_not_a_workbook(ids, prepared, tmp_path, capsys):
    memo = tmp_path / "memo.pdf"
    memo.write_bytes(prepared)
    bogus = tmp_path / "notes.txt"
    bogus.write_text("not a workbook")
    assert _sign(memo, "tom", ids, "reviewed", "--workbook", str(bogus)) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error: --workbook:")
    assert memo.read_bytes() == prepared


def test_memo_signed_at_issue_checks_the_printed_name_too(ids, tmp_path, capsys):
    # `tenure memo --sign` into a box printed with another person's name
    study = tmp_path / "study.json"
    from core.studyfile import dump_study_document

    d = Alternative("Saw S-3 (2014)", "defender", 8000.0, 3, MarketValues(decline_rate=0.3),
                    OperatingCosts(first=5000.0, gradient=1200.0))
    c = Alternative("Saw S-8", "challenger", 26000.0, 8, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=2000.0, gradient=250.0))
    study.write_text(dump_study_document([Study("Ouseburn Yard saw", 0.1, d, (c,))]))
    out = tmp_path / "m.pdf"
    args = ["memo", str(study), "-o", str(out), "--reviewed-by", "Tom Ashworth", "--sign",
            str(ids["priya"]), "--passphrase-file", str(ids["pw"]), "--role", "reviewed"]
    assert main(args) == 1
    err = capsys.readouterr().err
    assert "the Reviewed box names Tom Ashworth, but the certificate is Priya Natarajan's" in err
    assert not out.exists()  # nothing written
    assert main([*args, "--confirm"]) == 0
    capsys.readouterr()
    rep = verify_memo(out, use_user_trust=False)
    assert [(s.role, s.printed_name, s.name_matches) for s in rep.signatures] == [
        ("reviewed", "Tom Ashworth", False)]
