"""`tracker report letter` on the invented demo families (demo_family/), with the demo clinic settings.

Readability figures are textstat's: Flesch reading ease (Flesch 1948) and
Flesch-Kincaid grade (Kincaid et al. 1975); target grade 7 or lower.
The risk figure is checked against the pedigree computation
(tracker.domain.genetics.genotype_statuses) for the same person.
"""

from __future__ import annotations

import datetime as dt
import json
import re
from pathlib import Path

import pytest
from pypdf import PdfReader

from tracker.cli.app import main
from tracker.engines import family_state as fs
from tracker.outputs import letter as L
from tracker.outputs.letter_pdf import render_png
from tracker.settings import load_settings
from tracker.store import repository as repo
from tracker.store.database import locate, make_engine, reading

ROOT = Path(__file__).resolve().parents[1]
SETTINGS = ROOT / "demo_family" / "clinic.toml"
DATE = "2026-12-01"
CLINIC = load_settings(SETTINGS).clinic


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    path = str(tmp_path_factory.mktemp("letter") / "demo.sqlite")
    assert main(["demo", "--db", path]) == 0
    return path


def _letter(run, db, person, out, *extra):
    return run("report", "letter", person, "--out", out, "--settings", SETTINGS, "--date", DATE, *extra, db=db)


def _pdf_text(path) -> str:
    reader = PdfReader(str(path))
    return " ".join(" ".join((page.extract_text() or "").split()) for page in reader.pages)


def _probability(db, person):
    engine = make_engine(locate(db))
    with reading(engine) as conn:
        people = repo.load_people(conn)
        family = people.loc[people["person"] == person, "family"].iloc[0]
        st = fs.build_family_state(
            family, people, repo.load_variants(conn), repo.load_genetic_results(conn),
            repo.load_assessments(conn), repo.load_studies(conn, entered=False),
        )  # fmt: skip
    engine.dispose()
    return st.genotypes[person].probability


# person, family type, extra options (people already in screening get a reminder, result or
# reclassification letter; the others the first-contact letter of their family type)
DEMO_RELATIVES = [
    ("HV01-IV-5", "plp", ()),  # niece of the proband, father untested (declined)
    ("HV01-IV-5", "plp", ("--via-proband",)),
    ("HV01-IV-4", "plp", ()),  # lost to follow-up
    ("HV02-IV-4", "plp", ()),  # a child: to the parent or guardian
    ("HV04-IV-2", "plp", ("--via-proband",)),  # a child
    ("HV02-IV-4", "plp", ("--guideline", "hrs_2022_testing")),
    ("HV03-III-1", "vus", ()),
    ("HV03-III-4", "vus", ("--via-proband",)),
    ("HV05-I-2", "no_variant", ()),
    ("HV05-III-2", "no_variant", ("--via-proband",)),
]


@pytest.mark.parametrize("person, kind, extra", DEMO_RELATIVES)
def test_every_default_template_meets_the_readability_target(run, demo_db, tmp_path, person, kind, extra):
    r = _letter(run, demo_db, person, tmp_path, "--json", *extra)
    assert r.code == 0, r
    d = json.loads(r.out)
    assert {"file", "person", "template", "flesch_reading_ease", "flesch_kincaid_grade", "words"} <= set(d)
    assert d["person"] == person and d["letter_type"] == kind
    assert d["letter_kind"] in L.LETTER_KINDS
    expected = L.DEFAULT_TEMPLATES[kind] if d["letter_kind"] == "first_contact" else L.KIND_TEMPLATES[d["letter_kind"]]
    assert d["template"] == expected
    # Flesch-Kincaid grade (Kincaid et al. 1975) at or below 7: reading age about 12
    assert d["flesch_kincaid_grade"] <= 7.0 and d["meets_target"] is True
    # Flesch reading ease (Flesch 1948): 60 or more is plain English
    assert d["flesch_reading_ease"] >= 60
    assert d["words"] > 250
    assert Path(d["file"]) == tmp_path / f"letter-{person}.pdf" and Path(d["file"]).is_file()


def test_readability_figures_are_textstats_for_the_letter(run, demo_db, tmp_path):
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path, "--json")
    d = json.loads(r.out)
    # the same letter through the library: same figures as textstat gives on the measured text
    engine = make_engine(locate(demo_db))
    with reading(engine) as conn:
        people = repo.load_people(conn)
        st = fs.build_family_state("HV01", people, repo.load_variants(conn), repo.load_genetic_results(conn),
                                   repo.load_assessments(conn), repo.load_studies(conn, entered=False))  # fmt: skip
    engine.dispose()
    v = st.variant
    lv = L.LetterVariant(v.gene, v.transcript, v.hgvs_c, v.hgvs_p, v.zygosity, v.current_class, v.classified_on)
    plan = L.prepare_letter(st.pedigree, st.genotypes, lv, "HV01-IV-5", dt.date(2026, 12, 1), "esc_2023",
                            CLINIC, affected=st.affected, seen=st.seen)  # fmt: skip
    text = L.measured_text(L.compose_letter(plan).filled)
    t, _ = L.meter()
    assert d["flesch_reading_ease"] == round(t.flesch_reading_ease(text), 1)
    assert d["flesch_kincaid_grade"] == round(t.flesch_kincaid_grade(text), 1)
    assert d["words"] == t.lexicon_count(text)


