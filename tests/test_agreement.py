"""Every command that reports a fact about a person reports the same fact.

For every person of a database, the test runs the commands a clinic uses (through
the command line, as users see them, with the demo clinic settings and one fixed
as-of date) and compares what each says about the same person:

- ``person``, ``recall`` and ``reclassify --dry-run``: genotype status; ``person``
  and ``recall``: affected status, phenotype state (negative / borderline / positive);
- ``recall``, ``report trajectory`` and ``worklist``: rule id, interval, status,
  due date, review flags (criteria not assessable), never-screened wording, contact gap;
- ``person`` trends, ``recall`` and ``report trajectory``: the progression flag and
  the tests that fired, measure by measure;
- ``person``, ``recall`` and ``report trajectory``: the Risk-SCD figure and its conflicts;
- ``cascade`` and ``recall``: released people are released in both, people listed as
  gaps or for screening are at risk and recalled; everyone recalled for screening
  should be on the cascade plan (its own test, an open disagreement in families
  without a P/LP variant);
- ``report letter``: the risk figure of a first-contact letter is the cascade's;
- ``reclassify`` (dry run, then applied to a copy): the statuses before are the
  recall's now, the statuses after are the recall's after the change, and a
  downgrade returns exactly the released relatives.

Data: the invented demo families and an invented family written below (AGR1)
with the states the clinic must tell apart: a borderline carrier, a child with a
thick wall and no body size, a never-screened adult, a relative who declined, a
grandchild who waits behind an untested parent, a released non-carrier.
"""

from __future__ import annotations

import csv
import json
import shutil
from pathlib import Path

import pytest

ROOT = Path(__file__).parent.parent
SETTINGS = ROOT / "demo_family" / "clinic.toml"
AS_OF = "2026-12-05"
WINDOW_END = "2032-12-31"  # longer than the longest interval of any rule set (5 y) after AS_OF
PHENOTYPE = {"affected": "positive", "uncertain": "borderline"}  # else negative (docs/recall-and-cascade.md §2)
RECALLED = ("due", "overdue")

