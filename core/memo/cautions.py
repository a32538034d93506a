"""The cautions every memo (and the window) shows, docs/method.md §9.

The texts live in ``resources/memo/cautions.txt`` (one caution per paragraph,
``#`` lines are comments), read with :mod:`importlib.resources`, so the window and
the memo show the same words from a source checkout, an installed wheel or the
standalone bundle. That file is the only copy: an installation without it is
broken and says so (:class:`~core.memo.errors.MemoError`) instead of printing
other words.

>>> texts = caution_texts()
>>> len(texts) >= 4 and texts[0].startswith("Estimates are forecasts")
True
"""

from __future__ import annotations

from functools import lru_cache
from importlib.resources import files

from core.memo.errors import MemoError

__all__ = ["caution_texts", "CAUTIONS_FILE", "parse_cautions"]

CAUTIONS_FILE = files("resources").joinpath("memo", "cautions.txt")


def parse_cautions(text: str) -> list[str]:
    """Split the cautions file into paragraphs, dropping ``#`` comment lines.

    >>> parse_cautions("# c\\nOne\\nline.\\n\\nTwo.\\n")
    ['One line.', 'Two.']
    """
    out: list[str] = []
    para: list[str] = []
    for line in text.splitlines():
        if line.lstrip().startswith("#"):
            continue
        if line.strip():
            para.append(line.strip())
        elif para:
            out.append(" ".join(para))
            para = []
    if para:
        out.append(" ".join(para))
    return out


@lru_cache(maxsize=1)
def _load() -> tuple[str, ...]:
    try:
        texts = parse_cautions(CAUTIONS_FILE.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError) as exc:
        raise MemoError("resources/memo/cautions.txt",
                        f"cannot be read ({exc}); reinstall Tenure") from None
    if not texts:
        raise MemoError("resources/memo/cautions.txt", "holds no caution; reinstall Tenure")
    return tuple(texts)


def caution_texts() -> list[str]:
    """The caution paragraphs of ``resources/memo/cautions.txt``, in order."""
    return list(_load())
