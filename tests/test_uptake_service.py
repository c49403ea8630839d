"""Cascade uptake from the store (tracker.services.uptake, `tracker uptake`, `tracker report uptake`).

Degrees of relationship come from tracker.domain.pedigree; they are checked against networkx's
weighted shortest path on a graph with one node per couple (parent - couple - child edges of
half a degree each: parent and child 1, full siblings 1, half siblings 2, first cousins 3), a
construction independent of the pedigree module.  The store family below is invented and its
figures are counted by hand in the comments.
"""

from __future__ import annotations

import datetime as dt
import json
import textwrap

import networkx as nx
import pytest

from pedigrees import ped
from tracker.services import uptake as S


def _mating_graph(rows: list[dict]) -> nx.Graph:
    g = nx.Graph()
    for r in rows:
        g.add_node(r["person"])
        mo, fa = r.get("mother"), r.get("father")
        if mo is None and fa is None:
            continue
        couple = f"couple:{mo}+{fa}"
        g.add_edge(r["person"], couple, weight=0.5)
        for parent in (mo, fa):
            if parent is not None:
                g.add_edge(parent, couple, weight=0.5)
    return g


def test_degrees_match_networkx_shortest_path():
    """A three-branch pedigree without consanguinity: every blood relative's degree to the proband
    equals the weighted shortest path in the couple graph (spouses are not blood relatives and are
    left out: the graph would put them at 1)."""
    pairs = [("GGF", "GGM", ["GF"]), ("GF", "GM", ["F", "A"]), ("GF", "GM2", ["HU"]), ("MGF", "MGM", ["M", "MA"]),
             ("M", "F", ["P", "S"]), ("M2", "F", ["H"]), ("A", "AS", ["C"]), ("C", "CS", ["C2"]),
             ("SS", "S", ["N"]), ("N", "NS", ["GN"]), ("P", "PS", ["K"]), ("K", "KS", ["GK"]),
             ("MA", "MAS", ["MC"])]  # fmt: skip
    mothers = {"GGM", "GM", "GM2", "MGM", "M", "M2", "A", "C", "SS", "N", "P", "K", "MA"}
    rows: dict[str, dict] = {}
    for a, b, kids in pairs:
        mo, fa = (a, b) if a in mothers else (b, a)
        for p in (a, b):
            rows.setdefault(p, {"person": p})
        for k in kids:
            rows.setdefault(k, {"person": k}).update(mother=mo, father=fa)
    rows["P"]["proband"] = True
    rows_l = list(rows.values())
    pedigree = ped(rows_l)
    g = _mating_graph(rows_l)
    expected = {"F": 1, "M": 1, "S": 1, "K": 1, "H": 2, "GF": 2, "GM": 2, "A": 2, "N": 2, "GK": 2, "MA": 2,
                "MGF": 2, "MGM": 2, "HU": 3, "C": 3, "GGF": 3, "GGM": 3, "GN": 3, "MC": 3, "C2": 4}  # fmt: skip
    spouses = {"PS", "KS", "NS", "SS", "AS", "CS", "MAS", "M2", "GM2"}
    checked = 0
    for q in pedigree.people:
        if q == "P":
            continue
        deg = S.relative_degree(pedigree, "P", q)
        if deg is None:
            assert q in spouses, q
            continue
        assert deg == nx.shortest_path_length(g, "P", q, weight="weight"), q
        checked += 1
        if q in expected:
            assert deg == expected[q], q
    assert checked == len(expected)


FAMILIES = "family,condition,notes\nU1,hypertrophic cardiomyopathy,invented uptake family\n"
HEAD = ("person,family,given_name,family_name,sex_at_birth,gender_identity,birth_date,vital_status,death_date,mother,"
        "father,placeholder,proband,twin_of,twin_type,adoption,contact_status,contact_status_date,notes,death_cause,"
        "death_age,diagnosis_age,diagnosis_place,icd_date,pacemaker_date,external_id")  # fmt: skip