AGR1 = {
    "families.csv": """family,condition,notes
AGR1,hypertrophic cardiomyopathy,invented family with every screening state
""",
    "people.csv": """person,family,given_name,family_name,sex_at_birth,gender_identity,birth_date,vital_status,death_date,mother,father,placeholder,proband,twin_of,twin_type,adoption,contact_status,contact_status_date,notes
AG-01,AGR1,,,male,,1938,deceased,2004,,,yes,no,,,,,,placeholder father
AG-02,AGR1,,,female,,1940,deceased,2011,,,yes,no,,,,,,placeholder mother
AG-03,AGR1,Bertil,Yarrowby,male,,1965-02-10,alive,,AG-02,AG-01,no,yes,,,,contactable,2015-03-01,Index case
AG-04,AGR1,Ilse,Yarrowby,female,,1967-05-05,alive,,,,no,no,,,,,,Married in
AG-05,AGR1,Marit,Yarrowby,female,,1968-07-07,alive,,AG-02,AG-01,no,no,,,,contactable,2016-01-10,Borderline carrier
AG-06,AGR1,Osric,Yarrowby,male,,1970-03-03,alive,,AG-02,AG-01,no,no,,,,contactable,2016-01-10,Never screened
AG-07,AGR1,Hedda,Yarrowby,female,,1972-08-08,alive,,AG-02,AG-01,no,no,,,,declined,2016-02-01,Declined
AG-08,AGR1,Runa,Yarrowby,female,,1974-09-09,alive,,AG-02,AG-01,no,no,,,,contactable,2016-01-10,Released non-carrier
AG-09,AGR1,Tove,Yarrowby,male,,2013-04-04,alive,,AG-04,AG-03,no,no,,,,contactable,2016-01-10,Child with no body size
AG-10,AGR1,Signe,Quarrell,female,,1971-01-01,alive,,,,no,no,,,,,,Married in
AG-11,AGR1,Leif,Yarrowby,male,,2000-06-06,alive,,AG-10,AG-06,no,no,,,,not_contacted,2016-01-10,Waits behind his father
""",
    "variants.csv": """family,gene,transcript,hgvs_c,hgvs_p,zygosity,acmg_class,classified_on,reason
AGR1,MYH7,NM_000257.4,c.1208G>A,p.(Arg403Gln),heterozygous,pathogenic,2015-04-01,invented classification
""",
    "genetic_results.csv": """person,test_date,test_type,variant,result,lab,report_reference
AG-03,2015-04-01,diagnostic_panel,NM_000257.4:c.1208G>A,carrier,Invented Lab,AGR-1
AG-05,2016-03-01,predictive,NM_000257.4:c.1208G>A,carrier,Invented Lab,AGR-2
AG-08,2016-03-01,predictive,NM_000257.4:c.1208G>A,non_carrier,Invented Lab,AGR-3
""",
    "assessments.csv": """person,assessment_date,affected_status,symptoms,competitive_athlete,pregnant,hypertension,notes,family_history_scd,nsvt,unexplained_syncope,prior_arrest_or_sustained_vt,metabolic_or_syndromic,atrial_fibrillation
AG-03,2015-03-01,affected,exertional breathlessness,no,no,no,,no,no,no,no,no,no
AG-03,2026-03-01,affected,exertional breathlessness,no,no,no,,no,no,no,no,no,no
AG-05,2016-04-01,unaffected,,no,no,no,,,,,,,
AG-05,2026-04-01,uncertain,,no,no,no,,,,,,,
AG-08,2016-04-01,unaffected,,no,no,no,,,,,,,
AG-09,2026-02-01,unaffected,,no,no,no,,,,,,,
""",
    "studies.csv": """person,study_date,modality,site,height_cm,weight_kg,measure,value,unit
AG-03,2015-03-01,echo,Invented Clinic,180,82,mwt_echo,19.0,mm
AG-03,2015-03-01,echo,Invented Clinic,180,82,la_diam,41,mm
AG-03,2015-03-01,echo,Invented Clinic,180,82,lvot_rest,12,mmHg
AG-03,2026-03-01,echo,Invented Clinic,180,84,mwt_echo,20.0,mm
AG-03,2026-03-01,echo,Invented Clinic,180,84,la_diam,43,mm
AG-03,2026-03-01,echo,Invented Clinic,180,84,lvot_rest,14,mmHg
AG-05,2016-04-01,echo,Invented Clinic,166,61,mwt_echo,10.5,mm
AG-05,2021-04-01,echo,Invented Clinic,166,62,mwt_echo,11.5,mm
AG-05,2026-04-01,echo,Invented Clinic,166,63,mwt_echo,13.5,mm
AG-08,2016-04-01,echo,Invented Clinic,170,64,mwt_echo,9.0,mm
AG-09,2026-02-01,echo,Invented Clinic,,,mwt_echo,9.5,mm
""",
}


# --------------------------------------------------------------------------- running the commands


def _json(run, *args, db: str) -> tuple[int, object]:
    r = run(*args, "--json", db=db)
    try:
        return r.code, json.loads(r.out)
    except json.JSONDecodeError:
        return r.code, r.out + r.err


def _collect(run, db: str, people: list[str], families: list[str], out: Path) -> dict:
    """Every command's JSON for every person and family of ``db``."""
    s = ("--settings", SETTINGS)
    got: dict = {"person": {}, "recall": {}, "trajectory": {}, "letter": {}, "cascade": {}}
    for p in people:
        got["person"][p] = _json(run, "person", p, *s, db=db)
        got["recall"][p] = _json(run, "recall", p, "--as-of", AS_OF, *s, db=db)
        got["trajectory"][p] = _json(run, "report", "trajectory", p, "--out", out, "--as-of", AS_OF, *s, db=db)
        got["letter"][p] = _json(run, "report", "letter", p, "--out", out, "--date", AS_OF, *s, db=db)
    for f in families:
        got["cascade"][f] = _json(run, "cascade", f, "--as-of", AS_OF, *s, db=db)
    got["worklist"] = _json(run, "worklist", "--from", AS_OF, "--to", WINDOW_END, "--as-of", AS_OF, *s, db=db)
    return got


