"""Add derived indices, ECG lead amplitudes and per-segment strain measures to the catalogue.

Revision ID: 0002
Revises: 0001

Adds to table ``measure``:

- ECG lead amplitudes (entered, mm at 10 mm/mV, magnitudes): s_v1, r_v5,
  r_v6, r_avl, s_v3;
- derived echo/ECG indices (computed, never typed in): lv_mass, lvmi_echo,
  rwt, septal_posterior_ratio, e_over_e_prime, sokolow_lyon,
  cornell_voltage;
- per-segment longitudinal strain values (entered): AHA 17-segment numbering
  ls_segNN, ls_sys_segNN, ttp_segNN (NN = 01..17) and 18-segment strain
  model ls18_segNN, ls18_sys_segNN, ttp18_segNN (NN = 01..18);
- derived deformation indices: gls_segavg, gls_segavg_n, relaps,
  mech_dispersion, mech_dispersion_n, psi_global.

Plausible ranges are deliberately wide data-entry limits, not normal
limits; each row names where its range comes from.  LOINC codes only where
the project's terminology notes list one (LV mass 18087-7; IVS/PW ratio
18155-2); displays to be confirmed against the LOINC table.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None

measure = sa.table(
    "measure",
    sa.column("code", sa.String),
    sa.column("label", sa.String),
    sa.column("modality", sa.String),
    sa.column("unit", sa.String),
    sa.column("plausible_min", sa.Float),
    sa.column("plausible_max", sa.Float),
    sa.column("range_source", sa.String),
    sa.column("derived", sa.Boolean),
    sa.column("loinc", sa.String),
)

ENG = "engineering default, common practice"
ENG_DQ = "engineering default (project data-quality limits, reference notes section 8), common practice"


def _row(code, label, modality, unit, lo, hi, source, derived, loinc=None):
    return {
        "code": code,
        "label": label,
        "modality": modality,
        "unit": unit,
        "plausible_min": float(lo),
        "plausible_max": float(hi),
        "range_source": source,
        "derived": derived,
        "loinc": loinc,
    }


ECG_AMPLITUDES = [
    _row("s_v1", "S wave amplitude, lead V1 (depth, entered positive)", "ecg", "mm", 0, 80, ENG, False),
    _row("r_v5", "R wave amplitude, lead V5", "ecg", "mm", 0, 80, ENG, False),
    _row("r_v6", "R wave amplitude, lead V6", "ecg", "mm", 0, 80, ENG, False),
    _row("r_avl", "R wave amplitude, lead aVL", "ecg", "mm", 0, 80, ENG, False),
    _row("s_v3", "S wave amplitude, lead V3 (depth, entered positive)", "ecg", "mm", 0, 80, ENG, False),
]

DERIVED_INDICES = [
    _row("lv_mass", "LV mass, linear method (ASE-corrected cube formula)", "echo", "g", 20, 1000, ENG, True, "18087-7"),
    _row("lvmi_echo", "LV mass index, linear method (LV mass / BSA)", "echo", "g/m2", 10, 500, ENG, True),
    _row("rwt", "Relative wall thickness (2 x LVPWd / LVIDd)", "echo", "ratio", 0.05, 2.0, ENG, True),
    _row("septal_posterior_ratio", "Septal-to-posterior wall ratio (IVSd / LVPWd)", "echo", "ratio", 0.2, 6.0, ENG, True, "18155-2"),
    _row("e_over_e_prime", "Average E/e' (E / mean of septal and lateral e')", "echo", "ratio", 1, 60, ENG_DQ, True),
    _row("sokolow_lyon", "Sokolow-Lyon voltage (S V1 + larger of R V5, R V6)", "ecg", "mm", 0, 160, ENG, True),
    _row("cornell_voltage", "Cornell voltage (R aVL + S V3)", "ecg", "mm", 0, 160, ENG, True),
]

DEFORMATION_INDICES = [
    _row("gls_segavg", "Global longitudinal strain, average of segmental peak values", "echo", "%", -45, 20, ENG, True),
    _row("gls_segavg_n", "Number of segments in the segment-average global strain", "echo", "segments", 1, 18, ENG, True),
    _row("relaps", "Relative apical sparing ratio (apical / (basal + mid) strain)", "echo", "ratio", 0, 10, ENG, True),
    _row("mech_dispersion", "Mechanical dispersion (SD of time to peak strain, 16 LV segments)", "echo", "ms", 0, 400, ENG, True),
    _row("mech_dispersion_n", "Number of segments in the mechanical dispersion", "echo", "segments", 2, 16, ENG, True),
    _row("psi_global", "Global post-systolic index", "echo", "%", 0, 200, ENG, True),
]

# Segment names: AHA 17-segment model and the 18-segment strain model (six walls per level).
_RING6 = ("anterior", "anteroseptal", "inferoseptal", "inferior", "inferolateral", "anterolateral")
_RING4 = ("anterior", "septal", "inferior", "lateral")
AHA17_NAMES = (
    [f"basal {w}" for w in _RING6]
    + [f"mid {w}" for w in _RING6]
    + [f"apical {w}" for w in _RING4]
    + ["apex (apical cap)"]
)
STRAIN18_NAMES = [f"{lvl} {w}" for lvl in ("basal", "mid", "apical") for w in _RING6]

_SEGMENT_KINDS = (
    # AHA-numbering prefix, 18-segment prefix, label, unit, plausible min, plausible max
    ("ls_seg", "ls18_seg", "Peak longitudinal strain", "%", -50, 30),
    ("ls_sys_seg", "ls18_sys_seg", "Peak systolic longitudinal strain (before aortic valve closure)", "%", -50, 30),
    ("ttp_seg", "ttp18_seg", "Time from QRS onset to peak longitudinal strain", "ms", 0, 1500),
)


def _segment_rows():
    rows = []
    for aha_prefix, s18_prefix, label, unit, lo, hi in _SEGMENT_KINDS:
        for i, name in enumerate(AHA17_NAMES, start=1):
            rows.append(_row(f"{aha_prefix}{i:02d}", f"{label}, AHA segment {i} {name}", "echo", unit, lo, hi, ENG, False))
        for i, name in enumerate(STRAIN18_NAMES, start=1):
            rows.append(_row(f"{s18_prefix}{i:02d}", f"{label}, 18-segment model segment {i} {name}", "echo", unit, lo, hi, ENG, False))
    return rows


ROWS = ECG_AMPLITUDES + DERIVED_INDICES + DEFORMATION_INDICES + _segment_rows()
CODES = [r["code"] for r in ROWS]


def upgrade() -> None:
    op.bulk_insert(measure, ROWS)


def downgrade() -> None:
    op.execute(measure.delete().where(measure.c.code.in_(CODES)))
