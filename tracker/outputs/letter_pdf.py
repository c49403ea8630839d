"""A family letter as an A4 PDF (reportlab), and a PNG picture of a PDF page (pypdfium2).

Layout, top to bottom: the clinic block (name, address, telephone, e-mail,
from the settings) on the right; the recipient block on the left ("Private
and confidential", "To the parent or guardian of" for a child, the name only
when the caller passes one, and the person code as the reference); the date
(ISO 8601); the subject; the greeting; the body of the filled template
(headings, paragraphs, bulleted lists, detail lines in a light box); the
closing, the signatory and their role.  Every page has a footer with the
caution (:data:`tracker.outputs.letter.CAUTION`), the reference and the page
number.

Type: 12 pt body text on 16 pt leading, headings 13 pt bold, detail lines
10 pt: large print for a letter read by the public (common practice; clear
print guidance commonly asks for 12 pt or more, from memory, verify).  Fonts
are the PDF standard Helvetica faces (Latin-1 text).

The PDF's metadata carry the reference (person code) and the clinic, never a
name.  Pure apart from writing the file it is given.
"""

from __future__ import annotations

from pathlib import Path
from xml.sax.saxutils import escape

from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT, TA_RIGHT
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.platypus import (
    KeepTogether,
    ListFlowable,
    ListItem,
    Paragraph,
    SimpleDocTemplate,
    Spacer,
    Table,
    TableStyle,
)

from tracker.errors import UserError
from tracker.outputs.letter import KIND_WORDS, Letter
from tracker.outputs.pdf_pages import paragraph

MARGIN_MM = 20
FOOTER_MM = 24

_BODY = ParagraphStyle("body", fontName="Helvetica", fontSize=12, leading=16, spaceAfter=7, alignment=TA_LEFT)
_HEAD = ParagraphStyle("head", parent=_BODY, fontName="Helvetica-Bold", fontSize=13, leading=17, spaceBefore=7,
                       spaceAfter=3)  # fmt: skip
_SUBJECT = ParagraphStyle("subject", parent=_BODY, fontName="Helvetica-Bold", fontSize=13, leading=17, spaceBefore=4,
                          spaceAfter=9)  # fmt: skip
_ITEM = ParagraphStyle("item", parent=_BODY, spaceAfter=2)
_DETAIL = ParagraphStyle("detail", parent=_BODY, fontSize=10, leading=13, spaceAfter=0)
_SMALL = ParagraphStyle("small", parent=_BODY, fontSize=10, leading=13, spaceAfter=0)
_CLINIC = ParagraphStyle("clinic", parent=_SMALL, alignment=TA_RIGHT)
_CLINIC_NAME = ParagraphStyle("clinic_name", parent=_CLINIC, fontName="Helvetica-Bold", fontSize=11, leading=14)
_FOOTER = ParagraphStyle("footer", parent=_BODY, fontSize=8.5, leading=10.5, textColor=colors.HexColor("#333333"))


def _clinic_block(letter: Letter) -> list:
    c = letter.plan.clinic
    out = [paragraph(c.name, _CLINIC_NAME)]
    for line in c.address.splitlines():
        if line.strip():
            out.append(paragraph(line.strip(), _CLINIC))
    if c.phone:
        out.append(paragraph(f"Phone: {c.phone}", _CLINIC))
    if c.email:
        out.append(paragraph(c.email, _CLINIC))
    return out


def _recipient_block(letter: Letter) -> list:
    plan = letter.plan
    out = [paragraph("Private and confidential", _SMALL)]
    if plan.flags.get("child"):
        out.append(paragraph("To the parent or guardian of", _SMALL))
    if plan.recipient_name:
        out.append(paragraph(plan.recipient_name, _SMALL))
    out.append(paragraph(f"Our reference: {plan.person}", _SMALL))
    out.append(paragraph(f"Letter: {KIND_WORDS[plan.letter_kind]}", _SMALL))
    return out