# --------------------------------------------------------------------------- comparing


def _progression_by_measure(text: str) -> dict[str, str]:
    """'mwt_echo: slope test: ... | ivsd: ...' -> {measure: its text}."""
    out = {}
    for part in (text or "").split(" | "):
        if ": " in part:
            m, rest = part.split(": ", 1)
            out[m.strip()] = rest
    return out


def _trajectory_progression(flags: list[str]) -> dict[str, str]:
    """Trajectory flag lines 'mwt_echo (9 studies, ...): progression: slope test; ...' -> {measure: tests}."""
    out = {}
    for line in flags:
        head, _, rest = line.partition("): ")
        if rest.startswith("progression: "):
            out[head.split(" (")[0]] = rest[len("progression: "):].split(";")[0]
    return out


def _person_checks(p: str, got: dict, bad: list[str]) -> None:
    pc, pj = got["person"][p]
    rc, rj = got["recall"][p]
    tc, tj = got["trajectory"][p]
    if pc or rc or tc:
        bad.append(f"{p}: person/recall/trajectory exit codes {pc}/{rc}/{tc}: {str(pj)[:120]} {str(rj)[:120]}")
        return
    st = rj["state"]
    # recall and the trajectory report's recall box
    for k in ("status", "due", "interval_months", "rule_id"):
        if tj["recall"].get(k) != rj[k]:
            bad.append(f"{p}: {k}: recall {rj[k]!r}, report trajectory {tj['recall'].get(k)!r}")
    # Risk-SCD in the three places that show it
    for name, risk in (("recall", rj["risk_scd"]), ("report trajectory", tj["risk"])):
        for k in ("status", "risk_5y_pct", "conflicts", "has_icd"):
            if risk.get(k) != pj["risk_scd"].get(k):
                bad.append(f"{p}: Risk-SCD {k}: person {pj['risk_scd'].get(k)!r}, {name} {risk.get(k)!r}")
    # review flags (criteria not assessable)
    flags = sorted(pj["review_flags"])
    if st is not None and sorted(st["review_flags"]) != flags:
        bad.append(f"{p}: review flags: person {flags}, recall {sorted(st['review_flags'])}")
    if sorted(tj["review_flags"]) != flags:
        bad.append(f"{p}: review flags: person {flags}, report trajectory {sorted(tj['review_flags'])}")
    if flags and "criteria_not_assessable" not in rj["flags"] and rj["status"] in RECALLED:
        bad.append(f"{p}: recall has review flags {flags} but no criteria_not_assessable flag")
    if st is None:
        return
    # genotype, affected status and phenotype state
    if pj["genotype_status"] != st["genotype"]:
        bad.append(f"{p}: genotype: person {pj['genotype_status']!r}, recall {st['genotype']!r}")
    if pj["affected_status"] != st["affected_status"]:
        bad.append(f"{p}: affected status: person {pj['affected_status']!r}, recall {st['affected_status']!r}")
    if st["phenotype"] != PHENOTYPE.get(st["affected_status"], "negative"):
        bad.append(f"{p}: phenotype {st['phenotype']!r} for affected status {st['affected_status']!r}")
    # progression: which measures, which tests
    person_prog = {t["measure"]: t["tests_fired"] for t in pj["trends"] if t["progressing"]}
    recall_prog = _progression_by_measure(st["progression_tests"])
    traj_prog = _trajectory_progression(tj["flags"])
    if bool(person_prog) != st["progression"]:
        bad.append(f"{p}: progression: person trends {sorted(person_prog)}, recall {st['progression']}")
    if sorted(recall_prog) != sorted(person_prog):
        bad.append(f"{p}: progressing measures: person {sorted(person_prog)}, recall {sorted(recall_prog)}")
    if sorted(traj_prog) != sorted(person_prog):
        bad.append(f"{p}: progressing measures: person {sorted(person_prog)}, report trajectory {sorted(traj_prog)}")
    for m, tests in person_prog.items():
        for test in tests.split("; "):
            if test not in recall_prog.get(m, ""):
                bad.append(f"{p}: {m}: test {test!r} fired in person, not named by recall")
            if test not in traj_prog.get(m, ""):
                bad.append(f"{p}: {m}: test {test!r} fired in person, not named by report trajectory")


