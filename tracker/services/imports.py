"""Importing one CSV layout file, checked completely and then stored in one transaction (or only
checked: a dry run), as ``tracker import KIND FILE`` does; used by the web interface's import page."""

from __future__ import annotations

from pathlib import Path

from sqlalchemy import Engine

from tracker.store.database import writing


class _DryRun(Exception):
    """Raised inside the transaction to roll back a dry run."""


def import_csv(engine: Engine, kind: str, path: Path, *, user: str, dry_run: bool) -> list:
    """Check ``path`` as layout ``kind`` and store it (all or nothing); with ``dry_run`` write nothing.

    Returns the :class:`tracker.io.csv_import.ImportSummary` list; a refused file raises
    :class:`tracker.io.reading.InputRejected` listing every problem by row and column.
    """
    from tracker.io import csv_import

    summaries: list = []
    try:
        with writing(engine) as conn:
            summaries = [csv_import.import_file(conn, kind, path, user=user)]
            if dry_run:
                raise _DryRun
    except _DryRun:
        pass
    return summaries
