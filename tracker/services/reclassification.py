"""A variant's reclassification (`tracker reclassify`): the impact on each relative and the stored tasks."""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from typing import TYPE_CHECKING

from sqlalchemy import Connection, insert, select

from tracker.engines.schedule import Policy
from tracker.errors import UserError
from tracker.services.cascade import _contact_dates
from tracker.services.recall import _family_state, _Frames, _load
from tracker.settings import Settings
from tracker.store import audit
from tracker.store.models import Family, ImpactItem, Person, Variant, VariantClassification

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    from tracker.engines import family_state as fs
    from tracker.store.repository import Scope


def _targets(frames: _Frames, target: str) -> list[fs.VariantInfo]:
    """The variant(s) a TARGET names: a family code (its only variant) or transcript:c.change."""
    from tracker.engines import family_state as fs

    by_family = fs.family_variants(frames.variants)
    if ":" in target:
        found = [v for vs in by_family.values() for v in vs if v.key == target]
        if not found:
            raise UserError(f"no family has the variant {target!r} (give transcript:c.change, e.g. NM_000256.3:c.1504C>T)")
        return found
    if target not in set(frames.families["family"]):
        raise UserError(f"unknown family or variant {target!r} (a family code, or transcript:c.change)")
    vs = by_family.get(target, ())
    if not vs:
        raise UserError(f"family {target!r} has no variant recorded: nothing to reclassify")
    if len(vs) > 1:
        raise UserError(
            f"family {target!r} has {len(vs)} variants ({', '.join(v.key for v in vs)}): name one as transcript:c.change"
        )
    return list(vs)


def _reclassify_one(conn, frames: _Frames, v: fs.VariantInfo, new_class: str, on: dt.date, reason: str,
                    who: str, rule_set, policy: Policy, conf: Settings) -> dict:  # fmt: skip
    """Work out the impact of ``v``'s new class and write it (classification, tasks, audit)."""
    items, notes = _impact(frames, v, new_class, on, rule_set, policy, conf)
    return _write_one(conn, v, new_class, on, reason, who, items, notes)


def _impact(frames: _Frames, v: fs.VariantInfo, new_class: str, on: dt.date, rule_set, policy: Policy,
            conf: Settings) -> tuple[list, list[str]]:  # fmt: skip
    """The task items and notes of ``v``'s new class for each relative (nothing is written)."""
    from tracker.engines import family_state as fs
    from tracker.engines.reclassification import impact_of_reclassification

    state = _family_state(frames, v.family, None)
    proposals = fs.propose_for_family(state, rule_set, policy, on)
    screening = fs.screening_states(proposals)
    items, notes = fs.task_items(
        fs.with_shown_statuses(impact_of_reclassification(
            state.pedigree, state.results, v.current_class, new_class, screening, variant=v.key,
            affected=state.affected, history=v.history, contact_dates=_contact_dates(frames, v.family),
            declined_reapproach_months=conf.cascade.declined_reapproach_months, on=on,
            discharges=_discharges(frames, v),
        ), state, v.current_class, new_class),
        state,
    )  # fmt: skip
    return items, notes


def _discharges(frames: _Frames, v: fs.VariantInfo) -> dict[str, dict]:
    """Person -> their latest recorded discharge that relied on ``v`` (revision 0012)."""
    d = frames.discharges
    if d is None or not len(d):
        return {}
    mine = d[d["variant"] == v.key]
    return {r["person"]: r for r in mine.to_dict("records")}


def _item_dict(iid: int | None, it) -> dict:
    return {
        "id": iid, "person": it.person, "change": it.change, "what_changes": it.what_changes,
        "action": it.action, "source": it.source, "status_before": it.status_before,
        "status_after": it.status_after,
    }  # fmt: skip


