"""The README's optional-block examples are read by the study file reader (issue 17).

Each ```json block of "### Optional blocks, by example" is merged into the study of
"### A study file" (a depreciation example into that study with the README's tax
example) and must parse through ``core.studyfile`` and run; so the examples can never
drift from the key names the reader accepts.
"""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import pytest

from core.study import run_study
from core.studyfile import parse_study_document

README = Path(__file__).resolve().parents[1] / "README.md"


def _section(text: str, heading: str) -> str:
    start = text.index(heading + "\n")
    end = re.compile(r"^#{2,3} ", re.M).search(text, start + len(heading))
    return text[start:end.start() if end else len(text)]


def _json_blocks(section: str) -> list[str]:
    return re.findall(r"```json\n(.*?)```", section, re.S)


def _merge(base: Any, piece: Any) -> Any:
    if isinstance(base, dict) and isinstance(piece, dict):
        return {**base, **{k: v if k == "depreciation" else _merge(base.get(k), v)
                           for k, v in piece.items()}}
    if isinstance(base, list) and isinstance(piece, list):
        return [_merge(b, p) for b, p in zip(base, piece, strict=False)] + base[len(piece):]
    return piece


TEXT = README.read_text(encoding="utf-8")
BASE = json.loads(_json_blocks(_section(TEXT, "### A study file"))[0])
EXAMPLES = _json_blocks(_section(TEXT, "### Optional blocks, by example"))


def test_the_section_holds_every_block_the_issue_asks_for() -> None:
    pieces = [json.loads(e) for e in EXAMPLES]
    methods = set()
    for p in pieces:
        if "defender" in p:
            dep = p["defender"]["depreciation"]
            assert {"basis", "age"} <= set(dep)  # the defender's tax basis and age
            methods.add(("defender", dep["method"]))
        for c in p.get("challengers", []):
            methods.add(("challenger", c["depreciation"]["method"]))
    assert methods == {(r, m) for r in ("defender", "challenger")
                       for m in ("straight_line", "macrs", "declining_balance")}
    assert {"tax", "inflation", "uncertainty"} <= {k for p in pieces for k in p}


@pytest.mark.parametrize("example", EXAMPLES, ids=lambda e: " ".join(e.split())[:60])
def test_each_example_parses_and_runs(example: str) -> None:
    piece = json.loads(example)
    taxed = "depreciation" in json.dumps(piece)  # allowances only count with tax
    study = _merge(_merge(BASE, json.loads(EXAMPLES[0])) if taxed else BASE, piece)
    parsed = parse_study_document(study)
    assert len(parsed) == 1
    result = run_study(parsed[0])
    assert result.recommendation is not None
    if "tax" in study:
        assert parsed[0].tax is not None and result.after_tax is not None
    if "uncertainty" in piece:
        inputs = dict(parsed[0].uncertainty.inputs)
        assert set(inputs) == set(piece["uncertainty"]["inputs"])
        assert all(k.startswith("Compressor C-3.") for k in inputs)  # one alternative's
