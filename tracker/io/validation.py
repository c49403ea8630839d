"""Checks of one kind of record against itself and against what the store already holds.

Every check adds :class:`~tracker.io.reading.Problem` items naming the file,
row and column; nothing here writes.  The checks run on whole columns at a
time (pandas), not row by row, so that large files are checked quickly.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from tracker.domain import units
from tracker.domain.consistency import record_problems
from tracker.domain.dates import parse_partial_date
from tracker.io.columns import parse
from tracker.io.layouts import Layout
from tracker.io.reading import Problem

# Body size at a study: data-entry limits (engineering default, common practice, from memory, verify).
HEIGHT_CM = (30.0, 250.0)
WEIGHT_KG = (1.0, 350.0)


@dataclass
class Context:
    """What the store holds, in layout form, as the checks need it."""

    families: pd.DataFrame
    people: pd.DataFrame
    variants: pd.DataFrame
    measures: pd.DataFrame
    today: dt.date
    # Stored genetic results (layout form), for results that contradict a stored one; None: not checked.
    results: pd.DataFrame | None = None


@dataclass
class Checked:
    """A file's rows in clean form, with every problem found."""

    layout: Layout
    file: str
    rows: pd.DataFrame
    problems: list[Problem] = field(default_factory=list)
    # Header-optional columns the file left out: empty for new rows, never compared with stored rows.
    absent: tuple[str, ...] = ()

    def add(self, mask: pd.Series, column: str | None, message) -> None:
        """Add a problem for every row where ``mask`` is true (message: text or per-row texts)."""
        mask = mask.fillna(False).astype(bool)
        if not mask.any():
            return
        rows = self.rows.index[mask.to_numpy()]
        msgs = [message] * len(rows) if isinstance(message, str) else list(message)
        for r, m in zip(rows, msgs):
            self.note(int(r), column, m)

    def note(self, row: int | None, column: str | None, message: str) -> None:
        """Add one problem, unless that cell already has one (one reason per cell is enough)."""
        if (row, column) in self._seen:
            return
        self._seen.add((row, column))
        self.problems.append(Problem(self.file, row, column, message))

    def __post_init__(self) -> None:
        self._seen: set = {(p.row, p.column) for p in self.problems}


def parse_cells(layout: Layout, file: str, cells: pd.DataFrame, today: dt.date) -> Checked:
    """Parse every column of the layout; unreadable cells become problems."""
    clean = pd.DataFrame(index=cells.index)
    checked = Checked(layout, file, clean, absent=tuple(cells.attrs.get("absent_columns", ())))
    for col in layout.columns:
        parsed = parse(col, cells[col.name], today)
        clean[col.name] = parsed.values
        bad = parsed.errors.notna()
        checked.add(bad, col.name, parsed.errors[bad])
    checked.rows = clean
    return checked


def _cell_codes(values: pd.Series, blank_is_empty: bool = True) -> tuple[np.ndarray, int]:
    """(a code per cell, how many codes): equal cells get equal codes, 0 for an empty cell.

    ``blank_is_empty``: a "" cell counts as empty too (else it has a code of its own).
    """
    codes, uniques = pd.factorize(values.to_numpy(dtype=object))  # empty (None/NaN): -1
    codes = codes.astype(np.int64) + 1
    if blank_is_empty and len(uniques):
        blank = np.flatnonzero(np.asarray([u == "" for u in uniques], dtype=bool))
        if len(blank):
            codes[codes == blank[0] + 1] = 0
    return codes, len(uniques) + 1


def row_keys(frame: pd.DataFrame, columns: list[str], blank_is_empty: bool = True) -> np.ndarray | None:
    """One integer per row, equal for rows whose ``columns`` hold equal cells (see :func:`_cell_codes`).

    None if the combinations do not fit in 63 bits (then compare the cells themselves).
    """
    key = np.zeros(len(frame), dtype=np.int64)
    span = 1
    for col in columns:
        codes, n = _cell_codes(frame[col], blank_is_empty)
        if span > (1 << 62) // n:
            return None
        key = key * n + codes
        span *= n
    return key


