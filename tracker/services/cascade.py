"""A family's cascade plan (`tracker cascade FAMILY`) and variant re-review reminders, as plain data."""

from __future__ import annotations

import datetime as dt

from tracker.domain.dates import parse_date
from typing import TYPE_CHECKING

from sqlalchemy import Connection

from tracker.services.recall import _family_state, _Frames, _iso, _load, family_scope
from tracker.settings import Settings

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    from tracker.engines import family_state as fs
    from tracker.store.repository import Scope


def _testing_item(c) -> dict:
    return {
        "person": c.person,
        "probability": float(c.probability) if c.probability is not None else None,
        "probability_text": c.probability_text,
        "age_years": c.age_years,
        "age_note": c.age_note,
        "recommendation": c.recommendation,
        "eligible_from": _iso(c.eligible_from),
        "reason": c.reason,
        "source": c.source,
        "notes": list(c.notes),
        "wait_for": c.wait_for,
    }


def _screening_item(c) -> dict:
    return {"person": c.person, "categories": list(c.categories), "reason": c.reason, "source": c.source,
            "notes": list(c.notes), "released_on": _iso(c.released_on), "relied_on": c.relied_on}  # fmt: skip


def _contact_dates(frames: _Frames, family: str) -> dict[str, dt.date | None]:
    """Person -> date of the recorded contact status (the date of a decline), for one family."""
    rows = frames.people[frames.people["family"] == family]
    out = {}
    for p, d in zip(rows["person"], rows["contact_status_date"]):
        out[p] = parse_date(d) if isinstance(d, str) and d.strip() else None
    return out


def _rereview_dict(r, variant: str | None = None) -> dict | None:
    if r is None:
        return None
    return {"family": r.family, "variant": r.variant or variant, "acmg_class": r.acmg_class,
            "classified_on": _iso(r.classified_on), "due": _iso(r.due), "overdue": r.overdue,
            "text": r.text, "source": r.source}  # fmt: skip


def _variant_dict(v: fs.VariantInfo | None) -> dict | None:
    if v is None:
        return None
    return {"gene": v.gene, "variant": v.key, "hgvs_p": v.hgvs_p, "acmg_class": v.current_class,
            "classified_on": _iso(v.classified_on)}  # fmt: skip


def _variant_rereview(frames: _Frames, on: dt.date, months: int) -> list[dict]:
    """Re-review reminders of every family's variants on ``on`` (classifications up to that day)."""
    from tracker.engines import family_state as fs

    from tracker.domain.genetics import rereview_reminder

    variants = fs.records_up_to(frames.variants, "classified_on", on)
    out = []
    if variants is None or not len(variants):
        return out
    for fam, vs in sorted(fs.family_variants(variants).items()):
        for v in vs:
            r = rereview_reminder(v.current_class, v.classified_on, on, months, family=fam, variant=v.key)
            if r is not None:
                out.append(_rereview_dict(r))
    return out


def cascade_data(frames: _Frames, family: str, on: dt.date, conf: Settings, gid: str) -> dict:
    """A family's cascade plan (what `tracker cascade --json` prints) from ``frames`` (the family, or more)."""
    from tracker.domain.genetics import CAUTION as GENOTYPE_CAUTION
    from tracker.engines.cascade import RULE_SETS as CASCADE_RULE_SETS
    from tracker.engines.cascade import plan_cascade

    st = _family_state(frames, family, on)
    plan = plan_cascade(
        st.pedigree, st.genotypes, st.variant_class, on, gid, st.affected, st.seen,
        early_onset_family="early_onset" in st.features,
        class_history=st.variant.history if st.variant else None,
        contact_dates=_contact_dates(frames, family),
        declined_reapproach_months=conf.cascade.declined_reapproach_months,
        rereview_months=conf.cascade.variant_rereview_months,
    )  # fmt: skip
    notes = list(st.notes) + list(plan.notes)
    if "early_onset" in st.features:
        notes.append("early-onset disease in the family derived from the records: " + st.feature_reasons["early_onset"])
    result = {
        "family": family,
        "as_of": on.isoformat(),
        "guideline": gid,
        "guideline_title": CASCADE_RULE_SETS[gid].title,
        "variant": _variant_dict(st.variant),
        "family_features": dict(sorted(st.feature_reasons.items())),
        "predictive_testing": [_testing_item(c) for c in plan.testing],
        "deferred": [_testing_item(c) for c in plan.deferred],
        "segregation_testing": [_testing_item(c) for c in plan.segregation],
        "clinical_screening": [_screening_item(c) for c in plan.screening],
        "released": [_screening_item(c) for c in plan.released],
        "gaps": [_gap(g, st, on, conf.cascade.reply_wait_weeks) for g in plan.gaps],
        "variant_rereview": _rereview_dict(plan.rereview, st.variant.key if st.variant else None),
        "declined_policy": conf.cascade.declined_words(),
        "notes": notes,
        "caution": plan.caution + " " + GENOTYPE_CAUTION,
    }
    _mark_wishes(result, st)
    _mark_discharges(result, frames, st)
    return result


