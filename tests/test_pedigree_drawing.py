"""Pedigree PDF: what each symbol shows, the page's text, rendering, and `tracker report pedigree`.

Expected marks follow pedigree nomenclature (NSGC 2008/2022, docs/reference/standards.md
section 1 [V]): affected filled; a genotype-positive relative with a normal echo is not
shaded; presymptomatic carrier = vertical line; E+/E- evaluation text with the variant in
parentheses; text under a symbol ends with the individual number.  The demo families are
invented (demo_family/README.md).
"""

from __future__ import annotations

import datetime as dt
import itertools
import json
import re

import pandas as pd
import pytest
from PIL import Image
from pypdf import PdfReader

from tracker.cli.app import main
from tracker.domain.pedigree import Pedigree
from tracker.outputs.pedigree_drawing import (
    label_sizes,
    pedigree_marks,
    render_png,
    write_pedigree_pdf,
)
from tracker.outputs.pedigree_layout import check_layout
from tracker.store import repository as repo
from tracker.store.database import locate, make_engine, reading

DRAWN = dt.date(2026, 11, 30)


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    path = str(tmp_path_factory.mktemp("demo") / "demo.sqlite")
    assert main(["demo", "--db", path, "--json"]) == 0
    return path


@pytest.fixture(scope="module")
def frames(demo_db):
    engine = make_engine(locate(demo_db))
    try:
        with reading(engine) as conn:
            return {
                "people": repo.load_people(conn),
                "genetic_results": repo.load_genetic_results(conn),
                "assessments": repo.load_assessments(conn),
                "variants": repo.load_variants(conn),
            }
    finally:
        engine.dispose()


def _marks(frames, family):
    people = frames["people"]
    fam = people[people["family"] == family].reset_index(drop=True)
    return pedigree_marks(Pedigree(fam), fam, frames["genetic_results"], frames["assessments"], frames["variants"])


def _text(pdf) -> str:
    return "\n".join(page.extract_text() for page in PdfReader(str(pdf)).pages)


# ---------------------------------------------------------------------------
# marks
# ---------------------------------------------------------------------------


def test_marks_of_the_hv01_family(frames):
    m = _marks(frames, "HV01")
    # the proband: affected, tested carrier -> filled, no carrier line, E+ text
    pro = m["HV01-III-1"]
    assert pro.proband and pro.affection == "affected" and pro.carrier_mark is None
    assert "E2+ (MYBPC3 c.1504C>T)" in pro.lines and "E1+ (2026)" in pro.lines
    # a carrier with a normal echo: not shaded, vertical line (presymptomatic carrier, 2008)
    helen = m["HV01-III-3"]
    assert helen.affection == "unaffected" and helen.carrier_mark == "presymptomatic"
    assert "E2+ (MYBPC3 c.1504C>T)" in helen.lines
    # the converter is affected at his latest assessment: filled, no line
    assert m["HV01-IV-2"].affection == "affected" and m["HV01-IV-2"].carrier_mark is None
    # a tested non-carrier
    assert "E2- (MYBPC3 c.1504C>T)" in m["HV01-IV-3"].lines and m["HV01-IV-3"].carrier_mark is None
    # placeholders: ordinary symbols, code only
    assert m["HV01-I-1"].placeholder and m["HV01-I-1"].lines == ("HV01-I-1",)
    assert m["HV01-I-1"].deceased and m["HV01-I-1"].shape == "square" and m["HV01-I-2"].shape == "circle"
    # the demo records the cause and age at death (death_cause, death_age): both are printed
    assert ("b. 1938", "d. 41 y (1979), sudden") == m["HV01-II-1"].lines[1:3]
    # an at-risk relative never assessed shows '?'; a married-in partner never assessed is open
    assert m["HV01-IV-5"].affection == "unknown"
    assert m["HV01-III-2"].affection == "unaffected"
    # codes, never names, by default
    assert all("Thornbury" not in line for mk in m.values() for line in mk.lines)


