"""The cautions every memo (and the window) shows, docs/method.md §9.

The texts live in ``resources/memo/cautions.txt`` (one caution per paragraph,
``#`` lines are comments) so the window and the memo show the same words. A
built-in copy is used if the resource file cannot be found.

>>> texts = caution_texts()
>>> len(texts) >= 4 and texts[0].startswith("Estimates are forecasts")
True
"""

from __future__ import annotations

from functools import lru_cache
from pathlib import Path

__all__ = ["caution_texts", "CAUTIONS_FILE"]

CAUTIONS_FILE = Path(__file__).resolve().parents[2] / "resources" / "memo" / "cautions.txt"

_BUILT_IN = (
    "Estimates are forecasts. Market values, operating costs, overhauls and service lives are "
    "judgements about the future; the recommendation is only as good as they are, and it should "
    "be revisited when they change.",
    "Replacement required for safety, regulation or code overrides the economics: if the "
    "equipment must be replaced or withdrawn for those reasons, do so whatever this memo concludes.",
    "Tax treatment is simplified: one effective tax rate, the stated depreciation method and no "
    "other allowances, credits or timing effects. Defer to a tax adviser for the tax position "
    "that applies.",
    "Decommissioning, removal and changeover follow site safety rules and local codes, under "
    "licensed engineering practice where it applies. This memo does not cover how the work is "
    "done safely.",
)


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
    except OSError:
        texts = []
    return tuple(texts) if texts else _BUILT_IN


def caution_texts() -> list[str]:
    """The caution paragraphs, in order (always at least the four of docs/method.md §9)."""
    return list(_load())
