"""`tracker edit ...`, `tracker remove ...`, `tracker reinstate ...`, `tracker removed`: audited corrections.

Thin layer over :mod:`tracker.store.edits`: each command is one write
transaction that records the values before and after in the audit trail.
"""

from __future__ import annotations

from typing import Annotated

import typer

from tracker.cli.common import AllOption, DbOption, JsonOption, SettingsOption, UserOption, open_store, print_json
from tracker.cli.common import print_table, table_limit
from tracker.errors import UserError
from tracker.lazy import lazy_module

edits = lazy_module("tracker.store.edits")
from tracker.store.database import reading, writing

edit_app = typer.Typer(
    help="Correct a stored record; the old value is kept in the audit trail (`tracker audit`).\n\n"
    "Example: tracker edit person HV01-III-4 --set vital_status=deceased --set death_date=2026-10-02 "
    '--reason "GP letter"\n\n'
    "Contacts are recorded with `tracker contact add` (the contact log keeps every one); "
    "--set contact_status=... appends an entry to that log, it never overwrites.",
    no_args_is_help=True,
)
remove_app = typer.Typer(
    help="Remove a person or a study entered in error: it is kept, hidden from every list and report, "
    "and can be reinstated.\n\nExample: tracker remove study HV02-II-3 2024-05-02 echo --reason \"duplicate entry\"",
    no_args_is_help=True,
)
reinstate_app = typer.Typer(
    help="Undo a removal.\n\nExample: tracker reinstate person HV02-III-7 --reason \"removed by mistake\"",
    no_args_is_help=True,
)

Reason = Annotated[str, typer.Option("--reason", help="Why (kept in the audit trail; required).")]
Sets = Annotated[list[str], typer.Option("--set", help="FIELD=VALUE, a CSV cell as in docs/data-layouts.md; repeat.")]
PersonArg = Annotated[str, typer.Argument(help="Person code.")]
DateArg = Annotated[str, typer.Argument(help="Study date (YYYY-MM-DD).")]
ModalityArg = Annotated[str, typer.Argument(help="echo, cmr, ecg or clinic.")]


def _writing(engine):
    """The write transaction of an edit, with what the proposals' refresh needs loaded first
    (:func:`tracker.services.proposals.prepare`), so the lock is held for the work only."""
    from tracker.services.proposals import prepare

    prepare()
    return writing(engine)


def _pairs(sets: list[str]) -> dict[str, str]:
    out: dict[str, str] = {}
    for item in sets:
        field, eq, value = item.partition("=")
        field = field.strip()
        if not eq or not field:
            raise UserError(f"--set {item[:40]!r}: write FIELD=VALUE (an empty VALUE clears the field)")
        if field in out:
            raise UserError(f"--set {field}: given twice")
        out[field] = value
    return out


def _show(change: edits.Change, json_out: bool) -> None:
    if json_out:
        print_json(change.as_dict())
    else:
        typer.echo(f"{change.what} (audit entry {change.audit_id})")


@edit_app.command("person")
def edit_person(person: PersonArg, sets: Sets, reason: Reason, user: UserOption = None, db: DbOption = None,
                json_out: JsonOption = False) -> None:  # fmt: skip
    """Correct fields of a person: names, sex_at_birth, birth_date, vital_status, death_date, mother, father,
    twin_of, notes, death_cause, death_age, diagnosis_age, diagnosis_place, icd_date, pacemaker_date, ...
    (contact_status and contact_status_date append an entry to the contact log: see `tracker contact add`)

    Example: tracker edit person HV01-III-4 --set vital_status=deceased --set death_date=2026-10-02 --reason "GP letter"
    """
    engine = open_store(db)
    with _writing(engine) as conn:
        change = edits.edit_person(conn, person, _pairs(sets), reason=reason, user=user)
    _show(change, json_out)


@edit_app.command("study")
def edit_study(person: PersonArg, study_date: DateArg, modality: ModalityArg, sets: Sets, reason: Reason,
               user: UserOption = None, db: DbOption = None, json_out: JsonOption = False) -> None:  # fmt: skip
    """Correct the date, site, height_cm or weight_kg of a study.

    Example: tracker edit study HV01-III-4 2025-03-14 echo --set height_cm=171 --reason "height misread"
    """
    engine = open_store(db)
    with _writing(engine) as conn:
        change = edits.edit_study(conn, person, study_date, modality, _pairs(sets), reason=reason, user=user)
    _show(change, json_out)


