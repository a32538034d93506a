"""The window's document: a plain-Python model of the open register (no Qt here).

A :class:`Document` holds the assets of the open workbook or study file, each
with its :class:`core.estimates.Study` (or none yet) and the year it was made.
Views never change a study themselves: they ask the document
(:meth:`Document.set_study`, through an undo command), and the document tells
every subscriber what changed.  All numbers come from ``core.study.run_study``;
the document only caches results by study fingerprint.

The register state of an asset (docs/method.md §3 reading of the recommendation):
"replace now", "replace in N years", "keep", or "not yet studied"; its
estimates are "out of date" when the study year is older than this year.
"""

from __future__ import annotations

import datetime as _dt
import itertools
import json
from collections.abc import Callable
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from core.errors import StudyError
from core.estimates import Alternative, MarketValues, OperatingCosts, Study
from core.results import StudyResult
from core.studyfile import (
    dump_study_document,
    load_study_file,
    parse_study,
    study_to_dict,
)
from core.text import SITE_SEPARATOR

DEFAULT_SITE = "Unassigned"
RECOVERY_FORMAT = "tenure-window-recovery"

Listener = Callable[[str, str | None], None]
_ids = itertools.count(1)


def this_year() -> int:
    return _dt.date.today().year


def split_title(title: str) -> tuple[str, str]:
    """A study-file title "Site — Asset" gives (site, asset); without the dash the site is unassigned.

    >>> split_title("Millbrook — Laser cutter L-4")
    ('Millbrook', 'Laser cutter L-4')
    >>> split_title("Press line")
    ('Unassigned', 'Press line')
    """
    if SITE_SEPARATOR in title:
        site, asset = title.split(SITE_SEPARATOR, 1)
        if site.strip() and asset.strip():
            return site.strip(), asset.strip()
    return DEFAULT_SITE, title.strip()


def join_title(site: str, asset: str) -> str:
    return asset if site == DEFAULT_SITE else f"{site}{SITE_SEPARATOR}{asset}"


def default_study(title: str = "New asset", marr: float = 0.10) -> Study:
    """A small, valid study to start from (New, Add asset)."""
    defender = Alternative("Machine in place", "defender", 20000.0, 5,
                           MarketValues(decline_rate=0.2),
                           OperatingCosts(first=9000.0, gradient=1500.0))
    challenger = Alternative("New machine", "challenger", 60000.0, 10,
                             MarketValues(decline_rate=0.15),
                             OperatingCosts(first=4000.0, gradient=400.0))
    return Study(title=title, marr=marr, defender=defender, challengers=(challenger,))


def check_study(study: Study) -> Study:
    """Validate a study exactly as the study file would (raises StudyError with a JSON path)."""
    return parse_study(json.loads(json.dumps(study_to_dict(study))))


@dataclass
class AssetEntry:
    """One asset of the register."""

    key: str
    site: str
    name: str
    study: Study | None
    study_year: int | None = None
    retired: str | None = None  # "retired 2026-03-01: sold" for a retired workbook asset

    @property
    def title(self) -> str:
        return self.study.title if self.study is not None else self.name


@dataclass(frozen=True)
class AssetState:
    recommendation: str
    estimates: str
    out_of_date: bool
    sort_key: tuple


def recommendation_state(result: StudyResult | None, study: Study | None) -> str:
    """'keep', 'replace now', 'replace in N years' or 'not yet studied'."""
    if study is None:
        return "not yet studied"
    if result is None:
        return "…"
    rec = result.recommendation
    if rec.action == "replace":
        return "replace now"
    if study.study_period is not None:
        years = rec.defender_years if rec.defender_years is not None else rec.planned_defender_years
        if rec.challenger is None:
            return "keep"
    else:
        years = rec.planned_defender_years
        if years >= study.defender.max_life:
            return "keep"
    return f"replace in {years} year" + ("" if years == 1 else "s")


