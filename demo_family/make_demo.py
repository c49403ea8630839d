"""Build the invented demonstration data set for the HCM family-screening tracker.

Everything here is invented: the clinic, the five families, every name, date,
place, laboratory and measurement.  No real patient data, no real people.  The
variant descriptions follow HGVS syntax (codon arithmetic and base change agree
with the amino-acid change) but are not checked against the reference sequence
and carry no real classification.

Run (deterministic, fixed numpy seed; writes the CSV files next to this script)::

    /work/main/.venv/bin/python demo_family/make_demo.py

Files written: families.csv, people.csv, variants.csv, genetic_results.csv,
assessments.csv, studies.csv (layouts in docs/data-layouts.md).

How the numbers are made
------------------------
* Pedigrees, genetic results, visit months, symptoms and flags are hand-written
  tables below.  The day of each visit is drawn from the seeded generator.
* Body size: children follow approximate growth medians (table below) scaled by
  a per-person factor; adults keep their height and drift slowly in weight.
* Wall thickness of an unaffected person follows body size (Pediatric Heart
  Network IVSd mean, scaled up modestly in adulthood), plus a per-person offset,
  plus a disease increment for carriers and affected people, plus measurement
  noise.  Story-critical series (the relative who converts, the borderline twin,
  the hypertensive brother) are written by hand, in mm, as measured.
* Every other echo and CMR measure is derived from body size, age, sex and a
  disease severity (0 = no phenotype, 1 = established HCM) with noise.
* Segmental peak longitudinal strain (AHA 17 segments, ``ls_seg01`` ..
  ``ls_seg17``) is hand-written for the last two echos of the proband of HV01
  (``SEGMENT_STRAIN``; no random draws, so every other value stays the same).
  The rows follow that echo's other rows in studies.csv.

The script checks the data before writing (``check_all``) and refuses to write
anything if a check fails.
"""

from __future__ import annotations

import csv
import datetime as dt
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
SEED = 20120417
RNG = np.random.default_rng(SEED)

FIRST_STUDY = dt.date(2012, 1, 1)
LAST_STUDY = dt.date(2026, 11, 30)
CONDITION = "hypertrophic cardiomyopathy"

# ---------------------------------------------------------------------------
# Invented places
# ---------------------------------------------------------------------------
SITE_ECHO = "Ambersett General Infirmary echocardiography lab"
SITE_ECHO_OUTREACH = "Tollbridge Community Heart Centre"
SITE_ECHO_CHILD = "Ambersett Children's Heart Unit"
SITE_CMR = "Ambersett General Infirmary CMR unit"
SITE_ECG = "Ambersett General Infirmary cardiac investigations"
SITE_CLINIC = "Ambersett Inherited Cardiac Conditions Clinic"
LAB = "Wrenshire Regional Genomics Laboratory"

CODE_RE = re.compile(r"^[A-Za-z0-9._-]{1,40}$")

# ---------------------------------------------------------------------------
# Measure catalogue (docs/data-layouts.md) with the decimals used here and the
# demo's own sanity ranges.  The sanity ranges are meant to sit inside the
# catalogue's plausible ranges and only keep the invented values realistic;
# they are demo choices (common practice), not normal limits.
# ---------------------------------------------------------------------------
MEASURES: dict[str, tuple[str, str, int, float, float]] = {
    # code: (modality, unit, decimals, demo_min, demo_max)
    "mwt_echo": ("echo", "mm", 1, 4.0, 30.0),
    "ivsd": ("echo", "mm", 1, 4.0, 30.0),
    "lvpwd": ("echo", "mm", 1, 4.0, 16.0),
    "lvidd": ("echo", "mm", 1, 30.0, 60.0),
    "lvids": ("echo", "mm", 1, 15.0, 42.0),
    "lvef_echo": ("echo", "%", 0, 50.0, 80.0),  # demo range 50-80 %
    "la_diam": ("echo", "mm", 1, 18.0, 55.0),
    "lavi": ("echo", "mL/m2", 1, 14.0, 60.0),
    "lvot_rest": ("echo", "mmHg", 0, 0.0, 100.0),  # demo range 0-100 mmHg
    "lvot_valsalva": ("echo", "mmHg", 0, 0.0, 100.0),  # provoked by the Valsalva manoeuvre
    "mv_e": ("echo", "cm/s", 1, 40.0, 130.0),
    "mv_a": ("echo", "cm/s", 1, 25.0, 100.0),
    "e_prime_septal": ("echo", "cm/s", 1, 5.0, 20.0),  # demo range 5-20 cm/s
    "e_prime_lateral": ("echo", "cm/s", 1, 5.0, 20.0),
    "tr_vmax": ("echo", "m/s", 1, 1.5, 2.8),
    "gls": ("echo", "%", 1, -24.0, -14.0),  # demo range -24 to -14 %
    "mwt_cmr": ("cmr", "mm", 1, 4.0, 30.0),
    "lvmi_cmr": ("cmr", "g/m2", 0, 30.0, 140.0),
    "lvef_cmr": ("cmr", "%", 0, 50.0, 80.0),
    "lge_pct": ("cmr", "%", 1, 0.0, 20.0),
    "ecv": ("cmr", "%", 1, 20.0, 38.0),
}
ECHO_ORDER = [
    "mwt_echo", "ivsd", "lvpwd", "lvidd", "lvids", "lvef_echo", "la_diam", "lavi",
    "lvot_rest", "lvot_valsalva", "mv_e", "mv_a", "e_prime_septal", "e_prime_lateral",
    "tr_vmax", "gls",
]
CMR_ORDER = ["mwt_cmr", "lvmi_cmr", "lvef_cmr", "lge_pct", "ecv"]

# ---------------------------------------------------------------------------
# Reference numbers used to shape the invented values
# ---------------------------------------------------------------------------
# Pediatric Heart Network (Lopez et al., Circ Cardiovasc Imaging 2017), model
# Z = (X_cm / BSA^alpha - mean) / SD with Haycock BSA [V]:
PHN = {"ivsd": (0.40, 0.58, 0.09), "lvpwd": (0.40, 0.57, 0.09), "lvidd": (0.45, 3.89, 0.33)}
# Adult wall thickness: ASE/EACVI 2015 normal IVSd 6-10 mm men, 6-9 mm women
# [V2]; the adult scale-up of the PHN mean (15 % men, 12 % women by age 25) is
# a demo choice that lands adults inside those ranges.
ADULT_WALL_GAIN = {"male": 0.15, "female": 0.12}
# HCM thresholds used for the invented clinician's affected status: adult
# relative >= 13 mm (ESC 2023, [V]); child z > 2 (ESC 2023 with PHN norms, [V]).
RELATIVE_MWT_MM = 13.0
BORDERLINE_MWT_MM = 12.0  # demo choice: "uncertain" from 12.0 mm (common practice: grey zone below 13)
CHILD_Z = 2.0
# Echo measurement noise for maximal wall thickness, SD 0.5 mm: demo choice so
# that adult non-carriers stay flat within about 1 mm (common practice).
MWT_NOISE_SD_MM = 0.5
# Echo reads thicker than CMR in HCM: bias 0.5 mm (Hindieh 2017 [V]) to 2.6 mm
# (Am J Cardiol 2017 [V]); the demo uses 1.0 mm.
ECHO_MINUS_CMR_MM = 1.0
# Septal e' by age, healthy adults (Nagueh 2009 table, [V2]); the demo uses
# slightly lower mid-life values, and 14 cm/s in children (demo choice).
E_PRIME_SEPTAL_BY_AGE = [(0, 14.0), (20, 14.5), (40, 13.0), (60, 10.5), (80, 9.0)]
LATERAL_OVER_SEPTAL = 1.3  # demo choice; lateral e' exceeds septal (Nagueh 2009 table, [V2])
# CMR normal LVMI men 53 / women 42 g/m2 (UK Biobank, Petersen JCMR 2017 [V]);
# ECV about 25-26 % at 1.5 T (Dabir JCMR 2014 [V]), women ~2.6 points higher
# (Rosmini EHJ-CVI 2018 [V]); the demo uses +1.5.
CMR_LVMI_NORMAL = {"male": 53.0, "female": 42.0}
ECV_NORMAL = {"male": 25.5, "female": 27.0}

# Approximate growth medians by completed year of age, height cm / weight kg.
# From memory, verify; used only to give the invented children plausible body
# sizes.
BOYS_H = [50, 76, 88, 96, 103, 110, 116, 122, 128, 133, 138, 143, 149, 156, 163, 169, 173, 175, 176]
GIRLS_H = [49, 74, 86, 95, 102, 109, 115, 121, 127, 132, 138, 144, 151, 156, 159, 161, 162, 163, 163]
BOYS_W = [3.5, 10, 12.5, 14.5, 16.5, 18.5, 21, 23.5, 26, 29, 32, 36, 40, 45, 51, 56, 61, 65, 68]
GIRLS_W = [3.4, 9.5, 12, 14, 16, 18, 20.5, 23, 26, 29, 33, 37, 42, 46, 50, 53, 55, 56, 57]


# ---------------------------------------------------------------------------
# Small helpers
# ---------------------------------------------------------------------------
def d(text: str) -> dt.date:
    return dt.date.fromisoformat(text)


def birth_mid(text: str) -> dt.date:
    """A year-only date is taken as 1 July (as tracker/domain/dates.py does)."""
    return dt.date(int(text), 7, 1) if len(text) == 4 else d(text)


def age_years(birth: str, on: dt.date) -> float:
    return (on - birth_mid(birth)).days / 365.2425


def decimal_year(day: dt.date) -> float:
    return day.year + (day.timetuple().tm_yday - 0.5) / 365.25


def haycock_bsa(height_cm: float, weight_kg: float) -> float:
    """Haycock 1978 BSA in m2 [V]."""
    return 0.024265 * weight_kg**0.5378 * height_cm**0.3964


def phn_z(measure: str, value_mm: float, bsa: float) -> float:
    alpha, mean, sd = PHN[measure]
    return (value_mm / 10.0 / bsa**alpha - mean) / sd


def interp(points: list[tuple[float, float]], x: float) -> float:
    xs = [p[0] for p in points]
    ys = [p[1] for p in points]
    return float(np.interp(x, xs, ys))


def fmt(value: float, decimals: int) -> str:
    text = f"{value:.{decimals}f}"
    return "0" + text[2:] if text.startswith("-0") and float(text) == 0 else text


def yn(flag: bool) -> str:
    return "yes" if flag else "no"


