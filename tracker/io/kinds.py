"""The kinds of record a CSV file holds, in import order (parents before children).

Kept apart from :mod:`tracker.io.layouts`, which reads the store's column lengths (the table models, hence
SQLAlchemy) when imported, so that the command line can name the kinds without loading the store."""

from __future__ import annotations

IMPORT_ORDER = ("families", "people", "variants", "genetic-results", "assessments", "studies")
