"""``tenure new / add / import-assets / import-history / restudy / list`` (docs/method.md §6, §7).

Each command that writes opens the workbook for writing once and makes one
transaction, so a command that fails (or is killed) leaves the workbook as it
was. Everything is checked before the transaction starts where that is
possible. Bad input raises ``StudyError`` (exit 2, one ``error:`` line).
"""

from __future__ import annotations

import argparse
import contextlib
import dataclasses
import datetime as _dt
import json
import os
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from core.errors import StudyError
from core.estimates import Study

HISTORY_FIELDS = ("tag", "date", "year", "age", "amount", "kind")


# --------------------------------------------------------------------------- helpers
def _workbook_path(text: str) -> Path:
    path = Path(text)
    if not path.exists():
        raise StudyError(str(path), "no such file (make one with 'tenure new')")
    if path.is_dir():
        raise StudyError(str(path), "is a folder, not a workbook")
    return path


@contextlib.contextmanager
def _writing(text: str) -> Iterator[Any]:
    from core.workbook import Workbook

    with Workbook.open(_workbook_path(text), write=True) as wb:
        yield wb


def _date(text: str | None, where: str) -> _dt.date | None:
    if text is None:
        return None
    try:
        return _dt.date.fromisoformat(text)
    except ValueError:
        raise StudyError(where, f"'{text}' is not a date YYYY-MM-DD") from None


def _year(value: int | None, where: str = "--year") -> int | None:
    if value is not None and not 1900 <= value <= 2200:
        raise StudyError(where, f"must be a year from 1900 to 2200, not {value}")
    return value


def tagged_studies(path: str | Path, tag: str, year: int | None = None) -> list[Study]:
    """The study of asset ``tag`` in a workbook (``year`` or its current one); [] otherwise.

    This is how ``--study`` on study, memo and export accepts an asset tag.
    """
    file = Path(path)
    try:
        with file.open("rb") as fh:
            if fh.read(16) != b"SQLite format 3\x00":
                return []
    except OSError:
        return []
    from core.workbook import Workbook

    with Workbook.open(file, write=False) as wb:
        try:
            wb.asset(tag)
        except KeyError:
            return []
        years = wb.years(tag)
        if year is None:
            return [wb.study(tag)] if years else []
        return [wb.study(tag, year)] if year in years else []


# --------------------------------------------------------------------------- new
def cmd_new(args: argparse.Namespace) -> int:
    """``tenure new WORKBOOK``: an empty workbook, never over an existing file."""
    from core.workbook import Workbook

    out = Path(args.workbook)
    if out.exists() or out.is_symlink():
        raise StudyError(str(out), "already exists; not overwritten")
    if not out.parent.is_dir():
        raise StudyError(str(out), "the folder does not exist")
    year = _year(args.first_year, "--first-year")
    # built under a temporary name and linked into place: a file that appears
    # meanwhile is never overwritten, and a crash leaves no half-made workbook
    part = out.with_name(f".{out.name}.{os.getpid()}.new")
    try:
        try:
            Workbook.create(part, company=args.organisation, currency=args.currency,
                            first_year=year).close()
        except StudyError as exc:
            option = {"currency": "--currency", "first study year": "--first-year"}
            if exc.path in option:
                raise StudyError(option[exc.path], exc.message) from None
            raise
        try:
            os.link(part, out)
        except FileExistsError:
            raise StudyError(str(out), "already exists; not overwritten") from None
        except OSError:  # a file system without hard links
            if out.exists():
                raise StudyError(str(out), "already exists; not overwritten") from None
            os.replace(part, out)
    finally:
        with contextlib.suppress(OSError):
            part.unlink()
    with Workbook.open(out) as wb:
        print(f"{out}: new workbook of {wb.company or '(no organisation)'}, currency "
              f"{wb.currency or '(none)'}, first study year {wb.study_year}")
    return 0


