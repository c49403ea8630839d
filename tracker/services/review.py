"""One person's review and a family's (or the cohort's) trends, as plain data.

Reads only the scope asked for: a person's review reads that person's family (the pedigree
context for the wall-thickness criteria and the Risk-SCD inputs) and no one else's records.
Used by `tracker person`, `tracker trends` and the trajectory report.
"""

from __future__ import annotations

import datetime as dt
import math
from typing import Any

import pandas as pd
from sqlalchemy import Connection

from tracker.domain.dates import age_at, parse_partial_date
from tracker.engines import review
from tracker.services import risk as RK
from tracker.errors import UserError
from tracker.normals.criteria import RULE_SETS
from tracker.store import repository as repo
from tracker.store.repository import Scope

TREND_JSON_KEYS = [c for c in review.TREND_COLUMNS if c != "caution"]


def load(conn: Connection, scope: Scope | None = None) -> dict[str, pd.DataFrame]:
    """The frames a review reads, for the families in ``scope`` (default: the cohort)."""
    return {
        "people": repo.load_people(conn, scope),
        "studies": repo.load_studies(conn, entered=False, scope=scope),
        "results": repo.load_genetic_results(conn, scope),
        "variants": repo.load_variants(conn, scope),
        "assessments": repo.load_assessments(conn, scope),
        "measures": repo.load_measures(conn),
    }


def family_of(conn: Connection, code: str) -> str:
    """The family code of person ``code`` (not removed), else a one-line error."""
    from sqlalchemy import select

    from tracker.store.models import Family, Person

    row = conn.execute(select(Family.code).join(Person, Person.family_id == Family.id)
                       .where(Person.code == code, Person.removed_at.is_(None))).first()  # fmt: skip
    if row is None:
        raise UserError(f"unknown person code {code!r}")
    return row[0]


def person_scope(conn: Connection, code: str) -> Scope:
    """The records a review of one person reads: their family's."""
    return Scope.families([family_of(conn, code)])


def person_review(conn: Connection, code: str, settings, horizon: float) -> dict[str, Any]:
    """One person's review (`tracker person --json`), reading only their family's records."""
    return person_review_data(code, load(conn, person_scope(conn, code)), settings, horizon)


def trends(conn: Connection, family: str | None, measure: str | None, settings, horizon: float) -> dict[str, Any]:
    """Per-person trend rows of one family (``family``) or of the cohort (None), plain data."""
    return trends_of(conn, None if family is None else [family], measure, settings, horizon)


def trends_of(conn: Connection, families: list[str] | None, measure: str | None, settings,
              horizon: float) -> dict[str, Any]:  # fmt: skip
    """Per-person trend rows of ``families`` (None: the cohort), reading only those families.

    The rows are those of the cohort's table for these families, in the same order (most
    concerning first, then person and measure), except the pooled ``slope_eb_per_year``,
    which pools the families read."""
    scope = None
    if families == []:  # nothing to read: the measure is still checked
        if measure is not None and measure not in set(repo.load_measures(conn)["code"]):
            raise UserError(f"unknown measure code {measure!r} (see `tracker measures`)")
        return {"guideline": guideline(settings), "horizon_years": horizon, "family": None, "measure": measure,
                "rows": [], "not_pooled": review.NOT_POOLED, "caution": review.CAUTION}  # fmt: skip
    if families is not None:
        from sqlalchemy import select

        from tracker.store.models import Family

        known = {r[0] for r in conn.execute(select(Family.code).where(Family.code.in_(families))).all()}
        for f in families:
            if f not in known:
                raise UserError(f"unknown family code {f!r}")
        scope = Scope.families(list(families))
    data = load(conn, scope)
    people = data["people"]
    family = families[0] if families is not None and len(families) == 1 else None
    if families is not None:
        if family is not None and family not in set(people["family"]):
            raise UserError(f"unknown family code {family!r}")
        people = people[people["family"].isin(set(families))]
    if measure is not None and measure not in set(data["measures"]["code"]):
        raise UserError(f"unknown measure code {measure!r} (see `tracker measures`)")
    ctx = review.clinical_context(people, data["results"], data["variants"], data["assessments"])
    rel, pos = status_sets(ctx)
    studies = data["studies"][data["studies"]["person"].isin(set(people["person"]))]
    m = review.mark_pregnancy(review.build_measurements(people, studies), data["assessments"])
    t = review.trend_table(m, guideline=settings.guideline, relative_of_affected=rel, genotype_positive=pos,
                           clinic_repeatability=settings.repeatability, horizon_years=horizon)  # fmt: skip
    t = t[(t["n"] >= 2) | t["criteria_not_assessable"].astype(bool)]
    if measure is not None:
        t = t[t["measure"] == measure]
    rows = records(t, TREND_JSON_KEYS)
    return {"guideline": guideline(settings), "horizon_years": horizon, "family": family, "measure": measure,
            "rows": rows, "not_pooled": review.NOT_POOLED, "caution": review.CAUTION}  # fmt: skip


