"""Errors a user can act on.

Every refusal names where the problem is (a JSON path such as
``$.defender.max_life``, a file name or a command-line option) and what is
wrong, so the CLI can print one line ``error: <where>: <what is wrong>``.
"""

from __future__ import annotations


class StudyError(ValueError):
    """A problem in user input, reported as ``<where>: <what is wrong>``.

    >>> str(StudyError("$.marr", "must be greater than -1"))
    '$.marr: must be greater than -1'
    """

    def __init__(self, path: str, message: str) -> None:
        super().__init__(f"{path}: {message}")
        self.path = path
        self.message = message
