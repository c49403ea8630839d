"""A 17-segment polar map ("bull's-eye") of segmental peak longitudinal strain, drawn with reportlab graphics.

Layout: the AHA standardized myocardial segmentation (Cerqueira MD et al.,
Circulation 2002;105:539-42 [V2: segment names and numbering as reproduced in
the reference notes; see :mod:`tracker.engines.segments`]).  Four concentric
rings: basal (segments 1-6) outermost, mid (7-12), apical (13-16) and the
apex (apical cap, 17) in the centre.  Segment 1 (basal anterior) is at the
top; the walls of each six-segment ring follow counter-clockwise as in that
statement: anterior, anteroseptal, inferoseptal, inferior, inferolateral,
anterolateral, so the septum lies on the left of the picture and the lateral
wall on the right.  The apical ring has four segments: anterior (13, top),
septal (14, left), inferior (15, bottom), lateral (16, right).

Angles are in degrees counter-clockwise from the positive x axis (3 o'clock),
the convention of :class:`reportlab.graphics.shapes.Wedge`.  A six-segment
ring gives each wall 60 degrees, the anterior wall centred at 90 degrees
(12 o'clock); the apical ring gives each wall 90 degrees, also with the
anterior centred at 90 degrees.  Ring radii (fractions of the outer radius,
:data:`RING_RADII`): basal 0.76-1, mid 0.52-0.76, apical 0.24-0.52, apex 0-0.24
-- the inner rings a little wider than equal quarter steps so that a value and
its segment number fit in the short apical segments of a small map (an
engineering choice: the statement fixes the order, not the proportions of the
drawing).

Colour scale (this project's own design, defined numerically here; not taken
from any imaging system): seven bins of peak longitudinal strain in %
(negative = shortening), ordered in CIE L* lightness from light (strong
shortening) to dark (no shortening or lengthening), with the hue moving from
a pale blue through a neutral sand to ochre and red-brown, so that reduced
deformation reads as darker and warmer in colour and in grey-scale print
alike.  Each bin's colour is given as CIELAB (L*, a*, b*, D65 white) and
converted to sRGB by :func:`lab_to_hex`.  The bin edges are round numbers
chosen for display (engineering choice), not normal limits: segmental normal
ranges differ by segment, vendor and software, and the value printed in each
segment is what counts.  The scale covers the whole plausible data-entry range
of the segmental codes (-50 to 30 %, migration 0002); a value outside it is
drawn grey and marked.

Pure: functions return geometry (:class:`tracker.outputs.figure.Figure`), colours, a reportlab
``Drawing`` or SVG text; nothing is read or written.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

from typing import TYPE_CHECKING

from tracker.engines import segments as seg
from tracker.outputs import figure as F

if TYPE_CHECKING:
    from reportlab.graphics.shapes import Drawing

#: Plausible data-entry range of ls_segNN (%), migration 0002 (engineering default for data entry).
SCALE_MIN_PCT = -50.0
SCALE_MAX_PCT = 30.0

RING_ORDER = (seg.BASAL, seg.MID, seg.APICAL, seg.APEX)  # outermost first
#: (inner, outer) radius of each ring as a fraction of the outer radius.
RING_RADII = {seg.BASAL: (0.76, 1.0), seg.MID: (0.52, 0.76), seg.APICAL: (0.24, 0.52), seg.APEX: (0.0, 0.24)}

OUT_OF_SCALE = "#BBBBBB"
#: Width in points of the colour key drawn to the right of the map.
LEGEND_WIDTH = 90.0


@dataclass(frozen=True)
class SegmentGeometry:
    """Where one segment is drawn: angles in degrees (counter-clockwise from 3 o'clock), radii as fractions."""

    number: int
    level: str
    wall: str
    name: str
    start_deg: float
    end_deg: float
    inner: float
    outer: float

    @property
    def centre_deg(self) -> float:
        return (self.start_deg + self.end_deg) / 2.0


def _ring_geometry(level: str, numbers: tuple[int, ...]) -> list[tuple[int, float, float]]:
    """(number, start, end) for a ring whose first segment (anterior) is centred at 90 degrees."""
    k = len(numbers)
    width = 360.0 / k
    out = []
    for i, n in enumerate(numbers):
        centre = (90.0 + i * width) % 360.0  # counter-clockwise: anterior, then towards the septum
        out.append((n, centre - width / 2.0, centre + width / 2.0))
    return out


def segment_geometry() -> tuple[SegmentGeometry, ...]:
    """Geometry of the 17 segments, in segment-number order."""
    by_number = {s.number: s for s in seg.segments(seg.AHA17)}
    out: list[SegmentGeometry] = []
    for level in (seg.BASAL, seg.MID, seg.APICAL):
        numbers = seg.segment_numbers(seg.AHA17, level)
        inner, outer = RING_RADII[level]
        for n, a0, a1 in _ring_geometry(level, numbers):
            s = by_number[n]
            out.append(SegmentGeometry(n, s.level, s.wall, s.name, a0, a1, inner, outer))
    s17 = by_number[17]
    out.append(SegmentGeometry(17, s17.level, s17.wall, s17.name, 0.0, 360.0, *RING_RADII[seg.APEX]))
    return tuple(sorted(out, key=lambda g: g.number))


# --------------------------------------------------------------------------- colour scale


def lab_to_hex(L: float, a: float, b: float) -> str:  # noqa: N803 - CIELAB names
    """sRGB hex of a CIELAB colour (D65 white, IEC 61966-2-1 sRGB transfer; out-of-gamut channels clipped)."""

    def finv(t: float) -> float:
        return t**3 if t**3 > 216 / 24389 else (116 * t - 16) / (24389 / 27)

    fy = (L + 16) / 116
    x, y, z = 0.95047 * finv(fy + a / 500), finv(fy), 1.08883 * finv(fy - b / 200)
    lin = (
        3.2404542 * x - 1.5371385 * y - 0.4985314 * z,
        -0.9692660 * x + 1.8760108 * y + 0.0415560 * z,
        0.0556434 * x - 0.2040259 * y + 1.0572252 * z,
    )

    def gamma(c: float) -> int:
        c = min(1.0, max(0.0, c))
        c = 12.92 * c if c <= 0.0031308 else 1.055 * c ** (1 / 2.4) - 0.055
        return round(255 * c)

    return "#%02X%02X%02X" % tuple(gamma(c) for c in lin)


@dataclass(frozen=True)
class ColourBin:
    """Values ``low <= v < high`` (the last bin includes ``high``), in %; colour as CIELAB and sRGB hex."""

    low: float
    high: float
    lab: tuple[float, float, float]
    label: str

    @property
    def hex(self) -> str:
        return lab_to_hex(*self.lab)

    @property
    def lightness(self) -> float:
        return self.lab[0]


#: The scale, most negative (strongest shortening) first.  Display bins (engineering choice), not limits.
COLOUR_BINS: tuple[ColourBin, ...] = (
    ColourBin(SCALE_MIN_PCT, -20.0, (94.0, -4.0, -10.0), "below -20"),
    ColourBin(-20.0, -16.0, (84.0, -6.0, -16.0), "-20 to -16"),
    ColourBin(-16.0, -12.0, (74.0, -2.0, 8.0), "-16 to -12"),
    ColourBin(-12.0, -8.0, (63.0, 14.0, 42.0), "-12 to -8"),
    ColourBin(-8.0, -4.0, (52.0, 30.0, 48.0), "-8 to -4"),
    ColourBin(-4.0, 0.0, (41.0, 40.0, 40.0), "-4 to 0"),
    ColourBin(0.0, SCALE_MAX_PCT, (30.0, 38.0, 24.0), "0 or above"),
)
SCALE_TEXT = (
    "Colour: peak longitudinal strain, % (negative = shortening); bins -20/-16/-12/-8/-4/0 %, lighter = more "
    "shortening, darker and warmer = less. Display bins of this report, not normal limits."
)


def bin_for(value: float | None) -> ColourBin | None:
    """The bin holding ``value`` (%), or None when missing or outside the scale."""
    if value is None or not math.isfinite(value):
        return None
    for i, b in enumerate(COLOUR_BINS):
        last = i == len(COLOUR_BINS) - 1
        if b.low <= value < b.high or (last and value == b.high):
            return b
    return None


def colour_for(value: float | None) -> str:
    """Fill colour (hex) for a segment value; grey when out of scale, white when missing."""
    if value is None or not math.isfinite(value):
        return "#FFFFFF"
    b = bin_for(value)
    return b.hex if b else OUT_OF_SCALE


def _text_hex(fill: str) -> str:
    """White text on a dark segment, black on a light one."""
    r, g, b = (int(fill[i:i + 2], 16) / 255 for i in (1, 3, 5))
    luminance = 0.2126 * r + 0.7152 * g + 0.0722 * b
    return "#FFFFFF" if luminance < 0.45 else "#000000"


# --------------------------------------------------------------------------- drawing


def _ring_sector(cx: float, cy: float, g: SegmentGeometry, r: float, step_deg: float = 2.0) -> list[float]:
    """Outline of a segment as polygon points (arcs sampled every ``step_deg``); the apex is a full disc."""
    k = max(2, math.ceil((g.end_deg - g.start_deg) / step_deg) + 1)
    angles = [math.radians(g.start_deg + (g.end_deg - g.start_deg) * i / (k - 1)) for i in range(k)]
    outer = [(cx + g.outer * r * math.cos(t), cy + g.outer * r * math.sin(t)) for t in angles]
    inner = [(cx + g.inner * r * math.cos(t), cy + g.inner * r * math.sin(t)) for t in reversed(angles)]
    points = outer + (inner if g.inner > 0 else [])
    return [v for xy in points for v in xy]


def polar_map_figure(values: Mapping[int, float | None], diameter: float = 150.0, legend: bool = True) -> F.Figure:
    """The geometry of the map for ``values`` (segment number 1-17 -> peak strain %, None = not measured),
    drawn by the PDF (:func:`polar_map_drawing`) and the web page (:func:`polar_map_svg`).

    ``diameter`` in points; with ``legend`` the colour key is drawn to the right of the map.
    Every measured segment shows its value (one decimal); an unmeasured one shows "-" on white.
    """
    r = diameter / 2.0
    # a small map (under 140 pt, as in the trajectory report's chart grid) uses smaller figures
    value_pt, number_pt = (7.0, 5.0) if diameter >= 140 else (6.2, 4.6)
    legend_w = LEGEND_WIDTH if legend else 0.0
    labels_pad = 12.0
    width = diameter + 2 * labels_pad + legend_w
    height = diameter + 2 * labels_pad
    fig = F.Figure(width, height, title="Segmental peak longitudinal strain, 17 segments (%)")
    cx, cy = labels_pad + r, labels_pad + r
    for g in segment_geometry():
        v = values.get(g.number)
        v = None if v is None or not math.isfinite(float(v)) else float(v)
        fill = colour_for(v)
        if g.number == 17:
            tx, ty = cx, cy
        else:
            mid = (g.inner + g.outer) / 2.0 * r
            tx = cx + mid * math.cos(math.radians(g.centre_deg))
            ty = cy + mid * math.sin(math.radians(g.centre_deg))
        text = "-" if v is None else f"{v:.1f}" + ("*" if bin_for(v) is None else "")
        what = seg.segment_name(seg.AHA17, g.number)
        title = f"{g.number} {what}: " + ("not measured" if v is None else f"{v:.1f} %")
        fig.add(F.Poly(tuple(_ring_sector(cx, cy, g, r)), style=F.Style("#444444", fill, 0.6), role="segment",
                       title=title))  # fmt: skip
        fc = _text_hex(fill)
        fig.add(F.Text(tx, ty + 0.3, text, size=value_pt, bold=True, colour=fc, anchor="middle", role="value"))
        fig.add(F.Text(tx, ty - 5.2, str(g.number), size=number_pt, colour=fc, anchor="middle", role="number"))
    small = dict(size=6.5, colour="#333333", role="wall")
    fig.add(F.Text(cx, cy + r + 4, "anterior", anchor="middle", **small))
    fig.add(F.Text(cx, cy - r - 9, "inferior", anchor="middle", **small))
    fig.add(F.Text(cx - r - 2, cy - 2, "septal", anchor="end", **small))
    fig.add(F.Text(cx + r + 2, cy - 2, "lateral", anchor="start", **small))
    if legend:
        x0 = labels_pad * 2 + diameter + 14
        box = 12.0
        top = min(height / 2 + 55.0, height - 12.0)  # the key (about 123 pt tall) centred, inside the drawing
        fig.add(F.Text(x0, top + 6, "peak LS, %", size=7, bold=True, role="legend"))
        key = F.Style("#444444", None, 0.4)
        for i, b in enumerate(COLOUR_BINS):
            y = top - (i + 1) * box
            fig.add(F.Rect(x0, y, box, box - 1.5, F.Style(key.stroke, b.hex, key.width), role="legend"))
            fig.add(F.Text(x0 + box + 4, y + 3, b.label, size=7, role="legend"))
        y = top - (len(COLOUR_BINS) + 1) * box
        fig.add(F.Rect(x0, y, box, box - 1.5, F.Style(key.stroke, "#FFFFFF", key.width), role="legend"))
        fig.add(F.Text(x0 + box + 4, y + 3, "- not measured", size=7, role="legend"))
        fig.add(F.Line(x0, y - 4, x0 + 70, y - 4, F.Style("#BBBBBB", width=0.3), role="legend"))
        fig.add(F.Text(x0, y - 13, "lighter = more shortening", size=6, role="legend"))
        fig.add(F.Text(x0, y - 21, "small number = segment", size=6, role="legend"))
    return fig


def polar_map_drawing(values: Mapping[int, float | None], diameter: float = 150.0, legend: bool = True) -> Drawing:
    """A reportlab drawing of the map (see :func:`polar_map_figure`)."""
    return F.to_drawing(polar_map_figure(values, diameter, legend))


def polar_map_svg(values: Mapping[int, float | None], diameter: float = 200.0, legend: bool = True) -> str:
    """The same map as inline SVG for the web page."""
    from tracker.outputs.svg import figure_svg

    return figure_svg(polar_map_figure(values, diameter, legend), css_class="strain-map")
