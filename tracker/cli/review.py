"""Commands for the cardiologist's review of measurements: person, trends.

Thin layer: read the store, call :mod:`tracker.engines.review`, print.  Output
names the guideline, the source of every limit and the caution.
"""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Annotated, Any

import typer
from rich.console import Console
from rich.table import Table

from tracker.cli.common import AllOption, DbOption, JsonOption, SettingsOption, more_rows_line, open_store, print_json
from tracker.cli.common import table_limit
from tracker.outfiles import output_path
from tracker.settings import load_settings
from tracker.store.database import reading

HorizonOption = Annotated[
    float,
    typer.Option("--horizon", min=0.5, max=10.0, help="Years after the last study within which a projected "
                 "threshold crossing is flagged (default 3; a straight line is not extrapolated further)."),
]  # fmt: skip



# --------------------------------------------------------------------------- loading








# --------------------------------------------------------------------------- formatting






def _console() -> Console:
    """A console at least 160 columns wide (tables of values read badly at 80)."""
    return Console(highlight=False, soft_wrap=False, width=max(shutil.get_terminal_size((160, 24)).columns, 160))


def print_table(title: str | None, columns: list[str], rows: list[list[Any]], *, limit: int | None = None,
                data: str = "--json", total: int | None = None) -> None:
    """A table of ``rows``; with ``limit``, the first ``limit`` rows and a line counting the rest
    (of ``total`` rows when only the first ones are given)."""
    shown = rows if limit is None else rows[:limit]
    hidden = (len(rows) if total is None else total) - len(shown)
    table = Table(title=title, title_justify="left")
    for c in columns:
        table.add_column(c, overflow="fold")
    for r in shown:
        table.add_row(*["" if v is None else str(v) for v in r])
    _console().print(table)
    if hidden:
        typer.echo(more_rows_line(hidden, data))


def _clean(v: Any) -> Any:
    from tracker.services.review import clean

    return clean(v)


def _num(x: Any, nd: int = 1) -> str:
    x = _clean(x)
    return "" if x is None else f"{x:.{nd}f}"


def _ci(slope: Any, lo: Any, hi: Any, unit: str = "", nd: int = 2) -> str:
    """Slope with its 95% CI, e.g. '0.79 (0.46 to 1.12) mm/y'; '' without a slope."""
    if _clean(slope) is None:
        return ""
    per = f" {unit}/y" if unit else ""
    if _clean(lo) is None:
        return f"{_num(slope, nd)}{per} (no CI: 2 studies)"
    return f"{_num(slope, nd)} ({_num(lo, nd)} to {_num(hi, nd)}){per}"


def _limit(r: dict) -> str:
    lo, hi, unit = r["lower"], r["upper"], r["unit"]
    text = ""
    if lo is not None and hi is not None:
        text = f"{lo:.3g}-{hi:.3g} {unit}"
    elif hi is not None:
        text = f"<= {hi:.3g} {unit}"
    elif lo is not None:
        text = f">= {lo:.3g} {unit}"
    if r["z"] is not None:
        text = (text + "; " if text else "") + f"z {r['z']:.2f} ({r['reference_set']})"
    return text


def _criteria_text(r: dict) -> str:
    from tracker.engines import review

    if r["measure"] not in review.DIAGNOSTIC_MEASURES:
        return ""
    if r["meets_criteria"] is None:
        return "not assessable"
    rule = f"{r['comparison']} {r['threshold']:g} {r['threshold_unit']}"
    return ("meets " if r["meets_criteria"] else "not met ") + rule + (" (borderline)" if r["borderline"] else "")


def _projection_text(r: dict) -> str:
    from tracker.engines import review

    if r["projected_age"] is None:
        return r["projection_reason"] if r["measure"] in review.DIAGNOSTIC_MEASURES else ""
    ci = f" (95% CI {_num(r['projected_age_ci_low'])}-{_num(r['projected_age_ci_high'])})"
    return f"{r['threshold']:g} {r['threshold_unit']} at {_num(r['projected_age'])} y{ci}; {r['projection_status']}"


