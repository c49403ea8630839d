"""One family as an HL7 FHIR R4B Bundle (type "collection"): pure, frames in, a Bundle out.

Input frames are those of :mod:`tracker.store.repository` (``load_families``, ``load_people``,
``load_variants`` (class history), ``load_genetic_results``, ``load_assessments``,
``load_studies(conn, entered=False)`` (catalogue units) and ``load_measures``); rows of other
families are ignored.  Code tables, with their sources and confidence tags, are in
:mod:`tracker.outputs.fhir_codes`.

What is mapped
--------------
* **Patient**: each member seen in clinic, i.e. with at least one study, assessment or
  genetic result, and always the proband.  ``identifier`` = the person code in the local
  system ``urn:tracker:person``; ``gender`` from the recorded sex at birth (FHIR has no
  sex-at-birth element in R4B Patient; administrative gender is the nearest, a compromise);
  ``birthDate`` to the day or to the year as recorded; ``deceasedDateTime`` (day or year) when a
  death date is recorded, else ``deceasedBoolean``; nothing when the vital status is unknown.
  Names only with ``include_names=True``.  Each clinic assessment (date, affected status) is
  a local complex extension ``urn:tracker:assessment``.
* **FamilyMemberHistory**: every other member (placeholders and partners included), with
  ``patient`` = the proband.  ``relationship`` carries the plain words of
  :meth:`~tracker.domain.pedigree.Pedigree.relationship` (and the degree) as text, coded with
  HL7 v3 RoleCode where a code fits (MTH, FTH, SIS, BRO, SON, DAU, HSIS, HBRO, GRMTH, GRFTH,
  GGRMTH, GGRFTH, GRNDDAU, GRNDSON, AUNT, UNCLE, NIECE, NEPHEW, COUSN for first cousins, twin
  codes by zygosity, adoptive codes; sex-neutral codes when the sex is unknown); otherwise the
  generic FAMMEMB.  ``sex``, ``bornDate``, ``deceasedBoolean``/``deceasedDate`` (``deceasedAge``
  from the recorded age at death when no date is recorded); ``condition`` =
  HCM (SNOMED CT 233873004 and HPO HP:0001639) when the relative's latest assessment is
  "affected" or an age at diagnosis is recorded (then ``onsetAge``, UCUM ``a``), and Sudden
  cardiac death (HPO HP:0001645, ``contributedToDeath`` true, ``onsetAge`` = age at death) when
  the recorded cause of death is "sudden".  Extensions of the FHIR core registry:
  ``familymemberhistory-patient-record`` when the relative is also a Patient;
  ``family-member-history-genetics-parent`` (type NMTH/NFTH, or ADOPTM/ADOPTF for a person
  adopted in; reference = the parent's FamilyMemberHistory) for each recorded parent other
  than the proband; ``family-member-history-genetics-sibling`` (a twin code by zygosity) for
  a co-twin other than the proband.  Links to the proband are in ``relationship``.
  The proband's own HCM (with the age at diagnosis) and recorded sudden death are **Condition**
  resources with the same codes and ``onsetAge``.  No FamilyMemberHistory is made when the family has no recorded proband.
* **Observation per stored measurement** (catalogue unit): ``status`` final, ``category``
  imaging (echo, CMR) or procedure (ECG), ``code`` = LOINC when the catalogue has one *and* it
  is listed in the reference notes (standards.md 4a/4b), plus always the local system
  ``urn:tracker:measure`` with the catalogue code; ``valueQuantity`` with UCUM units (mm, %,
  mL/m2, g/m2, g, cm/s, m/s, mm[Hg], ms; ratios as "1"); ``effectiveDateTime`` = study date;
  ``subject`` = the Patient.
* **Genetic findings**, shaped after the HL7 Genomics Reporting IG: per *carrier* result a
  variant Observation (LOINC 69548-6, value LA9633-4 Present; components gene studied 48018-6
  (HGNC id where known, else the symbol as text), c.HGVS 48004-6, p.HGVS 48005-3, transcript
  51958-7, allelic state 53034-5 = LA6706-1 Heterozygous; ``method`` = the test type in the
  local system ``urn:tracker:test-type``) and a diagnostic-implication
  Observation (components clinical significance 53037-8 with the LL4034-6 answer of the
  variant's *current* ACMG/AMP class, associated phenotype 81259-4 = HCM; ``derivedFrom`` the
  variant Observation; ``effectiveDateTime`` = the date of that classification; earlier classes
  listed in ``note``).  A predictive *non-carrier* result is a variant Observation with value
  LA9634-2 Absent ([V2], see fhir_codes) for the familial variant, and no implication.
  Inconclusive and no-variant-found results are not exported (:func:`unexported_results`
  lists them): the first has no answer in the reference notes, the second needs the
  region-studied shape of the IG, which is not built here.

What uses local codes, and why
------------------------------
* Measures without a LOINC code in the reference notes (maximal wall thickness, LVOT
  gradients, GLS and segmental strain, CMR LV mass index, LGE extent, ECV, ECG amplitudes,
  LVPWd while the 2D/M-mode pair is unresolved, TR Vmax...): standards.md 4a/4b found none,
  or found only a post-coordinated form; the local system ``urn:tracker:measure`` carries the
  catalogue code, and the catalogue label is the text.
* People, families and relatives are identified by their pseudonymous codes in local URN
  systems (``urn:tracker:person``, ``urn:tracker:family``, ``urn:tracker:family-member``).

Identifiers
-----------
Every ``fullUrl`` is ``urn:uuid:<uuid5>`` of a key made from codes (person, date, modality,
measure, test, variant), in a fixed namespace, so exporting again gives the same ids.  The ids
are as pseudonymous as the codes, no more: they are not a de-identification.

Profiles
--------
``meta.profile`` (Genomics Reporting ``variant`` / ``diagnostic-implication``) is set only
with ``claim_profiles=True`` (:func:`claimed_profiles` lists what a Bundle claims): the canonical URLs were seen in the IG source, but the exported
resources have not been checked with the HL7 validator against a given IG release.

Decision support only: classes are as recorded in this clinic's store; confirm against the
current laboratory report. The treating clinician decides; follow local protocols and the
current guideline.
"""

