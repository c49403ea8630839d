"""Administration (admin role): accounts (add, disable, reset a password) and the audit trail."""

from __future__ import annotations

import datetime as dt

from starlette.requests import Request
from starlette.routing import Route

from tracker.services import accounts as AC
from tracker.store import audit
from tracker.store.database import reading, writing
from tracker.store.models import ROLES
from tracker.web import auth
from tracker.web.templating import field_errors, render

AUDIT_ROWS_SHOWN = 500  # newest first; narrow the filters to see older entries


def _accounts_page(request: Request, *, errors=None, values=None, issued=None, status: int = 200):
    with reading(auth.engine(request)) as conn:
        accounts = AC.list_accounts(conn)
    return render(request, "accounts.html", {"accounts": accounts, "roles": ROLES, "errors": errors or {},
                                             "values": values or {}, "issued": issued}, status_code=status)  # fmt: skip


def accounts_page(request: Request):
    auth.require_to(request, "accounts")
    return _accounts_page(request)


def account_add(request: Request):
    from tracker.io.reading import InputRejected

    user = auth.require_to(request, "accounts")
    form = request.state.form
    name, role = str(form.get("name") or ""), str(form.get("role") or "")
    try:
        with writing(auth.engine(request)) as conn:
            password = AC.add_account(conn, name, role, by=user.name, now=auth.now(request))
    except InputRejected as exc:
        return _accounts_page(request, errors=field_errors(exc), values={"name": name, "role": role}, status=400)
    return _accounts_page(request, issued={"name": name.strip(), "password": password, "what": "added"})


def _named(request: Request) -> str:
    return request.path_params["name"]


def account_disable(request: Request):
    from tracker.io.reading import InputRejected

    user = auth.require_to(request, "accounts")
    name = _named(request)
    if name == user.name:
        return _accounts_page(request, errors={"": ["you cannot disable your own account"]}, status=400)
    try:
        with writing(auth.engine(request)) as conn:
            AC.disable_account(conn, name, by=user.name, now=auth.now(request))
    except InputRejected as exc:
        return _accounts_page(request, errors={"": [m for ms in field_errors(exc).values() for m in ms]}, status=400)
    return _accounts_page(request)


def account_reset(request: Request):
    from tracker.io.reading import InputRejected

    user = auth.require_to(request, "accounts")
    name = _named(request)
    try:
        with writing(auth.engine(request)) as conn:
            password = AC.reset_password(conn, name, by=user.name, now=auth.now(request))
    except InputRejected as exc:
        return _accounts_page(request, errors={"": [m for ms in field_errors(exc).values() for m in ms]}, status=400)
    return _accounts_page(request, issued={"name": name, "password": password, "what": "given a new one-time password"})


def audit_page(request: Request):
    from tracker.domain.dates import parse_date

    user = auth.require_to(request, "accounts")
    q = request.query_params
    f = {k: (q.get(k) or "").strip() for k in ("person", "family", "action", "since", "until")}
    errors: dict[str, list[str]] = {}
    days: dict[str, dt.date | None] = {"since": None, "until": None}
    for k in ("since", "until"):
        if f[k]:
            try:
                days[k] = parse_date(f[k])
            except ValueError as exc:
                errors[k] = [str(exc)]
    if f["action"] and f["action"] not in audit.ACTIONS:
        errors["action"] = [f"not an action: {', '.join(audit.ACTIONS)}"]
    for k in ("person", "family"):
        if len(f[k]) > 40:
            errors[k] = ["at most 40 characters"]
    if days["since"] and days["until"] and days["until"] < days["since"]:
        errors["until"] = ["is before the first day"]
    if errors:
        return render(request, "audit.html", {"f": f, "errors": errors, "rows": None, "actions": audit.ACTIONS},
                      status_code=400)  # fmt: skip
    with reading(auth.engine(request)) as conn:
        frame = audit.load(conn, person=f["person"] or None, family=f["family"] or None, since=days["since"],
                           until=days["until"], action=f["action"] or None)  # fmt: skip
    total = len(frame)
    rows = frame.iloc[::-1].head(AUDIT_ROWS_SHOWN).to_dict("records")
    with writing(auth.engine(request)) as conn:
        AC.audit_read(conn, user, family=f["family"] or None, person=f["person"] or None,
                      what=f"audit trail: {total} entries" + "".join(f"; {k} {v}" for k, v in f.items() if v),
                      now=auth.now(request))  # fmt: skip
    return render(request, "audit.html", {"f": f, "rows": rows, "total": total, "shown": AUDIT_ROWS_SHOWN,
                                          "actions": audit.ACTIONS})  # fmt: skip


routes = [
    Route("/admin/accounts", accounts_page, methods=["GET"]),
    Route("/admin/accounts", account_add, methods=["POST"]),
    Route("/admin/accounts/{name}/disable", account_disable, methods=["POST"]),
    Route("/admin/accounts/{name}/reset", account_reset, methods=["POST"]),
    Route("/admin/audit", audit_page, methods=["GET"]),
]