# --------------------------------------------------------------------------- add
def cmd_add(args: argparse.Namespace) -> int:
    """``tenure add WORKBOOK STUDY.json --site SITE --tag TAG``."""
    from core.studyfile import load_study_file
    from core.workbook import Asset
    from core.workbook.fleetedit import add_studied_asset

    path = _workbook_path(args.workbook)
    studies = load_study_file(args.study_file)
    if args.study is not None:
        chosen = [s for s in studies if s.title == args.study]
        if not chosen:  # a title "Site — TAG description" also answers to its tag
            chosen = [s for s in studies
                      if s.title.rpartition(" — ")[2].split(" ", 1)[0] == args.study]
        if not chosen:
            titles = "; ".join(s.title for s in studies[:4]) + (
                f"; … {len(studies)} in all" if len(studies) > 4 else "")
            raise StudyError("--study", f"no study titled '{args.study}' (titles: {titles})")
        studies = chosen[:1]
    if len(studies) != 1:
        titles = "; ".join(s.title for s in studies)
        raise StudyError("--study", f"{args.study_file} holds {len(studies)} studies; choose "
                                    f"one with --study TITLE (titles: {titles})")
    study = studies[0]
    dep = None
    if args.depreciation is not None:
        from core.workbook.assetlist import parse_depreciation_text

        try:
            dep = parse_depreciation_text(args.depreciation)
        except ValueError as exc:
            raise StudyError("--depreciation", str(exc)) from None
    elif study.defender.depreciation is not None:  # the method, not this year's tax age
        dep = dataclasses.replace(study.defender.depreciation, basis=None, age=0)
    cost = args.original_cost
    if cost is None and study.defender.depreciation is not None:
        cost = study.defender.depreciation.basis
    asset = Asset(args.tag, args.description if args.description is not None
                  else study.defender.name, args.site, args.asset_class or "",
                  _date(args.in_service, "--in-service"), cost, "", dep)
    from core.workbook.model import _check_asset

    try:
        _check_asset(asset)
    except StudyError as exc:
        raise StudyError(f"--{exc.path.replace(' ', '-')}", exc.message) from None
    with _writing(str(path)) as wb:
        try:
            have = wb.asset(args.tag)
        except KeyError:
            have = None
        if have is None:
            year = add_studied_asset(wb, asset, study, _year(args.year))
        else:  # an asset of the register (e.g. from an imported list) gets its study
            year = int(wb.study_year) if args.year is None else int(args.year)
            _year(year)
            _check_same(have, args, asset)
            if year in wb.years(args.tag):
                raise StudyError("--tag", f"asset {args.tag} already has a study for {year}")
            from core.workbook.fleetedit import catalogue_challengers, result_snapshot

            snapshot = result_snapshot(study)
            with wb.transaction():
                catalogue_challengers(wb, study, have)
                wb.save_study(args.tag, year, study, snapshot)
        state = _state(wb, args.tag, year)
    print(f"{path}: added {args.tag} at {args.site} with its {year} study "
          f"'{study.title}' ({state})")
    return 0


def _check_same(have: Any, args: argparse.Namespace, asset: Any) -> None:
    """An existing tag takes the study only when the options agree with the register."""
    if have.retired:
        raise StudyError("--tag", f"asset {have.tag} is retired (read only)")
    given = {"--site": (have.site, asset.site),
             "--description": (have.description, args.description),
             "--in-service": (have.in_service, asset.in_service if args.in_service else None),
             "--asset-class": (have.asset_class, args.asset_class)}
    for option, (old, new) in given.items():
        if new is not None and new != old:
            raise StudyError(option, f"asset {have.tag} exists with {option[2:]} '{old}', not "
                                     f"'{new}'; the register is not changed by 'add'")


def _state(wb: Any, tag: str, year: int | None) -> str:
    from core.workbook.fleetedit import register_state

    if year is None:
        return register_state(None, None)
    rec = wb.record(tag, year)
    return register_state(rec.study, rec.result_json)


# --------------------------------------------------------------------------- import-assets
def cmd_import_assets(args: argparse.Namespace) -> int:
    from core.tables import parse_map, read_table
    from core.workbook.assetlist import (
        ASSET_FIELDS,
        AssetMapping,
        apply_asset_import,
        plan_asset_import,
    )

    path = _workbook_path(args.workbook)
    overrides = parse_map(args.map or [], ASSET_FIELDS)
    table = read_table(args.list)
    mapping = AssetMapping.guess(list(table.columns), overrides, dayfirst=args.dayfirst,
                                 decimal=args.decimal)
    from core.workbook import Workbook

    opened = Workbook.open(path, write=not args.dry_run)
    with opened as wb:
        plan = plan_asset_import(table, mapping, {a.tag: a for a in wb.assets()},
                                 Path(args.list).name)
        for line in plan.lines():
            print(line)
        if plan.rejected and plan.rows == len(plan.rejected):
            raise StudyError(plan.source, f"no row could be imported ({len(plan.rejected)} "
                                          f"rejected; first: {plan.rejected[0]})")
        print(plan.summary())
        if args.dry_run:
            print("dry run: nothing written")
            return 0
        written = apply_asset_import(wb, plan, update_existing=args.update_existing)
    if plan.changed and not args.update_existing:
        print(f"{len(plan.changed)} existing assets left as they were (use --update-existing "
              "to apply the changes listed)")
    print(f"{path}: {written} assets written")
    return 0


