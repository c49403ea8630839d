"""Each person's current recall proposal, kept in the store (table ``recall_proposal``).

:func:`refresh_families` is the one function that computes and stores proposals. Every write
that can change a proposal calls it inside its own transaction, for the families it wrote
(the family is the unit: a relative's result, diagnosis or removal changes the others'
proposals): the imports (:mod:`tracker.io.csv_import`, FHIR, DICOM SR), the edits, removals
and reinstatements (:mod:`tracker.services.edits`), a reclassification
(:func:`tracker.services.reclassification.write`) and a task marked done. A new write path
must call it too (``docs/design.md``).

A stored row holds for reads on days from its ``as_of`` to its ``valid_until``
(:func:`tracker.engines.schedule.valid_until`), under the rule set, policy and settings its
``inputs_version`` was computed with (:func:`rules_key`). A read under other settings or a
rule set change sees every row as stale and recomputes it (:func:`invalid_families`); nothing
is ever read from a stale row. ``tracker recall --refresh`` recomputes every row
(:func:`refresh_all`); ``tracker check`` recomputes every row and reports those that differ
(:func:`differing`).

Which settings a write uses: those of the command when it has them, else the clinic's settings
file (``TRACKER_SETTINGS`` or the default file, :func:`tracker.settings.load_settings`). If they
cannot be read, the families' rows are marked stale and the next read computes them.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import hashlib
import json
from collections.abc import Callable, Iterable
from typing import TYPE_CHECKING, Any

from sqlalchemy import Connection, and_, delete, func, insert, or_, select, update

from tracker.engines.schedule import Fired, Policy, Proposal, valid_until
from tracker.errors import UserError
from tracker.settings import Settings
from tracker.store.models import Family, Person, RecallProposal

if TYPE_CHECKING:  # for annotations only
    from tracker.services.recall import _Frames

FORMAT = 2  # bump when what a row stores, or how a proposal is computed, changes: every row is then stale
CHUNK_FAMILIES = 500  # families computed together by refresh_all (memory, not results)
WRITE_COMPUTE_MAX_FAMILIES = 500  # a bulk import of more families marks their rows stale (computed at the first read)

P = RecallProposal


# --------------------------------------------------------------------------- versions


def rules_key(conf: Settings, rule_set, policy: Policy) -> str:
    """16 hex digits naming what a proposal is computed with besides the records: the stored
    format, the tool's version, the rule set (every rule, modifier and source), the policy and
    the settings."""
    import tracker

    text = json.dumps(_canon((FORMAT, getattr(tracker, "__version__", ""), rule_set, policy, conf)),
                      sort_keys=True, default=repr)  # fmt: skip
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def _canon(x: Any) -> Any:
    """``x`` as JSON-ready values that do not depend on the process (sets sorted, dataclasses
    as their type name and fields), so that every process gives the same key."""
    if dataclasses.is_dataclass(x) and not isinstance(x, type):
        return [type(x).__name__, {f.name: _canon(getattr(x, f.name)) for f in dataclasses.fields(x)}]
    if isinstance(x, dict) or hasattr(x, "items") and callable(x.items):
        return {str(k): _canon(v) for k, v in sorted(x.items(), key=lambda kv: str(kv[0]))}
    if isinstance(x, (set, frozenset)):
        return sorted((_canon(v) for v in x), key=lambda v: json.dumps(v, sort_keys=True, default=repr))
    if isinstance(x, (list, tuple)):
        return [_canon(v) for v in x]
    if isinstance(x, (str, int, float, bool)) or x is None:
        return x
    return repr(x)


def records_versions(frames: _Frames, families: Iterable[str]) -> dict[str, str]:
    """16 hex digits per family naming its records as read (people, variants, genetic results,
    assessments, studies and values, open reclassification tasks): an order-free sum of row
    hashes per frame."""
    import pandas as pd

    fams = sorted(set(families))
    family_of = pd.Series(frames.people["family"].to_numpy(), index=frames.people["person"].to_numpy())
    parts: dict[str, list[str]] = {f: [] for f in fams}
    for name, frame in (("people", frames.people), ("variants", frames.variants), ("results", frames.results),
                        ("assessments", frames.assessments), ("studies", frames.studies)):  # fmt: skip
        if frame is None or not len(frame):
            for f in fams:
                parts[f].append(f"{name}:0")
            continue
        fam = frame["family"] if "family" in frame.columns else frame["person"].map(family_of)
        hashes = pd.util.hash_pandas_object(frame.astype(str), index=False)
        grouped = pd.DataFrame({"f": fam.to_numpy(), "h": hashes.to_numpy() % (1 << 52)}).groupby("f")["h"]
        sums, counts = grouped.sum(), grouped.size()
        for f in fams:
            parts[f].append(f"{name}:{int(counts.get(f, 0))}:{int(sums.get(f, 0))}")
    pending = family_of[family_of.index.isin(list(frames.pending))]
    for f in fams:
        parts[f].append("pending:" + ",".join(sorted(pending[pending == f].index)))
    return {f: hashlib.sha256("|".join(v).encode()).hexdigest()[:16] for f, v in parts.items()}


# --------------------------------------------------------------------------- proposal <-> JSON


def _d(x: dt.date | None) -> str | None:
    return x.isoformat() if x is not None else None


def _day(x: str | None) -> dt.date | None:
    return dt.date.fromisoformat(x) if x is not None else None


def proposal_json(p: Proposal) -> dict:
    """Every field of ``p`` as JSON-ready values."""
    out = {f: getattr(p, f) for f in _FIELDS}  # shallow (dataclasses.asdict is slow on many proposals)
    for k in _DATE_FIELDS:
        out[k] = _d(out[k])
    for k in ("needs", "consider", "triggers", "flags", "notes", "cautions"):
        out[k] = list(out[k])
    out["fired"] = [{f: getattr(x, f) for f in _FIRED_FIELDS} for x in p.fired]
    return out


_FIELDS = tuple(f.name for f in dataclasses.fields(Proposal))
_FIRED_FIELDS = tuple(f.name for f in dataclasses.fields(Fired))
_DATE_FIELDS = tuple(f.name for f in dataclasses.fields(Proposal) if str(f.type).startswith("dt.date"))


def proposal_from_json(d: dict) -> Proposal:
    """The :class:`Proposal` :func:`proposal_json` wrote."""
    d = dict(d)
    for k in _DATE_FIELDS:
        d[k] = _day(d[k])
    d["fired"] = tuple(Fired(**f) for f in d["fired"])
    for k in ("needs", "consider", "triggers", "flags", "notes", "cautions"):
        d[k] = tuple(d[k])
    return Proposal(**d)


# --------------------------------------------------------------------------- computing


@dataclasses.dataclass(frozen=True)
class Computed:
    """One person's proposal as computed for a read (not necessarily stored)."""

    person: str
    family: str
    state: str
    proposal: Proposal | None  # None: not scheduled (placeholder, no date of birth)
    unscheduled: str | None
    affected: bool
    valid_until: dt.date
    trend_values: bool
    records_version: str

    def reasons(self) -> str:
        body: dict[str, Any] = {"affected": self.affected}
        if self.proposal is not None:
            body["proposal"] = proposal_json(self.proposal)
        else:
            body["unscheduled"] = self.unscheduled
        return json.dumps(body, sort_keys=True, separators=(",", ":"))


