"""Commands for loading and listing families: import, export, demo, families."""

from __future__ import annotations

import datetime as dt
from enum import Enum
from pathlib import Path
from typing import Annotated

import typer
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

from tracker.cli.common import (
    AllOption,
    DbOption,
    JsonOption,
    SettingsOption,
    engine_for,
    err,
    open_store,
    print_import_report,
    print_json,
    print_table,
    table_limit,
)
from tracker.errors import UserError
from tracker.outfiles import check_output
from tracker.io.kinds import IMPORT_ORDER
from tracker.lazy import lazy_module
from tracker.store import migrate
from tracker.store.database import locate, make_engine, reading, writing

csv_import = lazy_module("tracker.io.csv_import")
export = lazy_module("tracker.io.export")
pseudonymise = lazy_module("tracker.io.pseudonymise")
repo = lazy_module("tracker.store.repository")

ImportKind = Enum("ImportKind", {k.replace("-", "_"): k for k in (*IMPORT_ORDER, "all", "fhir", "dicom-sr")}, type=str)
ExportKind = Enum("ExportKind", {k.replace("-", "_"): k for k in (*IMPORT_ORDER, "all")}, type=str)

PROGRESS_THRESHOLD = 20_000  # rows; smaller files finish before a bar would be seen


def _progress_bar(total: int):
    return Progress(
        TextColumn("{task.description}"),
        BarColumn(),
        MofNCompleteColumn(),
        TimeRemainingColumn(),
        console=err,
        transient=True,
        disable=total < PROGRESS_THRESHOLD or not err.is_terminal,  # no bar (nor its blank line) in logs
    )


