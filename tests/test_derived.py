"""Derived echo/ECG indices and the 0002 measure-catalogue migration."""

from __future__ import annotations

import importlib.util
import math
from pathlib import Path

import numpy as np
import pytest
import sqlalchemy as sa
from alembic.migration import MigrationContext
from alembic.operations import Operations

from tracker.engines import deformation, derived, segments

# normal-limits.md section 9, check values 4 and 5 (inputs there in cm -> mm here).
CHECK4 = dict(ivsd=10.0, lvidd=50.0, lvpwd=9.0, bsa=1.818)  # LVM 169.9 g; LVMI 93.5; RWT 0.36
CHECK5 = dict(ivsd=12.0, lvidd=44.0, lvpwd=11.0, bsa=1.818)  # LVM 180.0 g; LVMI 99.0; RWT 0.50


# --- Devereux LV mass, LVMI, RWT: normal-limits.md section 9, checks 4-5 (values to 0.1 g) ---

@pytest.mark.parametrize(
    "case, mass, lvmi, rwt",
    [(CHECK4, 169.9, 93.5, 0.36), (CHECK5, 180.0, 99.0, 0.50)],
    ids=["check4", "check5"],
)
def test_devereux_mass_index_rwt_check_values(case, mass, lvmi, rwt):
    m = derived.lv_mass_g(case["ivsd"], case["lvidd"], case["lvpwd"])
    assert m == pytest.approx(mass, abs=0.05)  # normal-limits.md s9 check 4/5 (1 decimal)
    assert derived.lv_mass_index_g_m2(m, case["bsa"]) == pytest.approx(lvmi, abs=0.05)
    assert derived.relative_wall_thickness(case["lvpwd"], case["lvidd"]) == pytest.approx(rwt, abs=0.005)


def test_geometry_check_values():
    # normal-limits.md s9 check 4: normal geometry for a man.
    assert derived.geometry_class(93.5, 0.36, "male") == derived.NORMAL
    # check 5: man concentric remodelling; woman concentric hypertrophy (Lang 2015 limits 115/95 g/m2).
    assert derived.geometry_class(99.0, 0.50, "male") == derived.CONCENTRIC_REMODELLING
    assert derived.geometry_class(99.0, 0.50, "female") == derived.CONCENTRIC_HYPERTROPHY


def test_geometry_boundaries_and_classes():
    # Lang 2015 [V2]: RWT > 0.42 concentric; LVMI above 115 (men) / 95 (women) high.
    assert derived.geometry_class(115.0, 0.42, "male") == derived.NORMAL
    assert derived.geometry_class(115.1, 0.42, "male") == derived.ECCENTRIC_HYPERTROPHY
    assert derived.geometry_class(95.0, 0.43, "female") == derived.CONCENTRIC_REMODELLING
    assert derived.geometry_class(95.1, 0.43, "female") == derived.CONCENTRIC_HYPERTROPHY
    assert derived.geometry_class(120.0, 0.30, "unknown") is None
    assert derived.geometry_class(float("nan"), 0.30, "male") is None


def test_vectorised_matches_scalar():
    ivsd = np.array([CHECK4["ivsd"], CHECK5["ivsd"], np.nan])
    lvidd = np.array([CHECK4["lvidd"], CHECK5["lvidd"], 48.0])
    lvpwd = np.array([CHECK4["lvpwd"], CHECK5["lvpwd"], 9.0])
    m = derived.lv_mass_g(ivsd, lvidd, lvpwd)
    assert m.shape == (3,)
    assert m[0] == pytest.approx(169.9, abs=0.05) and m[1] == pytest.approx(180.0, abs=0.05)
    assert math.isnan(m[2])
    lvmi = derived.lv_mass_index_g_m2(m, 1.818)
    rwt = derived.relative_wall_thickness(lvpwd, lvidd)
    cls = derived.geometry_class(lvmi, rwt, np.array(["male", "female", "male"], dtype=object))
    assert list(cls) == [derived.NORMAL, derived.CONCENTRIC_HYPERTROPHY, None]


def test_mass_formula_by_hand():
    # Lang 2015 equation [V2]: 0.8*1.04*((1.1+4.8+1.0)^3 - 4.8^3) + 0.6 with cm.
    expected = 0.8 * 1.04 * ((1.1 + 4.8 + 1.0) ** 3 - 4.8**3) + 0.6
    assert derived.lv_mass_g(11, 48, 10) == pytest.approx(expected, rel=1e-12)
    assert math.isnan(derived.lv_mass_g(0, 48, 10))


def test_ratios_and_e_over_e_prime():
    assert derived.septal_posterior_ratio(18.0, 9.0) == pytest.approx(2.0)
    assert math.isnan(derived.septal_posterior_ratio(18.0, 0.0))
    # Nagueh 2016 [V2]: average E/e' = E / mean(septal, lateral).
    assert derived.average_e_over_e_prime(80.0, 6.0, 10.0) == pytest.approx(10.0)
    assert math.isnan(derived.average_e_over_e_prime(80.0, 6.0, np.nan))


def test_sokolow_lyon_larger_of_v5_v6_and_threshold():
    # Sokolow & Lyon 1949 [V2]: S V1 + larger R V5/V6, >= 35 mm.
    assert derived.sokolow_lyon_mm(15, 18, 21) == pytest.approx(36)
    assert derived.sokolow_lyon_mm(15, 21, 18) == pytest.approx(36)
    assert math.isnan(derived.sokolow_lyon_mm(15, 21, np.nan))
    assert derived.sokolow_lyon_criterion(35.0) is True
    assert derived.sokolow_lyon_criterion(34.9) is False
    assert derived.sokolow_lyon_criterion(None) is None