def compute(frames: _Frames, families: Iterable[str], on: dt.date, conf: Settings, rule_set,
            policy: Policy) -> tuple[list[Computed], dict]:  # fmt: skip
    """Every person's proposal in ``families`` (read in ``frames``) on ``on``, as the worklist
    computes them, and the trend modifiers note of the read."""
    from tracker.engines import family_state as fs
    from tracker.gcpause import gc_paused
    from tracker.services.recall import _with_trends, with_trend_texts

    wanted = set(families)
    people = frames.people[frames.people["family"].isin(wanted)]
    if not len(people):
        from tracker.services.recall import trend_summary

        return [], trend_summary(rule_set.id, conf, False)
    with gc_paused():
        states = fs.build_family_states(
            people, frames.variants, frames.results, frames.assessments, frames.studies,
            reclassification_pending=frames.pending, as_of=on,
        )  # fmt: skip
        states, trend = _with_trends(frames, states, rule_set.id, conf, on)
    measured = fs.records_up_to(frames.studies, "study_date", on)
    measured = set() if measured is None else set(measured.loc[measured["value"].notna(), "person"])
    versions = records_versions(frames, states)
    out = []
    for fam, st in states.items():
        values = any(p in measured for p in st.states)
        for p, prop in fs.propose_for_family(st, rule_set, policy, on).items():
            prop = with_trend_texts(prop, st.facts[p])
            s = st.states[p]
            out.append(Computed(p, fam, prop.status, prop, None, s.phenotype == "positive",
                                valid_until(s, rule_set, prop), values, versions[fam]))  # fmt: skip
        for p, why in st.not_scheduled.items():
            out.append(Computed(p, fam, "not_scheduled", None, why, False, dt.date(9999, 12, 31), values,
                                versions[fam]))  # fmt: skip
    return out, trend


