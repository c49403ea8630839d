"""Adult echo limits against the guideline table values in the project's reference
notes (normal-limits.md section 2: ASE/EACVI 2015 chamber quantification, Lang et al.,
normal ranges and severity partitions [V2]; section 4a: NORRE GLS, Sugimoto 2017 [V]).
Table values in cm are written here in mm (1 cm = 10 mm)."""

import pytest

from tracker.normals import adult
from tracker.normals.assess import assess
from tracker.normals.classes import ABOVE, BELOW, NO_REFERENCE, WITHIN

# (measure, sex, value in catalogue unit, expected class, expected grade)
CASES = [
    # IVSd men 0.6-1.0 cm; mild 1.1-1.3, moderate 1.4-1.6, severe >= 1.7 (Lang 2015, section 2c)
    ("ivsd", "male", 12.0, ABOVE, "mild"),  # check 20: man, IVSd 1.2 cm -> mildly abnormal
    ("ivsd", "male", 10.0, WITHIN, None),
    ("ivsd", "male", 6.0, WITHIN, None),
    ("ivsd", "male", 5.5, BELOW, None),
    ("ivsd", "male", 13.0, ABOVE, "mild"),
    ("ivsd", "male", 14.0, ABOVE, "moderate"),
    ("ivsd", "male", 16.0, ABOVE, "moderate"),
    ("ivsd", "male", 17.0, ABOVE, "severe"),
    # IVSd women 0.6-0.9 cm; mild 1.0-1.2, moderate 1.3-1.5, severe >= 1.6
    ("ivsd", "female", 9.0, WITHIN, None),
    ("ivsd", "female", 10.0, ABOVE, "mild"),
    ("ivsd", "female", 13.0, ABOVE, "moderate"),
    ("ivsd", "female", 16.0, ABOVE, "severe"),
    # LVPWd has the same table values
    ("lvpwd", "male", 11.0, ABOVE, "mild"),
    ("lvpwd", "female", 15.0, ABOVE, "moderate"),
    # LVIDd men 4.2-5.8 / 5.9-6.3 / 6.4-6.8 / >6.8 cm; women 3.8-5.2 / 5.3-5.6 / 5.7-6.1 / >6.1
    ("lvidd", "male", 58.0, WITHIN, None),
    ("lvidd", "male", 60.0, ABOVE, "mild"),
    ("lvidd", "male", 66.0, ABOVE, "moderate"),
    ("lvidd", "male", 70.0, ABOVE, "severe"),
    ("lvidd", "female", 53.0, ABOVE, "mild"),
    ("lvidd", "female", 56.0, ABOVE, "mild"),
    ("lvidd", "female", 57.0, ABOVE, "moderate"),
    ("lvidd", "female", 62.0, ABOVE, "severe"),
    ("lvidd", "female", 37.0, BELOW, None),
    # LVIDs men 2.5-4.0, mild 4.1-4.3, moderate 4.4-4.5, severe > 4.5 cm
    ("lvids", "male", 42.0, ABOVE, "mild"),
    ("lvids", "male", 46.0, ABOVE, "severe"),
    ("lvids", "female", 39.0, ABOVE, "moderate"),
    # LVEF men 52-72, mild 41-51, moderate 30-40, severe < 30 %; women 54-74, 41-53
    ("lvef_echo", "male", 52.0, WITHIN, None),
    ("lvef_echo", "male", 51.0, BELOW, "mild"),
    ("lvef_echo", "male", 35.0, BELOW, "moderate"),
    ("lvef_echo", "male", 29.0, BELOW, "severe"),
    ("lvef_echo", "female", 53.0, BELOW, "mild"),
    ("lvef_echo", "female", 75.0, ABOVE, None),
    # LA volume index 16-34, mild 35-41, moderate 42-48, severe > 48 mL/m2 (any sex)
    ("lavi", "female", 34.0, WITHIN, None),
    ("lavi", "male", 35.0, ABOVE, "mild"),
    ("lavi", "unknown", 45.0, ABOVE, "moderate"),
    ("lavi", "male", 49.0, ABOVE, "severe"),
    # LV mass index, linear method: men 49-115, women 43-95 g/m2
    ("lvmi_echo", "male", 93.5, WITHIN, None),  # check 4
    ("lvmi_echo", "male", 99.0, WITHIN, None),  # check 5, man
    ("lvmi_echo", "female", 99.0, ABOVE, "mild"),  # check 5, woman (96-108 mild)
    ("lvmi_echo", "male", 150.0, ABOVE, "severe"),
    # RWT men 0.24-0.42, 0.43-0.46 / 0.47-0.51 / >= 0.52
    ("rwt", "male", 0.36, WITHIN, None),  # check 4
    ("rwt", "male", 0.50, ABOVE, "moderate"),  # check 5
    ("rwt", "female", 0.50, ABOVE, "moderate"),
    # LV mass, linear: men 88-224, women 67-162 g
    ("lv_mass", "male", 169.9, WITHIN, None),  # check 4
    ("lv_mass", "female", 180.0, ABOVE, "mild"),  # check 5 mass (163-186 mild)
]