def _worklist_checks(got: dict, bad: list[str]) -> None:
    code, wl = got["worklist"]
    assert code == 0, wl
    listed: dict[str, list[tuple[str, dict]]] = {}
    for section in ("due", "affected", "contact_gaps"):
        for e in wl[section]:
            listed.setdefault(e["person"], []).append((section, e))
    not_recalled = {e["person"] for e in wl["not_recalled"]}
    lost = {e if isinstance(e, str) else e["person"] for e in wl["lost_to_follow_up"]}
    for p, (rc, rj) in got["recall"].items():
        if rc:
            continue
        st = rj["state"] or {}
        entries = listed.get(p, [])
        in_window = rj["status"] in RECALLED and rj["due"] <= WINDOW_END
        if in_window and len(entries) != 1:
            bad.append(f"{p}: recall {rj['status']} on {rj['due']}, worklist lists it {len(entries)} times")
        if not in_window and rj["status"] != "not_recalled" and entries:
            bad.append(f"{p}: recall {rj['status']} {rj['due']}, but on the worklist ({entries[0][0]})")
        if (rj["status"] == "not_recalled") != (p in not_recalled):
            bad.append(f"{p}: recall {rj['status']}, worklist not-recalled list: {p in not_recalled}")
        if (st.get("contact_status") == "lost_to_follow_up" and in_window) != (p in lost):
            bad.append(f"{p}: contact {st.get('contact_status')}, worklist lost-to-follow-up list: {p in lost}")
        for section, e in entries:
            for k in ("status", "due", "days_overdue", "rule_id", "interval_months", "needs", "flags",
                      "never_screened", "eligible_since", "gap_reason", "waiting"):  # fmt: skip
                if e[k] != rj[k]:
                    bad.append(f"{p}: {k}: recall {rj[k]!r}, worklist {e[k]!r}")
            if sorted(e["review_flags"]) != sorted(st.get("review_flags", [])):
                bad.append(f"{p}: review flags: recall {st.get('review_flags')}, worklist {e['review_flags']}")
            want = ("affected" if st.get("phenotype") == "positive"
                    else "screening" if st.get("contact_status") == "contactable" else "contact_gap")  # fmt: skip
            if e["list"] != want and not (want == "affected" and e["list"] == "contact_gap"):
                bad.append(f"{p}: worklist list {e['list']!r}, expected {want!r} from recall's state")


