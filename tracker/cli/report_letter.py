"""`tracker report letter`: a family letter to one at-risk relative, as a PDF, with its readability.

Thin: loads the store frames, builds the family state
(:mod:`tracker.engines.family_state`), decides and fills the letter
(:mod:`tracker.outputs.letter`), writes the PDF
(:mod:`tracker.outputs.letter_pdf`) and prints the path and the readability
figures.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import datetime as dt
from pathlib import Path
from typing import Annotated

import typer

from tracker.cli.common import DbOption, JsonOption, SettingsOption, open_store, print_json
from tracker.outfiles import output_path
from tracker.domain.dates import parse_date
from tracker.engines.cascade import RULE_SETS as CASCADE_RULE_SETS
from tracker.errors import UserError
from tracker.settings import load_settings
from tracker.store.database import reading

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    from tracker.engines import family_state as fs
    from tracker.outputs import letter as L


def _letter_variant(v):
    from tracker.services import documents as SD

    return SD.letter_variant(v)


def _stored_name(people, person: str) -> str | None:
    row = people[people["person"] == person].iloc[0]
    parts = [row[c].strip() for c in ("given_name", "family_name") if isinstance(row[c], str) and row[c].strip()]
    return " ".join(parts) or None


def _standing(state, person):
    from tracker.services import documents as SD

    return SD.standing(state, person)


def letter(
    person: Annotated[str, typer.Argument(help="Person code of the relative the letter is for.")],
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for the PDF (made if missing).")],
    via_proband: Annotated[
        bool, typer.Option("--via-proband", help="Word the letter to be handed on by the family member, not posted.")
    ] = False,
    template: Annotated[
        Path | None,
        typer.Option(
            "--template",
            help="Own template file (format: tracker/outputs/letter.py); default: the shipped one for the family type.",
        ),
    ] = None,
    names: Annotated[
        bool, typer.Option("--names", help="Print the recipient's stored name (default: the person code only).")
    ] = False,
    date: Annotated[str | None, typer.Option("--date", help="Date of the letter, YYYY-MM-DD (default: today).")] = None,
    guideline: Annotated[
        str | None,
        typer.Option(
            "--guideline",
            help=f"Cascade rule set: {', '.join(CASCADE_RULE_SETS)} (default: the settings guideline).",
        ),
    ] = None,
    kind: Annotated[
        str | None,
        typer.Option(
            "--kind",
            help="Letter kind: first_contact, reminder, result or reclassification (default: chosen from where "
            "the person stands; refused when it does not fit).",
        ),
    ] = None,
    settings: SettingsOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Write a family letter for one at-risk relative as DIR/letter-PERSON.pdf.

    The letter explains HCM and how it is inherited, gives the relative's
    chance of carrying the family variant (pedigree computation), what is
    offered and from what age under the clinic's rule set, their right not
    to know, when to seek help sooner, and how to contact the clinic (from
    the settings file). No letter for people who declined contact, deceased
    people, placeholders or people not at risk.

    The letter kind follows where the person stands: first contact (not in
    screening), reminder (a study, a test or a visit on record), result (a
    gene test result since the last visit) or reclassification (the family
    variant's class changed since the last contact). --kind overrides it only
    where it fits: nobody already in screening gets a first-contact letter.

    Prints the Flesch reading ease and Flesch-Kincaid grade of the body text
    (target: grade 7 or lower, a reading age of about 12).

    Example: tracker report letter HV01-III-6 --out letters/
    """
    from tracker.outputs import letter as L
    from tracker.outputs.letter_pdf import write_letter_pdf
    from tracker.services import documents as SD

    on = dt.date.today()
    if date is not None:
        try:
            on = parse_date(date)
        except ValueError as exc:
            raise UserError(f"--date: {exc}") from None
    conf = load_settings(settings)
    gid = guideline or conf.guideline
    if gid not in CASCADE_RULE_SETS:
        raise UserError(
            f"no cascade rule set for guideline {gid!r}: give --guideline one of {', '.join(CASCADE_RULE_SETS)}"
        )
    if kind is not None and kind not in L.LETTER_KINDS:
        raise UserError(f"--kind: {kind!r} is not one of {', '.join(L.LETTER_KINDS)}")
    own_template = L.read_template(template) if template is not None else None
    engine = open_store(db)
    with reading(engine) as conn:
        people, family, state = SD.letter_state(conn, person, on)
    recipient_name = _stored_name(people, person) if names else None
    plan = L.prepare_letter(
        state.pedigree, state.genotypes, _letter_variant(state.variant), person, on, gid, conf.clinic,
        affected=state.affected, seen=state.seen, early_onset_family="early_onset" in state.features,
        via_proband=via_proband, recipient_name=recipient_name, standing=_standing(state, person), letter_kind=kind,
    )  # fmt: skip
    composed = L.compose_letter(plan, own_template)
    notes = list(plan.notes) + list(composed.warnings)
    if names and recipient_name is None:
        notes.append("--names: no name stored for this person; the letter carries the person code only")
    out.mkdir(parents=True, exist_ok=True)
    path = out / f"letter-{person}.pdf"
    replaced = path.exists()
    with output_path(path) as tmp:
        write_letter_pdf(composed, tmp)
    r = composed.readability
    template_name = str(template) if template is not None else plan.default_template
    if json_out:
        print_json(
            {
                "file": str(path),
                "person": person,
                "template": template_name,
                "flesch_reading_ease": r.flesch_reading_ease,
                "flesch_kincaid_grade": r.flesch_kincaid_grade,
                "words": r.words,
                "sentences": r.sentences,
                "target_flesch_kincaid_grade": r.target_fk_grade,
                "meets_target": r.meets_target,
                "syllable_counter": r.syllable_counter,
                "not_measured": r.not_measured,
                "letter_type": plan.kind,
                "letter_kind": plan.letter_kind,
                "letter_kind_words": L.KIND_WORDS[plan.letter_kind],
                "guideline": gid,
                "risk": plan.values.get("risk"),
                "notes": notes,
                "caution": composed.caution,
            }
        )
        return
    typer.echo(f"{'replaced' if replaced else 'wrote'} {path}")
    typer.echo(f"letter: {L.KIND_WORDS[plan.letter_kind]} ({plan.letter_kind}), {plan.kind} family, "
               f"template {template_name}, rule set {gid}"
               + (f", chance of carrying the variant {plan.values['risk']}" if plan.values.get("risk") else ""))  # fmt: skip
    verdict = "meets" if r.meets_target else "ABOVE"
    typer.echo(
        f"readability: Flesch reading ease {r.flesch_reading_ease:.1f}, Flesch-Kincaid grade "
        f"{r.flesch_kincaid_grade:.1f} ({verdict} the target of grade {r.target_fk_grade:g} or lower, "
        f"reading age about 12), {r.words} words in {r.sentences} sentences"
    )
    typer.echo(f"measured: body paragraphs and list items; not measured: {r.not_measured}")
    typer.echo(f"syllables counted with: {r.syllable_counter}")
    for n in notes:
        typer.echo(f"note: {n}")
    typer.echo(composed.caution)


def register(report_app: typer.Typer) -> None:
    """Add this module's command to `tracker report`."""
    report_app.command("letter")(letter)
