"""What the store holds, per family and in total (`tracker families`, `tracker demo`), and the codes it holds
(the demo's check that a database holds only the demo)."""

from __future__ import annotations


from sqlalchemy import Connection, and_, case, func, inspect, or_, select

from tracker.store.models import Family, GeneticResult, Measurement, Person, Study, Variant, VariantClassification


def _iso(d) -> str | None:
    if d is None:
        return None
    return d if isinstance(d, str) else d.isoformat()


def _study_stats(conn: Connection) -> tuple[dict[int, tuple[int, str | None, str | None]], dict]:
    """Per family id (number of studies, first, last study date) and the store's totals, from aggregate
    queries: the studies (and values) of people not removed, as ``repository.load_studies`` reads them."""
    live = (Study.removed_at.is_(None), Person.removed_at.is_(None))
    per_family = (
        select(Person.family_id, func.count(Study.id), func.min(Study.study_date), func.max(Study.study_date))
        .select_from(Study)
        .join(Person, Study.person_id == Person.id)
        .where(*live)
        .group_by(Person.family_id)
    )
    stats = {fid: (int(n), _iso(first), _iso(last)) for fid, n, first, last in conn.execute(per_family).all()}
    # every person belongs to a family (person.family_id is required), so the totals are the families' sums
    n = sum(v[0] for v in stats.values())
    first = min((v[1] for v in stats.values() if v[1] is not None), default=None)
    last = max((v[2] for v in stats.values() if v[2] is not None), default=None)
    # The values of live studies: all values less those of removed studies or people. Every value has its
    # study and every study its person (required foreign keys, enforced on both backends), so this is the count
    # of the join, without joining millions of values to their studies (the removed studies are few).
    removed = (
        select(Study.id).join(Person, Study.person_id == Person.id)
        .where(or_(Study.removed_at.is_not(None), Person.removed_at.is_not(None)))
    )  # fmt: skip
    every = conn.execute(select(func.count()).select_from(Measurement)).scalar_one()
    gone = conn.execute(
        select(func.count()).select_from(Measurement).where(Measurement.study_id.in_(removed))
    ).scalar_one()
    values = every - gone
    return stats, {"studies": int(n), "measurements": int(values), "first_study": _iso(first), "last_study": _iso(last)}


def _variant_texts(conn: Connection) -> dict[str, str]:
    """Per family, its variants at their latest class ("GENE transcript:c. (class)", "; "-joined), ordered by
    the date of that class, then transcript and c. notation (the latest row of each variant's class history)."""
    from tracker.domain.vocabulary import ACMG_SHORT

    latest = (
        select(VariantClassification.variant_id, func.max(VariantClassification.classified_on).label("on"))
        .group_by(VariantClassification.variant_id)
        .subquery()
    )
    stmt = (
        select(Family.code, Variant.gene, Variant.transcript, Variant.hgvs_c, VariantClassification.acmg_class)
        .select_from(Variant)
        .join(Family, Variant.family_id == Family.id)
        .join(latest, latest.c.variant_id == Variant.id)
        .join(VariantClassification, and_(VariantClassification.variant_id == Variant.id,
                                          VariantClassification.classified_on == latest.c.on))
        .order_by(Family.code, VariantClassification.classified_on, Variant.transcript, Variant.hgvs_c)
    )  # fmt: skip
    parts: dict[str, list[str]] = {}
    for fam, gene, tx, c, cls in conn.execute(stmt).all():
        parts.setdefault(fam, []).append(f"{gene} {tx}:{c} ({ACMG_SHORT[cls]})")
    return {fam: "; ".join(texts) for fam, texts in parts.items()}


def _people_counts(conn: Connection) -> dict[int, tuple[int, int, str | None]]:
    """Per family id (people not removed): members (not placeholders), placeholders, and the first proband's
    code (placeholders included, as the person list marks them)."""
    stmt = (
        select(
            Person.family_id,
            func.count(case((Person.is_placeholder, None), else_=1)),
            func.count(case((Person.is_placeholder, 1))),
            func.min(case((Person.is_proband, Person.code))),
        )
        .where(Person.removed_at.is_(None))
        .group_by(Person.family_id)
    )
    return {fid: (int(n), int(ph), proband) for fid, n, ph, proband in conn.execute(stmt).all()}


def _result_counts(conn: Connection) -> dict[tuple[int, str], int]:
    """Per (family id, result) the number of genotype results of people not removed."""
    stmt = (
        select(Person.family_id, GeneticResult.result, func.count())
        .select_from(GeneticResult)
        .join(Person, GeneticResult.person_id == Person.id)
        .where(Person.removed_at.is_(None))
        .group_by(Person.family_id, GeneticResult.result)
    )
    return {(fid, result): int(n) for fid, result, n in conn.execute(stmt).all()}


def cohort_summary(conn: Connection) -> dict:
    """``totals`` of the store and one row per family (variant, members, genotype results, studies), by
    family code. Computed by aggregate queries (no table is read whole)."""
    families = conn.execute(select(Family.id, Family.code, Family.condition).order_by(Family.code)).all()
    people = _people_counts(conn)
    variant_text = _variant_texts(conn)
    counts = _result_counts(conn)
    stats, study_totals = _study_stats(conn)
    rows = []
    for fid, f, condition in families:
        n_members, _, proband = people.get(fid, (0, 0, None))
        if f in variant_text:
            variant = variant_text[f]
        elif counts.get((fid, "no_variant_found"), 0):
            variant = "no causal variant found"
        else:
            variant = "not tested"
        n_studies, first, last = stats.get(fid, (0, None, None))
        rows.append(
            {
                "family": f,
                "condition": condition,
                "proband": proband,
                "variant": variant,
                "members": n_members,
                "carriers": counts.get((fid, "carrier"), 0),
                "non_carriers": counts.get((fid, "non_carrier"), 0),
                "studies": int(n_studies),
                "first_study": first,
                "last_study": last,
            }
        )
    totals = {
        "families": len(families),
        "people": sum(v[0] for v in people.values()),
        "placeholders": sum(v[1] for v in people.values()),
        "studies": int(study_totals["studies"]),
        "measurements": int(study_totals["measurements"]),
        "first_study": study_totals["first_study"],
        "last_study": study_totals["last_study"],
    }
    return {"totals": totals, "families": rows}


def stored_codes(conn: Connection) -> tuple[set[str], set[str]] | None:
    """Every family code and person code in the database (removed people too); None when it has no tables yet."""
    tables = set(inspect(conn).get_table_names())
    if "family" not in tables:
        return None
    families = set(conn.execute(select(Family.code)).scalars())
    people = set(conn.execute(select(Person.code)).scalars()) if "person" in tables else set()
    return families, people


