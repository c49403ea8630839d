"""The cardiologist's review: one long frame of every measured and derived value,
judged against normal limits and the guideline's wall-thickness criteria, then
trended per person.

Pure functions, DataFrames in and out, vectorised over the whole cohort:

- :func:`clinical_context`: per person, affected status (latest assessment),
  genotype status (:mod:`tracker.domain.genetics`) and whether the person is a
  first-degree relative of an affected member (:mod:`tracker.domain.pedigree`).
- :func:`build_measurements`: one row per value (catalogue unit) with age,
  body size and BSA, plus the derived indices of each study (``derived=True``).
- :func:`assess_measurements`: normal limits (:func:`tracker.normals.assess.assess_frame`)
  and, for maximal wall thickness (``mwt_echo``, ``mwt_cmr``), the guideline's
  criteria (:mod:`tracker.normals.criteria`).
- :func:`trend_table`, :func:`conversions`, :func:`trend_flags`: slopes with
  95% CI, last change against the least significant change, projected
  threshold crossing, phenotype conversion and flags
  (:mod:`tracker.engines.trends`).

Echo and CMR values are different measure codes and are never pooled: each
is judged, trended and projected on its own.  Decision support only: the
treating clinician decides; follow local protocols and the current guideline.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Collection, Mapping

import numpy as np
import pandas as pd

from tracker.domain.dates import DAYS_PER_YEAR, PartialDate, parse_date, parse_partial_date
from tracker.domain.genetics import ACTIONABLE_CLASSES, genotype_statuses
from tracker.domain.pedigree import Pedigree
from tracker.engines import derived as dv
from tracker.engines import repeatability, trends
from tracker.engines.cohort_model import empirical_bayes_slopes
from tracker.engines.deformation import derive_deformation
from tracker.engines.family_state import at_risk_by_blood, shown_genotype
from tracker.normals import paediatric
from tracker.normals.assess import ADULT_FROM_YEARS, assess_frame
from tracker.normals.bsa import HAYCOCK, bsa
from tracker.normals.criteria import CRITERIA_CAUTION, NOT_ASSESSABLE, RULE_SETS, wall_thickness_criteria_frame
from tracker.normals.tables import CATALOGUE_UNITS

CAUTION = (
    "Decision support only: the treating clinician decides. Follow local protocols and the current "
    "guideline. Echo and CMR values are separate series and are never pooled; a straight-line trend "
    "assumes the recent rate of change continues."
)
NOT_POOLED = (
    "Echo (mwt_echo) and CMR (mwt_cmr) wall thickness are separate series: never pooled, "
    "averaged or trended together (cross-modality limits of agreement about -7 to +8 mm, "
    "Hindieh et al., Circ Cardiovasc Imaging 2017 [V])."
)

#: Maximal wall thickness codes: the diagnostic measures of HCM (guidelines.md section 4).
DIAGNOSTIC_MEASURES = ("mwt_echo", "mwt_cmr")
#: Measures whose trend can raise the progression flag, and how (see docs/measurements.md,
#: "Progression flags").  Common practice: hypertrophy defines the HCM phenotype (2023 ESC
#: cardiomyopathy guideline, diagnostic criteria [V]; guidelines.md section 4), so wall thickness
#: (maximal, septal, posterior) and CMR LV mass index are the primary measures, with the LVOT gradient
#: at rest (obstruction develops with the phenotype; Valsalva and provoked gradients depend on
#: the manoeuvre, effort and loading and are not trended for the flag, common practice).  LA size
#: is supporting: it also grows with age in healthy adults and the encoded adult reference (Lang
#: 2015 [V2]) has no age term, so its tests count only when the latest value is above the upper
#: normal limit (engineering choice).  Echo LV mass index is supporting too: the linear method
#: cubes the error of three linear measurements, and within normal limits it adds nothing to the
#: wall-thickness tests (engineering choice).
#: Not flag measures (slope and last change shown, never flagged): e' (falls with age, Nagueh 2009
#: age bands [V2]), GLS (magnitude falls with age, NORRE 2017 [V]), ECV, LGE, ECG voltages and the rest.
PRIMARY = "primary"
SUPPORTING = "supporting (flags only above the upper normal limit)"
FLAG_MEASURES: dict[str, str] = {
    "mwt_echo": PRIMARY, "mwt_cmr": PRIMARY, "ivsd": PRIMARY, "lvpwd": PRIMARY,
    "lvmi_echo": SUPPORTING, "lvmi_cmr": PRIMARY,
    "lvot_rest": PRIMARY,
    "la_diam": SUPPORTING, "lavi": SUPPORTING,
}  # fmt: skip
#: Direction of disease of the flag measures (higher = towards disease), added to
#: trends.DISEASE_DIRECTION where it has none (LV mass index by echo, LVOT gradients).
FLAG_DIRECTION = {**trends.DISEASE_DIRECTION, **{m: +1 for m in FLAG_MEASURES}}
#: A study is taken as during pregnancy when it lies within this many days of an assessment that
#: records the person as pregnant, and not on or beyond an assessment that records her as not
#: pregnant (engineering choice: 280 days, the length of a pregnancy, either side of the visit,
#: so the whole pregnancy and the first months after delivery; cardiac remodelling of pregnancy,
#: e.g. a larger LV mass, reverses after delivery (common practice)).
PREGNANCY_WINDOW_DAYS = 280

#: Segment counts are bookkeeping, not measures: never trended.
NOT_TRENDED = frozenset({"gls_segavg_n", "mech_dispersion_n"})
_SEGMENT_PREFIXES = ("ls_seg", "ls_sys_seg", "ttp_seg", "ls18_seg", "ls18_sys_seg", "ttp18_seg")

#: Unit of every derived code (as in the measure catalogue, migration 0002).
DERIVED_UNITS = {
    "lv_mass": "g", "lvmi_echo": "g/m2", "rwt": "ratio", "septal_posterior_ratio": "ratio",
    "e_over_e_prime": "ratio", "sokolow_lyon": "mm", "cornell_voltage": "mm", "gls_segavg": "%",
    "gls_segavg_n": "segments", "relaps": "ratio", "mech_dispersion": "ms",
    "mech_dispersion_n": "segments", "psi_global": "%",
}  # fmt: skip
_DEFORMATION_TEXT = "computed from the segmental strain values (tracker.engines.deformation)"
DERIVATIONS = {
    "lv_mass": (
        "computed: 0.8 x 1.04 x [(IVSd + LVIDd + LVPWd)^3 - LVIDd^3] + 0.6, cm "
        "(Devereux, ASE-corrected; Lang 2015 [V2])"
    ),
    "lvmi_echo": "computed: LV mass / BSA ({bsa}) (Lang 2015 [V2])",
    "rwt": "computed: 2 x LVPWd / LVIDd (Lang 2015 [V2])",
    "septal_posterior_ratio": "computed: IVSd / LVPWd",
    "e_over_e_prime": "computed: E / mean of septal and lateral e' (Nagueh 2016 [V2])",
    "sokolow_lyon": "computed: S V1 + larger of R V5, R V6 (Sokolow & Lyon 1949 [V2])",
    "cornell_voltage": "computed: R aVL + S V3 (Casale 1985 [V2])",
    **{code: _DEFORMATION_TEXT for code in ("gls_segavg", "gls_segavg_n", "relaps", "mech_dispersion",
                                            "mech_dispersion_n", "psi_global")},
}  # fmt: skip

MEASUREMENT_COLUMNS = [
    "person", "family", "sex", "study_date", "modality", "site", "measure", "value", "unit",
    "derived", "derivation", "age_years", "age_uncertainty_years", "height_cm", "weight_kg",
    "bsa_m2", "bsa_formula",
]  # fmt: skip


# --------------------------------------------------------------------------- context


def _latest_variants(variants: pd.DataFrame) -> dict[str, list[tuple[str, str, str]]]:
    """family -> [(variant key, current ACMG/AMP class, classified_on)] from the class history."""
    out: dict[str, list[tuple[str, str, str]]] = {}
    if variants is None or len(variants) == 0:
        return out
    v = variants.sort_values(["family", "transcript", "hgvs_c", "classified_on"])
    for r in v.groupby(["family", "transcript", "hgvs_c"], sort=True).tail(1).itertuples():
        out.setdefault(r.family, []).append((f"{r.transcript}:{r.hgvs_c}", r.acmg_class, str(r.classified_on)))
    return out


CONTEXT_COLUMNS = [
    "person", "family", "affected_status", "affected_status_date", "genotype_status", "genotype_reason",
    "variant", "variant_class", "first_degree_relative_of_affected", "affected_first_degree_relatives",
]  # fmt: skip


def clinical_context(
    people: pd.DataFrame, genetic_results: pd.DataFrame, variants: pd.DataFrame, assessments: pd.DataFrame
) -> pd.DataFrame:
    """One row per person (``CONTEXT_COLUMNS``), from the store's frames.

    - affected_status: from the person's latest assessment (None if never assessed).
    - genotype_status: :func:`tracker.domain.genetics.genotype_statuses` for the
      family variant at its current class (carrier, non_carrier, at_risk_untested,
      not_at_risk, uncertain), shown as the recall shows it
      (:func:`tracker.engines.family_state.shown_genotype`: without a P/LP variant a
      blood relative of an affected member is uncertain (VUS) or at risk, untested,
      anyone else not at risk); with several variants in one family the texts are joined
      and the person counts as a carrier when a carrier of any P/LP variant.
    - first_degree_relative_of_affected: a first-degree relative (pedigree degree 1)
      of a member whose latest assessment is "affected".
    """
    latest = (
        assessments.sort_values(["person", "assessment_date"]).groupby("person").tail(1).set_index("person")
        if len(assessments)
        else pd.DataFrame(columns=["affected_status", "assessment_date"])
    )
    fam_variants = _latest_variants(variants)
    rows = []
    for family, members in people.groupby("family", sort=True):
        ped = Pedigree(members)
        codes = set(members["person"])
        res = genetic_results[genetic_results["person"].isin(codes)] if len(genetic_results) else None
        statuses = []
        for key, cls, _ in fam_variants.get(family, []) or [(None, None, "")]:
            statuses.append((key, cls, genotype_statuses(ped, res, cls, key)))
        affected = [p for p in members["person"] if p in latest.index and latest.at[p, "affected_status"] == "affected"]
        near: dict[str, list[str]] = {}
        for a in affected:
            for q in ped.first_degree_relatives(a):
                near.setdefault(q, []).append(a)
        blood = at_risk_by_blood(ped, {p: "affected" for p in affected})
        for p in members["person"]:
            g = [(key, cls, fg[p]) for key, cls, fg in statuses]
            carrier = any(s.status == "carrier" and cls in ACTIONABLE_CLASSES for _, cls, s in g)
            shown = (shown_genotype(s.status, cls, p, blood) for _, cls, s in g)
            status = "carrier" if carrier else "; ".join(dict.fromkeys(shown))
            rows.append(
                {
                    "person": p,
                    "family": family,
                    "affected_status": latest.at[p, "affected_status"] if p in latest.index else None,
                    "affected_status_date": latest.at[p, "assessment_date"] if p in latest.index else None,
                    "genotype_status": status,
                    "genotype_reason": "; ".join(s.reason for _, _, s in g),
                    "variant": "; ".join(k for k, _, _ in g if k) or None,
                    "variant_class": "; ".join(c for _, c, _ in g if c) or None,
                    "first_degree_relative_of_affected": p in near,
                    "affected_first_degree_relatives": ", ".join(near.get(p, [])),
                }
            )
    return pd.DataFrame(rows, columns=CONTEXT_COLUMNS)


# --------------------------------------------------------------------------- measurements


def _as_partial(v) -> PartialDate | None:
    if v is None or (isinstance(v, float) and np.isnan(v)) or v is pd.NA or v is pd.NaT:
        return None
    if isinstance(v, PartialDate):
        return v
    if hasattr(v, "isoformat") and not isinstance(v, str):
        return PartialDate(v if not hasattr(v, "date") else v.date())
    text = str(v).strip()
    return parse_partial_date(text) if text else None


def _as_date(v):
    if hasattr(v, "year") and not isinstance(v, str):
        return v.date() if hasattr(v, "date") else v
    return parse_date(str(v))


def _ages(birth: pd.Series, study: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Decimal age (days / 365.2425, as :func:`tracker.domain.dates.age_at`) and its uncertainty (y).

    A year-only birth date stands for 1 July with an uncertainty of 0.5 y.  Each distinct
    date is parsed once; the arithmetic is vectorised.
    """
    b_obj = birth.astype(object)
    parsed = {b: _as_partial(b) for b in pd.unique(b_obj)}
    day = {b: (np.datetime64(p.value, "D") if p else np.datetime64("NaT")) for b, p in parsed.items()}
    half = {b: (np.nan if p is None else (0.0 if p.precision == "day" else 0.5)) for b, p in parsed.items()}
    b_day = b_obj.map(day).to_numpy(dtype="datetime64[D]")
    unc = b_obj.map(half).to_numpy(dtype=float)
    s_obj = study.astype(object)
    s_day = s_obj.map({d: np.datetime64(d, "D") for d in pd.unique(s_obj)}).to_numpy(dtype="datetime64[D]")
    diff = s_day - b_day
    days = diff.astype("timedelta64[D]").astype(float)
    days[np.isnat(diff)] = np.nan
    age = days / DAYS_PER_YEAR
    # a study in the birth year before 1 July of a year-only birth: age 0 (within the 0.5 y uncertainty)
    return np.where((unc == 0.5) & (age < 0), 0.0, age), unc


