"""Importing one family from an HL7 FHIR R4B Bundle (JSON) of the shapes ``tracker export --fhir`` writes.

The Bundle is turned into rows of the CSV import layouts (text cells) and handed to the same
parsing, checks, comparison with the store and writers as a CSV file
(:func:`tracker.io.csv_import.import_cells`): one set of rules for both.  All or nothing: any
problem stops the import before anything is written, and every problem is reported on one
line naming the resource (``Type/id``) and the element path.

What is read (the inverse of :mod:`tracker.outputs.fhir`)
---------------------------------------------------------
* ``Bundle.identifier`` (system ``urn:tracker:family``): the family code.
* **Patient** (person code in ``urn:tracker:person``): sex at birth from ``gender``, birth
  date, vital status and death date, names, and the clinic assessments carried in the
  local ``urn:tracker:assessment`` extension (date and affected status).
* **FamilyMemberHistory** (relative's code in ``urn:tracker:family-member``): ``patient`` is
  the proband; sex, birth and death as above (``deceasedAge`` = age at death); the HCM
  condition's ``onsetAge`` = age at diagnosis; a sudden-cardiac-death condition = cause of
  death "sudden" (its ``onsetAge`` = age at death); the genetics ``parent`` and ``sibling``
  extensions = mother, father and co-twin; ``relationship`` MTH/FTH/PRN = a parent of the
  proband, DAU/SON/NCHILD = a child of the proband, a twin code = the proband's co-twin; the
  placeholder note.
* **Observation**: a measurement (local ``urn:tracker:measure`` code, else a LOINC code the
  measure catalogue holds) -> one studies row (modality from the catalogue); a variant
  Observation (LOINC 69548-6) -> a genetic result (Present = carrier, Absent = non-carrier;
  test type from ``method``) and, for a carrier, the variant; a diagnostic implication ->
  the variant's current class (and the earlier classes listed in its note).

Fields the Bundle does not carry (notes, contact status, study site and body size, the
variant's reason, ...) keep what the store holds for a record already stored, and are empty
for a new one.  Anything else in the Bundle (other resource types, codes the importer does not
read) is listed as a problem, never dropped silently.
"""

from __future__ import annotations

import datetime as dt
import json
import re
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd
from sqlalchemy import Connection

from tracker.domain.vocabulary import ACMG_SHORT
from tracker.io import csv_import, validation
from tracker.io.columns import format_cell
from tracker.io.export import export_frame
from tracker.io.layouts import LAYOUTS, RECORD_KINDS as IMPORT_ORDER
from tracker.io.reading import MAX_FILE_BYTES, InputRejected, Problem
from tracker.outputs import fhir_codes as fc

HCM_CONDITION = "hypertrophic cardiomyopathy"  # a new family's condition when the Bundle codes HCM
_CLASS_OF_ANSWER = {c.code: cls for cls, c in fc.CLINICAL_SIGNIFICANCE_ANSWERS.items()}
_CLASS_OF_SHORT = {short: cls for cls, short in ACMG_SHORT.items()}
_RESULT_OF_ANSWER = {fc.PRESENT.code: "carrier", fc.ABSENT.code: "non_carrier"}
_UNIT_OF_UCUM = {ucum: unit for unit, ucum in fc.UCUM_CODES.items()}
_PARENT_ROLES = {"MTH": "female", "FTH": "male", "PRN": None}
_CHILD_ROLES = {"DAU", "SON", "NCHILD"}
_ADOPTED_CHILD_ROLES = {"DAUADOPT", "SONADOPT", "CHLDADOPT"}
_ADOPTIVE_PARENT_ROLES = {"ADOPTM": "female", "ADOPTF": "male", "ADOPTP": None}
_PARENT_EXT_TYPES = {"NMTH": ("mother", None), "NFTH": ("father", None),
                     "ADOPTM": ("mother", "in"), "ADOPTF": ("father", "in")}  # fmt: skip
_TWIN_OF_ROLE = {code: zyg for zyg, codes in fc.TWIN_TYPE_ROLE.items() for code in codes}
_PLACEHOLDER_NOTE = "placeholder"


