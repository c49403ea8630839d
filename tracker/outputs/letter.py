"""Family letters to at-risk relatives: who may get one, filling a template, and readability.

Pure: takes plain data (a pedigree, genotype statuses, the family variant, the
clinic details from the settings, a date) and returns dataclasses.  It never
opens the database, reads settings files (the caller passes the template
text) or prints.  The PDF is made by :mod:`tracker.outputs.letter_pdf`.

Template format ("letter template format 1")
--------------------------------------------
A template is a UTF-8 text file, read line by line:

``# ...``                 a comment (``#`` in the first column): dropped.
``[[ if NAME ]]``         keep the lines up to the matching ``[[ else ]]`` or
``[[ if not NAME ]]``     ``[[ end ]]`` only when the flag NAME is true (or,
``[[ else ]]``            with ``not``, false).  On lines of their own; they
``[[ end ]]``             nest.  The flags are listed in :data:`FLAGS`.
``@subject TEXT``         the letter's subject line, its greeting ("Dear ...,")
``@greeting TEXT``        and its closing ("Yours sincerely,").  Each must be
``@closing TEXT``         given exactly once (after the conditions are applied).
``## TEXT``               a heading.
``- TEXT``                an item of a bulleted list.
``>> TEXT``               a detail line, printed as written: contact details, and
                          the variant in HGVS for the recipient's doctor.
                          Consecutive detail lines are boxed together.
a blank line              ends a paragraph (and a box of detail lines).
any other line            paragraph text; the lines of one paragraph are joined
                          with single spaces.

``{{ name }}`` anywhere in a line is replaced by a value.  Every name must be
one of :data:`PLACEHOLDERS`; an unknown name, an unknown flag, a ``{{``
without its ``}}``, an unknown ``@`` field or an unbalanced ``[[ ]]`` is an
error naming the template file and line (:class:`~tracker.errors.UserError`),
checked on every line of the template, also in branches not used for this
letter.  A known name that has no value for this letter (for example the
variant in a family with none) is an error too: a letter never goes out
with a gap in it.

The shipped English templates (``tracker/outputs/templates/``):

``letter_plp_at_risk.en.txt``  at-risk relative in a family with a pathogenic or
                               likely pathogenic variant: their chance of carrying
                               it, the predictive test and heart checks offered.
``letter_vus.en.txt``          a family with only a variant of uncertain
                               significance: no predictive test, heart checks.
``letter_no_variant.en.txt``   no causal variant found (none, or only likely
                               benign / benign): heart checks only.

Who gets a letter (:func:`prepare_letter`)
------------------------------------------
Never a placeholder, a deceased person or one who declined contact (each a
one-line error).  In a P/LP family: untested relatives at risk by the
pedigree computation (:func:`tracker.domain.genetics.genotype_statuses`,
status ``at_risk_untested``); the letter quotes that probability.  In other
families: relatives the cascade plan lists for clinical screening
(:func:`tracker.engines.cascade.plan_cascade`: first-degree relatives of an
affected member; under ESC 2023 also second-degree relatives through a
deceased first-degree relative).  Refused, with the reason: tested carriers
and obligate carriers (they need a personal letter, not the at-risk one),
tested non-carriers, people not at risk, people recorded as affected (they
are the clinic's patients, and the letter makes no diagnosis), and people
whose risk cannot be computed.  What is offered and from what age comes from
the cascade plan for the clinic's rule set; a relative lost to follow-up or
not yet contacted is planned as if reachable (the letter is the attempt to
reach them) and the counsellor is told to check the address.

A recipient younger than 18 years (:data:`tracker.engines.cascade.ADULT_AGE_YEARS`,
the project's child/adult boundary, common practice) gets the letter
addressed to a parent or guardian (flag ``child``).

The letter names nobody but the recipient (and only with ``--names``): the
affected relative is "a member of your family".

Readability
-----------
Each filled letter is measured with the ``textstat`` package:

* **Flesch reading ease** (Flesch R. A new readability yardstick. J Appl
  Psychol 1948;32:221-233): 206.835 - 1.015 x (words per sentence) - 84.6 x
  (syllables per word); higher is easier, 60-70 is plain English.
* **Flesch-Kincaid grade** (Kincaid JP, Fishburne RP, Rogers RL, Chissom BS.
  Derivation of new readability formulas for Navy enlisted personnel.
  Research Branch Report 8-75, Naval Technical Training Command, 1975):
  0.39 x (words per sentence) + 11.8 x (syllables per word) - 15.59, a US
  school grade (formula as implemented in textstat 0.7 [V]; the publications
  from memory, verify the page numbers).

Target: Flesch-Kincaid grade 7 or lower (:data:`TARGET_FK_GRADE`), about a
reading age of 12 (reading age = US grade + 5, the usual conversion, common
practice); patient-information guidance commonly asks for a grade of 6-8 or
lower (common practice, from memory, verify).  The shipped templates are
tested against it for every family type.

Syllables: textstat counts English syllables with the CMU Pronouncing
Dictionary, which it downloads through NLTK on first use.  This tool never
downloads anything while it runs, so where that dictionary is not installed
the syllables are counted with the Pyphen en_US hyphenation dictionary (see
:func:`meter`); the figures name the counter used.  Pyphen counts fewer
syllables: filled for the demo relatives, the shipped templates came out
at grade 2.7-2.9 (reading ease 92-94) with Pyphen against 3.4-3.7 (reading
ease 87-89) with the CMU dictionary, well inside the target either way.

Measured: the body paragraphs and list items (a list item without end
punctuation counts as one sentence).  Not measured, because they are not
prose: the address block and the clinic letterhead, the date and reference,
the subject, greeting and closing, the headings, the detail lines (contact
details, the HGVS line for the doctor), the signature and the footer caution.

Decision support only: the letter is information, not a diagnosis; decisions
are made with the clinical team, following local protocols and the current
guideline (:data:`CAUTION`, printed in the footer).
"""

