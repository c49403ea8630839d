"""The kinds of record a CSV file holds, in import order (parents before children).

Kept apart from :mod:`tracker.io.layouts`, which reads the store's column lengths (the table models, hence
SQLAlchemy) when imported, so that the command line can name the kinds without loading the store."""

from __future__ import annotations

# The six kinds of clinical record, then the contact log's (revision 0012): letters before wishes (a letter
# sent before a later wish stays valid), results before discharges (a discharge needs the negative result).
RECORD_KINDS = ("families", "people", "variants", "genetic-results", "assessments", "studies")
CONTACT_IMPORT_ORDER = ("contact-events", "external-results", "discharges", "bookings", "letters-sent",
                        "contact-wishes")  # fmt: skip
IMPORT_ORDER = RECORD_KINDS + CONTACT_IMPORT_ORDER