from __future__ import annotations

import json
import uuid
from collections.abc import Iterable

import pandas as pd
from fhir.resources.R4B.bundle import Bundle

from tracker.domain.pedigree import Pedigree, ordinal
from tracker.domain.vocabulary import ACMG_SHORT
from tracker.outputs import fhir_codes as fc
from tracker.outputs.cells import cell_text, family_members  # noqa: F401  (family_members: part of this module's API)

_NAMESPACE = uuid.uuid5(uuid.NAMESPACE_URL, fc.ID_NAMESPACE_NAME)
HCM_WORDS = "hypertrophic cardiomyopathy"
CAUTION = (
    "Class as recorded in the clinic's store; confirm against the current laboratory report. "
    "Decision support only: the treating clinician decides; follow local protocols and the "
    "current guideline."
)


# ---------------------------------------------------------------------------
# small helpers
# ---------------------------------------------------------------------------


def resource_id(*parts: str) -> str:
    """The stable id (a uuid5 string) of the resource named by ``parts`` (codes, dates)."""
    return str(uuid.uuid5(_NAMESPACE, "/".join(parts)))


def _ref(rid: str) -> dict:
    return {"reference": f"urn:uuid:{rid}"}


def _whole_years(v: object) -> int | None:
    t = cell_text(v)
    return None if t is None else int(float(t))


def _age(years: int) -> dict:
    """A FHIR Age in whole years (UCUM ``a``)."""
    return {"value": years, "unit": "a", "system": fc.UCUM, "code": "a"}


def _cc(*codes: fc.Code, text: str | None = None) -> dict:
    out: dict = {"coding": [c.coding() for c in codes]}
    if text:
        out["text"] = text
    return out


