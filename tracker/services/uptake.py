"""Cascade uptake (`tracker uptake`, `tracker report uptake`): the engine's records built from the store.

For each family: the proband, the cascade start date (the family's first positive genetic
result), who among the members is an at-risk relative and why, each relative's degree of
relationship to the proband (:mod:`tracker.domain.pedigree`), and the dates of first contact,
counselling, testing, screening, decline and failed contact.  The figures are computed by
:mod:`tracker.engines.uptake`.

Where each date comes from is in :data:`SOURCES` (printed with the figures and in
docs/uptake.md).  The contact log (the ``contact_event`` and ``external_result`` tables) is
read by one function, :func:`contact_events`; while the store has no contact log, the contact
status recorded on each person stands in for it, and what it cannot tell (counselling, the
informing route) is shown as "not recorded", never as 0.

Decision support only: the treating clinician decides, following local protocols and the
current guideline.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from sqlalchemy import Connection, inspect

from tracker.errors import UserError

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    import pandas as pd
    from tracker.domain.pedigree import Pedigree
    from tracker.engines import family_state as fs
    from tracker.engines.uptake import RelativeRecord
    from tracker.store.repository import Scope

SCREENING_MODALITIES = ("echo", "cmr", "clinic")  # an ECG alone is not a screening visit (as for the recall)
REACHED = ("informed", "declined", "contact_later")  # contact outcomes that reached the relative
UNREACHABLE = ("wrong_address", "moved_away", "lost_to_follow_up")  # as the newest outcome: not reachable

SOURCE_STATUS = (
    "Read from the record without a contact log: first contact = the date of the person's contact "
    "status 'contactable' or 'declined' (the engine then takes the earliest of it, a genetic test and "
    "a screening visit); declined = contact status 'declined'; not reachable = contact status 'lost to "
    "follow-up'; tested = genetic results; screened = echo, CMR or clinic studies. Counselling and the "
    "informing route are not recorded without a contact log."
)
SOURCE_LOG = (
    "Read from the contact log: first contact = the first contact event whose outcome reached the "
    "relative (informed, contact later, declined); an undated one (kept from the status recorded "
    "before the log) counts as informed without a date. Through the family = that event's channel is "
    "'via family' or it names the family member who passed the news on; directly = a letter, phone "
    "call or clinic contact (or another channel with a clinic role); otherwise not recorded. Declined "
    "= a contact event with outcome declined, or an open wish for no further contact (counted undated). "
    "Not reachable = the newest contact event is wrong "
    "address, moved away or lost to follow-up. Counselled = a contact event in clinic by a counsellor "
    "that reached the relative. Tested = genetic results here or genetic tests at other centres; "
    "screened = echo, CMR or clinic studies here or screenings at other centres. Until a contact or a "
    "result from another centre is entered for the families read, counselling, the route and tests "
    "elsewhere are shown as not recorded."
)


@dataclass
class FamilyRecords:
    """One family's engine records and what the service found out on the way."""

    family: str
    proband: str | None
    result_date: dt.date | None
    records: list = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


# --------------------------------------------------------------------------- the contact log


def has_contact_log(conn: Connection) -> bool:
    """True when the store has the contact log tables."""
    names = set(inspect(conn).get_table_names())
    return "contact_event" in names


def contact_events(conn: Connection, scope: Scope | None) -> tuple[pd.DataFrame | None, pd.DataFrame | None]:
    """The contact log of the families in ``scope``: (contact events, external results), or
    (None, None) when the store has no contact log.

    Events: columns ``person, event_date, channel, by_role, via, outcome, source`` (ISO dates; ``via``
    the code of the family member who passed the news on).
    External results: ``person, kind, result_date``.
    """
    if not has_contact_log(conn):
        return None, None
    from tracker.services.contacts import load_contact_events
    from tracker.store import repository as repo

    events = load_contact_events(conn, scope)
    loader = getattr(repo, "load_external_results", None)
    external = loader(conn, scope) if loader is not None else _load_external_results(conn, scope)
    return events, external


