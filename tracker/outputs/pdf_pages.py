"""Pieces shared by the printed documents: text paragraphs and a footer with "page N of M".

reportlab only knows the page count once every page is laid out, so
:func:`numbered_canvas` keeps each page's state and draws the footer (a rule
and a paragraph: the cautions, what the document is, "page N of M") when the
file is saved.
"""

from __future__ import annotations

import re
from typing import Callable
from xml.sax.saxutils import escape

from reportlab.lib import colors
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.pdfgen import canvas as rl_canvas
from reportlab.platypus import Paragraph


def paragraph(text: str, style: ParagraphStyle) -> Paragraph:
    """Plain text as a paragraph: markup escaped, runs of spaces kept."""
    return Paragraph(re.sub(r" {2,}", lambda m: "&nbsp;" * len(m.group(0)), escape(text)), style)


def numbered_canvas(page_size: tuple[float, float], margin_mm: float, footer_mm: float, style: ParagraphStyle,
                    footer_text: Callable[[int, int], str]):  # fmt: skip
    """A canvas class whose pages end with a rule and ``footer_text(page, total)`` in ``style``."""

    class _Canvas(rl_canvas.Canvas):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)
            self._pages: list[dict] = []

        def showPage(self):  # noqa: N802 - reportlab API
            self._pages.append(dict(self.__dict__))
            self._startPage()

        def save(self):
            total = len(self._pages)
            for state in self._pages:
                self.__dict__.update(state)
                self._footer(total)
                super().showPage()
            super().save()

        def _footer(self, total: int) -> None:
            self.saveState()
            width = page_size[0] - 2 * margin_mm * mm
            top = footer_mm * mm - 3 * mm
            self.setStrokeColor(colors.HexColor("#999999"))
            self.setLineWidth(0.5)
            self.line(margin_mm * mm, top, page_size[0] - margin_mm * mm, top)
            note = paragraph(footer_text(self._pageNumber, total), style)
            _, h = note.wrap(width, footer_mm * mm)
            note.drawOn(self, margin_mm * mm, top - 1.5 * mm - h)
            self.restoreState()

    return _Canvas