@pytest.mark.parametrize(
    "person, expected",
    [
        # maternal half-brother of the proband, mother untested: second degree, 1/4 (Wright's r)
        ("HV01-IV-5", "about 1 in 4 (25%)"),
    ],
)
def test_risk_figure_equals_the_pedigree_computation(run, demo_db, tmp_path, person, expected):
    r = _letter(run, demo_db, person, tmp_path, "--json")
    d = json.loads(r.out)
    assert d["risk"] == L.risk_words(_probability(demo_db, person)) == expected
    assert expected in _pdf_text(d["file"])


@pytest.mark.parametrize("person", ["HV04-IV-2", "HV02-IV-4", "HV05-II-3", "HV03-III-1", "HV01-III-3"])
def test_people_in_screening_get_no_first_contact_letter(run, demo_db, tmp_path, person):
    """Already in screening (a study, a test or a visit on record): a reminder-type letter, no risk figure,
    and an explicit first-contact letter is refused in one line."""
    d = json.loads(_letter(run, demo_db, person, tmp_path, "--json").out)
    assert d["letter_kind"] in ("reminder", "result", "reclassification") and d["risk"] is None
    assert f"Letter: {L.KIND_WORDS[d['letter_kind']]}" in _pdf_text(d["file"])
    r = _letter(run, demo_db, person, tmp_path / "again", "--kind", "first_contact")
    lines = r.err.strip().splitlines()
    assert r.code == 1 and r.out == "" and len(lines) == 1 and "already in screening" in lines[0], r
    assert not (tmp_path / "again").exists() or not list((tmp_path / "again").glob("*.pdf"))


def test_letter_kind_override_only_where_it_fits(run, demo_db, tmp_path):
    # HV01-IV-5: never screened, not contacted: first contact; no reminder or result letter can be forced
    d = json.loads(_letter(run, demo_db, "HV01-IV-5", tmp_path, "--json").out)
    assert d["letter_kind"] == "first_contact" and d["letter_kind_words"] == "first contact"
    assert "Letter: first contact" in _pdf_text(d["file"])
    for kind, words in (("reminder", "not in screening yet"), ("result", "no genetic test result")):
        r = _letter(run, demo_db, "HV01-IV-5", tmp_path / kind, "--kind", kind)
        assert r.code == 1 and len(r.err.strip().splitlines()) == 1 and words in r.err, r
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path / "bad", "--kind", "hello")
    assert r.code == 1 and "--kind" in r.err
    # a carrier in surveillance may be sent a reminder explicitly
    d = json.loads(_letter(run, demo_db, "HV01-III-3", tmp_path, "--kind", "reminder", "--json").out)
    assert d["letter_kind"] == "reminder" and d["template"] == L.KIND_TEMPLATES["reminder"]


def test_pdf_holds_the_facts_and_renders(run, demo_db, tmp_path):
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path)
    assert r.code == 0, r
    pdf = tmp_path / "letter-HV01-IV-5.pdf"
    assert r.out.splitlines()[0] == f"wrote {pdf}"
    assert "Flesch reading ease" in r.out and "Flesch-Kincaid grade" in r.out
    reader = PdfReader(str(pdf))
    assert len(reader.pages) >= 1
    box = reader.pages[0].mediabox
    assert (round(float(box.width)), round(float(box.height))) == (595, 842)  # A4 in points
    text = _pdf_text(pdf)
    for fact in (
        "Ambersett Inherited Cardiac Conditions Clinic",  # clinic name from the settings
        CLINIC.phone,
        CLINIC.email,
        "Tollbridge Road",
        "HV01-IV-5",
        f"Date: {DATE}",
        "about 1 in 4 (25%)",
        "This letter is information, not a diagnosis.",
        "Decisions about testing and care are made with the clinical team, following local protocols and "
        "the current guideline.",
        "NM_000256.3:c.1504C>T p.(Arg502Trp)",
        CLINIC.signatory,
        CLINIC.signatory_role,
        "a member of your family",
    ):
        assert fact in text, fact
    # codes only by default; no other family member named or coded
    for absent in ("Ruby", "Martin", "Graham", "Thornbury", "HV01-III-1", "HV01-III-5"):
        assert absent not in text, absent
    png = render_png(pdf, tmp_path / "page1.png")
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    from PIL import Image

    with Image.open(png) as im:
        w, h = im.size
    assert abs(h / w - 842 / 595) < 0.01