def _derived_rows(base: pd.DataFrame, bsa_formula: str) -> pd.DataFrame:
    """Derived indices per study (vectorised on a pivot; segment strain per study)."""
    keys = ["person", "study_date", "modality"]
    studies = base.drop_duplicates(keys).set_index(keys)
    need = [dv.IVSD, dv.LVIDD, dv.LVPWD, dv.MV_E, dv.E_PRIME_SEPTAL, dv.E_PRIME_LATERAL, *dv.ECG_INPUT_CODES]
    sub = base[base["measure"].isin(need)]
    out = []
    if len(sub):
        w = sub.pivot(index=keys, columns="measure", values="value").reindex(columns=need)
        g = {c: w[c].to_numpy(dtype=float) for c in need}
        b = studies["bsa_m2"].reindex(w.index).to_numpy(dtype=float)
        mass = np.asarray(dv.lv_mass_g(g[dv.IVSD], g[dv.LVIDD], g[dv.LVPWD]), dtype=float)
        calc = {
            dv.LV_MASS: mass,
            dv.LVMI_ECHO: np.asarray(dv.lv_mass_index_g_m2(mass, b), dtype=float),
            dv.RWT: np.asarray(dv.relative_wall_thickness(g[dv.LVPWD], g[dv.LVIDD]), dtype=float),
            dv.SEPTAL_POSTERIOR_RATIO: np.asarray(dv.septal_posterior_ratio(g[dv.IVSD], g[dv.LVPWD]), dtype=float),
            dv.E_OVER_E_PRIME: np.asarray(
                dv.average_e_over_e_prime(g[dv.MV_E], g[dv.E_PRIME_SEPTAL], g[dv.E_PRIME_LATERAL]), dtype=float
            ),
            dv.SOKOLOW_LYON: np.asarray(dv.sokolow_lyon_mm(g[dv.S_V1], g[dv.R_V5], g[dv.R_V6]), dtype=float),
            dv.CORNELL_VOLTAGE: np.asarray(dv.cornell_voltage_mm(g[dv.R_AVL], g[dv.S_V3]), dtype=float),
        }
        for code, values in calc.items():
            ok = np.isfinite(values)
            if ok.any():
                out.append(pd.DataFrame({"measure": code, "value": values[ok]}, index=w.index[ok]))
    seg = base[base["measure"].isin(_segment_codes(base["measure"]))]
    for key, rows in seg.groupby(keys, sort=False):
        try:
            got = derive_deformation(dict(zip(rows["measure"], rows["value"])))
        except ValueError:  # one study mixing 17- and 18-segment codes: nothing derived
            continue
        if got:
            idx = pd.MultiIndex.from_tuples([key] * len(got), names=keys)
            out.append(pd.DataFrame({"measure": list(got), "value": list(got.values())}, index=idx))
    if not out:
        return base.iloc[:0]
    d = pd.concat(out)
    attrs = studies.drop(columns=["measure", "value", "unit", "derived", "derivation"])
    d = _join_unique(d, attrs)
    d["unit"] = d["measure"].map(DERIVED_UNITS)
    d["derived"] = True
    d["derivation"] = d["measure"].map(DERIVATIONS).str.replace("{bsa}", bsa_formula, regex=False)
    return d[base.columns]