def test_marks_with_names_and_vus_family(frames):
    people = frames["people"]
    fam = people[people["family"] == "HV01"].reset_index(drop=True)
    m = pedigree_marks(Pedigree(fam), fam, names=True)
    assert m["HV01-III-1"].lines[:2] == ("Graham Thornbury", "HV01-III-1")
    v = _marks(frames, "HV03")
    # a VUS gives genotypes no predictive meaning: the class is written, no carrier mark
    assert "E2+ (TNNI3 c.508C>T, VUS)" in v["HV03-II-3"].lines
    assert all(mk.carrier_mark is None for mk in v.values())
    # panel that found no variant
    n = _marks(frames, "HV05")
    assert "E2- (panel: no variant found)" in n["HV05-II-1"].lines


def test_gender_identity_is_written_under_the_symbol():
    people = pd.DataFrame([
        dict(person="A", family="F", sex_at_birth="male", gender_identity="woman", birth_date="1980",
             vital_status="alive", proband=True),
        dict(person="B", family="F", sex_at_birth="unknown", birth_date=None, vital_status="unknown"),
    ])  # fmt: skip
    m = pedigree_marks(Pedigree(people), people)
    assert m["A"].shape == "square"  # shape follows sex at birth (documented choice)
    assert "gender: woman, AMAB" in m["A"].lines
    assert m["B"].shape == "diamond"


def test_label_sizes_grow_with_text(frames):
    m = _marks(frames, "HV01")
    sizes = label_sizes(m)
    assert sizes["HV01-III-1"][0] > sizes["HV01-I-1"][0]  # E+ text is wider than a code
    assert sizes["HV01-III-1"][1] > sizes["HV01-I-1"][1]  # and has more lines


# ---------------------------------------------------------------------------
# the PDF
# ---------------------------------------------------------------------------


def test_hv01_pdf_holds_the_expected_text(frames, tmp_path):
    out = tmp_path / "pedigree-HV01.pdf"
    d = write_pedigree_pdf(out, "HV01", drawn_on=DRAWN, **frames)
    reader = PdfReader(str(out))
    assert len(reader.pages) == 1
    box = reader.pages[0].mediabox
    assert (round(float(box.width)), round(float(box.height))) == (842, 595)  # A4 landscape
    text = _text(out)
    lines = {line.strip() for line in text.splitlines()}
    assert "Pedigree of family HV01" in text
    assert "Drawn 2026-11-30" in text and "Drawn by tracker" in text
    assert {"I", "II", "III", "IV"} <= lines  # generation numerals
    assert {"HV01-I-1", "HV01-II-4", "HV01-III-1", "HV01-IV-4"} <= lines  # person codes
    assert not {"I-1", "II-4", "III-1", "III-6", "IV-4"} & lines  # no numbers that read like codes
    for words in ("male", "female", "affected (HCM)", "deceased; d. = age at death (year), cause", "proband",
                  "presymptomatic carrier (2008 mark)"):
        assert words in lines, words
    assert "E2+ (MYBPC3 c.1504C>T)" in lines and "E2- (MYBPC3 c.1504C>T)" in lines
    assert "Decision support only" in text
    assert "Thornbury" not in text and "Graham" not in text
    assert d.members == 17 and d.warnings == ()
    assert check_layout(d.layout) == []


def test_hv02_legend_shows_twins_and_adoption(frames, tmp_path):
    out = tmp_path / "pedigree-HV02.pdf"
    d = write_pedigree_pdf(out, "HV02", drawn_on=DRAWN, **frames)
    text = _text(out)
    for words in ("monozygotic twins", "dizygotic twins", "adopted in (dashed line of descent)"):
        assert words in text
    # the adopted-in child is drawn under her adoptive parents, with nothing to warn about
    assert d.warnings == () or list(d.warnings) == []
    assert "Layout warnings" not in text


def test_names_only_on_request(frames, tmp_path):
    out = tmp_path / "p.pdf"
    write_pedigree_pdf(out, "HV01", drawn_on=DRAWN, names=True, **frames)
    text = _text(out)
    assert "Graham Thornbury" in text and "Names shown on request" in text


def test_pdf_renders_to_png(frames, tmp_path):
    pdf = tmp_path / "pedigree-HV04.pdf"
    write_pedigree_pdf(pdf, "HV04", drawn_on=DRAWN, **frames)
    png = render_png(pdf, tmp_path / "p.png", scale=1.0)
    with Image.open(png) as im:
        w, h = im.size
        assert abs(w - 842) <= 1 and abs(h - 595) <= 1  # A4 landscape at 72 dpi
        grey = im.convert("L")
        dark = sum(grey.histogram()[:100])
        assert dark > 2000  # lines, symbols and text were drawn
        assert grey.getpixel((3, 3)) > 240  # white margin


