"""Built-in CO2 band model, K/Na lines and the H2 CIA model against outside references."""
import numpy as np
import pytest

from retrieve.constants import C2_CM_K
from retrieve.opacity_build.builtin import alkali, cia_model, co2


@pytest.fixture(scope="module")
def co2_lines():
    return co2.line_arrays()


def test_co2_partition_function_vs_tips():
    hapi = pytest.importorskip("hapi")
    temps = np.array([300.0, 500.0, 1000.0, 1500.0, 2000.0, 2500.0, 3000.0])
    ours = co2.partition_function(temps)
    ref = np.array([hapi.partitionSum(2, 1, float(t)) for t in temps])
    # TIPS 2021 via hapi.partitionSum(2, 1, T) (Gamache et al. 2021, JQSRT 271, 107713): within 5 %
    assert np.max(np.abs(ours / ref - 1.0)) < 0.05


def test_co2_ground_state_has_even_j_only():
    j = np.arange(10)
    # 16O nuclear spin I = 0: only even J in the Σg+ ground state (Herzberg 1945, sec. I.3)
    assert list(j[co2.allowed_j(0, 0, j)]) == [0, 2, 4, 6, 8]
    # and only odd J in Σu+ (v3 = 1), same source
    assert list(j[co2.allowed_j(0, 1, j)]) == [1, 3, 5, 7, 9]


# Band origins of 12C16O2 (HITRAN band list; Rothman & Young 1981, JQSRT 25, 505 - values from memory)
@pytest.mark.parametrize("label,origin", [("00011", 2349.143), ("10011", 3714.782), ("10012", 3612.842),
                                          ("20012", 4977.834), ("30012", 6347.851)])
def test_co2_band_centres(co2_lines, label, origin):
    ib = [b[0] for b in co2.COLD_BANDS].index(label)
    sel = co2_lines["band"] == ib * 100000   # cold band: lower state index 0 = (0,0,0,0)
    nu, s = co2_lines["wavenumber_cm"][sel], co2_lines["strength_296"][sel]
    centre = np.sum(nu * s) / np.sum(s)
    # band centre (strength-weighted mean line position) within 1 % of the catalogued origin
    assert abs(centre - origin) < 0.01 * origin
    # the R(0)-P(2) gap brackets the origin (a Σ-Σ band has no Q branch; Herzberg 1945, sec. IV.1)
    assert nu.min() < origin < nu.max() and not np.any(np.abs(nu - origin) < 0.5)


# Integrated 296 K strengths in band windows incl. hot bands, cm/molecule (HITRAN-era compilations,
# Rothman et al. 1992, JQSRT 48, 537; values from memory): 4.3 µm ≈ 1.0e-16, 2.7 µm ≈ 2.7e-18
@pytest.mark.parametrize("lo,hi,literature", [(2200.0, 2450.0, 1.0e-16), (3500.0, 3800.0, 2.7e-18)])
def test_co2_integrated_band_strengths(co2_lines, lo, hi, literature):
    nu, s = co2_lines["wavenumber_cm"], co2_lines["strength_296"]
    total = s[(nu > lo) & (nu < hi)].sum()
    assert total == pytest.approx(literature, rel=0.30, abs=0.0)   # 30 %, values from memory (see above)


# Cold-band strengths of the 2.0 µm triad, cm/molecule (Toth et al. 2008, J. Mol. Spectrosc. 251, 64;
# values from memory): the generated lines of each band sum to it
@pytest.mark.parametrize("label,literature", [("20013", 1.2e-21), ("20012", 1.25e-20), ("20011", 4.9e-21)])
def test_co2_2um_cold_band_strengths(co2_lines, label, literature):
    ib = [b[0] for b in co2.COLD_BANDS].index(label)
    total = co2_lines["strength_296"][co2_lines["band"] == ib * 100000].sum()
    assert total == pytest.approx(literature, rel=0.30, abs=0.0)
    # with hot bands (harmonic scaling) the 2.0 µm window holds at most 1.6x the cold triad at 296 K
    nu, s = co2_lines["wavenumber_cm"], co2_lines["strength_296"]
    assert s[(nu > 4750.0) & (nu < 5200.0)].sum() < 1.6 * 1.865e-20


