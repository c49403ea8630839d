"""Adult CMR references against the project's reference notes (normal-limits.md
section 6): Petersen 2017 UK Biobank LVMI men 53 +- 9, women 42 +- 7 g/m2, LVEF men
58 +- 5, women 61 +- 5 % [V]; Kawel 2012 mean maximal mid-cavity thickness [V];
Dabir 2014 ECV 0.25 +- 0.04 (1.5 T), 0.26 +- 0.04 (3 T) [V]; extensive LGE >= 15%
(AHA 2024 Table 7 [V])."""

import numpy as np
import pytest

from tracker.normals import cmr
from tracker.normals.assess import assess
from tracker.normals.classes import ABOVE, BELOW, NO_REFERENCE, WITHIN


def test_petersen_lvmi_and_lvef():
    a = assess("lvmi_cmr", 53.0, "male", 50.0)
    assert a.z == pytest.approx(0.0) and (a.lower, a.upper) == (35.0, 71.0)  # 53 +- 2 x 9
    assert assess("lvmi_cmr", 72.0, "male", 50.0).assessment == ABOVE
    f = assess("lvmi_cmr", 56.0, "female", 50.0)
    assert f.z == pytest.approx(2.0) and f.assessment == WITHIN and f.upper == 56.0  # 42 +- 2 x 7
    e = assess("lvef_cmr", 47.0, "male", 50.0)
    assert e.assessment == BELOW and e.lower == 48.0  # 58 - 2 x 5
    assert assess("lvef_cmr", 51.0, "female", 50.0).assessment == WITHIN  # 61 - 2 x 5 = 51: on the limit
    assert assess("lvef_cmr", 50.9, "female", 50.0).assessment == BELOW
    assert "mean +- 2 SD" in e.source and "Petersen" in e.source


def test_ecv_has_no_default_but_selectable_sets():
    a = assess("ecv", 30.0, "female", 40.0)
    assert a.assessment == NO_REFERENCE and "sequence" in a.note
    b = assess("ecv", 34.0, "female", 40.0, reference_set="dabir2014_molli_1.5t")
    assert (b.lower, b.upper) == (17.0, 33.0) and b.assessment == ABOVE  # 25 +- 2 x 4 %
    c = assess("ecv", 34.0, "female", 40.0, reference_set="dabir2014_molli_3t")
    assert (c.lower, c.upper) == (18.0, 34.0) and c.assessment == WITHIN
    d = assess("ecv", 30.0, "female", 40.0, reference_set="rosmini2018_molli")
    assert d.assessment == NO_REFERENCE and "27.3" in d.note
    assert set(cmr.ecv_sets()) >= {"dabir2014_molli_1.5t", "dabir2014_molli_3t", "rosmini2018_sasha"}


def test_extensive_lge_flag():
    assert cmr.extensive_lge_threshold_pct() == 15.0
    assert assess("lge_pct", 15.0, "male", 40.0).flag.startswith("extensive LGE")
    assert assess("lge_pct", 14.9, "male", 40.0).flag is None
    np.testing.assert_array_equal(cmr.extensive_lge([14.9, 15.0, np.nan]), [False, True, False])


def test_cmr_wall_thickness_has_no_upper_limit():
    a = assess("mwt_cmr", 12.0, "male", 40.0)
    assert a.assessment == NO_REFERENCE and a.upper is None
    assert "8 mm" in a.note and "Kawel" in a.source


def test_unknown_reference_set_for_measure_is_an_error():
    with pytest.raises(ValueError):
        assess("lvmi_cmr", 50.0, "male", 40.0, reference_set="lang2015")