def check_duplicates(c: Checked) -> None:
    """The same key twice in one file (empty cells and "" count as the same)."""
    key = list(c.layout.key)
    keys = row_keys(c.rows, key)
    if keys is not None:
        dup = pd.Series(keys, index=c.rows.index).duplicated(keep="first")
    else:
        dup = c.rows[key].astype(object).where(c.rows[key].notna(), "").duplicated(keep="first")
    if dup.any():
        frame = c.rows[key].astype(object).where(c.rows[key].notna(), "")
        first = {}
        for r, k in zip(frame.index, map(tuple, frame.to_numpy())):
            first.setdefault(k, r)
        msgs = [f"duplicates row {first[tuple(k)]} ({', '.join(key)})" for k in frame[dup].to_numpy()]
        c.add(dup, None, msgs)


def _partial(iso):
    return parse_partial_date(iso) if isinstance(iso, str) else None


def _latest(iso):
    p = _partial(iso)
    return pd.Timestamp(p.latest()) if p else pd.NaT


def _earliest(iso):
    p = _partial(iso)
    return pd.Timestamp(p.earliest()) if p else pd.NaT


def _each_distinct(values: pd.Series, fn) -> pd.Series:
    """``values.map(fn)`` with ``fn`` called once per distinct value (missing values give NaN/NaT)."""
    codes, distinct = pd.factorize(values.to_numpy(dtype=object))
    out = pd.Series([fn(v) for v in distinct], dtype=object)
    if len(out) and all(isinstance(x, pd.Timestamp) or x is pd.NaT for x in out):
        out = pd.to_datetime(out)
    taken = out.reindex(codes).to_numpy() if len(out) else np.full(len(codes), np.nan, dtype=object)
    return pd.Series(taken, index=values.index, dtype=taken.dtype)


def _iso_days(values: pd.Series) -> pd.Series:
    """ISO day text -> Timestamp (NaT when empty or not a day), converted once per distinct text."""
    codes, distinct = pd.factorize(values.to_numpy(dtype=object))
    parsed = pd.to_datetime(pd.Series(distinct, dtype=object), format="%Y-%m-%d", errors="coerce")
    if not len(parsed):
        return pd.Series(pd.NaT, index=values.index, dtype="datetime64[ns]")
    taken = parsed.to_numpy()[np.where(codes < 0, 0, codes)]
    taken[codes < 0] = np.datetime64("NaT")
    return pd.Series(taken, index=values.index)


# --------------------------------------------------------------------------- families


def check_families(c: Checked, ctx: Context) -> None:
    check_duplicates(c)
    check_code_case(c, "family", ctx.families["family"], "family")


# --------------------------------------------------------------------------- people