def test_co2_hot_band_fraction_grows_with_temperature():
    ll = co2.line_list()
    cold = ll.e_lower_cm < 500.0
    frac = [ll.strength(t)[~cold].sum() / ll.strength(t).sum() for t in (296.0, 1500.0)]
    # at 296 K ~8 % of the 4.3 µm intensity is in hot bands (01111-01101 ~ 7.5e-18 vs 9.6e-17, HITRAN,
    # value from memory); at 1500 K hot bands carry most of it (Boltzmann factor, common practice)
    assert 0.03 < frac[0] < 0.2
    assert frac[1] > 0.5


# NIST ASD vacuum wavelengths (µm), values from memory
@pytest.mark.parametrize("element,wl_um", [("K", 0.766701), ("K", 0.770108), ("K", 1.16934), ("K", 1.17761), ("K", 1.25256),
                                           ("Na", 0.58916), ("Na", 0.58976), ("Na", 1.14069), ("Na", 0.81855)])
def test_alkali_line_positions(element, wl_um):
    nu = np.array([x[1] for x in alkali.LINES[element]])
    assert np.min(np.abs(1e4 / nu - wl_um)) < 2e-4


def test_alkali_partition_functions():
    # ground term 2S1/2 (g = 2) dominates; excited levels add ~0.6 % at 3000 K for K (NIST levels; common practice)
    assert alkali.partition_function(300.0, "K") == pytest.approx(2.0, abs=1e-6)
    assert 2.0 < alkali.partition_function(3000.0, "K") < 2.05
    assert 2.0 < alkali.partition_function(3000.0, "Na") < alkali.partition_function(3000.0, "K")


def test_unsold_width_scales_as_t_minus_0p7_at_constant_pressure():
    g1 = alkali.vdw_hwhm("K", 1000.0, 100.0)
    g2 = alkali.vdw_hwhm("K", 2000.0, 100.0)
    # Unsöld: γ6 ∝ P T^-0.7 at fixed pressure (Gray 2005, eq. 11.31); natural width negligible at 100 bar
    np.testing.assert_allclose(g2 / g1, 2.0 ** -0.7, rtol=1e-3, atol=0)
    # and linear in pressure (impact approximation, same source)
    np.testing.assert_allclose(alkali.vdw_hwhm("K", 1000.0, 10.0) * 10.0, g1, rtol=1e-3, atol=0)


def test_alkali_cross_section_integrates_to_line_strength():
    edges = 0.55 * (1.0 + 1e-3) ** np.arange(0, 870)   # 0.55-1.31 µm at R=1000 holds all lines
    nu_e = 1e4 / edges
    dnu = nu_e[:-1] - nu_e[1:]
    for element in ("K", "Na"):
        sig = alkali.cross_section(edges, [1500.0], [1e-3], element=element)[0, 0]
        total = alkali.line_strengths(element, 1500.0).sum()
        # ∫σ dν = Σ S for a normalised profile at low pressure (the wings hold < 1 %; common practice)
        assert np.sum(sig * dnu) == pytest.approx(total, rel=0.02, abs=0.0)


def test_alkali_wing_falls_off_beyond_cutoff():
    edges = 0.78 * (1.0 + 1e-3) ** np.arange(0, 400)
    sig = alkali.cross_section(edges, [1000.0], [10.0], element="K")[0, 0]
    wl = np.sqrt(edges[:-1] * edges[1:])
    s = alkali.line_strengths("K", 1000.0)[0]
    gl = alkali.vdw_hwhm("K", 1000.0, 10.0)[0]
    i = np.argmin(np.abs(wl - 0.90))
    det = 13042.896 - 1e4 / wl[i]
    lorentz = s * gl / np.pi / det ** 2
    # beyond Δ_c the documented profile is below the pure Lorentzian (exponential decay; module docstring)
    assert sig[i] < 0.5 * lorentz


def test_bc_lineshape_detailed_balance():
    t = 500.0
    tau1 = 1.0 / (2.0 * np.pi * 3e10 * 100.0)
    d = np.array([50.0, 200.0, 600.0])
    ratio = cia_model.birnbaum_cohen(-d, tau1, tau1, t) / cia_model.birnbaum_cohen(d, tau1, tau1, t)
    # G(-ω) = exp(-ħω/kT) G(ω) (Birnbaum & Cohen 1976, Can. J. Phys. 54, 593)
    np.testing.assert_allclose(ratio, np.exp(-C2_CM_K * d / t), rtol=1e-10, atol=0)