@dataclass
class _Table:
    """Rows of one layout read from the Bundle: cells (None = the Bundle says nothing) and where from."""

    kind: str
    rows: list[dict] = field(default_factory=list)
    where: list[tuple[str, dict[str, str]]] = field(default_factory=list)

    def add(self, cells: dict, label: str, paths: dict[str, str]) -> None:
        self.rows.append(cells)
        self.where.append((label, paths))


# --------------------------------------------------------------------------- reading the file


def read_bundle(path: Path) -> dict:
    """The Bundle as JSON data, checked against the FHIR R4B model; InputRejected otherwise."""
    name = path.name

    def refuse(message: str):
        raise InputRejected([Problem(name, None, None, message)])

    if not path.exists():
        refuse("file not found")
    if path.is_dir():
        refuse("is a folder, not a FHIR Bundle file")
    if path.stat().st_size > MAX_FILE_BYTES:
        refuse("file is larger than 2 GiB")
    try:
        data = json.loads(path.read_bytes().decode("utf-8-sig"))
    except UnicodeDecodeError as exc:
        refuse(f"is not UTF-8 text (byte {exc.start})")
    except json.JSONDecodeError as exc:
        refuse(f"is not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})")
    if not isinstance(data, dict):
        refuse("is not a FHIR resource (a JSON object with resourceType 'Bundle')")
    if data.get("resourceType") != "Bundle":
        refuse(f"resourceType is {data.get('resourceType')!r}, not 'Bundle'")
    from fhir.resources.R4B.bundle import Bundle
    from pydantic import ValidationError

    try:
        Bundle.model_validate(data)
    except ValidationError as exc:
        problems = []
        for err in exc.errors():
            loc = _element_path(err.get("loc", ()), data)
            problems.append(Problem(name, None, None, f"{loc}: {err.get('msg', 'invalid')} (FHIR R4B)"))
        raise InputRejected(problems) from None
    return data


def _element_path(loc: tuple, data: dict) -> str:
    """'Bundle entry[2].resource ...' as 'Observation/id element.path' where the entry is known."""
    parts = [str(p) for p in loc if not str(p).startswith("function-")]
    if len(parts) >= 3 and parts[0] == "entry" and parts[1].isdigit() and parts[2] == "resource":
        i = int(parts[1])
        try:
            res = data["entry"][i]["resource"]
            label = _label(res, i)
        except (KeyError, IndexError, TypeError):
            label = f"entry[{i}]"
        return f"{label} {_dotted(parts[3:]) or '(resource)'}"
    return f"Bundle {_dotted(parts) or '(resource)'}"


def _dotted(parts: list[str]) -> str:
    out = ""
    for p in parts:
        out += f"[{p}]" if p.isdigit() else (f".{p}" if out else p)
    return out


def _label(res: dict, i: int) -> str:
    kind = res.get("resourceType", "resource") if isinstance(res, dict) else "resource"
    rid = res.get("id") if isinstance(res, dict) else None
    return f"{kind}/{rid}" if rid else f"entry[{i}] {kind}"


# --------------------------------------------------------------------------- small helpers


def _codings(cc: dict | None) -> list[dict]:
    return [c for c in (cc or {}).get("coding", []) if isinstance(c, dict)]


def _code_in(cc: dict | None, system: str) -> str | None:
    return next((c.get("code") for c in _codings(cc) if c.get("system") == system), None)


def _has(cc: dict | None, code: fc.Code) -> bool:
    return any(c.get("system") == code.system and c.get("code") == code.code for c in _codings(cc))


def _shown(cc: dict | None) -> str:
    codes = [f"{c.get('system', '?')}|{c.get('code', '?')}" for c in _codings(cc)]
    return ", ".join(codes) or repr((cc or {}).get("text", "(no coding)"))


def _ext(res: dict, url: str) -> list[dict]:
    return [e for e in res.get("extension", []) if isinstance(e, dict) and e.get("url") == url]


def _sub(ext: dict, url: str) -> dict:
    return next((e for e in ext.get("extension", []) if e.get("url") == url), {})


def _identifier(res: dict, system: str) -> str | None:
    ids = res.get("identifier")
    ids = ids if isinstance(ids, list) else [ids] if isinstance(ids, dict) else []
    return next((i.get("value") for i in ids if i.get("system") == system and i.get("value")), None)


