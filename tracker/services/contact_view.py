"""One person's side of the contact log as the web interface shows it, and a family letter recorded
as sent from the web (docs/contacts-and-letters.md).

* :func:`person_contact_record`: the derived state with its date, the log (newest first), wishes
  (open and ended), letters recorded as sent, results from other centres, bookings and discharges;
* :func:`letter_to_record` / :func:`record_letter_as_sent`: the letter kind chosen from where the
  person stands on the letter's day, exactly as ``tracker report letter --sent`` chooses it, and
  the record written through :func:`tracker.services.contacts.record_letter_sent`.

Reads and writes run inside the caller's transaction (:func:`tracker.store.database.reading` /
``writing``).  Nothing here is a clinical computation.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from pathlib import Path

from sqlalchemy import Connection

from tracker.io.reading import InputRejected, Problem


def _iso(v) -> str | None:
    if v is None:
        return None
    try:
        import pandas as pd

        if pd.isna(v):
            return None
    except (TypeError, ValueError):
        pass
    return v.isoformat() if hasattr(v, "isoformat") else str(v)


def _records(df, person: str | None, dates: tuple[str, ...]) -> list[dict]:
    """The rows of ``df`` about ``person`` (None: every row) as plain dicts (dates as ISO text, missing
    values as None)."""
    if df is None or not len(df):
        return []
    import pandas as pd

    out = []
    for row in (df if person is None else df[df["person"] == person]).to_dict("records"):
        rec = {}
        for k, v in row.items():
            if k in dates or k in ("entered_at",):
                rec[k] = _iso(v)
            else:
                rec[k] = None if (not isinstance(v, (list, dict)) and pd.isna(v)) else v
        out.append(rec)
    return out


def person_contact_record(conn: Connection, person: str) -> dict:
    """Everything the contact log holds about ``person`` (raises InputRejected, column ``person``,
    for an unknown or removed person)."""
    from tracker.services import contacts as SC
    from tracker.store import repository as repo

    state = SC.contact_state(conn, person)
    scope = repo.Scope.families([state["family"]])
    history = list(reversed(state.pop("history")))  # newest first; every event kept
    wishes = _records(repo.load_contact_wishes(conn, scope), person, ("recorded_date", "ended_date"))
    wishes.sort(key=lambda w: (w["recorded_date"] or ""), reverse=True)
    letters = _records(repo.load_letters(conn, scope), person, ("sent_date", "reply_date"))
    letters.sort(key=lambda r: (r["sent_date"] or ""), reverse=True)
    external = _records(repo.load_external_results(conn, scope), person, ("result_date",))
    external.sort(key=lambda r: (r["result_date"] or ""), reverse=True)
    bookings = _records(repo.load_bookings(conn, scope), person, ("visit_date", "cancelled_date"))
    bookings.sort(key=lambda r: (r["visit_date"] or ""), reverse=True)
    discharges = _records(repo.load_discharges(conn, scope), person, ("discharge_date", "classified_on"))
    discharges.sort(key=lambda r: (r["discharge_date"] or ""), reverse=True)
    return {"person": person, "family": state["family"], "state": state, "history": history,
            "open_wishes": [w for w in wishes if not w.get("ended_date")],
            "ended_wishes": [w for w in wishes if w.get("ended_date")], "letters": letters,
            "external": external, "bookings": bookings, "discharges": discharges}  # fmt: skip


def template_version(path: Path) -> str:
    """A template's version: ``sha256:`` and the first 12 hex digits of its text (as the command line)."""
    return "sha256:" + hashlib.sha256(Path(path).read_bytes()).hexdigest()[:12]


def letter_to_record(conn: Connection, person: str, on: dt.date, conf, gid: str, via: str | None = None) -> dict:
    """The letter ``tracker report letter PERSON --date ON [--via VIA]`` would write: its kind (from where
    the person stands on ``on``), template and template version.  The relative's wishes are checked
    by the contacts service when it is recorded."""
    from tracker.engines.cascade import RULE_SETS
    from tracker.errors import UserError
    from tracker.outputs import letter as L
    from tracker.services import documents as SD

    if gid not in RULE_SETS:
        raise UserError(f"no cascade rule set for guideline {gid!r}")
    people, family, state = SD.letter_state(conn, person, on)
    record = SD.letter_record(conn, person, on)
    if record["wish"] == "no_further_contact":
        raise InputRejected([Problem("letter", None, "person",
                                     f"{person} asked for no further contact: must not be approached; "
                                     "no letter is recorded")])  # fmt: skip
    plan = L.prepare_letter(
        state.pedigree, state.genotypes, SD.letter_variant(state.variant), person, on, gid, conf.clinic,
        affected=state.affected, seen=state.seen, early_onset_family="early_onset" in state.features,
        via_proband=via is not None, recipient_name=None, standing=SD.standing(state, person, record),
        letter_kind=None,
    )  # fmt: skip
    return {"kind": plan.letter_kind, "kind_words": L.KIND_WORDS[plan.letter_kind],
            "template": Path(plan.default_template).name[:100],
            "template_version": template_version(L.TEMPLATE_DIR / plan.default_template)}  # fmt: skip


def record_letter_as_sent(conn: Connection, person: str, *, on: dt.date, conf, gid: str, via: str | None,
                          user: str, today: dt.date) -> dict:  # fmt: skip
    """Record the letter to ``person`` as sent on ``on`` (to the person, or through family member ``via``).

    Refused (InputRejected, nothing written) for a relative who asked for no further contact, and for
    one who asked for contact only through a family member unless ``via`` is that member."""
    from tracker.errors import UserError
    from tracker.outputs.letter import LetterRefused
    from tracker.services import contacts as SC

    try:
        letter = letter_to_record(conn, person, on, conf, gid, via)
    except LetterRefused as exc:
        raise InputRejected([Problem("letter", None, "person", str(exc))]) from None
    except UserError as exc:
        raise InputRejected([Problem("letter", None, "", str(exc))]) from None
    done = SC.record_letter_sent(conn, person, kind=letter["kind"], template=letter["template"],
                                 template_version=letter["template_version"], on=on,
                                 to="via_family" if via else "person", via=via, user=user, today=today)  # fmt: skip
    return {**done, "kind_words": letter["kind_words"]}


def open_bookings(conn: Connection, families: list[str], today: dt.date) -> dict[str, dict]:
    """{person: the next booked visit (not cancelled, today or later): visit_date, purpose} in ``families``."""
    from tracker.store import repository as repo

    if not families:
        return {}
    df = repo.load_bookings(conn, repo.Scope.families(sorted(set(families))))
    out: dict[str, dict] = {}
    for r in _records(df, None, ("visit_date", "cancelled_date")) if len(df) else []:
        if r["cancelled_date"] or not r["visit_date"] or r["visit_date"] < today.isoformat():
            continue
        if r["person"] not in out or r["visit_date"] < out[r["person"]]["visit_date"]:
            out[r["person"]] = {"visit_date": r["visit_date"], "purpose": r["purpose"]}
    return out