def test_h2_transition_frequencies():
    e = cia_model.h2_energy
    # H2 Q1(1), S0(0), S0(1), S1(1): 4155.25, 354.37, 587.03, 4712.90 cm^-1 (Dabrowski 1984, Can. J. Phys.
    # 62, 1639; values from memory); Dunham levels within 3 cm^-1 (CIA components are >= 50 cm^-1 wide)
    assert e(1, 1) - e(0, 1) == pytest.approx(4155.25, abs=3.0)
    assert e(0, 2) - e(0, 0) == pytest.approx(354.37, abs=3.0)
    assert e(0, 3) - e(0, 1) == pytest.approx(587.03, abs=3.0)
    assert e(1, 3) - e(0, 1) == pytest.approx(4712.90, abs=3.0)


def test_cia_band_peaks_and_magnitudes():
    nu = np.arange(3500.0, 5500.0, 5.0)
    a = cia_model.cia_wavenumber("H2-H2", nu, 297.0)
    # fundamental peaks near the Q1 branch (~4160 cm^-1) with the S1(1) shoulder at 4713 (Abel et al. 2011,
    # J. Phys. Chem. A 115, 6805, fig. 1 - from memory)
    assert 4050.0 < nu[np.argmax(a)] < 4300.0
    # peak α/ρ² ~ 1-2e-6 cm^-1 amagat^-2 -> ~1e-45-3e-45 cm^5 (same source, value from memory; factor 3)
    assert 3e-46 < a.max() < 9e-45
    # first overtone (~1.2 µm) about two orders of magnitude weaker (value from memory)
    nu2 = np.arange(7500.0, 9000.0, 5.0)
    a2 = cia_model.cia_wavenumber("H2-H2", nu2, 297.0)
    assert 1e-3 < a2.max() / a.max() < 1e-1
    assert 7900.0 < nu2[np.argmax(a2)] < 8300.0


def test_cia_band_integral_matches_normalisation_and_he_weaker():
    nu = np.arange(0.5, 16000.0, 1.0)
    for pair in ("H2-H2", "H2-He"):
        total = np.sum(cia_model.cia_wavenumber(pair, nu, 297.0))
        # ∫α/n² dν equals the sum of the band integrals it is scaled to (model definition, module docstring)
        assert total == pytest.approx(sum(cia_model.INTEGRATED_297[pair].values()), rel=0.02, abs=0.0)
    # H2-He is weaker than H2-H2 in the fundamental (He has no quadrupole; Abel et al. 2012, from memory)
    f = np.arange(3800.0, 5200.0, 5.0)
    assert cia_model.cia_wavenumber("H2-He", f, 1000.0).sum() < cia_model.cia_wavenumber("H2-H2", f, 1000.0).sum()


def test_cia_hot_rototranslational_wing_reaches_5um():
    a300 = cia_model.cia_wavenumber("H2-H2", np.array([2000.0]), 300.0)[0]
    a2000 = cia_model.cia_wavenumber("H2-H2", np.array([2000.0]), 2000.0)[0]
    # high-J S0 lines (S0(7) at 1835 cm^-1, value from memory) make 5 µm CIA grow strongly with T
    assert a2000 > 100.0 * a300


@pytest.mark.parametrize("element", ["K", "Na"])
def test_alkali_lines_connect_the_partition_levels(element):
    levels = np.array([e for e, _ in alkali.LEVELS[element]])
    for label, nu, e_lo, g_lo, _, _ in alkali.LINES[element]:
        # Ritz principle: every line joins two levels of the same NIST level list (common practice)
        assert np.min(np.abs(levels - e_lo)) < 1e-6, label
        assert np.min(np.abs(levels - (e_lo + nu))) < 0.01, label
        assert dict(alkali.LEVELS[element])[e_lo] == g_lo, label


@pytest.mark.parametrize("species,func", [("CO2", co2.partition_function),
                                          ("K", lambda t: alkali.partition_function(t, "K")),
                                          ("Na", lambda t: alkali.partition_function(t, "Na"))])
def test_partition_functions_are_registered(species, func):
    from retrieve.opacity_build.partition import get_partition_function

    # the registry hands out the level-sum Q(T) of the generator (same level structure as the lines)
    assert get_partition_function(species)(1500.0) == func(1500.0)
