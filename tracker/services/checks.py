"""The database checks of `tracker check`: integrity, schema, audit trail, orphan rows, consistency
of the records, and at-risk relatives with no recall; variant re-review reminders apart."""

from __future__ import annotations

import datetime as dt

from sqlalchemy import Connection


def check_findings(conn: Connection, today: dt.date, rereview_months: int, settings=None) -> tuple[list, list]:
    """(findings, re-review reminders). The consistency checks run only on a database whose file and
    schema are sound."""
    from tracker.domain import consistency as dc
    from tracker.store import checks
    from tracker.store import repository as repo

    reminders = []
    findings = checks.integrity_findings(conn) + checks.schema_findings(conn)
    if not findings:
        findings += checks.audit_findings(conn)
        findings += checks.orphan_findings(conn)
        people = repo.load_people(conn)
        studies = repo.load_studies(conn, entered=False)
        assessments = repo.load_assessments(conn)
        results = repo.load_genetic_results(conn)
        findings += dc.pedigree_findings(people)
        findings += dc.date_findings(people, studies, assessments, results)
        findings += dc.record_findings(people)
        findings += dc.range_findings(studies, repo.load_measures(conn))
        findings += dc.placeholder_findings(people, studies, assessments, results)
        findings += checks.rule_findings(conn)
        # Families whose links cannot form a pedigree are reported above; recall needs a pedigree.
        broken = {f.where.removeprefix("family ") for f in findings if f.check == "pedigree"}
        findings += recall_findings(people[~people["family"].isin(broken)], repo.load_variants(conn), results,
                                    assessments, studies)  # fmt: skip
        findings += proposal_findings(conn, settings, broken)
        # re-review reminders: listed apart, not findings
        reminders = checks.variant_rereview_reminders(conn, today, rereview_months)
    return findings, reminders


def recall_findings(people, variants, results, assessments, studies):
    """At-risk living relatives with no recall proposal (for example no date of birth recorded)."""
    from tracker.domain.consistency import Finding
    from tracker.engines import family_state as fs

    states = fs.build_family_states(people, variants, results, assessments, studies)
    by_code = people.set_index("person")  # once for the cohort, not once per family
    return [Finding("recall", f"person {p}", f"is at risk and has no recall: {why}")
            for st in states.values() for p, why in fs.unscheduled_at_risk(st, by_code)]  # fmt: skip


def proposal_findings(conn: Connection, settings=None, broken: set[str] = frozenset()):
    """Stored recall proposals that differ from a recomputation from the records now stored
    (every write recomputes them, so a difference means a write that did not, or a change made
    outside the tool). Rows computed under other settings are recomputed by the next read; families
    whose links cannot form a pedigree (``broken``, reported apart) cannot be recomputed."""
    from tracker.domain.consistency import Finding
    from tracker.services import proposals as SP
    from tracker.services.recall import recall_rules

    conf, rule_set, policy = recall_rules(settings, None)
    return [Finding("recall proposal", f"person {p}", f"stored recall proposal differs from a recomputation: {what}; "
                    "run `tracker recall --refresh`") for p, what in SP.differing(conn, conf, rule_set, policy, skip=broken)]  # fmt: skip