@pytest.mark.parametrize(("measure", "sex", "value", "cls", "grade"), CASES)
def test_lang_2015_table_values(measure, sex, value, cls, grade):
    a = assess(measure, value, sex, 45.0, 1.8)
    assert (a.assessment, a.grade) == (cls, grade)
    assert a.reference_set == "lang2015"
    assert "Lang" in a.source and "2015" in a.source and "[V2]" in a.source


def test_limits_converted_from_cm_to_mm():
    # IVSd men 0.6-1.0 cm, women 0.6-0.9 cm (Lang 2015).
    m, f = adult.limits("ivsd", "male"), adult.limits("ivsd", "female")
    assert (m.lower, m.upper, m.mild_edge, m.moderate_edge) == (6.0, 10.0, 13.0, 16.0)
    assert (f.lower, f.upper) == (6.0, 9.0)
    assert adult.limits("lvidd", "female").mild_edge == 56.0  # 5.6 cm exactly, not 56.00000000000001
    a = assess("ivsd", 12.0, "male", 40.0)
    assert (a.lower, a.upper, a.unit) == (6.0, 10.0, "mm")


def test_value_converted_from_cm_does_not_cross_a_band_edge():
    # 1.3 cm entered and converted gives 13.000000000000002 mm: still mild (1.1-1.3 cm).
    a = assess("ivsd", 1.3 * 10, "male", 40.0)
    assert a.grade == "mild"


def test_gap_between_bands_belongs_to_the_more_abnormal_band():
    # 10.4 mm lies between 1.0 cm (normal) and 1.1 cm (mild): beyond the normal limit.
    assert assess("ivsd", 10.4, "male", 40.0).grade == "mild"
    assert assess("lvef_echo", 40.5, "male", 40.0).grade == "moderate"


def test_lvidd_z_from_mean_sd():
    # Lang 2015: LVIDd men 50.2 +- 4.1 mm, women 45.0 +- 3.6 mm [V2].
    assert assess("lvidd", 58.4, "male", 40.0).z == pytest.approx(2.0)
    assert assess("lvidd", 45.0, "female", 40.0).z == pytest.approx(0.0)
    assert assess("ivsd", 9.0, "male", 40.0).z is None  # no mean/SD published for IVSd


def test_helpers_for_geometry():
    # Lang 2015: LVMI upper normal 115 men / 95 women g/m2; RWT 0.42.
    assert adult.lvmi_upper_normal_g_m2("male") == 115.0
    assert adult.lvmi_upper_normal_g_m2("female") == 95.0
    assert adult.rwt_upper_normal("female") == 0.42


@pytest.mark.parametrize(
    ("sex", "value", "cls"),
    [
        # NORRE 2017: LLN -16.7% men, -17.8% women [V].
        ("male", -16.7, WITHIN),
        ("male", -16.6, BELOW),
        ("male", -22.0, WITHIN),
        ("female", -17.8, WITHIN),
        ("female", -17.7, BELOW),
        ("female", 2.0, BELOW),
    ],
)
def test_gls_norre_lower_limit(sex, value, cls):
    a = assess("gls", value, sex, 45.0)
    assert a.assessment == cls
    assert a.reference_set == "norre2017" and "[V]" in a.source
    assert a.upper == {"male": -16.7, "female": -17.8}[sex]


def test_la_diameter_is_tagged_from_memory():
    a = assess("la_diam", 41.0, "male", 50.0)
    assert a.assessment == ABOVE and (a.lower, a.upper) == (30.0, 40.0)  # 3.0-4.0 cm [M]
    assert "from memory, verify" in a.source


def test_mwt_echo_uses_ivsd_range_in_adults():
    a = assess("mwt_echo", 14.0, "male", 40.0)
    assert (a.assessment, a.grade, a.upper) == (ABOVE, "moderate", 10.0)
    assert "IVSd range" in a.note


def test_unknown_sex_gives_no_reference_for_sex_specific_limits():
    a = assess("ivsd", 12.0, "unknown", 40.0)
    assert a.assessment == NO_REFERENCE and a.lower is None and "sex" in a.note


def test_adult_limits_not_used_for_children():
    a = assess("lvef_echo", 45.0, "male", 12.0)
    assert a.assessment == NO_REFERENCE
    b = assess("lvef_echo", 45.0, "male", 12.0, reference_set="lang2015")
    assert b.assessment == "outside the reference range" and b.lower is None