from __future__ import annotations

import datetime as dt
import math
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from fractions import Fraction
from pathlib import Path

from tracker.domain.genetics import ACTIONABLE_CLASSES, FamilyGenotypes
from tracker.domain.pedigree import Pedigree
from tracker.engines.cascade import ADULT_AGE_YEARS, RULE_SETS, age_for_rules, plan_cascade
from tracker.errors import UserError
from tracker.regular_file import NotReadable, read_regular_text
from tracker.settings import SMALL_FILE_BYTES, Clinic

TEMPLATE_DIR = Path(__file__).resolve().parent / "templates"
DEFAULT_TEMPLATES = {
    "plp": "letter_plp_at_risk.en.txt",
    "vus": "letter_vus.en.txt",
    "no_variant": "letter_no_variant.en.txt",
}

# Letters by where the person stands (the letter kind); the first-contact letter is the family-type
# template above, the others are one template each.
LETTER_KINDS = ("first_contact", "reminder", "result", "reclassification", "discharge", "appointment")
KIND_TEMPLATES = {
    "reminder": "letter_reminder.en.txt",
    "result": "letter_result.en.txt",
    "reclassification": "letter_reclassification.en.txt",
    "discharge": "letter_discharge.en.txt",
    "appointment": "letter_appointment.en.txt",
}
KIND_WORDS = {
    "first_contact": "first contact",
    "reminder": "reminder of the next heart check",
    "result": "gene test result ready",
    "reclassification": "family variant reclassified",
    "discharge": "discharge from family screening",
    "appointment": "appointment booked",
}

# Readability target: Flesch-Kincaid grade 7 or lower = reading age about 12 (see the docstring).
TARGET_FK_GRADE = 7.0

CAUTION = (
    "This letter is information, not a diagnosis. Decisions about testing and care are made with "
    "the clinical team, following local protocols and the current guideline."
)

NOT_MEASURED = (
    "address block, letterhead, date and reference, subject, greeting, closing, headings, "
    "detail lines (contact details, HGVS line), signature and footer"
)

PLACEHOLDERS: dict[str, str] = {
    "clinic_name": "the clinic's name (settings [clinic] name)",
    "clinic_phone": "the clinic's telephone number (settings [clinic] phone)",
    "clinic_email": "the clinic's e-mail address (settings [clinic] email)",
    "signatory": "who signs the letter (settings [clinic] signatory)",
    "signatory_role": "the signatory's role (settings [clinic] signatory_role)",
    "person_code": "the recipient's person code (the letter's reference)",
    "recipient_name": "the recipient's name with --names, else 'relative'",
    "letter_date": "the date of the letter, ISO 8601",
    "visit_date": "appointment letters: the day of the booked visit, ISO 8601",
    "visit_purpose": "appointment letters: what the booked visit is for",
    "informed_on": "reminders to someone not yet seen: the day they were first informed, ISO 8601",
    "risk": "P/LP families: the recipient's chance of carrying the variant, e.g. 'about 1 in 4 (25%)'",
    "gene": "the gene of the family variant",
    "variant_hgvs": "the family variant in HGVS (transcript:c. change, protein change)",
    "variant_zygosity": "the zygosity of the family variant",
    "variant_class": "the variant's current ACMG/AMP class in words",
    "classified_on": "the date of the variant's current classification, ISO 8601",
    "testing_start": "P/LP families: from what age the rule set offers the predictive test",
    "testing_from": "the date from which a deferred child can be offered the test, ISO 8601",
    "screening_start": "from what age the rule set offers heart checks",
    "guideline_title": "the title of the clinic's cascade rule set",
}

FLAGS: dict[str, str] = {
    "via_proband": "the letter is handed on by the family member, not sent by the clinic",
    "child": "the recipient is younger than 18 years: the letter is addressed to a parent or guardian",
    "testing_deferred": "a child below the rule set's minimum age for predictive testing",
    "first_degree": "the recipient is a first-degree relative of an affected member",
    "has_variant": "a variant is recorded for the family (whatever its class)",
    "not_yet_seen": "reminder: informed before but not yet seen (no study, test or visit on record)",
}