def _component(code: fc.Code, value: dict) -> dict:
    return {"code": _cc(code), "valueCodeableConcept": value}


def _clean_links(members: pd.DataFrame) -> pd.DataFrame:
    """Parent/twin links to people outside the family are dropped (not in this pedigree)."""
    codes = set(members["person"])
    frame = members.copy()
    for col in ("mother", "father", "twin_of"):
        if col in frame.columns:
            outside = frame[col].notna() & ~frame[col].isin(codes)
            frame.loc[outside, col] = None
    return frame.reset_index(drop=True)


def _is_hcm(condition: str | None) -> bool:
    return condition is not None and HCM_WORDS in condition.lower()


def _condition_cc(condition: str | None) -> dict:
    if _is_hcm(condition) or condition is None:
        return _cc(fc.HCM_SNOMED, fc.HCM_HPO, text="Hypertrophic cardiomyopathy")
    return {"text": condition}


# ---------------------------------------------------------------------------
# people
# ---------------------------------------------------------------------------


def _names(row: dict) -> list[dict]:
    given, family = cell_text(row.get("given_name")), cell_text(row.get("family_name"))
    if not (given or family):
        return []
    name: dict = {}
    if family:
        name["family"] = family
    if given:
        name["given"] = [given]
    return [name]


def _assessment_extensions(assessments: list[tuple[str, str]]) -> list[dict]:
    """One local complex extension per clinic assessment (date, affected status), oldest first."""
    return [
        {"url": fc.EXT_ASSESSMENT, "extension": [{"url": "date", "valueDate": day},
                                                 {"url": "affected-status", "valueCode": status}]}
        for day, status in assessments
    ]  # fmt: skip


def _patient(row: dict, include_names: bool, assessments: list[tuple[str, str]] = ()) -> dict:
    code = row["person"]
    res: dict = {
        "resourceType": "Patient",
        "id": resource_id("Patient", code),
    }
    if assessments:
        res["extension"] = _assessment_extensions(list(assessments))
    res["identifier"] = [{"system": fc.LOCAL_PERSON, "value": code}]
    if include_names and (names := _names(row)):
        res["name"] = names
    res["gender"] = fc.GENDER.get(cell_text(row.get("sex_at_birth")) or "unknown", "unknown")
    if birth := cell_text(row.get("birth_date")):
        res["birthDate"] = birth  # ISO text, "YYYY" when known to the year only
    vital, death = cell_text(row.get("vital_status")), cell_text(row.get("death_date"))
    if death:
        res["deceasedDateTime"] = death
    elif vital == "deceased":
        res["deceasedBoolean"] = True
    elif vital == "alive":
        res["deceasedBoolean"] = False
    return res


def relationship_role(words: str, sex: str | None) -> fc.Code:
    """The v3 RoleCode for relationship ``words`` (what the relative is to the proband)."""
    base = words.split(" (genetically ")[0]  # a line through a monozygotic twin keeps the social words
    codes = fc.RELATIONSHIP_ROLE.get(base)
    if codes is None:
        return fc.ROLE_CODES[fc.GENERIC_ROLE]
    female, male, neutral = codes
    return fc.ROLE_CODES[{"female": female, "male": male}.get(sex or "unknown", neutral)]


def _relationship_text(words: str, degree: int | None) -> str:
    if degree is None or words.startswith("relative,"):
        return words
    return f"{words}, {ordinal(degree)}-degree relative"


def _co_parent_words(ped: Pedigree, proband: str, relative: str) -> str | None:
    shared = set(ped.children(proband)) & set(ped.children(relative))
    return "co-parent of the proband's child (not a blood relative)" if shared else None


