"""Continuum opacities: CIA, H⁻, Rayleigh, grey cloud."""
import numpy as np
import pytest

from retrieve.constants import AMU_CGS, BAR_TO_DYN_CM2, K_B_CGS
from retrieve.errors import OpacityTableError
from retrieve.opacity import clouds, hminus, rayleigh
from retrieve.opacity.cia import CIAInterpolator
from retrieve.opacity.table import OpacityTable

# ---------------------------------------------------------------- CIA


def _analytic_cia_table():
    """Demo table with log10 k = -46 + 3e-4 (T - 1000) - 0.5 (λ - 2): linear in T and λ."""
    wl = np.linspace(0.8, 5.0, 43)
    temperature = np.array([400.0, 1000.0, 2000.0, 3000.0])
    log10 = -46.0 + 3e-4 * (temperature[:, None] - 1000.0) - 0.5 * (wl[None, :] - 2.0)
    return OpacityTable(kind="cia", species="H2-He", wavelength_um=wl, temperature_K=temperature,
                        log10_value=log10)


def test_cia_hand_calculation():
    table = _analytic_cia_table()
    cia = CIAInterpolator(table, np.array([2.0]))
    kappa = cia.opacity(np.array([1000.0]), np.array([1.0]), np.array([0.85]), np.array([0.15]), np.array([2.3]))
    # By hand (CODATA k_B, m_u): n = 1e6 / (1.380649e-16 * 1000) = 7.24297e18 cm^-3,
    # alpha = 1e-46 * 0.85 * 0.15 * n^2 = 6.68872e-10 cm^-1,
    # rho = n * 2.3 * 1.66053907e-24 = 2.76625e-5 g cm^-3  ->  kappa = alpha / rho = 2.41798e-5 cm^2 g^-1
    assert kappa.shape == (1, 1)
    assert kappa[0, 0] == pytest.approx(2.41798e-5, rel=1e-4, abs=0.0)  # hand calculation above


def test_cia_matches_direct_evaluation_and_clamps():
    table = _analytic_cia_table()
    wl = np.geomspace(1.0, 4.5, 57)          # between table wavelengths: regridding is exact for linear log10 k
    cia = CIAInterpolator(table, wl)
    temperature = np.array([500.0, 1234.5, 2999.0, 150.0, 5000.0])
    pressure = np.array([1e-3, 0.1, 1.0, 10.0, 30.0])
    vmr_a, vmr_b, mmw = np.full(5, 0.84), np.full(5, 0.15), np.full(5, 2.33)
    kappa = cia.opacity(temperature, pressure, vmr_a, vmr_b, mmw)
    t_used = np.clip(temperature, 400.0, 3000.0)  # documented clamping to the table's range
    k = 10 ** (-46.0 + 3e-4 * (t_used[:, None] - 1000.0) - 0.5 * (wl[None, :] - 2.0))
    n = pressure * BAR_TO_DYN_CM2 / (K_B_CGS * temperature)
    alpha = k * (vmr_a * n * vmr_b * n)[:, None]
    rho = pressure * BAR_TO_DYN_CM2 * mmw * AMU_CGS / (K_B_CGS * temperature)
    # direct evaluation of alpha = k n_a n_b, kappa = alpha / rho (float32 table storage limits precision)
    np.testing.assert_allclose(kappa, alpha / rho[:, None], rtol=2e-5)
    assert cia.t_range == (400.0, 3000.0)


def test_cia_outside_table_wavelengths_is_zero_and_kind_checked():
    table = _analytic_cia_table()
    cia = CIAInterpolator(table, np.array([0.5, 2.0, 8.0]))
    kappa = cia.opacity(np.array([1000.0]), np.array([1.0]), np.array([0.85]), np.array([0.15]), np.array([2.3]))
    assert kappa[0, 0] < 1e-30 and kappa[0, 2] < 1e-30 and kappa[0, 1] > 1e-6  # table.regrid_wavelength floors outside
    xsec = OpacityTable(kind="cross_section", species="H2O", wavelength_um=[1.0, 2.0], temperature_K=[1000.0],
                        pressure_bar=[1.0], log10_value=np.zeros((1, 1, 2)))
    with pytest.raises(OpacityTableError, match="expected a 'cia' table"):
        CIAInterpolator(xsec, np.array([1.0]))


# ---------------------------------------------------------------- H-