def _load_external_results(conn: Connection, scope: Scope | None):
    import pandas as pd
    from sqlalchemy import MetaData, Table, select

    from tracker.store.models import Person
    from tracker.store.repository import _in_scope

    md = MetaData()
    ext = Table("external_result", md, autoload_with=conn)
    stmt = (select(Person.code, ext.c.kind, ext.c.result_date)
            .join(Person, ext.c.person_id == Person.id).where(Person.removed_at.is_(None)))  # fmt: skip
    if "removed_at" in ext.c:
        stmt = stmt.where(ext.c.removed_at.is_(None))
    stmt = _in_scope(stmt, scope, Person.family_id)
    rows = [(p, k, d.isoformat() if d is not None else None) for p, k, d in conn.execute(stmt).all()]
    return pd.DataFrame(rows, columns=["person", "kind", "result_date"], dtype=object)


# --------------------------------------------------------------------------- building the records


def _day(v) -> dt.date | None:
    if v is None:
        return None
    if isinstance(v, dt.datetime):
        return v.date()
    if isinstance(v, dt.date):
        return v
    try:
        if v != v:  # NaN
            return None
    except TypeError:
        pass
    text = str(v).strip()
    return dt.date.fromisoformat(text[:10]) if text else None


def _entered(events) -> bool:
    """True when the log holds a contact entered by a user (not only events kept from the older status)."""
    if events is None or not len(events):
        return False
    if "source" not in events.columns:
        return True
    return bool((events["source"] == "entered").any())


def _present(v) -> bool:
    """A code in a cell (not None, NaN or blank: pandas may give NaN for a missing text)."""
    return isinstance(v, str) and v.strip() != "" or isinstance(v, int) and not isinstance(v, bool)


def _earliest(days) -> dt.date | None:
    present = [d for d in days if d is not None]
    return min(present) if present else None


def _born(ped: Pedigree, person: str) -> dt.date | None:
    """The date of birth when known to the day (a year-only date is not used to start a clock)."""
    m = ped.member(person)
    return m.birth_date if m.birth_date is not None and m.birth_date_precision == "day" else None


def relative_degree(ped: Pedigree, proband: str, person: str) -> int | None:
    """Degree of relationship of ``person`` to ``proband`` (None: not a blood relative)."""
    if ped.kinship(proband, person) <= 0:
        return None
    return ped.relationship(proband, person).degree


def choose_proband(st: fs.FamilyState) -> tuple[str | None, list[str]]:
    """The recorded proband; with none, the first member with a positive result (a note says so)."""
    ped = st.pedigree
    marked = [p for p in ped.people if ped.member(p).proband]
    if len(marked) == 1:
        return marked[0], []
    if len(marked) > 1:
        return sorted(marked)[0], [f"several probands recorded ({', '.join(sorted(marked))}): degrees counted "
                                   f"from {sorted(marked)[0]}"]  # fmt: skip
    carriers = _carrier_results(st)
    if carriers:
        first = min(carriers, key=lambda pd_: (pd_[1], pd_[0]))[0]
        return first, [f"no proband recorded: degrees counted from {first}, the first member with a positive result"]
    return None, ["no proband recorded and no positive result: degrees of relationship cannot be counted"]


def _carrier_results(st: fs.FamilyState) -> list[tuple[str, dt.date]]:
    """(person, date) of the family's 'carrier' results for its managed variant."""
    res = st.results
    if res is None or not len(res) or st.variant is None:
        return []
    out = []
    for p, d, v, r in zip(res["person"], res["test_date"], res["variant"], res["result"]):
        if r == "carrier" and (v is None or v == st.variant.key) and _day(d) is not None:
            out.append((p, _day(d)))
    return out