def _fmh_extensions(row: dict, fmh_ids: dict[str, str], patient_ids: dict[str, str],
                    sexes: dict[str, str]) -> list[dict]:  # fmt: skip
    """Patient-record link, genetic parents and co-twin of one relative (links to the proband are in
    ``relationship``: the extensions reference FamilyMemberHistory resources only)."""
    out: list[dict] = []
    code = row["person"]
    if code in patient_ids:
        out.append({"url": fc.EXT_FMH_PATIENT_RECORD, "valueReference": _ref(patient_ids[code])})
    for role in ("mother", "father"):
        parent = cell_text(row.get(role))
        if parent in fmh_ids:
            adopted = cell_text(row.get("adoption")) == "in"  # the recorded parents are then the adoptive ones
            kind = fc.ROLE_CODES[(fc.ADOPTIVE_PARENT_TYPE if adopted else fc.PARENT_TYPE)[role]]
            out.append({"url": fc.EXT_FMH_PARENT, "extension": [
                {"url": "type", "valueCodeableConcept": _cc(kind)},
                {"url": "reference", "valueReference": _ref(fmh_ids[parent])}]})  # fmt: skip
    twin = cell_text(row.get("twin_of"))
    if twin in fmh_ids:
        female, male, neutral = fc.TWIN_TYPE_ROLE.get(cell_text(row.get("twin_type")) or "unknown",
                                                      fc.TWIN_TYPE_ROLE["unknown"])  # fmt: skip
        kind = fc.ROLE_CODES[{"female": female, "male": male}.get(sexes.get(twin, "unknown"), neutral)]
        out.append({"url": fc.EXT_FMH_SIBLING, "extension": [
            {"url": "type", "valueCodeableConcept": _cc(kind)},
            {"url": "reference", "valueReference": _ref(fmh_ids[twin])}]})  # fmt: skip
    return out


def _family_member_history(
    row: dict, ped: Pedigree, proband: str, proband_id: str, affected: bool, condition: str | None,
    include_names: bool, extensions: list[dict] | None = None,
) -> dict:
    code = row["person"]
    rel = ped.relationship(proband, code)
    words = rel.label
    if not rel.blood_related and words == "not a blood relative":
        words = _co_parent_words(ped, proband, code) or words
    sex = cell_text(row.get("sex_at_birth")) or "unknown"
    role = relationship_role(words, sex)
    res: dict = {
        "resourceType": "FamilyMemberHistory",
        "id": resource_id("FamilyMemberHistory", proband, code),
        **({"extension": extensions} if extensions else {}),
        "identifier": [{"system": fc.LOCAL_RELATIVE, "value": code}],
        "status": "completed",
        "patient": _ref(proband_id),
        "relationship": _cc(role, text=_relationship_text(words, rel.degree)),
        "sex": {"coding": [{"system": fc.ADMINISTRATIVE_GENDER, "code": fc.GENDER.get(sex, "unknown")}]},
    }
    if include_names and (names := _names(row)):
        name = names[0]
        res["name"] = " ".join([*name.get("given", []), name.get("family", "")]).strip()
    if birth := cell_text(row.get("birth_date")):
        res["bornDate"] = birth
    vital, death = cell_text(row.get("vital_status")), cell_text(row.get("death_date"))
    if death:
        res["deceasedDate"] = death
    elif vital == "deceased" and (death_age := _whole_years(row.get("death_age"))) is not None:
        res["deceasedAge"] = _age(death_age)
    elif vital == "deceased":
        res["deceasedBoolean"] = True
    elif vital == "alive":
        res["deceasedBoolean"] = False
    conditions = []
    diagnosis_age = _whole_years(row.get("diagnosis_age"))
    if affected or diagnosis_age is not None:  # HCM, with the recorded age at diagnosis as its onset
        conditions.append({"code": _condition_cc(condition)})
        if diagnosis_age is not None:
            conditions[-1]["onsetAge"] = _age(diagnosis_age)
    if cell_text(row.get("death_cause")) == "sudden":
        conditions.append({"code": _cc(fc.SCD_HPO, text="Sudden cardiac death"), "contributedToDeath": True})
        if (death_age := _whole_years(row.get("death_age"))) is not None:
            conditions[-1]["onsetAge"] = _age(death_age)
    if conditions:
        res["condition"] = conditions
    if bool(row.get("placeholder")):
        res["note"] = [{"text": "placeholder: drawn to connect the pedigree"}]
    return res


