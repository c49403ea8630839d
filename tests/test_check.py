"""`tracker check`: the finding about at-risk relatives with no recall."""

from __future__ import annotations

import json


def test_check_lists_an_at_risk_relative_with_no_recall(loaded_db, run):
    assert run("check", db=loaded_db).code == 0
    # T1-07 (FAM-T1, untested daughter of the affected proband) loses the date of birth: no age rule applies.
    r = run("edit", "person", "T1-07", "--set", "birth_date=", "--reason", "date of birth queried", db=loaded_db)
    assert r.code == 0, r
    r = run("check", "--json", db=loaded_db)
    assert r.code == 1
    findings = json.loads(r.out)["findings"]
    recall = [f for f in findings if f["check"] == "recall"]
    assert [f["where"] for f in recall] == ["person T1-07"]
    assert "no date of birth" in recall[0]["message"]


def test_declined_or_placeholder_relatives_are_not_listed(loaded_db, run):
    # T1-08 declined contact: clearing the date of birth is no recall gap (never recalled on purpose).
    assert run("edit", "person", "T1-08", "--set", "birth_date=", "--reason", "r", db=loaded_db).code == 0
    r = run("check", "--json", db=loaded_db)
    assert r.code == 0, r.out
