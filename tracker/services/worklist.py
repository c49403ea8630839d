"""The recall worklist of a window (`tracker worklist`, `tracker report worklist` and the nurse's day in
the web), and the same list as CSV, iCalendar and PDF.

:func:`nurse_worklist` reads the proposals kept in the store (:mod:`tracker.services.proposals`)
with an indexed query (due date, family) and recomputes only the families whose rows cannot be
read on the day asked: stale, computed under other settings or rule set, past their
``valid_until``, computed for a later day, or missing (a database upgraded from before the
table). On today's date the recomputed rows are stored (one write transaction); for another
day they are computed for the read only. The result is the same as computing every family's
proposal for that day (:func:`worklist_lists`) (``tests/test_output_unchanged.py``, ``tests/test_agreement.py``,
``tests/test_proposals.py``).
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import Engine

from tracker.engines.schedule import CAUTIONS, Policy, Proposal, never_screened_text, redate
from tracker.engines.worklist import (
    contact_category,
    contact_gaps,
    lost_to_follow_up,
    not_recalled,
    plan_bookings,
    reachable,
    select_due,
    week_starts,
)
from tracker.gcpause import gc_paused
from tracker.settings import Settings


def _iso(d: dt.date | None) -> str | None:
    return d.isoformat() if d is not None else None


def _entry(p: Proposal, family: str, lst: str) -> dict:
    from tracker.normals.criteria import NOT_ASSESSABLE
    from tracker.services.recall import _reason

    reason, source = _reason(p)
    return {
        "list": lst, "person": p.person_code, "family": family, "status": p.status, "due": _iso(p.due),
        "days_overdue": p.days_overdue, "never_screened": p.never_screened, "eligible_since": _iso(p.eligible_since),
        "gap_reason": p.gap_reason,
        "waiting": never_screened_text(p), "contact_status": p.contact_status,
        "interval_months": p.interval_months, "rule_id": p.rule_id,
        "needs": list(p.needs), "consider": list(p.consider), "reason": reason, "source": source,
        "triggers": list(p.triggers), "flags": list(p.flags), "booked_week": None, "late": None,
        "review_flags": [n for n in p.notes if n.startswith(NOT_ASSESSABLE)],
    }  # fmt: skip


def list_row(p: Proposal, family: str, lst: str, wait_weeks: int) -> dict:
    """One row of the worklist (list ``lst``: screening, affected or contact_gap), with where the
    person stands with contact, from the contact log (docs/contacts-and-letters.md)."""
    r = _entry(p, family, lst)
    r["contact"] = contact_category(p, wait_weeks)
    r["contact_later_on"] = _iso(p.contact_later_on)
    r["contact_via"] = p.contact_via
    r["informed_on"] = _iso(p.informed_on)
    return r


def lists(proposals: list[Proposal], family_of: dict[str, str], affected: set[str], trend: dict, start: dt.date,
          end: dt.date, on: dt.date, slots: int | None, reply_wait_weeks: int) -> dict:  # fmt: skip
    """Everything the worklist shows, from the proposals of ``on`` (at least everyone due or overdue by
    ``end`` and everyone not recalled), shared by ``tracker worklist`` and ``tracker report worklist``.

    ``due`` / ``affected``: reachable people due or overdue by ``end``, most
    urgent first; ``contact_gaps``: people who cannot be booked until contact
    is made (not contacted, lost to follow-up, declined), each once;
    ``booking`` (with a weekly capacity): reachable screening people booked
    from the first bookable day on or after both ``start`` and ``on``.
    """
    screening_due = select_due([p for p in proposals if p.person_code not in affected], start, end)
    affected_due = select_due([p for p in proposals if p.person_code in affected], start, end)
    gaps = contact_gaps(screening_due + affected_due + [p for p in proposals if p.status == "not_recalled"])
    wait = reply_wait_weeks
    due_rows = [list_row(p, family_of[p.person_code], "screening", wait) for p in screening_due if reachable(p)]
    affected_rows = [list_row(p, family_of[p.person_code], "affected", wait) for p in affected_due if reachable(p)]
    gap_rows = [list_row(p, family_of[p.person_code], "contact_gap", wait) for p in gaps]
    booking = None
    if slots is not None:
        plan = plan_bookings([p for p in screening_due if reachable(p)], start, end, slots, on)
        booked = {b.person_code: b for b in plan.bookings}
        for r in due_rows:
            b = booked.get(r["person"])
            r["booked_week"] = _iso(b.week_start) if b else None
            r["late"] = (b.late if b else True)
        booking = {
            "slots_per_week": slots,
            "first_bookable_day": plan.window_start.isoformat(),
            "weeks": [
                {"week_start": w.isoformat(), "booked": [b.person_code for b in plan.bookings if b.week_start == w],
                 "free": slots - sum(1 for b in plan.bookings if b.week_start == w)}
                for w in week_starts(plan.window_start, plan.weeks)
            ],  # fmt: skip
            "booked_late": [
                {"person": b.person_code, "due": b.due.isoformat(), "booked_week": b.week_start.isoformat(),
                 "days_late": b.days_late}
                for b in plan.bookings if b.late
            ],  # fmt: skip
            "not_booked": [
                {"person": u.person_code, "due": u.due.isoformat(), "reason": u.reason}
                for u in plan.unseen if u.week_start is None
            ],
        }
    return {
        "due": due_rows, "affected": affected_rows, "contact_gaps": gap_rows, "booking": booking, "trend": trend,
        "not_recalled": [{"person": p.person_code, "family": family_of[p.person_code], "reason": "declined: not recalled"}
                         for p in not_recalled(proposals)],
        "lost_to_follow_up": [p.person_code for p in lost_to_follow_up(screening_due + affected_due)],
        "no_response": [{"person": r["person"], "family": r["family"], "informed_on": r["informed_on"],
                         "wait_weeks": wait} for r in due_rows + affected_rows if r["contact"] == "no_response"],
        "must_not_approach": [r["person"] for r in gap_rows if r["contact"] == "must_not_approach"],
    }  # fmt: skip


def due_proposals(frames, conf, rule_set, policy, start: dt.date, end: dt.date, on: dt.date):
    """Proposals due or overdue by ``end``: (screening, affected, family of each person, trend note,
    every proposal).

    Shared by ``tracker worklist`` and ``tracker report worklist``.  The cyclic garbage
    collector is paused while every family's state is built (see :mod:`tracker.gcpause`).
    """
    from tracker.engines import family_state as fs
    from tracker.services.recall import _with_trends, with_trend_texts

    with gc_paused():
        states = fs.build_family_states(
            frames.people, frames.variants, frames.results, frames.assessments, frames.studies,
            reclassification_pending=frames.pending, as_of=on,
        )  # fmt: skip
        states, trend = _with_trends(frames, states, rule_set.id, conf, on)
    proposals: list[Proposal] = []
    family_of: dict[str, str] = {}
    affected: set[str] = set()
    for fam, st in states.items():
        for p, prop in fs.propose_for_family(st, rule_set, policy, on).items():
            prop = with_trend_texts(prop, st.facts[p])
            proposals.append(prop)
            family_of[p] = fam
            if st.states[p].phenotype == "positive":
                affected.add(p)
    screening_due = select_due([p for p in proposals if p.person_code not in affected], start, end)
    affected_due = select_due([p for p in proposals if p.person_code in affected], start, end)
    return screening_due, affected_due, family_of, trend, proposals


def worklist_lists(frames, conf, rule_set, policy, start: dt.date, end: dt.date, on: dt.date, slots: int | None) -> dict:
    """Everything the worklist shows, computed afresh from ``frames`` (every family's proposal for ``on``);
    :func:`nurse_worklist` gives the same from the stored proposals. See :func:`lists`."""
    _screening, affected_due, family_of, trend, proposals = due_proposals(frames, conf, rule_set, policy, start, end, on)
    affected = {p.person_code for p in affected_due}
    return lists(proposals, family_of, affected, trend, start, end, on, slots, conf.cascade.reply_wait_weeks)


def _recomputed(conn, families: set[str], on: dt.date, conf: Settings, rule_set, policy: Policy):
    """(proposals, family of each, affected people, trend values) of ``families`` computed for ``on``."""
    from tracker.services import proposals as SP
    from tracker.services.recall import load
    from tracker.store.repository import Scope

    if not families:
        return [], {}, set(), False
    scope = Scope() if len(families) > SP.CHUNK_FAMILIES else Scope.families(sorted(families))
    computed, _trend = SP.compute(load(conn, scope, on), families, on, conf, rule_set, policy)
    props = [c.proposal for c in computed if c.proposal is not None]
    return (props, {c.person: c.family for c in computed}, {c.person for c in computed if c.affected},
            any(c.trend_values for c in computed))


def proposals_for(engine: Engine, end: dt.date, on: dt.date, conf: Settings, rule_set, policy: Policy,
                  today: dt.date | None = None) -> tuple[list[Proposal], dict[str, str], set[str], dict, dict]:  # fmt: skip
    """The proposals a worklist for a window ending ``end`` needs, for day ``on``: (proposals, family
    of each person, affected people, trend modifiers note, how they were read).

    Stored rows that hold on ``on`` are read with an indexed query; the families with a row that
    does not hold (:func:`tracker.services.proposals.invalid_families`) are recomputed. When ``on``
    is ``today`` (default: the clock's date) the recomputed families are stored, in one write
    transaction that looks again for rows that do not hold (another command may have written).
    """
    from tracker.services import proposals as SP
    from tracker.store.database import reading

    key = SP.rules_key(conf, rule_set, policy)
    left, stored = make_current(engine, on, conf, rule_set, policy, today)
    with reading(engine) as conn:
        out = _read(conn, SP.invalid_families(conn, on, key) if left else set(), end, on, conf, rule_set, policy, key)
    out[4]["stored_families"] = stored
    return out


def make_current(engine: Engine, on: dt.date, conf: Settings, rule_set, policy: Policy,
                 today: dt.date | None = None) -> tuple[set[str], int]:  # fmt: skip
    """Store the proposals of the families whose stored rows do not hold on ``on``, when ``on`` is
    ``today`` (default: the clock's date) and the store can be written, in one write transaction
    that looks again for rows that do not hold (another command may have written). Returns the
    families whose rows still do not hold (another day, a read-only store) and how many were stored."""
    from tracker.services import proposals as SP
    from tracker.store.database import reading, writing

    today = today or dt.date.today()
    key = SP.rules_key(conf, rule_set, policy)
    with reading(engine) as conn:
        invalid = set() if SP.all_hold(conn, on, key) else SP.invalid_families(conn, on, key)
    if not invalid or on != today or _read_only(engine):
        return invalid, 0
    with writing(engine) as conn:
        invalid = SP.invalid_families(conn, on, key)
        fams = sorted(invalid)
        for i in range(0, len(fams), SP.CHUNK_FAMILIES):
            SP._refresh_chunk(conn, fams[i:i + SP.CHUNK_FAMILIES], on, conf, rule_set, policy, key)
    return set(), len(invalid)


def _read_only(engine: Engine) -> bool:
    """A SQLite file this process cannot write (opened read-only): recompute without storing."""
    import os
    from pathlib import Path

    if engine.dialect.name != "sqlite" or not engine.url.database:
        return False
    path = Path(engine.url.database)
    return not (os.access(path, os.W_OK) and os.access(path.parent, os.W_OK))


def _read(conn, invalid: set[str], end, on, conf, rule_set, policy, key):
    from tracker.services import proposals as SP
    from tracker.services.recall import trend_summary

    rows = SP.worklist_rows(conn, end, skip=invalid)
    props, family_of, affected, values = _recomputed(conn, invalid, on, conf, rule_set, policy)
    for person, family, p, is_affected in rows:
        props.append(redate(p, on))
        family_of[person] = family
        if is_affected:
            affected.add(person)
    values = values or SP.any_trend_values(conn, skip=invalid)
    how = {"read": len(rows), "recomputed_families": len(invalid), "stored_families": 0}
    return props, family_of, affected, trend_summary(rule_set.id, conf, values), how


def nurse_worklist(engine: Engine, start: dt.date, end: dt.date, on: dt.date, conf: Settings, rule_set,
                   policy: Policy, slots: int | None, today: dt.date | None = None) -> dict:  # fmt: skip
    """Everything ``tracker worklist`` shows for the window ``[start, end]`` on day ``on`` (see
    :func:`lists`), with the variant re-review reminders (``variant_rereview``) and how the
    proposals were read (``read``: stored rows read, families recomputed, rows stored)."""
    from tracker.services.cascade import _variant_rereview
    from tracker.services.recall import _Frames
    from tracker.store import repository as repo
    from tracker.store.database import reading

    props, family_of, affected, trend, how = proposals_for(engine, end, on, conf, rule_set, policy, today)
    out = lists(props, family_of, affected, trend, start, end, on, slots, conf.cascade.reply_wait_weeks)
    with reading(engine) as conn:
        variants = repo.load_variants(conn)
    frames = _Frames(None, None, variants, None, None, None, frozenset())  # type: ignore[arg-type]
    out["variant_rereview"] = _variant_rereview(frames, on, conf.cascade.variant_rereview_months)
    out["read"] = how
    return out


def csv_text(rows: list[dict]) -> str:
    """The worklist rows as CSV (the layout of ``tracker worklist --csv``), with the cautions."""
    from tracker.outputs import worklist_csv

    return worklist_csv.worklist_csv(rows, cautions=CAUTIONS)


def calendar_bytes(rows: list[dict]) -> bytes:
    """The proposed visits as iCalendar (as ``tracker worklist --ics``): the booked week, else the due date."""
    from tracker.outputs import ics

    visits = [
        ics.CalendarVisit(r["person"], dt.date.fromisoformat(r["booked_week"] or r["due"]), tuple(r["needs"]),
                          f"{r['waiting'][0].upper()}{r['waiting'][1:]}. {r['reason']}" if r["waiting"] else r["reason"])
        for r in rows if r["booked_week"] or r["due"]
    ]  # fmt: skip
    return ics.calendar_bytes(visits, caution=" ".join(CAUTIONS))


def pdf_document(lists: dict, *, clinic: str, start: dt.date, end: dt.date, rule_set, policy, on: dt.date,
                 slots: int | None, printed: dt.date | None = None):
    """The printable worklist (as ``tracker report worklist``): a :class:`tracker.outputs.worklist_pdf.WorklistDocument`."""
    from tracker.outputs import worklist_pdf as W

    booking = lists["booking"]
    return W.WorklistDocument(
        clinic=clinic, window_from=start, window_to=end, rule_set=rule_set.title, policy=policy.point,
        as_of=on, printed=printed or dt.date.today(), screening=tuple(W.line_from_row(r) for r in lists["due"]),
        affected=tuple(W.line_from_row(r) for r in lists["affected"]), slots_per_week=slots, cautions=tuple(CAUTIONS),
        notes=(lists["trend"]["note"],), contact_gaps=tuple(W.line_from_row(r) for r in lists["contact_gaps"]),
        first_bookable_day=dt.date.fromisoformat(booking["first_bookable_day"]) if booking else None,
    )  # fmt: skip
