"""The data behind the documents: the trajectory report (`report trajectory`), the pedigree drawing
(`report pedigree`) and the family letter (`report letter`), each read for one family only.

A family's records are enough for each: links to people recorded in another family are not used
in its state or drawn (:func:`tracker.engines.family_state.build_family_state`,
:func:`tracker.outputs.pedigree_drawing.write_pedigree_pdf`). Heavy modules are loaded where used.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from sqlalchemy import Connection

from tracker.engines.schedule import Policy, propose_recall
from tracker.errors import UserError
from tracker.services.recall import (
    _family_state,
    _load,
    _proposal_dict,
    _unscheduled_dict,
    _with_trends,
    family_scope,
    person_family,
)
from tracker.settings import Settings

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    import pandas as pd
    from tracker.engines import family_state as fs
    from tracker.store.repository import Scope


@dataclass
class Trajectory:
    """One person's trajectory report data on the records up to ``on``: the review as `tracker person`
    shows it, the recall proposal as `tracker recall` shows it, and HCM Risk-SCD."""

    person: str
    family: str
    labels: dict[str, str]
    m: pd.DataFrame | None  # measurements (None: no study)
    assessed: pd.DataFrame | None
    trends: pd.DataFrame | None
    conversions: pd.DataFrame | None
    identity: dict[str, Any]
    trend_records: list[dict]
    guideline: dict[str, Any]
    recall: dict
    trend_note: dict
    risk: Any


def trajectory(conn: Connection, person: str, on: dt.date, conf: Settings, rule_set, policy: Policy,
               horizon: float, scope: Scope | None = None) -> Trajectory:  # fmt: skip
    """The trajectory report data of ``person``, reading only their family's records (``scope``:
    these families instead; the result is the same)."""
    from tracker.engines import family_state as fs
    from tracker.engines import review
    from tracker.services import review as SR
    from tracker.services import risk as RK
    from tracker.store import repository as repo

    if scope is None:
        scope = family_scope(person_family(conn, person))
    frames = _load(conn, scope)
    measures = repo.load_measures(conn)
    if person not in set(frames.people["person"]):
        raise UserError(f"unknown person {person!r}")
    gid = rule_set.id
    labels = dict(zip(measures["code"], measures["label"]))
    people = frames.people
    family = people.loc[people["person"] == person, "family"].iloc[0]

    # --- the review, as `tracker person`, on the records up to --as-of
    studies = fs.records_up_to(frames.studies, "study_date", on)
    assessments = fs.records_up_to(frames.assessments, "assessment_date", on)
    results = fs.records_up_to(frames.results, "test_date", on)
    variants = fs.records_up_to(frames.variants, "classified_on", on)
    ctx = review.clinical_context(people[people["family"] == family], results, variants, assessments)
    rel, pos = SR.status_sets(ctx)
    kw = dict(guideline=gid, relative_of_affected=rel, genotype_positive=pos)
    mine = studies[studies["person"] == person] if studies is not None and len(studies) else None
    m = review.build_measurements(people, mine) if mine is not None and len(mine) else None
    m = review.mark_pregnancy(m, assessments) if m is not None else None
    a = t = conv = None
    if m is not None and len(m):
        a = review.assess_measurements(m, **kw)
        t = review.trend_table(a, **kw, clinic_repeatability=conf.repeatability or None, horizon_years=horizon)
        conv = review.conversions(a)
    identity = {k: SR.clean(v) for k, v in SR.person_identity(person, people, ctx, on).items()}
    trend_records = SR.records(t, SR.TREND_JSON_KEYS) if t is not None else []
    g = SR.guideline(dataclasses.replace(conf, guideline=gid))

    # --- the recall proposal, as `tracker recall`
    st = _family_state(frames, family, on)
    states, trend_note = _with_trends(frames, {st.family: st}, gid, conf, on)
    st = states[st.family]
    if person in st.states:
        rec = _proposal_dict(propose_recall(st.states[person], rule_set, policy, on), st)
    else:
        rec = _unscheduled_dict(person, st, on, gid)

    # --- risk
    pr = RK.person_risk(person, people[people["family"] == family], assessments, identity.get("affected_status"), on,
                        assessed=a)
    return Trajectory(person, family, labels, m, a, t, conv, identity, trend_records, g, rec, trend_note, pr)


def pedigree(conn: Connection, family: str) -> dict[str, pd.DataFrame]:
    """The frames the pedigree drawing of ``family`` reads (that family's only), or a one-line error."""
    from tracker.store import repository as repo

    scope = family_scope(family)
    if family not in set(repo.load_families(conn, scope)["family"]):
        raise UserError(f"family {family} is not in the database")
    return {
        "people": repo.load_people(conn, scope),
        "results": repo.load_genetic_results(conn, scope),
        "assessments": repo.load_assessments(conn, scope),
        "variants": repo.load_variants(conn, scope),
    }


def letter_state(conn: Connection, person: str, on: dt.date) -> tuple[pd.DataFrame, str, fs.FamilyState]:
    """(the family's people, the family code, its state on ``on``) for a letter to ``person``."""
    from tracker.engines import family_state as fs
    from tracker.store import repository as repo

    from tracker.services.recall import with_contact_columns

    scope = family_scope(person_family(conn, person))
    people = with_contact_columns(conn, repo.load_people(conn, scope), scope)
    if person not in set(people["person"]):
        raise UserError(f"unknown person {person!r}")
    family = people.loc[people["person"] == person, "family"].iloc[0]
    state = fs.build_family_state(
        family, people, repo.load_variants(conn, scope), repo.load_genetic_results(conn, scope),
        repo.load_assessments(conn, scope), repo.load_studies(conn, entered=False, scope=scope), as_of=on,
    )  # fmt: skip
    return people, family, state


def letter_record(conn: Connection, person: str, on: dt.date) -> dict:
    """What the contact log and its tables say for a letter to ``person`` on ``on``: the day first informed,
    an open reclassification task, a discharge, the next booked visit (not cancelled, on or after ``on``),
    the open wish and its family member (docs/contacts-and-letters.md)."""
    from tracker.services.recall import _open_task_people
    from tracker.store import repository as repo

    from tracker.domain.contacts import derive_state

    scope = family_scope(person_family(conn, person))
    # The log as it stood on the letter's day (an undated, migrated status counts as before it).
    events = [e for e in repo._contact_rows(conn, scope)
              if e["person"] == person and (e["event_date"] is None or e["event_date"] <= on)]  # fmt: skip
    wishes = [{**w, "ended_date": None} for w in repo._wish_rows(conn, scope)
              if w["person"] == person and w["recorded_date"] <= on
              and (w["ended_date"] is None or w["ended_date"] > on)]  # fmt: skip
    state = derive_state(person, events, wishes) if events or wishes else None
    bookings = repo.load_bookings(conn, scope)
    mine = bookings[(bookings["person"] == person) & bookings["cancelled_date"].isna()] if len(bookings) else bookings
    ahead = mine[mine["visit_date"] >= on.isoformat()].sort_values("visit_date") if len(mine) else mine
    discharges = repo.load_discharges(conn, scope)
    gone = discharges[(discharges["person"] == person) & (discharges["discharge_date"] <= on.isoformat())] \
        if len(discharges) else discharges
    return {
        "informed_on": state.informed_date if state else None,
        "open_task": person in _open_task_people(conn, scope),
        "discharged_on": dt.date.fromisoformat(gone["discharge_date"].iloc[-1]) if len(gone) else None,
        "booked_on": dt.date.fromisoformat(ahead["visit_date"].iloc[0]) if len(ahead) else None,
        "booked_purpose": ahead["purpose"].iloc[0] if len(ahead) else None,
        "wish": state.wish if state else None,
        "wish_via": state.wish_via if state else None,
    }
