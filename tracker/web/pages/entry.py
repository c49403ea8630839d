"""Data entry forms: add a relative (counsellor), record a study (cardiologist), a genetic result
(counsellor), an assessment (cardiologist).

Each form is a GET that shows it and a POST that stores it through :mod:`tracker.services.entry`
(the importer's parsing and checks, one audited write); on any problem the form comes back with
the error beside the field (status 400) and nothing is written.  The study form's values are
checked as they are typed by a small GET (``/entry/plausible/{measure}``, htmx) giving the
importer's words; the same check runs on submit.  Pages work without JavaScript.
"""

from __future__ import annotations

from starlette.requests import Request
from starlette.responses import HTMLResponse, RedirectResponse
from starlette.routing import Route

from tracker.errors import UserError
from tracker.io.reading import InputRejected
from tracker.store.database import reading, writing
from tracker.web import auth, clinic
from tracker.web.templating import field_errors, render

CODE_MAX = 40

# (form, action needed, layout kind, fields, title)
FORMS = {
    "relative": ("pedigree", "people", "Add a relative"),
    "study": ("study", "studies", "Record a study"),
    "genetic-result": ("genetics", "genetic-results", "Record a genetic result"),
    "assessment": ("assessment", "assessments", "Record an assessment"),
}

HELP = {
    "person": "a new pseudonymous code (never a name)",
    "birth_date": "YYYY-MM-DD, or the year alone",
    "death_date": "YYYY-MM-DD, or the year alone",
    "mother": "a member of this family",
    "father": "a member of this family",
    "twin_of": "a member of this family",
    "variant": "transcript:c.change of the family variant, empty for a panel with no variant found",
    "height_cm": "cm",
    "weight_kg": "kg",
    "death_age": "whole years",
    "diagnosis_age": "whole years",
}


def _code(request: Request, name: str = "code") -> str:
    code = request.path_params[name]
    if not code or len(code) > CODE_MAX:
        raise UserError("no such record")
    return code


def _fields(kind: str, names: tuple[str, ...]) -> list[dict]:
    """What the template needs to draw each field: name, kind, choices, help."""
    from tracker.io.layouts import LAYOUTS

    cols = {c.name: c for c in LAYOUTS[kind].columns}
    out = []
    for n in names:
        c = cols[n]
        choices = None
        if c.kind == "choice":
            choices = [("", "—")] + [(v, v.replace("_", " ")) for v in c.choices]
        elif c.kind == "yesno":
            choices = [("", "—"), ("yes", "yes"), ("no", "no")]
        elif c.kind == "answer":
            choices = [("", "not recorded"), ("yes", "yes"), ("no", "no")]
        out.append({"name": n, "kind": c.kind, "required": bool(c.required), "choices": choices,
                    "label": n.replace("_", " "), "help": HELP.get(n, "")})  # fmt: skip
    return out


def _members(conn, family: str) -> list[str]:
    from tracker.services import views as SV

    return SV.family_members(conn, family)


def _person_family(conn, person: str) -> str:
    from tracker.services.recall import person_family

    return person_family(conn, person)


def _measures(conn, modality: str) -> list[dict]:
    from tracker.store import repository as repo

    m = repo.load_measures(conn)
    m = m[(m["modality"] == modality) & ~m["derived"]]
    codes = m["code"].astype(str)
    # Segmental values: the 17-segment peak strain (the strain map) in its own group; the other segment
    # models and kinds are many values best imported from a file (CSV or DICOM SR).
    m = m[~codes.str.contains(r"_seg\d\d$") | codes.str.match(r"^ls_seg\d\d$")]
    return [{"code": r.code, "label": r.label, "unit": r.unit, "min": r.plausible_min, "max": r.plausible_max,
             "segmental": bool(str(r.code).startswith("ls_seg"))} for r in m.itertuples()]  # fmt: skip


