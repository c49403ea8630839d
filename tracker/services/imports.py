"""Importing one CSV layout file, checked completely and then stored in one transaction (or only
checked: a dry run), as ``tracker import KIND FILE`` does; used by the web interface's import page."""

from __future__ import annotations

from pathlib import Path

from sqlalchemy import Engine

from tracker.store.database import writing


class _DryRun(Exception):
    """Raised inside the transaction to roll back a dry run."""


def import_path(engine: Engine, kind: str, path: Path, *, user: str | None, dry_run: bool, progress=None) -> list:
    """Check ``path`` and store it in one transaction (all or nothing); with ``dry_run`` write nothing.

    ``kind`` is a layout (one CSV file), ``all`` (a folder of layout files) or ``fhir`` (a FHIR
    Bundle).  Returns the :class:`tracker.io.csv_import.ImportSummary` list; a refused file raises
    :class:`tracker.io.reading.InputRejected` listing every problem by row and column.
    Shared by ``tracker import`` and the web interface's import page.
    """
    from tracker.io import csv_import

    summaries: list = []
    try:
        with writing(engine) as conn:
            if kind == "fhir":
                from tracker.io import fhir_import

                summaries = fhir_import.import_bundle(conn, path, user=user)
            elif kind == "all":
                summaries = csv_import.import_folder(conn, path, user=user, progress=progress)
            else:
                summaries = [csv_import.import_file(conn, kind, path, user=user, progress=progress)]
            if dry_run:
                raise _DryRun
    except _DryRun:
        pass
    return summaries


def import_csv(engine: Engine, kind: str, path: Path, *, user: str, dry_run: bool) -> list:
    """One CSV layout file (:func:`import_path` with a layout ``kind``)."""
    return import_path(engine, kind, path, user=user, dry_run=dry_run)