FIELDS = ("subject", "greeting", "closing")

# From what age heart checks are offered, per cascade rule set (phrase, source).
SCREENING_START: dict[str, tuple[str, str]] = {
    "aha_acc_2020": ("at any age", "AHA/ACC 2020 §6.8: genetic or clinical screening can start at any age (1 B-NR) [V2]"),
    "aha_acc_2024": ("at any age", "AHA/ACC 2024 key point 3: screening can begin at any age [V]"),
    "esc_2023": ("in childhood", "ESC 2023 §6.11: screening from childhood to old age [V]"),
    "hrs_2022_testing": (
        "in childhood",
        "common practice (the 2022 consensus is about testing; clinical screening from childhood as ESC 2023)",
    ),
}

_CLASS_WORDS = {
    "pathogenic": "pathogenic",
    "likely_pathogenic": "likely pathogenic",
    "uncertain_significance": "uncertain significance (VUS)",
    "likely_benign": "likely benign",
    "benign": "benign",
}


# =========================================================================== template format

_PLACEHOLDER = re.compile(r"\{\{\s*([^{}]*?)\s*\}\}")
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_DIRECTIVE = re.compile(r"^\s*\[\[\s*(.*?)\s*\]\]\s*$")
_FIELD = re.compile(r"^@([A-Za-z_]+)\s*(.*)$")


@dataclass(frozen=True)
class TemplateLine:
    """One line of a template: ``kind`` 'text', 'blank', 'heading', 'item', 'detail',
    'field', 'if', 'else', 'end'; ``name`` the field or flag; ``negate`` for ``if not``."""

    number: int
    kind: str
    text: str = ""
    name: str = ""
    negate: bool = False


@dataclass(frozen=True)
class Template:
    source: str  # the file name shown in errors
    lines: tuple[TemplateLine, ...]


def _where(source: str, number: int) -> str:
    return f"template {source} line {number}"


def _check_placeholders(text: str, source: str, number: int) -> None:
    for m in _PLACEHOLDER.finditer(text):
        name = m.group(1)
        if not _NAME.fullmatch(name):
            raise UserError(f"{_where(source, number)}: {{{{ {name} }}}} is not a placeholder name")
        if name not in PLACEHOLDERS:
            raise UserError(
                f"{_where(source, number)}: unknown placeholder {{{{ {name} }}}} "
                f"(known: {', '.join(PLACEHOLDERS)})"
            )
    rest = _PLACEHOLDER.sub("", text)
    if "{{" in rest or "}}" in rest:
        raise UserError(f"{_where(source, number)}: '{{{{' without its matching '}}}}'")


def parse_template(text: str, source: str) -> Template:
    """Check and parse a template (see the module docstring); ``source`` names it in errors."""
    out: list[TemplateLine] = []
    depth: list[tuple[int, bool]] = []  # (line of the if, else seen)
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.rstrip()
        if line.startswith("#") and not line.startswith("##"):
            continue
        d = _DIRECTIVE.match(line)
        if d:
            words = d.group(1).split()
            if len(words) in (2, 3) and words[0] == "if":
                negate = len(words) == 3
                if negate and words[1] != "not":
                    raise UserError(f"{_where(source, number)}: write [[ if NAME ]] or [[ if not NAME ]]")
                flag = words[-1]
                if flag not in FLAGS:
                    raise UserError(
                        f"{_where(source, number)}: unknown flag {flag!r} in [[ if ]] (known: {', '.join(FLAGS)})"
                    )
                depth.append((number, False))
                out.append(TemplateLine(number, "if", name=flag, negate=negate))
            elif words == ["else"]:
                if not depth or depth[-1][1]:
                    raise UserError(f"{_where(source, number)}: [[ else ]] without an open [[ if ]]")
                depth[-1] = (depth[-1][0], True)
                out.append(TemplateLine(number, "else"))
            elif words == ["end"]:
                if not depth:
                    raise UserError(f"{_where(source, number)}: [[ end ]] without an open [[ if ]]")
                depth.pop()
                out.append(TemplateLine(number, "end"))
            else:
                raise UserError(
                    f"{_where(source, number)}: unknown directive [[ {d.group(1)} ]] "
                    "(use [[ if NAME ]], [[ if not NAME ]], [[ else ]], [[ end ]])"
                )
            continue
        if "[[" in line or "]]" in line:
            raise UserError(f"{_where(source, number)}: [[ ... ]] must stand on a line of its own")
        _check_placeholders(line, source, number)
        stripped = line.strip()
        if not stripped:
            out.append(TemplateLine(number, "blank"))
        elif stripped.startswith("@"):
            f = _FIELD.match(stripped)
            if not f or f.group(1) not in FIELDS:
                raise UserError(
                    f"{_where(source, number)}: unknown field {stripped.split()[0]!r} (known: @{', @'.join(FIELDS)})"
                )
            out.append(TemplateLine(number, "field", f.group(2).strip(), name=f.group(1)))
        elif stripped.startswith("##"):
            out.append(TemplateLine(number, "heading", stripped[2:].strip()))
        elif stripped.startswith(">>"):
            out.append(TemplateLine(number, "detail", stripped[2:].strip()))
        elif stripped.startswith("- "):
            out.append(TemplateLine(number, "item", stripped[2:].strip()))
        else:
            out.append(TemplateLine(number, "text", stripped))
    if depth:
        raise UserError(f"{_where(source, depth[-1][0])}: [[ if ]] is never closed with [[ end ]]")
    return Template(source, tuple(out))