def test_hminus_bound_free_against_published_values():
    wl = np.array([0.125, 0.85])
    sigma = hminus.hminus_bound_free_cross_section(wl)
    # Wishart (1979) cross section at 1250 Å, 5.431e-18 cm^2, as tabulated in John (1988) -- value from memory
    assert sigma[0] == pytest.approx(5.431e-18, rel=0.05, abs=0.0)
    # Maximum of the H- bf cross section, ~4.0e-17 cm^2 near 8500 Å (Gray, Observation and Analysis of
    # Stellar Photospheres, 3rd ed., Fig. 8.3) -- value from memory
    assert sigma[1] == pytest.approx(4.0e-17, rel=0.05, abs=0.0)
    fine = np.linspace(0.3, 1.6, 1301)
    assert 0.80 < fine[np.argmax(hminus.hminus_bound_free_cross_section(fine))] < 0.90  # same source
    # photo-detachment threshold 1.6419 µm (John 1988): no bound-free absorption beyond it
    np.testing.assert_array_equal(hminus.hminus_bound_free_cross_section([1.6419, 1.7, 2.5]), 0.0)


def test_hminus_free_free_against_bell_berrington():
    theta = np.array([0.5, 0.6, 0.8, 1.0, 1.2, 1.4, 1.6, 1.8, 2.0, 2.8, 3.6])
    k = hminus.hminus_free_free_coefficient(np.array([0.1823]), 5040.0 / theta)[:, 0]
    # Bell & Berrington (1987, J. Phys. B 20, 801), Table 1, row λ = 1823 Å, in 1e-26 cm^4 dyn^-1,
    # theta = 0.5 ... 3.6 -- value from memory
    table_row = np.array([0.0178, 0.0222, 0.0308, 0.0402, 0.0498, 0.0596, 0.0695, 0.0795, 0.0896, 0.131, 0.172])
    np.testing.assert_allclose(k / 1e-26, table_row, rtol=0.02)


def test_hminus_free_free_fits_join_at_3645():
    # John (1988) fitted the two ranges to the same Bell & Berrington table; they must join at 0.3645 µm
    temperature = np.array([1400.0, 2500.0, 5040.0, 10080.0])
    k = hminus.hminus_free_free_coefficient(np.array([0.36449, 0.36451]), temperature)
    np.testing.assert_allclose(k[:, 1], k[:, 0], rtol=0.01)
    # long-wavelength free-free grows ~λ² (classical free-free, common practice, no source)
    k_ir = hminus.hminus_free_free_coefficient(np.array([10.0, 20.0]), np.array([2000.0]))[0]
    assert k_ir[1] / k_ir[0] == pytest.approx(4.0, rel=0.05, abs=0.0)


def test_hminus_saha_factor_matches_gray():
    temperature = np.array([2520.0, 5040.0, 8000.0])
    theta = 5040.0 / temperature
    n_e = 1e12
    electron_pressure = n_e * K_B_CGS * temperature
    ratio = hminus.hminus_saha_factor(temperature) * n_e        # n(H-)/n(H)
    # Gray (3rd ed., eq. 8.12): n(H-)/n(H) = 4.158e-10 P_e θ^{5/2} 10^{0.754 θ} -- value from memory
    gray = 4.158e-10 * electron_pressure * theta ** 2.5 * 10 ** (0.754 * theta)
    np.testing.assert_allclose(ratio, gray, rtol=0.01)


def test_hminus_opacity_assembles_bf_and_ff():
    wl = np.array([0.5, 1.0, 1.25, 2.2])
    temperature, pressure, mmw = np.array([3000.0]), np.array([10.0]), np.array([2.3])
    vmr_h, vmr_e = np.array([0.1]), np.array([1e-7])
    kappa = hminus.hminus_opacity(wl, temperature, pressure, mmw, vmr_h, vmr_e)
    theta = 5040.0 / temperature[0]
    n = pressure[0] * BAR_TO_DYN_CM2 / (K_B_CGS * temperature[0])
    pe = vmr_e[0] * pressure[0] * BAR_TO_DYN_CM2
    # per H atom: Gray eq. 8.12 (bf, with 1 - 10^{-1.2398 θ/λ}) plus k_ff P_e (John 1988) -- value from memory
    stim = 1.0 - 10 ** (-1.2398 * theta / wl)
    per_h = (4.158e-10 * hminus.hminus_bound_free_cross_section(wl) * pe * theta ** 2.5 * 10 ** (0.754 * theta) * stim
             + hminus.hminus_free_free_coefficient(wl, temperature)[0] * pe)
    expected = per_h * vmr_h[0] * n / (n * mmw[0] * AMU_CGS)
    np.testing.assert_allclose(kappa[0], expected, rtol=0.01)
    assert kappa[0, 3] > 0  # beyond the bf threshold only free-free remains