def _years(age: dict | None) -> str | None:
    if not age or age.get("value") is None:
        return None
    value = age["value"]
    return format_cell(int(value)) if float(value).is_integer() else str(value)


# --------------------------------------------------------------------------- the Bundle as rows


class _Reader:
    def __init__(self, name: str, data: dict, ctx: validation.Context):
        self.name = name
        self.ctx = ctx
        self.problems: list[Problem] = []
        self.tables = {k: _Table(k) for k in IMPORT_ORDER}
        self.entries: list[tuple[str, dict]] = []
        self.index: dict[str, tuple[str, dict]] = {}
        for i, entry in enumerate(data.get("entry") or []):
            res = entry.get("resource") or {}
            label = _label(res, i)
            self.entries.append((label, res))
            if url := entry.get("fullUrl"):
                self.index[url] = (label, res)
            if res.get("id"):
                self.index[f"{res.get('resourceType')}/{res['id']}"] = (label, res)
        self.family = _identifier(data, fc.LOCAL_FAMILY)
        if self.family is None:
            self.problem("Bundle", "identifier", f"no family code (an identifier with system {fc.LOCAL_FAMILY})")

    def problem(self, label: str, path: str, message: str) -> None:
        self.problems.append(Problem(self.name, None, None, f"{label} {path}: {message}"))

    def target(self, label: str, path: str, ref: dict | None, kind: str) -> tuple[str, dict] | None:
        """The resource a Reference points to, within the Bundle (a problem when it is not there)."""
        text = (ref or {}).get("reference")
        if not text:
            self.problem(label, path, f"no reference to a {kind}")
            return None
        found = self.index.get(text)
        if found is None:
            self.problem(label, path, f"refers to {text}, which is not in the Bundle")
            return None
        if found[1].get("resourceType") != kind:
            self.problem(label, path, f"refers to {found[0]}, not a {kind}")
            return None
        return found

    # ---------------------------------------------------------------- people

    def read(self) -> None:
        patients = [(lb, r) for lb, r in self.entries if r.get("resourceType") == "Patient"]
        histories = [(lb, r) for lb, r in self.entries if r.get("resourceType") == "FamilyMemberHistory"]
        observations = [(lb, r) for lb, r in self.entries if r.get("resourceType") == "Observation"]
        for label, res in self.entries:
            if res.get("resourceType") not in ("Patient", "FamilyMemberHistory", "Observation", "Condition"):
                self.problem(label, "resourceType", "this resource type is not imported")
        self.person_of: dict[int, str] = {}  # id(resource) -> person code
        for label, res in patients:
            code = _identifier(res, fc.LOCAL_PERSON)
            if code is None:
                self.problem(label, "identifier", f"no person code (an identifier with system {fc.LOCAL_PERSON})")
            else:
                self.person_of[id(res)] = code
        for label, res in histories:
            code = _identifier(res, fc.LOCAL_RELATIVE)
            if code is None:
                self.problem(label, "identifier",
                             f"no relative's code (an identifier with system {fc.LOCAL_RELATIVE})")  # fmt: skip
            else:
                self.person_of[id(res)] = code
        people: dict[str, tuple[dict, str, dict]] = {}  # code -> (cells, label, paths)
        proband = None
        for group in (patients, histories):  # one Patient and one FamilyMemberHistory per person at most
            first: dict[str, str] = {}
            for label, res in group:
                code = self.person_of.get(id(res))
                if code is not None and code in first:
                    self.problem(label, "identifier", f"person {code} is also in {first[code]}")
                first.setdefault(code, label)
        for label, res in patients:
            if id(res) in self.person_of:
                people[self.person_of[id(res)]] = self._patient(label, res)
        for label, res in histories:
            found = self.target(label, "patient", res.get("patient"), "Patient")
            if found is not None and id(found[1]) in self.person_of:
                p = self.person_of[id(found[1])]
                if proband is not None and p != proband:
                    self.problem(label, "patient", f"names {p} as the proband; other entries name {proband}")
                proband = proband or p
        fmh_cells = {}
        for label, res in histories:
            if id(res) in self.person_of:
                fmh_cells[self.person_of[id(res)]] = self._history(label, res, proband, people)
        for code, (cells, label, paths) in fmh_cells.items():
            if code in people:  # also a Patient: the Patient's own elements come first
                mine = people[code][0]
                for k, v in cells.items():
                    if mine.get(k) is None:
                        mine[k] = v
            else:
                people[code] = (cells, label, paths)
        for code, (cells, label, paths) in people.items():
            if histories:
                cells["proband"] = "yes" if code == proband else "no"
        # Links to the proband carried by the relationship words (the extensions reference relatives only).
        if proband in people:
            psex = people[proband][0].get("sex_at_birth")
            for label, res in histories:
                code = self.person_of.get(id(res))
                if code is None or code == proband:
                    continue
                role = _code_in(res.get("relationship"), fc.ROLE_CODE)
                cells = people[code][0]
                if role in _PARENT_ROLES or role in _ADOPTIVE_PARENT_ROLES:
                    sex = {**_PARENT_ROLES, **_ADOPTIVE_PARENT_ROLES}[role] or cells.get("sex_at_birth")
                    column = {"female": "mother", "male": "father"}.get(sex or "")
                    if column:
                        people[proband][0][column] = code
                    if role in _ADOPTIVE_PARENT_ROLES:
                        people[proband][0]["adoption"] = "in"
                elif role in _CHILD_ROLES or role in _ADOPTED_CHILD_ROLES:
                    column = {"female": "mother", "male": "father"}.get(psex or "")
                    if column:
                        cells[column] = proband
                    if role in _ADOPTED_CHILD_ROLES:
                        cells["adoption"] = "in"
                elif role in _TWIN_OF_ROLE and cells.get("twin_of") is None:
                    cells["twin_of"], cells["twin_type"] = proband, _TWIN_OF_ROLE[role]
        for label, res in self.entries:
            if res.get("resourceType") == "Condition":
                self._condition(label, res, people)
        if self.family is not None:
            for code, (cells, label, paths) in people.items():
                self.tables["people"].add({"person": code, "family": self.family, **cells}, label, paths)
            self._family(observations, histories)
        self._observations(observations)

    def _condition(self, label: str, res: dict, people: dict) -> None:
        """A Patient's HCM (onsetAge = age at diagnosis) or sudden cardiac death (onsetAge = age at death)."""
        found = self.target(label, "subject", res.get("subject"), "Patient")
        code = self.person_of.get(id(found[1])) if found else None
        if code not in people:
            return
        cells, cc = people[code][0], res.get("code")
        if _has(cc, fc.SCD_HPO):
            cells["death_cause"] = "sudden"
            if (age := _years(res.get("onsetAge"))) is not None:
                cells["death_age"] = age
        elif _has(cc, fc.HCM_SNOMED) or _has(cc, fc.HCM_HPO) or (cc or {}).get("text"):
            cells["diagnosis_age"] = _years(res.get("onsetAge")) or ""
        else:
            self.problem(label, "code", f"{_shown(cc)} is not a condition the importer reads")

    def _family(self, observations, histories) -> None:
        condition = None
        for _, res in [*observations, *histories]:
            for cond in res.get("condition", []):  # a relative's condition that is not HCM-coded names it
                cc = cond.get("code") or {}
                if not (_has(cc, fc.HCM_SNOMED) or _has(cc, fc.HCM_HPO) or _has(cc, fc.SCD_HPO)) and cc.get("text"):
                    condition = cc["text"]
            for comp in res.get("component", []):
                if _has(comp.get("code"), fc.ASSOCIATED_PHENOTYPE):
                    cc = comp.get("valueCodeableConcept") or {}
                    condition = None if _has(cc, fc.HCM_SNOMED) or _has(cc, fc.HCM_HPO) else cc.get("text")
        stored = set(self.ctx.families["family"]) if len(self.ctx.families) else set()
        if condition is None and self.family not in stored:
            condition = HCM_CONDITION  # the export codes HCM (or writes no phenotype) for an HCM family
        self.tables["families"].add({"family": self.family, "condition": condition, "notes": None},
                                    "Bundle", {"family": "identifier", "condition": "(associated phenotype)"})  # fmt: skip

    def _vital(self, res: dict, cells: dict, date_key: str) -> None:
        if res.get(date_key):
            cells["vital_status"], cells["death_date"] = "deceased", str(res[date_key])
        elif res.get("deceasedAge"):
            cells["vital_status"], cells["death_date"] = "deceased", ""
            cells["death_age"] = _years(res["deceasedAge"])
        elif res.get("deceasedBoolean") is True:
            cells["vital_status"], cells["death_date"] = "deceased", ""
        elif res.get("deceasedBoolean") is False:
            cells["vital_status"], cells["death_date"] = "alive", ""
        else:
            cells["vital_status"], cells["death_date"] = "unknown", ""

    def _patient(self, label: str, res: dict) -> tuple[dict, str, dict]:
        cells: dict = {}
        gender = res.get("gender")
        if gender == "other":
            self.problem(label, "gender", "'other' has no sex-at-birth equivalent; give female, male or unknown")
        cells["sex_at_birth"] = gender or "unknown"
        cells["birth_date"] = str(res.get("birthDate") or "")
        self._vital(res, cells, "deceasedDateTime")
        cells["placeholder"] = "no"
        names = res.get("name") or []
        if names:
            cells["family_name"] = names[0].get("family") or ""
            cells["given_name"] = " ".join(names[0].get("given") or [])
        code = self.person_of[id(res)]
        for i, ext in enumerate(_ext(res, fc.EXT_ASSESSMENT)):
            day, status = _sub(ext, "date").get("valueDate"), _sub(ext, "affected-status").get("valueCode")
            where = f"extension[{i}]"
            self.tables["assessments"].add(
                {"person": code, "assessment_date": day or "", "affected_status": status or ""}, label,
                {"person": "identifier", "assessment_date": f"{where}.date", "affected_status": f"{where}.affected-status"},
            )  # fmt: skip
        paths = {"person": "identifier", "family": "(Bundle identifier)", "sex_at_birth": "gender",
                 "birth_date": "birthDate", "vital_status": "deceased[x]", "death_date": "deceasedDateTime",
                 "given_name": "name", "family_name": "name"}  # fmt: skip
        return cells, label, paths

    def _history(self, label: str, res: dict, proband: str | None, people: dict) -> tuple[dict, str, dict]:
        cells: dict = {}
        sex = _code_in(res.get("sex"), fc.ADMINISTRATIVE_GENDER)
        if sex == "other":
            self.problem(label, "sex", "'other' has no sex-at-birth equivalent; give female, male or unknown")
        cells["sex_at_birth"] = sex or "unknown"
        cells["birth_date"] = str(res.get("bornDate") or "")
        self._vital(res, cells, "deceasedDate")
        if name := res.get("name"):
            given, _, family = str(name).rpartition(" ")
            cells["given_name"], cells["family_name"] = given, family
        notes = " ".join(n.get("text", "") for n in res.get("note", []))
        cells["placeholder"] = "yes" if notes.startswith(_PLACEHOLDER_NOTE) else "no"
        cells["diagnosis_age"] = ""
        for i, cond in enumerate(res.get("condition", [])):
            cc = cond.get("code")
            if _has(cc, fc.SCD_HPO):
                cells["death_cause"] = "sudden"
                if (age := _years(cond.get("onsetAge"))) is not None:
                    cells["death_age"] = age
            elif _has(cc, fc.HCM_SNOMED) or _has(cc, fc.HCM_HPO) or (cc or {}).get("text"):
                cells["diagnosis_age"] = _years(cond.get("onsetAge")) or ""
            else:
                self.problem(label, f"condition[{i}].code", f"{_shown(cc)} is not a condition the importer reads")
        for i, ext in enumerate(res.get("extension", [])):
            url = ext.get("url")
            if url == fc.EXT_FMH_PATIENT_RECORD:
                found = self.target(label, f"extension[{i}].valueReference", ext.get("valueReference"), "Patient")
                if found is not None and self.person_of.get(id(found[1])) != self.person_of.get(id(res)):
                    self.problem(label, f"extension[{i}].valueReference",
                                 f"links to {found[0]}, a Patient with another person code")  # fmt: skip
            elif url in (fc.EXT_FMH_PARENT, fc.EXT_FMH_SIBLING):
                kind = _code_in(_sub(ext, "type").get("valueCodeableConcept"), fc.ROLE_CODE)
                found = self.target(label, f"extension[{i}].reference", _sub(ext, "reference").get("valueReference"),
                                    "FamilyMemberHistory")  # fmt: skip
                other = self.person_of.get(id(found[1])) if found else None
                if url == fc.EXT_FMH_PARENT and kind in _PARENT_EXT_TYPES:
                    column, adoption = _PARENT_EXT_TYPES[kind]
                    cells[column] = other
                    if adoption:
                        cells["adoption"] = adoption
                elif url == fc.EXT_FMH_SIBLING and kind in _TWIN_OF_ROLE:
                    cells["twin_of"], cells["twin_type"] = other, _TWIN_OF_ROLE[kind]
                else:
                    self.problem(label, f"extension[{i}].type", f"{kind!r} is not a relationship type the importer reads")
            else:
                self.problem(label, f"extension[{i}]", f"extension {url} is not read by the importer")
        paths = {"person": "identifier", "family": "(Bundle identifier)", "sex_at_birth": "sex",
                 "birth_date": "bornDate", "vital_status": "deceased[x]", "death_date": "deceasedDate",
                 "death_age": "deceasedAge", "diagnosis_age": "condition.onsetAge", "mother": "extension (parent)",
                 "father": "extension (parent)", "twin_of": "extension (sibling)", "given_name": "name",
                 "family_name": "name", "proband": "patient"}  # fmt: skip
        return cells, label, paths

    # ---------------------------------------------------------------- observations

    def _observations(self, observations) -> None:
        catalogue = self.ctx.measures
        by_loinc: dict[str, list[str]] = {}
        for rec in catalogue.to_dict("records"):
            if isinstance(rec.get("loinc"), str) and rec["loinc"]:
                by_loinc.setdefault(rec["loinc"], []).append(rec["code"])
        modality = dict(zip(catalogue["code"], catalogue["modality"]))
        implications: dict[str, tuple[str, dict]] = {}  # variant observation's fullUrl/ref -> implication
        variants: list[tuple[str, dict]] = []
        for label, res in observations:
            code = res.get("code")
            if _has(code, fc.VARIANT_CODE):
                variants.append((label, res))
            elif _has(code, fc.DIAGNOSTIC_IMPLICATION):
                for ref in res.get("derivedFrom", []):
                    found = self.target(label, "derivedFrom", ref, "Observation")
                    if found is not None:
                        implications[id(found[1])] = (label, res)
                if not res.get("derivedFrom"):
                    self.problem(label, "derivedFrom", "no reference to the variant Observation")
            else:
                local = _code_in(code, fc.LOCAL_MEASURE)
                loinc = _code_in(code, fc.LOINC)
                measure = local
                if measure is None and loinc is not None and len(by_loinc.get(loinc, [])) == 1:
                    measure = by_loinc[loinc][0]
                if measure is None:
                    why = (f"LOINC {loinc} is not a measure of the catalogue (see `tracker measures`)" if loinc
                           else f"{_shown(code)} is not a code the importer reads")  # fmt: skip
                    self.problem(label, "code.coding", why)
                    continue
                self._measurement(label, res, measure, modality.get(measure))
        for label, res in variants:
            self._variant(label, res, implications.get(id(res)))

    def _subject(self, label: str, res: dict) -> str | None:
        found = self.target(label, "subject", res.get("subject"), "Patient")
        return self.person_of.get(id(found[1])) if found else None

    def _measurement(self, label: str, res: dict, measure: str, modality: str | None) -> None:
        person = self._subject(label, res)
        quantity = res.get("valueQuantity") or {}
        unit = quantity.get("unit") or _UNIT_OF_UCUM.get(quantity.get("code"), quantity.get("code"))
        value = quantity.get("value")
        if person is None:
            return
        self.tables["studies"].add(
            {"person": person, "study_date": str(res.get("effectiveDateTime") or ""), "modality": modality or "",
             "site": None, "height_cm": None, "weight_kg": None, "measure": measure,
             "value": "" if value is None else format_cell(value), "unit": unit or ""},
            label,
            {"person": "subject", "study_date": "effectiveDateTime", "modality": "code (catalogue modality)",
             "measure": "code.coding", "value": "valueQuantity.value", "unit": "valueQuantity.unit"},
        )  # fmt: skip

    def _variant(self, label: str, res: dict, implication: tuple[str, dict] | None) -> None:
        person = self._subject(label, res)
        fields: dict[str, str | None] = {"gene": None, "variant": None, "hgvs_p": None, "zygosity": None}
        for i, comp in enumerate(res.get("component", [])):
            code, value = comp.get("code"), comp.get("valueCodeableConcept") or {}
            if _has(code, fc.GENE_STUDIED):
                fields["gene"] = next((c.get("display") for c in _codings(value) if c.get("system") == fc.HGNC),
                                      None) or value.get("text")  # fmt: skip
            elif _has(code, fc.CODING_HGVS):
                fields["variant"] = _code_in(value, fc.HGVS) or value.get("text")
            elif _has(code, fc.PROTEIN_HGVS):
                fields["hgvs_p"] = _code_in(value, fc.HGVS) or value.get("text")
            elif _has(code, fc.TRANSCRIPT_REF_SEQ):
                pass  # the transcript is the prefix of the c.HGVS expression
            elif _has(code, fc.ALLELIC_STATE):
                fields["zygosity"] = ("heterozygous" if _has(value, fc.HETEROZYGOUS)
                                      else str(value.get("text", "")).replace(" ", "_") or _shown(value))  # fmt: skip
            else:
                self.problem(label, f"component[{i}].code", f"{_shown(code)} is not a component the importer reads")
        answer = _code_in(res.get("valueCodeableConcept"), fc.LOINC)
        result = _RESULT_OF_ANSWER.get(answer or "")
        if result is None:
            self.problem(label, "valueCodeableConcept",
                         f"{_shown(res.get('valueCodeableConcept'))} is neither Present ({fc.PRESENT.code}) "
                         f"nor Absent ({fc.ABSENT.code})")  # fmt: skip
        test_type = _code_in(res.get("method"), fc.LOCAL_TEST_TYPE)
        performer = (res.get("performer") or [{}])[0]
        if person is not None and result is not None:
            self.tables["genetic-results"].add(
                {"person": person, "test_date": str(res.get("effectiveDateTime") or ""), "test_type": test_type or "",
                 "variant": fields["variant"] or "", "result": result, "lab": performer.get("display") or "",
                 "report_reference": _identifier(res, fc.LOCAL_LAB_REPORT) or ""},
                label,
                {"person": "subject", "test_date": "effectiveDateTime", "test_type": f"method ({fc.LOCAL_TEST_TYPE})",
                 "variant": "component (48004-6)", "result": "valueCodeableConcept", "lab": "performer.display",
                 "report_reference": "identifier"},
            )  # fmt: skip
        if result == "carrier" and implication is not None and self.family is not None:
            self._classes(label, fields, implication)
        elif result == "carrier" and implication is None:
            self.problem(label, "(diagnostic implication)",
                         "a carrier result with no diagnostic-implication Observation derived from it (the class is unknown)")  # fmt: skip

    def _classes(self, label: str, fields: dict, implication: tuple[str, dict]) -> None:
        ilabel, imp = implication
        transcript, _, hgvs_c = (fields["variant"] or "").partition(":")
        current = None
        for i, comp in enumerate(imp.get("component", [])):
            if _has(comp.get("code"), fc.CLINICAL_SIGNIFICANCE):
                answer = _code_in(comp.get("valueCodeableConcept"), fc.LOINC)
                current = _CLASS_OF_ANSWER.get(answer or "")
                if current is None:
                    self.problem(ilabel, f"component[{i}].valueCodeableConcept",
                                 f"{_shown(comp.get('valueCodeableConcept'))} is not a clinical-significance answer "
                                 f"({', '.join(sorted(_CLASS_OF_ANSWER))})")  # fmt: skip
                    return
            elif not _has(comp.get("code"), fc.ASSOCIATED_PHENOTYPE):
                self.problem(ilabel, f"component[{i}].code", f"{_shown(comp.get('code'))} is not a component the importer reads")
        if current is None:
            self.problem(ilabel, "component", "no clinical significance (53037-8)")
            return
        history = [(current, str(imp.get("effectiveDateTime") or ""), "effectiveDateTime")]
        note = " ".join(n.get("text", "") for n in imp.get("note", []))
        if m := re.search(r"Earlier: (.*?)\.(?: |$)", note):
            for short, day in re.findall(r"(\w+) \((\d{4}-\d{2}-\d{2})\)", m.group(1)):
                if short in _CLASS_OF_SHORT:
                    history.append((_CLASS_OF_SHORT[short], day, "note"))
        for acmg, day, where in history:
            self.tables["variants"].add(
                {"family": self.family, "gene": fields["gene"] or "", "transcript": transcript, "hgvs_c": hgvs_c,
                 "hgvs_p": fields["hgvs_p"] or "", "zygosity": fields["zygosity"] or "", "acmg_class": acmg,
                 "classified_on": day, "reason": None},
                ilabel,
                {"family": "(Bundle identifier)", "gene": f"{label} component (48018-6)",
                 "transcript": f"{label} component (48004-6)", "hgvs_c": f"{label} component (48004-6)",
                 "hgvs_p": f"{label} component (48005-3)", "zygosity": f"{label} component (53034-5)",
                 "acmg_class": "component (53037-8)", "classified_on": where},
            )  # fmt: skip


