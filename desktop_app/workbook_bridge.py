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


def retired_text(asset) -> str | None:
    when = getattr(asset, "retired_on", None)
    if when is None:
        return None
    return f"retired {when.isoformat()}: {getattr(asset, 'retired_reason', '')}"


def load(path: Path) -> Document:
    entries: list[AssetEntry] = []
    with workbook.Workbook.open(str(path), write=False) as wb:
        company = getattr(wb, "company", "") or ""
        for asset in wb.assets():
            years = list(wb.years(asset.tag))
            study = wb.study(asset.tag) if years else None
            year = years[-1] if years else None
            site = getattr(asset.site, "name", asset.site) or "Unassigned"
            entry = AssetEntry(asset.tag, str(site), asset_label(asset), study, year,
                               retired_text(asset))
            entry.saved = (study, year)  # type: ignore[attr-defined]
            entries.append(entry)
        empty = [s.name for s in wb.sites() if not any(e.site == s.name for e in entries)]
    doc = Document(entries, str(path), "workbook")
    doc.company = company  # type: ignore[attr-defined]
    doc.empty_sites = empty  # type: ignore[attr-defined]
    return doc


def sync(doc: Document, renamed: dict[str, str] | None = None, reload: tuple[str, ...] = ()
         ) -> None:
    """Bring the document's register in line with the workbook after a register edit.

    Entries keep their unsaved study edits; assets new in the workbook are added,
    vanished ones dropped; ``renamed`` (old tag -> new) moves an entry to its new
    tag; the saved studies of ``reload`` tags are read again.
    """
    for old, new in (renamed or {}).items():
        doc.rename_key(old, new)
    by_key = {e.key: e for e in doc.entries}
    entries: list[AssetEntry] = []
    with workbook.Workbook.open(str(doc.path), write=False) as wb:
        doc.company = wb.company  # type: ignore[attr-defined]
        for asset in wb.assets():
            entry = by_key.get(asset.tag)
            if entry is None or asset.tag in reload:
                years = list(wb.years(asset.tag))
                study = wb.study(asset.tag) if years else None
                year = years[-1] if years else None
                if entry is None:
                    entry = AssetEntry(asset.tag, asset.site, asset_label(asset), study, year)
                else:
                    entry.study, entry.study_year = study, year
                entry.saved = (study, year)  # type: ignore[attr-defined]
            entry.site = asset.site
            entry.name = asset_label(asset)
            entry.retired = retired_text(asset)
            entries.append(entry)
        doc.empty_sites = [s.name for s in wb.sites()  # type: ignore[attr-defined]
                           if not any(e.site == s.name for e in entries)]
    doc.entries[:] = entries
    doc._emit("assets", None)
    for key in reload:
        doc._emit("study", key)


def save(doc: Document, path: Path) -> None:
    if doc.kind != "workbook" or doc.path is None or Path(doc.path) != Path(path):
        if Path(path).exists():
            raise StudyError(str(path), "already exists; a study file is saved as a new "
                                        "workbook only (choose a new name)")
        save_new_workbook(doc, path)
        return
    from core.study import run_study

    saved = []
    with workbook.Workbook.open(str(path), write=True) as wb, wb.transaction():
        # one transaction: a full disk or a crash leaves the workbook as it was, and the
        # edits stay open (marked unsaved) to be saved again or elsewhere
        for entry in doc.entries:
            if entry.study is None:
                continue
            if getattr(entry, "saved", None) == (entry.study, entry.study_year):
                continue
            if entry.retired:
                continue  # read only
            year = entry.study_year
            if year is None:
                from desktop_app.document import this_year

                year = this_year()
            result = doc.cached_result(entry.key) or run_study(entry.study)
            wb.save_study(entry.key, year, entry.study, result_json=study_json(result))
            saved.append((entry, year))
    for entry, year in saved:
        entry.study_year = year
        entry.saved = (entry.study, year)  # type: ignore[attr-defined]


def save_new_workbook(doc: Document, path: Path) -> None:
    """Save As a workbook: each studied asset of a study file becomes an asset (one transaction).

    The workbook is built under a temporary name and renamed into place when
    complete, so a failure leaves nothing behind.
    """
    import os

    from core.study import run_study

    studies = doc.studies()
    if not studies:
        raise StudyError(str(path), "nothing to save: no asset has a study yet")
    from desktop_app.document import this_year

    year = next((e.study_year for e in doc.entries if e.study_year is not None), this_year())
    results = {}
    for entry in doc.entries:
        if entry.study is not None:
            result = doc.cached_result(entry.key) or run_study(entry.study)
            results[entry.study.title] = study_json(result)
    part = path.with_name(f".{path.name}.{os.getpid()}.new")
    try:
        workbook.save_studies(part, studies, year, results)
        os.replace(part, path)
    finally:
        if part.exists():
            part.unlink()