def _proband_conditions(row: dict, patient_id: str, affected: bool, condition: str | None) -> list[dict]:
    """Condition resources of the proband (who has no FamilyMemberHistory): HCM with the recorded age at
    diagnosis as its onset, and a recorded sudden death with the age at death, as for a relative."""
    code, out = row["person"], []
    diagnosis_age = _whole_years(row.get("diagnosis_age"))
    if affected or diagnosis_age is not None:
        res = {"resourceType": "Condition", "id": resource_id("Condition", code, "hcm"),
               "code": _condition_cc(condition), "subject": _ref(patient_id)}  # fmt: skip
        if diagnosis_age is not None:
            res["onsetAge"] = _age(diagnosis_age)
        out.append(res)
    if cell_text(row.get("death_cause")) == "sudden":
        res = {"resourceType": "Condition", "id": resource_id("Condition", code, "sudden-death"),
               "code": _cc(fc.SCD_HPO, text="Sudden cardiac death"), "subject": _ref(patient_id)}  # fmt: skip
        if (death_age := _whole_years(row.get("death_age"))) is not None:
            res["onsetAge"] = _age(death_age)
        out.append(res)
    return out


# ---------------------------------------------------------------------------
# measurements
# ---------------------------------------------------------------------------


def _measure_code(measure: str, catalogue: dict[str, dict]) -> dict:
    entry = catalogue.get(measure, {})
    codings = []
    loinc = cell_text(entry.get("loinc"))
    if loinc and loinc in fc.MEASURE_LOINC:
        codings.append({"system": fc.LOINC, "code": loinc})
    label = cell_text(entry.get("label"))
    local = {"system": fc.LOCAL_MEASURE, "code": measure}
    if label:
        local["display"] = label
    codings.append(local)
    out: dict = {"coding": codings}
    if label:
        out["text"] = label
    return out


def _quantity(value: float, unit: str | None) -> dict:
    q: dict = {"value": float(value)}
    if unit:
        q["unit"] = unit
        if unit in fc.UCUM_CODES:
            q["system"] = fc.UCUM
            q["code"] = fc.UCUM_CODES[unit]
    return q


def _measurement(row: dict, patient_id: str, catalogue: dict[str, dict]) -> dict:
    person, date, modality, measure = row["person"], row["study_date"], row["modality"], row["measure"]
    res: dict = {
        "resourceType": "Observation",
        "id": resource_id("Observation", "measurement", person, date, modality, measure),
        "status": "final",
    }
    category = fc.MODALITY_CATEGORY.get(modality)
    if category is not None:
        res["category"] = [_cc(category)]
    unit = cell_text(row.get("unit")) or cell_text(catalogue.get(measure, {}).get("unit"))
    res.update(
        {
            "code": _measure_code(measure, catalogue),
            "subject": _ref(patient_id),
            "effectiveDateTime": date,
            "valueQuantity": _quantity(row["value"], unit),
        }
    )
    return res


# ---------------------------------------------------------------------------
# genetic findings
# ---------------------------------------------------------------------------


def _variant_table(variants: pd.DataFrame) -> dict[str, dict]:
    """'transcript:hgvs_c' -> the variant's fields and its class history (oldest first)."""
    out: dict[str, dict] = {}
    if variants.empty:
        return out
    ordered = variants.sort_values("classified_on", kind="stable")
    for rec in ordered.to_dict("records"):
        key = f"{rec['transcript']}:{rec['hgvs_c']}"
        v = out.setdefault(key, {**rec, "history": []})
        v["history"].append((rec["acmg_class"], rec["classified_on"]))
    return out


def _gene_cc(gene: str) -> dict:
    hgnc = fc.HGNC_IDS.get(gene)
    if hgnc:
        return {"coding": [{"system": fc.HGNC, "code": hgnc, "display": gene}], "text": gene}
    return {"text": gene}


