"""Commands for cascade testing, reclassification and recalls: cascade, reclassify, tasks, recall, worklist.

Thin: parsing, rendering and exit codes. ``recall``, ``cascade`` and ``reclassify`` get their data
from the service layer (:mod:`tracker.services.recall`, :mod:`tracker.services.cascade`,
:mod:`tracker.services.reclassification`), which reads only the families concerned; the worklist
reads the cohort; the task list (table ``impact_item``) is :mod:`tracker.services.tasks`.
"""

from __future__ import annotations

import datetime as dt
import math
from enum import Enum
from pathlib import Path
from typing import Annotated

import typer
from tracker.cli.common import DbOption, JsonOption, SettingsOption, open_store, parse_day, print_json, print_table
from tracker.cli.common import AllOption, more_rows_line, table_limit
from tracker.domain.genetics import ACMG_CLASSES
from tracker.engines.cascade import RULE_SETS as CASCADE_RULE_SETS
from tracker.engines.schedule import CAUTIONS
from tracker.errors import UserError
from tracker.lazy import lazy_module
from tracker.settings import load_settings
from tracker.outfiles import write_output
from tracker.store.database import check_row_id, reading, writing

ics = lazy_module("tracker.outputs.ics")
audit = lazy_module("tracker.store.audit")

# Names that moved to the service layer, kept for callers (`tracker.cli.recall._load`, ...); the services
# (and SQLAlchemy with the table models) are imported on first use, so `tracker --help` stays light.
_MOVED = {
    "tracker.services.cascade": ("_contact_dates", "_rereview_dict", "_screening_item", "_testing_item",
                                 "_variant_dict", "_variant_rereview"),
    "tracker.services.reclassification": ("_reclassify_one", "_targets"),
    "tracker.services.worklist": ("_entry", "due_proposals", "worklist_lists"),
    "tracker.services.recall": ("TREND_CHUNK_PEOPLE", "_batches", "_family_state", "_Frames", "_iso", "_load",
                                "_open_task_people", "_progression_text", "_proposal_dict", "_reason",
                                "_release_basis", "_risk_scd", "_unscheduled_dict", "_with_trends",
                                "with_trend_texts"),
}  # fmt: skip
_MOVED_FROM = {name: module for module, names in _MOVED.items() for name in names}


