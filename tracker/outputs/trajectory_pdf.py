"""The cardiologist's one-person trajectory report as an A4 portrait PDF (reportlab).

Content, top to bottom (plain data in, built by ``tracker report trajectory``
from the review, trend, recall and risk engines; nothing is computed here
beyond layout and number formatting):

1. Identity: person code, family, sex at birth, age, genotype status and
   variant class, affected status, the guideline and the "as of" date.  No name.
2. Flags, one table row per measure: progression beyond measurement
   variability, slope intervals, last change against the least significant
   change, projected threshold crossings, as the trend engine words them
   (:func:`tracker.engines.review.trend_table`), and phenotype conversion.
3. The recall proposal (:func:`tracker.engines.schedule.propose_recall` via
   the ``tracker recall`` helpers): status, due date, interval, rule set,
   rule, reasons and source.
4. HCM Risk-SCD (:func:`tracker.engines.risk.hcm_risk_scd`) for an affected
   person of 16 or over: the figure with its inputs, bands, validated range and
   caution, or the refusal with its reasons and no figure.
5. Charts over age of the key measures (:data:`KEY_MEASURES`, those with a
   value), every study drawn: the studies as dots, the fitted straight line
   with its 95% confidence band (:func:`tracker.engines.trend_band.mean_line_band`
   on the trend engine's fit), the normal range (lower and upper limit at each
   study, as the review engine gives them) shaded, and the guideline's
   diagnostic threshold (maximal wall thickness, adults, in mm) as a dashed
   line.  Segmental strain of the latest study with segment values sits in the
   same grid as a 17-segment polar map (:mod:`tracker.outputs.polar_map`) with
   its legend, the text about it under the charts.
6. One table per modality: each measure at the first study and the latest
   ones (:func:`table_columns`, at most :data:`MAX_STUDY_COLUMNS` columns), a
   line saying how many studies between them are not listed (every one is in
   the charts and in ``tracker person``); value in the catalogue unit, the
   normal limit once per row when it is the same at every listed study (else
   under each value), the z-score beside the value, and the judgement (H
   above, L below the normal limit, C meets the guideline's wall-thickness
   criterion).
7. Notes and the source of every normal limit and criterion used.

The layout aims at two A4 pages for one relative's whole trajectory (a long
yearly series with a CMR and a strain map included); only pathological counts
(dozens of flagged measures, very long reasons) run on to a third page.

Every page carries the cautions (decision support only, the treating
clinician decides, follow local protocols and the current guideline), the
person code, the date generated and "page N of M" in the footer.

Type: 8-9 pt text (a clinician's desk report, not a letter for the public;
common practice).  Fonts are the PDF standard Helvetica faces (Latin-1 text).
Pure apart from writing the file it is given.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from xml.sax.saxutils import escape

from reportlab.graphics.shapes import Circle, Drawing, Line, PolyLine, Polygon, Rect, String
from reportlab.lib import colors
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.platypus import CondPageBreak, KeepTogether, Paragraph, SimpleDocTemplate, Spacer, Table, TableStyle

from tracker.outputs import figure as F
from tracker.outputs import polar_map
from tracker.outputs.pdf_pages import numbered_canvas, paragraph

PAGE = A4
MARGIN_MM = 15
FOOTER_MM = 20
WIDTH = PAGE[0] - 2 * MARGIN_MM * mm

PAGE_CAUTION = (
    "Decision support only: the treating clinician decides. Follow local protocols and the current guideline."
)

#: Measures drawn as charts when the person has a value (order of drawing), with their axis unit.
KEY_MEASURES: tuple[str, ...] = ("mwt_echo", "mwt_cmr", "gls", "e_over_e_prime", "e_prime_septal", "lavi")
#: Units as printed on axes and in tables (catalogue unit -> text).
UNIT_TEXT = {"mL/m2": "mL/m2", "g/m2": "g/m2", "ratio": "ratio", "%": "%", "mm": "mm", "ms": "ms",
             "cm/s": "cm/s", "m/s": "m/s", "mmHg": "mmHg", "g": "g", "segments": "segments"}  # fmt: skip
#: Preferred row order in the tables; other measures follow alphabetically, computed ones last.
ROW_ORDER = (
    "mwt_echo", "ivsd", "lvpwd", "lvidd", "lvids", "lvef_echo", "gls", "la_diam", "lavi", "lvot_rest",
    "lvot_provoked", "mv_e", "mv_a", "e_prime_septal", "e_prime_lateral", "tr_vmax",
    "mwt_cmr", "lvmi_cmr", "lvef_cmr", "lge_pct", "ecv",
)  # fmt: skip
#: Study columns of a modality table: the first study and the latest ones (the rest are in the charts).
MAX_STUDY_COLUMNS = 6
#: Cells in a row of the chart grid: 3, or 4 when more than 6 cells are needed (the polar map takes 2).
CHARTS_PER_ROW = 3
CHART_HEIGHT_MM = 41
#: Diameter of the polar map in points (value and segment number stay legible at 7 and 5 pt).
POLAR_DIAMETER = 128.0

_TEXT = ParagraphStyle("tj_text", fontName="Helvetica", fontSize=8.5, leading=10.5)
_SMALL = ParagraphStyle("tj_small", parent=_TEXT, fontSize=7, leading=8.5)
_FLAG = ParagraphStyle("tj_flag", parent=_TEXT, fontSize=8, leading=9.6)
_TINY = ParagraphStyle("tj_tiny", parent=_TEXT, fontSize=6.1, leading=7.2)
_CELL = ParagraphStyle("tj_cell", parent=_TEXT, fontSize=7, leading=8.2)
_CELL_HEAD = ParagraphStyle("tj_cell_head", parent=_CELL, fontName="Helvetica-Bold")
_FCELL = ParagraphStyle("tj_fcell", parent=_CELL, fontSize=6.7, leading=7.8)
_FCELL_HEAD = ParagraphStyle("tj_fcell_head", parent=_FCELL, fontName="Helvetica-Bold")
_TITLE = ParagraphStyle("tj_title", parent=_TEXT, fontName="Helvetica-Bold", fontSize=14, leading=17, spaceAfter=2)
_SECTION = ParagraphStyle("tj_section", parent=_TEXT, fontName="Helvetica-Bold", fontSize=10, leading=12.5,
                          spaceBefore=6, spaceAfter=2)  # fmt: skip
_FOOTER = ParagraphStyle("tj_footer", parent=_TEXT, fontSize=7, leading=8.6, textColor=colors.HexColor("#333333"))

_GREY = colors.HexColor("#666666")
_NORMAL_FILL = colors.HexColor("#DCEFD9")
_BAND_FILL = colors.HexColor("#C9DAF0")
_FIT = colors.HexColor("#1F4E9A")
_THRESHOLD = colors.HexColor("#A3161A")
_GREY_HEX, _NORMAL_HEX, _BAND_HEX, _FIT_HEX, _THRESHOLD_HEX = "#666666", "#DCEFD9", "#C9DAF0", "#1F4E9A", "#A3161A"


# --------------------------------------------------------------------------- plain data


@dataclass(frozen=True)
class Cell:
    """One value in a table: ``value`` in the catalogue unit, ``limit`` the normal-limit text ("6-9", ">= 7"),
    judgement ``marks`` and the z-score of that study (None without one)."""

    value: float
    limit: str = ""
    marks: str = ""
    z: float | None = None


@dataclass(frozen=True)
class TableRow:
    measure: str
    label: str
    unit: str
    derived: bool
    cells: tuple[Cell | None, ...]


@dataclass(frozen=True)
class ModalityTable:
    """Measures (rows) by studies (columns) of one modality; ``dates`` ISO, ``ages`` years."""

    modality: str
    dates: tuple[str, ...]
    ages: tuple[float | None, ...]
    rows: tuple[TableRow, ...]


@dataclass(frozen=True)
class FlagRow:
    """One trended measure, in the trend engine's words (:func:`tracker.engines.review.trend_table`).

    ``n`` studies in the fitted ``window``; ``flag``: the reasons, or "no flag"; ``flagged``: whether there
    is a reason; ``slope`` and ``z_slope``: per year with their 95% CI; ``change``: last change against the
    least significant change; ``projection``: of the diagnostic threshold crossing."""

    measure: str
    n: int
    window: str
    flag: str
    flagged: bool = False
    slope: str = ""
    z_slope: str = ""
    change: str = ""
    projection: str = ""

    @property
    def text(self) -> str:
        """The row as one line (the ``--json`` output)."""
        parts = [f"{self.measure} ({self.n} studies, {self.window}): {self.flag}"]
        named = (("slope ", self.slope), ("z slope ", self.z_slope), ("last change ", self.change),
                 ("projection: ", self.projection))  # fmt: skip
        parts += [f"{k}{v}" for k, v in named if v]
        return "; ".join(parts)


#: Short forms used in the flags table (the trend engine's window and variability words).
_SHORT_WINDOW = {"all studies": "all", "studies from 18 y": "from 18 y", "all studies (under 18 y)": "all, under 18 y"}


def _short_change(text: str) -> str:
    """'-0.60 mm; LSC 3.88 mm (placeholder): within measurement variability' -> '...: within'."""
    return text.replace(" measurement variability", "").replace("; no LSC for this measure", "; no LSC known")


@dataclass(frozen=True)
class Chart:
    """One measure over age.  ``points``: (age, value, in_fit).  ``fit``: (age, fit, low, high) along the
    fitted window (low/high NaN without a band).  ``normal``: (age, lower, upper), NaN where a side has no
    limit.  ``threshold``: (value, label) in the measure's unit, or None."""

    measure: str
    title: str
    unit: str
    points: tuple[tuple[float, float, bool], ...]
    fit: tuple[tuple[float, float, float, float], ...] = ()
    normal: tuple[tuple[float, float, float], ...] = ()
    threshold: tuple[float, str] | None = None
    note: str = ""
    projection: tuple[tuple[float, float], ...] = ()  # (age, value) beyond the fit; empty: not drawn