# --------------------------------------------------------------------------- import-history
def cmd_import_history(args: argparse.Namespace) -> int:
    from core.history import (
        ColumnMapping,
        fit_market_values,
        fit_operating_costs,
        guess_history_columns,
        import_history,
        yearly_totals,
    )
    from core.tables import parse_map, read_table
    from core.workbook import Workbook

    path = _workbook_path(args.workbook)
    overrides = parse_map(args.map or [], HISTORY_FIELDS)
    table = read_table(args.history)
    guess = guess_history_columns(list(table.columns))
    if any(overrides.get(k) for k in ("date", "year", "age")):
        for k in ("date", "year", "age"):
            guess[k] = None
    guess.update(overrides)
    if guess.get("amount") is None:
        raise StudyError(args.history, "no amount column found (--map COLUMN=amount)")
    amount = guess["amount"]
    assert amount is not None  # refused just above
    mapping = ColumnMapping(amount=amount, tag=guess.get("tag"), date=guess.get("date"),
                            year=guess.get("year"), age=guess.get("age"),
                            kind=guess.get("kind"), default_kind=args.kind,
                            default_tag=args.asset, dayfirst=args.dayfirst,
                            decimal=args.decimal)
    today = _dt.date.today()
    with Workbook.open(path, write=not args.dry_run) as wb:
        assets = {a.tag: a for a in wb.assets(include_retired=False)}
        report = import_history(table, mapping, {t: a.in_service for t, a in assets.items()},
                                Path(args.history).name, keep_duplicates=args.keep_duplicates,
                                keep_future=args.keep_future)
        for line in report.lines():
            print(line)
        for line in report.warning_lines():
            print(line)
        if report.rejected and not report.accepted:
            raise StudyError(Path(args.history).name, f"no row could be imported ("
                             f"{len(report.rejected)} rejected; first: {report.rejected[0]})")
        have = {(h.tag, h.kind, h.age, h.amount, h.source, h.source_row)
                for tag in {r.tag for r in report.accepted} for h in wb.history(tag)}
        fresh = [r for r in report.accepted
                 if (r.tag, r.kind, r.age, r.amount, r.source, r.source_row) not in have]
        print(report.summary() + f"; {report.decimal_note()}")
        if len(fresh) < len(report.accepted):
            print(f"{len(report.accepted) - len(fresh)} rows are already in the workbook "
                  "(same file row, asset, year of age and amount): not added again")
        all_rows: dict[str, list] = {}
        for tag in sorted({r.tag for r in report.accepted}):
            all_rows[tag] = list(wb.history(tag)) + [r for r in fresh if r.tag == tag]
        fits: list[tuple[str, int, Any]] = []
        for tag, rows in all_rows.items():
            year = wb.current_year(tag) or wb.study_year
            start = assets[tag].in_service
            # a year of age that has not ended yet is left out of the cost fit
            ended = [r for r in rows if r.kind != "resale" and (
                start is None or _add_years(start, r.age) <= today)]
            ages, totals = yearly_totals(ended)
            if len(ages) >= 3:
                fit = fit_operating_costs(ages, totals, "best", tag)
                fits.append((tag, year, fit))
            q_ages, q_values = yearly_totals(rows, ("resale",))
            if len(q_ages) >= 2 and (q_values > 0).all():
                fits.append((tag, year, fit_market_values(q_ages, q_values, tag=tag)))
        for tag, year, fit in fits:
            print(f"{tag} {year}: {_fit_text(fit)}")
        if args.dry_run:
            print("dry run: nothing written")
            return 0
        with wb.transaction():
            wb.add_history(fresh)
            for tag, year, fit in fits:
                wb.save_fit(tag, year, fit)
    print(f"{path}: {len(fresh)} history rows and {len(fits)} fits written")
    return 0


def _add_years(start: _dt.date, years: int) -> _dt.date:
    try:
        return start.replace(year=start.year + years)
    except ValueError:  # 29 February
        return start.replace(year=start.year + years, day=28)


def _fit_text(fit: Any) -> str:
    p = fit.params
    if fit.model == "arithmetic":
        body = f"operating cost C_j = {p['first']:,.2f} + {p['gradient']:,.2f}(j-1)"
    elif fit.model == "geometric":
        body = f"operating cost C_j = {p['first']:,.2f}(1 + {p['growth']:.4f})^(j-1)"
    else:
        body = f"market value MV_k = {p['price']:,.2f}(1 - {p['decline_rate']:.4f})^k"
    return f"{body}, R² {fit.r_squared:.3f}, {len(fit.ages)} years of age"


