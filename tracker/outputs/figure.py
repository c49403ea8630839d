"""One picture, two renderers: plain geometry that the PDF (reportlab) and the web page (SVG) both draw.

A :class:`Figure` is a list of primitives in points, **y upwards** from the bottom-left corner (the
reportlab convention); the SVG renderer (:func:`tracker.outputs.svg.figure_svg`) flips y.  Each
primitive carries a ``role`` (what it shows: 'point', 'fit', 'band', 'normal', 'threshold',
'segment', 'axis', ...) and optionally a ``title`` (an accessible description for the web page) and
an ``href`` (a link on the web page).  The geometry is computed once, by the picture's own module
(:func:`tracker.outputs.trajectory_pdf.chart_figure`, :func:`tracker.outputs.polar_map.polar_map_figure`);
:func:`to_drawing` turns it into a reportlab ``Drawing`` for the PDFs.

Pure: no file, no database.  reportlab is imported inside :func:`to_drawing` only.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Union


@dataclass(frozen=True)
class Style:
    stroke: str | None = "#000000"  # hex colour, None = no outline
    fill: str | None = None  # hex colour, None = no fill
    width: float = 0.5
    dash: tuple[float, ...] = ()
    opacity: float = 1.0  # fill opacity


@dataclass(frozen=True)
class Line:
    x0: float
    y0: float
    x1: float
    y1: float
    style: Style = Style()
    role: str = ""
    title: str | None = None


@dataclass(frozen=True)
class Poly:
    """A polygon (``closed``) or a polyline; ``points`` flat: x0, y0, x1, y1, ..."""

    points: tuple[float, ...]
    closed: bool = True
    style: Style = Style()
    role: str = ""
    title: str | None = None
    href: str | None = None


@dataclass(frozen=True)
class Circle:
    cx: float
    cy: float
    r: float
    style: Style = Style()
    role: str = ""
    title: str | None = None


@dataclass(frozen=True)
class Rect:
    x: float
    y: float
    w: float
    h: float
    style: Style = Style()
    role: str = ""
    title: str | None = None


@dataclass(frozen=True)
class Text:
    """Text on its baseline at (x, y); ``anchor``: 'start', 'middle', 'end'."""

    x: float
    y: float
    text: str
    size: float = 7.0
    bold: bool = False
    colour: str = "#000000"
    anchor: str = "start"
    role: str = ""


Shape = Union[Line, Poly, Circle, Rect, Text]


@dataclass
class Figure:
    width: float
    height: float
    title: str = ""
    shapes: list[Shape] = field(default_factory=list)

    def add(self, shape: Shape) -> Shape:
        self.shapes.append(shape)
        return shape

    def with_role(self, role: str) -> list[Shape]:
        return [s for s in self.shapes if s.role == role]


def to_drawing(fig: Figure):
    """The figure as a reportlab ``Drawing`` (for the PDFs)."""
    from reportlab.graphics import shapes as R
    from reportlab.lib import colors

    def col(v: str | None):
        return None if v is None else colors.HexColor(v)

    d = R.Drawing(fig.width, fig.height)
    for s in fig.shapes:
        if isinstance(s, Text):
            d.add(R.String(s.x, s.y, s.text, fontName="Helvetica-Bold" if s.bold else "Helvetica",
                           fontSize=s.size, fillColor=col(s.colour), textAnchor=s.anchor))  # fmt: skip
            continue
        st = s.style
        kw = dict(strokeColor=col(st.stroke), strokeWidth=st.width if st.stroke else 0)
        if st.dash:
            kw["strokeDashArray"] = list(st.dash)
        if isinstance(s, Line):
            d.add(R.Line(s.x0, s.y0, s.x1, s.y1, **kw))
        elif isinstance(s, Poly) and s.closed:
            extra = {"fillOpacity": st.opacity} if st.opacity != 1.0 else {}
            d.add(R.Polygon(list(s.points), fillColor=col(st.fill), **kw, **extra))
        elif isinstance(s, Poly):
            d.add(R.PolyLine(list(s.points), **kw))
        elif isinstance(s, Circle):
            d.add(R.Circle(s.cx, s.cy, s.r, fillColor=col(st.fill), **kw))
        elif isinstance(s, Rect):
            d.add(R.Rect(s.x, s.y, s.w, s.h, fillColor=col(st.fill), **kw))
    return d
