"""The printable recall worklist (tracker report worklist) on the invented demo families.

Checks: the PDF opens with pypdf, carries the same people and due dates as
`tracker worklist --json` (the same computation), the clinic name from the
settings file, the caution on every page and page numbers; no given name from
the demo people file appears; the first page renders to PNG.
"""

from __future__ import annotations

import csv
import datetime as dt
import json
import re
from pathlib import Path

import pypdf
import pytest
import typer
from typer.testing import CliRunner

from tracker.cli import report_worklist
from tracker.outputs import worklist_pdf as W
from tracker.outputs.letter_pdf import render_png

ROOT = Path(__file__).resolve().parents[1]
SETTINGS = ROOT / "demo_family" / "clinic.toml"
PEOPLE = ROOT / "demo_family" / "people.csv"
WINDOW = ("2026-12-01", "2027-03-01")
AS_OF = "2026-12-02"


def _app() -> typer.Typer:
    app, report = typer.Typer(), typer.Typer()
    report_worklist.register(report)
    app.add_typer(report, name="report")
    return app


def _flat(text: str) -> str:
    return re.sub(r"\s+", " ", text)


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from tracker.cli.app import main

    folder = tmp_path_factory.mktemp("wl")
    db = str(folder / "demo.sqlite")
    assert main(["demo", "--db", db]) == 0
    return folder, db


@pytest.fixture(scope="module")
def made(demo):
    folder, db = demo
    out = folder / "out"
    r = CliRunner().invoke(
        _app(),
        ["report", "worklist", "--from", WINDOW[0], "--to", WINDOW[1], "--out", str(out), "--slots-per-week", "3",
         "--as-of", AS_OF, "--settings", str(SETTINGS), "--db", db, "--json"],
    )  # fmt: skip
    assert r.exit_code == 0, (r.output, r.exception)
    info = json.loads(r.output)
    path = Path(info["file"])
    reader = pypdf.PdfReader(str(path))
    pages = [p.extract_text() or "" for p in reader.pages]
    return info, path, pages


def _expected_rows(run, db) -> dict:
    r = run("worklist", "--from", WINDOW[0], "--to", WINDOW[1], "--as-of", AS_OF, "--slots-per-week", "3",
            "--settings", SETTINGS, "--json", db=db)  # fmt: skip
    assert r.code == 0, r
    return json.loads(r.out)


def test_file_name_carries_the_window_only(made):
    _, path, _ = made
    assert path.name == "worklist-2026-12-01-2027-03-01.pdf"
    assert W.file_name(dt.date(2026, 12, 1), dt.date(2027, 3, 1)) == path.name


def test_pdf_holds_the_same_people_and_due_dates_as_the_worklist_command(made, demo, run):
    info, _, pages = made
    text = _flat(" ".join(pages))
    expected = _expected_rows(run, demo[1])
    assert expected["due"], "the demo should have someone due in the window"
    assert info["screening"] == [r["person"] for r in expected["due"]]
    assert info["affected"] == [r["person"] for r in expected["affected"]]
    for r in expected["due"] + expected["affected"]:
        assert r["person"] in text
        assert r["due"] in text
    for r in expected["due"]:
        assert r["booked_week"] in text
    # a known due person of the demo, checked by hand against `tracker worklist`
    first = next(r for r in expected["due"] if not r["never_screened"])
    assert re.search(rf"{re.escape(first['person'])} {first['due']} {first['days_overdue']}\b", text)
    # a never-screened person is said plainly, not as thousands of days overdue
    never = next(r for r in expected["due"] + expected["contact_gaps"] if r["never_screened"])
    assert f"{never['person']} " in text and f"eligible since {never['eligible_since']}" in text


def test_pdf_lists_the_contact_gaps_and_the_flags(made, demo, run):
    """Declined, lost to follow-up and never-contacted people are printed in their own section, with flags."""
    info, _, pages = made
    text = _flat(" ".join(pages))
    expected = _expected_rows(run, demo[1])
    gaps = expected["contact_gaps"]
    assert {g["contact_status"] for g in gaps} == {"not_contacted", "lost_to_follow_up", "declined"}
    assert [g["person"] for g in info["contact_gaps"]] == [g["person"] for g in gaps]
    section = text[text.index("Contact gaps"):]
    for g in gaps:
        assert g["person"] in section
    for words in ("not contacted", "lost to follow-up", "declined", "never screened"):
        assert words in section
    assert "Flags" in text and "rule from memory: verify" in text
    # nobody who cannot be reached is on the screening list, and nobody is listed twice
    booked = set(info["screening"])
    assert not booked & {g["person"] for g in gaps} and len(info["screening"]) == len(booked)


def test_header_and_caution_on_every_page(made):
    _, _, pages = made
    whole = _flat(" ".join(pages))
    assert "Ambersett Inherited Cardiac Conditions Clinic" in whole
    assert "2026-12-01 to 2027-03-01" in whole
    assert "2023 ESC Guidelines" in whole and "shortest" in whole
    for n, page in enumerate(pages, start=1):
        flat = _flat(page)
        assert "Decision support only" in flat
        assert "the treating clinician decides" in flat
        assert "local protocols and the current guideline" in flat
        assert f"page {n} of {len(pages)}" in flat


def test_no_given_name_appears(made):
    _, path, pages = made
    text = " ".join(pages)
    with PEOPLE.open(encoding="utf-8") as f:
        given = {row["given_name"].strip() for row in csv.DictReader(f) if row["given_name"].strip()}
    assert given
    found = [g for g in given if re.search(rf"\b{re.escape(g)}\b", text)]
    assert not found, found
    meta = " ".join(str(v) for v in (pypdf.PdfReader(str(path)).metadata or {}).values())
    assert not [g for g in given if re.search(rf"\b{re.escape(g)}\b", meta)]


def test_renders_to_png(made, tmp_path):
    _, path, _ = made
    png = render_png(path, tmp_path / "worklist.png")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_overdue_text():
    assert W.overdue_text(12) == "12"
    assert W.overdue_text(0) == "0"
    assert W.overdue_text(-64) == "due in 64 d"
    assert W.overdue_text(None) == ""


def test_to_before_from_is_refused(demo):
    folder, db = demo
    r = CliRunner().invoke(
        _app(), ["report", "worklist", "--from", "2027-03-01", "--to", "2026-12-01", "--out", str(folder / "x"),
                 "--settings", str(SETTINGS), "--db", db],
    )  # fmt: skip
    assert r.exit_code != 0
    assert not (folder / "x").exists()