def cascade_start(st: fs.FamilyState) -> tuple[dt.date | None, str]:
    """The family's cascade start date (see ``DEF_PROBAND_RESULT``) and how it was found."""
    from tracker.domain.genetics import ACTIONABLE_CLASSES

    v = st.variant
    if v is None:
        return None, "no variant recorded"
    became = next((c.classified_on for c in v.history if c.acmg_class in ACTIONABLE_CLASSES), None)
    if became is None or v.current_class not in ACTIONABLE_CLASSES:
        return None, f"family variant {v.gene} {v.key} is not classified P/LP"
    carriers = _carrier_results(st)
    if not carriers:
        return None, f"{v.gene} {v.key} is P/LP but no carrier result is recorded"
    first = min(d for _, d in carriers)
    if became > first:
        return became, f"first carrier result {first.isoformat()}; variant first classified P/LP {became.isoformat()}"
    return first, f"first carrier result {first.isoformat()}"


def at_risk(st: fs.FamilyState, proband: str | None, person: str, start: dt.date | None) -> tuple[bool, str]:
    """Whether ``person`` is an at-risk relative (``DEF_AT_RISK``) and why."""
    ped = st.pedigree
    m = ped.member(person)
    if person == proband:
        return False, "the proband"
    if m.placeholder:
        return False, "drawn only to connect the pedigree"
    if m.vital_status == "deceased":
        return False, "deceased"
    if proband is None:
        return False, "no proband: relationship unknown"
    if ped.kinship(proband, person) <= 0:
        return False, "not a blood relative of the proband"
    if start is not None:
        g = st.genotypes[person] if person in st.genotypes else None
        if g is not None and g.status == "not_at_risk":
            return False, f"ruled out by the pedigree: {g.reason}"
        why = "blood relative of the proband"
        if g is not None and g.status == "non_carrier":
            why += " (tested non-carrier: at risk until the test)"
        return True, why
    return True, "blood relative of the proband (no cascade start date: at risk by blood)"


def _dates_by_person(frame, person_col: str, date_col: str, keep=None) -> dict[str, dt.date]:
    out: dict[str, dt.date] = {}
    if frame is None or not len(frame):
        return out
    cols = [frame[person_col].tolist(), frame[date_col].tolist()]
    rows = zip(*cols) if keep is None else ((p, d) for (p, d), k in zip(zip(*cols), keep) if k)
    for p, d in rows:
        day = _day(d)
        if day is not None and (p not in out or day < out[p]):
            out[p] = day
    return out


@dataclass
class _Events:
    """Per person: what the contact log (or the contact status) says."""

    informed: dict[str, dt.date] = field(default_factory=dict)
    informed_undated: set[str] = field(default_factory=set)
    via: dict[str, str] = field(default_factory=dict)
    counselled: dict[str, dt.date] = field(default_factory=dict)
    declined: dict[str, dt.date | None] = field(default_factory=dict)
    unreachable: dict[str, dt.date | None] = field(default_factory=dict)
    tested_external: dict[str, dt.date] = field(default_factory=dict)
    screened_external: dict[str, dt.date] = field(default_factory=dict)
    carried_over: set[str] = field(default_factory=set)  # first contact from the status kept before the log


COUNSELLING_ROLES = ("counsellor",)  # the contact log's by_role for a genetic counsellor
DIRECT_CHANNELS = ("letter", "phone", "in_clinic")


def _route(r: dict) -> str | None:
    """'family', 'direct' or None (not recorded) for the event that first reached the relative."""
    channel = r.get("channel")
    if channel == "via_family" or _present(r.get("via")) or _present(r.get("via_person")):
        return "family"
    if channel in DIRECT_CHANNELS or (channel == "other" and _present(r.get("by_role"))):
        return "direct"
    return None