def _change_text(r: dict) -> str:
    if r["last_change"] is None:
        return ""
    change = f"{r['last_change']:+.2f} {r['unit']}"
    limits = []
    if r["lsc"] is not None:
        limits.append(f"{r['lsc']:.2f} {r['unit']}")
    if r["lsc_relative"] is not None:
        limits.append(f"{r['lsc_relative']:.0%}")
    if not limits:
        return f"{change}; no LSC for this measure"
    verdict = "within" if r["last_change_vs_lsc"] == "within measurement variability" else "BEYOND"
    return f"{change}; LSC {' or '.join(limits)} ({r['lsc_status']}): {verdict} measurement variability"


def lsc_default_notes(rows: list[dict]) -> list[str]:
    """One line naming the measures of ``rows`` (trend records) whose least significant change is a
    packaged default (placeholder or provisional), or no line."""
    from tracker.engines import review

    parts = []
    for status in review.LSC_DEFAULT_NOTES:
        used = sorted({r["measure"] for r in rows if r.get("lsc_status") == status and r.get("last_change") is not None})
        if used:
            parts.append(f"{status} for {', '.join(used)}")
    if not parts:
        return []
    return [f"Least significant changes that are packaged defaults, not the lab's own ({'; '.join(parts)}): "
            "the clinic must set its own within-subject SD in the settings [repeatability]."]


# --------------------------------------------------------------------------- person










def _record_text(r: dict[str, Any]) -> str:
    parts = []
    if r["death_cause"] or r["death_age"] is not None:
        parts.append("death: " + (r["death_cause"] or "cause not recorded").replace("_", " ")
                     + (f", at {r['death_age']} y" if r["death_age"] is not None else ""))  # fmt: skip
    if r["diagnosis_age"] is not None or r["diagnosis_place"]:
        age = f"at {r['diagnosis_age']} y" if r["diagnosis_age"] is not None else "age not recorded"
        parts.append(f"HCM diagnosed {age}" + (f" ({r['diagnosis_place']})" if r["diagnosis_place"] else ""))
    for k, name in (("icd_date", "ICD"), ("pacemaker_date", "pacemaker")):
        if r[k]:
            parts.append(f"{name} implanted {r[k]}")
    af = r["atrial_fibrillation"]
    if af["latest"] is not None:
        parts.append("atrial fibrillation " + (f"yes (first recorded {af['first_recorded_on']})" if af["first_recorded_on"]
                                               else f"no (assessment {af['latest_on']})"))  # fmt: skip
    return "Record: " + ("; ".join(parts) if parts else "no cause of death, diagnosis elsewhere, device or AF recorded")




