"""The database checks of `tracker check`: integrity, schema, audit trail, orphan rows, consistency
of the records, and at-risk relatives with no recall; variant re-review reminders apart."""

from __future__ import annotations

import datetime as dt

from sqlalchemy import Connection


def check_findings(conn: Connection, today: dt.date, rereview_months: int, settings=None) -> tuple[list, list]:
    """(findings, re-review reminders). The consistency checks run only on a database whose file and
    schema are sound."""
    from tracker.domain import consistency as dc
    from tracker.store import checks
    from tracker.store import repository as repo

    reminders = []
    findings = checks.integrity_findings(conn) + checks.schema_findings(conn)
    if not findings:
        findings += checks.audit_findings(conn)
        findings += checks.orphan_findings(conn)
        people = repo.load_people(conn)
        studies = repo.load_studies(conn, entered=False)
        assessments = repo.load_assessments(conn)
        results = repo.load_genetic_results(conn)
        findings += dc.pedigree_findings(people)
        findings += dc.date_findings(people, studies, assessments, results)
        findings += dc.record_findings(people)
        findings += dc.range_findings(studies, repo.load_measures(conn))
        findings += dc.placeholder_findings(people, studies, assessments, results)
        findings += rule_findings(conn)
        # Families whose links cannot form a pedigree are reported above; recall needs a pedigree.
        broken = {f.where.removeprefix("family ") for f in findings if f.check == "pedigree"}
        findings += recall_findings(people[~people["family"].isin(broken)], repo.load_variants(conn), results,
                                    assessments, studies)  # fmt: skip
        findings += proposal_findings(conn, settings, broken)
        log_findings, log_reminders = contact_log_findings(conn, today)
        findings += log_findings
        # re-review reminders and unattended bookings: listed apart, not findings
        reminders = checks.variant_rereview_reminders(conn, today, rereview_months) + log_reminders
    return findings, reminders


# The contact log's tables (revision 0012): (model, date column, words for a row).
def _log_tables():
    from tracker.store.models import Booking, ContactEvent, ContactWish, Discharge, ExternalResult, LetterSent

    return (
        (ContactEvent, ContactEvent.event_date, "contact event"),
        (ContactWish, ContactWish.recorded_date, "contact wish"),
        (LetterSent, LetterSent.sent_date, "letter sent"),
        (ExternalResult, ExternalResult.result_date, "result from another centre"),
        (Booking, Booking.visit_date, "booking"),
        (Discharge, Discharge.discharge_date, "discharge"),
    )