# U1-01 deceased grandfather; U1-02 grandmother; U1-03 proband; U1-04 and U1-09 married in;
# U1-05 the proband's brother; U1-06, U1-07 her children; U1-08 her niece.
PEOPLE = HEAD + "\n" + textwrap.dedent("""\
    U1-01,U1,,,male,,1940,deceased,2010,,,no,no,,,,,,,non_cardiac,70,,,,,
    U1-02,U1,,,female,,1942,alive,,,,no,no,,,,contactable,2020-02-01,,,,,,,,
    U1-03,U1,,,female,,1965,alive,,U1-02,U1-01,no,yes,,,,contactable,,,,,,,,,
    U1-04,U1,,,male,,1964,alive,,,,no,no,,,,not_contacted,,,,,,,,,
    U1-05,U1,,,male,,1968,alive,,U1-02,U1-01,no,no,,,,declined,2020-04-01,,,,,,,,
    U1-06,U1,,,female,,1990,alive,,U1-03,U1-04,no,no,,,,contactable,,,,,,,,,
    U1-07,U1,,,male,,1993,alive,,U1-03,U1-04,no,no,,,,lost_to_follow_up,2020-07-01,,,,,,,,
    U1-08,U1,,,female,,1995,alive,,U1-09,U1-05,no,no,,,,not_contacted,,,,,,,,,
    U1-09,U1,,,female,,1969,alive,,,,no,no,,,,not_contacted,,,,,,,,,
""")
VARIANTS = ("family,gene,transcript,hgvs_c,hgvs_p,zygosity,acmg_class,classified_on,reason\n"
            "U1,MYBPC3,NM_000256.3,c.1504C>T,p.(Arg502Trp),heterozygous,pathogenic,2020-01-10,invented\n")  # fmt: skip
RESULTS = textwrap.dedent("""\
    person,test_date,test_type,variant,result,lab,report_reference
    U1-03,2020-01-15,diagnostic_panel,NM_000256.3:c.1504C>T,carrier,Invented Lab,IL-1
    U1-02,2020-03-01,predictive,NM_000256.3:c.1504C>T,non_carrier,Invented Lab,IL-2
    U1-06,2020-05-01,predictive,NM_000256.3:c.1504C>T,carrier,Invented Lab,IL-3
""")
STUDIES = textwrap.dedent("""\
    person,study_date,modality,site,height_cm,weight_kg,measure,value,unit
    U1-03,2020-01-02,echo,Invented Hospital,165,60,mwt_echo,19.0,mm
    U1-06,2020-06-01,echo,Invented Hospital,170,65,mwt_echo,9.0,mm
    U1-08,2020-08-01,ecg,Invented Hospital,,,,,
""")
ASSESS = ("person,assessment_date,affected_status,symptoms,competitive_athlete,pregnant,hypertension,notes,"
          "family_history_scd,nsvt,unexplained_syncope,prior_arrest_or_sustained_vt,metabolic_or_syndromic,"
          "atrial_fibrillation\nU1-03,2020-01-02,affected,,no,no,no,,no,no,no,no,no,\n")  # fmt: skip


@pytest.fixture
def store(tmp_path, run, sqlite_db):
    folder = tmp_path / "u1"
    folder.mkdir()
    for name, text in (("families", FAMILIES), ("people", PEOPLE), ("variants", VARIANTS),
                       ("genetic_results", RESULTS), ("studies", STUDIES), ("assessments", ASSESS)):  # fmt: skip
        (folder / f"{name}.csv").write_text(text, encoding="utf-8")
    assert run("init", db=sqlite_db).code == 0
    r = run("import", "all", folder, db=sqlite_db)
    assert r.code == 0, r
    return sqlite_db


