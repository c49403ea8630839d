"""`tracker report trajectory`: the cardiologist's one-person trajectory report, as a PDF.

Thin: loads the store frames (records after ``--as-of`` left out), then
computes exactly as the other commands do and hands plain data to
:mod:`tracker.outputs.trajectory_pdf`:

- values, limits, criteria, trends, flags and conversion as ``tracker person``
  (:mod:`tracker.engines.review`: clinical_context, build_measurements,
  assess_measurements, trend_table, conversions), with its text helpers;
- the line drawn on each chart: the trend engine's fit of the same window
  (:func:`tracker.engines.trends.per_person_ols`) and its confidence band
  (:func:`tracker.engines.trend_band.mean_line_band`);
- the recall proposal as ``tracker recall`` (family state, trend modifiers,
  :func:`tracker.engines.schedule.propose_recall`, via :mod:`tracker.cli.recall`);
- HCM Risk-SCD (:func:`tracker.engines.risk.hcm_risk_scd`) for an affected
  person, from the latest echo and the clinical answers recorded with the
  assessments (family history of SCD, NSVT, unexplained syncope and the
  exclusions; the latest recorded answer of each); a missing answer refuses
  the figure.

The file is DIR/trajectory-PERSON.pdf (the code only, never a name).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import datetime as dt
import math
import re
from pathlib import Path
from typing import Annotated, Any

import typer

from tracker.cli import recall as R
from tracker.cli import review as RV
from tracker.cli.common import DbOption, JsonOption, SettingsOption, open_store, print_json
from tracker.outfiles import output_path
from tracker.errors import UserError
from tracker.lazy import lazy_module
from tracker.store.database import reading

ics = lazy_module("tracker.outputs.ics")


if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    import pandas as pd

    from tracker.engines import risk
    from tracker.outputs import trajectory_pdf as T

# --------------------------------------------------------------------------- document parts
# The charts and the strain map are built by the service (tracker.services.documents), shared with the web page.


def _charts(a, trend_rows, guideline_label):
    from tracker.services import documents as SD

    return SD.charts(a, trend_rows, guideline_label)


def _strain(m, a):
    from tracker.services import documents as SD

    return SD.strain_map(m, a)




def _f(v: Any) -> float | None:
    from tracker.services import review as SR

    v = SR.clean(v)
    return None if v is None else float(v)


def _tables(a: pd.DataFrame, labels: dict[str, str]) -> tuple[T.ModalityTable, ...]:
    from tracker.services import review as SR
    from tracker.engines import review, risk, trends
    from tracker.outputs import trajectory_pdf as T

    out = []
    shown = a[~a["measure"].astype(str).str.startswith(review._SEGMENT_PREFIXES) & ~a["measure"].isin(review.NOT_TRENDED)]
    order = {m: i for i, m in enumerate(T.ROW_ORDER)}
    for modality in ("echo", "cmr", "ecg"):
        rows = shown[shown["modality"] == modality]
        if rows.empty:
            continue
        studies = rows.drop_duplicates("study_date").sort_values("study_date")
        dates = [d for d in studies["study_date"]]
        col = {d: i for i, d in enumerate(dates)}
        measures = rows.drop_duplicates("measure")[["measure", "derived", "unit"]]
        measures = measures.assign(k=[(bool(d), order.get(m, len(order)), m) for m, d in
                                      zip(measures["measure"], measures["derived"])]).sort_values("k")  # fmt: skip
        table_rows = []
        for m, derived, unit in measures[["measure", "derived", "unit"]].itertuples(index=False):
            cells: list[T.Cell | None] = [None] * len(dates)
            for r in rows[rows["measure"] == m].itertuples(index=False):
                meets = SR.clean(r.meets_criteria)
                cells[col[r.study_date]] = T.Cell(
                    float(r.value), T.limit_text(_f(r.lower), _f(r.upper), None),
                    T.marks(SR.clean(r.assessment), meets is True), _f(r.z),
                )  # fmt: skip
            table_rows.append(T.TableRow(m, labels.get(m, ""), unit, bool(derived), tuple(cells)))
        out.append(T.ModalityTable(modality, tuple(d.isoformat() for d in dates),
                                   tuple(_f(x) for x in studies["age_years"]), tuple(table_rows)))  # fmt: skip
    return tuple(out)


def _flags(trend_records: list[dict]) -> tuple[T.FlagRow, ...]:
    """One row per trended measure: every key measure with 2 or more studies, other measures when flagged;
    flagged measures first (the trend engine's order within each group)."""
    from tracker.cli import review as RV
    from tracker.engines import review, risk, trends
    from tracker.outputs import trajectory_pdf as T

    rows = []
    key = set(T.KEY_MEASURES)
    for r in trend_records:
        if (r["n"] < 2 and not r["criteria_flags"]) or (not r["reasons"] and r["measure"] not in key):
            continue
        window = str(r["window"]) + (f"; {r['left_out']}" if r["left_out"] else "")
        # the tests that fired by name (their figures are in the slope and last-change columns), then the rest
        rest = r["reasons"][len(r["progression_tests"] or ""):].lstrip("; ")
        tests = f"progression: {r['tests_fired']}" if r["tests_fired"] else ""
        flag = "; ".join(x for x in (tests, rest) if x)
        rows.append(T.FlagRow(
            measure=r["measure"], n=int(r["n"]), window=window, flag=flag or "no flag",
            flagged=bool(r["reasons"]), slope=RV._ci(r["slope_per_year"], r["slope_ci_low"], r["slope_ci_high"],
                                                     r["unit"]),
            # the z-score slope of the studies under 18 y where it is the tested trend (a child, or a test that fired)
            z_slope=RV._ci(r["z_slope_per_year"], r["z_ci_low"], r["z_ci_high"], "z")
            if r["last_age"] < 18 or "z-score slope" in (r["tests_fired"] or "") else "",
            change=RV._change_text(r),
            projection=RV._projection_text(r) if r["measure"] in review.DIAGNOSTIC_MEASURES else "",
        ))  # fmt: skip
    return tuple(sorted(rows, key=lambda f: not f.flagged))


def _conversion(conv: pd.DataFrame) -> str:
    from tracker.cli import review as RV
    from tracker.services import review as SR

    if conv is None or conv.empty:
        return "Conversion: no assessable maximal wall thickness."
    c = SR.records(conv, SR.CONVERSION_KEYS)[0]
    if c["ever_met"]:
        extra = " REVIEW: met criteria earlier but not at the latest study." if c["review_flag"] else ""
        return (f"Conversion: first met the wall-thickness criteria on {c['first_met_date']} (age "
                f"{RV._num(c['first_met_age'])} y, {c['first_met_measures']}); status: {c['status']}.{extra}")  # fmt: skip
    return f"Conversion: criteria not met at {c['n_assessed_studies']} assessed studies."


def risk_section(pr: risk.PersonRisk) -> T.RiskSection:
    from tracker.outputs import trajectory_pdf as T

    return T.RiskSection(pr.status, pr.headline, pr.risk_5y_pct, pr.inputs_text, pr.reasons, pr.bands,
                         pr.validated_ranges, pr.caution, pr.model, conflicts=pr.conflicts)  # fmt: skip


def _sources(a: pd.DataFrame) -> tuple[tuple[str, str], ...]:
    """(measure, source text) for every distinct limit, criterion or formula source of a measure, over all its
    studies (a series that starts in childhood has the child z-score source and the adult one)."""
    from tracker.engines import review, risk, trends

    out: dict[str, dict[str, None]] = {}
    keep = a[~a["measure"].astype(str).str.startswith(review._SEGMENT_PREFIXES)]
    for r in keep.itertuples():
        for text in (r.source, r.criteria_source, r.derivation):
            if isinstance(text, str) and text.strip():
                out.setdefault(r.measure, {})[text.strip()] = None
    return tuple((m, text) for m in sorted(out) for text in out[m])


# --------------------------------------------------------------------------- command


def trajectory_report(
    person: Annotated[str, typer.Argument(help="Person code, e.g. HV02-III-2.")],
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for trajectory-PERSON.pdf (made if missing).")],
    as_of: R.AsOfOption = None,
    guideline: R.GuidelineOption = None,
    horizon: RV.HorizonOption = 3.0,
    settings: SettingsOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Write one person's trajectory report as DIR/trajectory-PERSON.pdf (A4, person code only).

    Identity, trends and flags, the recall proposal, HCM Risk-SCD (affected
    people of 16 or over, when every input is known), charts of the key
    measures over age with the fitted trend, its 95% band, the normal range
    and the diagnostic threshold (every study), a 17-segment strain map beside
    the charts where segmental strain exists, and a table per modality of the
    first and the latest five studies against their limits (two A4 pages for a
    long series; every value is in `tracker person`).

    Example: tracker report trajectory HV02-III-2 --out reports/ --as-of 2026-12-01
    """
    from tracker.cli import review as RV
    from tracker.cli.common import parse_day
    from tracker.engines import review
    from tracker.outputs import trajectory_pdf as T
    from tracker.services import documents as SD
    from tracker.services.recall import recall_rules

    on = parse_day(as_of, "--as-of", dt.date.today())
    conf, rule_set, policy = recall_rules(settings, guideline)
    gid = rule_set.id
    if out.exists() and not out.is_dir():
        raise UserError(f"--out {out} is a file; give a folder")
    engine = open_store(db)
    with reading(engine) as conn:
        data = SD.trajectory(conn, person, on, conf, rule_set, policy, horizon)
    family, m, a, conv, pr, rec = data.family, data.m, data.assessed, data.conversions, data.risk, data.recall
    labels, identity, g = data.labels, data.identity, data.guideline
    trend_records = data.trend_records
    trend_rows = {r["measure"]: r for r in trend_records}
    trend_note = data.trend_note
    needs = ics.needs_words(rec["needs"])
    if rec["consider"]:
        needs += f" (consider: {ics.needs_words(rec['consider'])})"
    rec.update(rule_set_title=rule_set.title, policy=policy.point, needs_text=needs,
               notes_shown=[n for n in rec["notes"] if n not in rec["reason"]] + [trend_note["note"]])  # fmt: skip

    risk_shown = risk_section(pr)

    short = gid.replace("_", " ").upper().replace("AHA ACC", "AHA/ACC")
    strain, strain_note = _strain(m, a) if a is not None else (None, "No segmental strain values recorded.")
    doc = T.TrajectoryDocument(
        identity=identity, guideline=f"{g['id']}: {g['name']}", clinic=conf.clinic.name, as_of=on,
        generated=dt.date.today(), flags=_flags(trend_records), conversion=_conversion(conv) if a is not None else "",
        recall=rec, risk=risk_shown, charts=_charts(a, trend_rows, short) if a is not None else (),
        tables=_tables(a, labels) if a is not None else (), strain=strain, strain_note=strain_note,
        sources=_sources(a) if a is not None else (),
        notes=(review.NOT_POOLED, *RV.lsc_default_notes(trend_records),
               f"Records dated after {on.isoformat()} are left out."),
        cautions=tuple(rec["cautions"]),
    )  # fmt: skip
    out.mkdir(parents=True, exist_ok=True)
    path = out / T.file_name(person)
    replaced = path.exists()
    with output_path(path) as tmp:
        T.write_trajectory_pdf(doc, tmp)
    pages = _page_count(path)
    if json_out:
        print_json(
            {
                "file": str(path),
                "person": person,
                "family": family,
                "as_of": on.isoformat(),
                "pages": pages,
                "guideline": gid,
                "recall": {k: rec.get(k) for k in ("status", "due", "interval_months", "rule_set", "rule_id",
                                                   "reason", "source")},  # fmt: skip
                "risk": {**pr.as_dict(), "inputs": pr.inputs or None},
                "flags": [f.text for f in doc.flags],
                "review_flags": rec["state"]["review_flags"] if rec.get("state") else [],
                "conversion": doc.conversion,
                "charts": [c.measure for c in doc.charts],
                "tables": {x.modality: len(x.dates) for x in doc.tables},
                "strain_map": strain.study_date if strain else None,
                "cautions": [T.PAGE_CAUTION, *rec["cautions"]],
            }
        )
        return
    typer.echo(f"{'replaced' if replaced else 'wrote'} {path} ({pages} pages)")
    typer.echo(f"recall: {rec['status']}" + (f", due {rec['due']}" if rec["due"] else "")
               + (f", every {rec['interval_months']} months" if rec["interval_months"] else "")
               + f"; rule set {rule_set.title}")  # fmt: skip
    typer.echo(f"HCM Risk-SCD: {pr.status}" + (f", {pr.risk_5y_pct:.2f}% at 5 years" if pr.risk_5y_pct is not None
                                               else ""))  # fmt: skip
    if pr.device:
        typer.echo(f"HCM Risk-SCD: {pr.headline}")
    for c in pr.conflicts:
        typer.echo(f"HCM Risk-SCD: {c}")
    typer.echo(T.PAGE_CAUTION)


def _page_count(path: Path) -> int:
    import pypdfium2 as pdfium

    pdf = pdfium.PdfDocument(str(path))
    try:
        return len(pdf)
    finally:
        pdf.close()


def register(report_app: typer.Typer) -> None:
    """Add this module's command to `tracker report`."""
    report_app.command("trajectory")(trajectory_report)
