"""Fleet editing on a workbook: the candidate catalogue, yearly restudies, adding a studied asset.

Everything here goes through :class:`core.workbook.Workbook` and writes in one
transaction per call. Study results are read in one place,
:func:`result_snapshot` (the stored ``core.jsonout.study_json`` of the result) and
:func:`register_state` (its words for the register), so they can follow the
engine's result types at one spot.

The candidate catalogue: a challenger model is entered once with its asset
class and offered to every asset of that class (:func:`offered`). Editing it
changes the current-year study of each asset whose study holds a challenger of
that name; :func:`candidate_changes` lists those studies before anything is
written, :func:`apply_candidate` writes the catalogue entry and those studies
(with fresh results) in one transaction.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from core.errors import StudyError
from core.estimates import Alternative, Study
from core.jsonout import study_json
from core.study import run_study
from core.workbook.files import WorkbookError
from core.workbook.model import Asset, Candidate, Workbook


def result_snapshot(study: Study) -> dict[str, Any]:
    """The result kept with a stored study: ``study_json(run_study(study))``."""
    return study_json(run_study(study))


def register_state(study: Study | None, result_json: Mapping[str, Any] | None) -> str:
    """'keep', 'replace now', 'replace in N years', 'not computed' or 'not yet studied'.

    >>> register_state(None, None)
    'not yet studied'
    """
    if study is None:
        return "not yet studied"
    rec = (result_json or {}).get("recommendation")
    if not rec:
        return "not computed"
    if rec.get("action") == "replace":
        return "replace now"
    if study.study_period is not None:
        years = rec.get("defender_years")
        years = rec.get("planned_defender_years") if years is None else years
        if rec.get("challenger") is None:
            return "keep"
    else:
        years = rec.get("planned_defender_years")
        if years is None or years >= study.defender.max_life:
            return "keep"
    return f"replace in {years} year" + ("" if years == 1 else "s")


# --------------------------------------------------------------------------- candidates
@dataclass(frozen=True)
class CandidateChange:
    """One stored study that a catalogue edit changes: ``before`` -> ``after`` challenger."""

    tag: str
    year: int
    title: str
    before: Alternative
    after: Alternative

    def describe(self) -> str:
        """e.g. "PB-2 2026: price 158,000 -> 168,000; operating costs"."""
        diffs = []
        for f in dataclasses.fields(Alternative):
            old, new = getattr(self.before, f.name), getattr(self.after, f.name)
            if old == new:
                continue
            name = f.name.replace("_", " ")
            if isinstance(old, (int, float)) and isinstance(new, (int, float)):
                name += f" {old:,.6g} -> {new:,.6g}"
            diffs.append(name)
        return f"{self.tag} {self.year}: {'; '.join(diffs) or 'no change'}"


def offered(wb: Workbook, tag: str) -> list[Candidate]:
    """The catalogue candidates offered to ``tag``: those of its asset class and those linked."""
    asset = wb.asset(tag)
    seen: dict[int, Candidate] = {}
    for c in wb.candidates(tag=tag) + (wb.candidates(asset_class=asset.asset_class)
                                       if asset.asset_class else []):
        seen.setdefault(c.id, c)
    return sorted(seen.values(), key=lambda c: c.name)


def _check_candidate(alternative: Alternative, where: str) -> Alternative:
    from core.studyfile import alternative_to_dict
    from core.workbook.model import _parse_alternative

    if alternative.role != "challenger":
        raise StudyError(where, f"candidate '{alternative.name}' must be a challenger")
    return _parse_alternative(alternative_to_dict(alternative), where)


def candidate_changes(wb: Workbook, name: str, alternative: Alternative) -> list[CandidateChange]:
    """Which assets' current studies change if catalogue candidate ``name`` becomes ``alternative``.

    A study changes when it holds a challenger called ``name`` that differs from
    ``alternative``. Retired assets are read only and never change. Nothing is written.
    """
    out = []
    for asset in wb.assets(include_retired=False):
        year = wb.current_year(asset.tag)
        if year is None:
            continue
        study = wb.study(asset.tag, year)
        for alt in study.challengers:
            if alt.name == name and alt != alternative:
                out.append(CandidateChange(asset.tag, year, study.title, alt, alternative))
    return out


def _replace_challenger(study: Study, name: str, alternative: Alternative) -> Study:
    return dataclasses.replace(study, challengers=tuple(
        alternative if c.name == name else c for c in study.challengers))


def apply_candidate(wb: Workbook, alternative: Alternative, asset_class: str = "",
                    name: str | None = None, tags: Iterable[str] = ()) -> list[CandidateChange]:
    """Enter or edit catalogue candidate ``name`` (default ``alternative.name``), one transaction.

    Every current study listed by :func:`candidate_changes` gets the new
    challenger and a fresh result; ``tags`` are linked to the candidate.
    Returns the changes made.
    """
    name = alternative.name if name is None else name
    _check_candidate(alternative, f"candidate '{alternative.name}'")
    if name != alternative.name and any(c.name == alternative.name for c in wb.candidates()):
        raise WorkbookError(wb.path, f"a candidate '{alternative.name}' already exists")
    changes = candidate_changes(wb, name, alternative)
    studies = {ch.tag: _replace_challenger(wb.study(ch.tag, ch.year), name, alternative)
               for ch in changes}
    for tag, study in studies.items():
        names = [c.name for c in study.challengers]
        if len(set(names)) != len(names):
            raise WorkbookError(wb.path, f"{tag}: its study would hold two challengers named "
                                         f"'{alternative.name}'")
    results = {tag: result_snapshot(study) for tag, study in studies.items()}
    with wb.transaction() as c:
        if name != alternative.name:
            c.execute("UPDATE candidates SET name = ? WHERE name = ?", (alternative.name, name))
        wb.add_candidate(alternative, asset_class, tags)
        for ch in changes:
            wb.save_study(ch.tag, ch.year, studies[ch.tag], results[ch.tag])
    return changes


def remove_candidate(wb: Workbook, name: str) -> None:
    """Take a candidate out of the catalogue; studies that hold it keep their copy."""
    if not any(c.name == name for c in wb.candidates()):
        raise WorkbookError(wb.path, f"no candidate '{name}'")
    with wb.transaction() as c:
        c.execute("DELETE FROM candidates WHERE name = ?", (name,))


def catalogue_challengers(wb: Workbook, study: Study, asset: Asset) -> None:
    """Put the challengers of a new asset's study into the catalogue (inside a transaction).

    A name the catalogue does not know is added under the asset's class and
    linked; the same model already there is linked; a different model under the
    same name is left as it is (the study keeps its own copy, nothing is merged).
    """
    known = {c.name: c for c in wb.candidates()}
    for alt in study.challengers:
        have = known.get(alt.name)
        if have is None:
            wb.add_candidate(alt, asset.asset_class, [asset.tag])
        elif have.alternative == alt:
            wb.link_candidate(have.id, asset.tag)


# --------------------------------------------------------------------------- assets and years
def add_studied_asset(wb: Workbook, asset: Asset, study: Study, year: int | None = None) -> int:
    """Add a new asset with ``study`` as its study of ``year`` (default: the workbook's year).

    One transaction: the site (when new), the asset (an existing tag is
    refused), its challengers in the catalogue, and the study with its result.
    Returns the year.
    """
    year = wb.study_year if year is None else int(year)
    snapshot = result_snapshot(study)
    with wb.transaction():
        wb.new_asset(asset)
        catalogue_challengers(wb, study, asset)
        wb.save_study(asset.tag, year, study, snapshot)
    return year


@dataclass(frozen=True)
class RestudyReport:
    """What :func:`restudy` started (tag, from year) and what it left (tag, why)."""

    year: int
    started: tuple[tuple[str, int], ...]
    skipped: tuple[tuple[str, str], ...]

    def lines(self) -> list[str]:
        out = [f"{tag}: {self.year} study started from {src}'s estimates"
               for tag, src in self.started]
        out += [f"{tag}: skipped ({why})" for tag, why in self.skipped]
        return out


def restudy(wb: Workbook, year: int | None = None, tags: Sequence[str] = ()) -> RestudyReport:
    """Start ``year``'s studies (default: this calendar year) from each asset's latest earlier one.

    Only ``tags`` when given (an unknown, retired or unstudied tag given by name
    is refused); otherwise every asset in service. An asset that already has a
    study of ``year`` is skipped, as is one with no earlier study. One
    transaction; the earlier studies stay as they were. The workbook's study
    year becomes ``year``.
    """
    year = _dt.date.today().year if year is None else int(year)
    if not 1900 <= year <= 2200:
        raise StudyError("--year", f"must be a year from 1900 to 2200, not {year}")
    if tags:
        chosen = []
        for tag in dict.fromkeys(tags):
            try:
                asset = wb.asset(tag)
            except KeyError:
                raise StudyError("--tag", f"no asset '{tag}' in {wb.path.name}") from None
            if asset.retired:
                raise StudyError("--tag", f"asset {tag} is retired (read only)")
            years = wb.years(tag)
            if year in years:
                raise StudyError("--tag", f"{tag} already has a study for {year}")
            if not [y for y in years if y < year]:
                raise StudyError("--tag", f"{tag} has no study before {year} to start from")
            chosen.append(asset)
    else:
        chosen = wb.assets(include_retired=False)
    started, skipped, plans = [], [], []
    for asset in chosen:
        years = wb.years(asset.tag)
        earlier = [y for y in years if y < year]
        if year in years:
            skipped.append((asset.tag, f"already has a study for {year}"))
        elif not earlier:
            skipped.append((asset.tag, f"no study before {year}"))
        else:
            study = wb.study(asset.tag, earlier[-1])
            plans.append((asset.tag, earlier[-1], study, result_snapshot(study)))
    with wb.transaction():
        for tag, src, study, snapshot in plans:
            wb.save_study(tag, year, study, snapshot)
            started.append((tag, src))
        if plans or not tags:
            wb.set_meta("current_year", str(max(year, _int(wb.meta().get("current_year")))))
    return RestudyReport(year, tuple(started), tuple(skipped))


def _int(text: str | None) -> int:
    try:
        return int(text or 0)
    except ValueError:
        return 0
