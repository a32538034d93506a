"""Tenure workbooks (``.tenure``): one SQLite file per plant or fleet (docs/method.md §7).

Overview for the window, the memo helpers and the CLI (no Qt anywhere here)::

    from core.workbook import Workbook, WorkbookError, WorkbookInUse

    with Workbook.open("plant.tenure", write=True) as wb:   # write=False: read-only
        wb.company                       # "Harrowgate Fabrication Ltd."
        wb.sites()                       # [Site(name, location), ...]
        wb.assets(site=None)             # [Asset(tag, description, site, asset_class,
                                         #        in_service: date|None, original_cost), ...]
        wb.asset("AC-101")               # one Asset (KeyError if unknown)
        wb.years("AC-101")               # [2025, 2026]  every year with a study, ascending
        wb.study("AC-101")               # core.estimates.Study of the latest year
        wb.study("AC-101", 2025)         # last year's study stays readable
        wb.record("AC-101", 2025)        # StudyRecord(tag, year, study, result_json: dict|None,
                                         #             fingerprint, action, saved_at)
        wb.save_study("AC-101", 2026, study, result_json=None)   # one transaction
        wb.start_restudy("AC-101", 2027) # copies the latest year's estimates -> Study
        wb.candidates(tag=None, asset_class=None)  # [Candidate(id, name, asset_class,
                                                   #            alternative, tags)]
        wb.history("AC-101")             # [HistoryRow(tag, age, amount, kind, ...)]
        wb.add_history(rows)             # from core.history.ImportReport.accepted
        wb.save_fit("AC-101", 2026, fit) # a trend fit and its data, kept with the study
        wb.fits("AC-101", 2026)
        wb.record_memo("AC-101", 2026, fingerprint, signer, path, time=None)
        wb.memos(tag=None)               # [MemoRecord(...)]

        wb.add_site(Site(name)); wb.rename_site(old, new); wb.remove_site(name)  # only empty
        wb.new_asset(asset)              # an existing tag is refused, never merged
        wb.edit_asset(tag, asset); wb.move_asset(tag, site)
        wb.retire_asset(tag, date, reason)   # keeps everything, read only afterwards
        wb.remove_asset(tag)             # only while nothing is recorded for it
        wb.currency; wb.study_year       # meta (schema 3)

    Workbook.create("new.tenure", company="...", currency="GBP", first_year=2026)
                                                   # a new empty workbook (refuses to overwrite)
    core.workbook.fleetedit: candidate_changes / apply_candidate (catalogue), offered,
        add_studied_asset, restudy, result_snapshot, register_state
    core.workbook.assetlist: AssetMapping, plan_asset_import (preview), apply_asset_import
    studies_from_workbook(path) -> list[Study]     # current year per asset (the CLI's loader)
    save_studies(path, studies, year=None, results=None)   # the window's Save: by title
                                                   # "Site — TAG description" to assets
    export_study_json(path, out); import_study_json(path, json_path, year=None)   # §5 files
    record_memo(workbook_path, memo_path=..., fingerprint=..., signer=..., title=...)
                                                   # module-level hook used by the memo dialog
    autosave(workbook, path=None, pending=None)    # atomic sibling recovery copy
    find_recovery(path) -> Path | None             # offer it after a crash
    discard_recovery(path); restore_recovery(path)
    Workbook.open(path, write=True, break_lock=True)   # after the user confirms a left-over lock

Files are checked before anything is written: a damaged, truncated or foreign
file raises :class:`WorkbookError` (a ``core.errors.StudyError``, printed as
``error: <file>: not a Tenure workbook (...)``) and is left byte-identical. A
second process opening the same workbook for writing gets :class:`WorkbookInUse`
(an OS lock on ``<name>.lock``, which also names pid, host and time; it vanishes
with its process, so nothing is ever "taken over"). A file or folder that cannot
be written gives :class:`WorkbookReadOnly` when opened for writing. ``PRAGMA user_version`` is the schema
version; older workbooks are migrated forward in one transaction on opening for
writing; ``PRAGMA application_id`` marks the file as ours.

Studies are stored as the canonical study JSON (docs/method.md §5, via
``core.studyfile.study_to_dict`` / ``parse_study``) with relational columns for
the register, and the computed result (``core.jsonout.study_json(result)``) alongside as a
readable snapshot.
"""

from core.workbook.files import (
    WorkbookError,
    WorkbookInUse,
    WorkbookReadOnly,
    check_file,
    lock_path,
    write_problem,
)
from core.workbook.model import (
    Asset,
    Candidate,
    HistoryRow,
    MemoRecord,
    Site,
    StudyRecord,
    Workbook,
    export_study_json,
    import_study_json,
    record_memo,
    save_studies,
    studies_from_workbook,
)
from core.workbook.recovery import (
    autosave,
    discard_recovery,
    find_recovery,
    recovery_path,
    restore_recovery,
)
from core.workbook.schema import APPLICATION_ID, SCHEMA_VERSION

__all__ = ["APPLICATION_ID", "SCHEMA_VERSION", "Asset", "Candidate", "HistoryRow", "MemoRecord",
           "Site", "StudyRecord", "Workbook", "WorkbookError", "WorkbookInUse",
           "WorkbookReadOnly", "write_problem", "autosave",
           "check_file", "discard_recovery", "export_study_json", "import_study_json", "find_recovery", "lock_path", "record_memo",
           "recovery_path", "restore_recovery", "save_studies", "studies_from_workbook"]