def _body(letter: Letter) -> list:
    flow: list = []
    items: list[str] = []
    details: list[str] = []

    def flush_items() -> None:
        if items:
            flow.append(
                ListFlowable(
                    [ListItem(paragraph(t, _ITEM), leftIndent=14) for t in items],
                    bulletType="bullet", start="\u2022", leftIndent=14, bulletFontSize=10, spaceAfter=6,
                )  # fmt: skip
            )
            items.clear()

    def flush_details() -> None:
        if details:
            box = Table([[paragraph(t, _DETAIL)] for t in details], colWidths=[A4[0] - 2 * MARGIN_MM * mm])
            box.setStyle(
                TableStyle(
                    [
                        ("BACKGROUND", (0, 0), (-1, -1), colors.HexColor("#F1F1F1")),
                        ("BOX", (0, 0), (-1, -1), 0.5, colors.HexColor("#999999")),
                        ("LEFTPADDING", (0, 0), (-1, -1), 6),
                        ("RIGHTPADDING", (0, 0), (-1, -1), 6),
                        ("TOPPADDING", (0, 0), (-1, -1), 3),
                        ("BOTTOMPADDING", (0, 0), (-1, -1), 3),
                    ]
                )
            )
            flow.extend([Spacer(1, 3), box, Spacer(1, 8)])
            details.clear()

    pending_heading: Paragraph | None = None
    group = None
    for b in letter.filled.blocks:
        if b.kind != "item":
            flush_items()
        if b.kind != "detail" or b.group != group:
            flush_details()
        group = b.group
        if b.kind == "heading":
            pending_heading = paragraph(b.text, _HEAD)
            continue
        if b.kind == "paragraph":
            para = paragraph(b.text, _BODY)
            flow.append(KeepTogether([pending_heading, para]) if pending_heading else para)
        elif b.kind == "item":
            if pending_heading:
                flow.append(pending_heading)
            items.append(b.text)
        elif b.kind == "detail":
            if pending_heading:
                flow.append(pending_heading)
            details.append(b.text)
        pending_heading = None
    flush_items()
    flush_details()
    if pending_heading:
        flow.append(pending_heading)
    return flow


def _signature(letter: Letter) -> list:
    c = letter.plan.clinic
    block = [Spacer(1, 6), paragraph(letter.filled.closing, _BODY), Spacer(1, 22), paragraph(c.signatory, _BODY)]
    if c.signatory_role:
        block.append(paragraph(c.signatory_role, _SMALL))
    block.append(paragraph(c.name, _SMALL))
    return [KeepTogether(block)]


def build_story(letter: Letter) -> list:
    """The reportlab flowables of the letter (everything but the footer)."""
    width = A4[0] - 2 * MARGIN_MM * mm
    head = Table(
        [[_recipient_block(letter), _clinic_block(letter)]],
        colWidths=[width * 0.4, width * 0.6],
    )
    head.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"), ("LEFTPADDING", (0, 0), (-1, -1), 0),
                              ("RIGHTPADDING", (0, 0), (-1, -1), 0)]))  # fmt: skip
    story: list = [
        head,
        Spacer(1, 8),
        paragraph(f"Date: {letter.plan.on.isoformat()}", ParagraphStyle("date", parent=_SMALL, alignment=TA_RIGHT)),
        Spacer(1, 10),
        paragraph(letter.filled.subject, _SUBJECT),
        paragraph(letter.filled.greeting, _BODY),
    ]
    story += _body(letter)
    story += _signature(letter)
    return story


def write_letter_pdf(letter: Letter, path: str | Path) -> Path:
    """Write ``letter`` as an A4 PDF at ``path`` (the folder must exist) and return the path."""
    path = Path(path)
    plan = letter.plan

    def footer(canvas, doc) -> None:
        canvas.saveState()
        width = A4[0] - 2 * MARGIN_MM * mm
        canvas.setStrokeColor(colors.HexColor("#999999"))
        canvas.setLineWidth(0.5)
        top = FOOTER_MM * mm - 4 * mm
        canvas.line(MARGIN_MM * mm, top, A4[0] - MARGIN_MM * mm, top)
        note = Paragraph(
            escape(f"{letter.caution}  Reference {plan.person}, {plan.on.isoformat()}, page {doc.page}."),
            _FOOTER,
        )
        _, h = note.wrap(width, FOOTER_MM * mm)
        note.drawOn(canvas, MARGIN_MM * mm, top - 2 * mm - h)
        canvas.restoreState()

    doc = SimpleDocTemplate(
        str(path),
        pagesize=A4,
        leftMargin=MARGIN_MM * mm,
        rightMargin=MARGIN_MM * mm,
        topMargin=16 * mm,
        bottomMargin=FOOTER_MM * mm + 4 * mm,
        title=f"Family letter {plan.person}",
        author=plan.clinic.name,
        subject=letter.filled.subject,
        creator="hcm-family-tracker",
    )
    doc.build(build_story(letter), onFirstPage=footer, onLaterPages=footer)
    return path


def render_png(pdf_path: str | Path, png_path: str | Path, page: int = 0, scale: float = 2.0) -> Path:
    """Render one page of a PDF (0 = first) to a PNG file with pypdfium2; ``scale`` 1 = 72 dpi."""
    try:
        import pypdfium2 as pdfium
    except ImportError:  # pragma: no cover - pypdfium2 is installed with the test extras
        raise UserError("PNG output needs the pypdfium2 package (pip install pypdfium2)") from None
    pdf = pdfium.PdfDocument(str(pdf_path))
    try:
        if not 0 <= page < len(pdf):
            raise UserError(f"{Path(pdf_path).name} has no page {page + 1}")
        bitmap = pdf[page].render(scale=scale)
        image = bitmap.to_pil()
        png_path = Path(png_path)
        image.save(png_path, format="PNG")
    finally:
        pdf.close()
    return png_path
