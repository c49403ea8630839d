"""`tracker report pedigree`: the pedigree of one family as a PDF."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from tracker.cli.common import DbOption, JsonOption, open_store, print_json
from tracker.outfiles import output_path
from tracker.errors import UserError
from tracker.store.database import reading


def pedigree_(
    family: Annotated[str, typer.Argument(help="Family code, e.g. HV01.")],
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder to write pedigree-FAMILY.pdf into.")],
    names: Annotated[
        bool, typer.Option("--names", help="Print names under the symbols instead of person codes (default: codes).")
    ] = False,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Draw the pedigree of one family (A4 landscape PDF, standard pedigree nomenclature).

    The file is OUT/pedigree-FAMILY.pdf; its name carries the family code only.
    Symbols show affection (latest assessment), genetic test results and carrier
    marks; person codes are printed, names only with --names.

    Example: tracker report pedigree HV01 --out letters/
    """
    from tracker.outputs.pedigree_drawing import write_pedigree_pdf
    from tracker.services import documents as SD

    engine = open_store(db)
    with reading(engine) as conn:
        frames = SD.pedigree(conn, family)
    people, results, assessments, variants = frames["people"], frames["results"], frames["assessments"], frames["variants"]
    if not (people["family"] == family).any():
        raise UserError(f"family {family} has no members recorded: nothing to draw")
    if out.exists() and not out.is_dir():
        raise UserError(f"--out {out} is a file; give a folder")
    out.mkdir(parents=True, exist_ok=True)
    path = out / f"pedigree-{family}.pdf"
    with output_path(path) as tmp:
        drawing = write_pedigree_pdf(tmp, family, people, results, assessments, variants, names=names)
    if json_out:
        print_json(
            {"file": str(path), "family": family, "members": drawing.members, "warnings": list(drawing.warnings)}
        )
        return
    typer.echo(str(path))
    for w in drawing.warnings:
        typer.echo(f"warning: {w}", err=True)


def register(report_app: typer.Typer) -> None:
    """Add this module's command to `tracker report`."""
    report_app.command("pedigree")(pedigree_)
