"""Pressure grid, T–P profiles, free chemistry and hydrostatics."""
import astropy.units as u
import numpy as np
import pytest

from retrieve import constants
from retrieve.atmosphere import (PROFILES, FreeChemistry, build_profile, column_mass, layer_optical_depth,
                                 pressure_levels)
from retrieve.atmosphere.profiles import ColumnKnotsProfile, GradientProfile, GuillotProfile, KnotsProfile
from retrieve.errors import ConfigError, ModelEvaluationError


def test_pressure_levels_log_spaced():
    p = pressure_levels()
    # documented defaults: 80 levels from 1e-5 to 100 bar (DEVELOPERS.md TOML layout, [model])
    assert p.size == 80 and p[0] == pytest.approx(1e-5, rel=1e-6, abs=0.0) and p[-1] == pytest.approx(100.0, rel=1e-6, abs=0.0)
    # constant ratio between levels = log spacing (common practice, no source)
    np.testing.assert_allclose(np.diff(np.log(p)), np.log(1e7) / 79, rtol=1e-12)
    with pytest.raises(ConfigError):
        pressure_levels(1.0, 0.1, 10)


def test_column_mass_is_p_over_g_with_astropy_units():
    p = np.array([1e-3, 0.5, 30.0])
    g = 10 ** 4.3
    ref = (p * u.bar / (g * u.cm / u.s ** 2)).to_value(u.g / u.cm ** 2)   # astropy unit conversion
    np.testing.assert_allclose(column_mass(p, g), ref, rtol=1e-13)


def test_layer_optical_depth_constant_kappa():
    p = pressure_levels(1e-4, 10.0, 30)
    kappa = np.full((30, 2), 0.03)   # cm^2/g
    g = 10 ** 3.5
    dtau = layer_optical_depth(kappa, p, g)
    total = (0.03 * u.cm ** 2 / u.g * (p[-1] - p[0]) * u.bar / (g * u.cm / u.s ** 2)).to_value(u.one)
    # dτ = κ dP / g summed over the column; astropy units for the conversion
    np.testing.assert_allclose(dtau.sum(axis=0), total, rtol=1e-12)


def test_internal_constants_agree_with_astropy():
    # astropy.units / astropy.constants (IAU 2015 nominal Jupiter radius, parsec)
    assert constants.R_JUP_M == pytest.approx((1 * u.R_jup).to_value(u.m), rel=1e-15, abs=0.0)
    assert constants.PC_M == pytest.approx((1 * u.pc).to_value(u.m), rel=1e-15, abs=0.0)
    assert constants.R_JUP_M == pytest.approx(7.1492e7, rel=1e-12, abs=0.0)   # IAU 2015 Resolution B3 nominal value
    flux = (1 * u.erg / u.s / u.cm ** 2 / u.AA).to_value(u.W / u.m ** 2 / u.um)
    assert flux == pytest.approx(10.0, rel=1e-14, abs=0.0)   # astropy: 1 erg s^-1 cm^-2 Å^-1 = 10 W m^-2 µm^-1


def _guillot(**kw):
    base = dict(t_int=800.0, t_irr=0.0, log_kappa_ir=-2.0, log_gamma=-0.5, log_g=4.0)
    base.update(kw)
    return base


def test_guillot_without_irradiation_is_eddington():
    p = pressure_levels(1e-5, 100.0, 60)
    prof = GuillotProfile()
    params = _guillot()
    t = prof.temperature(p, params)
    tau = 1e-2 * p * 1e6 / 1e4   # τ = κ_IR P / g in cgs
    # Guillot (2010, A&A 520, A27) eq. 29 with T_irr = 0 is the Eddington grey profile
    # T^4 = 3/4 T_int^4 (τ + 2/3) (the Eddington approximation; common practice)
    np.testing.assert_allclose(t ** 4, 0.75 * 800.0 ** 4 * (tau + 2.0 / 3.0), rtol=1e-12)
    # τ = 1 at P = g/κ = 1e6 dyn cm^-2 = 1 bar: T^4 = 3/4 T_int^4 5/3 (same source)
    assert prof.temperature(np.array([1.0]), params)[0] == pytest.approx((1.25 * 800.0 ** 4) ** 0.25, rel=1e-12, abs=0.0)