@dataclass(frozen=True)
class RiskSection:
    """HCM Risk-SCD as shown: ``status`` "computed", "refused" or "not applicable"."""

    status: str
    headline: str
    risk_5y_pct: float | None = None
    inputs: tuple[str, ...] = ()
    reasons: tuple[str, ...] = ()
    bands: tuple[str, ...] = ()
    validated_ranges: str = ""
    caution: str = ""
    model: str = ""
    conflicts: tuple[str, ...] = ()  # the record against a recorded answer: shown beside the figure


@dataclass(frozen=True)
class StrainMap:
    """Segmental peak longitudinal strain (%) of one study, AHA 17-segment numbering."""

    study_date: str
    values: Mapping[int, float | None]
    indices: tuple[str, ...] = ()


@dataclass(frozen=True)
class TrajectoryDocument:
    """Everything printed.  ``identity`` has the keys of the ``tracker person`` JSON identity block."""

    identity: Mapping[str, object]
    guideline: str
    clinic: str
    as_of: dt.date
    generated: dt.date
    flags: tuple[FlagRow, ...]
    conversion: str
    recall: Mapping[str, object]
    risk: RiskSection
    charts: tuple[Chart, ...]
    tables: tuple[ModalityTable, ...]
    strain: StrainMap | None = None
    strain_note: str = ""
    sources: tuple[tuple[str, str], ...] = ()
    notes: tuple[str, ...] = ()
    cautions: tuple[str, ...] = field(default_factory=tuple)