def weekday_in_month(token: str) -> dt.date:
    """Visit token 'YYYY-MM' -> a seeded working day of that month; 'YYYY-MM-DD' kept."""
    if len(token) == 10:
        return d(token)
    year, month = int(token[:4]), int(token[5:7])
    day = dt.date(year, month, int(RNG.integers(2, 27)))
    while day.weekday() >= 5:
        day += dt.timedelta(days=1)
    return day


def working_day_after(day: dt.date, lo: int, hi: int) -> dt.date:
    out = day + dt.timedelta(days=int(RNG.integers(lo, hi)))
    while out.weekday() >= 5:
        out += dt.timedelta(days=1)
    return out


# ---------------------------------------------------------------------------
# Families
# ---------------------------------------------------------------------------
FAMILIES = [
    ("HV01", "MYBPC3 pathogenic variant. Father of the proband died suddenly aged about 41 (1979)."),
    ("HV02", "MYH7 pathogenic variant. The proband is one of monozygotic twins."),
    ("HV03", "TNNI3 variant of uncertain significance; apical HCM. Segregation data accumulating: re-review requested."),
    ("HV04", "TNNT2 variant: uncertain significance (2014), reclassified likely pathogenic (2018); cascade testing since."),
    ("HV05", "Diagnostic panel found no variant (2017). Relatives on clinical screening only."),
]


# ---------------------------------------------------------------------------
# People
# ---------------------------------------------------------------------------
@dataclass
class Person:
    person: str
    family: str
    given_name: str
    family_name: str
    sex_at_birth: str
    birth_date: str
    vital_status: str = "alive"
    death_date: str = ""
    mother: str = ""
    father: str = ""
    placeholder: bool = False
    proband: bool = False
    twin_of: str = ""
    twin_type: str = ""
    adoption: str = ""
    contact_status: str = ""
    contact_status_date: str = ""
    notes: str = ""
    gender_identity: str = ""
    # Recorded as fields (schema revision 0006), not only in the notes.
    death_cause: str = ""  # sudden, cardiac_non_sudden, non_cardiac, unknown
    death_age: str = ""  # whole years
    diagnosis_age: str = ""  # whole years at diagnosis of HCM, possibly at another centre
    diagnosis_place: str = ""
    icd_date: str = ""
    pacemaker_date: str = ""


P = Person
PEOPLE: list[Person] = [
    # ---- HV01 Thornbury: MYBPC3 ------------------------------------------
    P("HV01-I-1", "HV01", "Arthur", "Thornbury", "male", "1910", "deceased", "1968", placeholder=True),
    P("HV01-I-2", "HV01", "Edith", "Thornbury", "female", "1912", "deceased", "1990", placeholder=True),
    P("HV01-II-1", "HV01", "Walter", "Thornbury", "male", "1938", "deceased", "1979-06-02",
      mother="HV01-I-2", father="HV01-I-1",
      death_cause="sudden", death_age="41",
      notes="Sudden cardiac death while gardening, aged about 41; no post-mortem. Obligate carrier."),
    P("HV01-II-2", "HV01", "Margaret", "Farrant", "female", "1942-04-11",
      notes="Married into the family; remarried after 1979. Tested non-carrier 2012: the variant is paternal."),
    P("HV01-II-3", "HV01", "Leonard", "Farrant", "male", "1936", "deceased", "2019-01-23",
      notes="Second husband of HV01-II-2."),
    P("HV01-II-4", "HV01", "Joan", "Thornbury", "female", "1940", "deceased", "2003",
      mother="HV01-I-2", father="HV01-I-1", death_cause="non_cardiac",
      notes="Died 2003 after a stroke, per family; never assessed."),
    P("HV01-III-1", "HV01", "Graham", "Thornbury", "male", "1964-09-23",
      mother="HV01-II-2", father="HV01-II-1", proband=True,
      contact_status="contactable", contact_status_date="2012-04-16",
      notes="Index case, diagnosed 2012 with obstructive septal HCM."),
    P("HV01-III-2", "HV01", "Susan", "Thornbury", "female", "1966-11-02",
      notes="Wife of the proband; married in."),
    P("HV01-III-3", "HV01", "Helen", "Marsh", "female", "1966-02-14",
      mother="HV01-II-2", father="HV01-II-1",
      contact_status="contactable", contact_status_date="2012-09-10"),
    P("HV01-III-4", "HV01", "Robert", "Marsh", "male", "1963-08-29", notes="Husband of HV01-III-3; married in."),
    P("HV01-III-5", "HV01", "Martin", "Thornbury", "male", "1969-08-05",
      mother="HV01-II-2", father="HV01-II-1",
      contact_status="declined", contact_status_date="2013-03-04",
      notes="One screening echo in 2013; declined genetic testing and further screening."),
    P("HV01-III-6", "HV01", "Neil", "Farrant", "male", "1980-05-17",
      mother="HV01-II-2", father="HV01-II-3",
      notes="Maternal half-brother of the proband; not at risk (variant is paternal)."),
    P("HV01-IV-1", "HV01", "Chloe", "Thornbury", "female", "1995-07-08",
      mother="HV01-III-2", father="HV01-III-1",
      contact_status="contactable", contact_status_date="2012-09-10"),
    P("HV01-IV-2", "HV01", "Owen", "Thornbury", "male", "2001-03-17",
      mother="HV01-III-2", father="HV01-III-1",
      contact_status="contactable", contact_status_date="2012-09-10",
      notes="Carrier since 2013; converted to HCM in early adulthood."),
    P("HV01-IV-3", "HV01", "Daniel", "Marsh", "male", "1992-05-30",
      mother="HV01-III-3", father="HV01-III-4",
      contact_status="contactable", contact_status_date="2013-03-18",
      notes="Non-carrier; discharged 2013."),
    P("HV01-IV-4", "HV01", "Sophie", "Marsh", "female", "1998-01-12",
      mother="HV01-III-3", father="HV01-III-4",
      contact_status="lost_to_follow_up", contact_status_date="2017-01-09",
      notes="Untested; moved away after 2014, letters returned."),
    P("HV01-IV-5", "HV01", "Ruby", "Thornbury", "female", "1996-10-02",
      father="HV01-III-5", contact_status="not_contacted", contact_status_date="2013-03-04",
      notes="Daughter of HV01-III-5 (who declined); at risk 1 in 4 while her father is untested. "
            "Not yet contacted."),
    # ---- HV02 Penhallow: MYH7 --------------------------------------------
    P("HV02-I-1", "HV02", "Jory", "Penhallow", "male", "1922", "deceased", "1994", placeholder=True),
    P("HV02-I-2", "HV02", "Tamsin", "Penhallow", "female", "1925", "deceased", "2008", placeholder=True),
    P("HV02-II-1", "HV02", "Trevor", "Penhallow", "male", "1950-02-09",
      mother="HV02-I-2", father="HV02-I-1",
      contact_status="contactable", contact_status_date="2014-07-21",
      notes="Carrier; septal hypertrophy found at first screening (2014). Treated hypertension."),
    P("HV02-II-2", "HV02", "Jenifer", "Penhallow", "female", "1952-08-30", notes="Married in."),
    P("HV02-III-1", "HV02", "Kerensa", "Treloar", "female", "1979-11-03",
      mother="HV02-II-2", father="HV02-II-1", proband=True,
      twin_of="HV02-III-2", twin_type="monozygotic",
      contact_status="contactable", contact_status_date="2014-03-10",
      diagnosis_age="34", diagnosis_place="Carnmoor District Hospital (referring centre)",
      notes="Index case, diagnosed 2014 aged 34 at the referring hospital."),
    P("HV02-III-2", "HV02", "Morwenna", "Okafor", "female", "1979-11-03",
      mother="HV02-II-2", father="HV02-II-1",
      twin_of="HV02-III-1", twin_type="monozygotic",
      contact_status="contactable", contact_status_date="2014-07-21",
      notes="Monozygotic co-twin of the proband; carrier with slowly thickening septum."),
    P("HV02-III-3", "HV02", "Jago", "Penhallow", "male", "1983-06-21",
      mother="HV02-II-2", father="HV02-II-1",
      contact_status="lost_to_follow_up", contact_status_date="2017-05-02",
      notes="Predictive test inconclusive (2015); did not return for a repeat sample."),
    P("HV02-III-4", "HV02", "Huw", "Treloar", "male", "1977-04-12", notes="Husband of the proband; married in."),
    P("HV02-III-5", "HV02", "Samuel", "Okafor", "male", "1978-10-05", notes="Husband of HV02-III-2; married in."),
    P("HV02-IV-1", "HV02", "Tomos", "Treloar", "male", "2008-05-20",
      mother="HV02-III-1", father="HV02-III-4",
      twin_of="HV02-IV-2", twin_type="dizygotic",
      contact_status="contactable", contact_status_date="2014-07-21"),
    P("HV02-IV-2", "HV02", "Elowen", "Treloar", "female", "2008-05-20",
      mother="HV02-III-1", father="HV02-III-4",
      twin_of="HV02-IV-1", twin_type="dizygotic",
      contact_status="contactable", contact_status_date="2014-07-21",
      notes="Non-carrier; discharged 2018."),
    P("HV02-IV-3", "HV02", "Amara", "Treloar", "female", "2011-09-14", adoption="in",
      mother="HV02-III-1", father="HV02-III-4",
      notes="Adopted in 2013 by HV02-III-1 and HV02-III-4; not a blood relative."),
    P("HV02-IV-4", "HV02", "Kit", "Okafor", "male", "2012-01-25",
      mother="HV02-III-2", father="HV02-III-5",
      contact_status="contactable", contact_status_date="2019-11-04",
      notes="At risk, untested: parents prefer to wait until he can take part in the decision."),
    # ---- HV03 Adeyemi: TNNI3 VUS -----------------------------------------
    P("HV03-I-1", "HV03", "Samuel", "Adeyemi", "male", "1925", "deceased", "1990", placeholder=True),
    P("HV03-I-2", "HV03", "Comfort", "Adeyemi", "female", "1928", "deceased", "2010", placeholder=True),
    P("HV03-II-1", "HV03", "Olusegun", "Adeyemi", "male", "1958-03-02",
      mother="HV03-I-2", father="HV03-I-1", proband=True,
      contact_status="contactable", contact_status_date="2016-06-13",
      notes="Index case, apical HCM diagnosed 2016."),
    P("HV03-II-2", "HV03", "Grace", "Adeyemi", "female", "1960-05-21", notes="Wife of the proband; married in."),
    P("HV03-II-3", "HV03", "Babatunde", "Adeyemi", "male", "1955-07-19",
      mother="HV03-I-2", father="HV03-I-1",
      contact_status="contactable", contact_status_date="2016-12-05",
      notes="Long-standing hypertension; apical thickening, borderline until 2023. Carries the family VUS."),
    P("HV03-II-4", "HV03", "Folake", "Bello", "female", "1961-12-01",
      mother="HV03-I-2", father="HV03-I-1",
      contact_status="declined", contact_status_date="2017-03-20",
      notes="Declined screening after family letter."),
    P("HV03-III-1", "HV03", "Tunde", "Adeyemi", "male", "1985-04-17",
      mother="HV03-II-2", father="HV03-II-1",
      contact_status="contactable", contact_status_date="2016-12-05"),
    P("HV03-III-2", "HV03", "Yetunde", "Reid", "female", "1988-09-09",
      mother="HV03-II-2", father="HV03-II-1",
      contact_status="contactable", contact_status_date="2016-12-05"),
    P("HV03-III-3", "HV03", "Callum", "Reid", "male", "1986-02-27", notes="Partner of HV03-III-2; married in."),
    P("HV03-III-4", "HV03", "Dayo", "Adeyemi", "male", "1983",
      father="HV03-II-3",
      contact_status="not_contacted", contact_status_date="2023-06-05",
      notes="Son of HV03-II-3; lives abroad, no address yet. Mother not recorded."),
    P("HV03-IV-1", "HV03", "Ayo", "Reid", "male", "2014-06-30",
      mother="HV03-III-2", father="HV03-III-3",
      contact_status="contactable", contact_status_date="2024-05-13"),
    P("HV03-IV-2", "HV03", "Temi", "Reid", "female", "2017-11-02",
      mother="HV03-III-2", father="HV03-III-3",
      contact_status="contactable", contact_status_date="2024-05-13",
      notes="At risk; first screening planned from about age 10."),
    # ---- HV04 Kowalczyk: TNNT2 VUS -> LP -----------------------------------
    P("HV04-I-1", "HV04", "Henryk", "Kowalczyk", "male", "1921", "deceased", "1985", placeholder=True),
    P("HV04-I-2", "HV04", "Irena", "Kowalczyk", "female", "1924", "deceased", "2001", placeholder=True),
    P("HV04-II-1", "HV04", "Zbigniew", "Kowalczyk", "male", "1946-05-03",
      mother="HV04-I-2", father="HV04-I-1",
      contact_status="contactable", contact_status_date="2014-03-24",
      notes="Carrier (2019) without hypertrophy in his seventies: incomplete penetrance."),
    P("HV04-II-2", "HV04", "Barbara", "Kowalczyk", "female", "1949-10-16",
      contact_status="contactable", contact_status_date="2014-03-24",
      notes="Married in; screened once in 2014 before the variant's origin was known."),
    P("HV04-III-1", "HV04", "Tomasz", "Kowalczyk", "male", "1975-01-30",
      mother="HV04-II-2", father="HV04-II-1", proband=True,
      contact_status="contactable", contact_status_date="2013-10-07",
      icd_date="2013-12-09",
      notes="Index case: exertional syncope 2013, ICD implanted after the baseline CMR."),
    P("HV04-III-2", "HV04", "Anna", "Kowalczyk", "female", "1976-07-04", notes="Wife of the proband; married in."),
    P("HV04-III-3", "HV04", "Ewa", "Nowicka", "female", "1978-08-19",
      mother="HV04-II-2", father="HV04-II-1",
      contact_status="contactable", contact_status_date="2014-03-24",
      notes="Non-carrier (2018); discharged 2019."),
    P("HV04-III-4", "HV04", "Piotr", "Kowalczyk", "male", "1981-12-11",
      mother="HV04-II-2", father="HV04-II-1",
      contact_status="contactable", contact_status_date="2014-03-24"),
    P("HV04-IV-1", "HV04", "Jakub", "Kowalczyk", "male", "2004-06-22",
      mother="HV04-III-2", father="HV04-III-1",
      contact_status="contactable", contact_status_date="2014-03-24"),
    P("HV04-IV-2", "HV04", "Zofia", "Kowalczyk", "female", "2009-03-05",
      mother="HV04-III-2", father="HV04-III-1",
      contact_status="contactable", contact_status_date="2019-03-11",
      notes="At risk, untested: family chose clinical screening until she can decide."),
    # ---- HV05 Brennan / Shaw: no variant found ---------------------------
    P("HV05-I-1", "HV05", "Patrick", "Brennan", "male", "1940", "deceased", "2009",
      death_cause="unknown", death_age="69",
      notes="Died 2009 aged about 69, 'heart failure', cause unclear; no post-mortem."),
    P("HV05-I-2", "HV05", "Maureen", "Brennan", "female", "1944-01-20",
      contact_status="contactable", contact_status_date="2017-08-14",
      notes="Treated hypertension."),
    P("HV05-II-1", "HV05", "Siobhan", "Shaw", "female", "1968-10-12",
      mother="HV05-I-2", father="HV05-I-1", proband=True,
      contact_status="contactable", contact_status_date="2017-05-15",
      notes="Index case, obstructive HCM diagnosed 2017; panel negative."),
    P("HV05-II-2", "HV05", "Andrew", "Shaw", "male", "1966-03-30", notes="Husband of the proband; married in."),
    P("HV05-II-3", "HV05", "Declan", "Brennan", "male", "1971-03-08",
      mother="HV05-I-2", father="HV05-I-1",
      contact_status="contactable", contact_status_date="2017-08-14"),
    P("HV05-III-1", "HV05", "Ciaran", "Shaw", "male", "1997-02-14",
      mother="HV05-II-1", father="HV05-II-2",
      contact_status="lost_to_follow_up", contact_status_date="2023-12-04",
      notes="Moved overseas 2022; did not attend 2023 recall."),
    P("HV05-III-2", "HV05", "Niamh", "Shaw", "female", "2001-12-03",
      mother="HV05-II-1", father="HV05-II-2",
      contact_status="contactable", contact_status_date="2017-08-14"),
]