def test_every_demo_family_draws(frames, tmp_path):
    for fam in ("HV01", "HV02", "HV03", "HV04", "HV05"):
        d = write_pedigree_pdf(tmp_path / f"pedigree-{fam}.pdf", fam, drawn_on=DRAWN, **frames)
        assert f"Pedigree of family {fam}" in _text(d.path)
        assert not any("cross" in w for w in d.warnings)


def test_unknown_family_raises(frames, tmp_path):
    with pytest.raises(KeyError):
        write_pedigree_pdf(tmp_path / "x.pdf", "NOPE", **frames)


# ---------------------------------------------------------------------------
# the command
# ---------------------------------------------------------------------------


def test_cli_writes_a_code_only_file_name(demo_db, run, tmp_path):
    out = tmp_path / "reports"
    r = run("report", "pedigree", "HV01", "--out", out, db=demo_db)
    assert r.code == 0, r
    assert r.out.strip() == str(out / "pedigree-HV01.pdf")
    assert [p.name for p in out.iterdir()] == ["pedigree-HV01.pdf"]
    assert re.search(r"Drawn \d{4}-\d{2}-\d{2}", _text(out / "pedigree-HV01.pdf"))


def test_cli_json_and_names(demo_db, run, tmp_path):
    r = run("report", "pedigree", "HV02", "--out", tmp_path, "--names", "--json", db=demo_db)
    assert r.code == 0, r
    data = json.loads(r.out)
    assert set(data) == {"file", "family", "members", "warnings"}
    assert data["family"] == "HV02" and data["members"] == 13
    assert data["file"].endswith("pedigree-HV02.pdf") and "Kerensa" not in data["file"]
    assert "Kerensa" in _text(data["file"])
    assert data["warnings"] == []


def test_cli_unknown_family_is_a_one_line_error(demo_db, run, tmp_path):
    r = run("report", "pedigree", "ZZ99", "--out", tmp_path, db=demo_db)
    assert r.code == 1
    assert r.err.strip() == "error: family ZZ99 is not in the database"
    assert list(tmp_path.iterdir()) == []


def test_cli_help_has_an_example(run):
    r = run("report", "pedigree", "--help")
    assert r.code == 0
    assert any(line.strip().startswith("Example:") for line in r.out.splitlines())


# ---------------------------------------------------------------------------
# labels, marks and legend: every mark legible on its own, nothing mistaken for a code
# (invented families; nomenclature: NSGC 2008/2022, docs/reference/standards.md section 1 [V])
# ---------------------------------------------------------------------------

DEMO_FAMILIES = ("HV01", "HV02", "HV03", "HV04", "HV05")
PEOPLE_COLUMNS = [
    "person", "family", "given_name", "family_name", "sex_at_birth", "gender_identity", "birth_date",
    "vital_status", "death_date", "death_cause", "death_age", "mother", "father", "placeholder", "proband",
    "twin_of", "twin_type", "adoption",
]  # fmt: skip
VARIANT = "NM_000256.3:c.1504C>T"


def invented(family: str, rows: list[dict], results=(), assessments=()) -> dict:
    """Frames for an invented family (people, genetic results, assessments, a pathogenic variant)."""
    full = []
    for r in rows:
        d = {c: None for c in PEOPLE_COLUMNS}
        d.update(family=family, sex_at_birth="male", vital_status="alive", placeholder=False, proband=False,
                 given_name="Given", family_name="Surname-" + r["person"])
        d.update(r)
        full.append(d)
    people = pd.DataFrame(full, columns=PEOPLE_COLUMNS)
    gen = pd.DataFrame(
        [dict(person=p, test_date="2020-01-01", test_type="cascade", variant=VARIANT, result=res, lab=None,
              report_reference=None) for p, res in results],
        columns=["person", "test_date", "test_type", "variant", "result", "lab", "report_reference"],
    )
    ass = pd.DataFrame([dict(person=p, assessment_date="2024-05-01", affected_status=a) for p, a in assessments],
                       columns=["person", "assessment_date", "affected_status"])
    var = pd.DataFrame([dict(family=family, gene="MYBPC3", transcript="NM_000256.3", hgvs_c="c.1504C>T",
                             hgvs_p="p.(Arg502Trp)", zygosity="heterozygous", acmg_class="pathogenic",
                             classified_on="2019-01-01")])
    return {"people": people, "genetic_results": gen, "assessments": ass, "variants": var}