def _segment_codes(measures: pd.Series) -> list:
    """The distinct measure codes of ``measures`` that are segmental strain codes."""
    return [c for c in pd.unique(measures.to_numpy(dtype=object)) if str(c).startswith(_SEGMENT_PREFIXES)]


def _join_unique(d: pd.DataFrame, attrs: pd.DataFrame) -> pd.DataFrame:
    """``d.join(attrs).reset_index()`` for ``attrs`` with a unique index holding every key of ``d``
    (taken by position: much faster than a join on a MultiIndex)."""
    pos = attrs.index.get_indexer(d.index)
    if (pos < 0).any():
        return d.join(attrs).reset_index()
    return pd.concat([d.reset_index(), attrs.iloc[pos].reset_index(drop=True)], axis=1)


def build_measurements(people: pd.DataFrame, studies: pd.DataFrame, *, bsa_formula: str = "mosteller") -> pd.DataFrame:
    """Every value of every study as one long frame (``MEASUREMENT_COLUMNS``).

    ``people``: person, family, sex_at_birth, birth_date (``YYYY-MM-DD`` or
    ``YYYY`` text, a date or a PartialDate).  ``studies``: the long layout in
    catalogue units (``load_studies(conn, entered=False)``): person, study_date,
    modality, site, height_cm, weight_kg, measure, value, unit.  Rows without a
    value (clinic visits) are left out.

    Adds: sex (sex at birth), age_years at the study (days / 365.2425) with
    age_uncertainty_years (0.5 for a year-only birth date, else 0), bsa_m2 by
    ``bsa_formula`` (Mosteller by default; Mosteller RD, N Engl J Med
    1987;317:1098 [V]) from the study's height (cm) and weight (kg), and the
    derived indices of each study (LV mass, LVMI, RWT, IVSd/LVPWd, average
    E/e', ECG voltages: :mod:`tracker.engines.derived`; segmental strain
    indices: :func:`tracker.engines.deformation.derive_deformation`) as rows
    with ``derived=True`` and the formula in ``derivation``.  study_date is a
    datetime.date.
    """
    s = studies[studies["measure"].notna() & pd.to_numeric(studies["value"], errors="coerce").notna()]
    if len(s) == 0:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in MEASUREMENT_COLUMNS})
    p = people[["person", "family", "sex_at_birth", "birth_date"]].rename(columns={"sex_at_birth": "sex"})
    d = s.merge(p, on="person", how="left", validate="many_to_one")
    uniq = {x: _as_date(x) for x in pd.unique(d["study_date"])}
    d["study_date"] = d["study_date"].map(uniq)
    d["value"] = pd.to_numeric(d["value"]).astype(float)
    d["height_cm"] = pd.to_numeric(d["height_cm"]).astype(float)
    d["weight_kg"] = pd.to_numeric(d["weight_kg"]).astype(float)
    d["age_years"], d["age_uncertainty_years"] = _ages(d["birth_date"], d["study_date"])
    d["bsa_m2"] = np.asarray(bsa(d["height_cm"].to_numpy(), d["weight_kg"].to_numpy(), bsa_formula), dtype=float)
    d["bsa_formula"] = bsa_formula
    d["derived"] = False
    d["derivation"] = ""
    if "site" not in d:
        d["site"] = None
    base = d[MEASUREMENT_COLUMNS]
    out = pd.concat([base, _derived_rows(base, bsa_formula)], ignore_index=True)
    out["derived"] = out["derived"].astype(bool)
    return out.sort_values(["person", "study_date", "modality", "derived", "measure"], kind="stable").reset_index(
        drop=True
    )


# --------------------------------------------------------------------------- limits and criteria


CMR_NO_Z = (
    "no paediatric z-score reference is encoded for CMR wall thickness (an echo value with height and weight is needed)"
)


def _z_reason(note: str, set_id: str) -> str:
    """Why a child's echo value has no z-score, from the limits' note (BSA unknown, outside the range)."""
    parts = [p for p in str(note).split("; ") if p.startswith(("BSA", "age outside"))]
    if "BSA unknown" in parts:
        parts[parts.index("BSA unknown")] = "BSA unknown (no height or weight at this study)"
    return f"{set_id}: " + "; ".join(parts) if parts else ""


def _criteria(
    a: pd.DataFrame, guideline: str, relatives: Collection[str], positive: Collection[str],
    paediatric_set: str = paediatric.DEFAULT_SET,
) -> dict:
    """Wall-thickness criteria for the mwt_* rows of ``a`` (columns of the result)."""
    n = len(a)
    cols = {
        "meets_criteria": pd.arrays.BooleanArray(np.zeros(n, dtype=bool), np.ones(n, dtype=bool)),  # all NA
        "threshold": np.full(n, np.nan),
        "threshold_unit": np.full(n, None, dtype=object),
        "comparison": np.full(n, None, dtype=object),
        "criteria_rule": np.full(n, None, dtype=object),
        "borderline": np.zeros(n, dtype=bool),
        "guideline": np.full(n, "", dtype=object),
        "criteria_source": np.full(n, "", dtype=object),
        "criteria_note": np.full(n, "", dtype=object),
    }
    mwt = a["measure"].isin(DIAGNOSTIC_MEASURES).to_numpy()
    if not mwt.any():
        return cols
    if guideline not in RULE_SETS:
        cols["criteria_note"][mwt] = (
            f"no wall-thickness criteria encoded for guideline {guideline!r} "
            f"(encoded: {', '.join(sorted(RULE_SETS))}); criteria not applied"
        )
        return cols
    m = a.loc[mwt]
    echo = m["measure"].to_numpy() == "mwt_echo"
    z = np.where(echo, m["z"].to_numpy(dtype=float), np.nan)
    age = m["age_years"].to_numpy(dtype=float)
    value = m["value"].to_numpy(dtype=float)
    # no z-score for a child's echo value (body size unknown or outside the set): the smallest z the
    # value can have at any body size the paediatric set covers (tracker.normals.paediatric.smallest_z)
    bound = paediatric.smallest_z("mwt_echo", np.where(echo & np.isnan(z), value, np.nan), age, paediatric_set)
    notes = m["note"].astype(object).where(m["note"].notna(), "").to_numpy(dtype=object)
    z_reason = np.where(echo, [_z_reason(x, paediatric_set) for x in notes], CMR_NO_Z)
    c = wall_thickness_criteria_frame(
        pd.DataFrame(
            {
                "age_years": age,
                "mwt_mm": value,
                "mwt_z": z,
                "mwt_z_min": bound["z_min"],
                "mwt_z_min_bsa": bound["bsa_m2"],
                "z_reason": z_reason,
                "first_degree_relative": m["person"].isin(set(relatives)).to_numpy(),
                "genotype_positive": m["person"].isin(set(positive)).to_numpy(),
            }
        ),
        guideline,
    )
    idx = np.flatnonzero(mwt)
    cols["meets_criteria"][idx] = c["met"].array
    for dst, src in (("threshold", "threshold"), ("threshold_unit", "threshold_unit"), ("comparison", "comparison"),
                     ("criteria_rule", "rule"), ("borderline", "borderline"), ("guideline", "guideline"),
                     ("criteria_source", "source"), ("criteria_note", "note")):  # fmt: skip
        cols[dst][idx] = c[src].to_numpy()
    return cols


_VOLTAGE_SOURCES = {
    dv.SOKOLOW_LYON: "Sokolow & Lyon, Am Heart J 1949: S V1 + R V5/V6 >= 35 mm [V2; from memory, verify]",
    dv.CORNELL_VOLTAGE: "Casale et al. 1985: R aVL + S V3 > 28 mm men, > 20 mm women [V2; from memory, verify]",
}