def _write_one(conn, v: fs.VariantInfo, new_class: str, on: dt.date, reason: str, who: str, items,
               notes: list[str]) -> dict:  # fmt: skip
    """Store ``v``'s new classification, its task items and their audit entries (inside the caller's
    write transaction)."""
    variant_id = conn.execute(
        select(Variant.id).join(Family, Variant.family_id == Family.id).where(
            Family.code == v.family, Variant.transcript == v.transcript, Variant.hgvs_c == v.hgvs_c
        )
    ).scalar_one()
    cid = conn.execute(
        insert(VariantClassification).returning(VariantClassification.id),
        dict(variant_id=variant_id, classified_on=on, acmg_class=new_class, reason=reason),
    ).scalar_one()
    audit.record(conn, action="reclassify", table="variant_classification", row_id=cid, family=v.family,
                 what=f"{v.gene} {v.key} classified {new_class} on {on.isoformat()}",
                 before={"acmg_class": v.current_class, "classified_on": v.classified_on},
                 after={"acmg_class": new_class, "classified_on": on}, reason=reason, user=who)  # fmt: skip
    person_ids = dict(conn.execute(select(Person.code, Person.id).where(Person.family_id == select(Family.id).where(
        Family.code == v.family).scalar_subquery())).all())  # fmt: skip
    now = dt.datetime.now(dt.timezone.utc).replace(tzinfo=None, microsecond=0)
    rows = []
    for it in items:
        stored, what = it.change, it.what_changes
        iid = conn.execute(
            insert(ImpactItem).returning(ImpactItem.id),
            dict(
                variant_classification_id=cid, person_id=person_ids.get(it.person) if it.person else None,
                change=stored, what_changes=what, action=it.action, source=it.source,
                status_before=it.status_before, status_after=it.status_after, created_at=now, created_by=who,
            ),
        ).scalar_one()  # fmt: skip
        audit.record(conn, action="reclassify", table="impact_item", row_id=iid, family=v.family, person=it.person,
                     what=f"task {iid}: {it.change}", after={"change": it.change, "status_before": it.status_before,
                     "status_after": it.status_after}, reason=reason, user=who)  # fmt: skip
        rows.append(_item_dict(iid, it))
    return {
        "family": v.family,
        "gene": v.gene,
        "variant": v.key,
        "from_class": v.current_class,
        "to_class": new_class,
        "classified_on": on.isoformat(),
        "reason": reason,
        "classification_id": cid,
        "items": rows,
        "notes": notes,
    }



# --------------------------------------------------------------------------- plan, then write


def _split_key(target: str) -> tuple[str, str]:
    tx, _, c = target.partition(":")
    return tx, c


def target_scope(conn: Connection, target: str) -> Scope:
    """The families a TARGET's reclassification reads: the family named, or every family that has
    the variant transcript:c.change."""
    from tracker.store.repository import Scope

    if ":" not in target:
        return Scope.families([target])
    tx, c = _split_key(target)
    codes = conn.execute(select(Family.code).join(Variant, Variant.family_id == Family.id)
                         .where(Variant.transcript == tx, Variant.hgvs_c == c)).scalars().all()  # fmt: skip
    return Scope.families(codes)


@dataclass(frozen=True)
class Planned:
    """One variant's reclassification worked out from the records as read (nothing written yet)."""

    variant: fs.VariantInfo
    items: list
    notes: list[str]


@dataclass(frozen=True)
class Plan:
    """What a reclassification writes, and the state of the records it was worked out from."""

    new_class: str
    on: dt.date
    reason: str
    planned: list[Planned]
    read_state: dict
    scope: Scope


def plan(conn: Connection, target: str, new_class: str, on: dt.date, reason: str, rule_set, policy: Policy,
         conf: Settings, scope: Scope | None = None) -> Plan:  # fmt: skip
    """Read the records of the families concerned (``scope``: these families instead, e.g. the cohort
    ``Scope()``) and work out every relative's impact; one-line error if the date or class is refused."""
    scope = scope if scope is not None else target_scope(conn, target)
    marks = audit_marks(conn, scope)  # before the records are read: a write after this moves the mark
    frames = _load(conn, scope)
    variants = _targets(frames, target)
    for v in variants:
        if on <= v.classified_on:
            raise UserError(
                f"{v.family} {v.key}: --date {on.isoformat()} is not after the latest classification "
                f"({v.classified_on.isoformat()}, {v.current_class}); the class history is kept in date order"
            )
        if new_class == v.current_class:
            raise UserError(f"{v.family} {v.key} is already classified {new_class} (since {v.classified_on.isoformat()})")
    planned = [Planned(v, *_impact(frames, v, new_class, on, rule_set, policy, conf)) for v in variants]
    return Plan(new_class, on, reason, planned, read_state(conn, variants, marks), scope)


