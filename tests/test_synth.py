"""The synthetic cohort: it imports cleanly, is deterministic, follows autosomal-dominant
inheritance, and its true wall-thickness slopes are recovered by the trend engine."""

from __future__ import annotations

import datetime as dt
import re

import numpy as np
import pandas as pd
import pytest
import typer
from scipy import stats
from typer.testing import CliRunner

from tracker import synth
from tracker.cli.synth import synth as synth_command
from tracker.engines.trends import per_person_ols
from tracker.errors import UserError
from tracker.io.layouts import LAYOUTS, RECORD_KINDS as IMPORT_ORDER  # a synthetic cohort has no contact log

FILES = [LAYOUTS[k].file_name for k in IMPORT_ORDER]


@pytest.fixture(scope="module")
def moderate():
    """A moderate cohort for the statistical checks (generated in memory, never imported)."""
    return synth.generate(1500, 20261130)


def test_small_cohort_imports_cleanly_and_twice_adds_nothing(db_url, run, tmp_path):
    cohort = synth.generate(30, 7)
    written = synth.write(cohort, tmp_path / "cohort")
    assert run("init", db=db_url).code == 0
    r = run("import", "all", tmp_path / "cohort", db=db_url)
    assert r.code == 0, r
    for name in FILES:
        rows = written[name]
        assert rows > 0
        assert f"{name} " in r.out and f"{rows} rows checked, added {rows}, 0 already stored" in r.out, r.out
    again = run("import", "all", tmp_path / "cohort", db=db_url)
    assert again.code == 0, again
    assert "added 0," in again.out and ", added 1" not in again.out


def test_same_seed_gives_the_same_bytes(tmp_path):
    a, b, c = tmp_path / "a", tmp_path / "b", tmp_path / "c"
    synth.write(synth.generate(40, 11), a)
    synth.write(synth.generate(40, 11), b)
    synth.write(synth.generate(40, 12), c)
    for name in FILES + [synth.TRUTH_FILE]:
        assert (a / name).read_bytes() == (b / name).read_bytes(), name
    assert (a / "studies.csv").read_bytes() != (c / "studies.csv").read_bytes()


def test_pedigrees_have_3_to_4_generations_and_5_to_15_members(moderate):
    people, truth = moderate.people, moderate.truth
    size = people.groupby("family").size()
    assert size.min() >= 5 and size.max() <= 15
    gens = truth.groupby("family")["generation"].max()
    assert set(gens.unique()) == {3, 4}
    founders = people[truth["role"].to_numpy() == "founder"]
    assert (founders["placeholder"] == "yes").all() and (founders["vital_status"] == "deceased").all()
    assert founders["birth_date"].str.fullmatch(r"\d{4}").all()
    partners = people[truth["role"].to_numpy() == "partner"]
    assert len(partners) > 0 and (partners["placeholder"] == "no").all()
    assert (people.groupby("family")["proband"].apply(lambda s: (s == "yes").sum()) == 1).all()
    codes = set(people["person"])
    assert all(re.fullmatch(r"SYN\d{5}-(I|II|III|IV)-\d+", p) for p in codes)
    for col in ("mother", "father"):
        assert people[col].dropna().isin(codes).all()


def test_variant_classes_and_class_history(moderate):
    v = moderate.variants
    current = v.sort_values("classified_on").groupby("family").tail(1)["acmg_class"].value_counts(normalize=True)
    assert current["pathogenic"] + current["likely_pathogenic"] > 0.6
    assert current["uncertain_significance"] > 0.05
    no_variant = moderate.genetic_results["result"].eq("no_variant_found").sum()
    assert no_variant > 0.05 * len(moderate.families)
    history = v.groupby("family").size()
    assert ((history > 1).sum()) >= 10
    assert moderate.genetic_results["test_type"].eq("predictive").sum() > 0.3 * len(moderate.families)


def test_dates_are_not_in_the_future_and_not_before_birth(moderate):
    end = synth.END.isoformat()
    dates = [
        moderate.studies["study_date"], moderate.assessments["assessment_date"],
        moderate.genetic_results["test_date"], moderate.variants["classified_on"],
        moderate.people["contact_status_date"].dropna(), moderate.people["death_date"].dropna(),
    ]  # fmt: skip
    for d in dates:
        assert d.max() <= end
    first = moderate.studies.groupby("person")["study_date"].min()
    birth = moderate.people.set_index("person")["birth_date"].reindex(first.index)
    assert (birth < first).all()


def _parents_long(people: pd.DataFrame) -> pd.DataFrame:
    return pd.concat(
        [people[["person", "mother"]].rename(columns={"mother": "parent"}),
         people[["person", "father"]].rename(columns={"father": "parent"})]
    ).dropna()  # fmt: skip