# ---------------------------------------------------------------------------
# Variants (class history: one row per classification event)
# ---------------------------------------------------------------------------
VARIANTS = [
    dict(family="HV01", gene="MYBPC3", transcript="NM_000256.3", hgvs_c="c.1504C>T", hgvs_p="p.(Arg502Trp)",
         zygosity="heterozygous", acmg_class="pathogenic", classified_on="2012-06-18",
         reason="Recurrent missense in many unrelated HCM cases; segregates with disease; absent from population databases."),
    dict(family="HV02", gene="MYH7", transcript="NM_000257.4", hgvs_c="c.1208G>A", hgvs_p="p.(Arg403Gln)",
         zygosity="heterozygous", acmg_class="pathogenic", classified_on="2014-06-20",
         reason="Well-established missense in the myosin head; functional and segregation evidence."),
    dict(family="HV03", gene="TNNI3", transcript="NM_000363.5", hgvs_c="c.508C>T", hgvs_p="p.(Arg170Trp)",
         zygosity="heterozygous", acmg_class="uncertain_significance", classified_on="2016-10-24",
         reason="Novel missense, absent from population databases, in silico damaging (PM2_supporting, PP3); single affected carrier."),
    dict(family="HV04", gene="TNNT2", transcript="NM_001276345.2", hgvs_c="c.311G>A", hgvs_p="p.(Arg104His)",
         zygosity="heterozygous", acmg_class="uncertain_significance", classified_on="2014-02-10",
         reason="Rare missense (PM2_supporting, PP3); no segregation or functional data."),
    dict(family="HV04", gene="TNNT2", transcript="NM_001276345.2", hgvs_c="c.311G>A", hgvs_p="p.(Arg104His)",
         zygosity="heterozygous", acmg_class="likely_pathogenic", classified_on="2018-09-05",
         reason=("Laboratory re-review: further unrelated affected carriers reported and functional study "
                 "published (PS3_moderate, PS4_moderate, PM2_supporting, PP3).")),
]


def vkey(v: dict) -> str:
    return f"{v['transcript']}:{v['hgvs_c']}"


V_HV01, V_HV02, V_HV03, V_HV04 = (vkey(VARIANTS[i]) for i in (0, 1, 2, 3))

# ---------------------------------------------------------------------------
# Genetic results
# ---------------------------------------------------------------------------
GENETIC_RESULTS = [
    # person, test_date, test_type, variant, result, report_reference
    ("HV01-III-1", "2012-06-18", "diagnostic_panel", V_HV01, "carrier", "WRGL-12-04471"),
    ("HV01-II-2", "2012-10-15", "predictive", V_HV01, "non_carrier", "WRGL-12-07703"),  # the variant is paternal
    ("HV01-III-3", "2012-10-15", "predictive", V_HV01, "carrier", "WRGL-12-07702"),
    ("HV01-IV-3", "2013-02-25", "predictive", V_HV01, "non_carrier", "WRGL-13-01318"),
    ("HV01-IV-1", "2013-08-20", "predictive", V_HV01, "carrier", "WRGL-13-05540"),
    ("HV01-IV-2", "2013-08-20", "predictive", V_HV01, "carrier", "WRGL-13-05541"),
    ("HV02-III-1", "2014-06-20", "diagnostic_panel", V_HV02, "carrier", "WRGL-14-04102"),
    ("HV02-II-1", "2014-09-15", "predictive", V_HV02, "carrier", "WRGL-14-06233"),
    ("HV02-III-2", "2014-09-15", "predictive", V_HV02, "carrier", "WRGL-14-06234"),
    ("HV02-III-3", "2015-03-02", "predictive", V_HV02, "inconclusive", "WRGL-15-01587"),
    ("HV02-IV-1", "2018-07-16", "predictive", V_HV02, "carrier", "WRGL-18-05019"),
    ("HV02-IV-2", "2018-07-16", "predictive", V_HV02, "non_carrier", "WRGL-18-05020"),
    ("HV03-II-1", "2016-10-24", "diagnostic_panel", V_HV03, "carrier", "WRGL-16-07755"),
    ("HV03-II-3", "2019-06-10", "predictive", V_HV03, "carrier", "WRGL-19-04310"),  # segregation test
    ("HV04-III-1", "2014-02-10", "diagnostic_panel", V_HV04, "carrier", "WRGL-14-00961"),
    ("HV04-III-3", "2018-12-03", "predictive", V_HV04, "non_carrier", "WRGL-18-08894"),
    ("HV04-III-4", "2019-01-14", "predictive", V_HV04, "carrier", "WRGL-19-00207"),
    ("HV04-II-1", "2019-03-04", "predictive", V_HV04, "carrier", "WRGL-19-01422"),
    ("HV04-IV-1", "2019-06-10", "predictive", V_HV04, "carrier", "WRGL-19-04311"),
    ("HV05-II-1", "2017-09-28", "diagnostic_panel", "", "no_variant_found", "WRGL-17-06688"),
]
# Predictive tests of a variant that was not P/LP at the time (segregation in an
# affected or borderline relative, ESC 2023 IIa C [V]):
SEGREGATION_TESTS = {("HV03-II-3", "2019-06-10")}


