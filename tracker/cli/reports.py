"""`tracker report ...`: printable documents (PDF) written to a chosen folder.

File names carry the family or person code only, never a name.
"""

from __future__ import annotations

import typer

report_app = typer.Typer(
    help="Write printable documents (PDF) to a folder. File names carry codes only, never names.\n\n"
    "Example: tracker report pedigree HV01 --out letters/",
    no_args_is_help=True,
)


def register(app: typer.Typer) -> None:
    from tracker.cli import report_letter, report_pedigree, report_trajectory, report_worklist, uptake

    report_letter.register(report_app)
    report_pedigree.register(report_app)
    report_worklist.register(report_app)
    report_trajectory.register(report_app)
    uptake.register_report(report_app)
    app.add_typer(report_app, name="report")