def test_store_family_counted_by_hand(store, run):
    """Cascade start 2020-01-15 (proband's carrier result; class P since 2020-01-10).  At risk (5): U1-02
    (mother, tested non-carrier: at risk until the test), U1-05 (brother), U1-06, U1-07 (children),
    U1-08 (niece, second degree).  Not at risk: U1-01 (deceased), U1-04 and U1-09 (married in).
    By 2020-12-31: informed 3 (U1-02 contactable 2020-02-01 = day 17; U1-05 declined 2020-04-01 =
    day 77; U1-06 tested 2020-05-01 = day 107, undated status); tested 2 (U1-02 day 46, U1-06 day
    107); screened 1 (U1-06 echo; U1-08's ECG alone does not count); declined 1; not reachable 1
    (U1-07).  Censored at 351 days: U1-07, U1-08 for contact.  Kaplan-Meier to contact: 4/5, 3/5,
    2/5 < 1/2 at day 107: median 107.  To test: 4/5, 3/5: not reached."""
    r = run("uptake", "--to", "2020-12-31", "--json", db=store)
    assert r.code == 0, r
    d = json.loads(r.out)
    c = d["clinic"]
    assert c["at_risk"] == 5 and d["families_counted"] == 1
    # nothing entered in a contact log (if the store has one): counselling is "not recorded", never 0
    assert d["contact_log_in_use"] is False
    assert {k: v["count"] for k, v in c["counts"].items()} == {
        "informed": 3, "counselled": None, "tested": 2, "screened": 1, "declined": 1, "not_reachable": 1}
    assert c["counts"]["counselled"]["recorded"] is False
    assert c["counts"]["counselled"]["text"] == "not recorded (of 5)"
    assert c["informed_route"]["not_recorded"]["count"] == 3  # told before any log: route unknown
    assert c["time_to_first_contact"]["median_days"] == 107.0
    assert (c["time_to_first_contact"]["events"], c["time_to_first_contact"]["censored"]) == (3, 2)
    assert c["time_to_test"]["median_days"] is None and c["time_to_test"]["events"] == 2
    assert [x["day"] for x in c["time_to_test"]["curve"]] == [0.0, 46.0, 107.0]
    assert d["by_degree"]["first"]["at_risk"] == 4 and d["by_degree"]["second"]["at_risk"] == 1
    assert d["by_degree"]["more_distant"]["at_risk"] == 0
    assert d["by_degree"]["more_distant"]["counts"]["informed"]["percent"] is None
    fam = d["families"][0]
    assert fam["proband"] == "U1-03" and fam["proband_result_date"] == "2020-01-15"
    assert fam["relatives_not_at_risk"] == 3
    rel = {x["person"]: x for x in d["relatives"]}
    assert "non-carrier" in rel["U1-02"]["at_risk_why"]
    assert rel["U1-01"]["at_risk"] is False and rel["U1-04"]["at_risk_why"] == "not a blood relative of the proband"
    assert d["not_recorded"] == ["counselled", "external", "route"]


def test_period_leaves_out_a_family_started_earlier(store, run):
    r = run("uptake", "--from", "2021-01-01", "--to", "2021-12-31", "--json", db=store)
    d = json.loads(r.out)
    assert d["families_counted"] == 0 and d["clinic"]["at_risk"] == 0
    assert d["clinic"]["counts"]["informed"]["percent"] is None
    assert "outside the period" in d["families"][0]["left_out_reason"]


def test_table_csv_and_bad_options(store, run, tmp_path):
    out = tmp_path / "u.csv"
    r = run("uptake", "--family", "U1", "--to", "2020-12-31", "--csv", out, db=store)
    assert r.code == 0, r
    assert "3/5 60%" in r.out and "not recorded" in r.out
    lines = out.read_text(encoding="utf-8").splitlines()
    assert lines[0].startswith("scope,family,degree_group,figure,count,of,percent")
    assert "clinic,,all,informed,3,5,60.0,yes,,,," in lines
    bad = run("uptake", "--from", "2021-01-01", "--to", "2020-01-01", db=store)
    assert bad.code == 1 and "--from is after --to" in bad.err
    bad = run("uptake", "--to", "31/12/2020", db=store)
    assert bad.code == 1 and "--to" in bad.err and bad.err.count("\n") == 1
    bad = run("uptake", "--family", "NOPE", db=store)
    assert bad.code == 1 and "unknown family 'NOPE'" in bad.err
    missing = tmp_path / "nowhere" / "u.csv"
    bad = run("uptake", "--csv", missing, db=store)
    assert bad.code == 1 and not missing.exists()


