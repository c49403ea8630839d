"""What the family and person web pages show, as plain data, read for one family only.

The page modules (:mod:`tracker.web.pages.family`, :mod:`tracker.web.pages.person`) render these
dicts; every figure comes from the services the command line uses: the family state and recall
proposal (:mod:`tracker.services.recall`), the cascade plan (:mod:`tracker.services.cascade`),
the trajectory data, charts and strain map (:mod:`tracker.services.documents`), the pedigree
layout and marks (:mod:`tracker.outputs.pedigree_drawing`), the letter
(:mod:`tracker.outputs.letter`).  Nothing here writes.
"""

from __future__ import annotations

import datetime as dt
import tempfile
from pathlib import Path
from typing import Any

from sqlalchemy import Connection

from tracker.errors import UserError
from tracker.settings import Settings

MAX_GRID_STUDIES = 8  # studies shown in the measure-by-date grid of the person page (the latest ones)


def _clean(v: Any) -> Any:
    from tracker.services.review import clean

    return clean(v)


# --------------------------------------------------------------------------- family


def family_view(conn: Connection, family: str, on: dt.date, conf: Settings, rule_set, policy) -> dict:
    """The family page: pedigree SVG, members with genotype, phenotype, contact state and next due date,
    the variant with its class history, the cascade plan and its gaps."""
    from tracker.engines.schedule import propose_recall
    from tracker.outputs.pedigree_drawing import family_pedigree, pedigree_svg
    from tracker.services import cascade as SC
    from tracker.services import recall as SR

    frames = SR.load(conn, SR.family_scope(family), on)
    if family not in set(frames.families["family"]):
        raise UserError(f"family {family} is not in the database")
    people = frames.people[frames.people["family"] == family]
    layout, marks = family_pedigree(family, frames.people, frames.results, frames.assessments, frames.variants)
    svg = pedigree_svg(layout, marks, family=family)
    st = SR._family_state(frames, family, on)
    states, trend_note = SR._with_trends(frames, {family: st}, rule_set.id, conf, on)
    st = states[family]
    members = []
    for row in people.sort_values("person").to_dict("records"):
        p = row["person"]
        if p in st.states:
            rec = SR._proposal_dict(propose_recall(st.states[p], rule_set, policy, on), st)
        else:
            rec = SR._unscheduled_dict(p, st, on, rule_set.id)
        g = st.genotypes.get(p)
        facts = st.facts.get(p)
        members.append({
            "person": p, "sex_at_birth": row.get("sex_at_birth"), "vital_status": row.get("vital_status"),
            "placeholder": bool(row.get("placeholder")), "proband": bool(row.get("proband")),
            "genotype": g.status if g is not None else None, "genotype_reason": g.reason if g is not None else "",
            "phenotype": (rec["state"] or {}).get("phenotype") if rec.get("state") else None,
            "affected_status": facts.affected_status if facts else None,
            "contact_status": _clean(row.get("contact_status")),
            "contact_status_date": _iso(row.get("contact_status_date")),
            "recall_status": rec["status"], "due": rec["due"], "days_overdue": rec["days_overdue"],
            "reason": rec["reason"],
        })  # fmt: skip
    variants = frames.variants[frames.variants["family"] == family]
    history = []
    for (tx, c), grp in variants.groupby(["transcript", "hgvs_c"], sort=False):
        grp = grp.sort_values("classified_on", kind="stable")
        first = grp.iloc[0]
        history.append({
            "key": f"{tx}:{c}", "gene": first["gene"], "hgvs_p": _clean(first.get("hgvs_p")),
            "zygosity": _clean(first.get("zygosity")),
            "classes": [{"acmg_class": r["acmg_class"], "classified_on": _iso(r["classified_on"]),
                         "reason": _clean(r.get("reason"))} for r in grp.to_dict("records")],
        })  # fmt: skip
    cascade = SC.cascade_data(frames, family, on, conf, rule_set.id) if _has_cascade(rule_set.id) else None
    return {"family": family, "on": on.isoformat(), "svg": svg, "members": members, "variants": history,
            "cascade": cascade, "trend_note": trend_note, "layout_warnings": list(layout.warnings),
            "rule_set": rule_set.id, "rule_set_title": rule_set.title}  # fmt: skip