def __getattr__(name: str):
    if name in _MOVED_FROM:
        import importlib

        return getattr(importlib.import_module(_MOVED_FROM[name]), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def _recall_rules(settings, guideline):
    from tracker.services.recall import _recall_rules as rules

    return rules(settings, guideline)


AcmgClass = Enum("AcmgClass", {c: c for c in ACMG_CLASSES}, type=str)

AsOfOption = Annotated[
    str | None,
    typer.Option("--as-of", help="Date of the plan, YYYY-MM-DD (default: today); later records are left out."),
]
GuidelineOption = Annotated[
    str | None,
    typer.Option("--guideline", help="Rule set id, overriding the settings file's [schedule] guideline."),
]


# --------------------------------------------------------------------------- small helpers


_day = parse_day  # the name this module's commands use


# --------------------------------------------------------------------------- cascade


def cascade(
    family: Annotated[str, typer.Argument(help="Family code.")],
    as_of: AsOfOption = None,
    guideline: Annotated[
        str | None,
        typer.Option("--guideline", help=f"Cascade rule set: {', '.join(CASCADE_RULE_SETS)} (default: the settings guideline)."),
    ] = None,
    settings: SettingsOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Cascade plan for one family: who to offer predictive testing, clinical screening, who is released, and the gaps.

    Gaps are relatives never contacted, contacted but never seen, lost to
    follow-up, or who declined (declined relatives are listed, never recalled).

    Example: tracker cascade HV01 --settings demo_family/clinic.toml
    """
    on = _day(as_of, "--as-of", dt.date.today())
    conf = load_settings(settings)
    gid = guideline or conf.guideline
    if gid not in CASCADE_RULE_SETS:
        raise UserError(
            f"no cascade rule set for guideline {gid!r}: give --guideline one of {', '.join(CASCADE_RULE_SETS)}"
        )
    from tracker.services import cascade as SC

    engine = open_store(db)
    with reading(engine) as conn:
        result = SC.family_cascade(conn, family, on, conf, gid)
    notes = result["notes"]
    if json_out:
        print_json(result)
        return
    v = result["variant"]
    typer.echo(f"Family {family}, cascade plan on {result['as_of']} under {result['guideline_title']}")
    typer.echo(f"Variant: {v['gene']} {v['variant']} ({v['acmg_class']}, {v['classified_on']})" if v else "Variant: none recorded")
    for feat, why in result["family_features"].items():
        typer.echo(f"  family feature {feat}: {why}")
    _testing_table("Eligible for predictive testing", result["predictive_testing"])
    _testing_table("Deferred (eligible from a later date)", result["deferred"])
    _testing_table("Segregation testing (affected relatives, VUS)", result["segregation_testing"])
    _screen_table("Clinical screening", result["clinical_screening"])
    _screen_table("Released from screening", result["released"])
    print_table("Gaps", ["person", "gap", "reason"], [[g["person"], g["gap"], g["reason"]] for g in result["gaps"]])
    for n in notes:
        typer.echo(f"note: {n}")
    typer.echo(result["caution"])


def _testing_table(title: str, items: list[dict]) -> None:
    if not items:
        typer.echo(f"{title}: none")
        return
    print_table(
        title,
        ["person", "P(carrier)", "age", "recommendation", "eligible from", "reason"],
        [[i["person"], i["probability_text"], i["age_years"], i["recommendation"], i["eligible_from"],
          "; ".join([i["reason"], *i["notes"]])] for i in items],
    )  # fmt: skip
    _sources(items)


def _screen_table(title: str, items: list[dict]) -> None:
    if not items:
        typer.echo(f"{title}: none")
        return
    print_table(title, ["person", "why"], [[i["person"], i["reason"]] for i in items])
    _sources(items)


def _sources(items: list[dict]) -> None:
    for src in dict.fromkeys(i["source"] for i in items if i["source"]):
        typer.echo(f"  source: {src}")


# --------------------------------------------------------------------------- reclassification


def reclassify(
    target: Annotated[str, typer.Argument(help="Family code (its only variant) or transcript:c.change.")],
    to: Annotated[AcmgClass, typer.Option("--to", help="The new ACMG/AMP class.")],
    date: Annotated[str, typer.Option("--date", help="Date of the new classification (YYYY-MM-DD).")],
    reason: Annotated[str, typer.Option("--reason", help="Why the class changed (laboratory re-review, ...).")],
    dry_run: Annotated[bool, typer.Option("--dry-run", help="Show the impact; write nothing.")] = False,
    user: Annotated[str | None, typer.Option("--user", help="Who records it (default: the OS user).")] = None,
    guideline: GuidelineOption = None,
    settings: SettingsOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Record a new classification of a family variant, work out what changes for each relative, and store the tasks.

    The class history is kept (a new row is added). Refused when the date is
    not after the latest classification, or the class is the current one.
    Everything is written in one transaction.

    Example: tracker reclassify HV03 --to likely_pathogenic --date 2026-11-30 --reason "laboratory re-review" --dry-run
    """
    from tracker.engines.reclassification import CAUTION as RECLASSIFICATION_CAUTION

    new_class = to.value
    on = _day(date, "--date")
    if on > dt.date.today():
        raise UserError(f"--date {on.isoformat()} is in the future")
    if not reason.strip():
        raise UserError("--reason must not be empty")
    conf, rule_set, policy = _recall_rules(settings, guideline)
    who = audit.actor(user)
    from tracker.services import reclassification as SRC

    engine = open_store(db)
    with reading(engine) as conn:  # read and work out the impact before taking the write lock
        planned = SRC.plan(conn, target, new_class, on, reason.strip(), rule_set, policy, conf)
    if dry_run:
        out = SRC.dry_run(planned)
    else:
        with writing(engine) as conn:  # re-checks that the records read are unchanged
            out = SRC.write(conn, planned, who)
    result = {"dry_run": dry_run, "reclassifications": out, "caution": RECLASSIFICATION_CAUTION}
    if json_out:
        print_json(result)
        return
    for r in out:
        typer.echo(
            f"{r['family']} {r['gene']} {r['variant']}: {r['from_class']} -> {r['to_class']} on {r['classified_on']}"
            + (" (dry run: nothing written)" if dry_run else f" (recorded; {len(r['items'])} tasks stored)")
        )
        print_table(
            None,
            ["task", "person", "change", "what changes", "action", "source"],
            [[i["id"], i["person"] or "(family)", i["change"], i["what_changes"], i["action"], i["source"]]
             for i in r["items"]],
        )  # fmt: skip
        for n in r["notes"]:
            typer.echo(f"note: {n}")
    typer.echo(RECLASSIFICATION_CAUTION)


# --------------------------------------------------------------------------- tasks


tasks_app = typer.Typer(
    name="tasks",
    invoke_without_command=True,
    no_args_is_help=False,
    help="The reclassification to-do list: open tasks; `tasks done ID` marks one done.\n\n"
    "Example: tracker tasks --family HV03",
)


@tasks_app.callback()
def tasks_list(
    ctx: typer.Context,
    family: Annotated[str | None, typer.Option("--family", help="Only this family.")] = None,
    all_: Annotated[bool, typer.Option("--all", help="Done tasks too, and every row of the table.")] = False,
    settings: SettingsOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """List open reclassification tasks (the nurse's to-do list); `tracker tasks done ID --note TEXT` marks one done.

    Example: tracker tasks --family HV03 --json
    """
    if ctx.invoked_subcommand is not None:  # `tasks done ...` (and its --help): nothing to list or load
        return
    from tracker.engines.reclassification import CAUTION as RECLASSIFICATION_CAUTION
    from tracker.services import tasks as TS

    engine = open_store(db)
    with reading(engine) as conn:
        rows = TS.list_tasks(conn, family, include_done=all_)
    if json_out:
        print_json({"tasks": rows, "caution": RECLASSIFICATION_CAUTION})
        return
    if not rows:
        typer.echo("no open tasks" if not all_ else "no tasks")
        return
    print_table(
        "Reclassification tasks",
        ["task", "family", "person", "change", "action", "status", "done"],
        [[r["id"], r["family"], r["person"] or "(family)", r["change"], r["action"], r["status"],
          f"{r['done_on']} {r['done_by']}: {r['done_note']}" if r["done_on"] else ""] for r in rows],
        limit=table_limit(all_, settings),
    )  # fmt: skip
    typer.echo(RECLASSIFICATION_CAUTION)


@tasks_app.command("done")
def tasks_done(
    task_id: Annotated[int, typer.Argument(help="Task number (from `tracker tasks`).")],
    note: Annotated[str, typer.Option("--note", help="What was done.")],
    user: Annotated[str | None, typer.Option("--user", help="Who did it (default: the OS user).")] = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Mark one reclassification task done (the task is kept, with the date, who and the note).

    Example: tracker tasks done 12 --note "letter sent, recall booked"
    """
    if not note.strip():
        raise UserError("--note must not be empty")
    check_row_id(task_id, "TASK_ID")
    engine = open_store(db)
    from tracker.services import tasks as TS

    with writing(engine) as conn:
        done = TS.mark_done(conn, task_id, note.strip(), user)
    if json_out:
        print_json(done)
    else:
        typer.echo(f"task {task_id} done on {done['done_on']} by {done['done_by']}: {done['done_note']}")


# --------------------------------------------------------------------------- recall


def recall(
    person: Annotated[str | None, typer.Argument(help="Person code.")] = None,
    as_of: AsOfOption = None,
    guideline: GuidelineOption = None,
    settings: SettingsOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
    refresh: Annotated[bool, typer.Option("--refresh", help="Recompute and store every person's proposal "
                                          "(after a change of rule set or settings); no PERSON.")] = False,
) -> None:
    """When one person should next be seen: due date, interval, every rule and modifier that fired with its source.

    Deceased people are never scheduled; people who declined are not recalled.
    With --refresh, every stored proposal is recomputed for today (the worklist reads them).

    Example: tracker recall HV01-IV-1 --settings demo_family/clinic.toml
    Example: tracker recall --refresh --settings demo_family/clinic.toml
    """
    from tracker.services import risk as RK

    if refresh:
        return _refresh_all(person, as_of, guideline, settings, db, json_out)
    if person is None:
        raise UserError("give a PERSON code (or --refresh to recompute every stored proposal)")
    on = _day(as_of, "--as-of", dt.date.today())
    conf, rule_set, policy = _recall_rules(settings, guideline)
    from tracker.services import recall as SV

    engine = open_store(db)
    with reading(engine) as conn:
        result = SV.person_recall(conn, person, on, conf, rule_set, policy)
    trend = result["trend_modifiers"]
    if json_out:
        print_json(result)
        return
    typer.echo(f"{person} ({result['family']}), {result['as_of']}, rule set {rule_set.title}, policy {policy.point}")
    if result["never_screened"]:
        typer.echo(f"status: {result['waiting']}" + (f", due {result['due']}" if result["due"] else "")
                   + (f", every {result['interval_months']} months" if result["interval_months"] else ""))  # fmt: skip
    else:
        typer.echo(f"status: {result['status']}" + (f", due {result['due']}" if result["due"] else "")
                   + (f", {result['days_overdue']} days overdue" if (result["days_overdue"] or 0) > 0 else "")
                   + (f", every {result['interval_months']} months" if result["interval_months"] else ""))  # fmt: skip
    if result["needs"]:
        typer.echo("visit needs: " + ics.needs_words(result["needs"])
                   + (f" (consider: {ics.needs_words(result['consider'])})" if result["consider"] else ""))  # fmt: skip
    if result["state"]:
        s = result["state"]
        typer.echo(f"genotype {s['genotype']} ({s['genotype_reason']}); phenotype {s['phenotype']}; "
                   f"family features {', '.join(s['family_features']) or 'none'}; last visit {s['last_visit']}")  # fmt: skip
    if result["fired"]:
        print_table(
            "Rules and modifiers",
            ["kind", "code", "applied", "text", "source"],
            [[f["kind"], f["code"], "yes" if f["applied"] else "no", f["text"], f["source"]] for f in result["fired"]],
        )
    for n in result["notes"]:
        typer.echo(f"note: {n}")
    if result["release_basis"]:
        typer.echo(f"genotype-negative release: {result['release_basis']['words']}; a downgrade of the class recalls")
    typer.echo(f"note: {trend['note']}")
    if trend.get("lsc_note"):
        typer.echo(f"note: {trend['lsc_note']}")
    for line in RK.text_lines(result["risk_scd"]):
        typer.echo(line)
    for c in result["cautions"]:
        typer.echo(f"caution: {c}")


def _refresh_all(person, as_of, guideline, settings, db, json_out) -> None:
    """`recall --refresh`: every stored proposal recomputed for today, with a progress bar."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn
    from tracker.cli.families import err
    from tracker.services import proposals as SP

    if person is not None:
        raise UserError("--refresh recomputes everyone: give no PERSON")
    if as_of is not None:
        raise UserError("--as-of: not with --refresh (stored proposals are today's)")
    conf, rule_set, policy = _recall_rules(settings, guideline)
    engine = open_store(db)
    with writing(engine) as conn:
        families = SP.all_families(conn)
        with Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(), TimeRemainingColumn(),
                      console=err, transient=True,
                      disable=len(families) <= SP.CHUNK_FAMILIES or not err.is_terminal) as bar:  # fmt: skip
            task = bar.add_task("recomputing recall proposals", total=len(families))
            result = SP.refresh_all(conn, dt.date.today(), conf, rule_set, policy,
                                    progress=lambda n: bar.advance(task, n), families=None)  # fmt: skip
    if json_out:
        print_json(result)
    else:
        typer.echo(f"{result['proposals']} recall proposals of {result['families']} families recomputed "
                   f"for {result['as_of']} under {rule_set.title}")  # fmt: skip


# --------------------------------------------------------------------------- worklist


def worklist(
    from_: Annotated[str, typer.Option("--from", help="First day of the window (YYYY-MM-DD).")],
    to: Annotated[str, typer.Option("--to", help="Last day of the window (YYYY-MM-DD).")],
    slots_per_week: Annotated[
        int | None, typer.Option("--slots-per-week", min=0, help="Weekly capacity: book into weeks (default: settings).")
    ] = None,
    csv_out: Annotated[Path | None, typer.Option("--csv", help="Also write the worklist as CSV.")] = None,
    ics_out: Annotated[Path | None, typer.Option("--ics", help="Also write the proposed visits as iCalendar.")] = None,
    as_of: AsOfOption = None,
    guideline: GuidelineOption = None,
    settings: SettingsOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
    all_: AllOption = False,
) -> None:
    """Everyone due or overdue by the end of a window, most urgent first, with what the visit needs and why.

    With a weekly capacity, people are booked into weeks and those who cannot
    be seen by their due date are listed. Deceased people are never listed;
    people who declined are listed apart, not recalled; affected members are
    listed apart with their follow-up interval.

    Each table shows the most urgent rows and a count of the rest (--all: every row; --json and
    --csv: every row).

    Example: tracker worklist --from 2026-12-07 --to 2027-01-31 --slots-per-week 4 --ics recalls.ics
    """
    from tracker.outputs.worklist_pdf import flag_words, gap_words, waiting_text
    from tracker.services import worklist as SW

    start, end = _day(from_, "--from"), _day(to, "--to")
    if end < start:
        raise UserError("--to is before --from")
    on = _day(as_of, "--as-of", dt.date.today())
    conf, rule_set, policy = _recall_rules(settings, guideline)
    slots = slots_per_week if slots_per_week is not None else conf.slots_per_week
    lists = SW.nurse_worklist(open_store(db), start, end, on, conf, rule_set, policy, slots)
    due_rows, affected_rows, gap_rows = lists["due"], lists["affected"], lists["contact_gaps"]
    booking, trend, declined, lost = lists["booking"], lists["trend"], lists["not_recalled"], lists["lost_to_follow_up"]
    weeks = math.ceil(((end - start).days + 1) / 7)

    files = {"csv": None, "ics": None}
    if csv_out is not None:
        write_output(csv_out, SW.csv_text(due_rows + affected_rows + gap_rows), where="--csv", newline=None)
        files["csv"] = str(csv_out)
    if ics_out is not None:
        write_output(ics_out, SW.calendar_bytes(due_rows + affected_rows), where="--ics")
        files["ics"] = str(ics_out)

    rereview = lists["variant_rereview"]  # variant re-review reminders (data only; see _variant_rereview)
    result = {
        "window": {"from": start.isoformat(), "to": end.isoformat(), "weeks": weeks},
        "as_of": on.isoformat(),
        "rule_set": rule_set.id,
        "rule_set_title": rule_set.title,
        "policy": policy.point,
        "slots_per_week": slots,
        "due": due_rows,
        "affected": affected_rows,
        "booking": booking,
        "contact_gaps": gap_rows,
        "not_recalled": declined,
        "lost_to_follow_up": lost,
        "no_response": lists["no_response"],
        "must_not_approach": lists["must_not_approach"],
        "no_response": lists["no_response"],
        "must_not_approach": lists["must_not_approach"],
        "trend_modifiers": trend,
        "files": files,
        "variant_rereview": rereview,
        "cautions": list(CAUTIONS),
    }
    if json_out:
        print_json(result)
        return
    limit = table_limit(all_, settings)
    typer.echo(f"Worklist {start.isoformat()} to {end.isoformat()} ({weeks} weeks), as of {on.isoformat()}, "
               f"rule set {rule_set.title}, policy {policy.point}")  # fmt: skip
    _worklist_table("Family screening: due or overdue, most urgent first", due_rows, booking is not None, limit)
    _worklist_table("Affected members (follow-up interval)", affected_rows, False, limit)
    if booking is not None:
        typer.echo(f"Booking from {booking['first_bookable_day']} ({slots} slots a week); "
                   f"{len(booking['booked_late'])} booked after their due date")  # fmt: skip
        if booking["not_booked"]:
            print_table(
                "Not booked: no free slot in the window",
                ["person", "due", "reason"],
                [[u["person"], u["due"], u["reason"]] for u in booking["not_booked"]],
                limit=limit, data=_DATA,
            )
    if gap_rows:
        print_table(
            "Contact gaps: not booked until contact is made",
            ["person", "gap", "waiting", "due", "needs", "flags"],
            [[r["person"], gap_words(r), waiting_text(r), r["due"] or "",
              ics.needs_words(r["needs"]), flag_words(r["flags"])] for r in gap_rows],
            limit=limit, data=_DATA,
        )  # fmt: skip
    else:
        typer.echo("Contact gaps: none")
    if lists["no_response"]:
        typer.echo(f"Informed, no response after {lists['no_response'][0]['wait_weeks']} weeks (follow up): "
                   + ", ".join(f"{r['person']} (informed {r['informed_on']})" for r in lists["no_response"]))
    if lists["must_not_approach"]:
        typer.echo("Must not be approached (asked for no further contact): " + ", ".join(lists["must_not_approach"]))
    if lists["no_response"]:
        typer.echo(f"Informed, no response after {lists['no_response'][0]['wait_weeks']} weeks (follow up): "
                   + ", ".join(f"{r['person']} (informed {r['informed_on']})" for r in lists["no_response"]))
    if lists["must_not_approach"]:
        typer.echo("Must not be approached (asked for no further contact): " + ", ".join(lists["must_not_approach"]))
    if rereview:
        typer.echo("Variant re-review: " + "; ".join(f"{r['family']} {r['acmg_class']} ({r['classified_on']}), "
                                                    f"{'due since' if r['overdue'] else 'by'} {r['due']}"
                                                    for r in rereview))  # fmt: skip
    # review flags (criteria not assessable): the clinician decides
    flags = [f"review {r['person']}: {flag}" for r in due_rows + affected_rows + gap_rows for flag in r["review_flags"]]
    for line in flags[:limit]:
        typer.echo(line)
    if limit is not None and len(flags) > limit:
        typer.echo(more_rows_line(len(flags) - limit, _DATA, "more review flags"))
    typer.echo(f"note: {trend['note']}")
    if trend.get("lsc_note"):
        typer.echo(f"note: {trend['lsc_note']}")
    for k, path in files.items():
        if path:
            typer.echo(f"{k} written: {path}")
    for c in CAUTIONS:
        typer.echo(f"caution: {c}")


_DATA = "--json or --csv FILE"


def _worklist_table(title: str, rows: list[dict], booked: bool, limit: int | None = None) -> None:
    from tracker.outputs.worklist_pdf import booked_text, flag_words, waiting_text

    if not rows:
        typer.echo(f"{title}: none")
        return
    cols = ["person", "status", "due", "overdue / waiting", "every (months)", "needs", "reason", "flags"]
    if booked:
        cols.append("booked week")
    print_table(
        title,
        cols,
        [[r["person"], r["status"], r["due"], waiting_text(r), r["interval_months"], ics.needs_words(r["needs"]),
          r["reason"], flag_words(r["flags"])] + ([booked_text(r)] if booked else []) for r in rows],
        limit=limit, data=_DATA,
    )  # fmt: skip


def register(app: typer.Typer) -> None:
    """Add this module's commands to the app."""
    app.command("cascade")(cascade)
    app.command("reclassify")(reclassify)
    app.add_typer(tasks_app, name="tasks")
    app.command("recall")(recall)
    app.command("worklist")(worklist)
