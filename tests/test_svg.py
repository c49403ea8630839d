"""SVG pictures for the web pages: drawn from the same geometry as the PDFs.

The pedigree SVG comes from the PDF's layout and marks (one symbol link per placed person, the
code only in the link); the trend chart and the strain map come from one Figure that both the
reportlab drawing and the SVG render (same number of points and segments, same coordinates with
y flipped).  Demo families are invented (demo_family/README.md).
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET

import pytest
from reportlab.graphics import shapes as R

from tracker.cli.app import main
from tracker.outputs import polar_map as PM
from tracker.outputs import trajectory_pdf as T
from tracker.outputs.figure import Figure, Poly, Style, Text
from tracker.outputs.pedigree_drawing import family_pedigree, pedigree_svg, write_pedigree_svg
from tracker.outputs.svg import Svg, figure_svg, num
from tracker.store import repository as repo
from tracker.store.database import locate, make_engine, reading

NS = {"s": "http://www.w3.org/2000/svg"}


@pytest.fixture(scope="module")
def frames(tmp_path_factory):
    path = str(tmp_path_factory.mktemp("demo") / "demo.sqlite")
    assert main(["demo", "--db", path, "--json"]) == 0
    engine = make_engine(locate(path))
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


# --------------------------------------------------------------------------- the builder


def test_builder_escapes_text_and_attributes():
    s = Svg(10, 10, label='a <b> & "c"')
    s.el("text", "x < y & z", x=1.0, y=2.0, class_='q"uote')
    root = ET.fromstring(s.text())
    assert root.find("s:title", NS).text == 'a <b> & "c"'
    t = root.find("s:text", NS)
    assert t.text == "x < y & z" and t.get("class") == 'q"uote'


def test_numbers_are_short_and_never_nan():
    assert num(1.0) == "1" and num(-0.001) == "0" and num(2.5) == "2.5" and num(1.234) == "1.23"
    with pytest.raises(ValueError):
        num(math.nan)


def test_figure_y_is_flipped():
    fig = Figure(100, 50)
    fig.add(Poly((0, 0, 100, 50), closed=False, style=Style("#000000")))
    fig.add(Text(10, 40, "top"))
    root = ET.fromstring(figure_svg(fig))
    assert root.find("s:polyline", NS).get("points") == "0,50 100,0"
    assert root.find("s:text", NS).get("y") == "10"


# --------------------------------------------------------------------------- pedigree


@pytest.mark.parametrize("family", ["HV01", "HV02", "HV03", "HV04", "HV05"])
def test_pedigree_svg_has_one_linked_symbol_per_person(frames, family):
    svg, layout = write_pedigree_svg(family, frames["people"], frames["genetic_results"], frames["assessments"],
                                     frames["variants"])  # fmt: skip
    root = ET.fromstring(svg)
    links = root.findall(".//s:a", NS)
    assert len(links) == len(layout.people) > 0
    codes = {p.person for p in layout.people}
    for a in links:
        m = re.fullmatch(r"/person/(.+)", a.get("href"))
        assert m and m.group(1) in codes
        title = a.find("s:title", NS).text
        assert title.split(",")[0] == m.group(1)
        assert not re.search(r"\d{4}", title)  # no year, no date in the description
        shapes = [e for e in a.iter() if e.tag.split("}")[1] in ("rect", "circle", "polygon")]
        assert shapes  # the symbol itself is the link
    assert {a.get("href") for a in links} == {f"/person/{c}" for c in codes}
    # links inside role="img" are nested interactive content (axe-core "nested-interactive"): a group
    assert root.get("role") == "group" and root.get("aria-label") == f"Pedigree of family {family}"


def test_pedigree_svg_shows_no_name_and_no_full_date(frames):
    people = frames["people"]
    svg, _ = write_pedigree_svg("HV01", people, frames["genetic_results"], frames["assessments"], frames["variants"])
    members = people[people["family"] == "HV01"]
    for col in ("given_name", "family_name"):
        for name in members[col].dropna():
            assert str(name) not in svg
    for d in members["birth_date"].dropna():
        if len(str(d)) == 10:
            assert str(d) not in svg
    assert not re.search(r"\d{4}-\d{2}-\d{2}", svg)


def test_pedigree_svg_marks_follow_the_pdf_marks(frames):
    layout, marks = family_pedigree("HV01", frames["people"], frames["genetic_results"], frames["assessments"],
                                    frames["variants"])  # fmt: skip
    root = ET.fromstring(pedigree_svg(layout, marks, family="HV01"))
    affected = [a for a in root.findall(".//s:a", NS) if "affected" in (a.find("s:g", NS).get("class") or "").split()]
    assert len(affected) == sum(m.affection == "affected" for m in marks.values()) > 0
    carrier_lines = root.findall(".//s:line[@class='carrier-line']", NS)
    assert len(carrier_lines) == sum(m.carrier_mark == "presymptomatic" for m in marks.values())
    numerals = [t.text for t in root.findall(".//s:g[@class='generations']/s:text", NS)]
    assert numerals == [g.roman for g in layout.generations]


# --------------------------------------------------------------------------- trend chart


CHART = T.Chart(
    "mwt_echo", "Maximal LV wall thickness, echo (mwt_echo), mm", "mm",
    ((30.0, 12.0, False), (32.0, 13.1, True), (34.0, 13.9, True), (36.0, 14.8, True)),
    ((32.0, 13.0, 12.5, 13.5), (34.0, 13.9, 13.6, 14.2), (36.0, 14.8, 14.3, 15.3)),
    ((30.0, 6.0, 11.0), (36.0, 6.0, 11.0)), (15.0, "ESC 2023: >= 15 mm"),
    projection=((36.0, 14.8), (37.0, 15.25)),
)  # fmt: skip


def test_chart_svg_and_pdf_drawing_share_the_geometry():
    svg = ET.fromstring(T.chart_svg(CHART, 300, 190))
    drawing = T.chart_drawing(CHART, 300, 190)
    dots = [s for s in drawing.getContents() if isinstance(s, R.Circle)]
    circles = svg.findall("s:circle[@class='point']", NS)
    assert len(circles) == len(dots) == len(CHART.points)
    for c, d in zip(circles, dots):
        assert float(c.get("cx")) == pytest.approx(d.cx, abs=0.01)
        assert float(c.get("cy")) == pytest.approx(190 - d.cy, abs=0.01)
    # open dot for the study outside the fit, filled for the others
    assert [c.get("fill") for c in circles] == ["#FFFFFF", "#000000", "#000000", "#000000"]
    for role in ("fit", "band", "normal", "threshold", "projection"):
        assert svg.findall(f".//*[@class='{role}']", NS), role
    texts = {t.text for t in svg.findall("s:text", NS)}
    assert "mm" in texts and "age (years)" in texts and "ESC 2023: >= 15 mm" in texts


def test_chart_without_values_says_so():
    svg = ET.fromstring(T.chart_svg(T.Chart("gls", "GLS (gls), %", "%", ()), 300, 190))
    assert "no values" in {t.text for t in svg.findall("s:text", NS)}


# --------------------------------------------------------------------------- strain map


def test_polar_map_svg_has_17_segments_with_values():
    values = {n: -22.0 + n for n in range(1, 18)}
    values[5] = None
    root = ET.fromstring(PM.polar_map_svg(values))
    segs = root.findall("s:polygon[@class='segment']", NS)
    assert len(segs) == 17
    titles = [s.find("s:title", NS).text for s in segs]
    assert titles[0].startswith("1 ") and "-21.0 %" in titles[0]
    assert any(t.startswith("5 ") and "not measured" in t for t in titles)
    drawing = PM.polar_map_drawing(values)
    fills = [s.fillColor.hexval()[2:].upper() for s in drawing.getContents() if isinstance(s, R.Polygon)]
    assert [s.get("fill").lstrip("#").upper() for s in segs] == fills


def test_projection_is_drawn_only_ahead_of_the_fitted_line(frames, tmp_path):
    """HV02-III-2's wall-thickness trend is projected to cross 13 mm before the last study (already past
    it on the fitted line): no projection is drawn backwards (the engine's projected age is kept in the
    flags and the recall reasons)."""
    import datetime as dt

    from tracker.services import documents as SD
    from tracker.services.recall import recall_rules

    path = str(tmp_path / "demo.sqlite")
    assert main(["demo", "--db", path, "--json"]) == 0
    conf, rule_set, policy = recall_rules(None, None)
    engine = make_engine(locate(path))
    with reading(engine) as conn:
        data = SD.trajectory(conn, "HV02-III-2", dt.date(2026, 12, 1), conf, rule_set, policy, 3.0)
    engine.dispose()
    rows = {r["measure"]: r for r in data.trend_records}
    assert rows["mwt_echo"]["projected_age"] is not None
    chart = next(c for c in SD.charts(data.assessed, rows, "ESC") if c.measure == "mwt_echo")
    assert rows["mwt_echo"]["projected_age"] < chart.fit[-1][0] and chart.projection == ()
    # a projection ahead of the line is drawn, dotted, inside the chart
    ahead = T.Chart(chart.measure, chart.title, chart.unit, chart.points, chart.fit, chart.normal, chart.threshold,
                    projection=((chart.fit[-1][0], chart.fit[-1][1]), (chart.fit[-1][0] + 2.0, 13.5)))
    svg = ET.fromstring(T.chart_svg(ahead))
    line = svg.find("s:polyline[@class='projection']", NS)
    assert line is not None and line.get("stroke-dasharray")
    xs = [float(p.split(",")[0]) for p in line.get("points").split()]
    assert max(xs) <= 300 - 6 + 0.01  # inside the plot area (right margin 6 points)
