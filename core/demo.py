"""The demo fleet: Harrowgate Fabrication Ltd. (an invented company; every figure is fictional).

The source data is readable JSON and CSV in ``resources/demo/`` (read with
:mod:`importlib.resources`, so it is found inside an installed wheel or bundle too):

* ``fleet.json``: company, sites, challenger candidates by asset class, and
  each asset with its register entry and defender estimates (and, for some,
  last year's estimates, so a restudy history is there to look at);
* ``cost_history.csv``: work orders and yearly operating cost per asset;
* ``resale_quotes.csv``: dealer quotes for used machines.

:func:`build_demo` turns that into a workbook through the ordinary workbook
and history APIs, running every study with ``core.study.run_study`` so each
stored study carries its result snapshot. ``tenure demo OUT.tenure`` calls it.
"""

from __future__ import annotations

import argparse
import shutil
from importlib.resources import as_file, files
from importlib.resources.abc import Traversable
from pathlib import Path
from typing import Any

from core.errors import StudyError
from core.estimates import Study
from core.studyfile import loads_json, parse_study

DEMO_DIR: Traversable = files("resources").joinpath("demo")
DEMO_NAME = "Harrowgate demo fleet.tenure"


def _data_dir(data_dir: str | Path | Traversable | None) -> Traversable:
    if data_dir is None:
        return DEMO_DIR
    return Path(data_dir) if isinstance(data_dir, str) else data_dir


def load_fleet(data_dir: str | Path | Traversable | None = None) -> dict[str, Any]:
    """The parsed ``fleet.json``."""
    path = _data_dir(data_dir) / "fleet.json"
    try:
        return loads_json(path.read_text(encoding="utf-8"), str(path))
    except (OSError, ValueError) as exc:
        raise StudyError(str(path), f"cannot read the demo fleet ({exc})") from None


def asset_study(fleet: dict[str, Any], asset: dict[str, Any], defender: dict[str, Any] | None = None,
                title_year: int | None = None) -> Study:
    """The study of one demo asset: its defender against its linked candidates."""
    by_name = {c["challenger"]["name"]: c["challenger"] for c in fleet["candidates"]}
    obj: dict[str, Any] = {
        "title": f"{asset['site']} — {asset['tag']} {asset['description']}",
        "marr": asset.get("marr", fleet["marr"]),
        "study_period": asset.get("study_period"),
        "defender": defender or asset["defender"],
        "challengers": [by_name[n] for n in asset["candidates"]],
    }
    if asset.get("after_tax"):
        obj["tax"] = fleet["tax"]
    if asset.get("notes"):
        obj["notes"] = asset["notes"]
    if asset.get("technology"):
        obj["technology"] = asset["technology"]
    if asset.get("uncertainty") and defender is None:  # this year's study only
        obj["uncertainty"] = asset["uncertainty"]
    return parse_study(obj, f"fleet.json: {asset['tag']}")


def demo_studies(data_dir: str | Path | None = None) -> list[Study]:
    """The current-year study of every demo asset (no workbook needed)."""
    fleet = load_fleet(data_dir)
    return [asset_study(fleet, a) for a in fleet["assets"]]


def build_demo(out: str | Path, data_dir: str | Path | None = None) -> Path:
    """Write the demo workbook to ``out`` (refused if it exists); returns its path.

    The workbook is built beside ``out`` under a temporary name and renamed
    when complete, so a failure never leaves a half-built demo.
    """
    from core.workbook import WorkbookError  # only when a workbook is made

    out = Path(out)
    if out.exists():
        raise WorkbookError(out, "already exists; not overwritten")
    part = out.with_name(out.name + ".building")
    for stale in (part, part.with_name(part.name + ".lock")):
        if stale.exists():
            stale.unlink()
    try:
        _build(part, _data_dir(data_dir))
        part.replace(out)
    except BaseException:
        if part.exists():
            part.unlink()
        raise
    return out