def _cascade_checks(got: dict, bad: list[str]) -> None:
    at_risk = ("at_risk_untested", "uncertain", "carrier")
    planned: set[str] = set()
    for fam, (code, cj) in got["cascade"].items():
        if code:
            continue
        for section in ("predictive_testing", "deferred", "segregation_testing", "clinical_screening", "gaps"):
            for e in cj[section]:
                p = e["person"]
                planned.add(p)
                rc, rj = got["recall"][p]
                st = rj["state"] or {}
                if st.get("genotype") not in at_risk:
                    bad.append(f"{p}: cascade {section}, recall genotype {st.get('genotype')!r} (not at risk)")
                if rj["status"] in ("released", "not_scheduled"):
                    bad.append(f"{p}: cascade {section}, recall {rj['status']!r}")
                if "probability_text" in e and st.get("genotype_reason", "").split(": ")[-1] != e["probability_text"]:
                    bad.append(f"{p}: cascade probability {e['probability_text']}, recall {st.get('genotype_reason')!r}")
        for e in cj["gaps"]:
            rj = got["recall"][e["person"]][1]
            if e["gap"] == "declined" and rj["status"] != "not_recalled":
                bad.append(f"{e['person']}: cascade gap declined, recall {rj['status']!r}")
            if e["gap"] != "declined" and rj["status"] not in RECALLED:
                bad.append(f"{e['person']}: cascade gap {e['gap']}, recall {rj['status']!r}")
        released = {e["person"]: e for e in cj["released"]}
        for p, e in released.items():
            rj = got["recall"][p][1]
            if rj["status"] != "released":
                bad.append(f"{p}: released in cascade, recall {rj['status']!r}")
            elif (rj["release_basis"] or {}).get("words") != e["relied_on"]:
                bad.append(f"{p}: release basis: cascade {e['relied_on']!r}, recall {rj['release_basis']!r}")
        for p, (rc, rj) in got["recall"].items():
            if rj["family"] == fam and rj["status"] == "released" and p not in released:
                bad.append(f"{p}: released in recall, not in cascade")


def _plan_membership_checks(got: dict, bad: list[str]) -> None:
    """Everyone the recall calls for screening (not affected) is on their family's cascade plan."""
    planned = set()
    for fam, (code, cj) in got["cascade"].items():
        for section in ("predictive_testing", "deferred", "segregation_testing", "clinical_screening", "gaps"):
            planned |= {e["person"] for e in cj.get(section, [])} if not code else set()
    for p, (rc, rj) in got["recall"].items():
        fam_ok = got["cascade"].get(rj["family"], (1,))[0] == 0
        st = rj["state"] or {}
        if fam_ok and rj["status"] in RECALLED and st.get("phenotype") != "positive" and p not in planned:
            bad.append(f"{p}: recalled for screening ({rj['rule_id']}), not on the cascade plan")


def _letter_checks(got: dict, bad: list[str]) -> None:
    prob = {}
    for fam, (code, cj) in got["cascade"].items():
        if not code:
            for e in cj["predictive_testing"] + cj["deferred"]:
                prob[e["person"]] = e.get("probability_text")
    for p, (lc, lj) in got["letter"].items():
        rj = got["recall"][p][1]
        if lc:
            continue
        if rj["status"] in ("released", "not_scheduled") and lj["letter_kind"] != "result":
            bad.append(f"{p}: letter {lj['letter_kind']!r} written, recall {rj['status']!r}")
        if lj["letter_kind"] == "first_contact" and (rj["state"] or {}).get("last_visit"):
            bad.append(f"{p}: first-contact letter, recall last visit {rj['state']['last_visit']}")
        if lj.get("risk") and p in prob and prob[p] and f"1 in {prob[p].split('/')[-1]}" not in lj["risk"]:
            bad.append(f"{p}: letter risk {lj['risk']!r}, cascade {prob[p]}")


