"""`tracker families` counts studies and values by aggregate queries; they agree with counting the
rows `repository.load_studies` reads (the way the summary was computed before), a removed study left out."""

from __future__ import annotations

import json

import pytest

from tracker.cli.app import main
from tracker.store import repository as repo
from tracker.store.database import locate, make_engine, reading


@pytest.fixture
def demo(tmp_path):
    db = str(tmp_path / "demo.sqlite")
    assert main(["demo", "--db", db]) == 0
    return db


def _expected(db: str) -> tuple[dict, dict]:
    engine = make_engine(locate(db))
    with reading(engine) as conn:
        people, studies = repo.load_people(conn), repo.load_studies(conn)
    engine.dispose()
    st = studies.drop_duplicates(["person", "study_date", "modality"])
    st = st.assign(family=st["person"].map(people.set_index("person")["family"]))
    totals = {"studies": len(st), "measurements": int(studies["measure"].notna().sum()),
              "first_study": st["study_date"].min(), "last_study": st["study_date"].max(),
              "people": int((~people["placeholder"]).sum()), "placeholders": int(people["placeholder"].sum())}
    per_family = {f: (len(g), g["study_date"].min(), g["study_date"].max()) for f, g in st.groupby("family")}
    return totals, per_family


def _check(run, db):
    data = json.loads(run("families", "--json", db=db).out)
    totals, per_family = _expected(db)
    for k, v in totals.items():
        assert data["totals"][k] == v, k
    for row in data["families"]:
        assert (row["studies"], row["first_study"], row["last_study"]) == per_family.get(row["family"], (0, None, None))


def test_counts_agree_with_the_rows_read(demo, run):
    _check(run, demo)


def test_a_removed_study_is_not_counted(demo, run):
    before = json.loads(run("families", "--json", db=demo).out)["totals"]
    r = run("remove", "study", "HV05-I-2", "2018-02-12", "echo", "--reason", "duplicate", db=demo)
    assert r.code == 0, r
    after = json.loads(run("families", "--json", db=demo).out)["totals"]
    assert after["studies"] == before["studies"] - 1
    assert after["measurements"] < before["measurements"]
    _check(run, demo)


# The families table as it was computed before the aggregate queries (pandas, over the frames the
# repository reads: every person, variant class event and genotype result): the reference for the rows.
def _reference_rows(db: str) -> tuple[list[dict], dict]:
    from tracker.domain.vocabulary import ACMG_SHORT

    engine = make_engine(locate(db))
    with reading(engine) as conn:
        fams, people = repo.load_families(conn), repo.load_people(conn)
        variants, results = repo.load_variants(conn), repo.load_genetic_results(conn)
    engine.dispose()
    current = variants.sort_values("classified_on", kind="stable")
    current = current.groupby(["family", "transcript", "hgvs_c"], as_index=False).tail(1)
    texts: dict[str, list[str]] = {}
    for fam, gene, tx, c, cls in zip(current["family"], current["gene"], current["transcript"], current["hgvs_c"],
                                     current["acmg_class"]):  # fmt: skip
        texts.setdefault(fam, []).append(f"{gene} {tx}:{c} ({ACMG_SHORT[cls]})")
    res = results.assign(family=results["person"].map(people.set_index("person")["family"]))
    counts = {k: int(n) for k, n in res.groupby(["family", "result"]).size().items()}
    members = people.loc[~people["placeholder"].astype(bool), "family"].value_counts()
    proband = people[people["proband"].astype(bool)].drop_duplicates("family").set_index("family")["person"]
    rows = []
    for f, condition in zip(fams["family"], fams["condition"]):
        if f in texts:
            variant = "; ".join(texts[f])
        else:
            variant = "no causal variant found" if counts.get((f, "no_variant_found"), 0) else "not tested"
        rows.append({"family": f, "condition": condition, "proband": proband.get(f), "variant": variant,
                     "members": int(members.get(f, 0)), "carriers": counts.get((f, "carrier"), 0),
                     "non_carriers": counts.get((f, "non_carrier"), 0)})  # fmt: skip
    totals = {"families": len(fams), "people": int((~people["placeholder"]).sum()),
              "placeholders": int(people["placeholder"].sum())}  # fmt: skip
    return rows, totals


