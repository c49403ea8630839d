"""Spacing and drawing constants of the pedigree layout (layout units = symbol widths)."""

from __future__ import annotations



KINDS = ("relationship", "descent", "sibship", "twin", "adoption")

# Default size of the text block under a symbol (layout units) when the caller gives none.
DEFAULT_LABEL = (2.2, 0.9)

# Spacing, in symbol widths (a drawing choice of this project, not a standard).
_GAP = 0.45  # between the extents of two neighbours
_PARTNER_CLEAR = 0.25  # between a line of descent and a partner's text block
_MIN_RELATIONSHIP = 0.8  # shortest visible relationship line
_BRACKET = 0.16  # brackets of an adopted person, each side
_LABEL_PAD = 0.12  # symbol bottom to text block
_LINE_GAP = 0.3  # text block bottom to the sibship line below
_DROP = 0.6  # sibship line to the top of the child's symbol
_VIRTUAL_HALF = 0.15
# weights of the position objective: centring a line of descent over its sibship against the
# length of rows and of relationship lines (drawing choice)
_CENTRE_WEIGHT = 1.0
_ROW_WEIGHT = 1.0
_PARTNER_WEIGHT = 1.5
_ARROW = 0.75  # horizontal reach of the proband arrow left of the symbol
_EPS = 1e-7

_CORR = "\x00corridor"  # where the rest of the drawing goes, inside a block row
_INNER = "\x00inner"