def _transcript_cc(transcript: str) -> dict:
    if transcript[:3] in ("NM_", "NR_", "XM_", "XR_"):
        return {"coding": [{"system": fc.REFSEQ, "code": transcript, "display": transcript}]}
    return {"text": transcript}


def _hgvs_cc(text: str) -> dict:
    return {"coding": [{"system": fc.HGVS, "code": text, "display": text}]}


def _genetics_category() -> list[dict]:
    return [_cc(fc.CATEGORY_LABORATORY), _cc(fc.CATEGORY_GENETICS)]


def _variant_key(row: dict) -> tuple[str, ...]:
    return (row["person"], row["test_date"], row["test_type"], row["variant"])


def _variant_observation(row: dict, variant: dict | None, patient_id: str, present: bool, claim: bool) -> dict:
    key = row["variant"]
    transcript, _, hgvs_c = key.partition(":")
    res: dict = {"resourceType": "Observation", "id": resource_id("Observation", "variant", *_variant_key(row))}
    if claim:
        res["meta"] = {"profile": [fc.PROFILE_VARIANT]}
    if ref := cell_text(row.get("report_reference")):
        res["identifier"] = [{"system": fc.LOCAL_LAB_REPORT, "value": ref}]
    res.update(
        {
            "status": "final",
            "category": _genetics_category(),
            "code": _cc(fc.VARIANT_CODE),
            "subject": _ref(patient_id),
            "effectiveDateTime": row["test_date"],
        }
    )
    if lab := cell_text(row.get("lab")):
        res["performer"] = [{"display": lab}]
    res["method"] = {"coding": [{"system": fc.LOCAL_TEST_TYPE, "code": row["test_type"]}]}
    res["valueCodeableConcept"] = _cc(fc.PRESENT if present else fc.ABSENT)
    components = []
    gene = cell_text(variant.get("gene")) if variant else None
    if gene:
        components.append(_component(fc.GENE_STUDIED, _gene_cc(gene)))
    components.append(_component(fc.CODING_HGVS, _hgvs_cc(key)))
    if variant and (p := cell_text(variant.get("hgvs_p"))):
        components.append(_component(fc.PROTEIN_HGVS, _hgvs_cc(p)))
    components.append(_component(fc.TRANSCRIPT_REF_SEQ, _transcript_cc(transcript)))
    zygosity = cell_text(variant.get("zygosity")) if variant else None
    if present and zygosity:
        value = _cc(fc.HETEROZYGOUS) if zygosity == "heterozygous" else {"text": zygosity.replace("_", " ")}
        components.append(_component(fc.ALLELIC_STATE, value))
    res["component"] = components
    return res


def _history_note(history: list[tuple[str, str]]) -> str:
    current_class, current_date = history[-1]
    text = f"Current class {ACMG_SHORT.get(current_class, current_class)} since {current_date}."
    if len(history) > 1:
        earlier = "; ".join(f"{ACMG_SHORT.get(c, c)} ({d})" for c, d in history[:-1])
        text += f" Earlier: {earlier}."
    return f"{text} {CAUTION}"


def _implication(row: dict, variant: dict, patient_id: str, variant_id: str, condition: str | None,
                 claim: bool) -> dict | None:
    current_class, classified_on = variant["history"][-1]
    answer = fc.CLINICAL_SIGNIFICANCE_ANSWERS.get(current_class)
    if answer is None:
        return None
    res: dict = {
        "resourceType": "Observation",
        "id": resource_id("Observation", "implication", *_variant_key(row)),
    }
    if claim:
        res["meta"] = {"profile": [fc.PROFILE_DIAGNOSTIC_IMPLICATION]}
    res.update(
        {
            "status": "final",
            "category": _genetics_category(),
            "code": _cc(fc.DIAGNOSTIC_IMPLICATION),
            "subject": _ref(patient_id),
            "effectiveDateTime": classified_on,
            "derivedFrom": [_ref(variant_id)],
            "note": [{"text": _history_note(variant["history"])}],
            "component": [
                _component(fc.CLINICAL_SIGNIFICANCE, _cc(answer)),
                _component(fc.ASSOCIATED_PHENOTYPE, _condition_cc(condition)),
            ],
        }
    )
    return res