# --------------------------------------------------------------------------- cells and the import


def _cells(conn: Connection, table: _Table) -> pd.DataFrame:
    """The table's rows as text cells of its layout: what the Bundle does not say is taken from the
    stored record with the same key (so it is never compared as a change), else left empty."""
    layout = LAYOUTS[table.kind]
    rows, where = table.rows, table.where
    if table.kind == "variants":  # several carriers of one variant give the same rows
        seen, keep = set(), []
        for i, r in enumerate(rows):
            k = tuple(sorted((c, str(v)) for c, v in r.items()))
            if k not in seen:
                seen.add(k)
                keep.append(i)
        rows, where = [rows[i] for i in keep], [where[i] for i in keep]
        table.rows, table.where = rows, where
    frame = pd.DataFrame([{c: r.get(c) for c in layout.names} for r in rows], columns=layout.names, dtype=object)
    if frame.isna().any().any():
        key = list(layout.key) if table.kind != "studies" else ["person", "study_date", "modality"]
        stored = export_frame(conn, table.kind)
        if len(stored):
            text = stored.astype(object).apply(lambda col: col.map(format_cell))
            text = text.drop_duplicates(key).set_index(key)
            mine = pd.MultiIndex.from_frame(frame[key].fillna("")) if len(key) > 1 else pd.Index(frame[key[0]])
            pos = text.index.get_indexer(mine)
            for col in layout.names:
                missing = frame[col].isna().to_numpy() & (pos >= 0)
                if missing.any() and col in text.columns:
                    frame.loc[missing, col] = text[col].to_numpy(dtype=object)[pos[missing]]
    return frame.fillna("").astype(str)