class Document:
    """The open register: assets with their studies, a path, and change callbacks.

    Events sent to listeners ``(event, key)``: "study" (an asset's study changed),
    "year", "assets" (assets added or removed, or a new document), "result"
    (a computed result arrived), "path".
    """

    def __init__(self, entries: list[AssetEntry] | None = None, path: str | None = None,
                 kind: str = "json") -> None:
        self.entries: list[AssetEntry] = list(entries or [])
        self.path = path
        self.kind = kind  # "json" | "workbook" | "new"
        self._listeners: list[Listener] = []
        self._results: dict[str, StudyResult] = {}
        self.aliases: dict[str, str] = {}  # an asset tag renamed in the workbook: old -> new

    # ------------------------------------------------------------------ observers
    def subscribe(self, listener: Listener) -> None:
        self._listeners.append(listener)

    def unsubscribe(self, listener: Listener) -> None:
        if listener in self._listeners:
            self._listeners.remove(listener)

    def _emit(self, event: str, key: str | None = None) -> None:
        for listener in list(self._listeners):
            listener(event, key)

    # ------------------------------------------------------------------ access
    def entry(self, key: str) -> AssetEntry:
        seen = {key}
        while True:
            for e in self.entries:
                if e.key == key:
                    return e
            key = self.aliases.get(key, key)
            if key in seen:
                raise KeyError(key)
            seen.add(key)

    def rename_key(self, old: str, new: str) -> None:
        """An asset's tag changed: its entry answers to the new key (and the old one)."""
        entry = self.entry(old)
        entry.key = new
        self.aliases.pop(new, None)
        self.aliases[old] = new
        if old in self._results:
            self._results[new] = self._results.pop(old)

    def keys(self) -> list[str]:
        return [e.key for e in self.entries]

    def sites(self) -> list[str]:
        seen: list[str] = []
        for e in self.entries:
            if e.site not in seen:
                seen.append(e.site)
        return seen

    # ------------------------------------------------------------------ edits
    def set_study(self, key: str, study: Study | None) -> None:
        entry = self.entry(key)
        entry.study = study
        if study is not None and self.kind != "workbook":
            entry.site, entry.name = split_title(study.title)
        self._emit("study", key)

    def set_year(self, key: str, year: int | None) -> None:
        self.entry(key).study_year = year
        self._emit("year", key)

    def add_entry(self, entry: AssetEntry, index: int | None = None) -> None:
        self.entries.insert(len(self.entries) if index is None else index, entry)
        self._emit("assets", entry.key)

    def remove_entry(self, key: str) -> tuple[int, AssetEntry]:
        entry = self.entry(key)
        index = self.entries.index(entry)
        self.entries.remove(entry)
        self._emit("assets", None)
        return index, entry

    # ------------------------------------------------------------------ results
    def cached_result(self, key: str) -> StudyResult | None:
        entry = self.entry(key)
        if entry.study is None:
            return None
        result = self._results.get(key)
        if result is not None and result.study == entry.study:
            return result
        return None

    def result(self, key: str) -> StudyResult | None:
        """The result of an asset's study, computed now through core if not cached."""
        from core.study import run_study

        entry = self.entry(key)
        if entry.study is None:
            return None
        cached = self.cached_result(key)
        if cached is not None:
            return cached
        result = run_study(entry.study)
        self._results[key] = result
        self._emit("result", key)
        return result

    def store_result(self, key: str, result: StudyResult) -> None:
        """Accept a result computed elsewhere (the fleet worker) if it still matches the study."""
        try:
            entry = self.entry(key)
        except KeyError:
            return
        if entry.study is not None and result.study == entry.study:
            self._results[key] = result
            self._emit("result", key)

    def state(self, key: str, year: int | None = None) -> AssetState:
        entry = self.entry(key)
        year = this_year() if year is None else year
        rec = recommendation_state(self.cached_result(key), entry.study)
        if entry.retired:
            return AssetState("retired", str(entry.study_year or "—"), False, (7, 0))
        if entry.study is None:
            est, old = "—", False
        elif entry.study_year is None:
            est, old = "—", False
        elif entry.study_year < year:
            est, old = f"out of date ({entry.study_year})", True
        else:
            est, old = str(entry.study_year), False
        order = {"replace now": 0, "…": 5, "keep": 4, "not yet studied": 6}
        rank = order.get(rec, 1)
        n = int(rec.split()[2]) if rec.startswith("replace in") else 0
        return AssetState(rec, est, old, (rank, n))

    # ------------------------------------------------------------------ files
    def studies(self) -> list[Study]:
        return [e.study for e in self.entries if e.study is not None]

    def to_recovery(self) -> dict[str, Any]:
        """Everything needed to rebuild the document after a crash (JSON-ready)."""
        return {"format": RECOVERY_FORMAT, "version": 1, "path": self.path, "kind": self.kind,
                "saved_at": _dt.datetime.now().isoformat(timespec="seconds"),
                "assets": [{"key": e.key, "site": e.site, "name": e.name, "study_year": e.study_year,
                            "study": None if e.study is None else study_to_dict(e.study)}
                           for e in self.entries]}

    @classmethod
    def from_recovery(cls, data: dict[str, Any]) -> Document:
        if data.get("format") != RECOVERY_FORMAT:
            raise StudyError("recovery", "not a recovery file of this program")
        entries = []
        for k, a in enumerate(data.get("assets", [])):
            study = None if a.get("study") is None else parse_study(a["study"],
                                                                   f"$.assets[{k}].study")
            key = a.get("key") if data.get("kind") == "workbook" and a.get("key") else new_key()
            entries.append(AssetEntry(key, a["site"], a["name"], study, a.get("study_year")))
        return cls(entries, data.get("path"), data.get("kind", "json"))