def contact_log_findings(conn: Connection, today: dt.date) -> tuple[list, list]:
    """(findings, reminders) on the contact log and its tables (docs/contacts-and-letters.md):

    * rows of a removed person (the person is hidden, their contacts would be read by no one; a status
      kept from a people file or an older store is part of the person record and not counted);
    * a family member named as the way contact goes (``via``) who is in another family, or removed;
    * an open wish "only through a family member" whose member was removed or is recorded deceased;
    * a date before the person's birth (a year-only birth date: before 1 January of that year);
    * reminders, not findings: a booked visit in the past, not cancelled, with no visit, study or
      assessment of the person on that day (never attended, or not yet recorded).
    """
    from sqlalchemy import select
    from sqlalchemy.orm import aliased

    from tracker.domain.consistency import Finding
    from tracker.store.models import Assessment, Booking, ContactEvent, ContactWish, Person, Study

    people = {r.id: r for r in conn.execute(select(
        Person.id, Person.code, Person.family_id, Person.birth_date, Person.birth_date_precision, Person.removed_at,
        Person.vital_status)).all()}  # fmt: skip

    def born(p) -> dt.date | None:
        if p.birth_date is None:
            return None
        return dt.date(p.birth_date.year, 1, 1) if p.birth_date_precision == "year" else p.birth_date

    findings = []
    for model, day_col, words in _log_tables():
        via_col = getattr(model, "via_person_id", None)
        cols = [model.id, model.person_id, day_col] + ([via_col] if via_col is not None else [])
        removed: dict[str, int] = {}
        for row in conn.execute(select(*cols, *([model.source] if model is ContactEvent else []))
                                .order_by(model.id)).all():  # fmt: skip
            p = people.get(row[1])
            if p is None:
                continue  # an orphan row: reported by the orphan check
            where = f"person {p.code}"
            if p.removed_at is not None:
                if model is ContactEvent and row[-1] != "entered":
                    continue  # the status kept from a people file or an older store: part of the person record
                removed[p.code] = removed.get(p.code, 0) + 1
                continue
            day, birth = row[2], born(p)
            if day is not None and birth is not None and day < birth:
                findings.append(Finding("contact log", where, f"{words} dated {day.isoformat()}, before the date "
                                        f"of birth ({birth.isoformat()})"))  # fmt: skip
            if via_col is not None and row[3] is not None:
                v = people.get(row[3])
                if v is not None and v.family_id != p.family_id:
                    findings.append(Finding("contact log", where, f"{words} of {_iso(day)} names {v.code} as the "
                                            "family member contact went through, but they belong to another family"))
                elif v is not None and v.removed_at is not None and model is not ContactWish:
                    findings.append(Finding("contact log", where, f"{words} of {_iso(day)} names {v.code}, who was "
                                            f"removed on {v.removed_at:%Y-%m-%d}, as the family member"))  # fmt: skip
        for code, n in sorted(removed.items()):
            findings.append(Finding("contact log", f"person {code}", f"{n} {words} row(s) of a removed person "
                                    f"(removed on {_removed_on(people, code)}); reinstate the person or leave them "
                                    "hidden on purpose"))  # fmt: skip
    # An open wish "only through" a family member who was removed or died: contact has no way to go.
    for w in conn.execute(select(ContactWish.person_id, ContactWish.via_person_id, ContactWish.recorded_date).where(
            ContactWish.ended_date.is_(None), ContactWish.via_person_id.is_not(None))).all():  # fmt: skip
        p, v = people.get(w.person_id), people.get(w.via_person_id)
        if p is None or v is None or p.removed_at is not None:
            continue
        if v.removed_at is not None:
            findings.append(Finding("contact log", f"person {p.code}", f"open wish (recorded {w.recorded_date.isoformat()}) "
                                    f"to be contacted only through {v.code}, who was removed on "
                                    f"{v.removed_at:%Y-%m-%d}: end or renew the wish"))  # fmt: skip
        elif v.vital_status == "deceased":
            findings.append(Finding("contact log", f"person {p.code}", f"open wish (recorded {w.recorded_date.isoformat()}) "
                                    f"to be contacted only through {v.code}, who is recorded as deceased: end or "
                                    "renew the wish"))  # fmt: skip
    # Reminders: past bookings with nothing recorded on the day.
    reminders = []
    seen = aliased(Study)
    past = conn.execute(select(Booking.person_id, Booking.visit_date, Booking.purpose).where(
        Booking.cancelled_date.is_(None), Booking.visit_date < today).order_by(Booking.visit_date)).all()  # fmt: skip
    if past:
        visits = {(r[0], r[1]) for r in conn.execute(select(seen.person_id, seen.study_date).where(
            seen.removed_at.is_(None))).all()}  # fmt: skip
        visits |= {(r[0], r[1]) for r in conn.execute(select(Assessment.person_id, Assessment.assessment_date)).all()}
        for b in past:
            p = people.get(b.person_id)
            if p is None or p.removed_at is not None or (b.person_id, b.visit_date) in visits:
                continue
            reminders.append(Finding("booking", f"person {p.code}", f"visit booked for {b.visit_date.isoformat()} "
                                     f"({b.purpose}) has no visit, study or assessment recorded that day: attended? "
                                     "record the visit, or cancel the booking"))  # fmt: skip
    return findings, reminders


def _iso(d) -> str:
    return d.isoformat() if d is not None else "an undated day"


def _removed_on(people: dict, code: str) -> str:
    for p in people.values():
        if p.code == code and p.removed_at is not None:
            return f"{p.removed_at:%Y-%m-%d}"
    return "?"