# ---------------------------------------------------------------------------
# Segmental strain (hand-written, invented)
# ---------------------------------------------------------------------------
# Peak longitudinal strain in %, AHA 17-segment numbering (Cerqueira 2002, as in
# tracker/engines/segments.py): basal 1-6, mid 7-12 (anterior, anteroseptal,
# inferoseptal, inferior, inferolateral, anterolateral), apical 13-16 (anterior,
# septal, inferior, lateral), apex 17.  Invented to look like asymmetric septal
# hypertrophy: the hypertrophied basal and mid septum (2, 3, 8, 9) shortens
# least (-8 to -13 %), the lateral wall and the apex most (-17 to -21 %), as is
# usual in septal HCM (common practice, no single source).  The average of the
# 17 values lies within SEGMENT_GLS_AGREEMENT of the study's GLS (demo choice).
# Catalogue entry range of ls_segNN: -50 to 30 % (migration 0002).
SEGMENT_STRAIN: dict[tuple[str, str], tuple[float, ...]] = {
    # (person, visit month): values of segments 1..17
    ("HV01-III-1", "2025-09"): (-15.8, -8.4, -9.1, -16.2, -17.9, -18.6,
                                -16.9, -11.3, -12.0, -17.4, -18.8, -19.3,
                                -19.6, -17.2, -19.9, -20.4, -20.8),
    ("HV01-III-1", "2026-09"): (-16.3, -8.9, -9.6, -16.8, -18.4, -18.9,
                                -17.4, -11.9, -12.6, -17.9, -19.1, -19.7,
                                -20.1, -17.8, -20.3, -20.9, -21.4),
}  # fmt: skip
SEGMENT_GLS_AGREEMENT = 1.5  # % (demo choice: segment average and GLS of one study agree closely)
SEGMENT_RANGE = (-50.0, 30.0)  # % plausible entry range of ls_segNN (migration 0002)


def segment_rows(study: "Study") -> list[tuple[str, float]]:
    """(code, value) of the hand-written segmental strain of an echo study, or []."""
    values = SEGMENT_STRAIN.get((study.person, study.day.strftime("%Y-%m"))) if study.modality == "echo" else None
    return [] if values is None else [(f"ls_seg{i:02d}", v) for i, v in enumerate(values, start=1)]


def check_segment_strain(studies: list["Study"]) -> None:
    """Each SEGMENT_STRAIN entry belongs to exactly one echo, has 17 values in range, a septum that
    shortens less than the lateral wall, and an average close to that echo's GLS."""
    for (person, month), values in SEGMENT_STRAIN.items():
        echos = [s for s in studies if s.person == person and s.modality == "echo"
                 and s.day.strftime("%Y-%m") == month]  # fmt: skip
        assert len(echos) == 1, f"segment strain {person} {month}: {len(echos)} echo studies"
        assert len(values) == 17 and all(SEGMENT_RANGE[0] <= v <= SEGMENT_RANGE[1] for v in values)
        septum, lateral = values[1] + values[2], values[4] + values[5]  # segments 2+3 vs 5+6
        assert septum > lateral, f"segment strain {person} {month}: septum not less negative"
        gls = echos[0].values["gls"]
        assert abs(sum(values) / 17 - gls) <= SEGMENT_GLS_AGREEMENT, f"segment strain {person} {month}"


# ---------------------------------------------------------------------------
# Clinical profiles and visits
# ---------------------------------------------------------------------------
@dataclass
class Profile:
    """Clinical story of one seen person.

    visits: tokens 'YYYY-MM:KIND' (or 'YYYY-MM-DD:KIND'); KIND is
      E  echo + ECG, EM echo + ECG then CMR 2-7 weeks later, M CMR only,
      G  ECG only, K clinic visit only.
    disease: knots (decimal year, mm) of the wall-thickness increment above the
      person's normal; hand_mwt / hand_cmr: measured maximal wall thickness in
      mm by visit month, overriding the model.
    """

    visits: list[str]
    height: float | None = None  # adult height, cm
    weight: float | None = None  # weight at the first visit (adults), kg
    hf: float = 1.0  # child height factor on the growth medians
    wf: float = 1.0  # child weight factor
    wdrift: float = 0.3  # kg per year
    offset: float = 0.0  # mm added to the normal wall thickness
    disease: list[tuple[float, float]] = field(default_factory=list)
    pattern: str = "septal"  # or "apical"
    carrier: bool = False
    lvot: float = 0.0  # mean rest gradient above baseline, mmHg
    provoked: float | None = None  # mean provoked gradient, mmHg
    lge: list[tuple[float, float]] = field(default_factory=list)
    hand_mwt: dict[str, float] = field(default_factory=dict)
    hand_cmr: dict[str, float] = field(default_factory=dict)
    hand_lge: dict[str, float] = field(default_factory=dict)
    symptoms: list[tuple[str, str]] = field(default_factory=list)  # (from 'YYYY-MM', text)
    athlete: tuple[str, str] | None = None  # (from, to) 'YYYY-MM', inclusive
    pregnant: set[str] = field(default_factory=set)  # visit months
    hypertension_from: str | None = None
    af_from: str | None = None  # atrial fibrillation: no mitral A wave from then
    status_override: dict[str, str] = field(default_factory=dict)
    notes: dict[str, str] = field(default_factory=dict)
    echo_site: str = SITE_ECHO


