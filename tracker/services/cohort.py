"""What the store holds, per family and in total (`tracker families`, `tracker demo`), and the codes it holds
(the demo's check that a database holds only the demo)."""

from __future__ import annotations


from sqlalchemy import Connection, func, inspect, select

from tracker.store.models import Family, Measurement, Person, Study


def _iso(d) -> str | None:
    if d is None:
        return None
    return d if isinstance(d, str) else d.isoformat()


def _study_stats(conn: Connection) -> tuple[dict[str, tuple[int, str | None, str | None]], dict]:
    """Per family (number of studies, first, last study date) and the store's totals, from aggregate
    queries: the studies (and values) of people not removed, as ``repository.load_studies`` reads them."""
    live = (Study.removed_at.is_(None), Person.removed_at.is_(None))
    per_family = (
        select(Family.code, func.count(Study.id), func.min(Study.study_date), func.max(Study.study_date))
        .select_from(Study)
        .join(Person, Study.person_id == Person.id)
        .join(Family, Person.family_id == Family.id)
        .where(*live)
        .group_by(Family.code)
    )
    stats = {code: (int(n), _iso(first), _iso(last)) for code, n, first, last in conn.execute(per_family)}
    # every person belongs to a family (person.family_id is required), so the totals are the families' sums
    n = sum(v[0] for v in stats.values())
    first = min((v[1] for v in stats.values() if v[1] is not None), default=None)
    last = max((v[2] for v in stats.values() if v[2] is not None), default=None)
    values = conn.execute(
        select(func.count(Measurement.id)).select_from(Measurement)
        .join(Study, Measurement.study_id == Study.id).join(Person, Study.person_id == Person.id).where(*live)
    ).scalar_one()  # fmt: skip
    return stats, {"studies": int(n), "measurements": int(values), "first_study": _iso(first), "last_study": _iso(last)}


def _people(conn: Connection):
    """The four columns of ``repository.load_people`` the summary reads (person, family, placeholder,
    proband), same rows and order, without the other columns' joins and conversions."""
    import pandas as pd

    rows = conn.execute(
        select(Person.code, Family.code, Person.is_placeholder, Person.is_proband)
        .join(Family, Person.family_id == Family.id)
        .where(Person.removed_at.is_(None))
        .order_by(Person.code)
    ).all()
    df = pd.DataFrame([tuple(r) for r in rows], columns=["person", "family", "placeholder", "proband"], dtype=object)
    df["placeholder"] = df["placeholder"].astype(bool)
    df["proband"] = df["proband"].astype(bool)
    return df


def cohort_summary(conn: Connection) -> dict:
    """``totals`` of the store and one row per family (variant, members, genotype results, studies)."""
    from tracker.outputs import summary
    from tracker.store import repository as repo

    fams = repo.load_families(conn)
    people = _people(conn)
    variants = repo.load_variants(conn)
    results = repo.load_genetic_results(conn)
    stats, study_totals = _study_stats(conn)
    return {
        "totals": summary.totals(people, fams, study_totals),
        "families": summary.family_rows(fams, people, variants, results, stats),
    }


def stored_codes(conn: Connection) -> tuple[set[str], set[str]] | None:
    """Every family code and person code in the database (removed people too); None when it has no tables yet."""
    tables = set(inspect(conn).get_table_names())
    if "family" not in tables:
        return None
    families = set(conn.execute(select(Family.code)).scalars())
    people = set(conn.execute(select(Person.code)).scalars()) if "person" in tables else set()
    return families, people


