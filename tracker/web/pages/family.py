"""One family (``/family/{code}``): the pedigree (each symbol opens the person), the members with
genotype, phenotype, contact state and next due date, the variant with its class history, the
cascade plan and its gaps; for the counsellor, family letters (a PDF download) and a variant
reclassification that shows its impact before it is written.

Everything shown comes from :mod:`tracker.services.views` (the services the command line uses);
each view is a read entry in the audit trail.
"""

from __future__ import annotations

import datetime as dt

from starlette.requests import Request
from starlette.responses import Response
from starlette.routing import Route

from tracker.errors import UserError
from tracker.store.database import reading, writing
from tracker.web import auth, clinic
from tracker.web.templating import render

CODE_MAX = 40


def _code(request: Request) -> str:
    code = request.path_params["code"]
    if not code or len(code) > CODE_MAX:
        raise UserError("no such family")
    return code


def _view(request: Request, family: str) -> dict:
    from tracker.services import views as SV

    from starlette.exceptions import HTTPException

    conf, rule_set, policy = clinic.rules(request)
    with reading(auth.engine(request)) as conn:
        if not SV.family_members(conn, family):
            raise HTTPException(404)
        return SV.family_view(conn, family, clinic.today(request), conf, rule_set, policy)


def _page(request: Request, user, family: str, extra: dict | None = None, status_code: int = 200):
    from tracker.domain.vocabulary import ACMG_CLASSES
    from tracker.outputs.letter import KIND_WORDS, LETTER_KINDS
    from markupsafe import Markup

    data = _view(request, family)
    clinic.audit_read(request, user, family=family,
                      what=f"family page {family}: {len(data['members'])} members")  # fmt: skip
    ctx = {"d": data, "svg": Markup(data["svg"]), "acmg_classes": ACMG_CLASSES, "letter_kinds": LETTER_KINDS,
           "kind_words": KIND_WORDS, "errors": {}, "values": {}, "impact": None,
           "today": clinic.today(request).isoformat()}  # fmt: skip
    ctx.update(extra or {})
    return render(request, "family.html", ctx, status_code=status_code)


def family_page(request: Request):
    user = auth.current_user(request)
    done = request.query_params.get("done", "")
    notice = {"entered": "The relative was added; the entry is in the audit trail."}.get(done)
    return _page(request, user, _code(request), {"notice": notice})


def letter(request: Request):
    """POST: the family letter to one member, as a PDF download (counsellor)."""
    from tracker.services import views as SV

    user = auth.require_to(request, "letter")
    family = _code(request)
    f = clinic.posted(request)
    person = f.get("person", "").strip()
    kind = f.get("kind", "").strip() or None
    conf, rule_set, policy = clinic.rules(request)
    with reading(auth.engine(request)) as conn:
        people = SV.family_members(conn, family)
        if person not in people:
            errors = {"person": [f"choose a member of family {family}"]}
            return _page(request, user, family, {"errors": errors, "values": f}, status_code=400)
        try:
            name, pdf = SV.letter_pdf(conn, person, clinic.today(request), conf, rule_set.id, kind)
        except UserError as exc:
            return _page(request, user, family, {"errors": {"letter": [str(exc)]}, "values": f}, status_code=400)
    clinic.audit_read(request, user, family=family, person=person, what=f"family letter made for {person} (PDF)")
    return Response(pdf, media_type="application/pdf",
                    headers={"Content-Disposition": f'attachment; filename="{name}"'})  # fmt: skip