def check_people(c: Checked, ctx: Context) -> None:
    rows = c.rows
    check_duplicates(c)
    known_families = set(ctx.families["family"])
    c.add(
        rows["family"].notna() & ~rows["family"].isin(known_families),
        "family",
        [f"family {f!r} is not in the database (import families first)" for f in
         rows["family"][rows["family"].notna() & ~rows["family"].isin(known_families)]],
    )

    # All people the file may refer to: the file's rows override nothing, they add.
    stored = ctx.people.set_index("person")
    incoming = rows[rows["person"].notna()].drop_duplicates("person").set_index("person", drop=False)
    everyone = pd.concat([stored[~stored.index.isin(incoming.index)], incoming.drop(columns="person")])

    for link, wrong_sex, word in (("mother", "male", "mother"), ("father", "female", "father")):
        ref = rows[link]
        given = ref.notna()
        unknown = given & ~ref.isin(everyone.index)
        c.add(unknown, link, [f"{word} {p!r} is not in this file or the database" for p in ref[unknown]])
        c.add(given & (ref == rows["person"]), link, f"a person cannot be their own {word}")
        known = given & ~unknown
        sex = ref[known].map(everyone["sex_at_birth"])
        bad_sex = pd.Series(False, index=rows.index)
        bad_sex[known] = (sex == wrong_sex).to_numpy()
        c.add(bad_sex, link, f"{word} is recorded with sex at birth {wrong_sex}")
        # A child born before a parent.
        child_latest = _each_distinct(rows["birth_date"][known], _latest)
        parent_earliest = _each_distinct(ref[known].map(everyone["birth_date"]), _earliest)
        before = pd.Series(False, index=rows.index)
        before[known] = (child_latest < parent_earliest).to_numpy()
        c.add(before, "birth_date", f"is before the birth of the {word}")

    deceased = rows["vital_status"] == "deceased"
    c.add(rows["death_date"].notna() & ~deceased, "death_date", "is given but vital_status is not deceased")
    death_before_birth = _each_distinct(rows["death_date"], _latest) < _each_distinct(rows["birth_date"], _earliest)
    c.add(death_before_birth, "death_date", "is before the date of birth")

    for r, col, message in record_problems(rows, ctx.today):
        c.note(int(r), col, message)

    twin = rows["twin_of"]
    has_twin = twin.notna()
    c.add(has_twin & rows["twin_type"].isna(), "twin_type", "is required when twin_of is given")
    c.add(~has_twin & rows["twin_type"].notna(), "twin_of", "is required when twin_type is given")
    c.add(has_twin & (twin == rows["person"]), "twin_of", "a person cannot be their own twin")
    unknown_twin = has_twin & ~twin.isin(everyone.index)
    c.add(unknown_twin, "twin_of", [f"twin {p!r} is not in this file or the database" for p in twin[unknown_twin]])
    known_twin = has_twin & ~unknown_twin & (twin != rows["person"])
    if known_twin.any():
        other = everyone.loc[twin[known_twin]]
        mine = rows[known_twin]
        diff_birth = (
            mine["birth_date"].notna().to_numpy()
            & other["birth_date"].notna().to_numpy()
            & (mine["birth_date"].to_numpy() != other["birth_date"].to_numpy())
        )
        m = pd.Series(False, index=rows.index)
        m[known_twin] = diff_birth
        c.add(m, "birth_date", "differs from the co-twin's date of birth")
        mz = (mine["twin_type"] == "monozygotic").to_numpy()
        diff_sex = mz & (mine["sex_at_birth"].to_numpy() != other["sex_at_birth"].to_numpy())
        m = pd.Series(False, index=rows.index)
        m[known_twin] = diff_sex
        c.add(m, "twin_type", "monozygotic twins recorded with different sex at birth")

    # An external identifier names one person only (in the file and against the store).
    ext = rows["external_id"]
    given_ext = ext.notna() & (ext != "")
    c.add(given_ext & ext.duplicated(keep="first"), "external_id", "is given to another row of this file")
    held = stored[stored["external_id"].notna() & ~stored.index.isin(incoming.index)]
    c.add(given_ext & ext.isin(set(held["external_id"])), "external_id", "belongs to another person in the database")
    c.add(rows["placeholder"] & rows["proband"], "proband", "a placeholder member cannot be the proband")
    probands = pd.concat(
        [
            stored[stored["proband"] & ~stored.index.isin(incoming.index)][["family"]].assign(_row=0),
            rows[rows["proband"]][["family"]].assign(_row=rows.index[rows["proband"]]),
        ]
    )
    extra = probands.duplicated("family", keep="first") & (probands["_row"] > 0)
    for r, fam in zip(probands["_row"][extra], probands["family"][extra]):
        c.note(int(r), "proband", f"family {fam!r} already has a proband")

    _check_cycles(c, everyone)
    check_pedigree_dates(c, everyone)
    check_code_case(c, "person", stored.index, "person")
    check_person_links_and_contact(c, everyone)


# Plausibility across a pedigree: data-entry limits that refuse only what is impossible.
# Youngest mother: the youngest mother on record gave birth aged 5 years 7 months (case report, Lima,
# 1939 [M], verify); a mother younger than 5 years at the birth is refused (common practice: a limit
# below the youngest on record).
MIN_MOTHER_AGE_YEARS = 5
# Youngest father: fathers aged about 11-12 years are on record [M] (verify); a father younger than
# 9 years at the birth is refused (common practice: a margin below the youngest on record).
MIN_FATHER_AGE_YEARS = 9
# Oldest mother: about 74 years on record (assisted conception) [M] (verify); older than 80 is refused
# (common practice: a margin above the oldest on record). No upper limit is set for fathers.
MAX_MOTHER_AGE_YEARS = 80
# A child may be born after a parent's death within one pregnancy: conception at the latest on the day of
# the father's death, and delivery after the mother's death with her body supported; a post-term
# pregnancy is 42 completed weeks or more (WHO / ICD-10 definition [M], verify); 44 weeks (308 days)
# is allowed (common practice: a margin beyond post-term).
PREGNANCY_WINDOW_DAYS = 44 * 7


