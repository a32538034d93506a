"""Read the assets of a plan from a workbook (current study, tag, site) or a study file."""

from __future__ import annotations

import dataclasses
import datetime as _dt
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from core.errors import StudyError
from core.estimates import Study
from core.plan.inputs import AssetInput, plan_input


@dataclass(frozen=True)
class PlanSource:
    """The assets read from one file, the plan's first calendar year and the studies."""

    path: str
    inputs: tuple[AssetInput, ...]
    studies: tuple[Study, ...]
    first_year: int
    workbook: bool


def _is_workbook(path: Path) -> bool:
    from core.loading import SQLITE_MAGIC

    try:
        with path.open("rb") as fh:
            head = fh.read(16)
    except OSError as exc:
        raise StudyError(str(path), f"cannot read ({exc.strerror or exc})") from None
    return head == SQLITE_MAGIC or path.suffix.lower() == ".tenure"


def _results(studies: Sequence[Study]) -> list:
    """Every study's result; risk is left out (it does not move the decision basis)."""
    from core.fleet import run_fleet

    plain = [dataclasses.replace(s, uncertainty=None) if s.uncertainty is not None else s
             for s in studies]
    return run_fleet(plain)


def load_plan_source(path: str | Path, must: Sequence[str] = ()) -> PlanSource:
    """The plan inputs of a workbook (each asset's current study) or a study file.

    ``must`` names assets to replace now: tags for a workbook, study titles for a
    study file.  Unknown names are refused.
    """
    from core.loading import load_studies

    file = Path(path)
    if not file.exists():
        raise StudyError(str(file), "no such file")
    if file.is_dir():
        raise StudyError(str(file), "is a folder, not a study file or workbook")
    records: list[tuple[Study, str | None, str | None]] = []
    if _is_workbook(file):
        from core.workbook import Workbook, WorkbookError

        with Workbook.open(file, write=False) as wb:
            register = wb.assets()
            stored = wb.studies()
        sites = {a.tag: a.site for a in register}
        # an asset flag, when the workbook schema has one (read if present, never required)
        flagged = {a.tag for a in register if getattr(a, "must_replace", False)}
        if not stored:
            raise WorkbookError(file, "the workbook holds no study yet")
        first_year = max(r.year for r in stored)
        records = [(r.study, r.tag, sites.get(r.tag)) for r in stored]
        names = {r.tag for r in stored}
        kind = "asset tagged"
    else:
        flagged = set()
        studies = load_studies(file)
        first_year = _dt.date.today().year
        records = [(s, None, None) for s in studies]
        names = {s.title for s in studies}
        kind = "study titled"
    for name in must:
        if name not in names:
            raise StudyError("--must", f"no {kind} '{name}' in {file.name}")
    wanted = set(must)
    results = _results([s for s, _, _ in records])
    inputs = []
    for (study, tag, site), result in zip(records, results, strict=True):
        key = tag if tag is not None else study.title
        reason = ("flagged must-replace on the asset (safety or regulation)" if key in flagged
                  else "marked must-replace for this plan (safety, regulation or a failed "
                       "inspection)" if key in wanted else "")
        inputs.append(plan_input(result, study, tag=tag, site=site, must=bool(reason),
                                 must_reason=reason))
    return PlanSource(str(file), tuple(inputs), tuple(s for s, _, _ in records), first_year,
                      tag is not None if records else False)
