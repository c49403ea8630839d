"""Sign in, sign out and change password."""

from __future__ import annotations

from starlette.requests import Request
from starlette.responses import RedirectResponse
from starlette.routing import Route

from tracker.services import accounts as AC
from tracker.store.database import reading, writing
from tracker.web import auth
from tracker.web.app import delete_cookie, set_cookie
from tracker.web.templating import field_errors, render

ENDED = {
    "idle": "Your session ended after a time without use. Please sign in again.",
    "absolute": "Your session reached its time limit. Please sign in again.",
    "disabled": "This account has been disabled.",
    "reset": "Your password was reset: sign in with the one-time password you were given.",
    "signed_out": "You have signed out.",
}


def _safe_next(value) -> str:
    """Only a path of this site (never another address) is followed after sign-in."""
    if isinstance(value, str) and value.startswith("/") and not value.startswith("//") and "\\" not in value:
        return value
    return "/day"


def _client(request: Request) -> str | None:
    return request.client.host if request.client else None


def home(request: Request):
    auth.current_user(request)
    return RedirectResponse("/day", status_code=303)


def signin_form(request: Request):
    if auth.optional_user(request) is not None:
        return RedirectResponse("/day", status_code=303)
    notice = ENDED.get(request.query_params.get("ended", ""))
    return render(request, "signin.html", {"notice": notice, "next_path": _safe_next(request.query_params.get("next"))})


def signin(request: Request):
    form = request.state.form
    name, password = str(form.get("name") or ""), str(form.get("password") or "")
    next_path = _safe_next(form.get("next"))
    errors: dict[str, list[str]] = {}
    if not name.strip():
        errors["name"] = ["give your account name"]
    if not password:
        errors["password"] = ["give your password"]
    if errors:
        return render(request, "signin.html", {"errors": errors, "values": {"name": name}, "next_path": next_path},
                      status_code=400)  # fmt: skip
    t = auth.now(request)
    refusal = None
    with reading(auth.engine(request)) as conn:  # the slow password check holds no write lock
        check = AC.check_password(conn, name, password)
    with writing(auth.engine(request)) as conn:  # a refusal is committed too: it is audited and counted
        try:
            user = AC.record_sign_in(conn, check, now=t, client=_client(request))
            token = AC.start_session(conn, user, now=t, client=_client(request))
        except AC.SignInRefused as exc:
            refusal = str(exc)
    if refusal is not None:
        return render(request, "signin.html", {"errors": {"": [refusal]}, "values": {"name": name},
                                               "next_path": next_path}, status_code=400)  # fmt: skip
    response = RedirectResponse("/password" if user.must_change_password else next_path, status_code=303)
    set_cookie(request, response, auth.SESSION_COOKIE, token)
    delete_cookie(request, response, auth.PRE_COOKIE)
    return response


def signout(request: Request):
    user = auth.optional_user(request)
    response = RedirectResponse("/signin?ended=signed_out", status_code=303)
    if user is not None and request.state.session_id is not None:
        with writing(auth.engine(request)) as conn:
            AC.end_session(conn, request.state.session_id, "signed_out", now=auth.now(request), user=user.name)
    delete_cookie(request, response, auth.SESSION_COOKIE)
    return response


def password_form(request: Request):
    auth.current_user(request)
    return render(request, "password.html", {"min_chars": AC.MIN_PASSWORD_CHARS,
                                             "done": request.query_params.get("done") == "1"})  # fmt: skip


def password_change(request: Request):
    from tracker.io.reading import InputRejected

    user = auth.current_user(request)
    form = request.state.form
    current = str(form.get("current_password") or "")
    new = str(form.get("new_password") or "")
    repeat = str(form.get("repeat_password") or "")
    ctx = {"min_chars": AC.MIN_PASSWORD_CHARS, "done": False}
    if new != repeat:
        return render(request, "password.html", dict(ctx, errors={"repeat_password": ["does not match the new password"]}),
                      status_code=400)  # fmt: skip
    try:
        with writing(auth.engine(request)) as conn:
            AC.change_password(conn, user, current, new, now=auth.now(request))
    except InputRejected as exc:
        return render(request, "password.html", dict(ctx, errors=field_errors(exc)), status_code=400)
    return RedirectResponse("/password?done=1" if not user.must_change_password else "/day", status_code=303)


routes = [
    Route("/", home, methods=["GET"]),
    Route("/signin", signin_form, methods=["GET"]),
    Route("/signin", signin, methods=["POST"]),
    Route("/signout", signout, methods=["POST"]),
    Route("/password", password_form, methods=["GET"]),
    Route("/password", password_change, methods=["POST"]),
]