def read_template(path: str | Path) -> Template:
    """Read and parse a template file (UTF-8)."""
    p = Path(path)
    try:
        text = read_regular_text(p, SMALL_FILE_BYTES)
    except NotReadable as exc:
        raise UserError(f"template {p} " + ("not found" if exc.reason == "file not found" else exc.reason)) from None
    except UnicodeDecodeError:
        raise UserError(f"template {p.name}: not UTF-8 text") from None
    return parse_template(text, p.name)


def kind_template(letter_kind: str) -> Template:
    """The shipped template for a letter kind other than first contact."""
    return read_template(TEMPLATE_DIR / KIND_TEMPLATES[letter_kind])


def default_template(kind: str) -> Template:
    """The shipped English template for 'plp', 'vus' or 'no_variant'."""
    return read_template(TEMPLATE_DIR / DEFAULT_TEMPLATES[kind])


@dataclass(frozen=True)
class Block:
    """A piece of the letter body: ``kind`` 'paragraph', 'heading', 'item' or 'detail'.
    ``group`` grows at every blank line: detail lines of one group are printed together."""

    kind: str
    text: str
    group: int = 0


@dataclass(frozen=True)
class FilledTemplate:
    source: str
    subject: str
    greeting: str
    closing: str
    blocks: tuple[Block, ...]


def fill_template(template: Template, values: Mapping[str, str | None], flags: Mapping[str, bool]) -> FilledTemplate:
    """Apply the conditions and replace every placeholder.

    ``values`` and ``flags`` hold the names of :data:`PLACEHOLDERS` and
    :data:`FLAGS`; a missing flag is false; a placeholder used in a kept line
    whose value is None or empty is an error naming the file and line.
    """
    source = template.source

    def sub(text: str, number: int) -> str:
        def one(m: re.Match) -> str:
            name = m.group(1)
            v = values.get(name)
            if v is None or str(v).strip() == "":
                raise UserError(
                    f"{_where(source, number)}: placeholder {{{{ {name} }}}} has no value for this letter "
                    f"({PLACEHOLDERS[name]})"
                )
            return str(v)

        return _PLACEHOLDER.sub(one, text)

    keep: list[bool] = []  # one entry per open [[ if ]]: is its current branch kept
    fields: dict[str, tuple[str, int]] = {}
    blocks: list[Block] = []
    para: list[str] = []

    group = 0

    def flush() -> None:
        if para:
            blocks.append(Block("paragraph", " ".join(para), group))
            para.clear()

    for ln in template.lines:
        if ln.kind == "if":
            value = bool(flags.get(ln.name, False))
            keep.append(value != ln.negate)
            continue
        if ln.kind == "else":
            keep[-1] = not keep[-1]
            continue
        if ln.kind == "end":
            keep.pop()
            continue
        if not all(keep):
            continue
        if ln.kind == "blank":
            flush()
            group += 1
        elif ln.kind == "text":
            para.append(sub(ln.text, ln.number))
        elif ln.kind == "field":
            if ln.name in fields:
                raise UserError(
                    f"{_where(source, ln.number)}: @{ln.name} given twice (first on line {fields[ln.name][1]})"
                )
            fields[ln.name] = (sub(ln.text, ln.number), ln.number)
        else:
            flush()
            kind = {"heading": "heading", "item": "item", "detail": "detail"}[ln.kind]
            blocks.append(Block(kind, sub(ln.text, ln.number), group))
    flush()
    for f in FIELDS:
        if f not in fields:
            raise UserError(f"template {source}: no @{f} line for this letter")
    return FilledTemplate(source, fields["subject"][0], fields["greeting"][0], fields["closing"][0], tuple(blocks))


# =========================================================================== readability


@dataclass(frozen=True)
class Readability:
    """textstat's figures for the measured text (see the module docstring)."""

    flesch_reading_ease: float
    flesch_kincaid_grade: float
    words: int
    sentences: int
    syllable_counter: str
    target_fk_grade: float = TARGET_FK_GRADE
    not_measured: str = NOT_MEASURED

    @property
    def meets_target(self) -> bool:
        return self.flesch_kincaid_grade <= self.target_fk_grade


def measured_text(filled: FilledTemplate) -> str:
    """The prose that is measured: body paragraphs and list items, one per line."""
    parts = []
    for b in filled.blocks:
        if b.kind == "paragraph":
            parts.append(b.text)
        elif b.kind == "item":
            parts.append(b.text if b.text.endswith((".", "!", "?")) else b.text + ".")
    return "\n".join(parts)