def file_name(person: str) -> str:
    """``trajectory-PERSON.pdf`` (the person code only, never a name)."""
    return f"trajectory-{person}.pdf"


# --------------------------------------------------------------------------- formatting


def number(v: float | None, unit: str = "") -> str:
    """A value as printed: 3 significant figures at most, 1 decimal from 1 to 100, none from 100 up."""
    if v is None or not math.isfinite(v):
        return ""
    a = abs(v)
    text = f"{v:.0f}" if a >= 100 else f"{v:.1f}" if a >= 1 else f"{v:.2f}"
    return f"{text} {unit}".rstrip()


def limit_text(lower: float | None, upper: float | None, z: float | None) -> str:
    """'6-9', '<= 14', '>= 7'; with a z-score 'z 0.33' (children: 'z 0.33; 6-9')."""
    lo = lower if lower is not None and math.isfinite(lower) else None
    hi = upper if upper is not None and math.isfinite(upper) else None
    text = ""
    if lo is not None and hi is not None:
        text = f"{lo:.3g}-{hi:.3g}"
    elif hi is not None:
        text = f"<= {hi:.3g}"
    elif lo is not None:
        text = f">= {lo:.3g}"
    if z is not None and math.isfinite(z):
        text = f"z {z:.2f}" + (f"; {text}" if text else "")
    return text


def marks(assessment: str | None, meets_criteria: object) -> str:
    """'H' above / 'L' below the normal limit, plus 'C' when the wall-thickness criterion is met."""
    out = ""
    if assessment and assessment.startswith("above"):
        out = "H"
    elif assessment and assessment.startswith("below"):
        out = "L"
    if meets_criteria is True:
        out += "C"
    return out


# --------------------------------------------------------------------------- charts