# --------------------------------------------------------------------------- storing


def _now() -> dt.datetime:
    return dt.datetime.now(dt.timezone.utc).replace(tzinfo=None)


def store(conn: Connection, families: Iterable[str], computed: list[Computed], on: dt.date, key: str) -> int:
    """Replace the stored rows of ``families`` (and of their people) with ``computed``; returns rows written."""
    fams = sorted(set(families))
    if not fams:
        return 0
    fam_ids = dict(conn.execute(select(Family.code, Family.id).where(Family.code.in_(fams))).all())
    ids = list(fam_ids.values())
    person_ids = dict(conn.execute(select(Person.code, Person.id).where(Person.family_id.in_(ids))).all())
    conn.execute(delete(P).where(or_(P.family_id.in_(ids), P.person_id.in_(list(person_ids.values())))))
    now = _now()
    rows = [
        dict(person_id=person_ids[c.person], family_id=fam_ids[c.family], state=c.state,
             rule_id=c.proposal.rule_id if c.proposal else None,
             interval_months=c.proposal.interval_months if c.proposal else None,
             due_on=c.proposal.due if c.proposal else None, as_of=on, reasons=reasons,
             inputs_version=f"{key}-{c.records_version}", computed_at=now, valid_until=c.valid_until,
             stale=False, trend_values=c.trend_values, **list_columns(c, reasons))
        for c, reasons in ((c, c.reasons()) for c in computed) if c.person in person_ids and c.family in fam_ids
    ]  # fmt: skip
    if rows:
        conn.execute(insert(P), rows)
    return len(rows)


LIST_FLAGS = ("affected", "never_screened", "triggered", "progression", "responded", "flagged")
# Substrings of the stored proposal JSON (Computed.reasons) that mark a trend-derived flag or an affected
# person: the cohort page lists such a person's family first (tracker.services.cohort_view).
FLAG_MARKS = ('"progression":true', "criteria_not_assessable", "projected", "crossing", '"affected":true')
LIST_COLUMNS = (*LIST_FLAGS, "person_code", "urgency_flags", "contact_status", "contact_wish", "contact_later_on",
                "informed_on")  # fmt: skip


def urgency_flags(never_screened: bool, triggered: bool) -> int:
    """The day list's order after the due date, as one number: never screened first, then a trigger."""
    return (0 if never_screened else 2) + (0 if triggered else 1)


