"""The nurse's lists as plain data: who is due or overdue in a window, contact gaps, and the
reclassification to-do list; and the same list as CSV, iCalendar and PDF.

Shared by ``tracker worklist``, ``tracker report worklist``, ``tracker tasks`` and the web
interface's day page (:mod:`tracker.web.pages.day`).  The worklist reads the cohort; the task
list reads table ``impact_item``.  Heavy modules are loaded where used.
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import Connection

from tracker.engines.schedule import CAUTIONS, Proposal, never_screened_text
from tracker.engines.worklist import (
    contact_gaps,
    lost_to_follow_up,
    not_recalled,
    plan_bookings,
    reachable,
    select_due,
    week_starts,
)
from tracker.errors import UserError
from tracker.gcpause import gc_paused
from tracker.services.recall import _iso, _reason, _with_trends, with_trend_texts


def _entry(p: Proposal, family: str, lst: str) -> dict:
    from tracker.normals.criteria import NOT_ASSESSABLE

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


def due_proposals(frames, conf, rule_set, policy, start: dt.date, end: dt.date, on: dt.date):
    """Proposals due or overdue by ``end``: (screening, affected, family of each person, trend note,
    every proposal).

    Shared by ``tracker worklist`` and ``tracker report worklist``.  The cyclic garbage
    collector is paused while every family's state is built (see :mod:`tracker.gcpause`).
    """
    from tracker.engines import family_state as fs

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
    """Everything the worklist shows, shared by ``tracker worklist`` and ``tracker report worklist``.

    ``due`` / ``affected``: reachable people due or overdue by ``end``, most
    urgent first; ``contact_gaps``: people who cannot be booked until contact
    is made (not contacted, lost to follow-up, declined), each once;
    ``booking`` (with a weekly capacity): reachable screening people booked
    from the first bookable day on or after both ``start`` and ``on``.
    """
    screening_due, affected_due, family_of, trend, proposals = due_proposals(frames, conf, rule_set, policy, start, end, on)
    gaps = contact_gaps(screening_due + affected_due + [p for p in proposals if p.status == "not_recalled"])
    due_rows = [_entry(p, family_of[p.person_code], "screening") for p in screening_due if reachable(p)]
    affected_rows = [_entry(p, family_of[p.person_code], "affected") for p in affected_due if reachable(p)]
    gap_rows = [_entry(p, family_of[p.person_code], "contact_gap") for p in gaps]
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
    }  # fmt: skip


def worklist(conn: Connection, conf, rule_set, policy, start: dt.date, end: dt.date, on: dt.date,
             slots: int | None) -> dict:
    """:func:`worklist_lists` over the whole cohort read from the store."""
    from tracker.services.recall import _load

    if end < start:
        raise UserError("--to is before --from")
    frames = _load(conn)
    return worklist_lists(frames, conf, rule_set, policy, start, end, on, slots)


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