def _exported_result(row: dict) -> bool:
    if cell_text(row.get("variant")) is None:
        return False
    return row["result"] == "carrier" or (row["result"] == "non_carrier" and row["test_type"] == "predictive")


def unexported_results(results: pd.DataFrame) -> list[dict]:
    """Genetic results that :func:`build_family_bundle` leaves out, with the reason."""
    out = []
    for row in results.to_dict("records"):
        if _exported_result(row):
            continue
        if row["result"] == "inconclusive":
            reason = "inconclusive: no answer code for it in the reference notes"
        elif row["result"] == "no_variant_found":
            reason = "no variant found: needs the region-studied shape, not exported"
        else:
            reason = f"{row['result']} ({row['test_type']}) without a variant"
        out.append({"person": row["person"], "test_date": row["test_date"], "result": row["result"],
                    "reason": reason})
    return out


def loinc_codes_not_exported(measures: pd.DataFrame) -> dict[str, str]:
    """Catalogue measures whose LOINC code is not in the reference-note table (exported local only)."""
    out = {}
    for rec in measures.to_dict("records"):
        code = cell_text(rec.get("loinc"))
        if code and code not in fc.MEASURE_LOINC:
            out[rec["code"]] = code
    return out


# ---------------------------------------------------------------------------
# the bundle
# ---------------------------------------------------------------------------


def seen_members(members: pd.DataFrame, results: pd.DataFrame, assessments: pd.DataFrame,
                 studies: pd.DataFrame) -> list[str]:
    """Members seen in clinic: any study, assessment or genetic result, and the proband."""
    codes = set(members["person"])
    seen: set[str] = set()
    for frame in (results, assessments, studies):
        if len(frame):
            seen |= set(frame["person"]) & codes
    seen |= set(members.loc[members["proband"].astype(bool), "person"])
    return sorted(seen)


def _latest_affected(assessments: pd.DataFrame) -> set[str]:
    if assessments.empty:
        return set()
    latest = assessments.sort_values("assessment_date", kind="stable").groupby("person").tail(1)
    return set(latest.loc[latest["affected_status"] == "affected", "person"])


def _rows(frame: pd.DataFrame, people: Iterable[str]) -> pd.DataFrame:
    return frame[frame["person"].isin(set(people))] if len(frame) else frame


