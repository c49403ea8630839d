"""`tracker import dicom-sr FILE... [--person CODE]`: echocardiography measurement reports (DICOM SR)."""

from __future__ import annotations

from pathlib import Path

from tracker.cli.common import open_store, print_import_report
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
    print_import_report(summaries, dry_run, json_out, _lines)


def _lines(s: dicom_sr.SrSummary, verb: str) -> list[str]:
    return [
        f"{s.summary.file} ({s.form} echo report, person {s.person}, study {s.study_date}): "
        f"took {len(s.taken)} of {len(s.taken) + len(s.left)} measurements, {verb} {s.summary.rows_added}, "
        f"{s.summary.rows_already_stored} already stored; left {len(s.left)}",
        *(f"  took {label} as {measure}" for label, measure in s.taken),
        *(f"  left {label}: {why}" for label, why in s.left),
    ]