def status_sets(ctx: pd.DataFrame) -> tuple[set[str], set[str]]:
    rel = set(ctx.loc[ctx["first_degree_relative_of_affected"], "person"])
    pos = set(ctx.loc[ctx["genotype_status"] == "carrier", "person"])
    return rel, pos


def guideline(settings) -> dict[str, Any]:
    gid = settings.guideline
    rs = RULE_SETS.get(gid)
    return {
        "id": gid,
        "name": f"{rs.name} ({rs.citation})" if rs else gid,
        "criteria_encoded": rs is not None,
        "settings": settings.source,
    }


def clean(v: Any) -> Any:
    """JSON-safe scalar: NaN/NA -> None, dates -> ISO 8601, numpy -> Python."""
    if v is None or v is pd.NA or v is pd.NaT:
        return None
    if isinstance(v, (dt.date, pd.Timestamp)):
        return v.isoformat()[:10]
    if hasattr(v, "item"):
        v = v.item()
    if isinstance(v, float) and math.isnan(v):
        return None
    return v


def records(df: pd.DataFrame, columns: list[str]) -> list[dict[str, Any]]:
    return [{c: clean(v) for c, v in zip(columns, row)} for row in df[columns].itertuples(index=False)]


VALUE_KEYS = [
    "measure", "value", "unit", "derived", "derivation", "z", "lower", "upper", "assessment", "grade",
    "flag", "reference_set", "source", "note", "meets_criteria", "threshold", "threshold_unit",
    "comparison", "criteria_rule", "borderline", "criteria_source", "criteria_note",
]  # fmt: skip


STUDY_KEYS = ["study_date", "modality", "site", "age_years", "age_uncertainty_years", "height_cm", "weight_kg",
              "bsa_m2", "bsa_formula"]  # fmt: skip


CONVERSION_KEYS = [c for c in review.CONVERSION_COLUMNS if c not in ("person", "caution")]


def person_identity(code: str, people: pd.DataFrame, ctx: pd.DataFrame, today: dt.date) -> dict[str, Any]:
    p = people.set_index("person").loc[code]
    c = ctx.set_index("person").loc[code]
    age = unc = None
    if clean(p["birth_date"]):
        birth = parse_partial_date(p["birth_date"])
        end = today
        if clean(p["death_date"]):
            end = parse_partial_date(p["death_date"]).value
        a = age_at(birth, end)
        age, unc = round(a.years, 2), a.uncertainty_years
    return {
        "person": code,
        "family": p["family"],
        "sex_at_birth": p["sex_at_birth"],
        "vital_status": p["vital_status"],
        "age_years": age,
        "age_uncertainty_years": unc,
        "age_on": (today if p["vital_status"] != "deceased" else None),
        "placeholder": bool(p["placeholder"]),
        "genotype_status": c["genotype_status"],
        "genotype_reason": c["genotype_reason"],
        "variant": c["variant"],
        "variant_class": c["variant_class"],
        "affected_status": c["affected_status"],
        "affected_status_date": c["affected_status_date"],
        "first_degree_relative_of_affected": bool(c["first_degree_relative_of_affected"]),
        "affected_first_degree_relatives": c["affected_first_degree_relatives"],
    }


