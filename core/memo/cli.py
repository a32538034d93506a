"""The memo commands of ``tenure``: memo, sign, verify, identity.

``register(subparsers)`` adds them to the lead's parser (core/cli.py). Every
command function takes the parsed ``args`` and returns the exit code; bad
input prints one line ``error: <where>: <what is wrong>`` and returns 2.

    tenure memo FILE -o OUT.pdf [--study TITLE] [--page-size A4|Letter]
                [--prepared-by NAME] [--reviewed-by NAME] [--approved-by NAME]
                [--organisation ORG] [--currency CODE]
                [--sign ID.p12 --passphrase-file F [--role prepared|reviewed|approved]]
    tenure sign MEMO.pdf --sign ID.p12 --passphrase-file F --role approved [-o OUT.pdf]
                [--confirm] [--workbook WORKBOOK]
    tenure verify MEMO.pdf [--trust CERT.pem ...] [--integrity-only] [--no-user-trust] [--json]
                [--strict]
    tenure identity new --name NAME --out ID.p12 --passphrase-file F
                [--organisation ORG] [--email ADDRESS]
    tenure identity show ID.p12 --passphrase-file F [--cert-out CERT.pem]
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from core.errors import StudyError, error_line, escape_text
from core.loading import load_studies
from core.memo.errors import MemoError
from core.memo.roles import ROLES

__all__ = ["register", "run_memo", "run_sign", "run_verify", "run_identity", "load_one_study"]


def _guard(fn):
    """Turn user errors into one ``error:`` line and exit 2 (never a traceback)."""

    def wrapped(args: argparse.Namespace) -> int:
        try:
            code = int(fn(args) or 0)
            for warning in getattr(args, "warnings", []):
                print(f"warning: {escape_text(warning)}", file=sys.stderr)
            return code
        except (MemoError, StudyError) as e:
            print(error_line(e), file=sys.stderr)
            return 2

    wrapped.__name__ = fn.__name__
    wrapped.__doc__ = fn.__doc__
    return wrapped


def load_one_study(path: str, title: str | None):
    """The one study of FILE (a study JSON or a workbook) a memo is about."""
    p = Path(path)
    studies = load_studies(p)
    if title is not None:
        chosen = [s for s in studies if s.title == title]
        if not chosen:  # a workbook's asset tag
            from core.fleet_cli import tagged_studies

            chosen = tagged_studies(p, title)
        if not chosen:
            titles = "; ".join(s.title for s in studies)
            raise MemoError("--study", f"no study titled '{title}' (titles: {titles})")
        studies = chosen
    if not studies:
        raise MemoError(str(p), "holds no study")
    if len(studies) > 1:
        titles = "; ".join(s.title for s in studies)
        raise MemoError("--study", f"{p} holds {len(studies)} studies; a memo is about one: "
                        f"choose it with --study TITLE (titles: {titles})")
    return studies[0]


def _is_workbook(path: str) -> bool:
    p = Path(path)
    if p.suffix.lower() == ".tenure":
        return True
    try:
        with p.open("rb") as fh:
            return fh.read(16) == b"SQLite format 3\x00"
    except OSError:
        return False


def _passphrase(args) -> bytes:
    from core.memo.identity import passphrase_file_warning, read_passphrase_file

    if not getattr(args, "passphrase_file", None):
        raise MemoError("--passphrase-file", "needed with --sign (a file holding the passphrase)")
    passphrase = read_passphrase_file(args.passphrase_file)
    warning = passphrase_file_warning(args.passphrase_file)
    if warning:  # printed by _guard after the command, so a refusal stays one line
        args.warnings = [*getattr(args, "warnings", []), warning]
    return passphrase


@_guard
def run_memo(args: argparse.Namespace) -> int:
    """tenure memo: render (and optionally sign) the decision memo of one study."""
    from core.memo.issue import issue_memo
    from core.memo.render import MemoOptions
    from core.study import run_study

    if args.sign and not args.passphrase_file:
        raise MemoError("--passphrase-file", "needed with --sign (a file holding the passphrase)")
    if args.passphrase_file and not args.sign:
        raise MemoError("--sign", "needed with --passphrase-file (the identity file, .p12)")
    out = Path(args.output)
    if out.exists() and out.is_dir():
        raise MemoError("-o", f"{out} is a folder")
    if not out.parent.exists():
        raise MemoError("-o", f"folder {out.parent} does not exist")
    passphrase = _passphrase(args) if args.sign else None
    if args.sign and passphrase is not None:  # a wrong passphrase fails before any work
        from core.memo.identity import load_identity

        load_identity(args.sign, passphrase)
    study = load_one_study(args.file, args.study)
    result = run_study(study)
    from core.currency import workbook_currency
    from core.memo.page_one import asset_facts

    workbook = _is_workbook(args.file)
    opts = MemoOptions(page_size=args.page_size,
                       currency=args.currency or workbook_currency(args.file),
                       prepared_by=args.prepared_by, reviewed_by=args.reviewed_by,
                       approved_by=args.approved_by, organisation=args.organisation,
                       asset=asset_facts(args.file, study) if workbook else None)
    from core.memo.countersign import SignerNotConfirmed

    try:
        issued = issue_memo(result, out, opts, identity=args.sign, passphrase=passphrase,
                            role=args.role, confirmed=args.confirm)
    except SignerNotConfirmed as e:
        for f in e.findings:
            print(f"warning: {escape_text(f.message)}", file=sys.stderr)
        print(f"error: --confirm: memo not written; check who signs, then repeat with "
              f"--confirm to sign as {args.role} anyway", file=sys.stderr)
        return 1
    print(f"memo: {issued.path}")
    print(f"study: {escape_text(study.title)}")
    print(f"study fingerprint: {issued.fingerprint}")
    print(f"pages: {issued.pages}; page size: {args.page_size}")
    if _is_workbook(args.file):
        from core.memo.register import record_in_workbook

        note = record_in_workbook(str(args.file), issued)
        if note:
            print(f"note: {args.file}: {note}", file=sys.stderr)
        else:
            print(f"recorded in the memo register of {args.file}")
    if issued.signed_by:
        print(f"signed: {issued.role} by {escape_text(issued.signed_by)}")
    else:
        print("not signed (add signatures with: tenure sign MEMO.pdf --sign ID.p12 "
              "--passphrase-file F --role prepared|reviewed|approved)")
    return 0


@_guard
def run_sign(args: argparse.Namespace) -> int:
    """tenure sign: add one signature to an existing memo, as an incremental update.

    The signer checks (docs/method.md §8) print one ``warning:`` line each and need
    ``--confirm``; without it nothing is signed and the exit code is 1.
    """
    from core.errors import error_line
    from core.memo.countersign import MemoNotIntact, SignerNotConfirmed, sign_later

    memo = Path(args.memo)
    passphrase = _passphrase(args)
    if args.workbook and not _is_workbook(args.workbook):
        raise MemoError("--workbook", f"{args.workbook} is not a Tenure workbook")
    try:
        res = sign_later(memo, args.sign, passphrase, args.role, output=args.output,
                         confirmed=args.confirm, workbook=args.workbook)
    except MemoNotIntact as e:
        print(error_line(e), file=sys.stderr)
        return 1
    except SignerNotConfirmed as e:
        for f in e.findings:
            print(f"warning: {escape_text(f.message)}", file=sys.stderr)
        print(f"error: --confirm: not signed; check who signs, then repeat with --confirm "
              f"to sign as {args.role} anyway", file=sys.stderr)
        return 1
    for f in res.findings:
        print(f"warning (confirmed): {escape_text(f.message)}", file=sys.stderr)
    print(f"signed: {res.role} by {escape_text(res.signer)} -> {escape_text(res.path)}")
    if args.workbook:
        if res.recorded:
            print(f"recorded in the memo register of {escape_text(args.workbook)}")
        else:
            print(f"note: {escape_text(args.workbook)}: {escape_text(res.register_note or '')}",
                  file=sys.stderr)
    return 0


@_guard
def run_verify(args: argparse.Namespace) -> int:
    """tenure verify: integrity, changes after signing, attachment and trust of a memo."""
    from core.memo.verify import verify_memo

    rep = verify_memo(args.memo, trust=args.trust or (), use_user_trust=not args.no_user_trust)
    if args.json:
        json.dump(report_json(rep, args.integrity_only, args.strict), sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        sys.stdout.write("\n".join(rep.lines(args.integrity_only, args.strict)) + "\n")
    return rep.exit_code(args.integrity_only, args.strict)


def report_json(rep, integrity_only: bool = False, strict: bool = False) -> dict:
    """The verify report as a JSON-ready dict."""
    return {
        "memo": rep.path, "revisions": rep.revisions,
        "footer_fingerprint": rep.footer_fingerprint,
        "attachment_fingerprint": rep.attachment_fingerprint,
        "attachment_matches": rep.attachment_matches,
        "study": rep.attachment_title,
        "signatures": [{
            "field": s.field, "role": s.role, "signer": s.signer, "organisation": s.organisation,
            "signing_time": s.signing_time.isoformat() if s.signing_time else None,
            "intact": s.intact, "valid": s.valid, "coverage": s.coverage,
            "changes_after_signing": s.changes_after, "trusted": s.trusted,
            "trust_state": s.trust_state, "certificate_sha256": s.cert_sha256,
            "printed_name": s.printed_name, "name_matches": s.name_matches,
            "problems": list(s.problems)} for s in rep.signatures],
        "signer_findings": [{"kind": f.kind, "role": f.role, "message": f.message}
                            for f in rep.signer_findings],
        "unsigned_fields": list(rep.empty_fields),
        "problems": list(rep.problems),
        "integrity_ok": rep.integrity_ok, "all_trusted": rep.all_trusted,
        "exit_code": rep.exit_code(integrity_only, strict),
    }


@_guard
def run_identity(args: argparse.Namespace) -> int:
    """tenure identity new|show."""
    from core.memo.identity import certificate_pem, load_identity, new_identity

    if args.identity_command == "new":
        info = new_identity(args.name, args.out, _passphrase(args),
                            organisation=args.organisation, email=args.email)
        print(f"identity: {info.path}")
        print(f"name: {info.common_name}" + (f", {info.organisation}" if info.organisation else ""))
        print(f"certificate SHA-256: {info.sha256}")
        print(f"valid until: {info.not_after:%Y-%m-%d}")
        print("self-signed: colleagues who verify your memos see 'not vouched for' until they "
              "add your certificate to their trust list (tenure identity show ... --cert-out)")
        return 0
    if args.identity_command == "show":
        pw = _passphrase(args)
        info = load_identity(args.identity, pw, option="IDENTITY")
        print(f"identity: {info.path}")
        print(f"name: {info.common_name}" + (f", {info.organisation}" if info.organisation else ""))
        if info.email:
            print(f"e-mail: {info.email}")
        print(f"certificate SHA-256: {info.sha256}")
        print(f"valid: {info.not_before:%Y-%m-%d} to {info.not_after:%Y-%m-%d}")
        print(f"self-signed: {'yes' if info.self_signed else 'no'}")
        if args.cert_out:
            try:
                Path(args.cert_out).write_bytes(certificate_pem(args.identity, pw))
            except OSError as e:
                raise MemoError("--cert-out", f"cannot write {args.cert_out}: "
                                f"{e.strerror or e}") from None
            print(f"certificate written: {args.cert_out} (public; safe to share)")
        return 0
    raise MemoError("identity", "choose a command: new or show")


def register(subparsers) -> None:
    """Add memo, sign, verify and identity to the ``tenure`` sub-command parsers."""

    m = subparsers.add_parser(
        "memo", help="write the signed decision memo (PDF) of one study",
        description="Render the decision memo of one study as PDF: the recommendation, key "
                    "figures, the AW-against-retention chart with every ESL, study-period "
                    "options, after-tax and risk results when the study has them, every "
                    "assumption, the method, the cautions and a sign-off block with empty "
                    "signature fields. The study JSON is attached inside the PDF. With --sign, "
                    "signs it (PAdES) in one role's field.")
    m.add_argument("file", metavar="FILE", help="study JSON or .tenure workbook")
    m.add_argument("-o", "--output", metavar="OUT.pdf", required=True, help="memo PDF to write")
    m.add_argument("--study", metavar="TITLE", default=None,
                   help="the study to write about, when FILE holds several")
    m.add_argument("--sign", metavar="ID.p12", default=None, help="sign with this identity")
    m.add_argument("--passphrase-file", metavar="F", default=None,
                   help="file whose first line is the identity's passphrase")
    m.add_argument("--role", choices=ROLES, default="prepared",
                   help="the sign-off field to sign with --sign (default: prepared)")
    m.add_argument("--confirm", action="store_true",
                   help="sign with --sign even though the identity's name differs from the "
                        "name printed in the role's box")
    m.add_argument("--page-size", choices=("A4", "Letter"), default="A4")
    m.add_argument("--prepared-by", metavar="NAME", default=None)
    m.add_argument("--reviewed-by", metavar="NAME", default=None)
    m.add_argument("--approved-by", metavar="NAME", default=None)
    m.add_argument("--organisation", metavar="ORG", default=None,
                   help="organisation named in the memo header")
    m.add_argument("--currency", metavar="CODE", default=None,
                   help="currency of every amount, a symbol or a code such as GBP (default: "
                        "the workbook's currency, else £)")
    m.set_defaults(func=run_memo)

    s = subparsers.add_parser(
        "sign", help="add a signature (reviewer, approver) to an issued memo",
        description="Sign an existing memo in one role's empty field, as an incremental update "
                    "that keeps earlier signatures valid. Writes in place unless -o is given. "
                    "Before signing, checks who signs: when the certificate's name differs from "
                    "the name printed in the role's box, or the same certificate already signed "
                    "another role, it prints a warning and signs only with --confirm (exit 1 "
                    "without it). With --workbook, records the signature (role, signer, "
                    "certificate fingerprint, time) in the workbook's memo register.")
    s.add_argument("memo", metavar="MEMO.pdf")
    s.add_argument("--sign", metavar="ID.p12", required=True, help="identity to sign with")
    s.add_argument("--passphrase-file", metavar="F", required=True)
    s.add_argument("--role", choices=ROLES, required=True)
    s.add_argument("-o", "--output", metavar="OUT.pdf", default=None,
                   help="write the signed memo here instead of in place")
    s.add_argument("--confirm", action="store_true",
                   help="sign even though the signer checks warn (a name that differs from the "
                        "printed one, or one signer in two roles)")
    s.add_argument("--workbook", metavar="WORKBOOK", default=None,
                   help="record the signature in this workbook's memo register")
    s.set_defaults(func=run_sign)

    v = subparsers.add_parser(
        "verify", help="check a memo's signatures, integrity, attached study and trust",
        description="Report each signature's signer, signing time, integrity (the bytes are "
                    "exactly what was signed), changes after signing, and trust; and whether "
                    "the attached study matches the footer fingerprint. Exit 0 only when every "
                    "signature is intact AND every signer is trusted (its certificate is in "
                    "your trust list, 'tenure trust', or given with --trust, or chains to one "
                    "that is; matched by SHA-256 fingerprint, never by name); 1 when a check "
                    "fails or a signer is not trusted; 2 for a file that is not a memo. Each "
                    "signature's printed name is compared with its certificate's name, and one "
                    "signer in two roles is noted (--strict: either makes the exit 1).")
    v.add_argument("memo", metavar="MEMO.pdf")
    v.add_argument("--trust", metavar="CERT.pem", action="append", default=[],
                   help="a certificate (PEM or DER) you trust: a colleague's or your "
                        "organisation's CA; repeat for several")
    v.add_argument("--integrity-only", action="store_true",
                   help="check integrity only: exit 0 for an intact memo even when a signer is "
                        "not trusted (proves the bytes are unchanged, not who signed them)")
    v.add_argument("--require-trust", action="store_true",
                   help=argparse.SUPPRESS)  # the default now; kept so old scripts still run
    v.add_argument("--no-user-trust", action="store_true",
                   help="ignore the trust folder in your Tenure settings folder")
    v.add_argument("--json", action="store_true", help="print the report as JSON")
    v.add_argument("--strict", action="store_true",
                   help="also exit 1 when a certificate's name differs from the name printed "
                        "in its box, or one certificate signed two roles")
    v.set_defaults(func=run_verify)

    i = subparsers.add_parser(
        "identity", help="create or inspect a signing identity (PKCS#12)",
        description="Signing identities are passphrase-protected PKCS#12 files. 'new' makes a "
                    "self-signed one; an organisation-issued PKCS#12 works the same way.")
    isub = i.add_subparsers(dest="identity_command", metavar="COMMAND",
                            parser_class=subparsers._parser_class)
    n = isub.add_parser("new", help="create a self-signed identity")
    n.add_argument("--name", required=True, help="your full name")
    n.add_argument("--out", metavar="ID.p12", required=True)
    n.add_argument("--passphrase-file", metavar="F", required=True,
                   help="file whose first line is the passphrase that protects the key")
    n.add_argument("--organisation", metavar="ORG", default=None)
    n.add_argument("--email", metavar="ADDRESS", default=None)
    sh = isub.add_parser("show", help="show an identity; optionally export its certificate")
    sh.add_argument("identity", metavar="ID.p12")
    sh.add_argument("--passphrase-file", metavar="F", required=True)
    sh.add_argument("--cert-out", metavar="CERT.pem", default=None,
                    help="write the public certificate, for colleagues' trust lists")
    i.set_defaults(func=run_identity, identity_command=None)
