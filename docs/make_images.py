"""Rebuild the example pictures in docs/images/ from the invented demo families.

Builds the demo database in a temporary folder (``python -m tracker demo``),
writes each document with the command line (``python -m tracker report ...``)
and renders its first page to PNG with :func:`tracker.outputs.letter_pdf.render_png`:

* docs/images/letter-example.png   family letter for HV01-IV-5
* docs/images/pedigree-HV01.png     pedigree of family HV01
* docs/images/worklist-example.png  recall worklist 2026-12-01 to 2027-03-01, 3 slots a week
* docs/images/trajectory-example.png  first page of the trajectory report of HV01-III-1 (as of 2026-12-01;
  the demo's invented assessments record his HCM Risk-SCD answers); the demo gives him
  17-segment strain, so this page shows the polar map beside the charts (the script checks it does)
* docs/images/trajectory-page2-example.png  second page of the same report (tables, notes and sources)
* docs/images/uptake-example.png    second page of the clinic's cascade uptake report up to 2026-12-01
  (the cascade funnel and the time-to-contact and time-to-test curves)

Dates are fixed (letter date and worklist "as of" 2026-12-01) so the pictures
do not change from day to day.  All data are invented.

Run from the repository root:  .venv/bin/python docs/make_images.py
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
IMAGES = ROOT / "docs" / "images"
SETTINGS = ROOT / "demo_family" / "clinic.toml"
ON = "2026-12-01"
WINDOW = ("2026-12-01", "2027-03-01")
TRAJECTORY = "HV01-III-1"  # affected proband: 15 echos, 3 CMRs and 17-segment strain in the demo

# Used only while `tracker report worklist` is not yet registered in tracker/cli/reports.py.
_WORKLIST_FALLBACK = (
    "import sys, typer; from tracker.cli import report_worklist as m; "
    "a = typer.Typer(); r = typer.Typer(); m.register(r); a.add_typer(r, name='report'); "
    "a(sys.argv[1:], prog_name='tracker')"
)


def _run(args: list[str]) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, *args], cwd=ROOT, capture_output=True, text=True)


def _tracker(*args: str) -> None:
    r = _run(["-m", "tracker", *args])
    if r.returncode != 0 and args[:2] == ("report", "worklist") and "No such command" in r.stderr:
        r = _run(["-c", _WORKLIST_FALLBACK, *args])
    if r.returncode != 0:
        raise SystemExit(f"tracker {' '.join(args)} failed:\n{r.stdout}\n{r.stderr}")


def _check_map_on_first_page(pdf: Path) -> None:
    """Stop unless page 1 of the trajectory report holds the polar map (its colour key) and the report has 2 pages."""
    import pypdf

    pages = pypdf.PdfReader(str(pdf)).pages
    if len(pages) != 2 or "peak LS, %" not in (pages[0].extract_text() or ""):
        raise SystemExit(f"{pdf.name}: expected 2 pages with the polar map on page 1 (got {len(pages)} pages)")


def main() -> None:
    sys.path.insert(0, str(ROOT))
    from tracker.outputs.letter_pdf import render_png

    IMAGES.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        db = str(Path(tmp) / "demo.sqlite")
        out = Path(tmp) / "out"
        _tracker("demo", "--db", db)
        _tracker("report", "letter", "HV01-IV-5", "--out", str(out), "--date", ON, "--settings", str(SETTINGS),
                 "--db", db)  # fmt: skip
        _tracker("report", "pedigree", "HV01", "--out", str(out), "--db", db)
        _tracker("report", "worklist", "--from", WINDOW[0], "--to", WINDOW[1], "--slots-per-week", "3",
                 "--as-of", ON, "--out", str(out), "--settings", str(SETTINGS), "--db", db)  # fmt: skip
        _tracker("report", "trajectory", TRAJECTORY, "--out", str(out), "--as-of", ON, "--settings", str(SETTINGS),
                 "--db", db)  # fmt: skip
        _check_map_on_first_page(out / f"trajectory-{TRAJECTORY}.pdf")
        _tracker("report", "uptake", "--to", ON, "--out", str(out), "--settings", str(SETTINGS), "--db", db)
        made = {
            "letter-HV01-IV-5.pdf": "letter-example.png",
            "pedigree-HV01.pdf": "pedigree-HV01.png",
            f"worklist-{WINDOW[0]}-{WINDOW[1]}.pdf": "worklist-example.png",
            f"trajectory-{TRAJECTORY}.pdf": "trajectory-example.png",
        }
        for pdf, png in made.items():
            path = render_png(out / pdf, IMAGES / png, page=0, scale=2.0)
            print(f"wrote {path.relative_to(ROOT)}")
        path = render_png(out / f"trajectory-{TRAJECTORY}.pdf", IMAGES / "trajectory-page2-example.png", page=1,
                          scale=2.0)  # fmt: skip
        print(f"wrote {path.relative_to(ROOT)}")
        path = render_png(out / f"uptake-to-{ON}.pdf", IMAGES / "uptake-example.png", page=1, scale=2.0)
        print(f"wrote {path.relative_to(ROOT)}")


if __name__ == "__main__":
    main()