def _ecg_voltage_criteria(a: pd.DataFrame, child: np.ndarray) -> None:
    """ECG voltage criteria for LV hypertrophy on adults' computed voltages (in place).

    Both criteria were defined in adults; children get "no reference".  Each row is judged by
    :func:`tracker.engines.derived.sokolow_lyon_criterion` or
    :func:`~tracker.engines.derived.cornell_criterion`; the columns are written once per criterion.
    """
    measure = a["measure"].to_numpy(dtype=object)
    for code, source in _VOLTAGE_SOURCES.items():
        rows = np.flatnonzero((measure == code) & ~child)
        if not len(rows):
            continue
        values = a["value"].to_numpy(dtype=float)[rows].tolist()
        if code == dv.SOKOLOW_LYON:
            met = [dv.sokolow_lyon_criterion(v) for v in values]
        else:
            sexes = a["sex"].to_numpy(dtype=object)[rows].tolist()
            met = [dv.cornell_criterion(v, str(sex)) for v, sex in zip(values, sexes)]
        judged = np.array([m is not None for m in met], dtype=bool)
        if not judged.any():
            continue
        at = np.zeros(len(a), dtype=bool)
        at[rows[judged]] = True
        hit = [m for m in met if m is not None]
        _set_objects(a, at, "assessment", ["above normal limits" if m else "within normal limits" for m in hit])
        _set_objects(a, at, "flag", ["LV hypertrophy voltage criterion met" if m else None for m in hit])
        _set_objects(a, at, "source", [source] * len(hit))
        _set_objects(a, at, "note", ["ECG voltage criterion (adults)"] * len(hit))


def _set_objects(a: pd.DataFrame, at: np.ndarray, column: str, values: list) -> None:
    """``a.loc[at, column] = values`` for an object column, keeping it an object column."""
    a.loc[at, column] = np.array(values, dtype=object)


def assess_measurements(
    frame: pd.DataFrame,
    *,
    guideline: str,
    relative_of_affected: Collection[str],
    genotype_positive: Collection[str],
    paediatric_set: str = paediatric.DEFAULT_SET,
) -> pd.DataFrame:
    """Judge every row of :func:`build_measurements` output against normal limits and criteria.

    Normal limits: :func:`tracker.normals.assess.assess_frame` (children < 18 y:
    paediatric z-scores, PHN 2017 by default, with BSA by Haycock, the reference
    set's own formula [V2]; adults: the measure's default adult set, e.g. ASE/EACVI
    2015 (Lang et al.)).  Adds z, lower, upper (catalogue unit), assessment, grade,
    flag, reference_set, z_model (set of a z-score), source, note.  Measures without
    an encoded reference (ECG voltages, segmental indices) get "no reference".

    Criteria (rows of mwt_echo and mwt_cmr only, each on its own): the
    guideline's rule set in :mod:`tracker.normals.criteria` (ESC 2023 or AHA/ACC
    2020) with the person's status: ``relative_of_affected`` (codes of first-degree
    relatives of an affected member) and ``genotype_positive`` (carriers).  Adds
    meets_criteria (nullable boolean), threshold, threshold_unit ("mm" or "z"),
    comparison, criteria_rule, borderline, guideline (name and citation),
    guideline_id, criteria_source, criteria_note, and caution.  A CMR wall
    thickness in a child has no z-score and is not assessable by the child rule.
    """
    a = frame.reset_index(drop=True)  # a new frame: ``frame`` is never changed (copy on write)
    child = (a["age_years"] < ADULT_FROM_YEARS).to_numpy()
    limits_bsa = a["bsa_m2"].to_numpy(dtype=float).copy()
    if child.any():
        h = a.loc[child, "height_cm"].to_numpy(dtype=float)
        w = a.loc[child, "weight_kg"].to_numpy(dtype=float)
        limits_bsa[child] = np.asarray(bsa(h, w, HAYCOCK), dtype=float)
    known = a["measure"].isin(list(CATALOGUE_UNITS)).to_numpy()
    judged = assess_frame(
        pd.DataFrame(
            {
                "person": a["person"].to_numpy(),
                "measure": a["measure"].to_numpy(),
                "value": a["value"].to_numpy(dtype=float),
                "sex": a["sex"].to_numpy(dtype=object),
                "age_years": a["age_years"].to_numpy(dtype=float),
                "bsa_m2": limits_bsa,
            }
        ).loc[known],
        paediatric_set=paediatric_set,
    )
    for c in ("z", "lower", "upper"):
        a[c] = np.nan
        a.loc[known, c] = judged[c].to_numpy(dtype=float)
    for c in ("assessment", "grade", "flag", "reference_set", "source", "note"):
        a[c] = pd.Series([None] * len(a), dtype=object)
        a.loc[known, c] = judged[c].to_numpy(dtype=object)
    a.loc[~known, "assessment"] = "no reference"
    a.loc[~known, "source"] = ""
    a.loc[~known, "note"] = "no normal range encoded for this measure"
    _ecg_voltage_criteria(a, child)
    a["z_model"] = a["reference_set"].where(np.isfinite(a["z"].to_numpy(dtype=float)), None)
    for c, v in _criteria(a, guideline, relative_of_affected, genotype_positive, paediatric_set).items():
        a[c] = v
    a["guideline_id"] = guideline
    diagnostic = a["measure"].isin(DIAGNOSTIC_MEASURES).to_numpy()
    a["caution"] = np.where(diagnostic, np.array(CRITERIA_CAUTION, dtype=object), CAUTION)  # objects: no wide text array
    return a


def _assessed(frame, guideline, relatives, positive) -> pd.DataFrame:
    if "meets_criteria" in frame.columns and "z" in frame.columns:
        return frame
    return assess_measurements(frame, guideline=guideline, relative_of_affected=relatives, genotype_positive=positive)


# --------------------------------------------------------------------------- conversion


CONVERSION_COLUMNS = trends.CONVERSION_COLUMNS + ["first_met_measures", "review_flag"]


def conversions(frame: pd.DataFrame) -> pd.DataFrame:
    """Phenotype conversion per person from the wall-thickness rows of an assessed frame.

    Input: :func:`assess_measurements` output (needs ``meets_criteria``).  Uses
    :func:`tracker.engines.trends.phenotype_conversion`: the first study date at
    which echo or CMR maximal wall thickness meets the guideline's criteria (each
    value judged on its own, never averaged), its age, and a review flag when the
    latest study no longer meets criteria met before.  Adds first_met_measures
    (which measure met on that date) and review_flag (bool).
    """
    if "meets_criteria" not in frame.columns:
        raise ValueError("conversions needs an assessed frame (assess_measurements): no meets_criteria column")
    m = frame[frame["measure"].isin(DIAGNOSTIC_MEASURES) & frame["meets_criteria"].notna()]
    conv = trends.phenotype_conversion(m[["person", "study_date", "age_years", "meets_criteria"]])
    met = m[m["meets_criteria"].astype(bool)]
    first = conv.set_index("person")["first_met_date"]
    on_first = met[met["study_date"].to_numpy() == met["person"].map(first).to_numpy()]
    names = on_first.groupby("person")["measure"].agg(lambda s: ", ".join(sorted(set(s))))
    conv["first_met_measures"] = conv["person"].map(names).astype(object).fillna("")
    conv["review_flag"] = conv["status"] == trends.REVIEW_MET_EARLIER
    return conv[CONVERSION_COLUMNS]


# --------------------------------------------------------------------------- trends


TREND_COLUMNS = [
    "person", "family", "measure", "modality", "unit", "n", "first_date", "last_date", "first_age",
    "last_age", "span_years", "window", "slope_per_year", "slope_ci_low", "slope_ci_high",
    "slope_eb_per_year", "z_n", "z_slope_per_year", "z_ci_low", "z_ci_high", "z_model",
    "last_change", "last_change_from", "last_change_to", "lsc", "lsc_relative", "lsc_status",
    "last_change_vs_lsc", "threshold", "threshold_unit", "projection_status", "projected_age",
    "projected_age_ci_low", "projected_age_ci_high", "projection_reason", "progressing",
    "crossing_within_horizon", "converted", "conversion_date", "review_flag", "flag_role",
    "tests_fired", "progression_tests", "left_out", "criteria_not_assessable", "criteria_flags", "concern",
    "reasons", "caution",
]  # fmt: skip
FLAG_COLUMNS = ["person", "progressing", "projected_crossing_age", "reasons", "progression_tests", "review_flags"]