def check_pedigree_dates(c: Checked, everyone: pd.DataFrame) -> None:
    """A parent too young (or a mother too old) at a child's birth, a child born after a parent's death
    beyond one pregnancy, and a contact-status date before birth.

    Year-only dates stand for any day of their year: a row is refused only when every day the dates
    allow is impossible.  Parent ages are checked for biological parents (not for a child adopted in,
    whose mother and father may be the adoptive parents); the death check holds for every parent.
    """
    rows = c.rows
    births = {p: _partial(b) for p, b in zip(everyone.index, everyone["birth_date"])}
    deaths = {p: _partial(d) for p, d in zip(everyone.index, everyone["death_date"])}
    window = dt.timedelta(days=PREGNANCY_WINDOW_DAYS)
    for r, person, birth_iso, adoption, mother, father, contact in zip(
        rows.index, rows["person"], rows["birth_date"], rows["adoption"], rows["mother"], rows["father"],
        rows["contact_status_date"],
    ):  # fmt: skip
        birth = _partial(birth_iso)
        if birth is None:
            continue
        if isinstance(contact, str) and dt.date.fromisoformat(contact) < birth.earliest():
            c.note(int(r), "contact_status_date", "is before the date of birth")
        for link, word, youngest, oldest in (("mother", "mother", MIN_MOTHER_AGE_YEARS, MAX_MOTHER_AGE_YEARS),
                                             ("father", "father", MIN_FATHER_AGE_YEARS, None)):  # fmt: skip
            parent = mother if link == "mother" else father
            if not isinstance(parent, str) or parent == person or parent not in births:
                continue
            pb, pd_ = births[parent], deaths[parent]
            if pb is not None and adoption != "in" and birth.latest() >= pb.earliest():  # (before: see above)
                if _add_years(pb.earliest(), youngest) > birth.latest():
                    c.note(int(r), link, f"the {word} ({parent}) is under {youngest} years old at this person's "
                                         f"birth, below the youngest {word}s on record (data-entry limit)")
                elif oldest is not None and _add_years(pb.latest(), oldest + 1) <= birth.earliest():
                    c.note(int(r), link, f"the {word} ({parent}) is over {oldest} years old at this person's "
                                         f"birth, above the oldest {word}s on record (data-entry limit)")
            if pd_ is not None and birth.earliest() > pd_.latest() + window:
                c.note(int(r), "birth_date", f"is more than {PREGNANCY_WINDOW_DAYS // 7} weeks after the death of "
                                             f"the {word} ({parent})")


def _add_years(day: dt.date, years: int) -> dt.date:
    """The same day ``years`` later (29 February -> 28 February in a common year)."""
    try:
        return day.replace(year=day.year + years)
    except ValueError:
        return day.replace(year=day.year + years, day=28)


def _check_cycles(c: Checked, everyone: pd.DataFrame) -> None:
    """A person who would become their own ancestor (follows mother/father links)."""
    parents: dict[str, list[str]] = {}
    for person, m, f in zip(everyone.index, everyone["mother"], everyone["father"]):
        parents[person] = [p for p in (m, f) if isinstance(p, str) and p in everyone.index]
    state: dict[str, int] = {}  # 1 = on the current path, 2 = done
    row_of = {p: r for r, p in zip(c.rows.index, c.rows["person"])}
    reported = set()
    for start in parents:
        if state.get(start):
            continue
        stack = [(start, iter(parents[start]))]
        path = [start]
        state[start] = 1
        while stack:
            node, it = stack[-1]
            nxt = next(it, None)
            if nxt is None:
                state[node] = 2
                stack.pop()
                path.pop()
                continue
            if state.get(nxt) == 1:
                loop = path[path.index(nxt):] + [nxt]
                culprit = next((p for p in loop if p in row_of), loop[0])
                if culprit not in reported:
                    reported.add(culprit)
                    c.note(row_of.get(culprit), "mother/father",
                           "would become their own ancestor: " + " -> ".join(loop))
            elif not state.get(nxt):
                state[nxt] = 1
                stack.append((nxt, iter(parents[nxt])))
                path.append(nxt)


# --------------------------------------------------------------------------- variants