def test_names_only_with_the_option(run, demo_db, tmp_path):
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path, "--names")
    assert r.code == 0, r
    text = _pdf_text(tmp_path / "letter-HV01-IV-5.pdf")
    assert "Ruby Thornbury" in text and "Dear Ruby Thornbury," in text
    assert "Graham" not in text and "Martin" not in text  # nobody else is named
    assert list(tmp_path.glob("*.pdf")) == [tmp_path / "letter-HV01-IV-5.pdf"]  # file name: code only


def test_child_letter_is_addressed_to_a_parent(run, demo_db, tmp_path):
    r = _letter(run, demo_db, "HV02-IV-4", tmp_path)
    assert r.code == 0, r
    text = _pdf_text(tmp_path / "letter-HV02-IV-4.pdf")
    assert "To the parent or guardian of" in text and "Dear parent or guardian," in text
    assert "parent or guardian" in r.out


def test_vus_letter_says_no_predictive_testing(run, demo_db, tmp_path):
    r = _letter(run, demo_db, "HV03-III-4", tmp_path)  # never screened: the first-contact VUS letter
    assert r.code == 0, r
    text = _pdf_text(tmp_path / "letter-HV03-III-4.pdf")
    assert "we do not offer relatives a gene test to predict who will get it" in text
    assert "variant of uncertain significance" in text
    assert "NM_000363.5:c.508C>T p.(Arg170Trp)" in text
    assert "chance of having this variant" not in text


def test_no_variant_letter_is_screening_only(run, demo_db, tmp_path):
    # HV05-II-3 is in screening by 2026 (a reminder now); on 2017-08-01 the family was known but she had
    # nothing on record yet:
    # the first-contact letter of a family without a variant
    r = _letter(run, demo_db, "HV05-II-3", tmp_path, "--date", "2017-08-01", "--json")
    assert r.code == 0, r
    assert json.loads(r.out)["letter_kind"] == "first_contact"
    text = _pdf_text(tmp_path / "letter-HV05-II-3.pdf")
    assert "no gene test we can offer to relatives" in text
    assert "found no disease-causing variant" in text


@pytest.mark.parametrize(
    "person, words",
    [
        ("HV01-III-5", "declined contact"),  # declined: respected
        ("HV03-II-4", "declined contact"),
        ("HV01-II-1", "deceased"),
        ("HV05-I-1", "deceased"),
        ("HV01-I-1", "placeholder"),
        ("HV01-IV-3", "not at risk: tested non-carrier"),
        ("HV01-III-2", "not at risk from the family variant"),
        ("HV02-IV-3", "adopted in"),
        ("HV01-IV-3", "not at risk: tested non-carrier"),  # no reminder for a released non-carrier
        ("HV01-III-1", "affected"),
        ("HV03-III-3", "not a blood relative of an affected member"),  # married in, family without P/LP
        ("NOPE-1", "unknown person"),
    ],
)
def test_refused_with_one_line_and_exit_1(run, demo_db, tmp_path, person, words):
    r = _letter(run, demo_db, person, tmp_path)
    assert r.code == 1
    assert r.out == ""
    lines = r.err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and words in lines[0], r
    assert not list(tmp_path.glob("*.pdf"))


def test_own_template_with_unknown_placeholder(run, demo_db, tmp_path):
    bad = tmp_path / "clinic-letter.txt"
    bad.write_text("@subject S\n@greeting Dear {{ recipient_name }},\n@closing Bye,\n\nCall {{ fax }}.\n")
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path / "out", "--template", bad)
    assert r.code == 1
    assert r.err.strip().splitlines() == [
        "error: template clinic-letter.txt line 5: unknown placeholder {{ fax }} (known: "
        + ", ".join(L.PLACEHOLDERS) + ")"
    ]


def test_own_template_is_used_and_measured(run, demo_db, tmp_path):
    own = tmp_path / "short.txt"
    own.write_text(
        "# a short clinic letter\n@subject Your heart\n@greeting Dear {{ recipient_name }},\n@closing Best wishes,\n"
        "\nYour chance is {{ risk }}. Please call us on {{ clinic_phone }}. We can help you.\n"
    )
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path / "out", "--template", own, "--json")
    assert r.code == 0, r
    d = json.loads(r.out)
    assert d["template"] == str(own)
    assert "about 1 in 4 (25%)" in _pdf_text(d["file"])


def test_settings_without_contact_details(run, demo_db, tmp_path):
    s = tmp_path / "bare.toml"
    s.write_text('[clinic]\nname = "Invented Clinic"\n')
    r = run("report", "letter", "HV01-IV-5", "--out", tmp_path, "--settings", s, db=demo_db)
    assert r.code == 1 and "phone is empty" in r.err and len(r.err.strip().splitlines()) == 1


def test_bad_date_and_guideline(run, demo_db, tmp_path):
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path, "--date", "2026-13-01")
    assert r.code == 1 and "--date" in r.err
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path, "--guideline", "esc_2014")
    assert r.code == 1 and "no cascade rule set" in r.err


def test_help_has_an_example(run):
    r = run("report", "letter", "--help")
    assert r.code == 0
    assert any(re.match(r"\s*Example: tracker report letter ", ln) for ln in r.out.splitlines())
