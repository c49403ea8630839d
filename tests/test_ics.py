"""Calendar and CSV export of the worklist (invented person codes).

iCalendar checks follow RFC 5545 (VERSION and PRODID required, §3.7.3/§3.7.4;
all-day events with DTSTART;VALUE=DATE and an exclusive DTEND, §3.6.1;
SEQUENCE grows with each revision, §3.8.7.4), read back with the icalendar
package's own parser.
"""

from __future__ import annotations

import csv
import datetime as dt
import io

from icalendar import Calendar

from tracker.outputs import ics, worklist_csv

STAMP = dt.datetime(2026, 3, 2, 9, 30, tzinfo=dt.timezone.utc)
VISITS = [
    ics.CalendarVisit("ZZ-01", dt.date(2026, 3, 9), ("ecg", "echo"), "Carrier child: ECG and imaging every 1-3 years."),
    ics.CalendarVisit("ZZ-02", dt.date(2026, 3, 16), ("ecg", "echo", "counselling"), "At-risk adult."),
]


def _events(data: bytes):
    cal = Calendar.from_ical(data)
    return cal, [c for c in cal.walk() if c.name == "VEVENT"]


def test_calendar_round_trip_and_required_properties():
    data = ics.calendar_bytes(VISITS, caution="Decision support only.", stamp=STAMP)
    assert data.startswith(b"BEGIN:VCALENDAR\r\n")  # CRLF line ends (RFC 5545 §3.1)
    cal, events = _events(data)
    assert str(cal["VERSION"]) == "2.0" and str(cal["PRODID"]) == ics.PRODID
    assert len(events) == 2
    first = events[0]
    start, end = first.decoded("DTSTART"), first.decoded("DTEND")
    assert type(start) is dt.date and start == dt.date(2026, 3, 9)  # all day, not a date-time
    assert end == dt.date(2026, 3, 10)  # exclusive end: the next day
    assert b"DTSTART;VALUE=DATE:20260309" in data
    assert str(first["SUMMARY"]) == "ZZ-01: ECG, echo"
    assert "Carrier child" in str(first["DESCRIPTION"]) and "Decision support only." in str(first["DESCRIPTION"])
    assert str(first["STATUS"]) == "TENTATIVE"
    assert first.decoded("DTSTAMP") == STAMP


def test_uid_is_stable_opaque_and_per_person_and_purpose():
    a = ics.visit_uid("ZZ-01")
    assert a == ics.visit_uid("ZZ-01")
    assert a != ics.visit_uid("ZZ-02") and a != ics.visit_uid("ZZ-01", "other")
    assert "ZZ-01" not in a
    first = _events(ics.calendar_bytes(VISITS, caution="c", stamp=STAMP))[1]
    later = _events(ics.calendar_bytes(VISITS, caution="c", stamp=STAMP + dt.timedelta(days=7)))[1]
    assert [str(e["UID"]) for e in first] == [str(e["UID"]) for e in later]
    assert int(later[0]["SEQUENCE"]) > int(first[0]["SEQUENCE"])  # a re-export is the newer revision


def test_sequence_counts_minutes_since_2000():
    # worked example: 2000-01-02 01:00 UTC is 1 day + 1 hour = 1500 minutes after the epoch
    assert ics.sequence_at(dt.datetime(2000, 1, 2, 1, 0, tzinfo=dt.timezone.utc)) == 1500
    assert ics.sequence_at(dt.datetime(2000, 1, 1)) == 0  # naive = UTC


def test_summary_has_code_and_needs_only():
    v = ics.CalendarVisit("ZZ-03", dt.date(2026, 1, 5), (), "reason with a name Bryony")
    assert ics.summary_text(v) == "ZZ-03: visit"
    assert ics.needs_words(["clinical_review", "cmr"]) == "clinical review, CMR"


def test_worklist_csv_columns_and_cells():
    rows = [
        {"list": "screening", "person": "ZZ-01", "family": "ZZ", "status": "overdue", "due": "2026-01-05",
         "days_overdue": 10, "interval_months": 12, "needs": ["ecg", "echo"], "reason": "a, b",
         "booked_week": "2026-01-12", "late": True},
        {"list": "affected", "person": "ZZ-02", "family": "ZZ", "status": "due", "due": "2026-02-05",
         "days_overdue": -21, "interval_months": 12, "needs": ["ecg"], "reason": "r", "booked_week": None,
         "late": None},
    ]  # fmt: skip
    text = worklist_csv.worklist_csv(rows)
    back = list(csv.DictReader(io.StringIO(text)))
    assert tuple(back[0]) == worklist_csv.COLUMNS
    assert back[0]["needs"] == "ecg;echo" and back[0]["reason"] == "a, b" and back[0]["late"] == "yes"
    assert back[1]["booked_week"] == "" and back[1]["days_overdue"] == "-21"