def crowded_family() -> dict:
    """Seven siblings (twins of each zygosity among them), deceased obligate and tested carriers, a
    deceased affected proband, first cousins who are partners, adopted-in child; codes that do not
    follow generation numbering."""
    rows = [
        dict(person="CR9-III-1", sex_at_birth="male", vital_status="deceased", birth_date="1920",
             death_date="1970", death_cause="sudden", death_age=50),
        dict(person="CR9-I-7", sex_at_birth="female", vital_status="deceased", birth_date="1922", death_date="1999"),
        # generation 2: seven children of CR9-III-1 and CR9-I-7
        dict(person="CR9-I-1", sex_at_birth="male", mother="CR9-I-7", father="CR9-III-1", birth_date="1945",
             vital_status="deceased", death_date="1990", death_cause="cardiac_non_sudden", death_age=45),
        dict(person="CR9-I-2", sex_at_birth="female", mother="CR9-I-7", father="CR9-III-1", birth_date="1947-02-01",
             twin_of="CR9-I-3", twin_type="monozygotic", vital_status="deceased", death_date="2001",
             death_cause="non_cardiac"),
        dict(person="CR9-I-3", sex_at_birth="female", mother="CR9-I-7", father="CR9-III-1", birth_date="1947-02-01",
             twin_of="CR9-I-2", twin_type="monozygotic"),
        dict(person="CR9-I-4", sex_at_birth="unknown", mother="CR9-I-7", father="CR9-III-1", birth_date="1950",
             twin_of="CR9-I-5", twin_type="unknown", vital_status="deceased", death_cause="unknown"),
        dict(person="CR9-I-5", sex_at_birth="male", mother="CR9-I-7", father="CR9-III-1", birth_date="1950",
             twin_of="CR9-I-4", twin_type="unknown"),
        dict(person="CR9-I-6", sex_at_birth="female", mother="CR9-I-7", father="CR9-III-1", birth_date="1952",
             vital_status="deceased", death_date="2010-03-01"),
        dict(person="CR9-II-9", sex_at_birth="male", mother="CR9-I-7", father="CR9-III-1", birth_date="1955"),
        # partners married in
        dict(person="CR9-IV-1", sex_at_birth="female", birth_date="1946"),
        dict(person="CR9-IV-2", sex_at_birth="male", birth_date="1948"),
        # generation 3: first cousins (children of CR9-I-1 and of CR9-I-3) become partners
        dict(person="CR9-II-1", sex_at_birth="male", mother="CR9-IV-1", father="CR9-I-1", birth_date="1970",
             proband=True, vital_status="deceased", death_date="2015", death_cause="sudden", death_age=45),
        dict(person="CR9-II-2", sex_at_birth="female", mother="CR9-IV-1", father="CR9-I-1", birth_date="1972"),
        dict(person="CR9-II-3", sex_at_birth="female", mother="CR9-I-3", father="CR9-IV-2", birth_date="1971"),
        dict(person="CR9-II-4", sex_at_birth="male", mother="CR9-I-3", father="CR9-IV-2", birth_date="1974",
             vital_status="deceased", death_date="2020"),
        # generation 4: children of the cousins; one adopted in
        dict(person="CR9-I-9", sex_at_birth="male", mother="CR9-II-3", father="CR9-II-1", birth_date="1995"),
        dict(person="CR9-I-8", sex_at_birth="female", mother="CR9-II-3", father="CR9-II-1", birth_date="1997",
             adoption="in"),
    ]
    results = [("CR9-II-1", "carrier"), ("CR9-I-6", "carrier"), ("CR9-II-4", "carrier"),
               ("CR9-II-2", "non_carrier"), ("CR9-I-9", "inconclusive")]
    assessments = [("CR9-II-1", "affected"), ("CR9-I-6", "unaffected"), ("CR9-II-3", "uncertain"),
                   ("CR9-IV-2", "unaffected")]
    return invented("CR9", rows, results, assessments)


