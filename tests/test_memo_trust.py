"""Forged, re-signed and damaged memos, and the trust list (core/memo/verify.py, core/memo/trust.py).

A signature proves who signed only when the signer's certificate is one the
reader trusts; PAdES validation calls an untrusted signer "indeterminate", not
"passed" (ETSI EN 319 102-1, common practice). So ``tenure verify`` exits 0
only for intact memos whose every signer is trusted, matched by certificate
fingerprint, never by name. Expected exit codes are docs/method.md §6/§8.
"""

from __future__ import annotations

import dataclasses
import re

import pytest

from core.cli import main
from core.memo.identity import certificate_pem, new_identity
from core.memo.render import MemoOptions, render_memo
from core.memo.sign import sign_pdf_bytes
from core.memo.verify import verify_memo_bytes
from core.study import run_study
from tests.test_memo import PASS, _study


@pytest.fixture(scope="module")
def people(tmp_path_factory):
    """The real Priya, a forger's home-made identity carrying her name, and their certificates."""
    d = tmp_path_factory.mktemp("people")
    new_identity("Priya Natarajan", d / "priya.p12", PASS, organisation="Harrowgate Fabrication Ltd.")
    new_identity("Priya Natarajan", d / "forged.p12", PASS, organisation="Harrowgate Fabrication Ltd.")
    (d / "priya.pem").write_bytes(certificate_pem(d / "priya.p12", PASS))
    (d / "forged.pem").write_bytes(certificate_pem(d / "forged.p12", PASS))
    unsigned = render_memo(run_study(_study()), MemoOptions(prepared_by="Priya Natarajan"))
    genuine, _ = sign_pdf_bytes(unsigned, d / "priya.p12", PASS, "prepared")
    edited = dataclasses.replace(
        _study(), challengers=(dataclasses.replace(_study().challengers[0], price=1.0),
                               _study().challengers[1]))
    forged, _ = sign_pdf_bytes(render_memo(run_study(edited),
                                           MemoOptions(prepared_by="Priya Natarajan")),
                               d / "forged.p12", PASS, "prepared")
    return {"dir": d, "unsigned": unsigned, "genuine": genuine, "forged": forged}


@pytest.fixture(autouse=True)
def own_trust_list(tmp_path, monkeypatch):
    """Each test gets an empty trust list of its own (TENURE_STATE_DIR) and no older folder."""
    monkeypatch.setenv("TENURE_STATE_DIR", str(tmp_path / "state"))
    from core.memo import trust

    monkeypatch.setattr(trust, "legacy_trust_dir", lambda: tmp_path / "no-legacy")


def _verify(capsys, pdf: bytes, tmp_path, *args: str) -> tuple[int, str, str]:
    memo = tmp_path / "memo.pdf"
    memo.write_bytes(pdf)
    rc = main(["verify", str(memo), *args])
    out, err = capsys.readouterr()
    return rc, out, err


def test_genuine_memo_verifies_only_with_trust(people, tmp_path, capsys):
    d = people["dir"]
    rc, out, _ = _verify(capsys, people["genuine"], tmp_path)
    assert rc == 1
    assert "intact, but signed by an identity you have not trusted: Priya Natarajan" in out
    rc, out, _ = _verify(capsys, people["genuine"], tmp_path, "--trust", str(d / "priya.pem"))
    assert rc == 0 and "OK: intact, and every signer is trusted" in out
    rc, out, _ = _verify(capsys, people["genuine"], tmp_path, "--integrity-only")
    assert rc == 0 and "integrity only" in out


def test_forged_signer_with_a_real_name_never_verifies(people, tmp_path, capsys):
    d = people["dir"]
    rc, out, _ = _verify(capsys, people["forged"], tmp_path)
    assert rc == 1 and "not trusted: Priya Natarajan, fingerprint" in out
    # the real Priya's certificate is trusted: the forger has her name, not her certificate
    rc, out, _ = _verify(capsys, people["forged"], tmp_path, "--trust", str(d / "priya.pem"))
    assert rc == 1
    assert "same name as a trusted signer, different certificate" in out
    assert ("WARNING: you trust a different certificate named Priya Natarajan; this signature "
            "may be forged") in out
    assert "tenure trust add" not in out  # no advice to trust the impostor
    rep = verify_memo_bytes(people["forged"], trust=[d / "priya.pem"], use_user_trust=False)
    real = verify_memo_bytes(people["genuine"], trust=[d / "priya.pem"], use_user_trust=False)
    assert rep.integrity_ok and not rep.all_trusted and real.all_trusted
    assert rep.signatures[0].cert_sha256 != real.signatures[0].cert_sha256
    # the fingerprint is printed so a reader can compare it
    fp = rep.signatures[0].cert_sha256.upper()
    assert " ".join(fp[i:i + 4] for i in range(0, 64, 4)) in out


