"""The window's bridge to ``core.workbook`` (sites, assets, the study of each year).

A workbook document keys its assets by tag; each entry remembers the study and
year it was loaded with, so Save writes only what changed (one
``save_study`` per changed asset, each one transaction in the workbook).
"""

from __future__ import annotations

from pathlib import Path

from core import workbook
from core.errors import StudyError
from core.jsonout import study_json
from desktop_app.document import AssetEntry, Document


def asset_label(asset) -> str:
    desc = getattr(asset, "description", "") or ""
    return f"{asset.tag} {desc}".strip()


def load(path: Path) -> Document:
    module = workbook
    entries: list[AssetEntry] = []
    with module.Workbook.open(str(path), write=False) as wb:
        company = getattr(wb, "company", "") or ""
        for asset in wb.assets():
            years = list(wb.years(asset.tag))
            study = wb.study(asset.tag) if years else None
            year = years[-1] if years else None
            site = getattr(asset.site, "name", asset.site) or "Unassigned"
            entry = AssetEntry(asset.tag, str(site), asset_label(asset), study, year)
            entry.saved = (study, year)  # type: ignore[attr-defined]
            entries.append(entry)
    doc = Document(entries, str(path), "workbook")
    doc.company = company  # type: ignore[attr-defined]
    return doc


def save(doc: Document, path: Path) -> None:
    module = workbook
    if doc.kind != "workbook" or doc.path is None or Path(doc.path) != Path(path):
        raise StudyError(str(path), "a study file can be saved as .json only; open or create "
                                    "the workbook with the demo or workbook tools")
    from core.study import run_study

    with module.Workbook.open(str(path), write=True) as wb:
        for entry in doc.entries:
            if entry.study is None:
                continue
            if getattr(entry, "saved", None) == (entry.study, entry.study_year):
                continue
            year = entry.study_year
            if year is None:
                from desktop_app.document import this_year

                year = this_year()
                entry.study_year = year
            result = doc.cached_result(entry.key) or run_study(entry.study)
            wb.save_study(entry.key, year, entry.study, result_json=study_json(result))
            entry.saved = (entry.study, year)  # type: ignore[attr-defined]