def many_siblings_family() -> dict:
    """Eleven siblings, several with partners and children, codes in no generation order."""
    rows = [dict(person="MS-7", sex_at_birth="male", vital_status="deceased", death_cause="sudden", death_age=38),
            dict(person="MS-3", sex_at_birth="female", proband=False)]
    for i in range(11):
        rows.append(dict(person=f"MS-{20 + i}", sex_at_birth="female" if i % 2 else "male", mother="MS-3",
                         father="MS-7", birth_date=f"{1960 + i}", proband=i == 4,
                         vital_status="deceased" if i in (0, 5, 10) else "alive"))
    rows += [dict(person="MS-1", sex_at_birth="female", birth_date="1961"),
             dict(person="MS-2", sex_at_birth="male", birth_date="1969"),
             dict(person="MS-40", mother="MS-1", father="MS-20", birth_date="1990"),
             dict(person="MS-41", sex_at_birth="female", mother="MS-1", father="MS-20", birth_date="1992"),
             dict(person="MS-42", mother="MS-29", father="MS-2", birth_date="1995", vital_status="deceased")]
    results = [("MS-24", "carrier"), ("MS-20", "carrier"), ("MS-25", "carrier"), ("MS-26", "non_carrier")]
    assessments = [("MS-24", "affected"), ("MS-23", "uncertain"), ("MS-1", "unaffected")]
    return invented("MS", rows, results, assessments)


INVENTED = {"CR9": crowded_family, "MS": many_siblings_family}


def test_a_carrier_never_evaluated_is_not_drawn_as_clinically_unaffected():
    # the presymptomatic-carrier line means "clinically unaffected at this time" (2008): a tested
    # carrier who was never evaluated shows "?" and the E2+ text, not the line
    fr = many_siblings_family()
    people = fr["people"]
    m = pedigree_marks(Pedigree(people), people, fr["genetic_results"], fr["assessments"], fr["variants"])
    assert m["MS-20"].affection == "unknown" and m["MS-20"].carrier_mark is None
    assert "E2+ (MYBPC3 c.1504C>T)" in m["MS-20"].lines
    assert m["MS-24"].affection == "affected" and m["MS-24"].carrier_mark is None


def _family_frames(frames, family):
    if family in INVENTED:
        return INVENTED[family]()
    return frames


def _drawing(frames, family, tmp_path, names=False):
    from tracker.outputs.pedigree_layout import layout_pedigree

    fr = _family_frames(frames, family)
    people = fr["people"]
    fam = people[people["family"] == family].reset_index(drop=True)
    ped = Pedigree(fam)
    marks = pedigree_marks(ped, fam, fr["genetic_results"], fr["assessments"], fr["variants"], family=family,
                           names=names)
    layout = layout_pedigree(ped, label_sizes(marks))
    pdf = tmp_path / f"pedigree-{family}-{names}.pdf"
    write_pedigree_pdf(pdf, family, drawn_on=DRAWN, names=names, **fr)
    return ped, marks, layout, pdf


def _resembles(token: str, code: str) -> bool:
    """A printed token a reader could take for ``code``: the code itself, or its tail after a
    separator (``III-2`` for ``HV02-III-2``), or the code with its separators changed."""
    if len(token) < 2:
        return False
    norm = re.sub(r"[-_.\s]", "", token.upper())
    if norm and norm == re.sub(r"[-_.\s]", "", code.upper()):
        return True
    return code.upper().endswith(token.upper()) and code[-len(token) - 1] in "-_. " and any(c.isdigit() for c in token)


@pytest.mark.parametrize("family", DEMO_FAMILIES + tuple(INVENTED))
@pytest.mark.parametrize("names", [False, True])
def test_no_printed_label_resembles_another_persons_code(frames, family, names, tmp_path):
    ped, marks, layout, pdf = _drawing(frames, family, tmp_path, names)
    codes = list(ped.people)
    # on the whole page: every token that looks like a code is a code (warnings may name a person again)
    tokens = re.split(r"[\s,;()]+", _text(pdf))
    for code in codes:
        near = [t for t in tokens if _resembles(t, code)]
        assert code in near and set(near) == {code}, (code, near)
    for p in codes:  # the code is always printed (names only add to it)
        assert p in marks[p].lines
    # under each symbol: nothing that looks like another person's code
    from tracker.outputs.pedigree_drawing import drawing_marks

    for mk in drawing_marks(layout, marks):
        if mk.text is None:
            continue
        for token in re.split(r"[\s,;()]+", mk.text):
            for code in codes:
                if code != mk.person and _resembles(token, code):
                    raise AssertionError(f"{token!r} printed for {mk.person} looks like {code}")