_LISTS = ("released", "clinical_screening", "gaps", "predictive_testing", "deferred", "segregation_testing")


def _mark_discharges(result: dict, frames: _Frames, st: fs.FamilyState) -> None:
    """A relative with a recorded discharge (revision 0012) is shown as discharged: each list item for them
    carries ``discharge`` (the day, the class it relied on, whether it still holds); while it holds they are
    not a gap; once the variant is no longer P/LP they are a gap ``discharge_no_longer_holds`` (recalled)."""
    from tracker.services.recall import discharge_of

    for person in sorted(st.pedigree):
        d = discharge_of(frames, person, st.variant_class)
        if d is None:
            continue
        found = False
        for key in _LISTS:
            for item in result[key]:
                if item.get("person") == person:
                    item["discharge"] = d
                    found = True
        if d["holds"]:
            result["gaps"] = [g for g in result["gaps"] if g.get("person") != person]
        elif not any(g.get("person") == person for g in result["gaps"]):
            result["gaps"].append({"person": person, "gap": "discharge_no_longer_holds", "reason": d["words"],
                                   "recalled": True, "discharge": d})  # fmt: skip
        elif found:
            for g in result["gaps"]:
                if g.get("person") == person:
                    g["reason"] = f"{g['reason']}; {d['words']}"


def _gap(g, st: fs.FamilyState, on: dt.date, wait_weeks: int) -> dict:
    """One cascade gap, read with the contact log (docs/contacts-and-letters.md): a relative who asked for
    no further contact is listed as must not be approached; one who asked to be contacted later, with the
    day; one informed with nothing back after the clinic's wait, as no response."""
    out = {"person": g.person, "gap": g.gap, "reason": g.reason, "recalled": g.gap != "declined"}
    ps = st.states.get(g.person)
    if ps is None:
        return out
    if ps.contact_wish == "no_further_contact":
        out.update(gap="must_not_approach", recalled=False,
                   reason="asked for no further contact: must not be approached (their choice is respected)")
    elif ps.contact_later_on is not None and ps.contact_later_on > on:
        out.update(gap="contact_later", due=ps.contact_later_on.isoformat(),
                   reason=f"asked to be contacted on {ps.contact_later_on.isoformat()}")
    elif (g.gap == "contacted_not_seen" and ps.informed_on is not None and not ps.responded
          and (on - ps.informed_on).days >= 7 * wait_weeks):  # fmt: skip
        out.update(gap="no_response", reason=f"informed on {ps.informed_on.isoformat()}, no response after "
                                             f"{wait_weeks} weeks (clinic setting): follow up")  # fmt: skip
    if ps.contact_wish == "only_via_family_member":
        out["contact_via"] = ps.contact_via
        out["reason"] += f"; contact only through {ps.contact_via} (the relative's wish)"
    return out


def _mark_wishes(result: dict, st: fs.FamilyState) -> None:
    """Every listed relative who asked for no further contact, or for contact only through a family
    member, carries it: the plan never proposes approaching them directly."""
    for key in ("predictive_testing", "deferred", "segregation_testing", "clinical_screening"):
        for item in result[key]:
            ps = st.states.get(item["person"])
            if ps is None or ps.contact_wish is None:
                continue
            if ps.contact_wish == "no_further_contact":
                item["must_not_approach"] = True
                item["notes"].append("asked for no further contact: must not be approached")
            else:
                item["contact_via"] = ps.contact_via
                item["notes"].append(f"contact only through {ps.contact_via} (the relative's wish)")


def family_cascade(conn: Connection, family: str, on: dt.date, conf: Settings, gid: str,
                   scope: Scope | None = None) -> dict:  # fmt: skip
    """A family's cascade plan, reading only that family's records (``scope``: read these families
    instead, e.g. the cohort ``Scope()``; the result is the same)."""
    return cascade_data(_load(conn, scope if scope is not None else family_scope(family), on), family, on, conf, gid)