def cmu_dictionary_installed() -> bool:
    """True when NLTK's copy of the CMU Pronouncing Dictionary is on this machine (never downloads)."""
    try:
        import nltk

        nltk.data.find("corpora/cmudict")
        return True
    except (ImportError, LookupError):
        return False


def meter():
    """A textstat calculator and the name of its syllable counter; never reaches the network.

    textstat (0.7.13) counts English syllables with the CMU Pronouncing
    Dictionary and falls back to the Pyphen hyphenation dictionary for words
    the CMU dictionary lacks; it downloads the CMU dictionary through NLTK on
    first use.  This tool never downloads anything while it runs (clinic
    machines may be offline), so when the dictionary is not installed the
    calculator is set to the language code ``en-US``, which textstat does not
    map to its CMU dictionary: every word is then counted with Pyphen's
    ``en_US`` dictionary, and the English Flesch constants apply unchanged.
    The figures name the counter used.
    """
    from textstat.textstat import textstatistics

    t = textstatistics()
    if cmu_dictionary_installed():
        t.set_lang("en_US")
        return t, "CMU Pronouncing Dictionary (Pyphen en_US for other words)"
    t.set_lang("en-US")
    return t, "Pyphen en_US hyphenation dictionary (CMU dictionary not installed)"


def readability(filled: FilledTemplate) -> Readability:
    """Flesch reading ease and Flesch-Kincaid grade of the measured text (textstat)."""
    text = measured_text(filled)
    t, counter = meter()
    return Readability(
        flesch_reading_ease=round(float(t.flesch_reading_ease(text)), 1),
        flesch_kincaid_grade=round(float(t.flesch_kincaid_grade(text)), 1),
        words=int(t.lexicon_count(text)),
        sentences=int(t.sentence_count(text)),
        syllable_counter=counter,
    )


# =========================================================================== risk in words


def risk_words(p: Fraction) -> str:
    """A probability as a plain phrase: 1/4 -> 'about 1 in 4 (25%)'; 3/8 -> 'about 3 in 8 (38%)';
    awkward fractions as 'about 29 in 100 (29%)'.  Percentages are rounded half up to whole
    numbers (no decimal point, which would break a sentence for the readability count)."""
    if p is None or not (0 < p < 1):
        raise ValueError(f"a letter quotes a probability strictly between 0 and 1, not {p!r}")
    p = Fraction(p)
    pct = math.floor(p * 100 + Fraction(1, 2))
    if pct < 1:
        return "less than 1 in 100 (under 1%)"
    if pct > 99:
        return "more than 99 in 100 (over 99%)"
    if p.numerator == 1:
        return f"about 1 in {p.denominator} ({pct}%)"
    if p.denominator <= 12:
        return f"about {p.numerator} in {p.denominator} ({pct}%)"
    return f"about {pct} in 100 ({pct}%)"


# =========================================================================== who gets a letter


@dataclass(frozen=True)
class LetterVariant:
    """The family variant as the letter shows it (None when no variant was found)."""

    gene: str
    transcript: str
    hgvs_c: str
    hgvs_p: str | None
    zygosity: str
    acmg_class: str
    classified_on: dt.date

    @property
    def hgvs(self) -> str:
        text = f"{self.transcript}:{self.hgvs_c}"
        return f"{text} {self.hgvs_p}" if self.hgvs_p else text


@dataclass(frozen=True)
class LetterPlan:
    """Everything one letter needs before a template is applied."""

    person: str
    family: str | None
    kind: str  # 'plp', 'vus', 'no_variant'
    on: dt.date
    guideline: str
    clinic: Clinic
    values: Mapping[str, str | None]
    flags: Mapping[str, bool]
    recipient_name: str | None = None
    notes: tuple[str, ...] = ()
    probability: Fraction | None = None
    letter_kind: str = "first_contact"

    @property
    def default_template(self) -> str:
        return KIND_TEMPLATES.get(self.letter_kind) or DEFAULT_TEMPLATES[self.kind]


@dataclass(frozen=True)
class Standing:
    """Where the person stands with the clinic (plain facts from the record).

    ``studied``: an imaging or ECG study on record; ``tested``: a genetic test
    result on record (``result_on`` its latest date); ``last_visit``: the last
    screening visit (in surveillance); ``last_contact``: the last contact on
    record; ``reclassified_on``: the date the family variant's class last
    changed, if it ever did.
    """

    studied: bool = False
    tested: bool = False
    last_visit: dt.date | None = None
    result_on: dt.date | None = None
    last_contact: dt.date | None = None
    reclassified_on: dt.date | None = None
    # From the contact log (revision 0012): the day first informed, whether anything came back since,
    # an open reclassification task for the person, a discharge (its day), the next booked visit.
    informed_on: dt.date | None = None
    responded: bool = False
    open_task: bool = False
    discharged_on: dt.date | None = None
    booked_on: dt.date | None = None
    booked_purpose: str | None = None

    @property
    def in_screening(self) -> bool:
        """Already in screening: a study or a test on record, or in surveillance (a visit on record)."""
        return self.studied or self.tested or self.last_visit is not None


