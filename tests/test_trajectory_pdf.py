"""The one-person trajectory report (tracker report trajectory) on the invented demo families.

Checks: the PDF opens with pypdf and carries the person code, measures, units,
the recall due date of `tracker recall`, the caution and "page N of M" on every
page; each page renders to PNG; HCM Risk-SCD shown equals
:func:`tracker.engines.risk.hcm_risk_scd` on the same inputs, and is refused
(no figure) when an answer is missing or a value is outside the validated
range; the polar map follows the AHA 17-segment layout; the colour scale is
ordered and covers the data-entry range; the trend band matches statsmodels;
an unknown person is one line on stderr with exit code 1 and nothing written.
Length: the demo people with the longest series (16 and 15 echos, the latter
with 17-segment strain in the demo data, and 13 echos with 3 CMRs) and the
invented strain case fit on two A4 pages; tables list the first and the latest
studies, say how many are not listed, and the charts keep every study.
Extra studies used here (a segmental strain study, an out-of-range wall) are
invented and imported into a copy of the demo database only.
"""

from __future__ import annotations

import csv
import json
import re
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pypdf
import pytest

from tracker.cli.app import main
from tracker.engines import risk
from tracker.engines.trend_band import mean_line_band
from tracker.engines.trends import per_person_ols
from tracker.outputs import polar_map as PM
from tracker.outputs import trajectory_pdf as T
from tracker.outputs.letter_pdf import render_png

ROOT = Path(__file__).resolve().parents[1]
SETTINGS = ROOT / "demo_family" / "clinic.toml"
PEOPLE = ROOT / "demo_family" / "people.csv"
AS_OF = "2026-12-01"
RELATIVE = "HV02-III-2"  # carrier with serial echo, CMR, uncertain status (demo_family/README.md)
AFFECTED = "HV01-IV-2"  # the carrier who converts; affected from 2021
PROBAND = "HV01-III-1"  # 15 echos, 3 CMRs, 17-segment strain at the 2025 and 2026 echos (demo_family/make_demo.py)
#: The demo people with the longest series: echo studies 16, 15, 13, 10 and 10 (demo_family/studies.csv).
LONGEST = (AFFECTED, PROBAND, "HV02-III-1", "HV05-II-1", RELATIVE)
STUDY_HEAD = "person,study_date,modality,site,height_cm,weight_kg,measure,value,unit\n"
STRAIN = [-21.3, -19.8, -17.5, -18.2, -16.4, -20.1, -20.5, -18.9, -13.2, -15.8, -17.0, -19.4, -11.6, -6.2, -9.8,
          -14.5, -3.1]  # fmt: skip


def _flat(text: str) -> str:
    return re.sub(r"\s+", " ", text)


def _cli(capsys, *args) -> tuple[int, str, str]:
    capsys.readouterr()
    code = main([str(a) for a in args])
    c = capsys.readouterr()
    return code, c.out, c.err


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("traj")
    db = folder / "demo.sqlite"
    assert main(["demo", "--db", str(db)]) == 0
    return folder, db


def _copy_with(demo, name: str, rows: str) -> str:
    folder, db = demo
    copy = folder / f"{name}.sqlite"
    shutil.copy(db, copy)
    csv_path = folder / f"{name}.csv"
    csv_path.write_text(STUDY_HEAD + rows, encoding="utf-8")
    assert main(["import", "studies", str(csv_path), "--db", str(copy)]) == 0
    return str(copy)


def _report(capsys, db, person, out: Path, *extra) -> tuple[dict, list[str], Path]:
    code, stdout, err = _cli(capsys, "report", "trajectory", person, "--out", out, "--as-of", AS_OF, "--settings",
                             SETTINGS, "--db", db, "--json", *extra)  # fmt: skip
    assert code == 0, err
    info = json.loads(stdout)
    path = Path(info["file"])
    pages = [p.extract_text() or "" for p in pypdf.PdfReader(str(path)).pages]
    return info, pages, path