# The per-series OLS columns the empirical-Bayes stage 2 reads (see trend_table's ols_out).
EB_STAGE1_COLUMNS = ["person", "measure", "n", "slope", "sxx", "resid_sd"]


def _window(a: pd.DataFrame) -> pd.DataFrame:
    """Rows trended in the measure's unit: a series that reaches 18 y uses its studies
    from 18 y only (values under 18 y change with growth; they are trended as z where a
    paediatric z model exists)."""
    adult = (a["age_years"] >= ADULT_FROM_YEARS).to_numpy()
    has_adult = pd.Series(adult).groupby([a["person"].to_numpy(), a["measure"].to_numpy()]).transform("max")
    return a[~(has_adult.to_numpy() & ~adult)]


def _thresholds(t: pd.DataFrame, guideline: str, relatives, positive) -> pd.DataFrame:
    """Criteria threshold at each series' last age (mwt_* rows; others NaN)."""
    out = pd.DataFrame({"threshold": np.nan, "threshold_unit": None, "comparison": None}, index=t.index)
    mwt = t["measure"].isin(DIAGNOSTIC_MEASURES)
    if guideline not in RULE_SETS or not mwt.any():
        return out
    c = wall_thickness_criteria_frame(
        pd.DataFrame(
            {
                "age_years": t.loc[mwt, "last_age"].to_numpy(dtype=float),
                "first_degree_relative": t.loc[mwt, "person"].isin(set(relatives)).to_numpy(),
                "genotype_positive": t.loc[mwt, "person"].isin(set(positive)).to_numpy(),
            }
        ),
        guideline,
    )
    out.loc[mwt, "threshold"] = c["threshold"].to_numpy()
    out.loc[mwt, "threshold_unit"] = c["threshold_unit"].to_numpy()
    out.loc[mwt, "comparison"] = c["comparison"].to_numpy()
    return out


def _projections(t: pd.DataFrame, ols: pd.DataFrame, zols: pd.DataFrame, horizon: float) -> pd.DataFrame:
    """Fieller projections per series, in mm (adults) or z (children, echo only)."""
    cols = ["projection_status", "projected_age", "projected_age_ci_low", "projected_age_ci_high",
            "projection_reason", "years_after_last"]  # fmt: skip
    out = pd.DataFrame({c: np.nan for c in cols}, index=t.index).astype(object)
    out["projection_status"] = "not applicable"
    diagnostic = t["measure"].isin(DIAGNOSTIC_MEASURES)
    out["projection_reason"] = np.where(diagnostic, "no threshold", "not a diagnostic measure")
    have = t["threshold"].notna()
    for (unit, comp, thr), grp in t[have].groupby(["threshold_unit", "comparison", "threshold"]):
        source = zols if unit == "z" else ols
        keyed = source.set_index(["person", "measure"])
        idx = pd.MultiIndex.from_frame(grp[["person", "measure"]])
        rows = keyed.reindex(idx)
        ok = rows["n"].notna().to_numpy()
        if not ok.any():
            out.loc[grp.index, "projection_reason"] = f"no {'z-score' if unit == 'z' else 'mm'} series to project"
            continue
        p = trends.project_crossings(rows[ok].reset_index(), float(thr), horizon, meets_if_equal=comp == ">=")
        at = grp.index[ok]
        out.loc[at, "projection_status"] = p["status"].to_numpy()
        out.loc[at, "projected_age"] = p["projected_age"].to_numpy()
        out.loc[at, "projected_age_ci_low"] = p["ci_low"].to_numpy()
        out.loc[at, "projected_age_ci_high"] = p["ci_high"].to_numpy()
        out.loc[at, "projection_reason"] = p["reason"].to_numpy()
        out.loc[at, "years_after_last"] = p["years_after_last"].to_numpy()
        out.loc[grp.index[~ok], "projection_reason"] = "no z-score series to project" if unit == "z" else "no series"
    for c in ("projected_age", "projected_age_ci_low", "projected_age_ci_high", "years_after_last"):
        out[c] = out[c].astype(float)
    return out


def _last_changes(changes: pd.DataFrame) -> pd.DataFrame:
    c = changes.sort_values(["person", "measure", "to_age"]).groupby(["person", "measure"]).tail(1)
    return c.set_index(["person", "measure"])


