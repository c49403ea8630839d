"""`tracker import dicom-sr FILE... [--person CODE]`: echocardiography measurement reports (DICOM SR)."""

from __future__ import annotations

from pathlib import Path

import typer

from tracker.cli.common import open_store, print_json
from tracker.io import dicom_sr
from tracker.store.database import writing


class _DryRun(Exception):
    """Raised inside the transaction to roll back a dry run."""


def import_dicom_sr(paths: list[Path], *, person: str | None, dry_run: bool, user: str | None, db,
                    json_out: bool) -> None:  # fmt: skip
    """Check every report, then store their values in one transaction (all or nothing)."""
    engine = open_store(db)
    summaries: list[dicom_sr.SrSummary] = []
    try:
        with writing(engine) as conn:
            summaries = dicom_sr.import_reports(conn, paths, person=person, user=user)
            if dry_run:
                raise _DryRun
    except _DryRun:
        pass
    if json_out:
        print_json({"dry_run": dry_run, "files": [s.as_dict() for s in summaries]})
        return
    verb = "would add" if dry_run else "added"
    for s in summaries:
        typer.echo(
            f"{s.summary.file} ({s.form} echo report, person {s.person}, study {s.study_date}): "
            f"took {len(s.taken)} of {len(s.taken) + len(s.left)} measurements, {verb} {s.summary.rows_added}, "
            f"{s.summary.rows_already_stored} already stored; left {len(s.left)}"
        )
        for label, measure in s.taken:
            typer.echo(f"  took {label} as {measure}")
        for label, why in s.left:
            typer.echo(f"  left {label}: {why}")
    if dry_run:
        typer.echo("dry run: nothing was written")
