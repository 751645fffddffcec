"""Checks of the built-in NH3 model: symmetric-top factors, inversion, spin statistics, Q, bands."""
import numpy as np
import pytest

from retrieve.opacity_build.builtin import nh3
from retrieve.opacity_build.builtin import symmetric_top as sy


def test_parallel_honl_london_match_herzberg():
    # parallel-band factors ((J+1)^2-K^2)/(J+1), (2J+1)K^2/(J(J+1)), (J^2-K^2)/J
    # (Herzberg 1945, Infrared and Raman Spectra, eq. IV,81 - value from memory)
    tr = sy.transitions(8, perpendicular=False)
    j, k, jp = tr["j_lo"].astype(float), tr["k_lo"].astype(float), tr["j_up"]
    expect = np.where(jp == j + 1, ((j + 1) ** 2 - k ** 2) / (j + 1),
                      np.where(jp == j, (2 * j + 1) * k ** 2 / np.maximum(j * (j + 1), 1), (j ** 2 - k ** 2) / np.maximum(j, 1)))
    np.testing.assert_allclose(tr["hl"], expect, rtol=1e-10)
    assert np.all(tr["k_up"] == tr["k_lo"])


def test_perpendicular_sum_rule():
    # Σ over upper levels = 2J''+1 for every signed K'' (Wigner–Eckart; common practice)
    tr = sy.transitions(10, perpendicular=True)
    assert np.all(np.abs(tr["k_up"] - tr["k_lo"]) == 1)
    for j in (0, 3, 10):
        for k in range(-j, j + 1):
            m = (tr["j_lo"] == j) & (tr["k_lo"] == k)
            assert tr["hl"][m].sum() == pytest.approx(2 * j + 1, rel=1e-10, abs=0.0)


def test_rotation_inversion_constants():
    # 572.498 GHz J=1<-0 line is 1_0 s <- 0_0 a; (1,1) inversion line 23.694 GHz
    # (Townes & Schawlow 1955, Microwave Spectroscopy, ch. 12 and app. VI - values from memory)
    c = sy.SymmetricTopConstants(**nh3.GROUND)
    ghz = 1e9 / 2.99792458e10
    e10_s = float(sy.energy(c, 1, 0)) + nh3.term_value((0, 0, 0, 0), 0)
    e00_a = float(sy.energy(c, 0, 0)) + nh3.term_value((0, 0, 0, 0), 1)
    assert e10_s - e00_a == pytest.approx(572.498 * ghz, abs=0.02)
    assert nh3.spin_weight(0, 0, 1) > 0 and nh3.spin_weight(0, 0, 0) == 0
    assert nh3.spin_weight(1, 0, 0) > 0 and nh3.spin_weight(1, 0, 1) == 0
    assert nh3.term_value((0, 0, 0, 0), 1) == pytest.approx(23.694 * ghz, rel=0.01, abs=0.0)
    # ν2 inversion splitting 35.7 cm^-1 (Herzberg 1945 table 54 - value from memory)
    assert nh3.term_value((0, 1, 0, 0), 1) - nh3.term_value((0, 1, 0, 0), 0) == pytest.approx(35.7, abs=0.1)


def test_spin_weights_ortho_para():
    # ortho (K = 3n) : para weights 12 : 6 per inversion component, HITRAN convention
    # (I_N = 1 factor 3 included; common practice, no source)
    assert nh3.spin_weight(5, 3, 0) == 12 and nh3.spin_weight(5, 6, 1) == 12
    assert nh3.spin_weight(5, 1, 0) == 6 and nh3.spin_weight(5, 2, 1) == 6


def test_partition_function_against_tips():
    hapi = pytest.importorskip("hapi")
    temps = np.array([300.0, 500.0, 1000.0, 1500.0, 2000.0, 2500.0, 3000.0])
    tips = np.array([hapi.partitionSum(11, 1, float(t)) for t in temps])
    # TIPS 2021 via hapi.partitionSum (Gamache et al. 2021, JQSRT 271, 107713)
    np.testing.assert_allclose(nh3.partition_function(temps), tips, rtol=0.05)
    assert nh3.partition_function(296.0) == pytest.approx(hapi.partitionSum(11, 1, 296.0), rel=0.005, abs=0.0)


