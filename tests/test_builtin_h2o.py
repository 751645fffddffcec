"""Checks of the built-in H2O line list (asymmetric-top levels, selection rules, Q, band strengths)."""
import numpy as np
import pytest

from retrieve.opacity_build.builtin import asymmetric_top as at
from retrieve.opacity_build.builtin import h2o


# ---------------------------------------------------------------- asymmetric top
def test_rigid_rotor_j1_j2_closed_forms():
    # closed-form rigid asymmetric-rotor energies for J <= 2
    # (Townes & Schawlow 1955, Microwave Spectroscopy, ch. 4, table 4-5 - value from memory)
    A, B, C = 27.8806, 14.5216, 9.2777
    lev = at.rotor_levels(at.WatsonConstants(A, B, C), 2)
    j, ka, kc, e = lev.flat()
    r = np.sqrt((B - C) ** 2 + (A - C) * (A - B))
    expect = {(1, 0, 1): B + C, (1, 1, 1): A + C, (1, 1, 0): A + B,
              (2, 0, 2): 2 * (A + B + C) - 2 * r, (2, 2, 0): 2 * (A + B + C) + 2 * r,
              (2, 1, 2): A + B + 4 * C, (2, 1, 1): A + 4 * B + C, (2, 2, 1): 4 * A + B + C}
    for (jj, a, c), value in expect.items():
        got = e[(j == jj) & (ka == a) & (kc == c)]
        assert got.size == 1 and got[0] == pytest.approx(value, abs=1e-9)


def test_honl_london_sum_rule_and_symmetric_top_limit():
    # Σ over upper levels of the line strength = 2J''+1 (Wigner–Eckart orthogonality; common practice)
    lev = at.rotor_levels(at.WatsonConstants(**h2o.GROUND, pade=True), 9)
    for btype in "ab":
        for j in (2, 8):
            total = sum(at.honl_london(lev.vectors[j], lev.vectors[jp], j, jp, btype).sum(axis=0)
                        for jp in (j - 1, j, j + 1))
            np.testing.assert_allclose(total, 2 * j + 1, rtol=1e-10)
    # prolate symmetric-top limit (B = C), parallel band, R branch: ((J+1)^2 - K^2)/(J+1)
    # (Herzberg 1945, Infrared and Raman Spectra, eq. IV,81 - value from memory)
    lev = at.rotor_levels(at.WatsonConstants(10.0, 5.0, 5.0), 6)
    j = 5
    hl = at.honl_london(lev.vectors[j], lev.vectors[j + 1], j, j + 1, "a").max(axis=0)
    np.testing.assert_allclose(hl, ((j + 1) ** 2 - lev.ka[j] ** 2) / (j + 1), rtol=1e-10)


def test_ground_state_levels_match_measured():
    # measured H2O ground-state term values, cm^-1 (HITRAN E'' / Tennyson et al. 2001,
    # J. Phys. Chem. Ref. Data 30, 735 - values from memory)
    measured = {(1, 0, 1): 23.794, (1, 1, 1): 37.137, (1, 1, 0): 42.372, (2, 0, 2): 70.091,
                (2, 1, 2): 79.496, (2, 1, 1): 95.176, (2, 2, 1): 134.902, (2, 2, 0): 136.164,
                (3, 0, 3): 136.762, (3, 1, 3): 142.279, (3, 1, 2): 173.366, (3, 2, 2): 206.301,
                (3, 2, 1): 212.156, (3, 3, 1): 285.219, (3, 3, 0): 285.419}
    j, ka, kc, e = h2o.state_levels((0, 0, 0), 3).flat()
    for (jj, a, c), value in measured.items():
        got = e[(j == jj) & (ka == a) & (kc == c)][0]
        assert got == pytest.approx(value, abs=0.15)


# ---------------------------------------------------------------- vibrational structure
def test_dunham_term_values_within_1pct_of_band_origins():
    # Benedict et al. (1956) ω, x constants vs measured origins (Tennyson et al. 2001) - values from memory
    for v in [(0, 1, 0), (0, 2, 0), (1, 0, 0), (0, 0, 1), (0, 1, 1), (1, 0, 1), (1, 1, 1), (2, 0, 1)]:
        saved = h2o.ORIGINS.pop(v)
        try:
            assert h2o.term_value(v) == pytest.approx(saved, rel=0.01, abs=0.0)
        finally:
            h2o.ORIGINS[v] = saved


def test_well_known_line_positions():
    # ν2 1_11 <- 0_00 at 1634.967 and ν3 1_01 <- 0_00 at 3779.493 cm^-1 (HITRAN2020 - values from memory)
    for upper, key, value in [((0, 1, 0), (1, 1, 1), 1634.967), ((0, 0, 1), (1, 0, 1), 3779.493)]:
        tr = h2o.band_transitions((0, 0, 0), upper, 1)
        m = (tr["j_lo"] == 0) & (tr["j_up"] == key[0]) & (tr["ka_up"] == key[1]) & (tr["kc_up"] == key[2])
        assert m.sum() == 1
        assert tr["nu"][m][0] == pytest.approx(value, abs=0.5)


