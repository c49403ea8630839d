"""The contact log's six layouts in `tracker import all` / `tracker export all` and in the research extract.

Invented people of tests/data/mini (FAM-T1, FAM-T2), invented centres and notes.
"""

from __future__ import annotations

import json
import shutil

from conftest import MINI, dump
from test_contacts import _fill
from test_pseudonymise import _extract, _rows

CONTACT_FILES = ("contact_events.csv", "contact_wishes.csv", "letters_sent.csv", "external_results.csv",
                 "bookings.csv", "discharges.csv")  # fmt: skip


def test_export_all_and_import_all_carry_the_contact_log(loaded_db, run, tmp_path):
    _fill(loaded_db, run, tmp_path / "letters")
    first = tmp_path / "first"
    r = run("export", "all", "--out", first, "--json", db=loaded_db)
    assert r.code == 0, r
    rows = json.loads(r.out)["rows"]
    for kind in ("contact-events", "contact-wishes", "letters-sent", "external-results", "bookings", "discharges"):
        assert rows[kind] >= 1, kind
    assert all((first / f).exists() for f in CONTACT_FILES)
    # A new store: `import all` of the folder gives identical files back.
    other = str(tmp_path / "other.sqlite")
    assert run("init", db=other).code == 0
    r = run("import", "all", first, "--json", db=other)
    assert r.code == 0, r
    second = tmp_path / "second"
    assert run("export", "all", "--out", second, db=other).code == 0
    assert sorted(p.name for p in first.iterdir()) == sorted(p.name for p in second.iterdir())
    for f in sorted(first.iterdir()):
        assert f.read_text() == (second / f.name).read_text(), f.name
    # The derived state came across too (the contact-later day of T1-07, the discharge).
    st = json.loads(run("contact", "list", "T1-07", "--json", db=other).out)
    assert st["contact_later_on"] == "2027-02-01"
    # Importing the same folder again adds nothing and writes no contact row twice.
    before = dump(other)
    r = run("import", "all", first, "--json", db=other)
    assert r.code == 0, r
    out = json.loads(r.out)
    added = {d["kind"]: d["rows_added"] for d in (out if isinstance(out, list) else out["files"])}
    assert all(v == 0 for v in added.values()), added
    after = dump(other)
    for table in ("contact_event", "contact_wish", "letter_sent", "external_result", "booking", "discharge"):
        assert after[table] == before[table], table


def test_import_all_refuses_a_bad_contact_row_and_writes_nothing(db_url, run, tmp_path):
    folder = tmp_path / "in"
    shutil.copytree(MINI, folder)
    (folder / "contact_events.csv").write_text(
        "person,event_date,channel,by_role,via,outcome,later_date,notes\n"
        "T1-07,2026-10-01,phone,nurse,,informed,,\n"
        "T1-07,2026-10-02,via_family,,T2-01,informed,,\n")  # fmt: skip
    assert run("init", db=db_url).code == 0
    before = dump(db_url)
    r = run("import", "all", folder, db=db_url)
    assert r.code == 1, r
    lines = r.err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: contact_events.csv:3: column 'via'"), r.err
    assert "another family" in lines[0]
    assert dump(db_url) == before  # not even the people of the same folder


def test_pseudonymised_extract_has_the_contact_log_without_free_text(loaded_db, run, tmp_path):
    _fill(loaded_db, run, tmp_path / "letters")
    r, out = _extract(run, loaded_db, tmp_path)
    assert r.code == 0, r
    events = _rows(out, "contact_events.csv")
    assert events and set(events[0]) == {"person", "age_at_contact", "channel", "by_role", "via", "outcome",
                                         "age_at_contact_asked_for"}  # fmt: skip
    assert all(e["person"].startswith("P-") for e in events)
    assert any(e["via"].startswith("P-") for e in events)
    assert set(_rows(out, "external_results.csv")[0]) == {"person", "kind", "age_at_external_result", "variant",
                                                          "result"}  # fmt: skip
    assert set(_rows(out, "discharges.csv")[0]) == {"person", "age_at_discharge", "variant", "acmg_class",
                                                    "age_at_class_relied_on"}  # fmt: skip
    text = "".join(p.read_text(encoding="utf-8") for p in out.iterdir())
    for free in ("starts like a formula", "Invented Centre", "INV-1", "see a doctor", "annual review", "T1-07",
                 "T1-04"):
        assert free not in text, free
    shifted, sout = _extract(run, loaded_db, tmp_path, "--dates", "shift", name="shifted")
    assert shifted.code == 0, shifted
    assert "2026-10-08" not in (sout / "contact_events.csv").read_text()