def _independent_overlaps(marks_list) -> list[str]:
    """Pairs of marks that share a point although they show different things (or belong to
    different people).  Designed contacts only: marks inside a symbol lie within its outline;
    the deceased slash and the adoption brackets cross or touch their own outline; pedigree lines
    end on symbols (the layout's own check covers those)."""
    from tracker.outputs.pedigree_layout import Box, Segment, segment_intersection

    inside_marks = {"carrier_line", "obligate_dot", "unknown_affection"}
    eps = 1e-6

    def box_box(a: Box, b: Box) -> bool:
        return not (a.x1 <= b.x0 + eps or b.x1 <= a.x0 + eps or a.y1 <= b.y0 + eps or b.y1 <= a.y0 + eps)

    def seg_box(s, b: Box) -> bool:  # any sample point strictly inside the box
        x0, y0, x1, y1 = s
        for k in range(0, 201):
            t = k / 200
            x, y = x0 + t * (x1 - x0), y0 + t * (y1 - y0)
            if b.x0 + eps < x < b.x1 - eps and b.y0 + eps < y < b.y1 - eps:
                return True
        return False

    def seg_seg(s, t) -> bool:
        return segment_intersection(Segment("x", *s, "a"), Segment("x", *t, "b")) is not None

    out = []
    for a, b in itertools.combinations(marks_list, 2):
        same_person = a.person is not None and a.person == b.person
        if a.meaning == b.meaning and (same_person or a.meaning == "line"):
            continue  # pieces of one mark (lines of one label, pieces of one slash, pedigree lines)
        pair = {a.meaning, b.meaning}
        if same_person and "symbol" in pair:
            other = b if a.meaning == "symbol" else a
            sym = a if a.meaning == "symbol" else b
            if other.meaning in inside_marks:
                bb = other.box or Box(min(other.seg[0], other.seg[2]), min(other.seg[1], other.seg[3]),
                                      max(other.seg[0], other.seg[2]), max(other.seg[1], other.seg[3]))
                assert (sym.box.x0 - eps <= bb.x0 and bb.x1 <= sym.box.x1 + eps and sym.box.y0 - eps <= bb.y0
                        and bb.y1 <= sym.box.y1 + eps), f"{other.meaning} of {other.person} leaves its symbol"
                continue
            if other.meaning in ("deceased", "adopted", "text", "proband_arrow", "proband_letter"):
                if other.meaning in ("deceased", "adopted"):
                    continue
        if "line" in pair and "symbol" in pair:
            continue  # lines meet symbols at their ends: the layout check decides
        if a.box is not None and b.box is not None:
            hit = box_box(a.box, b.box)
        elif a.seg is not None and b.seg is not None:
            hit = seg_seg(a.seg, b.seg)
        else:
            s, bx = (a.seg, b.box) if a.seg is not None else (b.seg, a.box)
            hit = seg_box(s, bx)
        if hit:
            out.append(f"{a.meaning} of {a.person} / {b.meaning} of {b.person}")
    return out


@pytest.mark.parametrize("family", DEMO_FAMILIES + tuple(INVENTED))
@pytest.mark.parametrize("names", [False, True])
def test_marks_of_different_meaning_never_overlap(frames, family, names, tmp_path):
    from tracker.outputs.pedigree_drawing import drawing_marks

    ped, marks, layout, _ = _drawing(frames, family, tmp_path, names)
    found = _independent_overlaps(drawing_marks(layout, marks))
    assert found == []