def audit_marks(conn: Connection, scope: Scope) -> dict[str | None, int | None]:
    """The last audit entry of each family in ``scope`` (key None: the whole cohort) counting entries
    with no family (imports); every write to the store adds an entry in its own transaction."""
    from sqlalchemy import func, or_

    from tracker.store.models import AuditEntry

    def mark(family: str | None):
        stmt = select(func.max(AuditEntry.id))
        if family is not None:
            stmt = stmt.where(or_(AuditEntry.family_code == family, AuditEntry.family_code.is_(None)))
        return conn.execute(stmt).scalar_one()

    if scope.cohort:
        return {None: mark(None)}
    return {f: mark(f) for f in sorted(scope.family_codes)}


def read_state(conn: Connection, variants, marks: dict | None = None) -> dict:
    """What a reclassification depends on, per family: the latest classification row of each variant,
    the number of people and of genetic results, and the last audit entry of the family or of an
    import (every write to the store is audited)."""
    from sqlalchemy import func

    from tracker.store.models import GeneticResult
    from tracker.store.repository import Scope

    out = {}
    for v in variants:
        tx, c = v.transcript, v.hgvs_c
        latest = conn.execute(
            select(VariantClassification.id, VariantClassification.acmg_class, VariantClassification.classified_on)
            .join(Variant, VariantClassification.variant_id == Variant.id)
            .join(Family, Variant.family_id == Family.id)
            .where(Family.code == v.family, Variant.transcript == tx, Variant.hgvs_c == c)
            .order_by(VariantClassification.id.desc()).limit(1)
        ).first()  # fmt: skip
        fam_id = select(Family.id).where(Family.code == v.family).scalar_subquery()
        people = conn.execute(select(func.count()).select_from(Person)
                              .where(Person.family_id == fam_id, Person.removed_at.is_(None))).scalar_one()  # fmt: skip
        results = conn.execute(select(func.count()).select_from(GeneticResult).join(Person)
                               .where(Person.family_id == fam_id)).scalar_one()  # fmt: skip
        if marks is None:
            audit_mark = audit_marks(conn, Scope.families([v.family]))[v.family]
        else:  # read before the records (a cohort-wide mark stands for every family)
            audit_mark = marks[v.family] if v.family in marks else marks[None]
        out[f"{v.family} {v.key}"] = {
            "latest classification": tuple(latest) if latest else None, "people": people,
            "genetic results": results, "last audit entry": audit_mark,
        }  # fmt: skip
    return out


def write(conn: Connection, p: Plan, who: str) -> list[dict]:
    """Write a plan inside the caller's write transaction, after checking that the records it was
    worked out from are unchanged; else a one-line error and nothing is written. The families'
    stored recall proposals are recomputed in the same transaction."""
    from tracker.services.proposals import refresh_families

    now = read_state(conn, [x.variant for x in p.planned], audit_marks(conn, p.scope))
    for key, before in p.read_state.items():
        changed = [k for k, v in before.items() if now.get(key, {}).get(k) != v]
        if changed:
            raise UserError(f"{key}: the records changed while the impact was worked out ({', '.join(changed)}); "
                            "nothing written: run the command again")  # fmt: skip
    out = [_write_one(conn, x.variant, p.new_class, p.on, p.reason, who, x.items, x.notes) for x in p.planned]
    refresh_families(conn, {x.variant.family for x in p.planned})  # the stored recall proposals, same transaction
    return out


def dry_run(p: Plan) -> list[dict]:
    """A plan as the command shows it when nothing is written (no row ids)."""
    out = []
    for x in p.planned:
        v = x.variant
        out.append({
            "family": v.family, "gene": v.gene, "variant": v.key, "from_class": v.current_class,
            "to_class": p.new_class, "classified_on": p.on.isoformat(), "reason": p.reason,
            "classification_id": None, "items": [_item_dict(None, it) for it in x.items], "notes": x.notes,
        })  # fmt: skip
    return out
