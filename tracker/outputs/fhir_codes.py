"""Code systems and code tables for the FHIR export, each with its source and confidence tag.

Tags (as in ``docs/reference/``): **[V]** seen in the primary source, **[V2]** only
in a secondary copy, **[M]** from memory (marked "from memory, verify").  Sources:

* ``standards.md`` = ``docs/reference/standards.md`` (its section named beside each code).
* *IG source* = the HL7 Genomics Reporting IG source files (github.com/HL7/genomics-reporting,
  ``input/fsh``: profiles ``CGFindings.fsh``, ``CGImplications.fsh``, ``CGGeneral.fsh``,
  aliases ``Aliases.fsh`` and the example instances).
* *FHIR R4 pages* = hl7.org/fhir/R4 code system pages and the v3 FamilyMember value set
  (hl7.org/fhir/stu3/v3/FamilyMember/vs.html, 105 concepts under FAMMEMB).

Nothing here is a clinical number; these are identifiers.  A code whose tag is not [V]
should be checked against the terminology server of the receiving system before
production use.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Code:
    """One coded concept: system URI, code, display, confidence tag and source."""

    system: str
    code: str
    display: str
    tag: str
    source: str

    def coding(self, *, with_display: bool = True) -> dict:
        out = {"system": self.system, "code": self.code}
        if with_display and self.display:
            out["display"] = self.display
        return out


# ---------------------------------------------------------------------------
# code system URIs
# ---------------------------------------------------------------------------

LOINC = "http://loinc.org"  # [V] IG source Aliases.fsh ($LNC)
SNOMED = "http://snomed.info/sct"  # [V] IG source Aliases.fsh ($SCT)
HPO = "http://human-phenotype-ontology.org"  # [V] IG source Aliases.fsh ($HPO)
UCUM = "http://unitsofmeasure.org"  # [V] IG source Aliases.fsh ($UCUM)
HGVS = "http://varnomen.hgvs.org"  # [V] IG source Aliases.fsh ($HGVS)
REFSEQ = "http://www.ncbi.nlm.nih.gov/refseq"  # [V] IG source Aliases.fsh ($NCBIREFSEQ)
HGNC = "http://www.genenames.org"  # [V] IG source Aliases.fsh ($HGNCID); older IG examples use .../geneId
ROLE_CODE = "http://terminology.hl7.org/CodeSystem/v3-RoleCode"  # [V] HL7 Terminology (THO) pages
OBSERVATION_CATEGORY = "http://terminology.hl7.org/CodeSystem/observation-category"  # [V] FHIR R4 pages
DIAGNOSTIC_SERVICE = "http://terminology.hl7.org/CodeSystem/v2-0074"  # [V] IG source Aliases.fsh
GENOMICS_TBD = "http://hl7.org/fhir/uv/genomics-reporting/CodeSystem/tbd-codes-cs"  # [V] IG source (TbdCodesCS)
ADMINISTRATIVE_GENDER = "http://hl7.org/fhir/administrative-gender"  # [V] FHIR R4 (Patient.gender binding)

# Local code systems of this tool (URNs named here; a clinic that publishes its own
# identifier namespace should map these on import into its own systems).
LOCAL_PERSON = "urn:tracker:person"  # Patient.identifier: the pseudonymous person code
LOCAL_FAMILY = "urn:tracker:family"  # Bundle.identifier: the family code
LOCAL_RELATIVE = "urn:tracker:family-member"  # FamilyMemberHistory.identifier: the relative's person code
LOCAL_MEASURE = "urn:tracker:measure"  # Observation.code: the measure catalogue code
LOCAL_LAB_REPORT = "urn:tracker:lab-report"  # variant Observation.identifier: the laboratory report reference
LOCAL_TEST_TYPE = "urn:tracker:test-type"  # variant Observation.method: diagnostic_panel or predictive
# Patient.extension (complex): one per clinic assessment, sub-extensions "date" (valueDate) and
# "affected-status" (valueCode: affected, unaffected, uncertain).  Local to this tool.
EXT_ASSESSMENT = "urn:tracker:assessment"

# FamilyMemberHistory extensions of the FHIR core extension registry ([V] the FHIR extension pages
# for family-member-history-genetics-parent (sub-extensions type and reference, the reference to the
# parent's FamilyMemberHistory) and familymemberhistory-patient-record (valueReference Patient)).
EXT_FMH_PARENT = "http://hl7.org/fhir/StructureDefinition/family-member-history-genetics-parent"
EXT_FMH_PATIENT_RECORD = "http://hl7.org/fhir/StructureDefinition/familymemberhistory-patient-record"
# Same registry and shape as the parent extension (type, reference): from memory, verify [M].
EXT_FMH_SIBLING = "http://hl7.org/fhir/StructureDefinition/family-member-history-genetics-sibling"

# Namespace for the uuid5 resource ids (any fixed UUID works; changing it changes every id).
ID_NAMESPACE_NAME = "urn:tracker:fhir"

# Genomics Reporting IG profile canonicals ([V] IG source: example meta.profile and the
# reference target in CGImplications.fsh).  Claimed only on request: conformance of the
# exported resources has not been checked with the HL7 validator.
PROFILE_VARIANT = "http://hl7.org/fhir/uv/genomics-reporting/StructureDefinition/variant"
PROFILE_DIAGNOSTIC_IMPLICATION = (
    "http://hl7.org/fhir/uv/genomics-reporting/StructureDefinition/diagnostic-implication"
)

# ---------------------------------------------------------------------------
# LOINC for measures: only codes listed in standards.md section 4a (echo) and 4b (CMR), all [V]
# ---------------------------------------------------------------------------
# The measure catalogue carries a ``loinc`` column; the export uses it only when the code is
# in this table.  Displays are left out of the coding: the reference notes hold DICOM code
# meanings, which are colloquial, not LOINC long common names (standards.md 4a).

_S4A = "standards.md 4a (DICOM PS3.16 context groups)"
_S4B = "standards.md 4b"
MEASURE_LOINC: dict[str, tuple[str, str]] = {
    # code: (what it is in the reference notes, source)
    "18154-5": ("IVSd, older code", _S4A),
    "79969-2": ("IVSd, 2D (ASE core set)", _S4A),
    "79968-4": ("IVSd, M-mode", _S4A),
    "18158-6": ("IVSs, older code", _S4A),
    "79971-8": ("IVSs, 2D", _S4A),
    "79970-0": ("IVSs, M-mode", _S4A),
    "18152-9": ("LVPWd, older code", _S4A),
    "80031-8": ("LVPWd, 2D/M-mode pair (check which)", _S4A),
    "80032-6": ("LVPWd, 2D/M-mode pair (check which)", _S4A),
    "18156-0": ("LVPWs, older code", _S4A),
    "80033-4": ("LVPWs pair", _S4A),
    "80034-2": ("LVPWs pair", _S4A),
    "18155-2": ("IVS/PW ratio", _S4A),
    "29436-3": ("LVIDd, older code", _S4A),
    "80007-8": ("LVIDd, 2D", _S4A),
    "80008-6": ("LVIDd, M-mode", _S4A),
    "29438-9": ("LVIDs, older code", _S4A),
    "80011-0": ("LVIDs, 2D", _S4A),
    "80012-8": ("LVIDs, M-mode", _S4A),
    "10230-1": ("LVEF, any method", _S4A),
    "18043-0": ("LVEF by ultrasound", _S4A),
    "79991-6": ("LVEF, biplane method of disks", _S4A),
    "79990-8": ("LVEF, 3D", _S4A),
    "77891-0": ("LVEF, Teichholz 2D", _S4A),
    "18049-7": ("LVEF, Teichholz M-mode", _S4A),
    "29469-4": ("LA AP diameter, older code", _S4A),
    "79975-9": ("LA AP diameter, 2D", _S4A),
    "79977-5": ("LA AP diameter, M-mode", _S4A),
    "79984-1": ("LA volume index, biplane method of disks / BSA", _S4A),
    "79982-5": ("LA volume index, area-length / BSA", _S4A),
    "80054-0": ("e' lateral", _S4A),
    "79911-4": ("e' septal", _S4A),
    "18037-2": ("mitral E, older code", _S4A),
    "17978-8": ("mitral A, older code", _S4A),
    "18038-0": ("mitral E/A, older code", _S4A),
    "80070-6": ("mitral E", _S4A),
    "80066-4": ("mitral A", _S4A),
    "20247-3": ("peak gradient (post-coordinated with a finding site)", _S4A),
    "80029-2": ("LVOT Vmax", _S4A),
    "18087-7": ("LV mass", _S4A),
    "80019-3": ("LV mass, linear 2D", _S4A),
    "18026-5": ("LVEDV", _S4A),
    "18148-7": ("LVESV", _S4A),
    "79996-5": ("LVEDV, biplane", _S4A),
    "80001-1": ("LVESV, biplane", _S4A),
    "8811-2": ("LVEF by MR", _S4B),
    "8818-7": ("RVEF by MR", _S4B),
}

# ---------------------------------------------------------------------------
# Genomics Reporting IG (standards.md 3b, all [V] unless marked)
# ---------------------------------------------------------------------------

_S3B = "standards.md 3b (Genomics Reporting IG)"
VARIANT_CODE = Code(LOINC, "69548-6", "Genetic variant assessment", "[V]", _S3B)
GENE_STUDIED = Code(LOINC, "48018-6", "Gene studied [ID]", "[V]", _S3B)
CODING_HGVS = Code(LOINC, "48004-6", "DNA change (c.HGVS)", "[V]", _S3B)
PROTEIN_HGVS = Code(LOINC, "48005-3", "Amino acid change (pHGVS)", "[V]", _S3B)
TRANSCRIPT_REF_SEQ = Code(LOINC, "51958-7", "Transcript reference sequence [ID]", "[V]", _S3B)
ALLELIC_STATE = Code(LOINC, "53034-5", "Allelic state", "[V]", _S3B)
CLINICAL_SIGNIFICANCE = Code(LOINC, "53037-8", "Genetic variation clinical significance [Imp]", "[V]", _S3B)
ASSOCIATED_PHENOTYPE = Code(LOINC, "81259-4", "Associated phenotype", "[V]", _S3B)

PRESENT = Code(LOINC, "LA9633-4", "Present", "[V]", _S3B + " (answer list LL1971-2)")
# Not in the reference notes.  Several independent secondary copies give LA9634-2 = Absent as the
# other answer of LL1971-2 beside LA9633-4 Present: [V2], confirm in the LOINC answer list.
ABSENT = Code(LOINC, "LA9634-2", "Absent", "[V2]", "secondary copies of LL1971-2; confirm in LOINC")
HETEROZYGOUS = Code(LOINC, "LA6706-1", "Heterozygous", "[V]", _S3B + " (allelic-state answer)")

# Answers of LL4034-6 for the ACMG/AMP classes (standards.md 3b, [V]).
CLINICAL_SIGNIFICANCE_ANSWERS: dict[str, Code] = {
    "pathogenic": Code(LOINC, "LA6668-3", "Pathogenic", "[V]", _S3B),
    "likely_pathogenic": Code(LOINC, "LA26332-9", "Likely pathogenic", "[V]", _S3B),
    "uncertain_significance": Code(LOINC, "LA26333-7", "Uncertain significance", "[V]", _S3B),
    "likely_benign": Code(LOINC, "LA26334-5", "Likely benign", "[V]", _S3B),
    "benign": Code(LOINC, "LA6675-8", "Benign", "[V]", _S3B),
}

# Diagnostic implication Observation.code and the genetics category ([V] IG source:
# ``code = TbdCodesCS#diagnostic-implication``; category slices labCategory and geCategory).
DIAGNOSTIC_IMPLICATION = Code(
    GENOMICS_TBD, "diagnostic-implication", "Diagnostic Implication", "[V]", "IG source CGImplications.fsh"
)
CATEGORY_GENETICS = Code(DIAGNOSTIC_SERVICE, "GE", "Genetics", "[V]", "IG source CGGeneral.fsh / examples")

# HGNC gene ids of the usual sarcomere genes.  Not in the reference notes; the same ids appear in
# several independent secondary copies: [V2], confirm at the HGNC.
# A gene not listed here is exported with its symbol as text only.
HGNC_IDS: dict[str, str] = {
    "MYH7": "HGNC:7577",
    "MYBPC3": "HGNC:7551",
    "TNNI3": "HGNC:11947",
    "TNNT2": "HGNC:11949",
    "TPM1": "HGNC:12010",
    "ACTC1": "HGNC:143",
    "MYL2": "HGNC:7583",
    "MYL3": "HGNC:7584",
}
HGNC_TAG = "[V2]"

# ---------------------------------------------------------------------------
# the condition
# ---------------------------------------------------------------------------

HCM_SNOMED = Code(SNOMED, "233873004", "Hypertrophic cardiomyopathy", "[V]", "standards.md 4d")
HCM_HPO = Code(HPO, "HP:0001639", "Hypertrophic cardiomyopathy", "[V]", "standards.md 4c")
# A relative's recorded sudden death (person.death_cause "sudden").
SCD_HPO = Code(HPO, "HP:0001645", "Sudden cardiac death", "[V]", "standards.md 4c")

# ---------------------------------------------------------------------------
# Observation categories by study modality
# ---------------------------------------------------------------------------

_R4_CAT = "FHIR R4 observation-category code system"
CATEGORY_LABORATORY = Code(OBSERVATION_CATEGORY, "laboratory", "Laboratory", "[V]", _R4_CAT)
MODALITY_CATEGORY: dict[str, Code] = {
    # "imaging" covers ultrasound, MRI and echocardiography in its definition: [V].
    "echo": Code(OBSERVATION_CATEGORY, "imaging", "Imaging", "[V]", _R4_CAT),
    "cmr": Code(OBSERVATION_CATEGORY, "imaging", "Imaging", "[V]", _R4_CAT),
    # ECG as a non-imaging procedure; from memory, verify.
    "ecg": Code(OBSERVATION_CATEGORY, "procedure", "Procedure", "[M]", _R4_CAT + " (from memory, verify)"),
    # Clinic-visit values (none in the catalogue yet); from memory, verify.
    "clinic": Code(OBSERVATION_CATEGORY, "exam", "Exam", "[M]", _R4_CAT + " (from memory, verify)"),
}

# ---------------------------------------------------------------------------
# UCUM codes for the catalogue units (UCUM case-sensitive codes; common practice,
# from memory, verify against the UCUM table)
# ---------------------------------------------------------------------------

UCUM_CODES: dict[str, str] = {
    "mm": "mm",
    "%": "%",
    "mL/m2": "mL/m2",
    "g/m2": "g/m2",
    "g": "g",
    "cm/s": "cm/s",
    "m/s": "m/s",
    "mmHg": "mm[Hg]",
    "ms": "ms",
    "ratio": "1",  # a dimensionless ratio: UCUM unity
    "segments": "{segments}",  # a count: UCUM annotation (equal to 1)
}

# ---------------------------------------------------------------------------
# Administrative gender from the recorded sex at birth
# ---------------------------------------------------------------------------

GENDER = {"female": "female", "male": "male", "unknown": "unknown"}  # [V] FHIR R4 administrative-gender

# ---------------------------------------------------------------------------
# HL7 v3 RoleCode (FamilyMember value set) for relationships to the proband
# ---------------------------------------------------------------------------
# [V]: seen on the FHIR FamilyMember value-set pages (hl7.org/fhir, DSTU2/STU3 v3 FamilyMember).
# [V2]: seen only in secondary copies of the RoleCode list (several, all agreeing).
# None of the codes below is from memory alone.

_VS = "FHIR v3 FamilyMember value set page"
_COPY = "secondary copies of v3 RoleCode"


def _rc(code: str, display: str, tag: str) -> Code:
    return Code(ROLE_CODE, code, display, tag, _VS if tag == "[V]" else _COPY)


ROLE_CODES: dict[str, Code] = {
    c.code: c
    for c in (
        _rc("FAMMEMB", "family member", "[V]"),
        _rc("CHILD", "child", "[V]"),
        _rc("NCHILD", "natural child", "[V]"),
        _rc("DAU", "natural daughter", "[V]"),
        _rc("SON", "natural son", "[V]"),
        _rc("CHLDADOPT", "adopted child", "[V]"),
        _rc("DAUADOPT", "adopted daughter", "[V]"),
        _rc("SONADOPT", "adopted son", "[V]"),
        _rc("AUNT", "aunt", "[V]"),
        _rc("COUSN", "cousin", "[V]"),
        _rc("GGRPRN", "great grandparent", "[V]"),
        _rc("GGRFTH", "great grandfather", "[V]"),
        _rc("GGRMTH", "great grandmother", "[V2]"),
        _rc("MTH", "mother", "[V2]"),
        _rc("FTH", "father", "[V2]"),
        _rc("PRN", "parent", "[V2]"),
        _rc("SIS", "sister", "[V2]"),
        _rc("BRO", "brother", "[V2]"),
        _rc("SIB", "sibling", "[V2]"),
        _rc("HSIS", "half-sister", "[V2]"),
        _rc("HBRO", "half-brother", "[V2]"),
        _rc("HSIB", "half-sibling", "[V2]"),
        _rc("TWINSIS", "twin sister", "[V2]"),
        _rc("TWINBRO", "twin brother", "[V2]"),
        _rc("TWIN", "twin", "[V2]"),
        _rc("FTWINSIS", "fraternal twin sister", "[V2]"),
        _rc("FTWINBRO", "fraternal twin brother", "[V2]"),
        _rc("FTWIN", "fraternal twin", "[V2]"),
        _rc("ITWINSIS", "identical twin sister", "[V2]"),
        _rc("ITWINBRO", "identical twin brother", "[V2]"),
        _rc("ITWIN", "identical twin", "[V2]"),
        _rc("GRMTH", "grandmother", "[V2]"),
        _rc("GRFTH", "grandfather", "[V2]"),
        _rc("GRPRN", "grandparent", "[V2]"),
        _rc("GRNDDAU", "granddaughter", "[V2]"),
        _rc("GRNDSON", "grandson", "[V2]"),
        _rc("GRNDCHILD", "grandchild", "[V2]"),
        _rc("UNCLE", "uncle", "[V2]"),
        _rc("NIECE", "niece", "[V2]"),
        _rc("NEPHEW", "nephew", "[V2]"),
        _rc("NIENEPH", "niece/nephew", "[V2]"),
        _rc("ADOPTM", "adoptive mother", "[V2]"),
        _rc("ADOPTF", "adoptive father", "[V2]"),
        _rc("ADOPTP", "adoptive parent", "[V2]"),
        # Parent types of the genetics-parent extension: natural mother/father, from memory, verify.
        _rc("NMTH", "natural mother", "[M]"),
        _rc("NFTH", "natural father", "[M]"),
    )
}
# genetics-parent extension type by the parent's role in the person record.
PARENT_TYPE = {"mother": "NMTH", "father": "NFTH"}
ADOPTIVE_PARENT_TYPE = {"mother": "ADOPTM", "father": "ADOPTF"}  # for a person adopted in
# genetics-sibling extension type of a co-twin link, by the recorded twin_type (then the sex of the co-twin).
TWIN_TYPE_ROLE: dict[str, tuple[str, str, str]] = {
    "monozygotic": ("ITWINSIS", "ITWINBRO", "ITWIN"),
    "dizygotic": ("FTWINSIS", "FTWINBRO", "FTWIN"),
    "unknown": ("TWINSIS", "TWINBRO", "TWIN"),
}

# Relationship words of :meth:`tracker.domain.pedigree.Pedigree.relationship` (what the relative
# is to the proband) -> RoleCode by the relative's sex (female, male, unknown).  Words not listed
# (half aunt/uncle, great-aunt/uncle, cousins other than first cousins, "relative, Nth degree",
# partners and other non-blood relatives) get the generic FAMMEMB with the words as text.
RELATIONSHIP_ROLE: dict[str, tuple[str, str, str]] = {
    "parent": ("MTH", "FTH", "PRN"),
    "grandparent": ("GRMTH", "GRFTH", "GRPRN"),
    "great-grandparent": ("GGRMTH", "GGRFTH", "GGRPRN"),
    "child": ("DAU", "SON", "NCHILD"),
    "grandchild": ("GRNDDAU", "GRNDSON", "GRNDCHILD"),
    "full sibling": ("SIS", "BRO", "SIB"),
    "full sibling (dizygotic co-twin)": ("FTWINSIS", "FTWINBRO", "FTWIN"),
    "full sibling (co-twin, zygosity unknown)": ("TWINSIS", "TWINBRO", "TWIN"),
    "monozygotic co-twin": ("ITWINSIS", "ITWINBRO", "ITWIN"),
    "half sibling": ("HSIS", "HBRO", "HSIB"),
    "aunt/uncle": ("AUNT", "UNCLE", "FAMMEMB"),
    "niece/nephew": ("NIECE", "NEPHEW", "NIENEPH"),
    # COUSN is a cousin of any kind; used only for first cousins, the words carry the detail.
    "first cousin": ("COUSN", "COUSN", "COUSN"),
    "double first cousin": ("COUSN", "COUSN", "COUSN"),
    "adoptive parent (not a blood relative)": ("ADOPTM", "ADOPTF", "ADOPTP"),
    "adopted-in child (not a blood relative)": ("DAUADOPT", "SONADOPT", "CHLDADOPT"),
}
GENERIC_ROLE = "FAMMEMB"
