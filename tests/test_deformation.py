"""Segment models and segmental deformation indices."""

from __future__ import annotations

import math

import networkx as nx
import numpy as np
import pytest

from tracker.engines import deformation as dfm
from tracker.engines import segments as seg

# normal-limits.md section 9, check 17: TTP (ms) over the 16 LV segments.
CHECK17_TTP = [380, 395, 410, 372, 430, 401, 388, 415, 399, 420, 405, 392, 411, 386, 398, 445]


# --- segment models: AHA 17-segment model, Cerqueira 2002 (normal-limits.md s4c table) ---

def test_aha17_names_and_levels():
    assert seg.segment_name(seg.AHA17, 1) == "basal anterior"
    assert seg.segment_name(seg.AHA17, 3) == "basal inferoseptal"
    assert seg.segment_name(seg.AHA17, 9) == "mid inferoseptal"
    assert seg.segment_name(seg.AHA17, 12) == "mid anterolateral"
    assert seg.segment_name(seg.AHA17, 14) == "apical septal"
    assert seg.segment_name(seg.AHA17, 16) == "apical lateral"
    assert seg.segment_name(seg.AHA17, 17) == "apex (apical cap)"
    assert seg.segment_numbers(seg.AHA17, seg.BASAL) == (1, 2, 3, 4, 5, 6)
    assert seg.segment_numbers(seg.AHA17, seg.APICAL) == (13, 14, 15, 16)
    assert seg.segment_numbers(seg.AHA16) == tuple(range(1, 17))  # 16-segment = 1-16 [V]
    # 18-segment strain model: six per level [M].
    assert [len(seg.segment_numbers(seg.STRAIN18, lv)) for lv in (seg.BASAL, seg.MID, seg.APICAL)] == [6, 6, 6]
    assert seg.segment_name(seg.STRAIN18, 15) == "apical inferoseptal"


def test_measure_codes():
    assert seg.measure_code(seg.AHA17, seg.LS, 3) == "ls_seg03"
    assert seg.measure_code(seg.AHA16, seg.TTP, 16) == "ttp_seg16"
    assert seg.measure_code(seg.STRAIN18, seg.LS_SYS, 18) == "ls18_sys_seg18"
    with pytest.raises(ValueError):
        seg.measure_code(seg.AHA16, seg.LS, 17)
    codes = seg.all_segment_measure_codes()
    assert len(codes) == len(set(codes)) == 3 * 17 + 3 * 18


def test_neighbour_graph_structure():
    # Definition in segments.py; checked with networkx as a reference graph library.
    g = nx.Graph()
    for n, nb in seg.NEIGHBOURS[seg.AHA17].items():
        for m in nb:
            g.add_edge(n, m)
            assert n in seg.neighbours(seg.AHA17, m)  # symmetric
    assert nx.is_connected(g) and g.number_of_nodes() == 17
    for ring in ((1, 2, 3, 4, 5, 6), (7, 8, 9, 10, 11, 12), (13, 14, 15, 16)):
        sub = g.subgraph(ring)
        assert nx.cycle_basis(sub) and all(d == 2 for _, d in sub.degree())  # each ring is a cycle
    assert seg.neighbours(seg.AHA17, 9) == {3, 8, 10, 14}
    assert seg.neighbours(seg.AHA17, 14) == {8, 9, 13, 15, 17}
    assert seg.neighbours(seg.AHA17, 17) == {13, 14, 15, 16}
    assert 17 not in seg.neighbours(seg.AHA16, 14)


def test_map_18_to_17_explicit_rule():
    v18 = {n: -float(n) for n in range(1, 19)}
    v17 = seg.map_strain18_to_aha17(v18)
    assert v17[5] == -5 and v17[13] == -13 and v17[15] == -16
    assert v17[14] == pytest.approx(-14.5) and v17[16] == pytest.approx(-17.5)
    assert 17 not in v17


# --- post-systolic index: normal-limits.md s9 check 15 ---

def test_psi_check15():
    assert dfm.post_systolic_index(-20.0, -17.0) == pytest.approx(15.0)  # check 15


def test_psi_zero_when_peak_before_avc_and_invalid_cases():
    assert dfm.post_systolic_index(-18.0, -18.0) == 0.0
    assert math.isnan(dfm.post_systolic_index(-15.0, -17.0))  # systolic deeper than whole-cycle peak
    assert math.isnan(dfm.post_systolic_index(2.0, 1.0))  # no shortening
    arr = dfm.post_systolic_index(np.array([-20.0, -18.0]), np.array([-17.0, -18.0]))
    np.testing.assert_allclose(arr, [15.0, 0.0])


def test_curve_peaks_and_psi_from_curve():
    # Curve built so the systolic peak is -17 % (t 300 ms) and the whole-cycle peak -20 % after AVC.
    t = np.arange(0, 801, 10.0)
    e = -17.0 * np.exp(-((t - 300) / 60) ** 2) - 20.0 * np.exp(-((t - 420) / 30) ** 2)
    e = np.vstack([e, -18.0 * np.exp(-((t - 300) / 80) ** 2)])
    p = dfm.curve_peaks(t, e, avc_ms=350.0)
    assert p.time_to_peak_ms[0] == 420.0 and p.time_to_peak_ms[1] == 300.0
    assert p.peak_pct[0] == pytest.approx(float(e[0].min()))
    assert p.peak_systolic_pct[0] == pytest.approx(float(e[0][t <= 350].min()))
    assert dfm.post_systolic_index(p.peak_pct[1], p.peak_systolic_pct[1]) == 0.0