def _render(request: Request, form: str, target: str, *, values=None, errors=None, status_code=200, done=None,
            user=None):  # fmt: skip
    from tracker.services import entry as SE

    action, kind, title = FORMS[form]
    values = values or {}
    ctx = {"form": form, "target": target, "title": title, "values": values, "errors": errors or {}, "done": done}
    with reading(auth.engine(request)) as conn:
        if form == "relative":
            ctx["family"] = target
            ctx["members"] = _members(conn, target)
            ctx["fields"] = _fields(kind, SE.RELATIVE_FIELDS)
        else:
            ctx["family"] = _person_family(conn, target)
            ctx["members"] = _members(conn, ctx["family"])
            names = {"study": SE.STUDY_FIELDS, "genetic-result": SE.RESULT_FIELDS,
                     "assessment": SE.ASSESSMENT_FIELDS}[form]  # fmt: skip
            ctx["fields"] = _fields(kind, names)
            if form == "study":
                from tracker.domain.vocabulary import MODALITIES

                modality = values.get("modality") or request.query_params.get("modality") or "echo"
                ctx["modality"] = modality if modality in MODALITIES else "echo"
                ctx["modalities"] = MODALITIES
                ctx["measures"] = _measures(conn, ctx["modality"])
                ctx["fields"] = [f for f in ctx["fields"] if f["name"] != "modality"]
            if form == "genetic-result":
                from tracker.services import views as SV

                ctx["variant_keys"] = SV.family_variant_keys(conn, ctx["family"])
    if user is not None:  # the form shows the person and their family's member codes: a read entry
        clinic.audit_read(request, user, family=ctx["family"], person=None if form == "relative" else target,
                          what=f"{title.lower()} form for {target}")  # fmt: skip
    return render(request, "entry.html", ctx, status_code=status_code)


def _form_page(form: str):
    def page(request: Request):
        action = FORMS[form][0]
        user = auth.require_to(request, action)
        return _render(request, form, _code(request), user=user)

    page.__name__ = f"{form.replace('-', '_')}_form"
    return page


def _submit(form: str):
    def submit(request: Request):
        from tracker.services import entry as SE

        action = FORMS[form][0]
        user = auth.require_to(request, action)
        target = _code(request)
        f = clinic.posted(request)
        today = clinic.today(request)
        try:
            with writing(auth.engine(request)) as conn:
                if form == "relative":
                    got = SE.add_relative(conn, target, f, user=user.name, today=today)
                elif form == "study":
                    fields = {k: f.get(k, "") for k in SE.STUDY_FIELDS}
                    values = {k[6:]: v for k, v in f.items() if k.startswith("value.")}
                    units = {k[5:]: v for k, v in f.items() if k.startswith("unit.")}
                    extra = [k for k in f if k not in fields and not k.startswith(("value.", "unit."))]
                    if extra:
                        raise InputRejected([SE.Problem(SE.SOURCE, None, extra[0], "is not a field of this form")])
                    got = SE.record_study(conn, target, fields, values, units, user=user.name, today=today)
                elif form == "genetic-result":
                    got = SE.record_genetic_result(conn, target, f, user=user.name, today=today)
                else:
                    got = SE.record_assessment(conn, target, f, user=user.name, today=today)
        except InputRejected as exc:
            return _render(request, form, target, values=f, errors=field_errors(exc), status_code=400, user=user)
        return RedirectResponse(f"/person/{got.person}?done=entered" if form != "relative"
                                else f"/family/{target}?done=entered", status_code=303)  # fmt: skip

    submit.__name__ = f"{form.replace('-', '_')}_submit"
    return submit


def plausible(request: Request):
    """GET (htmx, as the value is typed): the importer's words for the value, or nothing when it passes."""
    from markupsafe import escape

    from tracker.services import entry as SE
    from tracker.store import repository as repo

    auth.require_to(request, "study")
    measure = request.path_params["measure"][:60]
    value = request.query_params.get(f"value.{measure}", "")[:60]
    unit = request.query_params.get(f"unit.{measure}", "")[:20]
    with reading(auth.engine(request)) as conn:
        message = SE.plausible(repo.load_measures(conn), measure, value, unit or None)
    if not message:
        return HTMLResponse("")
    return HTMLResponse(f'<span class="field-error" role="alert">{escape(message)}</span>')


routes = [
    Route("/entry/plausible/{measure}", plausible, methods=["GET"]),
    *[Route(f"/entry/{form}/{{code}}", _form_page(form), methods=["GET"]) for form in FORMS],
    *[Route(f"/entry/{form}/{{code}}", _submit(form), methods=["POST"]) for form in FORMS],
]