RECORD_KEYS = ["death_cause", "death_age", "diagnosis_age", "diagnosis_place", "icd_date", "pacemaker_date"]


def person_record(code: str, people: pd.DataFrame, assessments: pd.DataFrame | None) -> dict[str, Any]:
    """Cause and age of death, diagnosis (possibly elsewhere), devices, and atrial fibrillation (the latest
    recorded answer and the first assessment recording it)."""
    p = people.set_index("person").loc[code]
    out = {k: clean(p.get(k)) for k in RECORD_KEYS}
    for k in ("death_age", "diagnosis_age"):
        out[k] = None if out[k] is None else int(out[k])
    af = {"latest": None, "latest_on": None, "first_recorded_on": None}
    if assessments is not None and len(assessments) and "atrial_fibrillation" in assessments.columns:
        mine = assessments[(assessments["person"] == code) & assessments["atrial_fibrillation"].notna()]
        mine = mine.sort_values("assessment_date")
        if len(mine):
            af["latest"], af["latest_on"] = bool(mine["atrial_fibrillation"].iloc[-1]), mine["assessment_date"].iloc[-1]
            yes = mine[mine["atrial_fibrillation"].astype(bool)]
            af["first_recorded_on"] = yes["assessment_date"].iloc[0] if len(yes) else None
    out["atrial_fibrillation"] = af
    return out


def person_review_data(code: str, data: dict, settings, horizon: float) -> dict[str, Any]:
    people = data["people"]
    if code not in set(people["person"]):
        raise UserError(f"unknown person code {code!r}")
    family = people.loc[people["person"] == code, "family"].iloc[0]
    ctx = review.clinical_context(people[people["family"] == family], data["results"], data["variants"],
                                  data["assessments"])  # fmt: skip
    rel, pos = status_sets(ctx)
    kw = dict(guideline=settings.guideline, relative_of_affected=rel, genotype_positive=pos)
    m = review.mark_pregnancy(review.build_measurements(people, data["studies"][data["studies"]["person"] == code]),
                              data["assessments"])
    a = review.assess_measurements(m, **kw)
    t = review.trend_table(a, **kw, clinic_repeatability=settings.repeatability, horizon_years=horizon)
    conv = review.conversions(a)
    studies = []
    for (date, modality), rows in a.groupby(["study_date", "modality"], sort=True):
        first = rows.iloc[0]
        s = {k: clean(first[k]) for k in STUDY_KEYS}
        s["values"] = records(rows, VALUE_KEYS)
        studies.append(s)
    conversion = records(conv, CONVERSION_KEYS)[0] if len(conv) else None
    identity = person_identity(code, people, ctx, dt.date.today())
    pr = RK.person_risk(code, people[people["family"] == family], data["assessments"],
                        clean(identity["affected_status"]), dt.date.today(), assessed=a)  # fmt: skip
    return {
        **{k: clean(v) for k, v in identity.items()},
        "record": person_record(code, people, data["assessments"]),
        "risk_scd": pr.as_dict(),
        "guideline": guideline(settings),
        "horizon_years": horizon,
        "bsa_formula": "mosteller",
        "studies": studies,
        "trends": records(t[(t["n"] >= 2) | t["criteria_not_assessable"].astype(bool)], TREND_JSON_KEYS),
        "conversion": conversion,
        "review_flags": list(review.criteria_review_flags(a)["flag"]),
        "not_pooled": review.NOT_POOLED,
        "caution": review.CAUTION,
    }