def test_stripped_and_re_signed_memo_fails(people, tmp_path, capsys):
    d = people["dir"]
    genuine = people["genuine"]
    # the signature is the last incremental update: the bytes before it are the unsigned memo
    assert genuine.startswith(people["unsigned"])
    stripped = genuine[:len(people["unsigned"])]
    resigned, _ = sign_pdf_bytes(stripped, d / "forged.p12", PASS, "prepared")
    rc, out, _ = _verify(capsys, resigned, tmp_path, "--trust", str(d / "priya.pem"))
    assert rc == 1 and "same name as a trusted signer, different certificate" in out
    # trusting the forger's own certificate (by fingerprint) is what would make it pass
    rc, _, _ = _verify(capsys, resigned, tmp_path, "--trust", str(d / "forged.pem"))
    assert rc == 0


@pytest.mark.parametrize("where", ["/SubFilter", "/ByteRange", "/Type /Sig", "padding",
                                   "/Contents <30"])
def test_one_changed_byte_in_the_signature_dictionary_is_a_damaged_signature(
        people, tmp_path, capsys, where):
    pdf = bytearray(people["genuine"])
    if where == "padding":  # the zeros after the CMS object, outside the signed bytes
        i = pdf.rfind(b"0000000000>") + 3
        pdf[i] = ord("7")
    else:
        i = pdf.rfind(where.encode()) + len(where) - 1
        pdf[i] = pdf[i] + 1 if pdf[i] != ord("0") else ord("1")
    rc, out, err = _verify(capsys, bytes(pdf), tmp_path, "--trust",
                           str(people["dir"] / "priya.pem"))
    assert rc == 1, (out, err)
    assert "damaged signature" in out
    assert err == "" and "Traceback" not in out


def test_trust_add_list_remove(people, tmp_path, capsys):
    d = people["dir"]
    assert main(["trust", "list"]) == 0
    assert "no trusted certificates" in capsys.readouterr().out
    assert main(["trust", "add", str(d / "priya.pem")]) == 0
    out = capsys.readouterr().out
    assert out.startswith("trusted: Priya Natarajan, Harrowgate Fabrication Ltd.")
    rc, out, _ = _verify(capsys, people["genuine"], tmp_path)
    assert rc == 0, out
    # the forger still fails against the saved trust list
    rc, out, _ = _verify(capsys, people["forged"], tmp_path)
    assert rc == 1 and "same name as a trusted signer, different certificate" in out
    # adding a second certificate with the same name says so
    assert main(["trust", "add", str(d / "forged.pem")]) == 0
    assert "you also trust a different certificate named Priya Natarajan" in \
        capsys.readouterr().out
    assert main(["trust", "list"]) == 0
    listing = capsys.readouterr().out
    fps = re.findall(r"SHA-256 ((?:[0-9A-F]{4} ?){16})", listing)
    assert len(fps) == 2
    real_fp = verify_memo_bytes(people["genuine"], use_user_trust=False).signatures[0].cert_sha256
    assert main(["trust", "remove", real_fp[:12]]) == 0
    assert "no longer trusted" in capsys.readouterr().out
    rc, _, _ = _verify(capsys, people["genuine"], tmp_path)
    assert rc == 1
    # refusals are one line
    for argv in (["trust", "remove", "zz"], ["trust", "remove", real_fp],
                 ["trust", "add", str(d / "priya.p12")], ["trust", "add", str(d / "none.pem")]):
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert err.startswith("error: ") and err.count("\n") == 1


def test_signer_names_are_escaped_in_the_report(tmp_path, capsys):
    p12 = tmp_path / "eve.p12"
    new_identity("Eve\x1b[31m\nresult: OK", p12, PASS)
    pdf, _ = sign_pdf_bytes(render_memo(run_study(_study())), p12, PASS, "prepared")
    rc, out, _ = _verify(capsys, pdf, tmp_path)
    assert rc == 1
    assert "\x1b" not in out and "Eve\\x1b[31m\\nresult: OK" in out
    assert [line for line in out.splitlines() if line.startswith("result:")] == [
        line for line in out.splitlines() if line.startswith("result: FAILED")]