PROFILES: dict[str, Profile] = {
    # ---- HV01 ---------------------------------------------------------------
    "HV01-III-1": Profile(
        visits=["2012-04:EM", "2012-07:K", "2013-04:E", "2014-05:E", "2015-05:E", "2016-06:EM", "2017-06:E",
                "2018-06:E", "2019-07:E", "2020-09:E", "2021-08:EM", "2022-08:E", "2023-09:E", "2024-09:E",
                "2025-09:E", "2026-09:E"],
        height=178, weight=88, wdrift=0.3, offset=0.4, disease=[(2012.0, 13.0), (2027.0, 12.3)],
        lvot=42, provoked=78, lge=[(2012.0, 3.5), (2027.0, 6.0)], af_from="2024-09",
        symptoms=[("2012-04", "exertional chest tightness and palpitations"),
                  ("2016-06", "breathless on hills (NYHA II)"),
                  ("2024-09", "breathless on hills (NYHA II); paroxysmal atrial fibrillation")],
        notes={"2012-04": "Referred after palpitations; asymmetric septal hypertrophy with LVOT obstruction.",
               "2012-07": "Panel result: MYBPC3 pathogenic variant. Cascade testing offered to first-degree relatives.",
               "2024-09": "Paroxysmal AF on Holter; anticoagulation started."}),
    "HV01-III-3": Profile(
        visits=["2012-11:E", "2014-11:E", "2016-11:E", "2018-12:EM", "2020-12:E", "2022-11:E", "2024-11:E",
                "2026-10:E"],
        height=163, weight=68, wdrift=0.25, offset=0.9, carrier=True, disease=[(2012.0, 0.4), (2027.0, 1.4)],
        echo_site=SITE_ECHO_OUTREACH),
    "HV01-III-5": Profile(visits=["2013-01:E"], height=180, weight=92, offset=0.2,
                          notes={"2013-01": "Normal screening echo; declined genetic testing."}),
    "HV01-IV-1": Profile(
        visits=["2012-11:E", "2013-09:K", "2015-09:E", "2017-10:E", "2019-10:E", "2021-10:EM", "2023-10:E",
                "2024-03:E", "2025-11:E"],
        hf=1.0, wf=1.02, wdrift=0.4, carrier=True, disease=[(2012.0, 0.0), (2027.0, 0.6)],
        pregnant={"2024-03"},
        notes={"2013-09": "Predictive result: carrier. Counselled; 1-3-yearly screening.",
               "2024-03": "22 weeks pregnant; pre-delivery review, no LVH, no LVOT obstruction."}),
    "HV01-IV-2": Profile(
        visits=["2012-11:E", "2013-09:K", "2013-11:E", "2014-11:E", "2015-11:E", "2016-11:E", "2017-11:E",
                "2018-11:E", "2019-05:G", "2019-11:E", "2020-06:E", "2020-12:E", "2021-03:M", "2021-04:K", "2021-06:E",
                "2022-06:EM", "2023-06:E", "2024-06:E", "2025-06:E", "2026-06:E"],
        hf=1.025, wf=0.99, wdrift=0.4, carrier=True, echo_site=SITE_ECHO_CHILD,
        hand_mwt={"2012-11": 6.8, "2013-11": 7.1, "2014-11": 7.5, "2015-11": 8.0, "2016-11": 8.4,
                  "2017-11": 8.8, "2018-11": 9.3, "2019-11": 10.9, "2020-06": 12.0, "2020-12": 13.2,
                  "2021-06": 14.3, "2022-06": 15.2, "2023-06": 15.8, "2024-06": 16.0, "2025-06": 16.4,
                  "2026-06": 16.3},
        hand_cmr={"2021-03": 13.8, "2022-06": 14.4}, hand_lge={"2021-03": 1.2, "2022-06": 1.8},
        athlete=("2015-11", "2020-12"),
        symptoms=[("2023-06", "occasional palpitations")],
        status_override={"2020-12": "uncertain"},
        notes={"2013-09": "Predictive result: carrier. Annual review through adolescence.",
               "2015-11": "Plays academy football (competitive); annual phenotype check.",
               "2020-06": "Septum 12.0 mm, up 2.7 mm in 18 months; review in 6 months.",
               "2020-12": "13.2 mm: grey zone in a competitive athlete; CMR requested.",
               "2021-04": "CMR 13.8 mm with patchy LGE: HCM confirmed (relative >= 13 mm). Stopped competitive football."}),
    "HV01-IV-3": Profile(visits=["2012-11:E", "2013-03:K"], height=182, weight=78, offset=-0.3,
                         notes={"2013-03": ("Predictive result: non-carrier. Discharged with advice to return "
                                            "for symptoms or new family data.")}),
    "HV01-IV-4": Profile(visits=["2012-11:E", "2014-11:E"], hf=0.98, wf=1.03, offset=0.0,
                         echo_site=SITE_ECHO_CHILD),
    # ---- HV02 ---------------------------------------------------------------
    "HV02-III-1": Profile(
        visits=["2014-03:EM", "2014-07:K", "2015-03:E", "2016-03:E", "2017-04:EM", "2018-04:E", "2019-04:E",
                "2020-10:E", "2021-05:E", "2022-05:EM", "2023-05:E", "2024-06:E", "2025-06:E", "2026-06:E"],
        height=166, weight=64, wdrift=0.35, offset=0.3, disease=[(2014.0, 10.8), (2027.0, 11.3)],
        lvot=8, lge=[(2014.0, 5.5), (2027.0, 8.5)],
        symptoms=[("2014-03", "exertional breathlessness; one episode of presyncope"),
                  ("2015-03", "mild exertional breathlessness")],
        notes={"2014-03": "Diagnosed aged 34 after presyncope; septal HCM 19 mm, LGE on CMR.",
               "2014-07": "Panel result: MYH7 pathogenic variant. Cascade testing offered; co-twin and parents first."}),
    "HV02-III-2": Profile(
        visits=["2014-10:E", "2015-10:E", "2016-10:G", "2017-10:E", "2019-10:EM", "2021-10:E", "2022-10:E", "2023-02:M",
                "2023-03:K", "2023-10:E", "2024-10:E", "2025-10:E", "2026-10:E"],
        height=166, weight=66, wdrift=0.35, carrier=True,
        hand_mwt={"2014-10": 9.4, "2015-10": 9.8, "2017-10": 10.3, "2019-10": 10.9, "2021-10": 11.6,
                  "2022-10": 12.4, "2023-10": 12.3, "2024-10": 12.6, "2025-10": 12.5, "2026-10": 12.8},
        hand_cmr={"2019-10": 10.2, "2023-02": 11.8}, hand_lge={"2019-10": 0.0, "2023-02": 0.0},
        notes={"2022-10": "Septum 12.4 mm, slowly rising; borderline, below the 13 mm relative threshold. CMR requested.",
               "2023-03": "CMR 11.8 mm, no LGE. Stays under annual review."}),
    "HV02-II-1": Profile(
        visits=["2014-10:EM", "2016-10:E", "2018-10:E", "2020-11:E", "2022-11:EM", "2024-11:E", "2026-11:E"],
        height=175, weight=90, wdrift=0.1, offset=0.6, carrier=True, disease=[(2014.0, 7.0), (2027.0, 7.6)],
        lvot=10, lge=[(2014.0, 1.5), (2027.0, 2.5)], hypertension_from="2014-10",
        symptoms=[("2020-11", "mild exertional breathlessness")],
        notes={"2014-10": ("Carrier with asymmetric septal hypertrophy 16-17 mm (septal/posterior ratio > 1.5); "
                           "HCM despite treated hypertension.")}),
    "HV02-III-3": Profile(visits=["2015-02:E"], height=181, weight=84, offset=0.1,
                          notes={"2015-02": "Normal echo. Predictive sample taken."}),
    "HV02-IV-1": Profile(
        visits=["2014-10:E", "2016-10:E", "2018-06:E", "2018-08:K", "2019-08:E", "2020-08:E", "2021-08:E",
                "2022-08:E", "2023-08:E", "2024-08:EM", "2025-08:E", "2026-08:E"],
        hf=1.01, wf=1.0, carrier=True, offset=0.0, disease=[(2014.0, 0.0), (2027.0, 0.4)],
        echo_site=SITE_ECHO_CHILD,
        notes={"2018-08": "Predictive result: carrier. Annual review."}),
    "HV02-IV-2": Profile(
        visits=["2014-10:E", "2016-10:E", "2018-06:E", "2018-08:K"], hf=0.99, wf=0.97, offset=-0.2,
        echo_site=SITE_ECHO_CHILD,
        notes={"2018-08": "Predictive result: non-carrier. Discharged."}),
    "HV02-IV-4": Profile(
        visits=["2020-02:E", "2022-03:E", "2024-03:E", "2026-03:E"], hf=1.0, wf=1.05, offset=0.1,
        echo_site=SITE_ECHO_CHILD),
    # ---- HV03 ---------------------------------------------------------------
    "HV03-II-1": Profile(
        visits=["2016-06:EM", "2016-11:K", "2017-06:E", "2018-06:E", "2019-07:EM", "2020-07:E", "2021-07:E",
                "2022-08:E", "2023-08:EM", "2024-08:E", "2025-09:E", "2026-09:E"],
        height=176, weight=86, wdrift=0.2, offset=0.3, pattern="apical", disease=[(2016.0, 10.2), (2027.0, 10.6)],
        lvot=2, lge=[(2016.0, 2.0), (2027.0, 3.5)],
        symptoms=[("2016-06", "atypical chest pain")],
        notes={"2016-06": "Giant negative T waves on ECG; apical HCM on echo and CMR.",
               "2016-11": ("Panel result: TNNI3 variant of uncertain significance. No predictive testing; "
                           "relatives offered clinical screening.")}),
    "HV03-II-3": Profile(
        visits=["2017-02:E", "2019-05:EM", "2019-07:K", "2021-05:E", "2023-05:EM", "2023-07:K", "2024-05:E",
                "2025-05:E", "2026-05:E"],
        height=174, weight=95, wdrift=0.1, pattern="apical", carrier=True, hypertension_from="2017-02",
        hand_mwt={"2017-02": 13.4, "2019-05": 13.9, "2021-05": 14.3, "2023-05": 15.1, "2024-05": 15.4,
                  "2025-05": 15.2, "2026-05": 15.6},
        hand_cmr={"2019-05": 14.0, "2023-05": 15.3}, hand_lge={"2019-05": 0.0, "2023-05": 2.1},
        status_override={"2017-02": "uncertain", "2019-05": "uncertain", "2019-07": "uncertain",
                         "2021-05": "uncertain"},
        notes={"2017-02": "Apical thickening 13-14 mm with long-standing hypertension: uncertain.",
               "2019-07": "Segregation test: carries the family VUS. Phenotype still equivocal.",
               "2023-07": ("CMR apical 15.3 mm with LGE, pattern matches the proband: affected. "
                           "Second affected carrier: variant re-review requested.")}),
    "HV03-III-1": Profile(visits=["2017-01:E", "2020-01:E", "2023-02:E", "2026-02:E"], height=183, weight=85,
                          offset=-0.1, echo_site=SITE_ECHO_OUTREACH),
    "HV03-III-2": Profile(visits=["2017-01:E", "2019-03:E", "2022-03:E", "2025-03:E"], height=168, weight=72,
                          offset=0.0, echo_site=SITE_ECHO_OUTREACH),
    "HV03-IV-1": Profile(visits=["2024-07:E", "2026-07:E"], hf=1.02, wf=1.03, offset=0.0, echo_site=SITE_ECHO_CHILD),
    # ---- HV04 ---------------------------------------------------------------
    "HV04-III-1": Profile(
        visits=["2013-10:EM", "2014-03:K", "2014-10:E", "2015-10:E", "2016-10:E", "2017-10:E", "2018-10:E",
                "2019-10:E", "2020-11:E", "2021-11:E", "2022-11:E", "2023-11:E", "2024-11:E", "2025-11:E"],
        height=185, weight=92, wdrift=0.25, offset=0.0, disease=[(2013.5, 10.2), (2027.0, 9.9)],
        lvot=4, lge=[(2013.5, 9.0), (2027.0, 9.0)],
        symptoms=[("2013-10", "exertional syncope"), ("2014-10", "")],
        notes={"2013-10": "Exertional syncope aged 38; septal HCM 18 mm, extensive LGE. ICD implanted after CMR.",
               "2014-03": "Panel result: TNNT2 variant of uncertain significance. Relatives offered clinical screening only.",
               "2018-10": "Variant reclassified likely pathogenic (laboratory re-review, 2018-09-05). Cascade testing offered."}),
    "HV04-II-1": Profile(
        visits=["2014-05:E", "2017-05:E", "2019-04:EM", "2022-04:E", "2025-04:E"],
        height=172, weight=84, wdrift=0.0, offset=0.6, carrier=True, disease=[(2014.0, 1.0), (2027.0, 1.3)],
        echo_site=SITE_ECHO_OUTREACH,
        notes={"2019-04": "Carrier aged 72 without hypertrophy (CMR normal thickness, no LGE)."}),
    "HV04-II-2": Profile(visits=["2014-05:E"], height=160, weight=70, offset=0.2, echo_site=SITE_ECHO_OUTREACH),
    "HV04-III-3": Profile(
        visits=["2014-04:E", "2016-04:E", "2018-04:E", "2019-01:K"], height=168, weight=63, offset=-0.2,
        notes={"2019-01": "Predictive result: non-carrier. Discharged with advice."}),
    "HV04-III-4": Profile(
        visits=["2014-04:E", "2016-04:E", "2018-04:E", "2019-02:EM", "2020-02:E", "2021-08:G", "2022-02:E", "2024-02:E",
                "2026-02:EM"],
        height=183, weight=86, wdrift=0.3, offset=0.7, carrier=True, disease=[(2014.0, 0.8), (2027.0, 1.6)],
        symptoms=[("2022-02", "occasional palpitations"), ("2024-02", "")],
        notes={"2019-02": "Predictive result: carrier. 1-3-yearly review.",
               "2022-02": "Palpitations: 48-h Holter arranged (ectopy only)."}),
    "HV04-IV-1": Profile(
        visits=["2014-10:E", "2016-10:E", "2017-10:G", "2018-10:E", "2019-07:K", "2020-07:E", "2021-07:E", "2022-07:E",
                "2023-07:E", "2024-07:EM", "2025-07:E", "2026-07:E"],
        hf=1.03, wf=0.98, carrier=True, offset=0.1, disease=[(2014.0, 0.0), (2027.0, 0.7)],
        echo_site=SITE_ECHO_CHILD,
        notes={"2019-07": "Predictive result (aged 15): carrier. Annual review."}),
    "HV04-IV-2": Profile(visits=["2019-04:E", "2021-04:E", "2023-04:E", "2025-04:E"], hf=1.0, wf=1.0, offset=-0.1,
                         echo_site=SITE_ECHO_CHILD),
    # ---- HV05 ---------------------------------------------------------------
    "HV05-II-1": Profile(
        visits=["2017-05:EM", "2017-11:K", "2018-05:E", "2019-05:E", "2020-06:E", "2021-06:E", "2022-06:EM",
                "2023-06:E", "2024-07:E", "2025-07:E", "2026-07:E"],
        height=165, weight=74, wdrift=0.3, offset=0.2, disease=[(2017.0, 12.0), (2027.0, 12.4)],
        lvot=34, provoked=68, lge=[(2017.0, 2.5), (2027.0, 4.0)],
        symptoms=[("2017-05", "exertional breathlessness"), ("2019-05", "mild exertional breathlessness (NYHA II)")],
        notes={"2017-05": "Murmur at a routine check; obstructive septal HCM 20 mm.",
               "2017-11": "Panel result: no variant found. First-degree relatives on clinical screening."}),
    "HV05-I-2": Profile(visits=["2018-02:E", "2023-02:E"], height=158, weight=71, wdrift=-0.2, offset=1.6,
                        hypertension_from="2018-02", echo_site=SITE_ECHO_OUTREACH,
                        notes={"2018-02": "Mild concentric thickening consistent with treated hypertension."}),
    "HV05-II-3": Profile(visits=["2017-09:E", "2020-09:E", "2023-10:E", "2026-10:E"], height=179, weight=88,
                         offset=0.3, echo_site=SITE_ECHO_OUTREACH),
    "HV05-III-1": Profile(visits=["2017-09:E", "2020-09:E"], height=180, weight=76, offset=-0.1),
    "HV05-III-2": Profile(visits=["2017-09:E", "2019-09:E", "2021-10:E", "2023-10:E", "2025-10:E"],
                          hf=1.0, wf=1.0, offset=0.0, echo_site=SITE_ECHO_CHILD),
}

