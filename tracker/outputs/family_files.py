"""One family as a GA4GH Phenopackets v2 Family (JSON) or a six-column PED/LINKAGE file: pure, frames in, text out.

Input frames are those of :mod:`tracker.store.repository` (``load_families``, ``load_people``,
``load_variants``, ``load_genetic_results``, ``load_assessments``).  The code tables, with their
sources and confidence tags, are at the top of this module; docs/data-layouts.md describes both
formats, their code maps and what they cannot carry.

Affection (both formats): **affected** when the person's latest clinic assessment says
affected or an age at diagnosis of HCM is recorded; **unaffected** when the latest assessment
says unaffected; otherwise unknown (never assessed, or "uncertain").  Decision support only:
as recorded in this clinic's store; the treating clinician decides.
"""

from __future__ import annotations

import datetime as dt
import json

import pandas as pd

from tracker.outputs import fhir_codes as fc
from tracker.outputs.cells import cell_text, family_members

# --------------------------------------------------------------------------- codes

# HPO terms, [V] docs/reference/standards.md 4c.
HPO_HCM = {"id": "HP:0001639", "label": "Hypertrophic cardiomyopathy"}
HPO_SCD = {"id": "HP:0001645", "label": "Sudden cardiac death"}
# The disease of the interpretation: SNOMED CT 233873004, [V] docs/reference/standards.md 4d.
DISEASE_HCM = {"id": "SNOMEDCT:233873004", "label": "Hypertrophic cardiomyopathy"}
# Allelic state: GENO (genotype ontology) terms, from memory, verify [M].
GENO_ZYGOSITY = {
    "heterozygous": {"id": "GENO:0000135", "label": "heterozygous"},
    "homozygous": {"id": "GENO:0000136", "label": "homozygous"},
    "hemizygous": {"id": "GENO:0000134", "label": "hemizygous"},
    "compound_heterozygous": {"id": "GENO:0000402", "label": "compound heterozygous"},
}
# Phenopackets v2 enums (AcmgPathogenicityClassification, Sex, AffectedStatus, VitalStatus.Status):
# [V] the phenopackets package's protobuf descriptors (a test parses the output with them).
ACMG_ENUM = {
    "pathogenic": "PATHOGENIC",
    "likely_pathogenic": "LIKELY_PATHOGENIC",
    "uncertain_significance": "UNCERTAIN_SIGNIFICANCE",
    "likely_benign": "LIKELY_BENIGN",
    "benign": "BENIGN",
}
SEX_ENUM = {"female": "FEMALE", "male": "MALE"}
VITAL_ENUM = {"alive": "ALIVE", "deceased": "DECEASED"}
SCHEMA_VERSION = "2.0"
RESOURCES = [  # metaData.resources: the ontologies whose prefixes appear in the file
    {"id": "hp", "name": "human phenotype ontology", "url": "http://purl.obolibrary.org/obo/hp.owl",
     "version": "unspecified", "namespacePrefix": "HP", "iriPrefix": "http://purl.obolibrary.org/obo/HP_"},
    {"id": "geno", "name": "Genotype Ontology", "url": "http://purl.obolibrary.org/obo/geno.owl",
     "version": "unspecified", "namespacePrefix": "GENO", "iriPrefix": "http://purl.obolibrary.org/obo/GENO_"},
    {"id": "snomedct", "name": "SNOMED CT", "url": "http://snomed.info/sct", "version": "unspecified",
     "namespacePrefix": "SNOMEDCT", "iriPrefix": "http://snomed.info/id/"},
    {"id": "hgnc", "name": "HUGO Gene Nomenclature Committee", "url": "https://www.genenames.org",
     "version": "unspecified", "namespacePrefix": "HGNC", "iriPrefix": "https://identifiers.org/hgnc:"},
]  # fmt: skip

# PED sex and affection columns: the LINKAGE convention (1 male, 2 female, 0 unknown; 1 unaffected,
# 2 affected, 0 unknown).  Common practice (the LINKAGE/PLINK file convention), from memory, verify [M].
PED_SEX = {"male": "1", "female": "2"}
PED_AFFECTION = {"unaffected": "1", "affected": "2"}
PED_UNKNOWN = "0"