def test_cornell_sex_specific_threshold():
    # Casale 1985/1987 [V2]: > 28 mm men, > 20 mm women.
    assert derived.cornell_voltage_mm(12, 16) == pytest.approx(28)
    assert derived.cornell_criterion(28.0, "male") is False
    assert derived.cornell_criterion(28.5, "male") is True
    assert derived.cornell_criterion(20.0, "female") is False
    assert derived.cornell_criterion(20.5, "female") is True
    assert derived.cornell_criterion(30.0, "unknown") is None


def test_derive_study_full_and_missing():
    values = {
        "ivsd": 12.0, "lvidd": 44.0, "lvpwd": 11.0,
        "mv_e": 90.0, "e_prime_septal": 5.0, "e_prime_lateral": 7.0,
        "s_v1": 20.0, "r_v5": 22.0, "r_v6": 19.0, "r_avl": 9.0, "s_v3": 14.0,
    }
    out = derived.derive_study(values, bsa_m2=1.818)
    assert set(out) == set(derived.DERIVED_CODES)
    assert out["lv_mass"] == pytest.approx(180.0, abs=0.05)  # normal-limits.md s9 check 5
    assert out["lvmi_echo"] == pytest.approx(99.0, abs=0.05)
    assert out["rwt"] == pytest.approx(0.50)
    assert out["e_over_e_prime"] == pytest.approx(15.0)
    assert out["sokolow_lyon"] == pytest.approx(42.0)
    assert out["cornell_voltage"] == pytest.approx(23.0)

    partial = derived.derive_study({"ivsd": 12.0, "lvidd": 44.0, "mv_e": 90.0, "e_prime_septal": 5.0, "r_v5": 30.0})
    assert partial == {}  # nothing has all its inputs
    no_bsa = derived.derive_study({"ivsd": 12.0, "lvidd": 44.0, "lvpwd": 11.0, "lvot_rest": None})
    assert set(no_bsa) == {"lv_mass", "rwt", "septal_posterior_ratio"}


# --- migration 0002 ---------------------------------------------------------------------------

MIGRATION = Path(__file__).resolve().parents[1] / "migrations" / "versions" / "0002_derived_measures.py"
# LOINC codes listed in the project's terminology notes (standards.md s4a, s4b).
LISTED_LOINC = {"18154-5", "18152-9", "18155-2", "29436-3", "29438-9", "18087-7", "80019-3", "10230-1", "18043-0", "29469-4"}


def _load_migration():
    spec = importlib.util.spec_from_file_location("migration_0002", MIGRATION)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def _run(engine, fn):
    with engine.begin() as conn:
        with Operations.context(MigrationContext.configure(conn)):
            fn()


def test_migration_upgrade_downgrade_roundtrip():
    mig = _load_migration()
    assert (mig.revision, mig.down_revision) == ("0002", "0001")
    engine = sa.create_engine("sqlite://")
    meta = sa.MetaData()
    table = sa.Table(
        "measure", meta,
        sa.Column("code", sa.String, primary_key=True), sa.Column("label", sa.String),
        sa.Column("modality", sa.String), sa.Column("unit", sa.String),
        sa.Column("plausible_min", sa.Float), sa.Column("plausible_max", sa.Float),
        sa.Column("range_source", sa.String), sa.Column("derived", sa.Boolean),
        sa.Column("loinc", sa.String, nullable=True),
    )
    meta.create_all(engine)
    with engine.begin() as conn:
        conn.execute(table.insert().values(code="ivsd", label="IVSd", modality="echo", unit="mm",
                                           plausible_min=3, plausible_max=60, range_source="x", derived=False))
    _run(engine, mig.upgrade)
    with engine.connect() as conn:
        rows = {r.code: r for r in conn.execute(sa.select(table))}
    new = set(rows) - {"ivsd"}
    expected = (
        set(derived.DERIVED_CODES) | set(derived.ECG_INPUT_CODES) | set(deformation.DERIVED_CODES)
        | set(segments.all_segment_measure_codes())
    )
    assert new == expected
    for code in derived.DERIVED_CODES + deformation.DERIVED_CODES:
        assert rows[code].derived is True, code
    for code in derived.ECG_INPUT_CODES + segments.all_segment_measure_codes():
        assert rows[code].derived is False, code
    for code in derived.ECG_INPUT_CODES:
        assert (rows[code].modality, rows[code].unit) == ("ecg", "mm")
    for r in rows.values():
        assert r.loinc is None or r.loinc in LISTED_LOINC
        assert r.plausible_min < r.plausible_max and r.range_source
    # Labels carry the standard segment names (Cerqueira 2002 numbering).
    for model in (segments.AHA17, segments.STRAIN18):
        for s in segments.segments(model):
            assert s.name in rows[segments.measure_code(model, segments.LS, s.number)].label
    # Plausible ranges admit the check values used in the tests.
    assert rows["lv_mass"].plausible_min < 169.9 < rows["lv_mass"].plausible_max
    _run(engine, mig.downgrade)
    with engine.connect() as conn:
        left = [r.code for r in conn.execute(sa.select(table))]
    assert left == ["ivsd"]