@pytest.fixture(scope="module")
def relative(demo):
    folder, db = demo
    code = main(["report", "trajectory", RELATIVE, "--out", str(folder / "out"), "--as-of", AS_OF, "--settings",
                 str(SETTINGS), "--db", str(db)])  # fmt: skip
    assert code == 0
    path = folder / "out" / f"trajectory-{RELATIVE}.pdf"
    return path, [p.extract_text() or "" for p in pypdf.PdfReader(str(path)).pages]


# --------------------------------------------------------------------------- document content


def test_file_name_carries_the_code_only_and_no_name_appears(relative):
    path, pages = relative
    assert path.name == f"trajectory-{RELATIVE}.pdf"
    with PEOPLE.open(encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    names = {r["given_name"].strip() for r in rows if r["given_name"].strip()}
    text = " ".join(pages)
    assert not [n for n in names if re.search(rf"\b{re.escape(n)}\b", text)]


def test_facts_measures_and_units(relative):
    _, pages = relative
    text = _flat(" ".join(pages))
    assert f"Trajectory report {RELATIVE}" in text
    assert "family HV02" in text and "sex at birth female" in text and "carrier" in text
    for measure in ("mwt_echo", "mwt_cmr", "gls", "e_over_e_prime", "e_prime_septal", "lavi", "ECHO values",
                    "CMR values"):  # fmt: skip
        assert measure in text
    for unit in ("mm", "%", "cm/s", "mL/m2", "age (years)"):
        assert unit in text
    # a stored value and its limit as the review gives them (demo echo of 2014-10-21: 9.4 mm, 6-9 mm, above)
    assert "2014-10-21" in text and "9.4 H" in text
    assert "ESC 2023: >= 13 mm" in text  # first-degree relative threshold, 2023 ESC guideline (guidelines.md 4)
    assert "fitted line already past the threshold" in text  # the review engine's flag for this person


def test_caution_and_page_numbers_on_every_page(relative):
    _, pages = relative
    assert len(pages) >= 2
    for n, page in enumerate(pages, start=1):
        flat = _flat(page)
        assert "Decision support only" in flat
        assert "the treating clinician decides" in flat
        assert "local protocols and the current guideline" in flat
        assert f"page {n} of {len(pages)}" in flat
        assert RELATIVE in flat


def test_recall_due_date_matches_the_recall_command(relative, demo, capsys):
    _, pages = relative
    code, out, _ = _cli(capsys, "recall", RELATIVE, "--as-of", AS_OF, "--settings", SETTINGS, "--json", "--db", demo[1])
    assert code == 0
    expected = json.loads(out)
    text = _flat(" ".join(pages))
    assert expected["due"] and f"next due {expected['due']}" in text
    assert f"interval {expected['interval_months']} months" in text
    assert expected["rule_id"] in text


def test_every_page_renders_to_png(relative, tmp_path):
    path, pages = relative
    for i in range(len(pages)):
        png = render_png(path, tmp_path / f"p{i}.png", page=i, scale=1.0)
        assert png.stat().st_size > 10_000


def test_not_affected_gets_no_risk_figure(relative):
    _, pages = relative
    text = _flat(" ".join(pages))
    assert "Not estimated: HCM Risk-SCD is for patients with HCM" in text
    assert "Estimated 5-year risk" not in text


# --------------------------------------------------------------------------- Risk-SCD


def _latest_echo(capsys, db) -> tuple[float, dict]:
    code, out, _ = _cli(capsys, "person", AFFECTED, "--json", "--db", db)
    assert code == 0
    echo = [s for s in json.loads(out)["studies"] if s["modality"] == "echo" and s["study_date"] <= AS_OF][-1]
    return echo["age_years"], {v["measure"]: v["value"] for v in echo["values"]}


def test_risk_figure_equals_the_risk_engine(demo, capsys):
    info, pages, _ = _report(capsys, str(demo[1]), AFFECTED, demo[0] / "risk")
    age, v = _latest_echo(capsys, str(demo[1]))
    expected = risk.hcm_risk_scd(
        age_years=age, mwt_mm=v["mwt_echo"], la_diameter_mm=v["la_diam"],
        lvot_max_mmhg=risk.lvot_max_for_risk_scd(v.get("lvot_rest"), v.get("lvot_valsalva")),
        family_history_scd=False, nsvt=False, unexplained_syncope=False, prior_cardiac_arrest_or_sustained_vt=False,
        competitive_athlete=False, metabolic_infiltrative_or_syndromic=False,
    )  # fmt: skip
    assert expected.computed
    assert info["risk"]["status"] == "computed"
    assert info["risk"]["risk_5y_pct"] == pytest.approx(expected.risk_5y_pct, rel=1e-12)
    text = _flat(" ".join(pages))
    assert f"Estimated 5-year risk of sudden cardiac death: {expected.risk_5y_pct:.2f}%" in text
    assert "age 16-115 years" in text and "does not apply outside this range" in text


def _without_answer(demo, name: str, answer: str) -> str:
    """A copy of the demo store in which AFFECTED's ``answer`` was never recorded."""
    import sqlite3

    copy = demo[0] / f"{name}.sqlite"
    shutil.copy(demo[1], copy)
    con = sqlite3.connect(copy)
    con.execute(f"UPDATE assessment SET {answer} = NULL WHERE person_id = (SELECT id FROM person WHERE code = ?)",
                (AFFECTED,))  # fmt: skip
    con.commit()
    con.close()
    return str(copy)


def test_risk_answers_come_from_the_stored_assessments(demo, capsys):
    info, pages, _ = _report(capsys, str(demo[1]), AFFECTED, demo[0] / "answers")
    text = _flat(" ".join(pages))
    assert "NSVT no" in text and "unexplained syncope no" in text
    assert "answers as recorded at the assessment of 2026-" in text


def test_risk_refused_when_an_answer_is_missing(demo, capsys):
    info, pages, _ = _report(capsys, _without_answer(demo, "missing", "nsvt"), AFFECTED, demo[0] / "missing")
    assert info["risk"]["status"] == "refused" and info["risk"]["risk_5y_pct"] is None
    text = _flat(" ".join(pages))
    assert "Not computed" in text and "missing: nsvt" in text
    assert "Estimated 5-year risk" not in text


def test_risk_refused_outside_the_validated_range(demo, capsys):
    # invented study: maximal wall 36 mm, beyond the model's 10-35 mm (O'Mahony 2014 range as reproduced [V2])
    site = "Ambersett General Infirmary echocardiography lab"
    rows = "".join(f"{AFFECTED},2026-11-20,echo,{site},181.0,78.0,{m},{v},{u}\n"
                   for m, v, u in (("mwt_echo", 36, "mm"), ("la_diam", 44, "mm"), ("lvot_rest", 6, "mmHg")))
    db = _copy_with(demo, "wall36", rows)
    info, pages, _ = _report(capsys, db, AFFECTED, demo[0] / "range")
    assert info["risk"]["status"] == "refused"
    text = _flat(" ".join(pages))
    assert "outside validated range: mwt_mm = 36 (range 10-35)" in text
    assert "Estimated 5-year risk" not in text


# --------------------------------------------------------------------------- strain map


def test_segmental_strain_map_in_the_report(demo, capsys, tmp_path):
    site = "Ambersett General Infirmary echocardiography lab"
    rows = "".join(f"{RELATIVE},2026-11-20,echo,{site},166.0,70.0,ls_seg{i:02d},{v},%\n" for i, v in enumerate(STRAIN, 1))
    db = _copy_with(demo, "strain", rows)
    info, pages, path = _report(capsys, db, RELATIVE, demo[0] / "strain_out")
    assert info["strain_map"] == "2026-11-20"
    text = _flat(" ".join(pages))
    assert "Echo 2026-11-20: peak longitudinal strain per segment" in text
    for v in (-21.3, -6.2, -3.1):
        assert f"{v:.1f}" in text
    assert "gls_segavg (computed)" in text
    for b in PM.COLOUR_BINS:
        assert b.label in text
    assert info["pages"] == len(pages) == 2  # 10 echos, 2 CMRs and the map: two pages
    for i in range(len(pages)):
        render_png(path, tmp_path / f"s{i}.png", page=i, scale=1.0)


# --------------------------------------------------------------------------- length


@pytest.mark.parametrize("person", LONGEST)
def test_the_longest_demo_series_fit_on_two_pages(demo, capsys, person):
    info, pages, _ = _report(capsys, str(demo[1]), person, demo[0] / f"two-{person}")
    assert info["pages"] == len(pages) == 2
    for n, page in enumerate(pages, start=1):
        assert f"page {n} of 2" in _flat(page) and "Decision support only" in _flat(page)


def test_tables_list_first_and_latest_and_charts_keep_every_study(demo, capsys, monkeypatch):
    shown = {}
    write = T.write_trajectory_pdf
    monkeypatch.setattr(T, "write_trajectory_pdf", lambda doc, path: shown.setdefault("doc", doc) and write(doc, path))
    info, pages, _ = _report(capsys, str(demo[1]), PROBAND, demo[0] / "listing")
    code, out, _ = _cli(capsys, "person", PROBAND, "--json", "--db", demo[1])
    assert code == 0
    echo = [s["study_date"] for s in json.loads(out)["studies"] if s["modality"] == "echo" and s["study_date"] <= AS_OF]
    assert len(echo) == 15 and info["tables"]["echo"] == 15
    text = _flat(" ".join(pages))
    assert "ECHO values: first study and the latest 5 of 15" in text
    assert f"Not listed: 9 ECHO studies, {echo[1]} to {echo[9]}." in text
    assert f"every value of every study is in `tracker person {PROBAND}`" in text
    assert echo[0] in text and all(d in text for d in echo[10:])
    mwt = next(c for c in shown["doc"].charts if c.measure == "mwt_echo")
    assert len(mwt.points) == 15  # the chart keeps every study
    # the demo's own segmental strain: the latest of the two studies, drawn on page 1 beside the charts
    assert info["strain_map"] == echo[-1]
    assert "peak LS, %" in pages[0] and "Latest of 2 studies with segmental strain" in text


def test_table_columns_first_study_and_the_latest():
    assert T.table_columns(4) == [0, 1, 2, 3]
    assert T.table_columns(6) == list(range(6))
    assert T.table_columns(15) == [0, 10, 11, 12, 13, 14]
    assert T.table_columns(15, size=4) == [0, 12, 13, 14]


# --------------------------------------------------------------------------- polar map geometry and colours


def test_polar_map_geometry_follows_cerqueira_2002():
    # Cerqueira et al., Circulation 2002;105:539-42: basal 1-6, mid 7-12, apical 13-16, apex 17;
    # segment 1 basal anterior at the top, then counter-clockwise anteroseptal, inferoseptal, inferior,
    # inferolateral, anterolateral; apical anterior, septal, inferior, lateral.
    g = {s.number: s for s in PM.segment_geometry()}
    assert sorted(g) == list(range(1, 18))
    walls6 = ["anterior", "anteroseptal", "inferoseptal", "inferior", "inferolateral", "anterolateral"]
    assert [g[n].wall for n in range(1, 7)] == walls6 and [g[n].wall for n in range(7, 13)] == walls6
    assert [g[n].wall for n in range(13, 17)] == ["anterior", "septal", "inferior", "lateral"]
    assert g[1].name == "basal anterior" and g[9].name == "mid inferoseptal" and g[17].level == "apex"
    for first, count in ((1, 6), (7, 6), (13, 4)):
        step = 360 / count
        centres = [g[first + i].centre_deg % 360 for i in range(count)]
        assert centres[0] == pytest.approx(90.0)  # anterior at 12 o'clock
        for i in range(count):  # counter-clockwise: each next wall +step degrees
            assert centres[i] == pytest.approx((90.0 + i * step) % 360)
            assert g[first + i].end_deg - g[first + i].start_deg == pytest.approx(step)
    # septum on the left (centre angle 180 in the apical ring), lateral on the right (0)
    assert g[14].centre_deg % 360 == pytest.approx(180.0) and g[16].centre_deg % 360 == pytest.approx(0.0)
    # rings from outside in; the apex is the central disc
    assert g[1].outer == 1.0 and g[1].inner == g[7].outer and g[7].inner == g[13].outer and g[13].inner == g[17].outer
    assert g[17].inner == 0.0


def test_colour_scale_bins_are_ordered_and_cover_the_entry_range():
    bins = PM.COLOUR_BINS
    assert bins[0].low == PM.SCALE_MIN_PCT == -50.0 and bins[-1].high == PM.SCALE_MAX_PCT == 30.0  # migration 0002
    for a, b in zip(bins, bins[1:]):
        assert a.high == b.low  # contiguous, no gap, no overlap
        assert a.low < a.high
        assert a.lightness > b.lightness  # perceptual order: darker as shortening falls
    assert len({b.hex for b in bins}) == len(bins)
    for v in np.linspace(-50, 30, 801):
        assert PM.bin_for(float(v)) is not None
    assert PM.bin_for(-20.0) is bins[1] and PM.bin_for(-20.01) is bins[0] and PM.bin_for(30.0) is bins[-1]
    assert PM.bin_for(30.5) is None and PM.colour_for(30.5) == PM.OUT_OF_SCALE and PM.bin_for(None) is None
    # CIELAB -> sRGB: white point and black (IEC 61966-2-1 sRGB)
    assert PM.lab_to_hex(100, 0, 0) == "#FFFFFF" and PM.lab_to_hex(0, 0, 0) == "#000000"
    d = PM.polar_map_drawing({n: STRAIN[n - 1] for n in range(1, 18)})
    texts = {s.text for s in d.getContents() if hasattr(s, "text")}
    assert {b.label for b in bins} <= texts and "-21.3" in texts and "-3.1" in texts


# --------------------------------------------------------------------------- trend band


def test_mean_line_band_matches_statsmodels():
    import statsmodels.api as sm

    # invented series; reference: statsmodels OLS get_prediction mean confidence interval
    age = np.array([30.1, 31.0, 32.2, 33.1, 34.0, 35.3])
    val = np.array([9.4, 9.9, 10.1, 10.8, 10.9, 11.7])
    frame = pd.DataFrame({"person": "X", "measure": "mwt_echo", "age_years": age, "value": val})
    ols = per_person_ols(frame).iloc[0]
    grid = np.array([30.0, 32.5, 36.0])
    band = mean_line_band(ols, grid)
    fit = sm.OLS(val, sm.add_constant(age)).fit()
    ref = fit.get_prediction(sm.add_constant(grid)).summary_frame(alpha=0.05)
    assert np.allclose(band["fit"], ref["mean"], rtol=1e-10)
    assert np.allclose(band["low"], ref["mean_ci_lower"], rtol=1e-10)
    assert np.allclose(band["high"], ref["mean_ci_upper"], rtol=1e-10)
    two = mean_line_band(per_person_ols(frame.iloc[:2]).iloc[0], grid)
    assert two["low"].isna().all() and two["fit"].notna().all()


# --------------------------------------------------------------------------- errors


def test_unknown_person_is_one_line_and_exit_1(demo, capsys, tmp_path):
    out = tmp_path / "none"
    code, stdout, err = _cli(capsys, "report", "trajectory", "HV09-I-1", "--out", out, "--db", demo[1])
    assert code == 1
    assert err.strip() == "error: unknown person 'HV09-I-1'"
    assert stdout == "" and not out.exists()
