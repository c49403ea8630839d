"""A synthetic cohort of invented HCM families for tests and benchmarks.

Everything here is invented: codes like ``SYN00001-II-2``, no names, no real
people, no real laboratory.  Variant descriptions follow HGVS syntax but are
drawn at random (positions, bases and amino acids are not checked against
any reference sequence) and carry no real classification.

:func:`generate` builds the cohort in memory (pure numpy/pandas, vectorised over
people and studies, deterministic for a seed); :func:`write` writes it as the
six import CSV files of docs/data-layouts.md plus ``synth_truth.csv`` (the
generating truth per person, which the importer ignores).

How the cohort is made
----------------------
* Pedigrees of 3-4 generations, 5-15 members: two deceased founders
  (placeholders, year-only dates), their children with partners marrying in
  (``placeholder=no``), grandchildren and, in about half the families,
  great-grandchildren.  One founder carries the family's disease allele.
* Carrier status is autosomal dominant: each child of a carrier carries with
  probability 1/2 (guidelines.md section 1 [V]: first-degree relatives of
  carriers are at 50% risk).  Ascertainment: the proband and the proband's
  parent on the carrier side are carriers by construction (``ascertained`` in
  the truth file); every other transmission is a fair coin.
* Variant class per family: pathogenic / likely pathogenic for most, some of
  uncertain significance, some families where the panel found no variant; a
  few with a class history (upgraded from VUS, or downgraded to VUS).
  Predictive tests only while the class is P/LP, from age 10 (HRS 2022
  consensus: recommended from 10-12 y, guidelines.md section 3 [V]).
  Children of a tested non-carrier are not at risk and are not seen.
* Studies: echo at every visit, ECG at most, CMR at some, a clinic visit row
  at some; visits every 1-5 years (guidelines.md section 2a: ESC 2023 1-3 y
  for carriers and children, AHA 3-5 y for adults [V]/[V2]), until the end of
  follow-up (2026-11-30), a death, loss to follow-up or discharge after a
  non-carrier predictive result.
* Maximal wall thickness, echo (mm) = normal wall for body size, age and sex
  + a per-person offset + a disease increment that is a straight line in age
  + measurement noise (SD 1.0 mm).  From age 25 the normal wall uses the body
  size at 25, so an adult's expected wall is exactly ``a + slope x age``:
  those series are marked ``linear`` in the truth file and their slope is the
  true slope that per-person OLS should recover.  Non-carriers and stable
  carriers have slope 0 (flat within noise); progressing carriers drift
  0.2-1.5 mm/year, some converting past 13-15 mm; probands are thick
  (18-28 mm at diagnosis).  Children's walls grow with body size.
* Every other value is derived from body size, age, sex and a disease
  severity with noise, as in ``demo_family/make_demo.py``.

All constants below are modelling choices for invented data; where they lean
on a published figure the source is named.  They are not normal limits and
must not be used as such.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from tracker.domain.dates import DAYS_PER_YEAR
from tracker.outfiles import output_path
from tracker.io.columns import format_cell
from tracker.io.layouts import LAYOUTS

CONDITION = "hypertrophic cardiomyopathy"
FIRST_INDEX = dt.date(2008, 1, 1)  # earliest family index (proband diagnosis) date
LAST_INDEX = dt.date(2022, 12, 31)  # latest index date
END = dt.date(2026, 11, 30)  # last possible date of any record (end of follow-up)
TRUTH_FILE = "synth_truth.csv"

_EPOCH = np.datetime64("1970-01-01", "D")


def _day(d: dt.date) -> int:
    return int((np.datetime64(d, "D") - _EPOCH).astype(np.int64))


END_DAY = _day(END)
NO_DAY = np.iinfo(np.int64).min  # "no date" in day-number arrays (days before 1970 are negative)
YEAR = DAYS_PER_YEAR  # days per year for ages (as tracker.domain.dates)

# --------------------------------------------------------------------------- modelling constants

# Pediatric Heart Network (Lopez et al., Circ Cardiovasc Imaging 2017) IVSd / LVIDd
# model Z = (X_cm / BSA^alpha - mean) / SD with Haycock BSA (normal-limits.md 5a [V]).
PHN_IVSD = (0.40, 0.58, 0.09)
PHN_LVIDD = (0.45, 3.89, 0.33)
# Adult scale-up of the PHN mean wall through age 14-25, as in the demo data: lands
# adults inside ASE/EACVI 2015 normal IVSd 6-10 mm men, 6-9 mm women (normal-limits.md 2c [V2]).
ADULT_WALL_GAIN = {"male": 0.15, "female": 0.12}
ADULT_FROM = 25.0  # age from which body size is held at its age-25 value for the wall (modelling choice)
OFFSET_SD_MM = 0.7  # between-person spread of the normal wall (modelling choice)
# Echo maximal wall thickness noise: SD 1.0 mm (modelling choice, below the engine's placeholder
# within-subject SD of 1.4 mm in tracker/engines/repeatability.toml).
MWT_NOISE_SD_MM = 1.0
CMR_NOISE_SD_MM = 0.6  # CMR reads more reproducibly than echo (Am J Cardiol 2017 [V]); value a modelling choice
# Echo reads thicker than CMR in HCM: bias 0.5 mm (Hindieh 2017 [V]) to 2.6 mm (Am J Cardiol 2017 [V]);
# 1.0 mm used here, as in the demo data.
ECHO_MINUS_CMR_MM = 1.0
# Proband wall at diagnosis (modelling choice; MWT >= 15 mm defines adult HCM, ESC 2023 [V]).
PROBAND_MWT_MM = (18.0, 28.0)
PROBAND_SLOPE_SD = 0.1  # mm/year: adults with HCM change little (Spirito & Maron 1987, normal-limits.md 8 [V])
# mm/year in progressing carriers (modelling choice; children 1.5-6 mm/y, Maron 1986 [V]).
PROGRESSING_SLOPE = (0.2, 1.5)
# Share of carrier relatives who progress during follow-up: penetrance about 46% at 15 years
# in carriers without LVH (Lorenzini, JACC 2020 [V]); used loosely as a per-person probability.
PROGRESSING_SHARE = 0.45
# Adult carrier relatives affected at their first screen: 37% (van Velzen 2018, standards.md 2d [V]);
# 30% used, with an increment of 4-10 mm (modelling choice).
AFFECTED_AT_FIRST_SHARE = 0.30
AFFECTED_AT_FIRST_MM = (4.0, 10.0)
# Affected status by the invented clinician: adult relative >= 13 mm (ESC 2023 [V]); child PHN z > 2
# (ESC 2023 [V]); 12-13 mm "uncertain" (demo choice, common practice: grey zone below 13 mm).
RELATIVE_MWT_MM = 13.0
BORDERLINE_MWT_MM = 12.0
CHILD_Z = 2.0

# Approximate growth medians by completed year of age, height cm / weight kg (from memory,
# verify; the demo data's table), scaled by a per-person factor.
BOYS_H = [50, 76, 88, 96, 103, 110, 116, 122, 128, 133, 138, 143, 149, 156, 163, 169, 173, 175, 176]
GIRLS_H = [49, 74, 86, 95, 102, 109, 115, 121, 127, 132, 138, 144, 151, 156, 159, 161, 162, 163, 163]
BOYS_W = [3.5, 10, 12.5, 14.5, 16.5, 18.5, 21, 23.5, 26, 29, 32, 36, 40, 45, 51, 56, 61, 65, 68]
GIRLS_W = [3.4, 9.5, 12, 14, 16, 18, 20.5, 23, 26, 29, 33, 37, 42, 46, 50, 53, 55, 56, 57]
HEIGHT_FACTOR_SD = 0.04  # adult height SD about 7 cm (from memory, verify)
WEIGHT_FACTOR_SD = 0.12
WEIGHT_DRIFT_KG_PER_YEAR = (0.0, 0.5)  # adult weight gain (modelling choice)

# Septal e' by age, healthy adults (Nagueh 2009 table, normal-limits.md 3b [V2]); slightly lower
# mid-life values and 14 cm/s in children, as in the demo data.
E_PRIME_SEPTAL_BY_AGE = ([0, 20, 40, 60, 80], [14.0, 14.5, 13.0, 10.5, 9.0])
LATERAL_OVER_SEPTAL = 1.3  # lateral e' exceeds septal (Nagueh 2009 table [V2]); ratio a demo choice
# CMR normal LVMI men 53 / women 42 g/m2 (UK Biobank, Petersen JCMR 2017 [V]); ECV about 25-26%
# at 1.5 T (Dabir JCMR 2014 [V]), women higher (Rosmini 2018 [V]); +1.5 points used.
CMR_LVMI_NORMAL = {"male": 53.0, "female": 42.0}
ECV_NORMAL = {"male": 25.5, "female": 27.0}
# ECG lead amplitudes, mm at 10 mm/mV, healthy adults: S V1 ~9, R V5 ~13, R aVL ~4, S V3 ~10
# (from memory, verify); rising with hypertrophy.  They keep Sokolow-Lyon below 35 mm in most
# healthy adults (the criterion in tracker/engines/derived.py).
ECG_MEAN_MM = {"s_v1": 9.0, "r_v5": 13.0, "r_avl": 4.0, "s_v3": 10.0}

# Screening: children first seen from about age 10 (ESC 2014 >= 10 y, guidelines.md 2a [M]);
# recall gaps in years (ESC 2023 1-3 y children and carriers [V]; adults up to 5 y, AHA 3-5 y [V2]).
FIRST_SCREEN_AGE = (8.0, 12.0)
GAP_YEARS = {"proband": (1.0, 2.0), "child": (1.0, 3.0), "adult": (1.0, 5.0)}
PREDICTIVE_FROM_AGE = 10.0  # HRS 2022: predictive testing recommended from 10-12 y [V]
CMR_FROM_AGE = 10.0  # CMR without sedation (common practice)
CMR_FROM_DAY = _day(dt.date(2009, 1, 1))
LAVI_FROM_DAY = _day(dt.date(2014, 1, 1))  # the invented echo labs report LAVI from 2014
GLS_FROM_DAY = _day(dt.date(2015, 1, 1))  # strain from 2015
ECV_FROM_DAY = _day(dt.date(2015, 1, 1))  # T1 mapping from 2015

# Family genetics: pathogenic, likely pathogenic, uncertain significance, no variant found.
CLASS_SHARES = {"pathogenic": 0.45, "likely_pathogenic": 0.27, "uncertain_significance": 0.15, "none": 0.13}
UPGRADED_SHARE = 0.10  # of P/LP families: first classified VUS, later upgraded
DOWNGRADED_SHARE = 0.05  # of LP families: later downgraded to VUS
CONTACT_SHARES = {"contactable": 0.72, "not_contacted": 0.08, "declined": 0.12, "lost_to_follow_up": 0.08}
PREDICTIVE_UPTAKE = 0.65  # share of eligible relatives tested (cascade uptake ~40-80%, standards.md 7a [V])
INCONCLUSIVE_SHARE = 0.015

# Genes and transcripts as in the demo data (syntax only; the variants drawn are invented).
GENES = [
    ("MYBPC3", "NM_000256.3", 3825),
    ("MYH7", "NM_000257.4", 5808),
    ("TNNT2", "NM_001276345.2", 897),
    ("TNNI3", "NM_000363.5", 633),
]
GENE_SHARES = [0.45, 0.35, 0.12, 0.08]
_AA = ["Ala", "Arg", "Asn", "Asp", "Cys", "Gln", "Glu", "Gly", "His", "Ile", "Leu", "Lys", "Met",
       "Phe", "Pro", "Ser", "Thr", "Trp", "Tyr", "Val"]  # fmt: skip
_BASES = np.array(list("ACGT"))
N_CENTRES = 12
LAB = "Synthetic Regional Genomics Laboratory"
SYMPTOMS = ["exertional breathlessness", "palpitations", "exertional chest tightness", "presyncope"]

# --------------------------------------------------------------------------- pedigree template

# Slots of one family, in generation order (parents and partners always before children):
#  0, 1     founders (male, female), placeholders
#  2-4      children of the founders (generation II)        5-7    their partners
#  8-16     children of couple (2+c, 5+c), 3 each (III)      17-25  their partners
#  26-43    children of couple (8+j, 17+j), 2 each (IV)
N_SLOTS = 44
GEN = np.array([1, 1] + [2] * 6 + [3] * 18 + [4] * 18)
BLOOD = np.array([True, True] + [True] * 3 + [False] * 3 + [True] * 9 + [False] * 9 + [True] * 18)
PARENT = np.full(N_SLOTS, -1)  # blood parent of a blood child
SPOUSE = np.full(N_SLOTS, -1)  # other parent (for a child) / blood spouse (for a partner)
PARENT[2:5] = -2  # children of the founder couple
for c in range(3):
    SPOUSE[5 + c] = 2 + c
    for k in range(3):
        PARENT[8 + 3 * c + k], SPOUSE[8 + 3 * c + k] = 2 + c, 5 + c
for j in range(9):
    SPOUSE[17 + j] = 8 + j
    for k in range(2):
        PARENT[26 + 2 * j + k], SPOUSE[26 + 2 * j + k] = 8 + j, 17 + j
MAX_MEMBERS = 15
ROMAN = {1: "I", 2: "II", 3: "III", 4: "IV"}


@dataclass(frozen=True)
class Cohort:
    """The synthetic cohort: one DataFrame per import layout (text-ready values) plus the truth.

    ``truth``: one row per person: person, family, generation, role (founder /
    relative / partner), carrier, ascertained (carrier by construction: proband
    and the proband's carrier parent), not_at_risk, seen, trajectory (proband,
    affected_at_first, progressing, stable_carrier, non_carrier), slope_mm_per_year
    (true slope of mwt_echo and mwt_cmr), increment_mm (disease increment at the first
    study), offset_mm, first_study_age, last_study_age, n_echo, linear (every
    echo at age >= 25: the expected wall is a straight line in age).
    """

    seed: int
    families: pd.DataFrame
    people: pd.DataFrame
    variants: pd.DataFrame
    genetic_results: pd.DataFrame
    assessments: pd.DataFrame
    studies: pd.DataFrame
    truth: pd.DataFrame

    def frames(self) -> dict[str, pd.DataFrame]:
        return {
            "families": self.families,
            "people": self.people,
            "variants": self.variants,
            "genetic-results": self.genetic_results,
            "assessments": self.assessments,
            "studies": self.studies,
        }

    def counts(self) -> dict[str, int]:
        s = self.studies
        return {
            "families": len(self.families),
            "people": len(self.people),
            "variant_rows": len(self.variants),
            "genetic_results": len(self.genetic_results),
            "assessments": len(self.assessments),
            "studies": int(len(s.drop_duplicates(["person", "study_date", "modality"]))),
            "values": int(s["measure"].notna().sum()),
            "study_rows": len(s),
        }


# --------------------------------------------------------------------------- helpers


def _iso(days: np.ndarray) -> np.ndarray:
    """Day numbers -> ISO text (object array); each distinct day is formatted once."""
    u, inv = np.unique(np.asarray(days, dtype=np.int64), return_inverse=True)
    return np.datetime_as_string(_EPOCH + u, unit="D").astype(object)[inv.reshape(-1)]


def _july_first(years: np.ndarray) -> np.ndarray:
    """Day numbers of 1 July of each year."""
    y = np.asarray(years, dtype=np.int64)
    return (np.array(y - 1970, dtype="datetime64[Y]").astype("datetime64[D]") - _EPOCH).astype(np.int64) + 181 + (
        ((y % 4 == 0) & ((y % 100 != 0) | (y % 400 == 0))).astype(np.int64)
    )


def _weekday_fix(days: np.ndarray) -> np.ndarray:
    """Move Saturdays and Sundays to the next Monday (1970-01-01 was a Thursday)."""
    wd = (days + 3) % 7  # Monday = 0
    return days + np.where(wd == 5, 2, np.where(wd == 6, 1, 0))


def _uniform(rng, lo, hi, size):
    return lo + (hi - lo) * rng.random(size)


def _choice(rng, shares: dict, size) -> np.ndarray:
    keys = list(shares)
    p = np.array([shares[k] for k in keys], dtype=float)
    return np.array(keys, dtype=object)[rng.choice(len(keys), size=size, p=p / p.sum())]


def haycock_bsa(height_cm, weight_kg):
    """Haycock 1978 BSA in m2 (normal-limits.md 1 [V])."""
    return 0.024265 * np.power(weight_kg, 0.5378) * np.power(height_cm, 0.3964)


def _growth(age, male, hf, wf, drift):
    """Noise-free height cm and weight kg at ``age`` (years) from the growth medians."""
    ages = np.arange(len(BOYS_H), dtype=float)
    a = np.clip(age, 0.0, 18.0)
    h = np.where(male, np.interp(a, ages, BOYS_H), np.interp(a, ages, GIRLS_H)) * hf
    w = np.where(male, np.interp(a, ages, BOYS_W), np.interp(a, ages, GIRLS_W)) * wf
    w = w + drift * np.maximum(age - 18.0, 0.0)
    return h, w


def normal_wall_mm(bsa, age, male):
    """PHN mean IVSd (mm) for the BSA, raised through age 14-25 into adulthood (as the demo data)."""
    alpha, mean, _ = PHN_IVSD
    gain = np.where(male, ADULT_WALL_GAIN["male"], ADULT_WALL_GAIN["female"])
    frac = np.clip((age - 14.0) / 11.0, 0.0, 1.0)
    return 10.0 * mean * np.power(bsa, alpha) * (1.0 + gain * frac)


# --------------------------------------------------------------------------- pedigrees


def _pedigrees(rng, n_fam: int) -> dict:
    F, S = n_fam, N_SLOTS
    active = np.zeros((F, S), dtype=bool)
    active[:, :2] = True
    n2 = rng.choice([1, 2, 3], size=F, p=[0.40, 0.45, 0.15])
    active[:, 2:5] = np.arange(3)[None, :] < n2[:, None]
    part2 = rng.random((F, 3)) < 0.75
    part2[:, 0] = True
    active[:, 5:8] = active[:, 2:5] & part2
    n3 = rng.choice([0, 1, 2, 3], size=(F, 3), p=[0.25, 0.40, 0.27, 0.08])
    n3[:, 0] = np.maximum(n3[:, 0], 1)
    active[:, 8:17] = (active[:, 5:8][:, :, None] & (np.arange(3)[None, None, :] < n3[:, :, None])).reshape(F, 9)
    active[:, 17:26] = active[:, 8:17] & (rng.random((F, 9)) < 0.45)
    four = rng.random(F) < 0.5
    n4 = rng.choice([0, 1, 2], size=(F, 9), p=[0.3, 0.4, 0.3])
    active[:, 26:44] = (
        (active[:, 17:26] & four[:, None])[:, :, None] & (np.arange(2)[None, None, :] < n4[:, :, None])
    ).reshape(F, 18)

    # Sex: founders male/female, children at random, partners the opposite sex of their spouse.
    male = rng.random((F, S)) < 0.5
    male[:, 0], male[:, 1] = True, False
    for s in range(S):
        if not BLOOD[s]:
            male[:, s] = ~male[:, SPOUSE[s]]

    # Births (day numbers): founders by year; a partner within a few years of the spouse;
    # a child 20-38 years after the younger parent (modelling choices).
    birth = np.zeros((F, S), dtype=np.int64)
    f_year = rng.integers(1912, 1936, size=F)
    birth[:, 0] = _july_first(f_year)
    m_year = np.clip(f_year + np.round(rng.normal(-2, 3, size=F)).astype(int), 1910, 1940)
    birth[:, 1] = _july_first(m_year)
    gap = _uniform(rng, 20.0, 38.0, (F, S)) * 365.25
    spread = np.clip(rng.normal(0.0, 3.0, (F, S)), -8, 8) * 365.25
    for s in range(2, S):
        if BLOOD[s]:
            if PARENT[s] == -2:
                older = np.maximum(birth[:, 0], birth[:, 1])
            else:
                older = np.maximum(birth[:, PARENT[s]], birth[:, SPOUSE[s]])
            birth[:, s] = older + gap[:, s].astype(np.int64)
        else:
            birth[:, s] = birth[:, SPOUSE[s]] + spread[:, s].astype(np.int64)
    # Nobody is born after mid-2025 (the youngest are at least a year old at the end).
    active &= birth <= _day(dt.date(2025, 6, 30))
    # Founders live 50-92 years (modelling choice), dying before 2025.
    death = np.full((F, S), NO_DAY, dtype=np.int64)
    for s in (0, 1):
        y = (f_year if s == 0 else m_year) + rng.integers(50, 93, size=F)
        y = np.minimum(y, 2024)
        death[:, s] = _july_first(y)
    # Members beyond the 15th (in slot order, so descendants go first) are left out.
    active &= np.cumsum(active, axis=1) <= MAX_MEMBERS
    return {"active": active, "male": male, "birth": birth, "death": death,
            "f_year": f_year, "m_year": m_year}  # fmt: skip


def _parent_values(arr: np.ndarray, s: int, founder_value) -> np.ndarray:
    """Value of the blood parent of slot ``s`` for every family (founder couple: ``founder_value``)."""
    return founder_value if PARENT[s] == -2 else arr[:, PARENT[s]]


# --------------------------------------------------------------------------- generation


def generate(families: int, seed: int) -> Cohort:
    """Build a synthetic cohort of ``families`` invented families, deterministic for ``seed``.

    Returns a :class:`Cohort` whose frames hold the import layouts' columns with
    text-ready values (dates as ISO text, numbers as floats).
    """
    if families < 1:
        raise ValueError("families must be at least 1")
    rng = np.random.default_rng(seed)
    F, S = families, N_SLOTS
    ped = _pedigrees(rng, F)
    active, male, birth, death = ped["active"], ped["male"], ped["birth"], ped["death"]

    # ---- family index date, proband, variant class
    index = rng.integers(_day(FIRST_INDEX), _day(LAST_INDEX) + 1, size=F)
    age_at_index = (index[:, None] - birth) / YEAR
    eligible = active & BLOOD & np.isin(GEN, (2, 3))[None, :] & (age_at_index >= 16.0)
    eligible[:, 2] = True  # the eldest child of the founders is always eligible (born <= 1981)
    proband = np.argmax(np.where(eligible, rng.random((F, S)), -1.0), axis=1)
    is_proband = np.zeros((F, S), dtype=bool)
    is_proband[np.arange(F), proband] = True
    ascertained = is_proband.copy()
    pp = PARENT[proband]
    has_pp = pp >= 0
    ascertained[np.flatnonzero(has_pp), pp[has_pp]] = True

    carrier_founder = (rng.random(F) < 0.5).astype(int)  # 0 = father, 1 = mother
    coin = rng.random((F, S)) < 0.5
    carrier = np.zeros((F, S), dtype=bool)
    carrier[np.arange(F), carrier_founder] = True
    for s in range(2, S):
        if BLOOD[s]:
            parent_carrier = _parent_values(carrier, s, np.ones(F, dtype=bool))
            carrier[:, s] = ascertained[:, s] | (parent_carrier & coin[:, s])
    carrier &= active

    fclass = _choice(rng, CLASS_SHARES, F)
    has_variant = fclass != "none"
    panel_day = index + rng.integers(30, 151, size=F)
    upgraded = np.isin(fclass, ("pathogenic", "likely_pathogenic")) & (rng.random(F) < UPGRADED_SHARE)
    downgraded = (fclass == "likely_pathogenic") & ~upgraded & (rng.random(F) < DOWNGRADED_SHARE)
    years_left = (END_DAY - 30 - panel_day) / YEAR
    change_day = panel_day + (_uniform(rng, 1.0, 1.0 + np.maximum(np.minimum(8.0, years_left) - 1.0, 0.0), F)
                              * YEAR).astype(np.int64)  # fmt: skip
    change_day = np.minimum(change_day, END_DAY - 30)
    plp_from = np.where(upgraded, change_day, panel_day)
    plp_until = np.where(downgraded, change_day, END_DAY)
    plp_family = np.isin(fclass, ("pathogenic", "likely_pathogenic"))

    # ---- contact status, predictive tests, who is seen
    relative = active & BLOOD & (GEN >= 2)[None, :] & ~is_proband
    contact = np.where(relative, _choice(rng, CONTACT_SHARES, (F, S)), None)
    contact = np.where(is_proband, "contactable", contact)
    reachable = relative & np.isin(contact, ("contactable", "lost_to_follow_up"))
    tenth = birth + int(round(PREDICTIVE_FROM_AGE * YEAR))
    test_day = np.maximum(plp_from[:, None] + (_uniform(rng, 0.1, 2.0, (F, S)) * YEAR).astype(np.int64),
                          tenth + (_uniform(rng, 0.0, 2.0, (F, S)) * YEAR).astype(np.int64))  # fmt: skip
    wants_test = rng.random((F, S)) < PREDICTIVE_UPTAKE
    tested = reachable & wants_test & plp_family[:, None] & (test_day <= plp_until[:, None]) & (test_day <= END_DAY)
    # Children of a tested non-carrier are not at risk: never tested, never seen.
    not_at_risk = np.zeros((F, S), dtype=bool)
    for s in range(2, S):
        if BLOOD[s] and PARENT[s] >= 0:
            p = PARENT[s]
            not_at_risk[:, s] = (tested[:, p] & ~carrier[:, p]) | not_at_risk[:, p]
    tested &= ~not_at_risk
    seen = (reachable & ~not_at_risk) | is_proband
    inconclusive = tested & (rng.random((F, S)) < INCONCLUSIVE_SHARE)

    # ---- visit schedule (vectorised over seen people, one column per visit)
    fi, si = np.nonzero(seen)
    n_seen = len(fi)
    b = birth[fi, si]
    first = np.where(
        is_proband[fi, si],
        index[fi],
        np.maximum(index[fi] + (_uniform(rng, 0.1, 2.0, n_seen) * YEAR).astype(np.int64),
                   b + (_uniform(rng, *FIRST_SCREEN_AGE, n_seen) * YEAR).astype(np.int64)),
    )  # fmt: skip
    first = _weekday_fix(first)
    stop = np.full(n_seen, END_DAY, dtype=np.int64)
    lost = contact[fi, si] == "lost_to_follow_up"
    lost_day = np.minimum(first + (_uniform(rng, 1.0, 8.0, n_seen) * YEAR).astype(np.int64), END_DAY)
    stop = np.where(lost, lost_day, stop)
    # Discharge after a non-carrier predictive result (one more visit for the result).
    t_day = test_day[fi, si]
    non_carrier_result = tested[fi, si] & ~carrier[fi, si] & ~inconclusive[fi, si]
    discharge = t_day + rng.integers(14, 91, size=n_seen)
    stop = np.where(non_carrier_result, np.minimum(stop, np.maximum(discharge, first)), stop)
    # Some of generation II die during follow-up (born before 1950, 20%: modelling choice).
    dies = (GEN[si] == 2) & (b < _day(dt.date(1950, 1, 1))) & ~is_proband[fi, si] & (rng.random(n_seen) < 0.2)
    death_day = first + (_uniform(rng, 2.0, 15.0, n_seen) * YEAR).astype(np.int64)
    dies &= death_day <= END_DAY
    stop = np.where(dies, np.minimum(stop, death_day - rng.integers(30, 300, size=n_seen)), stop)
    lost_date = np.where(lost, np.maximum(stop, first), -1)
    death[fi[dies], si[dies]] = death_day[dies]

    n_cols = 24
    visits = np.full((n_seen, n_cols), -1, dtype=np.int64)
    cur = first.copy()
    alive = first <= stop
    u = rng.random((n_seen, n_cols))
    kind_p = is_proband[fi, si]
    for k in range(n_cols):
        visits[:, k] = np.where(alive, cur, -1)
        age_k = (cur - b) / YEAR
        group = np.where(kind_p, 0, np.where(age_k < 18, 1, 2))
        lo = np.array([GAP_YEARS[g][0] for g in ("proband", "child", "adult")])[group]
        hi = np.array([GAP_YEARS[g][1] for g in ("proband", "child", "adult")])[group]
        cur = _weekday_fix(cur + ((lo + (hi - lo) * u[:, k]) * YEAR).astype(np.int64))
        alive &= cur <= stop
    vp, vk = np.nonzero(visits >= 0)  # visit -> seen person index, visit number
    vday = visits[vp, vk]

    # ---- per-person body size and trajectory parameters (seen people)
    pm = male[fi, si]
    hf = 1.0 + HEIGHT_FACTOR_SD * rng.standard_normal(n_seen)
    wf = np.exp(WEIGHT_FACTOR_SD * rng.standard_normal(n_seen))
    drift = _uniform(rng, *WEIGHT_DRIFT_KG_PER_YEAR, n_seen)
    offset = OFFSET_SD_MM * rng.standard_normal(n_seen)
    h25, w25 = _growth(np.full(n_seen, ADULT_FROM), pm, hf, wf, drift)
    bsa25 = haycock_bsa(h25, w25)
    wall25 = normal_wall_mm(bsa25, np.full(n_seen, ADULT_FROM), pm)
    age_first = (first - b) / YEAR
    c = carrier[fi, si]
    traj = np.full(n_seen, "non_carrier", dtype=object)
    slope = np.zeros(n_seen)
    incr0 = np.zeros(n_seen)
    r_aff, r_prog = rng.random(n_seen), rng.random(n_seen)
    aff_first = c & ~kind_p & (age_first >= 18) & (r_aff < AFFECTED_AT_FIRST_SHARE)
    prog = c & ~kind_p & ~aff_first & (r_prog < PROGRESSING_SHARE)
    stable = c & ~kind_p & ~aff_first & ~prog
    traj[stable], traj[prog] = "stable_carrier", "progressing"
    traj[aff_first], traj[kind_p] = "affected_at_first", "proband"
    slope[prog] = _uniform(rng, *PROGRESSING_SLOPE, int(prog.sum()))
    incr0[aff_first] = _uniform(rng, *AFFECTED_AT_FIRST_MM, int(aff_first.sum()))
    slope[aff_first] = 0.1 + 0.1 * rng.standard_normal(int(aff_first.sum()))
    slope[kind_p] = PROBAND_SLOPE_SD * rng.standard_normal(int(kind_p.sum()))
    target = _uniform(rng, *PROBAND_MWT_MM, n_seen)
    hf_first, wf_first = _growth(age_first, pm, hf, wf, drift)
    base_first = np.where(age_first >= ADULT_FROM, wall25,
                          normal_wall_mm(haycock_bsa(hf_first, wf_first), age_first, pm)) + offset  # fmt: skip
    incr0 = np.where(kind_p, np.maximum(target - base_first, 0.0), incr0)
    lvot_p = np.where(kind_p | aff_first, np.where(rng.random(n_seen) < 0.4, _uniform(rng, 30, 80, n_seen), 0.0), 0.0)
    provoked = (kind_p | aff_first) & (rng.random(n_seen) < 0.6)
    hyper_p = rng.random(n_seen) < 0.15
    athlete_p = rng.random(n_seen) < 0.05

    # ---- studies: echo at every visit, ECG at most, CMR at some, a clinic row at some
    n_v = len(vp)
    v_age = (vday - b[vp]) / YEAR
    is_c = c[vp]
    ecg = rng.random(n_v) < 0.9
    cmr_p = np.where(is_c | kind_p[vp], 0.25, 0.12)
    cmr_day = _weekday_fix(vday + rng.integers(14, 51, size=n_v))
    cmr = (rng.random(n_v) < cmr_p) & (v_age >= CMR_FROM_AGE) & (vday >= CMR_FROM_DAY) & (cmr_day <= stop[vp])
    clinic = rng.random(n_v) < 0.2
    mod_code = {"clinic": 0, "cmr": 1, "echo": 2, "ecg": 3}  # alphabetical: the order studies are written in
    st_p = np.concatenate([vp, vp[ecg], vp[cmr], vp[clinic]])
    st_day = np.concatenate([vday, vday[ecg], cmr_day[cmr], vday[clinic]])
    st_mod = np.concatenate([np.full(n_v, 2), np.full(int(ecg.sum()), 3), np.full(int(cmr.sum()), 1),
                             np.full(int(clinic.sum()), 0)])  # fmt: skip
    order = np.lexsort((st_mod, st_day, st_p))
    st_p, st_day, st_mod = st_p[order], st_day[order], st_mod[order]
    n_st = len(st_p)
    st_age = (st_day - b[st_p]) / YEAR
    h0, w0 = _growth(st_age, pm[st_p], hf[st_p], wf[st_p], drift[st_p])
    height = np.round(h0 + 0.4 * rng.standard_normal(n_st), 1)
    weight = np.round(w0 + 0.8 * rng.standard_normal(n_st), 1)
    weight = np.maximum(weight, 2.0)
    bsa = haycock_bsa(height, weight)
    sm = pm[st_p]
    base = np.where(st_age >= ADULT_FROM, wall25[st_p], normal_wall_mm(bsa, st_age, sm)) + offset[st_p]
    incr = incr0[st_p] + slope[st_p] * (st_age - age_first[st_p])
    incr_pos = np.maximum(incr, 0.0)
    sev = np.clip(incr_pos / 10.0, 0.0, 1.0)
    ce = (c[st_p] & (sev < 0.5)).astype(float)
    noise = rng.standard_normal((n_st, 24))
    values: dict[str, np.ndarray] = {}
    present: dict[str, np.ndarray] = {}
    echo_m, cmr_m, ecg_m = st_mod == 2, st_mod == 1, st_mod == 3

    def put(code, mask, v, decimals=1):
        values[code] = np.round(v, decimals)
        present[code] = mask

    # Clipped to keep every value inside the catalogue's plausible range (2-60 mm); the clip
    # never touches an adult (walls of about 6-50 mm), so adult series stay straight lines.
    mwt = np.clip(base + incr + MWT_NOISE_SD_MM * noise[:, 0], 2.5, 58.0)
    put("mwt_echo", echo_m, mwt)
    mwt_r = np.round(mwt, 1)
    septum = np.maximum(np.minimum(mwt_r - np.abs(0.15 + 0.2 * noise[:, 1]), mwt_r), 2.2)
    put("ivsd", echo_m, septum)
    posterior = 0.97 * (base - offset[st_p]) + 0.3 * offset[st_p] + 0.12 * incr_pos + 0.4 * noise[:, 2]
    posterior = np.minimum(np.minimum(posterior, mwt_r), np.round(septum, 1) + 1.0)
    put("lvpwd", echo_m, np.maximum(posterior, 2.5))
    lvidd = 10.0 * PHN_LVIDD[1] * np.power(bsa, PHN_LVIDD[0]) * np.where(sm, 1.0, 0.94)
    lvidd = np.clip(lvidd - 0.55 * np.minimum(incr_pos, 15.0) + 1.5 * noise[:, 3], 12.0, 90.0)
    put("lvidd", echo_m, lvidd)
    put("lvids", echo_m, np.clip(lvidd * (0.63 - 0.08 * sev) + 1.0 * noise[:, 4], 6.0, 80.0))
    put("lvef_echo", echo_m, np.clip(63.0 + 8.0 * sev + 1.5 * ce + 3.0 * noise[:, 5], 52, 78), 0)
    put("la_diam", echo_m, np.clip(27.0 * np.sqrt(bsa) + 10.0 * sev + 0.05 * np.maximum(st_age - 40, 0)
                                   + 1.5 * noise[:, 6], 9.0, 85.0))  # fmt: skip
    put("lavi", echo_m & (st_day >= LAVI_FROM_DAY) & (st_age >= 10),
        np.clip(22.0 + 16.0 * sev + 0.06 * np.maximum(st_age - 40, 0) + 2.5 * noise[:, 7], 8.0, 150.0))
    lp = lvot_p[st_p]
    rest = np.clip(4.0 + lp * (sev > 0.5) + (2.0 + 0.15 * lp) * noise[:, 8], 2.0, 95.0)
    put("lvot_rest", echo_m, rest, 0)
    put("lvot_valsalva", echo_m & provoked[st_p],
        np.clip(np.maximum(np.round(rest) + 10.0, 1.6 * lp * (sev > 0.5) + 12.0 + 8.0 * noise[:, 9]), 0, 160), 0)
    e_vel = np.where(st_age < 18, 95.0, np.maximum(85.0 - 0.4 * (st_age - 25.0), 64.0))
    a_vel = np.where(st_age < 18, 50.0, np.minimum(42.0 + 0.6 * np.maximum(st_age - 25.0, 0.0), 85.0))
    put("mv_e", echo_m, np.clip(e_vel - 8.0 * sev + 6.0 * noise[:, 10], 46.0, 125.0))
    put("mv_a", echo_m, np.clip(a_vel + 5.0 * sev + 5.0 * noise[:, 11], 20.0, 120.0))
    sept = np.interp(st_age, *E_PRIME_SEPTAL_BY_AGE) * (1.0 - 0.42 * sev) * np.where(ce > 0, 0.9, 1.0)
    e_sept = np.clip(sept + 0.8 * noise[:, 12], 3.5, 19.5)
    put("e_prime_septal", echo_m, e_sept)
    put("e_prime_lateral", echo_m, np.maximum(np.clip(sept * LATERAL_OVER_SEPTAL + noise[:, 13], 4.5, 19.8),
                                              np.minimum(np.round(e_sept, 1) + 0.6, 19.9)))  # fmt: skip
    tr = 2.05 + 0.35 * sev + 0.006 * np.maximum(st_age - 40, 0) + 0.12 * noise[:, 14]
    put("tr_vmax", echo_m & (st_age >= 18) & (rng.random(n_st) < 0.55), np.clip(tr, 1.6, 3.2))
    put("gls", echo_m & (st_day >= GLS_FROM_DAY),
        np.clip(-(21.0 - 5.0 * sev - 0.8 * ce) + 0.8 * noise[:, 15], -26.0, -10.0))
    put("mwt_cmr", cmr_m, np.clip(base + incr - ECHO_MINUS_CMR_MM + CMR_NOISE_SD_MM * noise[:, 16], 2.5, 58.0))
    put("lvmi_cmr", cmr_m, np.clip(np.where(sm, CMR_LVMI_NORMAL["male"], CMR_LVMI_NORMAL["female"])
                                   + 4.5 * np.minimum(incr_pos, 25.0) + 4.0 * noise[:, 17], 20.0, 250.0), 0)  # fmt: skip
    lvef_cmr = 61.0 + np.where(sm, 0.0, 1.5) + 8.0 * sev + 2.0 * ce + 2.5 * noise[:, 18]
    put("lvef_cmr", cmr_m, np.clip(lvef_cmr, 52, 80), 0)
    lge = np.where(sev > 0.3, np.maximum(1.5 + 12.0 * (sev - 0.3) + 0.6 * noise[:, 19], 0.5), 0.0)
    put("lge_pct", cmr_m, lge)
    put("ecv", cmr_m & (st_day >= ECV_FROM_DAY),
        np.where(sm, ECV_NORMAL["male"], ECV_NORMAL["female"]) + 4.5 * sev + 1.0 * ce + 1.0 * noise[:, 20])
    sexgain = np.where(sm, 1.15, 1.0)  # men have larger voltages (from memory, verify)
    sv1 = np.clip((ECG_MEAN_MM["s_v1"] + 6.0 * sev) * sexgain + 2.5 * noise[:, 21], 1.0, 45.0)
    rv5 = np.clip((ECG_MEAN_MM["r_v5"] + 8.0 * sev) * sexgain + 3.0 * noise[:, 22], 2.0, 50.0)
    put("s_v1", ecg_m, sv1)
    put("r_v5", ecg_m, rv5)
    put("r_v6", ecg_m, np.clip(0.8 * rv5 + 1.5 * rng.standard_normal(n_st), 1.0, 45.0))
    put("r_avl", ecg_m, np.clip((ECG_MEAN_MM["r_avl"] + 5.0 * sev) * sexgain + 1.5 * noise[:, 23], 0.0, 30.0))
    sv3 = (ECG_MEAN_MM["s_v3"] + 5.0 * sev) * sexgain + 3.0 * rng.standard_normal(n_st)
    put("s_v3", ecg_m, np.clip(sv3, 1.0, 45.0))

    # ---- codes, sites
    fam_codes = np.array([f"SYN{i + 1:05d}" for i in range(F)], dtype=object)
    rank = np.zeros((F, S), dtype=np.int64)
    for g in (1, 2, 3, 4):
        cols = np.flatnonzero(GEN == g)
        rank[:, cols] = np.cumsum(active[:, cols], axis=1)
    person_code = np.empty((F, S), dtype=object)
    fa, sa = np.nonzero(active)
    person_code[fa, sa] = [f"{fam_codes[f]}-{ROMAN[GEN[s]]}-{rank[f, s]}" for f, s in zip(fa, sa)]
    centre = rng.integers(1, N_CENTRES + 1, size=F)
    child_site = st_age < 16
    # Invented sites: one table of names per (modality, child lab, centre), looked up per study.
    site_kinds = ["inherited cardiac conditions clinic", "CMR unit", "echo lab", "cardiac investigations",
                  "children's echo lab"]  # fmt: skip
    site_table = np.array([f"Synthetic centre {k:02d} {kind}" for kind in site_kinds
                           for k in range(1, N_CENTRES + 1)], dtype=object)  # fmt: skip

    # ---- people.csv
    order_p = np.lexsort((sa, fa))
    fa, sa = fa[order_p], sa[order_p]
    founder = GEN[sa] == 1
    mother = np.full(len(fa), None, dtype=object)
    father = np.full(len(fa), None, dtype=object)
    kid = ~founder & BLOOD[sa]
    for i in np.flatnonzero(kid):
        f, s = fa[i], sa[i]
        if PARENT[s] == -2:
            mo, fa_ = 1, 0
        else:
            p, q = PARENT[s], SPOUSE[s]
            mo, fa_ = (q, p) if male[f, p] else (p, q)
        mother[i], father[i] = person_code[f, mo], person_code[f, fa_]
    dead = death[fa, sa] != NO_DAY
    bdays, ddays = birth[fa, sa], death[fa, sa]
    b_iso = _iso(bdays)
    birth_txt = np.where(founder, np.array([x[:4] for x in b_iso], dtype=object), b_iso)
    d_iso = _iso(np.where(dead, ddays, 0))
    death_txt = np.where(dead, np.where(founder, np.array([x[:4] for x in d_iso], dtype=object), d_iso), None)
    # Unseen generation-II members born before 1940 are recorded as deceased, year known only (modelling choice).
    seen_flat = seen[fa, sa]
    old_unseen = (GEN[sa] == 2) & ~seen_flat & ~dead & (bdays < _day(dt.date(1940, 1, 1)))
    old_year = np.array([int(x[:4]) for x in b_iso]) + 78
    old_unseen &= old_year <= 2025
    death_txt = np.where(old_unseen, old_year.astype(str).astype(object), death_txt)
    dead = dead | old_unseen
    cstat = contact[fa, sa]
    cstat = np.where(dead, None, cstat)
    cdate_day = np.where(cstat == "not_contacted", index[fa],
                         index[fa] + rng.integers(7, 366, size=len(fa)))  # fmt: skip
    cdate_day = np.maximum(cdate_day, bdays + 1)
    seen_pos = np.full((F, S), -1)
    seen_pos[fi, si] = np.arange(n_seen)
    sp = seen_pos[fa, sa]
    cdate_day = np.where((cstat == "lost_to_follow_up") & (sp >= 0), lost_date[np.maximum(sp, 0)], cdate_day)
    cdate_day = np.minimum(cdate_day, END_DAY)
    people = pd.DataFrame({
        "person": person_code[fa, sa], "family": fam_codes[fa], "given_name": None, "family_name": None,
        "sex_at_birth": np.where(male[fa, sa], "male", "female").astype(object), "gender_identity": None,
        "birth_date": birth_txt.astype(object), "vital_status": np.where(dead, "deceased", "alive").astype(object),
        "death_date": death_txt, "mother": mother, "father": father,
        "placeholder": np.where(founder, "yes", "no").astype(object),
        "proband": np.where(is_proband[fa, sa], "yes", "no").astype(object),
        "twin_of": None, "twin_type": None, "adoption": None, "contact_status": cstat,
        "contact_status_date": np.where(pd.notna(cstat), _iso(cdate_day), None), "notes": None,
        # Recorded fields of schema revision 0006: not generated (empty).
        "death_cause": None, "death_age": None, "diagnosis_age": None, "diagnosis_place": None, "icd_date": None,
        "pacemaker_date": None,
        # The identifier from another system (schema revision 0009): not generated (empty).
        "external_id": None,
    })  # fmt: skip

    # ---- families.csv and variants.csv
    gene_i = rng.choice(len(GENES), size=F, p=GENE_SHARES)
    pos = (rng.random(F) * np.array([g[2] for g in GENES])[gene_i]).astype(int) + 1
    ref_b = _BASES[rng.integers(0, 4, size=F)]
    alt_b = _BASES[(np.searchsorted(_BASES, ref_b) + rng.integers(1, 4, size=F)) % 4]
    aa1 = np.array(_AA, dtype=object)[rng.integers(0, len(_AA), size=F)]
    aa2 = np.array(_AA, dtype=object)[rng.integers(0, len(_AA), size=F)]
    gene = np.array([g[0] for g in GENES], dtype=object)[gene_i]
    tx = np.array([g[1] for g in GENES], dtype=object)[gene_i]
    hgvs_c = np.array([f"c.{p}{r}>{a}" for p, r, a in zip(pos, ref_b, alt_b)], dtype=object)
    hgvs_p = np.array([f"p.({x}{(p + 2) // 3}{y})" for p, x, y in zip(pos, aa1, aa2)], dtype=object)
    variant_key = np.where(has_variant, tx + ":" + hgvs_c, None)
    class_txt = {"pathogenic": "pathogenic", "likely_pathogenic": "likely pathogenic",
                 "uncertain_significance": "uncertain significance", "none": "no variant found"}  # fmt: skip
    notes = [f"Synthetic family (invented). {gene[i]} variant ({class_txt[fclass[i]]} at the panel)." if has_variant[i]
             else "Synthetic family (invented). Diagnostic panel found no variant." for i in range(F)]  # fmt: skip
    families_df = pd.DataFrame({"family": fam_codes, "condition": CONDITION, "notes": notes})
    vf = np.flatnonzero(has_variant)
    first_class = np.where(upgraded, "uncertain_significance", fclass).astype(object)
    first_class = np.where(downgraded, "likely_pathogenic", first_class)
    rows = [pd.DataFrame({
        "family": fam_codes[vf], "gene": gene[vf], "transcript": tx[vf], "hgvs_c": hgvs_c[vf],
        "hgvs_p": hgvs_p[vf], "zygosity": "heterozygous", "acmg_class": first_class[vf],
        "classified_on": _iso(panel_day[vf]), "reason": "Initial classification at the diagnostic panel.",
    })]  # fmt: skip
    ch = np.flatnonzero(upgraded | downgraded)
    if len(ch):
        rows.append(pd.DataFrame({
            "family": fam_codes[ch], "gene": gene[ch], "transcript": tx[ch], "hgvs_c": hgvs_c[ch],
            "hgvs_p": hgvs_p[ch], "zygosity": "heterozygous",
            "acmg_class": np.where(upgraded[ch], fclass[ch], "uncertain_significance").astype(object),
            "classified_on": _iso(change_day[ch]),
            "reason": np.where(upgraded[ch], "Reclassified on re-review: segregation and case data.",
                               "Reclassified on re-review: population frequency higher than expected.").astype(object),
        }))  # fmt: skip
    variants_df = pd.concat(rows, ignore_index=True).sort_values(["family", "classified_on"], kind="stable")

    # ---- genetic_results.csv: diagnostic panels of probands, predictive tests
    pf = np.arange(F)
    panel = pd.DataFrame({
        "person": person_code[pf, proband], "test_date": _iso(panel_day), "test_type": "diagnostic_panel",
        "variant": variant_key, "result": np.where(has_variant, "carrier", "no_variant_found").astype(object),
        "lab": LAB, "report_reference": [f"SYN-GL-{fam_codes[i][3:]}-P" for i in pf],
    })  # fmt: skip
    tf, ts = np.nonzero(tested)
    # A deceased or lost relative is tested only before that date.
    tdays = test_day[tf, ts]
    spos = seen_pos[tf, ts]
    ok = (spos < 0) | (tdays <= np.where(spos >= 0, stop[np.maximum(spos, 0)], END_DAY))
    tf, ts, tdays = tf[ok], ts[ok], tdays[ok]
    tested_final = np.zeros((F, S), dtype=bool)
    tested_final[tf, ts] = True
    res = np.where(inconclusive[tf, ts], "inconclusive", np.where(carrier[tf, ts], "carrier", "non_carrier"))
    predictive = pd.DataFrame({
        "person": person_code[tf, ts], "test_date": _iso(tdays), "test_type": "predictive",
        "variant": variant_key[tf], "result": res.astype(object), "lab": LAB,
        "report_reference": [f"SYN-GL-{fam_codes[f][3:]}-{s:02d}" for f, s in zip(tf, ts)],
    })  # fmt: skip
    results_df = pd.concat([panel, predictive], ignore_index=True).sort_values(["person", "test_date"], kind="stable")

    # ---- assessments.csv: one per echo visit
    e_idx = np.flatnonzero(echo_m)
    e_p = st_p[e_idx]
    e_age = st_age[e_idx]
    e_mwt = values["mwt_echo"][e_idx]
    z = (e_mwt / 10.0 / np.power(bsa[e_idx], PHN_IVSD[0]) - PHN_IVSD[1]) / PHN_IVSD[2]
    meets = np.where(e_age < 18, z > CHILD_Z, e_mwt >= RELATIVE_MWT_MM) | kind_p[e_p]
    borderline = (e_age >= 18) & (e_mwt >= BORDERLINE_MWT_MM) & ~meets
    ever = pd.Series(meets).groupby(e_p).cummax().to_numpy()  # affected stays affected
    status = np.where(ever, "affected", np.where(borderline, "uncertain", "unaffected")).astype(object)
    female = ~pm[e_p]
    pregnant = female & (e_age >= 22) & (e_age <= 40) & (rng.random(len(e_idx)) < 0.03)
    symptoms = np.where(kind_p[e_p] | (ever & (rng.random(len(e_idx)) < 0.5)),
                        np.array(SYMPTOMS, dtype=object)[rng.integers(0, len(SYMPTOMS), len(e_idx))], None)  # fmt: skip
    symptoms = np.where((symptoms == None) & (rng.random(len(e_idx)) < 0.03), "palpitations", symptoms)  # noqa: E711
    assessments_df = pd.DataFrame({
        "person": person_code[fi[e_p], si[e_p]], "assessment_date": _iso(st_day[e_idx]),
        "affected_status": status, "symptoms": symptoms,
        "competitive_athlete": np.where(athlete_p[e_p] & (e_age >= 14) & (e_age <= 35), "yes", "no").astype(object),
        "pregnant": np.where(pregnant, "yes", "no").astype(object),
        "hypertension": np.where(hyper_p[e_p] & (e_age >= 45), "yes", "no").astype(object),
        "notes": None,
    })  # fmt: skip
    # HCM Risk-SCD answers: asked once affected (invented: all "no"); not recorded before.
    for answer in ("family_history_scd", "nsvt", "unexplained_syncope", "prior_arrest_or_sustained_vt",
                   "metabolic_or_syndromic"):  # fmt: skip
        assessments_df[answer] = np.where(status == "affected", "no", None).astype(object)
    assessments_df["atrial_fibrillation"] = None  # not generated (schema revision 0006)

    # ---- studies.csv (long layout), ordered by person, date, modality, measure
    st_code = person_code[fi[st_p], si[st_p]]
    kind_i = np.where((st_mod == 2) & child_site, 4, st_mod)
    st_site = site_table[kind_i * N_CENTRES + centre[fi[st_p]] - 1]
    sized = (st_mod == 2) | (st_mod == 1)
    units = MEASURE_UNITS
    meas_codes = sorted(values)  # measure code order within a study
    parts_s, parts_m, parts_v = [], [], []
    for j, code in enumerate(meas_codes):
        idx = np.flatnonzero(present[code])
        parts_s.append(idx)
        parts_m.append(np.full(len(idx), j))
        parts_v.append(values[code][idx])
    empty_st = np.flatnonzero(st_mod == 0)
    parts_s.append(empty_st)
    parts_m.append(np.full(len(empty_st), -1))
    parts_v.append(np.full(len(empty_st), np.nan))
    row_s = np.concatenate(parts_s)
    row_m = np.concatenate(parts_m)
    o = np.lexsort((row_m, row_s))
    row_s, row_m = row_s[o], row_m[o]
    val = np.concatenate(parts_v)[o] + 0.0  # + 0.0: no negative zeros
    mc = np.array(meas_codes + [None], dtype=object)
    unit_arr = np.array([units[m] for m in meas_codes] + [None], dtype=object)
    st_date_txt = _iso(st_day)
    mod_names = np.array(["clinic", "cmr", "echo", "ecg"], dtype=object)
    studies_df = pd.DataFrame({
        "person": st_code[row_s], "study_date": st_date_txt[row_s], "modality": mod_names[st_mod[row_s]],
        "site": st_site[row_s], "height_cm": np.where(sized, height, np.nan)[row_s],
        "weight_kg": np.where(sized, weight, np.nan)[row_s], "measure": mc[row_m], "value": val,
        "unit": unit_arr[row_m],
    })  # fmt: skip

    # ---- truth
    n_echo = np.bincount(e_p, minlength=n_seen)
    last_echo_age = pd.Series(e_age).groupby(e_p).max().reindex(range(n_seen)).to_numpy()
    first_echo_age = pd.Series(e_age).groupby(e_p).min().reindex(range(n_seen)).to_numpy()
    tp = np.full((F, S), -1)
    tp[fi, si] = np.arange(n_seen)
    tpos = tp[fa, sa]
    has = tpos >= 0
    tpos0 = np.maximum(tpos, 0)

    def seen_col(arr, fill=np.nan):
        return np.where(has, arr[tpos0], fill)

    role = np.where(founder, "founder", np.where(BLOOD[sa], "relative", "partner")).astype(object)
    truth = pd.DataFrame({
        "person": person_code[fa, sa], "family": fam_codes[fa], "generation": GEN[sa], "role": role,
        "carrier": carrier[fa, sa], "ascertained": ascertained[fa, sa], "proband": is_proband[fa, sa],
        "not_at_risk": not_at_risk[fa, sa], "seen": seen[fa, sa], "tested": tested_final[fa, sa],
        "trajectory": np.where(has, traj[tpos0], None),
        "slope_mm_per_year": seen_col(slope), "increment_mm": seen_col(incr0), "offset_mm": seen_col(offset),
        "first_study_age": seen_col(first_echo_age), "last_study_age": seen_col(last_echo_age),
        "n_echo": np.where(has, n_echo[tpos0], 0),
        "linear": np.where(has, first_echo_age[tpos0] >= ADULT_FROM, False),
    })  # fmt: skip
    truth["linear"] = truth["linear"].fillna(False).astype(bool)
    return Cohort(seed, families_df, people, variants_df.reset_index(drop=True),
                  results_df.reset_index(drop=True), assessments_df, studies_df, truth)  # fmt: skip


#: Catalogue unit of every measure the generator writes (migrations 0001 and 0002).
MEASURE_UNITS = {
    "mwt_echo": "mm", "ivsd": "mm", "lvpwd": "mm", "lvidd": "mm", "lvids": "mm", "lvef_echo": "%",
    "la_diam": "mm", "lavi": "mL/m2", "lvot_rest": "mmHg", "lvot_valsalva": "mmHg", "mv_e": "cm/s",
    "mv_a": "cm/s", "e_prime_septal": "cm/s", "e_prime_lateral": "cm/s", "tr_vmax": "m/s", "gls": "%",
    "mwt_cmr": "mm", "lvmi_cmr": "g/m2", "lvef_cmr": "%", "lge_pct": "%", "ecv": "%",
    "s_v1": "mm", "r_v5": "mm", "r_v6": "mm", "r_avl": "mm", "s_v3": "mm",
}  # fmt: skip


# --------------------------------------------------------------------------- writing


def write(cohort: Cohort, out: Path) -> dict[str, int]:
    """Write the six layout CSV files and ``synth_truth.csv`` into folder ``out`` (created if missing).

    Returns the number of data rows written per file name.  The bytes depend on
    the cohort only, so the same seed gives the same files.
    """
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    written = {}
    for kind, frame in cohort.frames().items():
        layout = LAYOUTS[kind]
        write_csv(frame, layout.names, out / layout.file_name)
        written[layout.file_name] = len(frame)
    write_csv(cohort.truth, list(cohort.truth.columns), out / TRUTH_FILE)
    written[TRUTH_FILE] = len(cohort.truth)
    return written


_NEEDS_QUOTES = (",", '"', "\n", "\r")
CHUNK_ROWS = 400_000


def _cell(value) -> str:
    """One clean value as CSV text, as the exporter writes it (quoted when needed)."""
    if isinstance(value, (bool, np.bool_)):
        text = "yes" if value else "no"
    else:
        text = format_cell(value.item() if isinstance(value, np.generic) else value)
    if any(c in text for c in _NEEDS_QUOTES):
        text = '"' + text.replace('"', '""') + '"'
    return text


def _column_text(series: pd.Series) -> np.ndarray:
    """A column as CSV text cells (object array); each distinct value is formatted once."""
    codes, uniques = pd.factorize(series, use_na_sentinel=True)
    uniques = np.asarray(uniques, dtype=object)
    table = np.array([_cell(v) for v in uniques] + [""], dtype=object)
    return table[codes]  # code -1 (missing) takes the trailing ""


def write_csv(frame: pd.DataFrame, columns: list[str], path: Path) -> None:
    """Write ``frame[columns]`` as UTF-8 CSV with a header row and ``\\n`` line ends.

    Vectorised: cells are formatted per distinct value and lines are joined in
    chunks, which is several times faster than ``DataFrame.to_csv`` on millions
    of rows.  Missing values are empty cells; floats are written as the
    exporter writes them (``63`` for 63.0, else the shortest repr).
    """
    cells = [_column_text(frame[c]) for c in columns]
    with output_path(path) as tmp, open(tmp, "w", encoding="utf-8", newline="") as fh:
        fh.write(",".join(columns) + "\n")
        for start in range(0, len(frame), CHUNK_ROWS):
            rows = zip(*(col[start : start + CHUNK_ROWS].tolist() for col in cells))
            fh.write("\n".join(map(",".join, rows)))
            fh.write("\n")


def truth_from(folder: Path) -> pd.DataFrame:
    """Read ``synth_truth.csv`` back (for tests and the benchmark)."""
    return pd.read_csv(Path(folder) / TRUTH_FILE)


__all__ = ["Cohort", "generate", "write", "write_csv", "truth_from", "TRUTH_FILE", "END", "MEASURE_UNITS"]