def test_report_pdf_written(store, run, tmp_path):
    out = tmp_path / "reports"
    r = run("report", "uptake", "--from", "2020-01-01", "--to", "2020-12-31", "--out", out, "--json", db=store)
    assert r.code == 0, r
    d = json.loads(r.out)
    pdf = out / "uptake-2020-01-01-2020-12-31.pdf"
    assert d["file"] == str(pdf) and d["at_risk"] == 5
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF") and len(data) > 3000
    assert (pdf.stat().st_mode & 0o777) == 0o600


def test_contact_log_events_read_as_documented():
    """The contact log rules (columns as tracker.store.repository.load_contact_events gives them): the
    first event that reached the relative dates first contact and gives the route; a later 'moved
    away' as the newest event makes them not reachable; an in-clinic contact by a counsellor is
    counselling; an undated informing event (kept from the status before the log) is informed without a
    date; an event with a date alone says nothing; external tests and screenings are dated."""
    import pandas as pd

    def e(person, day, channel, by, via, outcome, source="entered"):
        return dict(person=person, event_date=day, channel=channel, by_role=by, via=via, outcome=outcome,
                    later_date=None, notes=None, source=source)  # fmt: skip

    events = pd.DataFrame([
        e("A", "2024-02-01", "letter", "nurse", None, "no_answer"),
        e("A", "2024-03-01", "via_family", None, "P", "informed"),
        e("A", "2024-04-01", "in_clinic", "counsellor", None, "informed"),
        e("B", "2024-02-10", "phone", "nurse", None, "informed"),
        e("B", "2024-05-10", "letter", "nurse", None, "moved_away"),
        e("C", "2024-02-11", "phone", "nurse", None, "declined"),
        e("D", None, None, None, None, "informed", "migrated"),
        e("D", "2024-06-01", "letter", "nurse", None, "no_answer"),
        e("E", "2023-01-01", None, None, None, "informed", "migrated"),
        e("F", "2024-01-05", "other", None, None, "contact_later"),
        e("G", "2024-01-05", None, None, None, None, "migrated"),
        e("H", "2022-01-01", None, None, None, "lost_to_follow_up", "migrated"),
    ])  # fmt: skip
    external = pd.DataFrame([dict(person="B", kind="genetic_test", result_date="2024-06-01"),
                             dict(person="C", kind="screening", result_date="2024-07-01")])  # fmt: skip
    ev = S.events_from_log(events, external)
    d = dt.date
    assert ev.informed == {"A": d(2024, 3, 1), "B": d(2024, 2, 10), "C": d(2024, 2, 11), "E": d(2023, 1, 1),
                           "F": d(2024, 1, 5)}  # fmt: skip
    assert ev.informed_undated == {"D"}
    assert ev.via == {"A": "family", "B": "direct", "C": "direct"}  # E (migrated) and F (other, no role): unknown
    assert ev.counselled == {"A": d(2024, 4, 1)}
    assert ev.unreachable == {"B": d(2024, 5, 10), "H": d(2022, 1, 1)}
    assert ev.declined == {"C": d(2024, 2, 11)}
    assert ev.carried_over == {"E"}
    assert ev.tested_external == {"B": d(2024, 6, 1)} and ev.screened_external == {"C": d(2024, 7, 1)}