def list_columns(c: Computed, reasons: str | None = None) -> dict:
    """The proposal's fields the day list chooses and orders rows by, and whether the cohort page lists
    the person's family first (``flagged``), as columns (migration 0013). ``reasons``: ``c.reasons()``."""
    reasons = c.reasons() if reasons is None else reasons
    lowered = reasons.lower()
    flagged = any(m in lowered for m in FLAG_MARKS)  # in any case, as SQL's LIKE on SQLite finds them
    p = c.proposal
    if p is None:
        return dict(flagged=flagged, person_code=c.person, urgency_flags=urgency_flags(False, False), affected=c.affected,
                    never_screened=False, triggered=False, progression=False, contact_status=None, contact_wish=None,
                    contact_later_on=None, informed_on=None, responded=False)  # fmt: skip
    return dict(flagged=flagged, person_code=c.person, urgency_flags=urgency_flags(p.never_screened, bool(p.triggers)),
                affected=c.affected, never_screened=bool(p.never_screened), triggered=bool(p.triggers),
                progression=bool(p.progression), contact_status=p.contact_status, contact_wish=p.contact_wish,
                contact_later_on=p.contact_later_on, informed_on=p.informed_on, responded=bool(p.responded))


def mark_stale(conn: Connection, families: Iterable[str] | None = None) -> int:
    """Mark the rows of ``families`` (None: every row) stale, so the next read recomputes them."""
    stmt = update(P).values(stale=True)
    if families is not None:
        stmt = stmt.where(P.family_id.in_(select(Family.id).where(Family.code.in_(sorted(set(families))))))
    return conn.execute(stmt).rowcount or 0


def _settings_for_write(conf: Settings | None, rule_set, policy: Policy | None):
    if conf is not None and rule_set is not None and policy is not None:
        return conf, rule_set, policy
    from tracker.services.recall import recall_rules

    return recall_rules(None, None)


def prepare() -> None:
    """Load what :func:`refresh_families` uses (pandas, the engines, the rule set) before a
    command takes the write lock, so that the lock is held for the computation only."""
    import pandas  # noqa: F401
    from tracker.engines import family_state, review  # noqa: F401
    from tracker.normals import criteria  # noqa: F401

    try:
        _settings_for_write(None, None, None)
    except UserError:  # refresh_families marks the rows stale then
        pass


def refresh_families(conn: Connection, families: Iterable[str], on: dt.date | None = None,
                     conf: Settings | None = None, rule_set=None, policy: Policy | None = None,
                     defer_bulk: bool = False) -> int:  # fmt: skip
    """Recompute and store the proposals of ``families`` inside the caller's transaction.

    Reads those families only. ``on`` defaults to today; ``conf``, ``rule_set`` and ``policy``
    to the clinic's settings file; if it cannot be read, the rows are marked stale instead.
    ``defer_bulk`` (bulk imports): more than :data:`WRITE_COMPUTE_MAX_FAMILIES` families are
    marked stale instead of computed (a person with no row yet is computed by the first read
    too). Returns the rows written (or marked stale)."""
    from tracker.services.recall import family_scope, load
    from tracker.store.repository import Scope

    fams = sorted({f for f in families if f})
    if not fams:
        return 0
    on = on or dt.date.today()
    if defer_bulk and len(fams) > WRITE_COMPUTE_MAX_FAMILIES:
        return mark_stale(conn, fams)
    try:
        conf, rule_set, policy = _settings_for_write(conf, rule_set, policy)
    except UserError:
        return mark_stale(conn, fams)
    frames = load(conn, family_scope(fams[0]) if len(fams) == 1 else Scope.families(fams), on)
    computed, _trend = compute(frames, fams, on, conf, rule_set, policy)
    return store(conn, fams, computed, on, rules_key(conf, rule_set, policy))


def all_families(conn: Connection) -> list[str]:
    """Every family with a person recorded (not removed), in code order."""
    stmt = (select(Family.code).join(Person, Person.family_id == Family.id).where(Person.removed_at.is_(None))
            .distinct().order_by(Family.code))  # fmt: skip
    return [r[0] for r in conn.execute(stmt).all()]


