"""A tiny SVG writer: every attribute value and every text escaped, no dependency.

:class:`Svg` builds an element tree as text; :func:`figure_svg` renders a
:class:`tracker.outputs.figure.Figure` (y upwards, points) as SVG (y downwards, one user unit per
point).  The SVG is meant to be placed inline in an HTML page, so it has no XML declaration and
no script; links are plain ``<a href>`` elements.
"""

from __future__ import annotations

import math
from xml.sax.saxutils import escape, quoteattr

from tracker.outputs import figure as F

SVG_NS = "http://www.w3.org/2000/svg"


def num(v: float) -> str:
    """A coordinate as written: at most 2 decimals, no trailing zeros, never 'nan'."""
    if not math.isfinite(v):
        raise ValueError("non-finite coordinate in a picture")
    text = f"{v:.2f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def _attr_value(v: object) -> str:
    if isinstance(v, float):
        return num(v)
    return str(v)


class Svg:
    """Append-only SVG text builder.  ``open``/``close`` for groups and links, ``el`` for leaves."""

    def __init__(self, width: float, height: float, *, label: str = "", css_class: str = "", role: str = "img"):
        # role "img": one picture, its parts hidden from assistive technology; a drawing whose parts are
        # links must be a "group" instead (links inside an img are nested interactive content).
        self.parts: list[str] = []
        self._stack: list[str] = []
        attrs = {"xmlns": SVG_NS, "width": width, "height": height, "viewBox": f"0 0 {num(width)} {num(height)}",
                 "role": role, "font-family": "Helvetica, Arial, sans-serif"}
        if css_class:
            attrs["class"] = css_class
        if label:
            attrs["aria-label"] = label
        self.open("svg", **attrs)
        if label:
            self.el("title", text=label)

    @staticmethod
    def _attrs(attrs: dict) -> str:
        out = []
        for k, v in attrs.items():
            if v is None:
                continue
            name = k.rstrip("_").replace("_", "-")
            out.append(f" {name}={quoteattr(_attr_value(v))}")
        return "".join(out)

    def open(self, tag: str, **attrs) -> "Svg":
        self.parts.append(f"<{tag}{self._attrs(attrs)}>")
        self._stack.append(tag)
        return self

    def close(self) -> "Svg":
        self.parts.append(f"</{self._stack.pop()}>")
        return self

    def el(self, tag: str, text: str | None = None, **attrs) -> "Svg":
        if text is None:
            self.parts.append(f"<{tag}{self._attrs(attrs)}/>")
        else:
            self.parts.append(f"<{tag}{self._attrs(attrs)}>{escape(text)}</{tag}>")
        return self

    def text(self) -> str:
        while self._stack:
            self.close()
        return "".join(self.parts)


def _style_attrs(st: F.Style) -> dict:
    out: dict = {"stroke": st.stroke or "none", "fill": st.fill or "none"}
    if st.stroke:
        out["stroke_width"] = float(st.width)
    if st.dash:
        out["stroke_dasharray"] = " ".join(num(d) for d in st.dash)
    if st.fill and st.opacity != 1.0:
        out["fill_opacity"] = float(st.opacity)
    return out


def _points(flat: tuple[float, ...], height: float) -> str:
    return " ".join(f"{num(flat[i])},{num(height - flat[i + 1])}" for i in range(0, len(flat), 2))


def draw_shape(s: Svg, shape: F.Shape, height: float) -> None:
    """One primitive of a figure (y flipped)."""
    role = shape.role or None
    title = getattr(shape, "title", None)
    href = getattr(shape, "href", None)
    if href:
        s.open("a", href=href)
    if isinstance(shape, F.Text):
        s.el("text", shape.text, x=float(shape.x), y=float(height - shape.y), font_size=float(shape.size),
             font_weight="bold" if shape.bold else None, fill=shape.colour, text_anchor=shape.anchor,
             class_=role)  # fmt: skip
    else:
        attrs = _style_attrs(shape.style)
        attrs["class_"] = role
        if isinstance(shape, F.Line):
            tag, geo = "line", dict(x1=float(shape.x0), y1=float(height - shape.y0), x2=float(shape.x1),
                                    y2=float(height - shape.y1))  # fmt: skip
        elif isinstance(shape, F.Poly):
            tag, geo = ("polygon" if shape.closed else "polyline"), dict(points=_points(shape.points, height))
        elif isinstance(shape, F.Circle):
            tag, geo = "circle", dict(cx=float(shape.cx), cy=float(height - shape.cy), r=float(shape.r))
        else:
            tag, geo = "rect", dict(x=float(shape.x), y=float(height - shape.y - shape.h), width=float(shape.w),
                                    height=float(shape.h))  # fmt: skip
        if title:
            s.open(tag, **geo, **attrs)
            s.el("title", text=title)
            s.close()
        else:
            s.el(tag, **geo, **attrs)
    if href:
        s.close()


def figure_svg(fig: F.Figure, *, css_class: str = "") -> str:
    """The figure as an SVG document (text)."""
    s = Svg(fig.width, fig.height, label=fig.title, css_class=css_class)
    s.el("rect", x=0.0, y=0.0, width=float(fig.width), height=float(fig.height), fill="#FFFFFF", stroke="none")
    for shape in fig.shapes:
        draw_shape(s, shape, fig.height)
    return s.text()