# People who, by the end of the story, must be affected / ever uncertain.
EXPECTED_AFFECTED = {"HV01-III-1", "HV01-IV-2", "HV02-III-1", "HV02-II-1", "HV03-II-1", "HV03-II-3",
                     "HV04-III-1", "HV05-II-1"}
EXPECTED_UNCERTAIN = {"HV01-IV-2", "HV02-III-2", "HV03-II-3"}


# ---------------------------------------------------------------------------
# Model
# ---------------------------------------------------------------------------
PEOPLE_BY_CODE = {p.person: p for p in PEOPLE}


def body_size(person: Person, prof: Profile, day: dt.date, first_visit: dt.date,
              pregnant: bool) -> tuple[float, float]:
    """Height cm and weight kg at a study, rounded to 0.1."""
    age = age_years(person.birth_date, day)
    if prof.height is not None:  # adult throughout the story
        height = float(prof.height)
        years = (day - first_visit).days / 365.2425
        weight = prof.weight + prof.wdrift * years
    else:
        heights = BOYS_H if person.sex_at_birth == "male" else GIRLS_H
        weights = BOYS_W if person.sex_at_birth == "male" else GIRLS_W
        ages = list(range(len(heights)))
        height = float(np.interp(min(age, 18.0), ages, heights)) * prof.hf
        weight = float(np.interp(min(age, 18.0), ages, weights)) * prof.wf
        if age > 18.0:
            weight += prof.wdrift * (age - 18.0)
    if pregnant:
        weight += 8.5
    height += float(RNG.normal(0, 0.4))
    weight += float(RNG.normal(0, 0.8))
    return round(height, 1), round(weight, 1)


def normal_wall_mm(bsa: float, age: float, sex: str) -> float:
    """PHN mean IVSd (mm) for the BSA, raised gently through adolescence into adulthood."""
    alpha, mean, _ = PHN["ivsd"]
    adult_fraction = min(max((age - 14.0) / 11.0, 0.0), 1.0)
    return 10.0 * mean * bsa**alpha * (1.0 + ADULT_WALL_GAIN[sex] * adult_fraction)


def knot_value(knots: list[tuple[float, float]], day: dt.date) -> float:
    return interp(knots, decimal_year(day)) if knots else 0.0


def e_prime_septal_mean(age: float) -> float:
    return interp(E_PRIME_SEPTAL_BY_AGE, age)


def clip(value: float, lo: float, hi: float) -> float:
    return min(max(value, lo), hi)


def echo_values(person: Person, prof: Profile, day: dt.date, month: str,
                height: float, weight: float) -> dict[str, float]:
    sex = person.sex_at_birth
    age = age_years(person.birth_date, day)
    bsa = haycock_bsa(height, weight)
    base = normal_wall_mm(bsa, age, sex) + prof.offset
    if month in prof.hand_mwt:
        mwt = prof.hand_mwt[month]
        incr = max(0.0, mwt - base)
        RNG.normal()  # keep the draw sequence the same length
    else:
        incr = knot_value(prof.disease, day)
        mwt = base + incr + float(RNG.normal(0, MWT_NOISE_SD_MM))
    sev = clip(incr / 10.0, 0.0, 1.0)
    carrier_effect = 1.0 if prof.carrier and sev < 0.5 else 0.0
    out: dict[str, float] = {}
    posterior = 0.97 * (base - prof.offset) + 0.3 * prof.offset + 0.12 * incr + float(RNG.normal(0, 0.4))
    if prof.pattern == "apical":
        septum = base + 0.25 * incr + float(RNG.normal(0, 0.4))
    else:
        septum = mwt - abs(float(RNG.normal(0.15, 0.2)))
    septum = min(septum, mwt)
    posterior = min(posterior, mwt, septum + 1.0)
    out["mwt_echo"] = mwt
    out["ivsd"] = septum
    out["lvpwd"] = posterior
    lvidd = 10.0 * PHN["lvidd"][1] * bsa ** PHN["lvidd"][0] * (0.94 if sex == "female" else 1.0)
    lvidd = lvidd - 0.55 * incr + float(RNG.normal(0, 1.5))
    out["lvidd"] = lvidd
    out["lvids"] = lvidd * (0.63 - 0.08 * sev) + float(RNG.normal(0, 1.0))
    out["lvef_echo"] = clip(63.0 + 8.0 * sev + 1.5 * carrier_effect + float(RNG.normal(0, 3.0)), 52, 78)
    la = 27.0 * bsa**0.5 + 10.0 * sev + 0.05 * max(age - 40.0, 0.0) + float(RNG.normal(0, 1.5))
    out["la_diam"] = la
    lavi = 22.0 + 16.0 * sev + 0.06 * max(age - 40.0, 0.0) + float(RNG.normal(0, 2.5))
    if day >= dt.date(2014, 1, 1) and age >= 10:
        out["lavi"] = lavi
    rest = 4.0 + prof.lvot * (1.0 if sev > 0.5 else 0.0) + float(RNG.normal(0, 2.0 + 0.15 * prof.lvot))
    out["lvot_rest"] = clip(rest, 2.0, 95.0)
    provoked = None
    if prof.provoked is not None:
        provoked = prof.provoked + float(RNG.normal(0, 8.0))
        out["lvot_valsalva"] = clip(max(provoked, out["lvot_rest"] + 10), 0, 98)
    else:
        RNG.normal()
    if age < 18:
        e_vel, a_vel = 95.0, 50.0
    else:
        e_vel = max(85.0 - 0.4 * (age - 25.0), 64.0)
        a_vel = min(42.0 + 0.6 * max(age - 25.0, 0.0), 85.0)
    out["mv_e"] = clip(e_vel - 8.0 * sev + float(RNG.normal(0, 6.0)), 46.0, 125.0)
    a_val = a_vel + 5.0 * sev + float(RNG.normal(0, 5.0))
    if not (prof.af_from and month >= prof.af_from):
        out["mv_a"] = a_val
    sept = e_prime_septal_mean(age) * (1.0 - 0.42 * sev) * (0.9 if carrier_effect else 1.0)
    out["e_prime_septal"] = clip(sept + float(RNG.normal(0, 0.8)), 5.1, 19.5)
    lateral = clip(sept * LATERAL_OVER_SEPTAL + float(RNG.normal(0, 1.0)), 6.0, 19.8)
    out["e_prime_lateral"] = max(lateral, min(out["e_prime_septal"] + 0.6, 19.9))
    tr = 2.05 + 0.35 * sev + 0.006 * max(age - 40.0, 0.0) + float(RNG.normal(0, 0.12))
    if age >= 18 and RNG.random() < 0.55:
        out["tr_vmax"] = clip(tr, 1.6, 2.7)
    gls = -(21.0 - 5.0 * sev - 0.8 * carrier_effect) + float(RNG.normal(0, 0.8))
    if day >= dt.date(2015, 1, 1):
        out["gls"] = clip(gls, -23.8, -14.2)
    return out


def cmr_values(person: Person, prof: Profile, day: dt.date, month: str,
               height: float, weight: float) -> dict[str, float]:
    sex = person.sex_at_birth
    age = age_years(person.birth_date, day)
    bsa = haycock_bsa(height, weight)
    base = normal_wall_mm(bsa, age, sex) + prof.offset
    if month in prof.hand_cmr:
        mwt = prof.hand_cmr[month]
        incr = max(0.0, mwt + ECHO_MINUS_CMR_MM - base)
        RNG.normal()
    else:
        incr = knot_value(prof.disease, day)
        mwt = base + incr - ECHO_MINUS_CMR_MM + float(RNG.normal(0, 0.4))
    sev = clip(incr / 10.0, 0.0, 1.0)
    carrier_effect = 1.0 if prof.carrier and sev < 0.5 else 0.0
    out = {"mwt_cmr": mwt}
    out["lvmi_cmr"] = CMR_LVMI_NORMAL[sex] + 4.5 * incr + float(RNG.normal(0, 4.0))
    out["lvef_cmr"] = clip(61.0 + (1.5 if sex == "female" else 0.0) + 8.0 * sev + 2.0 * carrier_effect
                           + float(RNG.normal(0, 2.5)), 52, 78)
    if month in prof.hand_lge:
        lge = prof.hand_lge[month]
        RNG.normal()
    elif prof.lge:
        lge = max(knot_value(prof.lge, day) + float(RNG.normal(0, 0.6)), 0.5)
    else:
        lge = 0.0
        RNG.normal()
    out["lge_pct"] = lge
    ecv = ECV_NORMAL[sex] + 4.5 * sev + 1.0 * carrier_effect + float(RNG.normal(0, 1.0))
    if day >= dt.date(2015, 1, 1):  # T1 mapping only from 2015 in this invented unit
        out["ecv"] = ecv
    return out


# ---------------------------------------------------------------------------
# Build rows
# ---------------------------------------------------------------------------
@dataclass
class Study:
    person: str
    day: dt.date
    modality: str
    site: str
    height: float | None
    weight: float | None
    values: dict[str, float]


def symptoms_at(prof: Profile, month: str) -> str:
    text = ""
    for start, value in prof.symptoms:
        if month >= start:
            text = value
    return text


def child_z_max(study: Study, age: float) -> float | None:
    if age >= 18 or study.modality != "echo":
        return None
    bsa = haycock_bsa(study.height, study.weight)
    return max(phn_z("ivsd", study.values["mwt_echo"], bsa), phn_z("ivsd", study.values["ivsd"], bsa))


def status_from(person: Person, prof: Profile, month: str, last_mwt: float | None,
                last_child_z: float | None) -> str:
    if person.proband:
        return "affected"
    if month in prof.status_override:
        return prof.status_override[month]
    if last_child_z is not None:
        return "affected" if last_child_z > CHILD_Z else "unaffected"
    if last_mwt is None:
        return "unaffected"
    if last_mwt >= RELATIVE_MWT_MM:
        return "affected"
    if last_mwt >= BORDERLINE_MWT_MM:
        return "uncertain"
    return "unaffected"