def test_a_deceased_obligate_carrier_keeps_dot_question_mark_and_slash_apart():
    from tracker.outputs.pedigree_drawing import PersonMarks, symbol_marks

    for shape in ("square", "circle", "diamond"):
        for carrier in ("obligate", "presymptomatic", None):
            for aff in ("unknown", "unaffected", "affected"):
                m = PersonMarks("X", shape, aff, True, False, False, "in", carrier, ("X",))
                found = _independent_overlaps(symbol_marks(m, 3.0, 2.0, 1.0))
                assert found == [], (shape, carrier, aff, found)
                kinds = {k.meaning for k in symbol_marks(m, 3.0, 2.0, 1.0)}
                assert "deceased" in kinds  # the slash is still drawn (in pieces)


def test_uncertain_and_not_evaluated_are_told_apart(frames, tmp_path):
    m2 = _marks(frames, "HV02")
    # evaluated, equivocal: open symbol, no "?", E1u text
    assert m2["HV02-III-2"].affection == "uncertain" and "E1u (2026)" in m2["HV02-III-2"].lines
    # the proband's mother married in; the variant came from the father (E2+, affected): not at risk,
    # never evaluated: nothing drawn that suggests doubt
    assert m2["HV02-II-2"].affection == "unaffected" and not m2["HV02-II-2"].at_risk
    assert not any(line.startswith("E") for line in m2["HV02-II-2"].lines)
    m1 = _marks(frames, "HV01")
    # a married-in non-carrier: no "?"
    assert m1["HV01-II-2"].affection == "unaffected" and "E2- (MYBPC3 c.1504C>T)" in m1["HV01-II-2"].lines
    # at risk (child of a tested carrier), never evaluated: "?"
    assert m1["HV01-IV-5"].affection == "unknown" and m1["HV01-IV-5"].at_risk
    # half-brother through the non-carrier mother: not at risk, no "?"
    assert m1["HV01-III-6"].affection == "unaffected"
    # evaluated normal: E1-
    assert "E1- (2026)" in m1["HV01-III-3"].lines
    d = write_pedigree_pdf(tmp_path / "p.pdf", "HV02", drawn_on=DRAWN, **frames)
    assert any(w.startswith("open, E1u = evaluated, phenotype uncertain") for w in d.legend)
    d1 = write_pedigree_pdf(tmp_path / "p1.pdf", "HV01", drawn_on=DRAWN, **frames)
    assert "? = at risk and never evaluated: affection unknown" in d1.legend
    assert not any("?" in w and "uncertain" in w for w in d1.legend)  # "?" has one meaning


def test_cause_and_age_of_death_under_a_deceased_symbol():
    fr = crowded_family()
    people = fr["people"]
    m = pedigree_marks(Pedigree(people), people, fr["genetic_results"], fr["assessments"], fr["variants"])
    assert "d. 50 y (1970), sudden" in m["CR9-III-1"].lines
    assert "d. 45 y (1990), cardiac, not sudden" in m["CR9-I-1"].lines
    assert "d. ~54 y (2001), non-cardiac" in m["CR9-I-2"].lines  # age worked out from partial dates
    assert "d. age unknown, cause unknown" in m["CR9-I-4"].lines
    assert "d. ~58 y (2010)" in m["CR9-I-6"].lines  # no cause recorded: none printed
    # without the columns (older stores) the dates still give the age
    bare = people.drop(columns=["death_cause", "death_age"])
    m2 = pedigree_marks(Pedigree(bare), bare)
    assert "d. ~50 y (1970)" in m2["CR9-III-1"].lines


def test_a_change_of_birth_order_is_written_on_the_page(frames, tmp_path):
    # HV03: the proband (born 1958) has a partner, so he stands at the end of his sibship, after his
    # younger sister (born 1961); the page says why the siblings are not in birth order
    d = write_pedigree_pdf(tmp_path / "p.pdf", "HV03", drawn_on=DRAWN, **frames)
    text = " ".join(_text(d.path).split())
    assert "Layout notes: children of HV03-I-2 and HV03-I-1 are not all in birth order" in text


def test_long_layout_warnings_and_notes_are_printed_in_full(tmp_path):
    # the consanguineous invented family has long warnings and notes: none is cut off
    d = write_pedigree_pdf(tmp_path / "p.pdf", "CR9", drawn_on=DRAWN, **crowded_family())
    text = " ".join(_text(d.path).split())
    assert d.warnings and d.notes
    for words in (*d.warnings, *d.notes):
        assert " ".join(words.split()) in text
