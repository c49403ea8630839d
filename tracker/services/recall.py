"""One person's recall (`tracker recall PERSON`) and the family data it is built from, as plain data.

Reads only the scope asked for: a person's recall reads their family's records (people,
variants, genetic results, assessments, studies, open reclassification tasks). A family's state
uses its own members only: a parent link to someone recorded in another family is dropped with a
note (:func:`tracker.engines.family_state.build_family_state`), so no other family is read.
Shared by `tracker recall`, `tracker cascade`, `tracker reclassify`, the worklist and the
documents (:mod:`tracker.services.documents`). Heavy modules are loaded where used.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from sqlalchemy import Connection, select

from tracker.engines.schedule import CAUTIONS, Policy, Proposal, never_screened_text, propose_recall
from tracker.errors import UserError
from tracker.rules import available_rule_sets, load_rule_set
from tracker.settings import Settings, load_settings
from tracker.store.models import ImpactItem, Person

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    import numpy as np
    import pandas as pd
    from tracker.engines import family_state as fs
    from tracker.store.repository import Scope


def _iso(d: dt.date | None) -> str | None:
    return d.isoformat() if d is not None else None


def _recall_rules(settings_path: Path | None, guideline: str | None) -> tuple[Settings, Any, Policy]:
    settings = load_settings(settings_path)
    gid = guideline or settings.guideline
    if gid not in available_rule_sets():
        raise UserError(f"--guideline: {gid!r} is not a rule set (available: {', '.join(available_rule_sets())})")
    return settings, load_rule_set(gid), Policy(point=settings.policy)


recall_rules = _recall_rules


@dataclass
class _Frames:
    families: pd.DataFrame
    people: pd.DataFrame
    variants: pd.DataFrame
    results: pd.DataFrame
    assessments: pd.DataFrame
    studies: pd.DataFrame
    pending: frozenset[str]
    # Recorded discharges of variant-negative relatives (revision 0012), as they stood on the day asked:
    # person, discharge_date, variant, acmg_class (the class relied on), classified_on, advice.
    discharges: pd.DataFrame | None = None


def _load(conn: Connection, scope: Scope | None = None, as_of: dt.date | None = None) -> _Frames:
    """The frames a family state is built from, for the families in ``scope`` (default: the cohort).
    ``as_of``: the contact log, the wishes, bookings, letter replies and results from other centres as
    they stood on that day (only what was recorded on or before it; default: everything recorded)."""
    from tracker.store import repository as repo

    return _Frames(
        families=repo.load_families(conn, scope),
        people=with_contact_columns(conn, repo.load_people(conn, scope), scope, as_of),
        variants=repo.load_variants(conn, scope),
        **with_external_results(conn, repo.load_genetic_results(conn, scope), repo.load_assessments(conn, scope),
                                repo.load_studies(conn, entered=False, scope=scope), scope, as_of),
        pending=frozenset(_open_task_people(conn, scope)),
        discharges=discharges_as_of(conn, scope, as_of),
    )


load = _load


def discharges_as_of(conn: Connection, scope: Scope | None, as_of: dt.date | None) -> pd.DataFrame:
    """The recorded discharges in ``scope`` dated on or before ``as_of`` (all without it), the newest per person last."""
    from tracker.store import repository as repo

    frame = repo.load_discharges(conn, scope)
    if as_of is not None and len(frame):
        frame = frame[frame["discharge_date"] <= as_of.isoformat()]
    return frame.reset_index(drop=True)


def discharge_of(frames: _Frames, person: str, current_class: str | None) -> dict | None:
    """The person's latest recorded discharge (as it stood on the day asked) with whether it still holds:
    the class it relied on was P/LP, and ``current_class`` (the family variant's class that day) is
    still pathogenic or likely pathogenic."""
    from tracker.domain.genetics import ACTIONABLE_CLASSES

    d = frames.discharges
    if d is None or not len(d):
        return None
    mine = d[d["person"] == person]
    if not len(mine):
        return None
    row = mine.iloc[-1]
    holds = current_class in ACTIONABLE_CLASSES
    relied = str(row["acmg_class"]).replace("_", " ")
    words = (f"discharged from screening on {row['discharge_date']}, relying on the variant {row['variant']} "
             f"being {relied} (classified {row['classified_on']})")  # fmt: skip
    if not holds:
        now = (current_class or "not classified").replace("_", " ")
        words += f"; the variant is now {now}: the discharge no longer holds, recall"
    return {"discharged_on": row["discharge_date"], "variant": row["variant"], "relied_class": row["acmg_class"],
            "relied_class_on": row["classified_on"], "advice": row["advice"], "holds": holds, "words": words}

EXTERNAL = "(external)"


def with_external_results(conn: Connection, results: pd.DataFrame, assessments: pd.DataFrame,
                          studies: pd.DataFrame, scope: Scope | None = None,
                          as_of: dt.date | None = None) -> dict:  # fmt: skip
    """The results, assessments and studies frames with what was done at other centres counted in
    (revision 0012; docs/contacts-and-letters.md), each marked external:

    * a genetic test: a result row (test type predictive, lab = the centre, column ``external`` True),
      so it counts in the genotype status like a local one;
    * a screening: an assessment (the phenotype found, a note naming the centre) and a clinic study on
      that day (site = the centre, "(external)"), so it counts as a screening visit for recall.

    ``as_of``: only results dated on or before that day.
    """
    import pandas as pd

    from tracker.store import repository as repo

    ext = repo.load_external_results(conn, scope)
    if as_of is not None and len(ext):
        day = as_of.isoformat()
        ext = ext[ext["result_date"] <= day]
    results = results.copy()
    results["external"] = False
    if not len(ext):
        return {"results": results, "assessments": assessments, "studies": studies}
    tests = ext[ext["kind"] == "genetic_test"]
    if len(tests):
        rows = pd.DataFrame({"person": tests["person"], "test_date": tests["result_date"], "test_type": "predictive",
                             "variant": tests["variant"], "result": tests["result"],
                             "lab": tests["centre"] + f" {EXTERNAL}", "report_reference": tests["document_ref"],
                             "external": True}, dtype=object)  # fmt: skip
        results = pd.concat([results, rows], ignore_index=True)
        results = results.sort_values(["person", "test_date", "test_type"], kind="stable").reset_index(drop=True)
    screens = ext[ext["kind"] == "screening"]
    if len(screens):
        seen = set(zip(assessments["person"], assessments["assessment_date"]))
        extra = screens[[(p, d) not in seen for p, d in zip(screens["person"], screens["result_date"])]]
        rows = pd.DataFrame({c: [None] * len(extra) for c in assessments.columns}, dtype=object)
        rows["person"] = list(extra["person"])
        rows["assessment_date"] = list(extra["result_date"])
        rows["affected_status"] = list(extra["result"])
        rows["notes"] = [f"screening at another centre: {c} {EXTERNAL}" for c in extra["centre"]]
        for c in ("competitive_athlete", "pregnant", "hypertension"):
            rows[c] = False
        assessments = pd.concat([assessments, rows], ignore_index=True)
        assessments = assessments.sort_values(["person", "assessment_date"], kind="stable").reset_index(drop=True)
        for c in ("competitive_athlete", "pregnant", "hypertension"):
            assessments[c] = assessments[c].astype(bool)
        visit = pd.DataFrame({"person": screens["person"].to_numpy(dtype=object),
                              "study_date": screens["result_date"].to_numpy(dtype=object), "modality": "clinic",
                              "site": (screens["centre"] + f" {EXTERNAL}").to_numpy(dtype=object),
                              "height_cm": float("nan"), "weight_kg": float("nan"), "measure": None,
                              "value": float("nan"), "unit": None})  # fmt: skip
        studies = pd.concat([studies, visit[studies.columns]], ignore_index=True)
        studies = studies.sort_values(["person", "study_date", "modality"], kind="stable").reset_index(drop=True)
    return {"results": results, "assessments": assessments, "studies": studies}


# Columns the engines read from the people frame, derived from the contact log (revision 0012).
CONTACT_COLUMNS = ("contact_wish", "contact_via", "contact_later_on", "informed_on", "contact_responded")


def with_contact_columns(conn: Connection, people: pd.DataFrame, scope: Scope | None = None,
                         as_of: dt.date | None = None) -> pd.DataFrame:  # fmt: skip
    """The people frame with the contact log's current state beside each person (plain values the
    engines read: the open wish and its family member, the day asked to be contacted, the day first
    informed, and whether a booking or a letter reply came since).

    ``as_of``: the state as it stood on that day (:func:`tracker.domain.contacts.as_it_stood`): events
    dated and wishes recorded on or before it, a wish ended after it still open, bookings made on or
    before it and not cancelled by then, replies received by then; ``contact_status`` and
    ``contact_status_date`` are then that day's too."""
    import pandas as pd

    from tracker.store import repository as repo

    states = repo.contact_states(conn, scope, as_of)
    bookings = repo.load_bookings(conn, scope)
    letters = repo.load_letters(conn, scope)
    people = people.copy()
    if as_of is not None:
        day = as_of.isoformat()
        if len(bookings):
            bookings = bookings[bookings["entered_at"].str[:10] <= day].copy()
            bookings.loc[bookings["cancelled_date"].notna() & (bookings["cancelled_date"] > day),
                         "cancelled_date"] = None  # fmt: skip
        if len(letters):
            letters = letters[letters["sent_date"] <= day].copy()
            letters.loc[letters["reply_date"].notna() & (letters["reply_date"] > day), "reply_date"] = None
        people["contact_status"] = pd.Series([states[p].legacy if p in states else None for p in people["person"]],
                                             index=people.index, dtype=object)  # fmt: skip
        people["contact_status_date"] = pd.Series(
            [_iso(states[p].status_date) if p in states else None for p in people["person"]],
            index=people.index, dtype=object)  # fmt: skip
    cols: dict[str, list] = {c: [] for c in CONTACT_COLUMNS}
    for p in people["person"]:
        st = states.get(p)
        informed = st.informed_date if st is not None else None
        cols["contact_wish"].append(st.wish if st else None)
        cols["contact_via"].append(st.wish_via if st else None)
        cols["contact_later_on"].append(_iso(st.contact_later_on) if st else None)
        cols["informed_on"].append(_iso(informed))
        back = False
        if informed is not None:
            day = informed.isoformat()
            mine = bookings[(bookings["person"] == p) & bookings["cancelled_date"].isna()] if len(bookings) else bookings
            replies = letters[(letters["person"] == p) & letters["reply_date"].notna()] if len(letters) else letters
            back = bool(len(mine) and (mine["entered_at"].str[:10] >= day).any()) or \
                bool(len(replies) and (replies["reply_date"] >= day).any())
        cols["contact_responded"].append(back)
    for c, v in cols.items():
        people[c] = pd.Series(v, index=people.index, dtype=object)
    return people


