"""The data behind the documents: the trajectory report (`report trajectory`), the pedigree drawing
(`report pedigree`) and the family letter (`report letter`), each read for one family only.

A family's records are enough for each: links to people recorded in another family are not used
in its state or drawn (:func:`tracker.engines.family_state.build_family_state`,
:func:`tracker.outputs.pedigree_drawing.write_pedigree_pdf`). Heavy modules are loaded where used.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import math
import re
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from sqlalchemy import Connection

from tracker.engines.schedule import Policy, propose_recall
from tracker.errors import UserError
from tracker.services.recall import (
    _family_state,
    _load,
    _proposal_dict,
    _unscheduled_dict,
    _with_trends,
    family_scope,
    person_family,
)
from tracker.settings import Settings

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    import pandas as pd
    from tracker.engines import family_state as fs
    from tracker.store.repository import Scope
    from tracker.outputs import trajectory_pdf as T
    from tracker.outputs import letter as L


@dataclass
class Trajectory:
    """One person's trajectory report data on the records up to ``on``: the review as `tracker person`
    shows it, the recall proposal as `tracker recall` shows it, and HCM Risk-SCD."""

    person: str
    family: str
    labels: dict[str, str]
    m: pd.DataFrame | None  # measurements (None: no study)
    assessed: pd.DataFrame | None
    trends: pd.DataFrame | None
    conversions: pd.DataFrame | None
    identity: dict[str, Any]
    trend_records: list[dict]
    guideline: dict[str, Any]
    recall: dict
    trend_note: dict
    risk: Any


def trajectory(conn: Connection, person: str, on: dt.date, conf: Settings, rule_set, policy: Policy,
               horizon: float, scope: Scope | None = None) -> Trajectory:  # fmt: skip
    """The trajectory report data of ``person``, reading only their family's records (``scope``:
    these families instead; the result is the same)."""
    from tracker.engines import family_state as fs
    from tracker.engines import review
    from tracker.services import review as SR
    from tracker.services import risk as RK
    from tracker.store import repository as repo

    if scope is None:
        scope = family_scope(person_family(conn, person))
    frames = _load(conn, scope, on)
    measures = repo.load_measures(conn)
    if person not in set(frames.people["person"]):
        raise UserError(f"unknown person {person!r}")
    gid = rule_set.id
    labels = dict(zip(measures["code"], measures["label"]))
    people = frames.people
    family = people.loc[people["person"] == person, "family"].iloc[0]

    # --- the review, as `tracker person`, on the records up to --as-of
    studies = fs.records_up_to(frames.studies, "study_date", on)
    assessments = fs.records_up_to(frames.assessments, "assessment_date", on)
    results = fs.records_up_to(frames.results, "test_date", on)
    variants = fs.records_up_to(frames.variants, "classified_on", on)
    ctx = review.clinical_context(people[people["family"] == family], results, variants, assessments)
    rel, pos = SR.status_sets(ctx)
    kw = dict(guideline=gid, relative_of_affected=rel, genotype_positive=pos)
    mine = studies[studies["person"] == person] if studies is not None and len(studies) else None
    m = review.build_measurements(people, mine) if mine is not None and len(mine) else None
    m = review.mark_pregnancy(m, assessments) if m is not None else None
    a = t = conv = None
    if m is not None and len(m):
        a = review.assess_measurements(m, **kw)
        t = review.trend_table(a, **kw, clinic_repeatability=conf.repeatability or None, horizon_years=horizon)
        conv = review.conversions(a)
    identity = {k: SR.clean(v) for k, v in SR.person_identity(person, people, ctx, on).items()}
    trend_records = SR.records(t, SR.TREND_JSON_KEYS) if t is not None else []
    g = SR.guideline(dataclasses.replace(conf, guideline=gid))

    # --- the recall proposal, as `tracker recall`
    st = _family_state(frames, family, on)
    states, trend_note = _with_trends(frames, {st.family: st}, gid, conf, on)
    st = states[st.family]
    if person in st.states:
        rec = _proposal_dict(propose_recall(st.states[person], rule_set, policy, on), st)
    else:
        rec = _unscheduled_dict(person, st, on, gid)

    # --- risk
    pr = RK.person_risk(person, people[people["family"] == family], assessments, identity.get("affected_status"), on,
                        assessed=a)
    return Trajectory(person, family, labels, m, a, t, conv, identity, trend_records, g, rec, trend_note, pr)


def pedigree(conn: Connection, family: str) -> dict[str, pd.DataFrame]:
    """The frames the pedigree drawing of ``family`` reads (that family's only), or a one-line error."""
    from tracker.store import repository as repo

    scope = family_scope(family)
    if family not in set(repo.load_families(conn, scope)["family"]):
        raise UserError(f"family {family} is not in the database")
    return {
        "people": repo.load_people(conn, scope),
        "results": repo.load_genetic_results(conn, scope),
        "assessments": repo.load_assessments(conn, scope),
        "variants": repo.load_variants(conn, scope),
    }


def letter_state(conn: Connection, person: str, on: dt.date) -> tuple[pd.DataFrame, str, fs.FamilyState]:
    """(the family's people, the family code, its state on ``on``) for a letter to ``person``."""
    from tracker.engines import family_state as fs
    from tracker.store import repository as repo

    from tracker.services.recall import with_contact_columns

    scope = family_scope(person_family(conn, person))
    people = with_contact_columns(conn, repo.load_people(conn, scope), scope, on)
    if person not in set(people["person"]):
        raise UserError(f"unknown person {person!r}")
    family = people.loc[people["person"] == person, "family"].iloc[0]
    state = fs.build_family_state(
        family, people, repo.load_variants(conn, scope), repo.load_genetic_results(conn, scope),
        repo.load_assessments(conn, scope), repo.load_studies(conn, entered=False, scope=scope), as_of=on,
    )  # fmt: skip
    return people, family, state


def letter_record(conn: Connection, person: str, on: dt.date) -> dict:
    """What the contact log and its tables say for a letter to ``person`` on ``on``: the day first informed,
    an open reclassification task, a discharge, the next booked visit (not cancelled, on or after ``on``),
    the open wish and its family member (docs/contacts-and-letters.md)."""
    from tracker.services.recall import _open_task_people
    from tracker.store import repository as repo

    from tracker.domain.contacts import derive_state

    scope = family_scope(person_family(conn, person))
    # The log as it stood on the letter's day (an undated, migrated status counts as before it).
    events = [e for e in repo._contact_rows(conn, scope)
              if e["person"] == person and (e["event_date"] is None or e["event_date"] <= on)]  # fmt: skip
    wishes = [{**w, "ended_date": None} for w in repo._wish_rows(conn, scope)
              if w["person"] == person and w["recorded_date"] <= on
              and (w["ended_date"] is None or w["ended_date"] > on)]  # fmt: skip
    state = derive_state(person, events, wishes) if events or wishes else None
    bookings = repo.load_bookings(conn, scope)
    mine = bookings[(bookings["person"] == person) & bookings["cancelled_date"].isna()] if len(bookings) else bookings
    ahead = mine[mine["visit_date"] >= on.isoformat()].sort_values("visit_date") if len(mine) else mine
    discharges = repo.load_discharges(conn, scope)
    gone = discharges[(discharges["person"] == person) & (discharges["discharge_date"] <= on.isoformat())] \
        if len(discharges) else discharges
    return {
        "informed_on": state.informed_date if state else None,
        "open_task": person in _open_task_people(conn, scope),
        "discharged_on": dt.date.fromisoformat(gone["discharge_date"].iloc[-1]) if len(gone) else None,
        "booked_on": dt.date.fromisoformat(ahead["visit_date"].iloc[0]) if len(ahead) else None,
        "booked_purpose": ahead["purpose"].iloc[0] if len(ahead) else None,
        "wish": state.wish if state else None,
        "wish_via": state.wish_via if state else None,
    }


# --------------------------------------------------------------------------- the pictures of one person


CHART_TITLES = {
    "mwt_echo": "Maximal LV wall thickness, echo",
    "mwt_cmr": "Maximal LV wall thickness, CMR",
    "gls": "LV global longitudinal strain, echo",
    "e_over_e_prime": "Average E/e', echo (computed)",
    "e_prime_septal": "Septal e' velocity, echo",
    "lavi": "Left atrial volume index, echo",
}
_CHILD_WINDOW = "all studies (under 18 y)"
_LS17 = re.compile(r"^ls_seg(\d\d)$")
_STRAIN_INDICES = ("gls_segavg", "gls_segavg_n", "relaps", "mech_dispersion", "psi_global")


def _f(v: Any) -> float | None:
    from tracker.services import review as SR

    v = SR.clean(v)
    return None if v is None else float(v)


def _fit(a: pd.DataFrame, trow: dict) -> tuple[pd.DataFrame, pd.DataFrame] | None:
    """The trend engine's fit of the trend row's window and its band, or None (one study, children)."""
    import numpy as np
    from tracker.engines.trend_band import mean_line_band

    if trow is None or trow["n"] < 2 or trow["window"] == _CHILD_WINDOW:
        return None
    if "pregnant" in a.columns:  # studies during pregnancy are left out of the trend's fit
        a = a[~a["pregnant"].astype(bool)]
    rows = a[(a["measure"] == trow["measure"]) & (a["age_years"] >= trow["first_age"] - 1e-9)
             & (a["age_years"] <= trow["last_age"] + 1e-9)]  # fmt: skip
    from tracker.engines import trends

    ols = trends.per_person_ols(rows[["person", "measure", "modality", "study_date", "age_years", "value"]])
    if len(ols) != 1 or not math.isclose(float(ols["slope"].iloc[0]), float(trow["slope_per_year"]), rel_tol=1e-9,
                                         abs_tol=1e-12):  # fmt: skip
        return None
    grid = np.linspace(trow["first_age"], trow["last_age"], 41)
    return ols, mean_line_band(ols.iloc[0], grid)


def charts(a: pd.DataFrame, trend_rows: dict[str, dict], guideline_label: str) -> tuple[T.Chart, ...]:
    """The charts of the key measures (trajectory report and person page): every study, the trend
    engine's fit and band, the normal range, the guideline's threshold and the projection to it."""
    import numpy as np
    from tracker.engines import review, risk, trends
    from tracker.outputs import trajectory_pdf as T

    out = []
    for m in T.KEY_MEASURES:
        rows = a[a["measure"] == m].sort_values("age_years")
        if rows.empty or (m != "mwt_echo" and len(rows) < 2):
            continue
        trow = trend_rows.get(m)
        fitted = _fit(a, trow)
        lo_age = trow["first_age"] if fitted else math.inf
        hi_age = trow["last_age"] if fitted else -math.inf
        points = tuple((float(r.age_years), float(r.value), bool(lo_age - 1e-9 <= r.age_years <= hi_age + 1e-9))
                       for r in rows.itertuples())  # fmt: skip
        fit = ()
        note = ""
        if fitted:
            band = fitted[1]
            fit = tuple(zip(band["age_years"], band["fit"], band["low"], band["high"]))
            if not np.isfinite(band["low"]).any():
                note = "2 studies: line without a confidence band"
        elif trow is not None and trow["window"] == _CHILD_WINDOW:
            note = "under 18 y: trended as z-score (see flags); no line in the unit drawn"
        normal = tuple((float(r.age_years), _f(r.lower) if _f(r.lower) is not None else math.nan,
                        _f(r.upper) if _f(r.upper) is not None else math.nan)
                       for r in rows.itertuples() if _f(r.lower) is not None or _f(r.upper) is not None)  # fmt: skip
        threshold = None
        if m in review.DIAGNOSTIC_MEASURES:
            adult = rows[(rows["threshold_unit"] == "mm") & rows["threshold"].notna()]
            if len(adult):
                last = adult.iloc[-1]
                threshold = (float(last["threshold"]),
                             f"{guideline_label}: {last['comparison']} {last['threshold']:g} mm")  # fmt: skip
            elif rows["threshold_unit"].eq("z").any():
                note = (note + "; " if note else "") + "child criterion is a z-score: see the table"
        unit = str(rows["unit"].iloc[0])
        projection = ()
        if fit and trow is not None and _f(trow.get("projected_age")) is not None \
                and trow.get("threshold_unit") == unit and _f(trow.get("threshold")) is not None \
                and _f(trow["projected_age"]) > float(fit[-1][0]):
            # the trend engine's projected crossing of the threshold, from the end of the fitted line
            projection = ((float(fit[-1][0]), float(fit[-1][1])), (_f(trow["projected_age"]), _f(trow["threshold"])))
        out.append(T.Chart(m, f"{CHART_TITLES[m]} ({m}), {unit}", unit, points, fit, normal, threshold, note,
                           projection=projection))
    return tuple(out)


def strain_map(m: pd.DataFrame, a: pd.DataFrame) -> tuple[T.StrainMap | None, str]:
    """The 17-segment strain map of the latest study with segmental strain, and a note."""
    from tracker.outputs import trajectory_pdf as T

    if m is None or m.empty:
        return None, "No segmental strain values recorded."
    codes = m["measure"].astype(str)
    seg17 = m[codes.str.match(_LS17.pattern)]
    if seg17.empty:
        if codes.str.startswith("ls18_seg").any():
            return None, "18-segment strain values recorded: this report draws the 17-segment model only."
        return None, "No segmental strain values recorded."
    date = seg17["study_date"].max()
    rows = seg17[seg17["study_date"] == date]
    values = {int(_LS17.match(c).group(1)): float(v) for c, v in zip(rows["measure"], rows["value"])}
    values = {n: values.get(n) for n in range(1, 18)}
    idx = a[(a["study_date"] == date) & a["measure"].isin(_STRAIN_INDICES)]
    indices = tuple(f"{r.measure} (computed): {T.number(float(r.value), r.unit)}" for r in idx.itertuples())
    n_dates = seg17["study_date"].nunique()
    note = f"Latest of {n_dates} studies with segmental strain." if n_dates > 1 else ""
    return T.StrainMap(date.isoformat(), values, indices), note


# --------------------------------------------------------------------------- the family letter


def letter_variant(v: fs.VariantInfo | None) -> L.LetterVariant | None:
    """The family variant as the letter words it."""
    from tracker.outputs import letter as L

    if v is None:
        return None
    return L.LetterVariant(v.gene, v.transcript, v.hgvs_c, v.hgvs_p, v.zygosity, v.current_class, v.classified_on)


def standing(state: fs.FamilyState, person: str, record: dict | None = None) -> L.Standing:
    """Where ``person`` stands with the clinic, from the family state's facts and results and the
    contact log's record for the letter (:func:`letter_record`)."""
    from tracker.engines import family_state as fs
    from tracker.outputs import letter as L

    f = state.facts.get(person)
    results = state.results
    dates = []
    if results is not None and len(results):
        mine = results[results["person"] == person]
        dates = [d for d in fs._dates(mine["test_date"].tolist()) if d is not None] if len(mine) else []
    record = record or {}
    ps = state.states.get(person)
    return L.Standing(
        studied=bool(f and f.studied), tested=bool(f and f.tested), last_visit=f.last_visit if f else None,
        result_on=max(dates) if dates else None, last_contact=f.last_contact if f else None,
        reclassified_on=state.variant.class_changed_on if state.variant else None,
        informed_on=record.get("informed_on"), responded=bool(ps and ps.responded),
        open_task=bool(record.get("open_task")), discharged_on=record.get("discharged_on"),
        booked_on=record.get("booked_on"), booked_purpose=record.get("booked_purpose"),
    )  # fmt: skip