def test_h2_dissociation_constant_against_codata():
    # CODATA key values (Cox, Wagman & Medvedev 1989): ΔfH°(H, 298.15 K) = 217.998 kJ/mol,
    # S°(H) = 114.717 J/mol/K, S°(H2) = 130.680 J/mol/K  ->  ΔfG°(H) = 203.276 kJ/mol -- values from memory
    gas_constant = 8.314462618
    t = 298.15
    delta_g = 2 * (217998.0 - t * (114.717 - 0.5 * 130.680))
    kp_codata = np.exp(-delta_g / (gas_constant * t))               # bar standard state
    k_n = hminus.h2_dissociation_constant(np.array([t]))[0]
    kp = k_n * K_B_CGS * t / BAR_TO_DYN_CM2
    assert np.log10(kp) == pytest.approx(np.log10(kp_codata), abs=0.02)
    # van 't Hoff: d ln Kp / dT = ΔrH / (R T²), ΔrH = 2 × 217.998 kJ/mol (same source)
    dt = 0.5
    kp_pm = hminus.h2_dissociation_constant(np.array([t - dt, t + dt])) * K_B_CGS * np.array([t - dt, t + dt])
    delta_h = np.diff(np.log(kp_pm))[0] / (2 * dt) * gas_constant * t ** 2
    assert delta_h == pytest.approx(2 * 217998.0, rel=0.005, abs=0.0)


def test_thermal_electrons_satisfy_saha_and_charge_balance():
    temperature = np.array([800.0, 1500.0, 2200.0, 3000.0, 4000.0])
    pressure = np.array([1e-3, 0.1, 1.0, 10.0, 100.0])
    vmr_h, vmr_e = hminus.thermal_h_and_electron_vmr(temperature, pressure)
    n = pressure * BAR_TO_DYN_CM2 / (K_B_CGS * temperature)
    pe = vmr_e * n * K_B_CGS * temperature
    theta = 5040.0 / temperature
    # Gray (3rd ed., eq. 1.20): log(N1/N0) = log(u1/u0) + 2.5 log T - θ I - log Pe - 0.1762 -- value from memory
    def ionised_over_neutral(chi):
        return 10 ** (np.log10(0.5) + 2.5 * np.log10(temperature) - theta * chi - np.log10(pe) - 0.1762)
    # recover H nuclei from vmr_h and the H2 equilibrium, then check charge balance element by element
    n_h_total = vmr_h * n * (1 + ionised_over_neutral(13.598434))
    n_h2 = n_h_total ** 2 / hminus.h2_dissociation_constant(temperature)
    h_nuclei = n_h_total + 2 * n_h2
    electrons = n_h_total * (1 - 1 / (1 + ionised_over_neutral(13.598434)))
    for log_eps, chi in ((6.24, 5.139076), (5.03, 4.340663)):   # Asplund et al. (2009) Na, K
        x = ionised_over_neutral(chi)
        electrons = electrons + 10 ** (log_eps - 12) * h_nuclei * x / (1 + x)
    np.testing.assert_allclose(electrons, vmr_e * n, rtol=0.01)  # Gray's rounded constants (5040, 0.1762)
    # mostly molecular at 800 K, substantially dissociated at 4000 K, 100 bar (common practice, no source)
    assert vmr_h[0] < 1e-6 and vmr_h[-1] > 0.1
    assert np.all(np.diff(vmr_e / np.sqrt(pressure)) > 0)


def test_thermal_electrons_cold_layers_are_finite():
    vmr_h, vmr_e = hminus.thermal_h_and_electron_vmr(np.array([60.0, 150.0, 300.0]), np.array([1e-5, 1.0, 100.0]))
    assert np.all(np.isfinite(vmr_h)) and np.all(np.isfinite(vmr_e)) and np.all(vmr_e >= 0)


# ---------------------------------------------------------------- Rayleigh


def test_h2_rayleigh_against_refractivity():
    wl = np.array([0.5, 1.0, 2.0])
    # Peck & Huang (1977, JOSA 67, 1550) H2 refractivity at 0 °C, 1 atm -- coefficients from memory
    inv2 = wl ** -2.0
    refractivity = 0.0148956 / (180.7 - inv2) + 0.0049037 / (92.0 - inv2)
    sigma_ref = rayleigh.refractive_rayleigh_cross_section(wl, refractivity)
    # Dalgarno & Williams (1962) vs measured refractivity without King correction: agree to ~4%
    np.testing.assert_allclose(rayleigh.h2_rayleigh_cross_section(wl), sigma_ref, rtol=0.06)
    # DW62 evaluated by hand at 5000 Å: 8.14e-13/5000^4 + 1.28e-6/5000^6 + 1.61/5000^8 = 1.3884e-27 cm^2
    assert rayleigh.h2_rayleigh_cross_section(0.5) == pytest.approx(1.3884e-27, rel=1e-4, abs=0.0)