def _compare(run, db):
    data = json.loads(run("families", "--json", db=db).out)
    rows, totals = _reference_rows(db)
    keys = list(rows[0])
    assert [{k: r[k] for k in keys} for r in data["families"]] == rows
    assert {k: data["totals"][k] for k in totals} == totals
    _check(run, db)
    return data


def test_rows_agree_with_the_frames_on_the_demo(demo, run):
    _compare(run, demo)


def test_rows_agree_with_the_frames_on_edge_cases(tmp_path, db_url, run):
    """Invented additions to the demo: a family with nobody in it yet, a second variant classified the same
    day as the first (HV01), a second variant whose class is later than the first's but whose transcript
    sorts first (HV03: the text lists the variants by the date of their current class), a reclassified
    variant (HV04, in the demo), and an added carrier removed again (HV03: members and carriers are those of
    the people not removed; its study and values leave the totals). On SQLite and, when configured, PostgreSQL."""
    import shutil
    from pathlib import Path

    folder = tmp_path / "csv"
    shutil.copytree(Path(__file__).resolve().parents[1] / "demo_family", folder)
    with open(folder / "families.csv", "a", encoding="utf-8") as f:
        f.write("HV06,hypertrophic cardiomyopathy,Invented family with no people yet.\n")
    with open(folder / "variants.csv", "a", encoding="utf-8") as f:
        f.write("HV01,MYH7,NM_000257.4,c.1000A>G,,heterozygous,uncertain_significance,2012-06-18,Invented.\n")
        f.write("HV03,MYBPC3,NM_000256.3,c.1001A>G,,heterozygous,likely_benign,2020-01-01,Invented.\n")
    with open(folder / "people.csv", "a", encoding="utf-8") as f:
        f.write("HV03-I-9,HV03,Invented,Person,female,,1950,alive,,,,no,no" + "," * 13 + "\n")
    with open(folder / "genetic_results.csv", "a", encoding="utf-8") as f:
        f.write("HV03-I-9,2017-01-09,predictive,NM_000363.5:c.508C>T,carrier,Invented laboratory,INV-1\n")
    with open(folder / "studies.csv", "a", encoding="utf-8") as f:
        f.write("HV03-I-9,2017-02-01,echo,Invented site,165,60,mwt_echo,11.0,mm\n")
        f.write("HV03-I-9,2017-02-01,echo,Invented site,165,60,lvef_echo,62,%\n")
    db = db_url
    assert run("init", db=db).code == 0
    r = run("import", "all", folder, db=db)
    assert r.code == 0, r
    data = _compare(run, db)
    before, by = data["totals"], {row["family"]: row for row in data["families"]}
    assert (by["HV03"]["proband"], by["HV03"]["members"], by["HV03"]["carriers"]) == ("HV03-II-1", 11, 3)
    r = run("remove", "person", "HV03-I-9", "--reason", "entered in the wrong family", db=db)
    assert r.code == 0, r
    data = _compare(run, db)
    assert (data["totals"]["studies"], data["totals"]["measurements"]) == (before["studies"] - 1,
                                                                         before["measurements"] - 2)
    by = {row["family"]: row for row in data["families"]}
    assert by["HV06"]["variant"] == "not tested" and by["HV06"]["members"] == 0 and by["HV06"]["proband"] is None
    assert (by["HV03"]["proband"], by["HV03"]["members"], by["HV03"]["carriers"]) == ("HV03-II-1", 10, 2)
    assert by["HV01"]["variant"] == "MYBPC3 NM_000256.3:c.1504C>T (P); MYH7 NM_000257.4:c.1000A>G (VUS)"
    assert by["HV03"]["variant"] == "TNNI3 NM_000363.5:c.508C>T (VUS); MYBPC3 NM_000256.3:c.1001A>G (LB)"
    assert by["HV04"]["variant"] == "TNNT2 NM_001276345.2:c.311G>A (LP)"
