"""`tracker export-fhir FAMILY --out FILE`: one family as an HL7 FHIR R4B Bundle (JSON).

The mapping lives in :mod:`tracker.outputs.fhir` (pure); this module loads the frames,
writes the file and reports what was written.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from tracker.cli.common import DbOption, JsonOption, open_store, print_json
from tracker.errors import UserError
from tracker.outfiles import check_output, write_output
from tracker.store.database import reading

if TYPE_CHECKING:  # SQLAlchemy is imported where used, so `tracker --help` does not load it
    from sqlalchemy import Connection


def _write_atomic(path: Path, text: str, force: bool = True) -> None:
    """Write ``text`` to ``path`` through a private temporary file in the same folder (no half-written file)."""
    write_output(path, text, force=force, newline="\n")


def export_fhir(
    conn: Connection,
    family: str,
    out_path: Path,
    *,
    include_names: bool = False,
    claim_profiles: bool = False,
    force: bool = True,
) -> dict:
    """Write ``family`` as a FHIR R4B collection Bundle (JSON) to ``out_path``; returns a summary.

    The summary holds the family, the file, the number of entries per resource type, the
    genetic results left out (with the reason) and whether names were included.  Raises
    :class:`~tracker.errors.UserError` for an unknown family, a folder as ``out_path`` or a
    pedigree that cannot be built.
    """
    from tracker.outputs import fhir
    from tracker.store import repository as repo

    out_path = Path(out_path)
    if out_path.is_dir():
        raise UserError(f"--out {out_path} is a folder; give a file name")
    if not out_path.parent.exists() and str(out_path.parent):
        raise UserError(f"--out {out_path}: folder {out_path.parent} does not exist")
    check_output(out_path, force=force)
    families = repo.load_families(conn)
    if family not in set(families["family"]):
        raise UserError(f"family {family} is not in the database")
    people = repo.load_people(conn)
    results = repo.load_genetic_results(conn)
    try:
        bundle = fhir.build_family_bundle(
            family,
            families,
            people,
            repo.load_variants(conn),
            results,
            repo.load_assessments(conn),
            repo.load_studies(conn, entered=False),
            repo.load_measures(conn),
            include_names=include_names,
            claim_profiles=claim_profiles,
        )
    except ValueError as exc:  # PedigreeError is a ValueError
        raise UserError(f"family {family}: {exc}") from exc
    _write_atomic(out_path, fhir.bundle_json(bundle), force)
    codes = set(people.loc[people["family"] == family, "person"])
    return {
        "family": family,
        "out": str(out_path),
        "fhir_version": "R4B",
        "bundle_type": "collection",
        "entries": len(bundle.entry or []),
        "resources": fhir.resource_counts(bundle),
        "not_exported": fhir.unexported_results(results[results["person"].isin(codes)]),
        "names_included": include_names,
        "profiles_claimed": claim_profiles,
        "profiles": fhir.claimed_profiles(bundle),
    }


def export_fhir_command(
    family: Annotated[str, typer.Argument(help="Family code, e.g. HV01.")],
    out: Annotated[Path, typer.Option("--out", "-o", help="JSON file to write (replaced if it exists).")],
    include_names: Annotated[
        bool, typer.Option("--include-names", help="Put given and family names in the file (default: codes only).")
    ] = False,
    claim_profiles: Annotated[
        bool,
        typer.Option(
            "--claim-profiles",
            help="Set meta.profile to the Genomics Reporting IG variant and diagnostic-implication "
            "profiles (not checked with the HL7 validator).",
        ),
    ] = False,
    db: DbOption = None,
    json_out: JsonOption = False,
    force: bool = True,
) -> None:
    """Write one family as an HL7 FHIR R4B Bundle (JSON): Patients, family history, measurements, genetics.

    People are identified by their codes; names only with --include-names. Re-exporting gives
    the same resource ids. Decision support only: variant classes are as recorded here; confirm
    against the current laboratory report.

    Example: tracker export-fhir HV01 --out HV01.fhir.json
    """
    engine = open_store(db)
    with reading(engine) as conn:
        summary = export_fhir(conn, family, out, include_names=include_names, claim_profiles=claim_profiles,
                              force=force)  # fmt: skip
    if json_out:
        print_json(summary)
        return
    typer.echo(f"{summary['out']}: FHIR R4B collection Bundle of family {family}, {summary['entries']} entries")
    for kind, n in summary["resources"].items():
        typer.echo(f"  {kind}: {n}")
    for item in summary["not_exported"]:
        typer.echo(f"  not exported: {item['person']} {item['test_date']} ({item['reason']})")
    for kind, urls in summary["profiles"].items():
        typer.echo(f"  {kind} claims {', '.join(urls)} (not checked with the HL7 validator)")
    if not summary["profiles"]:
        typer.echo("  no resource claims a profile (--claim-profiles claims the Genomics Reporting IG ones)")
    if include_names:
        typer.echo("  names included: keep this file as confidential as the clinical record")