def _reclassify_checks(run, db: str, got: dict, people: list[str], tmp: Path, bad: list[str]) -> None:
    s = ("--settings", SETTINGS)
    for fam, (code, cj) in got["cascade"].items():
        if code or not cj.get("variant"):
            continue
        old = cj["variant"]["acmg_class"]
        new = "uncertain_significance" if old in ("pathogenic", "likely_pathogenic") else "likely_pathogenic"
        args = ("reclassify", fam, "--to", new, "--date", AS_OF, "--reason", "agreement check", *s)
        rc, dry = _json(run, *args, "--dry-run", db=db)
        if rc:
            bad.append(f"{fam}: reclassify --dry-run exit {rc}: {str(dry)[:200]}")
            continue
        items = [i for r in dry["reclassifications"] for i in r["items"] if i["person"]]
        for i in items:
            st = got["recall"][i["person"]][1]["state"]
            if st is not None and i["status_before"] != st["genotype"]:
                bad.append(f"{i['person']}: reclassify status before {i['status_before']!r}, recall {st['genotype']!r}")
        returned = {i["person"] for i in items if i["change"] == "return_to_surveillance"}
        released = {p for p, (c, rj) in got["recall"].items() if rj["family"] == fam and rj["status"] == "released"}
        if new == "uncertain_significance" and returned != released:
            bad.append(f"{fam}: downgrade returns {sorted(returned)}, recall released {sorted(released)}")
        # apply it to a copy: the recall afterwards shows the statuses the dry run announced
        copy = str(tmp / f"after-{fam}.sqlite")
        shutil.copyfile(db, copy)
        rc, done = _json(run, *args, db=copy)
        assert rc == 0, done
        for p in sorted({i["person"] for i in items}):
            ac, after = _json(run, "recall", p, "--as-of", AS_OF, *s, db=copy)
            if ac or after["state"] is None:
                continue
            announced = {i["status_after"] for i in items if i["person"] == p}
            if announced != {after["state"]["genotype"]}:
                bad.append(f"{p}: reclassify status after {sorted(announced)}, recall after {after['state']['genotype']!r}")
            if p in returned and after["status"] == "released":
                bad.append(f"{p}: returned to surveillance by the downgrade, recall after still released")


def _disagreements(run, db: str, people: list[str], families: list[str], tmp: Path) -> list[str]:
    got = _collect(run, db, people, families, tmp / "out")
    bad: list[str] = []
    for p in people:
        _person_checks(p, got, bad)
    _worklist_checks(got, bad)
    _cascade_checks(got, bad)
    _letter_checks(got, bad)
    _reclassify_checks(run, db, got, people, tmp, bad)
    return bad


def _codes(people_csv: Path) -> tuple[list[str], list[str]]:
    with people_csv.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    return [r["person"] for r in rows], sorted({r["family"] for r in rows})


# --------------------------------------------------------------------------- tests


def test_demo_commands_agree_on_every_person(run, tmp_path):
    db = str(tmp_path / "demo.sqlite")
    r = run("demo", db=db)
    assert r.code == 0, r
    people, families = _codes(ROOT / "demo_family" / "people.csv")
    bad = _disagreements(run, db, people, families, tmp_path)
    assert not bad, "commands disagree:\n" + "\n".join(bad)


def test_everyone_recalled_for_screening_is_on_the_cascade_plan(run, tmp_path):
    db = str(tmp_path / "demo.sqlite")
    assert run("demo", db=db).code == 0
    people, families = _codes(ROOT / "demo_family" / "people.csv")
    s = ("--as-of", AS_OF, "--settings", SETTINGS)
    got = {"recall": {p: _json(run, "recall", p, *s, db=db) for p in people},
           "cascade": {f: _json(run, "cascade", f, *s, db=db) for f in families}}  # fmt: skip
    bad: list[str] = []
    _plan_membership_checks(got, bad)
    assert not bad, "recall and cascade disagree:\n" + "\n".join(bad)


def test_invented_family_commands_agree_on_every_person(run, tmp_path):
    folder = tmp_path / "agr1"
    folder.mkdir()
    for name, text in AGR1.items():
        (folder / name).write_text(text, encoding="utf-8")
    db = str(tmp_path / "agr1.sqlite")
    assert run("init", db=db).code == 0
    r = run("import", "all", folder, db=db)
    assert r.code == 0, r
    people, families = _codes(folder / "people.csv")
    got_recall = {p: _json(run, "recall", p, "--as-of", AS_OF, "--settings", SETTINGS, db=db)[1] for p in people}
    # the family holds the states it was written for
    assert got_recall["AG-05"]["state"]["phenotype"] == "borderline"  # borderline carrier
    assert got_recall["AG-05"]["rule_id"].endswith(".borderline")
    assert got_recall["AG-09"]["state"]["review_flags"]  # child, thick wall, no body size
    assert got_recall["AG-06"]["never_screened"]  # never-screened adult
    assert got_recall["AG-07"]["status"] == "not_recalled"  # declined
    assert got_recall["AG-08"]["status"] == "released"  # released non-carrier
    bad = _disagreements(run, db, people, families, tmp_path)
    assert not bad, "commands disagree:\n" + "\n".join(bad)