def _print_person(d: dict) -> None:
    from tracker.services import risk as RK

    age = "age unknown" if d["age_years"] is None else f"age {d['age_years']:.1f} y"
    if d["age_uncertainty_years"]:
        age += f" (+/- {d['age_uncertainty_years']:g} y: year of birth only)"
    affected = d["affected_status"] or "never assessed"
    if d["affected_status_date"]:
        affected += f" (assessment {d['affected_status_date']})"
    typer.echo(f"{d['person']}  family {d['family']}  {d['sex_at_birth']}  {age}  "
               f"genotype: {d['genotype_status']}  affected status: {affected}")  # fmt: skip
    rel = d["affected_first_degree_relatives"]
    typer.echo(f"First-degree relative of an affected member: {'yes (' + rel + ')' if rel else 'no'}")
    typer.echo(f"Guideline: {d['guideline']['id']} - {d['guideline']['name']}")
    sources: dict[str, int] = {}

    def ref(text: str | None) -> str:
        if not text:
            return ""
        return f"[{sources.setdefault(text, len(sources) + 1)}]"

    for modality in ("echo", "cmr", "ecg"):
        rows = []
        for s in (s for s in d["studies"] if s["modality"] == modality):
            head = [s["study_date"], _num(s["age_years"]), _num(s["bsa_m2"], 2)]
            for v in s["values"]:
                name = v["measure"] + (" (computed)" if v["derived"] else "")
                cls = v["assessment"] + (f" ({v['grade']})" if v["grade"] else "")
                texts = (v["source"], v["criteria_source"], v["derivation"], v["note"], v["criteria_note"])
                src = " ".join(x for x in map(ref, texts) if x)
                rows.append([*head, name, f"{v['value']:.4g} {v['unit']}", _limit(v), cls, _criteria_text(v), src])
                head = ["", "", ""]
        if rows:
            typer.echo("")
            title = f"{modality.upper()} values (catalogue units; BSA {d['bsa_formula']})"
            print_table(title, ["date", "age (y)", "BSA (m2)", "measure", "value", "limit or z", "class", "criteria",
                                "sources, notes"], rows)  # fmt: skip
    typer.echo(d["not_pooled"])
    for modality in ("echo", "cmr", "ecg"):
        rows = [
            [t["measure"], t["n"], _num(t["span_years"]), t["window"] + (f"; {t['left_out']}" if t["left_out"] else ""),
             _ci(t["slope_per_year"], t["slope_ci_low"], t["slope_ci_high"], t["unit"]),
             _ci(t["z_slope_per_year"], t["z_ci_low"], t["z_ci_high"], "z"), _change_text(t), _projection_text(t),
             t["reasons"]]
            for t in d["trends"] if t["modality"] == modality and t["n"] >= 2
        ]  # fmt: skip
        if rows:
            typer.echo("")
            print_table(f"{modality.upper()} trends (OLS slope per year of age, 95% CI; z slope under 18 y)",
                        ["measure", "n", "span (y)", "studies", "slope/y (95% CI)", "z slope/y (95% CI)",
                         "last change vs LSC", "projection", "flags"], rows)  # fmt: skip
    typer.echo(d["not_pooled"])
    for line in lsc_default_notes(d["trends"]):
        typer.echo(line)
    for flag in d["review_flags"]:
        typer.echo(f"REVIEW: {flag}")
    c = d["conversion"]
    if c is None:
        typer.echo("Conversion: no assessable maximal wall thickness")
    elif c["ever_met"]:
        review_txt = " REVIEW: met criteria earlier but not at the latest study." if c["review_flag"] else ""
        typer.echo(f"Conversion: first met criteria on {c['first_met_date']} (age {_num(c['first_met_age'])} y, "
                   f"{c['first_met_measures']}); status: {c['status']}.{review_txt}")  # fmt: skip
    else:
        typer.echo(f"Conversion: criteria not met at {c['n_assessed_studies']} assessed studies")
    typer.echo(_record_text(d["record"]))
    for line in RK.text_lines(d["risk_scd"]):
        typer.echo(line)
    if sources:
        typer.echo("Sources and notes:")
        for text, n in sources.items():
            _console().print(f"  [{n}] {text}", markup=False)
    typer.echo(d["caution"])


def person(
    code: Annotated[str, typer.Argument(help="Person code, e.g. HV01-IV-2.")],
    db: DbOption = None,
    settings: SettingsOption = None,
    horizon: HorizonOption = 3.0,
    json_out: JsonOption = False,
) -> None:
    """One relative's echo, CMR and ECG values against normal limits, derived indices, trends and conversion.

    Limits: paediatric z-scores under 18 y, adult reference sets from 18 y, each with its source;
    wall-thickness criteria from the settings' guideline. Echo and CMR are never pooled.

    Example: tracker person HV01-IV-2 --db tracker.sqlite
    """
    from tracker.services import review as service

    s = load_settings(settings)
    with reading(open_store(db)) as conn:
        d = service.person_review(conn, code, s, horizon)
    if json_out:
        print_json(d)
    else:
        _print_person(d)


# --------------------------------------------------------------------------- trends


