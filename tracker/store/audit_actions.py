"""The kinds of action the audit trail records (``audit_entry.action``).

Apart from :mod:`tracker.store.audit` (which loads the table models, hence SQLAlchemy), so that the
command line can list them in its help without loading the store."""

from __future__ import annotations

ACTIONS = ("import", "edit", "remove", "reinstate", "reclassify", "task_done", "restore",
           # The web interface (tracker/services/accounts.py): who read which family or person's records,
           # sign-ins (accepted and refused), sign-outs and changes to accounts.
           "read", "sign_in", "sign_in_refused", "sign_out", "account",
           # The web forms (tracker/services/entry.py): a record entered by form.
           "entry",
           # The contact log (tracker/services/contacts.py): a new record of the log.
           "record")  # fmt: skip
