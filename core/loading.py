"""Studies from a file: a study JSON file or a workbook (``tenure study``, ``tenure memo``)."""

from __future__ import annotations

from pathlib import Path

from core.errors import StudyError
from core.estimates import Study
from core.studyfile import load_study_file

SQLITE_MAGIC = b"SQLite format 3\x00"


def load_studies(path: str | Path, year: int | None = None) -> list[Study]:
    """Studies from a study JSON file or a workbook (each asset's current year, or ``year``)."""
    file = Path(path)
    if not file.exists():
        raise StudyError(str(file), "no such file")
    if file.is_dir():
        raise StudyError(str(file), "is a folder, not a study file or workbook")
    try:
        with file.open("rb") as fh:
            head = fh.read(16)
    except OSError as exc:
        raise StudyError(str(file), f"cannot read ({exc.strerror or exc})") from None
    if head == SQLITE_MAGIC or file.suffix.lower() == ".tenure":
        from core import workbook  # only for a workbook: a study file starts faster without

        if year is None:
            return workbook.studies_from_workbook(file)
        with workbook.Workbook.open(file, write=False) as wb:
            studies = [wb.study(a.tag, year) for a in wb.assets() if year in wb.years(a.tag)]
        if not studies:
            raise StudyError("--year", f"{file.name} holds no study of {year}")
        return studies
    if year is not None:
        raise StudyError("--year", "applies to workbooks only (a study file has no years)")
    return load_study_file(file)
