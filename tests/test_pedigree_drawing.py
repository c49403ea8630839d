"""Pedigree PDF: what each symbol shows, the page's text, rendering, and `tracker report pedigree`.

Expected marks follow pedigree nomenclature (NSGC 2008/2022, docs/reference/standards.md
section 1 [V]): affected filled; a genotype-positive relative with a normal echo is not
shaded; presymptomatic carrier = vertical line; E+/E- evaluation text with the variant in
parentheses; text under a symbol ends with the individual number.  The demo families are
invented (demo_family/README.md).
"""

from __future__ import annotations

import datetime as dt
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
    assert "E+ (MYBPC3 c.1504C>T)" in pro.lines
    # a carrier with a normal echo: not shaded, vertical line (presymptomatic carrier, 2008)
    helen = m["HV01-III-3"]
    assert helen.affection == "unaffected" and helen.carrier_mark == "presymptomatic"
    assert "E+ (MYBPC3 c.1504C>T)" in helen.lines
    # the converter is affected at his latest assessment: filled, no line
    assert m["HV01-IV-2"].affection == "affected" and m["HV01-IV-2"].carrier_mark is None
    # a tested non-carrier
    assert "E- (MYBPC3 c.1504C>T)" in m["HV01-IV-3"].lines and m["HV01-IV-3"].carrier_mark is None
    # placeholders: ordinary symbols, code only (the number is added from the layout)
    assert m["HV01-I-1"].placeholder and m["HV01-I-1"].lines == ("HV01-I-1",)
    assert m["HV01-I-1"].deceased and m["HV01-I-1"].shape == "square" and m["HV01-I-2"].shape == "circle"
    # deceased with year-only birth: age at death is approximate
    assert "b. 1938, d. 1979 (~41 y)" in m["HV01-II-1"].lines
    # a blood relative never assessed shows '?'; a married-in partner never assessed is open
    assert m["HV01-III-6"].affection == "uncertain"
    assert m["HV01-III-2"].affection == "unaffected"
    # codes, never names, by default
    assert all("Thornbury" not in line for mk in m.values() for line in mk.lines)


def test_marks_with_names_and_vus_family(frames):
    people = frames["people"]
    fam = people[people["family"] == "HV01"].reset_index(drop=True)
    m = pedigree_marks(Pedigree(fam), fam, names=True)
    assert m["HV01-III-1"].lines[0] == "Graham Thornbury"
    v = _marks(frames, "HV03")
    # a VUS gives genotypes no predictive meaning: the class is written, no carrier mark
    assert "E+ (TNNI3 c.508C>T, VUS)" in v["HV03-II-3"].lines
    assert all(mk.carrier_mark is None for mk in v.values())
    # panel that found no variant
    n = _marks(frames, "HV05")
    assert "E- (panel: no variant found)" in n["HV05-II-1"].lines


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
    assert {"I-1", "II-4", "III-1", "III-6", "IV-4"} <= lines  # individual numbers
    for words in ("male", "female", "affected (HCM)", "deceased", "proband", "presymptomatic carrier (2008 mark)"):
        assert words in lines, words
    assert "E+ (MYBPC3 c.1504C>T)" in lines and "E- (MYBPC3 c.1504C>T)" in lines
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