def _locate(problem: Problem, table: _Table) -> Problem:
    """A layout problem (row = position in the table) as one naming the resource and element."""
    if problem.row is None or not 0 <= problem.row < len(table.where):
        return problem
    label, paths = table.where[problem.row]
    path = paths.get(problem.column or "", f"({problem.column})" if problem.column else "")
    return Problem(problem.file, None, None, f"{label} {path}: {problem.message}".replace("  ", " "))


def import_bundle(conn: Connection, path: Path, *, user: str | None = None,
                  today: dt.date | None = None) -> list[csv_import.ImportSummary]:  # fmt: skip
    """Check and write one FHIR Bundle inside the caller's transaction (roll it back for a dry run).

    Raises :class:`InputRejected` listing every problem; nothing is written then (the caller's
    transaction is rolled back).  Returns one summary per layout the Bundle holds rows of.
    """
    path = Path(path)
    data = read_bundle(path)
    ctx = csv_import.context(conn, today or dt.date.today())
    reader = _Reader(path.name, data, ctx)
    reader.read()
    if reader.problems:
        raise InputRejected(reader.problems)
    summaries = []
    for kind in IMPORT_ORDER:
        table = reader.tables[kind]
        if not table.rows:
            continue
        cells = _cells(conn, table)
        try:
            summaries.append(csv_import.import_cells(conn, kind, cells, path=path, ctx=ctx, user=user, refresh=False))
        except InputRejected as exc:
            raise InputRejected([_locate(p, table) for p in exc.problems]) from None
    csv_import.refresh_proposals(conn, frozenset().union(*(s.families for s in summaries)), ctx.today)
    return summaries