def choose_letter_kind(st: Standing) -> str:
    """The letter kind for where the person stands.

    In order: ``appointment`` (a visit booked, not cancelled, on or after today);
    ``discharge`` (discharged from screening after a negative result);
    ``reclassification`` (an open reclassification task for the person, or in screening and the family
    variant's class changed after the last contact, or with no contact on record);
    ``result`` (a genetic result on record, dated after the last visit or with
    no visit); ``reminder`` (in screening, or informed before: the contact log);
    ``first_contact`` (never informed, not in screening).
    """
    if st.booked_on is not None:
        return "appointment"
    if st.discharged_on is not None:
        return "discharge"
    if st.open_task or (st.in_screening and st.reclassified_on is not None and (
        st.last_contact is None or st.reclassified_on > st.last_contact
    )):  # fmt: skip
        return "reclassification"
    if st.tested and (st.last_visit is None or (st.result_on is not None and st.result_on > st.last_visit)):
        return "result"
    if st.in_screening or st.informed_on is not None:
        return "reminder"
    return "first_contact"


def check_letter_kind(person: str, letter_kind: str, st: Standing) -> None:
    """Refuse (one line) a letter kind that does not fit where the person stands."""
    if letter_kind not in LETTER_KINDS:
        raise UserError(f"--kind: {letter_kind!r} is not one of {', '.join(LETTER_KINDS)}")
    what = [w for w, on in (("a study", st.studied), ("a test", st.tested), ("a visit", st.last_visit)) if on]
    if letter_kind == "first_contact" and st.in_screening:
        raise LetterRefused(
            f"{person} is already in screening ({', '.join(what)} on record): no first-contact letter; "
            f"use --kind {choose_letter_kind(st)}"
        )
    if letter_kind == "reminder" and not st.in_screening and st.informed_on is None:
        raise LetterRefused(f"{person} is not in screening yet and was never informed (no study, test, visit or "
                            "contact on record): no reminder; use --kind first_contact")  # fmt: skip
    if letter_kind == "first_contact" and st.informed_on is not None:
        raise LetterRefused(f"{person} was informed on {st.informed_on.isoformat()} (contact log): no second "
                            f"first-contact letter; use --kind {choose_letter_kind(st)}")  # fmt: skip
    if letter_kind == "appointment" and st.booked_on is None:
        raise LetterRefused(f"{person} has no visit booked: no appointment letter (book one: tracker book)")
    if letter_kind == "discharge" and st.discharged_on is None:
        raise LetterRefused(f"{person} is not recorded as discharged: no discharge letter (tracker discharge)")
    if letter_kind == "result" and not st.tested:
        raise LetterRefused(f"{person} has no genetic test result on record: no result letter")
    if letter_kind == "reclassification" and not st.open_task and (st.reclassified_on is None or not st.in_screening):
        why = "the family variant's class has never changed" if st.reclassified_on is None else \
            "the person is not in screening yet (use --kind first_contact)"
        raise LetterRefused(f"{person}: no reclassification letter: {why}")


class LetterRefused(UserError):
    """No letter for this person (the message says why, in one line)."""


def _reachable_copy(ped: Pedigree, person: str) -> Pedigree:
    """The pedigree with ``person`` counted as contactable, so the cascade plan says what they would be offered."""
    frame = ped.frame()
    frame.loc[frame["person"] == person, "contact_status"] = "contactable"
    return Pedigree(frame)


def _classify_kind(variant: LetterVariant | None) -> str:
    if variant is None or variant.acmg_class in ("likely_benign", "benign"):
        return "no_variant"
    if variant.acmg_class in ACTIONABLE_CLASSES:
        return "plp"
    return "vus"