def affection(members: pd.DataFrame, assessments: pd.DataFrame) -> dict[str, str]:
    """person -> "affected", "unaffected" or "unknown" (see the module docstring)."""
    latest: dict[str, str] = {}
    if len(assessments):
        for rec in assessments.sort_values("assessment_date", kind="stable").to_dict("records"):
            latest[rec["person"]] = rec["affected_status"]
    out = {}
    for rec in members.to_dict("records"):
        p = rec["person"]
        if latest.get(p) == "affected" or cell_text(rec.get("diagnosis_age")) is not None:
            out[p] = "affected"
        elif latest.get(p) == "unaffected":
            out[p] = "unaffected"
        else:
            out[p] = "unknown"
    return out


def genetic_parents(rec: dict, codes: set[str]) -> tuple[str | None, str | None]:
    """(mother, father) within the family; none for a person adopted in (the recorded ones are adoptive)."""
    if cell_text(rec.get("adoption")) == "in":
        return None, None
    m, f = cell_text(rec.get("mother")), cell_text(rec.get("father"))
    return (m if m in codes else None), (f if f in codes else None)


# --------------------------------------------------------------------------- PED


def ped_text(family: str, people: pd.DataFrame, assessments: pd.DataFrame, *, rename=None) -> str:
    """The six-column PED/LINKAGE text (tab-separated, one line per member, no header)."""
    rename = rename or (lambda kind, code: code)
    members = family_members(people, family)
    codes = set(members["person"])
    status = affection(members, assessments)
    lines = []
    for rec in members.to_dict("records"):
        mother, father = genetic_parents(rec, codes)
        cells = [
            rename("family", family),
            rename("person", rec["person"]),
            rename("person", father) if father else PED_UNKNOWN,
            rename("person", mother) if mother else PED_UNKNOWN,
            PED_SEX.get(cell_text(rec.get("sex_at_birth")) or "", PED_UNKNOWN),
            PED_AFFECTION.get(status[rec["person"]], PED_UNKNOWN),
        ]
        lines.append("\t".join(cells))
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------- Phenopackets


def _age(years) -> dict:
    return {"age": {"iso8601duration": f"P{int(float(years))}Y"}}


def _features(rec: dict, status: str) -> list[dict]:
    out = []
    if status == "affected":
        feature: dict = {"type": dict(HPO_HCM)}
        if (age := cell_text(rec.get("diagnosis_age"))) is not None:
            feature["onset"] = _age(age)
        out.append(feature)
    elif status == "unaffected":
        out.append({"type": dict(HPO_HCM), "excluded": True})
    if cell_text(rec.get("death_cause")) == "sudden":
        feature = {"type": dict(HPO_SCD)}
        if (age := cell_text(rec.get("death_age"))) is not None:
            feature["onset"] = _age(age)
        out.append(feature)
    return out


def _subject(rec: dict, pid: str) -> dict:
    subject: dict = {"id": pid, "sex": SEX_ENUM.get(cell_text(rec.get("sex_at_birth")) or "", "UNKNOWN_SEX")}
    vital = VITAL_ENUM.get(cell_text(rec.get("vital_status")) or "")
    if vital:
        subject["vitalStatus"] = {"status": vital}
    return subject


def _variation(variant: dict, pid: str) -> dict:
    gene = cell_text(variant.get("gene"))
    key = f"{variant['transcript']}:{variant['hgvs_c']}"
    desc: dict = {"id": f"{pid}:{key}", "label": key}
    if gene:
        desc["geneContext"] = {"valueId": fc.HGNC_IDS.get(gene, gene), "symbol": gene}  # HGNC id ([V2]) where known
    desc["expressions"] = [{"syntax": "hgvs.c", "value": key}]
    if p := cell_text(variant.get("hgvs_p")):
        desc["alternateLabels"] = [p]  # no protein accession is stored, so no full hgvs.p expression
    desc["moleculeContext"] = "transcript"
    if zyg := GENO_ZYGOSITY.get(cell_text(variant.get("zygosity")) or ""):
        desc["allelicState"] = dict(zyg)
    return desc


def _interpretation(pid: str, variant: dict, fid: str) -> dict:
    acmg = ACMG_ENUM.get(variant["acmg_class"], "NOT_PROVIDED")
    causative = variant["acmg_class"] in ("pathogenic", "likely_pathogenic")
    return {
        "id": f"{fid}:{pid}:interpretation",
        "progressStatus": "SOLVED" if causative else "UNSOLVED",
        "diagnosis": {
            "disease": dict(DISEASE_HCM),
            "genomicInterpretations": [{
                "subjectOrBiosampleId": pid,
                "interpretationStatus": "CAUSATIVE" if causative else "UNCERTAIN_SIGNIFICANCE",
                "variantInterpretation": {
                    "acmgPathogenicityClassification": acmg,
                    "variationDescriptor": _variation(variant, pid),
                },
            }],
        },
    }  # fmt: skip


