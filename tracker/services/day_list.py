"""The nurse's day list (``/day``): the worklist of a window, most urgent first, a page of rows at a time.

The rows are the worklist's (:func:`tracker.services.worklist.lists`: due and overdue people who
can be booked, affected people in follow-up, and the contact gaps), filtered by family and by
reason, in the order of :func:`order_key`, and split in three parts: the main list (everyone but
those who asked for no further contact), the part of it informed with no response after the
reply wait, and those who must not be approached.

:func:`day_list` reads a page of each part and the size of each with indexed queries over the
stored recall proposals (table ``recall_proposal``, the columns migration 0013 added), so the
page costs the same in a small clinic and a registry: only the rows shown are decoded. When the
stored rows do not hold for the day asked and cannot be stored (another day, a read-only store),
it computes the whole worklist instead (:func:`tracker.services.worklist.nurse_worklist`) and
takes the same rows from it (:func:`from_lists`); ``tests/test_day_list.py`` checks that both
give the same rows, counts and order.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

from sqlalchemy import Connection, Date, and_, case, false, func, literal, not_, or_, select, true

from tracker.store.models import Family, RecallProposal

P = RecallProposal
REASONS = ("", "overdue", "due", "never_screened", "contact_gap", "task")
NO_FURTHER_CONTACT = "no_further_contact"
LAST_DAY = dt.date(9999, 12, 31)


@dataclass
class DayList:
    """A page of the day list. ``rows``: the main list's first rows (worklist rows, as
    :func:`tracker.services.worklist.list_row` makes them); ``total``: its size. The same for the
    informed-no-response part (``no_response``) and those who must not be approached (``must_not``)."""

    rows: list[dict]
    total: int
    no_response: list[dict]
    no_response_total: int
    must_not: list[dict]
    must_not_total: int
    wait_weeks: int
    trend: dict
    read: dict = field(default_factory=dict)


# --------------------------------------------------------------------------- the order, in Python


def order_key(row: dict, on: dt.date) -> tuple:
    """Most urgent first: the longest overdue (the earliest due date; no due date counts as due on
    ``on``), never screened before screened, the earliest due date, a trigger fired, then the
    person code (the stored ``urgency_flags`` and ``person_code`` columns give the same order)."""
    on_iso = on.isoformat()
    return (row.get("due") or on_iso, not row.get("never_screened"), row.get("due") or LAST_DAY.isoformat(),
            not row.get("triggers"), row["person"])  # fmt: skip


def matches(row: dict, family: str, reason: str, on: dt.date) -> bool:
    """Whether a worklist row is on the day list under the filters."""
    if family and row.get("family") != family:
        return False
    if reason == "overdue":
        return row.get("due") is not None and row["due"] < on.isoformat()
    if reason == "due":
        return row["list"] in ("screening", "affected") and not row.get("never_screened")
    if reason == "never_screened":
        return bool(row.get("never_screened"))
    if reason == "contact_gap":
        return row["list"] == "contact_gap"
    if reason == "task":
        return False
    return True


def from_lists(lists: dict, on: dt.date, family: str, reason: str, limit: int | None, wait_weeks: int,
               section_limit: int | None = None) -> DayList:  # fmt: skip
    """The day list from the whole worklist (``nurse_worklist``'s lists), cut as :func:`read_page` cuts it."""
    section_limit = limit if section_limit is None else section_limit
    every = [r for r in lists["due"] + lists["affected"] + lists["contact_gaps"] if matches(r, family, reason, on)]
    must_not = sorted((r for r in every if r.get("contact") == "must_not_approach"),
                      key=lambda r: (r["family"], r["person"]))  # fmt: skip
    rows = sorted((r for r in every if r.get("contact") != "must_not_approach"), key=lambda r: order_key(r, on))
    no_response = sorted((r for r in rows if r.get("contact") == "no_response"),
                         key=lambda r: (r.get("informed_on") or "9999", order_key(r, on)))  # fmt: skip

    def cut(xs, n):
        return xs if n is None else xs[:n]

    return DayList(cut(rows, limit), len(rows), cut(no_response, section_limit), len(no_response),
                   cut(must_not, section_limit), len(must_not), wait_weeks, lists["trend"],
                   {"whole_worklist": True})  # fmt: skip


# --------------------------------------------------------------------------- the same, in SQL


def _conditions(on: dt.date, end: dt.date, wait_weeks: int):
    """SQL conditions: ([overdue by ``end``, due by ``end``], not recalled and listed, reachable, list
    rank, asked for no further contact, informed with no response after the wait)."""
    on_ = literal(on, Date)
    later = P.contact_later_on.is_not(None) & (P.contact_later_on > on_)
    nfc = func.coalesce(P.contact_wish, "") == NO_FURTHER_CONTACT
    reachable = and_(P.contact_status == "contactable", not_(nfc), not_(later))
    due_by_end = [and_(P.state == state, P.due_on.is_not(None), P.due_on <= literal(end, Date))
                  for state in ("overdue", "due")]  # one query each: the index gives each in due-date order
    # worklist.contact_gaps: of those not recalled, only who declined or must not be approached
    declined = and_(P.state == "not_recalled", not_(reachable), or_(nfc, P.contact_status == "declined"))
    rank = case((and_(reachable, func.coalesce(P.affected, false()) == false()), 0), (reachable, 1), else_=2)
    cutoff = on - dt.timedelta(weeks=wait_weeks)
    # responded is an equality (the index on the unanswered finds them); every row read was stored
    # with it set (rows from before migration 0013 are recomputed before any read)
    no_response = and_(P.responded == false(), P.informed_on.is_not(None), P.informed_on <= literal(cutoff, Date),
                       not_(nfc), P.contact_status.not_in(("declined", "lost_to_follow_up", "not_contacted")),
                       not_(later))  # fmt: skip
    return due_by_end, declined, reachable, rank, nfc, no_response


def _filter(family_id: int | None, reason: str, on: dt.date, reachable):
    out = []
    if family_id is not None:
        out.append(P.family_id == family_id)
    if reason == "overdue":
        out.append(and_(P.due_on.is_not(None), P.due_on < literal(on, Date)))
    elif reason == "due":
        out.append(and_(reachable, func.coalesce(P.never_screened, false()) == false()))
    elif reason == "never_screened":
        out.append(func.coalesce(P.never_screened, false()) == true())
    elif reason == "contact_gap":
        out.append(not_(reachable))
    elif reason == "task":
        out.append(false())
    return out


def _code(col, conn: Connection):
    """Codes compared byte by byte on every backend (as Python compares them)."""
    return col.collate("C") if conn.dialect.name == "postgresql" else col


def _flag(col):
    return case((func.coalesce(col, false()) == true(), 0), else_=1)


def read_page(conn: Connection, on: dt.date, end: dt.date, wait_weeks: int, family: str = "", reason: str = "",
              limit: int | None = 50, section_limit: int | None = None) -> tuple[list, int, list, int, list, int]:  # fmt: skip
    """The stored rows of the three parts, a page of each (the main list ``limit`` rows, the other two
    ``section_limit``, default ``limit``; None: every row), and the size of each (see :class:`DayList`).

    The caller makes sure every stored row holds on ``on`` and that only people recorded have one
    (:func:`tracker.services.worklist.make_current`). Each part is read in three queries, one per
    state (overdue, due, not recalled), each in the part's order: the index
    ``ix_recall_proposal_day_list`` gives the overdue and due rows in due-date order and
    ``ix_recall_proposal_no_response`` the unanswered in the order they were informed, so a page
    stops after its rows. The three are merged here on the order's columns and only the rows shown
    are decoded. The sizes are counted from the indexes (a part's size is only counted when the
    page is full)."""
    import heapq
    import json

    from tracker.engines.schedule import redate
    from tracker.services import proposals as SP
    from tracker.services.worklist import list_row

    section_limit = limit if section_limit is None else section_limit
    family_id = None
    if family:
        family_id = conn.execute(select(Family.id).where(Family.code == family)).scalar()
        if family_id is None:
            return [], 0, [], 0, [], 0
    due_by_end, declined, reachable, rank, nfc, no_response = _conditions(on, end, wait_weeks)
    where = _filter(family_id, reason, on, reachable)
    wish_nfc = P.contact_wish == NO_FURTHER_CONTACT  # an equality: the index on the wish finds the few
    # Choose and order by the small columns; the proposals (JSON text) are read for the rows shown only.
    base = select(P.id, rank.label("rank"), P.due_on, P.never_screened, P.triggered, P.person_code, P.informed_on)
    on_ = literal(on, Date)
    code = _code(P.person_code, conn)
    by_due = (P.due_on, P.urgency_flags, code)  # order_key, for rows with a due date: the index's own order
    by_key = (func.coalesce(P.due_on, on_), _flag(P.never_screened), func.coalesce(P.due_on, literal(LAST_DAY, Date)),
              _flag(P.triggered), code)  # order_key for any row (the declined have no due date)  # fmt: skip

    def urgency(r) -> tuple:  # order_key on the columns read
        return (r.due_on or on, not r.never_screened, r.due_on or LAST_DAY, not r.triggered, r.person_code)

    parts = {
        "main": ([not_(nfc)], urgency, by_due, by_key, base),
        "no_response": ([not_(nfc), no_response], lambda r: (r.informed_on or dt.date.max, urgency(r)),
                        (P.informed_on, *by_due), (P.informed_on, *by_key), base),
        "must_not": ([wish_nfc], lambda r: (r.family, r.person_code), (_code(Family.code, conn), code),
                     (_code(Family.code, conn), code),
                     base.add_columns(Family.code.label("family")).join(Family, P.family_id == Family.id)),
    }  # fmt: skip

    def count(*conds) -> int:
        return int(conn.execute(select(func.count()).select_from(P).where(*conds, *where)).scalar_one())

    def size(name: str) -> int:
        states = (*due_by_end, declined)
        if name == "main":  # everyone listed, less those who asked for no further contact
            return sum(count(cond) - count(cond, wish_nfc) for cond in states)
        return sum(count(cond, *parts[name][0]) for cond in states)

    def decode(chosen) -> list[dict]:
        body: dict[int, tuple] = {}
        ids = [r.id for r in chosen]
        for k in range(0, len(ids), 500):
            got = conn.execute(select(P.id, Family.code, P.reasons).join(Family, P.family_id == Family.id)
                               .where(P.id.in_(ids[k:k + 500]))).all()  # fmt: skip
            body.update((i, (fam, reasons)) for i, fam, reasons in got)
        out = []
        for r in chosen:
            fam, reasons = body[r.id]
            p = redate(SP.proposal_from_json(json.loads(reasons)["proposal"]), on)
            out.append(list_row(p, fam, ("screening", "affected", "contact_gap")[r.rank], wait_weeks))
        return out

    def part(name: str) -> tuple[list[dict], int]:
        extra, key, order_due, order_declined, stmt = parts[name]
        n = limit if name == "main" else section_limit
        # The declined with no due date (all of them, as the scheduler makes them) are in the index's
        # order too (urgency flags, code); any with a due date are ordered in full.
        no_due = {"main": [P.urgency_flags, code], "no_response": [P.informed_on, P.urgency_flags, code]}.get(name)
        got = [conn.execute(q if n is None else q.limit(n)).all() for q in
               [stmt.where(cond, *where, *extra).order_by(*order_due) for cond in due_by_end]
               + [stmt.where(declined, P.due_on.is_(None), *where, *extra).order_by(*(no_due or order_declined)),
                  stmt.where(declined, P.due_on.is_not(None), *where, *extra).order_by(*order_declined)]]  # fmt: skip
        merged = list(heapq.merge(*got, key=key))
        chosen = merged if n is None else merged[:n]
        full = n is not None and any(len(g) == n for g in got)
        return decode(chosen), size(name) if full else sum(len(g) for g in got)

    shown, total = part("main")
    nr, nr_total = part("no_response")
    mn, mn_total = part("must_not")
    return shown, total, nr, nr_total, mn, mn_total


def day_list(engine, start: dt.date, end: dt.date, on: dt.date, conf, rule_set, policy, family: str = "",
             reason: str = "", limit: int | None = 50, today: dt.date | None = None,
             section_limit: int | None = None) -> DayList:  # fmt: skip
    """The day list of the window ``[start, end]`` on day ``on`` under the filters: ``limit`` rows of the
    main list, ``section_limit`` (default ``limit``) of the other two parts (None: every row). Stores
    the proposals that do not hold first, as the worklist does."""
    from tracker.services import proposals as SP
    from tracker.services import recall as SV
    from tracker.services import worklist as SW
    from tracker.store.database import reading

    wait = conf.cascade.reply_wait_weeks
    left, stored = SW.make_current(engine, on, conf, rule_set, policy, today)
    if left:  # rows that do not hold and cannot be stored: the whole worklist, computed for this read
        lists = SW.nurse_worklist(engine, start, end, on, conf, rule_set, policy, None, today)
        return from_lists(lists, on, family, reason, limit, wait, section_limit)
    with reading(engine) as conn:
        shown, total, nr, nr_total, mn, mn_total = read_page(conn, on, end, wait, family, reason, limit, section_limit)
        trend = SV.trend_summary(rule_set.id, conf, SP.any_trend_values(conn))
    return DayList(shown, total, nr, nr_total, mn, mn_total, wait, trend, {"stored_families": stored})

