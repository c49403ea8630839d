"""Where each symbol and line of a pedigree drawing goes (pure geometry, no drawing).

Input: a :class:`~tracker.domain.pedigree.Pedigree` and, optionally, the size
of the text block printed under each symbol.  Output: a
:class:`PedigreeLayout` holding the centre and size of every symbol, every line
segment with its kind, the twin marks, the generation rows with their Roman
numerals, and a list of warnings.

Units and axes: one layout unit is the width of a symbol (``symbol_size``,
default 1); x runs to the right, y runs **downwards** (generation I at the
top).  A drawing scales the layout to its page.

Rules (pedigree nomenclature, NSGC 1995/2008/2022 [V], see
docs/reference/standards.md section 1b):

* **Generations**: each couple's children are one row below the couple and
  partners share a row.  Rows are found by walking the family links (child =
  parent + 1, partner = partner); in a tree-like pedigree this is the longest
  path from the founders with married-in founders moved down to their
  partner's row.  Where the links contradict each other (e.g. partners from
  different generations) the longest path from the founders is used, partners
  are moved to the lower row, and a warning says so.
* **Partners** are adjacent, joined by a horizontal relationship line between
  their symbols.  A person with children by two partners stands between them.
  A person with children whose other parent is not recorded gets a short
  relationship line ending in nothing; the line of descent starts at its end
  (the drawing does not show whether such children share the unrecorded
  parent).
* **Line of descent**: a vertical line from the middle of the relationship
  line down to the **sibship line**, a horizontal line over the children;
  each child hangs from it on a short vertical line.  The line of descent is
  kept within the sibship line (centred where possible).
* **Siblings** are ordered oldest to youngest, left to right (birth date;
  unknown dates last, then in input order).  When a sibling must stand at the
  end of the sibship so that lines do not cross (a sibling whose partner's own
  family is drawn), the order is changed and a note says so.
* **Twins** hang from one point of the sibship line on two diagonal lines;
  monozygotic twins have a horizontal bar between the diagonals.
* **Adopted in** (``adoption == 'in'``; the recorded parents are the adoptive
  parents, :meth:`Pedigree.adoptive_parents`): the child's own line from the
  sibship line is dashed (kind ``adoption``), and so is the line of descent
  when every child of the couple is adopted in; brackets are drawn round the
  symbol (the symbol's footprint includes them).  An adopted-in person with
  no adoptive parents recorded is drawn apart with a warning.
* **Numbering**: individuals are numbered 1, 2, 3... left to right in each
  generation; generations are numbered I, II, III... from the top (label
  ``II-3``).  Numbers are layout positions, not person codes; the drawing
  does not print them (they read like person codes).
* **Partners clear of sibship lines**: siblings with partners stand at the
  ends of their sibship, partners on the outer side, so that no partner
  stands under a sibship line (a change of birth order is noted); where more
  siblings have partners than there are ends, a note names who stands under
  the line.
* The side on which a partner stands is the layout's choice (the 2022 revision
  dropped "male partner on the left" [V]); the default puts a partner to the
  right of the blood relative.

Geometry guarantee and what counts as a crossing (checked by
:func:`check_layout`, which :func:`layout_pedigree` runs on its own result):

* No two footprints (symbol plus brackets), text blocks or proband arrows
  share any point.
* Segments are grouped by couple (relationship line, line of descent,
  sibship line, the children's own lines, twin lines and bar).  Two segments
  of **different** groups must not share any point.  Two segments of the
  **same** group may share only a single point that is an end point of at
  least one of them (a T or L junction, including two collinear segments that
  meet end to end); a proper crossing or a collinear overlap is a crossing.
* A segment may touch the footprint of a person it connects only at its own
  end point, and must not touch any other footprint, any text block or any
  proband arrow.

What is guaranteed: a tree-like pedigree (no closed loop of family links)
drawn down from its founders, whose married-in partners have no recorded
parents, with up to two partners per person (half siblings), twins,
adopted-in children and single recorded parents, is laid out with no
crossing and no warning, whatever its size and depth (tested on the demo
families and on random pedigrees of up to 40 people).  A married-in
partner's own family (parents, siblings) is drawn beside the partner on the
outer side; this works for the usual "both sides of the family" pedigrees,
but a partner's family can be left with no free side (for example when the
partner's parents share a row with a couple whose other children lie on
both sides); then, and for a consanguineous or other closed loop, a person
with more than two partners, or contradictory generations, ``warnings`` say
so in words.  Any crossing :func:`check_layout` finds is reported there
too: nothing crosses silently.

Modules, one per part of the work:

* ``constants``: spacing and drawing constants (layout units);
* ``results``: the result types (:class:`Box`, :class:`Segment`, :class:`PlacedPerson`, ...);
* ``structure``: units, chains of partners and generation rows;
* ``ordering``: the left-to-right order of each row;
* ``positions``: horizontal positions (a linear programme);
* ``build``: the result's symbols, lines, twin marks and notes;
* ``geometry``: the crossing and overlap check and segment clipping;
* ``layout``: :func:`layout_pedigree`, which runs them in turn.
"""

from __future__ import annotations

from tracker.outputs.pedigree_layout.constants import DEFAULT_LABEL, KINDS
from tracker.outputs.pedigree_layout.results import Box, GenerationRow, PedigreeLayout, PlacedPerson, Segment, TwinMark, roman
from tracker.outputs.pedigree_layout.geometry import check_layout, clip_interval, segment_intersection, segment_meets_box, segments_cross
from tracker.outputs.pedigree_layout.layout import layout_pedigree

__all__ = [
    "DEFAULT_LABEL",
    "KINDS",
    "Box",
    "GenerationRow",
    "PedigreeLayout",
    "PlacedPerson",
    "Segment",
    "TwinMark",
    "roman",
    "check_layout",
    "clip_interval",
    "segment_intersection",
    "segment_meets_box",
    "segments_cross",
    "layout_pedigree",
]
