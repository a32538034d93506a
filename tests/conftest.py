"""Shared fixtures: a valid study document and a helper that parses one (kept small on purpose)."""

from __future__ import annotations

import copy
import json
from pathlib import Path
from typing import Any

import pytest

from core.estimates import Study
from core.studyfile import parse_study_document

BASE_STUDY: dict[str, Any] = {
    "title": "Kestrel Road press line",
    "marr": 0.10,
    "defender": {"name": "Old press", "market_value": 20000, "max_life": 3,
                 "market_values": {"decline_rate": 0.3},
                 "operating_costs": {"first": 9000, "gradient": 2500}},
    "challengers": [{"name": "New press", "first_cost": 60000, "max_life": 8,
                     "market_values": {"decline_rate": 0.2},
                     "operating_costs": {"first": 3000, "gradient": 500}}],
}


def document(study: dict[str, Any] | None = None, **extra: Any) -> dict[str, Any]:
    """A complete study-file object holding ``study`` (a deep copy of BASE_STUDY by default)."""
    body = copy.deepcopy(BASE_STUDY if study is None else study)
    return {"format": "tenure-study", "version": 1, **body, **extra}


def parse_one(study: dict[str, Any]) -> Study:
    """Parse one study object (without format/version) into a Study."""
    (parsed,) = parse_study_document(document(study))
    return parsed


@pytest.fixture
def base_study() -> dict[str, Any]:
    return copy.deepcopy(BASE_STUDY)


@pytest.fixture
def write_json(tmp_path: Path):
    """Write an object (or raw text) to a file in tmp_path and return its path."""

    def write(obj: Any, name: str = "study.json") -> Path:
        path = tmp_path / name
        path.write_text(obj if isinstance(obj, str) else json.dumps(obj), encoding="utf-8")
        return path

    return write


@pytest.fixture
def isolated(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """The window tests' sandbox (tests/gui_support.py): settings and recovery files in
    tmp_path, and any unplanned dialog fails the test."""
    from tests.gui_support import isolate

    isolate(tmp_path, monkeypatch)
    return tmp_path