def test_he_rayleigh_long_wavelength_limit_is_static_polarisability():
    wl = 30.0
    alpha = 1.38319 * (0.529177210903e-8) ** 3   # He static dipole polarisability, 1.383 a0^3 -- value from memory
    sigma_static = 128 * np.pi ** 5 / 3 * alpha ** 2 / (wl * 1e-4) ** 4
    assert rayleigh.he_rayleigh_cross_section(wl) == pytest.approx(sigma_static, rel=0.01, abs=0.0)


def test_rayleigh_opacity_per_gram():
    wl = np.array([0.6, 1.2])
    kappa = rayleigh.rayleigh_opacity(wl, np.array([0.85, 0.5]), np.array([0.15, 0.1]), np.array([2.3, 2.0]))
    expected = (np.array([0.85, 0.5])[:, None] * rayleigh.h2_rayleigh_cross_section(wl)
                + np.array([0.15, 0.1])[:, None] * rayleigh.he_rayleigh_cross_section(wl)) / (
        np.array([2.3, 2.0])[:, None] * AMU_CGS)
    np.testing.assert_allclose(kappa, expected, rtol=1e-12)   # κ = Σ vmr σ / (μ m_u), definition
    assert kappa[0, 0] / kappa[0, 1] == pytest.approx(16.0, rel=0.1, abs=0.0)  # ~λ⁻⁴ (common practice, no source)


# ---------------------------------------------------------------- clouds


def test_grey_cloud_shape_and_known_values():
    pressure = np.geomspace(1e-4, 100.0, 71)
    tau = clouds.grey_cloud_optical_depth(pressure, -1.0, 1.5)
    assert np.all(tau[pressure <= 0.1] == 0.0)
    assert np.all(np.diff(tau) >= 0) and np.all(np.diff(tau[pressure > 0.1]) > 0)
    # definition in clouds.py: τ = (P/P_top)^α − 1, so τ = 1 at 2^{1/α} P_top and τ = 10^1.5 − 1 at 10 P_top
    one = clouds.grey_cloud_optical_depth(np.array([0.1 * 2 ** (1 / 1.5), 1.0]), -1.0, 1.5)
    np.testing.assert_allclose(one, [1.0, 10 ** 1.5 - 1.0], rtol=1e-12)


def test_cloud_registry():
    assert clouds.CLOUD_MODELS["grey"].parameters == ("log_p_cloud_top", "cloud_tau_slope")
    assert clouds.CLOUD_MODELS["none"].parameters == ()
    np.testing.assert_array_equal(clouds.CLOUD_MODELS["none"].optical_depth(np.geomspace(1e-3, 10, 5)), 0.0)
    tau = clouds.CLOUD_MODELS["grey"].optical_depth(np.array([1.0, 100.0]), log_p_cloud_top=0.0, cloud_tau_slope=1.0)
    np.testing.assert_allclose(tau, [0.0, 99.0])   # same definition


def test_cia_single_temperature_table_and_zero_vmr():
    table = OpacityTable(kind="cia", species="H2-H2", wavelength_um=[1.0, 2.0], temperature_K=[1000.0],
                         log10_value=[[-46.0, -45.0]])
    cia = CIAInterpolator(table, np.array([1.0, 1.5, 2.0]))
    kappa = cia.opacity(np.array([300.0, 3000.0]), np.ones(2), np.array([0.8, 0.0]), np.full(2, 0.2), np.full(2, 2.3))
    n = BAR_TO_DYN_CM2 / (K_B_CGS * 300.0)
    # one temperature: k is that row everywhere; log-linear in λ between the table points (table.regrid_wavelength)
    np.testing.assert_allclose(kappa[0], 10 ** np.array([-46.0, -45.5, -45.0]) * 0.8 * 0.2 * n / (2.3 * AMU_CGS),
                               rtol=1e-6)
    np.testing.assert_array_equal(kappa[1], 0.0)   # no partner, no absorption (definition α = k n_a n_b)


def test_hminus_cold_and_hot_levels_are_finite():
    wl = np.geomspace(0.3, 5.0, 50)
    temperature = np.array([300.0, 1000.0, 12000.0])
    pressure = np.array([1e-4, 1.0, 10.0])
    vmr_h, vmr_e = hminus.thermal_h_and_electron_vmr(temperature, pressure)
    kappa = hminus.hminus_opacity(wl, temperature, pressure, np.full(3, 2.3), vmr_h, vmr_e)
    assert np.all(np.isfinite(kappa)) and np.all(kappa >= 0)
    # H- matters in hot dense layers only (common practice, no source)
    assert kappa[0].max() < 1e-20 < kappa[2].min()