def _has_cascade(gid: str) -> bool:
    from tracker.engines.cascade import RULE_SETS

    return gid in RULE_SETS


def _iso(v: Any) -> str | None:
    v = _clean(v)
    if v is None:
        return None
    return v.isoformat() if hasattr(v, "isoformat") else str(v)


def reclassification_impact(conn: Connection, target: str, new_class: str, on: dt.date, reason: str, rule_set,
                            policy, conf: Settings) -> tuple[Any, list[dict]]:  # fmt: skip
    """(the plan, its impact as `reclassify --dry-run` shows it); a one-line error if refused."""
    from tracker.services import reclassification as RC

    p = RC.plan(conn, target, new_class, on, reason, rule_set, policy, conf)
    return p, RC.dry_run(p)


# --------------------------------------------------------------------------- person


def person_view(conn: Connection, person: str, on: dt.date, conf: Settings, rule_set, policy,
                horizon: float = 3.0) -> dict:  # fmt: skip
    """The person page: identity, the latest values against limits (a measure-by-date grid), a chart per
    key measure (SVG), flags, the recall proposal with every rule, modifier and source, Risk-SCD with
    inputs and conflicts, the strain map (SVG) and this person's audit trail."""
    from tracker.engines import review
    from tracker.outputs import polar_map as PM
    from tracker.outputs import trajectory_pdf as T
    from tracker.services import documents as SD
    from tracker.store import audit

    data = SD.trajectory(conn, person, on, conf, rule_set, policy, horizon)
    a = data.assessed
    short = rule_set.id.replace("_", " ").upper().replace("AHA ACC", "AHA/ACC")
    trend_rows = {r["measure"]: r for r in data.trend_records}
    charts = SD.charts(a, trend_rows, short) if a is not None else ()
    strain, strain_note = SD.strain_map(data.m, a) if a is not None else (None, "No segmental strain values recorded.")
    trail = audit.load(conn, person=person)
    trail_rows = [{k: _clean(v) for k, v in r.items()} for r in trail.tail(200).to_dict("records")]
    for r in trail_rows:
        r["at"] = _iso(r.get("at"))
    flags = [r for r in data.trend_records if r.get("reasons")]
    return {
        "person": person, "family": data.family, "on": on.isoformat(), "identity": data.identity,
        "guideline": data.guideline, "grid": _grid(a, data.labels) if a is not None else None,
        "charts": [{"measure": c.measure, "title": c.title, "svg": T.chart_svg(c, 300, 190), "note": c.note}
                   for c in charts],
        "chart_legend": T.CHART_LEGEND,
        "flags": flags, "recall": data.recall, "risk": data.risk.as_dict(),
        "strain": None if strain is None else {"study_date": strain.study_date, "svg": PM.polar_map_svg(strain.values),
                                               "indices": list(strain.indices), "scale": PM.SCALE_TEXT},
        "strain_note": strain_note, "audit": list(reversed(trail_rows)), "not_pooled": review.NOT_POOLED,
    }  # fmt: skip


def _cls(assessment: Any, meets: Any) -> str:
    text = assessment if isinstance(assessment, str) else ""
    if meets is True:
        return "criterion"
    if text.startswith("above"):
        return "above"
    if text.startswith("below"):
        return "below"
    if text.startswith("within"):
        return "within"
    return "none"