def build() -> tuple[list[Study], list[dict]]:
    studies: list[Study] = []
    assessments: list[dict] = []
    for person in PEOPLE:  # fixed order keeps the random stream deterministic
        prof = PROFILES.get(person.person)
        if prof is None:
            continue
        first_visit = None
        last_mwt: float | None = None
        last_child_z: float | None = None
        ever_affected = False
        previous = None
        for token in prof.visits:
            month, kind = token.split(":")
            day = weekday_in_month(month)
            if previous is not None and day <= previous:
                raise AssertionError(f"{person.person}: visits out of order at {token}")
            previous = day
            first_visit = first_visit or day
            age = age_years(person.birth_date, day)
            pregnant = month in prof.pregnant
            if kind in ("E", "EM"):
                h, w = body_size(person, prof, day, first_visit, pregnant)
                values = echo_values(person, prof, day, month, h, w)
                site = prof.echo_site if age < 16 or prof.echo_site != SITE_ECHO_CHILD else SITE_ECHO
                echo = Study(person.person, day, "echo", site, h, w, values)
                studies.append(echo)
                studies.append(Study(person.person, day, "ecg", SITE_ECG, None, None, {}))
                last_mwt = values["mwt_echo"]
                last_child_z = child_z_max(echo, age)
            if kind in ("EM", "M"):
                cmr_day = working_day_after(day, 14, 50) if kind == "EM" else day
                h, w = body_size(person, prof, cmr_day, first_visit, pregnant)
                values = cmr_values(person, prof, cmr_day, month, h, w)
                studies.append(Study(person.person, cmr_day, "cmr", SITE_CMR, h, w, values))
                if kind == "M":
                    last_mwt = max(values["mwt_cmr"], last_mwt or 0.0)
            if kind == "G":
                studies.append(Study(person.person, day, "ecg", SITE_ECG, None, None, {}))
            if kind == "K":
                studies.append(Study(person.person, day, "clinic", SITE_CLINIC, None, None, {}))
            if kind in ("M", "G"):
                continue  # the result is discussed at the next clinic visit
            status = status_from(person, prof, month, last_mwt, last_child_z)
            if ever_affected and status != "affected":
                raise AssertionError(f"{person.person}: affected status reverts at {token}")
            ever_affected = ever_affected or status == "affected"
            athlete = bool(prof.athlete and prof.athlete[0] <= month <= prof.athlete[1])
            hyper = bool(prof.hypertension_from and month >= prof.hypertension_from)
            assessments.append(dict(
                person=person.person, assessment_date=day.isoformat(), affected_status=status,
                symptoms=symptoms_at(prof, month), competitive_athlete=yn(athlete),
                pregnant=yn(pregnant), hypertension=yn(hyper), notes=prof.notes.get(month, ""),
                **risk_answers(status), atrial_fibrillation=af_answer(symptoms_at(prof, month)),
            ))
    return studies, assessments


RISK_ANSWER_COLUMNS = ["family_history_scd", "nsvt", "unexplained_syncope", "prior_arrest_or_sustained_vt",
                       "metabolic_or_syndromic"]  # fmt: skip


def risk_answers(status: str) -> dict[str, str]:
    """The HCM Risk-SCD answers recorded at an assessment: asked once a person is affected.

    Invented: no affected demo person has NSVT, unexplained syncope, a prior arrest or
    sustained VT, or a metabolic disease or syndrome; no family meets the family-history
    definition (HV01's sudden death at about 41 was not in a relative known to have HCM).
    Before diagnosis the questions are not asked (empty = not recorded).
    """
    value = "no" if status == "affected" else ""
    return {c: value for c in RISK_ANSWER_COLUMNS}


def af_answer(symptoms: str) -> str:
    """Atrial fibrillation at an assessment: "yes" once documented (the symptoms name it), else not recorded."""
    return "yes" if "atrial fibrillation" in symptoms else ""


# ---------------------------------------------------------------------------
# Checks
# ---------------------------------------------------------------------------
def generation_depth(code: str, memo: dict[str, int]) -> int:
    if code in memo:
        return memo[code]
    p = PEOPLE_BY_CODE[code]
    parents = [c for c in (p.mother, p.father) if c]
    memo[code] = 1 + max((generation_depth(c, memo) for c in parents), default=0)
    return memo[code]