def trend_table(
    frame: pd.DataFrame,
    *,
    guideline: str,
    relative_of_affected: Collection[str],
    genotype_positive: Collection[str],
    clinic_repeatability: Mapping[str, float] | None = None,
    horizon_years: float = trends.DEFAULT_HORIZON_YEARS,
    eb_slopes: Mapping[tuple[str, str], float] | None = None,
    ols_out: list | None = None,
) -> pd.DataFrame:
    """Per (person, measure) trend of :func:`build_measurements` output (assessed or not).

    ``eb_slopes`` / ``ols_out`` serve a cohort computed a batch of families at a time: the
    empirical-Bayes slope pools every person of the cohort, so each batch appends its stage-1
    table (the per-series OLS, ``EB_STAGE1_COLUMNS``) to ``ols_out``, and the caller puts the
    cohort's slopes (:func:`tracker.engines.cohort_model.empirical_bayes_from_ols`) in place of the
    batch's.  With ``eb_slopes`` given (person, measure) -> slope, the column is taken from it.

    Columns ``TREND_COLUMNS``.  Method (see docs/measurements.md):

    - slope_per_year: OLS of value on age (catalogue unit per year) with its 95%
      t interval (:func:`tracker.engines.trends.per_person_ols`).  ``window``
      says which studies: a series that reaches 18 y uses its studies from 18 y
      only (values under 18 y change with growth); studies under 18 y of the
      measures with a paediatric z model (mwt_echo, IVSd, LVPWd, LVIDd) are
      trended as z (z_slope_per_year, z units per year, one reference set).
      Series of one study are listed with n = 1 and no slope.
      slope_eb_per_year: two-stage empirical-Bayes
      slope (:func:`tracker.engines.cohort_model.empirical_bayes_slopes`).
    - last change: between the last two studies of the window, against the
      least significant change LSC = 2.77 x Sw (Bland & Altman 1999 [V]), Sw from
      ``clinic_repeatability`` (measure -> within-subject SD, the clinic's own)
      else the packaged defaults (:mod:`tracker.engines.repeatability`).
    - projection (mwt_echo, mwt_cmr): the guideline's threshold for the person at
      the last study (mm for adults, e.g. 15 mm, or 13 mm for first-degree
      relatives; z for children, echo only), Fieller interval, refused beyond
      ``horizon_years`` after the last study.
    - flags: progressing (last change beyond variability towards disease, or the
      slope CI excluding zero towards disease; under 18 y at the last study only
      the z-score slope, never a slope in mm, mL or cm/s), crossing_within_horizon, converted / review_flag
      (:func:`conversions`), concern (8 x crossing + 4 x progressing + 2 x review
      + converted; the table is sorted by it, highest first).
    """
    a = _assessed(frame, guideline, relative_of_affected, genotype_positive)
    a = a[~a["measure"].isin(NOT_TRENDED) & np.isfinite(a["value"].to_numpy(dtype=float))]
    a = a[np.isfinite(a["age_years"].to_numpy(dtype=float))].reset_index(drop=True)
    if len(a) == 0:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in TREND_COLUMNS})
    all_rows = a  # conversions and criteria flags use every study, pregnancy included
    if "pregnant" in a.columns:
        a = a[~a["pregnant"].fillna(False).astype(bool).to_numpy()].reset_index(drop=True)
    if len(a) == 0:  # every study during pregnancy: nothing to trend
        a = all_rows.iloc[:0]
    w = _window(a)
    ols = trends.per_person_ols(w)
    if ols_out is not None:
        ols_out.append(ols[EB_STAGE1_COLUMNS])
    zin = a[a["measure"].isin(list(paediatric.MODEL_MEASURE))]
    zols = trends.per_person_z_ols(zin) if len(zin) else trends.per_person_ols(zin.assign(z=[]), y="z")
    lsc = repeatability.lsc_table(repeatability.load_repeatability(clinic_repeatability))
    changes = trends.consecutive_changes(w, lsc_table=lsc, direction=FLAG_DIRECTION)
    flags = trends.progression_flags(ols, changes, None, horizon_years, direction=FLAG_DIRECTION)

    key = ["person", "measure"]
    t = ols.copy()
    info = w.groupby(key, sort=False).agg(family=("family", "first"), modality=("modality", "first"),
                                          unit=("unit", "first"), n_all=("value", "size"))  # fmt: skip
    t = t.join(info, on=key)
    n_all = a.groupby(key).size().reindex(pd.MultiIndex.from_frame(t[key])).to_numpy()
    t["window"] = np.where(n_all > t["n"].to_numpy(), "studies from 18 y", "all studies (under 18 y)")
    t.loc[(t["first_age"] >= ADULT_FROM_YEARS) & (n_all == t["n"].to_numpy()), "window"] = "all studies"
    eb = pd.Series(dtype=float)
    if eb_slopes is not None:
        t["slope_eb_per_year"] = [eb_slopes.get(k, np.nan) for k in zip(t["person"], t["measure"])]
    elif (ols["n"] >= 2).any():
        with np.errstate(divide="ignore", invalid="ignore"):  # a measure with one person: NaN, by design
            eb = empirical_bayes_slopes(w).set_index(key)["slope_eb"]
    if eb_slopes is None:
        t["slope_eb_per_year"] = eb.reindex(pd.MultiIndex.from_frame(t[key])).to_numpy(dtype=float)
    z = zols.set_index(key).reindex(pd.MultiIndex.from_frame(t[key]))
    t["z_n"] = z["n"].fillna(0).astype(int).to_numpy()
    for dst, src in (("z_slope_per_year", "slope"), ("z_ci_low", "ci_low"), ("z_ci_high", "ci_high")):
        t[dst] = z[src].to_numpy(dtype=float)
    zkids = zin[(zin["age_years"] < ADULT_FROM_YEARS) & zin["z_model"].notna()]
    zm = zkids.groupby(key)["z_model"].first()
    t["z_model"] = zm.reindex(pd.MultiIndex.from_frame(t[key])).to_numpy(dtype=object)
    lc = _last_changes(changes).reindex(pd.MultiIndex.from_frame(t[key]))
    t["last_change"] = lc["delta"].to_numpy(dtype=float)
    t["last_change_from"], t["last_change_to"] = lc["from_date"].to_numpy(), lc["to_date"].to_numpy()
    t["lsc"], t["lsc_relative"] = lc["lsc"].to_numpy(dtype=float), lc["lsc_relative"].to_numpy(dtype=float)
    t["lsc_status"], t["last_change_vs_lsc"] = lc["lsc_status"].to_numpy(), lc["variability"].to_numpy()
    t = t.join(_thresholds(t, guideline, relative_of_affected, genotype_positive))
    t = t.join(_projections(t, ols, zols, horizon_years))
    last = w.sort_values("age_years", kind="stable").groupby(key).tail(1).set_index(key)
    t["last_upper"] = last["upper"].reindex(pd.MultiIndex.from_frame(t[key])).to_numpy(dtype=float)
    _flag(t, flags, horizon_years)
    t["left_out"] = _left_out_text(all_rows, a, t)
    crit = criteria_review_flags(all_rows)
    ctext = crit.groupby(key)["flag"].agg(" | ".join) if len(crit) else pd.Series(dtype=object)
    t["criteria_flags"] = ctext.reindex(pd.MultiIndex.from_frame(t[key])).fillna("").to_numpy(dtype=object)
    t["criteria_not_assessable"] = t["criteria_flags"] != ""
    a = all_rows
    conv = conversions(a).set_index("person") if a["measure"].isin(DIAGNOSTIC_MEASURES).any() else None
    t["converted"] = t["person"].map(conv["ever_met"]).eq(True).to_numpy(dtype=bool) if conv is not None else False
    t["conversion_date"] = t["person"].map(conv["first_met_date"]) if conv is not None else None
    t["review_flag"] = t["person"].map(conv["review_flag"]).eq(True).to_numpy(dtype=bool) if conv is not None else False
    t["first_met_measures"] = t["person"].map(conv["first_met_measures"]) if conv is not None else ""
    t["concern"] = (8 * t["crossing_within_horizon"] + 4 * t["progressing"] + 2 * t["review_flag"]
                    + 2 * t["criteria_not_assessable"] + t["converted"]).astype(int)  # fmt: skip
    t["reasons"] = _reasons(t, horizon_years)
    t["caution"] = CAUTION
    t = t.rename(columns={"slope": "slope_per_year", "ci_low": "slope_ci_low", "ci_high": "slope_ci_high"})
    t = t.sort_values(["concern", "person", "measure"], ascending=[False, True, True], kind="stable")
    return t[TREND_COLUMNS].reset_index(drop=True)


def _flag(t: pd.DataFrame, flags: pd.DataFrame, horizon: float) -> None:
    """progressing (three tests: last change, slope, z-score slope) and crossing_within_horizon.

    Only the measures of ``FLAG_MEASURES`` flag; LA size (supporting) only when its latest value is
    above the upper normal limit.  Under 18 y at the last study only the z-score slope flags (a
    change or slope in mm includes growth); a series that crosses 18 y with fewer than 3 studies
    from 18 y (no slope interval in mm) is tested on the z-score slope of its studies under 18 y.
    """
    f = flags.set_index(["person", "measure"]).reindex(pd.MultiIndex.from_frame(t[["person", "measure"]]))
    change = f["last_change_beyond_towards_disease"].fillna(False).to_numpy(dtype=bool)
    slope = f["slope_ci_towards_disease"].fillna(False).to_numpy(dtype=bool)
    child = (t["last_age"] < ADULT_FROM_YEARS).to_numpy()
    role = t["measure"].map(FLAG_MEASURES)
    t["flag_role"] = role.where(role.notna(), "not a progression-flag measure").to_numpy(dtype=object)
    last_value = t["last_value"].to_numpy(dtype=float)
    upper = t["last_upper"].to_numpy(dtype=float)
    counts = role.notna().to_numpy() & ((role != SUPPORTING).to_numpy() | (last_value > upper))
    direction = t["measure"].map(FLAG_DIRECTION).fillna(0).to_numpy(dtype=float)
    z_up = np.where(direction > 0, t["z_ci_low"].to_numpy(dtype=float) > 0,
                    np.where(direction < 0, t["z_ci_high"].to_numpy(dtype=float) < 0, False))  # fmt: skip
    z_measure = t["measure"].isin(list(paediatric.MODEL_MEASURE)).to_numpy()
    no_adult_ci = ~np.isfinite(t["ci_low"].to_numpy(dtype=float))
    t["fitted_change"] = t["slope"].to_numpy(dtype=float) * t["span_years"].to_numpy(dtype=float)
    t["flag_change"] = change & ~child & counts
    t["flag_slope"] = slope & ~child & counts & _beyond_sw(t)
    t["flag_z_slope"] = z_up & z_measure & (child | no_adult_ci) & counts
    t["progressing"] = t["flag_change"] | t["flag_slope"] | t["flag_z_slope"]
    st = t["projection_status"].to_numpy(dtype=object)
    after = t["years_after_last"].to_numpy(dtype=float)
    t["crossing_within_horizon"] = ((st == "projected") & (after <= horizon)) | (
        st == "fitted line already past threshold"
    )
    t["progression_tests"] = _test_texts(t)
    names = np.full(len(t), "", dtype=object)
    for col, name in (("flag_slope", "slope test"), ("flag_change", "last-change test"),
                      ("flag_z_slope", "z-score slope test")):  # fmt: skip
        names = _join(names, t[col].to_numpy(dtype=bool), name)
    t["tests_fired"] = names