def trends_(
    family: Annotated[str | None, typer.Option("--family", help="Only this family code.")] = None,
    measure: Annotated[str | None, typer.Option("--measure", help="Only this measure code, e.g. mwt_echo.")] = None,
    csv_path: Annotated[Path | None, typer.Option("--csv", help="Also write the table to this CSV file.")] = None,
    db: DbOption = None,
    settings: SettingsOption = None,
    horizon: HorizonOption = 3.0,
    json_out: JsonOption = False,
    all_: AllOption = False,
) -> None:
    """The cohort's per-person slopes and flags, most concerning first.

    One row per person and measure with at least two studies: slope per year with 95% CI (z slope
    for children), last change against the least significant change, projected threshold crossing,
    and flags (progressing beyond measurement variability, projected crossing within the horizon,
    converted, review).

    The table shows the most concerning rows and a count of the rest (--all: every row; --json and
    --csv: every row).

    Example: tracker trends --family HV01 --measure mwt_echo --csv trends.csv
    """
    import pandas as pd

    from tracker.engines import review
    from tracker.services import review as service

    s = load_settings(settings)
    if family is None and (json_out or csv_path is not None):
        _cohort_trends_streamed(measure, csv_path, db, s, horizon, json_out, table_limit(all_, settings))
        return
    with reading(open_store(db)) as conn:
        result = service.trends(conn, family, measure, s, horizon)
    rows = result["rows"]
    if csv_path is not None:
        with output_path(csv_path, where="--csv") as tmp:
            pd.DataFrame(rows, columns=service.TREND_JSON_KEYS).assign(caution=review.CAUTION).to_csv(tmp, index=False)
        typer.echo(f"wrote {len(rows)} rows to {csv_path}", err=True)
    if json_out:
        print_json(result)
        return
    _print_trend_table(s, rows, len(rows), horizon, table_limit(all_, settings), rows)


def _cohort_trends_streamed(measure, csv_path, db, s, horizon, json_out: bool, limit: int | None) -> None:
    """The whole cohort's trends to --json (stdout) and/or --csv, a batch of families at a time
    (:mod:`tracker.services.trend_stream`); the same rows, values and order as one pass."""
    import sys

    from tracker.engines import review
    from tracker.services import review as service
    from tracker.services import trend_stream as TS

    keys = service.TREND_JSON_KEYS
    with reading(open_store(db)) as conn, TS.cohort_trends(conn, measure, s, horizon) as result:
        if csv_path is not None:
            with output_path(csv_path, where="--csv") as tmp:
                with open(tmp, "w", encoding="utf-8", newline="") as fh:
                    TS.write_csv(result, keys, review.CAUTION, fh)
            typer.echo(f"wrote {result.count} rows to {csv_path}", err=True)
        if json_out:
            TS.write_json(result, {"not_pooled": review.NOT_POOLED, "caution": review.CAUTION}, keys, sys.stdout)
            return
        head = []
        for r in result.rows(keys):
            if limit is not None and len(head) >= limit:
                break
            head.append(r)
        _print_trend_table(s, head, result.count, horizon, limit,
                           [{"measure": m, "lsc_status": st, "last_change": 0.0} for st, m in result.lsc_used])  # fmt: skip


def _print_trend_table(s, rows: list[dict], total: int, horizon: float, limit: int | None,
                       lsc_rows: list[dict]) -> None:  # fmt: skip
    from tracker.engines import review
    from tracker.services.review import guideline

    g = guideline(s)
    typer.echo(f"Guideline: {g['id']} - {g['name']}")
    print_table(
        f"Trends: {total} series (person, measure) with 2 or more studies or a review flag, most concerning first",
        ["person", "measure", "n", "span (y)", "slope/y (95% CI)", "z slope/y", "last change vs LSC",
         "projection", "progressing", f"crossing <= {horizon:g} y", "converted", "flags"],
        [[r["person"], r["measure"], r["n"], _num(r["span_years"]),
          _ci(r["slope_per_year"], r["slope_ci_low"], r["slope_ci_high"], r["unit"]),
          _ci(r["z_slope_per_year"], r["z_ci_low"], r["z_ci_high"], "z"), _change_text(r), _projection_text(r),
          "yes" if r["progressing"] else "", "yes" if r["crossing_within_horizon"] else "",
          (r["conversion_date"] or "yes") if r["converted"] else "",
          "; ".join(x for x in (r["reasons"], r["left_out"]) if x)] for r in rows],
        limit=limit, data="--json or --csv FILE", total=total,
    )  # fmt: skip
    typer.echo(review.NOT_POOLED)
    for line in lsc_default_notes(lsc_rows):
        typer.echo(line)
    typer.echo(review.CAUTION)


def register(app: typer.Typer) -> None:
    """Add this module's commands to the app."""
    app.command("person")(person)
    app.command("trends")(trends_)