# --------------------------------------------------------------------------- one test per fixed disagreement


def _demo(run, tmp_path) -> str:
    db = str(tmp_path / "demo.sqlite")
    r = run("demo", db=db)
    assert r.code == 0, r
    return db


def test_person_shows_the_genotype_status_the_recall_uses_without_a_plp_variant(run, tmp_path):
    """docs/recall-and-cascade.md §2: without a P/LP variant a blood relative of an affected member is
    at risk, untested (no variant found; HV05) or uncertain (VUS; HV03); a married-in member is not at risk."""
    db = _demo(run, tmp_path)
    want = {"HV05-III-2": "at_risk_untested", "HV05-II-2": "not_at_risk", "HV03-III-1": "uncertain",
            "HV03-III-3": "not_at_risk"}  # fmt: skip
    for p, status in want.items():
        shown = _json(run, "person", p, "--settings", SETTINGS, db=db)[1]["genotype_status"]
        recalled = _json(run, "recall", p, "--as-of", AS_OF, "--settings", SETTINGS, db=db)[1]["state"]["genotype"]
        assert (shown, recalled) == (status, status), p


def test_recall_names_the_contact_gap_of_someone_seen_before_as_the_worklist_does(run, tmp_path):
    """HV01-IV-4 was screened before and is lost to follow-up: recall and worklist give the same gap."""
    db = _demo(run, tmp_path)
    s = ("--as-of", AS_OF, "--settings", SETTINGS)
    rj = _json(run, "recall", "HV01-IV-4", *s, db=db)[1]
    wl = _json(run, "worklist", "--from", AS_OF, "--to", WINDOW_END, *s, db=db)[1]
    entry = next(e for e in wl["contact_gaps"] if e["person"] == "HV01-IV-4")
    assert rj["never_screened"] is False
    assert rj["gap_reason"] == entry["gap_reason"] == "lost_to_follow_up"
    declined = _json(run, "recall", "HV01-III-5", *s, db=db)[1]
    assert declined["gap_reason"] == "declined"
    seen = _json(run, "recall", "HV01-IV-1", *s, db=db)[1]  # contactable, screened: no gap
    assert seen["gap_reason"] is None
    for p in ("HV01-II-2", "HV01-III-6"):  # released; not at risk: no contact status recorded, nobody to reach
        assert _json(run, "recall", p, *s, db=db)[1]["gap_reason"] is None, p


def test_reclassify_announces_the_statuses_the_recall_shows_after_the_change(run, tmp_path):
    """A downgrade of HV04's variant: the married-in wife of the proband is not a blood relative of an
    affected member, so she is not at risk after it, as the recall then shows; blood relatives are uncertain."""
    db = _demo(run, tmp_path)
    args = ("reclassify", "HV04", "--to", "uncertain_significance", "--date", AS_OF, "--reason", "x",
            "--settings", SETTINGS)  # fmt: skip
    dry = _json(run, *args, "--dry-run", db=db)[1]
    after = {i["person"]: i["status_after"] for r in dry["reclassifications"] for i in r["items"] if i["person"]}
    assert after["HV04-III-2"] == "not_at_risk"
    assert after["HV04-IV-2"] == "uncertain"
    assert run(*args, db=db).code == 0
    for p in ("HV04-III-2", "HV04-IV-2"):
        st = _json(run, "recall", p, "--as-of", AS_OF, "--settings", SETTINGS, db=db)[1]["state"]
        assert st["genotype"] == after[p], p