def _family_state(frames: _Frames, family: str, as_of: dt.date | None) -> fs.FamilyState:
    from tracker.engines import family_state as fs

    if family not in set(frames.families["family"]):
        raise UserError(f"unknown family {family!r}")
    if family not in set(frames.people["family"]):
        raise UserError(f"family {family!r} has no members recorded")
    return fs.build_family_state(
        family, frames.people, frames.variants, frames.results, frames.assessments, frames.studies,
        reclassification_pending=frames.pending, as_of=as_of,
    )  # fmt: skip


# --------------------------------------------------------------------------- trend modifiers


TREND_CHUNK_PEOPLE = 2_000  # people per batch of the trend engine in _with_trends (memory, not results)


def _with_trends(
    frames: _Frames, states: dict[str, fs.FamilyState], rule_set_id: str, settings: Settings, as_of: dt.date
) -> tuple[dict[str, fs.FamilyState], dict]:
    """Fill progression / projected crossing from the trend engine, if it is installed."""
    import numpy as np
    import pandas as pd
    from tracker.engines import family_state as fs

    try:
        from tracker.engines import review

        build, flags = review.build_measurements, review.trend_flags
    except (ImportError, AttributeError):
        return states, trend_summary(rule_set_id, settings, False)
    summary = trend_summary(rule_set_id, settings, True)
    if not summary["applied"]:
        return states, summary
    codes = {p for s in states.values() for p in s.states}
    studies = fs.records_up_to(frames.studies[frames.studies["person"].isin(codes)], "study_date", as_of)
    if studies is None or not studies["value"].notna().any():
        return states, trend_summary(rule_set_id, settings, False)
    relatives = set().union(*(fs.first_degree_of_affected(s) for s in states.values()))
    positive = set().union(*(fs.genotype_positive(s) for s in states.values()))
    # Trends are per person: computed a few thousand people at a time, so that memory stays
    # bounded on a registry-sized cohort (the results are the same as in one go).
    # Each row is given its batch number once (people in order of first appearance), so a batch
    # is a slice of one stable sort, not a scan of the whole cohort per batch.
    person_no, people = pd.factorize(studies["person"].to_numpy(dtype=object))
    in_batch = _batches(person_no // TREND_CHUNK_PEOPLE)
    listed = pd.Index(people).get_indexer(frames.people["person"].to_numpy(dtype=object))
    members = _batches(np.where(listed >= 0, listed // TREND_CHUNK_PEOPLE, -1))
    parts = []
    for b in range(-(-len(people) // TREND_CHUNK_PEOPLE)):
        chunk = studies.iloc[in_batch.get(b, [])]
        parts.append(flags(
            review.mark_pregnancy(build(frames.people.iloc[members.get(b, [])], chunk), frames.assessments),
            guideline=rule_set_id,
            relative_of_affected=relatives, genotype_positive=positive,
            clinic_repeatability=settings.repeatability or None,
        ))  # fmt: skip
    return fs.apply_trends_to_states(states, pd.concat(parts, ignore_index=True)), summary


def trend_summary(rule_set_id: str, settings: Settings, values: bool) -> dict:
    """What the trend modifiers note says for a read: whether they apply (the trend engine is
    installed and the rule set has diagnostic criteria), and ``values``: whether any person read
    has a measured value to trend. The same for any set of families with the same answers, so
    the worklist can say it from stored proposals (:mod:`tracker.services.worklist`)."""
    try:
        from tracker.engines import repeatability, review
        from tracker.normals.criteria import RULE_SETS as CRITERIA

        review.build_measurements, review.trend_flags
    except (ImportError, AttributeError):
        return {
            "applied": False,
            "note": "trend modifiers not applied: the trend engine (tracker.engines.review) is not available; "
            "intervals ignore progression and projected threshold crossing",
        }
    if rule_set_id not in CRITERIA:
        return {
            "applied": False,
            "note": f"trend modifiers not applied: no diagnostic-criteria set for rule set {rule_set_id} "
            "(guidelines are never blended); intervals ignore progression and projected crossing",
        }
    if not values:
        return {"applied": True, "note": "trend modifiers: no measured values to trend"}
    placeholders = sorted(m for m, r in repeatability.load_repeatability(settings.repeatability or None).items()
                          if r.status == "placeholder")  # fmt: skip
    return {
        "applied": True,
        "note": f"trend modifiers from the measurement trends ({rule_set_id} thresholds): progression beyond "
        "measurement variability and projected threshold crossing shorten the interval",
        "lsc_note": (f"the least significant changes of {', '.join(placeholders)} are packaged placeholders, not the "
                     "lab's own: set them in the settings [repeatability]") if placeholders else "",
    }  # fmt: skip


PROGRESSION_PREFIX = "Progression on the measurement trends"


def _progression_text(rule_text: str, tests: str) -> str:
    """The rule set's progression modifier text with its opening clause replaced by the tests that
    fired (slope, last change, z-score slope) and their figures; the interval clause is kept."""
    if not tests or rule_text.startswith(PROGRESSION_PREFIX):
        return rule_text
    tail = rule_text.split(": ", 1)[1] if ": " in rule_text else rule_text
    return f"{PROGRESSION_PREFIX} ({tests}): {tail}"


def with_trend_texts(p: Proposal, facts: fs.PersonFacts) -> Proposal:
    """``p`` with the progression modifier naming the test that fired, and each "criteria not
    assessable" review flag in its notes (flag ``criteria_not_assessable``)."""
    fired = tuple(
        dataclasses.replace(f, text=_progression_text(f.text, facts.progression_tests))
        if f.kind == "modifier" and f.code == "progression" else f
        for f in p.fired
    )  # fmt: skip
    review = tuple(x for x in facts.review_flags.split(" | ") if x and x not in p.notes)
    flags = p.flags + (("criteria_not_assessable",) if facts.review_flags and "criteria_not_assessable" not in p.flags
                       else ())  # fmt: skip
    return dataclasses.replace(p, fired=fired, flags=flags, notes=p.notes + review)


def _batches(batch: np.ndarray) -> dict[int, np.ndarray]:
    """Batch number -> positions of its rows, in their original order (negative numbers: no batch)."""
    import numpy as np

    order = np.argsort(batch, kind="stable")
    keys, starts = np.unique(batch[order], return_index=True)
    ends = np.append(starts[1:], len(order))
    return {int(k): order[a:e] for k, a, e in zip(keys, starts, ends) if k >= 0}


def _open_task_people(conn: Connection, scope: Scope | None = None) -> set[str]:
    stmt = (
        select(Person.code)
        .join(ImpactItem, ImpactItem.person_id == Person.id)
        .where(ImpactItem.done_on.is_(None))
    )
    if scope is not None and not scope.cohort:
        stmt = stmt.where(Person.family_id.in_(scope.family_ids()))
    return {r[0] for r in conn.execute(stmt).all()}


def _reason(p: Proposal) -> tuple[str, str]:
    """Plain reason and sources: triggers, the governing rule or release, applied modifiers, overrides."""
    order = {"trigger": 0, "rule": 1, "release": 1, "modifier": 2, "override": 3}
    fired = sorted((f for f in p.fired if f.applied and f.kind in order), key=lambda f: order[f.kind])
    if not fired:
        return "; ".join(p.notes[1:] or p.notes), ""
    return "; ".join(f.text.rstrip(".") for f in fired) + ".", "; ".join(dict.fromkeys(f.source for f in fired))


def _proposal_dict(p: Proposal, st: fs.FamilyState) -> dict:
    person = p.person_code
    ps, facts, g = st.states[person], st.facts[person], st.genotypes[person]
    p = with_trend_texts(p, facts)
    reason, source = _reason(p)
    return {
        "person": person,
        "family": st.family,
        "as_of": p.today.isoformat(),
        "rule_set": p.rule_set_id,
        "status": p.status,
        "due": _iso(p.due),
        "days_overdue": p.days_overdue,
        "never_screened": p.never_screened,
        "eligible_since": _iso(p.eligible_since),
        "gap_reason": p.gap_reason,
        "waiting": never_screened_text(p),
        "interval_months": p.interval_months,
        "routine_due": _iso(p.routine_due),
        "rule_id": p.rule_id,
        "needs": list(p.needs),
        "consider": list(p.consider),
        "reason": reason,
        "source": source,
        "fired": [
            {"kind": f.kind, "code": f.code, "text": f.text, "source": f.source, "tag": f.tag, "applied": f.applied}
            for f in p.fired
        ],
        "triggers": list(p.triggers),
        "flags": list(p.flags),
        "notes": list(p.notes),
        "state": {
            "genotype": ps.genotype,
            "genotype_reason": g.reason,
            "phenotype": ps.phenotype,
            "affected_status": facts.affected_status,
            "family_features": sorted(ps.family_features),
            "last_visit": _iso(ps.last_visit),
            "athlete": ps.athlete,
            "contact_status": ps.contact_status,
            "vital_status": ps.vital_status,
            "progression": ps.progression,
            "projected_crossing_age_years": ps.projected_crossing_age_years,
            "trend_reasons": facts.trend_reasons,
            "progression_tests": facts.progression_tests,
            "review_flags": [x for x in facts.review_flags.split(" | ") if x],
        },
        "cautions": list(p.cautions),
    }


def _release_basis(st: fs.FamilyState, person: str) -> dict | None:
    """What a genotype-negative person's release relied on (None if not released on a P/LP class)."""
    from tracker.domain.genetics import release_basis, result_date_for_release

    if st.variant is None or person not in st.genotypes or st.genotypes[person].status != "non_carrier":
        return None
    b = release_basis(st.variant.history, result_date_for_release(st.genotypes, person))
    if b is None:
        return None
    return {"relied_class": b.relied_class, "classified_on": _iso(b.classified_on), "plp_since": _iso(b.plp_since),
            "released_on": _iso(b.released_on), "words": b.words()}  # fmt: skip


def _unscheduled_dict(person: str, st: fs.FamilyState, on: dt.date, rule_set_id: str) -> dict:
    why = st.not_scheduled[person]
    return {
        "person": person, "family": st.family, "as_of": on.isoformat(), "rule_set": rule_set_id,
        "status": "not_scheduled", "due": None, "days_overdue": None, "never_screened": False, "eligible_since": None,
        "gap_reason": None, "waiting": None, "interval_months": None, "routine_due": None,
        "rule_id": None, "needs": [], "consider": [], "reason": why, "source": "", "fired": [], "triggers": [],
        "flags": [], "notes": [why], "state": None, "cautions": list(CAUTIONS),
    }  # fmt: skip


def _risk_scd(frames: _Frames, person: str, family: str, st: fs.FamilyState, on: dt.date) -> dict:
    """HCM Risk-SCD of the person from the records up to ``on``, as `tracker person` shows it."""
    from tracker.services import risk as RK
    from tracker.engines import family_state as fs

    people = frames.people[frames.people["family"] == family]
    facts = st.facts.get(person)
    pr = RK.person_risk(person, people, fs.records_up_to(frames.assessments, "assessment_date", on),
                        facts.affected_status if facts else None, on,
                        studies=fs.records_up_to(frames.studies, "study_date", on))  # fmt: skip
    return pr.as_dict()


# --------------------------------------------------------------------------- one person's recall


def person_family(conn: Connection, code: str) -> str:
    """The family code of person ``code`` (not removed), else a one-line error."""
    from tracker.store.models import Family

    row = conn.execute(select(Family.code).join(Person, Person.family_id == Family.id)
                       .where(Person.code == code, Person.removed_at.is_(None))).first()  # fmt: skip
    if row is None:
        raise UserError(f"unknown person {code!r}")
    return row[0]


def family_scope(family: str) -> Scope:
    """The records a family's state reads: that family's own (links to other families are not used)."""
    from tracker.store.repository import Scope

    return Scope.families([family])


def recall_data(frames: _Frames, person: str, on: dt.date, conf: Settings, rule_set, policy: Policy) -> dict:
    """One person's recall (what `tracker recall --json` prints) from ``frames`` (the person's family,
    or more)."""
    fam = frames.people.loc[frames.people["person"] == person, "family"]
    if fam.empty:
        raise UserError(f"unknown person {person!r}")
    st = _family_state(frames, fam.iloc[0], on)
    states, trend = _with_trends(frames, {st.family: st}, rule_set.id, conf, on)
    st = states[st.family]
    if person in st.states:
        result = _proposal_dict(propose_recall(st.states[person], rule_set, policy, on), st)
    else:
        result = _unscheduled_dict(person, st, on, rule_set.id)
    result["rule_set_title"] = rule_set.title
    result["policy"] = policy.point
    result["trend_modifiers"] = trend
    result["release_basis"] = _release_basis(st, person)
    discharge = discharge_of(frames, person, st.variant_class)
    if discharge is not None:  # only when one is recorded (the JSON of everyone else is unchanged)
        result["discharge"] = discharge
        result.setdefault("notes", []).append(discharge["words"])
    result["risk_scd"] = _risk_scd(frames, person, fam.iloc[0], st, on)
    return result


def person_recall(conn: Connection, person: str, on: dt.date, conf: Settings, rule_set, policy: Policy,
                  scope: Scope | None = None) -> dict:  # fmt: skip
    """One person's recall, reading only their family's records (``scope``: read these families
    instead, e.g. the cohort ``Scope()``; the result is the same)."""
    if scope is None:
        scope = family_scope(person_family(conn, person))
    return recall_data(_load(conn, scope, on), person, on, conf, rule_set, policy)