def build_family_bundle(
    family: str,
    families: pd.DataFrame,
    people: pd.DataFrame,
    variants: pd.DataFrame,
    results: pd.DataFrame,
    assessments: pd.DataFrame,
    studies: pd.DataFrame,
    measures: pd.DataFrame,
    *,
    include_names: bool = False,
    claim_profiles: bool = False,
) -> Bundle:
    """The FHIR R4B collection Bundle of one family (see the module docstring for the mapping).

    ``studies`` must be in catalogue units (``load_studies(conn, entered=False)``).  Raises
    ValueError when the family has no members, and
    :class:`~tracker.domain.pedigree.PedigreeError` when its links do not form a pedigree.
    """
    members = family_members(people, family)
    codes = list(members["person"])
    fam = families[families["family"] == family] if len(families) else families
    condition = cell_text(fam["condition"].iloc[0]) if len(fam) else None
    results = _rows(results, codes).sort_values(["person", "test_date", "test_type"], kind="stable")
    assessments = _rows(assessments, codes)
    studies = _rows(studies, codes)
    values = studies[studies["measure"].notna()] if len(studies) else studies
    variants = variants[variants["family"] == family] if len(variants) else variants
    catalogue = {r["code"]: r for r in measures.to_dict("records")}

    seen = seen_members(members, results, assessments, studies)
    patient_ids = {p: resource_id("Patient", p) for p in seen}
    by_code = {r["person"]: r for r in members.to_dict("records")}
    assessed: dict[str, list[tuple[str, str]]] = {}
    if len(assessments):
        for rec in assessments.sort_values(["person", "assessment_date"], kind="stable").to_dict("records"):
            assessed.setdefault(rec["person"], []).append((rec["assessment_date"], rec["affected_status"]))
    entries: list[dict] = [_patient(by_code[p], include_names, assessed.get(p, [])) for p in seen]

    probands = [p for p in codes if bool(by_code[p]["proband"])]
    if probands:
        proband = probands[0]
        linked = _clean_links(members)
        ped = Pedigree(linked)
        linked_rows = {r["person"]: r for r in linked.to_dict("records")}
        sexes = {p: cell_text(r.get("sex_at_birth")) or "unknown" for p, r in linked_rows.items()}
        fmh_ids = {p: resource_id("FamilyMemberHistory", proband, p) for p in codes if p != proband}
        affected = _latest_affected(assessments)
        for p in codes:
            if p != proband:
                ext = _fmh_extensions(linked_rows[p], fmh_ids, patient_ids, sexes)
                entries.append(
                    _family_member_history(by_code[p], ped, proband, patient_ids[proband], p in affected,
                                           condition, include_names, ext)
                )
        entries.extend(_proband_conditions(by_code[proband], patient_ids[proband], proband in affected, condition))

    if len(values):
        values = values.sort_values(["person", "study_date", "modality", "measure"], kind="stable")
    for row in values.to_dict("records"):
        entries.append(_measurement(row, patient_ids[row["person"]], catalogue))

    table = _variant_table(variants)
    for row in results.to_dict("records"):
        if not _exported_result(row):
            continue
        variant = table.get(row["variant"])
        present = row["result"] == "carrier"
        obs = _variant_observation(row, variant, patient_ids[row["person"]], present, claim_profiles)
        entries.append(obs)
        if present and variant is not None:
            imp = _implication(row, variant, patient_ids[row["person"]], obs["id"], condition, claim_profiles)
            if imp is not None:
                entries.append(imp)

    bundle = {
        "resourceType": "Bundle",
        "id": resource_id("Bundle", family),
        "identifier": {"system": fc.LOCAL_FAMILY, "value": family},
        "type": "collection",
        "entry": [{"fullUrl": f"urn:uuid:{res['id']}", "resource": res} for res in entries],
    }
    return Bundle.model_validate(bundle)


def bundle_json(bundle: Bundle) -> str:
    """The Bundle as FHIR JSON text (UTF-8, two-space indent, stable key order), ending in a newline."""
    data = json.loads(bundle.model_dump_json())
    return json.dumps(data, indent=2, ensure_ascii=False) + "\n"


def claimed_profiles(bundle: Bundle) -> dict[str, list[str]]:
    """Kind of resource (as in :func:`resource_counts`) -> the profile URLs its ``meta.profile`` claims."""
    out: dict[str, list[str]] = {}
    for entry in bundle.entry or []:
        res = entry.resource
        profiles = list(res.meta.profile or []) if res.meta is not None else []
        if profiles:
            kind = next(iter(resource_counts(Bundle.model_construct(entry=[entry]))))
            for url in profiles:
                if url not in out.setdefault(kind, []):
                    out[kind].append(url)
    return out


def resource_counts(bundle: Bundle) -> dict[str, int]:
    """Number of entries per resource type (Observations split into measurement/variant/implication)."""
    counts: dict[str, int] = {}
    for entry in bundle.entry or []:
        res = entry.resource
        kind = res.get_resource_type()
        if kind == "Observation":
            systems = {c.system for c in (res.code.coding or [])}
            codes = {c.code for c in (res.code.coding or [])}
            if fc.LOCAL_MEASURE in systems:
                kind = "Observation (measurement)"
            elif fc.VARIANT_CODE.code in codes:
                kind = "Observation (variant)"
            elif fc.DIAGNOSTIC_IMPLICATION.code in codes:
                kind = "Observation (diagnostic implication)"
        counts[kind] = counts.get(kind, 0) + 1
    return counts
