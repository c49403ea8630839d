"""The reclassification to-do list (`tracker tasks`, table ``impact_item``): list tasks, mark one done."""

from __future__ import annotations

import datetime as dt

from sqlalchemy import Connection, select, update

from tracker.errors import UserError
from tracker.services.recall import _iso
from tracker.store import audit
from tracker.store.models import Family, ImpactItem, Person, Variant, VariantClassification


def _task_query():
    return (
        select(
            ImpactItem.id, Family.code, Person.code, Variant.gene, Variant.transcript, Variant.hgvs_c,
            VariantClassification.acmg_class, VariantClassification.classified_on, ImpactItem.change,
            ImpactItem.what_changes, ImpactItem.action, ImpactItem.source, ImpactItem.created_at,
            ImpactItem.created_by, ImpactItem.done_on, ImpactItem.done_by, ImpactItem.done_note,
        )
        .join(VariantClassification, ImpactItem.variant_classification_id == VariantClassification.id)
        .join(Variant, VariantClassification.variant_id == Variant.id)
        .join(Family, Variant.family_id == Family.id)
        .outerjoin(Person, ImpactItem.person_id == Person.id)
        .order_by(ImpactItem.id)
    )  # fmt: skip


def _task_dict(r) -> dict:
    (iid, fam, person, gene, tx, c, cls, on, change, what, action, source, created_at, created_by,
     done_on, done_by, done_note) = r  # fmt: skip
    return {
        "id": iid, "family": fam, "person": person, "variant": f"{tx}:{c}", "gene": gene,
        "classification": cls, "classified_on": _iso(on), "change": change, "what_changes": what,
        "action": action, "source": source, "created_at": created_at.isoformat() if created_at else None,
        "created_by": created_by, "status": "done" if done_on else "open", "done_on": _iso(done_on),
        "done_by": done_by, "done_note": done_note,
    }  # fmt: skip


def list_tasks(conn: Connection, family: str | None = None, include_done: bool = False) -> list[dict]:
    """The tasks (oldest first), of one family when ``family`` is given; open ones only unless ``include_done``.

    An unknown family is a one-line error."""
    if family is not None and conn.execute(select(Family.id).where(Family.code == family)).first() is None:
        raise UserError(f"unknown family {family!r}")
    stmt = _task_query()
    if family is not None:
        stmt = stmt.where(Family.code == family)
    if not include_done:
        stmt = stmt.where(ImpactItem.done_on.is_(None))
    return [_task_dict(r) for r in conn.execute(stmt).all()]


def mark_done(conn: Connection, task_id: int, note: str, user: str | None) -> dict:
    """Mark task ``task_id`` done today (inside the caller's write transaction) with its audit entry;
    the task as it now reads. Refused when there is no such task or it is already done."""
    row = conn.execute(select(ImpactItem.id, ImpactItem.done_on, ImpactItem.person_id, ImpactItem.change)
                       .where(ImpactItem.id == task_id)).first()  # fmt: skip
    if row is None:
        raise UserError(f"no task {task_id}")
    if row.done_on is not None:
        raise UserError(f"task {task_id} was already done on {row.done_on.isoformat()}")
    conn.execute(
        update(ImpactItem)
        .where(ImpactItem.id == task_id, ImpactItem.done_on.is_(None))
        .values(done_on=dt.date.today(), done_by=audit.actor(user), done_note=note)
    )
    done = _task_dict(conn.execute(_task_query().where(ImpactItem.id == task_id)).one())
    audit.record(conn, action="task_done", table="impact_item", row_id=task_id, family=done["family"],
                 person=done["person"], what=f"task {task_id} done: {row.change}",
                 before={"done_on": None, "done_by": None, "done_note": None},
                 after={"done_on": done["done_on"], "done_by": done["done_by"], "done_note": done["done_note"]},
                 user=user)  # fmt: skip
    from tracker.services.proposals import refresh_families

    refresh_families(conn, [done["family"]])  # an open task is a trigger: the stored proposals change
    return done