def refresh_all(conn: Connection, on: dt.date, conf: Settings, rule_set, policy: Policy,
                progress: Callable[[int], None] | None = None, families: list[str] | None = None) -> dict:  # fmt: skip
    """Recompute and store every proposal (``tracker recall --refresh``), a chunk of families at
    a time; ``progress(n)`` after each chunk of ``n`` families. Rows of people no longer
    recorded are removed."""
    fams = all_families(conn) if families is None else families
    key = rules_key(conf, rule_set, policy)
    written = 0
    for i in range(0, len(fams), CHUNK_FAMILIES):
        chunk = fams[i:i + CHUNK_FAMILIES]
        written += _refresh_chunk(conn, chunk, on, conf, rule_set, policy, key)
        if progress is not None:
            progress(len(chunk))
    if families is None:  # rows left over from people removed or families emptied
        alive = select(Person.id).where(Person.removed_at.is_(None))
        conn.execute(delete(P).where(P.person_id.not_in(alive)))
    return {"families": len(fams), "proposals": written, "as_of": on.isoformat(), "inputs": key}


def _refresh_chunk(conn, chunk, on, conf, rule_set, policy, key) -> int:
    from tracker.services.recall import load
    from tracker.store.repository import Scope

    frames = load(conn, Scope.families(chunk), on)
    computed, _trend = compute(frames, chunk, on, conf, rule_set, policy)
    return store(conn, chunk, computed, on, key)


# --------------------------------------------------------------------------- reading


def invalid_families(conn: Connection, on: dt.date, key: str) -> set[str]:
    """Families with a row that cannot be read on ``on`` under inputs ``key``: stale, computed
    under other inputs, computed for a later day, past its ``valid_until``, or of a person since
    removed; or with a person (not removed) who has no row."""
    bad = or_(P.stale.is_(True), func.substr(P.inputs_version, 1, len(key)) != key, P.as_of > on,
              P.valid_until < on)  # fmt: skip
    stmt = select(Family.code).join(P, P.family_id == Family.id).where(bad).distinct()
    out = {r[0] for r in conn.execute(stmt).all()}
    missing = (select(Family.code).join(Person, Person.family_id == Family.id)
               .outerjoin(P, P.person_id == Person.id)
               .where(Person.removed_at.is_(None), P.id.is_(None)).distinct())  # fmt: skip
    out |= {r[0] for r in conn.execute(missing).all()}
    removed = (select(Family.code).join(P, P.family_id == Family.id).join(Person, P.person_id == Person.id)
               .where(Person.removed_at.is_not(None)).distinct())  # fmt: skip
    out |= {r[0] for r in conn.execute(removed).all()}
    return out


def all_hold(conn: Connection, on: dt.date, key: str) -> bool:
    """Whether every stored row holds on ``on`` under ``key`` and every person recorded (not removed)
    has one, i.e. :func:`invalid_families` is empty; by index lookups and two counts, so that a read
    of a few rows does not pay for a scan of the table."""
    lookups = (
        select(P.id).where(P.stale.is_(True)),
        select(P.id).where(P.valid_until < on),
        select(P.id).where(P.as_of > on),
        select(P.id).where(P.inputs_version < f"{key}-"),
        select(P.id).where(P.inputs_version > f"{key}-~"),  # the records' hash is hexadecimal, below "~"
        select(P.id).join(Person, P.person_id == Person.id).where(Person.removed_at.is_not(None)),
    )
    if any(conn.execute(q.limit(1)).first() is not None for q in lookups):
        return False
    rows = conn.execute(select(func.count()).select_from(P)).scalar_one()
    people = conn.execute(select(func.count()).select_from(Person)).scalar_one()
    removed = conn.execute(select(func.count()).select_from(Person).where(Person.removed_at.is_not(None))).scalar_one()
    return rows == people - removed  # every row is a living person's (above), one row per person (unique person_id)


