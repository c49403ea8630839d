"""`tracker export --phenopacket FAMILY` and `tracker export --ped FAMILY`: one family in a genetics file format.

The mapping lives in :mod:`tracker.outputs.family_files` (pure); this module loads the frames,
pseudonymises codes on request and writes the file through :mod:`tracker.outfiles`.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from sqlalchemy import Connection

from tracker.errors import UserError
from tracker.io import pseudonymise
from tracker.outfiles import check_output, write_output
from tracker.outputs import family_files
from tracker.store import repository as repo


def _renamer(key: str | None):
    if key is None:
        return None
    kb = pseudonymise.key_bytes(key)
    make = {"family": pseudonymise.family_code, "person": pseudonymise.person_code}
    return lambda kind, code: make[kind](kb, code)


def export_family_file(conn: Connection, fmt: str, family: str, out_path: Path, *, key: str | None = None,
                       force: bool = False, created: dt.datetime | None = None) -> dict:  # fmt: skip
    """Write ``family`` as ``fmt`` ("phenopacket" or "ped") to ``out_path``; returns a summary.

    ``key``: the pseudonym key; family and person codes are then keyed-hash codes (as in a
    pseudonymised extract).  Raises UserError for an unknown family, a family that cannot be
    written in the format, or an output path that cannot be written (nothing is written then).
    """
    out_path = Path(out_path)
    check_output(out_path, force=force)
    families = repo.load_families(conn)
    if family not in set(families["family"]):
        raise UserError(f"family {family} is not in the database")
    people = repo.load_people(conn)
    assessments = repo.load_assessments(conn)
    rename = _renamer(key)
    try:
        if fmt == "ped":
            text = family_files.ped_text(family, people, assessments, rename=rename)
        else:
            data = family_files.family_phenopacket(
                family, people, repo.load_variants(conn), repo.load_genetic_results(conn), assessments,
                created=created or dt.datetime.now(dt.timezone.utc), rename=rename,
            )
            family_files.validate_phenopacket(data)
            text = family_files.phenopacket_json(data)
    except ValueError as exc:
        raise UserError(f"family {family}: {exc}") from exc
    write_output(out_path, text, force=force, newline="\n")
    members = int((people["family"] == family).sum())
    return {"family": family, "out": str(out_path), "format": fmt, "members": members,
            "pseudonymised": key is not None}  # fmt: skip