def test_informed_on_an_unknown_day_counts_but_is_not_timed():
    """Of 3 at-risk relatives: X informed on day 10, Y told on an unknown day, Z not told.  Informed 2 of 3;
    the time figure holds X (event) and Z (censored); Y is left out and counted (left_out_undated 1)."""
    from tracker.engines import uptake as U

    start, end = dt.date(2024, 1, 1), dt.date(2024, 12, 31)

    def r(p, **kw):
        return U.RelativeRecord("F", p, 1, True, "invented", start, **kw)

    rep = U.uptake([r("X", first_informed_date=dt.date(2024, 1, 11)), r("Y", informed_undated=True), r("Z")],
                   U.Period(None, end))  # fmt: skip
    assert rep.clinic.counts["informed"].count == 2
    t = rep.clinic.time_to_first_contact
    assert (t.relatives, t.events, t.censored, t.undated) == (2, 1, 1, 1)
    assert "1 left out: the day is not recorded" in t.text()


def test_family_read_alone_equals_the_cohort_read(tmp_path, run):
    """`--family` reads that family only (Scope of one family); the figures equal those computed from the
    whole cohort's frames (invented demo families)."""
    from tracker.store.database import locate, make_engine, reading
    from tracker.store.repository import COHORT

    db = str(tmp_path / "demo.sqlite")
    assert run("demo", db=db).code == 0
    engine = make_engine(locate(db))
    try:
        with reading(engine) as conn:
            for fam in ("HV01", "HV04"):
                alone = S.public(S.uptake_data(conn, family=fam, start=None, end=dt.date(2026, 12, 1)))
                cohort = S.public(S.uptake_data(conn, family=fam, start=None, end=dt.date(2026, 12, 1), scope=COHORT))
                assert json.dumps(alone, sort_keys=True) == json.dumps(cohort, sort_keys=True)
                assert alone["families"][0]["family"] == fam and len(alone["families"]) == 1
    finally:
        engine.dispose()


def test_contact_log_figures(store, run):
    """With the contact log (skipped on a store without it): U1-07 told through her mother U1-03 on
    2020-03-15 (day 60) and U1-08 by letter on 2020-04-04 (day 80), then counselled in clinic on 2020-05-01.
    Informed 5 of 5; route of the 5 informed: through the family 1 (U1-07), directly 1 (U1-08), not
    recorded 3 (told before the log); counselled 1 of 5.  U1-07's newest event is still 'lost to
    follow-up' (2020-07-01, from the file, after she was told): informed and not reachable both count.
    Days to first contact 17, 60, 77, 80, 107: none censored, median 77 (S = 4/5, 3/5, 2/5 < 1/2 at day 77)."""
    from sqlalchemy import inspect

    from tracker.store.database import locate, make_engine

    engine = make_engine(locate(store))
    try:
        with engine.connect() as conn:
            if "contact_event" not in inspect(conn).get_table_names():
                pytest.skip("this store has no contact log")
    finally:
        engine.dispose()
    for args in (("U1-07", "--date", "2020-03-15", "--channel", "via_family", "--via", "U1-03", "--outcome",
                  "informed"),
                 ("U1-08", "--date", "2020-04-04", "--channel", "letter", "--by", "nurse", "--outcome", "informed"),
                 ("U1-08", "--date", "2020-05-01", "--channel", "in_clinic", "--by", "counsellor", "--outcome",
                  "informed")):  # fmt: skip
        r = run("contact", "add", *args, db=store)
        assert r.code == 0, r
    d = json.loads(run("uptake", "--to", "2020-12-31", "--json", db=store).out)
    c = d["clinic"]
    assert d["contact_log"] is True and d["contact_log_in_use"] is True and d["not_recorded"] == []
    assert c["counts"]["informed"]["count"] == 5 and c["counts"]["counselled"]["count"] == 1
    assert {k: v["count"] for k, v in c["informed_route"].items()} == {"via_family": 1, "direct": 1, "not_recorded": 3}
    assert c["counts"]["not_reachable"]["count"] == 1
    t = c["time_to_first_contact"]
    assert (t["events"], t["censored"], t["median_days"]) == (5, 0, 77.0)