def import_(
    kind: Annotated[ImportKind, typer.Argument(help="What the file holds; `all` reads a folder of layout files; "
                                               "`fhir` an HL7 FHIR R4B Bundle (JSON) of one family; "
                                               "`dicom-sr` reads DICOM echocardiography measurement reports.")],
    paths: Annotated[list[Path], typer.Argument(help="CSV file (folder for `all`, JSON file for `fhir`; one or more "
                                                "files for `dicom-sr`).", metavar="PATH...")],
    dry_run: Annotated[bool, typer.Option("--dry-run", help="Check only; write nothing.")] = False,
    user: Annotated[str | None, typer.Option("--user", help="Who is importing (default: the OS user).")] = None,
    person: Annotated[str | None, typer.Option("--person", metavar="CODE", help="With dicom-sr: the person the "
                                               "reports are for (else matched by their stored external_id).")] = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Check a CSV file completely, then store it in one transaction (all or nothing).

    Rows already stored with the same values are skipped, so importing a file
    twice adds nothing. Layouts: docs/data-layouts.md.

    Example: tracker import people demo_family/people.csv --dry-run

    Example: tracker import fhir HV01.fhir.json
    """
    if kind.value == "dicom-sr":
        from tracker.cli.import_dicom import import_dicom_sr

        return import_dicom_sr(paths, person=person, dry_run=dry_run, user=user, db=db, json_out=json_out)
    if person is not None:
        raise UserError("option --person: is only for `import dicom-sr`")
    if len(paths) != 1:
        raise UserError(f"import {kind.value}: give one "
                        f"{ {'all': 'folder', 'fhir': 'JSON file'}.get(kind.value, 'CSV file') }")
    path = paths[0]
    engine = open_store(db)
    kind = kind.value
    total = _count_rows(path) if kind != "fhir" else 0
    summaries: list[csv_import.ImportSummary] = []
    with _progress_bar(total) as bar:
        task = bar.add_task(f"importing {path.name}", total=total)
        advance = lambda n: bar.advance(task, n)  # noqa: E731
        from tracker.services import imports as SI

        summaries = SI.import_path(engine, kind, path, user=user, dry_run=dry_run, progress=advance)
    _report(summaries, dry_run, json_out)


def _count_rows(path: Path) -> int:
    try:
        if path.is_file():
            with path.open("rb") as fh:
                return max(sum(1 for _ in fh) - 1, 0)
    except OSError:
        pass
    return 0


def _report(summaries, dry_run: bool, json_out: bool) -> None:
    print_import_report(summaries, dry_run, json_out, lambda s, verb: [
        f"{s.file} ({s.kind}): {s.rows_read} rows checked, {verb} {s.rows_added}, {s.rows_already_stored} already stored"
    ])


# The same modes as tracker.io.pseudonymise.DATE_MODES (tests/test_startup.py checks), written out so that
# listing the options does not load the extract code.
DatesMode = Enum("DatesMode", {m: m for m in ("ages", "shift")}, type=str)


def export_(
    kind: Annotated[
        ExportKind | None, typer.Argument(help="What to export; `all` writes every layout file (not with --fhir).")
    ] = None,
    out: Annotated[Path, typer.Option("--out", "-o", help="CSV file (folder for `all`; JSON file for --fhir).")] = ...,
    fhir_family: Annotated[
        str | None,
        typer.Option("--fhir", metavar="FAMILY", help="Write this family as an HL7 FHIR R4B Bundle (JSON) instead "
                     "of CSV: the same as `tracker export-fhir FAMILY`."),
    ] = None,
    phenopacket_family: Annotated[
        str | None,
        typer.Option("--phenopacket", metavar="FAMILY", help="Write this family as a GA4GH Phenopackets v2 Family "
                     "(JSON); with --pseudonymise, codes are keyed-hash codes."),
    ] = None,
    ped_family: Annotated[
        str | None,
        typer.Option("--ped", metavar="FAMILY", help="Write this family as a six-column PED/LINKAGE file "
                     "(family, person, father, mother, sex, affection); with --pseudonymise, keyed-hash codes."),
    ] = None,
    include_names: Annotated[
        bool, typer.Option("--include-names", help="With --fhir: put given and family names in the file.")
    ] = False,
    claim_profiles: Annotated[
        bool, typer.Option("--claim-profiles", help="With --fhir: set meta.profile to the Genomics Reporting IG "
                           "profiles (not checked with the HL7 validator).")
    ] = False,
    pseudonymise_: Annotated[
        bool,
        typer.Option(
            "--pseudonymise",
            help="Write a research extract instead (with `all`): keyed-hash codes, dates as ages "
            "or shifted, free text dropped, a README and a small-cell check. With --phenopacket or "
            "--ped: keyed-hash family and person codes. Needs the settings "
            "privacy section (pseudonym_key_file). See docs/privacy.md.",
        ),
    ] = False,
    dates: Annotated[
        DatesMode | None,
        typer.Option("--dates", help="With --pseudonymise: `ages` (age at each date; default) or "
                     "`shift` (each family's dates moved by one keyed shift of up to 180 days)."),
    ] = None,
    min_cell: Annotated[
        int | None,
        typer.Option("--min-cell", min=1, help="With --pseudonymise: warn about cells of sex x age band x "
                     "gene with fewer people (default: settings, else 5)."),
    ] = None,
    settings: SettingsOption = None,
    force: Annotated[bool, typer.Option("--force", help="Replace existing files.")] = False,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Write stored records in the import layout (import -> export -> import is exact).
    An existing file is replaced only with --force.

    With --pseudonymise, write a pseudonymised research extract to a folder. With
    --fhir FAMILY, write that family as an HL7 FHIR R4B Bundle (as `tracker export-fhir`).

    Example: tracker export studies --out studies.csv

    Example: tracker export all --out extract/ --pseudonymise --dates shift --settings clinic.toml

    Example: tracker export --fhir HV01 --out HV01.fhir.json

    Example: tracker export --phenopacket HV01 --out HV01.phenopacket.json

    Example: tracker export --ped HV01 --out HV01.ped
    """
    if phenopacket_family is not None or ped_family is not None:
        _export_family_file(phenopacket_family, ped_family, kind, out, pseudonymise_, fhir_family, include_names,
                            claim_profiles, dates, min_cell, settings, force, db, json_out)  # fmt: skip
        return
    if fhir_family is not None:
        if kind is not None or pseudonymise_ or dates is not None or min_cell is not None:
            raise UserError("--fhir writes one family's FHIR Bundle: give no CSV kind, --pseudonymise, --dates or --min-cell")
        from tracker.cli.export_fhir import export_fhir_command

        export_fhir_command(fhir_family, out, include_names=include_names, claim_profiles=claim_profiles,
                            db=db, json_out=json_out, force=force)  # fmt: skip
        return
    if kind is None:
        raise UserError("say what to export: a layout name, `all`, --fhir FAMILY, --phenopacket FAMILY or --ped FAMILY")
    if include_names or claim_profiles:
        raise UserError("--include-names and --claim-profiles need --fhir")
    kind = kind.value
    if pseudonymise_:
        _export_pseudonymised(kind, out, dates.value if dates else "ages", min_cell, settings, db, json_out)
        return
    if dates is not None or min_cell is not None:
        raise UserError("--dates and --min-cell need --pseudonymise")
    if kind != "all":
        if out.is_dir():
            raise UserError(f"--out {out} is a folder; give a file name")
        check_output(out, force=force)
    engine = open_store(db)
    with reading(engine) as conn:
        if kind == "all":
            counts = export.export_all(conn, out, force=force)
        else:
            counts = {kind: export.export_kind(conn, kind, out)}
    if json_out:
        print_json({"out": str(out), "rows": counts})
    else:
        for k, n in counts.items():
            typer.echo(f"{k}: {n} rows written")


def _export_family_file(phenopacket_family, ped_family, kind, out: Path, pseudonymise_: bool, fhir_family,
                        include_names, claim_profiles, dates, min_cell, settings_path, force, db, json_out) -> None:  # fmt: skip
    from tracker.cli.export_family import export_family_file
    from tracker.settings import load_settings

    if phenopacket_family is not None and ped_family is not None:
        raise UserError("give one of --phenopacket and --ped")
    option = "--phenopacket" if phenopacket_family is not None else "--ped"
    if kind is not None or fhir_family is not None or include_names or claim_profiles or dates or min_cell:
        raise UserError(f"{option} writes one family's file: give no CSV kind, --fhir, --include-names, "
                        "--claim-profiles, --dates or --min-cell")  # fmt: skip
    key = load_settings(settings_path).privacy.key() if pseudonymise_ else None
    fmt, family = ("phenopacket", phenopacket_family) if phenopacket_family is not None else ("ped", ped_family)
    engine = open_store(db)
    with reading(engine) as conn:
        summary = export_family_file(conn, fmt, family, out, key=key, force=force)
    if json_out:
        print_json(summary)
    else:
        what = "GA4GH Phenopackets v2 Family" if fmt == "phenopacket" else "PED/LINKAGE pedigree"
        pseudo = " (pseudonymised codes)" if key else ""
        typer.echo(f"{summary['out']}: {what} of family {family}, {summary['members']} members{pseudo}")


def _export_pseudonymised(kind, out: Path, dates: str, min_cell, settings_path, db, json_out: bool) -> None:
    if kind != "all":
        raise UserError("--pseudonymise writes a whole extract: use `tracker export all --out FOLDER --pseudonymise`")
    from tracker.settings import load_settings

    conf = load_settings(settings_path).privacy
    key = conf.key()
    threshold = min_cell if min_cell is not None else conf.small_cell_threshold
    pseudonymise.check_folder(out)
    engine = open_store(db)
    with reading(engine) as conn:
        from tracker.io.layouts import CONTACT_LAYOUTS

        frames = {k: export.export_frame(conn, k) if k in CONTACT_LAYOUTS else repo.LOADERS[k](conn)
                  for k in IMPORT_ORDER}  # fmt: skip
    extract = pseudonymise.pseudonymise(frames, key, dates=dates, min_cell=threshold, today=dt.date.today())
    counts = pseudonymise.write_extract(extract, out)
    small = extract.small_cells
    warning = None
    if small.below:
        warning = (
            f"{small.below} of {small.cells} cells of {small.categories} hold fewer than "
            f"{small.threshold} people; review them before the extract leaves the clinic"
        )
        typer.echo(f"warning: {warning}", err=True)
    if json_out:
        print_json({
            "out": str(out),
            "pseudonymised": True,
            "dates": dates,
            "rows": counts,
            "people": extract.people,
            "families": extract.families,
            "columns_dropped": extract.dropped,
            "small_cells": small.as_dict(),
            "warnings": 1 if warning else 0,
            "warning": warning,
        })
    else:
        for k, n in counts.items():
            typer.echo(f"{k}: {n} rows written")
        typer.echo(f"pseudonymised extract ({dates}) in {out}; see {out / pseudonymise.MANIFEST}")


def demo_folder() -> Path:
    import tracker

    here = Path(tracker.__file__).resolve().parent
    for candidate in (here / "_bundled" / "demo_family", here.parent / "demo_family"):
        if (candidate / "people.csv").exists():
            return candidate
    raise UserError("the demo_family folder is missing from this installation")


def demo(
    db: DbOption = None,
    json_out: JsonOption = False,
    serve: Annotated[bool, typer.Option("--serve", help="Then add one invented account per role, print their "
                                        "one-time passwords once, and serve the web interface.")] = False,
    host: Annotated[str, typer.Option("--host", help="With --serve: address to listen on.")] = "127.0.0.1",
    port: Annotated[int, typer.Option("--port", min=1, max=65535, help="With --serve: TCP port.")] = 8000,
    settings: SettingsOption = None,
) -> None:
    """Build a database from the invented demo families and print what it holds.

    All names, places and the clinic are invented. Default database: ./tracker.sqlite.
    Refused (nothing written) on a database that holds records other than the demo's:
    give another file with --db.

    Example: tracker demo --db demo.sqlite

    Example: tracker demo --db demo.sqlite --serve --port 8000
    """
    location = locate(db)
    folder = demo_folder()
    _refuse_other_families(db, location, folder)
    engine = engine_for(db, create=True)
    migrate.upgrade(engine)
    with writing(engine) as conn:
        imported = csv_import.import_folder(conn, folder, user="demo")
    result = _summary(engine)
    result["database"] = location.describe()
    result["files"] = [s.as_dict() for s in imported]
    if serve:
        from tracker.services import accounts as AC

        with writing(engine) as conn:
            result["accounts"] = AC.demo_accounts(conn)
        result["address"] = f"http://{host}:{port}/"
    if json_out:
        print_json(result)
    else:
        typer.echo(f"Demo database: {location.describe()} (invented families; no real patient data)")
        _print_summary(result)
        if not serve:
            typer.echo("Next: `tracker families`, `tracker export people --out people.csv`, `tracker --help`")
    if serve:
        import os

        from tracker.cli.web import run_server

        if settings is None and not os.environ.get("TRACKER_SETTINGS"):
            settings = folder / "clinic.toml"  # the invented demo clinic (letters need its contact details)
        if not json_out:
            typer.echo(f"Web interface: {result['address']}  (invented demonstration accounts; passwords shown once)")
            for a in result["accounts"]:
                typer.echo(f"  {a['name']:<20} {a['role']:<13} one-time password {a['one_time_password']}")
        run_server(db, settings, host, port)


def _demo_codes(folder: Path, name: str, column: str) -> set[str]:
    import csv

    with (folder / name).open(encoding="utf-8", newline="") as f:
        return {row[column].strip() for row in csv.DictReader(f) if row.get(column)}


def _refuse_other_families(db: str | None, location, folder: Path) -> None:
    """Refuse (one line, nothing written) unless the database is new, empty, or holds only the demo.

    "Only the demo": every family and person code in the database is one of the demo's
    (records added to demo people since still count as the demo).
    """
    from tracker.services.cohort import stored_codes

    if location.sqlite_path is not None and (
        not location.sqlite_path.exists() or location.sqlite_path.stat().st_size == 0
    ):
        return
    engine = engine_for(db)
    with engine.connect() as conn:
        codes = stored_codes(conn)
    if codes is None:
        return
    families, people = codes
    others = sorted(families - _demo_codes(folder, "families.csv", "family")) + sorted(
        people - _demo_codes(folder, "people.csv", "person")
    )
    if others:
        shown = ", ".join(others[:3]) + (", ..." if len(others) > 3 else "")
        raise UserError(
            f"--db: {location.describe()} already holds records that are not the demo ({shown}): "
            "the invented families go only into a new database or one holding only the demo; "
            "pick another file, e.g. `tracker demo --db demo.sqlite`"
        )


def _summary(engine) -> dict:
    from tracker.services.cohort import cohort_summary

    with reading(engine) as conn:
        return cohort_summary(conn)


def _print_summary(result: dict, limit: int | None = None) -> None:
    t = result["totals"]
    typer.echo(
        f"{t['families']} families, {t['people']} people (+{t['placeholders']} placeholders), "
        f"{t['studies']} studies with {t['measurements']} values, {t['first_study']} to {t['last_study']}"
    )
    print_table(
        None,
        ["family", "proband", "variant (current class)", "members", "carriers", "non-carriers", "studies"],
        [
            [f["family"], f["proband"], f["variant"], f["members"], f["carriers"], f["non_carriers"], f["studies"]]
            for f in result["families"]
        ],
        limit=limit,
    )


def families_(db: DbOption = None, json_out: JsonOption = False, all_: AllOption = False,
              settings: SettingsOption = None) -> None:
    """List the families with their variant, members, genotype results and studies.

    The table shows the first families (by code) and a count of the rest; --all shows every one.

    Example: tracker families --json
    """
    limit = None if json_out else table_limit(all_, settings)
    result = _summary(open_store(db))
    if json_out:
        print_json(result)
    else:
        _print_summary(result, limit)


def register(app: typer.Typer) -> None:
    from tracker.cli.export_fhir import export_fhir_command
    from tracker.cli.synth import synth

    app.command("import")(import_)
    app.command("export")(export_)
    app.command("export-fhir")(export_fhir_command)
    app.command("synth")(synth)
    app.command("demo")(demo)
    app.command("families")(families_)
