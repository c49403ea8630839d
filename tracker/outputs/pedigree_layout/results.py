"""Result types of the pedigree layout: boxes, segments, placed people, rows."""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import dataclass, field

from tracker.outputs.pedigree_layout.constants import _EPS


# ---------------------------------------------------------------------------
# result types
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Box:
    """An axis-aligned rectangle (layout units, y downwards)."""

    x0: float
    y0: float
    x1: float
    y1: float

    def meets(self, other: "Box", eps: float = _EPS) -> bool:
        """True when the two closed boxes share a point."""
        return not (
            self.x1 < other.x0 - eps or other.x1 < self.x0 - eps or self.y1 < other.y0 - eps or other.y1 < self.y0 - eps
        )


@dataclass(frozen=True)
class Segment:
    """One straight line.  ``kind`` is one of :data:`KINDS`; ``group`` names
    the couple (or twin set) the line belongs to; ``people`` are the people
    whose footprint the line may touch at its end; ``dashed`` for adoption
    lines; ``double`` for the relationship line of blood-related partners
    (consanguinity); ``partner_unknown`` for the short relationship line of a
    parent whose partner is not recorded."""

    kind: str
    x0: float
    y0: float
    x1: float
    y1: float
    group: str
    people: tuple[str, ...] = ()
    dashed: bool = False
    double: bool = False
    partner_unknown: bool = False

    @property
    def length(self) -> float:
        return float(math.hypot(self.x1 - self.x0, self.y1 - self.y0))


@dataclass(frozen=True)
class PlacedPerson:
    """One symbol: centre (x, y), width ``size``; generation (1 = I) and
    number in it; ``footprint`` (symbol and brackets), ``label_box`` (the text
    block under it), ``arrow`` (proband arrow: tail x, tail y, head x, head y)
    and ``arrow_box`` (the arrow and its letter), both None for others."""

    person: str
    x: float
    y: float
    size: float
    generation: int
    number: int
    footprint: Box
    label_box: Box
    adopted: bool = False
    arrow: tuple[float, float, float, float] | None = None
    arrow_box: Box | None = None

    @property
    def label(self) -> str:
        """Individual number, e.g. ``II-3``."""
        return f"{roman(self.generation)}-{self.number}"


@dataclass(frozen=True)
class TwinMark:
    """Twins hanging from one point (apex) of a sibship line."""

    members: tuple[str, ...]
    zygosity: str  # 'monozygotic', 'dizygotic', 'unknown'
    apex_x: float
    apex_y: float


@dataclass(frozen=True)
class GenerationRow:
    number: int  # 1 = I
    y: float

    @property
    def roman(self) -> str:
        return roman(self.number)


@dataclass(frozen=True)
class PedigreeLayout:
    people: tuple[PlacedPerson, ...]
    segments: tuple[Segment, ...]
    twins: tuple[TwinMark, ...]
    generations: tuple[GenerationRow, ...]
    bounds: Box
    symbol_size: float
    warnings: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    _index: dict = field(default_factory=dict, compare=False, repr=False)

    def person(self, code: str) -> PlacedPerson:
        if not self._index:
            self._index.update({p.person: p for p in self.people})
        return self._index[code]

    def by_generation(self) -> dict[int, list[PlacedPerson]]:
        """People per generation, left to right."""
        out: dict[int, list[PlacedPerson]] = defaultdict(list)
        for p in sorted(self.people, key=lambda q: (q.generation, q.x)):
            out[p.generation].append(p)
        return dict(out)


def roman(n: int) -> str:
    """Roman numeral for a positive integer (I, II, ..., IX, X, ...)."""
    if n < 1:
        raise ValueError("generation numbers start at 1")
    out = []
    for value, letters in (
        (1000, "M"), (900, "CM"), (500, "D"), (400, "CD"), (100, "C"), (90, "XC"),
        (50, "L"), (40, "XL"), (10, "X"), (9, "IX"), (5, "V"), (4, "IV"), (1, "I"),
    ):  # fmt: skip
        while n >= value:
            out.append(letters)
            n -= value
    return "".join(out)