def test_selection_rules_of_sub_bands():
    # parallel bands s <-> a, perpendicular s <-> s and a <-> a (Herzberg 1945, sec. IV.4(c))
    for b in nh3.band_list():
        if b["parallel"]:
            assert b["inv_up"] != b["inv_lo"]
        else:
            assert b["inv_up"] == b["inv_lo"]
    # ν2 sub-band pattern of the overtone 2ν2: 0s -> 2a at 1882.2 and 0a -> 2s at 1596.7 cm^-1
    # (HITRAN2020 band centres - values from memory)
    subs = sorted(b["g_up"] - b["g_lo"] for b in nh3.band_list(False) if b["label"] == "2nu2")
    assert subs == pytest.approx([1596.7, 1882.2], abs=0.2)


@pytest.mark.parametrize("label, centre", [("nu1", 3336.2), ("nu3", 3443.6), ("nu4", 1626.3), ("2nu4", 3240.2),
                                           ("nu2+nu4", 2540.5), ("nu1+nu4", 4955.0)])
def test_band_origins_within_1pct(label, centre):
    # catalogued band centres, cm^-1 (Herzberg 1945 table 54 / HITRAN2020 - values from memory)
    delta = [b[0] for b in nh3.BANDS if b[4] == label][0]
    assert nh3.term_value(delta, 0) == pytest.approx(centre, rel=0.01, abs=0.0)


@pytest.mark.parametrize("label", ["nu4", "nu1", "nu3", "2nu4", "nu1+nu4", "nu1+nu3"])
def test_band_strength_within_30pct(label):
    # cited band strengths (module docstring, values from memory): the line sum at 296 K over both
    # inversion sub-bands reproduces them (Hönl–London, spin weights and Q together)
    subs = [b for b in nh3.band_list(False) if b["label"] == label]
    assert len(subs) == 2
    total = sum(nh3.band_lines(b, 30)[2].sum() for b in subs) / nh3.ABUNDANCE
    cited = [b[3] for b in nh3.BANDS if b[4] == label][0]
    assert total == pytest.approx(cited, rel=0.30, abs=0.0)
    assert total == pytest.approx(cited, rel=0.03, abs=0.0)


def test_line_list_regions():
    ll = nh3.line_list()
    assert 1e4 < len(ll) < 5e5
    s296, s1500 = ll.strength(296.0), ll.strength(1500.0)
    nu = ll.wavenumber_cm
    # 3.0, 2.0, 1.5 and 1.0 µm band systems (issue 4): windows hold the cited band strengths
    for lo, hi in [(2900, 3700), (4200, 5400), (6300, 7100), (9000, 10600)]:
        cited = sum(b[3] for b in nh3.BANDS if lo < nh3.term_value(b[0], 0) < hi)
        m = (nu > lo) & (nu < hi)
        assert cited > 0
        # measured 0.1-1.6 % off: 5 % (a lost or doubled band would not hide inside 30 %)
        assert s296[m].sum() / nh3.ABUNDANCE == pytest.approx(cited, rel=0.05, abs=0.0)
    # hot bands from the umbrella levels gain weight with temperature
    hot = ll.e_lower_cm > 900
    assert s1500[hot].sum() / s1500.sum() > 5 * s296[hot].sum() / s296.sum()


def test_partition_function_registered():
    from retrieve.opacity_build.partition import get_partition_function
    # the registry (possibly a lazy wrapper of the package) returns this module's Q(T)
    q = get_partition_function("NH3")
    for t in (296.0, 1500.0):
        assert q(t) == pytest.approx(nh3.partition_function(t), rel=1e-12, abs=0.0)


def test_isotopologue_abundance_matches_hitran():
    hapi = pytest.importorskip("hapi")
    # HITRAN isotopologue abundance of the main isotopologue (hapi.ISO table)
    assert nh3.ABUNDANCE == pytest.approx(hapi.ISO[(11, 1)][2], rel=1e-5, abs=0.0)
