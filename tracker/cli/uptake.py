"""`tracker uptake` and `tracker report uptake`: cascade uptake figures among at-risk relatives.

Thin: parse the options, call :func:`tracker.services.uptake.uptake_data`, render a table,
JSON, CSV (:mod:`tracker.outputs.uptake_csv`) or the PDF (:mod:`tracker.outputs.uptake_pdf`).
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import Annotated

import typer

from tracker.cli.common import (
    AllOption,
    DbOption,
    JsonOption,
    SettingsOption,
    open_store,
    parse_day,
    print_json,
    print_table,
    table_limit,
)
from tracker.errors import UserError
from tracker.store.database import reading

FromOption = Annotated[
    str | None,
    typer.Option("--from", help="First day of the period, YYYY-MM-DD: families whose cascade started on or after it "
                                "(default: every cascade)."),
]  # fmt: skip
ToOption = Annotated[
    str | None,
    typer.Option("--to", help="Last day of the period, YYYY-MM-DD (default: today): cascades started by then, events "
                              "counted up to it, relatives not yet contacted or tested censored on it."),
]  # fmt: skip


def _period(from_: str | None, to: str | None) -> tuple[dt.date | None, dt.date]:
    start = parse_day(from_, "--from") if from_ is not None else None
    end = parse_day(to, "--to", dt.date.today())
    if start is not None and start > end:
        raise UserError("--from is after --to")
    return start, end


def _data(db: str | None, family: str | None, start: dt.date | None, end: dt.date) -> dict:
    from tracker.services import uptake as S

    engine = open_store(db)
    with reading(engine) as conn:
        return S.uptake_data(conn, family=family, start=start, end=end)


GROUP_WORDS = {"all": "all", "first": "first degree", "second": "second degree", "more_distant": "more distant",
               "unknown": "degree unknown"}  # fmt: skip


def _median(t: dict) -> str:
    if t["relatives"] == 0:
        return "—"
    if t["median_days"] is None:
        return "not reached"
    return f"{t['median_days']:.0f} d"


def _cell(p: dict) -> str:
    """'18/19 95%' (count/denominator and percent), '0/0 —', or 'not recorded'."""
    if not p["recorded"] or p["count"] is None:
        return "not recorded"
    return f"{p['count']}/{p['of']} " + ("—" if p["percent"] is None else f"{p['percent']:.0f}%")


LABELS = {"informed": "informed", "counselled": "counselled", "tested": "tested", "screened": "screened",
          "declined": "declined", "not_reachable": "not reachable", "via_family": "via family",
          "direct": "directly", "not_recorded": "route unknown"}  # fmt: skip


def _render(data: dict, limit: int | None = None) -> None:
    p = data["period"]
    who = f"family {data['family']}" if data["family"] else "the clinic"
    typer.echo(f"Cascade uptake for {who}: cascades started {p['from'] or 'any time'} to {p['to']}; events counted "
               f"up to {p['to']}. {data['families_counted']} families in the figures, "
               f"{data['clinic']['at_risk']} at-risk relatives.")  # fmt: skip
    groups = [("all", data["clinic"])] + list(data["by_degree"].items())
    heads = ["of at risk"] + [GROUP_WORDS.get(g, g) for g, _ in groups]
    rows = [["at risk (n)"] + [str(g["at_risk"]) for _, g in groups]]
    rows += [[LABELS[s]] + [_cell(g["counts"][s]) for _, g in groups] for s in data["clinic"]["counts"]]
    print_table("Relatives at risk, by degree of relationship to the proband (count/denominator percent)", heads, rows)
    rows = [["tested elsewhere"] + [_cell(g["tested_elsewhere"]) for _, g in groups]]
    rows += [[LABELS[r]] + [_cell(g["informed_route"][r]) for _, g in groups] for r in data["clinic"]["informed_route"]]
    print_table("Of the tested / of the informed", ["of tested/informed"] + heads[1:], rows)
    rows = []
    for k, words in (("time_to_first_contact", "to contact"), ("time_to_test", "to test")):
        rows.append([f"median {words}"] + [_median(g[k]) for _, g in groups])
        rows.append(["n / events / cens."] + [
            f"{g[k]['relatives']} / {g[k]['events']} / {g[k]['censored']}" for _, g in groups])  # fmt: skip
    print_table("Days from the proband's result (Kaplan-Meier median; censored at the period end)",
                ["time"] + heads[1:], rows)  # fmt: skip
    print_table(
        "Families", ["family", "proband", "start", "at risk", "informed", "tested", "counted"],
        [[f["family"], f["proband"], f["proband_result_date"] or "none", f["figures"]["at_risk"],
          _cell(f["figures"]["counts"]["informed"]), _cell(f["figures"]["counts"]["tested"]),
          "yes" if f["in_clinic_figures"] else "no"] for f in data["families"]],
        limit=limit, data="--json or --csv",
    )  # fmt: skip
    left = [f for f in data["families"] if not f["in_clinic_figures"]]
    for f in left if limit is None or len(left) <= limit else ():
        typer.echo(f"{f['family']} not counted: {f['left_out_reason']}")
    if limit is not None and len(left) > limit:
        typer.echo(f"{len(left)} families not counted (no cascade start date, or started outside the period): "
                   "--all or --json names them")  # fmt: skip
    if data["not_recorded"]:
        words = {"counselled": "counselling", "external": "tests done elsewhere", "route": "the informing route"}
        typer.echo(f"not recorded in this store: {', '.join(words.get(k, k) for k in data['not_recorded'])} "
                   "(shown as 'not recorded', not 0)")  # fmt: skip
    typer.echo(data["source"])
    for n in data["notes"]:
        typer.echo(f"note: {n}")
    for c in data["cautions"]:
        typer.echo(c)


def uptake(
    family: Annotated[str | None, typer.Option("--family", help="One family's figures (default: every family).")] = None,
    from_: FromOption = None,
    to: ToOption = None,
    csv_path: Annotated[Path | None, typer.Option("--csv", help="Also write the figures to this CSV file.")] = None,
    db: DbOption = None,
    json_out: JsonOption = False,
    all_: AllOption = False,
    settings: SettingsOption = None,
) -> None:
    """Cascade uptake among at-risk relatives: informed, counselled, tested, screened, declined, not reachable.

    Counts with their denominators, by degree of relationship to the proband
    (first, second, more distant), per family and for the clinic; the
    median time from the proband's result to first contact and to the test
    (Kaplan-Meier, days; relatives not yet contacted or tested are censored at
    the end of the period); who was informed through the family or directly.
    docs/uptake.md gives the definition behind each figure.

    Example: tracker uptake --from 2024-01-01 --to 2024-12-31 --csv uptake.csv
    """
    from tracker.services.uptake import public

    start, end = _period(from_, to)
    data = _data(db, family, start, end)
    if csv_path is not None:
        from tracker.outfiles import write_output
        from tracker.outputs.uptake_csv import uptake_csv

        write_output(csv_path, uptake_csv(public(data)), where="--csv", newline=None)
    if json_out:
        print_json(public(data))
        return
    _render(public(data), table_limit(all_, settings))
    if csv_path is not None:
        typer.echo(f"wrote {csv_path}")


def uptake_report(
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for uptake-FROM-TO.pdf (made if missing).")],
    from_: FromOption = None,
    to: ToOption = None,
    settings: SettingsOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Write the clinic's cascade uptake figures as DIR/uptake-FROM-TO.pdf (A4).

    Counts by degree of relationship, the informing route, a cascade funnel
    and the time-to-first-contact and time-to-test curves (Kaplan-Meier),
    each printed with the definition it uses; then the families. Codes only,
    never names.

    Example: tracker report uptake --from 2024-01-01 --to 2024-12-31 --out reports/
    """
    from tracker.outfiles import output_path
    from tracker.outputs import uptake_pdf as P
    from tracker.services.uptake import public
    from tracker.settings import load_settings

    start, end = _period(from_, to)
    conf = load_settings(settings)
    if out.exists() and not out.is_dir():
        raise UserError(f"--out {out} is a file; give a folder")
    data = _data(db, None, start, end)
    doc = P.UptakeDocument(clinic=conf.clinic.name, printed=dt.date.today(), report=data["_report"],
                           source=data["source"])  # fmt: skip
    out.mkdir(parents=True, exist_ok=True)
    path = out / P.file_name(start, end)
    replaced = path.exists()
    with output_path(path) as tmp:
        P.write_uptake_pdf(doc, tmp)
    if json_out:
        pub = public(data)
        print_json({"file": str(path), "period": pub["period"], "families_counted": pub["families_counted"],
                    "at_risk": pub["clinic"]["at_risk"], "cautions": pub["cautions"]})  # fmt: skip
        return
    typer.echo(f"{'replaced' if replaced else 'wrote'} {path}")
    for c in public(data)["cautions"]:
        typer.echo(c)


def register(app: typer.Typer) -> None:
    app.command("uptake")(uptake)


def register_report(report_app: typer.Typer) -> None:
    report_app.command("uptake")(uptake_report)