def prepare_letter(
    pedigree: Pedigree,
    genotypes: FamilyGenotypes,
    variant: LetterVariant | None,
    person: str,
    on: dt.date,
    guideline: str,
    clinic: Clinic,
    *,
    affected: Mapping[str, str | None] | None = None,
    seen: Iterable[str] = (),
    early_onset_family: bool = False,
    via_proband: bool = False,
    recipient_name: str | None = None,
    standing: Standing | None = None,
    letter_kind: str | None = None,
) -> LetterPlan:
    """Decide whether ``person`` gets a letter and gather its values and flags.

    ``variant``'s class must be the class ``genotypes`` was computed with.
    The letter kind (first contact, reminder, result, reclassification)
    follows ``standing`` (:func:`choose_letter_kind`; no standing = not in
    screening); an explicit ``letter_kind`` is checked against it
    (:func:`check_letter_kind`).  Raises :class:`LetterRefused` (a one-line
    :class:`UserError`) when no letter may be written, and :class:`UserError` when the clinic settings
    lack what every letter needs (telephone, e-mail, signatory).
    """
    if guideline not in RULE_SETS:
        raise UserError(
            f"no cascade rule set for guideline {guideline!r}: use one of {', '.join(RULE_SETS)}"
        )
    if person not in pedigree:
        raise UserError(f"unknown person {person!r}")
    affected = dict(affected or {})
    m = pedigree.member(person)
    if m.placeholder:
        raise LetterRefused(f"{person} is a placeholder (drawn only to connect the pedigree): no letter")
    if m.vital_status == "deceased":
        raise LetterRefused(f"{person} is recorded as deceased: no letter")
    if m.contact_status == "declined":
        raise LetterRefused(f"{person} declined contact: no letter (their choice is respected)")
    if affected.get(person) == "affected":
        raise LetterRefused(
            f"{person} is recorded as affected at the latest assessment: the family letter is for relatives "
            "not yet diagnosed"
        )

    standing = standing or Standing()
    if letter_kind is None:
        letter_kind = choose_letter_kind(standing)
    else:
        check_letter_kind(person, letter_kind, standing)
    if letter_kind == "reclassification" and variant is None:
        raise LetterRefused(f"{person}: no reclassification letter: no family variant is recorded")
    kind = _classify_kind(variant)
    rules = RULE_SETS[guideline]
    plan = plan_cascade(
        _reachable_copy(pedigree, person), genotypes, variant.acmg_class if variant else None, on, guideline,
        affected, seen, early_onset_family=early_onset_family,
    )  # fmt: skip
    st = genotypes[person]
    screening = {c.person: c for c in plan.screening}
    notes: list[str] = []

    flags: dict[str, bool] = {"via_proband": via_proband, "has_variant": variant is not None}
    values: dict[str, str | None] = {}
    probability: Fraction | None = None

    flags["not_yet_seen"] = letter_kind == "reminder" and not standing.in_screening
    if flags["not_yet_seen"]:
        values["informed_on"] = standing.informed_on.isoformat() if standing.informed_on else None
        notes.append(f"informed on {values['informed_on']} and not yet seen: a reminder of the offer")
    if letter_kind == "appointment":
        values["visit_date"] = standing.booked_on.isoformat()
        values["visit_purpose"] = standing.booked_purpose or "a heart check"
    if letter_kind != "first_contact":
        # A discharge or appointment letter follows a recorded discharge or booking: the record says it fits.
        if letter_kind not in ("discharge", "appointment"):
            _refuse_follow_up(person, letter_kind, kind, st, screening, pedigree, affected, rules, guideline)
        near = st.nearest_carrier
        flags["first_degree"] = near is not None and near in pedigree and pedigree.relationship(person, near).degree == 1
        where = "already in screening" if standing.in_screening else "informed before, not yet seen"
        notes.append(f"letter kind: {KIND_WORDS[letter_kind]} (the person is {where})")
    elif kind == "plp":
        _refuse_plp(person, st, screening)
        probability = st.probability
        cand = next((c for c in plan.testing + plan.deferred if c.person == person), None)
        if cand is None:  # pragma: no cover - an at-risk, listable, reachable person is always planned
            raise LetterRefused(f"{person}: not in the cascade plan under {guideline}: no letter")
        if cand.wait_for is not None:  # stepwise cascade: the nearer relative is offered testing first
            raise LetterRefused(f"{person}: stepwise cascade: offer testing to {cand.wait_for} first; no letter yet")
        values["risk"] = risk_words(st.probability)
        if rules.min_age_years is None:
            values["testing_start"] = "at any age"
        elif rules.full_age_years and rules.full_age_years != rules.min_age_years:
            values["testing_start"] = f"from about age {rules.min_age_years} to {rules.full_age_years}"
        else:
            values["testing_start"] = f"from about age {rules.min_age_years}"
        flags["testing_deferred"] = not cand.eligible
        if not cand.eligible and cand.eligible_from is not None:
            values["testing_from"] = cand.eligible_from.isoformat()
            notes.append(f"predictive testing deferred under {guideline}: from {cand.eligible_from.isoformat()}")
        near = st.nearest_carrier
        flags["first_degree"] = near is not None and pedigree.relationship(person, near).degree == 1
    else:
        cand = screening.get(person)
        if cand is None:
            why = _not_listed_reason(pedigree, person, affected, rules.second_degree_via_deceased, guideline)
            raise LetterRefused(f"{person}: {why}")
        flags["first_degree"] = "first_degree_of_affected" in cand.categories
        if kind == "vus":
            notes.append("VUS family: the letter offers heart checks only; no predictive test of the VUS")

    age = age_for_rules(pedigree, person, on)
    flags["child"] = age.years is not None and age.years < ADULT_AGE_YEARS
    if age.years is None:
        notes.append("date of birth not recorded: check whether the letter should go to a parent or guardian")
    elif flags["child"]:
        notes.append(f"recipient under {ADULT_AGE_YEARS}: the letter is addressed to a parent or guardian")
    if age.note and age.years is not None and age.basis == "year_only":
        notes.append(age.note)
    if m.vital_status == "unknown":
        notes.append("vital status unknown: confirm before sending")
    if m.contact_status == "lost_to_follow_up":
        notes.append("lost to follow-up: check the address before sending")
    elif m.contact_status == "not_contacted" and letter_kind == "first_contact":
        notes.append("never contacted before: this letter is the first contact")
    if via_proband:
        notes.append("to be handed on by the family member, not posted by the clinic")

    for key, label in (("phone", "phone"), ("email", "email"), ("signatory", "signatory")):
        if not getattr(clinic, key).strip():
            raise UserError(f"settings: [clinic] {label} is empty: a family letter needs it (give --settings)")

    values.update(
        {
            "clinic_name": clinic.name,
            "clinic_phone": clinic.phone,
            "clinic_email": clinic.email,
            "signatory": clinic.signatory,
            "signatory_role": clinic.signatory_role or None,
            "person_code": person,
            "recipient_name": recipient_name or "relative",
            "letter_date": on.isoformat(),
            "screening_start": SCREENING_START[guideline][0],
            "guideline_title": rules.title,
        }
    )
    if variant is not None:
        values.update(
            {
                "gene": variant.gene,
                "variant_hgvs": variant.hgvs,
                "variant_zygosity": variant.zygosity,
                "variant_class": _CLASS_WORDS.get(variant.acmg_class, variant.acmg_class),
                "classified_on": variant.classified_on.isoformat(),
            }
        )
    for f in FLAGS:
        flags.setdefault(f, False)
    return LetterPlan(
        person=person, family=m.family, kind=kind, on=on, guideline=guideline, clinic=clinic,
        values=values, flags=flags, recipient_name=recipient_name, notes=tuple(notes), probability=probability,
        letter_kind=letter_kind,
    )  # fmt: skip


