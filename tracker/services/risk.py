"""HCM Risk-SCD as `tracker person`, `tracker recall` and `tracker report trajectory` show it.

Thin: picks the frames of one person and calls :func:`tracker.engines.risk.person_risk_scd`, so the
three commands show the same figure, inputs, conflicts with the record and cautions; and renders the
result as text lines.
"""

from __future__ import annotations

import datetime as dt

import pandas as pd

from tracker.engines import review, risk


def person_risk(person: str, family_people: pd.DataFrame, assessments: pd.DataFrame | None,
                affected_status: str | None, on: dt.date, *, studies: pd.DataFrame | None = None,
                assessed: pd.DataFrame | None = None) -> risk.PersonRisk:  # fmt: skip
    """One person's Risk-SCD from the record up to ``on``.

    ``assessed``: the person's measurements from :func:`review.build_measurements` (or
    ``assess_measurements``); built from ``studies`` (catalogue units) when not given.
    """
    if assessed is None and studies is not None and len(studies):
        mine = studies[studies["person"] == person]
        if len(mine):
            assessed = review.build_measurements(family_people, mine)
    answers, answered = risk.latest_answers(assessments, person)
    return risk.person_risk_scd(person, affected_status=affected_status, assessed=assessed, answers=answers,
                                answered=answered, people=family_people,
                                hcm=risk.hcm_status(family_people, assessments), as_of=on)  # fmt: skip


def text_lines(d: dict) -> list[str]:
    """The Risk-SCD block of a text output (``PersonRisk.as_dict()``): headline, conflicts, inputs, bands,
    reasons, cautions."""
    lines = [f"HCM Risk-SCD ({d['status']}): {d['headline']}"]
    lines += [f"  {c}" for c in d["conflicts"]]
    if d["inputs_text"]:
        lines.append("  inputs: " + "; ".join(d["inputs_text"]))
    lines += [f"  {b}" for b in d["bands"]]
    lines += [f"  - {r}" for r in d["reasons"]]
    if d["validated_ranges"]:
        lines.append(f"  {d['validated_ranges']}")
    if d["caution"]:
        lines.append(f"  caution: {d['caution']}")
    return lines