def check_variants(c: Checked, ctx: Context) -> None:
    rows = c.rows
    check_duplicates(c)
    known = set(ctx.families["family"])
    unknown = rows["family"].notna() & ~rows["family"].isin(known)
    c.add(unknown, "family", [f"family {f!r} is not in the database" for f in rows["family"][unknown]])
    vkey = ["family", "transcript", "hgvs_c"]
    attrs = ["gene", "hgvs_p", "zygosity"]
    both = pd.concat([ctx.variants.assign(_row=0), rows.assign(_row=rows.index)], ignore_index=True)
    # Position of the first row (stored rows come first) of each variant.
    group = both.groupby(vkey, dropna=False, sort=False).ngroup().to_numpy()
    first_pos = pd.Series(np.arange(len(both))).groupby(group).transform("min").to_numpy()
    for attr in attrs:
        first = pd.Series(both[attr].to_numpy(dtype=object)[first_pos], index=both.index, dtype=object)
        differs = (both[attr].fillna("") != first.fillna("")) & (both["_row"] > 0)
        for r in both["_row"][differs]:
            c.note(int(r), attr, "differs from another row (or the stored record) of the same variant")


# --------------------------------------------------------------------------- people-linked kinds


def _person_checks(c: Checked, ctx: Context, date_col: str) -> pd.DataFrame:
    """Person must exist and not be a placeholder; the date within their life. Returns their records."""
    rows = c.rows
    people = ctx.people.set_index("person")
    # Where each row's person is in the people frame (-1: none): one lookup, then array takes.
    pos = people.index.get_indexer(rows["person"].to_numpy(dtype=object)) if len(people) else (
        np.full(len(rows), -1, dtype=np.intp))
    given = rows["person"].notna().to_numpy()
    unknown = given & (pos < 0)
    c.add(pd.Series(unknown, index=rows.index), "person",
          [f"person {p!r} is not in the database (import people first)" for p in rows["person"][unknown]])
    known = given & ~unknown
    at = np.where(known, pos, 0)
    placeholder = known & people["placeholder"].to_numpy(dtype=bool)[at] if len(people) else known
    c.add(pd.Series(placeholder, index=rows.index), "person",
          "is a placeholder member (placeholders carry no clinical data)")
    when = _iso_days(rows[date_col]).to_numpy()
    # Each person's dates parsed once (per person, not per row; files may hold millions of rows).
    if len(people):
        births = pd.to_datetime(_each_distinct(people["birth_date"], _earliest)).to_numpy()[at]
        deaths = pd.to_datetime(_each_distinct(people["death_date"], _latest)).to_numpy()[at]
        c.add(pd.Series(known & (when < births), index=rows.index), date_col,
              "is before the person's date of birth")
        c.add(pd.Series(known & (when > deaths), index=rows.index), date_col,
              "is after the person's date of death")
    return people


def check_genetic_results(c: Checked, ctx: Context) -> None:
    rows = c.rows
    check_duplicates(c)
    people = _person_checks(c, ctx, "test_date")
    panel = rows["test_type"] == "diagnostic_panel"
    none_found = rows["result"] == "no_variant_found"
    has_variant = rows["variant"].notna()
    c.add(none_found & ~panel, "result", "no_variant_found is only for a diagnostic panel")
    c.add(none_found & has_variant, "variant", "must be empty when the result is no_variant_found")
    c.add(~none_found & rows["result"].notna() & ~has_variant, "variant",
          "is required (transcript:c.change) for this result")
    fam = rows["person"].map(people["family"]) if len(people) else pd.Series(None, index=rows.index)
    known_variants = set(
        f"{f}|{t}:{h}" for f, t, h in zip(ctx.variants["family"], ctx.variants["transcript"], ctx.variants["hgvs_c"])
    )
    keyed = fam.astype(object).fillna("") + "|" + rows["variant"].astype(object).fillna("")
    missing = has_variant & fam.notna() & ~keyed.isin(known_variants)
    c.add(missing, "variant", [f"{v} is not a variant of family {f} (import variants first)"
                               for v, f in zip(rows["variant"][missing], fam[missing])])
    check_result_conflicts(c, ctx)


def check_assessments(c: Checked, ctx: Context) -> None:
    check_duplicates(c)
    _person_checks(c, ctx, "assessment_date")
    check_pregnancy_sex(c, ctx)