def _grid(a, labels: dict[str, str]) -> dict:
    """Measures (rows) by study (columns, the latest :data:`MAX_GRID_STUDIES`), each value with its limit and
    class ('above', 'below', 'within', 'criterion', 'none')."""
    from tracker.engines import review
    from tracker.outputs import trajectory_pdf as T

    codes = a["measure"].astype(str)
    shown = a[~codes.str.startswith(review._SEGMENT_PREFIXES) & ~a["measure"].isin(review.NOT_TRENDED)]
    studies = shown.drop_duplicates(["study_date", "modality"]).sort_values(["study_date", "modality"])
    studies = studies.tail(MAX_GRID_STUDIES)
    cols = [(r.study_date, r.modality) for r in studies.itertuples()]
    index = {c: i for i, c in enumerate(cols)}
    order = {m: i for i, m in enumerate(T.ROW_ORDER)}
    rows = []
    measures = shown.drop_duplicates("measure")[["measure", "unit", "derived", "modality"]]
    measures = sorted(measures.itertuples(index=False), key=lambda r: (r.modality, bool(r.derived),
                                                                        order.get(r.measure, len(order)), r.measure))
    for m in measures:
        cells: list[dict | None] = [None] * len(cols)
        mine = shown[shown["measure"] == m.measure]
        for r in mine.itertuples():
            i = index.get((r.study_date, r.modality))
            if i is None:
                continue
            lower, upper, z = _clean(r.lower), _clean(r.upper), _clean(r.z)
            cells[i] = {"value": T.number(float(r.value)), "limit": T.limit_text(lower, upper, z),
                        "cls": _cls(_clean(r.assessment), _clean(r.meets_criteria)),
                        "assessment": _clean(r.assessment) or ""}  # fmt: skip
        if any(cells):
            rows.append({"measure": m.measure, "label": labels.get(m.measure, ""), "unit": m.unit,
                         "derived": bool(m.derived), "cells": cells})  # fmt: skip
    return {"columns": [{"date": d.isoformat() if hasattr(d, "isoformat") else str(d), "modality": mod}
                        for d, mod in cols],
            "rows": rows, "hidden": int(shown.drop_duplicates(["study_date", "modality"]).shape[0] - len(cols))}


# --------------------------------------------------------------------------- letter


def letter_pdf(conn: Connection, person: str, on: dt.date, conf: Settings, gid: str, kind: str | None = None,
               via_proband: bool = False) -> tuple[str, bytes]:  # fmt: skip
    """The family letter to ``person`` as PDF bytes (the code only, never a name) and its file name."""
    from tracker.engines.cascade import RULE_SETS
    from tracker.outputs import letter as L
    from tracker.outputs.letter_pdf import write_letter_pdf
    from tracker.services import documents as SD

    if gid not in RULE_SETS:
        raise UserError(f"no cascade rule set for guideline {gid!r}")
    if kind is not None and kind not in L.LETTER_KINDS:
        raise UserError(f"letter kind {kind!r} is not one of {', '.join(L.LETTER_KINDS)}")
    people, family, state = SD.letter_state(conn, person, on)
    plan = L.prepare_letter(
        state.pedigree, state.genotypes, SD.letter_variant(state.variant), person, on, gid, conf.clinic,
        affected=state.affected, seen=state.seen, early_onset_family="early_onset" in state.features,
        via_proband=via_proband, recipient_name=None, standing=SD.standing(state, person), letter_kind=kind,
    )  # fmt: skip
    composed = L.compose_letter(plan, None)
    name = f"letter-{person}.pdf"
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / name
        write_letter_pdf(composed, path)
        return name, path.read_bytes()


def family_members(conn: Connection, family: str) -> list[str]:
    """The codes of ``family``'s members (not removed), sorted."""
    from tracker.services.recall import family_scope
    from tracker.store import repository as repo

    people = repo.load_people(conn, family_scope(family))
    return sorted(people.loc[people["family"] == family, "person"])


def family_variant_keys(conn: Connection, family: str) -> list[str]:
    """The keys (transcript:c.change) of ``family``'s variants."""
    from tracker.services.recall import family_scope
    from tracker.store import repository as repo

    v = repo.load_variants(conn, family_scope(family))
    v = v[v["family"] == family]
    return sorted({f"{t}:{c}" for t, c in zip(v["transcript"], v["hgvs_c"])})