def test_guillot_irradiated_limits():
    prof = GuillotProfile(f=0.25)
    gamma = 10 ** -0.5
    params = _guillot(t_irr=1500.0)
    t_top = prof.temperature(np.array([1e-12]), params)[0]
    # τ → 0 limit of Guillot (2010) eq. 29: T0^4 = T_int^4/2 + 3/4 f T_irr^4 (2/3 + γ/√3)
    expected = 0.5 * 800.0 ** 4 + 0.75 * 0.25 * 1500.0 ** 4 * (2.0 / 3.0 + gamma / np.sqrt(3.0))
    assert t_top ** 4 == pytest.approx(expected, rel=1e-9, abs=0.0)
    # τ → ∞: the irradiation term tends to 3/4 f T_irr^4 (2/3 + 1/(γ√3)) (same equation)
    p_deep = np.array([1e5])
    deep = prof.temperature(p_deep, params)[0] ** 4 - 0.75 * 800.0 ** 4 * (2.0 / 3.0 + 1e-2 * 1e5 * 1e2)
    assert deep == pytest.approx(0.75 * 0.25 * 1500.0 ** 4 * (2.0 / 3.0 + 1.0 / (gamma * np.sqrt(3.0))), rel=1e-9, abs=0.0)
    with pytest.raises(ConfigError):
        GuillotProfile.from_options({"guillot_f": 1.5}, "test [model]")


def test_pchip_knots_monotone_and_bounded():
    knots = [1e-4, 1e-2, 1.0, 10.0, 100.0]
    prof = KnotsProfile(knots)
    p = pressure_levels(1e-6, 1e3, 400)
    # monotone data -> monotone curve (Fritsch & Carlson 1980, SIAM J. Numer. Anal. 17, 238, theorem on α²+β² ≤ 9)
    temps = [400.0, 410.0, 900.0, 2500.0, 2600.0]
    t = prof.temperature(p, {f"t_knot_{i}": v for i, v in enumerate(temps)})
    assert np.all(np.diff(t) >= -1e-9)
    np.testing.assert_allclose(prof.temperature(np.array(knots), {f"t_knot_{i}": v for i, v in enumerate(temps)}),
                               temps, rtol=1e-13)
    # constant beyond the end knots (our documented choice)
    assert t[0] == pytest.approx(400.0, rel=1e-6, abs=0.0) and t[-1] == pytest.approx(2600.0, rel=1e-6, abs=0.0)
    # non-monotone data: no overshoot between knots (same property, piecewise)
    temps = [1200.0, 600.0, 1500.0, 1400.0, 3000.0]
    params = {f"t_knot_{i}": v for i, v in enumerate(temps)}
    x = np.log10(knots)
    for k in range(4):
        seg = np.logspace(x[k], x[k + 1], 50)
        ts = prof.temperature(seg, params)
        assert ts.min() >= min(temps[k], temps[k + 1]) - 1e-9
        assert ts.max() <= max(temps[k], temps[k + 1]) + 1e-9


def test_pchip_reproduces_a_line_in_log_p():
    prof = KnotsProfile([1e-3, 1e-1, 10.0])
    p = np.logspace(-3, 1, 41)
    params = {"t_knot_0": 500.0, "t_knot_1": 1000.0, "t_knot_2": 1500.0}
    # linear data: all secants equal, the Hermite cubic is the line itself (common practice, no source)
    np.testing.assert_allclose(prof.temperature(p, params), 500.0 + 250.0 * (np.log10(p) + 3.0), rtol=1e-12)


def test_column_knots_sit_at_fixed_column_mass():
    columns = [1.0, 100.0, 1.0e4]
    prof = ColumnKnotsProfile(columns)
    assert prof.parameter_names == ["t_knot_0", "t_knot_1", "t_knot_2", "log_g"]
    temps = {"t_knot_0": 700.0, "t_knot_1": 1300.0, "t_knot_2": 2400.0}
    for log_g in (3.0, 4.3, 5.5):
        knots_p = prof.knot_pressures_for({"log_g": log_g})
        # hydrostatic column above each knot pressure is the knot's column (m = P / g, Mihalas 1978 §7-2)
        np.testing.assert_allclose(column_mass(knots_p, 10.0 ** log_g), columns, rtol=1e-12)
        # same curve as a pressure-knots profile placed at those pressures
        p = pressure_levels(1e-6, 1e3, 200)
        np.testing.assert_allclose(prof.temperature(p, {**temps, "log_g": log_g}),
                                   KnotsProfile(knots_p).temperature(p, temps), rtol=1e-12)
    # at log g = 4, 100 g cm⁻² is 1 bar (100 × 1e4 dyn cm⁻² = 1e6 dyn cm⁻²; unit arithmetic)
    assert prof.knot_pressures_for({"log_g": 4.0})[1] == pytest.approx(1.0, rel=1e-12, abs=0.0)
    # raising g by 1 dex moves the whole profile to 10× the pressure: T(P) at g' = T(P / 10) at g
    p = np.logspace(-3, 1, 30)
    np.testing.assert_allclose(prof.temperature(10.0 * p, {**temps, "log_g": 5.0}),
                               prof.temperature(p, {**temps, "log_g": 4.0}), rtol=1e-12)