def test_global_psi_from_segments():
    peak = {n: -20.0 for n in range(1, 18)}
    sys = {n: -17.0 for n in range(1, 18)}
    r = dfm.global_psi(peak, sys)
    assert r.value_pct == pytest.approx(15.0) and r.n_valid == 17  # check 15 applied to every segment
    few = dfm.global_psi({1: -20.0}, {1: -17.0})
    assert few.value_pct is None and few.n_valid == 1


# --- relative apical sparing: normal-limits.md s9 check 16 (Phelan 2012) ---

def _levels(basal, mid, apical, apex=-30.0):
    v = {n: basal for n in range(1, 7)}
    v.update({n: mid for n in range(7, 13)})
    v.update({n: apical for n in range(13, 17)})
    v[17] = apex
    return v


def test_relaps_check16():
    r = dfm.relative_apical_sparing(_levels(-8.0, -12.0, -22.0))
    assert r.ratio == pytest.approx(1.10, abs=0.005)  # check 16
    assert r.pattern is True
    assert "not a diagnosis" in r.caution


def test_relaps_uneven_segments_same_level_means():
    v = {1: -6, 2: -10, 3: -8, 4: -7, 5: -9, 6: -8, 7: -11, 8: -13, 9: -12, 10: -12, 11: -10, 12: -14,
         13: -20, 14: -24, 15: -21, 16: -23, 17: 0.0}
    r = dfm.relative_apical_sparing(v)  # level means -8, -12, -22 as check 16; apex ignored
    assert r.ratio == pytest.approx(1.10, abs=0.005)


def test_relaps_below_cut_and_too_few():
    r = dfm.relative_apical_sparing(_levels(-18.0, -18.0, -20.0))
    assert r.ratio == pytest.approx(20 / 36) and r.pattern is False
    v = _levels(-8.0, -12.0, -22.0)
    for n in (13, 14, 15):
        del v[n]
    r = dfm.relative_apical_sparing(v)
    assert r.ratio is None and r.pattern is None and r.n_apical == 1


# --- mechanical dispersion: normal-limits.md s9 check 17 (Haland 2016 definition) ---

def test_md_check17_sample_sd():
    ttp = dict(enumerate(CHECK17_TTP, start=1))
    r = dfm.mechanical_dispersion(ttp)
    assert r.sd_ms == pytest.approx(18.8, abs=0.05)  # check 17, sample SD
    assert r.sd_ms == pytest.approx(np.std(CHECK17_TTP, ddof=1))  # numpy reference, n-1
    assert abs(r.sd_ms - 18.2) > 0.3  # not the population SD of check 17
    assert r.n_valid == 16


def test_md_excludes_apex_and_counts_missing():
    ttp = dict(enumerate(CHECK17_TTP, start=1))
    ttp[17] = 900.0
    assert dfm.mechanical_dispersion(ttp).sd_ms == pytest.approx(18.8, abs=0.05)
    del ttp[16]
    ttp[15] = float("nan")
    r = dfm.mechanical_dispersion(ttp)
    assert r.n_valid == 14 and r.sd_ms == pytest.approx(np.std(CHECK17_TTP[:14], ddof=1))
    r = dfm.mechanical_dispersion({1: 400.0, 2: 410.0})
    assert r.sd_ms is None and r.n_valid == 2
    assert dfm.mechanical_dispersion(ttp, seg.STRAIN18).sd_ms is None


# --- near-zero segments among normal neighbours ---

def test_near_zero_segment_found():
    v = {n: -20.0 for n in range(1, 18)}
    v[9] = -2.0
    found = dfm.near_zero_among_normal(v)
    assert [f.number for f in found] == [9]
    assert found[0].name == "mid inferoseptal"
    assert set(found[0].neighbour_strain_pct) == {3, 8, 10, 14}


def test_near_zero_not_flagged_when_neighbour_abnormal_or_threshold():
    v = {n: -20.0 for n in range(1, 18)}
    v[9] = -2.0
    v[14] = -10.0
    assert dfm.near_zero_among_normal(v) == []
    v[14] = -20.0
    v[9] = -5.0  # |strain| must be < 5
    assert dfm.near_zero_among_normal(v) == []
    v = {n: -20.0 for n in range(13, 17)}
    v[17] = 1.0
    assert [f.number for f in dfm.near_zero_among_normal(v)] == [17]


# --- global average strain and the study-level function ---

def test_global_average_strain_with_count():
    v = {n: -20.0 for n in range(1, 18)}
    v[5] = -10.0
    v[6] = float("nan")
    r = dfm.global_average_strain(v)
    assert r.n_valid == 16 and r.value_pct == pytest.approx((15 * -20.0 - 10.0) / 16)
    r = dfm.global_average_strain({1: -20.0}, min_segments=12)
    assert r.value_pct is None and r.n_valid == 1


def test_derive_deformation_from_measure_codes():
    m = {}
    for n in range(1, 18):
        m[seg.measure_code(seg.AHA17, seg.LS, n)] = -20.0
        m[seg.measure_code(seg.AHA17, seg.LS_SYS, n)] = -17.0
    for n, t in enumerate(CHECK17_TTP, start=1):
        m[seg.measure_code(seg.AHA17, seg.TTP, n)] = float(t)
    out = dfm.derive_deformation(m)
    assert out["gls_segavg"] == pytest.approx(-20.0) and out["gls_segavg_n"] == 17
    assert out["mech_dispersion"] == pytest.approx(18.8, abs=0.05) and out["mech_dispersion_n"] == 16
    assert out["psi_global"] == pytest.approx(15.0)
    assert out["relaps"] == pytest.approx(0.5)
    assert set(out) <= set(dfm.DERIVED_CODES)
    assert dfm.derive_deformation({"ivsd": 10.0}) == {}
    m["ls18_seg01"] = -20.0
    with pytest.raises(ValueError):
        dfm.derive_deformation(m)