def _build(out: Path, src: Traversable) -> None:
    from datetime import date

    from core.history import (
        ColumnMapping,
        fit_market_values,
        fit_operating_costs,
        import_file,
        yearly_totals,
    )
    from core.jsonout import study_json
    from core.study import run_study
    from core.workbook import Asset, Site, Workbook  # only when a workbook is made

    # core.workbook is imported where a workbook is made or opened, so `tenure study` on a
    # study file registers this command without loading it.

    fleet = load_fleet(src)
    year = int(fleet["year"])
    with Workbook.create(out, company=fleet["company"]) as wb, wb.transaction():
        wb.set_meta("note", fleet.get("note", ""))
        wb.set_meta("current_year", str(year))
        wb.set_meta("currency", fleet.get("currency", "£"))  # one currency per workbook
        for s in fleet["sites"]:
            wb.add_site(Site(s["name"], s.get("location", "")))
        for a in fleet["assets"]:
            wb.add_asset(Asset(a["tag"], a["description"], a["site"], a["asset_class"],
                               date.fromisoformat(a["in_service"]), a.get("original_cost"),
                               a.get("register_notes", "")))
        probe = {"title": "probe", "marr": 0.1,
                 "defender": {"name": "probe", "market_value": 1, "max_life": 1,
                              "market_values": {"decline_rate": 0},
                              "operating_costs": {"first": 0}}}
        for c in fleet["candidates"]:
            alt = parse_study({**probe, "challengers": [c["challenger"]]}, "fleet.json").challengers[0]
            tags = [a["tag"] for a in fleet["assets"] if alt.name in a["candidates"]]
            wb.add_candidate(alt, c["asset_class"], tags)
        for a in fleet["assets"]:
            for prev in a.get("previous", []):
                study = asset_study(fleet, a, prev["defender"])
                wb.save_study(a["tag"], int(prev["year"]), study, study_json(run_study(study)))
            study = asset_study(fleet, a)
            wb.save_study(a["tag"], year, study, study_json(run_study(study)))
        in_service = {a.tag: a.in_service for a in wb.assets()}
        with as_file(src / "cost_history.csv") as cost_file:
            costs = import_file(cost_file, ColumnMapping(tag="Asset", date="Date",
                                                         amount="Amount", kind="Kind"), in_service)
        with as_file(src / "resale_quotes.csv") as quote_file:
            quotes = import_file(quote_file, ColumnMapping(tag="Asset", date="Quote date",
                                                           amount="Quote", default_kind="resale"),
                                 in_service)
        for report in (costs, quotes):
            if report.rejected or report.flagged:
                raise StudyError(report.source, "; ".join(
                    str(r) for r in (*report.rejected, *report.flagged)))
            wb.add_history(report.accepted)
        for a in fleet["assets"]:
            rows = wb.history(a["tag"])
            ages, totals = yearly_totals(rows)  # the demo history holds complete years only
            if len(ages) >= 3:
                wb.save_fit(a["tag"], year, fit_operating_costs(ages, totals, "best", a["tag"]))
            q_ages, q_values = yearly_totals(rows, ("resale",))
            if len(q_ages) >= 2:
                wb.save_fit(a["tag"], year, fit_market_values(q_ages, q_values, tag=a["tag"]))


def demo_workbook_path() -> Path:
    """The user's copy of the demo workbook (built on first use) in the user data folder."""
    from platformdirs import user_data_dir

    from core.workbook import WorkbookError  # only when a workbook is made


    folder = Path(user_data_dir("tenure", appauthor=False))
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / DEMO_NAME
    if path.exists():
        try:
            from core.workbook import check_file

            check_file(path)
            return path
        except WorkbookError:
            broken = path.with_name(path.name + ".damaged")
            shutil.move(path, broken)
    return build_demo(path)


def run_demo(args: argparse.Namespace) -> int:
    """``tenure demo OUT.tenure``: write the demo workbook."""
    from core.workbook import Workbook  # only when a workbook is made

    out = Path(args.out)
    if out.exists() and not args.force:
        raise StudyError(str(out), "already exists (use --force to overwrite)")
    if out.exists():
        if out.is_dir():
            raise StudyError(str(out), "is a folder")
        out.unlink()
    if not out.parent.exists():
        raise StudyError(str(out), "the folder does not exist")
    build_demo(out)
    with Workbook.open(out) as wb:
        n = len(wb.studies())
        print(f"{out}: demo workbook of {wb.company} with {len(wb.assets())} assets at "
              f"{len(wb.sites())} sites, {n} current studies")
    return 0


def register(subparsers: Any) -> None:
    """Add ``tenure demo OUT.tenure`` to the CLI."""
    p = subparsers.add_parser(
        "demo", help="write the demo workbook (an invented company)",
        description="Write the demo workbook of Harrowgate Fabrication Ltd., an invented "
                    "company: three sites, fourteen machines of five kinds, this year's and "
                    "last year's studies, and imported cost history.")
    p.add_argument("out", metavar="OUT.tenure", help="the workbook to write")
    p.add_argument("--force", action="store_true", help="overwrite OUT if it exists")
    p.set_defaults(func=run_demo)