def test_column_knots_options():
    prof = build_profile("column-knots", {"knot_columns_g_cm2": [1.0, 10.0]}, "fit.toml [model]")
    assert isinstance(prof, ColumnKnotsProfile)
    with pytest.raises(ConfigError, match="knot_columns_g_cm2.*column masses"):
        build_profile("column-knots", {}, "fit.toml [model]")
    with pytest.raises(ConfigError, match="ascending column masses"):
        build_profile("column-knots", {"knot_columns_g_cm2": [10.0, 1.0]}, "fit.toml [model]")


def test_gradient_profile_power_law():
    p = pressure_levels(1e-5, 100.0, 50)
    prof = GradientProfile([1e-6, 1e3])   # one band covering everything
    t = prof.temperature(p, {"t_deep": 2000.0, "dlnt_dlnp_0": 0.12})
    # constant d ln T / d ln P = n means T = T_deep (P / P_deep)^n (exact power law; common practice)
    np.testing.assert_allclose(t, 2000.0 * (p / 100.0) ** 0.12, rtol=1e-12)


def test_gradient_profile_two_bands():
    p = pressure_levels(1e-4, 100.0, 61)
    prof = GradientProfile([1e-4, 0.1, 100.0])
    t = prof.temperature(p, {"t_deep": 1800.0, "dlnt_dlnp_0": 0.02, "dlnt_dlnp_1": 0.2})
    t_break = 1800.0 * (0.1 / 100.0) ** 0.2   # power law integrated up to the band edge
    expected = np.where(p >= 0.1, 1800.0 * (p / 100.0) ** 0.2, t_break * (p / 0.1) ** 0.02)
    np.testing.assert_allclose(t, expected, rtol=1e-12)


def test_profile_registry_and_errors():
    assert set(PROFILES) >= {"isothermal", "guillot", "knots", "column-knots", "tau-knots", "gradient"}
    with pytest.raises(ConfigError, match="did you mean 'guillot'"):
        build_profile("guilot", {}, "fit.toml [model]")
    with pytest.raises(ConfigError, match="knot_pressures_bar"):
        build_profile("knots", {}, "fit.toml [model]")
    with pytest.raises(ConfigError, match="ascending"):
        build_profile("knots", {"knot_pressures_bar": [1.0, 0.1]}, "fit.toml [model]")


def test_free_chemistry_fill_and_mmw():
    chem = FreeChemistry(["H2O", "CO"])
    comp = chem.evaluate({"log_vmr_H2O": -3.0, "log_vmr_CO": -3.5}, 5)
    total = sum(v for v in comp.vmr.values())
    np.testing.assert_allclose(total, 1.0, rtol=1e-14)   # VMRs add up to one (definition)
    # He/H2 = 2 n(He)/n(H), Asplund et al. (2009, ARA&A 47, 481) Table 1: He 10.93 dex
    np.testing.assert_allclose(comp.vmr["He"] / comp.vmr["H2"], 2 * 10 ** (10.93 - 12), rtol=1e-12)
    mass = {"H2O": 18.01528, "CO": 28.0101, "H2": 2.01588, "He": 4.002602}   # IUPAC atomic weights
    expected = sum(comp.vmr[s][0] * m for s, m in mass.items())
    np.testing.assert_allclose(comp.mmw_amu, expected, rtol=1e-12)
    # solar H2/He mixture: μ ≈ 2.30-2.32 amu (value from memory, e.g. Jupiter-like gas)
    pure = FreeChemistry(["K"]).evaluate({"log_vmr_K": -20.0}, 1)
    assert 2.29 < pure.mmw_amu[0] < 2.33
    with pytest.raises(ModelEvaluationError) as err:
        chem.evaluate({"log_vmr_H2O": -0.1, "log_vmr_CO": -0.2}, 5)
    assert err.value.reason == "VMRs sum above 1"
    with pytest.raises(ConfigError, match="no molecular mass"):
        FreeChemistry(["Xx"])