def events_from_log(events, external) -> _Events:
    """The contact log read as ``SOURCE_LOG`` says (events oldest first per person; undated events,
    kept from the status recorded before the log, first)."""
    ev = _Events()
    if events is not None and len(events):
        rows = events.to_dict("records")
        order = sorted(range(len(rows)), key=lambda i: (rows[i]["person"], _day(rows[i].get("event_date")) is not None,
                                                        _day(rows[i].get("event_date")) or dt.date.min, i))  # fmt: skip
        last: dict[str, dict] = {}
        for i in order:
            r = rows[i]
            p, day, outcome = r["person"], _day(r.get("event_date")), r.get("outcome")
            if outcome is None or not isinstance(outcome, str):
                continue  # a date alone, kept from the status recorded before the log
            last[p] = r
            if outcome in REACHED:
                if day is None:
                    ev.informed_undated.add(p)
                elif p not in ev.informed:
                    ev.informed[p] = day
                    ev.via[p] = _route(r)
                    if r.get("source") in ("migrated", "imported"):
                        ev.carried_over.add(p)
            if outcome == "declined" and p not in ev.declined:
                ev.declined[p] = day
            if (r.get("channel") == "in_clinic" and r.get("by_role") in COUNSELLING_ROLES and outcome in REACHED
                    and day is not None):  # fmt: skip
                ev.counselled.setdefault(p, day)
        for p, r in last.items():
            if r.get("outcome") in UNREACHABLE:
                ev.unreachable[p] = _day(r.get("event_date"))
        ev.via = {p: v for p, v in ev.via.items() if v is not None}
    if external is not None and len(external):
        for p, kind, d in zip(external["person"], external["kind"], external["result_date"]):
            day = _day(d)
            if day is None:
                continue
            target = ev.tested_external if kind == "genetic_test" else ev.screened_external
            if p not in target or day < target[p]:
                target[p] = day
    return ev


def _status_events(people) -> _Events:
    """The contact status of each person read as ``SOURCE_STATUS`` says."""
    ev = _Events()
    for p, status, d in zip(people["person"], people["contact_status"], people["contact_status_date"]):
        day = _day(d)
        if status in ("contactable", "declined") and day is not None:
            ev.informed[p] = day
        if status == "declined":
            ev.declined[p] = day
        if status == "lost_to_follow_up":
            ev.unreachable[p] = day
    return ev


def family_records(st: fs.FamilyState, people, studies, ev: _Events) -> FamilyRecords:
    """The engine records of one family (every member but the proband, at risk or not)."""
    from tracker.engines.uptake import RelativeRecord

    proband, notes = choose_proband(st)
    start, how = cascade_start(st)
    notes = list(notes)
    if start is None:
        notes.append(f"no cascade start date: {how}")
    tested = _dates_by_person(st.results, "person", "test_date")
    screened = {}
    if studies is not None and len(studies):
        s = studies[studies["person"].isin(list(st.pedigree.people))]
        screened = _dates_by_person(s, "person", "study_date", [m in SCREENING_MODALITIES for m in s["modality"]])
    status = people.set_index("person")["contact_status"].to_dict() if len(people) else {}
    out = FamilyRecords(st.family, proband, start, notes=notes)
    for p in st.pedigree.people:
        if p == proband:
            continue
        risk, why = at_risk(st, proband, p, start)
        deg = relative_degree(st.pedigree, proband, p) if proband is not None else None
        ext = ev.tested_external.get(p)
        here = tested.get(p)
        test_day = _earliest([here, ext])
        declined = p in ev.declined or status.get(p) == "declined"
        unreachable = p in ev.unreachable or status.get(p) == "lost_to_follow_up"
        out.records.append(RelativeRecord(
            family=st.family, person=p, degree=deg, at_risk=risk, at_risk_why=why, proband_result_date=start,
            first_informed_date=ev.informed.get(p), informed_via=ev.via.get(p),
            informed_undated=p in ev.informed_undated and p not in ev.informed,
            counselled_date=ev.counselled.get(p), tested_date=test_day,
            tested_external=test_day is not None and here != test_day,
            screened_date=_earliest([screened.get(p), ev.screened_external.get(p)]),
            declined=declined, declined_on=ev.declined.get(p),
            not_reachable=unreachable, not_reachable_on=ev.unreachable.get(p), born_on=_born(st.pedigree, p),
        ))  # fmt: skip
    return out