def worklist_rows(conn: Connection, end: dt.date, skip: set[str] = frozenset()) -> list[tuple[str, str, Proposal, bool]]:
    """Stored proposals the worklist can list for a window ending ``end``: due or overdue by
    ``end``, and everyone not recalled (declined); as (person, family, proposal, affected).
    An indexed query (due date, family); families in ``skip`` are left out."""
    stmt = (
        select(Person.code, Family.code, P.reasons)
        .join(Person, P.person_id == Person.id)
        .join(Family, P.family_id == Family.id)
        .where(Person.removed_at.is_(None),
               or_(and_(P.due_on <= end, P.state.in_(("due", "overdue"))), P.state == "not_recalled"))
    )  # fmt: skip
    out = []
    for person, family, reasons in conn.execute(stmt).all():
        if family in skip:
            continue
        body = json.loads(reasons)
        out.append((person, family, proposal_from_json(body["proposal"]), bool(body["affected"])))
    return out


def any_trend_values(conn: Connection, skip: set[str] = frozenset()) -> bool:
    """Whether a stored row (outside the families in ``skip``) had measured values to trend."""
    stmt = select(P.id).where(P.trend_values.is_(True))
    if skip:
        stmt = stmt.join(Family, P.family_id == Family.id).where(Family.code.not_in(sorted(skip)))
    return conn.execute(stmt.limit(1)).first() is not None


# --------------------------------------------------------------------------- checking


def differing(conn: Connection, conf: Settings, rule_set, policy: Policy,
              skip: Iterable[str] = ()) -> list[tuple[str, str]]:  # fmt: skip
    """Rows computed under ``conf``/``rule_set``/``policy`` that differ from a recomputation for
    the same day from the records now stored: (person, what differs). Rows computed under other
    inputs or marked stale are not compared (the next read recomputes them), nor the families in
    ``skip`` (e.g. links that cannot form a pedigree)."""
    skip = set(skip)
    from tracker.services.recall import load
    from tracker.store.repository import Scope

    key = rules_key(conf, rule_set, policy)
    stmt = (select(Person.code, Family.code, P.state, P.rule_id, P.interval_months, P.due_on, P.as_of, P.reasons,
                   P.inputs_version, P.valid_until, P.trend_values, *(getattr(P, k) for k in LIST_COLUMNS))
            .join(Person, P.person_id == Person.id).join(Family, P.family_id == Family.id)
            .where(P.stale.is_(False), func.substr(P.inputs_version, 1, len(key)) == key))  # fmt: skip
    stored: dict[tuple[dt.date, str], list] = {}
    for r in conn.execute(stmt).all():
        stored.setdefault((r.as_of, r[1]), []).append(r)
    by_day: dict[dt.date, list[str]] = {}
    for day, fam in stored:
        if fam in skip:
            continue
        by_day.setdefault(day, []).append(fam)
    out = []
    for day, fams in sorted(by_day.items()):
        for i in range(0, len(fams), CHUNK_FAMILIES):
            chunk = sorted(fams[i:i + CHUNK_FAMILIES])
            computed, _ = compute(load(conn, Scope.families(chunk), day), chunk, day, conf, rule_set, policy)
            fresh = {c.person: c for c in computed}
            for fam in chunk:
                for r in stored[(day, fam)]:
                    c = fresh.get(r[0])
                    if c is None:
                        out.append((r[0], "stored, but the person has no proposal when recomputed"))
                        continue
                    want = {"state": c.state, "rule_id": c.proposal.rule_id if c.proposal else None,
                            "interval_months": c.proposal.interval_months if c.proposal else None,
                            "due_on": c.proposal.due if c.proposal else None, "reasons": c.reasons(),
                            "inputs_version": f"{key}-{c.records_version}", "valid_until": c.valid_until,
                            "trend_values": c.trend_values, **list_columns(c)}  # fmt: skip
                    have = {k: getattr(r, k) for k in want}
                    for k in ("trend_values", *LIST_FLAGS):
                        have[k] = None if have[k] is None else bool(have[k])
                    diff = [k for k in want if want[k] != have[k]]
                    if diff:
                        out.append((r[0], ", ".join(f"{k} {have[k] if k != 'reasons' else '(text)'} stored, "
                                                    f"{want[k] if k != 'reasons' else '(text)'} recomputed" for k in diff)))
    return sorted(out)
