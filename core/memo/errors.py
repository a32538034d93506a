"""Errors raised by the memo package.

A :class:`MemoError` carries a ``path`` (where the problem is: a command-line
option, a file name) and a ``message``; ``str(e)`` is ``"<path>: <message>"``,
the form the CLI prints after ``error: `` (docs/method.md §6).

>>> str(MemoError("--passphrase-file", "wrong passphrase for ID.p12"))
'--passphrase-file: wrong passphrase for ID.p12'
"""

from __future__ import annotations

from core.errors import StudyError


class MemoError(StudyError):
    """Bad input or a failed operation in memo rendering, signing or verifying."""

    def __init__(self, path: str, message: str):
        Exception.__init__(self, f"{path}: {message}")
        self.path = path
        self.message = message

    def __str__(self) -> str:
        return f"{self.path}: {self.message}"


class NotAMemoError(MemoError):
    """The file is not a readable PDF, or not a Tenure memo (verify exit 2)."""
