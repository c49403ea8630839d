"""A variant's reclassification (`tracker reclassify`): the impact on each relative and the stored tasks."""

from __future__ import annotations

import datetime as dt
from typing import TYPE_CHECKING

from sqlalchemy import insert, select

from tracker.engines.schedule import Policy
from tracker.errors import UserError
from tracker.services.cascade import _contact_dates
from tracker.services.recall import _family_state, _Frames
from tracker.settings import Settings
from tracker.store import audit
from tracker.store.models import Family, ImpactItem, Person, Variant, VariantClassification

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    from tracker.engines import family_state as fs


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
    from tracker.engines import family_state as fs
    from tracker.engines.reclassification import impact_of_reclassification

    state = _family_state(frames, v.family, None)
    proposals = fs.propose_for_family(state, rule_set, policy, on)
    screening = fs.screening_states(proposals)
    items, notes = fs.task_items(
        impact_of_reclassification(
            state.pedigree, state.results, v.current_class, new_class, screening, variant=v.key,
            affected=state.affected, history=v.history, contact_dates=_contact_dates(frames, v.family),
            declined_reapproach_months=conf.cascade.declined_reapproach_months, on=on,
        ),
        state,
    )  # fmt: skip
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
        rows.append({
            "id": iid, "person": it.person, "change": it.change, "what_changes": it.what_changes,
            "action": it.action, "source": it.source, "status_before": it.status_before,
            "status_after": it.status_after,
        })  # fmt: skip
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