def new_key() -> str:
    return f"a{next(_ids)}"


def from_studies(studies: list[Study], path: str | None, kind: str = "json",
                 year: int | None = None) -> Document:
    entries = []
    for s in studies:
        site, name = split_title(s.title)
        entries.append(AssetEntry(new_key(), site, name, s, year))
    return Document(entries, path, kind)


def load_json(path: str | Path) -> Document:
    return from_studies(load_study_file(path), str(path), "json")


def save_json(doc: Document, path: str | Path) -> None:
    """Write every studied asset to one study file (written whole, then renamed into place)."""
    studies = doc.studies()
    if not studies:
        raise StudyError(str(path), "nothing to save: no asset has a study yet")
    titles = [s.title for s in studies]
    for t in titles:
        if titles.count(t) > 1:
            raise StudyError("Title", f"'{t}' is used by two assets; a study file needs distinct titles")
    for s in studies:
        check_study(s)
    text = dump_study_document(studies)
    target = Path(path)
    tmp = target.with_name(target.name + ".part")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(target)


def rename_alternative(study: Study, old: str, new: str) -> Study:
    """Rename one alternative (the uncertainty addresses follow the name)."""
    alts = [replace(a, name=new) if a.name == old else a for a in study.alternatives]
    unc = study.uncertainty
    if unc is not None:
        inputs = tuple(((new + a[len(old):]) if a.startswith(old + ".") else a, d)
                       for a, d in unc.inputs)
        unc = replace(unc, inputs=inputs)
    return replace(study, defender=alts[0], challengers=tuple(alts[1:]), uncertainty=unc)


def replace_alternative(study: Study, name: str, alt: Alternative) -> Study:
    """``study`` with alternative ``name`` replaced by ``alt``.  An uncertain input the new
    alternative no longer has (a gradient after switching to growth, say) is dropped with
    it; undo brings both back."""
    if study.defender.name == name:
        new = replace(study, defender=alt)
    else:
        new = replace(study, challengers=tuple(alt if c.name == name else c
                                               for c in study.challengers))
    unc = new.uncertainty
    if unc is not None:
        from core.risk.labels import uncertain_inputs

        valid = set(uncertain_inputs(new))
        inputs = tuple((a, d) for a, d in unc.inputs if a in valid)
        if inputs != unc.inputs:
            new = replace(new, uncertainty=replace(unc, inputs=inputs) if inputs else None)
    return new