# --------------------------------------------------------------------------- restudy
def cmd_restudy(args: argparse.Namespace) -> int:
    from core.workbook.fleetedit import restudy

    path = _workbook_path(args.workbook)
    _year(args.year)
    with _writing(str(path)) as wb:
        report = restudy(wb, args.year, args.tag or ())
    for line in report.lines():
        print(line)
    print(f"{path}: {len(report.started)} studies of {report.year} started, "
          f"{len(report.skipped)} skipped")
    return 0


# --------------------------------------------------------------------------- list
def workbook_listing(path: str | Path) -> dict[str, Any]:
    """Sites and assets with state, study year and recommendation (what ``tenure list`` shows)."""
    from core.workbook import Workbook
    from core.workbook.fleetedit import register_state

    with Workbook.open(_workbook_path(str(path)), write=False) as wb:
        assets = []
        for a in wb.assets():
            year = wb.current_year(a.tag)
            rec = wb.record(a.tag, year) if year is not None else None
            assets.append({
                "tag": a.tag, "description": a.description, "site": a.site,
                "asset_class": a.asset_class,
                "in_service": a.in_service.isoformat() if a.in_service else None,
                "original_cost": a.original_cost,
                "state": "retired" if a.retired else "in service",
                "retired_on": a.retired_on.isoformat() if a.retired_on else None,
                "retired_reason": a.retired_reason or None,
                "study_year": year, "years": wb.years(a.tag),
                "study": rec.study.title if rec else None,
                "recommendation": register_state(rec.study if rec else None,
                                                 rec.result_json if rec else None)})
        sites = [{"name": s.name, "location": s.location,
                  "assets": sum(1 for a in assets if a["site"] == s.name)} for s in wb.sites()]
        return {"organisation": wb.company, "currency": wb.currency,
                "study_year": wb.study_year, "sites": sites, "assets": assets,
                "candidates": [{"name": c.name, "asset_class": c.asset_class,
                                "assets": list(c.tags)} for c in wb.candidates()]}


def cmd_list(args: argparse.Namespace) -> int:
    data = workbook_listing(args.workbook)
    if args.json:
        json.dump(data, sys.stdout, indent=2, ensure_ascii=False, allow_nan=False)
        sys.stdout.write("\n")
        return 0
    print(f"{data['organisation'] or '(no organisation)'}: study year {data['study_year']}, "
          f"currency {data['currency'] or '(none)'}")
    for site in data["sites"]:
        print(f"\n{site['name']}" + (f" ({site['location']})" if site["location"] else "")
              + f": {site['assets']} assets")
        for a in (x for x in data["assets"] if x["site"] == site["name"]):
            when = a["study_year"] if a["study_year"] is not None else "-"
            state = (f"retired {a['retired_on']} ({a['retired_reason']})" if a["retired_on"]
                     else a["recommendation"])
            print(f"  {a['tag']:<10} {a['description'][:38]:<38} {a['asset_class'][:16]:<16} "
                  f"{when!s:>5}  {state}")
    return 0