def family_phenopacket(
    family: str, people: pd.DataFrame, variants: pd.DataFrame, results: pd.DataFrame,
    assessments: pd.DataFrame, *, created: dt.datetime, rename=None,
) -> dict:  # fmt: skip
    """The Phenopackets v2 Family of ``family`` as JSON data (camelCase names, as the schema's JSON form).

    Proband phenopacket: subject (sex, vital status), phenotypic features (HCM present with its
    onset age, or excluded when the latest assessment says unaffected; sudden cardiac death) and,
    when the proband carries a family variant, an interpretation with the variant as a
    VariationDescriptor and its current ACMG/AMP class.  Relatives: one phenopacket each for
    the members with a recorded feature.  ``rename(kind, code)`` maps family and person codes
    (pseudonymisation); dates of birth and test dates are not written (onsets are ages).
    Raises ValueError for a family without members or without a recorded proband.
    """
    rename = rename or (lambda kind, code: code)
    members = family_members(people, family)
    codes = set(members["person"])
    by_code = {r["person"]: r for r in members.to_dict("records")}
    probands = [p for p in by_code if bool(by_code[p]["proband"])]
    if not probands:
        raise ValueError(f"family {family} has no recorded proband")
    proband = probands[0]
    status = affection(members, assessments)
    fid = rename("family", family)

    current: dict[str, dict] = {}  # 'transcript:hgvs_c' -> latest classification row
    fam_variants = variants[variants["family"] == family] if len(variants) else variants
    if len(fam_variants):
        for rec in fam_variants.sort_values("classified_on", kind="stable").to_dict("records"):
            current[f"{rec['transcript']}:{rec['hgvs_c']}"] = rec
    carried: dict[str, list[dict]] = {}
    if len(results):
        mine = results[results["person"].isin(codes) & (results["result"] == "carrier")]
        for rec in mine.sort_values(["person", "test_date"], kind="stable").to_dict("records"):
            if (v := current.get(cell_text(rec.get("variant")) or "")) is not None:
                carried.setdefault(rec["person"], []).append(v)

    def packet(p: str) -> dict:
        pid = rename("person", p)
        out: dict = {"id": f"{fid}:{pid}", "subject": _subject(by_code[p], pid)}
        if features := _features(by_code[p], status[p]):
            out["phenotypicFeatures"] = features
        if p in carried:
            out["interpretations"] = [_interpretation(pid, v, fid) for v in carried[p][:1]]
        return out

    relatives = [packet(p) for p in by_code if p != proband and (_features(by_code[p], status[p]) or p in carried)]
    persons = []
    for p, rec in by_code.items():
        mother, father = genetic_parents(rec, codes)
        person = {"familyId": fid, "individualId": rename("person", p),
                  "sex": SEX_ENUM.get(cell_text(rec.get("sex_at_birth")) or "", "UNKNOWN_SEX"),
                  "affectedStatus": {"affected": "AFFECTED", "unaffected": "UNAFFECTED"}.get(status[p], "MISSING")}  # fmt: skip
        if father:
            person["paternalId"] = rename("person", father)
        if mother:
            person["maternalId"] = rename("person", mother)
        persons.append(person)
    out = {"id": fid, "proband": packet(proband)}
    if relatives:
        out["relatives"] = relatives
    out["pedigree"] = {"persons": persons}
    out["metaData"] = {
        "created": created.astimezone(dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "createdBy": "tracker",
        "resources": [dict(r) for r in RESOURCES],
        "phenopacketSchemaVersion": SCHEMA_VERSION,
    }
    return out


def validate_phenopacket(data: dict) -> None:
    """Parse ``data`` with the phenopackets package's protobuf Family (ValueError when it does not parse)."""
    from google.protobuf.json_format import ParseDict, ParseError
    from phenopackets import Family

    try:
        ParseDict(data, Family())
    except ParseError as exc:
        raise ValueError(f"not a valid Phenopackets v2 Family: {exc}") from None


def phenopacket_json(data: dict) -> str:
    return json.dumps(data, indent=2, ensure_ascii=False) + "\n"