def check_all(studies: list[Study], assessments: list[dict]) -> None:
    fam_codes = {f for f, _ in FAMILIES}
    assert len(fam_codes) == len(FAMILIES) >= 4
    assert all(CODE_RE.match(f) for f in fam_codes)
    codes = [p.person for p in PEOPLE]
    assert len(codes) == len(set(codes)), "duplicate person code"
    assert len(PEOPLE) >= 30
    today_limit = LAST_STUDY
    for p in PEOPLE:
        assert CODE_RE.match(p.person), p.person
        assert p.family in fam_codes, p.person
        assert p.sex_at_birth in ("female", "male", "unknown")
        assert p.vital_status in ("alive", "deceased", "unknown")
        assert re.match(r"^\d{4}(-\d{2}-\d{2})?$", p.birth_date), p.person
        if p.vital_status == "deceased":
            assert p.death_date, p.person
            assert birth_mid(p.death_date) > birth_mid(p.birth_date), p.person
            assert birth_mid(p.death_date) <= today_limit
            assert not p.contact_status, f"{p.person}: deceased with a contact status"
        else:
            assert not p.death_date, p.person
        assert birth_mid(p.birth_date) <= today_limit
        for role, sex in (("mother", "female"), ("father", "male")):
            parent_code = getattr(p, role)
            if not parent_code:
                continue
            parent = PEOPLE_BY_CODE[parent_code]
            assert parent.sex_at_birth == sex, f"{p.person}: {role} {parent_code} has sex {parent.sex_at_birth}"
            assert parent.family == p.family, p.person
            gap = birth_mid(p.birth_date).year - birth_mid(parent.birth_date).year
            assert gap >= 15, f"{p.person}: {role} only {gap} years older"
            if parent.vital_status == "deceased" and role == "mother":
                assert birth_mid(parent.death_date) >= birth_mid(p.birth_date)
            if parent.vital_status == "deceased" and role == "father":
                assert birth_mid(parent.death_date).year >= birth_mid(p.birth_date).year - 1
        if p.twin_of:
            twin = PEOPLE_BY_CODE[p.twin_of]
            assert twin.twin_of == p.person and twin.twin_type == p.twin_type, p.person
            assert p.twin_type in ("monozygotic", "dizygotic", "unknown")
            assert twin.birth_date == p.birth_date, p.person
            assert (twin.mother, twin.father) == (p.mother, p.father), p.person
            if p.twin_type == "monozygotic":
                assert twin.sex_at_birth == p.sex_at_birth, p.person
        assert p.adoption in ("", "in", "out")
        if p.adoption == "in":
            # For a person adopted in, the recorded mother and father are the adoptive parents.
            assert p.mother and p.father, "adopted-in child: record the adoptive parents"
        assert p.contact_status in ("", "not_contacted", "contactable", "declined", "lost_to_follow_up")
        assert bool(p.contact_status) == bool(p.contact_status_date), p.person
        if p.contact_status_date:
            assert d(p.contact_status_date) >= birth_mid(p.birth_date)
            assert d(p.contact_status_date) <= today_limit
        if p.placeholder:
            assert p.person not in PROFILES, f"placeholder {p.person} has clinical data"
    # pedigree shape
    memo: dict[str, int] = {}
    for fam in fam_codes:
        depth = max(generation_depth(p.person, memo) for p in PEOPLE if p.family == fam)
        assert 3 <= depth <= 4, f"{fam}: {depth} generations"
        probands = [p for p in PEOPLE if p.family == fam and p.proband]
        assert len(probands) == 1, fam
    statuses = {p.contact_status for p in PEOPLE}
    assert {"not_contacted", "contactable", "declined", "lost_to_follow_up"} <= statuses
    assert {p.twin_type for p in PEOPLE if p.twin_of} == {"monozygotic", "dizygotic"}
    assert any(p.adoption == "in" for p in PEOPLE)
    assert any(p.placeholder for p in PEOPLE)
    assert any(len(p.birth_date) == 4 and p.vital_status == "deceased" for p in PEOPLE)
    assert any("Sudden cardiac death" in p.notes for p in PEOPLE)
    half = [(a.person, b.person) for a in PEOPLE for b in PEOPLE
            if a.person < b.person and a.mother and a.mother == b.mother and a.father and b.father
            and a.father != b.father]
    assert half, "no half-siblings"
    # variants
    by_key: dict[tuple[str, str], list[dict]] = {}
    for v in VARIANTS:
        assert v["family"] in fam_codes
        assert v["acmg_class"] in ("pathogenic", "likely_pathogenic", "uncertain_significance",
                                   "likely_benign", "benign")
        assert v["zygosity"] in ("heterozygous", "homozygous", "hemizygous", "compound_heterozygous")
        assert re.match(r"^NM_\d+\.\d+$", v["transcript"])
        m = re.match(r"^c\.(\d+)([ACGT])>([ACGT])$", v["hgvs_c"])
        pm = re.match(r"^p\.\(([A-Z][a-z]{2})(\d+)([A-Z][a-z]{2})\)$", v["hgvs_p"])
        assert m and pm, v
        assert math.ceil(int(m.group(1)) / 3) == int(pm.group(2)), f"codon mismatch {v['hgvs_c']} {v['hgvs_p']}"
        d(v["classified_on"])
        by_key.setdefault((v["family"], vkey(v)), []).append(v)
    for rows in by_key.values():
        assert len({(r["gene"], r["hgvs_p"], r["zygosity"]) for r in rows}) == 1
        assert len({r["classified_on"] for r in rows}) == len(rows)
    assert any(len(rows) >= 2 for rows in by_key.values()), "no class history"

    def class_on(family: str, key: str, day: dt.date) -> str | None:
        rows = sorted(by_key.get((family, key), []), key=lambda r: r["classified_on"])
        current = None
        for r in rows:
            if d(r["classified_on"]) <= day:
                current = r["acmg_class"]
        return current

    # genetic results
    seen_keys = set()
    for person, test_date, test_type, variant, result, _ in GENETIC_RESULTS:
        p = PEOPLE_BY_CODE[person]
        assert not p.placeholder
        day = d(test_date)
        assert birth_mid(p.birth_date) < day <= today_limit
        assert test_type in ("diagnostic_panel", "predictive")
        assert result in ("carrier", "non_carrier", "inconclusive", "no_variant_found")
        key = (person, test_date, test_type, variant)
        assert key not in seen_keys
        seen_keys.add(key)
        if variant:
            assert (p.family, variant) in by_key, f"{person}: unknown variant {variant}"
            cls = class_on(p.family, variant, day)
            assert cls is not None, f"{person}: tested before the variant was classified"
            if test_type == "predictive" and (person, test_date) not in SEGREGATION_TESTS:
                assert cls in ("pathogenic", "likely_pathogenic"), f"{person}: cascade test of a {cls}"
        else:
            assert test_type == "diagnostic_panel" and result == "no_variant_found"
        if result == "no_variant_found":
            assert test_type == "diagnostic_panel" and not variant
        if test_type == "diagnostic_panel":
            assert p.proband
    panel_people = {g[0] for g in GENETIC_RESULTS if g[2] == "diagnostic_panel"}
    assert panel_people == {p.person for p in PEOPLE if p.proband}
    results = {g[4] for g in GENETIC_RESULTS}
    assert {"carrier", "non_carrier", "inconclusive", "no_variant_found"} <= results
    # studies
    study_keys = set()
    measurement_count = 0
    for s in studies:
        p = PEOPLE_BY_CODE[s.person]
        assert not p.placeholder
        assert FIRST_STUDY <= s.day <= LAST_STUDY, (s.person, s.day)
        assert s.day > birth_mid(p.birth_date) + dt.timedelta(days=183)
        if p.vital_status == "deceased":
            assert s.day < birth_mid(p.death_date)
        key = (s.person, s.day, s.modality)
        assert key not in study_keys, key
        study_keys.add(key)
        assert s.modality in ("echo", "cmr", "ecg", "clinic")
        if s.modality in ("echo", "cmr"):
            assert s.height is not None and s.weight is not None
            age = age_years(p.birth_date, s.day)
            assert 60 < s.height < 200 and 10 < s.weight < 140, (s.person, s.day, s.height, s.weight)
            bmi = s.weight / (s.height / 100) ** 2
            assert 13 < bmi < 36, (s.person, s.day, bmi)
            assert s.values
            for code, value in s.values.items():
                modality, unit, decimals, lo, hi = MEASURES[code]
                assert modality == s.modality, code
                rounded = round(value, decimals)
                assert lo <= rounded <= hi, f"{s.person} {s.day} {code}={rounded}"
                measurement_count += 1
            if s.modality == "echo":
                v = s.values
                assert v["ivsd"] <= v["mwt_echo"] + 1e-9 and v["lvpwd"] <= v["mwt_echo"] + 1e-9
                assert v["lvids"] < v["lvidd"] - 8
                z = child_z_max(s, age)
                if z is not None:
                    assert -2.5 < z < CHILD_Z, f"{s.person} {s.day}: child z {z:.2f}"
        else:
            assert not s.values and s.height is None
    assert len(study_keys) >= 80
    years = {s.day.year for s in studies}
    assert max(years) - min(years) >= 10
    # adults without a phenotype stay flat: non-carriers / untested within ~1 mm
    for code, prof in PROFILES.items():
        p = PEOPLE_BY_CODE[code]
        if prof.disease or prof.hand_mwt or p.proband:
            continue
        adult = [s.values["mwt_echo"] for s in studies
                 if s.person == code and s.modality == "echo" and age_years(p.birth_date, s.day) >= 25]
        if len(adult) >= 2:
            assert max(adult) - min(adult) <= 1.6, (code, adult)
    # affected probands have thick walls
    for p in PEOPLE:
        if p.proband:
            walls = [s.values["mwt_echo"] for s in studies if s.person == p.person and s.modality == "echo"]
            assert walls and all(18.0 <= w <= 28.0 for w in walls), (p.person, walls)
    # assessments
    seen = {s.person for s in studies}
    assessed = {a["person"] for a in assessments}
    assert seen == assessed, seen ^ assessed
    keys = [(a["person"], a["assessment_date"]) for a in assessments]
    assert len(keys) == len(set(keys))
    for a in assessments:
        p = PEOPLE_BY_CODE[a["person"]]
        assert a["affected_status"] in ("affected", "unaffected", "uncertain")
        if a["pregnant"] == "yes":
            assert p.sex_at_birth == "female"
        if p.proband:
            assert a["affected_status"] == "affected"
    final: dict[str, str] = {}
    ever_uncertain = set()
    for a in assessments:
        final[a["person"]] = a["affected_status"]
        if a["affected_status"] == "uncertain":
            ever_uncertain.add(a["person"])
    assert {k for k, v in final.items() if v == "affected"} == EXPECTED_AFFECTED
    assert ever_uncertain == EXPECTED_UNCERTAIN, ever_uncertain
    assert sum(a["competitive_athlete"] == "yes" for a in assessments) >= 1
    assert sum(a["pregnant"] == "yes" for a in assessments) >= 1
    assert sum(a["hypertension"] == "yes" for a in assessments) >= 1
    assert sum(bool(a["symptoms"]) for a in assessments) >= 5
    # the converter: a teenage carrier whose wall goes from ~9 to >= 15 mm and
    # whose status moves unaffected -> uncertain -> affected
    owen = [s for s in studies if s.person == "HV01-IV-2" and s.modality == "echo"]
    teen = [s.values["mwt_echo"] for s in owen if 13 <= age_years("2001-03-17", s.day) < 18]
    assert teen and max(teen) <= 9.5
    assert max(s.values["mwt_echo"] for s in owen) >= 15.0
    owen_status = [a["affected_status"] for a in assessments if a["person"] == "HV01-IV-2"]
    assert owen_status[0] == "unaffected" and owen_status[-1] == "affected" and "uncertain" in owen_status
    # predictive carriers / non-carriers are consistent with the story
    carriers = {g[0] for g in GENETIC_RESULTS if g[4] == "carrier"}
    non_carriers = {g[0] for g in GENETIC_RESULTS if g[4] == "non_carrier"}
    for code in EXPECTED_AFFECTED - {p.person for p in PEOPLE if p.proband}:
        assert code in carriers, code
    for code in non_carriers:
        assert final.get(code) in (None, "unaffected"), code  # a non-carrier is never affected here
    # children growing up: at least three children with >= 4 echos before age 18
    growing = 0
    for code in PROFILES:
        p = PEOPLE_BY_CODE[code]
        child_echos = [s for s in studies if s.person == code and s.modality == "echo"
                       and age_years(p.birth_date, s.day) < 18]
        if len(child_echos) >= 4:
            growing += 1
            assert child_echos[-1].height > child_echos[0].height
    assert growing >= 3
    # untested at-risk relatives remain (children of carriers with no test)
    tested = {g[0] for g in GENETIC_RESULTS}
    assert any(code not in tested and not PEOPLE_BY_CODE[code].proband for code in PROFILES)


# ---------------------------------------------------------------------------
# Writing
# ---------------------------------------------------------------------------
def write_csv(name: str, columns: list[str], rows: list[dict]) -> None:
    with open(HERE / name, "w", newline="", encoding="utf-8") as fh:
        writer = csv.DictWriter(fh, fieldnames=columns, lineterminator="\n")
        writer.writeheader()
        for row in rows:
            writer.writerow({c: row.get(c, "") for c in columns})


def main() -> None:
    studies, assessments = build()
    check_all(studies, assessments)
    check_segment_strain(studies)

    write_csv("families.csv", ["family", "condition", "notes"],
              [dict(family=f, condition=CONDITION, notes=n) for f, n in FAMILIES])
    people_cols = ["person", "family", "given_name", "family_name", "sex_at_birth", "gender_identity",
                   "birth_date", "vital_status", "death_date", "mother", "father", "placeholder", "proband",
                   "twin_of", "twin_type", "adoption", "contact_status", "contact_status_date", "notes",
                   "death_cause", "death_age", "diagnosis_age", "diagnosis_place", "icd_date", "pacemaker_date"]
    people_rows = []
    for p in PEOPLE:
        row = {c: getattr(p, c) for c in people_cols}
        row["placeholder"] = yn(p.placeholder)
        row["proband"] = yn(p.proband)
        people_rows.append(row)
    write_csv("people.csv", people_cols, people_rows)
    write_csv("variants.csv", ["family", "gene", "transcript", "hgvs_c", "hgvs_p", "zygosity", "acmg_class",
                               "classified_on", "reason"], VARIANTS)
    write_csv("genetic_results.csv",
              ["person", "test_date", "test_type", "variant", "result", "lab", "report_reference"],
              [dict(person=g[0], test_date=g[1], test_type=g[2], variant=g[3], result=g[4], lab=LAB,
                    report_reference=g[5]) for g in GENETIC_RESULTS])
    write_csv("assessments.csv", ["person", "assessment_date", "affected_status", "symptoms",
                                  "competitive_athlete", "pregnant", "hypertension", "notes",
                                  *RISK_ANSWER_COLUMNS, "atrial_fibrillation"], assessments)  # fmt: skip
    study_rows = []
    for s in sorted(studies, key=lambda s: (s.person, s.day, s.modality)):
        base = dict(person=s.person, study_date=s.day.isoformat(), modality=s.modality, site=s.site,
                    height_cm="" if s.height is None else fmt(s.height, 1),
                    weight_kg="" if s.weight is None else fmt(s.weight, 1))
        if not s.values:
            study_rows.append(dict(base, measure="", value="", unit=""))
            continue
        order = ECHO_ORDER if s.modality == "echo" else CMR_ORDER
        for code in order:
            if code in s.values:
                _, unit, decimals, _, _ = MEASURES[code]
                study_rows.append(dict(base, measure=code, value=fmt(s.values[code], decimals), unit=unit))
        for code, value in segment_rows(s):
            study_rows.append(dict(base, measure=code, value=fmt(value, 1), unit="%"))
    write_csv("studies.csv", ["person", "study_date", "modality", "site", "height_cm", "weight_kg",
                              "measure", "value", "unit"], study_rows)

    n_studies = len({(s.person, s.day, s.modality) for s in studies})
    n_meas = sum(len(s.values) + len(segment_rows(s)) for s in studies)
    years = sorted({s.day.year for s in studies})
    by_mod = {m: sum(1 for s in studies if s.modality == m) for m in ("echo", "cmr", "ecg", "clinic")}
    print(f"families {len(FAMILIES)}, people {len(PEOPLE)} "
          f"({sum(p.placeholder for p in PEOPLE)} placeholders), variants rows {len(VARIANTS)}, "
          f"genetic results {len(GENETIC_RESULTS)}, assessments {len(assessments)}")
    print(f"studies {n_studies} {by_mod}, measurements {n_meas}, years {years[0]}-{years[-1]}")


if __name__ == "__main__":
    main()
