"""What each role may do: the one table the web interface consults (denied unless listed).

Everyone signed in may read.  Each write action names the roles allowed to do it.
"""

from __future__ import annotations

from tracker.store.models import ROLES

ALLOWED: dict[str, frozenset[str]] = {
    "contact": frozenset({"nurse", "counsellor"}),  # record a contact attempt with a relative
    "booking": frozenset({"nurse"}),  # book a visit or cancel a booking
    "wish": frozenset({"counsellor"}),  # record or end a relative's wish about contact
    "letter_reply": frozenset({"nurse", "counsellor"}),  # record the reply to a letter sent
    "external_result": frozenset({"counsellor"}),  # record a result from another centre
    "discharge": frozenset({"counsellor"}),  # discharge a variant-negative relative from screening
    "pedigree": frozenset({"counsellor"}),  # edit people and their links
    "genetics": frozenset({"counsellor"}),  # genetic results
    "variant_class": frozenset({"counsellor"}),  # variant classifications
    "letter": frozenset({"counsellor"}),  # family letters, and recording one as sent
    "study": frozenset({"cardiologist"}),  # imaging studies and their measurements
    "assessment": frozenset({"cardiologist"}),  # clinical assessments
    "accounts": frozenset({"admin"}),  # add, disable, reset accounts; read the audit trail
    "import": frozenset({"admin"}),  # import files
}

ACTION_WORDS = {
    "contact": "record contacts",
    "booking": "book or cancel visits",
    "wish": "record wishes about contact",
    "letter_reply": "record replies to letters",
    "external_result": "record results from other centres",
    "discharge": "record discharges",
    "pedigree": "edit the pedigree",
    "genetics": "record genetic results",
    "variant_class": "record variant classifications",
    "letter": "write letters",
    "study": "record studies",
    "assessment": "record assessments",
    "accounts": "manage accounts",
    "import": "import files",
}

assert all(set(roles) <= set(ROLES) for roles in ALLOWED.values())
assert set(ACTION_WORDS) == set(ALLOWED)


def can(user, action: str) -> bool:
    """Whether ``user`` (with a ``.role``) may do ``action``; unknown actions and no user: no."""
    if user is None:
        return False
    return getattr(user, "role", None) in ALLOWED.get(action, frozenset())


def roles_for(action: str) -> list[str]:
    return sorted(ALLOWED.get(action, ()))