def recall_findings(people, variants, results, assessments, studies):
    """At-risk living relatives with no recall proposal (for example no date of birth recorded)."""
    from tracker.domain.consistency import Finding
    from tracker.engines import family_state as fs

    states = fs.build_family_states(people, variants, results, assessments, studies)
    by_code = people.set_index("person")  # once for the cohort, not once per family
    return [Finding("recall", f"person {p}", f"is at risk and has no recall: {why}")
            for st in states.values() for p, why in fs.unscheduled_at_risk(st, by_code)]  # fmt: skip


def proposal_findings(conn: Connection, settings=None, broken: set[str] = frozenset()):
    """Stored recall proposals that differ from a recomputation from the records now stored
    (every write recomputes them, so a difference means a write that did not, or a change made
    outside the tool). Rows computed under other settings are recomputed by the next read; families
    whose links cannot form a pedigree (``broken``, reported apart) cannot be recomputed."""
    from tracker.domain.consistency import Finding
    from tracker.services import proposals as SP
    from tracker.services.recall import recall_rules

    conf, rule_set, policy = recall_rules(settings, None)
    return [Finding("recall proposal", f"person {p}", f"stored recall proposal differs from a recomputation: {what}; "
                    "run `tracker recall --refresh`") for p, what in SP.differing(conn, conf, rule_set, policy, skip=broken)]  # fmt: skip


def _cells(values):
    """Stored values as CSV cells (:func:`tracker.io.columns.format_cell`), formatted once per distinct value."""
    import numpy as np
    import pandas as pd

    from tracker.io.columns import format_cell

    codes, distinct = pd.factorize(values.astype(object).to_numpy(dtype=object), use_na_sentinel=True)
    texts = np.array([format_cell(v) for v in distinct] + [""], dtype=object)
    return texts[codes]  # code -1 (empty) takes the last text, ""


def rule_findings(conn: Connection, family: str | None = None, today=None) -> list:
    """The importer's own row, cross-row and store checks run over the stored records.

    Each kind of record is checked as if the whole store were imported again
    (:data:`tracker.io.validation.CHECKS`, against the stored records), so a record
    the importer would refuse is found however it reached the store (an edit, an
    older version of the tool, a change made outside the tool).  ``family``: only
    that family's records (checked against the whole store).
    """
    import pandas as pd

    from tracker.domain.consistency import Finding
    from tracker.io import validation
    from tracker.io.csv_import import context
    from tracker.io.layouts import LAYOUTS
    from tracker.store import repository as repo

    ctx = context(conn, today or dt.date.today())
    people = ctx.people
    mine = set(people["person"] if family is None else people.loc[people["family"] == family, "person"])
    frames = {
        "families": (ctx.families, lambda r: f"family {r['family']}"),
        "people": (people, lambda r: f"person {r['person']}"),
        "variants": (ctx.variants, lambda r: f"variant {r['family']} {r['transcript']}:{r['hgvs_c']}"),
        "genetic-results": (ctx.results, lambda r: f"genetic result {r['person']} {r['test_date']} {r['test_type']}"),
        "assessments": (repo.load_assessments(conn), lambda r: f"assessment {r['person']} {r['assessment_date']}"),
        "studies": (repo.load_studies(conn), lambda r: f"study {r['person']} {r['study_date']} {r['modality']}"),
    }
    out: list[Finding] = []
    for kind, (frame, where) in frames.items():
        if family is not None:
            frame = frame[frame["family"] == family] if "family" in frame.columns and kind != "people" else frame
            frame = frame[frame["person"].isin(mine)] if "person" in frame.columns else frame
        layout = LAYOUTS[kind]
        # Stored values back to CSV cells, read by the importer's own parsers, then its file checks.
        cells = pd.DataFrame({c: _cells(frame[c]) for c in layout.names})
        cells.index = cells.index + 2  # row numbers as in a file (row 1 is the header)
        checked = validation.parse_cells(layout, kind, cells, ctx.today)
        validation.CHECKS[kind](checked, ctx)
        for p in checked.problems:
            key = where(frame.iloc[p.row - 2]) if p.row is not None else f"{kind}" + (f" of family {family}" if family else "")
            out.append(Finding("rules", key, f"{p.column}: {p.message}" if p.column else p.message))
    return out