def check_studies(c: Checked, ctx: Context) -> None:
    rows = c.rows
    check_duplicates(c)
    _person_checks(c, ctx, "study_date")

    for col, (lo, hi), unit in (("height_cm", HEIGHT_CM, "cm"), ("weight_kg", WEIGHT_KG, "kg")):
        v = rows[col]
        out = v.notna() & ((v < lo) | (v > hi))
        c.add(out, col, [f"{x:g} {unit} is outside the plausible range {lo:g}-{hi:g} {unit}" for x in v[out]])

    # The study-level cells must agree on every row of one study.
    skey = ["person", "study_date", "modality"]
    keys = row_keys(rows, skey, blank_is_empty=False)
    if keys is None:
        keys = rows.groupby(skey, dropna=False, sort=False).ngroup().to_numpy()
    study = pd.factorize(keys)[0]  # 0, 1, ... in order of first appearance
    first_row = pd.Series(study).drop_duplicates().index.to_numpy()[study]  # each row's study's first row
    for col in ("site", "height_cm", "weight_kg"):
        codes, _ = _cell_codes(rows[col])
        c.add(pd.Series(codes != codes[first_row], index=rows.index), col, "differs between rows of the same study")

    measure = rows["measure"]
    has_measure = measure.notna()
    c.add(~has_measure & rows["value"].notna(), "measure", "is empty but a value is given")
    c.add(~has_measure & rows["unit"].notna(), "measure", "is empty but a unit is given")
    c.add(has_measure & rows["value"].isna(), "value", "is empty (a value is required with a measure)")
    c.add(has_measure & rows["unit"].isna(), "unit", "is empty (a unit is required with a measure)")

    catalogue = ctx.measures.set_index("code")
    unknown = has_measure & ~measure.isin(catalogue.index)
    c.add(unknown, "measure", [f"{m!r} is not in the measure catalogue (see `tracker measures`)" for m in measure[unknown]])
    known = has_measure & ~unknown
    cat = catalogue.reindex(measure.where(known))
    cat.index = rows.index
    derived = known & cat["derived"].fillna(False).astype(bool)
    c.add(derived, "measure", "is computed by the tool from other values; it is not entered")
    wrong_modality = known & (cat["modality"] != rows["modality"])
    c.add(wrong_modality, "measure",
          [f"{m} is a {mod} measure, not {rm}" for m, mod, rm in
           zip(measure[wrong_modality], cat["modality"][wrong_modality], rows["modality"][wrong_modality])])

    entered_unit = _each_distinct(rows["unit"], lambda u: units.normalise_unit(u) if isinstance(u, str) else None)
    entered_unit = entered_unit.astype(object).where(entered_unit.notna(), None)
    unit_unknown = known & rows["unit"].notna() & entered_unit.isna()
    c.add(unit_unknown, "unit", [f"{u!r} is not a known unit" for u in rows["unit"][unit_unknown]])
    factor = pd.Series(np.nan, index=rows.index)
    ok_unit = known & entered_unit.notna()
    # One conversion factor per distinct (catalogue unit, entered unit) pair.
    cu_codes, cu_distinct = pd.factorize(cat["unit"][ok_unit].to_numpy(dtype=object))
    eu_codes, eu_distinct = pd.factorize(entered_unit[ok_unit].to_numpy(dtype=object))
    table = np.array([[units.conversion_factor(cu, eu) or np.nan for eu in eu_distinct] for cu in cu_distinct],
                     dtype=float).reshape(len(cu_distinct), len(eu_distinct))  # fmt: skip
    factor[ok_unit] = table[cu_codes, eu_codes]
    wrong_unit = ok_unit & factor.isna()
    c.add(wrong_unit, "unit",
          [f"{u} cannot be converted to {cu}, the unit of {m}" for u, cu, m in
           zip(entered_unit[wrong_unit], cat["unit"][wrong_unit], measure[wrong_unit])])

    value = rows["value"] * factor
    lo, hi = cat["plausible_min"], cat["plausible_max"]
    out = ok_unit & factor.notna() & rows["value"].notna() & ((value < lo) | (value > hi))
    msgs = []
    for v, ev, eu, cu, code, a, b in zip(
        value[out], rows["value"][out], entered_unit[out], cat["unit"][out], measure[out], lo[out], hi[out]
    ):
        msgs.append(out_of_range_message(ev, eu, cu, code, a, b))
    c.add(out, "value", msgs)

    rows["_entered_unit"] = entered_unit
    rows["_value"] = value
    rows["_unit"] = cat["unit"]