@edit_app.command("assessment")
def edit_assessment(
    person: PersonArg,
    assessment_date: Annotated[str, typer.Argument(help="Assessment date (YYYY-MM-DD).")],
    sets: Sets,
    reason: Reason,
    user: UserOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Correct or complete an assessment: affected_status, symptoms, competitive_athlete, pregnant, hypertension,
    notes, and the HCM Risk-SCD answers (family_history_scd, nsvt, unexplained_syncope,
    prior_arrest_or_sustained_vt, metabolic_or_syndromic: yes, no, or empty = not recorded), and
    atrial_fibrillation (yes, no, or empty).

    Example: tracker edit assessment HV01-IV-2 2026-06-05 --set nsvt=yes --reason "48-h Holter 2026-06-20"
    """
    engine = open_store(db)
    with _writing(engine) as conn:
        change = edits.edit_assessment(conn, person, assessment_date, _pairs(sets), reason=reason, user=user)
    _show(change, json_out)


@edit_app.command("value")
def edit_value(
    person: PersonArg,
    study_date: DateArg,
    modality: ModalityArg,
    measure: Annotated[str, typer.Argument(help="Measure code (see `tracker measures`).")],
    value: Annotated[str, typer.Argument(help="The corrected value.")],
    unit: Annotated[str, typer.Argument(help="Its unit (mm, cm, %, ms, cm/s, m/s, mmHg, ...).")],
    reason: Reason,
    user: UserOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Correct one measured value of a study (checked and converted exactly as an import).

    Example: tracker edit value HV01-III-4 2025-03-14 echo mwt_echo 12.5 mm --reason "re-measured from stored images"
    """
    engine = open_store(db)
    with _writing(engine) as conn:
        change = edits.edit_value(conn, person, study_date, modality, measure, value, unit, reason=reason, user=user)
    _show(change, json_out)


@remove_app.command("person")
def remove_person(person: PersonArg, reason: Reason, user: UserOption = None, db: DbOption = None,
                  json_out: JsonOption = False) -> None:  # fmt: skip
    """Remove a person entered in error (with their studies, results and assessments hidden too).

    Example: tracker remove person HV02-III-7 --reason "duplicate of HV02-III-6"
    """
    engine = open_store(db)
    with _writing(engine) as conn:
        change = edits.remove_person(conn, person, reason=reason, user=user)
    _show(change, json_out)


@remove_app.command("study")
def remove_study(person: PersonArg, study_date: DateArg, modality: ModalityArg, reason: Reason,
                 user: UserOption = None, db: DbOption = None, json_out: JsonOption = False) -> None:  # fmt: skip
    """Remove a study entered in error (its values are hidden with it).

    Example: tracker remove study HV02-II-3 2024-05-02 echo --reason "belongs to another patient"
    """
    engine = open_store(db)
    with _writing(engine) as conn:
        change = edits.remove_study(conn, person, study_date, modality, reason=reason, user=user)
    _show(change, json_out)


@reinstate_app.command("person")
def reinstate_person(person: PersonArg, reason: Reason, user: UserOption = None, db: DbOption = None,
                     json_out: JsonOption = False) -> None:  # fmt: skip
    """Reinstate a removed person.

    Example: tracker reinstate person HV02-III-7 --reason "removed by mistake"
    """
    engine = open_store(db)
    with _writing(engine) as conn:
        change = edits.reinstate_person(conn, person, reason=reason, user=user)
    _show(change, json_out)


@reinstate_app.command("study")
def reinstate_study(person: PersonArg, study_date: DateArg, modality: ModalityArg, reason: Reason,
                    user: UserOption = None, db: DbOption = None, json_out: JsonOption = False) -> None:  # fmt: skip
    """Reinstate a removed study.

    Example: tracker reinstate study HV02-II-3 2024-05-02 echo --reason "removed by mistake"
    """
    engine = open_store(db)
    with _writing(engine) as conn:
        change = edits.reinstate_study(conn, person, study_date, modality, reason=reason, user=user)
    _show(change, json_out)


def removed(db: DbOption = None, json_out: JsonOption = False, all_: AllOption = False,
            settings: SettingsOption = None) -> None:
    """List removed people and studies: when, by whom and why.

    The table shows the latest removals and a count of the earlier ones (--all: every one).

    Example: tracker removed --json
    """
    engine = open_store(db)
    with reading(engine) as conn:
        frame = edits.removed(conn)
    if json_out:
        print_json(frame.to_dict("records"))
    elif frame.empty:
        typer.echo("nothing has been removed")
    else:
        print_table(f"{len(frame)} removed", list(frame.columns), frame.values.tolist(),
                    limit=table_limit(all_, settings), last=True)


def register(app: typer.Typer) -> None:
    app.add_typer(edit_app, name="edit")
    app.add_typer(remove_app, name="remove")
    app.add_typer(reinstate_app, name="reinstate")
    app.command("removed")(removed)
