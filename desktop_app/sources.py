"""Opening and saving what the window edits: study JSON files and ``.tenure`` workbooks.

Study files go through ``core.studyfile``; workbooks through ``core.workbook``.  Both become a :class:`desktop_app.document.Document`.
"""

from __future__ import annotations

from importlib.resources import files
from pathlib import Path

from core.errors import StudyError
from desktop_app.document import Document, load_json, save_json

SQLITE_MAGIC = b"SQLite format 3\x00"
WORKBOOK_SUFFIX = ".tenure"
FILE_FILTER = ("Tenure files (*.tenure *.json);;Workbooks (*.tenure);;"
               "Study files (*.json);;All files (*)")


def is_workbook(path: str | Path) -> bool:
    file = Path(path)
    if file.suffix.lower() == WORKBOOK_SUFFIX:
        return True
    try:
        with file.open("rb") as fh:
            return fh.read(16) == SQLITE_MAGIC
    except OSError:
        return False


def open_document(path: str | Path) -> Document:
    file = Path(path)
    if not file.exists():
        raise StudyError(str(file), "no such file")
    if file.is_dir():
        raise StudyError(str(file), "is a folder, not a study file or workbook")
    if is_workbook(file):
        from desktop_app import workbook_bridge

        return workbook_bridge.load(file)
    return load_json(file)


def save_document(doc: Document, path: str | Path) -> None:
    file = Path(path)
    if file.suffix.lower() == WORKBOOK_SUFFIX or doc.kind == "workbook" and \
            file.suffix.lower() != ".json":
        from desktop_app import workbook_bridge

        workbook_bridge.save(doc, file)
        doc.kind = "workbook"
    else:
        save_json(doc, file)
        doc.kind = "json"
    doc.path = str(file)


def demo_path() -> str | None:
    """The bundled demo: the workbook helper's demo workbook, else the window's demo studies."""
    try:
        from core import demo  # imported when asked: it builds the demo workbook

        path = demo.demo_workbook_path()
        if path and Path(path).exists():
            return str(path)
    except Exception:  # noqa: BLE001 - any failure falls back to the bundled JSON
        pass
    # demo_fallback.json ships in the desktop_app package; a file-system package (source,
    # wheel, bundle) gives a real path the window can open.
    fallback = files("desktop_app").joinpath("demo_fallback.json")
    return str(fallback) if fallback.is_file() else None
