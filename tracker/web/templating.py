"""Templates: the Jinja2 environment, its globals, and rendering a page or a form's errors."""

from __future__ import annotations

from pathlib import Path

from starlette.requests import Request
from starlette.templating import Jinja2Templates

from tracker.web import csrf
from tracker.web.roles import can

HERE = Path(__file__).resolve().parent

NAV = [  # (path, label, action needed or None for everyone)
    ("/day", "Today's list", None),
    ("/cohort", "Cohort", None),
    ("/uptake", "Cascade uptake", None),
    ("/import", "Import", "import"),
    ("/admin/accounts", "Accounts", "accounts"),
    ("/admin/audit", "Audit trail", "accounts"),
]


def make_templates() -> Jinja2Templates:
    import jinja2

    templates = Jinja2Templates(directory=str(HERE / "templates"))
    env = templates.env
    env.globals["csrf_field"] = jinja2.pass_context(lambda ctx: csrf.field(ctx["request"]))
    env.globals["csrf_token"] = jinja2.pass_context(lambda ctx: csrf.token_for(ctx["request"]))
    env.globals["can"] = can
    env.globals["NAV"] = NAV
    return templates


def render(request: Request, name: str, context: dict | None = None, status_code: int = 200, headers=None):
    """Render ``name`` with the signed-in user (if any) in the context; sets a pre-session cookie if one was made."""
    from tracker.web.app import set_cookie
    from tracker.web.auth import PRE_COOKIE

    ctx = {"user": getattr(request.state, "user", None), "errors": {}, "values": {}}
    ctx.update(context or {})
    response = request.app.state.templates.TemplateResponse(request, name, ctx, status_code=status_code,
                                                            headers=headers)  # fmt: skip
    if "new_pre" in request.state._state and not request.cookies.get(PRE_COOKIE):
        set_cookie(request, response, PRE_COOKIE, request.state.new_pre)
    return response


def field_errors(exc, fields=None) -> dict[str, list[str]]:
    """An :class:`tracker.io.reading.InputRejected` as {form field: [messages]}; "" for the form as a whole.

    With ``fields`` (the names the form shows), a problem about any other column is shown at the
    top of the form, with the column named, so no message is lost.
    """
    out: dict[str, list[str]] = {}
    for p in exc.problems:
        key = p.column or ""
        if fields is not None and key and key not in fields:
            out.setdefault("", []).append(f"{key}: {p.message}")
        else:
            out.setdefault(key, []).append(p.message)
    return out