def _beyond_sw(t: pd.DataFrame) -> np.ndarray:
    """The fitted change over the series (slope x span) exceeds one within-subject SD of a single
    scan (Sw = LSC / 2.77, or the relative LSC / 2.77 against the fitted first value), where the
    measure has a repeatability figure.

    Engineering choice: the slope's interval already deals with noise; this asks for a change that
    matters, so a slope whose interval excludes zero but whose whole fitted change is smaller than
    the scatter of one scan (e.g. +0.08 mm/y of posterior wall over 10 years, 0.8 mm against an Sw of
    1.4 mm) is not called progression."""
    fc = np.abs(t["fitted_change"].to_numpy(dtype=float))
    sw = t["lsc"].to_numpy(dtype=float) / repeatability.LSC_FACTOR
    rel = t["lsc_relative"].to_numpy(dtype=float) / repeatability.LSC_FACTOR
    first = t["intercept"].to_numpy(dtype=float) + t["slope"].to_numpy(dtype=float) * t["first_age"].to_numpy(dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        rel_change = fc / np.abs(first)
    has = np.isfinite(sw) | np.isfinite(rel)
    return ~has | (np.isfinite(sw) & (fc > sw)) | (np.isfinite(rel) & (rel_change > rel))


def _fmt(x: float, nd: int = 2) -> str:
    return f"{x:+.{nd}f}"


def _test_texts(t: pd.DataFrame) -> np.ndarray:
    """The progression tests that fired, each with its figures (plain text per row)."""
    out = np.full(len(t), "", dtype=object)
    change = t["flag_change"].to_numpy(dtype=bool)
    if change.any():
        texts = []
        for r in t.loc[change].itertuples(index=False):
            if np.isfinite(r.lsc) and abs(r.last_change) > r.lsc:
                limit = f"LSC {r.lsc:.2f} {r.unit}"
            else:
                limit = f"relative LSC {r.lsc_relative:.0%}"
            texts.append(f"last-change test: {_fmt(r.last_change)} {r.unit} ({_iso(r.last_change_from)} to "
                         f"{_iso(r.last_change_to)}) > {limit}{lsc_note(r.lsc_status)}")  # fmt: skip
        out = _join(out, change, _spread(change, texts))
    slope = t["flag_slope"].to_numpy(dtype=bool)
    if slope.any():
        texts = []
        for r in t.loc[slope].itertuples(index=False):
            text = (f"slope test: {_fmt(r.slope)} {r.unit}/y (95% CI {_fmt(r.ci_low)} to {_fmt(r.ci_high)}; {r.n} "
                    f"studies, {r.first_age:.1f}-{r.last_age:.1f} y) excludes zero towards disease; fitted change "
                    f"{_fmt(r.fitted_change, 1)} {r.unit}")  # fmt: skip
            sw = r.lsc / repeatability.LSC_FACTOR
            if np.isfinite(sw) and abs(r.fitted_change) > sw:
                text += f" > one within-subject SD {sw:.2f} {r.unit}{lsc_note(r.lsc_status)}"
            elif np.isfinite(r.lsc_relative):
                text += f" > {r.lsc_relative / repeatability.LSC_FACTOR:.0%} (relative LSC / 2.77){lsc_note(r.lsc_status)}"
            else:
                text += " (no repeatability figure known for this measure)"
            texts.append(text)
        out = _join(out, slope, _spread(slope, texts))
    zs = t["flag_z_slope"].to_numpy(dtype=bool)
    if zs.any():
        texts = [f"z-score slope test: {_fmt(b)} z/y (95% CI {_fmt(lo)} to {_fmt(hi)}; {n} studies under 18 y, "
                 f"{model}) excludes zero towards disease"
                 for b, lo, hi, n, model in zip(t.loc[zs, "z_slope_per_year"], t.loc[zs, "z_ci_low"],
                                                t.loc[zs, "z_ci_high"], t.loc[zs, "z_n"], t.loc[zs, "z_model"])]  # fmt: skip
        out = _join(out, zs, _spread(zs, texts))
    return out


def _spread(mask: np.ndarray, texts: list[str]) -> np.ndarray:
    full = np.full(len(mask), "", dtype=object)
    full[np.flatnonzero(mask)] = texts
    return full


def _iso(v) -> str:
    if v is None or v is pd.NaT or (isinstance(v, float) and np.isnan(v)):
        return "?"
    return v.isoformat()[:10] if hasattr(v, "isoformat") else str(v)[:10]


#: Said beside every least significant change that is a packaged default (repeatability.toml).
LSC_DEFAULT_NOTES = {
    "placeholder": "placeholder LSC, not a published figure: set the clinic's own in the settings [repeatability]",
    "provisional": "provisional LSC: set the lab's own in the settings [repeatability]",
}


def lsc_note(status: object) -> str:
    """" (NOTE)" when a least significant change of this status is a packaged default, else ""."""
    note = LSC_DEFAULT_NOTES.get(str(status))
    return f" ({note})" if note else ""


def _join(out: np.ndarray, mask: np.ndarray, text) -> np.ndarray:
    """Append ``text`` (a string or an array) to ``out`` where ``mask``, joined by "; "."""
    at = np.flatnonzero(mask)
    joined = out.copy()
    if len(at):
        old, new = out[at], np.broadcast_to(np.asarray(text, dtype=object), out.shape)[at]
        joined[at] = np.where(old == "", new, old + "; " + new)
    return joined


def _reasons(t: pd.DataFrame, horizon: float) -> np.ndarray:
    """Plain-text reasons per row: each progression test that fired with its figures, the projection,
    the review and conversion notes and "criteria not assessable" (vectorised where it can be)."""
    n = len(t)
    out = t["progression_tests"].to_numpy(dtype=object).copy()
    status = t["projection_status"].to_numpy(dtype=object)
    proj = (status == "projected") & t["crossing_within_horizon"].to_numpy(dtype=bool)
    if proj.any():
        p = t.loc[proj]
        text = [
            f"projection test: the fitted line reaches {thr:g} {u} at age {age:.1f} y (95% CI {lo:.1f}-{hi:.1f}), "
            f"within {horizon:g} years"
            for thr, u, age, lo, hi in zip(p["threshold"], p["threshold_unit"], p["projected_age"],
                                           p["projected_age_ci_low"], p["projected_age_ci_high"])
        ]  # fmt: skip
        out = _join(out, proj, _spread(proj, text))
    out = _join(out, status == "fitted line already past threshold",
                "projection test: fitted line already past the threshold though the last value is not: review")  # fmt: skip
    diag = t["measure"].isin(DIAGNOSTIC_MEASURES).to_numpy()
    review_flag = t["review_flag"].to_numpy(dtype=bool)
    out = _join(out, review_flag & diag, "review: met criteria earlier but not at the latest study")
    first = t["first_met_measures"].astype(object).fillna("").astype(str).to_numpy(dtype=object)
    conv = t["converted"].to_numpy(dtype=bool) & ~review_flag
    at = np.flatnonzero(conv)  # of these, the measures that met criteria on the conversion date
    measure = t["measure"].to_numpy(dtype=object)
    conv[at] = [m in f.split(", ") for m, f in zip(measure[at], first[at])]
    if conv.any():
        dates = np.full(n, "", dtype=object)
        dates[conv] = [f"met criteria from {d}" for d in t.loc[conv, "conversion_date"]]
        out = _join(out, conv, dates)
    crit = t["criteria_flags"].to_numpy(dtype=object)
    out = _join(out, crit != "", crit)
    return out


# --------------------------------------------------------------------------- review flags and pregnancy


CRITERIA_FLAG_COLUMNS = ["person", "study_date", "measure", "value", "age_years", "flag"]


def criteria_review_flags(assessed: pd.DataFrame) -> pd.DataFrame:
    """Every maximal wall thickness value whose criteria could not be assessed and that no wall
    thickness judged at the same study date or later answers, as a review flag.

    Input: :func:`assess_measurements` output.  One row per value (``CRITERIA_FLAG_COLUMNS``);
    ``flag`` reads "criteria not assessable: mwt_echo 14 mm on 2025-12-01 (age 17.5 y): REASON".
    A guideline without encoded criteria is not flagged per value (the caller says so once).
    """
    if "meets_criteria" not in assessed.columns or len(assessed) == 0:
        return pd.DataFrame(columns=CRITERIA_FLAG_COLUMNS)
    note = assessed["criteria_note"].astype(object).fillna("").astype(str)
    mwt = assessed["measure"].isin(DIAGNOSTIC_MEASURES).to_numpy()
    m = assessed[mwt & assessed["meets_criteria"].isna().to_numpy() & note.str.startswith(NOT_ASSESSABLE).to_numpy()]
    # a value judged at the same study date or later answers the question: only values after the
    # person's last judged wall thickness (or with none judged) are flagged
    judged = assessed[mwt & assessed["meets_criteria"].notna().to_numpy()]
    last_judged = judged.groupby("person")["study_date"].max()
    since = m["person"].map(last_judged).astype(object).to_numpy()
    later = [s is None or s is pd.NaT or (isinstance(s, float) and np.isnan(s)) or d > s
             for d, s in zip(m["study_date"].to_numpy(dtype=object), since)]  # fmt: skip
    m = m[np.asarray(later, dtype=bool)]
    if len(m) == 0:
        return pd.DataFrame(columns=CRITERIA_FLAG_COLUMNS)
    prefix = len(NOT_ASSESSABLE) + 2
    flags = [
        f"{NOT_ASSESSABLE}: {meas} {v:g} {u} on {_iso(d)}"
        + ("" if not np.isfinite(age) else f" (age {age:.1f} y)") + f": {str(why)[prefix:]}"
        for meas, v, u, d, age, why in zip(m["measure"], m["value"], m["unit"], m["study_date"], m["age_years"],
                                          m["criteria_note"])
    ]  # fmt: skip
    out = m[["person", "study_date", "measure", "value", "age_years"]].copy()
    out["flag"] = flags
    return out.reset_index(drop=True)[CRITERIA_FLAG_COLUMNS]


def _truthy(v) -> bool:
    if v is None or v is pd.NA or (isinstance(v, float) and np.isnan(v)):
        return False
    if isinstance(v, str):
        return v.strip().lower() in ("yes", "true", "y", "1")
    return bool(v)


def mark_pregnancy(frame: pd.DataFrame, assessments: pd.DataFrame | None) -> pd.DataFrame:
    """``frame`` (:func:`build_measurements` output) with a bool column ``pregnant``: the study lies
    within ``PREGNANCY_WINDOW_DAYS`` of an assessment that records the person as pregnant, and not on
    or beyond (towards it) an assessment that records her as not pregnant.

    ``assessments``: person, assessment_date, pregnant (bool or yes/no).  Studies during pregnancy
    are left out of the trends (slopes, last change, projection) and named in their ``left_out``
    column; they are still judged against limits and criteria.  A copy; ``frame`` is not changed.
    """
    out = frame.copy()
    out["pregnant"] = False
    if assessments is None or len(assessments) == 0 or "pregnant" not in assessments.columns or len(out) == 0:
        return out
    a = assessments[assessments["person"].isin(set(out["person"]))]
    if len(a) == 0:
        return out
    flag = a["pregnant"]
    if pd.api.types.is_bool_dtype(flag.dtype):
        yes = flag.fillna(False).to_numpy(dtype=bool)
    else:  # yes/no text, 0/1 or mixed
        yes = np.array([_truthy(v) for v in flag.to_numpy(dtype=object)], dtype=bool)
    day = pd.to_datetime(a["assessment_date"].astype(str)).to_numpy(dtype="datetime64[D]")
    marks = pd.DataFrame({"person": a["person"].to_numpy(dtype=object), "day": day, "yes": yes})
    if not marks["yes"].any():
        return out
    window = np.timedelta64(PREGNANCY_WINDOW_DAYS, "D")
    one = np.timedelta64(1, "D")
    marks = marks.sort_values(["person", "day"], kind="stable").reset_index(drop=True)
    # nearest "not pregnant" assessment before and after each one (NaT if none), per person
    no_day = marks["day"].where(~marks["yes"])
    g = no_day.groupby(marks["person"])
    before = g.shift(1).groupby(marks["person"]).ffill()  # latest "no" strictly before the row
    after = g.shift(-1).groupby(marks["person"]).bfill()  # earliest "no" strictly after the row
    w = marks[marks["yes"]]
    b, f2 = before[marks["yes"]].to_numpy(dtype="datetime64[D]"), after[marks["yes"]].to_numpy(dtype="datetime64[D]")
    d = w["day"].to_numpy(dtype="datetime64[D]")
    lo = np.where(np.isnat(b), d - window, np.maximum(d - window, b + one))
    hi = np.where(np.isnat(f2), d + window, np.minimum(d + window, f2 - one))
    windows = pd.DataFrame({"person": w["person"].to_numpy(dtype=object), "lo": lo, "hi": hi})
    keys = pd.DataFrame({"person": out["person"].to_numpy(dtype=object),
                         "day": pd.to_datetime(out["study_date"].astype(str)).to_numpy(dtype="datetime64[D]")})  # fmt: skip
    uniq = keys.drop_duplicates().reset_index(drop=True)
    pairs = uniq.merge(windows, on="person", how="inner")
    inside = pairs[(pairs["day"] >= pairs["lo"]) & (pairs["day"] <= pairs["hi"])][["person", "day"]].drop_duplicates()
    if len(inside):
        hit = keys.merge(inside.assign(hit=True), on=["person", "day"], how="left")["hit"]
        out["pregnant"] = hit.notna().to_numpy(dtype=bool)
    return out


def _left_out_text(all_rows: pd.DataFrame, kept: pd.DataFrame, t: pd.DataFrame) -> np.ndarray:
    """Per series: the studies during pregnancy left out of the trend, or ""."""
    out = np.full(len(t), "", dtype=object)
    if "pregnant" not in all_rows.columns:
        return out
    gone = all_rows[all_rows["pregnant"].fillna(False).astype(bool).to_numpy()]
    if len(gone) == 0:
        return out
    text = gone.groupby(["person", "measure"])["study_date"].agg(
        lambda d: f"{len(d)} {'study' if len(d) == 1 else 'studies'} during pregnancy left out of the trend "
        f"({', '.join(_iso(x) for x in sorted(d))})"
    )
    return text.reindex(pd.MultiIndex.from_frame(t[["person", "measure"]])).fillna("").to_numpy(dtype=object)


def trend_flags(
    frame: pd.DataFrame,
    *,
    guideline: str,
    relative_of_affected: Collection[str],
    genotype_positive: Collection[str],
    clinic_repeatability: Mapping[str, float] | None = None,
    horizon_years: float = trends.DEFAULT_HORIZON_YEARS,
) -> pd.DataFrame:
    """One row per person of ``frame`` (``FLAG_COLUMNS``): person, progressing (bool:
    any measure progressing beyond measurement variability), projected_crossing_age
    (earliest projected age, years, at which maximal wall thickness reaches the
    guideline threshold within ``horizon_years``; NaN if none), reasons (plain text,
    "measure: reason" joined by " | "), progression_tests (the same for the progression tests
    that fired only, each with its figures),
    review_flags ("criteria not assessable: ..." for each wall-thickness value the guideline's
    criteria could not judge, joined by " | "; "" if none).  Same arguments as :func:`trend_table`.
    Decision support only: the treating clinician decides.
    """
    t = trend_table(
        frame,
        guideline=guideline,
        relative_of_affected=relative_of_affected,
        genotype_positive=genotype_positive,
        clinic_repeatability=clinic_repeatability,
        horizon_years=horizon_years,
    )
    people = pd.Index(pd.unique(frame["person"]), name="person")
    g = t.groupby("person")
    progressing = g["progressing"].any().astype(bool).reindex(people, fill_value=False).astype(bool)
    crossing = t[t["crossing_within_horizon"].astype(bool)].groupby("person")["projected_age"].min().reindex(people)
    flagged = t[t["reasons"] != ""]
    reasons = (flagged["measure"] + ": " + flagged["reasons"]).groupby(flagged["person"]).agg(" | ".join)
    fired = t[t["progressing"].astype(bool) & (t["progression_tests"] != "")]
    tests = (fired["measure"] + ": " + fired["progression_tests"]).groupby(fired["person"]).agg(" | ".join)
    crit = t[t["criteria_flags"] != ""]
    review_flags = crit.groupby("person")["criteria_flags"].agg(" | ".join)
    return pd.DataFrame(
        {
            "person": people.to_numpy(dtype=object),
            "progressing": progressing.to_numpy(dtype=bool),
            "projected_crossing_age": crossing.to_numpy(dtype=float),
            "reasons": reasons.reindex(people).fillna("").to_numpy(dtype=object),
            "progression_tests": tests.reindex(people).fillna("").to_numpy(dtype=object),
            "review_flags": review_flags.reindex(people).fillna("").to_numpy(dtype=object),
        },
        columns=FLAG_COLUMNS,
    )
