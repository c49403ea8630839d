"""A discharged variant-negative relative and a later downgrade of the variant (revision 0012).

Invented family FAM-T1 of tests/data/mini: T1-05 tested non-carrier (2019-03-01) for
NM_000256.3:c.1504C>T, likely pathogenic since 2018-06-15; discharged on 2026-06-01; the variant is
then downgraded to a VUS on 2026-11-30.
"""

from __future__ import annotations

import json

VARIANT = "NM_000256.3:c.1504C>T"


def _json(run, db, *args):
    r = run(*args, "--json", db=db)
    assert r.code == 0, r
    return json.loads(r.out)


def _items_for(doc, person):
    return [i for rc in doc["reclassifications"] for i in rc["items"] if i["person"] == person]


def test_discharge_is_shown_and_a_downgrade_recalls_it(loaded_db, run):
    r = run("discharge", "T1-05", "--date", "2026-06-01", "--advice", "come back with symptoms or if the variant "
            "is reclassified", db=loaded_db)  # fmt: skip
    assert r.code == 0, r
    # While the class holds: shown as discharged, not as a gap.
    cas = _json(run, loaded_db, "cascade", "FAM-T1", "--as-of", "2026-11-01")
    released = {i["person"]: i for i in cas["released"]}
    assert released["T1-05"]["discharge"]["discharged_on"] == "2026-06-01"
    assert released["T1-05"]["discharge"]["relied_class"] == "likely_pathogenic"
    assert released["T1-05"]["discharge"]["holds"] is True
    assert "T1-05" not in {g["person"] for g in cas["gaps"]}
    before = _json(run, loaded_db, "recall", "T1-05", "--as-of", "2026-11-01")
    assert before["discharge"]["holds"] is True
    # Before the discharge day it is not shown.
    early = _json(run, loaded_db, "recall", "T1-05", "--as-of", "2026-05-01")
    assert "discharge" not in early
    # The dry run lists the discharge and the class it relied on, and writes nothing.
    args = ("reclassify", "FAM-T1", "--to", "uncertain_significance", "--date", "2026-11-30", "--reason",
            "laboratory re-review")  # fmt: skip
    dry = _json(run, loaded_db, *args, "--dry-run")
    recall_items = [i for i in _items_for(dry, "T1-05") if i["change"] == "return_to_surveillance"]
    assert len(recall_items) == 1, _items_for(dry, "T1-05")
    what = recall_items[0]["what_changes"]
    assert "discharged from screening on 2026-06-01" in what and "likely pathogenic" in what
    assert "2018-06-15" in what
    # Written: the task names the discharge.
    done = _json(run, loaded_db, *args)
    task = [i for i in _items_for(done, "T1-05") if i["change"] == "return_to_surveillance"]
    assert task and task[0]["id"] is not None and "discharged from screening on 2026-06-01" in task[0]["what_changes"]
    # After the downgrade the discharge no longer holds: a recalled gap, and the recall says so.
    cas = _json(run, loaded_db, "cascade", "FAM-T1", "--as-of", "2026-12-01")
    gaps = {g["person"]: g for g in cas["gaps"]}
    assert gaps["T1-05"]["recalled"] is True
    assert "the discharge no longer holds" in gaps["T1-05"]["reason"]
    after = _json(run, loaded_db, "recall", "T1-05", "--as-of", "2026-12-01")
    assert after["discharge"]["holds"] is False
    assert any("the discharge no longer holds" in n for n in after["notes"])
    assert after["status"] != before["status"]