# --------------------------------------------------------------------------- the command's data


def uptake_data(conn: Connection, *, family: str | None, start: dt.date | None, end: dt.date,
                scope: Scope | None = None) -> dict:  # fmt: skip
    """What `tracker uptake --json` prints: the figures of ``family`` (or every family) over the period.

    ``scope``: the families read (default: the family named, else the cohort).
    """
    from tracker.engines import family_state as fs
    from tracker.engines import uptake as U
    from tracker.services.recall import _load
    from tracker.store.repository import Scope

    if start is not None and start > end:
        raise UserError("--from is after --to")
    if scope is None:
        scope = Scope.families([family]) if family is not None else Scope()
    frames = _load(conn, scope)
    if family is not None:
        if family not in set(frames.families["family"]):
            raise UserError(f"unknown family {family!r}")
        if family not in set(frames.people["family"]):
            raise UserError(f"family {family!r} has no members recorded")
    log_events, external = contact_events(conn, scope)
    logged = log_events is not None
    people = frames.people
    # The log is the record where there is one (the status words are derived from it); without
    # it, the contact status stands in.
    ev = events_from_log(log_events, external) if logged else _status_events(people)
    states = fs.build_family_states(frames.people, frames.variants, frames.results, frames.assessments,
                                    frames.studies, as_of=end)  # fmt: skip
    wanted = [family] if family is not None else sorted(states)
    records: list[RelativeRecord] = []
    probands: dict[str, str | None] = {}
    starts: dict[str, dt.date | None] = {}
    notes: list[str] = []
    for fam in wanted:
        fr = family_records(states[fam], people[people["family"] == fam], frames.studies, ev)
        records.extend(fr.records)
        carried = sum(r.at_risk and r.person in ev.carried_over for r in fr.records)
        if logged and carried:
            fr.notes.append(f"{carried} at-risk relatives' first contact comes from the status recorded before the "
                            "contact log: how they were told, and any counselling then, are not recorded")
        probands[fam], starts[fam] = fr.proband, fr.result_date
        notes.extend(f"{fam}: {n}" for n in fr.notes)
    # Counselling, the route and tests elsewhere are known only once the log is in use for these
    # families (a contact entered, or a result from another centre); before that, "not recorded".
    in_use = logged and (_entered(log_events) or (external is not None and len(external) > 0))
    recorded = set(U.STATUSES) | {"route", "external"}
    if not in_use:
        recorded -= {"counselled", "route", "external"}
    report = U.uptake(records, U.Period(start, end), probands=probands, result_dates=starts,
                      recorded=recorded, notes=notes)  # fmt: skip
    data = U.report_dict(report)
    data["source"] = SOURCE_LOG if logged else SOURCE_STATUS
    data["contact_log"] = logged
    data["contact_log_in_use"] = in_use
    data["family"] = family
    data["relatives"] = [
        {"family": r.family, "person": r.person, "degree": r.degree, "degree_group": U.degree_group(r.degree),
         "at_risk": r.at_risk, "at_risk_why": r.at_risk_why, **_status_dict(r, end)}
        for r in records
    ]  # fmt: skip
    data["_report"] = report
    return data


def _status_dict(r: RelativeRecord, end: dt.date) -> dict:
    from tracker.engines.uptake import first_contact, status_of

    iso = lambda d: d.isoformat() if d is not None and d <= end else None  # noqa: E731
    st = status_of(r, end)
    return {
        "first_contact": iso(first_contact(r)),
        "informed_via": r.informed_via if st["informed"] else None,
        "counselled": iso(r.counselled_date),
        "tested": iso(r.tested_date),
        "tested_elsewhere": r.tested_external if st["tested"] else None,
        "screened": iso(r.screened_date),
        "declined": st["declined"],
        "not_reachable": st["not_reachable"],
    }


def public(data: dict) -> dict:
    """``data`` without the engine objects (what --json prints)."""
    return {k: v for k, v in data.items() if not k.startswith("_")}