def test_children_of_carriers_carry_at_one_half(moderate):
    """Autosomal-dominant transmission: a child of a carrier carries with probability 1/2
    (guidelines.md section 1: first-degree relatives of carriers are at 50% risk). Checked
    with scipy's exact binomial test; the proband and the proband's carrier parent are
    carriers by construction (ascertainment) and left out."""
    t = moderate.truth.set_index("person")
    links = _parents_long(moderate.people)
    links = links[links["parent"].map(t["carrier"])]
    children = t.loc[links["person"].unique()]
    children = children[~children["ascertained"]]
    k, n = int(children["carrier"].sum()), len(children)
    assert n > 2000
    assert stats.binomtest(k, n, 0.5).pvalue > 0.001, (k, n)
    assert abs(k / n - 0.5) < 0.04
    # A child with no carrier parent never carries; partners marrying in never carry.
    carrier_parent = _parents_long(moderate.people).assign(c=lambda d: d["parent"].map(t["carrier"]))
    any_carrier = carrier_parent.groupby("person")["c"].any()
    assert not t.loc[any_carrier.index[~any_carrier], "carrier"].any()
    assert not t.loc[t["role"] == "partner", "carrier"].any()


def test_predictive_results_agree_with_the_true_genotype(moderate):
    g = moderate.genetic_results
    t = moderate.truth.set_index("person")
    pred = g[(g["test_type"] == "predictive") & (g["result"] != "inconclusive")]
    assert len(pred) > 300
    assert (pred["result"].eq("carrier").to_numpy() == t.loc[pred["person"], "carrier"].to_numpy()).all()
    # Children of a tested non-carrier are not at risk: they are never tested or seen.
    nar = t[t["not_at_risk"]]
    assert len(nar) > 0 and not nar["seen"].any() and not nar["carrier"].any()


def _wall_series(cohort: synth.Cohort, measure: str = "mwt_echo") -> pd.DataFrame:
    s = cohort.studies[cohort.studies["measure"] == measure]
    birth = cohort.people.set_index("person")["birth_date"]
    days = pd.to_datetime(s["study_date"]) - pd.to_datetime(s["person"].map(birth))
    return pd.DataFrame({
        "person": s["person"].to_numpy(), "measure": measure, "modality": s["modality"].to_numpy(),
        "age_years": (days.dt.days / 365.2425).to_numpy(), "value": s["value"].to_numpy(dtype=float),
    })  # fmt: skip


def test_true_slopes_are_recovered_within_their_intervals_at_the_nominal_rate(moderate):
    """Adult series (every study at age >= 25) follow a straight line in age plus normal
    noise, so the 95% slope CI of per_person_ols should hold the true slope in 95% of
    series (exact binomial test, scipy)."""
    fit = per_person_ols(_wall_series(moderate)).set_index("person")
    t = moderate.truth.set_index("person")
    lin = t[t["linear"] & (t["n_echo"] >= 3)]
    f = fit.loc[lin.index]
    assert (f["n"].to_numpy() == lin["n_echo"].to_numpy()).all()
    true = lin["slope_mm_per_year"].to_numpy()
    inside = (f["ci_low"].to_numpy() <= true) & (true <= f["ci_high"].to_numpy())
    n, k = len(inside), int(inside.sum())
    assert n > 1000
    assert stats.binomtest(k, n, 0.95).pvalue > 0.001, (k, n)
    # Non-carriers are flat within noise: mean slope near 0, residual SD near the 1.0 mm generated.
    flat = f[lin["trajectory"].to_numpy() == "non_carrier"]
    assert abs(flat["slope"].mean()) < 3 * flat["slope"].std() / np.sqrt(len(flat))
    pooled_sd = np.sqrt((flat["resid_sd"] ** 2 * flat["resid_df"]).sum() / flat["resid_df"].sum())
    assert 0.9 < pooled_sd < 1.1
    # Progressing carriers drift 0.2-1.5 mm/year; some convert past 13 mm.
    prog = f[lin["trajectory"].to_numpy() == "progressing"]
    assert 0.5 < prog["slope"].median() < 1.2
    assert (prog["last_value"] >= 13.0).mean() > 0.2


def test_probands_are_thick_and_children_grow(moderate):
    w = _wall_series(moderate)
    t = moderate.truth.set_index("person")
    first = w.sort_values("age_years").groupby("person").head(1).set_index("person")
    probands = first[t.loc[first.index, "proband"].to_numpy()]
    assert probands["value"].between(15.0, 32.0).all()
    assert probands["value"].median() > 20.0
    # Non-carrier children: wall thickness grows with body size (positive slope before age 16).
    kids = w[w["person"].map(t["trajectory"]).eq("non_carrier") & (w["age_years"] < 16)]
    kid_fit = per_person_ols(kids)
    kid_fit = kid_fit[kid_fit["n"] >= 3]
    assert len(kid_fit) > 50 and kid_fit["slope"].median() > 0.1


def test_command_writes_a_cohort_and_refuses_to_overwrite(tmp_path):
    app = typer.Typer()
    app.command()(synth_command)
    app.command("unused")(lambda: None)  # two commands: typer keeps the command name
    runner = CliRunner()
    out = tmp_path / "cohort"
    r = runner.invoke(app, ["synth", "--families", "5", "--seed", "3", "--out", str(out)])
    assert r.exit_code == 0, r.output
    assert all((out / name).exists() for name in FILES)
    assert "5 families" in r.output
    again = runner.invoke(app, ["synth", "--families", "5", "--seed", "3", "--out", str(out)])
    assert isinstance(again.exception, UserError)
    forced = runner.invoke(app, ["synth", "--families", "5", "--seed", "3", "--out", str(out), "--force"])
    assert forced.exit_code == 0, forced.output
    assert "Example:" in (synth_command.__doc__ or "")


def test_end_of_follow_up_is_the_last_date():
    assert synth.END == dt.date(2026, 11, 30)
