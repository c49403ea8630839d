"""Command that writes a synthetic cohort of invented families as import CSV files."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from tracker.cli.common import JsonOption, print_json
from tracker.errors import UserError


def synth(
    families: Annotated[int, typer.Option("--families", min=1, help="Number of invented families to make.")] = 30,
    seed: Annotated[int, typer.Option("--seed", help="Random seed: the same seed gives the same files.")] = 1,
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder to write the CSV files into.")] = Path("synth"),
    force: Annotated[bool, typer.Option("--force", help="Overwrite CSV files already in the folder.")] = False,
    json_out: JsonOption = False,
) -> None:
    """Write a synthetic cohort (invented families, no real data) as import CSV files.

    The folder gets families.csv, people.csv, variants.csv, genetic_results.csv,
    assessments.csv and studies.csv (load them with `tracker import all FOLDER`),
    plus synth_truth.csv with the generating truth (carrier status, true wall-thickness
    slopes), which the import ignores. About 9 people, 36 studies and 320 values per
    family.

    Example: tracker synth --families 1000 --seed 7 --out synth1000 && tracker import all synth1000
    """
    from tracker import synth as generator
    from tracker.io.layouts import LAYOUTS, RECORD_KINDS

    names = [LAYOUTS[k].file_name for k in RECORD_KINDS] + [generator.TRUTH_FILE]
    if out.exists() and not out.is_dir():
        raise UserError(f"--out {out} is a file; give a folder")
    present = [n for n in names if (out / n).exists()]
    if present and not force:
        raise UserError(f"--out {out} already holds {', '.join(present)}; use --force to overwrite")
    cohort = generator.generate(families, seed)
    written = generator.write(cohort, out)
    counts = cohort.counts()
    if json_out:
        print_json({"out": str(out), "seed": seed, "counts": counts, "files": written})
        return
    typer.echo(
        f"{out}: {counts['families']} families, {counts['people']} people, {counts['studies']} studies "
        f"with {counts['values']} values (seed {seed}; invented data, no real patients)"
    )
    typer.echo(f"Next: tracker import all {out}")


def register(app: typer.Typer) -> None:
    app.command("synth")(synth)