def letter_sent(request: Request):
    """POST: record the family letter to one member as sent (counsellor).  Making the PDF records nothing;
    this form does, through the contacts service: the kind chosen from where the person stands on the day
    (as ``tracker report letter --sent``), to the person or through a family member (``via``)."""
    from tracker.io.reading import InputRejected
    from tracker.services import contact_view as CV
    from tracker.services import views as SV
    from tracker.web.templating import field_errors

    user = auth.require_to(request, "letter")
    family = _code(request)
    f = clinic.posted(request)
    person = f.get("person", "").strip()
    via = f.get("via", "").strip() or None
    fields = ("person", "on", "via")
    values = {f"sent_{k}": f.get(k, "") for k in fields}
    with reading(auth.engine(request)) as conn:
        people = SV.family_members(conn, family)
    if person not in people:
        errors = {"sent_person": [f"choose a member of family {family}"]}
        return _page(request, user, family, {"errors": errors, "values": values}, status_code=400)
    from tracker.domain.dates import parse_date

    try:
        on = parse_date(f.get("on", "").strip())
    except ValueError as exc:
        return _page(request, user, family, {"errors": {"sent_on": [str(exc)]}, "values": values}, status_code=400)
    conf, rule_set, _policy = clinic.rules(request)
    try:
        with writing(auth.engine(request)) as conn:
            done = CV.record_letter_as_sent(conn, person, on=on, conf=conf, gid=rule_set.id, via=via, user=user.name,
                                            today=clinic.today(request))  # fmt: skip
    except InputRejected as exc:
        errors = {("sent_" + k if k else "sent_"): v for k, v in field_errors(exc, fields).items()}
        return _page(request, user, family, {"errors": errors, "values": values}, status_code=400)
    notice = (f"The {done['kind_words']} letter to {person} was recorded as sent on {done['sent_date']}"
              + (f" through {done['via']}" if done.get("via") else "") + "; the entry is in the audit trail.")
    return _page(request, user, family, {"notice": notice, "sent": done})


def _reclass_form(f: dict, today: dt.date) -> tuple[dict, dict]:
    from tracker.domain.dates import parse_date
    from tracker.domain.vocabulary import ACMG_CLASSES

    errors: dict[str, list[str]] = {}
    new_class = f.get("new_class", "").strip()
    if new_class not in ACMG_CLASSES:
        errors["new_class"] = [f"choose one of: {', '.join(ACMG_CLASSES)}"]
    on = None
    try:
        on = parse_date(f.get("date", "").strip())
        if on > today:
            errors["date"] = ["is in the future"]
    except ValueError as exc:
        errors["date"] = [str(exc)]
    reason = " ".join(f.get("reason", "").split())
    if not reason:
        errors["reason"] = ["give the reason for the new class (it is kept with the class history)"]
    elif len(reason) > 500:
        errors["reason"] = ["at most 500 characters"]
    return {"new_class": new_class, "on": on, "reason": reason, "variant": f.get("variant", "").strip()}, errors


def reclassify(request: Request):
    """POST: the impact of a new class (no ``confirm``), or, with ``confirm=yes``, the checked write (counsellor)."""
    from tracker.services import reclassification as RC
    from tracker.services import views as SV

    user = auth.require_to(request, "variant_class")
    family = _code(request)
    f = clinic.posted(request)
    values, errors = _reclass_form(f, clinic.today(request))
    if errors:
        return _page(request, user, family, {"errors": errors, "values": f}, status_code=400)
    conf, rule_set, policy = clinic.rules(request)
    target = values["variant"] or family
    if ":" in target:
        with reading(auth.engine(request)) as conn:
            if target not in SV.family_variant_keys(conn, family):
                return _page(request, user, family, {"errors": {"variant": ["not a variant of this family"]},
                                                     "values": f}, status_code=400)  # fmt: skip
    try:
        with reading(auth.engine(request)) as conn:
            plan, impact = SV.reclassification_impact(conn, target, values["new_class"], values["on"],
                                                      values["reason"], rule_set, policy, conf)  # fmt: skip
        if f.get("confirm") != "yes":
            return _page(request, user, family, {"impact": impact, "values": f})
        with writing(auth.engine(request)) as conn:
            written = RC.write(conn, plan, user.name)
    except UserError as exc:
        return _page(request, user, family, {"errors": {"reclassify": [str(exc)]}, "values": f}, status_code=400)
    return _page(request, user, family, {"written": written})


routes = [
    Route("/family/{code}", family_page, methods=["GET"]),
    Route("/family/{code}/letter", letter, methods=["POST"]),
    Route("/family/{code}/reclassify", reclassify, methods=["POST"]),
    Route("/family/{code}/letter-sent", letter_sent, methods=["POST"]),
]
