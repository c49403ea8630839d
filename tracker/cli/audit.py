"""`tracker audit`: who changed what, when, and the values before and after."""

from __future__ import annotations

import json
from typing import Annotated

import typer

from tracker.cli.common import AllOption, DbOption, JsonOption, SettingsOption, open_store, print_json, print_table
from tracker.cli.common import table_limit
from tracker.domain.dates import parse_date
from tracker.errors import UserError
from tracker.lazy import lazy_module
from tracker.store.audit_actions import ACTIONS
from tracker.store.database import reading

audit = lazy_module("tracker.store.audit")


def _day(text: str | None, option: str):
    if text is None:
        return None
    try:
        return parse_date(text)
    except ValueError:
        raise UserError(f"{option}: {text!r} is not an ISO 8601 date (YYYY-MM-DD)") from None


def _change(action: str, before: dict | None, after: dict | None) -> str:
    """The changed fields as "field: before -> after" (an import's counts are in its "what")."""
    if action in ("import", "restore"):
        return ""
    before, after = before or {}, after or {}
    parts = []
    for k in sorted(set(before) | set(after)):
        if before.get(k) != after.get(k) or k not in before:
            parts.append(f"{k}: {_cell(before.get(k))} -> {_cell(after.get(k))}" if before else f"{k}: {_cell(after.get(k))}")
    return "; ".join(parts)


def _cell(v) -> str:
    return "(empty)" if v is None else json.dumps(v, ensure_ascii=False) if not isinstance(v, str) else v


def audit_(
    person: Annotated[str | None, typer.Option("--person", help="Only entries about this person code.")] = None,
    family: Annotated[str | None, typer.Option("--family", help="Only entries about this family code.")] = None,
    since: Annotated[str | None, typer.Option("--from", help="From this day (YYYY-MM-DD, UTC), inclusive.")] = None,
    until: Annotated[str | None, typer.Option("--to", help="To this day (YYYY-MM-DD, UTC), inclusive.")] = None,
    action: Annotated[str | None, typer.Option("--action", help=f"Only one kind: {', '.join(ACTIONS)}.")] = None,
    db: DbOption = None,
    json_out: JsonOption = False,
    all_: AllOption = False,
    settings: SettingsOption = None,
) -> None:
    """Show the audit trail (append-only): every import, correction, removal, reclassification and task
    done, with who, when (UTC), the values before and after, and the reason.

    The table shows the latest entries and a count of the earlier ones (--all: every entry).

    Example: tracker audit --family HV01 --from 2026-11-01
    """
    if action is not None and action not in ACTIONS:
        raise UserError(f"--action: {action!r} is not one of: {', '.join(ACTIONS)}")
    start, end = _day(since, "--from"), _day(until, "--to")
    if start and end and end < start:
        raise UserError(f"--to {end.isoformat()} is before --from {start.isoformat()}")
    engine = open_store(db)
    with reading(engine) as conn:
        frame = audit.load(conn, person=person, family=family, since=start, until=end, action=action)
    if json_out:
        print_json(frame.to_dict("records"))
        return
    if frame.empty:
        typer.echo("no audit entries match")
        return
    print_table(
        f"{len(frame)} audit entries (--json gives every value before and after)",
        ["#", "when (UTC)", "who", "action", "what", "change", "reason"],
        [[r.id, r.at, r.actor, r.action, r.what, _change(r.action, r.before, r.after), r.reason or ""]
         for r in frame.itertuples()],
        limit=table_limit(all_, settings), last=True,
    )  # fmt: skip


def register(app: typer.Typer) -> None:
    app.command("audit")(audit_)