def out_of_range_message(entered: float, entered_unit: str, catalogue_unit: str, code: str, lo: float,
                         hi: float) -> str:  # fmt: skip
    """The words for a value outside the catalogue's plausible range (import, forms, as-you-type help)."""
    hint = units.likely_slip(catalogue_unit, code, entered, lo, hi) if entered_unit == catalogue_unit else None
    base = f"{entered:g} {entered_unit} is outside the plausible range of {code} ({lo:g} to {hi:g} {catalogue_unit})"
    return base + (f"; it {hint}" if hint else "")


# --------------------------------------------------------------------------- cases refused by decision
# Each is described, with the reason it is refused, in docs/data-layouts.md ("Refused on purpose").


def check_code_case(c: Checked, column: str, stored: pd.Series | pd.Index, kind: str) -> None:
    """A code that differs only by upper/lower case from a stored code or from a code of an earlier row.

    Codes are compared exactly, so "hv01-ii-3" beside "HV01-II-3" would be a second record of one person.
    """
    seen: dict[str, str] = {}
    for code in pd.unique(pd.Series(stored, dtype=object).dropna().to_numpy(dtype=object)):
        seen.setdefault(str(code).casefold(), str(code))
    values = c.rows[column]
    clash: dict[str, str] = {}
    for code in pd.unique(values.dropna().to_numpy(dtype=object)):
        other = seen.setdefault(str(code).casefold(), str(code))
        if other != code:
            clash[code] = other
    if clash:
        bad = values.isin(list(clash))
        c.add(bad, column, [f"{v!r} differs only by case from {kind} {clash[v]!r} (stored or in an earlier row); "
                            f"codes are compared exactly: use the same spelling" for v in values[bad]])


def check_person_links_and_contact(c: Checked, everyone: pd.DataFrame) -> None:
    """Twins recorded in two families; a placeholder or deceased person marked contactable."""
    rows = c.rows
    twin = rows["twin_of"]
    known = twin.notna() & twin.isin(everyone.index) & rows["family"].notna()
    other_family = twin[known].map(everyone["family"])
    apart = pd.Series(False, index=rows.index)
    apart[known] = (other_family != rows["family"][known]).to_numpy()
    c.add(apart, "twin_of", [f"the co-twin {t!r} is in family {f!r}: twins are recorded in one family"
                             for t, f in zip(twin[apart], twin[apart].map(everyone["family"]))])
    contactable = rows["contact_status"] == "contactable"
    c.add(contactable & rows["placeholder"].fillna(False).astype(bool), "contact_status",
          "is contactable but the person is a placeholder member (not a real person to contact)")
    c.add(contactable & (rows["vital_status"] == "deceased"), "contact_status",
          "is contactable but the person is deceased (contact their relatives under their own records)")


def check_result_conflicts(c: Checked, ctx: Context) -> None:
    """A carrier and a non_carrier result for the same person and variant on the same day (in the
    file, or against a stored result): one of them is wrong."""
    rows = c.rows
    mine = rows["result"].isin(["carrier", "non_carrier"]) & rows["variant"].notna()
    if not mine.any():
        return
    key = ["person", "test_date", "variant"]
    parts = []
    if ctx.results is not None and len(ctx.results):
        stored = ctx.results
        parts.append(stored.loc[stored["result"].isin(["carrier", "non_carrier"]), key + ["result"]].assign(_row=0))
    parts.append(rows.loc[mine, key + ["result"]].assign(_row=rows.index[mine]))
    both = pd.concat(parts, ignore_index=True)
    # Each row is compared with the first result of its person, day and variant (stored ones first).
    first = both.groupby(key, dropna=False, sort=False)["result"].transform("first")
    bad = (both["result"] != first) & (both["_row"] > 0)
    for r in both.loc[bad, "_row"]:
        c.note(int(r), "result", "carrier and non_carrier results for the same variant on the same day "
                                 "(in this file or stored); one of them is wrong")


def check_pregnancy_sex(c: Checked, ctx: Context) -> None:
    """pregnant=yes for a person whose sex at birth is male."""
    rows = c.rows
    sex = rows["person"].map(ctx.people.set_index("person")["sex_at_birth"]) if len(ctx.people) else None
    if sex is None:
        return
    c.add(rows["pregnant"].fillna(False).astype(bool) & (sex == "male"), "pregnant",
          "is yes but the person's sex at birth is male")


CHECKS = {
    "families": check_families,
    "people": check_people,
    "variants": check_variants,
    "genetic-results": check_genetic_results,
    "assessments": check_assessments,
    "studies": check_studies,
}
