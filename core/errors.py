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


def _escape_char(ch: str) -> str:
    code = ord(ch)
    if ch == "\\":
        return "\\\\"
    if code < 0x100:
        return {"\n": "\\n", "\r": "\\r", "\t": "\\t"}.get(ch, f"\\x{code:02x}")
    return f"\\u{code:04x}" if code < 0x10000 else f"\\U{code:08x}"


def _needs_escape(ch: str) -> bool:
    code = ord(ch)
    return (code < 0x20 or 0x7F <= code < 0xA0 or 0xD800 <= code < 0xE000
            or code in _INVISIBLE)


#: Characters that reorder or hide text on a terminal (bidirectional overrides, zero width).
_INVISIBLE = frozenset({0x200B, 0x200C, 0x200D, 0x200E, 0x200F, 0x2028, 0x2029, 0x202A,
                        0x202B, 0x202C, 0x202D, 0x202E, 0x2066, 0x2067, 0x2068, 0x2069,
                        0xFEFF})


def escape_text(text: str) -> str:
    """``text`` safe to print on one terminal line: control characters made visible.

    C0 and C1 controls (newline, carriage return, escape, ...), DEL, lone
    surrogates and the invisible bidirectional and zero-width marks are written
    as Python-style escapes (``\\n``, ``\\x1b``, ``\\ud800``, ``\\u202e``), so a
    name or key cannot start a new ``error:`` line, recolour the terminal or
    fail to encode; a backslash is doubled only when something was escaped, so
    ordinary text (Windows paths included) prints unchanged.

    >>> escape_text("Pump\\nerror: forged\\x1b[31m")
    'Pump\\\\nerror: forged\\\\x1b[31m'
    >>> escape_text("C:\\\\plant\\\\Zoë.tenure")
    'C:\\\\plant\\\\Zoë.tenure'
    >>> escape_text("bad \\ud800 half")
    'bad \\\\ud800 half'
    """
    if not any(_needs_escape(ch) for ch in text):
        return text
    return "".join(_escape_char(ch) if (_needs_escape(ch) or ch == "\\") else ch
                   for ch in text)


def error_line(exc: BaseException) -> str:
    """The one line the CLI prints for a refusal: ``error: <where>: <what>`` (escaped).

    >>> error_line(StudyError("$.defender.name", "bad\\nerror: x"))
    'error: $.defender.name: bad\\\\nerror: x'
    """
    return f"error: {escape_text(str(exc))}"