def test_selection_rules_and_spin_statistics():
    # b-type (A1 bands): ΔKa, ΔKc odd; a-type (B2 bands): ΔKa even, ΔKc odd; ortho <-> ortho only
    # (Herzberg 1945, ch. I.4 and IV.4; common practice)
    for upper, dka_parity in [((0, 1, 0), 1), ((0, 0, 1), 0), ((1, 0, 1), 0), ((1, 0, 0), 1)]:
        tr = h2o.band_transitions((0, 0, 0), upper, 10)
        assert tr["nu"].size > 500
        assert np.all((tr["ka_up"] - tr["ka_lo"]) % 2 == dka_parity)
        assert np.all((tr["kc_up"] - tr["kc_lo"]) % 2 == 1)
        w_up = h2o.spin_weight(upper, tr["ka_up"], tr["kc_up"])
        np.testing.assert_array_equal(w_up, tr["g_ns"])
    # the 3:1 ortho:para weights appear in the lines of the lower state
    tr = h2o.band_transitions((0, 0, 0), (0, 1, 0), 10)
    assert set(np.unique(tr["g_ns"])) == {1.0, 3.0}


# ---------------------------------------------------------------- partition function
def test_partition_function_against_tips():
    hapi = pytest.importorskip("hapi")
    temps = np.array([300.0, 500.0, 1000.0, 1500.0, 2000.0, 2500.0, 3000.0])
    ours = h2o.partition_function(temps)
    tips = np.array([hapi.partitionSum(1, 1, float(t)) for t in temps])
    # TIPS 2021 via hapi.partitionSum (Gamache et al. 2021, JQSRT 271, 107713)
    np.testing.assert_allclose(ours, tips, rtol=0.05)
    # at 296 K the ortho/para weighted level sum must be close (0.5%) to TIPS
    assert h2o.partition_function(296.0) == pytest.approx(hapi.partitionSum(1, 1, 296.0), rel=0.005, abs=0.0)


def test_partition_function_registered():
    from retrieve.opacity_build.partition import get_partition_function
    # the registry (possibly a lazy wrapper of the package) returns this module's Q(T)
    q = get_partition_function("H2O")
    for t in (296.0, 1500.0):
        assert q(t) == pytest.approx(h2o.partition_function(t), rel=1e-12, abs=0.0)


# ---------------------------------------------------------------- intensities
@pytest.mark.parametrize("band", [(0, 1, 0), (0, 0, 1), (1, 0, 0), (0, 1, 1), (1, 0, 1), (1, 1, 1), (2, 0, 1)])
def test_cold_band_strength_within_30pct(band):
    # HITRAN band sums at 296 K (values from memory, see h2o module docstring); the model's line sum
    # must reproduce the band strength it was given through |R|^2 and Q (tests Hönl-London
    # normalisation, spin weights and the partition function together)
    r2 = h2o.transition_moment_sq(band)
    _, _, s = h2o.band_lines((0, 0, 0), band, r2, 25)
    assert s.sum() / h2o.ABUNDANCE == pytest.approx(h2o.BAND_STRENGTH_296[band], rel=0.30, abs=0.0)
    assert s.sum() / h2o.ABUNDANCE == pytest.approx(h2o.BAND_STRENGTH_296[band], rel=0.05, abs=0.0)


def test_transition_moments_match_literature():
    # |R| of ν2 ≈ 0.126 D and ν3 ≈ 0.068 D (Flaud & Camy-Peyret 1975, J. Mol. Spectrosc. 55, 278 -
    # values from memory) follow from the band strengths used
    assert np.sqrt(h2o.transition_moment_sq((0, 1, 0))) == pytest.approx(0.126, rel=0.08, abs=0.0)
    assert np.sqrt(h2o.transition_moment_sq((0, 0, 1))) == pytest.approx(0.068, rel=0.08, abs=0.0)


@pytest.mark.slow
def test_line_list_regions_and_hot_bands():
    ll = h2o.line_list(max_j=25)
    assert 1e5 < len(ll) < 8e5
    assert np.all(np.diff(ll.wavenumber_cm) >= 0)
    s296, s2000 = ll.strength(296.0), ll.strength(2000.0)
    nu = ll.wavenumber_cm
    # windows around the 0.94, 1.14, 1.4, 1.9, 2.7 µm band systems: the 296 K line sum matches the
    # sum of the cited band strengths with origins inside (some lines fall outside, others in)
    for lo, hi in [(10000, 11400), (8400, 9400), (6600, 7800), (4900, 5700), (3200, 4300)]:
        m = (nu > lo) & (nu < hi)
        cited = sum(s for v, s in h2o.BAND_STRENGTH_296.items() if lo < h2o.ORIGINS[v] < hi)
        # measured 0.1-5.9 % off (hot and neighbouring lines spill in): 10 %
        assert s296[m].sum() / h2o.ABUNDANCE == pytest.approx(cited, rel=0.10, abs=0.0)
    # hot bands raise the share of lines from excited vibrational states at high T
    hot = ll.e_lower_cm > 1500
    assert s2000[hot].sum() / s2000.sum() > 10 * s296[hot].sum() / s296.sum()
    # ν2 hot band 020 <- 010 relative to ν2 at 296 K: harmonic factor 2 x Boltzmann factor
    # exp(-c2 1594.7/296) = 4.3e-4 -> ~9e-4 (common practice, no source)
    low = [b for b in h2o.band_list() if b[0] == (0, 1, 0) and b[1] == (0, 2, 0)][0]
    _, _, s_hot = h2o.band_lines(*low, 25)
    ratio = s_hot.sum() / h2o.BAND_STRENGTH_296[(0, 1, 0)] / h2o.ABUNDANCE
    assert 5e-4 < ratio < 1.5e-3


def test_isotopologue_abundance_matches_hitran():
    hapi = pytest.importorskip("hapi")
    # HITRAN isotopologue abundance of the main isotopologue (hapi.ISO table)
    assert h2o.ABUNDANCE == pytest.approx(hapi.ISO[(1, 1)][2], rel=1e-5, abs=0.0)