def _refuse_follow_up(person: str, letter_kind: str, kind: str, st, screening: Mapping, ped: Pedigree,
                      affected: Mapping[str, str | None], rules, guideline: str) -> None:  # fmt: skip
    """Refuse a reminder or reclassification letter for someone outside surveillance (a result letter
    goes to anyone with a result on record)."""
    if letter_kind == "result":
        return
    if kind == "plp":
        if st.status in ("non_carrier", "not_at_risk"):
            _refuse_plp(person, st, screening)
        return
    if person not in screening and st.status != "carrier":
        why = _not_listed_reason(ped, person, affected, rules.second_degree_via_deceased, guideline)
        raise LetterRefused(f"{person}: {why}")


def _refuse_plp(person: str, st, screening: Mapping) -> None:
    if st.status == "at_risk_untested":
        return
    listed = (
        "; the cascade plan lists them for clinical screening on the first-degree rule: write a personal letter"
        if person in screening and st.status == "not_at_risk"
        else ""
    )
    if st.status == "carrier" and st.basis == "obligate":
        raise LetterRefused(
            f"{person} is an obligate carrier by the pedigree ({st.reason}): the at-risk letter does not fit; "
            "write a personal letter"
        )
    if st.status == "carrier":
        raise LetterRefused(f"{person} already knows their result: {st.reason}; the letter is for untested relatives")
    if st.status == "non_carrier":
        raise LetterRefused(f"{person} is not at risk: {st.reason}")
    if st.status == "not_at_risk":
        raise LetterRefused(f"{person} is not at risk from the family variant: {st.reason}{listed}")
    raise LetterRefused(f"{person}: no risk figure can be given ({st.reason}): no letter")


def _not_listed_reason(ped: Pedigree, person: str, affected: Mapping[str, str | None], second_degree: bool,
                       guideline: str) -> str:  # fmt: skip
    cases = [p for p, s in affected.items() if s == "affected" and p in ped]
    reach = "first-degree relatives of an affected member"
    if second_degree:
        reach += " (and second-degree relatives through a deceased first-degree relative)"
    if not cases:
        return "no affected member is recorded in the family, so nobody is listed for screening: no letter"
    if not any(ped.kinship(person, a) > 0 for a in cases):
        return "not a blood relative of an affected member: not at risk, no letter"
    return f"not on the clinical screening list under {guideline} (letters go to {reach}): no letter"


# =========================================================================== the letter


@dataclass(frozen=True)
class Letter:
    """A filled letter, ready for the PDF, with its readability."""

    plan: LetterPlan
    filled: FilledTemplate
    readability: Readability
    caution: str = CAUTION
    not_measured: str = NOT_MEASURED
    warnings: tuple[str, ...] = field(default=())


def compose_letter(plan: LetterPlan, template: Template | None = None) -> Letter:
    """Fill ``template`` (default: the shipped one for the plan's family type) and measure it."""
    t = template or (default_template(plan.kind) if plan.letter_kind == "first_contact"
                     else kind_template(plan.letter_kind))
    filled = fill_template(t, plan.values, plan.flags)
    r = readability(filled)
    warnings = ()
    if not r.meets_target:
        warnings = (
            f"Flesch-Kincaid grade {r.flesch_kincaid_grade} is above the target of {TARGET_FK_GRADE:g} "
            "(reading age about 12): consider shorter sentences and words",
        )
    return Letter(plan, filled, r, warnings=warnings)