# --------------------------------------------------------------------------- parser
def register(subparsers: Any) -> None:
    """Add the fleet commands to the CLI."""
    p = subparsers.add_parser(
        "new", help="create an empty workbook",
        description="Create an empty .tenure workbook. An existing file is never overwritten.")
    p.add_argument("workbook", metavar="WORKBOOK", help="the workbook to create")
    p.add_argument("--organisation", default="", metavar="NAME", help="company or plant name")
    p.add_argument("--currency", default="", metavar="CODE", help="currency code or symbol")
    p.add_argument("--first-year", type=int, default=None, metavar="YEAR",
                   help="the first study year (default: this year)")
    p.set_defaults(func=cmd_new)

    p = subparsers.add_parser(
        "add", help="add an asset with its study",
        description="Add an asset to a workbook with the study of STUDY.json as its study for "
                    "the year (default: the workbook's study year). The site is created when "
                    "new. A tag already in the register (e.g. from an imported equipment list) "
                    "gets the study when the options agree with it and it has no study of that "
                    "year. The study's challengers enter the "
                    "candidate catalogue under the asset class when new there.")
    p.add_argument("workbook", metavar="WORKBOOK")
    p.add_argument("study_file", metavar="STUDY.json")
    p.add_argument("--site", required=True, metavar="SITE")
    p.add_argument("--tag", required=True, metavar="TAG")
    p.add_argument("--description", default=None, metavar="TEXT",
                   help="default: the defender's name")
    p.add_argument("--in-service", default=None, metavar="YYYY-MM-DD")
    p.add_argument("--year", type=int, default=None, metavar="YEAR")
    p.add_argument("--study", default=None, metavar="TITLE",
                   help="the study to take from a file that holds several (its title, or the "
                        "tag in a title 'Site — TAG description')")
    p.add_argument("--asset-class", default=None, metavar="CLASS")
    p.add_argument("--original-cost", type=float, default=None, metavar="AMOUNT",
                   help="original cost for tax (default: the defender's depreciation basis)")
    p.add_argument("--depreciation", default=None, metavar="TEXT",
                   help="tax depreciation, e.g. 'MACRS 7', 'SL 10', 'DB 8 25%%'")
    p.set_defaults(func=cmd_add)

    fields = ", ".join(("tag", "description", "site", "asset_class", "in_service",
                        "original_cost", "depreciation"))
    p = subparsers.add_parser(
        "import-assets", help="import an equipment list (CSV or XLSX)",
        description="Add the assets of an equipment list. Columns are guessed from the header "
                    f"names; set them with --map COLUMN=FIELD (fields: {fields}). Every "
                    "rejected row is listed with its row number and reason; a tag that "
                    "already exists is reported with what would change and left as it is "
                    "unless --update-existing is given. --dry-run shows the preview only.")
    p.add_argument("workbook", metavar="WORKBOOK")
    p.add_argument("list", metavar="LIST.csv|LIST.xlsx")
    p.add_argument("--map", action="append", metavar="COLUMN=FIELD")
    p.add_argument("--dry-run", action="store_true", help="show what would change; write nothing")
    p.add_argument("--update-existing", action="store_true",
                   help="also apply the listed changes to existing assets")
    p.add_argument("--dayfirst", action="store_true", help="read 03/04/2020 as 3 April")
    p.add_argument("--decimal", default="auto", choices=("auto", ".", ","),
                   help="the costs' decimal mark (default: read from the column)")
    p.set_defaults(func=cmd_import_assets)

    p = subparsers.add_parser(
        "import-history", help="import cost history and fit trends",
        description="Import work orders, yearly costs and resale quotes (CSV or XLSX) and fit "
                    "the operating-cost trend (arithmetic or geometric, the better R²) and the "
                    "market-value decline of each asset; the fits are kept with the asset's "
                    "current study. Fields for --map: tag, date, year, age, amount, kind. Rows "
                    "already imported from the same file are not added again.")
    p.add_argument("workbook", metavar="WORKBOOK")
    p.add_argument("history", metavar="HISTORY.csv|HISTORY.xlsx")
    p.add_argument("--map", action="append", metavar="COLUMN=FIELD")
    p.add_argument("--dry-run", action="store_true", help="show what would change; write nothing")
    p.add_argument("--kind", default="operating",
                   help="the kind of rows without a kind column (operating, maintenance, resale)")
    p.add_argument("--asset", default=None, metavar="TAG",
                   help="the asset of rows without a tag (a one-asset sheet)")
    p.add_argument("--dayfirst", action="store_true", help="read 03/04/2020 as 3 April")
    p.add_argument("--decimal", default="auto", choices=("auto", ".", ","))
    p.add_argument("--keep-duplicates", action="store_true",
                   help="import rows that exactly repeat an earlier row (left out by default)")
    p.add_argument("--keep-future", action="store_true",
                   help="import rows dated after today (left out by default)")
    p.set_defaults(func=cmd_import_history)

    p = subparsers.add_parser(
        "restudy", help="start a year's studies from last year's estimates",
        description="Start the studies of YEAR (default: this year) from each asset's latest "
                    "earlier study; earlier studies stay as they were. Assets that already "
                    "have a study of YEAR are skipped.")
    p.add_argument("workbook", metavar="WORKBOOK")
    p.add_argument("--year", type=int, default=None, metavar="YEAR")
    p.add_argument("--tag", action="append", metavar="TAG", help="only this asset (repeatable)")
    p.set_defaults(func=cmd_restudy)

    p = subparsers.add_parser(
        "list", help="list sites and assets with their state",
        description="List the sites and assets of a workbook with state, study year and "
                    "recommendation.")
    p.add_argument("workbook", metavar="WORKBOOK")
    p.add_argument("--json", action="store_true", help="one JSON object")
    p.set_defaults(func=cmd_list)