def nice_ticks(lo: float, hi: float, target: int = 5) -> list[float]:
    """Round tick values covering [lo, hi] (steps of 1, 2 or 5 times a power of ten)."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo]
    raw = (hi - lo) / target
    power = 10 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 5, 10) if m * power >= raw)
    start = math.ceil(lo / step - 1e-9) * step
    out, v = [], start
    while v <= hi + 1e-9 * step:
        out.append(round(v, 10))
        v += step
    return out


def _finite(*vals: float) -> list[float]:
    return [v for v in vals if v is not None and math.isfinite(v)]


def chart_figure(c: Chart, width: float, height: float) -> F.Figure:
    """The geometry of one chart (points, fitted line and band, normal range, threshold, axes with the
    unit) in a ``width`` x ``height`` box: drawn by the PDF (:func:`chart_drawing`) and the web page
    (:func:`chart_svg`)."""
    fig = F.Figure(width, height, title=c.title)
    left, right, bottom, top = 26.0, 6.0, 30.0, 30.0
    pw, ph = width - left - right, height - bottom - top
    ages = _finite(*[p[0] for p in c.points], *[f[0] for f in c.fit], *[p[0] for p in c.projection])
    ys = _finite(*[p[1] for p in c.points], *[v for f in c.fit for v in f[1:]], *[p[1] for p in c.projection],
                 *[v for n in c.normal for v in n[1:]], *([c.threshold[0]] if c.threshold else []))  # fmt: skip
    name, _, rest = c.title.partition(" (")
    fig.add(F.Text(0, height - 8, name, size=7.5, bold=True, role="title"))
    if rest:
        fig.add(F.Text(0, height - 17, "(" + rest, size=6.5, colour=_GREY_HEX, role="title"))
    if not ages or not ys:
        fig.add(F.Text(left, bottom + ph / 2, "no values", size=8, role="empty"))
        return fig
    x0, x1 = min(ages), max(ages)
    pad_x = max((x1 - x0) * 0.06, 0.5)
    x0, x1 = x0 - pad_x, x1 + pad_x
    y0, y1 = min(ys), max(ys)
    pad_y = max((y1 - y0) * 0.10, abs(y1) * 0.03, 0.1)
    y0, y1 = y0 - pad_y, y1 + pad_y

    def X(a: float) -> float:  # noqa: N802
        return left + (a - x0) / (x1 - x0) * pw

    def Y(v: float) -> float:  # noqa: N802
        return bottom + (min(max(v, y0), y1) - y0) / (y1 - y0) * ph

    fig.add(F.Rect(left, bottom, pw, ph, F.Style("#999999", "#FFFFFF", 0.5), role="frame"))
    # normal range: lower/upper at each study; a missing side runs to the plot edge
    if c.normal:
        pts = sorted(c.normal)
        if len(pts) == 1:
            a, lo, hi = pts[0]
            pts = [(a - pad_x, lo, hi), (a + pad_x, lo, hi)]
        lower = [(X(a), Y(lo if math.isfinite(lo) else y0)) for a, lo, _ in pts]
        upper = [(X(a), Y(hi if math.isfinite(hi) else y1)) for a, _, hi in reversed(pts)]
        poly = tuple(v for xy in lower + upper for v in xy)
        fig.add(F.Poly(poly, style=F.Style(None, _NORMAL_HEX), role="normal", title="normal range"))
    # grid and ticks
    for t in nice_ticks(y0, y1):
        fig.add(F.Line(left, Y(t), left + pw, Y(t), F.Style("#E6E6E6", width=0.3), role="grid"))
        fig.add(F.Text(left - 3, Y(t) - 2.5, f"{t:g}", size=6.5, anchor="end", role="axis"))
    for t in nice_ticks(x0, x1, 6):
        fig.add(F.Line(X(t), bottom, X(t), bottom - 2.5, F.Style(_GREY_HEX, width=0.5), role="tick"))
        fig.add(F.Text(X(t), bottom - 10, f"{t:g}", size=6.5, anchor="middle", role="axis"))
    fig.add(F.Text(left + pw / 2, bottom - 19, "age (years)", size=7, anchor="middle", role="axis"))
    fig.add(F.Text(left - 3, bottom + ph + 4, c.unit, size=7, anchor="end", role="unit"))
    # fitted line and its band
    fit = [f for f in c.fit if math.isfinite(f[1])]
    band = [f for f in fit if math.isfinite(f[2]) and math.isfinite(f[3])]
    if len(band) >= 2:
        poly = tuple([v for f in band for v in (X(f[0]), Y(f[2]))]
                     + [v for f in reversed(band) for v in (X(f[0]), Y(f[3]))])
        fig.add(F.Poly(poly, style=F.Style(None, _BAND_HEX, opacity=0.85), role="band",
                       title="95% confidence band of the trend line"))  # fmt: skip
    if len(fit) >= 2:
        fig.add(F.Poly(tuple(v for f in fit for v in (X(f[0]), Y(f[1]))), closed=False,
                       style=F.Style(_FIT_HEX, width=1.2), role="fit", title="fitted straight-line trend"))  # fmt: skip
    # projection of the trend beyond the last study (drawn when given)
    if len(c.projection) >= 2:
        fig.add(F.Poly(tuple(v for a, v in c.projection for v in (X(a), Y(v))), closed=False,
                       style=F.Style(_FIT_HEX, width=0.9, dash=(1.5, 1.5)), role="projection",
                       title="projection of the trend"))  # fmt: skip
    # diagnostic threshold
    if c.threshold is not None:
        tv, label = c.threshold
        fig.add(F.Line(left, Y(tv), left + pw, Y(tv), F.Style(_THRESHOLD_HEX, width=0.9, dash=(3, 2)),
                       role="threshold", title=label))  # fmt: skip
        fig.add(F.Text(left + 3, Y(tv) + 2.5, label, size=6.5, colour=_THRESHOLD_HEX, role="threshold"))
    # studies
    for a, v, in_fit in c.points:
        if not (math.isfinite(a) and math.isfinite(v)):
            continue
        fill = "#000000" if in_fit else "#FFFFFF"
        fig.add(F.Circle(X(a), Y(v), 2.0, F.Style("#000000", fill, 0.7), role="point",
                         title=f"age {a:.1f} y: {number(v, c.unit)}" + ("" if in_fit else " (not in the fit)")))
    if c.note:
        fig.add(F.Text(0, 2, c.note, size=6, colour=_GREY_HEX, role="note"))
    return fig


def chart_drawing(c: Chart, width: float, height: float) -> Drawing:
    """Draw one chart (points, fitted line and band, normal range, threshold) in a ``width`` x ``height`` box."""
    return F.to_drawing(chart_figure(c, width, height))


def chart_svg(c: Chart, width: float = 300.0, height: float = 190.0) -> str:
    """The same chart as inline SVG for the web page."""
    from tracker.outputs.svg import figure_svg

    return figure_svg(chart_figure(c, width, height), css_class="trend-chart")


CHART_LEGEND = (
    "Charts, every study: dots = studies (open: not in the fitted window, values under 18 y change with growth); "
    "blue line = fitted straight-line trend with the 95% confidence band of the mean line (not of the next study); "
    "green = normal range at each study (limits as given by the review); red dashed = diagnostic threshold of the "
    "guideline for this person (maximal wall thickness, adults)."
)


def _map_cell(s: StrainMap, width: float) -> list:
    """The polar map with its title, as the content of a chart-grid cell ``width`` points wide."""
    legend = width >= POLAR_DIAMETER + 28 + polar_map.LEGEND_WIDTH
    drawing = polar_map.polar_map_drawing(s.values, diameter=POLAR_DIAMETER, legend=legend)
    title = ParagraphStyle("tj_map_title", parent=_CELL_HEAD, fontSize=7.5, leading=9)
    return [paragraph(f"Segmental peak longitudinal strain, echo {s.study_date} (%)", title), drawing]


def _charts_block(charts: Sequence[Chart], strain: StrainMap | None = None) -> list:
    """The chart grid: one cell per chart, the polar map (when given) two cells wide at the end.

    Three cells a row, four when more than six are needed, so six charts and the map fill two rows."""
    if not charts and strain is None:
        return [paragraph("No key measure has a value.", _TEXT)]
    n_cells = len(charts) + (2 if strain is not None else 0)
    per_row = CHARTS_PER_ROW if n_cells <= 2 * CHARTS_PER_ROW else CHARTS_PER_ROW + 1
    cell_w = WIDTH / per_row
    h = CHART_HEIGHT_MM * mm
    items: list[tuple[object, int]] = [(chart_drawing(c, cell_w - 3, h), 1) for c in charts]
    if strain is not None:
        items.append((_map_cell(strain, 2 * cell_w - 4), 2))
    rows: list[list[tuple[object, int]]] = [[]]
    for item in items:
        if sum(span for _, span in rows[-1]) + item[1] > per_row:
            rows.append([])
        rows[-1].append(item)
    out: list = []
    for r in rows:
        data: list = []
        spans = []
        for content, span in r:
            if span == 2:
                spans.append(("SPAN", (len(data), 0), (len(data) + 1, 0)))
            data += [content] + [""] * (span - 1)
        data += [""] * (per_row - len(data))
        t = Table([data], colWidths=[cell_w] * per_row)
        t.setStyle(TableStyle([("LEFTPADDING", (0, 0), (-1, -1), 0), ("RIGHTPADDING", (0, 0), (-1, -1), 3),
                               ("TOPPADDING", (0, 0), (-1, -1), 1), ("BOTTOMPADDING", (0, 0), (-1, -1), 1),
                               ("VALIGN", (0, 0), (-1, -1), "TOP"), *spans]))  # fmt: skip
        out.append(t)
    return out


# --------------------------------------------------------------------------- tables


def table_columns(n: int, size: int = MAX_STUDY_COLUMNS) -> list[int]:
    """The study columns listed out of ``n`` (oldest first): all when they fit, else the first study
    (the baseline) and the latest ``size - 1``."""
    if n <= size:
        return list(range(n))
    return [0] + list(range(n - (size - 1), n))


def _cell_text(c: Cell, with_limit: bool) -> str:
    text = escape(number(c.value)) + (f" <b>{c.marks}</b>" if c.marks else "")
    if c.z is not None and math.isfinite(c.z):
        text += f" <font size=6 color='#555555'>z {c.z:.2f}</font>"
    if with_limit and c.limit and (c.z is None or not math.isfinite(c.z)):  # a z-scored value is judged by its z
        text += f"<br/><font size=6 color='#555555'>{escape(c.limit)}</font>"
    return text


def _modality_tables(t: ModalityTable, person: str) -> list:
    n = len(t.dates)
    cols = table_columns(n)
    gap = n > len(cols)
    name_w, unit_w, limit_w = 31 * mm, 10 * mm, 19 * mm
    col_w = min((WIDTH - name_w - unit_w - limit_w) / max(len(cols), 1), 24 * mm)
    head = [paragraph("measure", _CELL_HEAD), paragraph("unit", _CELL_HEAD), paragraph("normal limit (latest)", _CELL_HEAD)]
    for k, i in enumerate(cols):
        age = "" if t.ages[i] is None else f"age {t.ages[i]:.1f}"
        first = ", first" if gap and k == 0 else ""
        head.append(Paragraph(f"<b>{t.dates[i]}</b><br/>{age}{first}", _CELL))
    data = [head]
    hidden: list[str] = []
    for r in t.rows:
        shown = [r.cells[i] for i in cols if r.cells[i] is not None]
        if not shown:
            if any(c is not None for c in r.cells):
                hidden.append(r.measure)
            continue
        limit = shown[-1].limit  # that of the latest study listed
        name = f"<b>{escape(r.measure)}</b>" + ("*" if r.derived else "")
        row = [Paragraph(name, _CELL), paragraph(UNIT_TEXT.get(r.unit, r.unit), _CELL), paragraph(limit, _CELL)]
        for i in cols:
            c = r.cells[i]
            row.append("" if c is None else Paragraph(_cell_text(c, c.limit != limit), _CELL))
        data.append(row)
    style = [
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("FONTSIZE", (0, 0), (-1, -1), _CELL.fontSize),  # empty cells: no taller default font
        ("LEADING", (0, 0), (-1, -1), _CELL.leading),
        ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#E4E4E4")),
        ("ROWBACKGROUNDS", (0, 1), (-1, -1), [colors.white, colors.HexColor("#F5F5F5")]),
        ("LINEBELOW", (0, 0), (-1, -1), 0.25, colors.HexColor("#BBBBBB")),
        ("BOX", (0, 0), (-1, -1), 0.5, colors.HexColor("#888888")),
        ("LINEAFTER", (2, 0), (2, -1), 0.5, colors.HexColor("#888888")),
        ("LEFTPADDING", (0, 0), (-1, -1), 3),
        ("RIGHTPADDING", (0, 0), (-1, -1), 2),
        ("TOPPADDING", (0, 0), (-1, -1), 0.6),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 0.6),
    ]
    if gap:  # a heavier line after the first study: the studies between are not listed
        style.append(("LINEAFTER", (3, 0), (3, -1), 1.4, colors.HexColor("#555555")))
    tbl = Table(data, colWidths=[name_w, unit_w, limit_w] + [col_w] * len(cols), repeatRows=1, hAlign="LEFT")
    tbl.setStyle(TableStyle(style))
    mod = t.modality.upper() if t.modality in ("echo", "cmr", "ecg") else t.modality
    if gap:
        title = f"{mod} values: first study and the latest {len(cols) - 1} of {n}"
        missing = t.dates[1:cols[1]]
        line = (f"Not listed: {len(missing)} {mod} studies, {missing[0]} to {missing[-1]}. Their key measures are in "
                f"the charts; every value of every study is in `tracker person {person}`.")  # fmt: skip
    else:
        title, line = f"{mod} values by study ({n})", ""
    if hidden:
        line += (" " if line else "") + "Measured only at studies not listed: " + ", ".join(hidden) + "."
    out: list = [CondPageBreak(28 * mm), paragraph(title, _SECTION)]
    if line:
        out.append(paragraph(line, _SMALL))
    out.append(tbl)
    return out


# --------------------------------------------------------------------------- sections


def _identity_block(doc: TrajectoryDocument) -> list:
    i = doc.identity
    age = "unknown" if i.get("age_years") is None else f"{float(i['age_years']):.1f} years"
    if i.get("age_uncertainty_years"):
        age += f" (+/- {float(i['age_uncertainty_years']):g} y: year of birth only)"
    if i.get("vital_status") == "deceased":
        age += " at death"
    else:
        age += f" on {doc.as_of.isoformat()}"
    geno = str(i.get("genotype_status") or "unknown")
    if i.get("variant"):
        geno += f" ({i['variant']}, {i.get('variant_class') or 'class unknown'})"
    affected = str(i.get("affected_status") or "never assessed")
    if i.get("affected_status_date"):
        affected += f" (assessment {i['affected_status_date']})"
    rel = i.get("affected_first_degree_relatives") or ""
    rows = [
        ("Person", f"{i['person']}    family {i.get('family')}    sex at birth {i.get('sex_at_birth')}    age {age}"),
        ("Genotype", f"{geno}; {i.get('genotype_reason') or ''}".rstrip("; ")),
        ("Phenotype", affected + (f"; first-degree relative of affected {rel}" if rel else "")),
        ("Guideline", doc.guideline),
    ]
    t = Table([[paragraph(k, _CELL_HEAD), paragraph(v, _TEXT)] for k, v in rows], colWidths=[22 * mm, WIDTH - 22 * mm])
    t.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"), ("LEFTPADDING", (0, 0), (-1, -1), 3),
                           ("TOPPADDING", (0, 0), (-1, -1), 1), ("BOTTOMPADDING", (0, 0), (-1, -1), 1),
                           ("BOX", (0, 0), (-1, -1), 0.5, colors.HexColor("#888888")),
                           ("BACKGROUND", (0, 0), (0, -1), colors.HexColor("#EEEEEE"))]))  # fmt: skip
    return [
        paragraph(f"Trajectory report {i['person']}", _TITLE),
        paragraph(f"{doc.clinic}. Data as of {doc.as_of.isoformat()}; generated {doc.generated.isoformat()}. "
           "Person code only; look the person up in the record.", _SMALL),  # fmt: skip
        Spacer(1, 4),
        t,
    ]


def _flags_block(doc: TrajectoryDocument) -> list:
    out = [paragraph("Trends and flags (beyond measurement variability, projections, conversion)", _SECTION)]
    if not doc.flags:
        out.append(paragraph("No measure has two or more studies: nothing to trend.", _TEXT))
    else:
        head = ["measure", "studies", "flag; projection of the threshold crossing", "slope per year (95% CI)",
                "last change against the least significant change, LSC"]  # fmt: skip
        data = [[paragraph(h, _FCELL_HEAD) for h in head]]
        for f in doc.flags:
            flag = f"<b>{escape(f.flag)}</b>" if f.flagged else escape(f.flag)
            if f.projection:
                flag += f"; projection: {escape(f.projection)}"
            slope = escape(f.slope) + (f"<br/>{escape(f.z_slope)}" if f.z_slope else "")
            studies = f"{f.n}, {_SHORT_WINDOW.get(f.window, f.window)}"
            data.append([Paragraph(f"<b>{escape(f.measure)}</b>", _FCELL), paragraph(studies, _FCELL),
                         Paragraph(flag, _FCELL), Paragraph(slope, _FCELL),
                         paragraph(_short_change(f.change), _FCELL)])  # fmt: skip
        widths = [20 * mm, 15 * mm, 55 * mm, 36 * mm]
        t = Table(data, colWidths=widths + [WIDTH - sum(widths)], repeatRows=1, hAlign="LEFT")
        t.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"),
                               ("FONTSIZE", (0, 0), (-1, -1), _FCELL.fontSize),
                               ("LEADING", (0, 0), (-1, -1), _FCELL.leading),
                               ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#E4E4E4")),
                               ("LINEBELOW", (0, 0), (-1, -1), 0.25, colors.HexColor("#BBBBBB")),
                               ("BOX", (0, 0), (-1, -1), 0.5, colors.HexColor("#888888")),
                               ("LEFTPADDING", (0, 0), (-1, -1), 3), ("RIGHTPADDING", (0, 0), (-1, -1), 2),
                               ("TOPPADDING", (0, 0), (-1, -1), 0.6),
                               ("BOTTOMPADDING", (0, 0), (-1, -1), 0.6)]))  # fmt: skip
        out.append(t)
    if doc.conversion:
        out.append(Spacer(1, 2))
        out.append(paragraph(doc.conversion, _TEXT))
    return out


def _recall_block(doc: TrajectoryDocument) -> list:
    r = doc.recall
    out = [paragraph("Recall proposal", _SECTION)]
    head = f"Status {r.get('status')}"
    if r.get("waiting"):
        head += f" ({r['waiting']})"
    if r.get("due"):
        head += f"; next due {r['due']}"
    if r.get("interval_months"):
        head += f"; interval {r['interval_months']} months"
    head += f". Rule set: {r.get('rule_set_title') or r.get('rule_set')}"
    if r.get("policy"):
        head += f", policy {r['policy']}"
    if r.get("rule_id"):
        head += f"; rule {r['rule_id']}"
    head += "."
    if r.get("needs_text"):
        head += f" Visit needs: {r['needs_text']}."
    out.append(paragraph(head, _TEXT))
    if r.get("reason"):
        out.append(paragraph(f"Reasons: {r['reason']}", _TEXT))
    small = [f"Source: {r['source']}"] if r.get("source") else []
    small += [f"Note: {n}" for n in r.get("notes_shown", ()) or ()]
    if small:
        out.append(paragraph(" ".join(x if x.endswith(".") else x + "." for x in small), _SMALL))
    return out


def _risk_block(doc: TrajectoryDocument) -> list:
    k = doc.risk
    out = [paragraph("Sudden cardiac death risk (HCM Risk-SCD)", _SECTION), paragraph(k.headline, _TEXT)]
    if k.conflicts:  # beside the figure, before its inputs
        out.append(paragraph(" ".join(k.conflicts), _SMALL))
    if k.inputs:
        out.append(paragraph("Inputs: " + "; ".join(k.inputs) + ".", _SMALL))
    # The bands, reasons and notes lead the paragraph of the range and the caution (two pages).
    tail = list(k.bands)
    if k.reasons:
        tail.append("Reasons and notes: " + "; ".join(r.rstrip(".") for r in k.reasons) + ".")
    if k.validated_ranges:
        tail.append(k.validated_ranges + " The model does not apply outside this range.")
    if k.caution:
        tail.append(k.caution)
    if tail:
        out.append(paragraph(" ".join(tail), _SMALL))
    return out


STRAIN_LAYOUT = (
    "Layout: AHA standardized 17-segment model (Cerqueira et al., Circulation 2002;105:539-42): basal 1-6, mid "
    "7-12, apical 13-16, apex 17; 1 basal anterior at the top, then counter-clockwise (septum left, lateral right)."
)


def _strain_text(doc: TrajectoryDocument) -> str:
    """The words about the polar map (they follow the chart legend), or the sentence saying why there is none."""
    if doc.strain is None:
        return "Segmental strain: " + (doc.strain_note or "No segmental strain values recorded.")
    s = doc.strain
    parts = [f"Polar map. Echo {s.study_date}: peak longitudinal strain per segment, % (negative = shortening)."]
    if s.indices:
        parts.append("Indices of that study: " + "; ".join(s.indices) + ".")
    if doc.strain_note:
        parts.append(doc.strain_note)
    parts += [STRAIN_LAYOUT, polar_map.SCALE_TEXT]
    return " ".join(parts)


TABLE_LEGEND = (
    "Tables: value in the catalogue unit, z = z-score; normal limit of the latest study listed, and under a value "
    "its own study's limit where that differs (a z-scored value is judged by its z); H above, L below the normal "
    "limit (for GLS, stored negative: the magnitude of shortening, as the review judges it); C meets the guideline's "
    "wall-thickness criterion; * computed by the tool. Echo and CMR are separate series, never pooled."
)


def split_source(text: str) -> tuple[str, str]:
    """(citation, detail) of a source text "citation; detail [tag]"; ("", text) for a formula or a text
    without a separate citation."""
    head, sep, rest = text.partition("; ")
    if not sep or text.startswith("computed:"):
        return "", text
    return head, rest


def _sources_block(doc: TrajectoryDocument) -> list:
    """Notes, then each cited work once (numbered), then every measure with its name and, per source, the
    reference number and what was taken from it (with its confidence tag)."""
    labels = {r.measure: r.label for t in doc.tables for r in t.rows}
    if not (doc.notes or doc.sources or labels):
        return []
    out: list = [paragraph("Notes, measures and sources", _SECTION)]
    out += [paragraph(n, _TINY) for n in doc.notes]
    per_measure: dict[str, list[tuple[str, str]]] = {m: [] for m in labels}
    for measure, text in doc.sources:
        per_measure.setdefault(measure, []).append(split_source(text))
    refs: dict[str, int] = {}  # numbered in the order printed
    entries = []
    for m, parts in per_measure.items():
        details = [f"({refs.setdefault(c, len(refs) + 1)}) {d}" if c else d for c, d in parts]
        name = f"<b>{escape(m)}</b>" + (f" {escape(labels[m])}" if labels.get(m) else "")
        entries.append(name + (": " + escape("; ".join(details)) if details else "") + ".")
    if entries:
        out.append(Paragraph("Measures (name; source of the limit, criterion or formula): " + " ".join(entries), _TINY))
    if refs:
        out.append(paragraph("References: " + " ".join(f"({n}) {c}." for c, n in refs.items()), _TINY))
    return out


def build_story(doc: TrajectoryDocument) -> list:
    """The flowables: identity, flags, recall, risk, charts and strain map, tables, notes and sources."""
    person = str(doc.identity["person"])
    story: list = _identity_block(doc)
    story += _flags_block(doc)
    story += _recall_block(doc)
    story += _risk_block(doc)
    heading = "Key measures over age" + (" and segmental strain" if doc.strain is not None else "")
    grid = _charts_block(doc.charts, doc.strain)
    story.append(KeepTogether([paragraph(heading, _SECTION), grid[0]]))
    story += grid[1:]
    story.append(paragraph(CHART_LEGEND + " " + _strain_text(doc), _SMALL))
    if doc.tables:
        story.append(Spacer(1, 3))
        story.append(paragraph(TABLE_LEGEND, _SMALL))
    for t in doc.tables:
        story += _modality_tables(t, person)
    story += _sources_block(doc)
    return story


def write_trajectory_pdf(doc: TrajectoryDocument, path: str | Path) -> Path:
    """Write ``doc`` as an A4 portrait PDF at ``path`` (the folder must exist) and return the path."""
    path = Path(path)
    person = str(doc.identity["person"])
    footer = [PAGE_CAUTION] + [c for c in doc.cautions if c != PAGE_CAUTION and not c.startswith("Decision support")]
    pdf = SimpleDocTemplate(
        str(path),
        pagesize=PAGE,
        leftMargin=MARGIN_MM * mm,
        rightMargin=MARGIN_MM * mm,
        topMargin=12 * mm,
        bottomMargin=FOOTER_MM * mm + 3 * mm,
        title=f"Trajectory report {person}",
        author=doc.clinic,
        subject="Serial measurements, trends, recall and risk of one person (person code only)",
        creator="hcm-family-tracker",
    )
    pdf.build(build_story(doc), canvasmaker=numbered_canvas(PAGE, MARGIN_MM, FOOTER_MM, _FOOTER, lambda n, total: " ".join(footer)
                                               + f"  Trajectory report {person}; generated {doc.generated.isoformat()}; "
                                               f"page {n} of {total}."))  # fmt: skip
    return path
