"""The web cohort page's reads: a page of families in code order, one family, or the people whose
stored recall proposal carries a trend flag, each computed with family-scoped reads through
:func:`tracker.services.review.trends_of`, so that a page costs the same at any cohort size.

Which families hold flagged people is answered from the stored proposals (table
``recall_proposal``, kept by :func:`tracker.services.proposals.refresh_families` on every write;
its column ``flagged``, migration 0013): a person whose stored proposal has progression, a projected crossing, a "criteria not assessable"
flag, or is affected (a conversion shows as affected) is a candidate; their families' trends are
then computed and only the rows the trend table flags are listed. A person flagged by the trend
table whose stored proposal shows none of these (e.g. a stale row) is listed on their family's
page, not in the flagged list; so is one whose row is stale or out of date (the next write or worklist
read recomputes it). Rows computed under other settings are not told apart here: they only choose
which families' trends are computed, never what a row shows.
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import Connection, exists, func, select

from tracker.store.models import Family, Person, RecallProposal as P

# Engineering choices: each family's trends take about 50 ms on the benchmark machine (synthetic
# cohort, docs/performance.md "Web"), so a page of 10 plus 10 flagged families stays near 1 s.
PAGE_FAMILIES = 10  # families per page
FLAGGED_FAMILIES = 10  # families whose flagged rows are listed first on page 1, and per page of the flagged list

def family_count(conn: Connection) -> int:
    """Families with a person recorded (not removed)."""
    living = exists().where(Person.family_id == Family.id, Person.removed_at.is_(None))
    return int(conn.execute(select(func.count()).select_from(Family).where(living)).scalar() or 0)


def family_page(conn: Connection, page: int, size: int = PAGE_FAMILIES) -> list[str]:
    """Page ``page`` (from 1) of the families with a person recorded, in code order."""
    stmt = (select(Family.code).join(Person, Person.family_id == Family.id).where(Person.removed_at.is_(None))
            .group_by(Family.code).order_by(Family.code).limit(size).offset((page - 1) * size))  # fmt: skip
    return [r[0] for r in conn.execute(stmt).all()]


def _flagged_exists(on: dt.date):
    """A family holds a person (not removed) whose stored proposal, readable on ``on`` (not stale,
    computed for that day or before, still valid), is ``flagged``: a trend flag or affected
    (:data:`tracker.services.proposals.FLAG_MARKS`); one index lookup per family."""
    return exists().where(P.family_id == Family.id, P.flagged.is_(True), P.stale.is_(False), P.as_of <= on,
                          P.valid_until >= on, P.person_id.not_in(select(Person.id).where(Person.removed_at.is_not(None))))


def flagged_families(conn: Connection, on: dt.date | None = None, limit: int | None = None, offset: int = 0) -> list[str]:
    """Families (code order) with a flagged person (:func:`_flagged_exists`), from ``offset``, at most
    ``limit``; read in family-code order, so a page stops after its families."""
    on = on or dt.date.today()
    stmt = select(Family.code).where(_flagged_exists(on)).order_by(Family.code).offset(offset)
    return [r[0] for r in conn.execute(stmt if limit is None else stmt.limit(limit)).all()]


def flagged_count(conn: Connection, on: dt.date | None = None) -> int:
    """How many families :func:`flagged_families` lists."""
    on = on or dt.date.today()
    return int(conn.execute(select(func.count()).select_from(Family).where(_flagged_exists(on))).scalar() or 0)
