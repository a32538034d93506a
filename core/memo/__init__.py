"""Decision memos: PDF rendering, signing identities, PAdES signatures, verification.

Public entry points:

- :func:`core.memo.render.render_memo` (StudyResult -> unsigned memo PDF bytes)
- :func:`core.memo.issue.issue_memo` (render + optional signature, written to a file)
- :func:`core.memo.sign.sign_memo_file` / :func:`core.memo.sign.sign_pdf_bytes`
- :func:`core.memo.verify.verify_memo` (a :class:`core.memo.verify.VerifyReport`)
- :func:`core.memo.identity.new_identity` / :func:`core.memo.identity.load_identity`
- :func:`core.memo.cautions.caution_texts`
- :func:`core.memo.cli.register` (the CLI sub-commands)
"""
