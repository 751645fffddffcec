"""Derived quantities (mass, C/O, [M/H], T_eff) and posterior summaries."""
import json
import math

import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest
from astropy.modeling.models import BlackBody
from scipy import integrate

from retrieve.analysis import derived as D
from retrieve.analysis.summary import summarize, summary_json


def test_mass_of_jupiter_from_its_surface_gravity():
    # reference: astropy.constants GM_jup and the IAU nominal R_jup give g_J; M = g R²/G must be 1 M_Jup
    g_cgs = (const.GM_jup / const.R_jup ** 2).cgs.value
    np.testing.assert_allclose(D.mass_mjup(np.log10(g_cgs), 1.0), 1.0, rtol=1e-12)
    # scaling M ∝ g R² (definition)
    np.testing.assert_allclose(D.mass_mjup(np.log10(g_cgs) + 1, 2.0), 40.0, rtol=1e-12)


def test_c_to_o_formula():
    x = {"H2O": 3e-4, "CO": 2e-4, "CH4": 1e-4, "CO2": 1e-5}
    # C/O = (CO + CH4 + CO2) / (H2O + CO + 2 CO2) by number of atoms (formula stated in derived.py)
    expected = (2e-4 + 1e-4 + 1e-5) / (3e-4 + 2e-4 + 2e-5)
    np.testing.assert_allclose(D.c_to_o(x), expected, rtol=1e-12)
    assert D.c_to_o({"H2O": 1e-4, "K": 1e-7}) is None        # no carbon carrier: undefined


def test_atom_counting():
    assert D.atoms("CO2") == {"C": 1, "O": 2}
    assert D.atoms("NH3") == {"N": 1, "H": 3}
    assert D.atoms("FeH") == {"Fe": 1, "H": 1}
    with pytest.raises(ValueError):
        D.atoms("h2o")


@pytest.mark.parametrize("factor", [1.0, 10.0, 0.1])
def test_metallicity_of_scaled_solar_mixture(factor):
    # C in CH4, O in H2O, N in NH3 at `factor` × the Asplund et al. (2009, Table 1) ratios to H: [M/H] = log10(factor)
    eps = {el: 10 ** (D.SOLAR_LOG_EPS[el] - 12) for el in ("C", "O", "N")}
    x = {"CH4": 0.0, "H2O": 0.0, "NH3": 0.0}
    for _ in range(50):                                   # fixed point: n_H depends on the VMRs
        n_h = D.element_abundances(x)["H"]
        x = {"CH4": factor * eps["C"] * n_h, "H2O": factor * eps["O"] * n_h, "NH3": factor * eps["N"] * n_h}
    np.testing.assert_allclose(D.metallicity(x), math.log10(factor), atol=1e-9)


@pytest.mark.parametrize("lam_t", [500.0, 2897.77, 6000.0, 20000.0])
def test_blackbody_fraction_against_quadrature(lam_t):
    t = 1000.0
    bb = BlackBody(temperature=t * u.K, scale=1.0 * u.W / (u.m ** 2 * u.um * u.sr))
    f = lambda lam: bb(lam * u.um).value
    # reference: scipy.integrate.quad of astropy's Planck function, normalised by σT⁴/π
    total = const.sigma_sb.value * t ** 4 / math.pi
    with np.errstate(over="ignore"):      # exp overflow far on the Wien side is harmless (B → 0)
        below = integrate.quad(f, 1e-3, lam_t / t, limit=200)[0]
    np.testing.assert_allclose(D.blackbody_fraction_below(lam_t / t, t), below / total, rtol=1e-6, atol=1e-12)


@pytest.mark.parametrize("t", [700.0, 1500.0, 2500.0])
def test_effective_temperature_of_a_blackbody(t):
    lam = np.linspace(0.9, 2.5, 800)
    bb = BlackBody(temperature=t * u.K, scale=1.0 * u.W / (u.m ** 2 * u.um * u.sr))
    flux = math.pi * bb(lam * u.um).value                 # emergent F_λ = π B_λ (reference: astropy BlackBody)
    np.testing.assert_allclose(D.effective_temperature(lam, flux), t, rtol=2e-4)
    np.testing.assert_allclose(D.brightness_temperature(lam[::97], flux[::97]), t, rtol=1e-10)


def test_summary_percentiles_map_and_json():
    rng = np.random.default_rng(1)
    x = rng.normal(3.0, 2.0, 5000)
    table = summarize({"a": x, "b": np.array([np.nan, np.nan])}, {"a": 2.9}, {"a": "demo"})
    row = table[0]
    # reference: numpy.percentile
    np.testing.assert_allclose([row["p2_5"], row["p16"], row["median"], row["p84"], row["p97_5"]],
                               np.percentile(x, [2.5, 16, 50, 84, 97.5]), rtol=1e-12)
    assert row["map"] == 2.9 and row["method"] == "demo" and row["n_samples"] == 5000
    doc = json.loads(summary_json(table, converged=True))
    assert doc["quantities"]["b"]["median"] is None and doc["converged"] is True
